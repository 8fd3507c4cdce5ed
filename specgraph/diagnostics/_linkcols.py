"""The user's own link columns (a pipe or line id) beside every table that lists links.

Boundary tables carry the columns of the input link table (see
:func:`specgraph.diagnostics.boundary_links`); tables that list the network's
links themselves, such as the bridges and bottlenecks of
:func:`~specgraph.diagnostics.robustness`, list one row per link of the
adjacency, where parallel input links are summed into one. Here each such row
gets the carried columns of the input rows it came from, so that the analyst
can join it back to GIS.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence

import numpy as np
import pandas as pd

from .._graph import RENAMED_PREFIX
from ..network import Network

__all__ = ["PARALLEL_SEPARATOR", "carried_link_columns"]

#: Between the values of parallel input links (two pipes between the same two
#: nodes, one link of the network) in a carried column: ``"P-1; P-2"``, each
#: column in the input rows' order, so the n-th value of every column belongs
#: to the same input link.
PARALLEL_SEPARATOR = "; "

#: Columns of the input link table that are the link itself, not carried.
_OWN = ("source", "target", "weight")


def carried_link_columns(
    network: Network, tables: Sequence[pd.DataFrame], *, taken: Iterable[str] = ()
) -> tuple[list[pd.DataFrame], dict[str, str]]:
    """Each table with the input link table's own columns appended, row by row.

    Parameters
    ----------
    network : Network
    tables : sequence of pandas.DataFrame
        Tables with ``source`` and ``target`` node-id columns naming links of
        the network (in either direction).
    taken : iterable of str
        Column names the tables use: a carried column of one of these names
        is carried as ``edge_<name>``.

    Returns
    -------
    tables : list of pandas.DataFrame
        The tables with the carried columns after their own, in input order.
        A link merged from several input rows (parallel links) lists each
        row's value, joined by :data:`PARALLEL_SEPARATOR`, in input order;
        a link with no input row (none when the network was read from a
        table) gets empty cells.
    renamed : dict of str to str
        Carried columns renamed because their name was taken: old to new.

    Examples
    --------
    >>> net = Network.from_links(["a", "b", "b"], ["b", "c", "c"],
    ...                          extra=pd.DataFrame({"pipe": ["P1", "P2", "P3"]}))
    >>> frame = pd.DataFrame({"source": ["c", "a"], "target": ["b", "b"]})
    >>> carried_link_columns(net, [frame])[0][0]["pipe"].tolist()
    ['P2; P3', 'P1']
    """
    link_table = network.link_table
    rest = [c for c in link_table.columns if c not in _OWN]
    if not rest:
        return list(tables), {}
    taken = set(taken)
    renamed = {str(c): RENAMED_PREFIX + str(c) for c in rest if c in taken}
    n = network.n_nodes
    src, dst = network.link_ends
    weight = link_table["weight"].to_numpy(dtype=np.float64)
    kept = np.flatnonzero((src >= 0) & (dst >= 0) & (src != dst) & (weight > 0))
    keys = np.minimum(src[kept], dst[kept]) * n + np.maximum(src[kept], dst[kept])
    order = np.argsort(keys, kind="stable")
    sorted_keys, sorted_rows = keys[order], kept[order]
    index = pd.Index(network.node_ids)
    out = []
    for frame in tables:
        a = index.get_indexer(frame["source"].to_numpy(dtype=object))
        b = index.get_indexer(frame["target"].to_numpy(dtype=object))
        wanted = np.minimum(a, b) * n + np.maximum(a, b)
        left = np.searchsorted(sorted_keys, wanted, side="left")
        right = np.searchsorted(sorted_keys, wanted, side="right")
        carried = _carried(link_table, rest, sorted_rows, left, right)
        carried.columns = [renamed.get(str(c), c) for c in carried.columns]
        out.append(pd.concat([frame.reset_index(drop=True), carried], axis=1))
    return out, renamed


def _carried(
    link_table: pd.DataFrame,
    rest: list[str],
    rows: np.ndarray,
    left: np.ndarray,
    right: np.ndarray,
) -> pd.DataFrame:
    """The ``rest`` columns for the input-row ranges ``rows[left:right]`` of each listed link."""
    count = right - left
    if rows.size:
        first = rows[np.minimum(left, rows.size - 1)]
        carried = link_table[rest].iloc[first].reset_index(drop=True)
    else:
        carried = pd.DataFrame(index=range(left.size), columns=rest, dtype=object)
    odd = np.flatnonzero(count != 1)
    if not odd.size:
        return carried
    carried = carried.astype(object)
    for row in odd.tolist():
        span = rows[left[row] : right[row]]
        for place, column in enumerate(rest):
            values = link_table[column].iloc[span].tolist()
            carried.iat[row, place] = PARALLEL_SEPARATOR.join(map(_text, values))
    return carried


def _text(value: object) -> str:
    """A carried value as text, ``""`` for a missing one."""
    missing = value is None or (isinstance(value, float) and np.isnan(value))
    return "" if missing else str(value)
