"""Bridges and articulation nodes of a network, and what each failure cuts off.

One iterative depth-first search with low links (Hopcroft and Tarjan [2]_,
Tarjan [3]_), compiled, finds every bridge (a link whose failure splits its
component) and every articulation node (a node whose failure does). The same
pass counts the nodes and sums the node sizes of every search subtree; a
subtree is a contiguous range of the preorder, so what each bridge or node
cuts off follows for all of them at once, with no search per bridge.

References
----------
.. [2] J. Hopcroft and R. Tarjan, "Algorithm 447: efficient algorithms for
   graph manipulation", Commun. ACM 16(6):372-378, 1973.
   :doi:`10.1145/362248.362272`
.. [3] R. E. Tarjan, "A note on finding the bridges of a graph", Inform.
   Process. Lett. 2(6):160-161, 1974. :doi:`10.1016/0020-0190(74)90003-9`
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp
from numba import njit

from ..network import Network

__all__ = ["CutStructure", "cut_structure"]


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
