"""Determinism: the same input, options and seed give byte-identical output files,
across two interpreter processes (with different string-hash seeds), across
working folders, and across relative and absolute spellings of the paths.

Every command of the contract that writes files is run: ``zones``, ``spectrum``,
``score``, ``compare`` and ``robustness``. Outputs are compared by SHA-256
(:mod:`hashlib`). The input network comes from networkx
(``connected_watts_strogatz_graph``), not from specgraph.
"""

from __future__ import annotations

import hashlib
import json
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import networkx as nx
import numpy as np
import pytest

#: Runs every command through specgraph.cli.main in one interpreter; paths are
#: resolved against ``root`` (absolute spelling) or left relative to the
#: working folder, which the caller sets.
DRIVER = textwrap.dedent(
    """
    import json, os, sys
    from specgraph.cli import main

    for workdir, root in json.loads(sys.argv[1]):
        os.chdir(workdir)
        p = (lambda rel: os.path.join(root, rel)) if root else (lambda rel: rel)
        edges = p("data/edges.csv")
        common = ["--seed", "9", "--quiet"]
        runs = [
            ["zones", edges, "--zones", "4", "--out", p("res/zones4")],
            ["zones", edges, "--zones", "6", "--out", p("res/zones6")],
            ["spectrum", edges, "--count", "6", "--out", p("res/spectrum")],
            ["score", edges, p("res/zones4/zones.csv"), "--out", p("res/score")],
            ["compare", p("res/zones4/zones.csv"), p("res/zones6/zones.csv"),
             "--out", p("res/compare")],
            ["robustness", edges, "--zones-file", p("res/zones4/zones.csv"),
             "--out", p("res/robustness")],
        ]
        for argv in runs:
            argv = argv + (common if argv[0] != "compare" else ["--quiet"])
            code = main(argv)
            if code != 0:
                sys.exit(f"{argv} exited {code}")
    """
)

COMMAND_FOLDERS = ("zones4", "zones6", "spectrum", "score", "compare", "robustness")


def write_edges(folder: Path) -> None:
    """A connected small-world network (networkx) with seeded random weights."""
    graph = nx.connected_watts_strogatz_graph(600, 6, 0.05, seed=3)
    rng = np.random.default_rng(3)
    lines = ["source,target,weight"]
    lines += [f"J{u:04d},J{v:04d},{rng.uniform(0.5, 2.0)!r}" for u, v in graph.edges]
    data = folder / "data"
    data.mkdir(parents=True)
    (data / "edges.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")


def digests(res: Path) -> dict[str, str]:
    return {
        str(path.relative_to(res)): hashlib.sha256(path.read_bytes()).hexdigest()
        for path in sorted(res.rglob("*"))
        if path.is_file()
    }


def without_paths(record: dict) -> dict:
    """A run record without the two fields that spell paths as the user gave them."""
    kept = {k: v for k, v in record.items() if k != "command"}
    kept["inputs"] = [{k: v for k, v in i.items() if k != "path"} for i in record["inputs"]]
    return kept


@pytest.fixture(scope="module")
def three_runs(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Path, Path]:
    """Folders a and b: relative paths, two processes with different hash seeds.
    Folder c: absolute paths, run from an unrelated working folder after b in
    b's process (so a repeat inside one process is covered too)."""
    base = tmp_path_factory.mktemp("determinism")
    a, b, c, elsewhere = base / "a", base / "b", base / "c", base / "elsewhere"
    for folder in (a, b, c):
        write_edges(folder)
    elsewhere.mkdir()
    jobs = [
        ([[str(a), None]], "1"),
        ([[str(b), None], [str(elsewhere), str(c)]], "2"),
    ]
    procs = [
        subprocess.Popen(
            [sys.executable, "-c", DRIVER, json.dumps(plan)],
            env={**os.environ, "PYTHONHASHSEED": seed, "PYTHONWARNINGS": "ignore"},
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            text=True,
        )
        for plan, seed in jobs
    ]
    for proc in procs:
        _, err = proc.communicate(timeout=600)
        assert proc.returncode == 0, err[-3000:]
    return a / "res", b / "res", c / "res"


def test_every_command_wrote_its_files(three_runs: tuple[Path, Path, Path]) -> None:
    a, _, _ = three_runs
    assert sorted(p.name for p in a.iterdir()) == sorted(COMMAND_FOLDERS)
    for folder in COMMAND_FOLDERS:
        names = {p.name for p in (a / folder).iterdir()}
        assert "run.json" in names, folder
        assert any(n.endswith(".csv") for n in names), folder
        assert not any(n.startswith(".") for n in names), folder  # no temporary left


def test_byte_identical_across_processes_and_working_folders(
    three_runs: tuple[Path, Path, Path],
) -> None:
    a, b, _ = three_runs
    assert digests(a) == digests(b)


def test_tables_identical_with_absolute_paths(three_runs: tuple[Path, Path, Path]) -> None:
    a, _, c = three_runs
    first, third = digests(a), digests(c)
    assert first.keys() == third.keys()
    tables = [name for name in first if name.endswith(".csv")]
    assert tables
    assert all(first[n] == third[n] for n in tables)
    # The run records differ only where they spell the paths as the user gave
    # them (the command line and each input's path); checksums, parameters and
    # every figure are identical.
    for name in (n for n in first if n.endswith("run.json")):
        rec_a = json.loads((a / name).read_text(encoding="utf-8"))
        rec_c = json.loads((c / name).read_text(encoding="utf-8"))
        assert without_paths(rec_a) == without_paths(rec_c), name
