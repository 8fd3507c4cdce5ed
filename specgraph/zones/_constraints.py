"""Zone constraints: size bounds, connected zones, one source per zone, links
that must not be cut, and nodes fixed to zones in advance.

A spectral assignment knows nothing of these rules; :func:`enforce_constraints`
turns its labels into labels that honour them, or raises
:class:`~specgraph.exceptions.ConstraintError` saying which rule cannot be met
and why. The steps, each a small function in :data:`_STEPS`:

0. links that must not be cut are contracted into super-nodes
   (:func:`contract_links`); every later step works on the contracted graph,
   where such a link cannot be cut, and the labels are expanded at the end;
   infeasible inputs (a node above ``max_size``, a component below
   ``min_size`` or without a source) are refused before any work;
1. fixed labels are matched to zones by maximum overlap (Hungarian method)
   and their nodes forced into the matched zones;
2. connectivity repair: each zone keeps the connected piece that holds its
   fixed nodes or sources (else its biggest piece); other pieces move to the
   adjacent zone they are most strongly linked to;
3. one source per zone: zones with several sources are split into
   shortest-path cells of their sources, zones without a source are merged
   into a neighbour;
4. size bounds: zones above ``max_size`` are bisected along the Fiedler vector
   with a sweep cut restricted to admissible sizes (not when sources are
   given: a part would lack one), zones below ``min_size`` are merged into a
   neighbour when the union fits ``max_size``;
5. balancing: zones still outside the bounds (sources present, or no merge
   fits) are brought within them by moving boundary nodes between adjacent
   zones, planned as a minimum-cost flow on the zone graph
   (:func:`~specgraph.zones._balance.balance_sizes`); only when that fails too
   is a size bound refused, with the transfers that were blocked and why;
6. a last repair and the final audit :func:`constraint_violations`, which must
   come back empty.

Everything runs on whole-graph arrays with scipy.sparse.csgraph (connected
components, multi-source Dijkstra), so a million-node network is processed in
seconds; per-zone Python loops run over zones, never over nodes.
"""

from __future__ import annotations

import heapq
import logging
import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from functools import cached_property
from types import MappingProxyType
from typing import Any, Literal

import numpy as np
import scipy.sparse as sp
from scipy.optimize import linear_sum_assignment
from scipy.sparse.csgraph import breadth_first_order, connected_components, dijkstra

from .._validation import check_choice, check_int, check_positive_float, check_rng
from ..exceptions import ConstraintError, ConvergenceError, ParameterError
from ..network import Network
from ._balance import SIZE_RTOL, Balance, balance_sizes

__all__ = [
    "DIRECT_COUNT_FACTOR",
    "FIEDLER_LANCZOS_NODES",
    "FIEDLER_TOL",
    "MATCH_MAX_CELLS",
    "NAMES_SHOWN",
    "SIZE_RTOL",
    "Contraction",
    "Enforcement",
    "ResolvedConstraints",
    "ZoneConstraints",
    "constraint_violations",
    "contract_constraints",
    "contract_links",
    "enforce_constraints",
]

logger = logging.getLogger(__name__)

#: Tolerance of the eigen-solve behind each bisection: only the order of the
#: nodes along the Fiedler vector matters, not its digits.
FIEDLER_TOL = 1e-4

#: Zones up to this many nodes are bisected with the shift-inverted Lanczos
#: solver, bigger ones with the ``auto`` rule (multilevel). Measured here on
#: road-like networks: 7,000 nodes 0.03 s against about 0.3 s, 60,000 nodes
#: 1.1 s against 0.3 s (the factorization grows faster than the cascade).
FIEDLER_LANCZOS_NODES = 20_000

#: Largest overlap table (rows x columns) matched exactly with the Hungarian
#: method; bigger tables are matched greedily by decreasing overlap.
MATCH_MAX_CELLS = 4_000_000

#: Label ranges up to this many times the number of nodes are compacted and
#: counted with ``bincount`` (O(n)) instead of sorted with ``unique``
#: (O(n log n), several times slower on a million nodes).
DIRECT_COUNT_FACTOR = 8

#: Node ids quoted in a message before "and N more".
NAMES_SHOWN = 5

SIZE_BY = ("nodes", "weight")


# --------------------------------------------------------------------- helpers
def _quote(ids: Any, total: int | None = None) -> str:
    shown = [f"'{i}'" for i in list(ids)[:NAMES_SHOWN]]
    total = len(list(ids)) if total is None else total
    more = f" and {total - len(shown)} more" if total > len(shown) else ""
    return ", ".join(shown) + more


def _as_csr(adjacency: Any) -> sp.csr_array:
    matrix = sp.csr_array(adjacency, dtype=np.float64)
    if matrix.shape[0] != matrix.shape[1]:
        raise ParameterError(f"adjacency must be square; got shape {matrix.shape}.")
    return matrix


def _edge_rows(adjacency: sp.csr_array) -> np.ndarray:
    """Row index of every stored entry of a CSR matrix."""
    return np.repeat(np.arange(adjacency.shape[0]), np.diff(adjacency.indptr))


def _inner(adjacency: sp.csr_array, rows: np.ndarray, labels: np.ndarray) -> sp.csr_array:
    """The adjacency without the links between zones (vectorized, O(nnz))."""
    keep = labels[rows] == labels[adjacency.indices]
    n = adjacency.shape[0]
    indptr = np.concatenate([[0], np.cumsum(np.bincount(rows[keep], minlength=n))])
    return sp.csr_array((adjacency.data[keep], adjacency.indices[keep], indptr), shape=(n, n))


def _first_of_groups(keys: np.ndarray) -> np.ndarray:
    """Mask of the first element of each run of equal sorted ``keys``."""
    return np.concatenate([[True], keys[1:] != keys[:-1]]) if keys.size else keys.astype(bool)


