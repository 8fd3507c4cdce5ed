"""Generate ``docs/cli.md``, the command-line reference, from the argument parser.

Every command, its description, every option with its help, default and
choices, the examples, the exit codes and the caution are read from
:func:`specgraph.cli.build_parser`, so the reference cannot drift from
``specgraph COMMAND --help``. The output does not depend on the terminal: text
is wrapped at :data:`WIDTH` columns and commands keep the parser's order.

Usage (from the repository root)::

    python docs/gen_cli_reference.py            # write docs/cli.md
    python docs/gen_cli_reference.py --check    # exit 1 if docs/cli.md is stale
"""

from __future__ import annotations

import argparse
import re
import sys
import textwrap
from pathlib import Path

#: Repository root: the checkout's own package is documented, not an installed copy.
ROOT = Path(__file__).resolve().parent.parent
#: Default output file.
OUTPUT = ROOT / "docs" / "cli.md"
#: Column at which prose and usage lines are wrapped (fixed, whatever the terminal).
WIDTH = 88
#: Header of an epilog section: a line at column 0 ending in a colon ("examples:").
_SECTION = re.compile(r"^(\S[^:]*):\s*$")
#: One exit code line of the epilog: two spaces, the code, two spaces, the meaning.
_EXIT_LINE = re.compile(r"^\s{2}(\d+)\s{2}(\S.*)$")

if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))


def _wrap(text: str, *, indent: str = "", then: str | None = None) -> str:
    """Wrap prose at WIDTH without breaking option names at their hyphens."""
    return textwrap.fill(
        " ".join(text.split()),
        width=WIDTH,
        initial_indent=indent,
        subsequent_indent=" " * len(indent) if then is None else then,
        break_on_hyphens=False,
        break_long_words=False,
    )


def _sections(epilog: str | None) -> dict[str, str]:
    """Split an epilog into its sections (``examples``, ``exit codes``, ``caution``)."""
    sections: dict[str, list[str]] = {}
    current: list[str] | None = None
    for line in (epilog or "").splitlines():
        match = _SECTION.match(line)
        if match:
            current = sections.setdefault(match.group(1).strip(), [])
        elif current is not None:
            current.append(line)
    return {name: textwrap.dedent("\n".join(lines)).strip("\n") for name, lines in sections.items()}


def _usage(parser: argparse.ArgumentParser) -> str:
    formatter = argparse.HelpFormatter(parser.prog, width=WIDTH)
    formatter.add_usage(parser.usage, parser._actions, parser._mutually_exclusive_groups)
    return formatter.format_help().strip()


def _help_text(action: argparse.Action, prog: str) -> str:
    """The help of ``action`` with ``%(...)s`` expanded as argparse expands it."""
    text = action.help or ""
    params = {k: v for k, v in vars(action).items() if v is not argparse.SUPPRESS}
    params["prog"] = prog
    if action.choices is not None:
        params["choices"] = ", ".join(str(choice) for choice in action.choices)
    try:
        return text % params
    except (ValueError, TypeError, KeyError):
        # A bare '%' in a help string also breaks `--help`; keep the text as
        # written and say so, so that the reference is still produced.
        name = "/".join(action.option_strings) or action.dest
        print(
            f"gen_cli_reference: the help of {prog} {name} is not a valid %-format "
            "(a bare '%' should be written '%%'); used as written",
            file=sys.stderr,
        )
        return text


def _invocation(action: argparse.Action) -> str:
    if not action.option_strings:
        return str(action.metavar or action.dest)
    names = ", ".join(action.option_strings)
    if action.nargs == 0:
        return names
    metavar = str(action.metavar) if action.metavar is not None else action.dest.upper()
    return f"{names} {metavar}"


def _default(action: argparse.Action) -> str | None:
    default = action.default
    if default is None or default is argparse.SUPPRESS or action.nargs == 0:
        return None
    return repr(default) if isinstance(default, float) else str(default)


def _sentence(text: str) -> str:
    text = text.strip()
    return text if not text or text.endswith((".", "!", "?")) else text + "."


def _option(action: argparse.Action, prog: str) -> str:
    help_text = _help_text(action, prog)
    parts = [f"`{_invocation(action)}`: {_sentence(help_text)}"]
    if action.choices is not None:
        parts.append("Choices: " + ", ".join(f"`{choice}`" for choice in action.choices) + ".")
    default = _default(action)
    # A default the help already states ("(default 20)") is not repeated.
    if default is not None and f"default {default}" not in help_text:
        parts.append(f"Default: `{default}`.")
    if action.required and action.option_strings:
        parts.append("Required.")
    return _wrap(" ".join(parts), indent="- ")


