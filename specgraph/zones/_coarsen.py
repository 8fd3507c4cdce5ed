"""Coarsening for multilevel zoning: a ladder of ever smaller networks that keep the rules.

Each level merges pairs of nodes joined by a heavy link, in the style of the
multilevel methods of Hendrickson and Leland [1]_ and Karypis and Kumar [2]_:
nodes are visited in a random order, and each node not yet merged is merged
with the free neighbour of highest normalized affinity

.. math::

    s(u, v) = a_{uv} \\left(\\frac{1}{\\operatorname{vol}(u)}
              + \\frac{1}{\\operatorname{vol}(v)}\\right),

the weight that Dhillon, Guan and Kulis [3]_ show keeps the normalized cut of
the finer network in view (a heavy link between two light nodes is merged
first). The coarse network sums the links between merged nodes
(:math:`P^T A P` without its diagonal), their volumes (the inner links stay
in the volume, so the normalized cut of any zoning of the coarse network
equals that of its projection on the finer one), and their sizes.

The rules shape every merge: two nodes holding a source are never merged, nor
two nodes held apart by their ``apart`` tags (nodes fixed to different zones,
or, for the refinement of a given zoning, nodes of different zones), nor two
nodes whose summed size would pass ``cap``. Links that must not be cut and
dangling trees were contracted before (:func:`find_zones`, step 2).

Where a level stalls (fewer than :data:`STALL_SHARE` of the nodes merged,
as around a hub whose many leaves can each match only the hub), the nodes
left over are paired through the neighbour they are most tied to, so that
a star halves at every level instead of losing one node.

References
----------
.. [1] B. Hendrickson and R. Leland, "A multilevel algorithm for partitioning
   graphs", Proc. Supercomputing '95, :doi:`10.1145/224170.224228`.
.. [2] G. Karypis and V. Kumar, "A fast and high quality multilevel scheme for
   partitioning irregular graphs", SIAM J. Sci. Comput. 20(1), 1998,
   pp. 359-392, :doi:`10.1137/S1064827595287997`.
.. [3] I. S. Dhillon, Y. Guan and B. Kulis, "Weighted graph cuts without
   eigenvectors: a multilevel approach", IEEE TPAMI 29(11), 2007,
   pp. 1944-1957, :doi:`10.1109/TPAMI.2007.1115`.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
import scipy.sparse as sp
from numba import njit

from .._jit import entry

__all__ = [
    "MIN_SHRINK",
    "STALL_SHARE",
    "Ladder",
    "Level",
    "coarsen",
]

#: A level that merges fewer than this share of its nodes is stalling (a hub
#: with many leaves); the nodes left over are then paired through the
#: neighbour they are most tied to.
STALL_SHARE = 0.25

#: The ladder also stops when a level keeps more than this share of the nodes
#: of the level below: coarsening further would cost levels without shrinking.
MIN_SHRINK = 0.9


@dataclass(frozen=True, eq=False)
class Level:
    """One network of the ladder.

    Attributes
    ----------
    adjacency : scipy.sparse.csr_array, shape (m, m)
        Links between the nodes of this level, zero diagonal.
    volumes : ndarray of float, shape (m,)
        Volume of each node: the weighted degrees of the finest nodes it holds.
    sizes : ndarray of float, shape (m,)
        Summed sizes of the finest nodes it holds.
    apart : ndarray of int, shape (m,)
        Tag that keeps nodes apart (``-1``: none).
    sources : ndarray of bool, shape (m,)
        Whether the node holds a source.
    held : ndarray of bool, shape (m,)
        Whether the node holds a node that may not move (a source or a fixed node).
    parent : ndarray of int, shape (m,) or None
        Node of the next coarser level that holds each node; None on the coarsest.
    """

    adjacency: sp.csr_array
    volumes: np.ndarray
    sizes: np.ndarray
    apart: np.ndarray
    sources: np.ndarray
    held: np.ndarray
    parent: np.ndarray | None = None

    @property
    def n_nodes(self) -> int:
        return int(self.adjacency.shape[0])

    @property
    def n_links(self) -> int:
        return int(self.adjacency.nnz // 2)


@dataclass(frozen=True, eq=False)
class Ladder:
    """Every level from the finest (index 0) to the coarsest, and why it stopped."""

    levels: tuple[Level, ...]
    stop: str
    #: Whether a level paired leftover nodes that share no link (their coarse
    #: node is not connected: moving it can split a zone of a finer level).
    paired: bool = False

    @property
    def coarsest(self) -> Level:
        return self.levels[-1]

    def owner(self, depth: int) -> np.ndarray:
        """Node of level ``depth`` holding each node of the finest level."""
        rows = np.arange(self.levels[0].n_nodes)
        for level in self.levels[:depth]:
            assert level.parent is not None
            rows = level.parent[rows]
        return rows


@njit(cache=True)
def _may_merge(u, v, sizes, apart, sources, cap):  # pragma: no cover - compiled
    """Whether nodes ``u`` and ``v`` may become one coarse node."""
    if sizes[u] + sizes[v] > cap:
        return False
    if sources[u] and sources[v]:
        return False
    return apart[u] < 0 or apart[v] < 0 or apart[u] == apart[v]


@entry(readonly=(0, 1, 2))
def _match(indptr, indices, data, volumes, sizes, apart, sources, cap, order):  # pragma: no cover
    """Heavy-link matching: ``mate[v]`` is the node merged with ``v`` (itself if none)."""
    n = volumes.size
    mate = np.full(n, -1, dtype=np.int64)
    for v in order:
        if mate[v] >= 0:
            continue
        best, best_score = -1, 0.0
        for p in range(indptr[v], indptr[v + 1]):
            u = indices[p]
            if mate[u] >= 0 or u == v or not _may_merge(u, v, sizes, apart, sources, cap):
                continue
            score = data[p] * (1.0 / volumes[u] + 1.0 / volumes[v])
            if score > best_score:
                best, best_score = u, score
        if best >= 0:
            mate[v] = best
            mate[best] = v
    return mate


@entry(readonly=(0, 1, 2))
def _pair_leftovers(
    indptr, indices, data, mate, sizes, apart, sources, cap, order
):  # pragma: no cover
    """Pair nodes left unmatched through the neighbour each is most tied to (in place)."""
    n = mate.size
    waiting = np.full(n, -1, dtype=np.int64)
    for v in order:
        if mate[v] >= 0 or indptr[v + 1] == indptr[v]:
            continue
        hub, heaviest = -1, 0.0
        for p in range(indptr[v], indptr[v + 1]):
            if data[p] > heaviest:
                hub, heaviest = indices[p], data[p]
        other = waiting[hub]
        if other >= 0 and mate[other] < 0 and _may_merge(v, other, sizes, apart, sources, cap):
            mate[v] = other
            mate[other] = v
            waiting[hub] = -1
        else:
            waiting[hub] = v


@entry(readonly=(0, 1, 2))
def _contract(indptr, indices, data, parent, starts, members):  # pragma: no cover - compiled
    """CSR arrays of :math:`P^T A P` without its diagonal: the links between coarse nodes,
    parallel links summed, links inside a coarse node dropped (they stay in its volume).

    ``members[starts[c]:starts[c + 1]]`` are the nodes of coarse node ``c``.
    """
    m = starts.size - 1
    out_ptr = np.zeros(m + 1, dtype=np.int64)
    out_idx = np.empty(indices.size, dtype=np.int64)
    out_val = np.empty(indices.size)
    where = np.full(m, -1, dtype=np.int64)  # entry of coarse node d in the current row
    nz = 0
    for c in range(m):
        first = nz
        for t in range(starts[c], starts[c + 1]):
            v = members[t]
            for p in range(indptr[v], indptr[v + 1]):
                d = parent[indices[p]]
                if d == c:
                    continue
                if where[d] < first:
                    where[d] = nz
                    out_idx[nz] = d
                    out_val[nz] = data[p]
                    nz += 1
                else:
                    out_val[where[d]] += data[p]
        out_ptr[c + 1] = nz
    return out_ptr, out_idx[:nz].copy(), out_val[:nz].copy()


def _coarser(level: Level, mate: np.ndarray) -> tuple[Level, Level]:
    """The level with its parent map set, and the coarse level it maps to."""
    n = level.n_nodes
    rows = np.arange(n)
    mate = np.where(mate < 0, rows, mate)
    lead = np.minimum(rows, mate)  # the pair's smaller row names it
    heads = lead == rows
    parent = (np.cumsum(heads) - 1)[lead]
    m = int(heads.sum())
    a = level.adjacency
    members = np.argsort(parent, kind="stable")
    starts = np.searchsorted(parent[members], np.arange(m + 1))
    indptr, indices, data = _contract(a.indptr, a.indices, a.data, parent, starts, members)
    coarse = sp.csr_array((data, indices, indptr), shape=(m, m))
    apart = np.full(m, -1, dtype=np.int64)
    np.maximum.at(apart, parent, level.apart)
    sources = np.zeros(m, dtype=bool)
    sources[parent[level.sources]] = True
    held = np.zeros(m, dtype=bool)
    held[parent[level.held]] = True
    up = Level(
        coarse,
        np.bincount(parent, weights=level.volumes, minlength=m),
        np.bincount(parent, weights=level.sizes, minlength=m),
        apart,
        sources,
        held,
    )
    return replace(level, parent=parent), up


def coarsen(
    adjacency: sp.csr_array,
    *,
    sizes: np.ndarray,
    apart: np.ndarray,
    sources: np.ndarray,
    held: np.ndarray,
    cap: float,
    target: int,
    rng: np.random.Generator,
) -> Ladder:
    """Coarsen ``adjacency`` level by level until at most ``target`` nodes remain.

    Parameters
    ----------
    adjacency : scipy.sparse.csr_array, shape (n, n)
        Symmetric affinities, zero diagonal.
    sizes : ndarray of float, shape (n,)
        Node sizes; no coarse node holds more than ``cap``.
    apart : ndarray of int, shape (n,)
        Nodes with different tags ``>= 0`` are never merged (``-1``: free).
    sources : ndarray of bool, shape (n,)
        Nodes holding a source; no coarse node holds two.
    held : ndarray of bool, shape (n,)
        Nodes that may not move; a coarse node holding one may not either.
    cap : float
        Largest size of a coarse node.
    target : int
        Stop once a level has at most this many nodes.
    rng : numpy.random.Generator
        Draws the order in which each level visits its nodes.

    Returns
    -------
    Ladder
        The finest level first; it stops at ``target`` nodes or when a level
        keeps more than :data:`MIN_SHRINK` of the nodes below it.

    Examples
    --------
    A path of 8 nodes, coarsened to 2 (each level merges pairs of neighbours):

    >>> from specgraph import gallery
    >>> a = gallery.path(8).adjacency
    >>> free = np.zeros(8, dtype=bool)
    >>> ladder = coarsen(a, sizes=np.ones(8), apart=np.full(8, -1), sources=free, held=free,
    ...                  cap=np.inf, target=2, rng=np.random.default_rng(0))
    >>> sizes = [level.n_nodes for level in ladder.levels]
    >>> sizes[0], sizes[-1], all(b >= a / 2 for a, b in zip(sizes, sizes[1:]))
    (8, 2, True)
    """
    a = sp.csr_array(adjacency)
    volumes = np.asarray(a.sum(axis=1)).ravel()
    level = Level(
        a,
        volumes,
        np.asarray(sizes, dtype=np.float64),
        np.asarray(apart, dtype=np.int64),
        np.asarray(sources, dtype=bool),
        np.asarray(held, dtype=bool),
    )
    levels: list[Level] = []
    paired = False
    stop = f"reached {target:,} nodes or fewer"
    while level.n_nodes > target:
        b = level.adjacency
        order = rng.permutation(level.n_nodes)
        args = (level.sizes, level.apart, level.sources, float(cap))
        mate = _match(b.indptr, b.indices, b.data, level.volumes, *args, order)
        if np.count_nonzero(mate >= 0) < STALL_SHARE * level.n_nodes:
            _pair_leftovers(b.indptr, b.indices, b.data, mate, *args, order)
            paired = True
        here, up = _coarser(level, mate)
        if up.n_nodes > MIN_SHRINK * level.n_nodes:
            stop = (
                f"stalled at {level.n_nodes:,} nodes (a level would keep "
                f"{up.n_nodes / level.n_nodes:.0%} of them: the rules or the size cap "
                "allow few merges)"
            )
            break
        levels.append(here)
        level = up
    levels.append(level)
    return Ladder(tuple(levels), stop, paired)
