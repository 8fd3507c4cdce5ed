"""Where a network is fragile: algebraic connectivity, bridges, articulation nodes, bottlenecks.

Steps of :func:`robustness`:

1. *Cut structure.* One iterative depth-first search with low links (Hopcroft
   and Tarjan [2]_, Tarjan [3]_), compiled, finds every bridge (a link whose
   failure splits its component) and every articulation node (a node whose
   failure does). The same pass counts the nodes and sums the node sizes of
   every search subtree; a subtree is a contiguous range of the preorder, so
   what each bridge or node cuts off follows for all of them at once, with no
   search per bridge.
2. *Algebraic connectivity.* The second smallest eigenvalue of :math:`L = D - A`
   (Fiedler [1]_) and of the normalized Laplacian :math:`N` (the one in
   Cheeger's inequality) on every connected component, and on every zone's
   induced sub-network when zones are given; the Fiedler vectors of ``L``
   give a second bottleneck measure.
3. *Effective resistance.* For every link, :math:`R_{ij} = (e_i - e_j)^T L^+
   (e_i - e_j)` and its leverage :math:`w_{ij} R_{ij}` (Spielman and
   Srivastava [4]_): 1 for a bridge, near 0 for a link with many parallel
   routes. Current between the ends of a link never crosses a bridge, so each
   2-edge-connected piece (a component of the network without its bridges) is
   solved on its own: exactly (dense inverse) up to
   :data:`EXACT_RESISTANCE_LIMIT` nodes, by the Johnson-Lindenstrauss sketch
   of [4]_ beyond.

References
----------
.. [1] M. Fiedler, "Algebraic connectivity of graphs", Czechoslovak Math. J.
   23(98):298-305, 1973. :doi:`10.21136/CMJ.1973.101168`
.. [2] J. Hopcroft and R. Tarjan, "Algorithm 447: efficient algorithms for
   graph manipulation", Commun. ACM 16(6):372-378, 1973.
   :doi:`10.1145/362248.362272`
.. [3] R. E. Tarjan, "A note on finding the bridges of a graph", Inform.
   Process. Lett. 2(6):160-161, 1974. :doi:`10.1016/0020-0190(74)90003-9`
.. [4] D. A. Spielman and N. Srivastava, "Graph sparsification by effective
   resistances", SIAM J. Comput. 40(6):1913-1926, 2011.
   :doi:`10.1137/080734029`
"""

from __future__ import annotations

import logging
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
import scipy.sparse as sp
from numba import njit
from scipy.sparse.csgraph import connected_components, reverse_cuthill_mckee

from .._validation import check_choice, check_int, check_positive_float, check_rng
from ..eigen import DEFAULT_TOL, smallest_eigenpairs
from ..eigen._hierarchy import build_hierarchy
from ..exceptions import ConvergenceError, ParameterError
from ..network import Network
from ..operators import laplacian
from ._quality import check_labels
from ._spectral import cheeger_bounds

__all__ = [
    "DEFAULT_TOP",
    "EXACT_RESISTANCE_LIMIT",
    "SKETCH_ROWS",
    "CutStructure",
    "LinkResistances",
    "Robustness",
    "cut_structure",
    "effective_resistances",
    "robustness",
]

logger = logging.getLogger(__name__)

#: Bottleneck links listed in :attr:`Robustness.links` unless ``top`` says otherwise.
DEFAULT_TOP = 100

#: 2-edge-connected pieces of at most this many nodes get exact resistances
#: from a dense inverse of :math:`L + J/m` (8 m^2 bytes, under a second on one
#: core at 2000 nodes); larger pieces are sketched.
EXACT_RESISTANCE_LIMIT = 2000

#: Rows ``q`` of the random sign matrix of the resistance sketch. Each
#: estimate is then about :math:`R \chi^2_q / q`, relative standard deviation
#: :math:`\sqrt{2/q}` = 0.29 (Spielman and Srivastava [4]_ take
#: :math:`q = 24 \ln n / \varepsilon^2` for a :math:`1 \pm \varepsilon`
#: guarantee on every link at once, far more than a ranking needs). Measured
#: against exact values on a 4,000-node road-like network: median relative
#: error 0.16, root mean square 0.24, and 0.08 on the 100 links of highest
#: leverage (0.14, 0.21 and 0.08 at q = 32; 0.11, 0.17, 0.07 at q = 48). Time
#: grows linearly in q.
SKETCH_ROWS = 24

#: Relative residual :math:`\|L x - y\| / \|y\|` each sketch solve must reach.
#: Measured on the million-node road-like network against solves to 1e-6: it
#: moves the estimates by a median 0.8 % (99th percentile 6 %), far below the
#: sketch's own spread; 1e-3 costs twice the cycles for 0.05 % (0.4 %).
SOLVE_RTOL = 1e-2

#: Flexible CG steps (each preconditioned by one K-cycle) between two checks
#: of the true residual in double precision.
SOLVE_ROUND_STEPS = 4

#: Checks of the true residual before a sketch solve is declared failed.
SOLVE_MAX_ROUNDS = 50

#: Right-hand sides solved together: the block kernels walk the matrix once
#: per block; a block of 12 keeps the single-precision workspaces of a
#: million-node piece near 400 MB.
SOLVE_BLOCK = 12

#: Components or pieces of at most this many nodes are handled together, as
#: stacked dense matrices of one size (one LAPACK call per size), instead of
#: one call each: networks often carry thousands of tiny islands.
STACKED_LIMIT = 16

#: Pieces with more nodes than this are reordered by reverse Cuthill-McKee
#: before the sketch solves: a randomly numbered million-node network runs
#: its sparse products about 15 times slower than a banded one (measured).
REORDER_MIN = 2000

RESISTANCE_METHODS = ("auto", "exact", "sketch")


