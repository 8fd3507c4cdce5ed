"""Laplacian operators against scipy.sparse.csgraph.laplacian and networkx."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
import scipy.linalg as la
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components
from scipy.sparse.csgraph import laplacian as csgraph_laplacian

from specgraph import Network, laplacian
from specgraph.exceptions import ParameterError

EPS = np.finfo(np.float64).eps


def graph_with_isolated_nodes(weighted_graph) -> nx.Graph:
    """Two random weighted components, plus two isolated nodes (rows 0 and last)."""
    graph = nx.Graph()
    graph.add_node(0)
    graph = nx.disjoint_union_all(
        [graph, weighted_graph("gnm", 25, seed=11), weighted_graph("geometric", 30, seed=12)]
    )
    graph.add_node(len(graph))
    return graph


@pytest.fixture
def network_and_adjacency(weighted_graph) -> tuple[Network, np.ndarray]:
    graph = graph_with_isolated_nodes(weighted_graph)
    adjacency = nx.to_numpy_array(graph, nodelist=list(graph.nodes), weight="weight")
    return Network.from_networkx(graph), adjacency


# ------------------------------------------------------- matrices themselves
def test_combinatorial_matches_csgraph_and_networkx(network_and_adjacency) -> None:
    net, adjacency = network_and_adjacency
    op = laplacian(net, kind="combinatorial")
    reference = csgraph_laplacian(adjacency, normed=False)  # scipy: L = D - A
    scale = np.abs(reference).max()
    np.testing.assert_allclose(op.matrix.toarray(), reference, rtol=0, atol=4 * EPS * scale)
    graph = nx.from_numpy_array(adjacency)
    by_networkx = nx.laplacian_matrix(graph, weight="weight").toarray()
    np.testing.assert_allclose(op.matrix.toarray(), by_networkx, rtol=0, atol=4 * EPS * scale)


@pytest.mark.parametrize("kind", ["normalized", "random_walk"])
def test_normalized_matches_csgraph_and_networkx(network_and_adjacency, kind: str) -> None:
    # The random-walk kind is represented by its symmetric similar matrix N.
    net, adjacency = network_and_adjacency
    op = laplacian(net, kind=kind)
    reference = csgraph_laplacian(adjacency, normed=True)  # scipy: I - D^-1/2 A D^-1/2
    np.testing.assert_allclose(op.matrix.toarray(), reference, rtol=0, atol=8 * EPS)
    graph = nx.from_numpy_array(adjacency)
    by_networkx = nx.normalized_laplacian_matrix(graph, weight="weight").toarray()
    np.testing.assert_allclose(op.matrix.toarray(), by_networkx, rtol=0, atol=8 * EPS)


@pytest.mark.parametrize("kind", ["combinatorial", "normalized", "random_walk"])
def test_matrix_is_symmetric_to_rounding(network_and_adjacency, kind: str) -> None:
    # scipy.linalg.eigh and ARPACK's symmetric driver read one triangle only, so
    # asymmetry beyond rounding (a couple of ulps of ||M||) would be silently
    # dropped (common practice).
    net, _ = network_and_adjacency
    op = laplacian(net, kind=kind)
    assert abs(op.matrix - op.matrix.T).max() <= 2 * EPS * op.norm_bound


@pytest.mark.parametrize("kind", ["combinatorial", "normalized"])
def test_norm_bound_bounds_the_two_norm(network_and_adjacency, kind: str) -> None:
    # Gershgorin: ||L||_2 <= 2 max d, ||N||_2 <= 2 (Chung 1997, Lemma 1.7 (from memory)).
    net, adjacency = network_and_adjacency
    op = laplacian(net, kind=kind)
    two_norm = np.linalg.norm(op.matrix.toarray(), 2)
    assert two_norm <= op.norm_bound * (1 + 4 * EPS)
    expected = 2.0 * adjacency.sum(axis=1).max() if kind == "combinatorial" else 2.0
    assert op.norm_bound == pytest.approx(expected, rel=1e-14)


def test_unknown_kind_is_refused() -> None:
    net = Network.from_links(["a"], ["b"])
    with pytest.raises(ParameterError, match="kind"):
        laplacian(net, kind="signless")


# --------------------------------------------------------------- null basis
@pytest.mark.parametrize("kind", ["combinatorial", "normalized", "random_walk"])
def test_null_basis_is_one_orthonormal_column_per_component(
    network_and_adjacency, kind: str
) -> None:
    net, adjacency = network_and_adjacency
    op = laplacian(net, kind=kind)
    count, labels = connected_components(sp.csr_array(adjacency), directed=False)
    basis = op.null_basis
    assert basis.shape == (adjacency.shape[0], count)
    np.testing.assert_allclose(basis.T @ basis, np.eye(count), rtol=0, atol=8 * EPS)
    # Null vectors: M b = 0 up to rounding relative to the norm (common practice).
    assert np.abs(op.matrix @ basis).max() <= 16 * EPS * op.norm_bound
    degrees = adjacency.sum(axis=1)
    for c in range(count):
        inside = labels == c
        if kind == "combinatorial":
            weight = inside.astype(float)  # indicator of the component (Chung 1997, ch. 1)
        elif degrees[inside].sum() > 0:
            weight = np.where(inside, np.sqrt(degrees), 0.0)  # D^1/2 1 on the component
        else:
            weight = inside.astype(float)  # isolated node: the unit vector
        expected = weight / np.linalg.norm(weight)
        # Each component's column, found by its support, equals the expected vector.
        column = np.flatnonzero(np.abs(basis[inside]).sum(axis=0) > 0)
        assert column.size == 1
        np.testing.assert_allclose(basis[:, column[0]], expected, rtol=0, atol=8 * EPS)


# ---------------------------------------------------- random-walk mapping
def test_to_user_vectors_gives_random_walk_eigenvectors(weighted_graph) -> None:
    graph = weighted_graph("geometric", 40, seed=6)
    net = Network.from_networkx(graph)
    op = laplacian(net, kind="random_walk")
    values, vectors = la.eigh(op.matrix.toarray())
    mapped = op.to_user_vectors(vectors)
    adjacency = nx.to_numpy_array(graph, nodelist=sorted(graph), weight="weight")
    walk = np.eye(len(graph)) - adjacency / adjacency.sum(axis=1)[:, None]  # I - D^-1 A
    # Shi and Malik 2000: (I - D^-1 A) v = lambda v with v = D^-1/2 u.
    np.testing.assert_allclose(walk @ mapped, mapped * values, rtol=0, atol=1e-12)
    np.testing.assert_allclose(np.linalg.norm(mapped, axis=0), 1.0, rtol=1e-14)


@pytest.mark.parametrize("kind", ["combinatorial", "normalized"])
def test_to_user_vectors_is_identity_for_symmetric_kinds(kind: str) -> None:
    net = Network.from_networkx(nx.path_graph(5))
    vectors = np.random.default_rng(0).standard_normal((5, 3))
    np.testing.assert_array_equal(laplacian(net, kind=kind).to_user_vectors(vectors), vectors)
