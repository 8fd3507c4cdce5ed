"""The compiled boundary transfers of size balancing (:func:`~._balance.balance_sizes`).

:func:`realize` runs a round's planned transfers in order; each transfer
``y -> z`` (:func:`_transfer`) peels boundary nodes of ``y`` adjacent to ``z``
from a heap keyed by the share of their link weight that goes into ``z``
(:func:`_affinity`), and moves a node only with the pieces of its zone that
only it holds to the rest (:func:`departure`, over the connectivity kernel of
:mod:`._connectivity`), so the donor stays connected. The method and its
references are in the notes of :mod:`._balance`.
"""

from __future__ import annotations

import heapq

import numpy as np
from numba import njit

from ._connectivity import mark_zone_neighbours, reach, two_zone_weights

__all__ = ["DISCONNECTS", "EMPTIED", "IMMOVABLE", "TOO_BIG", "WHY", "departure", "realize"]

# Why a transfer stopped short: the counters of the compiled loop, in order.
WHY = (
    "its boundary nodes there are sources or fixed nodes",
    "moving its boundary nodes would disconnect it",
    "it would be left empty",
    "its boundary nodes there are bigger than the size still to move",
)
IMMOVABLE, DISCONNECTS, EMPTIED, TOO_BIG = range(4)

#: Nodes with more links than this keep their weights into the donor and the
#: receiving zone for the whole transfer, updated as their neighbours move,
#: instead of summing their links again each time a neighbour moves. Moving a
#: leaf re-queues its hub; summing the hub's links for it made a transfer grow
#: with the square of the hub's degree (complete bipartite K(4, m): the
#: transfers took 1.2 s at m = 50,000 and 10.9 s at m = 200,000, issue
#: "hostile shapes"). Below this degree the sum is as cheap as the update and
#: is done as before, so ordinary networks move exactly the same nodes.
HUB_DEGREE = 64


@njit(cache=True)
def _affinity(v, y, z, indptr, indices, data, labels):  # pragma: no cover - compiled
    """Share of ``v``'s weight into zones ``y`` and ``z`` that goes into ``z`` (-1 if none)."""
    wy, wz = two_zone_weights(v, y, z, indptr, indices, data, labels)
    return wz / (wy + wz) if wz > 0.0 else -1.0


@njit(cache=True)
def departure(v, limit, graph, labels, movable, marks, stamp, queue, group):  # pragma: no cover
    """Nodes that must leave ``v``'s zone with ``v`` so that the zone stays connected.

    Without ``v`` its zone neighbours fall into pieces. A search from each
    neighbour not yet seen, bounded by ``limit`` visits, either reaches all of
    them (one piece: ``v`` leaves alone), closes a piece (it ran out of
    nodes), or hits the bound (a big piece). The zone keeps the big piece, or
    when all pieces closed, the one holding immovable nodes, else the
    largest; the other pieces, dangling from ``v``, leave with it. Returns
    ``g >= 0`` with those nodes in ``group[:g]``, -1 when two searches hit
    the bound (undecided; ``limit >= queue.size`` makes every search exact),
    or -2 when a piece that would leave holds an immovable node.
    """
    indptr, indices = graph[0], graph[1]
    a = labels[v]
    wanted, _ = mark_zone_neighbours(v, indptr, indices, labels, marks, stamp)
    if wanted <= 1:
        return 0
    call = stamp[1]  # nodes seen by this call's searches carry a later stamp
    g, big, keep_at, keep_len, keep_fixed, fixed_pieces = 0, 0, 0, -1, False, 0
    for p in range(indptr[v], indptr[v + 1]):
        u = indices[p]
        if labels[u] != a or marks[1, u] > call:
            continue
        status, seen = reach(u, v, wanted, limit, indptr, indices, labels, marks, stamp, queue)
        if status == 1:
            return 0
        if status < 0:
            big += 1
            if big > 1:
                return -1
            continue
        fixed = False
        for i in range(seen):
            group[g + i] = queue[i]
            fixed = fixed or not movable[queue[i]]
        fixed_pieces += fixed
        if (fixed and not keep_fixed) or (fixed == keep_fixed and seen > keep_len):
            keep_at, keep_len, keep_fixed = g, seen, fixed
        g += seen
    if big:  # the zone keeps the big piece; every closed piece leaves
        return -2 if fixed_pieces else g
    if fixed_pieces > 1:
        return -2
    for i in range(keep_at, g - keep_len):  # drop the kept piece from the group
        group[i] = group[i + keep_len]
    return g - keep_len


