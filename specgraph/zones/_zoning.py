"""``find_zones``: from a network to a zoning that keeps the user's rules, with its evidence.

Steps (called in this order; steps 2 to 5 are in :mod:`._stages`, over the
modules named below):

1. read the constraints against the network (:class:`ZoneConstraints`);
2. merge into super-nodes what must stay together: the ends of links that
   must not be cut, and, when worth it, each dangling tree with the node it
   hangs from (:mod:`._trees`), so no later step can separate them;
3. choose the operator and the zone count (``"auto"``: from the eigengaps,
   cross-checked by the normalized-cut curve, :mod:`._count`);
4. per connected component: share the zones (:func:`allocate_zones`), solve
   for the smallest eigenpairs, embed and assign (k-means, pivoted QR or
   recursive bisection, :mod:`._assign`);
5. enforce the constraints (connected zones, one source per zone, size bounds,
   fixed zones; :mod:`._constraints`), then refine the boundary by local moves
   that lower the normalized cut and keep every constraint (:mod:`._refine`);
6. expand super-nodes back to nodes, number zones by descending size, and
   compute the zone table and the boundary links.

With trunk links (feeding mains kept outside every zone), these steps zone
the network beside them and the trunk becomes one more zone
(:mod:`._trunk`). Before all of this, connected components too small to be
zones (stray fragments, isolated nodes) are set aside as one more zone,
numbered last, unless ``fragments="zone"`` (:mod:`._fragments`).

Each automatic choice is recorded in :attr:`Zoning.decisions` with its reason.
"""

from __future__ import annotations

import copy
import logging
import time
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from .._figures import boundary_links, normalized_cut, overall_scores, zone_table
from .._wording import figure
from ..eigen import DEFAULT_TOL, EigenResult
from ..exceptions import ConstraintError
from ..network import Network
from ..walks import DEFAULT_DAMPING
from ._compare import (
    COMPARE_MAX_WORK,
    NCUT_TIE_RTOL,
    best_assignment,
    comparison_affordable,
    comparison_order,
    tied_gap_warnings,
    zone_warnings,
)
from ._constraints import ResolvedConstraints, ZoneConstraints, refuse_infeasible
from ._dominant import (
    WeightSurvey,
    coupler_trouble,
    dominant_contraction,
    survey_weights,
)
from ._fragments import FRAGMENT_TREATMENTS, zone_beside_fragments
from ._levels import (
    COARSE_SPECTRAL_MAX_ZONES,
    choose_path,
    in_id_order,
    levels_record,
    refine_by_cycles,
    split_by_bisection,
    within_bounds,
    zone_by_levels,
)
from ._operator import NORMALIZED_LIKE, OPERATOR_KINDS, choose_operator
from ._options import (
    ASSIGNMENTS,
    TREE_TREATMENTS,
    ZONING_CONSTRAINTS,
    ZoningOptions,
    checked_options,
)
from ._result import ComponentSolve, Zoning
from ._stages import (
    Merged,
    SolveOptions,
    assign_with,
    choose_count,
    directed_record,
    enforce_rules,
    merge_together,
    refine_zones,
    rule_choice,
    solve_component,
    summarize_methods,
    tree_pairs,
    zones_per_component,
)
from ._trunk import zone_beside_trunk

__all__ = [
    "ASSIGNMENTS",
    "FRAGMENT_TREATMENTS",
    "NORMALIZED_LIKE",
    "OPERATOR_KINDS",
    "TREE_TREATMENTS",
    "ZONING_CONSTRAINTS",
    "ComponentSolve",
    "Zoning",
    "find_zones",
    "number_by_size",
]

logger = logging.getLogger(__name__)


