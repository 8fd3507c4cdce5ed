"""``assign="auto"`` of :func:`~specgraph.zones.find_zones`, and checks of the delivered zones.

``assign="auto"`` does not guess which assignment suits a network: it runs
every one of them (:data:`COMPARED_METHODS`: k-means on normalized rows, the
pivoted-QR assignment, recursive bisection, k-means on the random-walk
coordinates) on the embedding it already has,
takes each through the same rule enforcement and boundary refinement as the
final zoning (:func:`enforce_rules`, :func:`refine_zones`), and keeps the one
with the lowest normalized cut

.. math::

    \\operatorname{NCut} = \\sum_z \\frac{\\operatorname{cut}(z)}{\\operatorname{vol}(z)}

(Shi and Malik 2000, k-way form) measured on the whole network, among those
that keep every rule. The figures of every alternative go into
``Zoning.decisions["assign"]``. Above :data:`COMPARE_MAX_WORK` the rule of
:func:`choose_assignment` decides alone.

:func:`zone_warnings` adds the warnings about the delivered zones: zones under
:data:`SMALL_ZONE_SHARE` of the network, and a zone count that differs from
the one asked for, with the reason.
"""

from __future__ import annotations

import logging
import time
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..exceptions import ConstraintError
from ..network import Network
from ._connectivity import pieces_per_zone
from ._refine import normalized_cut
from ._result import ComponentSolve
from ._stages import _ASSIGNERS, Merged, enforce_rules, refine_zones

__all__ = [
    "COMPARED_METHODS",
    "COMPARE_MAX_WORK",
    "NCUT_TIE_RTOL",
    "SMALL_ZONE_OF_AVERAGE",
    "SMALL_ZONE_SHARE",
    "TIED_RELATIVE_GAP",
    "Candidate",
    "best_assignment",
    "comparison_affordable",
    "comparison_order",
    "tied_gap_warnings",
    "zone_warnings",
]

logger = logging.getLogger(__name__)

#: Largest ``n * k`` (nodes of the network zoned, after merging, times zones)
#: at which ``assign="auto"`` compares every assignment; above it the rule of
#: :func:`choose_assignment` picks one. The comparison costs the four
#: assignments plus four enforcements and refinements; recursive bisection
#: solves ``k - 1`` eigenproblems of its own and dominates. Measured with
#: ``find_zones(net, k, rng=0)`` on the real-network benchmark's files, on the
#: shared 2-core test machine under load (seconds of the alternatives,
#: bisection's share in brackets): ky4 (964 nodes) at 8 zones 0.60 s (0.20);
#: backbone-world (3,815) at 12 zones 1.19 s (0.83); case9241pegase (9,241)
#: at 12 zones 4.25 s (3.37) -- about 40 microseconds per unit of ``n * k``.
#: The whole command must stay within 1.5 times a scikit-learn process at
#: 100,000 nodes (docs/benchmarks-real.md): at ``n * k = 400,000`` (a generated
#: road-like network of 100,000 nodes, 4 zones) comparing made it 6.7 s against
#: 3.3 s (2.0 times), while every goal cell of that benchmark (up to 9,241 nodes
#: at 12 zones) has ``n * k`` at most 111,000. 200,000 keeps those compared.
COMPARE_MAX_WORK = 200_000

#: Relative margin by which an alternative's normalized cut must beat the
#: one before it in :func:`comparison_order` to win: differences below it
#: are rounding (the cut is a sum of at most ``k`` ratios of float sums),
#: so ties go to the earlier alternative and the choice does not flip on noise.
NCUT_TIE_RTOL = 1e-9

#: Relative eigengap :math:`(\lambda_{k+1} - \lambda_k)/\lambda_{k+1}` under
#: which the gap after the zone count counts as zero even when the solve
#: resolved it: link weights are not known to six digits (a pipe's roughness,
#: a line's impedance: common practice), so a gap smaller than that is a tie
#: for the network as it really is. Exact ties measured on networkx's
#: ``ring_of_cliques`` and ``complete_graph`` come out at 2e-16 to 3e-5
#: (dense, Lanczos and multilevel solves); the gallery's road-like network of
#: 5,000 nodes has 0.33 at 8 zones.
TIED_RELATIVE_GAP = 1e-6

