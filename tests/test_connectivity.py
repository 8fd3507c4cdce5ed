"""The connectivity kernel of the zones (``specgraph.zones._connectivity``).

Outside reference: networkx on each zone's induced subgraph
(``number_connected_components``, ``is_connected``, ``connected_components``,
``node_connected_component``), on random graphs (``gnm_random_graph``) with
random labelings, so that zones in several pieces, isolated nodes and empty
zones all occur.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
import scipy.sparse as sp

from specgraph import Network
from specgraph.zones._connectivity import (
    edge_rows,
    inner_links,
    pieces_per_zone,
    reach,
    stays_connected,
    zone_pieces,
)

# (nodes, links, zones): sparse graphs with many pieces, denser ones with few.
CASES = [(30, 25, 3), (40, 60, 4), (60, 150, 5), (80, 100, 8), (25, 200, 2)]
CASE_IDS = [f"n{n}-m{m}-k{k}" for n, m, k in CASES]


def random_case(n: int, m: int, k: int, seed: int) -> tuple[nx.Graph, Network, np.ndarray]:
    """A networkx random graph, the same graph as a Network, and random labels."""
    graph = nx.gnm_random_graph(n, m, seed=seed)
    rng = np.random.default_rng(seed)
    for u, v in graph.edges:
        graph.edges[u, v]["weight"] = float(rng.uniform(0.5, 2.0))
    net = Network.from_scipy(nx.to_scipy_sparse_array(graph, nodelist=range(n)))
    labels = rng.integers(0, k, n).astype(np.int64)
    return graph, net, labels


def zone_graph(graph: nx.Graph, labels: np.ndarray, zone: int) -> nx.Graph:
    return graph.subgraph(np.flatnonzero(labels == zone).tolist())


@pytest.mark.parametrize(("n", "m", "k"), CASES, ids=CASE_IDS)
@pytest.mark.parametrize("seed", [0, 1, 2])
def test_pieces_per_zone_match_networkx(n, m, k, seed):
    # networkx number_connected_components on each zone's induced subgraph;
    # an empty zone has no piece.
    graph, net, labels = random_case(n, m, k, seed)
    counts = pieces_per_zone(net.adjacency, labels, k)
    for z in range(k):
        sub = zone_graph(graph, labels, z)
        expected = nx.number_connected_components(sub) if sub.number_of_nodes() else 0
        assert counts[z] == expected


@pytest.mark.parametrize(("n", "m", "k"), CASES, ids=CASE_IDS)
@pytest.mark.parametrize("seed", [0, 1, 2])
def test_one_piece_exactly_when_networkx_says_connected(n, m, k, seed):
    # networkx is_connected on each non-empty zone's induced subgraph.
    graph, net, labels = random_case(n, m, k, seed)
    counts = pieces_per_zone(net.adjacency, labels, k)
    for z in np.unique(labels).tolist():
        assert (counts[z] == 1) == nx.is_connected(zone_graph(graph, labels, z))


@pytest.mark.parametrize(("n", "m", "k"), CASES, ids=CASE_IDS)
def test_zone_pieces_are_the_networkx_components_of_each_zone(n, m, k):
    # The pieces, as sets of nodes, are exactly networkx's connected
    # components of the zones' induced subgraphs (a comparison of set
    # partitions, free of piece numbering).
    graph, net, labels = random_case(n, m, k, seed=5)
    count, piece = zone_pieces(net.adjacency, labels)
    ours = {frozenset(np.flatnonzero(piece == p).tolist()) for p in range(count)}
    theirs = {
        frozenset(c)
        for z in np.unique(labels).tolist()
        for c in nx.connected_components(zone_graph(graph, labels, z))
    }
    assert ours == theirs
    assert len(ours) == count
    assert piece.dtype == np.int64


def test_inner_links_keep_exactly_the_links_inside_zones():
    # networkx: the union of the zones' induced subgraphs has exactly the
    # links whose ends share a label.
    graph, net, labels = random_case(40, 90, 3, seed=7)
    inner = inner_links(net.adjacency, labels).tocoo()
    ours = {
        (min(u, v), max(u, v)) for u, v in zip(inner.row.tolist(), inner.col.tolist(), strict=True)
    }
    theirs = {
        (min(u, v), max(u, v)) for z in range(3) for u, v in zone_graph(graph, labels, z).edges
    }
    assert ours == theirs
    # The weights are carried over unchanged (scipy's own COO rows as reference).
    coo = net.adjacency.tocoo()
    same = labels[coo.row] == labels[coo.col]
    expected = sp.coo_array((coo.data[same], (coo.row[same], coo.col[same])), shape=inner.shape)
    assert abs(inner.tocsr() - expected.tocsr()).max() == 0


def test_edge_rows_are_the_coo_rows():
    # scipy's CSR -> COO conversion gives the row of every stored entry.
    _, net, _ = random_case(30, 70, 2, seed=3)
    a = net.adjacency
    assert np.array_equal(edge_rows(a), a.tocoo().row)


def stays_connected_reference(graph: nx.Graph, labels: np.ndarray, v: int) -> bool:
    """v's neighbours in its zone lie in one networkx component of the zone without v."""
    zone = set(np.flatnonzero(labels == labels[v]).tolist()) - {v}
    near = [u for u in graph.neighbors(v) if u in zone]
    if len(near) <= 1:
        return True
    return set(near) <= nx.node_connected_component(graph.subgraph(zone), near[0])


