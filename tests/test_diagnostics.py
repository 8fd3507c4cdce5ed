"""Zoning diagnostics against networkx's cut functions, exact fractions and brute force.

Definitions (CHECKS.md; networkx ``algorithms.cuts``): for a zone S,
conductance(S) = w(S, S') / min(vol S, vol S'); normalized cut of a zoning
= sum_z w(S_z, S_z') / vol S_z (Shi and Malik 2000), which for two zones is
networkx's ``normalized_cut_size`` = cut (1/vol S + 1/vol T).
"""

from __future__ import annotations

from fractions import Fraction
from itertools import product

import networkx as nx
import numpy as np
import pytest
import scipy.linalg as la

from specgraph import Network
from specgraph.diagnostics import (
    boundary_links,
    cheeger_bounds,
    eigengaps,
    overall_scores,
    suggest_zone_counts,
    zone_table,
)
from specgraph.exceptions import ParameterError


def random_labels(n: int, k: int, seed: int) -> np.ndarray:
    """Random zone of each node, every zone 0..k-1 used at least once."""
    rng = np.random.default_rng(seed)
    labels = rng.integers(0, k, size=n)
    labels[rng.choice(n, k, replace=False)] = np.arange(k)
    return labels


RANDOM_CASES = [
    pytest.param(graph, k, seed, id=f"{graph}-k{k}-seed{seed}")
    for graph in ["gnm", "geometric"]
    for k in (2, 3, 4, 5)
    for seed in (0, 1)
]


# ----------------------------------------------- per-zone figures vs networkx
@pytest.mark.parametrize(("graph_kind", "k", "seed"), RANDOM_CASES)
def test_zone_table_matches_networkx(weighted_graph, graph_kind: str, k: int, seed: int) -> None:
    graph = weighted_graph(graph_kind, 40, seed=seed)
    net = Network.from_networkx(graph)
    labels = random_labels(net.n_nodes, k, seed)
    table = zone_table(net, labels)
    assert table["zone"].tolist() == list(range(k))
    for z in range(k):
        members = set(np.flatnonzero(labels == z).tolist())
        row = table.iloc[z]
        assert row["nodes"] == len(members)
        assert row["volume"] == pytest.approx(nx.volume(graph, members, weight="weight"), rel=1e-13)
        assert row["boundary_weight"] == pytest.approx(
            nx.cut_size(graph, members, weight="weight"), rel=1e-13
        )
        assert row["conductance"] == pytest.approx(
            nx.conductance(graph, members, weight="weight"), rel=1e-13
        )
        sub = graph.subgraph(members)
        assert row["internal_weight"] == pytest.approx(sub.size(weight="weight"), rel=1e-13)
        assert bool(row["connected"]) == nx.is_connected(sub)
        crossing = sum(1 for u, v in graph.edges if (u in members) != (v in members))
        assert row["boundary_links"] == crossing


@pytest.mark.parametrize(("graph_kind", "k", "seed"), RANDOM_CASES)
def test_boundary_links_are_networkx_crossing_edges(
    weighted_graph, graph_kind: str, k: int, seed: int
) -> None:
    graph = weighted_graph(graph_kind, 40, seed=seed)
    net = Network.from_networkx(graph)
    labels = random_labels(net.n_nodes, k, seed)
    table = boundary_links(net, labels)
    expected = {
        frozenset((str(u), str(v))): w
        for u, v, w in graph.edges(data="weight")
        if labels[u] != labels[v]
    }
    found = {}
    for row in table.itertuples(index=False):
        found[frozenset((row.source, row.target))] = row.weight
        assert row.zone_a == labels[int(row.source)]
        assert row.zone_b == labels[int(row.target)]
    assert len(table) == len(expected)
    assert found == expected


@pytest.mark.parametrize(("graph_kind", "k", "seed"), RANDOM_CASES)
def test_overall_scores_match_networkx(weighted_graph, graph_kind: str, k: int, seed: int) -> None:
    graph = weighted_graph(graph_kind, 40, seed=seed)
    net = Network.from_networkx(graph)
    labels = random_labels(net.n_nodes, k, seed)
    scores = overall_scores(zone_table(net, labels))
    zones = [set(np.flatnonzero(labels == z).tolist()) for z in range(k)]
    ncut = sum(
        nx.cut_size(graph, s, weight="weight") / nx.volume(graph, s, weight="weight") for s in zones
    )
    assert scores["normalized_cut"] == pytest.approx(ncut, rel=1e-13)
    if k == 2:
        reference = nx.normalized_cut_size(graph, zones[0], zones[1], weight="weight")
        assert scores["normalized_cut"] == pytest.approx(reference, rel=1e-13)
    crossing = [(u, v, w) for u, v, w in graph.edges(data="weight") if labels[u] != labels[v]]
    assert scores["boundary_weight"] == pytest.approx(sum(w for *_, w in crossing), rel=1e-13)
    assert scores["boundary_links"] == len(crossing)
    conductances = [nx.conductance(graph, s, weight="weight") for s in zones]
    assert scores["max_conductance"] == pytest.approx(max(conductances), rel=1e-13)
    assert scores["all_connected"] == all(nx.is_connected(graph.subgraph(s)) for s in zones)
    # Algebra (CHECKS.md): conductance <= Ncut(S) <= 2 conductance for each zone.
    for s, phi in zip(zones, conductances, strict=True):
        ncut_s = nx.normalized_cut_size(graph, s, weight="weight")
        assert phi <= ncut_s * (1 + 1e-12)
        assert ncut_s <= 2 * phi * (1 + 1e-12)