#: Share of the network's nodes (or node weight) under which a zone draws a
#: warning: the goal of the real-network benchmark ("no zone under 1 % of the
#: network without a warning"); such zones are usually a few nodes held by
#: links far stronger than the rest (couplers), or a dangling branch.
SMALL_ZONE_SHARE = 0.01

#: With more than ten zones every zone may hold under 1 % of the network; a
#: zone is then small when it also holds under this share of an average zone
#: (a thousand zones of 500 to 1,500 nodes drew a warning for all 1,000).
SMALL_ZONE_OF_AVERAGE = 0.1


#: The assignments ``assign="auto"`` compares: every one of the dispatch table
#: (:data:`~specgraph.zones.ASSIGNMENTS`, in its order): the three the rule of
#: :func:`choose_assignment` picks from, and k-means on the random-walk
#: coordinates (Shi and Malik 2000), which won where k-means on normalized rows
#: lost to scikit-learn on the real-network benchmark (wntr's Net6 and
#: pandapower's case3120sp at 8 zones: normalized cut 0.0514 and 0.0048 against
#: 0.0602 and 0.0057; docs/benchmarks-real.md).
COMPARED_METHODS = tuple(_ASSIGNERS)


def comparison_affordable(n_nodes: int, k: int) -> bool:
    """Whether ``assign="auto"`` compares the assignments (``n * k <= COMPARE_MAX_WORK``)."""
    return n_nodes * k <= COMPARE_MAX_WORK


def comparison_order(rule_choice: str) -> tuple[str, ...]:
    """The assignments to compare, the rule's choice first (it wins ties).

    Examples
    --------
    >>> comparison_order("bisection")
    ('bisection', 'kmeans', 'qr', 'kmeans_rw')
    """
    return (rule_choice, *(m for m in COMPARED_METHODS if m != rule_choice))


@dataclass(frozen=True, eq=False)
class Candidate:
    """One assignment taken through the rules and the refinement, with its figures."""

    method: str
    labels: np.ndarray | None
    decisions: dict[str, dict[str, Any]] = field(default_factory=dict)
    figures: dict[str, Any] = field(default_factory=dict)
    error: ConstraintError | None = None


def _figures(network: Network, labels: np.ndarray) -> dict[str, Any]:
    """Normalized cut, zone count, connected zones and smallest zone of node labels."""
    zones = int(labels.max()) + 1 if labels.size else 0
    counts = np.bincount(labels, minlength=zones)
    pieces = pieces_per_zone(network.adjacency, labels, zones)
    smallest = int(counts.min()) if zones else 0
    return {
        "ncut": normalized_cut(network.adjacency, labels),
        "zones": zones,
        "connected_zones": int(np.count_nonzero(pieces == 1)),
        "smallest_zone": smallest,
        "smallest_share": smallest / max(network.n_nodes, 1),
    }


def _candidate(
    network: Network,
    merged: Merged,
    method: str,
    raw: np.ndarray,
    *,
    refine: bool,
    rng: np.random.Generator,
    seconds: float,
) -> Candidate:
    """``raw`` (labels of the merged network) through the rules and the refinement."""
    start = time.perf_counter()
    try:
        labels, enforced = enforce_rules(merged.network, raw, merged, rng)
    except ConstraintError as error:
        figures = {"seconds": seconds + time.perf_counter() - start, "kept_rules": False}
        return Candidate(method, None, figures=figures, error=error)
    decisions = {"constraints": enforced}
    if refine:
        labels, decisions["refinement"] = refine_zones(network, merged, labels, rng)
    figures = _figures(network, labels[merged.groups])
    figures.update(kept_rules=True, seconds=seconds + time.perf_counter() - start)
    return Candidate(method, labels, decisions, figures)


