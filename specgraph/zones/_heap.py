"""The compiled priority queue of boundary refinement (:mod:`._refine`).

A binary max-heap in two parallel arrays: ``keys`` holds the gain of each
entry, ``items`` five int64 fields (tie-break rank, node, version, the move
count at which the gain was computed, target zone). Equal gains come out by
smaller rank, so ties are broken by the seeded node order. The arrays double
when full; :func:`heap_push` returns them, possibly reallocated.
"""

from __future__ import annotations

import numpy as np
from numba import njit

__all__ = ["HEAP_START", "heap_pop", "heap_push"]

#: Initial heap capacity (entries); the heap doubles as needed.
HEAP_START = 1024


@njit(cache=True)
def _heap_before(keys, items, i, j):  # pragma: no cover - compiled
    """Entry ``i`` comes out before ``j``: larger gain, then smaller tie-break rank."""
    return keys[i] > keys[j] or (keys[i] == keys[j] and items[i, 0] < items[j, 0])


@njit(cache=True)
def _heap_swap(keys, items, i, j):  # pragma: no cover - compiled
    """Exchange heap entries ``i`` and ``j`` (key and all five item fields)."""
    keys[i], keys[j] = keys[j], keys[i]
    for c in range(5):
        items[i, c], items[j, c] = items[j, c], items[i, c]


@njit(cache=True)
def heap_push(keys, items, size, gain, rank, node, version, stamp, target):  # pragma: no cover
    """Push an entry; returns the (possibly reallocated) arrays and the new size."""
    if size == keys.size:
        bigger_keys = np.empty(2 * keys.size)
        bigger_items = np.empty((2 * keys.size, 5), dtype=np.int64)
        bigger_keys[:size] = keys[:size]
        bigger_items[:size] = items[:size]
        keys, items = bigger_keys, bigger_items
    keys[size] = gain
    items[size, 0] = rank
    items[size, 1] = node
    items[size, 2] = version
    items[size, 3] = stamp
    items[size, 4] = target
    i = size
    while i > 0:
        parent = (i - 1) // 2
        if not _heap_before(keys, items, i, parent):
            break
        _heap_swap(keys, items, i, parent)
        i = parent
    return keys, items, size + 1


@njit(cache=True)
def heap_pop(keys, items, size):  # pragma: no cover - compiled
    """Remove the top entry into slot ``size - 1`` and return the new size."""
    last = size - 1
    _heap_swap(keys, items, 0, last)
    i = 0
    while True:
        left = 2 * i + 1
        if left >= last:
            break
        child = left
        if left + 1 < last and _heap_before(keys, items, left + 1, left):
            child = left + 1
        if not _heap_before(keys, items, child, i):
            break
        _heap_swap(keys, items, i, child)
        i = child
    return last
