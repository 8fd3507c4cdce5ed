"""The steps of :func:`~specgraph.zones.find_zones` between its option checks and its result.

In the order :func:`find_zones` calls them (the numbers are those of the
steps in :mod:`specgraph.zones._zoning`):

2. :func:`tree_pairs` and :func:`merge_together`: merge into super-nodes what
   must stay together (kept links, and dangling trees when worth it);
3. :func:`choose_count`: the zone count and its evidence, then
   :func:`zones_per_component`: the zones each connected component gets;
4. :func:`assign_component`: one component's eigen-solve and its assignment
   (dispatched through :data:`_ASSIGNERS`), summarized by
   :func:`summarize_methods` and, for the directed operator, :func:`directed_record`;
5. :func:`enforce_rules` then :func:`refine_zones`: the user's constraints,
   then boundary moves that lower the normalized cut.

Each step returns its result with the decision record that explains it.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from .._wording import change_phrase, count
from ..eigen import EigenResult, smallest_eigenpairs
from ..network import Network
from ..operators import laplacian
from ._allocate import allocate_zones
from ._assign import bisection_labels, choose_assignment, kmeans_labels, qr_labels
from ._constraints import (
    ResolvedConstraints,
    contract_constraints,
    contract_links,
    enforce_constraints,
)
from ._count import (
    FIRST_PAIRS,
    choose_zone_count,
    count_decided,
    default_candidates,
    next_pair_count,
    why_undecided,
)
from ._embedding import normalized_rows
from ._operator import NORMALIZED_LIKE
from ._refine import normalized_cut, refine_boundary
from ._trees import MIN_TREE_SHARE, core_and_trees, trees_worth_stripping

__all__ = [
    "QR_SAMPLE_ROWS",
    "Merged",
    "SolveOptions",
    "assign_component",
    "assign_with",
    "choose_count",
    "directed_record",
    "enforce_rules",
    "merge_together",
    "refine_zones",
    "rule_choice",
    "solve_component",
    "summarize_methods",
    "tree_pairs",
    "zones_per_component",
]

#: Components with more nodes than this pick the pivoted-QR assignment among
#: sampled rows (Damle, Minden and Ying's randomized variant): the full
#: pivoted QR of a 200 x 1,000,000 block took 43 s here.
QR_SAMPLE_ROWS = 200_000


@dataclass(frozen=True, eq=False)
class Merged:
    """The network with must-stay-together nodes merged into super-nodes."""

    network: Network
    groups: np.ndarray
    rules: ResolvedConstraints
    sizes: np.ndarray


def tree_pairs(
    network: Network, rules: ResolvedConstraints, trees: str, k_hint: int
) -> tuple[np.ndarray, dict[str, Any]]:
    """Pairs (node, root) that merge each dangling tree into the node it hangs from."""
    none = np.empty((0, 2), dtype=np.int64)
    if trees == "keep":
        return none, {"choice": "keep", "reason": "dangling trees zoned like any node (asked)"}
    split = core_and_trees(network.adjacency)
    share = float(split.tree_share)
    figures = {"tree_share": share, "largest_tree": int(split.largest_tree)}
    if trees == "auto" and not trees_worth_stripping(split, k_hint):
        reason = (
            f"dangling trees hold {share:.1%} of the nodes (attached when at least "
            f"{MIN_TREE_SHARE:.0%}, the core is large enough and no tree needs zones of its own)"
        )
        return none, {"choice": "keep", "reason": reason, **figures}
    outside = np.flatnonzero(~split.core)
    pairs = np.column_stack([outside, split.root[outside]]).astype(np.int64)
    groups = contract_links(network.adjacency, pairs).groups
    problem = _tree_conflict(groups, rules)
    if problem:
        return none, {"choice": "keep", "reason": f"dangling trees kept: {problem}", **figures}
    reason = (
        f"dangling trees ({share:.1%} of the nodes) zoned with the node they hang from, "
        "so that branch eigenvectors cannot make sliver zones"
    )
    return pairs, {"choice": "attach", "reason": reason, **figures}


def _tree_conflict(groups: np.ndarray, rules: ResolvedConstraints) -> str:
    """Why merging trees would break a constraint, or ``''``."""
    g = int(groups.max()) + 1 if groups.size else 0
    if rules.sources.size and np.bincount(groups[rules.sources], minlength=g).max() > 1:
        return "one branch holds two sources"
    assert rules.pinned is not None
    fixed = np.flatnonzero(rules.pinned >= 0)
    if fixed.size:
        pairs = np.unique(np.column_stack([groups[fixed], rules.pinned[fixed]]), axis=0)
        if np.bincount(pairs[:, 0], minlength=g).max() > 1:
            return "one branch holds nodes fixed to different zones"
    if rules.max_size is not None:
        sizes = np.bincount(groups, weights=rules.sizes, minlength=g)
        if sizes.max() > rules.max_size:
            return f"a branch with its root is larger than max_size={rules.max_size:g}"
    return ""


def merge_together(network: Network, rules: ResolvedConstraints, pairs: np.ndarray) -> Merged:
    """Merge the ends of ``pairs`` (and carry the constraints onto super-nodes)."""
    contraction = contract_links(network.adjacency, pairs)
    merged_rules = contract_constraints(contraction, rules)
    groups = contraction.groups
    if contraction.n_groups == network.n_nodes:
        return Merged(network, groups, merged_rules, rules.sizes)
    first = np.full(contraction.n_groups, network.n_nodes, dtype=np.int64)
    np.minimum.at(first, groups, np.arange(network.n_nodes))
    sizes = contraction.sum_nodes(rules.sizes)
    # Arcs are contracted with the same groups (arcs inside a group vanish,
    # parallel arcs add up), so the merged network keeps its direction.
    arcs = None if network.arcs is None else contract_links(network.arcs, pairs).adjacency
    work = Network(contraction.adjacency, network.node_ids[first], sizes=sizes, arcs=arcs)
    return Merged(work, groups, merged_rules, sizes)


def _slice(result: EigenResult, count: int) -> EigenResult:
    """The first ``count`` pairs of a result."""
    return replace(
        result,
        values=result.values[:count],
        vectors=result.vectors[:, :count],
        residuals=result.residuals[:count],
    )


@dataclass(frozen=True)
class SolveOptions:
    """How every eigen-solve of one :func:`find_zones` call is made: operator, solver, seed."""

    kind: str
    method: str
    tol: float
    maxiter: int | None
    rng: np.random.Generator
    damping: float
    #: Parameters of every operator built (the stationary solves of ``directed``).
    records: list[dict[str, Any]] = field(default_factory=list)

    def solve(self, network: Network, count: int) -> EigenResult:
        extra = {"damping": self.damping} if self.kind == "directed" else {}
        operator = laplacian(network, kind=self.kind, **extra)  # type: ignore[arg-type]
        if operator.parameters:
            self.records.append({"nodes": network.n_nodes, **operator.parameters})
        return smallest_eigenpairs(
            operator,
            min(count, network.n_nodes),
            method=self.method,
            tol=self.tol,
            maxiter=self.maxiter,
            rng=self.rng,
        )


def choose_count(
    work: Network, spec: int | str | range, rules: ResolvedConstraints, solver: SolveOptions
) -> tuple[int, dict[str, Any], EigenResult | None]:
    """The zone count and the evidence behind it."""
    if isinstance(spec, int):
        return spec, {"choice": spec, "reason": "given"}, None
    if rules.sources.size and spec == "auto":
        count = int(rules.sources.size)
        return count, {"choice": count, "reason": f"one zone per source ({count} sources)"}, None
    c = work.n_components
    candidates = (
        spec if isinstance(spec, range) else default_candidates(work.n_nodes, n_components=c)
    )
    candidates, bounded = _counts_within_bounds(candidates, float(rules.sizes.sum()), rules)
    if len(candidates) == 0:
        return c, {"choice": c, "reason": "one zone per connected component (too few nodes)"}, None
    if len(candidates) == 1:
        only = candidates.start
        return only, {"choice": only, "reason": f"the only count {bounded}"}, None
    count_kind = "directed" if solver.kind == "directed" else "normalized"
    normalized = replace(solver, kind=count_kind) if solver.kind != count_kind else solver
    # Ask for few pairs first and double them only while a later count could still
    # have one of the largest gaps (count_decided); at most what the candidates need.
    needed = max(candidates) + 1
    ranked = range(max(candidates.start, c + 1), candidates.stop)
    pairs = min(needed, max(FIRST_PAIRS, ranked.start + 1))
    solves, undecided = [], []
    while True:
        result = normalized.solve(work, pairs)
        solves.append(pairs)
        if pairs >= needed or count_decided(result.values, ranked):
            break
        undecided.append(why_undecided(result.values, ranked))
        pairs = next_pair_count(result.values, needed, ranked)
    searched = range(candidates.start, min(candidates.stop, result.k))
    vectors = result.vectors

    def curve(k: int) -> float:
        labels = qr_labels(vectors[:, :k], k)
        return normalized_cut(work.adjacency, labels)

    choice = choose_zone_count(result.values, candidates=searched, n_components=c, ncut_curve=curve)
    decided = (
        "all the candidates' pairs computed"
        if result.k >= needed
        else f"no count above {searched.stop - 1} can reach the largest gaps (eigenvalues "
        "are at most 2)"
    )
    if undecided:
        decided += "; more pairs were needed because " + "; then ".join(undecided)
    record = {
        "choice": choice.zones,
        "confidence": choice.confidence,
        "reason": choice.reason + (f" (counts {bounded})" if bounded else ""),
        "evidence": choice.evidence.to_dict(orient="records"),
        "eigenpairs": int(result.k),
        "eigenpairs_reason": (
            f"{result.k} eigenpairs computed (solves of {', '.join(map(str, solves))}): {decided}"
        ),
    }
    return choice.zones, record, result if c == 1 and solver.kind == count_kind else None


def _counts_within_bounds(
    candidates: range, total: float, rules: ResolvedConstraints
) -> tuple[range, str]:
    """Candidate counts that the size bounds allow, and a phrase saying which bounds.

    ``k`` zones of sizes within ``[min_size, max_size]`` need
    ``total / max_size <= k <= total / min_size``.
    """
    low, high = candidates.start, candidates.stop
    said = []
    if rules.max_size is not None:
        fewest = int(np.ceil(total / rules.max_size - 1e-9))
        if fewest > low:
            low = fewest
            said.append(f"at least {fewest} for max_size={rules.max_size:g}")
    if rules.min_size is not None:
        most = int(np.floor(total / rules.min_size + 1e-9))
        if most + 1 < high:
            high = most + 1
            said.append(f"at most {most} for min_size={rules.min_size:g}")
    if low >= high and said:
        # The bounds leave no count in the range: keep the nearest and let the
        # constraint step say what cannot hold.
        nearest = min(max(low, candidates.start), candidates.stop - 1)
        return range(nearest, nearest + 1), "; ".join(said) + " leave no count in the range"
    return range(low, max(low, high)), "; ".join(said)


def zones_per_component(work: Network, k: int) -> tuple[np.ndarray, list[str]]:
    labels = work.component_labels
    c = work.n_components
    notes = []
    if c > 1:
        notes.append(f"the network has {c} connected components; each is zoned on its own")
    if k < c:
        notes.append(
            f"zones={k} is fewer than the {c} connected components; "
            f"raised to {c}, one zone per component at least"
        )
        k = c
    nodes = np.bincount(labels, minlength=c)
    weight = np.bincount(labels, weights=work.node_weights, minlength=c)
    return allocate_zones(weight, nodes, k), notes


def solve_component(
    sub: Network, k: int, solver: SolveOptions, known: EigenResult | None
) -> EigenResult:
    """The ``k + 1`` smallest pairs of one connected component (reusing ``known``)."""
    return _slice(known, k + 1) if known is not None and known.k > k else solver.solve(sub, k + 1)


def assign_with(
    sub: Network, k: int, assign: str, solver: SolveOptions, eig: EigenResult
) -> tuple[np.ndarray, dict[str, Any]]:
    """Zones ``0..k-1`` of one component from its eigen-solve, by ``assign`` or its rule."""
    if k >= sub.n_nodes:
        # As many zones as nodes: one node per zone, nothing to choose.
        labels = np.arange(sub.n_nodes, dtype=np.int64)
        return labels, {"choice": "one node per zone", "reason": "as many zones as nodes"}
    method, reason = _assignment_method(sub, k, assign, solver, eig)
    labels = _ASSIGNERS[method](sub, eig, k, solver)
    return np.asarray(labels, dtype=np.int64), {"choice": method, "reason": reason}


def assign_component(
    sub: Network, k: int, assign: str, solver: SolveOptions, known: EigenResult | None
) -> tuple[np.ndarray, EigenResult, dict[str, Any]]:
    """Zones ``0..k-1`` of one connected component, its eigen-solve, the method's reason."""
    eig = solve_component(sub, k, solver, known)
    labels, record = assign_with(sub, k, assign, solver, eig)
    return labels, eig, record


