"""Choosing the number of zones: the eigengap read with the higher-order Cheeger inequality.

For the normalized Laplacian with eigenvalues
:math:`0 = \\lambda_1 \\le \\lambda_2 \\le \\dots`, Lee, Oveis Gharan and
Trevisan [1]_ bound the best ``k``-way conductance :math:`\\rho(k)` (the
largest conductance among ``k`` disjoint node sets, minimized over the sets) by

.. math:: \\lambda_k / 2 \\le \\rho(k) \\le O(k^2) \\sqrt{\\lambda_k}.

A small :math:`\\lambda_k` means ``k`` groups with few links between them
exist; a large :math:`\\lambda_{k+1}` means ``k + 1`` such groups do not. So
a ``k`` after which the spectrum jumps (a large ratio
:math:`\\lambda_{k+1}/\\lambda_k`) is a count the network itself suggests:
this is the eigengap heuristic of von Luxburg [2]_, section 8.3.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
import pandas as pd

from .._figures import HIGH_GAP, MEDIUM_GAP, relative_gap
from .._validation import Array, Constraint, check_int, check_param, parameter_error
from .._wording import factor_phrase
from ..exceptions import ParameterError

__all__ = [
    "DEFAULT_MAX_ZONES",
    "FIRST_PAIRS",
    "HIGH_GAP",
    "MEDIUM_GAP",
    "NCUT_CHECKED",
    "NCUT_OVERRULE",
    "SEPARATION",
    "SEPARATION_MEDIUM",
    "SPECTRUM_CEILING",
    "SPECTRUM_GROWTH",
    "ZoneCount",
    "choose_zone_count",
    "count_decided",
    "default_candidates",
    "next_pair_count",
    "parse_zone_spec",
    "why_undecided",
]

#: Largest zone count the default candidate range reaches: beyond some tens
#: of zones a spectral zoning is better asked for explicitly, and every
#: candidate costs one more eigenpair (the count needs :math:`\lambda_{k+1}`).
DEFAULT_MAX_ZONES = 50

# HIGH_GAP and MEDIUM_GAP, the relative gaps from which a count may be called
# 'high' or 'medium' confidence, are defined (and measured) in specgraph._figures,
# beside the relative gap itself, so that the report reads the same levels.

#: For ``'high'`` confidence the chosen ratio :math:`\lambda_{k+1}/\lambda_k`
#: must be at least this many times the runner-up's: two comparable jumps
#: (nested groups, say 3 regions of 2 districts) make the count ambiguous.
SEPARATION = 2.0

#: For ``'medium'`` confidence the chosen ratio must be at least this many
#: times the runner-up's. Near-planar networks show steps from their shape
#: alone (a square's second and third modes are twice the first: ratio 2 at
#: ``k = 3``) but several of similar height: measured 1.0 to 1.44 times the
#: runner-up on road-like networks and grids, so they stay ``'low'``.
SEPARATION_MEDIUM = 1.5

#: How many candidates, best by relative gap first, the normalized-cut curve
#: is evaluated at: each evaluation is a whole zoning, so the curve is read
#: where the spectrum already points rather than over the full range.
NCUT_CHECKED = 3

#: The normalized-cut curve overrules the eigengap when, at another checked
#: candidate ``j``, the per-zone cut jumps at least this many times more
#: from ``j`` to ``j + 1`` zones than from ``k`` to ``k + 1``: the curve's
#: elbow is then clearly elsewhere. Measured jumps at the planted count: 2.3
#: (4-block model) to 2.75 (ring of 6 cliques), against 1.1 to 1.55 at the
#: other candidates of the same networks and 0.97 to 1.44 on a road-like
#: network of 600 nodes (k = 2..12).
NCUT_OVERRULE = 2.0

#: Eigenpairs the zone-count search asks for first. Their eigenvalues decide
#: the count whenever :func:`count_decided` says so; otherwise the search asks
#: for twice as many, up to what the candidates need. Twelve pairs rank counts
#: up to 11, so a count they decide costs at most the count plus 10 pairs.
FIRST_PAIRS = 12

#: Upper bound on every eigenvalue of the normalized Laplacian (and of Chung's
#: directed Laplacian): :math:`\lambda \le 2`, with equality only for a
#: bipartite component (F. Chung, Spectral Graph Theory, AMS 1997, Lemma 1.7;
#: F. Chung, Annals of Combinatorics 9, 2005, for the directed one).
SPECTRUM_CEILING = 2.0

#: How much doubling the number of pairs raises the last eigenvalue computed,
#: at most, on mesh-like networks (the ones without a clear count): the path
#: P_n's spectrum :math:`2 - 2\\cos(\\pi k/n) \\approx (\\pi k/n)^2` grows as
#: :math:`k^2`, so doubling ``k`` multiplies it by 4 (closed form, Brouwer and
#: Haemers, *Spectra of Graphs*, 2012, ch. 1 (from memory)); on two-dimensional
#: meshes it grows as ``k`` (Weyl's law), by 2. With 4 the search goes straight
#: to the full solve only where doubling could not have decided.
SPECTRUM_GROWTH = 4.0

#: The search asks for all the pairs the candidates need at once when doubling
#: would reach at least this share of them: a nearly full second solve is no
#: cheaper than the full one.
FULL_SOLVE_SHARE = 0.75

_COLUMNS = [
    "zones",
    "eigenvalue",
    "next_eigenvalue",
    "gap",
    "relative_gap",
    "ratio",
    "ncut",
    "ncut_per_zone",
    "ncut_jump",
]


@dataclass(frozen=True, eq=False)
class ZoneCount:
    """A zone count chosen from the spectrum, with the evidence.

    Attributes
    ----------
    zones : int
        The chosen number of zones.
    evidence : pandas.DataFrame
        One row per ranked candidate ``k``, ascending: ``zones`` (``k``),
        ``eigenvalue`` (:math:`\\lambda_k`), ``next_eigenvalue``
        (:math:`\\lambda_{k+1}`), ``gap`` (their difference),
        ``relative_gap`` (gap over :math:`\\lambda_{k+1}`), ``ratio``
        (:math:`\\lambda_{k+1}/\\lambda_k`, infinite when
        :math:`\\lambda_k = 0`), ``ncut`` (normalized cut of the ``k``-zone
        zoning), ``ncut_per_zone`` (``ncut / k``) and ``ncut_jump``
        (per-zone cut at ``k + 1`` over that at ``k``); NaN where the curve
        was not evaluated.
    confidence : {'high', 'medium', 'low'}
        ``'high'``: relative gap at least :data:`HIGH_GAP` and ratio at least
        :data:`SEPARATION` times the runner-up's (the next largest ratio
        among the candidates); ``'medium'``: relative gap at least
        :data:`MEDIUM_GAP` and ratio at least :data:`SEPARATION_MEDIUM` times
        the runner-up's; ``'low'``: otherwise, or when the normalized-cut
        curve overruled the eigengap. ``'high'`` also when no candidate
        exceeds the number of components (zones = components, no link cut).
    reason : str
        One sentence.
    """

    zones: int
    evidence: pd.DataFrame
    confidence: str
    reason: str


def default_candidates(n_nodes: int, *, n_components: int = 1) -> range:
    """The candidate counts used when none are given: ``c+1 .. min(50, n // 2)``.

    From one more than the number of components ``c`` (``k = c`` is the
    trivial split along components, whose gap after it is always infinite)
    to :data:`DEFAULT_MAX_ZONES` or half the nodes (zones of two nodes on
    average), whichever is smaller. An eigen-solve for the count needs
    ``stop`` eigenpairs (``max + 1``).

    Examples
    --------
    >>> default_candidates(10_000)
    range(2, 51)
    >>> default_candidates(30, n_components=2)
    range(3, 16)
    """
    n_nodes = check_int(n_nodes, "n_nodes", minimum=1)
    c = check_int(n_components, "n_components", minimum=1, maximum=n_nodes)
    return range(c + 1, max(min(DEFAULT_MAX_ZONES, n_nodes // 2), c) + 1)


def _evidence(values: np.ndarray, ks: list[int]) -> pd.DataFrame:
    lam = values[np.asarray(ks, dtype=np.int64) - 1]
    nxt = values[np.asarray(ks, dtype=np.int64)]
    relative = relative_gap(lam, nxt, undefined=0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(lam > 0, nxt / lam, np.inf)
    return pd.DataFrame(
        {
            "zones": np.asarray(ks, dtype=np.int64),
            "eigenvalue": lam,
            "next_eigenvalue": nxt,
            "gap": nxt - lam,
            "relative_gap": relative,
            "ratio": ratio,
            "ncut": np.nan,
            "ncut_per_zone": np.nan,
            "ncut_jump": np.nan,
        },
        columns=_COLUMNS,
    )


def _jump(here: float, after: float, k: int) -> float:
    """Per-zone normalized cut at ``k + 1`` over that at ``k`` (inf from a zero cut)."""
    if here > 0:
        return (after / (k + 1)) / (here / k)
    return np.inf if after > 0 else 1.0


def _confidence(table: pd.DataFrame, best: int) -> str:
    gap = float(table["relative_gap"].iloc[best])
    ratio = float(table["ratio"].iloc[best])
    others = np.delete(table["ratio"].to_numpy(), best)
    runner_up = float(others.max()) if others.size else 0.0
    if not np.isfinite(runner_up):  # another candidate with lambda_k = 0
        return "low"
    if gap >= HIGH_GAP and ratio >= SEPARATION * runner_up:
        return "high"
    if gap >= MEDIUM_GAP and ratio >= SEPARATION_MEDIUM * runner_up:
        return "medium"
    return "low"


@dataclass(frozen=True)
class _CountRange(Constraint):
    """Zone counts to choose among: a non-empty range of counts >= 1."""

    description: str = "a non-empty range of zone counts >= 1"

    def accepts(self, value: Any) -> bool:
        return isinstance(value, range) and len(value) > 0 and min(value) >= 1


_COUNTS = _CountRange()

#: The spectrum a count is read from.
_SPECTRUM = Array("float", (None,), description="a 1-d array of at least 2 finite eigenvalues")


def _checked_candidates(candidates: Any, values: np.ndarray, c: int) -> list[int]:
    if candidates is None:
        top = min(DEFAULT_MAX_ZONES, values.size - 1)
        return list(range(c + 1, top + 1))
    check_param(candidates, "candidates", [_COUNTS])
    if max(candidates) >= values.size:
        expected = (
            f"at least {max(candidates) + 1} eigenvalues to rank counts up to "
            f"{max(candidates)} (each needs the next eigenvalue)"
        )
        raise parameter_error("values", expected, values, shown=str(values.size), verb="hold")
    return sorted(k for k in candidates if k > c)


def choose_zone_count(
    values: np.ndarray,
    *,
    candidates: range | None = None,
    n_components: int = 1,
    ncut_curve: Callable[[int], float] | None = None,
) -> ZoneCount:
    """Choose a number of zones from the smallest normalized-Laplacian eigenvalues.

    Parameters
    ----------
    values : ndarray
        Ascending smallest eigenvalues of the normalized Laplacian of the
        whole network, its ``n_components`` trivial zeros included.
    candidates : range, optional
        Counts to choose among, such as ``range(8, 21)`` for 8 to 20
        inclusive; needs ``max(candidates) + 1`` values. Default: from
        ``n_components + 1`` to ``min(DEFAULT_MAX_ZONES, len(values) - 1)``
        (:func:`default_candidates` sizes the eigen-solve for it).
        Counts at most ``n_components`` are never ranked: the gap after
        ``k = c`` is infinite whatever lies inside the components.
    n_components : int, default=1
        Number of connected components.
    ncut_curve : callable, optional
        ``ncut_curve(k)`` returns the normalized cut
        :math:`\\sum_z w(z, \\bar z)/\\mathrm{vol}(z)` of a ``k``-zone zoning;
        evaluated at ``k`` and ``k + 1`` for the :data:`NCUT_CHECKED` best
        candidates by eigengap (at most ``2 * NCUT_CHECKED`` calls; ``k + 1``
        may lie beyond the candidates but not beyond the node count).

    Returns
    -------
    ZoneCount

    Raises
    ------
    ParameterError
        For malformed values or candidates.

    Notes
    -----
    1. Rank the candidates by relative eigengap
       :math:`(\\lambda_{k+1} - \\lambda_k)/\\lambda_{k+1}`, that is by the
       ratio :math:`\\lambda_{k+1}/\\lambda_k` (the same order); take the
       largest, the smaller ``k`` on a tie. Relative, not absolute, gaps:
       on large near-planar networks all small eigenvalues are tiny.
    2. With a curve, read its elbow at the :data:`NCUT_CHECKED` best
       candidates: the jump :math:`J_k = (\\mathrm{Ncut}(k+1)/(k+1)) /
       (\\mathrm{Ncut}(k)/k)` of the cut per zone. Past the true count a new
       zone must cut through a group, so the cut per zone jumps there; this
       is the combinatorial side of the eigengap, whose spectral relaxation
       is Ncut [2]_ (section 5). If another checked candidate's jump is at
       least :data:`NCUT_OVERRULE` times the choice's, the curve strongly
       disagrees: take the candidate with the largest jump instead, with
       ``'low'`` confidence. The cut per zone itself is not compared: it
       grows with ``k`` on every network, so it would always favour few zones.
    3. Confidence as described in :class:`ZoneCount`.

    If no candidate exceeds the number of components ``c``, the answer is
    ``c`` zones, one per component.

    References
    ----------
    .. [1] J. R. Lee, S. Oveis Gharan and L. Trevisan, "Multiway spectral
       partitioning and higher-order Cheeger inequalities", J. ACM 61(6),
       2014, :doi:`10.1145/2665063`.
    .. [2] U. von Luxburg, "A tutorial on spectral clustering", Statistics
       and Computing 17(4), 395-416, 2007, :doi:`10.1007/s11222-007-9033-z`.

    Examples
    --------
    >>> values = np.array([0.0, 0.02, 0.03, 0.04, 0.5, 0.55, 0.6])
    >>> count = choose_zone_count(values)
    >>> count.zones, count.confidence
    (4, 'high')
    >>> count.evidence[["zones", "relative_gap"]].round(2).to_numpy().tolist()
    [[2.0, 0.33], [3.0, 0.25], [4.0, 0.92], [5.0, 0.09], [6.0, 0.08]]
    """
    spectrum = check_param(values, "values", [_SPECTRUM])
    if spectrum.size < 2:
        shown = f"shape {spectrum.shape}"
        raise parameter_error("values", _SPECTRUM.description, values, shown=shown)
    spectrum = np.sort(spectrum)
    c = check_int(n_components, "n_components", minimum=1, maximum=spectrum.size)
    ks = _checked_candidates(candidates, spectrum, c)
    if not ks:
        reason = (
            f"no candidate count exceeds the {c} connected components; "
            "one zone per component, with no link cut"
        )
        return ZoneCount(c, _evidence(spectrum, []), "high", reason)
    table = _evidence(spectrum, ks)
    # Step 1: largest relative gap, first (smallest k) on a tie.
    best = int(np.argmax(table["relative_gap"].to_numpy()))
    confidence = _confidence(table, best)
    k = ks[best]
    lam, nxt = spectrum[k - 1], spectrum[k]
    span = f"k = {ks[0]}..{ks[-1]}" if len(ks) > 1 else f"k = {ks[0]}"
    times = f"{table['ratio'].iloc[best]:.3g} times" if lam > 0 else "far above"
    reason = (
        f"lambda_{k + 1} = {nxt:.3g} is {times} lambda_{k} = {lam:.3g} "
        f"(relative gap {table['relative_gap'].iloc[best]:.2f}), the largest for {span}"
    )
    if ncut_curve is not None:
        # Step 2: the elbow of the normalized-cut curve at the best few candidates.
        checked = np.argsort(-table["relative_gap"].to_numpy(), kind="stable")[:NCUT_CHECKED]
        cache: dict[int, float] = {}

        def cut_at(zones: int) -> float:
            if zones not in cache:
                cache[zones] = float(ncut_curve(zones))
            return cache[zones]

        for row in checked.tolist():
            here, after = cut_at(ks[row]), cut_at(ks[row] + 1)
            table.loc[row, "ncut"] = here
            table.loc[row, "ncut_per_zone"] = here / ks[row]
            table.loc[row, "ncut_jump"] = _jump(here, after, ks[row])
        jumps = table["ncut_jump"].to_numpy()
        sharpest = int(np.nanargmax(jumps))
        if jumps[sharpest] >= NCUT_OVERRULE * jumps[best] and sharpest != best:
            reason += (
                f", but the normalized cut per zone {factor_phrase(jumps[sharpest])} after "
                f"k = {ks[sharpest]} against {jumps[best]:.2g} times after k = {k}, so "
                f"k = {ks[sharpest]} is taken"
            )
            best, confidence = sharpest, "low"
        else:
            reason += f"; the normalized cut per zone {factor_phrase(jumps[best])} after it"
    return ZoneCount(ks[best], table, confidence, reason)


def count_decided(values: np.ndarray, candidates: range, *, checked: int = 1) -> bool:
    """Whether the first eigenvalues already decide :func:`choose_zone_count` over ``candidates``.

    ``values`` are the ``m`` smallest eigenvalues computed so far; they rank
    the candidates ``k <= m - 1``. Every later candidate ``k >= m`` has ratio
    :math:`\\lambda_{k+1}/\\lambda_k \\le` :data:`SPECTRUM_CEILING` :math:`/
    \\lambda_m`, since eigenvalues ascend and never exceed the ceiling. When the
    ``checked`` largest ratios among the computed candidates all reach that
    bound, no later candidate can enter them. With ``checked=1`` (what
    :func:`~specgraph.find_zones` uses) the count with the largest gap is the
    full spectrum's; the runner-up behind the confidence and the
    normalized-cut check (:data:`NCUT_CHECKED` candidates) are then read among
    the computed counts. ``checked=NCUT_CHECKED`` would make the whole choice
    that of the full spectrum, but on real spectra the runners-up are small
    ratios (1.1 to 1.5) that the bound, at least 1, rarely clears. Decided
    also when every candidate is computed.

    Examples
    --------
    >>> values = np.array([0.0, 0.01, 0.012, 0.013, 0.9, 0.95, 1.0])
    >>> count_decided(values, range(2, 30), checked=1)  # 0.9/0.013 >= 2/1.0
    True
    >>> count_decided(values, range(2, 30), checked=3)  # 0.012/0.01 < 2
    False
    """
    ratios = _computed_ratios(values, candidates)
    if ratios.size == len(candidates):
        return True
    if not ratios.size or values[-1] <= 0:
        return False
    top = np.sort(ratios)[::-1][: min(checked, len(candidates))]
    return top.size == min(checked, len(candidates)) and bool(
        top.min() >= SPECTRUM_CEILING / values[-1]
    )


def why_undecided(values: np.ndarray, candidates: range) -> str:
    """Why :func:`count_decided` found ``values`` (the pairs computed) short, in figures.

    A count above ``m - 1`` (``m`` pairs computed) has a gap ratio of at most
    :data:`SPECTRUM_CEILING` over the last eigenvalue computed; the sentence
    gives the best ratio found and that bound.

    Examples
    --------
    >>> said = why_undecided(np.array([0.0, 0.1, 0.12, 0.14]), range(2, 30))
    >>> said.split(" is below ")[0]  # 0.12 / 0.1
    'the largest gap ratio of the first 4 pairs (1.2, at 2 zones)'
    >>> said.split(" is below ")[1][:31]  # 2 / 0.14
    '14.3 (2 over the 4th eigenvalue'
    """
    m = int(values.size)
    ks = [k for k in candidates if k <= m - 1]
    if not ks:
        return f"the first {m} pairs rank no candidate count"
    ratios = _computed_ratios(values, candidates)
    best = int(np.argmax(ratios))
    bound = SPECTRUM_CEILING / values[-1] if values[-1] > 0 else np.inf
    return (
        f"the largest gap ratio of the first {m} pairs ({ratios[best]:.3g}, at {ks[best]} "
        f"zones) is below {bound:.3g} (2 over the {m}th eigenvalue), the most a count above "
        f"{m - 1} could reach"
    )


def _computed_ratios(values: np.ndarray, candidates: range) -> np.ndarray:
    """Gap ratios :math:`\\lambda_{k+1}/\\lambda_k` of the candidates ``values`` can rank."""
    ks = np.asarray([k for k in candidates if k <= values.size - 1], dtype=np.int64)
    if not ks.size:
        return np.empty(0)
    lam = values[ks - 1]
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(lam > 0, values[ks] / lam, np.inf)


def next_pair_count(values: np.ndarray, needed: int, candidates: range) -> int:
    """Pairs to ask for after ``values`` (the pairs computed) left the count undecided.

    Twice as many, at most ``needed`` (all the candidates' pairs), with two
    shortcuts to the full solve, since each solve starts afresh and a solve
    that cannot decide only adds work:

    * doubling would reach :data:`FULL_SOLVE_SHARE` of ``needed``;
    * doubling cannot be expected to decide: deciding needs the largest gap
      ratio found so far to reach :data:`SPECTRUM_CEILING` over the last
      eigenvalue computed, and doubling the pairs raises that eigenvalue by at
      most about :data:`SPECTRUM_GROWTH` on mesh-like networks (the ones
      without a clear count), so a ratio below
      ``SPECTRUM_CEILING / (SPECTRUM_GROWTH * values[-1])`` will still fall
      short.

    Examples
    --------
    >>> clear = np.array([0.0, 1e-3, 2e-3, 3e-3, 0.5, *np.linspace(0.6, 0.7, 7)])
    >>> next_pair_count(clear, 51, range(2, 51))  # 0.5 / 3e-3 may clear 2 / (4 * 0.7)
    24
    >>> mesh = np.array([0.0, *np.linspace(1e-3, 1.1e-2, 11)])
    >>> next_pair_count(mesh, 51, range(2, 51))  # ratios near 1.1 < 2 / (4 * 0.011)
    51
    """
    doubled = 2 * int(values.size)
    if doubled >= FULL_SOLVE_SHARE * needed:
        return needed
    ratios = _computed_ratios(values, candidates)
    best = float(ratios.max()) if ratios.size else 0.0
    if best * SPECTRUM_GROWTH * float(values[-1]) < SPECTRUM_CEILING:
        return needed
    return min(doubled, needed)


#: What a zone count written as text may be, for the error message.
_ZONE_SPEC = (
    "a number of zones such as 12, 'auto', or a range LOW:HIGH such as 8:20 "
    "(inclusive, 2 <= LOW <= HIGH)"
)


def parse_zone_spec(text: str) -> int | Literal["auto"] | range:
    """Read a zone count written as text: ``"12"``, ``"auto"`` or ``"8:20"``.

    The text form of the ``zones`` argument of :func:`~specgraph.find_zones`
    (the command line's option takes the same text).

    Returns
    -------
    int, ``'auto'`` or range
        A range is inclusive of both ends: ``"8:20"`` gives ``range(8, 21)``.

    Raises
    ------
    ParameterError
        Naming ``zones``, what it accepts and what it received (the command
        line puts its option name in front of the same words).

    Examples
    --------
    >>> parse_zone_spec("12"), parse_zone_spec(" Auto "), parse_zone_spec("8:20")
    (12, 'auto', range(8, 21))
    """

    def fail(detail: str = "") -> ParameterError:
        return parameter_error("zones", f"{_ZONE_SPEC}{detail}", text)

    if not isinstance(text, str):
        raise fail()
    spec = text.strip()
    if spec.lower() == "auto":
        return "auto"
    if ":" in spec:
        parts = [part.strip() for part in spec.split(":")]
        if len(parts) != 2 or not all(part.isascii() and part.isdecimal() for part in parts):
            raise fail()
        low, high = int(parts[0]), int(parts[1])
        if low < 2:
            raise fail(": a range starts at 2 zones or more")
        if high < low:
            raise fail(": LOW must not exceed HIGH")
        return range(low, high + 1)
    if not (spec.isascii() and spec.isdecimal()):
        raise fail()
    zones = int(spec)
    if zones < 1:
        raise fail(": at least 1 zone")
    return zones