@njit(cache=True)
def _hub_affinity(v, y, z, graph, labels, hubs):  # pragma: no cover - compiled
    """:func:`_affinity` of a node of more than :data:`HUB_DEGREE` links, from its kept weights.

    ``hubs`` is ``(weights, kept, token)``: ``weights[:, v]`` into ``y`` and
    ``z`` is valid while ``kept[v] == token[0]`` (this transfer); else it is
    summed once and kept.
    """
    indptr, indices, data = graph
    weights, kept, token = hubs
    if kept[v] != token[0]:
        wy, wz = two_zone_weights(v, y, z, indptr, indices, data, labels)
        weights[0, v], weights[1, v] = wy, wz
        kept[v] = token[0]
    wy, wz = weights[0, v], weights[1, v]
    return wz / (wy + wz) if wz > 0.0 else -1.0


@njit(cache=True)
def _moved(x, graph, hubs):  # pragma: no cover - compiled
    """Node ``x`` went from the donor to the receiving zone: update the kept weights around it."""
    indptr, indices, data = graph
    weights, kept, token = hubs
    for p in range(indptr[x], indptr[x + 1]):
        u = indices[p]
        if kept[u] == token[0]:
            weights[0, u] -= data[p]
            weights[1, u] += data[p]


@njit(cache=True)
def _push_candidates(
    heap, nodes, y, z, graph, labels, movable, version, why, hubs
):  # pragma: no cover - compiled
    """Queue the movable nodes of ``y`` among ``nodes`` that touch ``z``, by affinity to ``z``."""
    indptr, indices, data = graph
    for v in nodes:
        if labels[v] != y:
            continue
        if indptr[v + 1] - indptr[v] > HUB_DEGREE:
            share = _hub_affinity(v, y, z, graph, labels, hubs)
        else:
            share = _affinity(v, y, z, indptr, indices, data, labels)
        if share < 0.0:
            continue
        if movable[v]:
            version[v] += 1
            heapq.heappush(heap, (-share, np.int64(v), version[v]))
        else:
            why[IMMOVABLE] += 1


@njit(cache=True)
def _fits(s, rest, tol, exact):  # pragma: no cover - compiled
    """Whether moving size ``s`` suits the ``rest`` still to move: no overshoot
    with whole sizes, else no farther from the target than staying put."""
    return s <= rest + tol if exact else s < 2.0 * rest


@njit(cache=True)
def _transfer(y, z, amount, candidates, graph, state, options, why):  # pragma: no cover - compiled
    """Move boundary nodes of zone ``y`` into ``z`` until ``amount`` of size has moved.

    ``graph`` is ``(indptr, indices, data)``; ``state`` is ``(labels, sizes,
    movable, count, zsize, version, marks, stamp, queue, group)``, updated in
    place; ``options`` is ``(limit, check, tol, exact)``. ``why`` counts
    refusals by cause. A node moves with the pieces that only it joins to
    its zone (:func:`departure`). Nodes whose bounded test is undecided
    wait; only if the amount is not reached without them are they tested
    exactly (a search of the whole donor zone each), in a second phase.
    Returns the size moved and the number of nodes moved.
    """
    indptr, indices = graph[0], graph[1]
    labels, sizes, movable, count, zsize, version, marks, stamp, queue, group, hubs = state
    limit, check, tol, exact = options
    heap = [(0.0, np.int64(0), np.int64(0))]
    heap.pop()
    waiting = np.empty(0, dtype=np.int64)
    _push_candidates(heap, candidates, y, z, graph, labels, movable, version, why, hubs)
    moved, moves = 0.0, 0
    exact_tests = False
    for phase in range(2):
        if phase == 1:  # exact tests for the nodes that waited, if still needed
            exact_tests = True
            _push_candidates(heap, waiting, y, z, graph, labels, movable, version, why, hubs)
        held = []
        while heap and amount - moved > tol:
            _, v, ver = heapq.heappop(heap)
            if labels[v] != y or ver != version[v]:
                continue  # moved already, or superseded by a fresher entry
            s = sizes[v]
            if not _fits(s, amount - moved, tol, exact):
                why[TOO_BIG] += 1
                continue
            if count[y] <= 1:
                why[EMPTIED] += 1
                break
            g = (
                departure(v, limit, graph, labels, movable, marks, stamp, queue, group)
                if check
                else 0
            )
            if g == -1 and exact_tests:
                g = departure(v, queue.size, graph, labels, movable, marks, stamp, queue, group)
            if g == -1:
                held.append(v)
                continue
            if g == -2:
                why[IMMOVABLE] += 1
                continue
            for i in range(g):
                s += sizes[group[i]]
            if not _fits(s, amount - moved, tol, exact):
                why[DISCONNECTS] += 1  # v alone would split its zone; with its pieces, too big
                continue
            labels[v] = z
            _moved(v, graph, hubs)
            for i in range(g):
                labels[group[i]] = z
                _moved(group[i], graph, hubs)
            count[y] -= 1 + g
            count[z] += 1 + g
            zsize[y] -= s
            zsize[z] += s
            moved += s
            moves += 1 + g
            _push_candidates(
                heap,
                indices[indptr[v] : indptr[v + 1]],
                y,
                z,
                graph,
                labels,
                movable,
                version,
                why,
                hubs,
            )
        if amount - moved <= tol or not held:
            break
        waiting = np.asarray(held, dtype=np.int64)
        heap.clear()
    return moved, moves