def _better(new: Candidate, best: Candidate | None, asked: int) -> bool:
    """Whether ``new`` beats ``best``: rules kept, zone count nearer ``asked``, lower cut."""
    if new.labels is None:
        return False
    if best is None:
        return True
    miss_new = abs(new.figures["zones"] - asked)
    miss_best = abs(best.figures["zones"] - asked)
    if miss_new != miss_best:
        return miss_new < miss_best
    margin = NCUT_TIE_RTOL * max(abs(best.figures["ncut"]), 1e-300)
    return bool(new.figures["ncut"] < best.figures["ncut"] - margin)


def best_assignment(
    network: Network,
    merged: Merged,
    raws: dict[str, tuple[np.ndarray, float]],
    asked: int,
    *,
    refine: bool,
    rng: np.random.Generator,
    rule: dict[str, Any],
) -> tuple[Candidate, dict[str, Any]]:
    """The alternative of lowest normalized cut among those that keep every rule.

    Parameters
    ----------
    network : Network
        The whole network (the cut is measured on it).
    merged : Merged
        The network zoned, with must-stay-together nodes merged.
    raws : dict
        Labels of the merged network and the seconds they took, by method,
        in :func:`comparison_order`.
    asked : int
        Zones asked of the assignments (summed over components).
    refine, rng
        As :func:`find_zones`.
    rule : dict
        What the rule of :func:`choose_assignment` would have chosen.

    Returns
    -------
    winner : Candidate
    record : dict
        The ``"assign"`` decision: choice, reason, the rule's choice and
        every alternative's figures.

    Raises
    ------
    ConstraintError
        When no alternative keeps every rule: the first alternative's error.
    """
    tried = [
        _candidate(network, merged, m, raw, refine=refine, rng=rng, seconds=s)
        for m, (raw, s) in raws.items()
    ]
    best: Candidate | None = None
    for candidate in tried:
        if _better(candidate, best, asked):
            best = candidate
    if best is None:
        assert tried[0].error is not None
        raise tried[0].error
    alternatives = []
    for c in tried:
        figures = {key: value for key, value in c.figures.items() if key != "seconds"}
        alternatives.append(
            {"method": c.method, **figures, **({"error": str(c.error)} if c.error else {})}
        )
        # Seconds go to the log, not to the record: run.json stays the same, byte
        # for byte, for the same seed.
        logger.debug("assign=auto: %s took %.3f s", c.method, c.figures["seconds"])
    said = ", ".join(
        f"{c.method} {c.figures['ncut']:.4g}"
        if c.labels is not None
        else f"{c.method} could not keep the rules"
        for c in tried
    )
    reason = (
        f"lowest normalized cut of the {len(tried)} assignments tried on the same embedding, "
        f"each after the rules and the boundary refinement: {said}"
    )
    record = {
        "choice": best.method,
        "reason": reason,
        "rule_choice": rule.get("choice"),
        "rule_reason": rule.get("reason"),
        "alternatives": alternatives,
    }
    return best, record


def _share_phrase(share: float) -> str:
    """``'1%'``, or ``'0.01% (a tenth of an average zone)'`` with many zones."""
    if share >= SMALL_ZONE_SHARE:
        return f"{SMALL_ZONE_SHARE:.0%}"
    return f"{share * 100:.2g}% ({SMALL_ZONE_OF_AVERAGE:.0%} of an average zone)"


