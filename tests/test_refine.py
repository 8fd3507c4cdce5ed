"""Boundary refinement: normalized cut against networkx, brute force on tiny graphs, constraints.

Sources: networkx's ``normalized_cut_size``, ``cut_size`` and ``volume`` for the
objective; exhaustive enumeration of every labeling of graphs of at most 9
nodes for the optimum; networkx's ``is_connected`` and
``number_connected_components`` on induced subgraphs for zone connectivity;
the barbell's closed-form normalized cut (algebra, below).
"""

from __future__ import annotations

import functools
import itertools
from collections import deque

import networkx as nx
import numpy as np
import pytest
import scipy.linalg
import scipy.sparse as sp
from sklearn.cluster import KMeans

from specgraph import Network, gallery
from specgraph.exceptions import ParameterError
from specgraph.zones._refine import normalized_cut, refine_boundary

#: Agreement of two computations of one normalized cut (rounding only).
NCUT_RTOL = 1e-10


def nx_graph(adjacency: sp.sparray) -> nx.Graph:
    """Graph on row indices with the matrix's weights (networkx builds it)."""
    return nx.from_scipy_sparse_array(adjacency)


def nx_normalized_cut(graph: nx.Graph, labels: np.ndarray) -> float:
    """Sum over zones of cut(z)/vol(z), from networkx's ``normalized_cut_size``.

    networkx returns, for a set S and its complement T,
    ``ncs(S) = cut(S) (1/vol S + 1/vol T)`` with ``vol S + vol T = vol V``, so
    ``ncs(S) = cut(S) vol V / (vol S (vol V - vol S))`` and therefore
    ``cut(S)/vol S = ncs(S) (vol V - vol S) / vol V = ncs(S) (1 - vol S / vol V)``.
    A zone that is the whole graph has cut 0 and is skipped (networkx would
    divide by the zero volume of an empty complement).
    """
    total = nx.volume(graph, graph.nodes, weight="weight")
    value = 0.0
    for z in np.unique(labels):
        zone = set(np.flatnonzero(labels == z).tolist())
        if len(zone) == graph.number_of_nodes():
            continue
        vol = nx.volume(graph, zone, weight="weight")
        value += nx.normalized_cut_size(graph, zone, weight="weight") * (1.0 - vol / total)
    return value


def pieces(graph: nx.Graph, labels: np.ndarray) -> np.ndarray:
    """Connected pieces of every zone's induced subgraph (networkx)."""
    k = int(labels.max()) + 1
    return np.array(
        [
            nx.number_connected_components(graph.subgraph(np.flatnonzero(labels == z).tolist()))
            for z in range(k)
        ]
    )


def connected_labels(adjacency: sp.sparray, labels: np.ndarray, seed: int) -> np.ndarray:
    """Make every zone connected: keep its largest piece, grow the pieces over the rest.

    The growth is a breadth-first search from all kept nodes at once, in a
    random order, so each regrown node joins the zone of an adjacent node and
    every zone stays connected; the boundaries come out ragged.
    """
    graph = nx_graph(adjacency)
    rng = np.random.default_rng(seed)
    out = np.full(labels.size, -1)
    for z in np.unique(labels):
        sub = graph.subgraph(np.flatnonzero(labels == z).tolist())
        largest = max(nx.connected_components(sub), key=lambda piece: len(piece))
        out[list(largest)] = z
    queue = deque(rng.permutation(np.flatnonzero(out >= 0)).tolist())
    while queue:
        u = queue.popleft()
        for w in rng.permutation(list(graph.neighbors(u))).tolist():
            if out[w] < 0:
                out[w] = out[u]
                queue.append(w)
    return out


