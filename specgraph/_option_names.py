"""Library refusals on the command line: the option's name in front of the same sentence.

The library names its own arguments (``min_size must be <= max_size; got 5 >
3.``); it never speaks in command-line option names. When such a
:class:`~specgraph.exceptions.ParameterError` reaches the command line, the
option that set the argument it names (its ``parameter`` attribute) is written
in front of the same words (``--min-size: min_size must be <= max_size; got 5
> 3.``), as argparse writes its own refusals (``argument --zones: ...``).

Which option sets which argument is read from the parser itself: an option's
argparse ``dest`` is the library keyword it becomes, except for the few listed
in :data:`KEYWORD_OPTIONS` (see :mod:`specgraph._commands`, where options
become keyword arguments).
"""

from __future__ import annotations

import argparse
from collections.abc import Mapping

from .exceptions import ParameterError

__all__ = ["KEYWORD_OPTIONS", "for_command_line", "option_names"]

#: Library keywords set by an option whose ``dest`` is another name
#: (``_commands.py``: ``rng=args.seed``, ``x=args.x_col``, ...).
KEYWORD_OPTIONS = {
    "rng": "--seed",
    "x": "--x-col",
    "y": "--y-col",
    "size": "--size-col",
    "node": "--node-col",
    "snap_tolerance": "--snap",
    "eigen_method": "--solver",
    "method": "--solver",
}


def _subcommand(parser: argparse.ArgumentParser, command: str) -> argparse.ArgumentParser:
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction) and command in action.choices:
            return action.choices[command]
    return parser


def option_names(parser: argparse.ArgumentParser, command: str | None = None) -> dict[str, str]:
    """Library keyword -> option string, for the options of ``command`` (or of ``parser``).

    Each option's ``dest`` names itself (``min_size`` -> ``--min-size``); the
    keywords of :data:`KEYWORD_OPTIONS` name their option when the command has it.

    Examples
    --------
    >>> from specgraph.cli import build_parser
    >>> names = option_names(build_parser(), "zones")
    >>> names["min_size"], names["rng"], names["zones"]
    ('--min-size', '--seed', '--zones')
    >>> "rng" in option_names(build_parser(), "compare")
    False
    """
    own = _subcommand(parser, command) if command else parser
    names: dict[str, str] = {}
    for action in own._actions:
        longs = [option for option in action.option_strings if option.startswith("--")]
        if longs and action.dest != "help":
            names.setdefault(action.dest, longs[0])
    offered = set(names.values())
    names.update({key: option for key, option in KEYWORD_OPTIONS.items() if option in offered})
    return names


def for_command_line(error: Exception, names: Mapping[str, str]) -> str:
    """The message of ``error``, with the option that set the refused argument in front.

    A :class:`ParameterError` whose ``parameter`` an option sets reads
    ``<option>: <the library's sentence>``, the form argparse gives its own
    refusals (``argument --zones: ...``): the option a user typed, then the
    same words a Python caller reads. Any other error, or an argument no
    option sets, reads as it is.

    Examples
    --------
    >>> from specgraph._validation import parameter_error
    >>> names = {"min_size": "--min-size", "max_size": "--max-size"}
    >>> for_command_line(parameter_error("min_size", "<= max_size", 5, shown="5 > 3"), names)
    '--min-size: min_size must be <= max_size; got 5 > 3.'
    >>> for_command_line(parameter_error("k", "an integer", "x"), names)
    "k must be an integer; got 'x'."
    """
    message = str(error)
    parameter = error.parameter if isinstance(error, ParameterError) else None
    if parameter is None or parameter not in names:
        return message
    return f"{names[parameter]}: {message}"
