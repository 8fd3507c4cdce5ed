"""The ``specgraph`` command line: output contract, exit codes and messages.

Everything runs through :func:`specgraph.cli.main` in-process, except one test
that starts ``python -m specgraph`` in a child process.
"""

from __future__ import annotations

import argparse
import hashlib
import json
import logging
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import specgraph
from specgraph.cli import build_parser, main
from specgraph.demo import DEMO_ZONES, demo_files

#: First columns of each output file, fixed by the user-facing contract.
CONTRACT_COLUMNS = {
    "zones.csv": ["node", "zone"],
    "boundary.csv": ["source", "target", "weight", "zone_a", "zone_b"],
    "zone_summary.csv": [
        "zone",
        "nodes",
        "size",
        "internal_weight",
        "boundary_weight",
        "conductance",
        "connected",
    ],
    "spectrum.csv": ["index", "eigenvalue", "residual"],
}
ZONE_FILES = (*CONTRACT_COLUMNS, "run.json")
#: Seed of the demo runs (any fixed value: the point is that it is the same twice).
DEMO_SEED = 7
#: Relative output folder of the demo runs, the same from every working folder.
DEMO_OUT = "demo-out"

# Two cliques of four (J1..J4 and J5..J8) joined by the single link J4-J5.
TWO_CLIQUES = [
    ("J1", "J2"),
    ("J1", "J3"),
    ("J1", "J4"),
    ("J2", "J3"),
    ("J2", "J4"),
    ("J3", "J4"),
    ("J4", "J5"),
    ("J5", "J6"),
    ("J5", "J7"),
    ("J5", "J8"),
    ("J6", "J7"),
    ("J6", "J8"),
    ("J7", "J8"),
]
BRIDGE = ("J4", "J5")


# ------------------------------------------------------------------ helpers
def write(folder: Path, name: str, text: str) -> Path:
    path = folder / name
    path.write_bytes(text.encode("utf-8"))
    return path


def two_cliques_csv(folder: Path, name: str = "edges.csv") -> Path:
    rows = "".join(f"{a},{b},1\n" for a, b in TWO_CLIQUES)
    return write(folder, name, "source,target,weight\n" + rows)


def read_csv(path: Path) -> pd.DataFrame:
    """A CSV with ids kept as text (no NA guessing), numbers parsed where they are."""
    return pd.read_csv(
        path, dtype={"node": str, "source": str, "target": str}, keep_default_na=False
    )


def header_of(path: Path) -> list[str]:
    return path.read_text(encoding="utf-8").splitlines()[0].split(",")


def link_set(frame: pd.DataFrame) -> set[frozenset[str]]:
    return {frozenset(pair) for pair in zip(frame["source"], frame["target"], strict=True)}


def load_run(folder: Path) -> dict:
    return json.loads((folder / "run.json").read_text(encoding="utf-8"))


def flat(text: str) -> str:
    """Text with every run of whitespace made one space (help output is wrapped)."""
    return " ".join(text.split())


def assert_contract(folder: Path) -> None:
    for name in ZONE_FILES:
        assert (folder / name).is_file(), name
    for name, first in CONTRACT_COLUMNS.items():
        assert header_of(folder / name)[: len(first)] == first, name


# ------------------------------------------------------------------- demo
@pytest.fixture(scope="module")
def demo_run(tmp_path_factory: pytest.TempPathFactory) -> tuple[int, Path]:
    """One demo run, from its own working folder, into the relative DEMO_OUT."""
    workdir = tmp_path_factory.mktemp("demo-a")
    with pytest.MonkeyPatch.context() as mp:
        mp.chdir(workdir)
        code = main(["demo", "--seed", str(DEMO_SEED), "--out", DEMO_OUT, "--quiet"])
    return code, workdir / DEMO_OUT


@pytest.fixture(scope="module")
def demo_tables() -> tuple[pd.DataFrame, pd.DataFrame]:
    files = demo_files()
    return read_csv(files.pipes), read_csv(files.junctions)


def test_demo_writes_the_contract_files(demo_run: tuple[int, Path]) -> None:
    code, out = demo_run
    assert code == 0
    assert_contract(out)
    assert sorted(p.name for p in out.iterdir()) == sorted(ZONE_FILES)  # no temporary left


