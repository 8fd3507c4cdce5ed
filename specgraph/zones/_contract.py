"""Links that must not be cut: their ends merged into super-nodes for the enforcement.

:func:`contract_links` builds the contracted graph, on which no must-keep link
can be cut; :func:`contract_constraints` carries the rules onto it (sizes
summed, sources and fixed labels kept) and refuses super-nodes that would
hold two sources or two fixed labels.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import breadth_first_order, connected_components

from .._validation import parameter_error
from ..exceptions import ConstraintError
from ._arrays import as_csr
from ._rules import ResolvedConstraints

__all__ = ["Contraction", "contract_constraints", "contract_links"]


@dataclass(frozen=True, eq=False)
class Contraction:
    """Nodes joined by must-keep links, merged into super-nodes.

    Attributes
    ----------
    groups : ndarray of int, shape (n,)
        Super-node of each node.
    adjacency : scipy.sparse.csr_array, shape (g, g)
        Links between super-nodes; parallel links summed, links inside a
        super-node dropped.
    """

    groups: np.ndarray
    adjacency: sp.csr_array

    @property
    def n_groups(self) -> int:
        return int(self.adjacency.shape[0])

    def expand(self, labels: np.ndarray) -> np.ndarray:
        """Labels of super-nodes -> labels of nodes."""
        return np.asarray(labels)[self.groups]

    def sum_nodes(self, values: np.ndarray) -> np.ndarray:
        """Per-node values summed over each super-node."""
        return np.bincount(self.groups, weights=values, minlength=self.n_groups)


def contract_links(adjacency: Any, pairs: Any) -> Contraction:
    """Merge the two ends of every pair into one super-node, transitively.

    The groups are the connected components of the graph of the pairs
    (scipy.sparse.csgraph, a union-find in effect); the contracted adjacency
    is :math:`P^T A P` without its diagonal, with :math:`P` the node-to-group
    indicator. Cost O(n + nnz).

    Examples
    --------
    >>> from specgraph import gallery
    >>> c = contract_links(gallery.path(4).adjacency, [[1, 2]])
    >>> c.groups.tolist(), c.adjacency.toarray().tolist()
    ([0, 1, 1, 2], [[0.0, 1.0, 0.0], [1.0, 0.0, 1.0], [0.0, 1.0, 0.0]])
    """
    matrix = as_csr(adjacency)
    n = matrix.shape[0]
    pairs = np.asarray(pairs, dtype=np.int64).reshape(-1, 2)
    if pairs.size and (pairs.min() < 0 or pairs.max() >= n):
        raise parameter_error("pairs", f"row indices in [0, {n})", pairs.tolist(), verb="hold")
    if pairs.size == 0:
        return Contraction(np.arange(n, dtype=np.int64), matrix)
    count, groups = connected_components(_pair_graph(pairs, n), directed=False)
    groups = groups.astype(np.int64)
    coo = matrix.tocoo()
    gr, gc = groups[coo.row], groups[coo.col]
    keep = gr != gc
    contracted = sp.coo_array((coo.data[keep], (gr[keep], gc[keep])), shape=(count, count))
    contracted = contracted.tocsr()
    contracted.sum_duplicates()
    return Contraction(groups, contracted)


def _pair_graph(pairs: np.ndarray, n: int) -> sp.coo_array:
    """The must-keep links alone, as a graph on the ``n`` nodes."""
    return sp.coo_array((np.ones(len(pairs)), (pairs[:, 0], pairs[:, 1])), shape=(n, n))


def _link_chain(pairs: np.ndarray, n: int, start: int, stop: int) -> list[int]:
    """Rows on the chain of must-keep links from ``start`` to ``stop``."""
    link = _pair_graph(pairs, n).tocsr()
    _, pred = breadth_first_order(link, start, directed=False, return_predecessors=True)
    chain = [stop]
    while chain[-1] != start:
        chain.append(int(pred[chain[-1]]))
    return chain[::-1]


def contract_constraints(
    contraction: Contraction, constraints: ResolvedConstraints
) -> ResolvedConstraints:
    """Map constraints onto super-nodes: sizes summed, sources and fixed labels carried.

    Raises
    ------
    ConstraintError
        When must-keep links join two sources, or nodes with two different
        fixed labels, into one super-node (the chain of links is named).
    """
    groups, g, c = contraction.groups, contraction.n_groups, constraints
    n = groups.size

    def chain(a: int, b: int) -> str:
        return " - ".join(c.name(v).strip("'") for v in _link_chain(c.keep_pairs, n, a, b))

    super_sources = groups[c.sources]
    order = np.argsort(super_sources, kind="stable")
    twice = np.flatnonzero(np.diff(super_sources[order]) == 0)
    if twice.size:
        a, b = c.sources[order[twice[0]]], c.sources[order[twice[0] + 1]]
        raise ConstraintError(
            f"sources: {c.name([a, b])}{c.apart(int(a), int(b))} are both sources, but "
            f"keep_links tie them into one zone through the chain {chain(int(a), int(b))}; "
            "a zone holds exactly one source."
        )
    assert c.pinned is not None
    rows = np.flatnonzero(c.pinned >= 0)
    super_pinned = np.full(g, -1, dtype=np.int64)
    if rows.size:
        keys = groups[rows]
        order = np.lexsort((c.pinned[rows], keys))
        same = np.flatnonzero((np.diff(keys[order]) == 0) & (np.diff(c.pinned[rows][order]) != 0))
        if same.size:
            a, b = rows[order[same[0]]], rows[order[same[0] + 1]]
            raise ConstraintError(
                f"fixed: {c.name(a)} is fixed to label {c.pinned[a]} and {c.name(b)} to label "
                f"{c.pinned[b]}, but keep_links tie them into one zone through the chain "
                f"{chain(int(a), int(b))}."
            )
        super_pinned[keys] = c.pinned[rows]
    first = np.full(g, n, dtype=np.int64)
    np.minimum.at(first, groups, np.arange(n))
    return ResolvedConstraints(
        c.min_size,
        c.max_size,
        contraction.sum_nodes(c.sizes),
        sources=super_sources,
        pinned=super_pinned,
        connected=c.connected,
        node_ids=None if c.node_ids is None else c.node_ids[first],
        coordinates=None if c.coordinates is None else c.coordinates[first],
    )