def number_by_size(labels: np.ndarray, weights: np.ndarray) -> np.ndarray:
    """Renumber zones ``0..k-1`` by descending size, ties by first node.

    Examples
    --------
    >>> number_by_size(np.array([5, 5, 2, 9, 9, 9]), np.ones(6)).tolist()
    [1, 1, 2, 0, 0, 0]
    """
    _, first, compact = np.unique(labels, return_index=True, return_inverse=True)
    size = np.bincount(compact, weights=weights)
    order = np.lexsort((first, -size))
    new = np.empty_like(order)
    new[order] = np.arange(order.size)
    return new[compact].astype(np.int64)


def find_zones(
    network: Network,
    zones: int | str | range = "auto",
    *,
    operator: str = "auto",
    assign: str = "auto",
    trees: str = "auto",
    dominant: str = "auto",
    fragments: str = "set_aside",
    constraints: ZoneConstraints | None = None,
    refine: bool = True,
    eigen_method: str = "auto",
    tol: float = DEFAULT_TOL,
    maxiter: int | None = None,
    rng: Any = None,
    damping: float = DEFAULT_DAMPING,
    progress: Callable[[str], None] | None = None,
) -> Zoning:
    """Split a network into well-connected zones that keep the given constraints.

    Parameters
    ----------
    network : Network
    zones : int, 'auto' or range, default='auto'
        Number of zones. ``'auto'`` reads it from the eigengaps of the
        normalized Laplacian (:func:`choose_zone_count`), choosing among
        ``2..min(50, n/2)``; a ``range`` (e.g. ``range(8, 21)``) chooses
        within it. With sources and ``'auto'``, one zone per source. Stray
        fragments set aside (see ``fragments``) are not counted; an int below
        the number of the other connected components is raised to it (with
        a warning); constraints may merge or split zones (with a note).

    Returns
    -------
    Zoning
        With :attr:`Zoning.decisions` recording every automatic choice.

    Raises
    ------
    ParameterError
        For an option outside its domain.
    ConstraintError
        When a constraint cannot be met (the message says which and why).
    ConvergenceError
        When an eigen-solve misses ``tol``; no zoning is returned.

    Other Parameters
    ----------------
    operator : {'auto', 'normalized', 'random_walk', 'combinatorial', 'regularized', \
'bethe_hessian', 'directed'}, default='auto'
        Operator whose smallest eigenvectors embed the nodes
        (:func:`specgraph.laplacian`). ``'auto'`` is ``'directed'`` for a
        network read with directions (:attr:`Network.directed`), else
        ``'normalized'``, with dangling trees attached when they are many
        (see ``trees``).
        ``'directed'`` (networks read with ``directed=True`` only) is Chung's
        directed Laplacian of the random surfer on the arcs; the zone count
        ``'auto'`` then reads the eigengaps of that operator, and the
        stationary solves are recorded in ``decisions["directed"]``.
    assign : {'auto', 'kmeans', 'qr', 'bisection', 'kmeans_rw'}, default='auto'
        How embedded nodes become zones: k-means on normalized rows (Ng,
        Jordan and Weiss 2001), the pivoted-QR assignment (Damle, Minden and
        Ying 2019), recursive Fiedler sweep cuts (each with the Cheeger
        guarantee), or k-means on the random-walk coordinates
        :math:`D^{-1/2} V` (Shi and Malik 2000). ``'auto'``: every one of
        them, each through the rules and the refinement, keeping the lowest
        normalized cut (:mod:`specgraph.zones._compare`); above
        ``COMPARE_MAX_WORK`` the pick of :func:`choose_assignment`.
    trees : {'auto', 'attach', 'keep'}, default='auto'
        ``'attach'`` zones the network without its dangling trees and gives
        each tree the zone of the node it hangs from; ``'auto'`` does so when
        :func:`trees_worth_stripping` says it is worth it.
    dominant : {'auto', 'contract', 'ignore'}, default='auto'
        Links whose affinity dwarfs every link around them (bus couplers,
        zero-impedance ties: groups whose inner links are at least
        :data:`~specgraph.zones.DOMINANT_GAP` times every link leaving them).
        ``'contract'`` contracts them before the solve like kept links, so
        that no zone is a coupler's two ends; never into a node holding two
        sources, two fixed zones or more than ``max_size``. ``'auto'`` zones
        with them free and, only where that leaves a zone inside one of their
        groups or cuts one of them, zones again with them contracted (the
        reason in ``decisions["weights"]``). ``'ignore'`` leaves them. Either way
        ``decisions["weights"]`` records the spread of the affinities and the
        links found, and a warning is given when the largest affinity exceeds
        :data:`~specgraph.zones.WEIGHT_RANGE_WARN` times the median.
    fragments : {'set_aside', 'zone'}, default='set_aside'
        Connected components too small to be zones (stray pieces of an
        export, isolated nodes of a node table): under 1 % of the network, or
        under a tenth of an average zone with many zones, or under
        ``min_size`` (:func:`~specgraph.zones._fragments.fragment_limit`),
        and holding no source, fixed node or trunk link. ``'set_aside'``
        zones the rest with the zone count asked (shared among the other
        components in proportion to their size) and puts the fragments in
        one more zone, numbered last, with ``role`` ``'fragments'`` in the
        zone table (:mod:`._fragments`; a warning and
        ``decisions["fragments"]`` say what was set aside). ``'zone'`` zones
        every component, one zone each at least (a count below the number of
        components is raised to it, with a warning).
    constraints : ZoneConstraints, optional
        Size bounds, sources, links that must not be cut, fixed zones, and
        connectivity (default: every zone connected, nothing else). With
        trunk links, ``zones`` counts districts, formed beside the trunk,
        which becomes one more zone numbered last (:mod:`._trunk`).
    refine : bool, default=True
        Improve the boundary by local moves that lower the normalized cut
        and keep every constraint (:func:`refine_boundary`).
    eigen_method : {'auto', 'dense', 'lanczos', 'lanczos_flip', 'multilevel'}, default='auto'
        See :func:`specgraph.smallest_eigenpairs`.
    tol : float, default=1e-6
        Bound on scaled eigen-residuals.
    maxiter : int, optional
        Iteration cap of iterative eigen-solvers.
    rng : None, int or numpy.random.Generator
        Seeds start vectors, k-means and tie-breaks.
    damping : float, default=0.85
        Damping of the random surfer of ``operator='directed'``, in (0, 1)
        (:data:`specgraph.walks.DEFAULT_DAMPING`); checked, unused otherwise.
    progress : callable, optional
        Called with the name of each stage as it starts (``'solving'``,
        ``'constraints'``, ``'refining'``), for progress displays; the
        command line draws its stage bar with it.

    Notes
    -----
    The steps are listed in the module docstring of :mod:`specgraph.zones`.

    Examples
    --------
    >>> from specgraph import gallery
    >>> zoning = find_zones(gallery.barbell(5), 2, rng=0)
    >>> zoning.labels.tolist()
    [0, 0, 0, 0, 0, 1, 1, 1, 1, 1]
    >>> zoning.boundary[["source", "target"]].to_numpy().tolist()
    [['4', '5']]
    """
    options = checked_options(
        network,
        zones,
        operator=operator,
        assign=assign,
        trees=trees,
        dominant=dominant,
        fragments=fragments,
        refine=refine,
        eigen_method=eigen_method,
        tol=tol,
        maxiter=maxiter,
        damping=damping,
        constraints=constraints,
        progress=progress,
        rng=rng,
    )
    stage = progress if progress is not None else _no_progress
    rules = (constraints if constraints is not None else ZoneConstraints()).resolve(network)

    def as_asked(record: dict[str, Any]) -> dict[str, Any]:
        return {
            **record,
            "zones": options.record({}, "")["zones"],  # as asked, not capped
            "constraints": constraint_record(rules),
        }

    def zone_all(net: Network, rest: ResolvedConstraints, spec: Any) -> Zoning:
        if rest.trunk_pairs.size:  # districts beside the trunk links (module _trunk)
            return zone_beside_trunk(
                net,
                rest,
                spec,
                lambda sub, inner, count: _zone_rules(
                    sub, replace(options, spec=count), inner, stage
                ),
                as_asked,
            )
        return _zone_rules(net, replace(options, spec=spec), rest, stage)

    if options.fragments == "set_aside":  # stray components set aside (module _fragments)
        return zone_beside_fragments(network, rules, options.spec, zone_all, as_asked)
    return zone_all(network, rules, options.spec)