# --------------------------------------------------------------------------- DFS
@njit(cache=True)
def _low_link_forest(indptr, indices, sizes):  # pragma: no cover - compiled
    """Iterative depth-first search with low links over a symmetric CSR pattern.

    Roots are taken in index order. Returns ``disc`` (preorder number),
    ``low`` (smallest preorder reachable by one back link from the subtree),
    ``parent`` (-1 at roots), ``order`` (node of each preorder number) and the
    node count and size sum of every subtree. The network holds no parallel
    links (they are merged on input), so skipping the parent node skips
    exactly the tree link.
    """
    n = indptr.size - 1
    disc = np.full(n, -1, np.int64)
    low = np.zeros(n, np.int64)
    parent = np.full(n, -1, np.int64)
    order = np.zeros(n, np.int64)
    sub_nodes = np.ones(n, np.int64)
    sub_size = sizes.copy()
    cursor = np.zeros(n, np.int64)
    stack = np.zeros(n, np.int64)
    t = 0
    for root in range(n):
        if disc[root] >= 0:
            continue
        disc[root] = t
        low[root] = t
        order[t] = root
        t += 1
        cursor[root] = indptr[root]
        top = 0
        stack[0] = root
        while top >= 0:
            v = stack[top]
            p = cursor[v]
            if p < indptr[v + 1]:
                cursor[v] = p + 1
                w = indices[p]
                if disc[w] < 0:
                    parent[w] = v
                    disc[w] = t
                    low[w] = t
                    order[t] = w
                    t += 1
                    cursor[w] = indptr[w]
                    top += 1
                    stack[top] = w
                elif w != parent[v] and disc[w] < low[v]:
                    low[v] = disc[w]
            else:
                top -= 1
                if top >= 0:
                    u = stack[top]
                    if low[v] < low[u]:
                        low[u] = low[v]
                    sub_nodes[u] += sub_nodes[v]
                    sub_size[u] += sub_size[v]
    return disc, low, parent, order, sub_nodes, sub_size


@njit(cache=True)
def _signed_incidence(a, b, scale, bits, out):  # pragma: no cover - compiled
    """``out = B^T diag(scale) S``: link ``e`` adds ``+-scale[e]`` at ``a[e]``, minus at ``b[e]``.

    ``bits[e, c]`` (0 or 1) picks the sign of link ``e`` in column ``c``.
    """
    out[:] = 0.0
    for e in range(a.size):
        for c in range(out.shape[1]):
            v = scale[e] if bits[e, c] else -scale[e]
            out[a[e], c] += v
            out[b[e], c] -= v


@njit(cache=True)
def _squared_differences(x, a, b, out):  # pragma: no cover - compiled
    """``out[e] = ||x[a[e]] - x[b[e]]||^2`` over the rows of a block."""
    for e in range(a.size):
        acc = 0.0
        for c in range(x.shape[1]):
            d = x[a[e], c] - x[b[e], c]
            acc += d * d
        out[e] = acc


# ------------------------------------------------------------------ cut structure
@dataclass(frozen=True, eq=False, repr=False)
class CutStructure:
    """Bridges and articulation nodes of a network, with what each cuts off.

    Row indices throughout (see :attr:`Network.node_ids`). A link's *cut-off
    side* is the side of its component that does not hold the larger part:
    the side of smaller size (sum of node sizes, nodes when the network has
    none), then of fewer nodes; on a full tie, the side away from the
    component's first node. An articulation node's cut-off is every piece
    left by its failure but the largest (by size, then nodes); the failed
    node itself is not counted.

    Attributes
    ----------
    link_source, link_target : ndarray of int, shape (m,)
        Ends of every distinct link (``source < target``), row-major order.
    link_weight : ndarray of float, shape (m,)
    is_bridge : ndarray of bool, shape (m,)
    cut_nodes, cut_size : ndarray, shape (m,)
        For each link, nodes and size on its cut-off side (0 for non-bridges).
    cut_end : ndarray of int, shape (m,)
        The link end on the cut-off side (-1 for non-bridges).
    articulation : ndarray of int
        Articulation nodes, ascending.
    pieces, node_cut_nodes, node_cut_size : ndarray, aligned with ``articulation``
        Pieces its failure leaves, and the nodes and size of all but the largest.
    """

    link_source: np.ndarray
    link_target: np.ndarray
    link_weight: np.ndarray
    is_bridge: np.ndarray
    cut_nodes: np.ndarray
    cut_size: np.ndarray
    cut_end: np.ndarray
    articulation: np.ndarray
    pieces: np.ndarray
    node_cut_nodes: np.ndarray
    node_cut_size: np.ndarray
    _disc: np.ndarray = field(repr=False)
    _low: np.ndarray = field(repr=False)
    _parent: np.ndarray = field(repr=False)
    _order: np.ndarray = field(repr=False)
    _sub_nodes: np.ndarray = field(repr=False)
    _components: np.ndarray = field(repr=False)
    _adjacency: sp.csr_array = field(repr=False)
    _sizes: np.ndarray = field(repr=False)

    @property
    def n_bridges(self) -> int:
        return int(self.is_bridge.sum())

    def _subtree(self, v: int) -> np.ndarray:
        start = int(self._disc[v])
        return self._order[start : start + int(self._sub_nodes[v])]

    def link_cut_off(self, link: int) -> np.ndarray:
        """Rows cut off by the failure of link number ``link`` (empty for a non-bridge)."""
        if not self.is_bridge[link]:
            return np.zeros(0, dtype=np.int64)
        a, b = int(self.link_source[link]), int(self.link_target[link])
        child = a if self._parent[a] == b else b
        subtree = self._subtree(child)
        if self.cut_end[link] == child:
            return np.sort(subtree)
        rest = np.flatnonzero(self._components == self._components[child])
        return np.setdiff1d(rest, subtree, assume_unique=True)

    def node_cut_off(self, v: int) -> np.ndarray:
        """Rows cut off by the failure of node ``v``: all pieces but the largest."""
        where = np.searchsorted(self.articulation, v)
        if where >= self.articulation.size or self.articulation[where] != v:
            return np.zeros(0, dtype=np.int64)
        adj = self._adjacency
        neighbours = adj.indices[adj.indptr[v] : adj.indptr[v + 1]]
        kids = neighbours[
            (self._parent[neighbours] == v) & (self._low[neighbours] >= self._disc[v])
        ]
        pieces = [self._subtree(int(c)) for c in kids]
        if self._parent[v] >= 0:
            comp = np.flatnonzero(self._components == self._components[v])
            taken = np.concatenate([*pieces, [v]])
            pieces.append(np.setdiff1d(comp, taken))
        sizes = self._sizes
        keys = [(float(sizes[p].sum()), p.size) for p in pieces]
        largest = max(range(len(pieces)), key=lambda i: keys[i])
        rest = [p for i, p in enumerate(pieces) if i != largest]
        return np.sort(np.concatenate(rest)) if rest else np.zeros(0, dtype=np.int64)


