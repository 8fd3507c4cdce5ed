"""Stability of a zoning: repeat it over seeds and over small weight perturbations.

A zoning an engineer can defend should not hinge on the random start of the
eigen-solver or k-means, nor on the third digit of a pipe's conductance. This
module measures both:

1. the *reference* zoning: :func:`~specgraph.find_zones` with the caller's seed
   on the network as given (or a zoning the caller passes in);
2. ``repeats`` *seed runs*: the same network, seeds spawned from ``rng``;
3. ``repeats`` *perturbed runs*: every link's affinity multiplied by
   :math:`\\exp(s Z)`, :math:`Z \\sim N(0, 1)` (:func:`perturb_weights`), zoned
   with the reference's own seed, so that these runs show the effect of the
   weights alone;
4. each run's zones are matched to the reference zones by maximum overlap (an
   assignment problem on the contingency table, :func:`match_zones`); a node
   *stays* when its run zone is the one matched to its reference zone;
5. per node, the *confidence* is the share of runs in which it stayed; per
   zone, the mean confidence, the share of its *core* (nodes with confidence
   at least :data:`CORE_CONFIDENCE`) and the mean Jaccard index with its
   matched zone; per run, the adjusted Rand index against the reference;
6. the Davis-Kahan check: the eigengap after the zone count, from the
   reference solve, against the measured norm of the operator's change under
   one weight perturbation (:func:`perturbation_norm`).

Cost: ``2 * repeats + 1`` calls of :func:`~specgraph.find_zones`, plus one
Lanczos estimate of a norm; the matching, tables and indices are a few passes
over the node labels per run (``np.bincount`` contingency tables), so they are
negligible next to the zonings.
"""

from __future__ import annotations

import copy
import inspect
import logging
import time
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd
import scipy.sparse as sp
from scipy.optimize import linear_sum_assignment
from scipy.sparse.linalg import ArpackNoConvergence, LinearOperator, eigsh
from sklearn.metrics import adjusted_rand_score

from .._progress import count_progress
from .._validation import check_int, check_positive_float, check_rng
from ..exceptions import ConvergenceError, ParameterError
from ..network import Network
from ..operators import laplacian

if TYPE_CHECKING:
    from ..zones import Zoning

__all__ = [
    "CORE_CONFIDENCE",
    "DEFAULT_REPEATS",
    "DEFAULT_SPREAD",
    "NORM_RTOL",
    "ROTATION_WARNING",
    "UNSTABLE_CORE_SHARE",
    "Stability",
    "ZoneMatch",
    "match_zones",
    "perturb_weights",
    "perturbation_norm",
    "stability",
]

logger = logging.getLogger(__name__)

#: Runs of each kind (seed runs, perturbed runs) by default. Each run is one
#: full :func:`~specgraph.find_zones`, so the default keeps the whole check
#: at 11 zonings; a confidence is then a share out of 10 runs, fine enough to
#: tell a solid node (10/10) from a wavering one (6/10).
DEFAULT_REPEATS = 5

#: Default log-normal spread of the weight noise: each affinity is multiplied
#: by ``exp(0.1 Z)``, about +-10 % (one standard deviation), the order of the
#: uncertainty of pipe roughness, line impedance or road capacity data
#: (common practice).
DEFAULT_SPREAD = 0.1

#: A node belongs to its zone's *core* when it stayed with the zone in at
#: least this share of the runs.
CORE_CONFIDENCE = 0.8

#: A zone is flagged *unstable* when less than this share of its nodes form
#: its core: most of the zone then changes hands between runs.
UNSTABLE_CORE_SHARE = 0.5

#: Davis-Kahan ratio ``||E|| / gap`` above which the zone count is reported
#: as not trustworthy. Past 0.5 the sin-theta reading allows a rotation of the
#: zone subspace of more than 30 degrees, and both rigorous forms of the bound
#: (``r / (1 - r)`` with Weyl's inequality, ``2 r`` of Yu, Wang and Samworth)
#: reach 1, that is, they no longer constrain the subspace at all.
ROTATION_WARNING = 0.5

