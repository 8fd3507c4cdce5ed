"""Quality figures of a zoning: per-zone table, boundary links, overall scores.

Definitions, for a zone :math:`S` with complement :math:`\\bar S` in a network
of total volume :math:`\\operatorname{vol} V = \\sum_i d_i`:

.. math::

    w(S, \\bar S) = \\sum_{i \\in S, j \\notin S} a_{ij}, \\qquad
    \\operatorname{vol} S = \\sum_{i \\in S} d_i, \\qquad
    \\phi(S) = \\frac{w(S, \\bar S)}{\\min(\\operatorname{vol} S, \\operatorname{vol} \\bar S)},

and the normalized cut of a zoning :math:`S_1, \\dots, S_k` is
:math:`\\sum_z w(S_z, \\bar S_z) / \\operatorname{vol} S_z` (Shi and Malik 2000,
:doi:`10.1109/34.868688`). A zone with no boundary has conductance 0 (it is a
whole component), whatever its volume. Everything here is vectorized over links,
so it costs a few passes over the adjacency whatever the number of zones.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from ..exceptions import InputError
from ..network import Network

__all__ = ["boundary_links", "check_labels", "overall_scores", "zone_table"]


def check_labels(network: Network, labels: np.ndarray) -> np.ndarray:
    """Return ``labels`` as int64 zone numbers 0..k-1, one per node, or raise."""
    labels = np.asarray(labels)
    if labels.shape != (network.n_nodes,):
        raise InputError(
            f"labels must hold one zone per node ({network.n_nodes}); got shape {labels.shape}"
        )
    if not np.issubdtype(labels.dtype, np.integer) or (labels.size and labels.min() < 0):
        raise InputError("labels must be integers >= 0")
    return labels.astype(np.int64, copy=False)


def _link_figures(
    network: Network, labels: np.ndarray, k: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Internal weight, boundary weight, boundary link count and connectedness per zone.

    One pass over the stored links (each undirected link is stored twice, so
    internal sums are halved, and each crossing is counted once at each side).
    """
    coo = network.adjacency.tocoo()
    zi, zj = labels[coo.row], labels[coo.col]
    inside = zi == zj
    internal = np.bincount(zi[inside], weights=coo.data[inside], minlength=k) / 2.0
    boundary = np.bincount(zi[~inside], weights=coo.data[~inside], minlength=k)
    crossings = np.bincount(zi[~inside], minlength=k)
    inner = sp.csr_array(
        (coo.data[inside], (coo.row[inside], coo.col[inside])), shape=network.adjacency.shape
    )
    _, pieces = connected_components(inner, directed=False)
    pairs = np.unique(np.column_stack([labels, pieces]), axis=0)
    connected = np.bincount(pairs[:, 0], minlength=k) == 1
    return internal, boundary, crossings, connected


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
        ``connected``, then ``volume`` and ``boundary_links``. A zone number
        with no node gets a row of zeros and ``connected=False``.

    Examples
    --------
    >>> import numpy as np
    >>> from specgraph import gallery
    >>> table = zone_table(gallery.path(4), np.array([0, 0, 1, 1]))
    >>> table[["zone", "nodes", "boundary_weight", "conductance"]].to_numpy().tolist()
    [[0.0, 2.0, 1.0, 0.3333333333333333], [1.0, 2.0, 1.0, 0.3333333333333333]]
    """
    labels = check_labels(network, labels)
    k = int(labels.max()) + 1 if labels.size else 0
    nodes = np.bincount(labels, minlength=k)
    size = np.bincount(labels, weights=network.node_weights, minlength=k)
    volume = np.bincount(labels, weights=network.degrees, minlength=k)
    internal, boundary, link_counts, connected = _link_figures(network, labels, k)
    smaller = np.minimum(volume, volume.sum() - volume)
    with np.errstate(divide="ignore", invalid="ignore"):
        conductance = np.where(boundary > 0, boundary / smaller, 0.0)
    return pd.DataFrame(
        {
            "zone": np.arange(k),
            "nodes": nodes,
            "size": size,
            "internal_weight": internal,
            "boundary_weight": boundary,
            "conductance": conductance,
            "connected": connected & (nodes > 0),
            "volume": volume,
            "boundary_links": link_counts,
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
        the boundary can be joined back.
    """
    labels = check_labels(network, labels)
    table = network.link_table
    src, dst = network.link_ends
    crossing = labels[src] != labels[dst]
    out = table.loc[crossing, ["source", "target", "weight"]].copy()
    out["zone_a"] = labels[src[crossing]]
    out["zone_b"] = labels[dst[crossing]]
    rest = [c for c in table.columns if c not in ("source", "target", "weight")]
    return pd.concat([out, table.loc[crossing, rest]], axis=1).reset_index(drop=True)


def overall_scores(table: pd.DataFrame) -> dict[str, float | int | bool]:
    """Whole-zoning figures from a :func:`zone_table`.

    ``normalized_cut`` is :math:`\\sum_z w(S_z, \\bar S_z)/\\operatorname{vol} S_z`;
    ``boundary_weight`` counts each crossing link once.
    """
    vol = table["volume"].to_numpy()
    cut = table["boundary_weight"].to_numpy()
    with np.errstate(divide="ignore", invalid="ignore"):
        ncut = float(np.sum(np.where(vol > 0, cut / vol, 0.0)))
    return {
        "zones": len(table),
        "normalized_cut": ncut,
        "max_conductance": float(table["conductance"].max()) if len(table) else 0.0,
        "mean_conductance": float(table["conductance"].mean()) if len(table) else 0.0,
        "boundary_weight": float(cut.sum() / 2.0),
        "boundary_links": int(table["boundary_links"].sum() // 2),
        "all_connected": bool(table["connected"].all()),
    }