def _zone_rules(
    network: Network,
    options: ZoningOptions,
    rules: ResolvedConstraints,
    stage: Callable[[str], None],
) -> Zoning:
    """Steps 2 to 8 of :func:`find_zones` on resolved rules."""
    refuse_infeasible(network.adjacency, rules)  # what arithmetic decides, before any solve
    # The random state at the start: a second zoning (step 8) starts from it
    # too, so it is the zoning dominant='contract' gives for the same seed.
    start = options.rng.bit_generator.state
    survey = survey_weights(network.adjacency)  # once: every pass below reads it
    zoning = _zone_trees(network, options, rules, stage, survey)
    if options.dominant != "auto" or not survey.found.weights.size:
        return zoning
    # Step 8: the dominant links were left free; if a zone lies inside one of
    # their groups or one of them is cut, zone again with them contracted.
    trouble = coupler_trouble(survey.found, zoning.labels)
    if not trouble:
        return zoning
    options.rng.bit_generator.state = start
    held = _zone_trees(network, replace(options, dominant="contract"), rules, stage, survey)
    weights = dict(held.decisions["weights"])
    weights["choice"] = "auto"
    weights["reason"] += f" (auto: with them free, {trouble})"
    return replace(
        held, parameters=zoning.parameters, decisions={**held.decisions, "weights": weights}
    )