#: Relative accuracy asked of the Lanczos estimate of ``||E||``: the warning
#: compares it with a threshold, so three digits are plenty.
NORM_RTOL = 1e-3

#: Below this many rows the norm is taken from a dense matrix: ARPACK needs a
#: few more rows than its Krylov basis, and a dense norm is cheaper anyway.
DENSE_NORM_ROWS = 10

#: ``find_zones`` options a caller may not pass through ``zone_options``:
#: this module sets them itself.
_RESERVED = ("network", "zones", "rng")


# ----------------------------------------------------------------- results
@dataclass(frozen=True, eq=False)
class ZoneMatch:
    """One run's zones matched to the reference zones.

    Attributes
    ----------
    mapping : ndarray of int, shape (k_ref,)
        Run zone matched to each reference zone, ``-1`` when the run has fewer
        zones and this one was left unmatched.
    stayed : ndarray of bool, shape (n_nodes,)
        Whether each node's run zone is the one matched to its reference zone.
    overlap : ndarray of int, shape (k_ref,)
        Nodes each reference zone shares with its matched run zone.
    jaccard : ndarray of float, shape (k_ref,)
        ``|S ∩ T| / |S ∪ T|`` of each reference zone ``S`` and its matched
        zone ``T`` (0 when unmatched).
    """

    mapping: np.ndarray
    stayed: np.ndarray
    overlap: np.ndarray
    jaccard: np.ndarray


@dataclass(frozen=True, eq=False)
class Stability:
    """How much a zoning moves under other seeds and perturbed weights.

    Attributes
    ----------
    nodes : pandas.DataFrame
        One row per node, in network row order: ``node`` (id), ``zone``
        (reference zone), ``confidence`` (share of all runs in which the node
        stayed with its zone), ``seed_confidence``, ``perturbed_confidence``
        (the same over each kind of run), ``core`` (confidence at least
        :data:`CORE_CONFIDENCE`).
    zones : pandas.DataFrame
        One row per reference zone: ``zone``, ``nodes``, ``confidence`` (mean
        over its nodes), ``core_share`` (share of its nodes in the core),
        ``jaccard`` (mean over runs of the Jaccard index with the matched
        zone), ``unstable`` (``core_share`` below :data:`UNSTABLE_CORE_SHARE`).
    runs : pandas.DataFrame
        One row per run: ``run``, ``kind`` (``'seed'`` or ``'perturbed'``),
        ``zones`` (zone count), ``ari`` (adjusted Rand index against the
        reference, scikit-learn), ``stayed`` (share of nodes that stayed).
    bounds : pandas.DataFrame
        Davis-Kahan check, one row per split component of the reference:
        ``component``, ``zones`` (k), ``eigenvalue`` (:math:`\\lambda_k`),
        ``next_eigenvalue`` (:math:`\\lambda_{k+1}`), ``eigengap``,
        ``perturbation_norm`` (:math:`\\|E\\|_2`), ``bound``
        (:math:`\\|E\\|/\\mathrm{gap}`, ``inf`` for a zero gap),
        ``rotation_deg`` (:math:`\\arcsin\\min(1, \\mathrm{bound})`), ``merged``
        (the solve ran on a network with merged super-nodes, so the gap and
        the norm belong to slightly different operators), ``trustworthy``.
    overall : dict
        Whole-zoning figures (JSON-ready): ``repeats``, ``spread``, ``zones``,
        ``seed_ari_mean``, ``seed_ari_min``, ``perturbed_ari_mean``,
        ``perturbed_ari_min``, ``zone_count_min``, ``zone_count_max``,
        ``mean_confidence``, ``core_share``, ``unstable_zones`` (list),
        ``eigengap``, ``perturbation_norm``, ``davis_kahan_bound`` (the
        largest :math:`\\min(1, \\|E\\|/\\mathrm{gap})` over components, None
        when no component was split), ``zone_count_trustworthy``.
    warnings : tuple of str
        Unstable zones and untrustworthy zone counts, with their figures.
    reference : Zoning
        The zoning the runs were compared with.
    """

    nodes: pd.DataFrame
    zones: pd.DataFrame
    runs: pd.DataFrame
    bounds: pd.DataFrame
    overall: dict[str, Any]
    warnings: tuple[str, ...]
    reference: Zoning


