"""Score any zoning, whoever made it: per-zone and overall figures, outliers, eigengap.

The zoning may cover only part of the network. Nodes labelled ``-1`` are
*unassigned*: together they form one "outside" set that is **not a zone**.
Links from a zone to an unassigned node cross that zone's edge, so they count
in its boundary weight, boundary links and conductance (the zone is not closed
off from the rest of the network); links between two unassigned nodes count
nowhere. Volumes and the total link weight always refer to the whole network,
so a figure does not change when an unrelated part of the network is left
unassigned, and modularity sums over the zones only (the outside set has no
term).

Zone labels are the user's: numbers that need not start at 0 nor be
consecutive, or names of any text (a district's name, ``"DMA-07"``; ``None``
for a node in no zone), and every table keeps them as given (names listed in
sorted text order; see :mod:`specgraph._labels`). Every figure comes from the engine of
:mod:`specgraph._figures` that :func:`~specgraph.diagnostics.zone_table` uses too
(a few passes over the adjacency, no sort), so scoring costs little next to an
eigen-solve; the optional eigengap is the one costly part. ``UNASSIGNED`` is
:data:`specgraph._figures.UNASSIGNED`.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from .. import _figures
from .._figures import UNASSIGNED
from .._labels import code_labels, named
from .._validation import check_choice, check_rng, check_tol, parameter_error
from ..eigen import DEFAULT_TOL, METHODS, smallest_eigenpairs
from ..exceptions import InputError, ParameterError
from ..network import Network
from ..operators import laplacian
from ..walks import DEFAULT_DAMPING, stationary_distribution

__all__ = [
    "EXAMPLES_SHOWN",
    "OUTLIER_FIGURES",
    "OUTLIER_MIN_RATIO",
    "OUTLIER_MIN_ZONES",
    "OUTLIER_Z",
    "UNASSIGNED",
    "LabelCoverage",
    "Scorecard",
    "labels_from_mapping",
    "outlier_flags",
    "score",
]

#: How many ids an error message or a report shows as examples.
EXAMPLES_SHOWN = 5

#: Bound on the modified z-score :math:`0.6745 (x - \tilde x)/\mathrm{MAD}`
#: beyond which a value is an outlier: the value recommended by Iglewicz and
#: Hoaglin (1993), *How to Detect and Handle Outliers*, ASQC Quality Press,
#: ch. 3 (from memory for the chapter).
OUTLIER_Z = 3.5

#: A value is flagged only if it also differs from the median by at least this
#: factor. When most zones share one value the MAD is 0 and any other value has
#: an infinite z-score; an engineer does not need to hear that a zone is 10%
#: bigger than the rest (common practice: a practical-significance guard).
OUTLIER_MIN_RATIO = 2.0

#: Fewest zones with a positive value of a figure for that figure to be judged:
#: a median and a MAD of fewer values say little (common practice).
OUTLIER_MIN_ZONES = 5

#: Figures judged for outliers and the side that matters: a zone is suspect
#: when it is much worse separated (high conductance) or has many more boundary
#: links (valves, breakers, detectors) than the others, and when it is much
#: smaller or bigger.
OUTLIER_FIGURES: Mapping[str, str] = {
    "conductance": "high",
    "size": "both",
    "boundary_links": "high",
}

#: Consistency constant of the MAD: the 3/4 quantile of the standard normal,
#: so that 0.6745 (x - median)/MAD estimates a z-score for normal data.
_MAD_SCALE = 0.6745

#: Overall figures of the eigengap step, in the order of :attr:`Scorecard.overall`.
_GAP_KEYS = ("eigenvalue_k", "eigenvalue_next", "eigengap", "relative_eigengap")
#: Overall figures of the importance step, in the same order.
_IMPORTANCE_KEYS = ("damping", "importance_unassigned")


@dataclass(frozen=True)
class LabelCoverage:
    """How a node-to-zone mapping covers a network (see :func:`labels_from_mapping`).

    Attributes
    ----------
    listed : int
        Nodes in the mapping.
    unassigned : int
        Network nodes absent from the mapping (labelled ``-1``).
    unassigned_examples : tuple of str
        The first few of them, in network order.
    """

    listed: int
    unassigned: int
    unassigned_examples: tuple[str, ...]

    def as_dict(self) -> dict[str, Any]:
        """JSON-ready copy."""
        return {
            "listed": self.listed,
            "unassigned": self.unassigned,
            "unassigned_examples": list(self.unassigned_examples),
        }


@dataclass(frozen=True, eq=False)
class Scorecard:
    """Figures of a zoning (see :func:`score`).

    Attributes
    ----------
    zones : pandas.DataFrame
        One row per zone, ordered by zone number (or name, in text order),
        with columns ``zone`` (the user's number or name), ``nodes``, ``size``, ``internal_weight``,
        ``boundary_weight``, ``boundary_links``, ``conductance``,
        ``ncut_share``, ``modularity_share``, ``connected``, ``volume``,
        ``importance`` (when computed), then ``sources`` when sources were
        given, and ``flags``.
    overall : dict
        Whole-zoning figures, JSON-ready (every key always present; ``None``
        where not computed): ``zones``, ``assigned_nodes``,
        ``unassigned_nodes``, ``normalized_cut``, ``modularity``,
        ``max_conductance``, ``mean_conductance``, ``boundary_weight``,
        ``boundary_links``, ``boundary_weight_to_unassigned``,
        ``boundary_links_to_unassigned``, ``all_connected``,
        ``flagged_zones``, ``sources``, ``unassigned_sources``,
        ``zones_without_source``, ``zones_with_several_sources``,
        ``eigenvalue_k``, ``eigenvalue_next``, ``eigengap``,
        ``relative_eigengap``, ``damping``, ``importance_unassigned``.
    unassigned : ndarray of str
        Ids of the unassigned nodes, in network order.
    eigenvalues : ndarray or None
        The ``k + 1`` smallest eigenvalues of the normalized Laplacian for
        ``k`` zones, when the eigengap was computed.
    node_importance : ndarray or None
        Each node's share of the stationary distribution of the random
        surfer (sums to 1), when ``importance`` was asked for.
    """

    zones: pd.DataFrame
    overall: dict[str, Any]
    unassigned: np.ndarray
    eigenvalues: np.ndarray | None
    node_importance: np.ndarray | None = None


def labels_from_mapping(
    network: Network, mapping: Mapping[str, Any], *, path: str | Path | None = None
) -> tuple[np.ndarray, LabelCoverage]:
    """Turn a node-to-zone mapping into one label per network node.

    Parameters
    ----------
    network : Network
    mapping : mapping of str to int or str
        Node id to zone: all whole numbers (``>= 0``) or all text (a
        district's name), for example from :func:`specgraph.io.read_zone_file`.
    path : str or Path, optional
        The file the mapping came from, named in error messages.

    Returns
    -------
    labels : ndarray, shape (n_nodes,)
        Zone of each node: int64 with ``-1`` for nodes absent from the mapping
        when the zones are whole numbers; object (the text labels) with
        ``None`` for absent nodes when they are text. Every function that
        takes labels takes either.
    coverage : LabelCoverage
        How many network nodes the mapping leaves unassigned, with examples.

    Raises
    ------
    InputError
        When ids of the mapping are not network nodes (the message gives their
        number and the first few), or a zone is neither a whole number ``>= 0``
        nor non-empty text (or the zones mix the two).

    Examples
    --------
    >>> from specgraph import gallery
    >>> labels, coverage = labels_from_mapping(gallery.path(4), {"0": 7, "1": 7, "3": 2})
    >>> labels.tolist(), coverage.unassigned, coverage.unassigned_examples
    ([7, 7, -1, 2], 1, ('2',))
    >>> labels_from_mapping(gallery.path(3), {"0": "North", "1": "DMA-07"})[0].tolist()
    ['North', 'DMA-07', None]
    """
    if not mapping:
        raise InputError(
            "the zone table has no rows; give one row per node with its zone", path=path
        )
    ids = np.asarray([str(key) for key in mapping], dtype=object)
    codes, names = _mapping_codes(list(mapping.values()), path)
    rows = _rows_of(network, ids)
    unknown = np.flatnonzero(rows < 0)
    if unknown.size:
        shown = ", ".join(repr(i) for i in ids[unknown[:EXAMPLES_SHOWN]].tolist())
        raise InputError(
            f"{unknown.size} of {ids.size} node ids are not nodes of the network "
            f"(first: {shown}); check that the zones file and the edge table use the same ids",
            path=path,
        )
    labels = np.full(network.n_nodes, UNASSIGNED, dtype=np.int64)
    labels[rows] = codes
    missing = np.flatnonzero(labels == UNASSIGNED)
    coverage = LabelCoverage(
        listed=int(ids.size),
        unassigned=int(missing.size),
        unassigned_examples=tuple(network.node_ids[missing[:EXAMPLES_SHOWN]].tolist()),
    )
    return named(labels, names), coverage


def _mapping_codes(zones: list[Any], path: str | Path | None) -> tuple[np.ndarray, Any]:
    """Codes and names (:func:`specgraph._labels.code_labels`) of a mapping's zones, or the
    refusal as an :class:`InputError` naming the file."""
    try:
        return code_labels(np.asarray(zones, dtype=object), name="zones")
    except ParameterError as error:
        raise InputError(
            f"{str(error).rstrip('.')} (a zone is a whole number >= 0 or a non-empty name)",
            path=path,
        ) from None


def _check_user_labels(network: Network, labels: Any) -> tuple[np.ndarray, np.ndarray | None]:
    codes, names = code_labels(labels, n_nodes=network.n_nodes, unassigned=True)
    if not np.any(codes >= 0):
        raise InputError("labels assign no node to a zone; nothing to score")
    return codes, names


def outlier_flags(table: pd.DataFrame) -> np.ndarray:
    """Text naming the outlying figures of each zone, ``""`` for none.

    Each figure of :data:`OUTLIER_FIGURES` is judged on a log scale (sizes and
    conductances spread over orders of magnitude) by the modified z-score
    :math:`M = 0.6745\\,(\\log x - \\operatorname{median})/\\operatorname{MAD}`
    of Iglewicz and Hoaglin [1]_: a zone is flagged when :math:`|M| >`
    :data:`OUTLIER_Z` on the side that matters and its value differs from
    the median by at least a factor :data:`OUTLIER_MIN_RATIO`. Only positive
    values are judged (a zone with no boundary is a whole component, not an
    outlier), and a figure only when at least :data:`OUTLIER_MIN_ZONES` zones
    have a positive value.

    References
    ----------
    .. [1] B. Iglewicz and D. C. Hoaglin, *How to Detect and Handle Outliers*,
       ASQC Quality Press, 1993.

    Examples
    --------
    >>> t = pd.DataFrame({"conductance": [0.1] * 6 + [0.9], "size": [10.0] * 7,
    ...                   "boundary_links": [3] * 7})
    >>> outlier_flags(t).tolist()[-2:]
    ['', 'conductance high']
    """
    notes: list[list[str]] = [[] for _ in range(len(table))]
    for figure, side in OUTLIER_FIGURES.items():
        values = table[figure].to_numpy(dtype=np.float64)
        judged = values > 0
        if judged.sum() < OUTLIER_MIN_ZONES:
            continue
        logs = np.log(np.where(judged, values, 1.0))
        centre = float(np.median(logs[judged]))
        mad = float(np.median(np.abs(logs[judged] - centre)))
        offset = logs - centre
        with np.errstate(divide="ignore", invalid="ignore"):
            z = np.where(offset == 0, 0.0, _MAD_SCALE * offset / mad)
        far = judged & (np.abs(z) > OUTLIER_Z) & (np.abs(offset) >= np.log(OUTLIER_MIN_RATIO))
        for direction, hit in (("high", far & (offset > 0)), ("low", far & (offset < 0))):
            if side in (direction, "both"):
                for row in np.flatnonzero(hit).tolist():
                    notes[row].append(f"{figure} {direction}")
    return np.asarray(["; ".join(n) for n in notes], dtype=object)


def _rows_of(network: Network, ids: np.ndarray) -> np.ndarray:
    """Row of each id, ``-1`` for ids that are not network nodes (dictionary look-ups)."""
    index = network.index_of
    return np.fromiter((index.get(i, -1) for i in ids.tolist()), dtype=np.int64, count=ids.size)


def _source_rows(network: Network, sources: Sequence[str]) -> np.ndarray:
    if isinstance(sources, str):
        raise parameter_error("sources", "a sequence of node ids", sources)
    ids = np.asarray([str(s) for s in sources], dtype=object)
    rows = _rows_of(network, ids)
    unknown = ids[rows < 0]
    if unknown.size:
        shown = ", ".join(repr(i) for i in unknown[:EXAMPLES_SHOWN].tolist())
        raise InputError(f"{unknown.size} sources are not nodes of the network (first: {shown})")
    if np.unique(rows).size != rows.size:
        raise parameter_error("sources", "distinct node ids", ids.tolist())
    return rows


def _eigengap(
    network: Network, k: int, rng: Any, tol: float, method: str = "auto"
) -> tuple[np.ndarray | None, dict[str, float | None]]:
    """The ``k+1`` smallest normalized-Laplacian eigenvalues and the gap after the ``k``-th."""
    empty: dict[str, float | None] = dict.fromkeys(_GAP_KEYS)
    if k + 1 > network.n_nodes:
        return None, empty
    operator = laplacian(network, kind="normalized")
    values = smallest_eigenpairs(operator, k + 1, method=method, rng=rng, tol=tol)
    lam, nxt = float(values.values[k - 1]), float(values.values[k])
    relative = _figures.relative_gap(lam, nxt)
    return values.values.copy(), {
        "eigenvalue_k": lam,
        "eigenvalue_next": nxt,
        "eigengap": float(_figures.eigengaps(values.values)[k - 1]),
        # Relative gap, as in suggest_zone_counts; undefined when lambda_{k+1} = 0
        # (fewer zones than connected components).
        "relative_eigengap": float(relative) if np.isfinite(relative) else None,
    }


def score(
    network: Network,
    labels: Any,
    *,
    sources: Sequence[str] | None = None,
    eigengap: bool = True,
    rng: Any = None,
    tol: float = DEFAULT_TOL,
    importance: bool = True,
    damping: float = DEFAULT_DAMPING,
    eigen_method: str = "auto",
) -> Scorecard:
    """Score a zoning: per-zone and overall figures, outliers and the eigengap.

    Parameters
    ----------
    network : Network
    labels : array-like of int or str, shape (n_nodes,)
        Zone of each node, kept as given: any integers ``>= 0`` (``-1`` for a
        node in no zone), or text labels such as district names (``None``
        for a node in no zone). See the module notes for how unassigned
        nodes count.
    sources : sequence of str, optional
        Node ids of sources (feeds, substations, depots); each zone's count is
        reported, with the zones that have none or several.
    eigengap : bool, default=True
        Compute the ``k + 1`` smallest eigenvalues of the normalized Laplacian
        (``k`` the number of zones) and the gap after the ``k``-th. This is the
        one costly step; everything else is a few passes over the links.
    importance : bool, default=True
        Compute each node's importance, its share of the stationary
        distribution of the random surfer with teleportation
        (:func:`specgraph.walks.stationary_distribution`, on the arcs of a
        directed network), and each zone's sum of it (column ``importance``):
        the long-run share of time a walker following the links spends in the
        zone.
    damping : float, default=0.85
        Probability that the surfer follows a link rather than teleporting
        (:data:`specgraph.walks.DEFAULT_DAMPING`).

    Returns
    -------
    Scorecard

    Raises
    ------
    ParameterError
        For labels of the wrong shape or type, below ``-1``, empty text, or
        a mix of numbers and text.
    InputError
        When no node is assigned, or a source is not a network node.
    ConvergenceError
        When the eigen-solve misses ``tol`` (from :func:`specgraph.smallest_eigenpairs`).

    Other Parameters
    ----------------
    rng : None, int or numpy.random.Generator
        Seeds the eigen-solver's start vectors.
    tol : float, default=DEFAULT_TOL
        Scaled residual bound of the eigen-solve.
    eigen_method : {'auto', 'dense', 'lanczos', 'lanczos_flip', 'multilevel'}, default='auto'
        Solver of the eigengap's eigen-solve (the ``method`` of
        :func:`specgraph.smallest_eigenpairs`).

    Notes
    -----
    For zone :math:`z` with internal link weight :math:`w_{in}(z)`, volume
    :math:`\\operatorname{vol} z = \\sum_{i \\in z} d_i` and boundary weight
    :math:`c(z)`, and :math:`W` the total link weight of the network:

    .. math::

        Q = \\sum_z \\left[\\frac{w_{in}(z)}{W}
            - \\left(\\frac{\\operatorname{vol} z}{2W}\\right)^2\\right],
        \\qquad \\mathrm{Ncut} = \\sum_z \\frac{c(z)}{\\operatorname{vol} z},

    ``modularity_share`` is zone :math:`z`'s term of :math:`Q` (Newman and
    Girvan [1]_, weighted form Newman [2]_), ``ncut_share`` its term of Ncut
    divided by Ncut (Shi and Malik [3]_; 0 when Ncut is 0). A zone of zero
    volume adds 0 to Ncut. The relative eigengap is
    :math:`(\\lambda_{k+1} - \\lambda_k)/\\lambda_{k+1}`, read through the
    higher-order Cheeger inequality [4]_. Outliers: :func:`outlier_flags`.

    References
    ----------
    .. [1] M. E. J. Newman and M. Girvan, "Finding and evaluating community
       structure in networks", Phys. Rev. E 69, 026113, 2004,
       :doi:`10.1103/PhysRevE.69.026113`.
    .. [2] M. E. J. Newman, "Modularity and community structure in networks",
       PNAS 103(23):8577-8582, 2006, :doi:`10.1073/pnas.0601602103`.
    .. [3] J. Shi and J. Malik, "Normalized cuts and image segmentation",
       IEEE TPAMI 22(8), 2000, :doi:`10.1109/34.868688`.
    .. [4] J. R. Lee, S. Oveis Gharan and L. Trevisan, "Multiway spectral
       partitioning and higher-order Cheeger inequalities", J. ACM 61(6),
       2014, :doi:`10.1145/2665063`.

    Examples
    --------
    >>> import numpy as np
    >>> from specgraph import gallery
    >>> card = score(gallery.barbell(3), np.array([4, 4, 4, 9, 9, 9]), eigengap=False)
    >>> card.zones[["zone", "nodes", "boundary_links"]].to_numpy().tolist()
    [[4, 3, 1], [9, 3, 1]]
    >>> round(card.overall["modularity"], 6)  # 2 * (3/7 - (7/14)**2)
    0.357143
    """
    codes, names = _check_user_labels(network, labels)
    tol = check_tol(tol)
    check_choice(eigen_method, "eigen_method", METHODS)
    generator = check_rng(rng)
    assigned = codes >= 0
    numbers, coded = _with_outside_set(codes, assigned)
    k = int(numbers.size)
    if names is not None:
        numbers = names[numbers]
    figures = _figures.zone_figures(network, coded, k + 1)
    zones, terms = _zone_frame(network, numbers, figures)
    source_figures = _source_figures(network, sources, coded, k, zones)
    zones["flags"] = outlier_flags(zones)
    node_importance, importance_figures = (
        _importance(network, coded, zones, damping) if importance else (None, {})
    )
    eigenvalues, gap = (
        _eigengap(network, k, generator, tol, eigen_method) if eigengap else (None, {})
    )
    overall = {
        **_overall(network, zones, figures, terms, assigned),
        **source_figures,
        **_optional_figures(gap, importance_figures),
    }
    return Scorecard(
        zones=zones,
        overall=overall,
        unassigned=network.node_ids[~assigned].copy(),
        eigenvalues=eigenvalues,
        node_importance=node_importance,
    )


def _with_outside_set(labels: np.ndarray, assigned: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The user's zone numbers, and labels ``0..k-1`` with the outside set as label ``k``.

    Coded so, links to unassigned nodes count in each zone's boundary; the
    outside set's own figures are then set aside.
    """
    numbers, dense = np.unique(labels[assigned], return_inverse=True)
    coded = np.full(labels.size, numbers.size, dtype=np.int64)
    coded[assigned] = dense
    return numbers, coded


