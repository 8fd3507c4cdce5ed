"""Multilevel zoning: coarsen, zone the coarsest network, refine on the way back up.

For hundreds or thousands of zones, embedding the whole network in ``k``
eigenvectors costs memory :math:`O(nk)` and time :math:`O(nk^2)`, and the
embedding blurs as ``k`` grows. The multilevel scheme of Barnard and Simon
[1]_ and Hendrickson and Leland [2]_, with the k-way refinement of Karypis
and Kumar [3]_, avoids both:

1. coarsen the network by heavy-link matchings that keep the rules
   (:func:`~specgraph.zones._coarsen.coarsen`) down to a few dozen nodes per
   zone;
2. zone the coarsest network with the one-level engine (spectral embedding,
   assignment, the rules), where ``k`` eigenvectors are cheap;
3. project the zones back level by level, and at every level move boundary
   nodes by the exact drop of the normalized cut they bring
   (:func:`~specgraph.zones.refine_boundary`, Fiduccia-Mattheyses passes
   [4]_), with the volumes of the finest network, so every level lowers the
   same objective and keeps every rule.

The same ladder built inside the zones of a given zoning refines it as a
V-cycle (:func:`refine_levels`): nodes of different zones are never merged,
so every level carries the zoning exactly, and the refinement moves whole
groups of nodes at the coarse levels and single nodes at the finest.

No level holds more than its adjacency and a few arrays per node: the
finest level never holds an ``n x k`` block.

References
----------
.. [1] S. T. Barnard and H. D. Simon, "Fast multilevel implementation of
   recursive spectral bisection for partitioning unstructured problems",
   Concurrency: Practice and Experience 6(2), 1994, pp. 101-117,
   :doi:`10.1002/cpe.4330060203`.
.. [2] B. Hendrickson and R. Leland, "A multilevel algorithm for partitioning
   graphs", Proc. Supercomputing '95, :doi:`10.1145/224170.224228`.
.. [3] G. Karypis and V. Kumar, "Multilevel k-way partitioning scheme for
   irregular graphs", J. Parallel Distrib. Comput. 48(1), 1998, pp. 96-129,
   :doi:`10.1006/jpdc.1997.1404`.
.. [4] C. M. Fiduccia and R. M. Mattheyses, "A linear-time heuristic for
   improving network partitions", Proc. 19th Design Automation Conference,
   1982, :doi:`10.1109/DAC.1982.1585498`.
"""

from __future__ import annotations

import logging
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._progress import report_activity
from .._validation import parameter_error
from ..network import Network
from ._assign import bisection_labels
from ._balance import balance_sizes
from ._coarsen import Ladder, Level, coarsen
from ._connectivity import pieces_per_zone
from ._refine import REFINE_PASSES, Refinement, refine_boundary
from ._rules import ResolvedConstraints
from ._stages import SolveOptions, zones_per_component

__all__ = [
    "COARSEST_MIN_NODES",
    "COARSEST_PER_ZONE",
    "COARSE_SPECTRAL_MAX_ZONES",
    "CYCLE_NODE_BUDGET",
    "CYCLE_PER_ZONE",
    "CYCLE_RTOL",
    "MAX_CYCLES",
    "MULTILEVEL_ALONE_NODES",
    "MULTILEVEL_MIN_ZONES",
    "ZONE_FLOOR_SHARE",
    "CoarseZoner",
    "Path",
    "choose_path",
    "coarse_cap",
    "in_id_order",
    "levels_record",
    "refine_by_cycles",
    "refine_levels",
    "size_floor",
    "split_by_bisection",
    "within_bounds",
    "zone_by_levels",
]

logger = logging.getLogger(__name__)