# --------------------------------------------------------------- building blocks
def perturb_weights(network: Network, *, spread: float, rng: Any = None) -> Network:
    """The network with every link's affinity multiplied by log-normal noise.

    Each undirected link gets one factor :math:`\\exp(s Z)`, :math:`Z \\sim
    N(0, 1)`, applied to both of its stored entries, so the adjacency stays
    exactly symmetric. In a directed network each arc gets its own factor and
    the arcs are kept. Node ids, sizes and coordinates are kept.

    Multiplicative noise because affinities are positive and scale-free: a
    factor keeps every weight positive (additive noise could make one zero or
    negative, which is not a link), perturbs a 0.01 and a 100 by the same
    relative amount, and does not depend on the unit the weights came in. The
    factor has median 1; its mean :math:`e^{s^2/2}` is a global scale, which
    leaves the normalized Laplacian unchanged.

    Parameters
    ----------
    network : Network
    spread : float
        Standard deviation :math:`s \\ge 0` of the log of the factor.
    rng : None, int or numpy.random.Generator

    Returns
    -------
    Network

    Examples
    --------
    >>> from specgraph import gallery
    >>> noisy = perturb_weights(gallery.ring(5), spread=0.1, rng=0)
    >>> bool((noisy.adjacency != noisy.adjacency.T).nnz == 0)
    True
    >>> noisy.adjacency.nnz == gallery.ring(5).adjacency.nnz
    True
    """
    spread = check_positive_float(spread, "spread", allow_zero=True)
    generator = check_rng(rng)
    notes = {**network.notes, "weight_noise_spread": spread}
    if network.arcs is not None:
        # A directed network: every arc (each direction of a two-way link is an arc of
        # its own) gets its factor; the adjacency is again the arcs' symmetrized sum.
        arcs = network.arcs.copy()
        arcs.data = arcs.data * np.exp(spread * generator.standard_normal(arcs.data.size))
        return Network(
            sp.csr_array(arcs + arcs.T),
            network.node_ids,
            coordinates=network.coordinates,
            sizes=network.sizes,
            notes=notes,
            arcs=arcs,
        )
    upper = sp.triu(network.adjacency, k=1, format="coo")
    data = upper.data * np.exp(spread * generator.standard_normal(upper.data.size))
    n = network.n_nodes
    adjacency = sp.coo_array(
        (
            np.concatenate([data, data]),
            (np.concatenate([upper.row, upper.col]), np.concatenate([upper.col, upper.row])),
        ),
        shape=(n, n),
    ).tocsr()
    return Network(
        adjacency,
        network.node_ids,
        coordinates=network.coordinates,
        sizes=network.sizes,
        notes=notes,
    )


