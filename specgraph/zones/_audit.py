"""The audit: every rule a zoning breaks, one line each (:func:`constraint_violations`).

The enforcement ends with it and must find nothing; users may run it on any
labels, ours or their own.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from scipy.sparse.csgraph import connected_components

from ._arrays import as_csr, checked_labels, pair_totals
from ._balance import SIZE_RTOL
from ._connectivity import pieces_per_zone
from ._rules import ResolvedConstraints, check_coverage

__all__ = ["constraint_violations"]


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
    matrix = as_csr(adjacency)
    c = constraints
    labels = checked_labels(labels, matrix.shape[0])
    check_coverage(c, labels.size)
    out: list[str] = []
    k = int(labels.max()) + 1 if labels.size else 0
    pieces = pieces_per_zone(matrix, labels, k) if c.connected else None
    # A connected zone lies in one component: the components are only needed
    # when some zone is in several pieces.
    if pieces is None or np.any(pieces > 1):
        _, comp = connected_components(matrix, directed=False)
        spans = np.bincount(pair_totals(labels, comp)[0][0], minlength=k)
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
                inside = c.sources[labels[c.sources] == z]
                named = (
                    c.name(inside)
                    if inside.size
                    else "e.g. " + c.label_of(int(np.argmax(labels == z)))
                )
                out.append(
                    f"sources: {int(bad.sum())} zones hold {what} "
                    f"(zone {z} holds {held[z]}: {named})"
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
    pairs = pair_totals(c.pinned[rows], labels[rows])[0]
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
