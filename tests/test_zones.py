"""Zones: sweep cuts (Cheeger), spectral clustering on graphs with a known truth, allocation.

Truths come from networkx generators (barbell, planted partition, stochastic
block model carry their blocks); partitions are compared up to relabelling with
scikit-learn's ``adjusted_rand_score`` (CHECKS.md); cut figures are compared
with networkx's ``conductance``, ``cut_size`` and ``normalized_cut_size``.
"""

from __future__ import annotations

import itertools
import json
import pickle

import networkx as nx
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.metrics import adjusted_rand_score
from sklearn.preprocessing import normalize

from specgraph import Network, gallery, laplacian, smallest_eigenpairs
from specgraph.diagnostics import cheeger_bounds
from specgraph.zones import (
    allocate_zones,
    find_zones,
    normalized_rows,
    number_by_size,
    sweep_cut,
)

KINDS = ["normalized", "random_walk", "combinatorial"]
METHODS = ["dense", "lanczos", "multilevel"]
#: Recovery threshold for a planted partition far above the detectability limit
#: (common practice).
ARI_PLANTED = 0.95


def to_networkx(net: Network) -> nx.Graph:
    """Graph on row indices with the network's weights (networkx builds it)."""
    return nx.from_scipy_sparse_array(net.adjacency)


def geometric_network(weighted_graph) -> Network:
    return Network.from_networkx(weighted_graph("geometric", 200, seed=4))


# ------------------------------------------------------ sweep cut / Cheeger
CHEEGER_CASES = {
    "path60": lambda wg: gallery.path(60),
    "grid12x15": lambda wg: gallery.grid(12, 15),
    "barbell10": lambda wg: gallery.barbell(10),
    "geometric200": geometric_network,
    "two_zone40": lambda wg: gallery.two_zone(40),
}


@pytest.mark.parametrize("name", list(CHEEGER_CASES))
def test_sweep_cut_meets_cheeger_bounds(weighted_graph, name: str) -> None:
    net = CHEEGER_CASES[name](weighted_graph)
    result = smallest_eigenpairs(laplacian(net, kind="normalized"), 2, method="dense")
    lam2 = result.values[1]
    cut = sweep_cut(net, result.vectors[:, 1])
    # Cheeger: lambda_2/2 <= phi(G) <= phi(sweep of D^-1/2 v_2) <= sqrt(2 lambda_2)
    # (Chung 1997, Thm 2.2 (from memory); Spielman, Spectral Graph Theory notes,
    # Cheeger's inequality (from memory)).
    assert lam2 / 2 <= cut.conductance <= np.sqrt(2 * lam2)
    low, high = cheeger_bounds(lam2)
    assert low <= cut.conductance <= high
    graph = to_networkx(net)
    inside = set(np.flatnonzero(cut.inside).tolist())
    reference = nx.conductance(graph, inside, weight="weight")
    assert cut.conductance == pytest.approx(reference, rel=1e-12)
    # ``inside`` is the smaller-volume side (SweepCut docstring).
    vol_in = nx.volume(graph, inside, weight="weight")
    assert vol_in <= nx.volume(graph, set(graph) - inside, weight="weight")


def test_sweep_profile_matches_networkx_prefix_by_prefix(weighted_graph) -> None:
    graph = weighted_graph("gnm", 30, seed=2)
    net = Network.from_networkx(graph)
    vector = np.random.default_rng(0).standard_normal(net.n_nodes)
    cut = sweep_cut(net, vector, degree_scaled=True)
    d = np.array([graph.degree(v, weight="weight") for v in range(net.n_nodes)])
    order = np.argsort(vector / np.sqrt(d), kind="stable")
    expected = [
        nx.conductance(graph, set(order[: i + 1].tolist()), weight="weight")
        for i in range(net.n_nodes - 1)
    ]
    np.testing.assert_allclose(cut.profile, expected, rtol=1e-12)
    assert cut.conductance == pytest.approx(min(expected), rel=1e-12)


def test_sweep_without_degree_scaling_sorts_the_vector_itself() -> None:
    # Path 0-1-...-7; vector puts nodes {0, 1, 2} first: the cut is the single link 2-3.
    net = gallery.path(8)
    vector = np.array([0.0, 0.1, 0.2, 5.0, 5.1, 5.2, 5.3, 5.4])
    cut = sweep_cut(net, vector, degree_scaled=False)
    graph = nx.path_graph(8)
    assert cut.conductance == pytest.approx(nx.conductance(graph, {0, 1, 2, 3}), rel=1e-15)
    assert set(np.flatnonzero(cut.inside).tolist()) in ({0, 1, 2, 3}, {4, 5, 6, 7})