def perturbation_norm(
    network: Network,
    perturbed: Network,
    *,
    kind: str = "normalized",
    nodes: np.ndarray | None = None,
    rng: Any = None,
) -> float:
    """Spectral norm of the change of a graph operator between two weightings.

    Computes :math:`\\|M(\\tilde A) - M(A)\\|_2` for the operator ``kind`` of
    :func:`specgraph.laplacian` (for ``'random_walk'``, its symmetric similar
    matrix, the one the eigen-solvers work on), restricted to the rows and
    columns ``nodes`` (a connected component: the operators are block
    diagonal in components). The difference is symmetric, so its 2-norm is
    its eigenvalue of largest magnitude, found by Lanczos (ARPACK through
    :func:`scipy.sparse.linalg.eigsh`) to :data:`NORM_RTOL`.

    Parameters
    ----------
    network, perturbed : Network
        The same nodes and links, different affinities.
    kind : str, default='normalized'
        Operator kind.
    nodes : ndarray of int, optional
        Rows to restrict to; all rows when None.
    rng : None, int or numpy.random.Generator
        Seeds the Lanczos start vector.

    Returns
    -------
    float

    Raises
    ------
    ParameterError
        When the two networks differ in size.
    ConvergenceError
        When Lanczos finds no eigenvalue at all (``partial`` is None).

    Examples
    --------
    >>> from specgraph import gallery
    >>> net = gallery.grid(4, 4)
    >>> perturbation_norm(net, net)
    0.0
    """
    if perturbed.n_nodes != network.n_nodes:
        raise ParameterError(
            f"perturbed must have the {network.n_nodes} nodes of network; "
            f"got {perturbed.n_nodes} nodes."
        )
    before = laplacian(network, kind=kind)  # type: ignore[arg-type]
    after = laplacian(perturbed, kind=kind)  # type: ignore[arg-type]
    n = network.n_nodes
    rows = np.arange(n) if nodes is None else np.asarray(nodes, dtype=np.int64)
    m = rows.size
    if before.low_rank is None and after.low_rank is None:
        diff = sp.csr_array(after.matrix - before.matrix)
        if m < n:
            diff = diff[rows][:, rows]
        if diff.nnz == 0:
            return 0.0
        operator: Any = diff
    else:

        def product(x: np.ndarray) -> np.ndarray:
            full = np.zeros((n, *x.shape[1:]))
            full[rows] = x
            return (after.apply(full) - before.apply(full))[rows]

        operator = LinearOperator((m, m), matvec=product, matmat=product, dtype=np.float64)
    if m < DENSE_NORM_ROWS:
        dense = operator.toarray() if sp.issparse(operator) else operator.matmat(np.eye(m))
        return float(np.linalg.norm(dense, 2))
    start = check_rng(rng).standard_normal(m)
    try:
        values = eigsh(
            operator, k=1, which="LM", tol=NORM_RTOL, v0=start, return_eigenvectors=False
        )
    except ArpackNoConvergence as exc:
        if not len(exc.eigenvalues):
            raise ConvergenceError(
                "perturbation_norm: Lanczos found no eigenvalue of the operator change.",
                partial=None,
            ) from exc
        values = exc.eigenvalues  # a lower bound on the norm; logged
        logger.warning("perturbation norm from a partial Lanczos run: %s", values)
    return float(np.max(np.abs(values)))


def match_zones(reference: np.ndarray, labels: np.ndarray) -> ZoneMatch:
    """Match a run's zones to reference zones by maximum total overlap.

    The contingency table :math:`C_{st} = |S_s \\cap T_t|` is built in one
    ``np.bincount``; the one-to-one matching that maximizes the total overlap
    is the linear assignment problem on it (Kuhn's Hungarian method, here
    :func:`scipy.optimize.linear_sum_assignment`). The two zonings may have
    different zone counts: the extra zones of the larger one stay unmatched.

    Parameters
    ----------
    reference, labels : ndarray of int, shape (n_nodes,)
        Zones numbered from 0.

    Returns
    -------
    ZoneMatch

    Examples
    --------
    >>> m = match_zones(np.array([0, 0, 0, 1, 1, 2]), np.array([1, 1, 0, 0, 0, 0]))
    >>> m.mapping.tolist(), m.stayed.tolist()
    ([1, 0, -1], [True, True, False, True, True, False])
    """
    reference = np.asarray(reference, dtype=np.int64)
    labels = np.asarray(labels, dtype=np.int64)
    if reference.shape != labels.shape or reference.ndim != 1:
        raise ParameterError(
            f"labels must have the shape of reference {reference.shape}; got {labels.shape}."
        )
    for name, values in (("reference", reference), ("labels", labels)):
        if values.size and values.min() < 0:
            raise ParameterError(f"{name} must hold zones >= 0; got {values.min()}.")
    k_ref = int(reference.max()) + 1 if reference.size else 0
    k_run = int(labels.max()) + 1 if labels.size else 0
    table = np.bincount(reference * k_run + labels, minlength=k_ref * k_run)
    table = table.reshape(k_ref, k_run)
    rows, cols = linear_sum_assignment(table, maximize=True)
    mapping = np.full(k_ref, -1, dtype=np.int64)
    mapping[rows] = cols
    overlap = np.zeros(k_ref, dtype=np.int64)
    overlap[rows] = table[rows, cols]
    ref_size = table.sum(axis=1)
    run_size = table.sum(axis=0)
    union = ref_size.astype(np.float64)
    union[rows] += run_size[cols] - overlap[rows]
    jaccard = np.divide(overlap, union, out=np.zeros(k_ref), where=union > 0)
    stayed = labels == mapping[reference]
    return ZoneMatch(mapping=mapping, stayed=stayed, overlap=overlap, jaccard=jaccard)


