"""Directed networks: arcs kept on reading, Chung's directed Laplacian, zoning with it."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pandas as pd
import pytest
import scipy.linalg as la
from sklearn.metrics import adjusted_rand_score

from specgraph import Network, laplacian, smallest_eigenpairs
from specgraph.exceptions import InputError, ParameterError
from specgraph.io import network_from_frames, read_edges
from specgraph.walks import stationary_distribution
from specgraph.zones import find_zones

EPS = np.finfo(np.float64).eps


def arcs_of(net: Network) -> np.ndarray:
    assert net.arcs is not None
    return net.arcs.toarray()


def random_directed(n: int, seed: int) -> Network:
    graph = nx.gnp_random_graph(n, 3.5 / n, directed=True, seed=seed)
    rng = np.random.default_rng(seed)
    edges = list(graph.edges)
    return Network.from_links(
        [u for u, _ in edges],
        [v for _, v in edges],
        rng.uniform(0.5, 2.0, len(edges)),
        node_ids=range(n),
        directed=True,
    )


def chung_dense(walk: np.ndarray, phi: np.ndarray) -> np.ndarray:
    """Chung 2005, Annals of Combinatorics 9:1-19, definition of the directed Laplacian."""
    root, inv = np.diag(np.sqrt(phi)), np.diag(1.0 / np.sqrt(phi))
    return np.eye(phi.size) - (root @ walk @ inv + inv @ walk.T @ root) / 2.0


def dense_walks(net: Network, damping: float) -> tuple[np.ndarray, np.ndarray]:
    """Arc walk P (zero rows at dangling nodes) and the random-surfer matrix G, densely."""
    arcs = arcs_of(net)
    out = arcs.sum(axis=1)
    p = np.divide(arcs, out[:, None], out=np.zeros_like(arcs), where=out[:, None] > 0)
    n = arcs.shape[0]
    jump = np.where(out > 0, 1.0 - damping, 1.0)  # dangling rows jump with probability 1
    return p, damping * p + np.outer(jump, np.full(n, 1.0 / n))


def perron(matrix: np.ndarray) -> np.ndarray:
    """Left eigenvector of eigenvalue 1 of a row-stochastic matrix (scipy.linalg.eig)."""
    values, vectors = la.eig(matrix.T)
    top = vectors[:, np.argmin(abs(values - 1.0))].real
    return top / top.sum()


# ------------------------------------------------------------------ reading
def test_from_links_keeps_direction_and_policies() -> None:
    net = Network.from_links(
        ["a", "a", "b", "c", "c"],
        ["b", "b", "a", "c", "a"],
        [1.0, 2.0, 0.5, 4.0, 0.0],
        directed=True,
    )
    assert net.directed
    assert net.n_arcs == 2
    assert net.n_links == 1
    # a->b repeated (summed), b->a a separate arc, c->c a self-loop, c->a zero.
    assert arcs_of(net).tolist() == [[0.0, 3.0, 0.0], [0.5, 0.0, 0.0], [0.0, 0.0, 0.0]]
    np.testing.assert_array_equal(net.adjacency.toarray(), arcs_of(net) + arcs_of(net).T)
    assert net.notes["duplicate_links_merged"] == 1
    assert net.notes["self_loops_dropped"] == 1
    assert net.notes["zero_weight_links_dropped"] == 1
    undirected = Network.from_links(["a", "a", "b"], ["b", "b", "a"], [1.0, 2.0, 0.5])
    assert not undirected.directed
    assert undirected.arcs is None
    np.testing.assert_array_equal(undirected.adjacency.toarray(), net.adjacency.toarray()[:2, :2])


def test_arcs_must_match_adjacency() -> None:
    arcs = np.array([[0.0, 1.0], [0.0, 0.0]])
    with pytest.raises(InputError, match="arcs"):
        Network(np.array([[0.0, 2.0], [2.0, 0.0]]), np.array(["a", "b"]), arcs=arcs)
    Network(np.array([[0.0, 1.0], [1.0, 0.0]]), np.array(["a", "b"]), arcs=arcs)


def test_subnetwork_carries_arcs() -> None:
    net = random_directed(20, seed=3)
    rows = np.array([4, 1, 7, 9, 12])
    sub = net.subnetwork(rows)
    np.testing.assert_array_equal(arcs_of(sub), arcs_of(net)[np.ix_(rows, rows)])


def test_readers_pass_direction(tmp_path) -> None:
    frame = pd.DataFrame({"source": ["p", "q", "r"], "target": ["q", "r", "p"]})
    path = tmp_path / "edges.csv"
    frame.to_csv(path, index=False)
    for net in (read_edges(path, directed=True), network_from_frames(frame, directed=True)):
        assert net.directed
        expected = np.array([[0, 1, 0], [0, 0, 1], [1, 0, 0]], dtype=float)
        np.testing.assert_array_equal(arcs_of(net), expected)
    assert not read_edges(path).directed


# ------------------------------------------------------------- the operator
@pytest.mark.parametrize("damping", [0.5, 0.85])
def test_directed_laplacian_against_chung_definition(damping: float) -> None:
    # Chung's Laplacian of the random surfer G, built densely; ours keeps the
    # teleport flow as holding steps, i.e. subtracts Phi^-1/2 L_T Phi^-1/2 with
    # L_T the combinatorial Laplacian of the symmetrized teleport flow
    # (specgraph.laplacian, Notes).
    net = random_directed(25, seed=7)
    p, g = dense_walks(net, damping)
    phi = perron(g)
    tele = np.diag(phi) @ (g - damping * p)
    tele = (tele + tele.T) / 2.0
    inv = np.diag(1.0 / np.sqrt(phi))
    expected = chung_dense(g, phi) - inv @ (np.diag(tele.sum(axis=1)) - tele) @ inv
    op = laplacian(net, kind="directed", damping=damping)
    np.testing.assert_allclose(op.to_dense(), expected, atol=1e-8)
    # Weyl: ours is Chung's minus a positive semi-definite term.
    ours = la.eigh(op.to_dense(), eigvals_only=True)
    chung = la.eigh(chung_dense(g, phi), eigvals_only=True)
    assert np.all(ours <= chung + 1e-9)


def test_directed_laplacian_is_symmetric_psd_with_null_vector() -> None:
    net = random_directed(60, seed=5)
    op = laplacian(net, kind="directed")
    dense = op.to_dense()
    assert op.matrix.format == "csr"
    assert op.matrix.nnz <= net.adjacency.nnz + net.n_nodes
    np.testing.assert_array_equal(dense, dense.T)
    values = la.eigh(dense, eigvals_only=True)  # scipy eigh reference
    scale = 100 * net.n_nodes * EPS
    assert values.min() >= -scale
    assert values.max() <= 2.0 + scale
    phi = stationary_distribution(net).values
    c = net.n_components
    assert op.null_basis.shape == (net.n_nodes, c)
    assert np.count_nonzero(values < 1e-10) == c
    for comp in range(c):
        rows = net.component_labels == comp
        root = np.where(rows, np.sqrt(phi), 0.0)
        column = op.null_basis[:, comp]
        np.testing.assert_allclose(abs(column @ root), np.linalg.norm(root), rtol=1e-9)
        assert np.linalg.norm(dense @ root) <= 1e-12 * np.linalg.norm(root)


def test_tends_to_chung_without_teleport_on_strongly_connected() -> None:
    # A strongly connected aperiodic digraph (a cycle of 9 with chords): as the
    # damping tends to 1 the walk is the arc walk P and Phi its Perron vector,
    # so the operator tends to Chung's Laplacian of P (Chung 2005, Def. 1).
    n = 9
    src = [*list(range(n)), 0, 3, 5]
    dst = [(i + 1) % n for i in range(n)] + [4, 7, 1]
    net = Network.from_links(src, dst, directed=True)
    p, _ = dense_walks(net, 0.5)
    expected = chung_dense(p, perron(p))
    op = laplacian(net, kind="directed", damping=1.0 - 1e-9)
    np.testing.assert_allclose(op.to_dense(), expected, atol=1e-6)


def test_eigen_engine_solves_it_unchanged() -> None:
    net = random_directed(80, seed=11)
    op = laplacian(net, kind="directed")
    result = smallest_eigenpairs(op, 4, method="lanczos", rng=0)
    reference = la.eigh(op.to_dense(), eigvals_only=True)[:4]  # scipy eigh reference
    np.testing.assert_allclose(result.values, reference, atol=1e-6)


def test_directed_kind_refuses_what_it_cannot_take() -> None:
    undirected = Network.from_links(["a", "b"], ["b", "c"])
    with pytest.raises(ParameterError, match="directed network"):
        laplacian(undirected, kind="directed")
    directed = Network.from_links(["a", "b"], ["b", "c"], directed=True)
    with pytest.raises(ParameterError, match="damping"):
        laplacian(directed, kind="normalized", damping=0.5)
    with pytest.raises(ParameterError, match="damping"):
        laplacian(directed, kind="directed", damping=1.0)


# --------------------------------------------------------------------- zoning
def two_cycles(size: int, weak: float) -> tuple[Network, np.ndarray]:
    src, dst, w = [], [], []
    for offset in (0, size):
        for i in range(size):
            src.append(offset + i)
            dst.append(offset + (i + 1) % size)
            w.append(1.0)
    src.append(2)
    dst.append(size + 5)
    w.append(weak)
    truth = np.repeat([0, 1], size)
    return Network.from_links(src, dst, w, directed=True), truth


@pytest.mark.parametrize("zones", [2, "auto"])
def test_find_zones_directed_separates_two_cycles(zones) -> None:
    net, truth = two_cycles(12, 0.05)
    zoning = find_zones(net, zones, operator="directed", rng=0)
    assert adjusted_rand_score(truth, zoning.labels) == 1.0  # scikit-learn ARI, up to relabelling
    record = zoning.decisions["directed"]
    assert record["damping"] == 0.85
    assert record["solves"]
    assert all(s["stationary_error_bound"] < 1e-8 for s in record["solves"])
    assert zoning.parameters["damping"] == 0.85


def test_find_zones_directed_with_attached_trees_keeps_arcs() -> None:
    net, _truth = two_cycles(12, 0.05)
    extra = Network.from_links(
        [*net.link_table["source"], "0", "t1", "12", "t3"],
        [*net.link_table["target"], "t1", "t2", "t3", "t4"],
        [*net.link_table["weight"], 1.0, 1.0, 1.0, 1.0],
        directed=True,
    )
    zoning = find_zones(extra, 2, operator="directed", trees="attach", rng=0)
    labels = dict(zip(extra.node_ids.tolist(), zoning.labels.tolist(), strict=True))
    assert labels["t2"] == labels["0"]
    assert labels["t4"] == labels["12"] != labels["0"]


def test_find_zones_directed_needs_arcs_and_valid_damping() -> None:
    net, _ = two_cycles(6, 0.1)
    undirected = Network(net.adjacency, net.node_ids)
    with pytest.raises(ParameterError, match="directed network"):
        find_zones(undirected, 2, operator="directed")
    with pytest.raises(ParameterError, match="damping"):
        find_zones(net, 2, operator="directed", damping=0.0)
