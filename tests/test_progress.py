"""Progress bars: shown on standard error only when asked for, never on a non-terminal."""

from __future__ import annotations

import io
import re
import sys
from pathlib import Path

import pytest

from specgraph import gallery
from specgraph._progress import count_progress, progress_bar, stage_progress, wants_progress
from specgraph.cli import main
from specgraph.studies import stability


class _Terminal(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_wants_progress_only_on_a_terminal_and_not_quiet() -> None:
    assert wants_progress(quiet=False, stream=_Terminal())
    assert not wants_progress(quiet=True, stream=_Terminal())
    assert not wants_progress(quiet=False, stream=io.StringIO())
    assert not wants_progress(quiet=False, stream=object())


def test_disabled_bars_draw_nothing(capsys: pytest.CaptureFixture[str]) -> None:
    assert list(progress_bar(range(4), what="runs", enabled=False)) == [0, 1, 2, 3]
    with count_progress(3, what="runs", enabled=False) as advance:
        advance()
    with stage_progress(["reading", "solving"], enabled=False) as step:
        step("reading")
    assert capsys.readouterr().err == ""


def test_enabled_bars_draw_on_stderr(capsys: pytest.CaptureFixture[str]) -> None:
    assert list(progress_bar(range(4), what="runs", enabled=True)) == [0, 1, 2, 3]
    with stage_progress(["reading", "solving"], enabled=True) as step:
        step("reading")
        step("solving")
    captured = capsys.readouterr()
    assert captured.out == ""
    assert "runs" in captured.err
    assert "solving" in captured.err


def test_stability_progress_counts_every_run(capsys: pytest.CaptureFixture[str]) -> None:
    network = gallery.barbell(5)
    quiet = stability(network, 2, repeats=2, rng=0)
    assert capsys.readouterr().err == ""  # the library is silent unless asked
    shown = stability(network, 2, repeats=2, rng=0, progress=True)
    err = capsys.readouterr().err
    # 2 * repeats + 1 = 5 zonings (the reference and four repeats): the bar's total is 5
    # (tqdm draws "n/5"; redraws are rate-limited, so which n shows is not fixed).
    assert "stability runs" in err
    assert re.search(r"\d/5 ", err), err
    assert shown.nodes.equals(quiet.nodes)  # showing progress changes nothing


def test_cli_bars_only_on_a_terminal(
    capsys: pytest.CaptureFixture[str], tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    edges = tmp_path / "edges.csv"
    edges.write_text("source,target\na,b\nb,c\nc,a\nc,d\nd,e\ne,f\nf,d\n", encoding="utf-8")
    # Captured stderr is not a terminal: no bar, only messages.
    assert main(["zones", str(edges), "--zones", "2", "--out", str(tmp_path / "o1")]) == 0
    assert "stage" not in capsys.readouterr().err
    # On a terminal (stood in for by patching the test of it) the stages are shown ...
    monkeypatch.setattr(sys.stderr, "isatty", lambda: True, raising=False)
    assert main(["zones", str(edges), "--zones", "2", "--out", str(tmp_path / "o2")]) == 0
    assert "stage" in capsys.readouterr().err
    # ... except with --quiet.
    assert (
        main(["zones", str(edges), "--zones", "2", "--out", str(tmp_path / "o3"), "--quiet"]) == 0
    )
    assert capsys.readouterr().err == ""


def test_find_zones_reports_its_stages_in_order() -> None:
    from specgraph import find_zones

    seen: list[str] = []
    find_zones(gallery.barbell(5), 2, rng=0, progress=seen.append)
    assert seen == ["solving", "constraints", "refining"]
    seen.clear()
    find_zones(gallery.barbell(5), 2, rng=0, refine=False, progress=seen.append)
    assert seen == ["solving", "constraints"]