def _distinct_links(adjacency: sp.csr_array) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Ends (``source < target``) and weights of every link, in row-major order."""
    counts = np.diff(adjacency.indptr)
    rows = np.repeat(np.arange(adjacency.shape[0], dtype=np.int64), counts)
    cols = adjacency.indices.astype(np.int64)
    upper = cols > rows
    return rows[upper], cols[upper], np.asarray(adjacency.data[upper], dtype=np.float64)


def cut_structure(network: Network) -> CutStructure:
    """Bridges and articulation nodes, and what each failure cuts off, in O(n + m).

    Parameters
    ----------
    network : Network

    Returns
    -------
    CutStructure

    Notes
    -----
    A tree link ``(p, v)`` (``p`` the parent) is a bridge when
    :math:`\\mathrm{low}(v) > \\mathrm{disc}(p)`; a non-root ``p`` is an
    articulation node when some child has :math:`\\mathrm{low}(v) \\ge
    \\mathrm{disc}(p)`, and the root when it has two children or more [2]_
    [3]_. The subtree of ``v`` is one side of the bridge, the rest of the
    component the other; the pieces around ``p`` are the separated child
    subtrees plus (for a non-root) the rest of the component.

    Links are the distinct node pairs of the adjacency: parallel input links
    are merged on input (see :class:`~specgraph.network.Network`), so a pair
    joined by two parallel pipes counts as one link here.

    Examples
    --------
    >>> from specgraph import gallery
    >>> cuts = cut_structure(gallery.barbell(4))
    >>> cuts.n_bridges, cuts.articulation.tolist(), cuts.cut_nodes[cuts.is_bridge].tolist()
    (1, [3, 4], [4])
    """
    adjacency = network.adjacency
    n = network.n_nodes
    sizes = np.ascontiguousarray(network.node_weights, dtype=np.float64)
    disc, low, parent, order, sub_nodes, sub_size = _low_link_forest(
        adjacency.indptr.astype(np.int64), adjacency.indices.astype(np.int64), sizes
    )
    labels = network.component_labels
    comp_nodes = np.bincount(labels, minlength=network.n_components)
    comp_size = np.bincount(labels, weights=sizes, minlength=network.n_components)
    source, target, weight = _distinct_links(adjacency)

    # Bridges: tree links (parent[v], v) with low[v] > disc[parent[v]].
    child = np.flatnonzero(parent >= 0)
    par = parent[child]
    bridge_child = child[low[child] > disc[par]]
    bridge_parent = parent[bridge_child]
    keys = source * n + target
    lo, hi = np.minimum(bridge_child, bridge_parent), np.maximum(bridge_child, bridge_parent)
    link_of = np.searchsorted(keys, lo * n + hi)
    in_nodes = sub_nodes[bridge_child]
    in_size = sub_size[bridge_child]
    out_nodes = comp_nodes[labels[bridge_child]] - in_nodes
    out_size = comp_size[labels[bridge_child]] - in_size
    subtree_side = (in_size < out_size) | ((in_size == out_size) & (in_nodes <= out_nodes))
    m = source.size
    is_bridge = np.zeros(m, dtype=bool)
    is_bridge[link_of] = True
    cut_nodes = np.zeros(m, dtype=np.int64)
    cut_size = np.zeros(m)
    cut_end = np.full(m, -1, dtype=np.int64)
    cut_nodes[link_of] = np.where(subtree_side, in_nodes, out_nodes)
    cut_size[link_of] = np.where(subtree_side, in_size, out_size)
    cut_end[link_of] = np.where(subtree_side, bridge_child, bridge_parent)

    articulation, pieces, node_nodes, node_size = _articulation_figures(
        child, par, disc, low, parent, sub_nodes, sub_size, labels, comp_nodes, comp_size, sizes
    )
    return CutStructure(
        link_source=source,
        link_target=target,
        link_weight=weight,
        is_bridge=is_bridge,
        cut_nodes=cut_nodes,
        cut_size=cut_size,
        cut_end=cut_end,
        articulation=articulation,
        pieces=pieces,
        node_cut_nodes=node_nodes,
        node_cut_size=node_size,
        _disc=disc,
        _low=low,
        _parent=parent,
        _order=order,
        _sub_nodes=sub_nodes,
        _components=labels,
        _adjacency=adjacency,
        _sizes=sizes,
    )


def _articulation_figures(
    child: np.ndarray,
    par: np.ndarray,
    disc: np.ndarray,
    low: np.ndarray,
    parent: np.ndarray,
    sub_nodes: np.ndarray,
    sub_size: np.ndarray,
    labels: np.ndarray,
    comp_nodes: np.ndarray,
    comp_size: np.ndarray,
    sizes: np.ndarray,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Articulation nodes, their piece counts, and nodes and size of all but the largest piece."""
    n = disc.size
    separated = low[child] >= disc[par]  # always true below a root
    owner = par[separated]
    kids = child[separated]
    n_sep = np.bincount(owner, minlength=n)
    is_root = parent < 0
    sep_nodes = np.bincount(owner, weights=sub_nodes[kids], minlength=n)
    sep_size = np.bincount(owner, weights=sub_size[kids], minlength=n)
    total_nodes = comp_nodes[labels] - 1
    total_size = comp_size[labels] - sizes
    articulate = np.where(is_root, n_sep >= 2, n_sep >= 1)
    # Candidate pieces: every separated subtree, and the rest of the component
    # (which holds the parent) for a non-root articulation node.
    rest = np.flatnonzero(articulate & ~is_root)
    cand_owner = np.concatenate([owner, rest])
    cand_nodes = np.concatenate([sub_nodes[kids], (total_nodes - sep_nodes)[rest]])
    cand_size = np.concatenate([sub_size[kids], (total_size - sep_size)[rest]])
    keep = articulate[cand_owner]
    cand_owner, cand_nodes, cand_size = cand_owner[keep], cand_nodes[keep], cand_size[keep]
    sort = np.lexsort((cand_nodes, cand_size, cand_owner))
    ends = cand_owner[sort]
    last = np.flatnonzero(np.r_[ends[1:] != ends[:-1], ends.size > 0])
    largest = sort[last]  # one per articulation node, ascending by node
    nodes = cand_owner[largest]
    pieces = n_sep[nodes] + (~is_root[nodes]).astype(np.int64)
    cut_nodes = (total_nodes[nodes] - cand_nodes[largest]).astype(np.int64)
    cut_size = total_size[nodes] - cand_size[largest]
    return nodes.astype(np.int64), pieces.astype(np.int64), cut_nodes, cut_size