def rule_choice(
    sub: Network, k: int, assign: str, solver: SolveOptions, eig: EigenResult
) -> dict[str, Any]:
    """The assignment asked for, or the ``auto`` rule's pick, as a decision record."""
    if k >= sub.n_nodes:
        return {"choice": "one node per zone", "reason": "as many zones as nodes"}
    method, reason = _assignment_method(sub, k, assign, solver, eig)
    return {"choice": method, "reason": reason}


def _assignment_method(
    sub: Network, k: int, assign: str, solver: SolveOptions, eig: EigenResult
) -> tuple[str, str]:
    """The assignment asked for, or the one the ``auto`` rule picks, with its reason."""
    if assign != "auto":
        return assign, "asked"
    if solver.kind not in NORMALIZED_LIKE:
        return "kmeans", f"k-means is the assignment for the {solver.kind} operator"
    picked = choose_assignment(
        eig.values, eig.vectors, k, sample=sub.n_nodes > QR_SAMPLE_ROWS, rng=solver.rng
    )
    return picked.method, picked.reason


def _kmeans(sub: Network, eig: EigenResult, k: int, solver: SolveOptions) -> np.ndarray:
    """k-means on normalized rows (Ng, Jordan and Weiss); on raw rows for the Bethe Hessian."""
    vectors = eig.vectors[:, :k]
    rows = vectors if solver.kind == "bethe_hessian" else normalized_rows(vectors)
    return kmeans_labels(rows, k, solver.rng)


