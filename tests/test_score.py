"""``score`` and ``labels_from_mapping`` against networkx, scipy and exact fractions.

Definitions checked (networkx ``algorithms.cuts`` and ``algorithms.community.quality``):
conductance(S) = w(S, S') / min(vol S, vol S'); normalized cut of a zoning =
sum_z w(S_z, S_z') / vol S_z (Shi and Malik 2000), which for two zones covering the
network is networkx's ``normalized_cut_size``; modularity Q = sum_c [L_c/m - (k_c/2m)^2]
(Newman and Girvan 2004; Newman 2006), networkx's ``community.modularity``.
"""

from __future__ import annotations

from fractions import Fraction

import networkx as nx
import numpy as np
import pandas as pd
import pytest
import scipy.linalg as la
from scipy.stats import median_abs_deviation

from specgraph import Network, gallery
from specgraph.diagnostics import overall_scores, zone_table
from specgraph.diagnostics._score import (
    OUTLIER_MIN_RATIO,
    OUTLIER_Z,
    labels_from_mapping,
    outlier_flags,
    score,
)
from specgraph.exceptions import InputError, ParameterError

#: Arbitrary, non-consecutive zone numbers, to check that the user's numbers are kept.
NUMBERS = np.array([40, 3, 17, 250, 8])


def random_zoning(n: int, k: int, seed: int, *, unassigned: float = 0.0) -> np.ndarray:
    """Zone numbers from NUMBERS[:k], each used; a share of nodes set to -1."""
    rng = np.random.default_rng(seed)
    index = rng.integers(0, k, size=n)
    index[rng.choice(n, k, replace=False)] = np.arange(k)
    labels = NUMBERS[index]
    free = np.flatnonzero(~np.isin(np.arange(n), rng.choice(n, k, replace=False)))
    labels[rng.choice(free, int(unassigned * n), replace=False)] = -1
    return labels


def members(labels: np.ndarray, zone: int) -> set[int]:
    return set(np.flatnonzero(labels == zone).tolist())


CASES = [
    pytest.param(kind, k, seed, share, id=f"{kind}-k{k}-seed{seed}-unassigned{share}")
    for kind in ("gnm", "geometric")
    for k, seed in ((2, 0), (3, 1), (5, 2))
    for share in (0.0, 0.2)
]


@pytest.mark.parametrize(("kind", "k", "seed", "share"), CASES)
def test_zone_figures_match_networkx(weighted_graph, kind: str, k: int, seed: int, share: float):
    graph = weighted_graph(kind, 40, seed=seed)
    net = Network.from_networkx(graph)
    labels = random_zoning(net.n_nodes, k, seed, unassigned=share)
    card = score(net, labels, eigengap=False)
    zones = card.zones
    assert zones["zone"].tolist() == sorted(NUMBERS[:k].tolist())
    total = graph.size(weight="weight")
    q_terms = []
    for row in zones.to_dict("records"):
        s = members(labels, row["zone"])
        # Unassigned nodes are outside every zone: networkx's complement V - S holds them.
        assert row["nodes"] == len(s)
        assert row["internal_weight"] == pytest.approx(graph.subgraph(s).size(weight="weight"))
        assert row["boundary_weight"] == pytest.approx(nx.cut_size(graph, s, weight="weight"))
        assert row["boundary_links"] == nx.cut_size(graph, s)
        assert row["volume"] == pytest.approx(nx.volume(graph, s, weight="weight"))
        assert row["conductance"] == pytest.approx(nx.conductance(graph, s, weight="weight"))
        assert row["connected"] == nx.is_connected(graph.subgraph(s))
        q_terms.append(
            graph.subgraph(s).size(weight="weight") / total
            - (nx.volume(graph, s, weight="weight") / (2 * total)) ** 2
        )
    np.testing.assert_allclose(zones["modularity_share"], q_terms, rtol=1e-12)
    ncut = sum(
        nx.cut_size(graph, members(labels, z), weight="weight")
        / nx.volume(graph, members(labels, z), weight="weight")
        for z in zones["zone"].tolist()
    )
    assert card.overall["normalized_cut"] == pytest.approx(ncut, rel=1e-12)
    assert zones["ncut_share"].sum() == pytest.approx(1.0)


