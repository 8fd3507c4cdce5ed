"""Stationary distribution of the random surfer vs dense eigenvectors, networkx, closed forms."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
import scipy.linalg as la

from specgraph import Network
from specgraph.exceptions import ConvergenceError, InputError, ParameterError
from specgraph.walks import MAXITER_SLACK, default_maxiter, stationary_distribution


def directed_network(graph: nx.DiGraph) -> Network:
    edges = list(graph.edges(data="weight", default=1.0))
    return Network.from_links(
        [u for u, _, _ in edges],
        [v for _, v, _ in edges],
        [w for _, _, w in edges],
        node_ids=list(graph.nodes),
        directed=True,
    )


def random_digraph(n: int, seed: int, *, sinks: int = 0) -> nx.DiGraph:
    """A weighted random digraph whose first ``sinks`` nodes have no outgoing arc."""
    graph = nx.gnp_random_graph(n, 3.0 / n, directed=True, seed=seed)
    rng = np.random.default_rng(seed)
    graph.remove_edges_from([(u, v) for u, v in list(graph.edges) if u < sinks])
    for u, v in graph.edges:
        graph[u][v]["weight"] = float(rng.uniform(0.5, 2.0))
    return graph


def dense_google(graph: nx.DiGraph, damping: float, v: np.ndarray) -> np.ndarray:
    """The random-surfer matrix built densely: dangling rows jump by ``v``."""
    w = nx.to_numpy_array(graph, nodelist=list(graph.nodes), weight="weight")
    out = w.sum(axis=1)
    p = np.where(out[:, None] > 0, w / np.where(out > 0, out, 1.0)[:, None], v[None, :])
    return damping * p + (1.0 - damping) * np.ones((w.shape[0], 1)) * v[None, :]


@pytest.mark.parametrize("sinks", [0, 3], ids=["no-dangling", "three-dangling"])
@pytest.mark.parametrize("damping", [0.5, 0.85, 0.95])
def test_matches_dense_eigenvector(sinks: int, damping: float) -> None:
    # Reference: the left Perron eigenvector of the dense Google matrix by
    # scipy.linalg.eig (eigenvalue 1, Perron-Frobenius).
    graph = random_digraph(30, seed=4, sinks=sinks)
    v = np.full(30, 1.0 / 30)
    values, vectors = la.eig(dense_google(graph, damping, v).T)
    top = vectors[:, np.argmin(abs(values - 1.0))].real
    expected = top / top.sum()
    result = stationary_distribution(directed_network(graph), damping=damping)
    dangling = [node for node in graph if graph.out_degree(node) == 0]
    assert result.converged
    assert result.dangling == len(dangling) >= sinks
    assert np.abs(result.values - expected).sum() <= result.error_bound + 1e-12
    np.testing.assert_allclose(result.values, expected, atol=1e-9)


@pytest.mark.parametrize("sinks", [0, 4])
def test_matches_networkx_pagerank_with_personalization(sinks: int) -> None:
    # Reference: networkx.pagerank, whose dangling nodes also jump by the
    # personalization vector when `dangling` is not given.
    graph = random_digraph(40, seed=9, sinks=sinks)
    weights = {node: float(1 + node % 3) for node in graph.nodes if node % 2 == 0}
    expected = nx.pagerank(graph, alpha=0.85, personalization=weights, tol=1e-14, max_iter=1000)
    result = stationary_distribution(
        directed_network(graph), personalization={str(k): w for k, w in weights.items()}
    )
    np.testing.assert_allclose(result.values, [expected[n] for n in graph.nodes], atol=1e-9)
    array = np.array([weights.get(n, 0.0) for n in graph.nodes])
    again = stationary_distribution(directed_network(graph), personalization=array)
    np.testing.assert_allclose(again.values, result.values, atol=1e-15)


def test_undirected_network_walks_its_links() -> None:
    # Reference: networkx.pagerank on the undirected graph (each link both ways).
    graph = nx.les_miserables_graph()
    net = Network.from_networkx(graph)
    expected = nx.pagerank(graph, alpha=0.85, tol=1e-14, max_iter=1000)
    result = stationary_distribution(net)
    np.testing.assert_allclose(result.values, [expected[n] for n in graph.nodes], atol=1e-9)


def test_directed_cycle_is_uniform() -> None:
    # Closed form: on a directed cycle every node has one in- and one out-arc,
    # so the uniform distribution is stationary for any damping (symmetry).
    n = 11
    net = Network.from_links(range(n), [(i + 1) % n for i in range(n)], directed=True)
    for damping in (0.3, 0.85, 0.99):
        result = stationary_distribution(net, damping=damping)
        np.testing.assert_allclose(result.values, np.full(n, 1.0 / n), atol=1e-12)


@pytest.mark.parametrize("leaves", [3, 10])
@pytest.mark.parametrize("damping", [0.6, 0.85])
def test_star_centre_share_closed_form(leaves: int, damping: float) -> None:
    # Closed form derived from the stationarity equations with uniform
    # teleport 1/(n+1) (algebra in this comment, no outside value):
    # undirected star: phi_c = a n phi_l + (1-a)/(n+1), phi_l = a phi_c/n + (1-a)/(n+1),
    # n phi_l = 1 - phi_c  =>  phi_c = (a n + 1) / ((1 + a)(n + 1)).
    # In-star (leaves -> centre, centre dangling, its step goes to v):
    # phi_c = a (1 - phi_c) + (a phi_c + 1 - a)/(n+1)  =>  phi_c = (a n + 1)/(n + 1 + a n).
    a, n = damping, leaves
    star = Network.from_networkx(nx.star_graph(n))
    assert star.node_ids[0] == "0"
    # Tolerance: the run's own L1 error bound (contraction, Langville and Meyer 2004).
    undirected = stationary_distribution(star, damping=a)
    expected = (a * n + 1) / ((1 + a) * (n + 1))
    assert undirected.values[0] == pytest.approx(expected, abs=undirected.error_bound)
    in_star = Network.from_links(range(1, n + 1), [0] * n, node_ids=range(n + 1), directed=True)
    result = stationary_distribution(in_star, damping=a)
    assert result.dangling == 1
    expected = (a * n + 1) / (n + 1 + a * n)
    assert result.values[0] == pytest.approx(expected, abs=result.error_bound + 1e-15)


def test_maxiter_one_raises_with_partial_result() -> None:
    graph = random_digraph(30, seed=2, sinks=2)
    with pytest.raises(ConvergenceError, match="did not converge") as caught:
        stationary_distribution(directed_network(graph), maxiter=1)
    partial = caught.value.partial
    assert not partial.converged
    assert partial.iterations == 1
    assert partial.residual > partial.tol
    assert partial.values.sum() == pytest.approx(1.0)


def test_default_cap_follows_the_contraction_bound() -> None:
    # Langville and Meyer 2004: the power step contracts by `damping` in L1,
    # so 2 damping^t <= tol after t = ceil(log(tol/2)/log(damping)) steps.
    for damping, tol in ((0.85, 1e-10), (0.5, 1e-6), (0.99, 1e-8)):
        t = default_maxiter(damping, tol)
        steps = t - MAXITER_SLACK
        assert 2 * damping**steps <= tol < 2 * damping ** (steps - 1)


@pytest.mark.parametrize("damping", [0.0, 1.0, -0.1, 1.5, float("nan"), "0.85", True])
def test_damping_outside_open_interval_is_refused(damping) -> None:
    net = Network.from_links(["a"], ["b"], directed=True)
    with pytest.raises(ParameterError, match="damping"):
        stationary_distribution(net, damping=damping)


def test_bad_personalization_is_refused() -> None:
    net = Network.from_links(["a", "b"], ["b", "c"], directed=True)
    with pytest.raises(InputError, match="'zz'"):
        stationary_distribution(net, personalization={"zz": 1.0})
    with pytest.raises(ParameterError, match="personalization"):
        stationary_distribution(net, personalization=[0.0, 0.0, 0.0])
    with pytest.raises(ParameterError, match="personalization"):
        stationary_distribution(net, personalization=[1.0, 2.0])
