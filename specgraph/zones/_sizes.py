"""Steps 4 and 5 of the enforcement: size bounds.

Zones above ``max_size`` are bisected along the Fiedler vector, with a sweep
cut restricted to sizes that leave both sides splittable within the bounds
(:func:`split_oversize`; not when sources are given, as a part would lack
one); zones below ``min_size`` merge into a neighbour when the union fits
(:func:`merge_undersize`). What is still outside the bounds is brought
within them by boundary transfers (:func:`bring_within_bounds`, over
:func:`~specgraph.zones._balance.balance_sizes`), or refused with the reason.
"""

from __future__ import annotations

import heapq
import logging
import math

import numpy as np
import scipy.sparse as sp

from .._wording import count
from ..eigen import smallest_eigenpairs
from ..exceptions import ConstraintError, ConvergenceError
from ..network import Network
from ..operators import laplacian
from ._balance import SIZE_RTOL, Balance, balance_sizes
from ._connectivity import edge_rows, zone_pieces
from ._rules import ResolvedConstraints
from ._sweep import sweep_order
from ._work import Work, ZoneGraph

__all__ = [
    "FIEDLER_LANCZOS_NODES",
    "FIEDLER_TOL",
    "bring_within_bounds",
    "merge_undersize",
    "split_oversize",
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


# --------------------------------------------------------- step 4: size bounds
def split_oversize(work: Work) -> None:
    """Bisect zones above ``max_size`` until every part fits."""
    bound = work.c.max_size
    if bound is None:
        return
    size = work.zone_sizes()
    over = np.flatnonzero(size > bound * (1 + SIZE_RTOL))
    if not over.size:
        return
    if work.sources.size:  # a part would lack a source: left to bring_within_bounds
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
        f"max_size: {count(over.size, 'zone')} above {bound:g} split into "
        f"{count(over.size + parts, 'zone')}"
    )


def _bisect(work: Work, nodes: np.ndarray) -> np.ndarray:
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
    order, rank, _, score = sweep_order(sub, degree, key)
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
    rows = edge_rows(sub)
    for _ in range(2):
        count, piece = zone_pieces(sub, inside.astype(np.int64), rows)
        size = np.bincount(piece, weights=sizes, minlength=count)
        has_fixed = np.bincount(piece[fixed], minlength=count) > 0
        is_side = np.bincount(piece[inside], minlength=count) > 0
        keep = int(np.lexsort((-size, ~has_fixed, ~is_side))[0])
        inside = piece != keep
    return inside


def _fiedler(sub: sp.csr_array, rng: np.random.Generator) -> np.ndarray:
    """Second eigenvector of the normalized Laplacian of ``sub``.

    Solved by the eigen package's public :func:`~specgraph.eigen.smallest_eigenpairs`;
    a solve that misses :data:`FIEDLER_TOL` still orders the nodes well enough
    for a sweep, so its partial vector is used.
    """
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


def merge_undersize(work: Work) -> None:
    """Merge zones below ``min_size`` into the neighbour sharing most weight,
    when the union fits ``max_size`` (smallest zones first).

    A zone with no such neighbour is left to :func:`bring_within_bounds`, unless
    its part of the network holds more zones than ``min_size`` allows
    (:func:`_zones_to_spare`): then it merges anyway with the neighbour of
    smallest union, and balancing sheds the excess.
    """
    bound = work.c.min_size
    if bound is None:
        return
    graph = ZoneGraph(work)
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
        options = [(graph.links[z][y], -y) for y in allowed if graph.fits(z, y, work.c.max_size)]
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
        work.notes.append(
            f"min_size: {count(merged, 'zone')} below {bound:g} merged into neighbours"
        )
        work.compact()


def _zones_to_spare(work: Work, graph: ZoneGraph, bound: float) -> np.ndarray:
    """Per connected component: zones beyond the most that ``min_size`` leaves room for."""
    total = np.bincount(work.comp, weights=work.sizes, minlength=work.n_comp)
    zones = np.bincount(graph.zone_comp, minlength=work.n_comp)
    room = np.floor(total / bound + SIZE_RTOL).astype(np.int64)
    return np.maximum(zones - np.maximum(room, 1), 0)


def _merge_obstacle(work: Work, graph: ZoneGraph, z: int) -> str:
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
def bring_within_bounds(work: Work) -> None:
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
        f"size bounds: {count(int(np.count_nonzero(outside)), 'zone')} outside the bounds brought "
        f"within them by moving {count(nodes, 'node')} between neighbouring zones "
        f"({count(int(result.rounds), 'round')} of transfers)"
    )


def _outside_bounds(size: np.ndarray, c: ResolvedConstraints) -> np.ndarray:
    """Per zone: -1 below ``min_size``, +1 above ``max_size``, 0 within."""
    low = -np.inf if c.min_size is None else c.min_size * (1 - SIZE_RTOL)
    high = np.inf if c.max_size is None else c.max_size * (1 + SIZE_RTOL)
    return (size > high).astype(np.int64) - (size < low).astype(np.int64)


def _balance_failure(work: Work, size: np.ndarray, result: Balance) -> str:
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
            f"merge with a neighbour ({_merge_obstacle(work, ZoneGraph(work), z)})"
        )
    else:
        why = (
            "splitting it would leave a part without a source (every zone must hold exactly one)"
            if work.sources.size
            else "the splits and merges of its part of the network left it there"
        )
        head = f"max_size: {name} has size {shown:g} > max_size {c.max_size:g}{later}; {why}"
    return f"{head}, and boundary transfers could not fix it: {result.reason}."