def test_demo_zones_cover_every_junction_once(
    demo_run: tuple[int, Path], demo_tables: tuple[pd.DataFrame, pd.DataFrame]
) -> None:
    _, out = demo_run
    _, junctions = demo_tables
    zones = read_csv(out / "zones.csv")
    assert not zones["node"].duplicated().any()
    assert sorted(zones["node"]) == sorted(junctions["node"])
    summary = read_csv(out / "zone_summary.csv")
    k = load_run(out)["decisions"]["zone_count"]["choice"]
    assert k == DEMO_ZONES
    assert summary["zone"].tolist() == list(range(k))
    assert sorted(zones["zone"].unique().tolist()) == list(range(k))


def test_demo_boundary_is_every_pipe_between_zones(
    demo_run: tuple[int, Path], demo_tables: tuple[pd.DataFrame, pd.DataFrame]
) -> None:
    _, out = demo_run
    pipes, _ = demo_tables
    zone_of = read_csv(out / "zones.csv").set_index("node")["zone"]
    expected = pipes.assign(
        zone_a=pipes["source"].map(zone_of), zone_b=pipes["target"].map(zone_of)
    )
    assert expected[["zone_a", "zone_b"]].notna().all().all()
    expected = expected[expected["zone_a"] != expected["zone_b"]]
    boundary = read_csv(out / "boundary.csv")
    assert len(boundary) > 0
    key = ["pipe_id", "source", "target", "zone_a", "zone_b"]
    got = boundary[key].sort_values("pipe_id").reset_index(drop=True)
    want = expected[key].sort_values("pipe_id").reset_index(drop=True).astype(got.dtypes)
    pd.testing.assert_frame_equal(got, want)
    # The weight column is the affinity the recorded conversion gives the length.
    conversion = load_run(out)["network"]["input_policy"]["weight_conversion"]
    lengths = boundary["length_m"].to_numpy(dtype=float)
    np.testing.assert_allclose(
        boundary["weight"], conversion["reference_distance"] / lengths, rtol=1e-12
    )


def test_demo_summary_agrees_with_zones_and_junctions(
    demo_run: tuple[int, Path], demo_tables: tuple[pd.DataFrame, pd.DataFrame]
) -> None:
    _, out = demo_run
    _, junctions = demo_tables
    zones = read_csv(out / "zones.csv")
    joined = zones.merge(junctions[["node", "connections"]], on="node", how="left")
    assert joined["connections"].notna().all()
    grouped = joined.groupby("zone").agg(nodes=("node", "size"), size=("connections", "sum"))
    summary = read_csv(out / "zone_summary.csv").set_index("zone")
    assert summary["nodes"].tolist() == grouped["nodes"].tolist()
    np.testing.assert_allclose(summary["size"], grouped["size"].to_numpy(dtype=float))
    # Zones are numbered by descending size (summed connections served).
    assert summary["size"].is_monotonic_decreasing
    # A zone's boundary weight is the summed weight of boundary pipes touching it.
    boundary = read_csv(out / "boundary.csv")
    touching = [
        boundary.loc[(boundary["zone_a"] == z) | (boundary["zone_b"] == z), "weight"].sum()
        for z in summary.index
    ]
    np.testing.assert_allclose(summary["boundary_weight"], touching, rtol=1e-9)


def test_demo_run_record(demo_run: tuple[int, Path]) -> None:
    _, out = demo_run
    run = load_run(out)
    assert run["parameters"]["zones"] == "auto"
    # The generator draws DEMO_ZONES districts; the eigengap must find them itself.
    assert run["decisions"]["zone_count"]["choice"] == DEMO_ZONES
    assert run["decisions"]["zone_count"]["confidence"] in ("high", "medium")
    tol = run["parameters"]["tol"]
    assert tol > 0
    files = demo_files()
    checksums = {item["role"]: item["checksum"] for item in run["inputs"]}
    digest = hashlib.sha256(files.pipes.read_bytes()).hexdigest()
    assert checksums["edges"] == f"sha256:{digest}"
    digest = hashlib.sha256(files.junctions.read_bytes()).hexdigest()
    assert checksums["nodes"] == f"sha256:{digest}"
    assert run["versions"]["specgraph"] == specgraph.__version__
    assert {"python", "numpy", "scipy", "pandas"} <= set(run["versions"])
    assert run["eigen_solves"]
    for solve in run["eigen_solves"]:
        assert solve["converged"] is True
        assert solve["tol"] == tol
        assert 0 <= solve["max_residual"] <= tol
    spectrum = read_csv(out / "spectrum.csv")
    assert (spectrum["residual"] <= tol).all()
    assert run["scores"]["zones"] == DEMO_ZONES
    assert run["scores"]["boundary_links"] == len(read_csv(out / "boundary.csv"))
    caution = flat(run["caution"])
    assert "hydraulic, power-flow or traffic model" in caution
    assert "licensed engineers" in caution


