"""``find_zones``: from a network to a zoning that keeps the user's rules, with its evidence.

Steps (each a function of its own module, called in this order):

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

Each automatic choice is recorded in :attr:`Zoning.decisions` with its reason.
"""

from __future__ import annotations

import logging
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
import pandas as pd

from .._figures import boundary_links, eigengaps, overall_scores, zone_table
from .._validation import check_choice, check_int, check_rng
from ..eigen import DEFAULT_TOL, METHODS, EigenResult, smallest_eigenpairs
from ..exceptions import ParameterError
from ..network import Network
from ..operators import laplacian
from ..walks import DEFAULT_DAMPING, check_damping
from ._allocate import allocate_zones
from ._assign import bisection_labels, choose_assignment, kmeans_labels, qr_labels
from ._constraints import (
    ResolvedConstraints,
    ZoneConstraints,
    contract_constraints,
    contract_links,
    enforce_constraints,
)
from ._count import choose_zone_count, default_candidates, parse_zone_spec
from ._embedding import normalized_rows
from ._operator import NORMALIZED_LIKE, OPERATOR_KINDS, choose_operator
from ._readonly import read_only
from ._refine import normalized_cut, refine_boundary
from ._trees import MIN_TREE_SHARE, core_and_trees, trees_worth_stripping

__all__ = [
    "ASSIGNMENTS",
    "NORMALIZED_LIKE",
    "OPERATOR_KINDS",
    "TREE_TREATMENTS",
    "ComponentSolve",
    "Zoning",
    "find_zones",
    "number_by_size",
]

logger = logging.getLogger(__name__)

#: Assignment methods (besides ``"auto"``).
ASSIGNMENTS = ("kmeans", "qr", "bisection")
#: Treatments of dangling trees (besides ``"auto"``).
TREE_TREATMENTS = ("attach", "keep")

#: Components with more nodes than this pick the pivoted-QR assignment among
#: sampled rows (Damle, Minden and Ying's randomized variant): the full
#: pivoted QR of a 200 x 1,000,000 block took 43 s here.
QR_SAMPLE_ROWS = 200_000


@dataclass(frozen=True, eq=False)
class ComponentSolve:
    """The eigen-solve of one connected component (of the merged network).

    ``nodes`` and the eigen-solve's arrays are read-only views.
    """

    component: int
    nodes: np.ndarray
    zones: int
    eigen: EigenResult

    def __post_init__(self) -> None:
        eig = self.eigen
        object.__setattr__(self, "nodes", read_only(np.asarray(self.nodes)))
        frozen = {
            name: read_only(getattr(eig, name)) for name in ("values", "vectors", "residuals")
        }
        object.__setattr__(self, "eigen", replace(eig, **frozen))

    def __setstate__(self, state: dict[str, Any]) -> None:
        # Unpickling skips __post_init__ and gives writable arrays: freeze them again.
        self.__dict__.update(state)
        self.__post_init__()


