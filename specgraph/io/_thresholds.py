"""Links chosen by a numeric column of the edge table and a threshold.

The command line's ``--trunk-col COL --trunk-above X`` marks as trunk links the
links whose ``COL`` is at least ``X`` (a pipe diameter, a voltage level). The
column is one of the edge table's own, carried through in
:attr:`Network.link_table`; every refusal names the file, line and column, as
the other readers do.
"""

from __future__ import annotations

import numpy as np

from ..network import Network
from ._frames import _parse_numbers
from ._lists import _require_column, link_table_origin, links_where

__all__ = ["links_at_least"]


def links_at_least(
    network: Network, column: str, threshold: float, *, option: str = "--trunk-col"
) -> np.ndarray:
    """Row-index pairs of the links whose ``column`` is at least ``threshold``.

    Parameters
    ----------
    network : Network
        Read from an edge table (its :attr:`Network.link_table` carries the
        column).
    column : str
        A numeric column of the edge table.
    threshold : float
        Links with a value ``>= threshold`` are chosen.
    option : str
        The option that named the column, quoted in messages.

    Returns
    -------
    ndarray of int, shape (m, 2)
        Both ends of every chosen link (self-loops, which the network leaves
        out, are left out here too).

    Raises
    ------
    InputError
        For a missing column or a cell that is not a finite number, naming
        its file, line and column; for the ``weight`` column when it holds
        affinities converted from distances (not the values as written).

    Examples
    --------
    >>> import pandas as pd
    >>> net = Network.from_links(["a", "b"], ["b", "c"], extra=pd.DataFrame({"dia": ["30", "8"]}))
    >>> links_at_least(net, "dia", 24).tolist()
    [[0, 1]]
    """
    table = network.link_table
    origin = link_table_origin(network)
    _require_column(table, column, origin, option)
    notes = network.notes
    if column == "weight" and notes.get("weight_read_as") == "distance":
        raise origin.error(
            "the column 'weight' was read as a distance and holds the affinities converted "
            f"from it, not the values as written; {option} needs the values as written: "
            "copy the column under another name and name that one",
            frame=table,
            column=column,
        )
    values = _parse_numbers(table[column])
    bad = np.flatnonzero(~np.isfinite(values))
    if bad.size:
        row = int(bad[0])
        raise origin.error(
            f"{table[column].iloc[row]!r} is not a finite number ({bad.size} such cell"
            f"{'s' if bad.size > 1 else ''}); {option} with a threshold needs a number on "
            "every link: fill it in",
            frame=table,
            column=column,
            row=row,
        )
    return links_where(network, values >= threshold)