def _kmeans_rw(sub: Network, eig: EigenResult, k: int, solver: SolveOptions) -> np.ndarray:
    r"""k-means on the random-walk coordinates :math:`D^{-1/2} V` (Shi and Malik).

    The rows of :math:`D^{-1/2} V` are the generalized eigenvectors of
    :math:`L u = \lambda D u`, the embedding of Shi and Malik (2000) that von
    Luxburg (2007, section 5) recommends; scikit-learn's ``SpectralClustering``
    clusters the same coordinates. On the real networks of the benchmark it beat
    k-means on normalized rows where that lost (docs/benchmarks-real.md).
    """
    degrees = np.asarray(sub.degrees, dtype=np.float64)
    scale = 1.0 / np.sqrt(np.where(degrees > 0, degrees, 1.0))
    return kmeans_labels(eig.vectors[:, :k] * scale[:, None], k, solver.rng)


def _qr(sub: Network, eig: EigenResult, k: int, solver: SolveOptions) -> np.ndarray:
    """The pivoted-QR assignment, on sampled rows for large components."""
    return qr_labels(eig.vectors[:, :k], k, sample=sub.n_nodes > QR_SAMPLE_ROWS, rng=solver.rng)


def _bisection(sub: Network, eig: EigenResult, k: int, solver: SolveOptions) -> np.ndarray:
    """Recursive Fiedler sweep cuts; the first cut reuses ``eig`` when it is the
    normalized Laplacian's (each later cut solves its own part)."""
    return bisection_labels(
        sub,
        k,
        eigen_method=solver.method,
        tol=solver.tol,
        maxiter=solver.maxiter,
        rng=solver.rng,
        first=eig if solver.kind == "normalized" else None,
    )