def test_demo_same_seed_gives_identical_files(
    demo_run: tuple[int, Path], tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    _, first = demo_run
    monkeypatch.chdir(tmp_path)
    assert main(["demo", "--seed", str(DEMO_SEED), "--out", DEMO_OUT, "--quiet"]) == 0
    second = tmp_path / DEMO_OUT
    assert first.resolve() != second.resolve()
    for name in ZONE_FILES:
        assert (first / name).read_bytes() == (second / name).read_bytes(), name


# ------------------------------------------------------------------ zones
def test_zones_cuts_the_one_bridge(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    edges = two_cliques_csv(tmp_path)
    out = tmp_path / "out"
    assert main(["zones", str(edges), "--zones", "2", "--out", str(out)]) == 0
    assert_contract(out)
    boundary = read_csv(out / "boundary.csv")
    assert link_set(boundary) == {frozenset(BRIDGE)}
    zones = read_csv(out / "zones.csv").set_index("node")["zone"]
    assert zones["J1"] == zones["J2"] == zones["J3"] == zones["J4"]
    assert zones["J5"] == zones["J6"] == zones["J7"] == zones["J8"]
    assert zones["J1"] != zones["J8"]
    err = capsys.readouterr().err
    assert "caution" in err
    assert "Traceback" not in err


def test_zones_with_node_table_and_sizes(tmp_path: Path) -> None:
    edges = two_cliques_csv(tmp_path)
    # The second clique serves more connections, so it must be zone 0.
    served = {"J1": 1, "J2": 1, "J3": 1, "J4": 1, "J5": 5, "J6": 5, "J7": 5, "J8": 5}
    nodes = write(
        tmp_path,
        "nodes.csv",
        "node,connections\n" + "".join(f"{n},{c}\n" for n, c in served.items()),
    )
    out = tmp_path / "out"
    argv = ["zones", str(edges), "--nodes", str(nodes), "--size-col", "connections"]
    assert main([*argv, "--zones", "2", "--out", str(out), "--quiet"]) == 0
    zones = read_csv(out / "zones.csv").set_index("node")["zone"]
    assert zones.index.tolist() == list(served)  # node table order
    assert zones[["J5", "J6", "J7", "J8"]].tolist() == [0, 0, 0, 0]
    assert zones[["J1", "J2", "J3", "J4"]].tolist() == [1, 1, 1, 1]
    summary = read_csv(out / "zone_summary.csv")
    assert summary["nodes"].tolist() == [4, 4]
    assert summary["size"].tolist() == [20.0, 4.0]
    assert link_set(read_csv(out / "boundary.csv")) == {frozenset(BRIDGE)}
    run = load_run(out)
    assert run["network"]["has_sizes"] is True
    assert [item["role"] for item in run["inputs"]] == ["edges", "nodes"]


def test_zones_distance_weights_choose_the_cut(tmp_path: Path) -> None:
    # A ring of eight junctions: unweighted, every pair of opposite links is as
    # good a cut as any other. Two long pipes (J4-J5, J8-J1) make it unique once
    # lengths are read as distances.
    ring = [f"J{i}" for i in range(1, 9)]
    long_pipes = {frozenset(("J4", "J5")), frozenset(("J8", "J1"))}
    rows = []
    for a, b in zip(ring, ring[1:] + ring[:1], strict=True):
        length = 900.0 if frozenset((a, b)) in long_pipes else 12.5
        rows.append(f"{a},{b},{length}\n")
    edges = write(tmp_path, "pipes.csv", "source,target,length\n" + "".join(rows))
    out = tmp_path / "out"
    argv = ["zones", str(edges), "--weight", "length", "--distance", "--zones", "2"]
    assert main([*argv, "--out", str(out), "--quiet"]) == 0
    boundary = read_csv(out / "boundary.csv")
    assert link_set(boundary) == long_pipes
    assert boundary["length"].tolist() == [900.0, 900.0]  # input column carried along
    policy = load_run(out)["network"]["input_policy"]
    assert policy["weight_column"] == "length"
    assert policy["weight_read_as"] == "distance"
    assert "weight_conversion" in policy


def test_zones_json_summary_on_stdout(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    edges = two_cliques_csv(tmp_path)
    out = tmp_path / "out"
    assert main(["zones", str(edges), "--zones", "2", "--out", str(out), "--json"]) == 0
    captured = capsys.readouterr()
    summary = json.loads(captured.out)  # stdout holds the JSON document only
    assert summary["scores"]["zones"] == 2
    assert summary["scores"]["boundary_links"] == 1
    assert summary["scores"]["all_connected"] is True
    assert summary["scores"] == load_run(out)["scores"]
    assert Path(summary["out"]) == out
    assert "caution" in captured.err  # messages stay on stderr


def test_zones_accepts_and_counts_self_loops_and_duplicates(tmp_path: Path) -> None:
    rows = "".join(f"{a},{b},1\n" for a, b in TWO_CLIQUES)
    extra = "J2,J2,1\nJ2,J1,1\n"  # a self-loop and a reversed repeat of J1-J2
    edges = write(tmp_path, "edges.csv", "source,target,weight\n" + rows + extra)
    out = tmp_path / "out"
    assert main(["zones", str(edges), "--zones", "2", "--out", str(out), "--quiet"]) == 0
    run = load_run(out)
    policy = run["network"]["input_policy"]
    assert policy["self_loops_dropped"] == 1
    assert policy["duplicate_links_merged"] == 1
    assert run["network"]["links"] == len(TWO_CLIQUES)
    assert link_set(read_csv(out / "boundary.csv")) == {frozenset(BRIDGE)}


# --------------------------------------------------------------- spectrum
def three_cliques_csv(folder: Path) -> Path:
    """Three cliques of five (Q1-Q5, Q6-Q10, Q11-Q15) in a chain of single links."""
    rows = []
    for start in (1, 6, 11):
        ids = [f"Q{i}" for i in range(start, start + 5)]
        rows += [f"{a},{b}\n" for i, a in enumerate(ids) for b in ids[i + 1 :]]
    rows += ["Q5,Q6\n", "Q10,Q11\n"]
    return write(folder, "edges.csv", "source,target\n" + "".join(rows))


def test_spectrum_counts_and_suggests_three(tmp_path: Path) -> None:
    edges = three_cliques_csv(tmp_path)
    out = tmp_path / "out"
    count = 6
    assert main(["spectrum", str(edges), "--count", str(count), "--out", str(out), "--quiet"]) == 0
    assert sorted(p.name for p in out.iterdir()) == ["run.json", "spectrum.csv"]
    assert header_of(out / "spectrum.csv")[:3] == CONTRACT_COLUMNS["spectrum.csv"]
    spectrum = read_csv(out / "spectrum.csv")
    assert len(spectrum) == count
    assert spectrum["index"].tolist() == list(range(1, count + 1))  # eigenvalues numbered from 1
    values = spectrum["eigenvalue"].to_numpy()
    assert np.all(np.diff(values) >= 0)
    assert abs(values[0]) < 1e-12
    run = load_run(out)
    tol = run["eigen_solve"]["tol"]
    assert (spectrum["residual"] <= tol).all()
    suggested = run["suggested_zone_counts"]
    assert suggested
    assert suggested[0]["zones"] == 3
    checksum = hashlib.sha256(edges.read_bytes()).hexdigest()
    assert run["inputs"][0]["checksum"] == f"sha256:{checksum}"


# -------------------------------------------------------------- bad input
GOOD_EDGES = "source,target,weight\n" + "".join(f"{a},{b},1\n" for a, b in TWO_CLIQUES)


@dataclass(frozen=True)
class BadInput:
    """Files to write, options after the edge file, and where the message must point."""

    files: dict[str, str]
    named: str
    line: int | None = None
    column: str | None = None
    words: tuple[str, ...] = ()
    options: tuple[str, ...] = ()


def weights(*cells: str, header: str = "source,target,weight") -> dict[str, str]:
    """A triangle J1-J2-J3 whose three links carry ``cells`` (lines 2, 3 and 4)."""
    pairs = [("J1", "J2"), ("J2", "J3"), ("J3", "J1")]
    rows = "".join(f"{a},{b},{c}\n" for (a, b), c in zip(pairs, cells, strict=True))
    return {"edges.csv": f"{header}\n{rows}"}


BAD_INPUTS = [
    pytest.param(BadInput({"edges.csv": ""}, "edges.csv", 1, words=("empty",)), id="empty-file"),
    pytest.param(
        BadInput({"edges.csv": "source,target,weight\n"}, "edges.csv", 1, words=("no rows",)),
        id="header-only",
    ),
    pytest.param(
        BadInput({"edges.csv": GOOD_EDGES}, "edges.csv", 1, "from", options=("--source", "from")),
        id="missing-column",
    ),
    pytest.param(
        BadInput(weights("1", "1", "x"), "edges.csv", 4, "weight", ("'x'", "not a number")),
        id="non-numeric-weight-line-4",
    ),
    pytest.param(
        BadInput(weights("1", "NaN", "1"), "edges.csv", 3, "weight", ("not finite",)),
        id="nan-weight",
    ),
    pytest.param(
        BadInput(weights("1", "1", "inf"), "edges.csv", 4, "weight", ("not finite",)),
        id="inf-weight",
    ),
    pytest.param(
        BadInput(weights("-2", "1", "1"), "edges.csv", 2, "weight", ("negative",)),
        id="negative-weight",
    ),
    pytest.param(
        BadInput(weights("1", "1,7", "1"), "edges.csv", 3, words=("4 fields",)),
        id="ragged-row",
    ),
    pytest.param(
        BadInput(
            weights("10", "10", "0", header="source,target,length"),
            "edges.csv",
            4,
            "length",
            ("zero",),
            options=("--weight", "length", "--distance"),
        ),
        id="zero-distance",
    ),
    pytest.param(
        BadInput(
            {"edges.csv": GOOD_EDGES, "nodes.csv": "node\nJ1\nJ2\nJ3\nJ4\nJ5\nJ6\nJ8\n"},
            "edges.csv",  # J7 first appears as a target on line 10
            10,
            "target",
            ("'J7'", "nodes.csv"),
            options=("--nodes", "NODES"),
        ),
        id="node-missing-from-node-table",
    ),
    pytest.param(
        BadInput(
            {"edges.csv": GOOD_EDGES, "nodes.csv": "node\nJ1\nJ2\nJ3\nJ4\nJ5\nJ3\nJ6\nJ7\nJ8\n"},
            "nodes.csv",
            7,
            "node",
            ("'J3'", "line 4"),
            options=("--nodes", "NODES"),
        ),
        id="duplicate-node-rows",
    ),
    pytest.param(BadInput({}, "edges.csv", words=("no such file",)), id="missing-file"),
]


@pytest.mark.parametrize("bad", BAD_INPUTS)
def test_bad_input_exits_2_and_says_where(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], bad: BadInput
) -> None:
    for name, text in bad.files.items():
        write(tmp_path, name, text)
    edges = tmp_path / "edges.csv"
    options = [str(tmp_path / "nodes.csv") if arg == "NODES" else arg for arg in bad.options]
    out = tmp_path / "out"
    code = main(["zones", str(edges), *options, "--zones", "2", "--out", str(out)])
    err = capsys.readouterr().err
    assert code == 2, err
    assert str(tmp_path / bad.named) in err
    if bad.line is not None:
        assert f"line {bad.line}" in err
    if bad.column is not None:
        assert f"column '{bad.column}'" in err
    for word in bad.words:
        assert word in err
    assert "Traceback" not in err
    assert not out.exists()


@pytest.mark.parametrize(
    ("argv", "words"),
    [
        pytest.param(["--zones", "0"], ["--zones", "at least 1", "got '0'"], id="zero-zones"),
        pytest.param(["--zones", "9:3"], ["--zones", "LOW <= HIGH", "got '9:3'"], id="bad-range"),
        pytest.param(["--zones", "9"], ["zones", "<= 8", "got 9"], id="more-zones-than-nodes"),
        pytest.param(["--zones", "2", "--bogus"], ["--bogus"], id="unknown-option"),
        pytest.param(["--zones", "two"], ["--zones", "two"], id="zones-not-an-integer"),
    ],
)
def test_bad_usage_exits_2(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], argv: list[str], words: list[str]
) -> None:
    edges = two_cliques_csv(tmp_path)
    out = tmp_path / "out"
    code = main(["zones", str(edges), *argv, "--out", str(out)])
    err = capsys.readouterr().err
    assert code == 2, err
    for word in words:
        assert word in err
    assert "Traceback" not in err
    assert not out.exists()


# ------------------------------------------- library refusals in option names
@pytest.mark.parametrize(
    ("argv", "said"),
    [
        pytest.param(
            ["--zones", "eight"],
            "argument --zones: zones must be a number of zones such as 12",
            id="zones-text",
        ),
        pytest.param(
            ["--zones", "2", "--min-size", "5", "--max-size", "3"],
            "error: --min-size: min_size must be <= max_size; got 5 > 3.",
            id="min-size-above-max-size",
        ),
        pytest.param(
            ["--zones", "9"],
            "error: --zones: zones must be an integer <= 8; got 9.",
            id="zones-above-nodes",
        ),
    ],
)
def test_library_refusals_name_the_option(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], argv: list[str], said: str
) -> None:
    # The library names its argument (zones, min_size); the command line puts the
    # option in front of the same words, as argparse does. Two cliques of 4: 8 nodes.
    edges = two_cliques_csv(tmp_path)
    code = main(["zones", str(edges), *argv, "--out", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert code == 2, err
    assert said in err
    assert "Traceback" not in err


def test_the_same_refusals_in_python_name_the_argument(tmp_path: Path) -> None:
    net = specgraph.read_edges(two_cliques_csv(tmp_path))
    for call, words in [
        (lambda: specgraph.find_zones(net, "eight"), "zones must be a number of zones"),
        (
            lambda: specgraph.zones.ZoneConstraints(min_size=5, max_size=3),
            "min_size must be <= max_size; got 5 > 3.",
        ),
        (lambda: specgraph.find_zones(net, 9), "zones must be an integer <= 8; got 9."),
    ]:
        with pytest.raises(specgraph.ParameterError) as info:
            call()
        message = str(info.value)
        assert message.startswith(words)
        assert "--" not in message
        assert info.value.parameter in ("zones", "min_size")


# ------------------------------------------------------------ convergence
@pytest.mark.parametrize(
    "command",
    [
        pytest.param(["zones", "--zones", "2"], id="zones"),
        pytest.param(["spectrum", "--count", "4"], id="spectrum"),
    ],
)
def test_missed_tolerance_exits_3_and_writes_no_zones(
    tmp_path: Path,
    capsys: pytest.CaptureFixture[str],
    monkeypatch: pytest.MonkeyPatch,
    command: list[str],
) -> None:
    # A tolerance below float64's reach is refused up front (--tol at least
    # 4 machine epsilons), so a missed tolerance is forced here: every residual
    # the solver reports is raised by 1, above any tolerance it was given.
    import specgraph.eigen._api as eigen_api

    real = eigen_api._scaled_residuals
    monkeypatch.setattr(eigen_api, "_scaled_residuals", lambda *a: real(*a) + 1.0)
    edges = two_cliques_csv(tmp_path)
    out = tmp_path / "out"
    name, *options = command
    code = main([name, str(edges), *options, "--tol", "1e-10", "--out", str(out)])
    err = capsys.readouterr().err
    assert code == 3, err
    assert "residual" in err
    assert "tol=1e-10" in err
    # The advice names only options the command line has (no iteration cap).
    assert "loosen --tol" in err
    assert "maxiter" not in err
    assert "Traceback" not in err
    # Only the record of the failure: no zones or spectrum presented as valid.
    assert sorted(p.name for p in out.iterdir()) == ["not-converged.json"]
    record = json.loads((out / "not-converged.json").read_text(encoding="utf-8"))
    assert record["converged"] is False
    assert max(record["eigen_solve"]["residuals"]) > record["eigen_solve"]["tol"]


# ------------------------------------------------------------ help, version
def test_zones_help_has_caution_and_exit_codes(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["zones", "--help"]) == 0
    text = flat(capsys.readouterr().out)
    assert "hydraulic, power-flow or traffic model" in text
    assert "licensed engineers" in text
    assert "exit codes" in text
    for code in ("0 success", "2 bad usage or bad input", "3 the eigen-solve"):
        assert code in text


def test_version(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["--version"]) == 0
    assert capsys.readouterr().out.strip() == f"specgraph {specgraph.__version__}"


# ----------------------------------------------------------- real process
def test_python_dash_m_specgraph_runs(tmp_path: Path) -> None:
    two_cliques_csv(tmp_path)
    done = subprocess.run(
        [sys.executable, "-m", "specgraph", "zones", "edges.csv", "--zones", "2", "--out", "out"],
        cwd=tmp_path,
        capture_output=True,
        text=True,
        timeout=120,
        check=False,
    )
    assert done.returncode == 0, done.stderr
    assert done.stdout == ""
    assert "caution" in done.stderr
    assert_contract(tmp_path / "out")
    assert link_set(read_csv(tmp_path / "out" / "boundary.csv")) == {frozenset(BRIDGE)}


def test_main_leaves_the_library_logger_as_found(tmp_path: Path) -> None:
    """In-process callers (pipelines, notebooks) keep their own logging set-up."""
    logger = logging.getLogger("specgraph")
    before = (logger.handlers[:], logger.level, logger.propagate)
    main(["zones", str(two_cliques_csv(tmp_path)), "--zones", "2", "--out", str(tmp_path / "o")])
    assert (logger.handlers[:], logger.level, logger.propagate) == before


def test_every_command_help_renders() -> None:
    # argparse expands % in help texts; a stray one makes --help crash (exit 1), which
    # only shows when the help is actually formatted.
    parser = build_parser()
    commands = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    assert parser.format_help()
    for name, sub in commands.choices.items():
        text = sub.format_help()
        assert name in text
        assert "Decision support only" in text


# ------------------------------------------------------------ run records
def every_command(folder: Path) -> dict[str, list[str]]:
    """argv of every command on the two cliques (zone tables made by a first zones run)."""
    edges = str(two_cliques_csv(folder))
    zones_csv = str(folder / "zones" / "zones.csv")
    halves = write(
        folder,
        "halves.csv",
        "node,zone\n" + "".join(f"J{i},{0 if i <= 4 else 1}\n" for i in range(1, 9)),
    )
    return {
        "zones": ["zones", edges, "--zones", "2"],
        "demo": ["demo", "--seed", str(DEMO_SEED)],
        "spectrum": ["spectrum", edges, "--count", "4"],
        "score": ["score", edges, zones_csv],
        "refine": ["refine", edges, str(halves)],
        "compare": ["compare", zones_csv, str(halves)],
        "robustness": ["robustness", edges, "--zones-file", zones_csv],
        "stability": ["stability", edges, "--zones", "2", "--repeats", "1"],
        "local": ["local", edges, "--around", "J1"],
    }


@pytest.fixture(scope="module")
def records(tmp_path_factory: pytest.TempPathFactory) -> dict[str, dict]:
    folder = tmp_path_factory.mktemp("records")
    found = {}
    for name, argv in every_command(folder).items():  # zones first: the others read it
        out = folder / name
        assert main([*argv, "--out", str(out), "--quiet"]) == 0, name
        found[name] = load_run(out)
    return found


def test_every_command_is_in_the_record_check(records: dict[str, dict]) -> None:
    parser = build_parser()
    commands = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    assert set(records) == set(commands.choices)


def test_every_run_record_has_the_same_top_level_keys(records: dict[str, dict]) -> None:
    from specgraph.export import RUN_RECORD_KEYS

    for name, record in records.items():
        core = [key for key in record if key in RUN_RECORD_KEYS]
        assert core == list(RUN_RECORD_KEYS), name
        # A command's own results sit between 'decisions' and 'warnings'.
        keys = list(record)
        own = keys[keys.index("decisions") + 1 : keys.index("warnings")]
        assert set(keys) == set(RUN_RECORD_KEYS) | set(own), name


def test_every_run_record_carries_versions_checksums_and_caution(
    records: dict[str, dict],
) -> None:
    for name, record in records.items():
        assert record["specgraph_run"] == 1, name
        assert record["command"][0] == "specgraph", name
        assert record["versions"]["specgraph"] == specgraph.__version__, name
        assert {"python", "numpy", "scipy", "pandas"} <= set(record["versions"]), name
        assert isinstance(record["parameters"], dict), name
        assert isinstance(record["decisions"], dict), name
        assert isinstance(record["warnings"], list), name
        assert "licensed engineers" in flat(record["caution"]), name
        assert record["inputs"], name
        for item in record["inputs"]:
            if item["path"].startswith("<demo>/"):
                continue  # the bundled files: checked in test_demo_run_record
            digest = hashlib.sha256(Path(item["path"]).read_bytes()).hexdigest()
            assert item["checksum"] == f"sha256:{digest}", (name, item["role"])


def test_spectrum_record_has_the_operator_decision_and_parameters(
    records: dict[str, dict],
) -> None:
    record = records["spectrum"]
    assert record["parameters"]["operator"] == "auto"
    assert record["parameters"]["count"] == 4
    assert record["decisions"]["operator"]["choice"] == "normalized"  # undirected input
    assert record["network"]["nodes"] == 8
    assert record["network"]["links"] == len(TWO_CLIQUES)


# ------------------------------------------------------------ internal errors
def broken_zoning(*args: object, **kwargs: object) -> None:
    # numpy's LinAlgError is a ValueError: it must still count as an internal error.
    raise np.linalg.LinAlgError("Matrix is singular\nsecond line")


def test_internal_error_exits_1_with_one_line(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    import specgraph._commands

    assert issubclass(np.linalg.LinAlgError, ValueError)
    monkeypatch.setattr(specgraph._commands, "find_zones", broken_zoning)
    edges = two_cliques_csv(tmp_path)
    code = main(["zones", str(edges), "--zones", "2", "--out", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert code == 1, err
    lines = [line for line in err.splitlines() if "internal error" in line]
    assert lines == [
        "specgraph: internal error: LinAlgError: Matrix is singular second line (rerun with "
        "--debug and report it)"
    ]
    assert "Traceback" not in err
    assert not (tmp_path / "out").exists()


def test_debug_adds_the_traceback_and_keeps_the_exit_code(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    import specgraph._commands

    monkeypatch.setattr(specgraph._commands, "find_zones", broken_zoning)
    edges = two_cliques_csv(tmp_path)
    out = str(tmp_path / "out")
    assert main(["zones", str(edges), "--zones", "2", "--out", out, "--debug"]) == 1
    assert "Traceback" in capsys.readouterr().err
    # A bad input with --debug: still exit 2, now with its traceback.
    code = main(["zones", str(tmp_path / "missing.csv"), "--out", out, "--debug"])
    err = capsys.readouterr().err
    assert code == 2, err
    assert "Traceback" in err
    assert "no such file" in err


# ------------------------------------------------------------ --solver
#: Commands that solve eigenproblems, each with the options that make it run on a
#: cycle; all take --solver.
SOLVING_COMMANDS = ("zones", "spectrum", "score", "robustness", "stability", "demo")


def cycle_csv(folder: Path, nodes: int = 30) -> Path:
    """A cycle Q0..Q{n-1}: one component larger than robustness's stacked dense groups."""
    rows = "".join(f"Q{i},Q{(i + 1) % nodes}\n" for i in range(nodes))
    return write(folder, "cycle.csv", "source,target\n" + rows)


def solver_argv(folder: Path, command: str) -> list[str]:
    edges = str(cycle_csv(folder))
    halves = write(
        folder, "cycle_zones.csv", "node,zone\n" + "".join(f"Q{i},{i // 15}\n" for i in range(30))
    )
    return {
        "zones": ["zones", edges, "--zones", "3"],
        "spectrum": ["spectrum", edges, "--count", "4"],
        "score": ["score", edges, str(halves)],
        "robustness": ["robustness", edges],
        "stability": ["stability", edges, "--zones", "3", "--repeats", "1"],
        "demo": ["demo"],
    }[command]


@pytest.mark.parametrize("command", SOLVING_COMMANDS)
def test_solver_refuses_an_unknown_method(
    command: str, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    argv = [*solver_argv(tmp_path, command), "--solver", "cholesky", "--out", str(tmp_path / "o")]
    assert main(argv) == 2
    assert "--solver" in capsys.readouterr().err
    assert not (tmp_path / "o").exists()


@pytest.mark.parametrize("command", SOLVING_COMMANDS[:-1])
def test_solver_reaches_the_library_and_the_record(
    command: str, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # On 30 nodes 'auto' takes the dense solver (specgraph.eigen), so 'lanczos'
    # in the solves shows that the option reached every eigen-solve.
    from specgraph.eigen import _api

    asked: list[str] = []
    solve = _api.smallest_eigenpairs

    def spy(*args: object, **kwargs: object) -> object:
        asked.append(str(kwargs.get("method", "auto")))
        return solve(*args, **kwargs)  # type: ignore[arg-type]

    for module in ("_commands", "zones._stages", "diagnostics._score", "diagnostics._robustness"):
        monkeypatch.setattr(f"specgraph.{module}.smallest_eigenpairs", spy)
    out = tmp_path / "out"
    assert main([*solver_argv(tmp_path, command), "--solver", "lanczos", "--out", str(out)]) == 0
    assert asked
    assert set(asked) == {"lanczos"}, asked
    record = load_run(out)
    keyword = "method" if command == "spectrum" else "eigen_method"
    assert record["parameters"][keyword] == "lanczos"
    if command == "zones":
        assert {s["method"] for s in record["eigen_solves"]} == {"lanczos"}
    if command == "spectrum":
        assert record["eigen_solve"]["method"] == "lanczos"
    if command == "robustness":
        assert record["summary"]["eigen_methods"] == ["lanczos"]


def test_solver_default_is_auto_in_the_record(records: dict[str, dict]) -> None:
    assert records["zones"]["parameters"]["eigen_method"] == "auto"
    assert records["spectrum"]["parameters"]["method"] == "auto"
    assert records["score"]["parameters"]["eigen_method"] == "auto"
    assert records["robustness"]["parameters"]["eigen_method"] == "auto"
