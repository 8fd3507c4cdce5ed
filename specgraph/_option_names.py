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

__all__ = [
    "KEYWORD_OPTIONS",
    "LIBRARY_ADVICE",
    "command_line_advice",
    "for_command_line",
    "option_names",
]

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


#: Advice in library messages that names library keywords, and the keywords
#: whose options could carry it out on the command line, in the order said
#: (``eigen/_api.py`` and ``walks.py`` write these phrases). The command line
#: says only what its own options can do (it has no iteration cap, for one).
LIBRARY_ADVICE = {
    "raise maxiter or loosen tol": ("maxiter", "tol", "method"),
    "raise maxiter or tol": ("maxiter", "damping"),
}

#: What each keyword's option does about a solve that did not converge.
_ADVICE_VERBS = {
    "maxiter": "raise {option}",
    "tol": "loosen {option}",
    "method": "try another {option}",
    "damping": "lower {option} (more random jumps: the walk settles sooner)",
}

#: Said when the command has no option that could help.
_NO_OPTION_ADVICE = "report the network (no option of this command changes the solve)"


def command_line_advice(message: str, names: Mapping[str, str]) -> str:
    """``message`` with library advice (:data:`LIBRARY_ADVICE`) said in the command's options.

    Examples
    --------
    >>> names = {"tol": "--tol", "method": "--solver"}
    >>> command_line_advice("residual 1e-3 against tol=1e-08; raise maxiter or loosen tol", names)
    'residual 1e-3 against tol=1e-08; loosen --tol or try another --solver'
    >>> command_line_advice("not converged; raise maxiter or tol", {})
    'not converged; report the network (no option of this command changes the solve)'
    """
    for phrase, keywords in LIBRARY_ADVICE.items():
        if phrase in message:
            steps = [
                _ADVICE_VERBS[key].format(option=names[key]) for key in keywords if key in names
            ]
            return message.replace(phrase, " or ".join(steps) or _NO_OPTION_ADVICE)
    return message


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
    message = command_line_advice(str(error), names)
    parameter = error.parameter if isinstance(error, ParameterError) else None
    if parameter is None or parameter not in names:
        return message
    return f"{names[parameter]}: {message}"