def _zone_trees(
    network: Network,
    options: ZoningOptions,
    rules: ResolvedConstraints,
    stage: Callable[[str], None],
    survey: WeightSurvey,
) -> Zoning:
    """Steps 2 to 7 of :func:`find_zones`: zoned once, and again with trees kept if worth it."""
    zoning = _zone_once(network, options, rules, stage, survey)
    if not _kept_trees_worth_trying(zoning, options):
        return zoning
    # Step 7: with the trees attached by the auto rule, zone once more with them
    # kept (a weak link into a dangling branch can be the cheapest boundary, as
    # on radial feeders) and keep the lower normalized cut.
    count = int(zoning.scores["zones"])
    try:
        other = _zone_once(
            network, replace(options, spec=count, trees="keep"), rules, stage, survey
        )
    except ConstraintError as exc:
        logger.debug("trees kept: %s", exc)
        return zoning
    return _lower_cut(zoning, other)


def _zone_once(
    network: Network,
    options: ZoningOptions,
    rules: ResolvedConstraints,
    stage: Callable[[str], None],
    survey: WeightSurvey,
) -> Zoning:
    """Steps 2 to 6 of :func:`find_zones` with one tree treatment."""
    stage("solving")

    # Steps 2-3: merge what must stay together, choose the operator and the count.
    merged, kind, decisions = _merge_and_choose_operator(network, rules, options, survey)
    work = merged.network
    solver = SolveOptions(
        kind, options.eigen_method, options.tol, options.maxiter, options.rng, options.damping
    )
    k, decisions["zone_count"], known = choose_count(work, options.spec, merged.rules, solver)

    path = choose_path(options.assign, solver.kind, work.n_nodes, k)
    if path.multilevel:
        # Steps 4-5 by levels: coarsen, zone the coarsest, refine back up.
        # The evidence pairs first (a failing solve is named as the solve), on a
        # copy of the generator: the zones are those of assign="multilevel".
        evidence = (
            _evidence_solves(work, k, replace(solver, rng=copy.deepcopy(solver.rng)), known)
            if path.evidence
            else []
        )
        step4 = _zone_by_levels(network, merged, k, options, solver, stage)
        step4 = replace(step4, solves=evidence)
        decisions.update(step4.decisions)
        labels_w = step4.labels
    else:
        # Step 4: share the zones among components; solve, embed and assign each.
        step4 = _zone_components(work, k, options.assign, solver, known)
        decisions.update(step4.decisions)
        # Step 5: the user's rules, then boundary refinement (for every assignment
        # compared by ``assign="auto"``, keeping the lowest normalized cut).
        stage("constraints")
        labels_w, step5 = _rules_and_refinement(network, merged, step4, options, stage)
        decisions.update(step5)
        if path.compare and options.refine and step4.solves:
            labels_w = _against_levels(
                network, merged, step4.asked, options, solver, labels_w, decisions
            )
    if options.assign == "auto" and "assign" in decisions:
        decisions["assign"]["path"] = path.reason

    # Step 6: back to nodes, numbered by size, with the zone table and boundary.
    labels = number_by_size(labels_w[merged.groups], network.node_weights)
    parameters = options.record(constraint_record(rules), kind)
    notes = [
        *([decisions["weights"]["warning"]] if decisions["weights"]["warning"] else []),
        *step4.notes,
        *zone_warnings(network, labels, step4.asked, decisions["constraints"]["notes"]),
        *tied_gap_warnings(step4.solves),
    ]
    return zoning_of(network, labels, step4.solves, parameters, decisions, notes)