@pytest.mark.parametrize(("kind", "k", "seed", "share"), CASES)
def test_modularity_matches_networkx(weighted_graph, kind: str, k: int, seed: int, share: float):
    graph = weighted_graph(kind, 40, seed=seed)
    net = Network.from_networkx(graph)
    labels = random_zoning(net.n_nodes, k, seed, unassigned=share)
    q = score(net, labels, eigengap=False).overall["modularity"]
    parts = [members(labels, z) for z in np.unique(labels[labels >= 0])]
    outside = members(labels, -1)
    if not outside:
        # networkx community.modularity (weighted Newman-Girvan form).
        assert q == pytest.approx(nx.community.modularity(graph, parts, weight="weight"), rel=1e-12)
    else:
        # The outside set is not a zone: networkx's Q with it as a community, minus its term.
        m = graph.size(weight="weight")
        term = (
            graph.subgraph(outside).size(weight="weight") / m
            - (nx.volume(graph, outside, weight="weight") / (2 * m)) ** 2
        )
        full = nx.community.modularity(graph, [*parts, outside], weight="weight")
        assert q == pytest.approx(full - term, rel=1e-12)


def test_two_zones_normalized_cut_is_networkx_normalized_cut_size(weighted_graph):
    graph = weighted_graph("geometric", 50, seed=3)
    net = Network.from_networkx(graph)
    labels = (np.arange(net.n_nodes) % 3 == 0).astype(np.int64) * 5
    overall = score(net, labels, eigengap=False).overall
    s, t = members(labels, 0), members(labels, 5)
    # networkx normalized_cut_size = cut (1/vol S + 1/vol T).
    expected = nx.normalized_cut_size(graph, s, t, weight="weight")
    assert overall["normalized_cut"] == pytest.approx(expected, rel=1e-12)
    assert overall["boundary_weight"] == pytest.approx(nx.cut_size(graph, s, t, weight="weight"))


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_partial_zoning_totals_match_a_link_count(weighted_graph, seed: int):
    graph = weighted_graph("gnm", 40, seed=seed)
    net = Network.from_networkx(graph)
    labels = random_zoning(net.n_nodes, 3, seed, unassigned=0.25)
    card = score(net, labels, eigengap=False)
    outside = members(labels, -1)
    crossing = [(u, v, w) for u, v, w in graph.edges(data="weight") if labels[u] != labels[v]]
    # A link between two zones, or between a zone and an unassigned node, is boundary;
    # a link between two unassigned nodes is not (brute force over networkx's edges).
    assert card.overall["boundary_weight"] == pytest.approx(sum(w for *_, w in crossing))
    assert card.overall["boundary_links"] == len(crossing)
    assigned = set(graph) - outside
    assert card.overall["boundary_weight_to_unassigned"] == pytest.approx(
        nx.cut_size(graph, assigned, outside, weight="weight")
    )
    assert card.overall["boundary_links_to_unassigned"] == nx.cut_size(graph, assigned, outside)
    assert card.overall["unassigned_nodes"] == len(outside)
    assert card.overall["assigned_nodes"] == len(assigned)
    assert card.unassigned.tolist() == [str(i) for i in sorted(outside)]


def test_full_zoning_agrees_with_zone_table(weighted_graph):
    graph = weighted_graph("geometric", 60, seed=4)
    net = Network.from_networkx(graph)
    labels = np.arange(net.n_nodes) % 4
    card = score(net, labels, eigengap=False)
    table = zone_table(net, labels)
    for column in ("nodes", "size", "internal_weight", "boundary_weight", "conductance"):
        np.testing.assert_allclose(card.zones[column], table[column], rtol=1e-13)
    assert card.zones["connected"].tolist() == table["connected"].tolist()
    reference = overall_scores(table)
    for key in ("normalized_cut", "boundary_weight", "boundary_links", "all_connected"):
        assert card.overall[key] == pytest.approx(reference[key])