@dataclass(frozen=True, eq=False)
class Zoning:
    """A zoning of a network and the evidence behind it.

    Attributes
    ----------
    network : Network
    labels : ndarray of int, shape (n_nodes,)
        Zone of each node; zones numbered ``0..k-1`` by descending size
        (node count, or summed node size when the network has sizes).
    zones : pandas.DataFrame
        Per-zone figures (:func:`specgraph.diagnostics.zone_table`).
    boundary : pandas.DataFrame
        Links between zones (:func:`specgraph.diagnostics.boundary_links`).
    solves : tuple of ComponentSolve
        The eigen-solve of every component that was split.
    scores : dict
        Whole-zoning figures (:func:`specgraph.diagnostics.overall_scores`).
    parameters : dict
        The options used.
    decisions : dict
        Each choice made on the user's behalf or each step that changed the
        zones: ``{"operator": {...}, "zone_count": {...}, ...}``, every entry
        with a ``"reason"`` sentence and its figures.
    warnings : tuple of str
        What the user should know (components, raised zone counts...).

    Notes
    -----
    A zoning is read-only, not only its attributes: ``labels`` (and the
    arrays of :attr:`solves`) are read-only views, so ``zoning.labels[0] = 7``
    raises ``ValueError``; ``scores``, ``parameters`` and ``decisions`` (and
    the dicts and lists inside them) refuse changes with ``TypeError``. The
    records are ``dict`` and ``list`` subclasses, so they read, compare and
    serialize (``json.dumps``, :func:`specgraph.export.run_record`) like
    plain ones; to change one, copy it first (``dict(zoning.parameters)``,
    ``zoning.labels.copy()``). The tables ``zones`` and ``boundary`` are
    pandas DataFrames, which cannot be made read-only: treat them as such
    and work on ``.copy()``.
    """

    network: Network
    labels: np.ndarray
    zones: pd.DataFrame
    boundary: pd.DataFrame
    solves: tuple[ComponentSolve, ...]
    scores: dict[str, Any]
    parameters: dict[str, Any]
    decisions: dict[str, dict[str, Any]] = field(default_factory=dict)
    warnings: tuple[str, ...] = field(default=())

    def __post_init__(self) -> None:
        object.__setattr__(self, "labels", read_only(np.asarray(self.labels)))
        for name in ("scores", "parameters", "decisions"):
            object.__setattr__(self, name, read_only(dict(getattr(self, name))))
        object.__setattr__(self, "solves", tuple(self.solves))
        object.__setattr__(self, "warnings", tuple(self.warnings))

    def __setstate__(self, state: dict[str, Any]) -> None:
        # Unpickling skips __post_init__ and gives writable arrays: freeze them again.
        self.__dict__.update(state)
        self.__post_init__()

    @property
    def n_zones(self) -> int:
        return len(self.zones)

    def to_frame(self) -> pd.DataFrame:
        """``node, zone`` table, in network row order."""
        return pd.DataFrame({"node": self.network.node_ids, "zone": self.labels})

    def spectrum(self) -> pd.DataFrame:
        """Eigenvalues and scaled residuals of every component solve.

        Columns ``index`` (0 for the smallest pair of the component),
        ``eigenvalue``, ``residual``, ``component``, ``gap_after`` (distance to
        the next eigenvalue; empty for the last).
        """
        frames = []
        for solve in self.solves:
            values = solve.eigen.values
            gaps = np.append(eigengaps(values), np.nan)
            frames.append(
                pd.DataFrame(
                    {
                        "index": np.arange(values.size),
                        "eigenvalue": values,
                        "residual": solve.eigen.residuals,
                        "component": solve.component,
                        "gap_after": gaps,
                    }
                )
            )
        columns = ["index", "eigenvalue", "residual", "component", "gap_after"]
        return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame(columns=columns)


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


# ------------------------------------------------------------------ steps
@dataclass(frozen=True, eq=False)
class _Merged:
    """The network with must-stay-together nodes merged into super-nodes."""

    network: Network
    groups: np.ndarray
    rules: ResolvedConstraints
    sizes: np.ndarray


