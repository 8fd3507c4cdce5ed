"""Sharing a requested zone count among connected components."""

from __future__ import annotations

import numpy as np

__all__ = ["allocate_zones"]


def allocate_zones(weights: np.ndarray, nodes: np.ndarray, k: int) -> np.ndarray:
    """Zones per component: at least one each, the rest in proportion to weight.

    A zone never spans two components (it could not be connected), so each
    component gets at least one zone. The remaining ``k - c`` zones go in
    proportion to component weight by the largest-remainder rule, never more
    than a component has nodes. Ties go to the earlier component.

    Parameters
    ----------
    weights : ndarray of shape (c,)
        Component weights (node count or summed node size).
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
    """
    c = weights.size
    counts = np.ones(c, dtype=np.int64)
    spare = k - c
    while spare > 0:
        room = counts < nodes
        share = np.where(room, weights, 0.0)
        if share.sum() <= 0:
            share = room.astype(float)
        ideal = counts + spare * share / share.sum()
        extra = np.minimum(np.floor(ideal).astype(np.int64), nodes) - counts
        extra = np.maximum(extra, 0)
        if extra.sum() == 0:
            # Largest remainder: one more zone to the component furthest below its ideal.
            remainder = np.where(room, ideal - counts, -np.inf)
            extra[int(np.argmax(remainder))] = 1
        extra = np.minimum(extra, spare - np.concatenate([[0], np.cumsum(extra)[:-1]]))
        extra = np.maximum(extra, 0)
        counts += extra
        spare -= int(extra.sum())
    return counts