#: Coarsening for a new zoning stops once a level has at most
#: ``COARSEST_PER_ZONE * k`` nodes (and at least :data:`COARSEST_MIN_NODES`),
#: and no coarse node holds more than ``1 / COARSEST_PER_ZONE`` of an average
#: zone's size (nor more than ``max_size``). Few nodes per zone leave the
#: most levels to the refinement, which is what lowers the cut: on
#: ``gallery.road_like(100_000, rng=0)`` at 162 zones, 3, 5, 10, 20, 40 and 100
#: nodes per zone gave normalized cuts of 2.26, 2.34, 2.37, 2.38, 2.40 and 2.42
#: before the V-cycles (benchmarks/probe_levels.py).
COARSEST_PER_ZONE = 3

#: Smallest coarsest level of a new zoning: the one-level engine zones a few
#: hundred nodes in well under a second, whatever the zone count.
COARSEST_MIN_NODES = 200

#: Coarsening inside the zones of a V-cycle stops at ``CYCLE_PER_ZONE * k``
#: nodes, and a coarse node may hold up to an average zone's size divided by
#: it: the deeper the ladder, the larger the groups the coarse levels move
#: (one node per zone against three: 1.943 against 1.968 after eight cycles
#: on the network above).
CYCLE_PER_ZONE = 1

#: No zone of the multilevel path is let shrink below this share of an
#: average zone (nor below ``min_size``): the refinement lowers the normalized
#: cut one move at a time, and a zone that a coarse level left small could be
#: squeezed down to a few nodes, whose share of the cut stays near 1 while no
#: single move can empty it (a 2-node zone among 162 on ``road_like(100_000)``
#: before this floor). Boundary transfers lift zones below it before the rules
#: step. A tenth, the share under which a zone draws the small-zone warning:
#: a quarter cost the cut on grids whose natural groups differ in size
#: (pandapower's case1888rte at 95 zones: 1.381 against 1.112 with a tenth
#: or none).
ZONE_FLOOR_SHARE = 0.1

#: V-cycles stop after two in a row each lowered the normalized cut by less
#: than this share. Their drops are irregular (on ``road_like(100_000)`` at
#: 162 zones: 0.23 %, 0.21 %, 0.23 %, 0.12 %, 0.05 %, 0.27 %, 0.12 % for
#: cycles 13 to 19), so one small drop alone does not end them
#: (benchmarks/probe_levels.py, table "cut after each V-cycle").
CYCLE_RTOL = 1e-3

#: Most V-cycles. The cut still fell 0.7 % over cycles 15 to 20 on the
#: network above (1.911 to 1.897); each cycle costs about a fifth of the
#: whole multilevel zoning.
MAX_CYCLES = 20

#: A V-cycle costs time in proportion to the network (about 2 s per million
#: nodes here): at most ``CYCLE_NODE_BUDGET / n`` cycles run, 12 at a million
#: nodes, where 1,000 zones must come out of ``specgraph zones`` within 60 s
#: (cycles 13 to 20 lowered the cut there by 1.6 % more, at 2 s each).
CYCLE_NODE_BUDGET = 12_000_000

#: Most refinement passes at each level (a level stops earlier at a pass that
#: keeps no move). Fewer passes per level cost more in cut than they save in
#: time: on ``road_like(100_000)`` at 162 zones, 8 passes gave 1.925 in 5.5 s,
#: 3 gave 1.957 in 3.2 s, 1 gave 1.942 in 2.9 s, with as many V-cycles
#: run as the stopping rule allowed (measured before later passes were
#: restricted to the moved region, which brought 8 passes to 3.4 s).
LEVEL_PASSES = REFINE_PASSES

#: ``assign="auto"`` takes the multilevel path alone from this many zones
#: up; below it, it runs both paths and keeps the lower normalized cut, so
#: that the zoning keeps the eigengap evidence of the one-level solve (the
#: zone count ``"auto"`` chooses among 2 to 50). On ``road_like(100_000)``
#: the one-level path took 6.2, 5.9, 7.9 and 9.9 s at 8, 16, 24 and 32 zones
#: (time growing with the ``k + 1`` eigenvectors) and cut 1.3 to 1.5 times
#: more than the multilevel path, which took 2.2 to 5.9 s
#: (benchmarks/probe_levels.py, table "one level against multilevel").
MULTILEVEL_MIN_ZONES = 48

