"""Dangling trees: split a network into its 2-core and the trees hanging from it.

Infrastructure networks are very sparse and carry long dead-end branches
(service lines, feeders, cul-de-sacs). A dangling tree is joined to the rest
by one node, so every cut inside it or at its root cuts a bridge and isolates
the branch; no good zoning needs such a cut, but the eigenvectors of the
normalized Laplacian localize on long branches and produce sliver zones. The
treatment here zones the core and then gives each tree the zone of the core
node it hangs from.

The *core* is what stays after repeatedly removing nodes of degree at most 1:
exactly the 2-core (the largest subgraph of minimum degree 2; Seidman's
k-core with k = 2). Nodes on a path joining two cycles keep degree 2 and stay
in the core, so the core of a connected network is connected: a removed tree
touches the core in at most one node (touching it twice would close a path
whose nodes never fall to degree 1), so any path between core nodes that
enters a tree leaves it where it came in and can be shortened to stay in the
core.

Peeling goes in rounds (all current leaves at once), O(n + nnz) in all. Each
removed node records the one neighbour left at its removal (its parent); the
parent chains give every tree node its root (the core node the tree hangs
from) and its depth (distance to that root). A component that is a tree
entirely peels away to its centre (the one node, or the lower-numbered of the
two adjacent nodes, left for the last round), which is then its root.

References
----------
.. [1] S. B. Seidman, "Network structure and minimum degree", Social
   Networks 5(3):269-287, 1983. :doi:`10.1016/0378-8733(83)90028-X`
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from .._jit import entry
from .._validation import UNIT, Array, SquareMatrix, check_int, check_param

__all__ = [
    "MIN_TREE_SHARE",
    "TreeSplit",
    "attach_trees",
    "core_and_trees",
    "trees_worth_stripping",
]

#: Share of nodes outside the 2-core above which ``auto`` zones the core and
#: attaches the trees. Below it the branches are too few to pull eigenvectors
#: onto themselves (they localize on branches only when branch nodes are a
#: sizeable share of the volume), and the extra step buys nothing. Measured on
#: sparse two-group block models (tests/test_trees.py, mean degree 3, about 16 %
#: of nodes outside the 2-core): stripping lifts the overlap of the normalized
#: Laplacian from near 0 to near that of the Bethe Hessian. A tenth is a round
#: figure between road-like grids (a few percent outside the core) and such
#: networks.
MIN_TREE_SHARE = 0.10


@dataclass(frozen=True, eq=False)
class TreeSplit:
    """A network split into its 2-core and the trees dangling from it.

    Attributes
    ----------
    core : ndarray of bool, shape (n,)
        True for nodes of the 2-core.
    root : ndarray of int, shape (n,)
        For a tree node, the core node its tree hangs from; for a core node,
        itself; for a node of a component that is a tree entirely, that
        tree's centre (a non-core node, so ``core[root]`` is False there).
    depth : ndarray of int, shape (n,)
        Distance (in links) from the node to its root; 0 on the core.
    """

    core: np.ndarray
    root: np.ndarray
    depth: np.ndarray

    @property
    def n_core(self) -> int:
        return int(self.core.sum())

    @property
    def tree_share(self) -> float:
        """Share of nodes outside the 2-core (0 for an empty network)."""
        n = self.core.size
        return float(n - self.n_core) / n if n else 0.0

    @property
    def largest_tree(self) -> int:
        """Nodes in the largest set hanging from one core node (the core node not counted)."""
        hanging = self.root[~self.core]
        if hanging.size == 0:
            return 0
        return int(np.bincount(hanging).max())


@entry()
def _peel(indptr, indices, n):  # pragma: no cover - compiled
    """Round-by-round removal of nodes of degree <= 1: removal round and parent."""
    degree = np.empty(n, dtype=np.int64)
    for i in range(n):
        degree[i] = indptr[i + 1] - indptr[i]
    removed = np.full(n, -1, dtype=np.int64)  # round of removal, -1 for core
    parent = np.full(n, -1, dtype=np.int64)
    order = np.empty(n, dtype=np.int64)
    queued = np.zeros(n, dtype=np.bool_)
    frontier = np.empty(n, dtype=np.int64)
    size = 0
    for i in range(n):
        if degree[i] <= 1:
            frontier[size] = i
            queued[i] = True
            size += 1
    done = 0
    step = 0
    following = np.empty(n, dtype=np.int64)
    while size > 0:
        for f in range(size):
            v = frontier[f]
            removed[v] = step
            order[done] = v
            done += 1
        count = 0
        for f in range(size):
            v = frontier[f]
            for p in range(indptr[v], indptr[v + 1]):
                w = indices[p]
                if removed[w] == -1:
                    parent[v] = w
                    degree[w] -= 1
                    if degree[w] <= 1 and not queued[w]:
                        queued[w] = True
                        following[count] = w
                        count += 1
                elif removed[w] == step and w < v:
                    # Two adjacent nodes left for the same round: the last
                    # link of a tree component; the lower-numbered is the centre.
                    parent[v] = w
        frontier[:count] = following[:count]
        size = count
        step += 1
    return removed, parent, order[:done]


@entry()
def _roots(removed, parent, order, n):  # pragma: no cover - compiled
    """Root and depth of every node, walking the removal order backwards."""
    root = np.arange(n)
    depth = np.zeros(n, dtype=np.int64)
    for t in range(order.size - 1, -1, -1):
        v = order[t]
        p = parent[v]
        if p == -1:
            continue  # centre of a tree component: its own root
        if removed[p] == removed[v]:
            root[v] = p  # the other centre node, already a root
            depth[v] = 1
        else:
            root[v] = root[p]
            depth[v] = depth[p] + 1
    return root, depth


#: A network's adjacency, sparse or dense.
_SQUARE = SquareMatrix(sparse_only=False)


def core_and_trees(adjacency: sp.sparray | sp.spmatrix) -> TreeSplit:
    """Split a network into its 2-core and the dangling trees, with roots and depths.

    Parameters
    ----------
    adjacency : sparse array of shape (n, n)
        Symmetric adjacency (for example ``Network.adjacency``); only the
        pattern off the diagonal is read.

    Returns
    -------
    TreeSplit

    Raises
    ------
    ParameterError
        When ``adjacency`` is not square.

    Notes
    -----
    The core is the 2-core, found by peeling leaves in rounds in
    O(n + nnz) time; see the module docstring for why it is connected on a
    connected network and how roots and depths are defined.

    Examples
    --------
    >>> import networkx as nx
    >>> graph = nx.cycle_graph(4)
    >>> graph.add_edges_from([(0, 4), (4, 5)])  # a branch of two nodes at node 0
    >>> split = core_and_trees(nx.to_scipy_sparse_array(graph))
    >>> split.core.tolist(), split.root.tolist(), split.depth.tolist()
    ([True, True, True, True, False, False], [0, 1, 2, 3, 0, 0], [0, 0, 0, 0, 1, 2])
    """
    matrix = check_param(adjacency, "adjacency", [_SQUARE])
    n = matrix.shape[0]
    links = matrix.tocoo()
    off = (links.row != links.col) & (links.data != 0)
    ones = np.ones(int(off.sum()), dtype=np.int8)
    matrix = sp.csr_array((ones, (links.row[off], links.col[off])), shape=(n, n))
    indptr = matrix.indptr.astype(np.int64)
    indices = matrix.indices.astype(np.int64)
    removed, parent, order = _peel(indptr, indices, n)
    root, depth = _roots(removed, parent, order, n)
    return TreeSplit(core=removed == -1, root=root, depth=depth)


def attach_trees(split: TreeSplit, core_labels: np.ndarray) -> np.ndarray:
    """Give every tree node the zone of the core node it hangs from.

    Parameters
    ----------
    split : TreeSplit
        From :func:`core_and_trees`.
    core_labels : array of int, shape (n_core,)
        Zone of each core node, in the order of ``numpy.flatnonzero(split.core)``
        (the order of ``network.subnetwork`` on those nodes).

    Returns
    -------
    labels : ndarray of int, shape (n,)
        Zone of every node. A component that is a tree entirely (no core node
        to hang from) becomes one zone of its own, numbered after the largest
        core label in the order of its centre's index.

    Raises
    ------
    ParameterError
        When ``core_labels`` does not hold one label per core node.

    Examples
    --------
    >>> import networkx as nx
    >>> graph = nx.disjoint_union(nx.cycle_graph(3), nx.path_graph(3))
    >>> graph.add_edge(0, 6)  # a leaf on the triangle
    >>> split = core_and_trees(nx.to_scipy_sparse_array(graph))
    >>> attach_trees(split, [5, 5, 7]).tolist()
    [5, 5, 7, 8, 8, 8, 5]
    """
    per_core_node = Array("int", (split.n_core,), description=f"{split.n_core} integer labels")
    labels = check_param(core_labels, "core_labels", [per_core_node], verb="hold")
    full = np.full(split.core.size, -1, dtype=np.int64)
    full[split.core] = labels
    free = ~split.core[split.root]  # nodes of tree components
    centres = np.unique(split.root[free])
    start = int(labels.max()) + 1 if labels.size else 0
    full[centres] = start + np.arange(centres.size)
    return full[split.root]


def trees_worth_stripping(
    split: TreeSplit, zones: int, *, min_share: float = MIN_TREE_SHARE
) -> bool:
    """Decide whether to zone the core alone and attach the trees afterwards.

    Worth it when (a) at least ``min_share`` of the nodes lie outside the
    2-core (below that the branches are too few to mislead the eigenvectors),
    (b) the core holds at least ``zones`` nodes, and (c) no set of trees
    hanging from one core node exceeds a fair zone size ``n / zones``: such a
    tree would deserve zones of its own, which attaching it wholesale to its
    root's zone cannot give.

    Parameters
    ----------
    split : TreeSplit
    zones : int
        Number of zones wanted, ``>= 1``.
    min_share : float, default=MIN_TREE_SHARE
        Threshold on :attr:`TreeSplit.tree_share`, in ``[0, 1]``.

    Returns
    -------
    bool

    Examples
    --------
    >>> import networkx as nx
    >>> graph = nx.cycle_graph(20)
    >>> graph.add_edges_from((i, 20 + i) for i in range(0, 20, 4))  # five leaves
    >>> split = core_and_trees(nx.to_scipy_sparse_array(graph))
    >>> round(split.tree_share, 3), trees_worth_stripping(split, 2)
    (0.2, True)
    """
    zones = check_int(zones, "zones", minimum=1)
    min_share = float(check_param(min_share, "min_share", [UNIT]))
    n = split.core.size
    return bool(
        n > 0
        and split.tree_share >= min_share
        and split.n_core >= zones
        and split.largest_tree <= n / zones
    )
