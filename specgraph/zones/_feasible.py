"""Step 0 of the enforcement: refuse rules no zoning can satisfy, before any work.

A node (or super-node) above ``max_size``, nodes fixed to one label in
different components, sources fixed to one label, components whose total
size no admissible number of zones can share, and a source that cannot reach
``min_size`` without passing through another source: each is refused with a
:class:`~specgraph.exceptions.ConstraintError` naming it.

:func:`refuse_infeasible` runs the same checks on the network as read, before
any eigen-solve: what arithmetic decides is refused in milliseconds, with
node counts in the input's terms (every node of the file, not the super-nodes
that kept links or dangling trees make) and sources named by id, with the
distance between two sources when the network has coordinates.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components
from scipy.spatial import cKDTree

from ..exceptions import ConstraintError
from ._arrays import as_csr, pair_totals
from ._balance import SIZE_RTOL
from ._contract import contract_constraints, contract_links
from ._rules import ResolvedConstraints, check_coverage
from ._work import Work

__all__ = ["TWIN_SHARE", "check_feasible", "refuse_infeasible"]

#: Two sources closer than this share of the median link length (straight
#: line, from node coordinates) are called twins in a refusal: a tank beside
#: its reservoir, one works listed under two ids. Pipes and lines are rarely
#: shorter than a few metres where their median is tens to hundreds.
TWIN_SHARE = 0.05


def refuse_infeasible(adjacency: Any, constraints: ResolvedConstraints) -> None:
    """Refuse, before any eigen-solve, rules that arithmetic on the network shows no zoning keeps.

    The checks of :func:`check_feasible` (and the sources or fixed labels that
    ``keep_links`` tie together, :func:`contract_constraints`), on the network
    as given: O(n + links), so a refusal takes milliseconds where a zoning
    takes seconds, and its counts are in the input's terms.

    Parameters
    ----------
    adjacency : sparse array of shape (n, n)
        Symmetric affinities (a :class:`Network`'s adjacency).
    constraints : ResolvedConstraints
        On the same rows (:meth:`ZoneConstraints.resolve`).

    Raises
    ------
    ConstraintError
        Naming the rule, the component, node or sources concerned and the
        arithmetic that fails.

    Examples
    --------
    >>> from specgraph import gallery
    >>> rules = ResolvedConstraints(4.0, None, np.ones(6), sources=np.array([0, 5]))
    >>> refuse_infeasible(gallery.path(6).adjacency, rules)
    Traceback (most recent call last):
    ...
    specgraph.exceptions.ConstraintError: size bounds: connected component 0 (6 nodes, \
holding sources '0', '5') has size 6, which its 2 sources cannot share within min_size 4: \
2 zones of at least 4 need 8.
    """
    matrix = as_csr(adjacency)
    check_coverage(constraints, matrix.shape[0])
    if matrix.shape[0] == 0:
        return
    contraction = contract_links(matrix, constraints.keep_pairs)
    inner = contract_constraints(contraction, constraints)
    members = np.bincount(contraction.groups, minlength=contraction.n_groups)
    start = np.zeros(contraction.n_groups, dtype=np.int64)
    rng = np.random.default_rng(0)  # the checks draw nothing
    check_feasible(Work(contraction.adjacency, inner, start, members, rng))


def check_feasible(work: Work) -> None:
    """Refuse inputs no zoning can satisfy, naming the node, component or sources."""
    c = work.c
    _check_nodes_fit(work)
    _check_fixed_feasible(work)
    if c.min_size is None and not c.sources.size:
        return  # with an upper bound alone, any component can be cut small enough
    _check_component_sizes(work)
    _check_source_reach(work)


def _where(work: Work, nodes: np.ndarray, first: np.ndarray) -> Any:
    """Names connected component ``k`` by its node count and its sources (else a node)."""
    c = work.c

    def where(k: int) -> str:
        held = c.sources[work.comp[c.sources] == k]
        what = (
            f"holding sources {c.name(held)}" if held.size else f"e.g. {c.label_of(int(first[k]))}"
        )
        return f"connected component {k} ({nodes[k]} nodes, {what})"

    return where


def _check_component_sizes(work: Work) -> None:
    """Components below ``min_size``, without a source, or whose size no count of zones shares."""
    c, sizes, comp = work.c, work.sizes, work.comp
    total = np.bincount(comp, weights=sizes, minlength=work.n_comp)
    nodes = np.bincount(comp, weights=work.members, minlength=work.n_comp).astype(np.int64)
    where = _where(work, nodes, np.unique(comp, return_index=True)[1])
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
        need = _shares(total[k], int(zones_lo[k]), c) if c.sources.size else ""
        twins = _twin_note(work, c.sources[comp[c.sources] == k])
        raise ConstraintError(
            f"size bounds: {where(k)} has size {total[k]:g}, which {count} cannot share "
            f"within {bounds}{need}{twins}."
        )


def _shares(total: float, zones: int, c: ResolvedConstraints) -> str:
    """``': 33 zones of at least 148 need 4887'``: the arithmetic a size refusal fails."""
    if c.min_size is not None and total < zones * c.min_size * (1 - SIZE_RTOL):
        return f": {zones} zones of at least {c.min_size:g} need {zones * c.min_size:g}"
    if c.max_size is not None and total > zones * c.max_size * (1 + SIZE_RTOL):
        return f": {zones} zones of at most {c.max_size:g} hold at most {zones * c.max_size:g}"
    return ""


def _twins(work: Work, sources: np.ndarray) -> list[tuple[int, int, float]]:
    """Pairs of ``sources`` nearer than :data:`TWIN_SHARE` of the median link, closest first."""
    xy = work.c.coordinates
    if xy is None or sources.size < 2:
        return []
    a, rows = work.adjacency, work.rows
    upper = rows < a.indices
    lengths = np.hypot(*(xy[rows[upper]] - xy[a.indices[upper]]).T)
    lengths = lengths[lengths > 0]
    if not lengths.size:
        return []
    radius = TWIN_SHARE * float(np.median(lengths))
    pairs = cKDTree(xy[sources]).query_pairs(radius, output_type="ndarray")
    found = [(int(sources[i]), int(sources[j])) for i, j in pairs.tolist()]
    return sorted(((u, v, work.c.distance(u, v) or 0.0) for u, v in found), key=lambda t: t[2])


def _twin_note(work: Work, sources: np.ndarray) -> str:
    """``'; sources 'A' and 'B' are twins (0.2 apart)...'`` when some sources are twins."""
    twins = _twins(work, sources)
    if not twins:
        return ""
    a, b, _ = twins[0]
    more = f" ({len(twins)} such pairs)" if len(twins) > 1 else ""
    return (
        f"; sources {work.c.name([a, b])} are twins{work.c.apart(a, b)}{more}: each needs a "
        "zone of its own, so list one of them if they feed one zone"
    )


def _check_source_reach(work: Work) -> None:
    """Refuse a source whose connected zone cannot reach ``min_size``: walled in by other sources.

    A connected zone with one source lies within the source and the pieces of
    the network without sources that touch it; when those hold less than
    ``min_size``, no zoning keeps the rules (the other sources it would have
    to pass are named, the nearest first).
    """
    c = work.c
    if c.sources.size < 2 or c.min_size is None or not c.connected:
        return
    a, rows, is_source = work.adjacency, work.rows, work.is_source
    free = ~(is_source[rows] | is_source[a.indices])
    n = a.shape[0]
    graph = sp.csr_array((a.data[free], (rows[free], a.indices[free])), shape=(n, n))
    _, piece = connected_components(graph, directed=False)
    open_nodes = ~is_source
    piece_size = np.bincount(piece, weights=np.where(open_nodes, work.sizes, 0.0))
    piece_nodes = np.bincount(piece, weights=np.where(open_nodes, work.members, 0))
    touch = is_source[rows] & open_nodes[a.indices]  # a source beside a piece
    (src, pieces), _ = pair_totals(rows[touch], piece[a.indices[touch]])
    reach = work.sizes.copy()
    np.add.at(reach, src, piece_size[pieces])
    short = c.sources[reach[c.sources] < c.min_size * (1 - SIZE_RTOL)]
    if not short.size:
        return
    s = int(short[0])
    own = pieces[src == s]
    beside = a.indices[a.indptr[s] : a.indptr[s + 1]]
    walls = np.union1d(beside[is_source[beside]], src[np.isin(pieces, own) & (src != s)])
    nodes = int(work.members[s] + piece_nodes[own].sum())
    if walls.size and c.coordinates is not None:
        gaps = np.hypot(*(c.coordinates[walls] - c.coordinates[s]).T)
        walls = walls[np.argsort(gaps, kind="stable")]  # the nearest first
    twins = {v for pair in _twins(work, np.array([s, *walls.tolist()])) for v in pair[:2]}
    if walls.size and int(walls[0]) in twins:
        w = int(walls[0])
        head = (
            f"sources: {c.name([s, w])} are twin sources{c.apart(s, w)}: every path from "
            f"{c.name(s)} to the rest of the network passes through {c.name(w)}"
        )
    elif walls.size:
        head = (
            f"sources: every path from source {c.name(s)} to the rest of the network passes "
            f"through other sources ({c.name(walls)})"
        )
    else:
        head = f"sources: source {c.name(s)} reaches no other node"
    raise ConstraintError(
        f"{head}, so its zone can hold at most {nodes} node{'s' * (nodes != 1)} "
        f"(size {reach[s]:g}) < min_size "
        f"{c.min_size:g}; a zone is connected and holds exactly one source."
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