def _tree_pairs(
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


def _merge(network: Network, rules: ResolvedConstraints, pairs: np.ndarray) -> _Merged:
    """Merge the ends of ``pairs`` (and carry the constraints onto super-nodes)."""
    contraction = contract_links(network.adjacency, pairs)
    merged_rules = contract_constraints(contraction, rules)
    groups = contraction.groups
    if contraction.n_groups == network.n_nodes:
        return _Merged(network, groups, merged_rules, rules.sizes)
    first = np.full(contraction.n_groups, network.n_nodes, dtype=np.int64)
    np.minimum.at(first, groups, np.arange(network.n_nodes))
    sizes = contraction.sum_nodes(rules.sizes)
    # Arcs are contracted with the same groups (arcs inside a group vanish,
    # parallel arcs add up), so the merged network keeps its direction.
    arcs = None if network.arcs is None else contract_links(network.arcs, pairs).adjacency
    work = Network(contraction.adjacency, network.node_ids[first], sizes=sizes, arcs=arcs)
    return _Merged(work, groups, merged_rules, sizes)


def _slice(result: EigenResult, count: int) -> EigenResult:
    """The first ``count`` pairs of a result."""
    return replace(
        result,
        values=result.values[:count],
        vectors=result.vectors[:, :count],
        residuals=result.residuals[:count],
    )


@dataclass(frozen=True)
class _SolveOptions:
    kind: str
    method: str
    tol: float
    maxiter: int | None
    rng: np.random.Generator
    damping: float | None = None
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


def _choose_count(
    work: Network, spec: int | str | range, rules: ResolvedConstraints, solver: _SolveOptions
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
    result = normalized.solve(work, max(candidates) + 1)
    vectors = result.vectors

    def curve(k: int) -> float:
        labels = qr_labels(vectors[:, :k], k)
        return normalized_cut(work.adjacency, labels)

    choice = choose_zone_count(
        result.values, candidates=candidates, n_components=c, ncut_curve=curve
    )
    record = {
        "choice": choice.zones,
        "confidence": choice.confidence,
        "reason": choice.reason + (f" (counts {bounded})" if bounded else ""),
        "evidence": choice.evidence.to_dict(orient="records"),
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


def _zones_per_component(work: Network, k: int) -> tuple[np.ndarray, list[str]]:
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


def _assign_component(
    sub: Network, k: int, assign: str, solver: _SolveOptions, known: EigenResult | None
) -> tuple[np.ndarray, EigenResult, dict[str, Any]]:
    """Zones ``0..k-1`` of one connected component, its eigen-solve, the method's reason."""
    eig = _slice(known, k + 1) if known is not None and known.k > k else solver.solve(sub, k + 1)
    if k >= sub.n_nodes:
        # As many zones as nodes: one node per zone, nothing to choose.
        labels = np.arange(sub.n_nodes, dtype=np.int64)
        return labels, eig, {"choice": "one node per zone", "reason": "as many zones as nodes"}
    if assign == "auto":
        if solver.kind in NORMALIZED_LIKE:
            picked = choose_assignment(
                eig.values, eig.vectors, k, sample=sub.n_nodes > QR_SAMPLE_ROWS, rng=solver.rng
            )
            method, reason = picked.method, picked.reason
        else:
            method, reason = "kmeans", f"k-means is the assignment for the {solver.kind} operator"
    else:
        method, reason = assign, "asked"
    vectors = eig.vectors[:, :k]
    if method == "qr":
        labels = qr_labels(vectors, k, sample=sub.n_nodes > QR_SAMPLE_ROWS, rng=solver.rng)
    elif method == "bisection":
        labels = bisection_labels(
            sub,
            k,
            eigen_method=solver.method,
            tol=solver.tol,
            maxiter=solver.maxiter,
            rng=solver.rng,
        )
    elif solver.kind == "bethe_hessian":
        labels = kmeans_labels(vectors, k, solver.rng)
    else:
        labels = kmeans_labels(normalized_rows(vectors), k, solver.rng)
    return np.asarray(labels, dtype=np.int64), eig, {"choice": method, "reason": reason}


def _check_spec(zones: Any, n: int) -> int | str | range:
    if isinstance(zones, str):
        spec = parse_zone_spec(zones)
    elif isinstance(zones, range):
        spec = zones
        if len(spec) == 0 or spec.step != 1 or spec.start < 2:
            raise ParameterError(
                f"zones as a range must be consecutive counts from 2 up; got {zones!r}."
            )
    else:
        spec = check_int(zones, "zones", minimum=1, maximum=max(n, 1))
    if isinstance(spec, range) and spec.start > n:
        raise ParameterError(f"zones range must start at most at n_nodes={n}; got {zones!r}.")
    if isinstance(spec, range):
        spec = range(spec.start, min(spec.stop, n + 1))
    return spec


def find_zones(
    network: Network,
    zones: int | str | range = "auto",
    *,
    operator: str = "auto",
    assign: str = "auto",
    trees: str = "auto",
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
        within it. With sources and ``'auto'``, one zone per source. An
        int below the number of connected components is raised to it (with
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
    assign : {'auto', 'kmeans', 'qr', 'bisection'}, default='auto'
        How embedded nodes become zones: k-means on normalized rows (Ng,
        Jordan and Weiss 2001), the pivoted-QR assignment (Damle, Minden and
        Ying 2019), or recursive Fiedler sweep cuts (each with the Cheeger
        guarantee). ``'auto'``: :func:`choose_assignment`.
    trees : {'auto', 'attach', 'keep'}, default='auto'
        ``'attach'`` zones the network without its dangling trees and gives
        each tree the zone of the node it hangs from; ``'auto'`` does so when
        :func:`trees_worth_stripping` says it is worth it.
    constraints : ZoneConstraints, optional
        Size bounds, sources, links that must not be cut, fixed zones, and
        connectivity (default: every zone connected, nothing else).
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
    spec, damping, generator = _checked_options(
        network, zones, operator, assign, trees, eigen_method, refine, damping, rng
    )
    stage = progress if progress is not None else _no_progress
    rules = (constraints if constraints is not None else ZoneConstraints()).resolve(network)
    decisions: dict[str, dict[str, Any]] = {}
    stage("solving")

    # Steps 2-3: merge what must stay together, choose the operator and the count.
    k_hint = spec if isinstance(spec, int) else (max(spec) if isinstance(spec, range) else 2)
    tree_pairs, decisions["trees"] = _tree_pairs(network, rules, trees, k_hint)
    merged = _merge(network, rules, np.concatenate([rules.keep_pairs, tree_pairs]))
    work = merged.network
    choice = choose_operator(
        operator, directed=network.directed, trees_attached=tree_pairs.size > 0
    )
    decisions["operator"] = choice.as_decision()
    solver = _SolveOptions(choice.kind, eigen_method, tol, maxiter, generator, damping)
    k, decisions["zone_count"], known = _choose_count(work, spec, merged.rules, solver)
    per_component, notes = _zones_per_component(work, min(k, work.n_nodes))

    # Step 4: solve, embed and assign each component.
    raw, solves, methods = _zone_components(work, per_component, assign, solver, known)
    if methods:
        decisions["assign"] = _summarize_methods(methods)
    if choice.kind == "directed":
        decisions["directed"] = _directed_record(damping, solver.records)

    # Step 5: the user's rules, then boundary refinement.
    stage("constraints")
    labels_w, decisions["constraints"] = _enforce(work, raw, merged, generator)
    if refine:
        stage("refining")
        labels_w, decisions["refinement"] = _refine(network, merged, labels_w, generator)

    # Step 6: back to nodes, numbered by size, with the zone table and boundary.
    labels = number_by_size(labels_w[merged.groups], network.node_weights)
    table = zone_table(network, labels)
    parameters = {
        "zones": spec if not isinstance(spec, range) else f"{spec.start}:{spec.stop - 1}",
        "operator": operator,
        "assign": assign,
        "trees": trees,
        "refine": refine,
        "constraints": _constraint_record(rules),
        "eigen_method": eigen_method,
        "tol": tol,
        "maxiter": maxiter,
        **({"damping": damping} if choice.kind == "directed" else {}),
    }
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


def _checked_options(
    network: Network,
    zones: Any,
    operator: str,
    assign: str,
    trees: str,
    eigen_method: str,
    refine: Any,
    damping: float,
    rng: Any,
) -> tuple[int | str | range, float, np.random.Generator]:
    """Step 1 of :func:`find_zones`: every option checked; the zone spec, damping and rng."""
    if network.n_nodes == 0:
        raise ParameterError("network must have at least one node; got an empty network.")
    spec = _check_spec(zones, network.n_nodes)
    check_choice(operator, "operator", ("auto", *OPERATOR_KINDS))
    check_choice(assign, "assign", ("auto", *ASSIGNMENTS))
    check_choice(trees, "trees", ("auto", *TREE_TREATMENTS))
    check_choice(eigen_method, "eigen_method", METHODS)
    if not isinstance(refine, bool):
        raise ParameterError(f"refine must be True or False; got {refine!r}.")
    damping = check_damping(damping)
    if operator == "directed" and not network.directed:
        raise ParameterError(
            "operator='directed' needs a directed network (read with directed=True, which "
            "keeps the arcs); got an undirected network."
        )
    return spec, damping, check_rng(rng)


def _zone_components(
    work: Network,
    per_component: np.ndarray,
    assign: str,
    solver: _SolveOptions,
    known: EigenResult | None,
) -> tuple[np.ndarray, list[ComponentSolve], list[dict[str, Any]]]:
    """Step 4: zones of every component, numbered consecutively, with their solves."""
    raw = np.zeros(work.n_nodes, dtype=np.int64)
    solves, methods = [], []
    offset = 0
    for comp, k_c in enumerate(per_component.tolist()):
        rows = np.flatnonzero(work.component_labels == comp)
        if k_c > 1:
            sub = work if rows.size == work.n_nodes else work.subnetwork(rows)
            local, eig, method = _assign_component(sub, k_c, assign, solver, known)
            solves.append(ComponentSolve(comp, rows, k_c, eig))
            methods.append(method)
            raw[rows] = local + offset
        else:
            raw[rows] = offset
        offset += k_c
    return raw, solves, methods


def _enforce(
    work: Network, raw: np.ndarray, merged: _Merged, generator: np.random.Generator
) -> tuple[np.ndarray, dict[str, Any]]:
    """Step 5a: the constraints enforced on the merged network, and what that changed."""
    enforced = enforce_constraints(work.adjacency, raw, merged.rules, rng=generator)
    decision = {
        "reason": "; ".join(enforced.notes) if enforced.notes else "no change was needed",
        "notes": list(enforced.notes),
        "moved": enforced.moved,
    }
    return enforced.labels, decision


def _refine(
    network: Network, merged: _Merged, labels: np.ndarray, generator: np.random.Generator
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
            f"boundary moves lowered the normalized cut from {refined.ncut_before:.4g} "
            f"to {refined.ncut_after:.4g} ({refined.moves} moves, {refined.passes} "
            f"passes){merged_note}"
        ),
        "ncut_before": refined.ncut_before,
        "ncut_after": refined.ncut_after,
        "moves": refined.moves,
    }
    return refined.labels, decision


def _no_progress(stage: str) -> None:
    """Stand-in for ``progress=None``: stages pass silently."""


def _directed_record(damping: float, records: list[dict[str, Any]]) -> dict[str, Any]:
    """The damping and every stationary-distribution solve behind the directed Laplacian."""
    steps = [int(r["stationary_iterations"]) for r in records]
    worst = max((float(r["stationary_error_bound"]) for r in records), default=0.0)
    reason = (
        f"Chung's directed Laplacian of the random surfer with damping {damping:g}: "
        f"{len(records)} stationary solve(s) by power iteration, "
        f"{max(steps, default=0)} steps at most, L1 error at most {worst:.2g}"
    )
    return {"damping": damping, "reason": reason, "solves": [dict(r) for r in records]}


def _summarize_methods(methods: list[dict[str, Any]]) -> dict[str, Any]:
    if len(methods) == 1:
        return methods[0]
    names = sorted({m["choice"] for m in methods})
    return {
        "choice": names[0] if len(names) == 1 else "per component",
        "reason": "; ".join(
            f"component {i}: {m['choice']} ({m['reason']})" for i, m in enumerate(methods)
        ),
    }


def _constraint_record(rules: ResolvedConstraints) -> dict[str, Any]:
    assert rules.pinned is not None
    return {
        "min_size": rules.min_size,
        "max_size": rules.max_size,
        "sources": int(rules.sources.size),
        "keep_links": len(rules.keep_pairs),
        "fixed_nodes": int(np.count_nonzero(rules.pinned >= 0)),
        "connected": rules.connected,
    }
