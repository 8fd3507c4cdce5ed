"""The run record's eigengaps come from the one engine, specgraph._figures; every command's
record carries the caution and the warnings the console printed."""

from __future__ import annotations

import json
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
from closed_forms import path_n

from specgraph import Network, find_zones, gallery
from specgraph._commands import COMMANDS
from specgraph._figures import eigengaps, relative_gap
from specgraph.cli import main
from specgraph.exceptions import ParameterError
from specgraph.export import CAUTION, RUN_RECORD_KEYS, run_record


@pytest.mark.parametrize(
    ("n", "k"), [(12, 2), (20, 3), (31, 4)], ids=["P12-k2", "P20-k3", "P31-k4"]
)
def test_record_gap_is_the_figures_gap_and_the_path_closed_form(n: int, k: int) -> None:
    zoning = find_zones(
        gallery.path(n), k, operator="normalized", trees="keep", eigen_method="dense", rng=0
    )
    (solve,) = zoning.solves
    values = solve.eigen.values
    (entry,) = run_record(zoning)["eigen_solves"]
    # The record holds exactly what the engine computes from the same eigenvalues.
    assert entry["eigengap_after_zones"] == float(eigengaps(values)[k - 1])
    assert entry["relative_eigengap"] == float(relative_gap(values[k - 1], values[k]))
    # Outside check: the normalized Laplacian of the path P_n has eigenvalues
    # 1 - cos(pi j / (n - 1)), j = 0..n-1 (F. Chung, Spectral Graph Theory, AMS 1997,
    # ch. 1, from memory; re-checked numerically in CHECKS.md).
    exact = np.sort(path_n(n))
    expected_gap = exact[k] - exact[k - 1]
    assert entry["eigengap_after_zones"] == pytest.approx(expected_gap, abs=1e-10)
    assert entry["relative_eigengap"] == pytest.approx(expected_gap / exact[k], rel=1e-8)


def test_record_relative_gap_is_undefined_where_the_next_eigenvalue_is_not_positive() -> None:
    # Four planted groups: the Bethe Hessian has about one negative eigenvalue per
    # group (Saade, Krzakala and Zdeborova, NeurIPS 2014), so with 2 zones the
    # 3rd eigenvalue is negative and the relative gap (lambda_3 - lambda_2)/lambda_3
    # is not defined (specgraph._figures.relative_gap).
    graph = nx.planted_partition_graph(4, 25, 0.3, 0.01, seed=1)
    zoning = find_zones(Network.from_networkx(graph), 2, operator="bethe_hessian", rng=0)
    (solve,) = zoning.solves
    values = solve.eigen.values
    assert values[2] < 0
    (entry,) = run_record(zoning)["eigen_solves"]
    assert np.isnan(relative_gap(values[1], values[2]))
    assert entry["relative_eigengap"] is None
    assert entry["eigengap_after_zones"] == float(eigengaps(values)[1])


def test_record_gap_is_none_when_no_next_eigenvalue_was_computed() -> None:
    # Three zones of a three-node path: one node per zone, the whole spectrum solved.
    zoning = find_zones(gallery.path(3), 3, rng=0)
    for entry in run_record(zoning)["eigen_solves"]:
        assert entry["pairs"] <= entry["zones"]
        assert entry["eigengap_after_zones"] is None
        assert entry["relative_eigengap"] is None


def test_record_refusals_name_the_parameter() -> None:
    zoning = find_zones(gallery.barbell(4), 2, rng=0)
    with pytest.raises(ParameterError, match=r"^network must be None when a zoning") as info:
        run_record(zoning, network=zoning.network)
    assert info.value.parameter == "network"
    with pytest.raises(ParameterError, match=r"^decisions must be None when a zoning"):
        run_record(zoning, decisions={})
    with pytest.raises(ParameterError, match=r"got \['inputs'\]\.$") as info:
        run_record(network=zoning.network, results={"inputs": 1})
    assert info.value.parameter == "results"
    assert info.value.received == ["inputs"]
    assert "inputs" in RUN_RECORD_KEYS


def _command_lines(tmp_path: Path) -> dict[str, list[str]]:
    """One small run of every command but ``demo`` (tested in test_cli), on networkx's
    ``connected_caveman_graph(3, 5)`` plus a separate link (two components: a warning)."""
    graph = nx.connected_caveman_graph(3, 5)
    graph.add_edge(100, 101)
    edges = tmp_path / "edges.csv"
    edges.write_text(
        "source,target\n" + "".join(f"n{u},n{v}\n" for u, v in graph.edges), encoding="utf-8"
    )
    nodes = sorted(graph)
    zones = tmp_path / "zones.csv"
    zones.write_text(
        "node,zone\n" + "".join(f"n{n},{min(n // 5, 2) if n < 100 else 3}\n" for n in nodes),
        encoding="utf-8",
    )
    e, z = str(edges), str(zones)
    return {
        "zones": ["zones", e, "--zones", "4"],
        "refine": ["refine", e, z],
        "spectrum": ["spectrum", e, "--count", "5"],
        "score": ["score", e, z],
        "compare": ["compare", z, z],
        "robustness": ["robustness", e],
        "stability": ["stability", e, "--zones", "4", "--repeats", "1"],
        "local": ["local", e, "--around", "n0"],
    }


def test_every_command_says_and_records_the_caution_and_one_warnings_list(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    runs = _command_lines(tmp_path)
    assert set(runs) | {"demo"} == set(COMMANDS)
    warned: dict[str, int] = {}
    for name, argv in runs.items():
        out = tmp_path / f"out-{name}"
        assert main([*argv, "--out", str(out)]) == 0, name
        lines = [
            line.removeprefix("specgraph: ")
            for line in capsys.readouterr().err.splitlines()
            if line.startswith("specgraph: ")
        ]
        record = json.loads((out / "run.json").read_text(encoding="utf-8"))
        assert lines[0] == f"caution: {CAUTION}", name
        assert record["caution"] == CAUTION, name
        printed = [line.removeprefix("warning: ") for line in lines if line.startswith("warning: ")]
        assert printed == record["warnings"], name
        warned[name] = len(printed)
    assert warned["zones"] >= 1  # the two components are warned about