def zone_warnings(
    network: Network, labels: np.ndarray, asked: int, reasons: list[str]
) -> list[str]:
    """Warnings on delivered zones: tiny zones, and a count other than ``asked``.

    Parameters
    ----------
    network : Network
    labels : ndarray of int
        Final zones ``0..k-1`` of every node.
    asked : int
        The zone count asked for (after raising it to the number of
        connected components, which has its own warning).
    reasons : list of str
        What changed the count (the notes of the rule enforcement).

    Examples
    --------
    >>> from specgraph import gallery
    >>> net = gallery.path(200)
    >>> labels = np.r_[np.zeros(199, dtype=int), 1]
    >>> zone_warnings(net, labels, 3, ["zones: 3 before constraints, 2 after"])[0][:40]
    '1 of 2 zones hold under 1% of the networ'
    """
    out = []
    zones = int(labels.max()) + 1 if labels.size else 0
    nodes = np.bincount(labels, minlength=zones)
    weights = np.asarray(network.node_weights, dtype=np.float64)
    weight = np.bincount(labels, weights=weights, minlength=zones)
    total = float(weights.sum())
    # With many zones, every zone is under 1 % of the network: only those also
    # under a tenth of an average zone are small then.
    share = min(SMALL_ZONE_SHARE, SMALL_ZONE_OF_AVERAGE / max(zones, 1))
    small = (nodes < share * network.n_nodes) | (weight < share * total)
    if small.any():
        listed = ", ".join(
            f"zone {z} ({nodes[z]} nodes, {weight[z] / total:.2%} of the weight)"
            if total > 0
            else f"zone {z} ({nodes[z]} nodes)"
            for z in np.flatnonzero(small)[:5].tolist()
        )
        more = f" and {int(small.sum()) - 5} more" if small.sum() > 5 else ""
        out.append(
            f"{int(small.sum())} of {zones} zones hold under {_share_phrase(share)} of the "
            f"network's nodes or weight: {listed}{more}; such zones are often a few nodes held "
            "together by links far stronger than the rest (min_size merges them)"
        )
    if zones != asked:
        why = "; ".join(reasons) if reasons else "the assignment left some zones empty"
        out.append(f"{zones} zones delivered where {asked} were asked: {why}")
    return out


def tied_gap_warnings(solves: Sequence[ComponentSolve]) -> list[str]:
    """A warning for each solve whose eigengap after its zone count is zero.

    The zones of a component are read from its first ``k`` eigenvectors;
    when :math:`\\lambda_{k+1}` equals :math:`\\lambda_k` that subspace is not
    unique (any rotation mixing in the ``(k+1)``-th vector is as good), so the
    split is one of many of equal standing: a ring of identical cliques cut
    into two, a complete graph into any count. The gap counts as zero when it
    is within the two eigenvalues' error bounds (residual times the norm
    bound, :class:`~specgraph.eigen.EigenResult`; Parlett [1]_, chapter 4) or
    below :data:`TIED_RELATIVE_GAP` of :math:`\\lambda_{k+1}`. Solves without
    a ``(k+1)``-th pair (the multilevel path without its evidence solve) give
    no warning.

    References
    ----------
    .. [1] B. N. Parlett, "The Symmetric Eigenvalue Problem", SIAM, 1998.

    Examples
    --------
    >>> import networkx as nx
    >>> from specgraph import Network, find_zones
    >>> zoning = find_zones(Network.from_networkx(nx.complete_graph(12)), zones=3, rng=0)
    >>> tied_gap_warnings(zoning.solves)[0][:44]
    'the eigengap after 3 zones is zero (lambda_3'
    """
    out = []
    for solve in solves:
        eig, k = solve.eigen, solve.zones
        if k < 1 or eig.values.size <= k:
            continue
        lam, nxt = float(eig.values[k - 1]), float(eig.values[k])
        error = float(eig.residuals[k - 1] + eig.residuals[k]) * eig.norm_bound
        gap = nxt - lam
        if gap > error and gap > TIED_RELATIVE_GAP * abs(nxt):
            continue
        where = f" in component {solve.component}" if len(solves) > 1 else ""
        out.append(
            f"the eigengap after {k} zones is zero (lambda_{k} = {lam:.6g}, "
            f"lambda_{k + 1} = {nxt:.6g}, within their error bound {error:.2g} or "
            f"{TIED_RELATIVE_GAP:g} of lambda_{k + 1}){where}: these {k} zones are one of "
            "several splits of equal standing, chosen by the seed and the node order; "
            "a zone count followed by a clear eigengap (see the spectrum) gives a split "
            "the network itself supports, and a network with no such count has no "
            "natural split"
        )
    return out