# ---------------------------------------------------- zones with known truth
@pytest.mark.parametrize("method", METHODS)
@pytest.mark.parametrize("kind", KINDS)
@pytest.mark.parametrize("bridge", [1.0, 0.01], ids=["bridge1", "bridge0.01"])
def test_barbell_splits_at_the_bridge(bridge: float, kind: str, method: str) -> None:
    m = 8
    net = gallery.barbell(m, bridge_weight=bridge)
    zoning = find_zones(net, 2, operator=kind, eigen_method=method, rng=0)
    truth = [0] * m + [1] * m  # networkx barbell_graph: bells 0..m-1 and m..2m-1
    assert adjusted_rand_score(truth, zoning.labels) == 1.0
    boundary = zoning.boundary
    assert len(boundary) == 1
    assert {boundary.loc[0, "source"], boundary.loc[0, "target"]} == {str(m - 1), str(m)}
    assert boundary.loc[0, "weight"] == bridge


@pytest.mark.parametrize("kind", KINDS)
def test_two_cliques_with_a_weak_link_shuffled_ids(kind: str) -> None:
    # Cliques of 7 and 9 nodes, one link of weight 0.01, links given in random order.
    graph = nx.disjoint_union(nx.complete_graph(7), nx.complete_graph(9))
    nx.set_edge_attributes(graph, 1.0, "weight")
    graph.add_edge(3, 10, weight=0.01)
    names = {v: f"J{(v * 7919) % 1009}" for v in graph}  # distinct opaque ids
    edges = list(graph.edges(data="weight"))
    rng = np.random.default_rng(1)
    rng.shuffle(edges)
    net = Network.from_links(
        [names[u] for u, _, _ in edges], [names[v] for _, v, _ in edges], [w for *_, w in edges]
    )
    zoning = find_zones(net, 2, operator=kind, rng=5)
    truth_by_name = {names[v]: int(v >= 7) for v in graph}
    truth = [truth_by_name[i] for i in net.node_ids.tolist()]
    assert adjusted_rand_score(truth, zoning.labels) == 1.0
    crossing = [(names[u], names[v]) for u, v in graph.edges if (u >= 7) != (v >= 7)]
    found = list(zip(zoning.boundary["source"], zoning.boundary["target"], strict=True))
    assert [frozenset(e) for e in found] == [frozenset(e) for e in crossing]
    # Bigger clique first: zones are numbered by descending size.
    assert zoning.zones["nodes"].tolist() == [9, 7]


def test_planted_partition_recovered() -> None:
    q, size, p_in, p_out = 4, 40, 0.35, 0.01
    graph = nx.planted_partition_graph(q, size, p_in, p_out, seed=7)
    # Decelle et al., PRE 84, 066106 (2011): detectable iff |c_in - c_out| > q sqrt(c),
    # with p = c / N. Check the instance is far above that limit ("clear gap").
    n = q * size
    c_in, c_out = p_in * n, p_out * n
    c = (c_in + (q - 1) * c_out) / q
    assert abs(c_in - c_out) > 2 * q * np.sqrt(c)
    truth = [graph.nodes[v]["block"] for v in graph]  # networkx carries the truth
    for method in METHODS:
        zoning = find_zones(Network.from_networkx(graph), q, eigen_method=method, rng=0)
        assert adjusted_rand_score(truth, zoning.labels) >= ARI_PLANTED


def test_stochastic_block_model_recovered() -> None:
    sizes = [60, 40, 30]
    probs = [[0.30, 0.01, 0.01], [0.01, 0.35, 0.01], [0.01, 0.01, 0.40]]
    graph = nx.stochastic_block_model(sizes, probs, seed=3)
    truth = [graph.nodes[v]["block"] for v in graph]
    zoning = find_zones(Network.from_networkx(graph), 3, rng=0)
    assert adjusted_rand_score(truth, zoning.labels) >= ARI_PLANTED
    assert zoning.zones["nodes"].tolist() == sorted(np.bincount(zoning.labels), reverse=True)