def perturbed_spectral(net: Network, k: int, seed: int) -> np.ndarray:
    """Spectral zones with 10 % of nodes flipped to a neighbour's zone, then made connected.

    Spectral zones in the form of Ng, Jordan and Weiss (NIPS 2001): k-means on
    the normalized rows of the k smallest eigenvectors of the normalized
    Laplacian, here from scipy's dense ``eigh`` and scikit-learn's ``KMeans``,
    so that these starts do not depend on specgraph's own zoning (which may
    refine its zones itself).
    """
    a = net.adjacency
    scale = 1.0 / np.sqrt(np.asarray(a.sum(axis=1)).ravel())
    normalized = np.eye(a.shape[0]) - scale[:, None] * a.toarray() * scale[None, :]
    _, vectors = scipy.linalg.eigh(normalized, subset_by_index=[0, k - 1])
    points = vectors / np.linalg.norm(vectors, axis=1, keepdims=True)
    labels = KMeans(k, n_init=1, random_state=seed).fit_predict(points).astype(np.int64)
    rng = np.random.default_rng(seed)
    for v in rng.choice(labels.size, labels.size // 10, replace=False):
        nbrs = a.indices[a.indptr[v] : a.indptr[v + 1]]
        labels[v] = labels[rng.choice(nbrs)]
    return connected_labels(a, labels, seed)


def geometric(n: int, seed: int) -> Network:
    """Largest component of a networkx random geometric graph, random weights in [0.5, 2]."""
    graph = nx.random_geometric_graph(n, 2.2 / np.sqrt(n), seed=seed)
    graph = nx.convert_node_labels_to_integers(
        graph.subgraph(max(nx.connected_components(graph), key=len))
    )
    rng = np.random.default_rng(seed)
    adjacency = nx.to_scipy_sparse_array(graph, nodelist=range(len(graph)), weight=None)
    upper = sp.triu(adjacency, format="coo")
    upper.data = rng.uniform(0.5, 2.0, upper.nnz)
    return Network.from_scipy(sp.csr_array(upper + upper.T))


CASES = {
    "road_like_600": lambda: gallery.road_like(600, rng=2),
    "geometric_400": lambda: geometric(400, 2),
    "grid_18x24": lambda: gallery.grid(18, 24),
}


@functools.cache
def case(name: str, k: int) -> tuple[Network, np.ndarray]:
    """A gallery network and perturbed, connected spectral zones (built once per run)."""
    net = CASES[name]()
    labels = perturbed_spectral(net, k, seed=k)
    labels.flags.writeable = False
    return net, labels


# ---------------------------------------------------------------- objective
@pytest.mark.parametrize("k", [2, 3, 7])
@pytest.mark.parametrize("kind", ["gnm", "geometric"])
def test_normalized_cut_matches_networkx(weighted_graph, kind: str, k: int) -> None:
    graph = weighted_graph(kind, 60, seed=k)
    adjacency = nx.to_scipy_sparse_array(graph, nodelist=sorted(graph), weight="weight")
    labels = np.random.default_rng(k).integers(0, k, graph.number_of_nodes())
    # networkx normalized_cut_size summed per zone, converted as derived in nx_normalized_cut
    assert normalized_cut(adjacency, labels) == pytest.approx(
        nx_normalized_cut(graph, labels), rel=NCUT_RTOL
    )
    if k == 2:  # two zones: NCut is networkx's normalized_cut_size itself (Shi and Malik 2000)
        zone = set(np.flatnonzero(labels == 0).tolist())
        assert normalized_cut(adjacency, labels) == pytest.approx(
            nx.normalized_cut_size(graph, zone, weight="weight"), rel=NCUT_RTOL
        )


# ------------------------------------------------------- brute-force optimum
def _all_connected_labelings(graph: nx.Graph, k: int) -> np.ndarray:
    """Every labeling with k non-empty zones, each inducing a connected subgraph."""
    n = graph.number_of_nodes()
    keep = []
    for labels in itertools.product(range(k), repeat=n):
        zones = [[v for v in range(n) if labels[v] == z] for z in range(k)]
        if all(zones) and all(nx.is_connected(graph.subgraph(zone)) for zone in zones):
            keep.append(labels)
    return np.array(keep)


def _brute_ncut(adjacency: sp.sparray, labelings: np.ndarray, k: int) -> np.ndarray:
    """NCut of each labeling from the dense matrix: cut = vol - inner weight per zone."""
    w = adjacency.toarray()
    onehot = np.eye(k)[labelings]  # (m, n, k)
    vol = onehot.transpose(0, 2, 1) @ w.sum(axis=1)
    inner = np.einsum("mik,ij,mjk->mk", onehot, w, onehot)
    return np.sum((vol - inner) / vol, axis=1)


TINY = {
    "gnm9_k2": (lambda: nx.gnm_random_graph(9, 16, seed=3), 2),
    "geometric9_k2": (lambda: nx.random_geometric_graph(9, 0.55, seed=5), 2),
    "gnm8_k3": (lambda: nx.gnm_random_graph(8, 14, seed=1), 3),
    "grid3x3_k3": (lambda: nx.convert_node_labels_to_integers(nx.grid_2d_graph(3, 3)), 3),
}


@pytest.mark.parametrize("uphill", [0, 64])
@pytest.mark.parametrize("name", list(TINY))
def test_one_move_from_optimum_reaches_optimum(name: str, uphill: int) -> None:
    """Brute force: from any labeling one valid move away from an optimum, refine reaches it.

    The move back is itself allowed (the zone it leaves is the optimum's zone,
    connected; the zone it joins is adjacent), so the best single move drops
    NCut at least as much; since no valid labeling beats the optimum, the
    best single move lands on the optimal value, and refinement takes the best
    single move first and never ends above where it has been.
    """
    make, k = TINY[name]
    graph = make()
    assert nx.is_connected(graph)
    rng = np.random.default_rng(len(name))
    for u, v in graph.edges:
        graph[u][v]["weight"] = float(rng.uniform(0.5, 2.0))
    adjacency = nx.to_scipy_sparse_array(graph, nodelist=range(len(graph)), weight="weight")
    labelings = _all_connected_labelings(graph, k)
    values = _brute_ncut(adjacency, labelings, k)
    optimum = values.min()
    valid = {tuple(row) for row in labelings.tolist()}
    starts = 0
    for best in labelings[values <= optimum * (1 + NCUT_RTOL)]:
        for v, z in itertools.product(range(len(graph)), range(k)):
            start = best.copy()
            start[v] = z
            if z == best[v] or tuple(start.tolist()) not in valid:
                continue
            result = refine_boundary(adjacency, start, uphill_moves=uphill, rng=0)
            assert result.ncut_after == pytest.approx(optimum, rel=NCUT_RTOL)
            starts += result.ncut_before > optimum * (1 + NCUT_RTOL)
    assert starts > 0  # some starts were worse than the optimum


# ---------------------------------------------------------------- constraints
@pytest.mark.parametrize("uphill", [0, 64])
@pytest.mark.parametrize("name", list(CASES))
def test_refinement_keeps_zones_connected_and_lowers_ncut(name: str, uphill: int) -> None:
    k = 6
    net, start = case(name, k)
    graph = nx_graph(net.adjacency)
    assert np.all(pieces(graph, start) == 1)
    given = start.copy()
    result = refine_boundary(net.adjacency, start, uphill_moves=uphill, rng=0)
    assert np.array_equal(start, given)  # input untouched
    assert result.moves > 0
    assert result.ncut_after < result.ncut_before
    assert result.ncut_before == pytest.approx(nx_normalized_cut(graph, start), rel=NCUT_RTOL)
    assert result.ncut_after == pytest.approx(
        nx_normalized_cut(graph, result.labels), rel=NCUT_RTOL
    )
    # every zone stays non-empty and connected (networkx is_connected)
    for z in range(k):
        assert nx.is_connected(graph.subgraph(np.flatnonzero(result.labels == z).tolist()))


def test_disconnected_input_pieces_never_grow() -> None:
    """k-means on coordinates gives zones in several pieces; refinement never adds pieces."""
    net = gallery.road_like(3000, rng=4)
    labels = KMeans(12, n_init=1, random_state=0).fit_predict(net.coordinates).astype(np.int64)
    graph = nx_graph(net.adjacency)
    before = pieces(graph, labels)
    assert before.max() > 1  # the case under test does occur
    result = refine_boundary(net.adjacency, labels, rng=0)
    assert result.ncut_after < result.ncut_before
    assert np.all(pieces(graph, result.labels) <= before)


@pytest.mark.parametrize("name", list(CASES))
def test_size_bounds_kept(name: str) -> None:
    k = 6
    net, start = case(name, k)
    sizes = np.random.default_rng(3).integers(1, 4, start.size).astype(float)
    zone_size = np.bincount(start, weights=sizes, minlength=k)
    # The tightest bounds the start meets: the smallest and largest zone sit on them.
    lo, hi = zone_size.min(), zone_size.max()
    result = refine_boundary(net.adjacency, start, sizes=sizes, min_size=lo, max_size=hi, rng=0)
    after = np.bincount(result.labels, weights=sizes, minlength=k)
    assert result.moves > 0
    assert np.all((after >= lo) & (after <= hi))
    assert result.ncut_after <= result.ncut_before


def test_out_of_bound_zones_never_get_further_out() -> None:
    net, start = case("road_like_600", 6)
    zone_size = np.bincount(start, minlength=6)
    lo, hi = np.sort(zone_size)[1], np.sort(zone_size)[-2]  # one zone below, one above
    result = refine_boundary(net.adjacency, start, min_size=lo, max_size=hi, rng=0)
    after = np.bincount(result.labels, minlength=6)

    def violation(s: np.ndarray) -> np.ndarray:
        return np.maximum.reduce([np.zeros(s.size), lo - s, s - hi])

    assert np.all(violation(after) <= violation(zone_size))
    assert violation(zone_size).sum() > 0  # the case under test does occur


def test_immovable_nodes_stay() -> None:
    net, start = case("road_like_600", 6)
    movable = np.random.default_rng(6).random(start.size) < 0.5
    result = refine_boundary(net.adjacency, start, movable=movable, rng=0)
    assert result.moves > 0
    assert np.array_equal(result.labels[~movable], start[~movable])
    pinned = refine_boundary(net.adjacency, start, movable=np.zeros(start.size, bool), rng=0)
    assert np.array_equal(pinned.labels, start)
    assert pinned.moves == 0
    assert pinned.ncut_after == pinned.ncut_before


def test_zone_count_unchanged_with_tiny_zones() -> None:
    """Zones of one and two nodes next to big ones would vanish if moves could empty them."""
    net = gallery.grid(10, 10)
    labels = np.zeros(100, dtype=np.int64)
    labels[50:] = 1
    labels[0] = 2  # corner node alone
    labels[[98, 99]] = 3  # a pair in the other corner
    result = refine_boundary(net.adjacency, labels, rng=0)
    assert np.array_equal(np.unique(result.labels), np.arange(4))
    assert result.ncut_after <= result.ncut_before


@pytest.mark.parametrize("shift", [-2, -1, 1, 3])
def test_barbell_boundary_moves_to_the_bridge(shift: int) -> None:
    """Two 8-cliques joined by one link; the boundary starts ``shift`` nodes off the bridge.

    At the bridge each bell has cut 1 and volume m(m-1) + 1 (a clique of m
    nodes has m(m-1)/2 links, each counted at both ends, plus the bridge
    end), so NCut = 2 / (m(m-1) + 1) (algebra).
    """
    m = 8
    net = gallery.barbell(m)
    labels = (np.arange(2 * m) >= m + shift).astype(np.int64)
    result = refine_boundary(net.adjacency, labels, rng=0)
    assert np.array_equal(result.labels, (np.arange(2 * m) >= m).astype(np.int64))
    assert result.moves == abs(shift)
    assert result.ncut_after == pytest.approx(2.0 / (m * (m - 1) + 1), rel=NCUT_RTOL)


def test_same_seed_same_labels() -> None:
    net, start = case("grid_18x24", 6)  # unit weights: many equal gains, ties broken by rng
    first = refine_boundary(net.adjacency, start, rng=11)
    second = refine_boundary(net.adjacency, start, rng=11)
    assert np.array_equal(first.labels, second.labels)
    assert (first.moves, first.passes) == (second.moves, second.passes)


def test_zero_passes_returns_input() -> None:
    net = gallery.barbell(5)
    labels = np.array([0, 0, 0, 0, 1, 1, 1, 1, 1, 1])
    result = refine_boundary(net.adjacency, labels, max_passes=0)
    assert np.array_equal(result.labels, labels)
    assert (result.moves, result.passes) == (0, 0)


@pytest.mark.parametrize(
    ("options", "name"),
    [
        ({"labels": np.zeros(3, dtype=int)}, "labels"),
        ({"labels": np.full(10, 0.5)}, "labels"),
        ({"sizes": -np.ones(10)}, "sizes"),
        ({"movable": np.ones(10)}, "movable"),
        ({"min_size": 5, "max_size": 2}, "min_size"),
        ({"max_size": np.nan}, "max_size"),
        ({"max_passes": -1}, "max_passes"),
        ({"uphill_moves": 1.5}, "uphill_moves"),
        ({"rng": "seed"}, "rng"),
        ({"adjacency": np.ones((10, 10))}, "adjacency"),
    ],
)
def test_bad_arguments_are_named(options: dict, name: str) -> None:
    kwargs = {"adjacency": gallery.barbell(5).adjacency, "labels": np.zeros(10, dtype=int)}
    kwargs.update(options)
    adjacency, labels = kwargs.pop("adjacency"), kwargs.pop("labels")
    with pytest.raises(ParameterError, match=name):
        refine_boundary(adjacency, labels, **kwargs)
