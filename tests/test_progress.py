"""Progress bars: shown on standard error only when asked for, never on a non-terminal."""

from __future__ import annotations

import io
import re
import sys
from pathlib import Path

import pytest

from specgraph import gallery
from specgraph._progress import (
    COMPILE_NOTICE,
    compile_notice,
    count_progress,
    progress_bar,
    report_activity,
    stage_progress,
    wants_progress,
)
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


def test_activity_within_a_stage_is_shown(capsys: pytest.CaptureFixture[str]) -> None:
    """An eigen-solve's iterations appear after the stage's name on the open bar."""
    from specgraph import laplacian, smallest_eigenpairs

    with stage_progress(["reading", "solving"], enabled=True) as step:
        step("solving")
        report_activity("refinement pass", 2)
    assert "refinement pass 2" in capsys.readouterr().err
    operator = laplacian(gallery.grid(30, 30))
    with stage_progress(["solving"], enabled=True) as step:
        step("solving")
        smallest_eigenpairs(operator, 6, method="lanczos", rng=0)
    assert re.search(r"Lanczos cycle \d+", capsys.readouterr().err)
    # With no bar open, reporting draws nothing.
    report_activity("refinement pass", 1)
    assert capsys.readouterr().err == ""


def test_compile_notice_once_and_only_when_numba_compiles() -> None:
    """numba raises its ``numba:compile`` event when it compiles (not on a cache hit):
    a fresh function (no cache) compiles, so the notice is said, once."""
    from numba import njit

    @njit(cache=False)
    def add_one(x: int) -> int:
        return x + 1

    @njit(cache=False)
    def add_two(x: int) -> int:
        return x + 2

    said = io.StringIO()
    with compile_notice(enabled=True, stream=said):
        add_one(1)
        add_two(1)
    assert said.getvalue().count(COMPILE_NOTICE) == 1
    quiet = io.StringIO()
    with compile_notice(enabled=True, stream=quiet):
        add_one(2)  # compiled already: nothing to say
    assert quiet.getvalue() == ""

    @njit(cache=False)
    def add_three(x: int) -> int:
        return x + 3

    with compile_notice(enabled=False, stream=quiet):
        add_three(1)
    assert quiet.getvalue() == ""