# ------------------------------------------------------------ exact fractions
@pytest.mark.parametrize("clique", [3, 4, 6])
def test_barbell_exact_fractions(clique: int):
    net = gallery.barbell(clique)
    labels = np.repeat([7, 2], clique)
    card = score(net, labels, eigengap=False)
    # By hand: each bell has C(m,2) internal links, volume m(m-1) + 1, and the total
    # weight is W = m(m-1) + 1; Q = 2 [C(m,2)/W - (1/2)^2], conductance 1/W each.
    inner = Fraction(clique * (clique - 1), 2)
    total = clique * (clique - 1) + 1
    assert card.overall["modularity"] == pytest.approx(float(2 * (inner / total - Fraction(1, 4))))
    assert card.zones["zone"].tolist() == [2, 7]
    assert card.zones["conductance"].tolist() == pytest.approx([1 / total] * 2)
    assert card.overall["normalized_cut"] == pytest.approx(2 / total)
    assert card.zones["ncut_share"].tolist() == pytest.approx([0.5, 0.5])
    assert card.zones["boundary_links"].tolist() == [1, 1]
    assert card.overall["boundary_links"] == 1


def test_path_with_unassigned_middle_exact():
    # Path 0-1-2-3-4, zones {0,1} and {3,4}, node 2 unassigned: each zone has one
    # internal link and one link to the outside node; volumes 3, W = 4.
    card = score(gallery.path(5), np.array([1, 1, -1, 0, 0]), eigengap=False)
    assert card.zones["boundary_weight"].tolist() == [1.0, 1.0]
    assert card.zones["conductance"].tolist() == pytest.approx([1 / 3, 1 / 3])
    assert card.overall["modularity"] == pytest.approx(
        float(2 * (Fraction(1, 4) - Fraction(9, 64)))
    )
    assert card.overall["boundary_links"] == 2
    assert card.overall["boundary_links_to_unassigned"] == 2
    assert card.unassigned.tolist() == ["2"]


def test_isolated_node_zone_has_zero_figures():
    net = Network.from_links(["a", "b"], ["b", "c"], node_ids=["a", "b", "c", "z"])
    card = score(net, np.array([0, 0, 0, 1]), eigengap=False)
    row = card.zones.iloc[1]
    assert (row["volume"], row["conductance"], row["modularity_share"]) == (0.0, 0.0, 0.0)
    assert bool(row["connected"])
    # A zoning whose zones are whole components has no cut: shares 0, not NaN.
    assert card.zones["ncut_share"].tolist() == [0.0, 0.0]


def test_disconnected_zone_is_reported():
    card = score(gallery.path(4), np.array([0, 1, 1, 0]), eigengap=False)
    assert card.zones["connected"].tolist() == [False, True]
    assert card.overall["all_connected"] is False


def test_size_column_sums_node_sizes():
    graph = nx.path_graph(4)
    nx.set_node_attributes(graph, {0: 2.5, 1: 1.0, 2: 0.0, 3: 4.0}, "served")
    net = Network.from_networkx(graph, size="served")
    card = score(net, np.array([0, 0, 1, 1]), eigengap=False)
    assert card.zones["size"].tolist() == [3.5, 4.0]


# ------------------------------------------------------------------ sources
def test_source_counts():
    net = gallery.path(8)
    labels = np.array([0, 0, 0, 3, 3, 5, 5, -1])
    card = score(net, labels, sources=["0", "1", "4", "7"], eigengap=False)
    assert card.zones["sources"].tolist() == [2, 1, 0]
    overall = card.overall
    assert (overall["sources"], overall["unassigned_sources"]) == (4, 1)
    assert (overall["zones_without_source"], overall["zones_with_several_sources"]) == (1, 1)
    assert "sources" not in score(net, labels, eigengap=False).zones