#: ``assign="auto"`` also takes the multilevel path alone, whatever the zone
#: count, on networks of at least this many nodes (after merging what must stay
#: together); the whole network's ``k + 1`` smallest pairs are still solved
#: there, for the eigengap evidence and ``spectrum.csv``, but not assigned
#: from. The one-level assignment grows faster than the network (recursive
#: bisection at 16 zones: 17 s at 1,000,000 road-like nodes, 226 s at
#: 10,000,000, issue "national size") and lost to the multilevel path on every
#: road-like network measured from 100,000 nodes up (benchmarks/probe_levels.py,
#: table "one level against multilevel, by size").
MULTILEVEL_ALONE_NODES = 500_000

#: Up to this many zones the coarsest network is zoned by the one-level
#: engine with its assignments compared; above it by recursive bisection,
#: which needs no ``k`` eigenvectors. At 162 zones on the network above the
#: compared assignments (QR won) reached 1.933 in 7.0 s, bisection 1.927 in
#: 6.3 s: the coarse zoning is a start that the levels and V-cycles reshape.
COARSE_SPECTRAL_MAX_ZONES = 48

#: Zones the coarsest network from its network, its rules and the zone count:
#: its labels and the decisions of that zoning (operator, assignment, rules).
CoarseZoner = Callable[[Network, ResolvedConstraints, int], tuple[np.ndarray, dict[str, Any]]]


def coarse_cap(rules: ResolvedConstraints, k: int, per_zone: float) -> float:
    """Largest coarse node for ``k`` zones under ``rules``: an average zone / ``per_zone``."""
    cap = float(rules.sizes.sum()) / (per_zone * max(k, 1))
    if rules.max_size is not None:
        cap = min(cap, float(rules.max_size))
    return max(cap, float(rules.sizes.max(initial=0.0)))


def _ladder(
    work: Network,
    rules: ResolvedConstraints,
    apart: np.ndarray,
    k: int,
    per_zone: float,
    rng: np.random.Generator,
    smallest: int = 0,
) -> Ladder:
    """The ladder of ``work`` under ``rules``, down to about ``per_zone`` nodes per zone
    (or ``smallest`` nodes)."""
    n = work.n_nodes
    sources = np.zeros(n, dtype=bool)
    sources[rules.sources] = True
    assert rules.pinned is not None
    held = sources | (rules.pinned >= 0)
    return coarsen(
        work.adjacency,
        sizes=rules.sizes,
        apart=apart,
        sources=sources,
        held=held,
        cap=coarse_cap(rules, k, per_zone),
        target=max(smallest, int(per_zone * k)),
        rng=rng,
    )


def _coarse_problem(
    work: Network, rules: ResolvedConstraints, ladder: Ladder
) -> tuple[Network, ResolvedConstraints]:
    """The coarsest level as a network with its rules; each node named after its first node."""
    level = ladder.coarsest
    owner = ladder.owner(len(ladder.levels) - 1)
    m = level.n_nodes
    first = np.full(m, work.n_nodes, dtype=np.int64)
    np.minimum.at(first, owner, np.arange(work.n_nodes))
    assert rules.pinned is not None
    pinned = np.full(m, -1, dtype=np.int64)
    fixed = np.flatnonzero(rules.pinned >= 0)
    pinned[owner[fixed]] = rules.pinned[fixed]
    coarse = Network(level.adjacency, work.node_ids[first], sizes=level.sizes)
    # Bounds widened by the largest coarse node: a zone of coarse nodes cannot
    # always come within them exactly; the finest level's rules step moves
    # single nodes and brings every zone within the bounds themselves.
    grain = float(level.sizes.max(initial=0.0))
    # A lower bound that one coarse node already covers is no bound (None, not 0).
    low = None if rules.min_size is None else rules.min_size - grain
    coarse_rules = ResolvedConstraints(
        low if low is not None and low > 0 else None,
        None if rules.max_size is None else rules.max_size + grain,
        level.sizes,
        sources=np.unique(owner[rules.sources]),
        pinned=pinned,
        connected=rules.connected,
        node_ids=None if rules.node_ids is None else rules.node_ids[first],
        coordinates=None if rules.coordinates is None else rules.coordinates[first],
    )
    return coarse, coarse_rules