def search_buffers(n: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    return np.zeros((2, n), dtype=np.int64), np.zeros(2, dtype=np.int64), np.empty(n, np.int64)


@pytest.mark.parametrize(("n", "m", "k"), CASES, ids=CASE_IDS)
@pytest.mark.parametrize("seed", [0, 1])
def test_exact_local_test_matches_networkx(n, m, k, seed):
    graph, net, labels = random_case(n, m, k, seed)
    a = net.adjacency
    marks, stamp, queue = search_buffers(n)
    answers = []
    for v in range(n):
        got = stays_connected(v, n, a.indptr, a.indices, labels, marks, stamp, queue)
        assert got == stays_connected_reference(graph, labels, v)
        answers.append(got)
    # Both answers occur on the sparser graphs, so the check can fail either
    # way (on the densest one every zone survives every removal).
    assert any(answers)
    if m <= 2 * n:
        assert not all(answers)


@pytest.mark.parametrize("limit", [1, 2, 4])
def test_bounded_local_test_never_allows_a_split(limit):
    # Conservative: under a visit bound, "stays connected" may turn into a
    # refusal, never the other way (networkx reference as above).
    graph, net, labels = random_case(80, 130, 3, seed=11)
    a = net.adjacency
    marks, stamp, queue = search_buffers(80)
    refused = 0
    for v in range(80):
        got = stays_connected(v, limit, a.indptr, a.indices, labels, marks, stamp, queue)
        exact = stays_connected_reference(graph, labels, v)
        assert exact or not got
        refused += exact and not got
    assert refused > 0  # the bound did bite


def test_search_that_runs_out_closes_the_networkx_piece():
    # A path 0-1-2-3-4 in one zone: without node 2, the search from 1 cannot
    # reach 3 and closes the piece {0, 1} (networkx node_connected_component).
    graph = nx.path_graph(5)
    net = Network.from_scipy(nx.to_scipy_sparse_array(graph))
    a = net.adjacency
    labels = np.zeros(5, dtype=np.int64)
    marks, stamp, queue = search_buffers(5)
    stamp[0] += 1
    marks[0, [1, 3]] = stamp[0]  # targets: node 2's neighbours
    status, visited = reach(1, 2, 2, 5, a.indptr, a.indices, labels, marks, stamp, queue)
    assert status == 0
    expected = nx.node_connected_component(graph.subgraph([0, 1, 3, 4]), 1)
    assert set(queue[:visited].tolist()) == expected
    # With a bound of one visit the same search stops undecided.
    status, _ = reach(1, 2, 2, 1, a.indptr, a.indices, labels, marks, stamp, queue)
    assert status == -1