def test_unknown_source_is_refused():
    with pytest.raises(InputError, match=r"2 sources are not nodes.*'x'"):
        score(gallery.path(4), np.array([0, 0, 1, 1]), sources=["x", "0", "y"], eigengap=False)


# ------------------------------------------------------------------ outliers
def test_outlier_rule_against_scipy_mad():
    rng = np.random.default_rng(5)
    conductance = np.exp(rng.normal(np.log(0.05), 0.3, size=30))
    conductance[[4, 11]] = [0.6, 0.052]
    table = {"conductance": conductance, "size": np.full(30, 9.0), "boundary_links": np.ones(30)}
    flags = outlier_flags(pd.DataFrame(table))
    logs = np.log(conductance)
    # Modified z-score of Iglewicz and Hoaglin (1993), 0.6745 (x - median) / MAD,
    # with scipy's unscaled median absolute deviation.
    z = 0.6745 * (logs - np.median(logs)) / median_abs_deviation(logs)
    far = (z > OUTLIER_Z) & (logs - np.median(logs) >= np.log(OUTLIER_MIN_RATIO))
    assert far[4]
    assert not far[11]
    assert [f == "conductance high" for f in flags] == far.tolist()


def test_outlier_rule_needs_a_real_difference_and_enough_zones():
    base = {"conductance": [0.1] * 6, "size": [10.0] * 6, "boundary_links": [4] * 6}
    # MAD = 0, so any other value has an infinite z-score; 1.5x is below the ratio guard.
    table = pd.DataFrame({**base, "size": [10.0] * 5 + [15.0]})
    assert set(outlier_flags(table)) == {""}
    table = pd.DataFrame({**base, "size": [10.0] * 5 + [2.0]})
    assert outlier_flags(table).tolist()[-1] == "size low"
    # Low conductance and few boundary links are not a concern.
    table = pd.DataFrame(
        {**base, "conductance": [0.1] * 5 + [0.001], "boundary_links": [4] * 5 + [1]}
    )
    assert set(outlier_flags(table)) == {""}
    # Four zones are too few to judge.
    table = pd.DataFrame({k: v[:4] for k, v in {**base, "size": [10.0] * 3 + [1.0]}.items()})
    assert set(outlier_flags(table)) == {""}


def test_tiny_zone_is_flagged_in_a_scorecard():
    # A 10 x 40 grid cut into 8 blocks of 5 columns; two nodes of the last block
    # form their own zone: far smaller, far worse separated than the rest.
    net = gallery.grid(10, 40)
    labels = (np.arange(400) % 40) // 5
    labels[[39, 79]] = 8  # rows 0 and 1 of the last column, linked to each other
    card = score(net, labels, eigengap=False)
    flags = dict(zip(card.zones["zone"], card.zones["flags"], strict=True))
    assert "size low" in flags[8]
    assert "conductance high" in flags[8]
    assert all(flags[z] == "" for z in range(8))
    assert card.overall["flagged_zones"] == 1


# ------------------------------------------------------------------ eigengap
@pytest.mark.parametrize(("network", "k"), [(gallery.barbell(5), 2), (gallery.grid(5, 6), 3)])
def test_eigengap_matches_dense_eigh(network: Network, k: int):
    labels = np.arange(network.n_nodes) % k
    card = score(network, labels, rng=0)
    graph = nx.from_scipy_sparse_array(network.adjacency)
    # Dense reference: scipy.linalg.eigh of networkx's normalized Laplacian.
    values = la.eigh(nx.normalized_laplacian_matrix(graph).toarray(), eigvals_only=True)
    overall = card.overall
    assert overall["eigenvalue_k"] == pytest.approx(values[k - 1], abs=1e-8)
    assert overall["eigenvalue_next"] == pytest.approx(values[k], abs=1e-8)
    assert overall["relative_eigengap"] == pytest.approx((values[k] - values[k - 1]) / values[k])
    assert card.eigenvalues is not None
    np.testing.assert_allclose(card.eigenvalues, values[: k + 1], atol=1e-8)