def _optional_figures(
    gap: Mapping[str, Any], importance_figures: Mapping[str, Any]
) -> dict[str, Any]:
    """The eigengap and importance figures, every key present, None where not computed."""
    return {
        **dict.fromkeys(_GAP_KEYS),
        **gap,
        **dict.fromkeys(_IMPORTANCE_KEYS),
        **importance_figures,
    }


def _zone_frame(
    network: Network, numbers: np.ndarray, figures: _figures.ZoneFigures
) -> tuple[pd.DataFrame, dict[str, np.ndarray]]:
    """The zone table of :func:`score` (the ``k`` zones, outside set dropped) and its terms.

    Returns the table and the per-zone terms of the normalized cut (``"ncut"``)
    and of modularity (``"modularity"``).
    """
    k = int(numbers.size)
    volume = figures.volume[:k]
    cut = figures.boundary_weight[:k]
    # Volumes refer to the whole network, unassigned nodes included.
    total_volume = network.degrees.sum()
    total_weight = float(total_volume) / 2.0
    ncut_terms = _figures.ncut_terms(cut, volume)
    ncut = float(ncut_terms.sum())
    if total_weight > 0:
        q_terms = figures.internal_weight[:k] / total_weight - (volume / (2.0 * total_weight)) ** 2
    else:
        q_terms = np.zeros(k)
    # Every entry of figures.volume (the unassigned nodes' too) is one part of
    # the network: their exclusive sums are the complements, with no subtraction.
    complement = _figures.complement_volumes(figures.volume)[:k]
    user = network.user_units  # sums written in the units given (Network.weight_exponent)
    zones = pd.DataFrame(
        {
            "zone": numbers,
            "nodes": figures.nodes[:k],
            "size": figures.size[:k],
            "internal_weight": user(figures.internal_weight[:k]),
            "boundary_weight": user(cut),
            "boundary_links": figures.boundary_links[:k],
            "conductance": _figures.conductance(cut, volume, total_volume, complement=complement),
            "ncut_share": ncut_terms / ncut if ncut > 0 else np.zeros(k),
            "modularity_share": q_terms,
            "connected": figures.connected[:k],
            "volume": user(volume),
        }
    )
    return zones, {"ncut": ncut_terms, "modularity": q_terms}


