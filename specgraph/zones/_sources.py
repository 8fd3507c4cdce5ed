"""Step 3 of the enforcement: exactly one source per zone.

Zones with several sources are split into the shortest-path cells of their
sources (a multi-source Dijkstra search, :func:`~._work.nearest_seed`); zones
without a source are merged into a neighbour.
"""

from __future__ import annotations

import numpy as np

from .._wording import count
from ..exceptions import ConstraintError
from ._repair import repair
from ._work import Work, ZoneGraph, nearest_seed

__all__ = ["one_source_per_zone"]


def one_source_per_zone(work: Work) -> None:
    if not work.sources.size:
        return
    held = np.bincount(work.labels[work.sources], minlength=work.n_zones)
    if np.any(held > 1):
        _split_at_sources(work, np.flatnonzero(held > 1), held)
    repair(work)
    _merge_sourceless(work)


def _split_at_sources(work: Work, zones: np.ndarray, held: np.ndarray) -> None:
    """Split each zone into the shortest-path cells of its sources (:func:`nearest_seed`).

    Fixed
    nodes of a zone are seeded into one cell: that of a source fixed to the
    same label, else the cell that already holds most of them.
    """
    inside = np.isin(work.labels, zones)
    seeds = work.sources[inside[work.sources]]
    part = np.full(work.labels.size, -1, dtype=np.int64)
    part[seeds] = work.n_zones + np.arange(seeds.size)
    origin = nearest_seed(work, seeds)
    fixed = np.flatnonzero(inside & (work.pinned >= 0))
    if fixed.size:
        owner = _fixed_owner(work, fixed, origin)
        owned = owner >= 0
        if np.any(owner != origin[fixed]) and owned.all():
            part[fixed] = part[owner]
            seeds = np.concatenate([seeds, fixed[~work.is_source[fixed]]])
            origin = nearest_seed(work, seeds)
    reached = inside & (origin >= 0)
    new = work.labels.copy()
    new[reached] = part[origin[reached]]
    work.labels = new
    work.notes.append(
        f"sources: {count(zones.size, 'zone')} holding {count(int(held[zones].sum()), 'source')} "
        "split into one zone per source"
    )
    work.compact()


def _fixed_owner(work: Work, fixed: np.ndarray, origin: np.ndarray) -> np.ndarray:
    """The source whose cell receives each fixed node (one per fixed label)."""
    owner = origin[fixed].copy()
    for f in np.unique(work.pinned[fixed]).tolist():
        group = fixed[work.pinned[fixed] == f]
        own = group[work.is_source[group]]
        if own.size:
            owner[work.pinned[fixed] == f] = own[0]
            continue
        cells, counts = np.unique(origin[group][origin[group] >= 0], return_counts=True)
        if cells.size:
            owner[work.pinned[fixed] == f] = cells[np.argmax(counts)]
    return owner


def _merge_sourceless(work: Work) -> None:
    """Merge every zone without a source into a neighbour, preferring one with a
    source, then a union within ``max_size``, then the most shared weight."""
    graph = ZoneGraph(work)
    pending = [z for z in np.argsort(graph.size, kind="stable").tolist() if graph.held[z] == 0]
    merged = 0
    while pending:
        waiting = []
        for z in pending:
            options = [
                (graph.held[y] > 0, graph.fits(z, y, work.c.max_size), w, -y)
                for y, w in graph.links[z].items()
                if graph.compatible(z, y)
            ]
            if not options:
                waiting.append(z)
                continue
            graph.merge(z, -max(options)[3])
            merged += 1
        if len(waiting) == len(pending):
            raise ConstraintError(
                f"sources: {work.zone_name(waiting[0])} holds no source and cannot join a "
                "neighbour: its neighbours hold nodes fixed to other labels."
            )
        pending = waiting
    if merged:
        work.labels = graph.relabel(work.labels)
        work.notes.append(
            f"sources: {count(merged, 'zone')} without a source merged into neighbours"
        )
        work.compact()