# ------------------------------------------------------------------ steps
def _check_options(zone_options: dict[str, Any] | None) -> dict[str, Any]:
    """``zone_options`` as a dict of :func:`find_zones` keyword options."""
    from ..zones import find_zones

    if zone_options is None:
        return {}
    if not isinstance(zone_options, dict):
        raise ParameterError(
            f"zone_options must be a dict of find_zones options; got {zone_options!r}."
        )
    allowed = sorted(set(inspect.signature(find_zones).parameters) - set(_RESERVED))
    for key in zone_options:
        if key in _RESERVED:
            raise ParameterError(
                f"zone_options must not hold {key!r} (stability sets it itself); "
                f"got zone_options with keys {sorted(zone_options)}."
            )
        if key not in allowed:
            raise ParameterError(
                f"zone_options keys must be find_zones options ({', '.join(allowed)}); got {key!r}."
            )
    return dict(zone_options)


def _check_reference(reference: Any, network: Network) -> Zoning:
    from ..zones import Zoning

    if not isinstance(reference, Zoning):
        raise ParameterError(f"reference must be a Zoning or None; got {type(reference)!r}.")
    same = reference.network.n_nodes == network.n_nodes and np.array_equal(
        reference.network.node_ids, network.node_ids
    )
    if not same:
        raise ParameterError(
            f"reference must be a zoning of this network ({network.n_nodes} nodes, same ids "
            f"in the same order); got a zoning of {reference.network!r}."
        )
    return reference


def _operator_kind(reference: Zoning) -> str:
    """The operator whose eigenvalues the reference solves hold."""
    choice = reference.decisions.get("operator", {}).get("choice")
    kind = str(choice if choice is not None else reference.parameters.get("operator", "auto"))
    return "normalized" if kind == "auto" else kind


def _merged(reference: Zoning) -> bool:
    """Whether the reference solves ran on a network with merged super-nodes."""
    trees = reference.decisions.get("trees", {}).get("choice") == "attach"
    keep = reference.parameters.get("constraints", {}).get("keep_links", 0)
    return bool(trees or keep)


def _davis_kahan(
    reference: Zoning, perturbed: Network, spread: float, rng: np.random.Generator
) -> tuple[pd.DataFrame, list[str]]:
    """One row per split component: gap, perturbation norm, bound; and the warnings."""
    network = reference.network
    kind = _operator_kind(reference)
    merged = _merged(reference)
    rows, notes = [], []
    # The merged network of find_zones numbers its components by first node,
    # as the network does, so solve.component is a component of `network`.
    for solve in reference.solves:
        values, k = solve.eigen.values, solve.zones
        if values.size <= k:
            continue  # the whole component was solved: no (k+1)-th eigenvalue
        lam, nxt = float(values[k - 1]), float(values[k])
        gap = max(nxt - lam, 0.0)
        nodes = np.flatnonzero(network.component_labels == solve.component)
        norm = perturbation_norm(network, perturbed, kind=kind, nodes=nodes, rng=rng)
        bound = norm / gap if gap > 0 else (np.inf if norm > 0 else 0.0)
        rotation = float(np.degrees(np.arcsin(min(bound, 1.0))))
        trustworthy = bound <= ROTATION_WARNING
        rows.append(
            {
                "component": solve.component,
                "zones": k,
                "eigenvalue": lam,
                "next_eigenvalue": nxt,
                "eigengap": gap,
                "perturbation_norm": norm,
                "bound": bound,
                "rotation_deg": rotation,
                "merged": merged,
                "trustworthy": trustworthy,
            }
        )
        if not trustworthy:
            where = f" in component {solve.component}" if len(reference.solves) > 1 else ""
            notes.append(_davis_kahan_message(k, lam, nxt, gap, norm, bound, spread, where))
    columns = [
        "component",
        "zones",
        "eigenvalue",
        "next_eigenvalue",
        "eigengap",
        "perturbation_norm",
        "bound",
        "rotation_deg",
        "merged",
        "trustworthy",
    ]
    return pd.DataFrame(rows, columns=columns), notes