# ------------------------------------------------------ disconnected input
def disconnected_network() -> tuple[Network, nx.Graph]:
    graph = nx.disjoint_union_all([nx.path_graph(10), nx.cycle_graph(20), nx.complete_graph(5)])
    graph.add_node(35)
    return Network.from_networkx(graph), graph


def test_fewer_zones_than_components_is_raised_with_a_warning() -> None:
    net, graph = disconnected_network()
    zoning = find_zones(net, 2, rng=0)
    components = nx.number_connected_components(graph)
    assert zoning.n_zones == components == 4
    assert any("raised" in w for w in zoning.warnings)
    # One zone per component, exactly: the components themselves (ARI = 1).
    truth = np.empty(len(graph), dtype=int)
    for c, nodes in enumerate(nx.connected_components(graph)):
        truth[[int(net.index_of[str(v)]) for v in nodes]] = c
    assert adjusted_rand_score(truth, zoning.labels) == 1.0
    assert zoning.boundary.empty


@pytest.mark.parametrize("zones", [4, 7, 12])
def test_every_component_gets_a_zone_and_zones_stay_inside(zones: int) -> None:
    net, graph = disconnected_network()
    zoning = find_zones(net, zones, rng=0)
    assert zoning.n_zones == zones
    assert not any("raised" in w for w in zoning.warnings)
    components = list(nx.connected_components(graph))
    # A zone never spans two components (it could not be connected) ...
    for z in range(zones):
        members = {int(net.node_ids[i]) for i in np.flatnonzero(zoning.labels == z)}
        assert any(members <= comp for comp in components)
    # ... so the zone counts per component add up to the request, none above its size.
    per_component = [
        len(set(zoning.labels[[net.index_of[str(v)] for v in comp]].tolist()))
        for comp in components
    ]
    assert sum(per_component) == zones
    assert all(count <= len(comp) for count, comp in zip(per_component, components, strict=True))


def test_zones_numbered_by_descending_node_size() -> None:
    # Node sizes make the small clique the heavy zone.
    graph = nx.disjoint_union(nx.complete_graph(12), nx.complete_graph(5))
    graph.add_edge(0, 12)
    for v in graph:
        graph.nodes[v]["pop"] = 1.0 if v < 12 else 100.0
    net = Network.from_networkx(graph, size="pop")
    zoning = find_zones(net, 2, rng=0)
    assert zoning.zones["size"].tolist() == [500.0, 12.0]
    assert set(np.flatnonzero(zoning.labels == 0).tolist()) == set(range(12, 17))


def test_same_seed_same_labels(weighted_graph) -> None:
    net = Network.from_networkx(weighted_graph("geometric", 300, seed=21))
    first = find_zones(net, 5, rng=42)
    second = find_zones(net, 5, rng=np.random.default_rng(42))
    assert first.labels.tobytes() == second.labels.tobytes()


# --------------------------------------------- zoning figures vs networkx
def test_zoning_figures_match_networkx(weighted_graph) -> None:
    net = Network.from_networkx(weighted_graph("geometric", 200, seed=4))
    zoning = find_zones(net, 2, rng=0)
    graph = to_networkx(net)
    s = set(np.flatnonzero(zoning.labels == 0).tolist())
    t = set(graph) - s
    table = zoning.zones
    for zone, members in ((0, s), (1, t)):
        row = table.loc[table["zone"] == zone].iloc[0]
        assert row["conductance"] == pytest.approx(
            nx.conductance(graph, members, weight="weight"), rel=1e-12
        )
        assert row["boundary_weight"] == pytest.approx(
            nx.cut_size(graph, members, weight="weight"), rel=1e-12
        )
    # networkx normalized_cut_size = cut (1/vol S + 1/vol T): Shi-Malik Ncut for 2 zones.
    assert zoning.scores["normalized_cut"] == pytest.approx(
        nx.normalized_cut_size(graph, s, t, weight="weight"), rel=1e-12
    )
    crossing = {frozenset((str(u), str(v))) for u, v in graph.edges if (u in s) != (v in s)}
    found = {
        frozenset(p) for p in zip(zoning.boundary["source"], zoning.boundary["target"], strict=True)
    }
    assert found == crossing
    assert len(zoning.boundary) == len(crossing)


