"""Size balancing by boundary transfers: every zone within the size bounds, same zone count.

Splits and merges change the number of zones and are refused where they would
break a rule (a zone above ``max_size`` that holds a source cannot be split; a
zone below ``min_size`` whose every union with a neighbour exceeds
``max_size`` cannot merge). Moving boundary nodes between adjacent zones
keeps the count and can still reach sizes within the bounds.

Each round has two stages:

1. a plan on the zone graph (zones as nodes, shared boundaries as arcs, both
   directions): how much size :math:`f_{yz} \\ge 0` each zone :math:`y`
   hands to each neighbour :math:`z` so that every final size
   :math:`S_z + \\sum_y f_{yz} - \\sum_y f_{zy}` lies in
   ``[min_size, max_size]``, at least total transfer :math:`\\sum f_{yz}`.
   This is a minimum-cost flow [1]_ solved as a linear program (HiGHS dual
   simplex [2]_). Deciding the amounts on the quotient graph first and
   moving nodes afterwards is the scheme of diffusion load balancing [3]_;
   an undersized zone whose neighbours have no size to spare is fed along a
   path of zones (a cascade), each passing on what it receives. With integer
   node sizes the constraint matrix is a network matrix, hence totally
   unimodular, and the simplex vertex is integral [1]_: every planned
   amount is a whole number of nodes;
2. the transfers, in topological order of the plan (a zone hands on size
   after it has received what the plan sends it). Transfer ``y -> z`` peels
   boundary nodes of ``y`` adjacent to ``z`` from a heap keyed by
   :math:`w_z(v) / (w_y(v) + w_z(v))`, the share of the node's link weight
   that goes into ``z``: nodes most strongly tied to the receiver and most
   weakly to the donor go first (the gain ordering of boundary moves of
   Fiduccia and Mattheyses [4]_, with a size target instead of a cut gain).
   A node moves only if it is movable (not a source, not fixed), it is not
   the donor's last node, and the donor stays connected without it (a
   breadth-first search bounded by :data:`CONNECTIVITY_SEARCH_LIMIT` from
   each of its donor-side neighbours, then an exact search of the donor
   zone when every bounded one hit the bound). The receiver stays connected
   because the node touches it.

A transfer that falls short (no node it may move is left) blocks its arc in
later plans; the next round re-plans from the sizes reached. Balancing stops
when every zone fits, when the plan becomes infeasible (the reason is
reported: too many or too few zones for the total size of a part of the
network, or the transfers that were refused and why), or after
:data:`BALANCE_ROUNDS` rounds.

Cost per round: O(n + nnz) vectorized work to find boundary nodes and the
zone graph, a linear program with two variables per pair of neighbouring
zones, and a compiled loop over the moved nodes and their neighbours.

References
----------
.. [1] R. K. Ahuja, T. L. Magnanti and J. B. Orlin, *Network Flows: Theory,
   Algorithms, and Applications*, Prentice Hall, 1993 (minimum-cost flow,
   Ch. 9; total unimodularity of network matrices, Ch. 11).
.. [2] Q. Huangfu and J. A. J. Hall, "Parallelizing the dual revised simplex
   method", Math. Prog. Comp. 10 (2018) 119-142,
   :doi:`10.1007/s12532-017-0130-5` (scipy's ``linprog(method='highs-ds')``).
.. [3] G. Cybenko, "Dynamic load balancing for distributed memory
   multiprocessors", J. Parallel Distrib. Comput. 7 (1989) 279-301,
   :doi:`10.1016/0743-7315(89)90021-X`.
.. [4] C. M. Fiduccia and R. M. Mattheyses, "A linear-time heuristic for
   improving network partitions", Proc. 19th Design Automation Conference,
   1982, pp. 175-181, :doi:`10.1109/DAC.1982.1585498`.
"""

from __future__ import annotations

import heapq
import logging
import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np
import scipy.sparse as sp
from scipy.optimize import linprog
from scipy.sparse.csgraph import connected_components

from .._figures import check_labels
from .._validation import (
    NON_NEGATIVE,
    Array,
    Boolean,
    Constraint,
    Interval,
    IsCallable,
    NoneOk,
    SquareMatrix,
    check_param,
    parameter_error,
    validate_params,
)
from ._connectivity import CONNECTIVITY_SEARCH_LIMIT, edge_rows
from ._transfers import TOO_BIG, WHY, realize

