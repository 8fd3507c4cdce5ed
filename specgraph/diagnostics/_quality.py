"""Quality figures of a zoning: per-zone table, boundary links, overall scores.

The definitions (conductance, volume, normalized cut of Shi and Malik 2000,
:doi:`10.1109/34.868688`) and the engine behind them are those of
:mod:`specgraph._figures`, shared with scoring, refinement and the report. A
zone with no boundary has conductance 0 (it is a whole component), whatever its
volume. Everything is vectorized over links, so it costs a few passes over the
adjacency whatever the number of zones.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .. import _figures
from ..exceptions import InputError
from ..network import Network

__all__ = ["boundary_links", "check_labels", "overall_scores", "zone_table"]

#: Messages of :func:`check_labels` (labels are data here: an ``InputError``).
_WORDING = _figures.LabelWording(
    shape="{name} must hold one zone per node ({n}); got shape {shape}",
    dtype="{name} must be integers >= 0",
    minimum="{name} must be integers >= 0",
)


def check_labels(network: Network, labels: np.ndarray) -> np.ndarray:
    """Return ``labels`` as int64 zone numbers 0..k-1, one per node, or raise."""
    return _figures.check_labels(
        labels, n_nodes=network.n_nodes, error=InputError, wording=_WORDING
    )


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
    figures = _figures.zone_figures(network, labels, k)
    return pd.DataFrame(
        {
            "zone": np.arange(k),
            "nodes": figures.nodes,
            "size": figures.size,
            "internal_weight": figures.internal_weight,
            "boundary_weight": figures.boundary_weight,
            # Every node is in a zone, so vol V is the sum of the zone volumes.
            "conductance": _figures.conductance(
                figures.boundary_weight, figures.volume, figures.volume.sum()
            ),
            "connected": figures.connected,
            "volume": figures.volume,
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
    ncut = float(np.sum(_figures.ncut_terms(cut, vol)))
    return {
        "zones": len(table),
        "normalized_cut": ncut,
        "max_conductance": float(table["conductance"].max()) if len(table) else 0.0,
        "mean_conductance": float(table["conductance"].mean()) if len(table) else 0.0,
        "boundary_weight": float(cut.sum() / 2.0),
        "boundary_links": int(table["boundary_links"].sum() // 2),
        "all_connected": bool(table["connected"].all()),
    }