# ------------------------------------------------------------ exact fractions
def test_exact_fractions_on_a_hand_built_network() -> None:
    # Dyadic weights add exactly in float64, so every sum below is exact and
    # each quotient is one correctly rounded division of exact numbers.
    links = [
        ("a", "b", Fraction(1, 2)),
        ("b", "c", Fraction(3, 4)),
        ("a", "c", Fraction(5, 8)),
        ("c", "d", Fraction(1, 8)),
        ("d", "e", Fraction(2)),
        ("e", "f", Fraction(3, 2)),
        ("d", "f", Fraction(1, 4)),
        ("b", "e", Fraction(1, 16)),
        ("g", "h", Fraction(7, 4)),
    ]
    nodes = ["a", "b", "c", "d", "e", "f", "g", "h"]
    zone_of = {"a": 0, "b": 0, "c": 0, "d": 1, "e": 1, "f": 1, "g": 2, "h": 2}
    net = Network.from_links(
        [u for u, _, _ in links],
        [v for _, v, _ in links],
        [float(w) for *_, w in links],
        node_ids=nodes,
    )
    labels = np.array([zone_of[v] for v in nodes])
    table = zone_table(net, labels)
    total = 2 * sum(w for *_, w in links)
    ncut = Fraction(0)
    for z in range(3):
        cut = sum(w for u, v, w in links if (zone_of[u] == z) != (zone_of[v] == z))
        internal = sum(w for u, v, w in links if zone_of[u] == zone_of[v] == z)
        vol = sum(w for u, v, w in links if zone_of[u] == z) + sum(
            w for u, v, w in links if zone_of[v] == z
        )
        phi = cut / min(vol, total - vol) if cut else Fraction(0)
        ncut += cut / vol
        row = table.iloc[z]
        assert row["boundary_weight"] == float(cut)
        assert row["internal_weight"] == float(internal)
        assert row["volume"] == float(vol)
        assert row["conductance"] == float(phi)
    assert table["conductance"].iloc[2] == 0.0  # a whole component: no boundary
    assert overall_scores(table)["normalized_cut"] == pytest.approx(float(ncut), rel=4e-16)
    assert overall_scores(table)["boundary_weight"] == float(Fraction(1, 8) + Fraction(1, 16))


def test_empty_zone_number_gets_a_row_of_zeros() -> None:
    net = Network.from_networkx(nx.path_graph(4))
    table = zone_table(net, np.array([0, 0, 2, 2]))
    row = table.iloc[1]
    assert (row["nodes"], row["volume"], row["boundary_weight"]) == (0, 0.0, 0.0)
    assert not row["connected"]


@pytest.mark.parametrize(
    "labels",
    [np.array([0, 1, 1]), np.array([0, -1, 1, 1]), np.array([0.0, 1.0, 1.0, 0.0])],
    ids=["wrong-length", "negative", "float"],
)
def test_bad_labels_are_refused(labels: np.ndarray) -> None:
    # Labels are an argument: the one label check refuses them as a parameter.
    net = Network.from_networkx(nx.path_graph(4))
    with pytest.raises(ParameterError, match=r"^labels must"):
        zone_table(net, labels)


# ------------------------------------------------ brute-force minimum conductance
BRUTE_FORCE = {
    # graph builder, exact minimum conductance (CHECKS.md, checked there by brute force)
    "cycle12": (lambda: nx.cycle_graph(12), Fraction(1, 6)),
    "path12": (lambda: nx.path_graph(12), Fraction(1, 11)),
    "complete8": (lambda: nx.complete_graph(8), Fraction(4, 7)),
    "petersen": (nx.petersen_graph, Fraction(1, 3)),
    "hypercube4": (
        lambda: nx.convert_node_labels_to_integers(nx.hypercube_graph(4), ordering="sorted"),
        Fraction(1, 4),
    ),
}
#: Bipartitions scored through zone_table one by one (0.3 ms each); beyond
#: this, all subsets are scored by the test's own vectorized definition and
#: zone_table is checked on the minimizers and a random sample.
ZONE_TABLE_LIMIT = 4096
SAMPLE = 300


