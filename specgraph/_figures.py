"""Zone figures shared by zoning, diagnostics and the report: one label check, one engine.

Every per-zone figure of specgraph comes from here, so that
:func:`~specgraph.diagnostics.zone_table`, :func:`~specgraph.diagnostics.score`,
boundary refinement (:func:`~specgraph.zones.normalized_cut`), the zone-count
curve and the report agree to the bit. For a zone :math:`S` with complement
:math:`\\bar S`:

.. math::

    w(S, \\bar S) = \\sum_{i \\in S, j \\notin S} a_{ij}, \\qquad
    \\operatorname{vol} S = \\sum_{i \\in S} d_i, \\qquad
    \\phi(S) = \\frac{w(S, \\bar S)}
                   {\\min(\\operatorname{vol} S, \\operatorname{vol} V - \\operatorname{vol} S)},

and the normalized cut of a zoning is :math:`\\sum_z w(S_z, \\bar S_z) /
\\operatorname{vol} S_z` (Shi and Malik 2000, :doi:`10.1109/34.868688`; k-way
form of Dhillon, Guan and Kulis 2007, :doi:`10.1109/TPAMI.2007.1115`). A zone
with no boundary has conductance 0 and a zone of zero volume adds 0 to the cut.

The engine makes one pass over the stored links of the CSR adjacency (each
undirected link is stored twice: internal sums are halved, a crossing link is
counted once at each end). A zone is connected when the links inside it join
all its nodes: each piece of the network cut along zone changes lies in one
zone, so counting pieces per zone needs no sort.

Boundary links are **physical links**: the rows of the network's link table
(:attr:`Network.link_table`, one per input link) whose two ends lie in
different zones, so parallel links (two pipes or lines between the same two
nodes, which the adjacency sums into one entry) count as what they are and
every count equals the rows of :func:`boundary_links` (``boundary.csv``). The
count of distinct node pairs across zones, what the summed adjacency sees, is
kept beside it under its own name, ``boundary_node_pairs``.

This is a shared low-level module: it imports only numpy, scipy, pandas, the
validation module and the network, never a pipeline stage, so every stage may
use it.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from ._validation import parameter_error

if TYPE_CHECKING:
    from .network import Network

__all__ = [
    "HIGH_GAP",
    "MEDIUM_GAP",
    "UNASSIGNED",
    "ZoneFigures",
    "boundary_links",
    "check_labels",
    "check_zone_labels",
    "complement_volumes",
    "conductance",
    "cut_and_volume",
    "eigengaps",
    "ncut_terms",
    "normalized_cut",
    "overall_scores",
    "physical_boundary_links",
    "relative_gap",
    "zone_figures",
    "zone_table",
]

#: Label of a node that belongs to no zone.
UNASSIGNED = -1

#: Relative gap :math:`(\lambda_{k+1} - \lambda_k)/\lambda_{k+1}` from which a
#: count may be called ``'high'`` confidence: :math:`\lambda_{k+1} \ge 2.5
#: \lambda_k`. Block models with a clear planted structure (3 to 6 blocks)
#: measured 0.67 to 0.84 at the planted count (tests/test_count.py).
HIGH_GAP = 0.6

#: Relative gap from which a count may be called ``'medium'`` confidence:
#: :math:`\lambda_{k+1} \ge 1.43 \lambda_k`. Below it the spectrum rises with
#: no clear step and the count is ``'low'`` confidence.
MEDIUM_GAP = 0.3


# -------------------------------------------------------------- label check
def check_labels(
    labels: Any,
    *,
    n_nodes: int | None = None,
    name: str = "labels",
    unassigned: bool = False,
    copy: bool = False,
) -> np.ndarray:
    """Return ``labels`` as int64 zone numbers, one per node, or raise a ``ParameterError``.

    The one label check of specgraph: every function that takes labels
    (scoring, zone tables, comparison, refinement, the constraint steps,
    zone matching, the report's colours) refuses the same labels with the
    same :class:`~specgraph.exceptions.ParameterError` and the same words
    (labels read from a file are checked where the file is read, naming its
    line). The checks, in order: the shape (``(n_nodes,)``, or
    one-dimensional when ``n_nodes`` is None), an integer dtype (an empty
    array passes whatever its dtype), and no label below 0 (below
    :data:`UNASSIGNED` with ``unassigned=True``).

    Parameters
    ----------
    labels : array-like of int
    n_nodes : int, optional
        Expected length; any length of a one-dimensional array when None.
    name : str, default='labels'
        Argument name used in the messages.
    unassigned : bool, default=False
        Accept :data:`UNASSIGNED` (``-1``) for a node in no zone.
    copy : bool, default=False
        Always return a new array (otherwise int64 input is returned as is).

    Returns
    -------
    ndarray of int64

    Raises
    ------
    ParameterError
        Naming ``name``, what was expected and what was received (the
        shape, the dtype or the smallest label).

    Examples
    --------
    >>> check_labels([2, 0, -1], n_nodes=3, unassigned=True).tolist()
    [2, 0, -1]
    >>> check_labels([0, 1], n_nodes=3)
    Traceback (most recent call last):
    ...
    specgraph.exceptions.ParameterError: labels must hold one zone per node (3); got shape (2,).
    """
    array = np.asarray(labels)
    if n_nodes is None and array.ndim != 1:
        raise parameter_error(name, "one-dimensional", labels, shown=f"shape {array.shape}")
    if n_nodes is not None and array.shape != (n_nodes,):
        expected = f"one zone per node ({n_nodes})"
        raise parameter_error(name, expected, labels, shown=f"shape {array.shape}", verb="hold")
    if array.size and not np.issubdtype(array.dtype, np.integer):
        expected = "integers, one zone number per node"
        raise parameter_error(name, expected, labels, shown=f"dtype {array.dtype}", verb="hold")
    floor = UNASSIGNED if unassigned else 0
    if array.size and array.min() < floor:
        expected = "zone numbers >= 0" + (f", or {UNASSIGNED} for unassigned" if unassigned else "")
        shown = str(int(array.min()))
        raise parameter_error(name, expected, labels, shown=shown, verb="hold")
    return array.astype(np.int64, copy=copy)


# ------------------------------------------------------------------- engine
@dataclass(frozen=True, eq=False)
class ZoneFigures:
    """Per-zone sums of a zoning, one entry per label ``0..count-1`` (see :func:`zone_figures`).

    Attributes
    ----------
    nodes : ndarray of int
        Nodes in the zone.
    size : ndarray of float
        Sum of node sizes (the network's ``node_weights``).
    volume : ndarray of float
        Sum of weighted degrees.
    internal_weight : ndarray of float
        Weight of the links with both ends in the zone.
    boundary_weight : ndarray of float
        Weight of the links with one end in the zone (the cut).
    boundary_links : ndarray of int
        Number of physical links (rows of the network's link table) with one
        end in the zone: parallel links count one each.
    boundary_node_pairs : ndarray of int
        Number of distinct node pairs with one end in the zone and a link
        between them (parallel links merged, as in the adjacency).
    connected : ndarray of bool
        The links inside the zone join all its nodes (False for an empty zone).
    """

    nodes: np.ndarray
    size: np.ndarray
    volume: np.ndarray
    internal_weight: np.ndarray
    boundary_weight: np.ndarray
    boundary_links: np.ndarray
    connected: np.ndarray
    boundary_node_pairs: np.ndarray


def cut_and_volume(
    adjacency: sp.csr_array, labels: np.ndarray, count: int
) -> tuple[np.ndarray, np.ndarray]:
    """Cut :math:`w(S_z, \\bar S_z)` and volume of every label, degrees from ``adjacency``.

    ``adjacency`` is a checked float CSR array and ``labels`` int64 in
    ``0..count-1`` (see :func:`check_labels`).
    """
    degree = np.asarray(adjacency.sum(axis=1)).ravel()
    rows = np.repeat(labels, np.diff(adjacency.indptr))  # label of each entry's row
    cross = rows != labels[adjacency.indices]
    cut = np.bincount(rows[cross], weights=adjacency.data[cross], minlength=count)
    return cut, np.bincount(labels, weights=degree, minlength=count)


def zone_figures(network: Network, labels: np.ndarray, count: int) -> ZoneFigures:
    """Every per-zone sum of ``labels`` (int64 in ``0..count-1``), one pass over the links.

    Examples
    --------
    >>> from specgraph import gallery
    >>> figures = zone_figures(gallery.path(4), np.array([0, 0, 1, 1]), 2)
    >>> figures.internal_weight.tolist(), figures.boundary_weight.tolist()
    ([1.0, 1.0], [1.0, 1.0])
    """
    adjacency = network.adjacency
    n = network.n_nodes
    rows = np.repeat(np.arange(n, dtype=np.int64), np.diff(adjacency.indptr))
    zi, zj = labels[rows], labels[adjacency.indices]
    inside = zi == zj
    data = adjacency.data
    per_row = np.bincount(rows[inside], minlength=n)
    inner = sp.csr_array(
        (data[inside], adjacency.indices[inside], np.concatenate([[0], np.cumsum(per_row)])),
        shape=(n, n),
    )
    n_pieces, pieces = connected_components(inner, directed=False)
    piece_label = np.empty(n_pieces, dtype=np.int64)
    piece_label[pieces] = labels
    nodes = np.bincount(labels, minlength=count)
    return ZoneFigures(
        nodes=nodes,
        size=np.bincount(labels, weights=network.node_weights, minlength=count),
        volume=np.bincount(labels, weights=network.degrees, minlength=count),
        internal_weight=np.bincount(zi[inside], weights=data[inside], minlength=count) / 2.0,
        boundary_weight=np.bincount(zi[~inside], weights=data[~inside], minlength=count),
        boundary_links=physical_boundary_links(network, labels, count),
        connected=(np.bincount(piece_label, minlength=count) == 1) & (nodes > 0),
        boundary_node_pairs=np.bincount(zi[~inside], minlength=count),
    )


def _crossing_rows(network: Network, labels: np.ndarray) -> tuple[np.ndarray, ...]:
    """Rows of the link table joining two zones, and the row indices of their two ends.

    A row naming a node the network does not hold (possible only in a table
    handed to the constructor by hand) joins nothing and is left out.
    """
    src, dst = network.link_ends
    known = (src >= 0) & (dst >= 0)
    crossing = np.zeros(src.size, dtype=bool)
    crossing[known] = labels[src[known]] != labels[dst[known]]
    return crossing, src[crossing], dst[crossing]


def physical_boundary_links(network: Network, labels: np.ndarray, count: int) -> np.ndarray:
    """Physical links (rows of the link table) leaving each zone ``0..count-1``.

    The per-zone count behind every boundary-link figure (module notes): a
    link between zones ``a`` and ``b`` counts once in each, so the zones'
    sum is twice the rows of :func:`boundary_links`.

    Examples
    --------
    >>> from specgraph import Network
    >>> net = Network.from_links(["a", "a", "b"], ["b", "b", "c"])  # two parallel a-b links
    >>> physical_boundary_links(net, np.array([0, 1, 1]), 2).tolist()
    [2, 2]
    """
    _, a, b = _crossing_rows(network, labels)
    ends = np.concatenate([labels[a], labels[b]])
    return np.bincount(ends, minlength=count)


def conductance(
    cut: np.ndarray,
    volume: np.ndarray,
    total_volume: float,
    *,
    complement: np.ndarray | None = None,
) -> np.ndarray:
    """Conductance :math:`\\phi(S)` of every zone (module notes), 0 for a zone without a cut.

    ``total_volume`` is :math:`\\operatorname{vol} V`, the whole network's.
    ``complement`` is :math:`\\operatorname{vol} V - \\operatorname{vol} S` of
    every zone when known without a subtraction (:func:`complement_volumes`);
    otherwise it is ``total_volume - volume``.

    Examples
    --------
    >>> conductance(np.array([1.0, 0.0]), np.array([3.0, 3.0]), 6.0).tolist()
    [0.3333333333333333, 0.0]
    """
    rest = total_volume - volume if complement is None else complement
    smaller = np.minimum(volume, rest)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(cut > 0, cut / smaller, 0.0)


def complement_volumes(volume: np.ndarray) -> np.ndarray:
    """The sum of the *other* entries of ``volume``, for each entry, without a subtraction.

    ``total - volume`` loses every digit when one zone holds nearly all the
    volume (a link 1e17 times heavier than the rest: 2e17 + 28 - 2e17 is 32 or
    0 in float64, and a conductance came out infinite). Exclusive prefix plus
    suffix sums keep them. Give every part of the network (nodes in no zone
    too) an entry.

    Examples
    --------
    >>> complement_volumes(np.array([2e17, 14.0, 14.0])).tolist()
    [28.0, 2e+17, 2e+17]
    """
    volume = np.asarray(volume, dtype=np.float64)
    if not volume.size:
        return volume
    before = np.concatenate([[0.0], np.cumsum(volume)[:-1]])
    after = np.concatenate([np.cumsum(volume[::-1])[-2::-1], [0.0]])
    return before + after


def ncut_terms(cut: np.ndarray, volume: np.ndarray) -> np.ndarray:
    """Each zone's term :math:`w(S_z, \\bar S_z)/\\operatorname{vol} S_z` of the normalized cut.

    Zones of zero volume give 0.

    Examples
    --------
    >>> ncut_terms(np.array([1.0, 1.0, 0.0]), np.array([7.0, 7.0, 0.0])).round(4).tolist()
    [0.1429, 0.1429, 0.0]
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(volume > 0, cut / volume, 0.0)


def normalized_cut(adjacency: sp.csr_array, labels: np.ndarray) -> float:
    """Normalized cut of ``labels`` (int64 ``>= 0``) on a checked float CSR ``adjacency``.

    The sum of :func:`ncut_terms`, volumes from the row sums of ``adjacency``.

    Examples
    --------
    >>> from specgraph import gallery
    >>> round(normalized_cut(gallery.barbell(3).adjacency, np.array([0, 0, 0, 1, 1, 1])), 6)
    0.285714
    """
    count = int(labels.max()) + 1 if labels.size else 0
    cut, volume = cut_and_volume(adjacency, labels, count)
    return float(np.sum(ncut_terms(cut, volume)))


# ------------------------------------------------------------ zone tables
def check_zone_labels(network: Network, labels: np.ndarray) -> np.ndarray:
    """Return ``labels`` as int64 zone numbers 0..k-1, one per node, or raise.

    The check of :func:`zone_table` (public as
    :func:`specgraph.diagnostics.check_labels`): :func:`check_labels` with
    the network's node count.
    """
    return check_labels(labels, n_nodes=network.n_nodes)


def zone_table(network: Network, labels: np.ndarray) -> pd.DataFrame:
    """Per-zone figures of a zoning.

    Parameters
    ----------
    network : Network
    labels : ndarray of int, shape (n_nodes,)
        Zone of each node, numbered from 0.

    Returns
    -------
    pandas.DataFrame
        One row per zone ``0..k-1`` with columns ``zone``, ``nodes``, ``size``
        (sum of node sizes, or nodes when the network has none),
        ``internal_weight``, ``boundary_weight``, ``conductance``,
        ``connected``, then ``volume`` and ``boundary_links`` (physical
        links leaving the zone, parallel links one each, as in
        :func:`boundary_links`). A zone number with no node gets a row of
        zeros and ``connected=False``.

    Examples
    --------
    >>> import numpy as np
    >>> from specgraph import gallery
    >>> table = zone_table(gallery.path(4), np.array([0, 0, 1, 1]))
    >>> table[["zone", "nodes", "boundary_weight", "conductance"]].to_numpy().tolist()
    [[0.0, 2.0, 1.0, 0.3333333333333333], [1.0, 2.0, 1.0, 0.3333333333333333]]
    """
    labels = check_zone_labels(network, labels)
    k = int(labels.max()) + 1 if labels.size else 0
    figures = zone_figures(network, labels, k)
    # Conductance at the network's scale; the sums in the units given (exact:
    # a power of two, see Network.weight_exponent).
    user = network.user_units
    return pd.DataFrame(
        {
            "zone": np.arange(k),
            "nodes": figures.nodes,
            "size": figures.size,
            "internal_weight": user(figures.internal_weight),
            "boundary_weight": user(figures.boundary_weight),
            # Every node is in a zone, so vol V is the sum of the zone volumes.
            "conductance": conductance(
                figures.boundary_weight,
                figures.volume,
                figures.volume.sum(),
                complement=complement_volumes(figures.volume),
            ),
            "connected": figures.connected,
            "volume": user(figures.volume),
            "boundary_links": figures.boundary_links,
        }
    )


def boundary_links(network: Network, labels: np.ndarray) -> pd.DataFrame:
    """Every input link whose two ends lie in different zones.

    Returns
    -------
    pandas.DataFrame
        Columns ``source``, ``target``, ``weight`` (affinity), ``zone_a``,
        ``zone_b`` (zones of source and target), then any columns carried
        from the input link table (for example a pipe id), in input order.
        Repeated input links appear once per input row, so every asset on
        the boundary can be joined back; the ``boundary_links`` of
        :func:`zone_table` and :func:`overall_scores` count these rows.
    """
    labels = check_zone_labels(network, labels)
    table = network.link_table
    crossing, src, dst = _crossing_rows(network, labels)
    out = table.loc[crossing, ["source", "target", "weight"]].copy()
    out["zone_a"] = labels[src]
    out["zone_b"] = labels[dst]
    rest = [c for c in table.columns if c not in ("source", "target", "weight")]
    return pd.concat([out, table.loc[crossing, rest]], axis=1).reset_index(drop=True)


def overall_scores(table: pd.DataFrame) -> dict[str, float | int | bool]:
    """Whole-zoning figures from a :func:`zone_table`.

    ``normalized_cut`` is :math:`\\sum_z w(S_z, \\bar S_z)/\\operatorname{vol} S_z`;
    ``boundary_weight`` counts each crossing link once; ``boundary_links`` is
    the number of physical links between zones, the rows of
    :func:`boundary_links` (``boundary.csv``), parallel links counted one each.
    """
    vol = table["volume"].to_numpy()
    cut = table["boundary_weight"].to_numpy()
    ncut = float(np.sum(ncut_terms(cut, vol)))
    return {
        "zones": len(table),
        "normalized_cut": ncut,
        "max_conductance": float(table["conductance"].max()) if len(table) else 0.0,
        "mean_conductance": float(table["conductance"].mean()) if len(table) else 0.0,
        "boundary_weight": float(cut.sum() / 2.0),
        "boundary_links": int(table["boundary_links"].sum() // 2),
        "all_connected": bool(table["connected"].all()),
    }


# ----------------------------------------------------------------- eigengap
def eigengaps(values: np.ndarray) -> np.ndarray:
    """Gaps :math:`\\lambda_{i+1} - \\lambda_i` between consecutive sorted eigenvalues.

    ``gaps[k-1]`` is the gap after the ``k``-th smallest eigenvalue: a large
    gap there says the network has ``k`` well-separated groups, by the
    higher-order Cheeger inequality :math:`\\lambda_k/2 \\le \\rho(k) \\le
    O(k^2)\\sqrt{\\lambda_k}` (Lee, Oveis Gharan and Trevisan, J. ACM 61(6), 2014,
    :doi:`10.1145/2665063`).

    Examples
    --------
    >>> eigengaps(np.array([0.0, 0.01, 0.02, 0.5])).round(2).tolist()
    [0.01, 0.01, 0.48]
    """
    values = np.sort(np.asarray(values, dtype=np.float64))
    return np.diff(values)


def relative_gap(lower: Any, upper: Any, *, undefined: float = np.nan) -> np.ndarray:
    """Relative eigengap :math:`(\\lambda_{k+1} - \\lambda_k)/\\lambda_{k+1}`, elementwise.

    Relative rather than absolute, since on large near-planar networks every
    small eigenvalue is tiny. Undefined (``undefined``) where
    :math:`\\lambda_{k+1} \\le 0`, that is with fewer zones than connected
    components.

    Examples
    --------
    >>> relative_gap(np.array([0.01, 0.0]), np.array([0.3, 0.0]), undefined=0.0).round(4).tolist()
    [0.9667, 0.0]
    """
    lower = np.asarray(lower, dtype=np.float64)
    upper = np.asarray(upper, dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(upper > 0, (upper - lower) / upper, undefined)
