"""Steps 1 and 2 of the enforcement: nodes fixed to zones, and connected zones.

:func:`force_pinned` matches the fixed labels to zones by overlap (Hungarian
method) and moves the fixed nodes there; :func:`repair` keeps each zone's
anchored (else biggest) piece, joins the pieces holding one label's fixed
nodes along shortest paths, and hands every other piece to the neighbouring
zone it is most strongly linked to.
"""

from __future__ import annotations

import numpy as np
from scipy.sparse.csgraph import dijkstra

from ..exceptions import ConstraintError
from ._arrays import best_match, first_of_groups
from ._work import Work, nearest_seed

__all__ = ["force_pinned", "repair"]


# ------------------------------------------------------- step 1: fixed nodes
def force_pinned(work: Work) -> None:
    """Match fixed labels to zones by overlap and move fixed nodes there.

    A fixed label left without a zone of its own (it shares its best zone
    with a label of larger overlap) takes a share of the zones it sits in:
    those zones are divided among the fixed nodes they hold, each node going
    with its nearest fixed node, rather than leaving the label a zone of its
    fixed nodes alone.
    """
    rows = np.flatnonzero(work.pinned >= 0)
    if not rows.size:
        return
    fixed, inverse = np.unique(work.pinned[rows], return_inverse=True)
    match = best_match(inverse, work.labels[rows], work.members[rows].astype(np.float64))
    target = work.n_zones + np.arange(fixed.size)
    for f, zone in match.items():
        target[f] = zone
    goal = target[inverse]
    moved = work.labels[rows] != goal
    shared = np.isin(work.labels, work.labels[rows[goal >= work.n_zones]])
    if shared.any():
        seeds = rows[shared[rows]]
        origin = nearest_seed(work, seeds)
        goal_of = np.full(work.labels.size, -1, dtype=np.int64)
        goal_of[rows] = goal
        reached = shared & (origin >= 0)
        work.labels[reached] = goal_of[origin[reached]]
    work.labels[rows] = goal
    if moved.any():
        unmatched = fixed.size - len(match)
        work.notes.append(
            f"fixed: {fixed.size} fixed labels matched to zones by overlap; "
            f"{int(work.members[rows[moved]].sum())} fixed nodes moved into their zone"
            + (f"; {unmatched} labels took a share of a zone they shared" if unmatched else "")
        )
    work.compact()


# ------------------------------------------------------- step 2: connectivity
def repair(work: Work) -> None:
    """Keep each zone's anchored (else biggest) piece; move the other pieces.

    First, zone by zone, the pieces holding one label's fixed nodes are
    joined (:func:`_join_fixed`); each joined zone, and every zone whose
    fixed nodes already lie in one piece, is then locked against the paths
    of later joins, so no join undoes another and the loop ends after at
    most one join per fixed label.
    """
    if work.repaired is not None and np.array_equal(work.repaired, work.labels):
        return
    work.locked = np.zeros(work.labels.size, dtype=bool)
    while True:
        count, piece = work.pieces()
        zone_of = np.empty(count, dtype=np.int64)
        zone_of[piece] = work.labels
        pinned_piece = np.bincount(piece[work.pinned >= 0], minlength=count) > 0
        split = np.bincount(zone_of[pinned_piece], minlength=work.n_zones) > 1
        if not split.any():
            break
        work.locked |= (pinned_piece & ~split[zone_of])[piece]
        zone = int(np.argmax(split))
        _join_fixed(work, zone, piece, pinned_piece & (zone_of == zone))
    _move_fragments(work, count, piece, zone_of, pinned_piece)
    work.repaired = work.labels.copy()


