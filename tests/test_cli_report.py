"""``--report`` through the command line, and text and bytes through ``write_outputs``.

The report's content is checked in tests/test_report.py (tables against the inputs) and in
a browser in tests/test_report_browser.py; here: the page is written with the other files,
in the same all-or-nothing commit, and an earlier report does not outlive its run.
"""

from __future__ import annotations

import json
from pathlib import Path

from specgraph.cli import REPORT_FILE, main
from specgraph.export import write_outputs

# Two triangles joined by one link (invented ids): the hand-known 2-zone answer.
EDGES = "source,target\nA1,A2\nA2,A3\nA3,A1\nA3,B1\nB1,B2\nB2,B3\nB3,B1\n"


def test_zones_report_written_with_the_run(tmp_path: Path) -> None:
    edges = tmp_path / "edges.csv"
    edges.write_text(EDGES, encoding="utf-8")
    out = tmp_path / "out"
    run = ["zones", str(edges), "--zones", "2", "--out", str(out), "--quiet"]
    assert main([*run, "--report"]) == 0
    page = (out / REPORT_FILE).read_text(encoding="utf-8")
    record = json.loads((out / "run.json").read_text(encoding="utf-8"))
    assert page.startswith("<!DOCTYPE html>")
    assert "decision support" in page.lower()
    # The page shows the command that reproduces the run (shell-quoted) and the run's figures.
    assert "--report" in page
    assert f"{record['scores']['boundary_links']}" in page
    # A later run without --report removes the stale page in the same commit.
    assert main(run) == 0
    assert not (out / REPORT_FILE).exists()
    assert (out / "zones.csv").exists()


def test_write_outputs_takes_text_and_bytes(tmp_path: Path) -> None:
    text = "<p>zone 1 — ü</p>\n"
    blob = bytes(range(256))
    written = write_outputs(tmp_path, {"page.html": text, "figure.png": blob})
    assert [p.name for p in written] == ["page.html", "figure.png"]
    assert (tmp_path / "page.html").read_text(encoding="utf-8") == text
    assert (tmp_path / "figure.png").read_bytes() == blob
    assert not list(tmp_path.glob(".*partial"))