def _rules_and_refinement(
    network: Network,
    merged: Merged,
    step4: _Assigned,
    options: ZoningOptions,
    stage: Callable[[str], None],
) -> tuple[np.ndarray, dict[str, dict[str, Any]]]:
    """Step 5: the rules, then the refinement, of the one assignment or of each compared."""
    decisions: dict[str, dict[str, Any]] = {}
    if len(step4.raws) > 1:
        if options.refine:
            stage("refining")
        winner, decisions["assign"] = best_assignment(
            network,
            merged,
            step4.raws,
            step4.asked,
            refine=options.refine,
            rng=options.rng,
            rule=step4.decisions.get("assign", {}),
        )
        assert winner.labels is not None
        decisions.update(winner.decisions)
        return winner.labels, decisions
    ((raw, _),) = step4.raws.values()
    work = merged.network
    labels_w, decisions["constraints"] = enforce_rules(work, raw, merged, options.rng)
    if options.refine:
        stage("refining")
        labels_w, decisions["refinement"] = refine_zones(network, merged, labels_w, options.rng)
    return labels_w, decisions


def _against_levels(
    network: Network,
    merged: Merged,
    asked: int,
    options: ZoningOptions,
    solver: SolveOptions,
    labels_w: np.ndarray,
    decisions: dict[str, dict[str, Any]],
) -> np.ndarray:
    """The one-level zoning or the multilevel one, whichever has the lower normalized cut.

    ``assign="auto"`` below :data:`MULTILEVEL_MIN_ZONES` runs both: the
    one-level path keeps its eigengap evidence (its solves stay in the
    zoning), and the multilevel path often cuts less (on
    ``road_like(100_000)`` at 8 zones, 0.0152 against 0.0222;
    benchmarks/probe_levels.py). Updates ``decisions`` in place.
    """
    one = normalized_cut(network.adjacency, labels_w[merged.groups])
    try:
        other = _zone_by_levels(network, merged, asked, options, solver, _no_progress)
    except ConstraintError as exc:
        decisions["assign"]["reason"] += f" (the multilevel path could not keep the rules: {exc})"
        return labels_w
    multi = normalized_cut(network.adjacency, other.labels[merged.groups])
    same = int(other.labels.max()) == int(labels_w.max())
    if same and multi < one * (1.0 - NCUT_TIE_RTOL):
        one_level = {
            "choice": decisions["assign"].get("choice"),
            "ncut": one,
            "reason": decisions["assign"].get("reason", ""),
        }
        decisions.pop("refinement", None)
        decisions.update(other.decisions)
        decisions["assign"]["one_level"] = one_level
        decisions["assign"]["reason"] += (
            f"; on the whole network its normalized cut {figure(multi)} is lower than the "
            f"one-level path's {figure(one)} ({one_level['choice']})"
        )
        return other.labels
    decisions["assign"]["multilevel_ncut"] = multi
    decisions["assign"]["reason"] += (
        f" (on the whole network {figure(one)}; the multilevel path: {figure(multi)})"
    )
    return labels_w