__all__ = [
    "BALANCE_ROUNDS",
    "CONNECTIVITY_SEARCH_LIMIT",
    "PLAN_MARGIN_SHARE",
    "SIZE_RTOL",
    "TRANSFERS_SHOWN",
    "Balance",
    "balance_sizes",
]

logger = logging.getLogger(__name__)

#: Relative slack when a zone size is compared with a bound: sizes are float
#: sums of node sizes, and round-off must not turn ``size == max_size`` into a
#: violation (a few thousand ulps of float64 summation).
SIZE_RTOL = 1e-9

#: Most rounds of plan-and-transfer. A round ends every violation it can
#: reach unless a transfer falls short, and each short transfer blocks one arc
#: of the zone graph for later plans, so few rounds are needed: on road-like
#: networks of 2,000 to 1,000,000 nodes in 8 to 200 zones near the bounds,
#: one or two rounds (measured). The cap bounds the work when transfers keep
#: falling short one arc at a time.
BALANCE_ROUNDS = 16

#: With node sizes that are not whole numbers, plans aim inside the bounds by
#: one largest node size, but by at most this share of ``max_size -
#: min_size`` (so a quarter of the width stays on each side at worst); a plan
#: that cannot is made again aiming at the bounds themselves (see ``_margin``).
PLAN_MARGIN_SHARE = 0.25

#: Refused transfers described in a failure message before "and N more".
TRANSFERS_SHOWN = 3


@dataclass(frozen=True, eq=False)
class Balance:
    """The result of :func:`balance_sizes`.

    Attributes
    ----------
    labels : ndarray of int64, shape (n,)
        Zone of each node, same numbering as the input (no zone is added or
        removed); the best reached when balancing failed.
    moves : int
        Node moves made (a node moved twice counts twice).
    moved_size : float
        Summed size of the moved nodes.
    rounds : int
        Plan-and-transfer rounds run.
    unmet : ndarray of int64
        Zones still outside the bounds, worst first; empty on success.
    reason : str
        Why balancing failed; ``''`` on success.
    """

    labels: np.ndarray
    moves: int
    moved_size: float
    rounds: int
    unmet: np.ndarray
    reason: str

    @property
    def balanced(self) -> bool:
        """Whether every zone lies within the bounds."""
        return not self.unmet.size