def _move_fragments(
    work: Work, count: int, piece: np.ndarray, zone_of: np.ndarray, pinned_piece: np.ndarray
) -> None:
    size = np.bincount(piece, weights=work.sizes, minlength=count)
    source_piece = np.bincount(piece[work.is_source], minlength=count) > 0
    # Per zone, in order of preference: the piece with fixed nodes, then pieces
    # with a source, then the biggest. The first keeps the zone; further source
    # pieces become zones of their own (the source step needs them apart anyway).
    order = np.lexsort((np.arange(count), -size, ~source_piece, ~pinned_piece, zone_of))
    first = first_of_groups(zone_of[order])
    kept = np.zeros(count, dtype=bool)
    kept[order[first]] = True
    kept |= source_piece
    assigned = np.full(count, -1, dtype=np.int64)
    assigned[order[first]] = zone_of[order[first]]
    extra = np.flatnonzero(kept & (assigned < 0))
    assigned[extra] = work.n_zones + np.arange(extra.size)
    fragments = np.flatnonzero(~kept)
    if not fragments.size:
        if extra.size:
            work.labels = assigned[piece]
            work.notes.append(f"sources: {extra.size} disconnected source pieces became zones")
        return
    a = work.adjacency
    cross = (~kept[piece])[work.rows] & (piece[work.rows] != piece[a.indices])
    src, dst, weight = piece[work.rows[cross]], piece[a.indices[cross]], a.data[cross]
    span = int(assigned.max()) + 2 + count
    while True:
        ready = (assigned[src] < 0) & (assigned[dst] >= 0)
        if not ready.any():
            break
        keys, inverse = np.unique(src[ready] * span + assigned[dst[ready]], return_inverse=True)
        total = np.bincount(inverse.ravel(), weights=weight[ready])
        frag, zone = keys // span, keys % span
        best = np.lexsort((zone, -total, frag))
        best = best[first_of_groups(frag[best])]
        assigned[frag[best]] = zone[best]
    # Fragments no kept piece can reach lie in a component of their own: one
    # new zone per such component.
    left = np.flatnonzero(assigned < 0)
    if left.size:
        comp_of = np.empty(count, dtype=np.int64)
        comp_of[piece] = work.comp
        _, new = np.unique(comp_of[left], return_inverse=True)
        assigned[left] = int(assigned.max()) + 1 + new.ravel()
    work.labels = assigned[piece]
    nodes = int(np.bincount(piece, weights=work.members, minlength=count)[fragments].sum())
    work.notes.append(
        f"connected: {fragments.size} stranded fragments ({nodes} nodes) moved to "
        "neighbouring zones"
        + (
            f"; {len(set(work.comp[np.isin(piece, left)].tolist()))} "
            "isolated components became zones"
            if left.size
            else ""
        )
    )
    work.compact()


def _join_fixed(work: Work, zone: int, piece: np.ndarray, fixed_pieces: np.ndarray) -> None:
    """Annex shortest paths joining the pieces of ``zone`` that hold fixed nodes.

    Paths avoid sources and fixed nodes of other zones always, and first try
    to avoid every zone that holds fixed nodes too: cutting through such a
    zone could split its own fixed nodes, whose repair could cut this zone
    again.
    """
    ids = np.flatnonzero(fixed_pieces)
    is_fixed = work.pinned >= 0
    weight = np.bincount(piece[is_fixed], weights=work.members[is_fixed], minlength=piece.max() + 1)
    main = ids[np.argmax(weight[ids])]
    seeds = np.flatnonzero(piece == main)
    others = np.flatnonzero(np.isin(piece, ids[ids != main]) & is_fixed)
    fixed_zone = np.zeros(work.n_zones, dtype=bool)
    fixed_zone[work.labels[is_fixed]] = True
    fixed_zone[zone] = False
    anchored = (work.anchor & (work.labels != zone)) | work.locked
    work.locked[np.isin(piece, ids)] = True
    annexed = 0
    for blocked in (anchored | fixed_zone[work.labels], anchored):
        dist, pred, _ = dijkstra(
            work.lengths(blocked), indices=seeds, min_only=True, return_predecessors=True
        )
        order = np.lexsort((dist[others], piece[others]))
        ends = others[order[first_of_groups(piece[others][order])]]
        for end in ends[np.isfinite(dist[ends])].tolist():
            v = int(pred[end])
            while v >= 0:
                annexed += int(work.labels[v] != zone)
                work.labels[v] = zone
                work.locked[v] = True
                v = int(pred[v])
        others = ends[~np.isfinite(dist[ends])]
        if not others.size:
            break
        others = np.flatnonzero(np.isin(piece, piece[others]) & is_fixed)
    if others.size:
        end = int(others[0])
        raise ConstraintError(
            f"fixed: the nodes fixed to label {int(work.pinned[end])} cannot be joined in one "
            f"connected zone: {work.c.label_of(end)} is cut off from the others by sources, "
            "nodes fixed to other labels or the paths already joining them."
        )
    work.notes.append(
        f"fixed: {annexed} nodes annexed to join the nodes fixed to label "
        f"{int(work.pinned[seeds[is_fixed[seeds]][0]])} in one connected zone"
    )