# ------------------------------------------------------------------------ groups
@dataclass(frozen=True, eq=False)
class _Groups:
    """Nodes grouped by a label (component or piece): members of each group, contiguous."""

    labels: np.ndarray
    counts: np.ndarray
    order: np.ndarray  # nodes sorted by label (stable)
    starts: np.ndarray

    @classmethod
    def of(cls, labels: np.ndarray, count: int) -> _Groups:
        counts = np.bincount(labels, minlength=count)
        order = np.argsort(labels, kind="stable")
        starts = np.concatenate([[0], np.cumsum(counts)[:-1]]).astype(np.int64)
        return cls(labels, counts, order, starts)

    def members(self, group: int) -> np.ndarray:
        start = int(self.starts[group])
        return self.order[start : start + int(self.counts[group])]

    def stacked(self, adjacency: sp.csr_array, size: int) -> tuple[np.ndarray, np.ndarray]:
        """Groups of exactly ``size`` nodes: their ids ``(c,)`` and adjacency blocks ``(c, s, s)``.

        The sub-matrix on all their nodes is block diagonal, one block per group.
        """
        groups = np.flatnonzero(self.counts == size)
        rows = self.order[self.starts[groups][:, None] + np.arange(size)].ravel()
        block = adjacency[rows][:, rows].tocoo()
        stacked = np.zeros((groups.size, size, size))
        stacked[block.row // size, block.row % size, block.col % size] = block.data
        return groups, stacked


def _stacked_laplacians(blocks: np.ndarray, kind: str) -> np.ndarray:
    degrees = blocks.sum(axis=2)
    if kind == "combinatorial":
        out = -blocks
        idx = np.arange(blocks.shape[1])
        out[:, idx, idx] += degrees
        return out
    scale = 1.0 / np.sqrt(degrees)  # connected groups of two nodes or more: degrees > 0
    out = -blocks * scale[:, :, None] * scale[:, None, :]
    idx = np.arange(blocks.shape[1])
    out[:, idx, idx] += 1.0
    return out


# -------------------------------------------------------- algebraic connectivity
@dataclass(frozen=True, eq=False)
class _Spectra:
    values: np.ndarray  # second smallest eigenvalue per group (NaN for one node)
    vector: np.ndarray  # Fiedler vector, unit norm on each group (0 on single nodes)
    methods: set[str]
    max_residual: float


def _group_spectra(
    network: Network,
    adjacency: sp.csr_array,
    groups: _Groups,
    kind: str,
    tol: float,
    rng: np.random.Generator,
) -> _Spectra:
    """Second smallest eigenpair of ``kind``'s Laplacian on each connected group of nodes.

    Groups of up to :data:`STACKED_LIMIT` nodes are solved as stacked dense
    matrices (what :func:`smallest_eigenpairs` does for any small component,
    one LAPACK call per size instead of one per group); larger groups by
    :func:`smallest_eigenpairs` on the group's sub-network.
    """
    values = np.full(groups.counts.size, np.nan)
    vector = np.zeros(adjacency.shape[0])
    methods: set[str] = set()
    worst = 0.0
    for size in range(2, min(STACKED_LIMIT, int(groups.counts.max(initial=0))) + 1):
        ids, blocks = groups.stacked(adjacency, size)
        if ids.size == 0:
            continue
        vals, vecs = np.linalg.eigh(_stacked_laplacians(blocks, kind))
        values[ids] = vals[:, 1]
        rows = groups.order[groups.starts[ids][:, None] + np.arange(size)]
        vector[rows] = vecs[:, :, 1]
        methods.add("dense")
    for group in np.flatnonzero(groups.counts > STACKED_LIMIT):
        rows = groups.members(int(group))
        if rows.size == network.n_nodes and adjacency is network.adjacency:
            sub = network
        else:
            sub = Network(adjacency[rows][:, rows], network.node_ids[rows])
        result = smallest_eigenpairs(laplacian(sub, kind=kind), 2, tol=tol, rng=rng)  # type: ignore[arg-type]
        values[group] = result.values[1]
        vector[rows] = result.vectors[:, 1]
        methods.add(result.method)
        worst = max(worst, result.max_residual)
    return _Spectra(values, vector, methods, worst)


# ------------------------------------------------------------ effective resistance
@dataclass(frozen=True, eq=False)
class LinkResistances:
    """Effective resistance of every distinct link.

    Attributes
    ----------
    source, target : ndarray of int, shape (m,)
        Link ends (rows, ``source < target``), row-major order as in
        :class:`CutStructure`.
    weight : ndarray of float
    resistance : ndarray of float
        :math:`R_{ij}`; exact (to rounding) for bridges (:math:`1/w_{ij}`) and
        for links in pieces solved exactly, estimated for sketched pieces.
    estimated : ndarray of bool
        Links whose resistance comes from the sketch.
    method : str
        ``'exact'``, ``'sketch'``, ``'exact+sketch'`` or ``'none'`` (no link
        outside bridges).
    sketch_rows : int
        Rows of the sign matrix used (0 when nothing was sketched).
    max_residual : float
        Largest relative residual of the sketch solves (0 when none).
    """

    source: np.ndarray
    target: np.ndarray
    weight: np.ndarray
    resistance: np.ndarray
    estimated: np.ndarray
    method: str
    sketch_rows: int
    max_residual: float

    @property
    def leverage(self) -> np.ndarray:
        """:math:`w_{ij} R_{ij}`: 1 for a bridge; these sum to ``n - c`` (Foster)."""
        return self.weight * self.resistance


def effective_resistances(
    network: Network,
    *,
    method: str = "auto",
    sketch_rows: int = SKETCH_ROWS,
    rng: Any = None,
) -> LinkResistances:
    """Effective resistance :math:`R_{ij} = (e_i - e_j)^T L^+ (e_i - e_j)` of every link.

    Parameters
    ----------
    network : Network
    method : {'auto', 'exact', 'sketch'}, default='auto'
        ``'exact'`` inverts every 2-edge-connected piece densely (memory
        :math:`8 m^2` bytes for a piece of ``m`` nodes); ``'sketch'`` estimates
        every piece; ``'auto'`` is exact up to :data:`EXACT_RESISTANCE_LIMIT`
        nodes per piece and sketched beyond.
    sketch_rows : int, default=SKETCH_ROWS
        Rows ``q`` of the random sign matrix.
    rng : None, int or numpy.random.Generator
        Seeds the sign matrix.

    Returns
    -------
    LinkResistances

    Notes
    -----
    A bridge carries no current between the ends of any other link (the
    current would have to cross it both ways), so each 2-edge-connected piece
    is solved alone, and a bridge's resistance is :math:`1/w`.

    *Exact:* :math:`L^+ = (L + J/m)^{-1} - J/m` on a connected piece of ``m``
    nodes (:math:`J` all ones), a standard identity (common practice).

    *Sketch* (Spielman and Srivastava [4]_): with :math:`B` the link-node
    incidence matrix, :math:`W` the weights and :math:`Q` a :math:`q \\times m`
    matrix of independent :math:`\\pm 1/\\sqrt q`,

    .. math::

        R_{ij} = \\|W^{1/2} B L^+ (e_i - e_j)\\|^2
        \\approx \\|Q W^{1/2} B L^+ (e_i - e_j)\\|^2 = \\|X_i - X_j\\|^2,
        \\qquad L X = B^T W^{1/2} Q^T ,

    so ``q`` Laplacian solves give every link's estimate at once. Each
    estimate has relative standard deviation about :math:`\\sqrt{2/q}`
    (0.29 at the default; see :data:`SKETCH_ROWS` for measured errors). The
    solves are flexible conjugate gradients preconditioned by the aggregation
    K-cycle of the multilevel eigen-solver (pyamg aggregation), on the piece
    reordered by reverse Cuthill-McKee, with the constant vector deflated, to
    a relative residual of :data:`SOLVE_RTOL`. (pyamg's smoothed aggregation
    under scipy's ``cg``, one right-hand side at a time, was measured at 25 s
    of setup and 20 s per solve on the million-node road-like network; the
    block K-cycle solves :data:`SOLVE_BLOCK` right-hand sides together.)

    Raises
    ------
    ConvergenceError
        When a sketch solve misses :data:`SOLVE_RTOL` after
        :data:`SOLVE_MAX_ROUNDS` rounds (``err.partial`` is None).

    Examples
    --------
    >>> from specgraph import gallery
    >>> res = effective_resistances(gallery.ring(4))
    >>> res.resistance.round(6).tolist()  # (n - 1) / n on a ring of n
    [0.75, 0.75, 0.75, 0.75]
    """
    check_choice(method, "method", RESISTANCE_METHODS)
    sketch_rows = check_int(sketch_rows, "sketch_rows", minimum=1)
    return _resistances(network, cut_structure(network), method, sketch_rows, check_rng(rng))


def _resistances(
    network: Network, cuts: CutStructure, method: str, q: int, rng: np.random.Generator
) -> LinkResistances:
    n = network.n_nodes
    source, target, weight = cuts.link_source, cuts.link_target, cuts.link_weight
    resistance = np.zeros(source.size)
    resistance[cuts.is_bridge] = 1.0 / weight[cuts.is_bridge]
    estimated = np.zeros(source.size, dtype=bool)
    inner = np.flatnonzero(~cuts.is_bridge)
    upper = sp.coo_array((weight[inner], (source[inner], target[inner])), shape=(n, n))
    pieces_adj = (upper + upper.T).tocsr()
    count, piece = connected_components(pieces_adj, directed=False)
    groups = _Groups.of(piece.astype(np.int64), count)
    position = np.empty(n, dtype=np.int64)
    position[groups.order] = np.arange(n) - groups.starts[groups.labels[groups.order]]
    link_piece = piece[source[inner]]
    link_sort = np.argsort(link_piece, kind="stable")
    link_starts = np.searchsorted(link_piece[link_sort], np.arange(count + 1))
    used: set[str] = set()
    worst = 0.0
    limit = {"exact": n, "sketch": 1, "auto": EXACT_RESISTANCE_LIMIT}[method]
    for size in range(3, min(STACKED_LIMIT, limit) + 1):
        ids, blocks = groups.stacked(pieces_adj, size)
        if ids.size == 0:
            continue
        pinv = np.linalg.inv(_stacked_laplacians(blocks, "combinatorial") + 1.0 / size) - 1.0 / size
        slot = np.full(count, -1, dtype=np.int64)
        slot[ids] = np.arange(ids.size)
        links = inner[slot[link_piece] >= 0]
        k, a, b = slot[piece[source[links]]], position[source[links]], position[target[links]]
        resistance[links] = pinv[k, a, a] + pinv[k, b, b] - 2.0 * pinv[k, a, b]
        used.add("exact")
    for group in np.flatnonzero(groups.counts > min(STACKED_LIMIT, limit)):
        rows = groups.members(int(group))
        links = inner[link_sort[link_starts[group] : link_starts[group + 1]]]
        a, b = position[source[links]], position[target[links]]
        block = pieces_adj[rows][:, rows]
        if rows.size <= limit:
            resistance[links] = _exact_piece(block, a, b)
            used.add("exact")
        else:
            resistance[links], residual = _sketch_piece(block, a, b, weight[links], q, rng)
            estimated[links] = True
            worst = max(worst, residual)
            used.add("sketch")
    return LinkResistances(
        source=source,
        target=target,
        weight=weight,
        resistance=resistance,
        estimated=estimated,
        method="+".join(sorted(used)) or "none",
        sketch_rows=q if "sketch" in used else 0,
        max_residual=worst,
    )


def _exact_piece(block: sp.csr_array, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Exact resistances on one connected piece, from :math:`(L + J/m)^{-1} - J/m`."""
    m = block.shape[0]
    dense = -block.toarray()
    dense[np.diag_indices(m)] += block.sum(axis=1)
    pinv = np.linalg.inv(dense + 1.0 / m) - 1.0 / m
    return pinv[a, a] + pinv[b, b] - 2.0 * pinv[a, b]


def _sketch_piece(
    block: sp.csr_array,
    a: np.ndarray,
    b: np.ndarray,
    weight: np.ndarray,
    q: int,
    rng: np.random.Generator,
) -> tuple[np.ndarray, float]:
    """Johnson-Lindenstrauss estimates of the resistances of one connected piece."""
    m = block.shape[0]
    if m > REORDER_MIN:
        perm = reverse_cuthill_mckee(sp.csr_matrix(block), symmetric_mode=True)
        block = block[perm][:, perm]
        inverse = np.empty(m, dtype=np.int64)
        inverse[perm] = np.arange(m)
        a, b = inverse[a], inverse[b]
    lap = (sp.diags_array(np.asarray(block.sum(axis=1)).ravel()) - block).tocsr()
    lap.sort_indices()
    hierarchy = build_hierarchy(lap, np.full(m, 1.0 / np.sqrt(m)))
    root_w = np.sqrt(weight) / np.sqrt(q)
    total = np.zeros(a.size)
    part = np.empty(a.size)
    worst = 0.0
    for start in range(0, q, SOLVE_BLOCK):
        width = min(SOLVE_BLOCK, q - start)
        rhs = np.empty((m, width))
        bits = rng.integers(0, 2, size=(a.size, width), dtype=np.uint8)
        _signed_incidence(a, b, root_w, bits, rhs)
        x, residual = _solve_block(lap, hierarchy, rhs)
        _squared_differences(x, a, b, part)
        total += part
        worst = max(worst, residual)
    return total, worst


def _solve_block(lap: sp.csr_array, hierarchy: Any, rhs: np.ndarray) -> tuple[np.ndarray, float]:
    """Solve ``L X = rhs`` (columns summing to zero) by refinement around the K-cycle FCG."""
    norms = np.linalg.norm(rhs, axis=0)
    norms[norms == 0] = 1.0
    x = np.zeros_like(rhs)
    residual = rhs.copy()
    relative = np.ones(rhs.shape[1])
    for _ in range(SOLVE_MAX_ROUNDS):
        step = hierarchy.solve(0, np.ascontiguousarray(residual), SOLVE_ROUND_STEPS)
        step = np.asarray(step, dtype=np.float64)
        x += step - step.mean(axis=0)  # deflate the constant vector
        residual = rhs - lap @ x
        relative = np.linalg.norm(residual, axis=0) / norms
        if relative.max() <= SOLVE_RTOL:
            return np.ascontiguousarray(x), float(relative.max())
    raise ConvergenceError(
        f"a resistance sketch solve reached relative residual {relative.max():.3g} after "
        f"{SOLVE_MAX_ROUNDS} rounds against {SOLVE_RTOL:.3g}; use resistance='exact' on "
        "small networks or report the network",
        partial=None,
    )


# ------------------------------------------------------------------------ report
@dataclass(frozen=True, eq=False, repr=False)
class Robustness:
    """Where a network is fragile, from :func:`robustness`.

    Attributes
    ----------
    algebraic_connectivity : float
        Second smallest eigenvalue of :math:`L = D - A` for the whole network:
        0 when it is disconnected (Fiedler [1]_), NaN for a single node.
    normalized_connectivity : float
        The same for the normalized Laplacian; Cheeger's inequality bounds the
        least conductance of any cut between half of it and
        :math:`\\sqrt{2 \\lambda_2}`.
    components : pandas.DataFrame
        One row per connected component: ``component``, ``nodes``, ``size``,
        ``links``, ``algebraic_connectivity``, ``normalized_connectivity``,
        ``cheeger_low``, ``cheeger_high`` (bounds on the component's least
        conductance), ``bridges``, ``articulation_nodes``. Eigenvalues are
        NaN for a single-node component.
    zones : pandas.DataFrame or None
        With ``labels``: one row per zone ``0..k-1``: ``zone``, ``nodes``,
        ``size``, ``pieces`` (connected pieces of the zone's induced
        sub-network), ``connected``, ``algebraic_connectivity``,
        ``normalized_connectivity``, ``cheeger_low``, ``cheeger_high``; 0 for
        a disconnected zone, NaN for a zone of one node or none.
    bridges : pandas.DataFrame
        Every bridge, most harmful first: ``source``, ``target``, ``weight``,
        ``cut_nodes``, ``cut_size`` (what its failure cuts off, see
        :class:`CutStructure`), ``cut_end`` (the end on the cut-off side),
        ``component``.
    nodes : pandas.DataFrame
        Every articulation node, most harmful first: ``node``, ``pieces``,
        ``cut_nodes``, ``cut_size`` (all pieces but the largest),
        ``component``.
    links : pandas.DataFrame
        The ``top`` bottleneck links: ``source``, ``target``, ``weight``,
        ``leverage`` (:math:`w R`), ``resistance``, ``bridge``, ``cut_nodes``,
        ``cut_size`` (0 for non-bridges), ``fiedler_difference``
        (:math:`|u_2(i) - u_2(j)|` for the unit Fiedler vector of ``L`` on
        the component; arbitrary within the eigenspace when
        :math:`\\lambda_2` is repeated), ``estimated`` (leverage from the
        sketch). Ranked bridges first by what they cut off, then by leverage.
    record : dict
        Counts, methods and residuals, for the run record.
    """

    algebraic_connectivity: float
    normalized_connectivity: float
    components: pd.DataFrame
    zones: pd.DataFrame | None
    bridges: pd.DataFrame
    nodes: pd.DataFrame
    links: pd.DataFrame
    record: dict[str, Any]
    structure: CutStructure
    node_ids: np.ndarray

    def __repr__(self) -> str:
        return (
            f"Robustness(algebraic_connectivity={self.algebraic_connectivity:.6g}, "
            f"bridges={len(self.bridges)}, articulation_nodes={len(self.nodes)})"
        )

    def cut_off(self, source: str, target: str | None = None) -> np.ndarray:
        """Ids of the nodes cut off by the failure of a link (two ids) or a node (one id).

        Empty when the link is not a bridge or the node not an articulation node.

        Raises
        ------
        ParameterError
            When an id is not a node, or the two ids are not linked.
        """
        index = {node: i for i, node in enumerate(self.node_ids.tolist())}
        ends = [source] if target is None else [source, target]
        missing = [str(e) for e in ends if str(e) not in index]
        if missing:
            raise ParameterError(f"node ids must be nodes of the network; got {missing!r}.")
        rows = sorted(index[str(e)] for e in ends)
        cuts = self.structure
        if target is None:
            return self.node_ids[cuts.node_cut_off(rows[0])]
        n = self.node_ids.size
        keys = cuts.link_source * n + cuts.link_target
        where = int(np.searchsorted(keys, rows[0] * n + rows[1]))
        if where >= keys.size or keys[where] != rows[0] * n + rows[1]:
            raise ParameterError(
                f"source and target must be the ends of a link; got {source!r} and {target!r}."
            )
        return self.node_ids[cuts.link_cut_off(where)]


def robustness(
    network: Network,
    *,
    labels: np.ndarray | None = None,
    top: int = DEFAULT_TOP,
    rng: Any = None,
    tol: float = DEFAULT_TOL,
    resistance: str = "auto",
    sketch_rows: int = SKETCH_ROWS,
) -> Robustness:
    """Algebraic connectivity, bridges, articulation nodes and bottleneck links of a network.

    Parameters
    ----------
    network : Network
    labels : ndarray of int, shape (n_nodes,), optional
        Zone of each node (from 0); adds per-zone algebraic connectivity.
    top : int, default=DEFAULT_TOP
        Bottleneck links to list, ``>= 0``.
    rng : None, int or numpy.random.Generator
        Seeds the eigen-solves and the resistance sketch.

    Returns
    -------
    Robustness

    Other Parameters
    ----------------
    tol : float, default=DEFAULT_TOL
        Scaled residual every eigen-solve must meet (see
        :func:`~specgraph.smallest_eigenpairs`).
    resistance : {'auto', 'exact', 'sketch'}, default='auto'
        How resistances are computed (see :func:`effective_resistances`).
    sketch_rows : int, default=SKETCH_ROWS
        Rows of the resistance sketch.

    Raises
    ------
    ConvergenceError
        When an eigen-solve or a sketch solve misses its tolerance.
    ParameterError, InputError
        For an option outside its domain or labels that do not fit.

    Notes
    -----
    Links are ranked bridges first (leverage exactly 1; a bridge's failure
    disconnects the network), most cut off first, then by leverage
    :math:`w_{ij} R_{ij}`, the share of the link in the network's spanning
    trees (Spielman and Srivastava [4]_): near 1 for a link with no good
    alternative route, near 0 for one with many. Leverages sum to
    :math:`n - c` over a network of ``c`` components (Foster's theorem).

    Examples
    --------
    >>> from specgraph import gallery
    >>> report = robustness(gallery.barbell(5), rng=0)
    >>> first = report.links.iloc[0]
    >>> first["source"], first["target"], bool(first["bridge"]), int(first["cut_nodes"])
    ('4', '5', True, 5)
    >>> round(report.algebraic_connectivity, 4)
    0.2984
    """
    top = check_int(top, "top", minimum=0)
    tol = check_positive_float(tol, "tol")
    check_choice(resistance, "resistance", RESISTANCE_METHODS)
    sketch_rows = check_int(sketch_rows, "sketch_rows", minimum=1)
    generator = check_rng(rng)
    zone_labels = None if labels is None else check_labels(network, labels)

    cuts = cut_structure(network)
    groups = _Groups.of(network.component_labels, network.n_components)
    combinatorial = _group_spectra(
        network, network.adjacency, groups, "combinatorial", tol, generator
    )
    normalized = _group_spectra(network, network.adjacency, groups, "normalized", tol, generator)
    resistances = _resistances(network, cuts, resistance, sketch_rows, generator)
    zones = None
    zone_spectra: list[_Spectra] = []
    if zone_labels is not None:
        zones, zone_spectra = _zone_table(network, zone_labels, tol, generator)

    ids = network.node_ids
    record = {
        "bridges": cuts.n_bridges,
        "articulation_nodes": int(cuts.articulation.size),
        "components": network.n_components,
        "resistance_method": resistances.method,
        "sketch_rows": resistances.sketch_rows,
        "sketch_max_residual": resistances.max_residual,
        "eigen_methods": sorted(
            set().union(*(s.methods for s in (combinatorial, normalized, *zone_spectra)))
        ),
        "eigen_max_residual": max(
            s.max_residual for s in (combinatorial, normalized, *zone_spectra)
        ),
        "tol": tol,
    }
    return Robustness(
        algebraic_connectivity=_whole(network, combinatorial.values),
        normalized_connectivity=_whole(network, normalized.values),
        components=_component_table(network, cuts, combinatorial.values, normalized.values),
        zones=zones,
        bridges=_bridge_table(network, cuts),
        nodes=_node_table(network, cuts),
        links=_link_table(ids, cuts, resistances, combinatorial.vector, top),
        record=record,
        structure=cuts,
        node_ids=ids,
    )


def _whole(network: Network, values: np.ndarray) -> float:
    if network.n_nodes < 2:
        return float("nan")
    return float(values[0]) if network.n_components == 1 else 0.0


def _cheeger_columns(values: np.ndarray) -> dict[str, np.ndarray]:
    bounds = [cheeger_bounds(v) if np.isfinite(v) else (np.nan, np.nan) for v in values]
    pairs = np.array(bounds, dtype=float).reshape(-1, 2)
    return {"cheeger_low": pairs[:, 0], "cheeger_high": pairs[:, 1]}


def _component_table(
    network: Network, cuts: CutStructure, comb: np.ndarray, norm: np.ndarray
) -> pd.DataFrame:
    c = network.n_components
    labels = network.component_labels
    return pd.DataFrame(
        {
            "component": np.arange(c),
            "nodes": np.bincount(labels, minlength=c),
            "size": np.bincount(labels, weights=network.node_weights, minlength=c),
            "links": np.bincount(labels[cuts.link_source], minlength=c),
            "algebraic_connectivity": comb,
            "normalized_connectivity": norm,
            **_cheeger_columns(norm),
            "bridges": np.bincount(labels[cuts.link_source[cuts.is_bridge]], minlength=c),
            "articulation_nodes": np.bincount(labels[cuts.articulation], minlength=c),
        }
    )


def _zone_table(
    network: Network, labels: np.ndarray, tol: float, rng: np.random.Generator
) -> tuple[pd.DataFrame, list[_Spectra]]:
    """Per zone: connected pieces of its induced sub-network and their algebraic connectivity."""
    k = int(labels.max()) + 1 if labels.size else 0
    coo = network.adjacency.tocoo()
    inside = labels[coo.row] == labels[coo.col]
    shape = network.adjacency.shape
    inner = sp.csr_array((coo.data[inside], (coo.row[inside], coo.col[inside])), shape=shape)
    count, piece = connected_components(inner, directed=False)
    groups = _Groups.of(piece.astype(np.int64), count)
    spectra = [
        _group_spectra(network, inner, groups, kind, tol, rng)
        for kind in ("combinatorial", "normalized")
    ]
    zone_of_piece = np.zeros(count, dtype=np.int64)
    zone_of_piece[piece] = labels
    pieces = np.bincount(zone_of_piece, minlength=k)
    nodes = np.bincount(labels, minlength=k)
    columns = {}
    for name, spec in zip(
        ("algebraic_connectivity", "normalized_connectivity"), spectra, strict=True
    ):
        value = np.full(k, np.nan)
        single = np.flatnonzero(pieces == 1)
        first_piece = np.full(k, -1, dtype=np.int64)
        first_piece[zone_of_piece] = np.arange(count)
        value[single] = spec.values[first_piece[single]]
        value[pieces > 1] = 0.0  # a disconnected zone (Fiedler 1973)
        columns[name] = value
    table = pd.DataFrame(
        {
            "zone": np.arange(k),
            "nodes": nodes,
            "size": np.bincount(labels, weights=network.node_weights, minlength=k),
            "pieces": pieces,
            "connected": pieces == 1,
            **columns,
            **_cheeger_columns(columns["normalized_connectivity"]),
        }
    )
    return table, spectra


def _bridge_table(network: Network, cuts: CutStructure) -> pd.DataFrame:
    bridges = np.flatnonzero(cuts.is_bridge)
    order = np.lexsort((bridges, -cuts.cut_nodes[bridges], -cuts.cut_size[bridges]))
    rows = bridges[order]
    ids = network.node_ids
    return pd.DataFrame(
        {
            "source": ids[cuts.link_source[rows]],
            "target": ids[cuts.link_target[rows]],
            "weight": cuts.link_weight[rows],
            "cut_nodes": cuts.cut_nodes[rows],
            "cut_size": cuts.cut_size[rows],
            "cut_end": ids[cuts.cut_end[rows]],
            "component": network.component_labels[cuts.link_source[rows]],
        }
    )


def _node_table(network: Network, cuts: CutStructure) -> pd.DataFrame:
    order = np.lexsort((cuts.articulation, -cuts.pieces, -cuts.node_cut_nodes, -cuts.node_cut_size))
    nodes = cuts.articulation[order]
    return pd.DataFrame(
        {
            "node": network.node_ids[nodes],
            "pieces": cuts.pieces[order],
            "cut_nodes": cuts.node_cut_nodes[order],
            "cut_size": cuts.node_cut_size[order],
            "component": network.component_labels[nodes],
        }
    )


def _link_table(
    ids: np.ndarray,
    cuts: CutStructure,
    res: LinkResistances,
    fiedler: np.ndarray,
    top: int,
) -> pd.DataFrame:
    leverage = res.leverage
    index = np.arange(leverage.size)
    order = np.lexsort(
        (index, -leverage, -cuts.cut_nodes, -cuts.cut_size, -cuts.is_bridge.astype(np.int8))
    )
    rows = order[:top]
    src, dst = cuts.link_source[rows], cuts.link_target[rows]
    return pd.DataFrame(
        {
            "source": ids[src],
            "target": ids[dst],
            "weight": cuts.link_weight[rows],
            "leverage": leverage[rows],
            "resistance": res.resistance[rows],
            "bridge": cuts.is_bridge[rows],
            "cut_nodes": cuts.cut_nodes[rows],
            "cut_size": cuts.cut_size[rows],
            "fiedler_difference": np.abs(fiedler[src] - fiedler[dst]),
            "estimated": res.estimated[rows],
        }
    )
