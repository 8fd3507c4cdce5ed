"""Step 0 of the enforcement: refuse rules no zoning can satisfy, before any work.

A node (or super-node) above ``max_size``, nodes fixed to one label in
different components, sources fixed to one label, and components whose total
size no admissible number of zones can share: each is refused with a
:class:`~specgraph.exceptions.ConstraintError` naming it.
"""

from __future__ import annotations

import numpy as np

from ..exceptions import ConstraintError
from ._arrays import pair_totals
from ._balance import SIZE_RTOL
from ._work import Work

__all__ = ["check_feasible"]


def check_feasible(work: Work) -> None:
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


def _check_nodes_fit(work: Work) -> None:
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


def _check_fixed_feasible(work: Work) -> None:
    rows = np.flatnonzero(work.pinned >= 0)
    if not rows.size:
        return
    c = work.c
    pairs = pair_totals(work.pinned[rows], work.comp[rows])[0]
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