def _pair_totals(
    a: np.ndarray, b: np.ndarray, weights: np.ndarray | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """Distinct pairs ``(a_i, b_i)`` of non-negative ints (shape (2, p)) and their summed weight."""
    a, b = np.asarray(a, dtype=np.int64), np.asarray(b, dtype=np.int64)
    span = int(b.max()) + 1 if b.size else 1
    cells = (int(a.max()) + 1) * span if a.size else 0
    if cells <= max(DIRECT_COUNT_FACTOR * a.size, 1 << 20):  # counting beats sorting
        keys = np.flatnonzero(np.bincount(a * span + b, minlength=cells))
        total = np.bincount(a * span + b, weights=weights, minlength=cells)[keys]
    else:
        keys, inverse = np.unique(a * span + b, return_inverse=True)
        total = np.bincount(inverse.ravel(), weights=weights, minlength=keys.size)
    return np.stack([keys // span, keys % span]), total


def _compact(labels: np.ndarray) -> np.ndarray:
    """Renumber non-negative labels ``0..k-1`` keeping their order (O(n) when they are small)."""
    labels = np.asarray(labels, dtype=np.int64)
    if not labels.size:
        return labels
    top = int(labels.max()) + 1
    if top <= max(DIRECT_COUNT_FACTOR * labels.size, 1 << 20):
        present = np.bincount(labels, minlength=top) > 0
        return (np.cumsum(present) - 1)[labels]
    return np.unique(labels, return_inverse=True)[1].astype(np.int64).ravel()


def _best_match(a: np.ndarray, b: np.ndarray, weights: np.ndarray) -> dict[int, int]:
    """One-to-one matching of labels ``a`` to labels ``b`` of largest total overlap.

    Exact (scipy's ``linear_sum_assignment``, the Hungarian method) when the
    table is small, else greedy by decreasing overlap. Only pairs with a
    positive overlap are matched.
    """
    keys, overlap = _pair_totals(a, b, weights)
    ua, ia = np.unique(keys[0], return_inverse=True)
    ub, ib = np.unique(keys[1], return_inverse=True)
    if ua.size * ub.size <= MATCH_MAX_CELLS:
        table = np.zeros((ua.size, ub.size))
        table[ia, ib] = overlap
        rows, cols = linear_sum_assignment(table, maximize=True)
        good = table[rows, cols] > 0
        return dict(zip(ua[rows[good]].tolist(), ub[cols[good]].tolist(), strict=True))
    match: dict[int, int] = {}
    taken: set[int] = set()
    for k in np.argsort(-overlap, kind="stable").tolist():
        x, y = int(keys[0, k]), int(keys[1, k])
        if overlap[k] > 0 and x not in match and y not in taken:
            match[x] = y
            taken.add(y)
    return match


# ---------------------------------------------------------------- user level
@dataclass(frozen=True)
class ZoneConstraints:
    """Rules a zoning must obey, in the user's node ids.

    Parameters
    ----------
    min_size, max_size : float, optional
        Bounds on every zone's size (node count, or summed node size with
        ``size_by='weight'``); ``0 < min_size <= max_size``.
    size_by : {'nodes', 'weight'}, default='nodes'
        ``'weight'`` counts the network's node size column.
    sources : tuple of str, default=()
        Supply points; when given, every zone holds exactly one of them.
    keep_links : tuple of (str, str), default=()
        Links that must never be cut: both ends always in one zone. Each must
        be a link of the network.
    fixed : mapping of str to int, optional
        Node id -> label (an integer >= 0) fixed in advance: nodes with one
        label end in one zone, nodes with different labels in different zones.
    connected : bool, default=True
        Every zone must be connected.

    Examples
    --------
    >>> from specgraph import gallery
    >>> rules = ZoneConstraints(max_size=5, sources=("0", "9"), keep_links=(("4", "3"),))
    >>> resolved = rules.resolve(gallery.barbell(5))
    >>> resolved.sources.tolist(), resolved.keep_pairs.tolist()
    ([0, 9], [[4, 3]])
    """

    min_size: float | None = None
    max_size: float | None = None
    size_by: Literal["nodes", "weight"] = "nodes"
    sources: tuple[str, ...] = ()
    keep_links: tuple[tuple[str, str], ...] = ()
    fixed: Mapping[str, int] | None = None
    connected: bool = True

    def __post_init__(self) -> None:
        low = None if self.min_size is None else check_positive_float(self.min_size, "min_size")
        high = None if self.max_size is None else check_positive_float(self.max_size, "max_size")
        if low is not None and high is not None and low > high:
            raise ParameterError(f"min_size must be <= max_size; got {low:g} > {high:g}.")
        check_choice(self.size_by, "size_by", SIZE_BY)
        if isinstance(self.sources, str):
            raise ParameterError(f"sources must be a sequence of node ids; got {self.sources!r}.")
        sources = tuple(str(s) for s in self.sources)
        twice = sorted({s for s in sources if sources.count(s) > 1})
        if twice:
            raise ParameterError(f"sources must be distinct; got repeated {_quote(twice)}.")
        pairs = []
        for pair in self.keep_links:
            ends = tuple(str(e) for e in pair)
            if len(ends) != 2 or ends[0] == ends[1]:
                raise ParameterError(
                    f"keep_links must hold pairs of two different node ids; got {pair!r}."
                )
            pairs.append((ends[0], ends[1]))
        fixed = None
        if self.fixed is not None:
            fixed = MappingProxyType(
                {str(k): check_int(v, f"fixed[{k!r}]", minimum=0) for k, v in self.fixed.items()}
            )
        if not isinstance(self.connected, bool):
            raise ParameterError(f"connected must be True or False; got {self.connected!r}.")
        object.__setattr__(self, "min_size", low)
        object.__setattr__(self, "max_size", high)
        object.__setattr__(self, "sources", sources)
        object.__setattr__(self, "keep_links", tuple(pairs))
        object.__setattr__(self, "fixed", fixed)

    def resolve(self, network: Network) -> ResolvedConstraints:
        """Turn node ids into row indices of ``network``.

        Raises
        ------
        ParameterError
            For an id that is not a node, a ``keep_links`` pair that is not a
            link, or ``size_by='weight'`` on a network without node sizes.
        """
        n = network.n_nodes
        if self.size_by == "weight":
            if network.sizes is None:
                raise ParameterError(
                    "size_by='weight' needs node sizes; the network has none "
                    "(read a node table with a size column, or use size_by='nodes')."
                )
            sizes = np.array(network.sizes, dtype=np.float64)
        else:
            sizes = np.ones(n)
        index = network.index_of
        sources = _rows_of(index, self.sources, "sources")
        flat = [end for pair in self.keep_links for end in pair]
        keep = _rows_of(index, flat, "keep_links").reshape(-1, 2)
        if keep.size:
            linked = np.asarray(network.adjacency[keep[:, 0], keep[:, 1]]).ravel() > 0
            if not linked.all():
                bad = [
                    f"{a}-{b}" for (a, b), ok in zip(self.keep_links, linked, strict=True) if not ok
                ]
                raise ParameterError(
                    f"keep_links must be links of the network; {len(bad)} pairs are not "
                    f"({_quote(bad)})."
                )
        pinned = np.full(n, -1, dtype=np.int64)
        if self.fixed:
            rows = _rows_of(index, list(self.fixed), "fixed")
            pinned[rows] = np.fromiter(self.fixed.values(), dtype=np.int64, count=rows.size)
        return ResolvedConstraints(
            self.min_size,
            self.max_size,
            sizes,
            sources=sources,
            keep_pairs=keep,
            pinned=pinned,
            connected=self.connected,
            node_ids=network.node_ids,
        )


def _rows_of(index: Mapping[str, int], ids: Any, name: str) -> np.ndarray:
    ids = list(ids)
    unknown = [i for i in ids if i not in index]
    if unknown:
        raise ParameterError(
            f"{name} must name nodes of the network; {len(unknown)} unknown "
            f"node ids ({_quote(unknown)})."
        )
    return np.fromiter((index[i] for i in ids), dtype=np.int64, count=len(ids))


@dataclass(frozen=True, eq=False)
class ResolvedConstraints:
    """Constraints on row indices, ready for :func:`enforce_constraints`.

    Attributes
    ----------
    min_size, max_size : float or None
    sizes : ndarray of float, shape (n,)
        Size of each node (ones, or the network's node sizes).
    sources : ndarray of int
        Rows of the sources; empty when zones need no source.
    keep_pairs : ndarray of int, shape (m, 2)
        Rows of the two ends of every link that must not be cut.
    pinned : ndarray of int, shape (n,)
        Fixed label of each node, ``-1`` for a free node.
    connected : bool
    node_ids : ndarray of str, optional
        Only used to name nodes in messages (rows are named otherwise).
    """

    min_size: float | None
    max_size: float | None
    sizes: np.ndarray
    sources: np.ndarray = field(default_factory=lambda: np.empty(0, dtype=np.int64))
    keep_pairs: np.ndarray = field(default_factory=lambda: np.empty((0, 2), dtype=np.int64))
    pinned: np.ndarray | None = None
    connected: bool = True
    node_ids: np.ndarray | None = None

    def __post_init__(self) -> None:
        sizes = np.asarray(self.sizes, dtype=np.float64)
        n = sizes.size
        if sizes.ndim != 1 or not np.all(np.isfinite(sizes)) or np.any(sizes < 0):
            raise ParameterError("sizes must be a 1-D array of finite numbers >= 0.")
        sources = np.asarray(self.sources, dtype=np.int64).ravel()
        keep = np.asarray(self.keep_pairs, dtype=np.int64).reshape(-1, 2)
        pinned = np.full(n, -1, dtype=np.int64) if self.pinned is None else self.pinned
        pinned = np.asarray(pinned, dtype=np.int64)
        for name, rows in (("sources", sources), ("keep_pairs", keep.ravel())):
            if rows.size and (rows.min() < 0 or rows.max() >= n):
                raise ParameterError(f"{name} must hold row indices in [0, {n}); got {rows}.")
        if np.unique(sources).size != sources.size:
            raise ParameterError("sources must be distinct rows.")
        if pinned.shape != (n,) or np.any(pinned < -1):
            raise ParameterError(f"pinned must hold {n} labels >= -1 (-1 = free).")
        object.__setattr__(self, "sizes", sizes)
        object.__setattr__(self, "sources", sources)
        object.__setattr__(self, "keep_pairs", keep)
        object.__setattr__(self, "pinned", pinned)

    @property
    def n_nodes(self) -> int:
        return int(self.sizes.size)

    def name(self, rows: Any) -> str:
        """Quote nodes by id (or by row when no ids are known)."""
        rows = np.atleast_1d(np.asarray(rows, dtype=np.int64))
        ids = rows.tolist() if self.node_ids is None else self.node_ids[rows].tolist()
        return _quote(ids)

    def label_of(self, row: int) -> str:
        return "node " + self.name(row)


# ---------------------------------------------------------------- contraction
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
    matrix = _as_csr(adjacency)
    n = matrix.shape[0]
    pairs = np.asarray(pairs, dtype=np.int64).reshape(-1, 2)
    if pairs.size and (pairs.min() < 0 or pairs.max() >= n):
        raise ParameterError(f"pairs must hold row indices in [0, {n}); got {pairs.tolist()}.")
    if pairs.size == 0:
        return Contraction(np.arange(n, dtype=np.int64), matrix)
    link = sp.coo_array((np.ones(len(pairs)), (pairs[:, 0], pairs[:, 1])), shape=(n, n))
    count, groups = connected_components(link, directed=False)
    groups = groups.astype(np.int64)
    coo = matrix.tocoo()
    gr, gc = groups[coo.row], groups[coo.col]
    keep = gr != gc
    contracted = sp.coo_array((coo.data[keep], (gr[keep], gc[keep])), shape=(count, count))
    contracted = contracted.tocsr()
    contracted.sum_duplicates()
    return Contraction(groups, contracted)


def _link_chain(pairs: np.ndarray, n: int, start: int, stop: int) -> list[int]:
    """Rows on the chain of must-keep links from ``start`` to ``stop``."""
    link = sp.coo_array((np.ones(len(pairs)), (pairs[:, 0], pairs[:, 1])), shape=(n, n))
    _, pred = breadth_first_order(link.tocsr(), start, directed=False, return_predecessors=True)
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
            f"sources: {c.name([a, b])} are both sources, but keep_links tie them into one "
            f"zone through the chain {chain(int(a), int(b))}; a zone holds exactly one source."
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
    )


# ------------------------------------------------------------------ the audit
def constraint_violations(
    adjacency: Any, labels: Any, constraints: ResolvedConstraints
) -> list[str]:
    """List every constraint that ``labels`` break; empty when all hold.

    Checked: no zone spans two connected components; zones connected (when
    required); size bounds; exactly one source per zone (when sources are
    given); must-keep links inside one zone; fixed labels kept together and
    apart. One entry per broken rule, with a count and an example.

    Examples
    --------
    >>> from specgraph import gallery
    >>> rules = ResolvedConstraints(None, 3.0, np.ones(6))
    >>> labels = np.array([0, 0, 0, 0, 1, 0])
    >>> for line in constraint_violations(gallery.path(6).adjacency, labels, rules):
    ...     print(line)
    connected: 1 zones are not connected (zone 0 has 2 pieces)
    max_size: 1 zones have size above 3 (zone 0: 5)
    """
    matrix = _as_csr(adjacency)
    c = constraints
    labels = _checked_labels(labels, matrix.shape[0])
    if c.n_nodes != labels.size:
        raise ParameterError(f"constraints must cover {labels.size} nodes; got {c.n_nodes}.")
    out: list[str] = []
    k = int(labels.max()) + 1 if labels.size else 0
    pieces = None
    if c.connected:
        count, piece = connected_components(_inner(matrix, _edge_rows(matrix), labels))
        zone_of = np.empty(count, dtype=np.int64)
        zone_of[piece] = labels
        pieces = np.bincount(zone_of, minlength=k)
    # A connected zone lies in one component: the components are only needed
    # when some zone is in several pieces.
    if pieces is None or np.any(pieces > 1):
        _, comp = connected_components(matrix, directed=False)
        spans = np.bincount(_pair_totals(labels, comp)[0][0], minlength=k)
        if np.any(spans > 1):
            z = int(np.argmax(spans > 1))
            out.append(
                f"components: {int(np.sum(spans > 1))} zones span several connected "
                f"components (zone {z} spans {spans[z]})"
            )
    if pieces is not None and np.any(pieces > 1):
        z = int(np.argmax(pieces > 1))
        out.append(
            f"connected: {int(np.sum(pieces > 1))} zones are not connected "
            f"(zone {z} has {pieces[z]} pieces)"
        )
    out += _size_violations(labels, k, c)
    if c.sources.size:
        held = np.bincount(labels[c.sources], minlength=k)
        present = np.bincount(labels, minlength=k) > 0
        for bad, what in ((present & (held == 0), "no source"), (held > 1, "several sources")):
            if bad.any():
                z = int(np.argmax(bad))
                out.append(
                    f"sources: {int(bad.sum())} zones hold {what} (zone {z} holds {held[z]})"
                )
    cut = labels[c.keep_pairs[:, 0]] != labels[c.keep_pairs[:, 1]]
    if cut.any():
        a, b = c.keep_pairs[int(np.argmax(cut))]
        out.append(
            f"keep_links: {int(cut.sum())} links that must not be cut are cut "
            f"(link {c.name(a)} - {c.name(b)})"
        )
    out += _pinned_violations(labels, c)
    return out


def _checked_labels(labels: Any, n: int) -> np.ndarray:
    array = np.asarray(labels)
    if array.shape != (n,) or (n and (array.dtype.kind not in "iu" or array.min() < 0)):
        raise ParameterError(
            f"labels must be {n} integers >= 0, one per node; got shape {array.shape}, "
            f"dtype {array.dtype}."
        )
    return array.astype(np.int64)


def _size_violations(labels: np.ndarray, k: int, c: ResolvedConstraints) -> list[str]:
    out = []
    size = np.bincount(labels, weights=c.sizes, minlength=k)
    present = np.bincount(labels, minlength=k) > 0
    if c.max_size is not None:
        bad = present & (size > c.max_size * (1 + SIZE_RTOL))
        if bad.any():
            z = int(np.argmax(bad))
            out.append(
                f"max_size: {int(bad.sum())} zones have size above {c.max_size:g} "
                f"(zone {z}: {size[z]:g})"
            )
    if c.min_size is not None:
        bad = present & (size < c.min_size * (1 - SIZE_RTOL))
        if bad.any():
            z = int(np.argmax(bad))
            out.append(
                f"min_size: {int(bad.sum())} zones have size below {c.min_size:g} "
                f"(zone {z}: {size[z]:g})"
            )
    return out


def _pinned_violations(labels: np.ndarray, c: ResolvedConstraints) -> list[str]:
    assert c.pinned is not None
    rows = np.flatnonzero(c.pinned >= 0)
    if not rows.size:
        return []
    out = []
    pairs = _pair_totals(c.pinned[rows], labels[rows])[0]
    fixed, zones_of = np.unique(pairs[0], return_counts=True)
    if np.any(zones_of > 1):
        out.append(
            f"fixed: {int(np.sum(zones_of > 1))} fixed labels are split over several zones "
            f"(label {fixed[np.argmax(zones_of > 1)]})"
        )
    zones, fixed_in = np.unique(pairs[1], return_counts=True)
    if np.any(fixed_in > 1):
        out.append(
            f"fixed: {int(np.sum(fixed_in > 1))} zones hold nodes with different fixed labels "
            f"(zone {zones[np.argmax(fixed_in > 1)]})"
        )
    return out


# ----------------------------------------------------------- enforcement state
@dataclass(frozen=True, eq=False)
class Enforcement:
    """Labels that honour the constraints, and what was changed to get them.

    Attributes
    ----------
    labels : ndarray of int, shape (n,)
        Zone of each node, numbered ``0..k-1``.
    notes : tuple of str
        One line per step that changed something, with counts.
    moved : int
        Nodes outside the best one-to-one match (by overlap) of the zones
        before and after: the nodes whose zone changed.
    """

    labels: np.ndarray
    notes: tuple[str, ...]
    moved: int

    @property
    def n_zones(self) -> int:
        return int(np.unique(self.labels).size)


class _Work:
    """Mutable state of one enforcement run, on the contracted index space."""

    def __init__(
        self,
        adjacency: sp.csr_array,
        constraints: ResolvedConstraints,
        labels: np.ndarray,
        members: np.ndarray,
        rng: np.random.Generator,
    ) -> None:
        self.adjacency = adjacency
        self.rows = _edge_rows(adjacency)
        self.c = constraints
        self.sizes = constraints.sizes
        assert constraints.pinned is not None
        self.pinned = constraints.pinned
        self.sources = constraints.sources
        self.is_source = np.zeros(self.sizes.size, dtype=bool)
        self.is_source[self.sources] = True
        self.anchor = self.is_source | (self.pinned >= 0)
        self.members = members
        self.labels = _compact(labels)
        self.rng = rng
        self.notes: list[str] = []
        self.repaired: np.ndarray | None = None  # labels the last repair left
        self.locked = np.zeros(self.labels.size, dtype=bool)  # no join path may cross

    @cached_property
    def _components(self) -> tuple[int, np.ndarray]:
        count, comp = connected_components(self.adjacency, directed=False)
        return int(count), comp.astype(np.int64)

    @property
    def n_comp(self) -> int:
        return self._components[0]

    @property
    def comp(self) -> np.ndarray:
        return self._components[1]

    @property
    def n_zones(self) -> int:
        return int(self.labels.max()) + 1 if self.labels.size else 0

    def compact(self) -> None:
        self.labels = _compact(self.labels)

    def zone_sizes(self) -> np.ndarray:
        return np.bincount(self.labels, weights=self.sizes, minlength=self.n_zones)

    def lengths(self, blocked: np.ndarray | None = None) -> sp.csr_array:
        """Link lengths ``1 / weight`` (strong links are short), without blocked nodes."""
        a = self.adjacency
        keep = np.ones(a.nnz, dtype=bool)
        if blocked is not None:
            keep = ~(blocked[self.rows] | blocked[a.indices])
        n = a.shape[0]
        indptr = np.concatenate([[0], np.cumsum(np.bincount(self.rows[keep], minlength=n))])
        return sp.csr_array((1.0 / a.data[keep], a.indices[keep], indptr), shape=(n, n))

    def pieces(self) -> tuple[int, np.ndarray]:
        """Connected pieces of the zones (zone-and-component pieces if not ``connected``)."""
        if self.c.connected:
            count, piece = connected_components(
                _inner(self.adjacency, self.rows, self.labels), directed=False
            )
            return int(count), piece.astype(np.int64)
        keys = self.labels * self.n_comp + self.comp
        uniq, piece = np.unique(keys, return_inverse=True)
        return int(uniq.size), piece.astype(np.int64).ravel()

    def zone_name(self, zone: int) -> str:
        """A zone named by a source, a fixed node or its first node."""
        inside = self.labels == zone
        for mask in (self.is_source, self.pinned >= 0, np.ones_like(inside)):
            hit = np.flatnonzero(inside & mask)
            if hit.size:
                return f"the zone holding {self.c.label_of(int(hit[0]))}"
        return f"zone {zone}"


# ---------------------------------------------------------------- feasibility
def _check_feasible(work: _Work) -> None:
    """Refuse inputs no zoning can satisfy, naming the node or component."""
    c, sizes = work.c, work.sizes
    _check_nodes_fit(work)
    _check_fixed_feasible(work)
    if c.min_size is None and not c.sources.size:
        return  # with an upper bound alone, any component can be cut small enough
    comp = work.comp
    total = np.bincount(comp, weights=sizes, minlength=work.n_comp)
    nodes = np.bincount(comp, weights=work.members, minlength=work.n_comp).astype(np.int64)
    first = np.unique(comp, return_index=True)[1]

    def where(k: int) -> str:
        return f"connected component {k} ({nodes[k]} nodes, e.g. {c.label_of(int(first[k]))})"

    if c.min_size is not None:
        small = np.flatnonzero(total < c.min_size * (1 - SIZE_RTOL))
        if small.size:
            k = int(small[0])
            raise ConstraintError(
                f"min_size: {where(k)} has size {total[k]:g} < min_size {c.min_size:g}; "
                "a zone cannot span components."
            )
    if c.sources.size:
        held = np.bincount(comp[c.sources], minlength=work.n_comp)
        if np.any(held == 0):
            k = int(np.argmax(held == 0))
            raise ConstraintError(
                f"sources: {where(k)} holds no source; every zone must hold exactly one "
                "source and a zone cannot span components."
            )
        zones_lo = zones_hi = held.astype(np.float64)
    else:
        zones_lo = np.ceil(total / c.max_size - SIZE_RTOL) if c.max_size else np.ones_like(total)
        zones_hi = (
            np.floor(total / c.min_size + SIZE_RTOL) if c.min_size else np.full_like(total, np.inf)
        )
    fits = np.ones(work.n_comp, dtype=bool)
    if c.max_size is not None:
        fits &= total <= zones_hi * c.max_size * (1 + SIZE_RTOL)
    if c.min_size is not None:
        fits &= total >= zones_lo * c.min_size * (1 - SIZE_RTOL)
    fits &= zones_lo <= zones_hi
    if not fits.all():
        k = int(np.argmin(fits))
        count = f"its {int(zones_lo[k])} sources" if c.sources.size else "any number of zones"
        bounds = " and ".join(
            f"{name} {value:g}"
            for name, value in (("min_size", c.min_size), ("max_size", c.max_size))
            if value is not None
        )
        raise ConstraintError(
            f"size bounds: {where(k)} has size {total[k]:g}, which {count} cannot share "
            f"within {bounds}."
        )


def _check_nodes_fit(work: _Work) -> None:
    c = work.c
    if c.max_size is None:
        return
    big = np.flatnonzero(work.sizes > c.max_size * (1 + SIZE_RTOL))
    if big.size:
        v = int(big[0])
        what = c.label_of(v)
        if work.members[v] > 1:
            what = f"the {work.members[v]} nodes that keep_links tie to {what}"
        raise ConstraintError(
            f"max_size: {what} alone has size {work.sizes[v]:g} > max_size {c.max_size:g}; "
            "no zone can be smaller than what it must hold."
        )


def _check_fixed_feasible(work: _Work) -> None:
    rows = np.flatnonzero(work.pinned >= 0)
    if not rows.size:
        return
    c = work.c
    pairs = _pair_totals(work.pinned[rows], work.comp[rows])[0]
    labels, counts = np.unique(pairs[0], return_counts=True)
    if np.any(counts > 1):
        f = int(labels[np.argmax(counts > 1)])
        held = rows[work.pinned[rows] == f]
        raise ConstraintError(
            f"fixed: the nodes fixed to label {f} ({c.name(held)}) lie in "
            f"{counts.max()} different connected components; a zone cannot span components."
        )
    if c.sources.size:
        fixed_sources = work.pinned[c.sources]
        fixed_sources = fixed_sources[fixed_sources >= 0]
        labels, counts = np.unique(fixed_sources, return_counts=True)
        if np.any(counts > 1):
            f = int(labels[np.argmax(counts > 1)])
            both = c.sources[work.pinned[c.sources] == f]
            raise ConstraintError(
                f"fixed: sources {c.name(both)} are all fixed to label {f}, but a zone "
                "holds exactly one source."
            )


# ---------------------------------------------------------- step 1: fixed nodes
def _force_pinned(work: _Work) -> None:
    """Match fixed labels to zones by overlap and move fixed nodes there.

    A fixed label left without a zone of its own (it shares its best zone
    with a label of larger overlap) takes a share of the zones it sits in:
    those zones are divided among the fixed nodes they hold, each node going
    with its nearest fixed node, rather than leaving the label a zone of its
    fixed nodes alone.
    """
    rows = np.flatnonzero(work.pinned >= 0)
    if not rows.size:
        return
    fixed, inverse = np.unique(work.pinned[rows], return_inverse=True)
    match = _best_match(inverse, work.labels[rows], work.members[rows].astype(np.float64))
    target = work.n_zones + np.arange(fixed.size)
    for f, zone in match.items():
        target[f] = zone
    goal = target[inverse]
    moved = work.labels[rows] != goal
    shared = np.isin(work.labels, work.labels[rows[goal >= work.n_zones]])
    if shared.any():
        seeds = rows[shared[rows]]
        origin = _nearest_seed(work, seeds)
        goal_of = np.full(work.labels.size, -1, dtype=np.int64)
        goal_of[rows] = goal
        reached = shared & (origin >= 0)
        work.labels[reached] = goal_of[origin[reached]]
    work.labels[rows] = goal
    if moved.any():
        unmatched = fixed.size - len(match)
        work.notes.append(
            f"fixed: {fixed.size} fixed labels matched to zones by overlap; "
            f"{int(work.members[rows[moved]].sum())} fixed nodes moved into their zone"
            + (f"; {unmatched} labels took a share of a zone they shared" if unmatched else "")
        )
    work.compact()


def _nearest_seed(work: _Work, seeds: np.ndarray) -> np.ndarray:
    """Nearest seed of every node over the links inside zones (length 1/weight).

    A multi-source Dijkstra search (E. W. Dijkstra, Numer. Math. 1 (1959)
    269-271); ``-9999`` where no seed of the node's zone is reachable. The
    cell of each seed is connected: a node's predecessor on its shortest path
    lies in the same cell.
    """
    lengths = _inner(work.adjacency, work.rows, work.labels)
    lengths.data = 1.0 / lengths.data
    _, _, origin = dijkstra(lengths, indices=seeds, min_only=True, return_predecessors=True)
    return np.asarray(origin, dtype=np.int64)


# ------------------------------------------------------- step 2: connectivity
def _repair(work: _Work) -> None:
    """Keep each zone's anchored (else biggest) piece; move the other pieces.

    First, zone by zone, the pieces holding one label's fixed nodes are
    joined (:func:`_join_fixed`); each joined zone, and every zone whose
    fixed nodes already lie in one piece, is then locked against the paths
    of later joins, so no join undoes another and the loop ends after at
    most one join per fixed label.
    """
    if work.repaired is not None and np.array_equal(work.repaired, work.labels):
        return
    work.locked = np.zeros(work.labels.size, dtype=bool)
    while True:
        count, piece = work.pieces()
        zone_of = np.empty(count, dtype=np.int64)
        zone_of[piece] = work.labels
        pinned_piece = np.bincount(piece[work.pinned >= 0], minlength=count) > 0
        split = np.bincount(zone_of[pinned_piece], minlength=work.n_zones) > 1
        if not split.any():
            break
        work.locked |= (pinned_piece & ~split[zone_of])[piece]
        zone = int(np.argmax(split))
        _join_fixed(work, zone, piece, pinned_piece & (zone_of == zone))
    _move_fragments(work, count, piece, zone_of, pinned_piece)
    work.repaired = work.labels.copy()


def _move_fragments(
    work: _Work, count: int, piece: np.ndarray, zone_of: np.ndarray, pinned_piece: np.ndarray
) -> None:
    size = np.bincount(piece, weights=work.sizes, minlength=count)
    source_piece = np.bincount(piece[work.is_source], minlength=count) > 0
    # Per zone, in order of preference: the piece with fixed nodes, then pieces
    # with a source, then the biggest. The first keeps the zone; further source
    # pieces become zones of their own (the source step needs them apart anyway).
    order = np.lexsort((np.arange(count), -size, ~source_piece, ~pinned_piece, zone_of))
    first = _first_of_groups(zone_of[order])
    kept = np.zeros(count, dtype=bool)
    kept[order[first]] = True
    kept |= source_piece
    assigned = np.full(count, -1, dtype=np.int64)
    assigned[order[first]] = zone_of[order[first]]
    extra = np.flatnonzero(kept & (assigned < 0))
    assigned[extra] = work.n_zones + np.arange(extra.size)
    fragments = np.flatnonzero(~kept)
    if not fragments.size:
        if extra.size:
            work.labels = assigned[piece]
            work.notes.append(f"sources: {extra.size} disconnected source pieces became zones")
        return
    a = work.adjacency
    cross = (~kept[piece])[work.rows] & (piece[work.rows] != piece[a.indices])
    src, dst, weight = piece[work.rows[cross]], piece[a.indices[cross]], a.data[cross]
    span = int(assigned.max()) + 2 + count
    while True:
        ready = (assigned[src] < 0) & (assigned[dst] >= 0)
        if not ready.any():
            break
        keys, inverse = np.unique(src[ready] * span + assigned[dst[ready]], return_inverse=True)
        total = np.bincount(inverse.ravel(), weights=weight[ready])
        frag, zone = keys // span, keys % span
        best = np.lexsort((zone, -total, frag))
        best = best[_first_of_groups(frag[best])]
        assigned[frag[best]] = zone[best]
    # Fragments no kept piece can reach lie in a component of their own: one
    # new zone per such component.
    left = np.flatnonzero(assigned < 0)
    if left.size:
        comp_of = np.empty(count, dtype=np.int64)
        comp_of[piece] = work.comp
        _, new = np.unique(comp_of[left], return_inverse=True)
        assigned[left] = int(assigned.max()) + 1 + new.ravel()
    work.labels = assigned[piece]
    nodes = int(np.bincount(piece, weights=work.members, minlength=count)[fragments].sum())
    work.notes.append(
        f"connected: {fragments.size} stranded fragments ({nodes} nodes) moved to "
        "neighbouring zones"
        + (
            f"; {len(set(work.comp[np.isin(piece, left)].tolist()))} "
            "isolated components became zones"
            if left.size
            else ""
        )
    )
    work.compact()


def _join_fixed(work: _Work, zone: int, piece: np.ndarray, fixed_pieces: np.ndarray) -> None:
    """Annex shortest paths joining the pieces of ``zone`` that hold fixed nodes.

    Paths avoid sources and fixed nodes of other zones always, and first try
    to avoid every zone that holds fixed nodes too: cutting through such a
    zone could split its own fixed nodes, whose repair could cut this zone
    again.
    """
    ids = np.flatnonzero(fixed_pieces)
    is_fixed = work.pinned >= 0
    weight = np.bincount(piece[is_fixed], weights=work.members[is_fixed], minlength=piece.max() + 1)
    main = ids[np.argmax(weight[ids])]
    seeds = np.flatnonzero(piece == main)
    others = np.flatnonzero(np.isin(piece, ids[ids != main]) & is_fixed)
    fixed_zone = np.zeros(work.n_zones, dtype=bool)
    fixed_zone[work.labels[is_fixed]] = True
    fixed_zone[zone] = False
    anchored = (work.anchor & (work.labels != zone)) | work.locked
    work.locked[np.isin(piece, ids)] = True
    annexed = 0
    for blocked in (anchored | fixed_zone[work.labels], anchored):
        dist, pred, _ = dijkstra(
            work.lengths(blocked), indices=seeds, min_only=True, return_predecessors=True
        )
        order = np.lexsort((dist[others], piece[others]))
        ends = others[order[_first_of_groups(piece[others][order])]]
        for end in ends[np.isfinite(dist[ends])].tolist():
            v = int(pred[end])
            while v >= 0:
                annexed += int(work.labels[v] != zone)
                work.labels[v] = zone
                work.locked[v] = True
                v = int(pred[v])
        others = ends[~np.isfinite(dist[ends])]
        if not others.size:
            break
        others = np.flatnonzero(np.isin(piece, piece[others]) & is_fixed)
    if others.size:
        end = int(others[0])
        raise ConstraintError(
            f"fixed: the nodes fixed to label {int(work.pinned[end])} cannot be joined in one "
            f"connected zone: {work.c.label_of(end)} is cut off from the others by sources, "
            "nodes fixed to other labels or the paths already joining them."
        )
    work.notes.append(
        f"fixed: {annexed} nodes annexed to join the nodes fixed to label "
        f"{int(work.pinned[seeds[is_fixed[seeds]][0]])} in one connected zone"
    )


# ------------------------------------------------------ step 3: one source each
def _one_source_per_zone(work: _Work) -> None:
    if not work.sources.size:
        return
    held = np.bincount(work.labels[work.sources], minlength=work.n_zones)
    if np.any(held > 1):
        _split_at_sources(work, np.flatnonzero(held > 1), held)
    _repair(work)
    _merge_sourceless(work)


def _split_at_sources(work: _Work, zones: np.ndarray, held: np.ndarray) -> None:
    """Split each zone into the shortest-path cells of its sources (:func:`_nearest_seed`).

    Fixed
    nodes of a zone are seeded into one cell: that of a source fixed to the
    same label, else the cell that already holds most of them.
    """
    inside = np.isin(work.labels, zones)
    seeds = work.sources[inside[work.sources]]
    part = np.full(work.labels.size, -1, dtype=np.int64)
    part[seeds] = work.n_zones + np.arange(seeds.size)
    origin = _nearest_seed(work, seeds)
    fixed = np.flatnonzero(inside & (work.pinned >= 0))
    if fixed.size:
        owner = _fixed_owner(work, fixed, origin)
        owned = owner >= 0
        if np.any(owner != origin[fixed]) and owned.all():
            part[fixed] = part[owner]
            seeds = np.concatenate([seeds, fixed[~work.is_source[fixed]]])
            origin = _nearest_seed(work, seeds)
    reached = inside & (origin >= 0)
    new = work.labels.copy()
    new[reached] = part[origin[reached]]
    work.labels = new
    work.notes.append(
        f"sources: {zones.size} zones holding {int(held[zones].sum())} sources split into "
        "one zone per source"
    )
    work.compact()


def _fixed_owner(work: _Work, fixed: np.ndarray, origin: np.ndarray) -> np.ndarray:
    """The source whose cell receives each fixed node (one per fixed label)."""
    owner = origin[fixed].copy()
    for f in np.unique(work.pinned[fixed]).tolist():
        group = fixed[work.pinned[fixed] == f]
        own = group[work.is_source[group]]
        if own.size:
            owner[work.pinned[fixed] == f] = own[0]
            continue
        cells, counts = np.unique(origin[group][origin[group] >= 0], return_counts=True)
        if cells.size:
            owner[work.pinned[fixed] == f] = cells[np.argmax(counts)]
    return owner


class _ZoneGraph:
    """Zones as nodes, boundary weight as links; merges in O(degree)."""

    def __init__(self, work: _Work) -> None:
        k = work.n_zones
        labels, a = work.labels, work.adjacency
        self.size = np.bincount(labels, weights=work.sizes, minlength=k)
        self.held = np.bincount(labels[work.sources], minlength=k)
        self.fixed = np.full(k, -1, dtype=np.int64)
        pinned = work.pinned >= 0
        self.fixed[labels[pinned]] = work.pinned[pinned]
        self.parent = np.arange(k)
        self.zone_comp = np.zeros(k, dtype=np.int64)
        self.zone_comp[labels] = work.comp
        self.links: list[dict[int, float]] = [{} for _ in range(k)]
        za, zb = labels[work.rows], labels[a.indices]
        cross = za != zb
        keys, inverse = np.unique(za[cross] * k + zb[cross], return_inverse=True)
        total = np.bincount(inverse.ravel(), weights=a.data[cross])
        for key, w in zip(keys.tolist(), total.tolist(), strict=True):
            self.links[key // k][key % k] = w

    def compatible(self, z: int, y: int) -> bool:
        return bool(self.fixed[z] < 0 or self.fixed[y] < 0 or self.fixed[z] == self.fixed[y])

    def merge(self, z: int, y: int) -> None:
        """Merge zone ``z`` into its neighbour ``y``."""
        for other, w in self.links[z].items():
            del self.links[other][z]
            if other != y:
                self.links[y][other] = self.links[y].get(other, 0.0) + w
                self.links[other][y] = self.links[other].get(y, 0.0) + w
        self.links[z] = {}
        self.size[y] += self.size[z]
        self.held[y] += self.held[z]
        self.fixed[y] = max(self.fixed[y], self.fixed[z])
        self.parent[z] = y

    def relabel(self, labels: np.ndarray) -> np.ndarray:
        root = self.parent.copy()
        while np.any(root[root] != root):
            root = root[root]
        return root[labels]


def _fits(graph: _ZoneGraph, z: int, y: int, bound: float | None) -> bool:
    return bound is None or graph.size[z] + graph.size[y] <= bound * (1 + SIZE_RTOL)


def _merge_sourceless(work: _Work) -> None:
    """Merge every zone without a source into a neighbour, preferring one with a
    source, then a union within ``max_size``, then the most shared weight."""
    graph = _ZoneGraph(work)
    pending = [z for z in np.argsort(graph.size, kind="stable").tolist() if graph.held[z] == 0]
    merged = 0
    while pending:
        waiting = []
        for z in pending:
            options = [
                (graph.held[y] > 0, _fits(graph, z, y, work.c.max_size), w, -y)
                for y, w in graph.links[z].items()
                if graph.compatible(z, y)
            ]
            if not options:
                waiting.append(z)
                continue
            graph.merge(z, -max(options)[3])
            merged += 1
        if len(waiting) == len(pending):
            raise ConstraintError(
                f"sources: {work.zone_name(waiting[0])} holds no source and cannot join a "
                "neighbour: its neighbours hold nodes fixed to other labels."
            )
        pending = waiting
    if merged:
        work.labels = graph.relabel(work.labels)
        work.notes.append(f"sources: {merged} zones without a source merged into neighbours")
        work.compact()


# --------------------------------------------------------- step 4: size bounds
def _split_oversize(work: _Work) -> None:
    """Bisect zones above ``max_size`` until every part fits."""
    bound = work.c.max_size
    if bound is None:
        return
    size = work.zone_sizes()
    over = np.flatnonzero(size > bound * (1 + SIZE_RTOL))
    if not over.size:
        return
    if work.sources.size:  # a part would lack a source: left to _balance_sizes
        return
    stack, parts = over.tolist(), 0
    while stack:
        zone = stack.pop()
        nodes = np.flatnonzero(work.labels == zone)
        inside = _bisect(work, nodes)
        work.labels[nodes[inside]] = new = work.n_zones
        parts += 1
        for part in (zone, new):
            if work.sizes[work.labels == part].sum() > bound * (1 + SIZE_RTOL):
                stack.append(part)
    work.notes.append(
        f"max_size: {over.size} zones above {bound:g} split into {over.size + parts} zones"
    )


def _bisect(work: _Work, nodes: np.ndarray) -> np.ndarray:
    """Best sweep cut along the Fiedler vector with both sides of admissible size.

    Notes
    -----
    Nodes are ordered by :math:`D^{-1/2} u_2` of the zone's normalized
    Laplacian; the cut with the least conductance is taken among prefixes
    whose size lets both sides be split further into parts within the bounds
    (Cheeger's inequality bounds the best unrestricted sweep cut by
    :math:`\\sqrt{2 \\lambda_2}`; F. Chung, *Spectral Graph Theory*, AMS 1997,
    Thm 2.2). Recursive spectral bisection: A. Pothen, H. D. Simon and K.-P.
    Liou, SIAM J. Matrix Anal. Appl. 11 (1990) 430-452,
    https://doi.org/10.1137/0611030. Sides are then made connected.
    """
    sub = work.adjacency[nodes][:, nodes].tocsr()
    m = nodes.size
    sizes = work.sizes[nodes]
    degree = np.asarray(sub.sum(axis=1)).ravel()
    key = _fiedler(sub, work.rng) / np.sqrt(np.where(degree > 0, degree, 1.0))
    order = np.argsort(key, kind="stable")
    rank = np.empty(m, dtype=np.int64)
    rank[order] = np.arange(m)
    upper = sp.triu(sub, k=1, format="coo")
    later = np.where(rank[upper.row] > rank[upper.col], upper.row, upper.col)
    earlier = np.bincount(later, weights=upper.data, minlength=m)
    cut = np.cumsum(degree[order] - 2.0 * earlier[order])[:-1]
    volume = np.cumsum(degree[order])[:-1]
    smaller = np.minimum(volume, degree.sum() - volume)
    with np.errstate(divide="ignore", invalid="ignore"):
        score = np.where(smaller > 0, cut / smaller, np.inf)
    prefix = np.cumsum(sizes[order])[:-1]
    low, high = _window(float(sizes.sum()), work.c.min_size, work.c.max_size or np.inf)
    distance = np.maximum(low - prefix, 0) + np.maximum(prefix - high, 0)
    fixed = np.flatnonzero(work.pinned[nodes] >= 0)
    if fixed.size:  # fixed nodes of a zone stay on one side
        first, last = rank[fixed].min(), rank[fixed].max()
        cuts = np.arange(1, m)
        distance = distance + np.where((cuts <= first) | (cuts > last), 0, np.inf)
    best = int(np.lexsort((score, distance))[0])
    inside = np.zeros(m, dtype=bool)
    inside[order[: best + 1]] = True
    if work.c.connected:
        inside = _connected_sides(sub, inside, sizes, work.pinned[nodes] >= 0)
    return inside


def _window(total: float, low: float | None, high: float) -> tuple[float, float]:
    """Sizes of the first side that leave both sides splittable within the bounds."""
    parts = max(2, math.ceil(total / high - SIZE_RTOL))
    left, right = parts // 2, parts - parts // 2
    floor = 0.0 if low is None else low
    lo, hi = max(left * floor, total - right * high), min(left * high, total - right * floor)
    if lo > hi:  # the lower bound cannot hold here; merges will see to it
        lo, hi = total - right * high, left * high
    slack = SIZE_RTOL * total
    return lo - slack, hi + slack


def _connected_sides(
    sub: sp.csr_array, inside: np.ndarray, sizes: np.ndarray, fixed: np.ndarray
) -> np.ndarray:
    """Make both sides of a cut of a connected graph connected.

    Keep the biggest piece A0 of the first side (the one with fixed nodes if
    any); the rest of the graph falls into pieces that each touch A0. Keep the
    biggest of those, B0, as the second side and give the others to A0: both
    sides are then connected.
    """
    rows = _edge_rows(sub)
    for _ in range(2):
        count, piece = connected_components(_inner(sub, rows, inside.astype(np.int64)))
        size = np.bincount(piece, weights=sizes, minlength=count)
        has_fixed = np.bincount(piece[fixed], minlength=count) > 0
        is_side = np.bincount(piece[inside], minlength=count) > 0
        keep = int(np.lexsort((-size, ~has_fixed, ~is_side))[0])
        inside = piece != keep
    return inside


def _fiedler(sub: sp.csr_array, rng: np.random.Generator) -> np.ndarray:
    """Second eigenvector of the normalized Laplacian of ``sub``."""
    from ..eigen import smallest_eigenpairs
    from ..operators import laplacian

    m = sub.shape[0]
    if m <= 2:
        return np.arange(m, dtype=np.float64)
    network = Network(sub, np.arange(m).astype(str))
    try:
        method = "lanczos" if m <= FIEDLER_LANCZOS_NODES else "auto"
        result = smallest_eigenpairs(laplacian(network), 2, method=method, tol=FIEDLER_TOL, rng=rng)
    except ConvergenceError as exc:  # an order of nodes is all a sweep needs
        logger.info("bisection vector not converged; sweeping the partial vector")
        result = exc.partial
    return np.asarray(result.vectors[:, 1])


def _merge_undersize(work: _Work) -> None:
    """Merge zones below ``min_size`` into the neighbour sharing most weight,
    when the union fits ``max_size`` (smallest zones first).

    A zone with no such neighbour is left to :func:`_balance_sizes`, unless
    its part of the network holds more zones than ``min_size`` allows
    (:func:`_zones_to_spare`): then it merges anyway with the neighbour of
    smallest union, and balancing sheds the excess.
    """
    bound = work.c.min_size
    if bound is None:
        return
    graph = _ZoneGraph(work)
    spare = _zones_to_spare(work, graph, bound)
    heap = [(s, z) for z, s in enumerate(graph.size.tolist()) if s < bound * (1 - SIZE_RTOL)]
    heapq.heapify(heap)
    merged = 0
    while heap:
        size, z = heapq.heappop(heap)
        if graph.parent[z] != z or size != graph.size[z]:
            continue
        allowed = [
            y
            for y in graph.links[z]
            if graph.compatible(z, y) and graph.held[z] + graph.held[y] <= 1
        ]
        options = [(graph.links[z][y], -y) for y in allowed if _fits(graph, z, y, work.c.max_size)]
        if not options and spare[graph.zone_comp[z]] > 0 and allowed:
            options = [(-graph.size[y], -y) for y in allowed]  # least overflow
        if not options:
            continue  # left for boundary transfers
        y = -max(options)[1]
        graph.merge(z, y)
        spare[graph.zone_comp[z]] -= 1
        merged += 1
        if graph.size[y] < bound * (1 - SIZE_RTOL):
            heapq.heappush(heap, (float(graph.size[y]), y))
    if merged:
        work.labels = graph.relabel(work.labels)
        work.notes.append(f"min_size: {merged} zones below {bound:g} merged into neighbours")
        work.compact()


def _zones_to_spare(work: _Work, graph: _ZoneGraph, bound: float) -> np.ndarray:
    """Per connected component: zones beyond the most that ``min_size`` leaves room for."""
    total = np.bincount(work.comp, weights=work.sizes, minlength=work.n_comp)
    zones = np.bincount(graph.zone_comp, minlength=work.n_comp)
    room = np.floor(total / bound + SIZE_RTOL).astype(np.int64)
    return np.maximum(zones - np.maximum(room, 1), 0)


def _merge_obstacle(work: _Work, graph: _ZoneGraph, z: int) -> str:
    near = list(graph.links[z])
    if not near:
        return "it has no neighbouring zone"
    if work.sources.size:
        return "each zone must hold exactly one source"
    if not any(graph.compatible(z, y) for y in near):
        return "its neighbours hold nodes fixed to other labels"
    union = min(graph.size[z] + graph.size[y] for y in near if graph.compatible(z, y))
    return f"the smallest union with a neighbour has size {union:g} > max_size {work.c.max_size:g}"


# ------------------------------------------- step 5: balance by boundary transfers
def _balance_sizes(work: _Work) -> None:
    """Bring the zones that splits and merges left outside the size bounds within
    them by moving boundary nodes between adjacent zones (:func:`balance_sizes`).

    Sources and fixed nodes never move; super-nodes move whole (they are single
    nodes of the contracted graph); every zone stays connected.
    """
    c = work.c
    if c.min_size is None and c.max_size is None:
        return
    before = work.labels.copy()
    size = work.zone_sizes()
    outside = _outside_bounds(size, c)
    if not outside.any():
        return
    result = balance_sizes(
        work.adjacency,
        before,
        sizes=work.sizes,
        min_size=c.min_size,
        max_size=c.max_size,
        movable=~work.anchor,
        connected=c.connected,
        name=work.zone_name,
    )
    if not result.balanced:
        raise ConstraintError(_balance_failure(work, size, result))
    work.labels = result.labels
    nodes = int(work.members[before != result.labels].sum())
    work.notes.append(
        f"size bounds: {np.count_nonzero(outside)} zones outside the bounds brought within them by "
        f"moving {nodes} nodes between neighbouring zones ({result.rounds} rounds of transfers)"
    )


def _outside_bounds(size: np.ndarray, c: ResolvedConstraints) -> np.ndarray:
    """Per zone: -1 below ``min_size``, +1 above ``max_size``, 0 within."""
    low = -np.inf if c.min_size is None else c.min_size * (1 - SIZE_RTOL)
    high = np.inf if c.max_size is None else c.max_size * (1 + SIZE_RTOL)
    return (size > high).astype(np.int64) - (size < low).astype(np.int64)


def _balance_failure(work: _Work, size: np.ndarray, result: Balance) -> str:
    """The message of a failed balance: the zone, its size, the bound, what blocked it.

    ``work.labels`` still holds the labels before balancing (zone numbers are
    the same after it), so the zone is named, and its merges judged, as the
    earlier steps left it.
    """
    c = work.c
    final = np.bincount(result.labels, weights=work.sizes, minlength=size.size)
    side_before, side_after = _outside_bounds(size, c), _outside_bounds(final, c)
    unmet = result.unmet.tolist()
    z = next((u for u in unmet if side_before[u] == side_after[u]), unmet[0])
    shown = size[z] if side_before[z] == side_after[z] else final[z]
    later = f" ({final[z]:g} after boundary transfers)" if final[z] != shown else ""
    name = work.zone_name(z)
    if side_after[z] < 0:
        head = (
            f"min_size: {name} has size {shown:g} < min_size {c.min_size:g}{later}; it cannot "
            f"merge with a neighbour ({_merge_obstacle(work, _ZoneGraph(work), z)})"
        )
    else:
        why = (
            "splitting it would leave a part without a source (every zone must hold exactly one)"
            if work.sources.size
            else "the splits and merges of its part of the network left it there"
        )
        head = f"max_size: {name} has size {shown:g} > max_size {c.max_size:g}{later}; {why}"
    return f"{head}, and boundary transfers could not fix it: {result.reason}."


# ---------------------------------------------------------------- the driver
_STEPS: tuple[Callable[[_Work], None], ...] = (
    _check_feasible,
    _force_pinned,
    _repair,
    _one_source_per_zone,
    _split_oversize,
    _merge_undersize,
    _balance_sizes,
    _repair,
)


def enforce_constraints(
    adjacency: Any,
    labels: Any,
    constraints: ResolvedConstraints,
    *,
    rng: Any = None,
) -> Enforcement:
    """Change a zoning as little as the constraints require, or say why they cannot hold.

    Parameters
    ----------
    adjacency : sparse array of shape (n, n)
        Symmetric affinities, zero diagonal (a :class:`Network`'s adjacency).
    labels : ndarray of int, shape (n,)
        A zoning to start from (for example a spectral assignment).
    constraints : ResolvedConstraints
        On the same rows (:meth:`ZoneConstraints.resolve`).
    rng : None, int or numpy.random.Generator
        Seeds the eigen-solves of bisections.

    Returns
    -------
    Enforcement
        Labels numbered ``0..k-1``; the number of zones may differ from the
        input's (merges and splits), and the notes say by how much.

    Raises
    ------
    ConstraintError
        When a constraint cannot be met; the message names it, the zone,
        component or node concerned, its size and the bound.
    ParameterError
        For labels or constraints of the wrong shape.

    Notes
    -----
    The steps are listed in the module docstring. The fixed labels are
    matched to zones by the Hungarian method (H. W. Kuhn, Naval Res. Logist.
    Q. 2 (1955) 83-97, https://doi.org/10.1002/nav.3800020109, as
    ``scipy.optimize.linear_sum_assignment``); zones with several sources are
    split into the cells of a multi-source Dijkstra search (E. W. Dijkstra,
    Numer. Math. 1 (1959) 269-271, https://doi.org/10.1007/BF01386390).

    Examples
    --------
    >>> from specgraph import gallery
    >>> rules = ResolvedConstraints(None, None, np.ones(6), sources=np.array([0, 5]))
    >>> out = enforce_constraints(gallery.path(6).adjacency, np.zeros(6, dtype=int), rules)
    >>> out.labels.tolist()
    [0, 0, 0, 1, 1, 1]
    >>> out.notes[0]
    'sources: 1 zones holding 2 sources split into one zone per source'
    """
    matrix = _as_csr(adjacency)
    n = matrix.shape[0]
    start = _checked_labels(labels, n)
    if constraints.n_nodes != n:
        raise ParameterError(f"constraints must cover {n} nodes; got {constraints.n_nodes}.")
    if n == 0:
        return Enforcement(start, (), 0)
    contraction = contract_links(matrix, constraints.keep_pairs)
    inner = contract_constraints(contraction, constraints)
    members = np.bincount(contraction.groups, minlength=contraction.n_groups)
    work = _Work(
        contraction.adjacency,
        inner,
        _labels_of_groups(contraction, start),
        members,
        check_rng(rng),
    )
    if constraints.keep_pairs.size:
        work.notes.append(
            f"keep_links: {len(constraints.keep_pairs)} links kept by merging "
            f"{n - contraction.n_groups} nodes into their neighbours for the duration"
        )
    for step in _STEPS:
        step(work)
    final = _compact(contraction.expand(work.labels))
    broken = constraint_violations(matrix, final, constraints)
    if broken:
        raise ConstraintError("constraints could not all be met: " + "; ".join(broken) + ".")
    before, after = int(_compact(start).max()) + 1, int(final.max()) + 1
    notes = list(work.notes)
    if before != after:
        notes.append(f"zones: {before} before constraints, {after} after")
    match = _best_match(start, final, np.ones(n))
    image = np.full(int(start.max()) + 1, -1, dtype=np.int64)
    image[list(match)] = list(match.values())
    kept = int(np.sum(image[start] == final))
    return Enforcement(final.astype(np.int64), tuple(notes), n - kept)


def _labels_of_groups(contraction: Contraction, labels: np.ndarray) -> np.ndarray:
    """Label of each super-node: the label of most of its members (by count)."""
    groups = contraction.groups
    if contraction.n_groups == groups.size:
        return labels
    pairs, counts = _pair_totals(groups, labels)
    order = np.lexsort((-counts, pairs[0]))
    first = order[_first_of_groups(pairs[0][order])]
    out = np.empty(contraction.n_groups, dtype=np.int64)
    out[pairs[0][first]] = pairs[1][first]
    return out