def size_floor(rules: ResolvedConstraints, k: int) -> float:
    """Smallest zone the multilevel path lets a zone shrink to: ``min_size``, and at least
    :data:`ZONE_FLOOR_SHARE` of an average zone."""
    floor = ZONE_FLOOR_SHARE * float(rules.sizes.sum()) / max(k, 1)
    return max(floor, rules.min_size or 0.0)


def _refine_level(
    level: Level,
    labels: np.ndarray,
    rules: ResolvedConstraints,
    refine: bool,
    rng: np.random.Generator,
) -> Refinement:
    """Boundary refinement of one level, with the finest network's volumes (none: 0 passes)."""
    k = int(labels.max()) + 1 if labels.size else 0
    return refine_boundary(
        level.adjacency,
        labels,
        sizes=level.sizes,
        min_size=min(size_floor(rules, k), rules.max_size or np.inf),
        max_size=rules.max_size,
        movable=~level.held,
        volumes=level.volumes,
        max_passes=LEVEL_PASSES if refine else 0,
        rng=rng,
    )


def _climb(
    ladder: Ladder,
    labels: np.ndarray,
    rules: ResolvedConstraints,
    refine: bool,
    rng: np.random.Generator,
) -> tuple[np.ndarray, list[dict[str, Any]]]:
    """Refine from the coarsest level down to the finest; one record per level."""
    records: list[dict[str, Any]] = []
    for depth in range(len(ladder.levels) - 1, -1, -1):
        report_activity("refining level", depth)
        level = ladder.levels[depth]
        if depth < len(ladder.levels) - 1:
            assert level.parent is not None
            labels = labels[level.parent]
        refined = _refine_level(level, labels, rules, refine, rng)
        labels = refined.labels
        records.append(
            {
                "level": depth,
                "nodes": level.n_nodes,
                "links": level.n_links,
                "ncut_projected": refined.ncut_before,
                "ncut": refined.ncut_after,
                "moves": refined.moves,
                "passes": refined.passes,
            }
        )
        logger.debug(
            "level %d (%d nodes): NCut %.4g -> %.4g",
            depth,
            level.n_nodes,
            refined.ncut_before,
            refined.ncut_after,
        )
    return labels, records


def zone_by_levels(
    work: Network,
    rules: ResolvedConstraints,
    k: int,
    *,
    zone_coarse: CoarseZoner,
    refine: bool,
    rng: np.random.Generator,
) -> tuple[np.ndarray, dict[str, Any]]:
    """Zone ``work`` into ``k`` zones by the multilevel scheme; labels and the record.

    Parameters
    ----------
    work : Network
        The network to zone (the merged network of :func:`find_zones`).
    rules : ResolvedConstraints
        On the rows of ``work``; its links that must not be cut are already
        contracted.
    k : int
        Number of zones.
    zone_coarse : callable
        Zones the coarsest network (:data:`CoarseZoner`).
    refine : bool
        Refine at every level; without it the coarse zones are only projected.
    rng : numpy.random.Generator

    Returns
    -------
    labels : ndarray of int, shape (n,)
        Zones of the rows of ``work``.
    record : dict
        ``levels`` (nodes, links, normalized cut as projected and after
        refinement, per level, coarsest first), ``stop`` (why coarsening
        stopped), ``coarse`` (the decisions of the coarse zoning).
    """
    assert rules.pinned is not None
    ladder = _ladder(work, rules, rules.pinned, k, COARSEST_PER_ZONE, rng, COARSEST_MIN_NODES)
    coarse, coarse_rules = _coarse_problem(work, rules, ladder)
    labels, coarse_decisions = zone_coarse(coarse, coarse_rules, k)
    labels, records = _climb(ladder, np.asarray(labels, dtype=np.int64), rules, refine, rng)
    record = {
        "levels": records,
        "stop": ladder.stop,
        "coarse": coarse_decisions,
    }
    return labels, record


