"""Sharing a requested zone count among connected components."""

from __future__ import annotations

import heapq

import numpy as np

__all__ = ["allocate_zones"]


def allocate_zones(weights: np.ndarray, nodes: np.ndarray, k: int) -> np.ndarray:
    """Zones per component: one each, then each further zone where zones are largest.

    A zone never spans two components (it could not be connected), so each
    component gets one zone first. Each further zone goes to the component
    whose zones are currently the largest on average (weight over zones), never
    more zones than a component has nodes; ties go to the earlier component.
    This greatest-average rule (D'Hondt's, from seat apportionment) makes the
    largest average zone size as small as it can be for the count.

    Parameters
    ----------
    weights : ndarray of shape (c,)
        Component weights (node count or summed node size), >= 0.
    nodes : ndarray of shape (c,)
        Node count of each component (caps its zones).
    k : int
        Total zones, ``c <= k <= nodes.sum()``.

    Returns
    -------
    ndarray of int, shape (c,)
        Summing to ``k``.

    Examples
    --------
    >>> allocate_zones(np.array([90.0, 9.0, 1.0]), np.array([90, 9, 1]), 10).tolist()
    [8, 1, 1]
    >>> allocate_zones(np.array([10.0, 20.0, 5.0, 1.0]), np.array([10, 20, 5, 1]), 7).tolist()
    [2, 3, 1, 1]
    """
    weights = np.asarray(weights, dtype=np.float64)
    counts = np.ones(weights.size, dtype=np.int64)
    # Max-heap on average zone weight (negated), then component index for ties.
    heap = [(-float(w), i) for i, w in enumerate(weights) if nodes[i] > 1]
    heapq.heapify(heap)
    for _ in range(k - weights.size):
        _, i = heapq.heappop(heap)
        counts[i] += 1
        if counts[i] < nodes[i]:
            heapq.heappush(heap, (-float(weights[i]) / counts[i], i))
    return counts