def test_no_eigengap_keeps_every_key():
    card = score(gallery.path(5), np.array([0, 0, 1, 1, 1]), eigengap=False)
    assert card.eigenvalues is None
    assert card.overall["eigenvalue_k"] is None
    assert card.overall["relative_eigengap"] is None
    assert set(card.overall) == set(score(gallery.path(5), np.array([0, 0, 1, 1, 1])).overall)


def test_eigengap_skipped_when_zones_reach_node_count():
    card = score(gallery.path(3), np.array([0, 1, 2]))
    assert card.eigenvalues is None
    assert card.overall["eigengap"] is None


# ------------------------------------------------------------------ bad input
@pytest.mark.parametrize(
    ("labels", "error", "pattern"),
    [
        (np.array([0, 1, 1]), ParameterError, r"one zone per node \(4\)"),
        (np.array([0.0, 1.0, 1.0, 0.0]), ParameterError, "integers"),
        (np.array([0, -2, 1, 1]), ParameterError, "got -2"),
        (np.array([-1, -1, -1, -1]), InputError, "no node"),
    ],
    ids=["short", "float", "below-minus-one", "nothing-assigned"],
)
def test_bad_labels(labels: np.ndarray, error: type, pattern: str):
    with pytest.raises(error, match=pattern):
        score(gallery.path(4), labels, eigengap=False)


# ------------------------------------------------------- labels_from_mapping
def test_labels_from_mapping_counts_absent_nodes():
    net = gallery.path(6)
    labels, coverage = labels_from_mapping(net, {"5": 12, "0": 3, "1": 3})
    assert labels.tolist() == [3, 3, -1, -1, -1, 12]
    assert (coverage.listed, coverage.unassigned) == (3, 3)
    assert coverage.unassigned_examples == ("2", "3", "4")
    assert coverage.as_dict()["unassigned"] == 3


def test_labels_from_mapping_refuses_unknown_ids_with_count_and_path():
    mapping = {"0": 1, **{f"n{i}": 1 for i in range(7)}}
    with pytest.raises(InputError, match=r"zones\.csv: 7 of 8 node ids are not nodes.*'n0'") as err:
        labels_from_mapping(gallery.path(4), mapping, path="zones.csv")
    assert "'n5'" not in str(err.value)  # only the first few are shown
    assert err.value.path == "zones.csv"


def test_labels_from_mapping_refuses_bad_zones():
    with pytest.raises(InputError, match="zone numbers >= 0"):
        labels_from_mapping(gallery.path(3), {"0": -1})
    with pytest.raises(InputError, match="all text or all whole numbers"):
        labels_from_mapping(gallery.path(3), {"0": 1, "1": "North"})
    with pytest.raises(InputError, match="non-empty"):
        labels_from_mapping(gallery.path(3), {"0": ""})


def test_importance_is_pagerank_summed_per_zone() -> None:
    # Reference: networkx pagerank (random surfer with teleportation, damping 0.85) on the
    # karate club graph shipped with networkx, summed over an arbitrary two-zone split.
    graph = nx.karate_club_graph()
    network = Network.from_networkx(graph, weight="weight")
    labels = np.array([0 if graph.nodes[n]["club"] == "Mr. Hi" else 1 for n in graph])
    rows = [network.index_of[str(n)] for n in graph]
    card = score(network, labels[np.argsort(rows)], eigengap=False)
    reference = nx.pagerank(graph, alpha=0.85, weight="weight", tol=1e-13, max_iter=1000)
    per_zone = [sum(v for n, v in reference.items() if labels[n] == z) for z in (0, 1)]
    np.testing.assert_allclose(card.zones["importance"], per_zone, atol=1e-9)
    np.testing.assert_allclose(card.node_importance[rows], [reference[n] for n in graph], atol=1e-9)
    assert card.overall["damping"] == 0.85
    assert card.overall["importance_unassigned"] == 0.0
    assert score(network, labels, eigengap=False, importance=False).node_importance is None
