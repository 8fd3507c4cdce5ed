"""Array helpers of the constraint steps: checked inputs and vectorized label arithmetic.

Labels are small non-negative integers, so counting (``bincount``) replaces
sorting wherever the label range allows it; see :data:`DIRECT_COUNT_FACTOR`.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import scipy.sparse as sp
from scipy.optimize import linear_sum_assignment

from .._figures import check_labels
from .._validation import SquareMatrix, check_param

__all__ = [
    "DIRECT_COUNT_FACTOR",
    "MATCH_MAX_CELLS",
    "as_csr",
    "best_match",
    "checked_labels",
    "compact",
    "first_of_groups",
    "pair_totals",
]

#: Largest overlap table (rows x columns) matched exactly with the Hungarian
#: method; bigger tables are matched greedily by decreasing overlap.
MATCH_MAX_CELLS = 4_000_000

#: Label ranges up to this many times the number of nodes are compacted and
#: counted with ``bincount`` (O(n)) instead of sorted with ``unique``
#: (O(n log n), several times slower on a million nodes).
DIRECT_COUNT_FACTOR = 8


def as_csr(adjacency: Any) -> sp.csr_array:
    """The adjacency as a float64 CSR array, after checking it is square."""
    return check_param(adjacency, "adjacency", [SquareMatrix(sparse_only=False)])


def checked_labels(labels: Any, n: int) -> np.ndarray:
    """Labels as int64, after the one label check: ``n`` of them, integers ``>= 0``."""
    return check_labels(labels, n_nodes=n, copy=True)


def first_of_groups(keys: np.ndarray) -> np.ndarray:
    """Mask of the first element of each run of equal sorted ``keys``."""
    return np.concatenate([[True], keys[1:] != keys[:-1]]) if keys.size else keys.astype(bool)


def pair_totals(
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


def compact(labels: np.ndarray) -> np.ndarray:
    """Renumber non-negative labels ``0..k-1`` keeping their order (O(n) when they are small)."""
    labels = np.asarray(labels, dtype=np.int64)
    if not labels.size:
        return labels
    top = int(labels.max()) + 1
    if top <= max(DIRECT_COUNT_FACTOR * labels.size, 1 << 20):
        present = np.bincount(labels, minlength=top) > 0
        return (np.cumsum(present) - 1)[labels]
    return np.unique(labels, return_inverse=True)[1].astype(np.int64).ravel()


def best_match(a: np.ndarray, b: np.ndarray, weights: np.ndarray) -> dict[int, int]:
    """One-to-one matching of labels ``a`` to labels ``b`` of largest total overlap.

    Exact (scipy's ``linear_sum_assignment``, the Hungarian method) when the
    table is small, else greedy by decreasing overlap. Only pairs with a
    positive overlap are matched.
    """
    keys, overlap = pair_totals(a, b, weights)
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
