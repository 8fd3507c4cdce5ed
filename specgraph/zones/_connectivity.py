"""Connectivity of zones: the one kernel behind every "is this zone in one piece" test.

Two forms of the same question, for two kinds of caller:

- whole zonings, vectorized: :func:`zone_pieces` drops the links between
  zones (:func:`inner_links`, O(nnz)) and labels the connected components of
  what is left with ``scipy.sparse.csgraph.connected_components``; each
  component is one connected piece of one zone. The constraint audit, the
  connectivity repair and the bisection of oversized zones use it;
- one move at a time, compiled: :func:`stays_connected` asks whether a node's
  neighbours in its zone still reach each other inside the zone without it,
  by a breadth-first search (:func:`reach`) bounded by
  :data:`CONNECTIVITY_SEARCH_LIMIT` visits. Boundary refinement and size
  balancing call it inside their compiled move loops, where a whole-graph
  search per move would cost O(n) each.

Both searches are breadth-first (E. F. Moore, "The shortest path through a
maze", Proc. Int. Symp. Theory of Switching, 1959, from memory); the
component labelling is scipy's.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from numba import njit
from scipy.sparse.csgraph import connected_components

__all__ = [
    "CONNECTIVITY_SEARCH_LIMIT",
    "edge_rows",
    "inner_links",
    "mark_zone_neighbours",
    "pieces_per_zone",
    "reach",
    "stays_connected",
    "two_zone_weights",
    "zone_pieces",
]

#: Most nodes the local connectivity test may visit. Moving ``v`` out of zone
#: ``a`` is allowed only when its neighbours in ``a`` are still mutually
#: reachable inside ``a`` without ``v``; the test searches outward from one of
#: them and refuses the move (conservatively) when it visits this many nodes
#: before reaching the others. On near-planar networks the neighbours of a
#: boundary node are almost always joined by a short cycle around it: on
#: ``gallery.road_like(100_000, rng=0)`` in 16 zones, bounds of 256, 4096 and
#: no bound at all gave the same refined zones, while 64 and 16 refused
#: enough moves to end at a normalized cut 1.5 % and 8 % higher (measured).
CONNECTIVITY_SEARCH_LIMIT = 256


# ------------------------------------------------------------- whole zonings
def edge_rows(adjacency: sp.csr_array) -> np.ndarray:
    """Row index of every stored entry of a CSR matrix."""
    return np.repeat(np.arange(adjacency.shape[0]), np.diff(adjacency.indptr))


def inner_links(
    adjacency: sp.csr_array, labels: np.ndarray, rows: np.ndarray | None = None
) -> sp.csr_array:
    """The adjacency without the links between zones (vectorized, O(nnz)).

    ``rows`` is :func:`edge_rows` of ``adjacency``, passed by callers that
    already hold it.
    """
    rows = edge_rows(adjacency) if rows is None else rows
    keep = labels[rows] == labels[adjacency.indices]
    n = adjacency.shape[0]
    indptr = np.concatenate([[0], np.cumsum(np.bincount(rows[keep], minlength=n))])
    return sp.csr_array((adjacency.data[keep], adjacency.indices[keep], indptr), shape=(n, n))


def zone_pieces(
    adjacency: sp.csr_array, labels: np.ndarray, rows: np.ndarray | None = None
) -> tuple[int, np.ndarray]:
    """Connected pieces of the zones: their count and the piece of every node.

    Parameters
    ----------
    adjacency : scipy.sparse.csr_array of shape (n, n)
        Symmetric affinities.
    labels : ndarray of int, shape (n,)
        Zone of each node.
    rows : ndarray of int, optional
        :func:`edge_rows` of ``adjacency``, when the caller holds it.

    Returns
    -------
    count : int
        Number of pieces (a zone in one piece counts once).
    piece : ndarray of int64, shape (n,)
        Piece of each node, ``0..count-1``; nodes of one piece share a zone.

    Examples
    --------
    >>> from specgraph import gallery
    >>> count, piece = zone_pieces(gallery.path(5).adjacency, np.array([0, 0, 1, 0, 0]))
    >>> count, piece.tolist()
    (3, [0, 0, 1, 2, 2])
    """
    count, piece = connected_components(inner_links(adjacency, labels, rows), directed=False)
    return int(count), piece.astype(np.int64)


def pieces_per_zone(
    adjacency: sp.csr_array, labels: np.ndarray, k: int | None = None
) -> np.ndarray:
    """Number of connected pieces of each zone ``0..k-1`` (0 for an empty zone).

    Examples
    --------
    >>> from specgraph import gallery
    >>> pieces_per_zone(gallery.path(5).adjacency, np.array([0, 0, 1, 0, 0])).tolist()
    [2, 1]
    """
    k = (int(labels.max()) + 1 if labels.size else 0) if k is None else k
    count, piece = zone_pieces(adjacency, labels)
    zone_of = np.empty(count, dtype=np.int64)
    zone_of[piece] = labels
    return np.bincount(zone_of, minlength=k)


# ------------------------------------------------------- one move, compiled
@njit(cache=True)
def mark_zone_neighbours(v, indptr, indices, labels, marks, stamp):  # pragma: no cover
    """Stamp ``v``'s neighbours in its own zone as search targets.

    ``marks`` is an int64 array of shape (2, n) and ``stamp`` an int64 array
    of length 2 (targets carry ``marks[0] == stamp[0]``, visited nodes
    ``marks[1] == stamp[1]``), so nothing is cleared between calls. Returns
    ``(wanted, first)``: how many distinct neighbours were stamped and the
    first of them (-1 when none).
    """
    a = labels[v]
    stamp[0] += 1
    first, wanted = -1, 0
    for p in range(indptr[v], indptr[v + 1]):
        u = indices[p]
        if u != v and labels[u] == a and marks[0, u] != stamp[0]:
            marks[0, u] = stamp[0]
            wanted += 1
            if first < 0:
                first = u
    return wanted, first


@njit(cache=True)
def reach(
    start, v, wanted, limit, indptr, indices, labels, marks, stamp, queue
):  # pragma: no cover - compiled
    """Breadth-first search in ``v``'s zone from ``start``, never through ``v``.

    Targets carry ``marks[0] == stamp[0]`` (:func:`mark_zone_neighbours`);
    ``start`` is one. Returns ``(status, visited)``: status 1 when all
    ``wanted`` targets are reached, 0 when the search runs out of nodes first
    (the piece it closed is ``queue[:visited]``), -1 when it reaches ``limit``
    visits first.
    """
    a = labels[v]
    stamp[1] += 1
    seen, target = stamp[1], stamp[0]
    marks[1, v] = seen
    marks[1, start] = seen
    queue[0] = start
    head, tail, found = 0, 1, 1
    while head < tail:
        x = queue[head]
        head += 1
        for p in range(indptr[x], indptr[x + 1]):
            u = indices[p]
            if labels[u] != a or marks[1, u] == seen:
                continue
            marks[1, u] = seen
            if marks[0, u] == target:
                found += 1
                if found == wanted:
                    return 1, tail
            if tail >= limit:
                return -1, tail
            queue[tail] = u
            tail += 1
    return 0, tail


@njit(cache=True)
def stays_connected(v, limit, indptr, indices, labels, marks, stamp, queue):  # pragma: no cover
    """Whether ``v``'s neighbours in its zone stay mutually reachable in the zone without ``v``.

    ``False`` also when the search visits ``limit`` nodes first (the
    conservative answer of a bounded test); ``limit <= queue.size``.
    """
    wanted, first = mark_zone_neighbours(v, indptr, indices, labels, marks, stamp)
    if wanted <= 1:
        return True
    status, _ = reach(first, v, wanted, limit, indptr, indices, labels, marks, stamp, queue)
    return status == 1


@njit(cache=True)
def two_zone_weights(v, y, z, indptr, indices, data, labels):  # pragma: no cover - compiled
    """Link weight from node ``v`` into zone ``y`` and into zone ``z`` (``y != z``)."""
    wy, wz = 0.0, 0.0
    for p in range(indptr[v], indptr[v + 1]):
        zone = labels[indices[p]]
        if zone == y:
            wy += data[p]
        elif zone == z:
            wz += data[p]
    return wy, wz