#: Assignment methods by name: embedded rows of one component to zone labels.
_ASSIGNERS: dict[str, Callable[[Network, EigenResult, int, SolveOptions], np.ndarray]] = {
    "kmeans": _kmeans,
    "qr": _qr,
    "bisection": _bisection,
    "kmeans_rw": _kmeans_rw,
}


def enforce_rules(
    work: Network, raw: np.ndarray, merged: Merged, generator: np.random.Generator
) -> tuple[np.ndarray, dict[str, Any]]:
    """Step 5a: the constraints enforced on the merged network, and what that changed."""
    enforced = enforce_constraints(work.adjacency, raw, merged.rules, rng=generator)
    decision = {
        "reason": "; ".join(enforced.notes) if enforced.notes else "no change was needed",
        "notes": list(enforced.notes),
        "moved": enforced.moved,
    }
    return enforced.labels, decision


def refine_zones(
    network: Network, merged: Merged, labels: np.ndarray, generator: np.random.Generator
) -> tuple[np.ndarray, dict[str, Any]]:
    """Step 5b: boundary moves that lower the normalized cut, keeping every constraint."""
    work = merged.network
    assert merged.rules.pinned is not None
    movable = np.asarray(merged.rules.pinned < 0, dtype=bool)
    movable[merged.rules.sources] = False
    refined = refine_boundary(
        work.adjacency,
        labels,
        sizes=merged.sizes,
        min_size=merged.rules.min_size,
        max_size=merged.rules.max_size,
        movable=movable,
        rng=generator,
    )
    merged_note = (
        ", measured on the network with its dangling branches and kept links merged "
        "(the final figures count the whole network)"
        if work.n_nodes < network.n_nodes
        else ""
    )
    decision = {
        "reason": (
            "boundary moves: "
            + change_phrase(
                "the normalized cut", refined.ncut_before, refined.ncut_after, refined.moves
            )
            + f" in {count(refined.passes, 'pass')}{merged_note}"
        ),
        "ncut_before": refined.ncut_before,
        "ncut_after": refined.ncut_after,
        "moves": refined.moves,
    }
    return refined.labels, decision


def directed_record(damping: float, records: list[dict[str, Any]]) -> dict[str, Any]:
    """The damping and every stationary-distribution solve behind the directed Laplacian."""
    steps = [int(r["stationary_iterations"]) for r in records]
    worst = max((float(r["stationary_error_bound"]) for r in records), default=0.0)
    reason = (
        f"Chung's directed Laplacian of the random surfer with damping {damping:g}: "
        f"{len(records)} stationary solve(s) by power iteration, "
        f"{max(steps, default=0)} steps at most, L1 error at most {worst:.2g}"
    )
    return {"damping": damping, "reason": reason, "solves": [dict(r) for r in records]}


def summarize_methods(methods: list[dict[str, Any]]) -> dict[str, Any]:
    if len(methods) == 1:
        return methods[0]
    names = sorted({m["choice"] for m in methods})
    return {
        "choice": names[0] if len(names) == 1 else "per component",
        "reason": "; ".join(
            f"component {i}: {m['choice']} ({m['reason']})" for i, m in enumerate(methods)
        ),
    }