def refine_levels(
    work: Network,
    labels: np.ndarray,
    rules: ResolvedConstraints,
    *,
    rng: np.random.Generator,
) -> tuple[np.ndarray, dict[str, Any]]:
    """One V-cycle on a zoning that keeps ``rules``: coarsen inside its zones, refine upward.

    Nodes of different zones are never merged, so the zoning is exact at every
    level; the refinement at the coarse levels moves groups of nodes that a
    refinement of the finest level alone could only move one node at a time.

    Returns
    -------
    labels : ndarray of int, shape (n,)
        The refined zoning, same zone numbers.
    record : dict
        ``levels`` as in :func:`zone_by_levels` and ``stop``.
    """
    labels = np.asarray(labels, dtype=np.int64)
    k = int(labels.max()) + 1 if labels.size else 0
    ladder = _ladder(work, rules, labels, k, CYCLE_PER_ZONE, rng)
    owner = ladder.owner(len(ladder.levels) - 1)
    coarse_labels = np.zeros(ladder.coarsest.n_nodes, dtype=np.int64)
    coarse_labels[owner] = labels
    refined, records = _climb(ladder, coarse_labels, rules, True, rng)
    return refined, {"levels": records, "stop": ladder.stop, "paired": ladder.paired}


class _Pieces:
    """Pieces per zone of the zoning a V-cycle starts from, counted once per accepted zoning."""

    def __init__(self, work: Network, labels: np.ndarray, k: int) -> None:
        self.work, self.k = work, k
        self.labels = labels
        self.counts: np.ndarray | None = None

    def splits(self, after: np.ndarray) -> bool:
        """Whether ``after`` has a zone in more pieces than the same zone now.

        When it does not, ``after`` becomes the zoning compared with next.
        """
        if self.counts is None:
            self.counts = pieces_per_zone(self.work.adjacency, self.labels, self.k)
        counts = pieces_per_zone(self.work.adjacency, after, self.k)
        if np.any(counts > self.counts):
            return True
        self.labels, self.counts = after, counts
        return False