def _zone_by_levels(
    network: Network,
    merged: Merged,
    k: int,
    options: ZoningOptions,
    solver: SolveOptions,
    stage: Callable[[str], None],
) -> _Assigned:
    """Steps 4-5 of the multilevel path (:mod:`._levels`): no solve of the whole network."""
    work = merged.network
    per_component, notes = zones_per_component(work, min(k, work.n_nodes))
    asked = int(per_component.sum())

    def zone_coarse(
        coarse: Network, rules: ResolvedConstraints, count: int
    ) -> tuple[np.ndarray, dict[str, Any]]:
        inner = Merged(coarse, np.arange(coarse.n_nodes), rules, rules.sizes)
        if count > COARSE_SPECTRAL_MAX_ZONES:
            raw = split_by_bisection(coarse, count, solver, rules)
            labels, enforced = enforce_rules(coarse, raw, inner, options.rng)
            return labels, {"assign": "bisection", "constraints": enforced["reason"]}
        step4 = _zone_components(coarse, count, "auto", solver, None)
        quiet = replace(options, refine=False)
        labels, decided = _rules_and_refinement(coarse, inner, step4, quiet, _no_progress)
        choice = decided.get("assign", step4.decisions.get("assign", {})).get("choice")
        return labels, {"assign": choice, "constraints": decided["constraints"]["reason"]}

    # Rows in id order: the zones do not depend on the order the links were read in.
    ordered, rules, order = in_id_order(work, merged.rules)
    labels, record = zone_by_levels(
        ordered, rules, asked, zone_coarse=zone_coarse, refine=options.refine, rng=options.rng
    )
    stage("constraints")
    inner = Merged(ordered, np.arange(ordered.n_nodes), rules, rules.sizes)
    labels = within_bounds(ordered, labels, rules)
    labels, constraints = enforce_rules(ordered, labels, inner, options.rng)
    decisions: dict[str, dict[str, Any]] = {"constraints": constraints}
    if options.refine:
        stage("refining")
        labels, cycles = refine_by_cycles(ordered, labels, rules, rng=options.rng)
        record.update(cycles)
    decisions["assign"] = levels_record(record, work)
    by_row = np.empty_like(labels)
    by_row[order] = labels
    return _Assigned({"multilevel": (by_row, 0.0)}, [], notes, decisions, asked, by_row)


def _merge_and_choose_operator(
    network: Network, rules: ResolvedConstraints, options: ZoningOptions, survey: WeightSurvey
) -> tuple[Merged, str, dict[str, dict[str, Any]]]:
    """Steps 2-3a: merge what must stay together, choose the operator; their decisions."""
    spec = options.spec
    k_hint = spec if isinstance(spec, int) else (max(spec) if isinstance(spec, range) else 2)
    pairs, trees_decision = tree_pairs(network, rules, options.trees, k_hint)
    together = np.concatenate([rules.keep_pairs, pairs])
    strong, weights = dominant_contraction(network, rules, options.dominant, together, survey)
    merged = merge_together(network, rules, np.concatenate([together, strong]))
    # Trees kept on request say nothing about localization: no remark then.
    attached = None if options.trees == "keep" else bool(pairs.size > 0)
    choice = choose_operator(options.operator, directed=network.directed, trees_attached=attached)
    decisions = {"weights": weights, "trees": trees_decision, "operator": choice.as_decision()}
    return merged, choice.kind, decisions