def _importance(
    network: Network, coded: np.ndarray, zones: pd.DataFrame, damping: float
) -> tuple[np.ndarray, dict[str, Any]]:
    """Node importance; adds the zones' ``importance`` column, returns the overall figures."""
    k = len(zones)
    walk = stationary_distribution(network, damping=damping)
    per_zone = np.bincount(coded, weights=walk.values, minlength=k + 1)
    zones.insert(list(zones.columns).index("volume") + 1, "importance", per_zone[:k])
    return walk.values, {"damping": walk.damping, "importance_unassigned": float(per_zone[k])}


def _overall(
    network: Network,
    zones: pd.DataFrame,
    figures: _figures.ZoneFigures,
    terms: dict[str, np.ndarray],
    assigned: np.ndarray,
) -> dict[str, Any]:
    """Whole-zoning figures of :func:`score` that come from the zone table."""
    k = len(zones)
    # Crossing links: zone-zone ones appear in two zones' boundaries, zone-outside
    # ones in one zone's boundary and in the outside row.
    # Weights in the units given (exact: a power of two, Network.weight_exponent).
    out_weight = float(network.user_units(figures.boundary_weight[k]))
    out_links = int(figures.boundary_links[k])
    return {
        "zones": k,
        "assigned_nodes": int(assigned.sum()),
        "unassigned_nodes": int(network.n_nodes - assigned.sum()),
        "normalized_cut": float(terms["ncut"].sum()),
        "modularity": float(terms["modularity"].sum()),
        "max_conductance": float(zones["conductance"].max()),
        "mean_conductance": float(zones["conductance"].mean()),
        "boundary_weight": (float(zones["boundary_weight"].sum()) + out_weight) / 2.0,
        "boundary_links": (int(zones["boundary_links"].sum()) + out_links) // 2,
        "boundary_weight_to_unassigned": out_weight,
        "boundary_links_to_unassigned": out_links,
        "all_connected": bool(zones["connected"].all()),
        "flagged_zones": int((zones["flags"] != "").sum()),
    }


def _source_figures(
    network: Network,
    sources: Sequence[str] | None,
    coded: np.ndarray,
    k: int,
    zones: pd.DataFrame,
) -> dict[str, int | None]:
    """Add the ``sources`` column to ``zones`` (when given) and return the overall counts."""
    if sources is None:
        return dict.fromkeys(
            ("sources", "unassigned_sources", "zones_without_source", "zones_with_several_sources")
        )
    counts = np.bincount(coded[_source_rows(network, sources)], minlength=k + 1)
    zones["sources"] = counts[:k]
    return {
        "sources": int(counts.sum()),
        "unassigned_sources": int(counts[k]),
        "zones_without_source": int((counts[:k] == 0).sum()),
        "zones_with_several_sources": int((counts[:k] > 1).sum()),
    }