def _davis_kahan_message(
    k: int, lam: float, nxt: float, gap: float, norm: float, bound: float, spread: float, where: str
) -> str:
    relation = "smaller than" if gap < norm else f"only {gap / norm:.3g} times"
    if bound >= 1:
        reach = (
            f"sin-theta bound ||E||/gap = {bound:.3g} >= 1: the zone subspace is not pinned down"
        )
    else:
        reach = (
            f"sin-theta bound ||E||/gap = {bound:.3g}: the zone subspace may rotate by up to "
            f"{np.degrees(np.arcsin(bound)):.0f} degrees"
        )
    return (
        f"eigengap {gap:.3g} after {k} zones{where} (lambda_{k} = {lam:.6g}, "
        f"lambda_{k + 1} = {nxt:.6g}) is {relation} the perturbation {norm:.3g} of "
        f"{100 * spread:.3g}% weight noise (Davis-Kahan {reach}): the zone count is not "
        "trustworthy"
    )


def _zone_figures(
    reference: np.ndarray, confidence: np.ndarray, jaccard: np.ndarray
) -> pd.DataFrame:
    """Per-zone mean confidence, core share, mean Jaccard and the unstable flag."""
    k = jaccard.size
    count = np.bincount(reference, minlength=k)
    mean = np.bincount(reference, weights=confidence, minlength=k) / count
    core = np.bincount(reference, weights=confidence >= CORE_CONFIDENCE, minlength=k) / count
    return pd.DataFrame(
        {
            "zone": np.arange(k),
            "nodes": count,
            "confidence": mean,
            "core_share": core,
            "jaccard": jaccard,
            "unstable": core < UNSTABLE_CORE_SHARE,
        }
    )


def _unstable_message(zones: pd.DataFrame) -> str:
    flagged = zones.loc[zones["unstable"], "zone"].tolist()
    listed = ", ".join(str(z) for z in flagged)
    return (
        f"{len(flagged)} of {len(zones)} zones are unstable (fewer than "
        f"{UNSTABLE_CORE_SHARE:.0%} of their nodes stay with them in at least "
        f"{CORE_CONFIDENCE:.0%} of the runs): zone{'s' if len(flagged) > 1 else ''} {listed}"
    )


def _summary(
    runs: pd.DataFrame,
    nodes: pd.DataFrame,
    zones: pd.DataFrame,
    bounds: pd.DataFrame,
    repeats: int,
    spread: float,
) -> dict[str, Any]:
    seed = runs.loc[runs["kind"] == "seed", "ari"]
    noisy = runs.loc[runs["kind"] == "perturbed", "ari"]
    worst = bounds.iloc[int(np.argmax(bounds["bound"].to_numpy()))] if len(bounds) else None
    return {
        "repeats": repeats,
        "spread": spread,
        "zones": len(zones),
        "seed_ari_mean": float(seed.mean()),
        "seed_ari_min": float(seed.min()),
        "perturbed_ari_mean": float(noisy.mean()),
        "perturbed_ari_min": float(noisy.min()),
        "zone_count_min": int(runs["zones"].min()),
        "zone_count_max": int(runs["zones"].max()),
        "mean_confidence": float(nodes["confidence"].mean()),
        "core_share": float(nodes["core"].mean()),
        "unstable_zones": zones.loc[zones["unstable"], "zone"].tolist(),
        "eigengap": None if worst is None else float(worst["eigengap"]),
        "perturbation_norm": None if worst is None else float(worst["perturbation_norm"]),
        "davis_kahan_bound": None if worst is None else float(min(worst["bound"], 1.0)),
        "zone_count_trustworthy": bool(bounds["trustworthy"].all()),
    }