def refine_by_cycles(
    work: Network,
    labels: np.ndarray,
    rules: ResolvedConstraints,
    *,
    rng: np.random.Generator,
    max_cycles: int | None = None,
) -> tuple[np.ndarray, dict[str, Any]]:
    """V-cycles (:func:`refine_levels`) until two in a row lower the cut by less than
    :data:`CYCLE_RTOL` each, or ``max_cycles`` (default: :data:`MAX_CYCLES`, and at most
    ``CYCLE_NODE_BUDGET / n``, at least one) have run.

    Returns the labels and ``{"cycles": [normalized cut after each], "cycles_stop": why}``.
    """
    labels = np.asarray(labels, dtype=np.int64)
    k = int(labels.max()) + 1 if labels.size else 0
    if max_cycles is None:
        budget = max(1, CYCLE_NODE_BUDGET // max(work.n_nodes, 1))
        max_cycles = min(MAX_CYCLES, budget)
        stop = (
            f"{max_cycles} cycles run, the most for {work.n_nodes:,} nodes"
            if budget < MAX_CYCLES
            else f"{max_cycles} cycles run (the most allowed)"
        )
    else:
        stop = f"{max_cycles} cycles run (the most asked)"
    cuts: list[float] = []
    small = 0
    pieces = _Pieces(work, labels, k)
    for cycle in range(max_cycles if k > 1 else 0):
        report_activity("V-cycle", cycle + 1)
        previous = labels
        labels, record = refine_levels(work, labels, rules, rng=rng)
        if not (record["paired"] and rules.connected):
            pieces = _Pieces(work, labels, k)
        elif pieces.splits(labels):
            labels = previous
            stop = (
                "a cycle split a zone (it moved a coarse node of two nodes that share no "
                "link); the zoning before it is kept"
            )
            break
        before, after = record["levels"][0]["ncut_projected"], record["levels"][-1]["ncut"]
        cuts.append(after)
        small = small + 1 if after > before * (1.0 - CYCLE_RTOL) else 0
        if small == 2:
            stop = f"two cycles in a row lowered the normalized cut by less than {CYCLE_RTOL:.1%}"
            break
    return labels, {"cycles": cuts, "cycles_stop": stop}


@dataclass(frozen=True)
class Path:
    """Which path :func:`find_zones` takes, and why."""

    multilevel: bool
    reason: str
    #: Whether the one-level path's result is compared with the multilevel
    #: path's (``assign="auto"`` below :data:`MULTILEVEL_MIN_ZONES`).
    compare: bool = False
    #: Whether the multilevel path also solves the whole network's ``k + 1``
    #: smallest pairs, as evidence only (:data:`MULTILEVEL_ALONE_NODES`).
    evidence: bool = False


def choose_path(assign: str, kind: str, n_nodes: int, k: int) -> Path:
    """The one-level path or the multilevel one (:data:`MULTILEVEL_MIN_ZONES`).

    Raises
    ------
    ParameterError
        For ``assign="multilevel"`` with the directed operator, whose random
        surfer the coarsening does not keep.
    """
    if assign == "multilevel":
        if kind == "directed":
            raise parameter_error(
                "assign",
                "an assignment of the one-level path for operator='directed' (the "
                "multilevel path coarsens the undirected links)",
                assign,
            )
        return Path(True, "the multilevel path (asked)")
    if assign != "auto" or kind == "directed":
        return Path(False, "the one-level path")
    if k >= MULTILEVEL_MIN_ZONES:
        return Path(
            True,
            f"the multilevel path: {k} zones, at least {MULTILEVEL_MIN_ZONES} (one level "
            f"would embed all {n_nodes:,} nodes in {k + 1} eigenvectors)",
        )
    compare = kind in ("normalized", "random_walk")
    if compare and n_nodes >= MULTILEVEL_ALONE_NODES:
        return Path(
            True,
            f"the multilevel path: {n_nodes:,} nodes, at least {MULTILEVEL_ALONE_NODES:,} (the "
            f"one-level assignment is not tried at this size; the {k + 1} smallest pairs are "
            "still solved, for the eigengap evidence)",
            evidence=True,
        )
    return Path(
        False,
        f"the one-level path: {k} zones, fewer than {MULTILEVEL_MIN_ZONES}; the multilevel "
        "path's zones compared with it",
        compare=compare,
    )


def split_by_bisection(
    network: Network, k: int, solver: SolveOptions, rules: ResolvedConstraints
) -> np.ndarray:
    """``k`` zones by recursive bisection, shared among the components; no ``k``-pair solve.

    With size bounds, zones outside them are brought within by boundary
    transfers (:func:`balance_sizes`), which keep the count: the rules' own
    step would merge zones below ``min_size`` (a bisection into a thousand
    zones of a few coarse nodes each leaves a few of them below the bound).
    """
    per_component, _ = zones_per_component(network, k)
    offsets = np.concatenate([[0], np.cumsum(per_component)[:-1]]).astype(np.int64)
    labels = offsets[network.component_labels]
    for comp, count in enumerate(per_component.tolist()):
        if count < 2:
            continue
        rows = np.flatnonzero(network.component_labels == comp)
        sub = network if rows.size == network.n_nodes else network.subnetwork(rows)
        labels[rows] += bisection_labels(
            sub,
            count,
            eigen_method=solver.method,
            tol=solver.tol,
            maxiter=solver.maxiter,
            rng=solver.rng,
        )
    return within_bounds(network, labels, rules)


def within_bounds(network: Network, labels: np.ndarray, rules: ResolvedConstraints) -> np.ndarray:
    """Zones brought within the size bounds by boundary transfers, keeping their count.

    The lower bound is :func:`size_floor`: ``min_size``, and a tenth of an
    average zone at least, so that no zone is left a sliver of a few nodes
    (which the refinement could then only grow).

    The rules' own step (:func:`enforce_rules`) merges a zone below
    ``min_size`` into a neighbour where the union fits, which lowers the zone
    count; transfers first (:func:`balance_sizes`) keep the count the user
    asked for, and the rules' step then only has left what transfers could
    not fix.
    """
    k = int(labels.max()) + 1 if labels.size else 0
    assert rules.pinned is not None
    movable = rules.pinned < 0
    movable[rules.sources] = False
    return balance_sizes(
        network.adjacency,
        labels,
        sizes=rules.sizes,
        min_size=min(size_floor(rules, k), rules.max_size or np.inf),
        max_size=rules.max_size,
        movable=movable,
        connected=rules.connected,
    ).labels


def levels_record(record: dict[str, Any], work: Network) -> dict[str, Any]:
    """``decisions["assign"]`` of the multilevel path: the levels and the cut after each."""
    levels = record["levels"]
    cycles = record.get("cycles", [])
    final = cycles[-1] if cycles else (levels[-1]["ncut"] if levels else 0.0)
    coarse = record["coarse"]
    reason = (
        f"multilevel: {len(levels)} levels from {work.n_nodes:,} nodes down to "
        f"{levels[0]['nodes']:,}, the coarsest zoned by {coarse.get('assign')}, refined at "
        f"every level back up (normalized cut {levels[0]['ncut']:.4g} on the coarsest, "
        f"{levels[-1]['ncut']:.4g} on the finest), then {len(cycles)} V-cycles "
        f"({final:.4g})"
    )
    return {
        "choice": "multilevel",
        "reason": reason,
        "levels": levels,
        "coarsening_stop": record["stop"],
        "coarse": {"assign": coarse.get("assign"), "constraints": coarse.get("constraints")},
        "cycles": cycles,
        "cycles_stop": record.get("cycles_stop", ""),
    }


def in_id_order(
    work: Network, rules: ResolvedConstraints
) -> tuple[Network, ResolvedConstraints, np.ndarray]:
    """``work`` and ``rules`` with their rows sorted by node id, and that order.

    Every draw of the multilevel path (the order of the matchings, the ties of
    the refinement, the coarse zoning's start vectors) goes by row, so rows in
    id order make the zones independent of the order in which the links were
    read (1.1 s at a million nodes).
    """
    order = np.argsort(work.node_ids, kind="stable")
    if np.array_equal(order, np.arange(order.size)):
        return work, rules, order
    where = np.empty_like(order)
    where[order] = np.arange(order.size)
    sorted_net = Network(
        work.adjacency[order][:, order],
        work.node_ids[order],
        sizes=None if work.sizes is None else work.sizes[order],
    )
    assert rules.pinned is not None
    sorted_rules = ResolvedConstraints(
        rules.min_size,
        rules.max_size,
        rules.sizes[order],
        sources=np.sort(where[rules.sources]),
        keep_pairs=where[rules.keep_pairs],
        pinned=rules.pinned[order],
        connected=rules.connected,
        node_ids=None if rules.node_ids is None else rules.node_ids[order],
        coordinates=None if rules.coordinates is None else rules.coordinates[order],
    )
    return sorted_net, sorted_rules, order
