"""Layouts of result tables written by more than one command: one definition each.

``spectrum.csv`` is written by ``specgraph zones`` (one block per component
solve) and by ``specgraph spectrum`` (one solve of the whole network);
``boundary.csv`` and ``zone_summary.csv`` by ``zones``, ``refine`` and
``demo``. Their layouts are built here, so that every command (and the
Python results that hold the same figures) agree column for column.

**Eigenvalue numbering.** specgraph numbers eigenvalues from 1, in ascending
order, everywhere: files (the ``index`` column of ``spectrum.csv``),
messages (``lambda_9 = ...``), the report and the documentation. So
:math:`\\lambda_1 = 0` is the trivial eigenvalue of a connected network, and
``k`` zones are read from the gap after :math:`\\lambda_k`, between
:math:`\\lambda_k` and :math:`\\lambda_{k+1}`, as in the higher-order Cheeger
inequality (Lee, Oveis Gharan and Trevisan, J. ACM 61(6), 2014,
:doi:`10.1145/2665063`) and F. Chung, *Spectral Graph Theory*, AMS 1997
(who number from 0; we follow Lee et al. and von Luxburg, "A tutorial on
spectral clustering", Statistics and Computing 17, 2007,
:doi:`10.1007/s11222-007-9033-z`).

**Boundary order.** ``boundary.csv`` lists links by zone pair (the smaller
zone id of the two ends first, then the larger), then by weight, strongest
first, then in input order: the links between two zones come together, the
ones that matter most (the strongest ties cut) first.

This is a shared low-level module: it imports only numpy, pandas and
:mod:`specgraph._figures`, so every stage may use it.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from ._figures import eigengaps

__all__ = [
    "FIRST_EIGENVALUE_INDEX",
    "SPECTRUM_COLUMNS",
    "SUPPLY_SEPARATOR",
    "ordered_boundary",
    "spectrum_frame",
    "supply_columns",
]

#: Number of the smallest eigenvalue in files and messages (see the module notes).
FIRST_EIGENVALUE_INDEX = 1
#: The columns of every ``spectrum.csv``, in order.
SPECTRUM_COLUMNS = ("index", "eigenvalue", "residual", "component", "gap_after")
#: Between the ids of several supply points of one zone in ``zone_summary.csv``.
SUPPLY_SEPARATOR = ";"


def spectrum_frame(
    values: np.ndarray, residuals: np.ndarray, *, component: int | None
) -> pd.DataFrame:
    """One solve's rows of ``spectrum.csv`` (:data:`SPECTRUM_COLUMNS`).

    Parameters
    ----------
    values, residuals : ndarray
        Eigenvalues in ascending order and their scaled residuals.
    component : int or None
        The connected component the solve covers; None for a solve of the
        whole network (``specgraph spectrum`` on a network of several
        components), written as an empty cell.

    Returns
    -------
    pandas.DataFrame
        ``index`` (from :data:`FIRST_EIGENVALUE_INDEX`: ``k`` for
        :math:`\\lambda_k`), ``eigenvalue``, ``residual``, ``component``
        (nullable integer), ``gap_after`` (:math:`\\lambda_{k+1} - \\lambda_k`;
        empty for the last value).

    Examples
    --------
    >>> spectrum_frame(np.array([0.0, 0.5]), np.zeros(2), component=0)["index"].tolist()
    [1, 2]
    """
    values = np.asarray(values, dtype=np.float64)
    gaps = np.append(eigengaps(values), np.nan) if values.size else np.empty(0)
    return pd.DataFrame(
        {
            "index": np.arange(FIRST_EIGENVALUE_INDEX, FIRST_EIGENVALUE_INDEX + values.size),
            "eigenvalue": values,
            "residual": np.asarray(residuals, dtype=np.float64),
            "component": pd.array([component] * values.size, dtype="Int64"),
            "gap_after": gaps,
        },
        columns=list(SPECTRUM_COLUMNS),
    )


def ordered_boundary(boundary: pd.DataFrame) -> pd.DataFrame:
    """``boundary.csv`` in its documented order (see the module notes).

    Sorted by the unordered zone pair (smaller zone, larger zone), then by
    ``weight`` descending, then input order (a stable sort); the columns and
    their order are unchanged, ``zone_a`` stays the zone of ``source``.

    Examples
    --------
    >>> table = pd.DataFrame({"source": list("abc"), "target": list("xyz"),
    ...     "weight": [1.0, 2.0, 3.0], "zone_a": [1, 0, 1], "zone_b": [0, 1, 2]})
    >>> ordered_boundary(table)["source"].tolist()
    ['b', 'a', 'c']
    """
    if boundary.empty:
        return boundary.reset_index(drop=True)
    low = np.minimum(boundary["zone_a"].to_numpy(), boundary["zone_b"].to_numpy())
    high = np.maximum(boundary["zone_a"].to_numpy(), boundary["zone_b"].to_numpy())
    weight = boundary["weight"].to_numpy(dtype=np.float64)
    # np.lexsort sorts by the last key first and is stable, so ties keep input order.
    order = np.lexsort((-weight, high, low))
    return boundary.iloc[order].reset_index(drop=True)


def supply_columns(
    summary: pd.DataFrame,
    node_ids: Sequence[str] | np.ndarray,
    labels: np.ndarray,
    sources: Sequence[str],
) -> pd.DataFrame:
    """``zone_summary.csv`` with the supply points of each zone.

    Adds ``sources`` (how many supply points the zone holds: the column of
    the same name in ``score``'s ``zone_scores.csv``) and ``supply_points``
    (their ids, in the order given, joined by :data:`SUPPLY_SEPARATOR`;
    empty for a zone without one). Ids that are not nodes are left out
    (the readers refuse them before a zoning is made).

    Examples
    --------
    >>> summary = pd.DataFrame({"zone": [0, 1]})
    >>> supply_columns(summary, ["a", "b", "c"], np.array([0, 1, 1]), ["c", "b"]).to_dict("list")
    {'zone': [0, 1], 'sources': [0, 2], 'supply_points': ['', 'c;b']}
    """
    row_of = {node: row for row, node in enumerate(node_ids)}
    held: dict[int, list[str]] = {}
    for source in sources:
        row = row_of.get(str(source))
        if row is not None:
            held.setdefault(int(labels[row]), []).append(str(source))
    out = summary.copy()
    zones = out["zone"].to_numpy()
    out["sources"] = [len(held.get(int(z), ())) for z in zones]
    out["supply_points"] = [SUPPLY_SEPARATOR.join(held.get(int(z), ())) for z in zones]
    return out