def test_spectrum_matches_eigh_of_the_component() -> None:
    import scipy.linalg as la

    net = gallery.two_zone(30, seed=2)
    zoning = find_zones(net, 3, rng=0)
    spectrum = zoning.spectrum()
    reference = la.eigvalsh(laplacian(net).matrix.toarray())[:4]  # k + 1 values
    np.testing.assert_allclose(spectrum["eigenvalue"], reference, rtol=0, atol=1e-12)
    np.testing.assert_allclose(spectrum["gap_after"][:-1], np.diff(reference), atol=1e-12)


# ----------------------------------------------------------------- helpers
def test_normalized_rows_match_scikit_learn() -> None:
    rng = np.random.default_rng(3)
    vectors = rng.standard_normal((20, 4))
    vectors[5] = 0.0  # a zero row stays zero, as in sklearn.preprocessing.normalize
    np.testing.assert_allclose(normalized_rows(vectors), normalize(vectors), rtol=1e-14)


def test_number_by_size_is_a_relabelling_by_descending_size() -> None:
    rng = np.random.default_rng(4)
    labels = rng.integers(10, 17, size=200)
    weights = rng.uniform(0.5, 2.0, size=200)
    new = number_by_size(labels, weights)
    assert adjusted_rand_score(labels, new) == 1.0  # same partition
    sizes = np.bincount(new, weights=weights)
    assert np.all(np.diff(sizes) <= 0)
    assert sorted(set(new.tolist())) == list(range(7))


def _largest_average_zone(weights: np.ndarray, counts: np.ndarray) -> float:
    return float(np.max(weights / counts))


@pytest.mark.parametrize(
    ("weights", "nodes", "k"),
    [
        ([10.0, 20.0, 5.0, 1.0], [10, 20, 5, 1], 7),
        ([90.0, 9.0, 1.0], [90, 9, 1], 10),
        ([3.0, 1.0], [1000, 1000], 8),
        ([50.0, 40.0, 10.0], [3, 40, 10], 12),
    ],
    ids=["10-20-5-1_k7", "90-9-1_k10", "3-1_k8", "capped-first"],
)
def test_allocate_zones_minimizes_the_largest_average_zone(weights, nodes, k: int) -> None:
    # The greatest-average (D'Hondt) rule minimizes max_i w_i / c_i over all
    # allocations with 1 <= c_i <= nodes_i and sum c_i = k (M. L. Balinski and
    # H. P. Young, *Fair Representation*, 1982 (from memory)). Checked here by
    # brute force over every allocation.
    w, caps = np.array(weights), np.array(nodes)
    counts = allocate_zones(w, caps, k)
    assert counts.sum() == k
    assert np.all((counts >= 1) & (counts <= caps))
    best = min(
        _largest_average_zone(w, np.array(c))
        for c in itertools.product(*(range(1, min(cap, k) + 1) for cap in caps))
        if sum(c) == k
    )
    assert _largest_average_zone(w, counts) == pytest.approx(best, rel=1e-12)


@settings(max_examples=150, deadline=None, database=None)
@given(
    st.lists(
        st.tuples(st.integers(1, 30), st.floats(0.0, 50.0, allow_nan=False)),
        min_size=1,
        max_size=8,
    ),
    st.data(),
)
def test_allocate_zones_invariants(components, data) -> None:
    nodes = np.array([n for n, _ in components])
    weights = np.array([w for _, w in components])
    k = data.draw(st.integers(nodes.size, int(nodes.sum())))
    counts = allocate_zones(weights, nodes, k)
    assert counts.sum() == k
    assert np.all(counts >= 1)
    assert np.all(counts <= nodes)


# --------------------------------------------------------- read-only zoning
@pytest.fixture(scope="module")
def barbell_zoning():
    # Two 5-cliques joined by one link: two zones, cut at the bridge (the eigengap after
    # the second eigenvalue of a barbell is large; Chung 1997, ch. 1, from memory).
    return find_zones(gallery.barbell(5), "auto", rng=0)


def test_zoning_labels_are_read_only(barbell_zoning) -> None:
    zoning = barbell_zoning
    before = zoning.labels.copy()
    with pytest.raises(ValueError, match="read-only"):
        zoning.labels[0] = 7
    np.testing.assert_array_equal(zoning.labels, before)
    for solve in zoning.solves:
        with pytest.raises(ValueError, match="read-only"):
            solve.nodes[0] = 1
        with pytest.raises(ValueError, match="read-only"):
            solve.eigen.vectors[0, 0] = 1.0


