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
import logging
import time
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from .. import _figures
from .._progress import count_progress
from .._validation import (
    InstanceOf,
    NoneOk,
    check_int,
    check_param,
    check_positive_float,
    check_rng,
    parameter_error,
)
from ..network import Network
from ..zones import ComponentSolve, Zoning, find_zones
from ._matching import match_zones
from ._options import ZoningOptions
from ._perturb import perturb_weights, perturbation_norm

__all__ = [
    "CORE_CONFIDENCE",
    "DEFAULT_REPEATS",
    "DEFAULT_SPREAD",
    "ROTATION_WARNING",
    "UNSTABLE_CORE_SHARE",
    "Stability",
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


# ------------------------------------------------------------------ steps
def _check_reference(reference: Any, network: Network) -> Zoning | None:
    """The reference zoning, if given, checked to be a zoning of ``network``."""
    reference = check_param(reference, "reference", _REFERENCE)
    if reference is None:
        return None
    same = reference.network.n_nodes == network.n_nodes and np.array_equal(
        reference.network.node_ids, network.node_ids
    )
    if not same:
        raise parameter_error(
            "reference",
            f"a zoning of this network ({network.n_nodes} nodes, same ids in the same order)",
            reference.network,
        )
    return reference


#: What ``reference`` of :func:`stability` may be.
_REFERENCE = [InstanceOf((Zoning,), "a Zoning"), NoneOk()]


def _operator_kind(reference: Zoning) -> str:
    """The operator whose eigenvalues the reference solves hold."""
    choice = reference.decisions.get("operator", {}).get("choice")
    kind = str(choice if choice is not None else reference.parameters.get("operator", "auto"))
    return "normalized" if kind == "auto" else kind


def _merged(reference: Zoning) -> bool:
    """Whether the reference solves ran on a network with merged super-nodes."""
    trees = reference.decisions.get("trees", {}).get("choice") == "attach"
    keep = reference.parameters.get("constraints", {}).get("keep_links", 0)
    dominant = reference.decisions.get("weights", {}).get("contracted", 0)
    return bool(trees or keep or dominant)


def _davis_kahan(
    reference: Zoning, perturbed: Network, spread: float, rng: np.random.Generator
) -> tuple[pd.DataFrame, list[str]]:
    """One row per split component: gap, perturbation norm, bound; and the warnings."""
    kind, merged = _operator_kind(reference), _merged(reference)
    network = reference.network
    trunk = reference.decisions.get("trunk", {}).get("trunk_zone")
    if trunk is not None:  # the solves ran on the districts' nodes, beside the trunk
        districts = np.flatnonzero(reference.labels != trunk)
        network, perturbed = network.subnetwork(districts), perturbed.subnetwork(districts)
    rows, notes = [], []
    # The merged network of find_zones numbers its components by first node,
    # as the network does, so solve.component is a component of `network`.
    for solve in reference.solves:
        if solve.eigen.values.size <= solve.zones:
            continue  # the whole component was solved: no (k+1)-th eigenvalue
        row = _davis_kahan_row(solve, network, perturbed, kind, rng)
        rows.append({**row, "merged": merged})
        if not row["trustworthy"]:
            where = f" in component {solve.component}" if len(reference.solves) > 1 else ""
            notes.append(_davis_kahan_message(row, spread, where))
    return pd.DataFrame(rows, columns=_BOUND_COLUMNS), notes


#: Columns of :attr:`Stability.bounds`.
_BOUND_COLUMNS = [
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


def _davis_kahan_row(
    solve: ComponentSolve,
    network: Network,
    perturbed: Network,
    kind: str,
    rng: np.random.Generator,
) -> dict[str, Any]:
    """The Davis-Kahan figures of one component solve (all but ``merged``)."""
    values, k = solve.eigen.values, solve.zones
    gap = float(_figures.eigengaps(values)[k - 1])
    nodes = np.flatnonzero(network.component_labels == solve.component)
    norm = perturbation_norm(network, perturbed, kind=kind, nodes=nodes, rng=rng)
    bound = norm / gap if gap > 0 else (np.inf if norm > 0 else 0.0)
    return {
        "component": solve.component,
        "zones": k,
        "eigenvalue": float(values[k - 1]),
        "next_eigenvalue": float(values[k]),
        "eigengap": gap,
        "perturbation_norm": norm,
        "bound": bound,
        "rotation_deg": float(np.degrees(np.arcsin(min(bound, 1.0)))),
        "trustworthy": bound <= ROTATION_WARNING,
    }


def _davis_kahan_message(row: Mapping[str, Any], spread: float, where: str) -> str:
    """The warning for an untrustworthy zone count, from one row of :attr:`Stability.bounds`."""
    k, lam, nxt = row["zones"], row["eigenvalue"], row["next_eigenvalue"]
    gap, norm, bound = row["eigengap"], row["perturbation_norm"], row["bound"]
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
        f"{len(flagged)} of {len(zones)} zones {'is' if len(flagged) == 1 else 'are'} "
        "unstable (fewer than "
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


# ------------------------------------------------------------------ runs
@dataclass(frozen=True, eq=False)
class _Streams:
    """The random streams of one study, all from the caller's ``rng``.

    ``zoning`` is the reference's own stream, copied before anything draws
    from it: the perturbed runs replay it so that only the weights differ.
    The seed runs, the noise draws and the norm estimate get children
    spawned from ``rng`` (:meth:`numpy.random.Generator.spawn`), in that order.
    """

    zoning: np.random.Generator
    seeds: list[np.random.Generator]
    noise: list[np.random.Generator]
    norm: np.random.Generator

    @classmethod
    def spawn(cls, generator: np.random.Generator, repeats: int) -> _Streams:
        zoning = copy.deepcopy(generator)
        children = generator.spawn(2 * repeats + 1)
        return cls(zoning, children[:repeats], children[repeats : 2 * repeats], children[-1])

    def replay(self) -> np.random.Generator:
        """A fresh copy of the reference's stream."""
        return copy.deepcopy(self.zoning)


def _zoner(
    zones: int | str | range, options: ZoningOptions, advance: Callable[[], None]
) -> Callable[[Network, np.random.Generator], Zoning]:
    """One run: :func:`~specgraph.find_zones` with the study's options, counted and logged."""
    keywords = options.keywords()

    def zone(net: Network, stream: np.random.Generator) -> Zoning:
        start = time.perf_counter()
        result = find_zones(net, zones, rng=stream, **keywords)
        advance()
        logger.info(
            "stability run: %d zones in %.2f s", result.n_zones, time.perf_counter() - start
        )
        return result

    return zone


@dataclass(eq=False)
class _Tally:
    """What the runs so far say against the reference: stays per node, Jaccard sums, rows."""

    reference: np.ndarray
    stays: dict[str, np.ndarray]
    jaccard: np.ndarray
    records: list[dict[str, Any]] = field(default_factory=list)

    @classmethod
    def of(cls, reference: np.ndarray, n_nodes: int) -> _Tally:
        stays = {"seed": np.zeros(n_nodes), "perturbed": np.zeros(n_nodes)}
        return cls(reference, stays, np.zeros(int(reference.max()) + 1))

    def add(self, kind: str, run: Zoning) -> None:
        from sklearn.metrics import adjusted_rand_score

        match = match_zones(self.reference, run.labels)
        self.stays[kind] += match.stayed
        self.jaccard += match.jaccard
        self.records.append(
            {
                "run": len(self.records),
                "kind": kind,
                "zones": run.n_zones,
                "ari": float(adjusted_rand_score(self.reference, run.labels)),
                "stayed": float(match.stayed.mean()),
            }
        )


def _result(
    network: Network,
    reference: Zoning,
    tally: _Tally,
    bounds: pd.DataFrame,
    dk_notes: list[str],
    repeats: int,
    spread: float,
) -> Stability:
    """The per-node, per-zone and per-run tables, the summary and the warnings."""
    stays = tally.stays
    confidence = (stays["seed"] + stays["perturbed"]) / (2 * repeats)
    nodes = pd.DataFrame(
        {
            "node": network.node_ids,
            "zone": tally.reference,
            "confidence": confidence,
            "seed_confidence": stays["seed"] / repeats,
            "perturbed_confidence": stays["perturbed"] / repeats,
            "core": confidence >= CORE_CONFIDENCE,
        }
    )
    zone_frame = _zone_figures(tally.reference, confidence, tally.jaccard / (2 * repeats))
    runs = pd.DataFrame(tally.records, columns=["run", "kind", "zones", "ari", "stayed"])
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


# --------------------------------------------------------------------- entry
def stability(
    network: Network,
    zones: int | str | range = "auto",
    *,
    repeats: int = DEFAULT_REPEATS,
    spread: float = DEFAULT_SPREAD,
    zone_options: ZoningOptions | Mapping[str, Any] | None = None,
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
    zone_options : ZoningOptions or dict, optional
        Options of :func:`specgraph.find_zones` (``constraints``,
        ``operator``, ``assign``...) used by every run: a
        :class:`~specgraph.studies.ZoningOptions`, or a dict of its field
        names (not ``rng``), checked by :meth:`ZoningOptions.from_mapping`.
    reference : Zoning, optional
        The zoning to judge; when None, :func:`~specgraph.find_zones` with
        ``rng`` on the network as given (the same zoning the caller gets from
        ``find_zones(network, zones, rng=rng, **options.keywords())``).
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
    repeats = check_int(repeats, "repeats", minimum=1)
    spread = check_positive_float(spread, "spread", allow_zero=True)
    options = ZoningOptions.from_mapping(zone_options, argument="zone_options", caller="stability")
    reference = _check_reference(reference, network)
    streams = _Streams.spawn(check_rng(rng), repeats)
    runs_due = 2 * repeats + (1 if reference is None else 0)
    bounds: pd.DataFrame | None = None
    dk_notes: list[str] = []
    with count_progress(runs_due, what="stability runs", enabled=progress) as advance:
        zone = _zoner(zones, options, advance)
        if reference is None:
            reference = zone(network, streams.replay())
        tally = _Tally.of(reference.labels, network.n_nodes)
        for stream in streams.seeds:
            tally.add("seed", zone(network, stream))
        for stream in streams.noise:
            noisy = perturb_weights(network, spread=spread, rng=stream)
            if bounds is None:  # one draw is enough for the operator change
                bounds, dk_notes = _davis_kahan(reference, noisy, spread, streams.norm)
            tally.add("perturbed", zone(noisy, streams.replay()))
    assert bounds is not None  # repeats >= 1
    return _result(network, reference, tally, bounds, dk_notes, repeats, spread)