# --------------------------------------------------------------------- entry
def stability(
    network: Network,
    zones: int | str | range = "auto",
    *,
    repeats: int = DEFAULT_REPEATS,
    spread: float = DEFAULT_SPREAD,
    zone_options: dict[str, Any] | None = None,
    reference: Zoning | None = None,
    rng: Any = None,
    progress: bool = False,
) -> Stability:
    """Repeat a zoning over seeds and perturbed weights; per-node confidence and warnings.

    Parameters
    ----------
    network : Network
    zones : int, 'auto' or range, default='auto'
        Zone count, as for :func:`specgraph.find_zones`; every run uses it
        (with ``'auto'`` runs may choose different counts).
    repeats : int, default=5
        Runs of each kind: ``repeats`` with other seeds, ``repeats`` with
        perturbed weights (:data:`DEFAULT_REPEATS`). The cost is
        ``2 * repeats + 1`` zonings (one fewer with ``reference``).
    spread : float, default=0.1
        Log-normal spread of the weight noise (:func:`perturb_weights`,
        :data:`DEFAULT_SPREAD`); 0 makes the perturbed runs repeat the
        reference.
    zone_options : dict, optional
        Keyword options of :func:`specgraph.find_zones` (``constraints``,
        ``operator``, ``assign``...) used by every run; not ``rng``.
    reference : Zoning, optional
        The zoning to judge; when None, :func:`~specgraph.find_zones` with
        ``rng`` on the network as given (the same zoning the caller gets from
        ``find_zones(network, zones, rng=rng, **zone_options)``).
    rng : None, int or numpy.random.Generator
        Seeds everything: the reference, the seeds of the seed runs (spawned
        with :meth:`numpy.random.Generator.spawn`), the noise, and the
        Lanczos start of the norm estimate. Perturbed runs reuse the
        reference's seed, so they show the effect of the weights alone.
    progress : bool, default=False
        Show a bar over the runs on standard error (tqdm).

    Returns
    -------
    Stability

    Raises
    ------
    ParameterError
        For an option outside its domain, an unknown or reserved key in
        ``zone_options``, or a reference of another network.
    ConstraintError, ConvergenceError
        As raised by :func:`specgraph.find_zones` in any run.

    Notes
    -----
    *Matching.* Zone numbers are arbitrary, so each run's zones are matched
    to the reference's by maximum total overlap (:func:`match_zones`). A node
    *stays* when it lies in the run zone matched to its reference zone; its
    confidence is the share of runs in which it stays. The per-zone Jaccard
    index of a zone and its match follows Hennig's cluster-wise stability
    assessment [3]_ (which resamples nodes; here seeds and weights change).

    *Davis-Kahan.* Let :math:`M` be the operator of the reference solve and
    :math:`\\tilde M = M + E` that of a perturbed network. The sin-theta
    theorem [1]_ bounds the rotation of the subspace of the :math:`k`
    smallest eigenvectors, the embedding the zones come from:

    .. math::

        \\|\\sin\\Theta(V_k, \\tilde V_k)\\|_2 \\lesssim
        \\frac{\\|E\\|_2}{\\lambda_{k+1} - \\lambda_k} .

    (Rigorously, with Weyl's inequality the bound is :math:`r/(1-r)` for
    :math:`r = \\|E\\|/\\mathrm{gap} < 1`, and Yu, Wang and Samworth's variant
    [2]_ gives :math:`2r`; both reach 1 at :math:`r = 1/2`.) ``||E||`` is
    measured on one perturbed draw (:func:`perturbation_norm`); the gap comes
    from the reference solve. A ratio above :data:`ROTATION_WARNING` means
    that noise of the given spread can move the embedding by more than the
    gap protects: the zone count, and the zones, may be an artefact. The
    bound is a worst case over perturbations; the measured adjusted Rand
    indices of the perturbed runs are the empirical counterpart. When the
    reference attached dangling trees or kept links (``merged``), the solve
    ran on the merged network and the norm is measured on the full one: the
    ratio is then an estimate.

    References
    ----------
    .. [1] C. Davis and W. M. Kahan, "The rotation of eigenvectors by a
       perturbation. III", SIAM J. Numer. Anal. 7(1):1-46, 1970.
       :doi:`10.1137/0707001`
    .. [2] Y. Yu, T. Wang and R. J. Samworth, "A useful variant of the
       Davis-Kahan theorem for statisticians", Biometrika 102(2):315-323,
       2015. :doi:`10.1093/biomet/asv008`
    .. [3] C. Hennig, "Cluster-wise assessment of cluster stability",
       Comput. Stat. Data Anal. 52(1):258-271, 2007.
       :doi:`10.1016/j.csda.2006.11.025`
    .. [4] L. Hubert and P. Arabie, "Comparing partitions", J. Classif.
       2:193-218, 1985 (the adjusted Rand index). :doi:`10.1007/BF01908075`

    Examples
    --------
    >>> from specgraph import gallery
    >>> result = stability(gallery.barbell(5), 2, repeats=2, rng=0)
    >>> result.nodes["confidence"].tolist()
    [1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0]
    >>> result.overall["seed_ari_mean"], result.warnings
    (1.0, ())
    """
    from ..zones import find_zones

    repeats = check_int(repeats, "repeats", minimum=1)
    spread = check_positive_float(spread, "spread", allow_zero=True)
    options = _check_options(zone_options)
    if reference is not None:
        reference = _check_reference(reference, network)
    generator = check_rng(rng)
    # The reference's own stream, copied before anything draws from it: the
    # perturbed runs replay it so that only the weights differ.
    zoning_stream = copy.deepcopy(generator)
    children = generator.spawn(2 * repeats + 1)
    seed_streams, noise_streams, norm_stream = (
        children[:repeats],
        children[repeats : 2 * repeats],
        children[-1],
    )

    runs_due = 2 * repeats + (1 if reference is None else 0)
    with count_progress(runs_due, what="stability runs", enabled=progress) as advance:

        def zone(net: Network, stream: np.random.Generator) -> Zoning:
            start = time.perf_counter()
            result = find_zones(net, zones, rng=stream, **options)
            advance()
            logger.info(
                "stability run: %d zones in %.2f s", result.n_zones, time.perf_counter() - start
            )
            return result

        if reference is None:
            reference = zone(network, copy.deepcopy(zoning_stream))
        ref_labels = reference.labels
        k_ref = int(ref_labels.max()) + 1
        stays = {"seed": np.zeros(network.n_nodes), "perturbed": np.zeros(network.n_nodes)}
        jaccard = np.zeros(k_ref)
        records: list[dict[str, Any]] = []
        bounds: pd.DataFrame | None = None
        dk_notes: list[str] = []

        def record(kind: str, run: Zoning) -> None:
            match = match_zones(ref_labels, run.labels)
            stays[kind] += match.stayed
            jaccard[:] += match.jaccard
            records.append(
                {
                    "run": len(records),
                    "kind": kind,
                    "zones": run.n_zones,
                    "ari": float(adjusted_rand_score(ref_labels, run.labels)),
                    "stayed": float(match.stayed.mean()),
                }
            )

        for stream in seed_streams:
            record("seed", zone(network, stream))
        for stream in noise_streams:
            noisy = perturb_weights(network, spread=spread, rng=stream)
            if bounds is None:
                bounds, dk_notes = _davis_kahan(reference, noisy, spread, norm_stream)
            record("perturbed", zone(noisy, copy.deepcopy(zoning_stream)))

    assert bounds is not None  # repeats >= 1

    confidence = (stays["seed"] + stays["perturbed"]) / (2 * repeats)
    nodes = pd.DataFrame(
        {
            "node": network.node_ids,
            "zone": ref_labels,
            "confidence": confidence,
            "seed_confidence": stays["seed"] / repeats,
            "perturbed_confidence": stays["perturbed"] / repeats,
            "core": confidence >= CORE_CONFIDENCE,
        }
    )
    zone_frame = _zone_figures(ref_labels, confidence, jaccard / (2 * repeats))
    runs = pd.DataFrame(records, columns=["run", "kind", "zones", "ari", "stayed"])
    warnings = ([_unstable_message(zone_frame)] if zone_frame["unstable"].any() else []) + dk_notes
    return Stability(
        nodes=nodes,
        zones=zone_frame,
        runs=runs,
        bounds=bounds,
        overall=_summary(runs, nodes, zone_frame, bounds, repeats, spread),
        warnings=tuple(warnings),
        reference=reference,
    )