@pytest.mark.parametrize(
    "change",
    [
        pytest.param(lambda z: z.parameters.__setitem__("tol", 1.0), id="set-parameter"),
        pytest.param(lambda z: z.parameters.pop("tol"), id="pop-parameter"),
        pytest.param(lambda z: z.scores.update(zones=3), id="update-scores"),
        pytest.param(lambda z: z.decisions["operator"].clear(), id="clear-nested-decision"),
        pytest.param(
            lambda z: z.decisions["zone_count"]["evidence"].append({}), id="append-nested-list"
        ),
    ],
)
def test_zoning_records_refuse_changes(barbell_zoning, change) -> None:
    zoning = barbell_zoning
    before = json.dumps(zoning.decisions, sort_keys=True), dict(zoning.parameters)
    with pytest.raises(TypeError, match="read-only"):
        change(zoning)
    assert (json.dumps(zoning.decisions, sort_keys=True), dict(zoning.parameters)) == before


def test_zoning_records_read_and_serialize_like_dicts(barbell_zoning) -> None:
    zoning = barbell_zoning
    assert isinstance(zoning.parameters, dict)
    assert zoning.parameters["zones"] == "auto"
    assert zoning.decisions["zone_count"]["choice"] == 2
    # json.dumps and pickle see plain dicts; a copy is an ordinary, writable dict.
    assert json.loads(json.dumps(zoning.parameters)) == dict(zoning.parameters)
    again = pickle.loads(pickle.dumps(zoning))
    np.testing.assert_array_equal(again.labels, zoning.labels)
    # (compared as JSON text: the count evidence holds NaN, which is unequal to itself)
    assert json.dumps(again.decisions) == json.dumps(zoning.decisions)
    assert not again.labels.flags.writeable
    copied = dict(zoning.parameters)
    copied["tol"] = 1.0
    assert zoning.parameters["tol"] != 1.0


def _grid_with_weak_branches(side: int = 8, branch: int = 6, tie: float = 0.05) -> nx.Graph:
    """A side x side grid (unit links) with a dangling path hung from each corner by a weak link."""
    graph = nx.convert_node_labels_to_integers(nx.grid_2d_graph(side, side))
    nx.set_edge_attributes(graph, 1.0, "weight")
    corners = [0, side - 1, side * (side - 1), side * side - 1]
    for number, corner in enumerate(corners):
        path = [f"b{number}-{i}" for i in range(branch)]
        graph.add_edge(corner, path[0], weight=tie)
        nx.add_path(graph, path, weight=1.0)
    return graph


def test_auto_trees_keeps_the_lower_cut_of_attached_and_kept_trees() -> None:
    graph = _grid_with_weak_branches()
    net = Network.from_networkx(graph)
    auto = find_zones(net, 2, rng=0)
    attached = find_zones(net, 2, trees="attach", rng=0)
    kept = find_zones(net, 2, trees="keep", rng=0)
    cuts = {z: float(x.scores["normalized_cut"]) for z, x in (("attach", attached), ("keep", kept))}
    # Cutting one weak tie (0.05) costs far less than any cut through the grid, which
    # only the kept trees allow: the auto rule attached them, the comparison keeps them.
    assert cuts["keep"] < cuts["attach"]
    assert auto.decisions["trees"]["choice"] == "keep"
    assert auto.decisions["trees"]["compared"] == pytest.approx(cuts)
    assert auto.parameters["trees"] == "auto"
    # The delivered cut is the two-zone normalized cut as networkx computes it.
    ids = list(net.node_ids)
    side = {node for node, zone in zip(graph.nodes, auto.labels, strict=True) if zone == 0}
    assert str(next(iter(graph.nodes))) == ids[0]
    expected = nx.normalized_cut_size(graph, side, weight="weight")
    assert float(auto.scores["normalized_cut"]) == pytest.approx(expected, rel=1e-12)


def test_auto_trees_never_worse_than_either_treatment() -> None:
    graph = _grid_with_weak_branches(side=10, branch=8, tie=0.5)
    net = Network.from_networkx(graph)
    for k in (3, 5):
        auto = float(find_zones(net, k, rng=0).scores["normalized_cut"])
        for trees in ("attach", "keep"):
            named = float(find_zones(net, k, trees=trees, rng=0).scores["normalized_cut"])
            assert auto <= named * (1 + 1e-9)