def _options(parser: argparse.ArgumentParser, *, level: str) -> list[str]:
    lines: list[str] = []
    for group in parser._action_groups:
        actions = [
            action
            for action in group._group_actions
            if not isinstance(action, argparse._SubParsersAction)
            and action.help is not argparse.SUPPRESS
        ]
        if not actions:
            continue
        title = (group.title or "options").strip()
        lines += [f"{level} {title[0].upper()}{title[1:]}", ""]
        lines += [_option(action, parser.prog) for action in actions]
        lines.append("")
    return lines


def _code(text: str, language: str) -> list[str]:
    return [f"```{language}", text, "```", ""]


def _exit_codes(text: str) -> list[str]:
    """The exit codes section as a table (continuation lines joined)."""
    rows: list[list[str]] = []
    for line in text.splitlines():
        match = _EXIT_LINE.match("  " + line)
        if match:
            rows.append([match.group(1), match.group(2)])
        elif rows and line.strip():
            rows[-1][1] += " " + line.strip()
    table = ["| code | meaning |", "|---|---|"]
    table += [f"| {code} | {' '.join(meaning.split())} |" for code, meaning in rows]
    return [*table, ""]


def _subcommands(parser: argparse.ArgumentParser) -> list[tuple[str, str, argparse.ArgumentParser]]:
    """(name, one-line help, parser) of every subcommand, in the parser's order."""
    found: list[tuple[str, str, argparse.ArgumentParser]] = []
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            helps = {choice.dest: choice.help or "" for choice in action._choices_actions}
            for name, sub in action.choices.items():
                found.append((name, helps.get(name, ""), sub))
    return found


def render() -> str:
    """The text of ``docs/cli.md`` for the parser of this checkout."""
    from specgraph.cli import build_parser

    parser = build_parser()
    top = _sections(parser.epilog)
    commands = _subcommands(parser)
    shared = {name: text for name, text in top.items() if name != "examples"}
    caution_texts = {_sections(sub.epilog).get("caution", "") for _, _, sub in commands}
    caution = " ".join(next(iter(caution_texts)).split()) if len(caution_texts) == 1 else ""

    lines = [
        "<!-- Generated by docs/gen_cli_reference.py from specgraph.cli.build_parser(); "
        "do not edit by hand. Regenerate with: python docs/gen_cli_reference.py -->",
        "",
        "# Command-line reference",
        "",
    ]
    if caution:
        lines += [_wrap(f"**Caution.** {caution}", indent="> ", then="> "), ""]
    lines += [
        _wrap(
            f"{parser.description} `python -m specgraph` works the same as `specgraph`. "
            "This page is generated from the argument parser: `specgraph COMMAND --help` "
            "prints the same text."
        ),
        "",
        *_code(_usage(parser), "text"),
        "## Commands",
        "",
    ]
    lines += [_wrap(f"[`{name}`](#{name}): {text}", indent="- ") for name, text, _ in commands]
    lines.append("")
    if "exit codes" in shared:
        lines += ["## Exit codes", "", *_exit_codes(shared["exit codes"])]
    lines += _options(parser, level="##")

    for name, _, sub in commands:
        sections = _sections(sub.epilog)
        lines += [f"## {name}", ""]
        if sub.description:
            lines += [_wrap(sub.description), ""]
        lines += _code(_usage(sub), "text")
        lines += _options(sub, level="###")
        if "examples" in sections:
            lines += ["### Examples", "", *_code(sections["examples"], "bash")]
        if sections.get("exit codes", shared.get("exit codes")) != shared.get("exit codes"):
            lines += ["### Exit codes", "", *_exit_codes(sections["exit codes"])]
        own_caution = " ".join(sections.get("caution", "").split())
        if own_caution and own_caution != caution:
            lines += ["### Caution", "", _wrap(own_caution), ""]
    return "\n".join(lines).rstrip("\n") + "\n"


def main(argv: list[str] | None = None) -> int:
    """Write the reference, or with ``--check`` say whether it is up to date."""
    cli = argparse.ArgumentParser(description=__doc__.splitlines()[0] if __doc__ else None)
    cli.add_argument("--check", action="store_true", help="exit 1 if the file is stale")
    cli.add_argument("--output", type=Path, default=OUTPUT, help=f"default {OUTPUT}")
    args = cli.parse_args(argv)
    text = render()
    if args.check:
        current = args.output.read_text(encoding="utf-8") if args.output.is_file() else None
        if current != text:
            print(
                f"{args.output} is stale: regenerate it with python docs/gen_cli_reference.py",
                file=sys.stderr,
            )
            return 1
        print(f"{args.output} is up to date", file=sys.stderr)
        return 0
    args.output.write_text(text, encoding="utf-8", newline="\n")
    print(f"wrote {args.output}", file=sys.stderr)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