@dataclass(frozen=True, eq=False)
class _Assigned:
    """Step 4's result: the labels of every assignment tried, solves, notes, decisions."""

    #: Labels of the merged network and the seconds they took, by assignment
    #: (one entry unless ``assign="auto"`` compares them).
    raws: dict[str, tuple[np.ndarray, float]]
    solves: list[ComponentSolve]
    notes: list[str]
    decisions: dict[str, dict[str, Any]]
    #: Zones asked of the assignments, summed over components.
    asked: int
    #: The final labels of the merged network, when the path already gave them.
    labels: np.ndarray = field(default_factory=lambda: np.empty(0, dtype=np.int64))


def _zone_components(
    work: Network, k: int, assign: str, solver: SolveOptions, known: EigenResult | None
) -> _Assigned:
    """Step 4: zones of every component, numbered consecutively, with their solves.

    With ``assign="auto"``, a normalized-like operator and ``n * k`` within
    :data:`COMPARE_MAX_WORK`, every assignment is run on the same solves (one
    labelling each, in :func:`comparison_order`); otherwise the one asked for,
    or the rule's pick per component. The decisions hold ``"assign"`` (the
    rule's record when comparing) and, for the directed operator, ``"directed"``.
    """
    per_component, notes = zones_per_component(work, min(k, work.n_nodes))
    asked = int(per_component.sum())
    compare = (
        assign == "auto"
        and solver.kind in NORMALIZED_LIKE
        and comparison_affordable(work.n_nodes, asked)
    )
    raw = _component_offsets(work, per_component)
    parts, solves, methods = [], [], []
    for comp, k_c in enumerate(per_component.tolist()):
        rows = np.flatnonzero(work.component_labels == comp)
        if k_c > 1:
            sub = work if rows.size == work.n_nodes else work.subnetwork(rows)
            eig = solve_component(sub, k_c, solver, known)
            solves.append(ComponentSolve(comp, rows, k_c, eig))
            methods.append(rule_choice(sub, k_c, assign, solver, eig))
            parts.append((rows, k_c, sub, eig))
            if not compare:
                raw[rows] += assign_with(sub, k_c, methods[-1]["choice"], solver, eig)[0]
    raws = {assign: (raw, 0.0)}  # seconds are recorded only when comparing
    compare = compare and bool(parts)
    if compare:
        raws = {}
        for method in comparison_order(_first_method(methods)):
            start = time.perf_counter()
            labels = raw.copy()
            for rows, k_c, sub, eig in parts:
                labels[rows] += assign_with(sub, k_c, method, solver, eig)[0]
            raws[method] = (labels, time.perf_counter() - start)
    decisions = {"assign": summarize_methods(methods)} if methods else {}
    if parts and not compare and assign == "auto" and solver.kind in NORMALIZED_LIKE:
        decisions["assign"]["reason"] += (
            f" (assignments not compared: n * k = {work.n_nodes * asked:,} > {COMPARE_MAX_WORK:,})"
        )
    if solver.kind == "directed":
        decisions["directed"] = directed_record(solver.damping, solver.records)
    return _Assigned(raws, solves, notes, decisions, asked)


def _evidence_solves(
    work: Network, k: int, solver: SolveOptions, known: EigenResult | None
) -> list[ComponentSolve]:
    """The ``k_c + 1`` smallest pairs of every component split, solved but not assigned from.

    The multilevel path's zones do not come from these pairs; they are kept
    as the zoning's eigengap evidence (:data:`~._levels.MULTILEVEL_ALONE_NODES`).
    """
    per_component, _ = zones_per_component(work, min(k, work.n_nodes))
    solves = []
    for comp, k_c in enumerate(per_component.tolist()):
        if k_c < 2:
            continue
        rows = np.flatnonzero(work.component_labels == comp)
        sub = work if rows.size == work.n_nodes else work.subnetwork(rows)
        solves.append(ComponentSolve(comp, rows, k_c, solve_component(sub, k_c, solver, known)))
    return solves


