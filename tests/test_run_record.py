"""The run record's eigengaps come from the one engine, specgraph._figures."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
from closed_forms import path_n

from specgraph import Network, find_zones, gallery
from specgraph._figures import eigengaps, relative_gap
from specgraph.exceptions import ParameterError
from specgraph.export import RUN_RECORD_KEYS, run_record


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
