"""Small canonical networks shared by tests, docs and benchmarks.

Each function returns a :class:`~specgraph.network.Network` with integer-like
string ids ``"0"``, ``"1"``, ... and unit weights unless stated. The spectra of
most of them are known in closed form (Brouwer and Haemers, *Spectra of Graphs*,
Springer 2012, ch. 1), which is why tests use them.
"""

from __future__ import annotations

from typing import Any

import networkx as nx
import numpy as np
import scipy.sparse as sp

from ._validation import check_int, check_positive_float, check_rng
from .network import Network

__all__ = [
    "barbell",
    "complete",
    "grid",
    "hypercube",
    "path",
    "ring",
    "road_like",
    "star",
    "two_zone",
]


def _from_nx(graph: nx.Graph) -> Network:
    graph = nx.convert_node_labels_to_integers(graph, ordering="sorted")
    return Network.from_networkx(graph, weight=None)


def path(n: int) -> Network:
    """Path on ``n`` nodes."""
    return _from_nx(nx.path_graph(check_int(n, "n", minimum=1)))


def ring(n: int) -> Network:
    """Cycle on ``n >= 3`` nodes."""
    return _from_nx(nx.cycle_graph(check_int(n, "n", minimum=3)))


def complete(n: int) -> Network:
    """Complete graph on ``n`` nodes."""
    return _from_nx(nx.complete_graph(check_int(n, "n", minimum=1)))


def star(leaves: int) -> Network:
    """Star with a centre (node ``"0"``) and ``leaves`` leaves."""
    return _from_nx(nx.star_graph(check_int(leaves, "leaves", minimum=1)))


def hypercube(dimension: int) -> Network:
    """Hypercube graph :math:`Q_d` on :math:`2^d` nodes."""
    return _from_nx(nx.hypercube_graph(check_int(dimension, "dimension", minimum=1)))


def grid(rows: int, cols: int, *, periodic: bool = False) -> Network:
    """Grid graph :math:`P_m \\times P_n` (torus :math:`C_m \\times C_n` when periodic).

    Nodes are numbered row by row; coordinates are ``(col, row)``.
    """
    minimum = 3 if periodic else 1  # networkx collapses C_2 to a single link
    rows = check_int(rows, "rows", minimum=minimum)
    cols = check_int(cols, "cols", minimum=minimum)
    graph = nx.grid_2d_graph(rows, cols, periodic=periodic)
    order = sorted(graph.nodes)
    xy = np.array([(c, r) for r, c in order], dtype=float)
    mapping = {v: k for k, v in enumerate(order)}
    graph = nx.relabel_nodes(graph, mapping)
    net = _from_nx(graph)
    return Network(net.adjacency, net.node_ids, coordinates=xy)


def barbell(clique: int, *, bridge_weight: float = 1.0) -> Network:
    """Two cliques of ``clique`` nodes joined by one link of ``bridge_weight``.

    Nodes ``0 .. clique-1`` form the first bell; the bridge joins node
    ``clique-1`` to node ``clique``.
    """
    m = check_int(clique, "clique", minimum=2)
    w = check_positive_float(bridge_weight, "bridge_weight")
    graph = nx.barbell_graph(m, 0)
    nx.set_edge_attributes(graph, 1.0, "weight")
    graph[m - 1][m]["weight"] = w
    graph = nx.convert_node_labels_to_integers(graph, ordering="sorted")
    return Network.from_networkx(graph, weight="weight")


def two_zone(size: int, *, p_in: float = 0.3, links_between: int = 2, seed: int = 0) -> Network:
    """Two random dense zones of ``size`` nodes joined by ``links_between`` links.

    Each zone is a connected Erdos-Renyi graph with link probability ``p_in``
    (resampled until connected); nodes ``0..size-1`` form zone 0.
    """
    size = check_int(size, "size", minimum=2)
    rng = np.random.default_rng(seed)
    graph = nx.Graph()
    for offset in (0, size):
        zone = nx.empty_graph(size)
        while not nx.is_connected(zone):
            zone = nx.gnp_random_graph(size, p_in, seed=int(rng.integers(2**31)))
        graph.add_edges_from((u + offset, v + offset) for u, v in zone.edges)
    a = rng.choice(size, links_between, replace=False)
    b = rng.choice(size, links_between, replace=False) + size
    graph.add_edges_from(zip(a.tolist(), b.tolist(), strict=True))
    return _from_nx(graph)


#: Mean degree the road-like family is thinned to: near that of street
#: networks, whose junctions mostly join three or four segments (common practice).
ROAD_MEAN_DEGREE = 4.0


def road_like(n: int, *, mean_degree: float = ROAD_MEAN_DEGREE, rng: Any = None) -> Network:
    """A connected near-planar network like a road or pipe network.

    Uniform random points in the unit square are joined by their Delaunay
    triangulation (mean degree just under 6), which is thinned to
    ``mean_degree``: a Euclidean minimum spanning tree is kept, so the network
    stays connected, and random other triangulation links are added to it.
    Link affinities are the inverse link lengths.

    Parameters
    ----------
    n : int
        Number of nodes, at least 4.
    mean_degree : float, default=4.0
        Target mean degree, between 2 and the triangulation's (about 6).
    rng : None, int or numpy.random.Generator
        Seeds the points and the thinning.

    Returns
    -------
    Network
        With node coordinates.
    """
    from scipy.sparse.csgraph import minimum_spanning_tree
    from scipy.spatial import Delaunay

    n = check_int(n, "n", minimum=4)
    generator = check_rng(rng)
    points = generator.random((n, 2))
    simplices = Delaunay(points).simplices
    pairs = np.vstack([simplices[:, [0, 1]], simplices[:, [1, 2]], simplices[:, [0, 2]]])
    pairs = np.unique(np.sort(pairs, axis=1), axis=0)
    length = np.linalg.norm(points[pairs[:, 0]] - points[pairs[:, 1]], axis=1)
    graph = sp.coo_array((length, (pairs[:, 0], pairs[:, 1])), shape=(n, n)).tocsr()
    tree = minimum_spanning_tree(graph).tocoo()
    lo, hi = np.minimum(tree.row, tree.col), np.maximum(tree.row, tree.col)
    in_tree = np.isin(pairs[:, 0].astype(np.int64) * n + pairs[:, 1], lo.astype(np.int64) * n + hi)
    rest = np.flatnonzero(~in_tree)
    wanted = round(mean_degree * n / 2) - tree.nnz
    extra = generator.choice(rest, size=min(max(wanted, 0), rest.size), replace=False)
    keep_rows = np.concatenate([tree.row, pairs[extra, 0]])
    keep_cols = np.concatenate([tree.col, pairs[extra, 1]])
    weights = 1.0 / np.linalg.norm(points[keep_rows] - points[keep_cols], axis=1)
    upper = sp.coo_array((weights, (keep_rows, keep_cols)), shape=(n, n)).tocsr()
    return Network(upper + upper.T, np.arange(n).astype(str), coordinates=points)