# ------------------------------------------------------------------ planning
def _zone_arcs(labels: np.ndarray, rows: np.ndarray, cols: np.ndarray, k: int) -> np.ndarray:
    """Ordered pairs ``(y, z)`` of different zones joined by a link, shape (2, p)."""
    za, zb = labels[rows], labels[cols]
    cross = za != zb
    keys = np.unique(za[cross] * k + zb[cross])
    return np.stack([keys // k, keys % k])


def _plan(
    arcs: np.ndarray, zsize: np.ndarray, present: np.ndarray, low: float, high: float, shut: set
) -> np.ndarray | None:
    """Least total transfer on the arcs bringing every present zone into ``[low, high]``.

    ``None`` when no such transfer exists with the ``shut`` arcs closed.
    """
    p = arcs.shape[1]
    zones = np.flatnonzero(present)
    if not p:
        fits = (zsize[zones] >= low) & (zsize[zones] <= high)
        return np.zeros(0) if fits.all() else None
    cols = np.arange(p)
    flow = sp.csr_array(
        (np.r_[np.ones(p), -np.ones(p)], (np.r_[arcs[1], arcs[0]], np.r_[cols, cols])),
        shape=(zsize.size, p),
    )[zones]
    blocks, rhs = [], []
    if math.isfinite(high):
        blocks.append(flow)
        rhs.append(high - zsize[zones])
    if low > 0:
        blocks.append(-flow)
        rhs.append(zsize[zones] - low)
    closed = [(y, z) in shut for y, z in arcs.T.tolist()]
    bounds = [(0.0, 0.0) if c else (0.0, None) for c in closed]
    result = linprog(
        np.ones(p),
        A_ub=sp.vstack(blocks).tocsr(),
        b_ub=np.concatenate(rhs),
        bounds=bounds,
        method="highs-ds",
    )
    return np.asarray(result.x) if result.status == 0 else None


def _ordered(arcs: np.ndarray, flows: np.ndarray, k: int) -> np.ndarray:
    """Indices of the arcs with flow, donors after the zones that feed them (Kahn's order)."""
    used = np.flatnonzero(flows > 0)
    used = used[np.argsort(-flows[used], kind="stable")]  # a donor's biggest transfer first
    feeding = np.bincount(arcs[1, used], minlength=k)
    out_of: list[list[int]] = [[] for _ in range(k)]
    for i in used.tolist():
        out_of[int(arcs[0, i])].append(i)
    ready = [z for z in range(k) if out_of[z] and feeding[z] == 0]
    heapq.heapify(ready)
    order: list[int] = []
    while ready:
        y = heapq.heappop(ready)
        for i in out_of[y]:
            order.append(i)
            z = int(arcs[1, i])
            feeding[z] -= 1
            if feeding[z] == 0 and out_of[z]:
                heapq.heappush(ready, z)
        out_of[y] = []
    # A cycle of positive flow could only come from round-off in the solver;
    # its arcs go last, in index order.
    order += [i for lst in out_of for i in lst]
    return np.asarray(order, dtype=np.int64)


def _buckets(
    labels: np.ndarray, rows: np.ndarray, cols: np.ndarray, k: int
) -> tuple[np.ndarray, np.ndarray]:
    """Boundary nodes (a neighbour in another zone) grouped by zone, as pointers and nodes."""
    cross = labels[rows] != labels[cols]
    nodes = np.flatnonzero(np.bincount(rows[cross], minlength=labels.size))
    nodes = nodes[np.argsort(labels[nodes], kind="stable")]
    pointers = np.concatenate([[0], np.cumsum(np.bincount(labels[nodes], minlength=k))])
    return pointers.astype(np.int64), nodes.astype(np.int64)


def _plan_with_margin(
    arcs: np.ndarray,
    zsize: np.ndarray,
    present: np.ndarray,
    bounds: tuple[float, float, float],
    shut: set,
) -> np.ndarray | None:
    """:func:`_plan` aiming ``slack`` inside ``[low, high]`` first, then at the bounds.

    ``bounds`` is ``(low, high, slack)``; ``slack`` is :func:`_margin` (0 with
    whole node sizes, where the first aim is skipped).
    """
    low, high, slack = bounds
    flows = None
    if slack > 0:
        flows = _plan(arcs, zsize, present, low + slack, high - slack, shut)
    if flows is None:
        flows = _plan(arcs, zsize, present, low, high, shut)
    return flows


def _short_transfers(missed: np.ndarray, steps: np.ndarray, why: np.ndarray) -> np.ndarray:
    """Transfers that fell short (``missed``) because moves were refused: their arcs get shut.

    A transfer refused only for nodes too big counts when it moved nothing at
    all (it found no node touching the receiver: a border already moved this
    round).
    """
    refused = (why[:, :TOO_BIG].sum(axis=1) > 0) | ((why[:, TOO_BIG] > 0) & (steps == 0))
    return missed & refused


# ---------------------------------------------------------------- reporting
def _outside(zsize: np.ndarray, present: np.ndarray, low: float, high: float) -> np.ndarray:
    """Present zones outside the bounds (with :data:`SIZE_RTOL` slack), worst first."""
    excess = np.maximum(low * (1 - SIZE_RTOL) - zsize, zsize - high * (1 + SIZE_RTOL))
    bad = np.flatnonzero(present & (excess > 0))
    return bad[np.argsort(-excess[bad], kind="stable")].astype(np.int64)


def _infeasible(
    zone: int,
    arcs: np.ndarray,
    state: tuple[np.ndarray, np.ndarray, float, float],
    shut: dict[tuple[int, int], np.ndarray],
    name: Callable[[int], str],
) -> str:
    """Why no plan exists for ``zone``: a zone count that cannot fit, or refused transfers."""
    zsize, present, low, high = state
    k = zsize.size
    graph = sp.coo_array((np.ones(arcs.shape[1]), (arcs[0], arcs[1])), shape=(k, k))
    _, part = connected_components(graph, directed=False)
    mine = present & (part == part[zone])
    count, total = int(mine.sum()), float(zsize[mine].sum())
    if count * low > total * (1 + SIZE_RTOL) or total > count * high * (1 + SIZE_RTOL):
        return (
            f"the {count} zones of its part of the network share a total size of {total:g}, "
            f"which {count} zones cannot hold within [{low:g}, {high:g}]"
        )
    if not shut:
        return "no transfer plan between neighbouring zones brings every zone within the bounds"
    near = sorted(shut, key=lambda arc: (zone not in arc, arc))
    said = []
    for y, z in near[:TRANSFERS_SHOWN]:
        causes = [text for text, hits in zip(WHY, shut[(y, z)], strict=True) if hits]
        said.append(
            f"from {name(y)} into {name(z)}: " + (" or ".join(causes) or "no node could move")
        )
    more = f"; and {len(shut) - TRANSFERS_SHOWN} more" if len(shut) > TRANSFERS_SHOWN else ""
    return (
        f"{len(shut)} transfers between neighbouring zones fell short ("
        + "; ".join(said)
        + more
        + ")"
    )


# -------------------------------------------------------------------- driver
def _checked(
    adjacency: Any, labels: Any, sizes: Any, movable: Any
) -> tuple[sp.csr_array, np.ndarray, np.ndarray, np.ndarray]:
    """The arrays of :func:`balance_sizes`, checked against the node count."""
    a = check_param(adjacency, "adjacency", [SquareMatrix()])
    n = a.shape[0]
    zones = check_labels(labels, n_nodes=n, copy=True)  # moves change the copy only
    node_sizes = check_param(sizes, "sizes", [Array("float", (n,), low=0), NoneOk()])
    free = check_param(movable, "movable", [Array("bool", (n,)), NoneOk()])
    node_sizes = np.ones(n) if node_sizes is None else node_sizes
    free = np.ones(n, dtype=bool) if free is None else free
    return a, zones, node_sizes, free


def _targets(sizes: np.ndarray, low: Any, high: Any) -> tuple[float, float, bool]:
    """Bounds of the plan; whole numbers when every node size is one (exact transfers)."""
    lo = 0.0 if low is None else float(low)
    hi = math.inf if high is None else float(high)
    if lo > hi:
        raise parameter_error("min_size", "<= max_size", low, shown=f"{lo:g} > {hi:g}")
    exact = bool(np.all(sizes == np.round(sizes)))
    if exact:
        lo = float(math.ceil(lo * (1 - SIZE_RTOL)))
        hi = float(math.floor(hi * (1 + SIZE_RTOL))) if math.isfinite(hi) else hi
    return lo, hi, exact


def _margin(sizes: np.ndarray, low: float, high: float) -> float:
    """How far inside the bounds a plan aims when node sizes are not whole numbers.

    A transfer stops at the node that brings it nearest its amount, within
    half a node size of it; a zone fed or drained by several transfers can
    miss its planned size by more, so plans aim one largest node size inside
    the bounds, but never farther than :data:`PLAN_MARGIN_SHARE` of the
    width of ``[low, high]``.
    """
    largest = float(sizes.max()) if sizes.size else 0.0
    return min(largest, PLAN_MARGIN_SHARE * (high - low))


#: What the options of :func:`balance_sizes` accept (its arrays are checked
#: against the node count in the body).
_BALANCE_OPTIONS: dict[str, list[Constraint]] = {
    "min_size": [NON_NEGATIVE, NoneOk()],
    "max_size": [NON_NEGATIVE, NoneOk()],
    "connected": [Boolean()],
    "max_rounds": [Interval(int, 0, None)],
    "name": [IsCallable(), NoneOk()],
}


@validate_params(_BALANCE_OPTIONS)
def balance_sizes(
    adjacency: Any,
    labels: Any,
    *,
    sizes: Any = None,
    min_size: float | None = None,
    max_size: float | None = None,
    movable: Any = None,
    connected: bool = True,
    max_rounds: int = BALANCE_ROUNDS,
    name: Callable[[int], str] | None = None,
) -> Balance:
    """Bring every zone's size within ``[min_size, max_size]`` by moving boundary nodes.

    The number of zones does not change. Each round plans how much size each
    zone hands to each neighbour (a minimum-cost flow on the zone graph, so
    transfers may cascade through zones with nothing to spare) and then moves
    boundary nodes, those most strongly tied to the receiving zone first; see
    the module notes. Every move keeps the donor connected (when
    ``connected``), never moves an immovable node, and never empties a zone.

    Parameters
    ----------
    adjacency : scipy sparse matrix of shape (n, n)
        Symmetric affinities, no self-loops.
    labels : ndarray of int, shape (n,)
        Zone of each node; not modified.
    sizes : ndarray of float, shape (n,), optional
        Node sizes summed against the bounds; ones when omitted.
    min_size, max_size : float, optional
        The bounds; unbounded when omitted.
    movable : ndarray of bool, shape (n,), optional
        ``False`` keeps a node in its zone (sources, fixed nodes).
    connected : bool, default=True
        Refuse moves that disconnect the donor zone.

    Returns
    -------
    Balance
        ``balanced`` tells whether every zone fits; otherwise ``unmet`` and
        ``reason`` say which zones do not and why.

    Raises
    ------
    ParameterError
        For arguments of the wrong shape, type or range.

    Other Parameters
    ----------------
    max_rounds : int, default=BALANCE_ROUNDS
        Most plan-and-transfer rounds.
    name : callable, optional
        Names zone ``z`` in the failure reason; ``"zone z"`` by default.

    References
    ----------
    .. [1] R. K. Ahuja, T. L. Magnanti and J. B. Orlin, *Network Flows*,
       Prentice Hall, 1993.
    .. [2] G. Cybenko, "Dynamic load balancing for distributed memory
       multiprocessors", J. Parallel Distrib. Comput. 7 (1989) 279-301,
       :doi:`10.1016/0743-7315(89)90021-X`.

    Examples
    --------
    A path of 12 nodes cut 2 + 10, with sizes between 5 and 7: the only
    answer is 5 + 7 (6 + 6 would move a node more than needed).

    >>> from specgraph import gallery
    >>> labels = np.array([0] * 2 + [1] * 10)
    >>> out = balance_sizes(gallery.path(12).adjacency, labels, min_size=5, max_size=7)
    >>> out.labels.tolist(), out.moves, out.balanced
    ([0, 0, 0, 0, 0, 1, 1, 1, 1, 1, 1, 1], 3, True)
    """
    a, current, node_sizes, free = _checked(adjacency, labels, sizes, movable)
    low, high, exact = _targets(node_sizes, min_size, max_size)
    max_rounds = int(max_rounds)
    label = name if name is not None else (lambda z: f"zone {z}")
    n = current.size
    k = int(current.max()) + 1 if n else 0
    rows = edge_rows(a)
    count = np.bincount(current, minlength=k).astype(np.int64)
    zsize = np.bincount(current, weights=node_sizes, minlength=k)
    tol = 0.5 if exact else SIZE_RTOL * max(float(node_sizes.sum()), 1.0)
    slack = 0.0 if exact else _margin(node_sizes[free], low, high)
    options = (CONNECTIVITY_SEARCH_LIMIT, bool(connected), tol, exact)
    shut: dict[tuple[int, int], np.ndarray] = {}
    moves, moved, rounds, reason = 0, 0.0, 0, ""
    while True:
        unmet = _outside(zsize, count > 0, low, high)
        if not unmet.size or rounds == max_rounds:
            reason = f"still unbalanced after {max_rounds} rounds" if unmet.size else ""
            break
        arcs = _zone_arcs(current, rows, a.indices, k)
        flows = _plan_with_margin(arcs, zsize, count > 0, (low, high, slack), set(shut))
        if flows is None:
            state = (zsize, count > 0, low, high)
            reason = _infeasible(int(unmet[0]), arcs, state, shut, label)
            break
        if exact:
            flows = np.rint(flows)
        flows = np.where(flows > tol, flows, 0.0)
        order = _ordered(arcs, flows, k)
        plan = np.ascontiguousarray(arcs[:, order].T)
        goal = zsize + np.bincount(arcs[1], flows, k) - np.bincount(arcs[0], flows, k)
        buckets = _buckets(current, rows, a.indices, k)
        graph = (a.indptr, a.indices, a.data)
        asked, got, steps, why = realize(
            plan,
            flows[order],
            goal,
            buckets,
            graph,
            current,
            node_sizes,
            free,
            count,
            zsize,
            options,
        )
        rounds += 1
        moves, moved = moves + int(steps.sum()), moved + float(got.sum())
        short = _short_transfers(asked - got > tol, steps, why)
        for i in np.flatnonzero(short).tolist():
            shut[(int(plan[i, 0]), int(plan[i, 1]))] = why[i]
        logger.debug(
            "balance round %d: %d moves, %d transfers short", rounds, steps.sum(), short.sum()
        )
        if not short.any() and not steps.any():
            reason = "the planned transfers moved nothing (node sizes do not fit the amounts)"
            unmet = _outside(zsize, count > 0, low, high)
            break
    return Balance(current, moves, moved, rounds, unmet, reason)
