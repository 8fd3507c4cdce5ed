"""The shared zone-figures engine (specgraph._figures) against outside sources.

Oracles: networkx's cut functions (``nx.algorithms.cuts``: ``cut_size``, ``volume``,
``conductance``, ``normalized_cut_size``) and ``is_connected`` on the subgraph of each zone;
closed-form values of two cliques joined by one link (arithmetic in the comments); the
closed-form normalized-Laplacian spectrum of the path (Chung 1997, ch. 1, from memory; also
tabulated in CHECKS.md) through scipy's dense ``eigh``. Boundary links on a network with
parallel links: networkx ``edge_boundary`` on the ``MultiGraph`` (one edge per parallel
link, ``keys=True``) for the physical count, ``cut_size`` on the simple ``Graph`` for the
node pairs.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
import scipy.linalg as la

import specgraph
import specgraph.diagnostics
import specgraph.studies
import specgraph.zones
from specgraph import Network, gallery
from specgraph._figures import (
    boundary_links,
    check_labels,
    conductance,
    cut_and_volume,
    eigengaps,
    ncut_terms,
    normalized_cut,
    overall_scores,
    relative_gap,
    zone_figures,
    zone_table,
)
from specgraph.exceptions import ParameterError
from specgraph.report._plots import zone_colours
from specgraph.zones import ZoneConstraints


def weighted_random_graph() -> nx.Graph:
    """A G(n, m) graph (fixed seed) with affinities drawn uniformly from [0.1, 5)."""
    graph = nx.gnm_random_graph(60, 150, seed=11)
    rng = np.random.default_rng(11)
    for u, v in graph.edges:
        graph[u][v]["weight"] = float(rng.uniform(0.1, 5.0))
    graph.add_node(60)  # an isolated node: a zone of zero volume below
    return graph


GRAPHS = {
    "karate": nx.karate_club_graph,  # integer edge weights (networkx >= 2.7)
    "weighted-random": weighted_random_graph,
}


def zoning_of(graph: nx.Graph, k: int, seed: int) -> tuple[Network, np.ndarray, list[set]]:
    """Network, labels in network row order, and the zones as sets of graph nodes."""
    net = Network.from_networkx(graph, weight="weight")
    rng = np.random.default_rng(seed)
    by_node = {v: int(rng.integers(0, k)) for v in graph.nodes}
    labels = np.empty(net.n_nodes, dtype=np.int64)
    for v, z in by_node.items():
        labels[net.index_of[str(v)]] = z
    zones = [{v for v, z in by_node.items() if z == zone} for zone in range(k)]
    return net, labels, zones


@pytest.mark.parametrize("name", list(GRAPHS))
@pytest.mark.parametrize("k", [2, 3, 7])
def test_zone_figures_match_networkx_cuts(name: str, k: int) -> None:
    graph = GRAPHS[name]()
    net, labels, zones = zoning_of(graph, k, seed=k)
    figures = zone_figures(net, labels, k)
    for z, members in enumerate(zones):
        inner = graph.subgraph(members)
        # networkx cut_size / volume with and without weights (nx.algorithms.cuts).
        assert figures.boundary_weight[z] == pytest.approx(
            nx.cut_size(graph, members, weight="weight")
        )
        assert figures.boundary_links[z] == nx.cut_size(graph, members)
        assert figures.volume[z] == pytest.approx(nx.volume(graph, members, weight="weight"))
        assert figures.internal_weight[z] == pytest.approx(inner.size(weight="weight"))
        assert figures.nodes[z] == len(members)
        assert figures.size[z] == len(members)  # no node sizes: one per node
        # networkx is_connected on the zone's subgraph (an empty zone is not connected).
        assert bool(figures.connected[z]) == (len(members) > 0 and nx.is_connected(inner))


@pytest.mark.parametrize("name", list(GRAPHS))
def test_two_way_conductance_and_ncut_match_networkx(name: str) -> None:
    graph = GRAPHS[name]()
    net, labels, zones = zoning_of(graph, 2, seed=5)
    figures = zone_figures(net, labels, 2)
    total = float(net.degrees.sum())
    phi = conductance(figures.boundary_weight, figures.volume, total)
    for z in (0, 1):
        # networkx conductance: cut / min(vol S, vol T), T the complement.
        assert phi[z] == pytest.approx(nx.conductance(graph, zones[z], weight="weight"))
    # networkx normalized_cut_size: cut (1/vol S + 1/vol T), the 2-way normalized cut.
    expected = nx.normalized_cut_size(graph, zones[0], zones[1], weight="weight")
    assert normalized_cut(net.adjacency, labels) == pytest.approx(expected)
    assert ncut_terms(figures.boundary_weight, figures.volume).sum() == pytest.approx(expected)


@pytest.mark.parametrize("name", list(GRAPHS))
def test_k_way_normalized_cut_is_sum_of_networkx_ratios(name: str) -> None:
    graph = GRAPHS[name]()
    net, labels, zones = zoning_of(graph, 5, seed=2)
    # Shi and Malik's k-way normalized cut, sum_z cut(S_z)/vol(S_z), from networkx cuts;
    # a zone of zero volume (the isolated node alone, or an empty zone) adds 0.
    expected = sum(
        nx.cut_size(graph, s, weight="weight") / nx.volume(graph, s, weight="weight")
        for s in zones
        if s and nx.volume(graph, s, weight="weight") > 0
    )
    assert normalized_cut(net.adjacency, labels) == pytest.approx(expected)
    cut, volume = cut_and_volume(net.adjacency, labels, 5)
    assert cut.tolist() == pytest.approx([nx.cut_size(graph, s, weight="weight") for s in zones])
    assert volume.tolist() == pytest.approx([nx.volume(graph, s, weight="weight") for s in zones])


def parallel_multigraph() -> nx.MultiGraph:
    """A G(n, m) multigraph (fixed seed) in which a third of the links are laid twice or
    three times, each copy with its own pipe id and affinity."""
    simple = nx.gnm_random_graph(40, 90, seed=3)
    rng = np.random.default_rng(3)
    graph = nx.MultiGraph()
    graph.add_nodes_from(simple.nodes)
    for n_pipe, (u, v) in enumerate(simple.edges):
        copies = int(rng.choice([1, 1, 2, 3]))
        for copy in range(copies):
            graph.add_edge(u, v, weight=float(rng.uniform(0.5, 2.0)), pipe=f"QM-P{n_pipe}-{copy}")
    return graph


@pytest.mark.parametrize("k", [2, 4])
def test_boundary_links_count_parallel_links_as_networkx_multigraph(k: int) -> None:
    graph = parallel_multigraph()
    net, labels, zones = zoning_of(graph, k, seed=k)
    figures = zone_figures(net, labels, k)
    table = zone_table(net, labels)
    simple = nx.Graph(graph)
    for z, members in enumerate(zones):
        # networkx edge_boundary on a MultiGraph yields each parallel edge (keys=True).
        physical = len(list(nx.edge_boundary(graph, members, keys=True)))
        assert figures.boundary_links[z] == physical
        assert table["boundary_links"][z] == physical
        # networkx cut_size on the simple graph counts node pairs.
        assert figures.boundary_node_pairs[z] == nx.cut_size(simple, members)
    # The count differs from the node pairs on this network, so the check can fail.
    assert not np.array_equal(figures.boundary_links, figures.boundary_node_pairs)
    rows = boundary_links(net, labels)
    between = [
        (u, v, key)
        for u, v, key in graph.edges(keys=True)
        if labels[net.index_of[str(u)]] != labels[net.index_of[str(v)]]
    ]
    assert overall_scores(table)["boundary_links"] == len(rows) == len(between)
    assert sorted(rows["pipe"]) == sorted(graph.edges[e]["pipe"] for e in between)


def test_boundary_links_count_every_physical_link_of_a_zoning() -> None:
    # find_zones on the multigraph: the headline figure is the rows of the boundary table.
    graph = parallel_multigraph()
    zoning = specgraph.find_zones(Network.from_networkx(graph), 3, rng=0)
    expected = sum(
        len(list(nx.edge_boundary(graph, {int(v) for v in zone["node"]}, keys=True)))
        for _, zone in zoning.to_frame().groupby("zone")
    )
    assert zoning.scores["boundary_links"] == len(zoning.boundary) == expected // 2


def test_two_cliques_joined_by_one_link_closed_form() -> None:
    # Two K4 joined by one link (gallery.barbell(4)): each side holds 6 links and every
    # node has degree 3 inside its clique, plus 1 at the two ends of the bridge, so
    # vol = 4 * 3 + 1 = 13 per side and the cut is 1. Conductance 1 / min(13, 13) = 1/13;
    # normalized cut 1/13 + 1/13 = 2/13; the boundary is one link (algebra).
    net = gallery.barbell(4)
    labels = np.array([0, 0, 0, 0, 1, 1, 1, 1])
    figures = zone_figures(net, labels, 2)
    assert figures.internal_weight.tolist() == [6.0, 6.0]
    assert figures.volume.tolist() == [13.0, 13.0]
    assert figures.boundary_weight.tolist() == [1.0, 1.0]
    assert figures.boundary_links.tolist() == [1, 1]
    assert figures.connected.tolist() == [True, True]
    assert conductance(figures.boundary_weight, figures.volume, 26.0) == pytest.approx(
        [1 / 13, 1 / 13]
    )
    assert normalized_cut(net.adjacency, labels) == pytest.approx(2 / 13)


def test_split_zone_is_not_connected_and_empty_zone_adds_nothing() -> None:
    # Path 0-1-2-3-4 with zone 0 = {0, 4} (two pieces) and zone 2 empty: zone 0 has
    # volume 1 + 1 = 2 and cut 2, zone 1 = {1, 2, 3} volume 2 + 2 + 2 = 6 and cut 2, so
    # Ncut = 2/2 + 2/6 = 4/3 and zone 2 (volume 0) adds 0 (algebra).
    net = gallery.path(5)
    labels = np.array([0, 1, 1, 1, 0])
    figures = zone_figures(net, labels, 3)
    assert figures.connected.tolist() == [False, True, False]
    assert figures.nodes.tolist() == [2, 3, 0]
    assert ncut_terms(figures.boundary_weight, figures.volume).tolist() == pytest.approx(
        [1.0, 1 / 3, 0.0]
    )
    assert normalized_cut(net.adjacency, labels) == pytest.approx(4 / 3)


def test_zone_without_cut_has_zero_conductance() -> None:
    # A whole component as a zone: no cut, so conductance 0 even though min(vol S,
    # vol V - vol S) is 0 for a zone holding the whole network (definition in the module).
    assert conductance(np.array([0.0]), np.array([8.0]), 8.0).tolist() == [0.0]


@pytest.mark.parametrize("n", [6, 11])
def test_gaps_of_path_spectrum_match_closed_form(n: int) -> None:
    # Normalized Laplacian of the path P_n: 1 - cos(pi k / (n - 1)), k = 0..n-1 (Chung 1997,
    # ch. 1, from memory; CHECKS.md); eigenvalues by scipy.linalg.eigh of networkx's matrix.
    values = la.eigh(nx.normalized_laplacian_matrix(nx.path_graph(n)).toarray(), eigvals_only=True)
    exact = 1 - np.cos(np.pi * np.arange(n) / (n - 1))
    np.testing.assert_allclose(eigengaps(values[::-1]), np.diff(exact), atol=1e-12)
    rel = relative_gap(values[:-1], values[1:])
    np.testing.assert_allclose(rel, (exact[1:] - exact[:-1]) / exact[1:], atol=1e-10)


def test_relative_gap_is_undefined_without_a_positive_next_eigenvalue() -> None:
    # Two components: lambda_1 = lambda_2 = 0, so (lambda_2 - lambda_1)/lambda_2 is 0/0.
    assert np.isnan(relative_gap(0.0, 0.0))
    assert relative_gap(np.array([0.0, 0.2]), np.array([0.0, 0.5]), undefined=0.0).tolist() == (
        pytest.approx([0.0, 0.6])
    )


# ------------------------------------------------------------------ label check
# The contract documented in check_labels (no outside oracle: these are its rules).
@pytest.mark.parametrize(
    ("labels", "options", "message"),
    [
        ([0, 1], {"n_nodes": 3}, "labels must hold one zone per node (3); got shape (2,)."),
        ([[0, 1]], {}, "labels must be one-dimensional; got shape (1, 2)."),
        (
            [0.0, 1.0],
            {"name": "zones"},
            "zones must hold integers, one zone number per node; got dtype float64.",
        ),
        ([0, -1], {}, "labels must hold zone numbers >= 0; got -1."),
        (
            [0, -2],
            {"unassigned": True},
            "labels must hold zone numbers >= 0, or -1 for unassigned; got -2.",
        ),
    ],
    ids=["length", "two-dimensional", "float", "negative", "below-unassigned"],
)
def test_check_labels_refuses(labels: list, options: dict, message: str) -> None:
    with pytest.raises(ParameterError) as info:
        check_labels(labels, **options)
    assert str(info.value) == message
    assert info.value.parameter == options.get("name", "labels")
    assert info.value.received is labels


def test_check_labels_accepts_and_converts() -> None:
    given = np.array([3, 0, -1], dtype=np.int32)
    out = check_labels(given, n_nodes=3, unassigned=True)
    assert out.dtype == np.int64
    assert out.tolist() == [3, 0, -1]
    same = np.array([1, 0], dtype=np.int64)
    assert check_labels(same) is same
    assert check_labels(same, copy=True) is not same
    assert check_labels(np.array([]), n_nodes=0).dtype == np.int64  # no label, no dtype


def _every_label_taker(labels: np.ndarray) -> list:
    """Each public function that takes labels of the 4-node path, called with ``labels``."""
    net = gallery.path(4)
    a = net.adjacency
    good = np.array([0, 0, 1, 1])
    return [
        lambda: specgraph.zone_table(net, labels),
        lambda: specgraph.score(net, labels, eigengap=False),
        lambda: specgraph.diagnostics.check_labels(net, labels),
        lambda: specgraph.diagnostics.robustness(net, labels=labels),
        lambda: specgraph.compare(good, labels),
        lambda: specgraph.zones.normalized_cut(a, labels),
        lambda: specgraph.zones.refine_boundary(a, labels),
        lambda: specgraph.zones.balance_sizes(a, labels, max_size=3),
        lambda: specgraph.zones.enforce_constraints(a, labels, ZoneConstraints().resolve(net)),
        lambda: specgraph.zones.constraint_violations(a, labels, ZoneConstraints().resolve(net)),
        lambda: specgraph.studies.match_zones(good, labels),
        lambda: zone_colours(net, labels),
    ]


@pytest.mark.parametrize(
    "labels",
    [np.array([0, 1, 1]), np.array([[0, 0, 1, 1]]), np.array([0.0, 0.0, 1.0, 1.0])],
    ids=["short", "two-dimensional", "float"],
)
def test_every_function_refuses_bad_labels_alike(labels: np.ndarray) -> None:
    # The same wrong labels meet the same check everywhere: one class, one argument.
    for call in _every_label_taker(labels):
        with pytest.raises(ParameterError) as info:
            call()
        assert info.value.parameter in ("labels", "labels_b")
        assert info.value.received is labels