@njit(cache=True)
def realize(
    plan, amounts, goal, buckets, graph, labels, sizes, movable, count, zsize, options
):  # pragma: no cover
    """Run the planned transfers ``plan[i] = (y, z)`` in order; per transfer: the size
    asked, the size moved, the nodes moved, refusal counters. ``buckets`` is
    ``(pointers, nodes)``: boundary nodes by zone. A donor never gives below its
    planned final size ``goal``: when what it was to receive fell short, its own
    transfers shrink, and the shortfall travels down the cascade instead of
    draining the zone in the middle."""
    n = labels.size
    t = amounts.size
    pointers, nodes = buckets
    version = np.zeros(n, dtype=np.int64)
    marks = np.zeros((2, n), dtype=np.int64)
    stamp = np.zeros(2, dtype=np.int64)
    queue = np.empty(n, dtype=np.int64)
    group = np.empty(n, dtype=np.int64)
    hubs = (np.zeros((2, n)), np.zeros(n, dtype=np.int64), np.zeros(1, dtype=np.int64))
    state = (labels, sizes, movable, count, zsize, version, marks, stamp, queue, group, hubs)
    asked = np.zeros(t)
    moved = np.zeros(t)
    moves = np.zeros(t, dtype=np.int64)
    why = np.zeros((t, 4), dtype=np.int64)
    for i in range(t):
        y, z = plan[i, 0], plan[i, 1]
        asked[i] = min(amounts[i], zsize[y] - goal[y])
        if asked[i] <= options[2]:
            continue
        candidates = _candidates(y, z, pointers, nodes, graph[0], graph[1], labels)
        hubs[2][0] += 1  # kept hub weights are this transfer's only
        moved[i], moves[i] = _transfer(y, z, asked[i], candidates, graph, state, options, why[i])
    return asked, moved, moves, why


@njit(cache=True)
def _candidates(y, z, pointers, nodes, indptr, indices, labels):  # pragma: no cover - compiled
    """Nodes of ``y`` that may touch ``z``: ``y``'s boundary nodes and the ``y``-neighbours
    of ``z``'s boundary nodes (the buckets date from the start of the round, and
    earlier transfers of the round may have moved the border), each once.

    Each once: a hub is the ``y``-neighbour of every leaf of ``z``, and queueing
    it once per leaf read its links once per leaf, so a star's balancing grew
    with the square of its leaves (0.45 s at 100,000 leaves, 2.0 s at 200,000,
    8.6 s at 400,000, 89 s at 1,000,000). Only the last of repeated entries
    was ever acted on, so the moves are the same."""
    own = nodes[pointers[y] : pointers[y + 1]]
    other = nodes[pointers[z] : pointers[z + 1]]
    extra = 0
    for w in other:
        if labels[w] == z:
            extra += indptr[w + 1] - indptr[w]
    out = np.empty(own.size + extra, dtype=np.int64)
    out[: own.size] = own
    m = own.size
    for w in other:
        if labels[w] != z:
            continue
        for p in range(indptr[w], indptr[w + 1]):
            if labels[indices[p]] == y:
                out[m] = indices[p]
                m += 1
    return np.unique(out[:m])
