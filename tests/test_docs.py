"""The documentation cannot drift from the code.

- ``docs/cli.md`` is exactly what ``docs/gen_cli_reference.py`` generates from
  the parser now;
- every relative link in ``docs/*.md`` and ``README.md`` points at a file of
  the repository, and every page of ``docs/`` is in the site's navigation;
- every ``specgraph ...`` command line in the shell examples of the docs parses
  with :func:`specgraph.cli.build_parser`;
- the tutorial's first command runs, writes the files it names, prints the lines
  it quotes, and gives the same tables as the ``zones`` command it calls equal.

The oracle for the first three is the repository itself (the parser, the file
tree); for the last, the command's own output.
"""

from __future__ import annotations

import argparse
import filecmp
import importlib.util
import re
import shlex
from pathlib import Path
from types import ModuleType

import pytest

from specgraph.cli import build_parser, main

ROOT = Path(__file__).resolve().parent.parent
DOCS = ROOT / "docs"
TUTORIAL = DOCS / "tutorial.md"
PAGES = sorted(DOCS.glob("*.md"))
MARKDOWN = [*PAGES, ROOT / "README.md"]
#: Fenced code blocks: the language tag and the body.
FENCE = re.compile(r"^```([\w-]*)[^\n]*\n(.*?)^```[ \t]*$", re.MULTILINE | re.DOTALL)
#: Inline links ``[text](target "title")`` and reference definitions ``[id]: target``.
INLINE_LINK = re.compile(r"!?\[[^\]]*\]\(\s*<?([^)\s>]+)>?(?:\s+\"[^\"]*\")?\s*\)")
REFERENCE_LINK = re.compile(r"^\s{0,3}\[[^\]]+\]:\s*<?(\S+?)>?(?:\s+.*)?$", re.MULTILINE)
#: Code spans, whose brackets are not links.
CODE_SPAN = re.compile(r"(`+)(?:(?!\1).)+?\1", re.DOTALL)
#: Languages of the shell examples whose ``specgraph`` lines are checked.
SHELL = {"bash", "sh", "shell", "console"}
#: Words that start a specgraph command line.
PREFIXES = (("specgraph",), ("python", "-m", "specgraph"))


def _load_generator() -> ModuleType:
    path = DOCS / "gen_cli_reference.py"
    spec = importlib.util.spec_from_file_location("gen_cli_reference", path)
    assert spec is not None
    assert spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def _prose(text: str) -> str:
    """The markdown without fenced blocks and code spans (where brackets are not links)."""
    return CODE_SPAN.sub("", FENCE.sub("", text))


def _links(path: Path) -> list[str]:
    text = _prose(path.read_text(encoding="utf-8"))
    return INLINE_LINK.findall(text) + REFERENCE_LINK.findall(text)


def _command_lines(path: Path) -> list[list[str]]:
    """The argument lists of the ``specgraph`` lines of the page's shell examples."""
    commands = []
    for language, body in FENCE.findall(path.read_text(encoding="utf-8")):
        if language not in SHELL:
            continue
        for line in body.replace("\\\n", " ").splitlines():
            for part in line.strip().removeprefix("$ ").split("&&"):
                for prefix in PREFIXES:
                    # Only lines that start with the command are split into words
                    # (other lines may hold quoted text spanning several lines).
                    if part.split()[: len(prefix)] == list(prefix):
                        words = shlex.split(part, comments=True)
                        commands.append(words[len(prefix) :])
    return commands


def test_cli_reference_is_generated_from_the_parser() -> None:
    generator = _load_generator()
    expected = generator.render()
    current = (DOCS / "cli.md").read_text(encoding="utf-8")
    assert current == expected, "docs/cli.md is stale: run python docs/gen_cli_reference.py"
    # Every command and every option string of the parser is in the page.
    parser = build_parser()
    (commands,) = (a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    for name, sub in commands.choices.items():
        assert f"\n## {name}\n" in current
        for action in sub._actions:
            for option in action.option_strings:
                assert re.search(rf"[`,] ?{re.escape(option)}[ `,]", current), (name, option)


def test_cli_reference_check_mode_reports_a_stale_file(tmp_path: Path) -> None:
    generator = _load_generator()
    stale = tmp_path / "cli.md"
    stale.write_text("# out of date\n", encoding="utf-8")
    assert generator.main(["--check", "--output", str(stale)]) == 1
    assert generator.main(["--output", str(stale)]) == 0
    assert generator.main(["--check", "--output", str(stale)]) == 0


@pytest.mark.parametrize("page", MARKDOWN, ids=lambda p: p.name)
def test_relative_links_point_at_files(page: Path) -> None:
    missing = []
    for target in _links(page):
        if re.match(r"^[a-z][a-z0-9+.-]*:", target) or target.startswith("#"):
            continue  # a URL or an anchor on the same page
        path = (page.parent / target.split("#", 1)[0].split("?", 1)[0]).resolve()
        if not path.exists() or ROOT not in (path, *path.parents):
            missing.append(target)
    assert not missing, f"{page.name}: links to missing files {missing}"


def test_every_docs_page_is_in_the_navigation() -> None:
    config = (ROOT / "mkdocs.yml").read_text(encoding="utf-8")
    listed = set(re.findall(r"^\s*-\s*(?:[^:\n]+:\s*)?([\w./-]+\.md)\s*$", config, re.MULTILINE))
    pages = {page.name for page in PAGES}
    assert pages == listed, f"not in nav: {pages - listed}; nav without a page: {listed - pages}"


@pytest.mark.parametrize("page", MARKDOWN, ids=lambda p: p.name)
def test_command_lines_in_the_docs_parse(page: Path) -> None:
    parser = build_parser()
    for words in _command_lines(page):
        try:
            parser.parse_args(words)
        except SystemExit as exc:  # argparse exits 2 on an unknown option or bad value
            pytest.fail(f"{page.name}: `specgraph {shlex.join(words)}` does not parse ({exc})")


def test_the_tutorial_has_command_lines() -> None:
    commands = _command_lines(TUTORIAL)
    names = {words[0] for words in commands}
    assert {"demo", "zones", "spectrum", "score", "compare", "robustness", "stability"} <= names


def test_the_tutorial_first_run_does_what_it_says(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    text = TUTORIAL.read_text(encoding="utf-8")
    commands = _command_lines(TUTORIAL)
    demo = next(words for words in commands if words[0] == "demo")
    zones = next(words for words in commands if words[0] == "zones")
    # The excerpt of the demo's messages the tutorial quotes.
    (excerpt,) = (
        body
        for language, body in FENCE.findall(text)
        if language == "text" and body.startswith("specgraph: ")
    )
    monkeypatch.chdir(tmp_path)
    assert main(demo) == 0
    err = capsys.readouterr().err
    for line in excerpt.splitlines():
        assert line in err.splitlines(), (
            f"the tutorial quotes a line the demo no longer prints: {line}"
        )
    out = Path(demo[demo.index("--out") + 1])
    tables = ["zones.csv", "boundary.csv", "zone_summary.csv", "spectrum.csv"]
    for name in [*tables, "run.json", "report.html"]:
        assert (out / name).is_file(), name
        assert f"`{name}`" in text, f"the tutorial does not name {name}"
    # "the four CSV tables ... are byte for byte the same" as those of the zones command.
    data = str(ROOT / "datasets" / "quillmere")
    assert main([word.replace("datasets/quillmere", data) for word in zones]) == 0
    again = Path(zones[zones.index("--out") + 1])
    match, mismatch, errors = filecmp.cmpfiles(out, again, tables, shallow=False)
    assert match == tables, (mismatch, errors)