def _first_method(methods: list[dict[str, Any]]) -> str:
    """The rule's pick on the first component split by an assignment (k-means if none)."""
    picks = [m["choice"] for m in methods if m["choice"] in ASSIGNMENTS]
    return picks[0] if picks else "kmeans"


def _component_offsets(work: Network, per_component: np.ndarray) -> np.ndarray:
    """Each node's first zone number: zones numbered component after component."""
    offsets = np.concatenate([[0], np.cumsum(per_component)[:-1]]).astype(np.int64)
    return offsets[work.component_labels]


def zoning_of(
    network: Network,
    labels: np.ndarray,
    solves: list[ComponentSolve],
    parameters: dict[str, Any],
    decisions: dict[str, dict[str, Any]],
    notes: list[str],
) -> Zoning:
    """Step 6: the zoning with its zone table, boundary links and overall scores."""
    table = zone_table(network, labels)
    return Zoning(
        network=network,
        labels=labels,
        zones=table,
        boundary=boundary_links(network, labels),
        solves=tuple(solves),
        scores=overall_scores(table),
        parameters=parameters,
        decisions=decisions,
        warnings=tuple(notes),
    )


def _no_progress(stage: str) -> None:
    """Stand-in for ``progress=None``: stages pass silently."""


def _kept_trees_worth_trying(zoning: Zoning, options: ZoningOptions) -> bool:
    """Whether :func:`find_zones` also zones with the dangling trees kept (step 7).

    Only where the ``auto`` tree rule attached trees, the operator is a
    normalized one, and the comparison is affordable by the same
    :data:`~specgraph.zones._compare.COMPARE_MAX_WORK` rule as the assignments'.
    """
    attached = zoning.decisions.get("trees", {}).get("choice") == "attach"
    kind = zoning.decisions.get("operator", {}).get("choice")
    count = int(zoning.scores["zones"])
    return (
        options.trees == "auto"
        and attached
        and kind in NORMALIZED_LIKE
        and count >= 2
        and comparison_affordable(zoning.network.n_nodes, count)
    )


def _lower_cut(attached: Zoning, kept: Zoning) -> Zoning:
    """The zoning with the lower normalized cut (ties and other counts: ``attached``).

    The winner carries the user's parameters and the zone-count decision of the
    first run, and ``decisions["trees"]`` records both figures.
    """
    cut_a = float(attached.scores["normalized_cut"])
    cut_k = float(kept.scores["normalized_cut"])
    same_count = kept.scores["zones"] == attached.scores["zones"]
    keep_wins = same_count and cut_k < cut_a * (1.0 - NCUT_TIE_RTOL)
    trees = dict(attached.decisions["trees"])
    trees["compared"] = {"attach": cut_a, "keep": cut_k}
    if keep_wins:
        trees["choice"] = "keep"
        trees["reason"] = (
            f"dangling trees kept: zoned as any node, the normalized cut is {cut_k:.4g} "
            f"against {cut_a:.4g} with them attached"
        )
    else:
        trees["reason"] += f" (normalized cut {cut_a:.4g}; {cut_k:.4g} with them kept)"
    winner = kept if keep_wins else attached
    decisions = {**winner.decisions, "trees": trees}
    decisions["zone_count"] = attached.decisions["zone_count"]
    return replace(winner, parameters=attached.parameters, decisions=decisions)


def constraint_record(rules: ResolvedConstraints) -> dict[str, Any]:
    assert rules.pinned is not None
    return {
        "min_size": rules.min_size,
        "max_size": rules.max_size,
        "sources": int(rules.sources.size),
        "keep_links": len(rules.keep_pairs),
        "fixed_nodes": int(np.count_nonzero(rules.pinned >= 0)),
        "connected": rules.connected,
        **({"trunk_links": len(rules.trunk_pairs)} if rules.trunk_pairs.size else {}),
    }