def all_bipartitions(n: int) -> np.ndarray:
    """Indicator rows of every S containing node 0 with S != V (S and V - S are one cut)."""
    rest = np.array(list(product([0, 1], repeat=n - 1)), dtype=bool)
    rows = np.column_stack([np.ones(len(rest), dtype=bool), rest])
    return rows[~rows.all(axis=1)]


def conductance_by_definition(adjacency: np.ndarray, subsets: np.ndarray) -> np.ndarray:
    x = subsets.astype(float)
    degrees = adjacency.sum(axis=1)
    cut = np.einsum("si,ij,sj->s", x, adjacency, 1.0 - x)
    vol = x @ degrees
    return cut / np.minimum(vol, degrees.sum() - vol)


@pytest.mark.parametrize("name", list(BRUTE_FORCE))
def test_brute_force_minimum_conductance(name: str) -> None:
    build, exact = BRUTE_FORCE[name]
    graph = build()
    n = len(graph)
    net = Network.from_networkx(graph)
    order = [int(v) for v in net.node_ids]
    adjacency = nx.to_numpy_array(graph, nodelist=order)
    subsets = all_bipartitions(n)
    by_definition = conductance_by_definition(adjacency, subsets)
    assert by_definition.min() == pytest.approx(float(exact), rel=1e-14)
    if len(subsets) <= ZONE_TABLE_LIMIT:
        checked = np.arange(len(subsets))
    else:
        rng = np.random.default_rng(0)
        minimizers = np.flatnonzero(np.isclose(by_definition, by_definition.min(), rtol=1e-12))
        checked = np.r_[minimizers, rng.choice(len(subsets), SAMPLE, replace=False)]
    ours = np.empty(checked.size)
    for i, s in enumerate(checked):
        table = zone_table(net, (~subsets[s]).astype(np.int64))  # zone 0 holds node 0
        phi = table["conductance"].to_numpy()
        assert phi[0] == phi[1]  # one cut, seen from either side
        ours[i] = phi[0]
    np.testing.assert_allclose(ours, by_definition[checked], rtol=1e-14)
    assert ours.min() == pytest.approx(float(exact), rel=1e-14)
    # Cheeger: lambda_2 / 2 <= phi(G) <= sqrt(2 lambda_2), with lambda_2 of N by
    # scipy.linalg.eigh on networkx's normalized Laplacian (Chung 1997, Thm 2.2
    # (from memory)).
    normalized = nx.normalized_laplacian_matrix(graph, nodelist=order).toarray()
    lam2 = la.eigvalsh(normalized)[1]
    low, high = cheeger_bounds(lam2)
    assert (low, high) == pytest.approx((lam2 / 2, np.sqrt(2 * lam2)), rel=1e-15)
    assert low <= float(exact) <= high


# ----------------------------------------------------------- spectral evidence
def test_eigengaps_are_consecutive_differences() -> None:
    values = np.array([0.3, 0.0, 0.01, 0.5])
    np.testing.assert_array_equal(eigengaps(values), np.diff(np.sort(values)))


def cliques_in_a_ring(count: int, size: int, link: float) -> nx.Graph:
    """``count`` cliques of ``size`` nodes, consecutive cliques joined by one weak link."""
    graph = nx.disjoint_union_all([nx.complete_graph(size) for _ in range(count)])
    nx.set_edge_attributes(graph, 1.0, "weight")
    for c in range(count):
        graph.add_edge(c * size, ((c + 1) % count) * size + 1, weight=link)
    return graph


@pytest.mark.parametrize("count", [3, 4, 6])
def test_suggested_zone_count_finds_planted_cliques(count: int) -> None:
    # Higher-order Cheeger (Lee, Oveis Gharan and Trevisan, J. ACM 2014 (from
    # memory)): k sparse cuts keep lambda_k small, and lambda_{k+1} is large
    # when no (k+1)-th sparse cut exists.
    graph = cliques_in_a_ring(count, 8, 0.05)
    values = la.eigvalsh(nx.normalized_laplacian_matrix(graph).toarray())[: count + 4]
    best = suggest_zone_counts(values, top=3)
    assert best[0]["zones"] == count
    assert best[0]["eigenvalue"] == values[count - 1]
    assert best[0]["next_eigenvalue"] == values[count]


def test_suggestions_start_above_the_component_count() -> None:
    graph = nx.disjoint_union_all([nx.complete_graph(6), nx.cycle_graph(9), nx.path_graph(5)])
    values = la.eigvalsh(nx.normalized_laplacian_matrix(graph).toarray())[:10]
    c = nx.number_connected_components(graph)
    suggestions = suggest_zone_counts(values, n_components=c, top=10)
    assert suggestions
    assert min(s["zones"] for s in suggestions) == c + 1
    gaps = [s["relative_gap"] for s in suggestions]
    assert gaps == sorted(gaps, reverse=True)
