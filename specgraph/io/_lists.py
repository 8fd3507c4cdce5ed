"""Reading the small tables that steer a zoning: node lists, link flags, zone files.

A *flag* column marks rows with a yes/no value; a *zone file* gives each node
a zone, a whole number or a name (any text). Every refusal names the file, line and column, like the
network readers.
"""

from __future__ import annotations

import os
from collections.abc import Hashable
from typing import Any

import numpy as np
import pandas as pd

from ..network import Network
from ._frames import Origin, _ids, refuse_not_text
from ._tables import _load_table

__all__ = [
    "FLAG_FALSE",
    "FLAG_TRUE",
    "WHOLE_NUMBER_LIMIT",
    "flag_mask",
    "flagged_links",
    "read_link_list",
    "read_node_list",
    "read_zone_file",
]

#: Cell texts read as "yes" in a flag column (compared after stripping spaces
#: and lower-casing).
FLAG_TRUE = frozenset({"1", "true", "yes", "y", "t"})
#: Cell texts read as "no"; an empty cell is "no" too.
FLAG_FALSE = frozenset({"0", "false", "no", "n", "f", ""})


def _require_column(frame: pd.DataFrame, column: Hashable, origin: Origin, option: str) -> None:
    if column not in frame.columns:
        shown = ", ".join(repr(str(c)) for c in frame.columns)
        raise origin.error(
            f"there is no column {str(column)!r} (the header has {shown}); name the right "
            f"column with {option}",
        )


def flag_mask(
    frame: pd.DataFrame, column: Hashable, *, origin: Origin | None = None, option: str = ""
) -> np.ndarray:
    """Read a yes/no column as a boolean mask.

    Parameters
    ----------
    frame : pandas.DataFrame
        The table (cells as text, as :func:`specgraph.io.read_table` gives them;
        booleans and numbers are accepted too).
    column : hashable
        The flag column.
    origin : Origin, optional
        Where the frame came from, for messages.
    option : str
        The option that named the column, quoted in messages.

    Returns
    -------
    ndarray of bool

    Raises
    ------
    InputError
        For a missing column or a cell outside :data:`FLAG_TRUE` and
        :data:`FLAG_FALSE`, naming its line and column.

    Examples
    --------
    >>> frame = pd.DataFrame({"trunk": ["yes", "", "0", "TRUE"]})
    >>> flag_mask(frame, "trunk").tolist()
    [True, False, False, True]
    """
    origin = Origin() if origin is None else origin
    _require_column(frame, column, origin, option or "the flag option")
    series = frame[column]
    if pd.api.types.is_bool_dtype(series):
        return series.to_numpy(dtype=bool)
    text = series.astype(object).where(series.notna(), "").astype(str).str.strip().str.lower()
    yes = text.isin(FLAG_TRUE).to_numpy(copy=True)
    no = text.isin(FLAG_FALSE).to_numpy(copy=True)
    text_numbers = pd.to_numeric(text, errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    yes |= ~no & (text_numbers == 1.0)
    no |= text_numbers == 0.0
    bad = np.flatnonzero(~(yes | no))
    if bad.size:
        row = int(bad[0])
        raise origin.error(
            f"{series.iloc[row]!r} is not a yes/no value; write one of "
            f"{', '.join(sorted(FLAG_TRUE - {''}))} for yes, or "
            f"{', '.join(sorted(FLAG_FALSE - {''}))} or nothing for no",
            frame=frame,
            column=column,
            row=row,
        )
    return yes


def _refuse_unknown(
    ids: np.ndarray,
    network: Network | None,
    *,
    frame: pd.DataFrame,
    column: Hashable,
    origin: Origin,
    option: str,
) -> None:
    """Raise at the first id that is not a node of ``network`` (when one is given)."""
    if network is None:
        return
    known = pd.Index(network.node_ids).get_indexer(ids) >= 0
    if known.all():
        return
    row = int(np.flatnonzero(~known)[0])
    count = int(np.count_nonzero(~known))
    raise origin.error(
        f"{ids[row]!r} is not a node of the network ({count} unknown id"
        f"{'s' if count > 1 else ''} in this {option} table); correct the id, or remove the row",
        frame=frame,
        column=column,
        row=row,
    )


def _read_ids(
    frame: pd.DataFrame, column: Hashable, origin: Origin | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """Ids of a list or zone table, with the spreadsheet guard of our own exports undone.

    specgraph writes a text cell that starts with ``=``, ``+``, ``-``, ``@``, tab or
    carriage return with a leading ``'`` (see :mod:`specgraph._guard`), so a zone
    table it wrote must read back to the network's ids; the quote is taken off
    here (and only here: edge and node tables are read exactly as written).
    """
    from .._guard import restore_text

    if origin is not None:
        refuse_not_text(frame, (column,), origin)
    ids, empty = _ids(frame, column)
    restored = restore_text(pd.Series(ids, dtype=object)).to_numpy(dtype=object)
    return restored, empty


def _refuse_empty(
    empty: np.ndarray, *, frame: pd.DataFrame, column: Hashable, origin: Origin
) -> None:
    """Raise at the first row whose id is empty."""
    if empty.any():
        raise origin.error(
            "the node id is empty; fill it in or delete the row",
            frame=frame,
            column=column,
            row=int(np.flatnonzero(empty)[0]),
        )


def _refuse_no_rows(frame: pd.DataFrame, origin: Origin, option: str, what: str) -> None:
    """Refuse a rule table with a header but no rows: the rule would vanish unsaid."""
    if frame.empty:
        raise origin.error(
            f"the table has a header but no rows, so {option} would add no rule; list at "
            f"least one {what}, or leave {option} out"
        )


def _located(path: str | None) -> Origin:
    """The origin of a table already read, with a line finder that reads lazily."""
    if path is None:
        return Origin()

    def locate(row: int) -> int | None:
        return _load_table(path, delimiter=None, graphml="edges").locate(row)

    return Origin(path, locate)


def flagged_links(network: Network, column: str, *, option: str = "--keep-col") -> np.ndarray:
    """Row-index pairs of the links whose ``column`` in the link table says yes.

    The column is one of the edge table's own columns, carried through in
    :attr:`Network.link_table`.

    Returns
    -------
    ndarray of int, shape (m, 2)
        Both ends of every flagged link (self-loops, which the network leaves
        out, are left out here too).

    Examples
    --------
    >>> net = Network.from_links(["a", "b"], ["b", "c"], extra=pd.DataFrame({"trunk": ["1", "0"]}))
    >>> flagged_links(net, "trunk").tolist()
    [[0, 1]]
    """
    table = network.link_table
    mask = flag_mask(table, column, origin=link_table_origin(network), option=option)
    return links_where(network, mask)


def link_table_origin(network: Network) -> Origin:
    """Where the network's link table was read from, for messages naming its lines."""
    record = network.notes.get("edge_table", {})
    return _located(record.get("path") if isinstance(record, dict) else None)


def links_where(network: Network, mask: np.ndarray) -> np.ndarray:
    """Row-index pairs of the link-table rows in ``mask``, self-loops left out
    (the network leaves them out too)."""
    src, dst = network.link_ends
    keep = mask & (src != dst)
    return np.column_stack([src[keep], dst[keep]]).astype(np.int64)


def read_node_list(
    path: str | os.PathLike[str],
    *,
    node: str = "node",
    flag: str | None = None,
    delimiter: str | None = None,
    network: Network | None = None,
    option: str = "node list",
) -> tuple[str, ...]:
    """Node ids listed in a table: every row, or the rows whose ``flag`` says yes.

    Parameters
    ----------
    path : str or path-like
        CSV or Parquet file with a node id column.
    node : str, default='node'
        The node id column.
    flag : str, optional
        A yes/no column; only rows marked yes are listed.
    delimiter : str, optional
        As for :func:`specgraph.io.read_table`.
    network : Network, optional
        When given, an id that is not one of its nodes is refused, at its line.
    option : str
        How the user named this table (e.g. ``--supply-list``), for messages.

    Returns
    -------
    tuple of str
        Ids in file order, exactly as written; an id listed twice is listed once.

    Raises
    ------
    InputError
        Missing columns, empty ids or bad flags, naming file, line and column.
    """
    table = _load_table(path, delimiter=delimiter)
    origin = Origin(table.record["path"], table.locate)
    frame = table.frame
    _require_column(frame, node, origin, "the node column option")
    _refuse_no_rows(frame, origin, option, "node")
    ids, empty = _read_ids(frame, node, origin)
    chosen = (
        np.ones(len(frame), dtype=bool) if flag is None else flag_mask(frame, flag, origin=origin)
    )
    _refuse_empty(empty & chosen, frame=frame, column=node, origin=origin)
    rows = np.flatnonzero(chosen)
    _refuse_unknown(
        ids[rows],
        network,
        frame=frame.iloc[rows],
        column=node,
        origin=_rows_origin(origin, rows),
        option=option,
    )
    return tuple(dict.fromkeys(ids[chosen].tolist()))


def _rows_origin(origin: Origin, rows: np.ndarray) -> Origin:
    """The origin of a subset of a frame's rows: positions map back to the file's rows."""
    base = origin.locate
    if base is None:
        return origin

    def locate(row: int) -> int | None:
        return base(int(rows[row]))

    return Origin(origin.path, locate)


def read_link_list(
    path: str | os.PathLike[str],
    *,
    source: str = "source",
    target: str = "target",
    delimiter: str | None = None,
    network: Network | None = None,
    option: str = "link list",
) -> tuple[tuple[str, str], ...]:
    """Links listed in a table, as pairs of node ids (e.g. links that must not be cut).

    Parameters
    ----------
    path : str or path-like
        CSV or Parquet file, one row per link.
    source, target : str
        The two node id columns (the same names as in the edge table).
    delimiter : str, optional
        As for :func:`specgraph.io.read_table`.

    Returns
    -------
    tuple of (str, str)
        In file order, exactly as written.

    Raises
    ------
    InputError
        Missing columns or empty ids, naming file, line and column.
    """
    table = _load_table(path, delimiter=delimiter, graphml="edges")
    origin = Origin(table.record["path"], table.locate)
    frame = table.frame
    ends = []
    for column in (source, target):
        _require_column(frame, column, origin, "--source/--target")
    _refuse_no_rows(frame, origin, option, "link")
    for column in (source, target):
        ids, empty = _read_ids(frame, column, origin)
        _refuse_empty(empty, frame=frame, column=column, origin=origin)
        _refuse_unknown(ids, network, frame=frame, column=column, origin=origin, option=option)
        ends.append(ids)
    if network is not None:
        index = pd.Index(network.node_ids)
        a, b = index.get_indexer(ends[0]), index.get_indexer(ends[1])
        linked = np.asarray(network.adjacency[a, b]).ravel() != 0
        if not linked.all():
            row = int(np.flatnonzero(~linked)[0])
            raise origin.error(
                f"{ends[0][row]!r} - {ends[1][row]!r} is not a link of the network, so "
                f"{option} cannot keep it; correct the ids, or remove the row",
                frame=frame,
                column=source,
                row=row,
            )
    return tuple(zip(ends[0].tolist(), ends[1].tolist(), strict=True))


#: Most a zone number may be (exclusive) to be read as a whole number: zone
#: numbers are stored as 64-bit integers, and no zoning has 2**31 zones; a
#: longer run of digits is read as a text label (an asset code, say).
WHOLE_NUMBER_LIMIT = 2**31

#: Plain whole numbers as zone files write them (spaces around taken off first):
#: digits without a leading zero (``0`` itself excepted), optionally with
#: ``.0`` (what a spreadsheet or a float column writes for a whole number).
_PLAIN_WHOLE = r"(0|[1-9][0-9]*)(\.0*)?"
#: A negative whole number (``-1`` is how specgraph marks a node in no zone).
_NEGATIVE_WHOLE = r"-\s*[0-9]+(\.0*)?"


def read_zone_file(
    path: str | os.PathLike[str],
    *,
    node: str = "node",
    zone: str = "zone",
    delimiter: str | None = None,
    network: Network | None = None,
    option: str = "zone table",
    whole_numbers: bool = False,
) -> dict[str, Any]:
    """Read a ``node, zone`` table: each listed node's zone, a number or a name.

    Zone labels may be any text (a district's name, ``"DMA-07"``); the rule:

    * when every label is a plain whole number (digits with no leading zero,
      optionally ``.0``, spaces around allowed: ``7``, ``7.0``), the labels
      are the integers they write, as zone numbers;
    * otherwise every label is text, kept **exactly as written** and compared
      exactly: ``"7"`` and ``"07"`` are two zones, so are ``"North"`` and
      ``"north"`` (a zero-padded code is a name, not a number);
    * an empty label is refused, and so is a negative whole number such as
      ``-1`` (the mark of a node in no zone in specgraph's own tables: leave
      such a node out of the table instead).

    Parameters
    ----------
    path : str or path-like
        CSV or Parquet file.
    node, zone : str
        The node id and zone columns.
    delimiter : str, optional
        As for :func:`specgraph.io.read_table`.
    network : Network, optional
        When given, an id that is not one of its nodes is refused, at its line.
    option : str
        How the user named this table, for messages.
    whole_numbers : bool, default=False
        Accept only whole numbers ``>= 0`` (any way of writing one: ``07``,
        ``7.0``), as zone numbers (for rules such as ``--fixed``).

    Returns
    -------
    dict
        Node id (exact text) to zone, in file order: all ``int`` (``>= 0``)
        or all ``str``.

    Raises
    ------
    InputError
        A missing column, an empty id, a node listed twice, or an empty or
        negative zone (with ``whole_numbers``, a zone that is not a whole
        number ``>= 0``); the message names file, line and column.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (folder / "a.csv").write_text("node,zone\\nJ1,North Heights\\nJ2,07\\nJ3,7\\n")
    >>> read_zone_file(folder / "a.csv")
    {'J1': 'North Heights', 'J2': '07', 'J3': '7'}
    >>> _ = (folder / "b.csv").write_text("node,zone\\nJ1,3\\nJ2,12.0\\n")
    >>> read_zone_file(folder / "b.csv")
    {'J1': 3, 'J2': 12}
    """
    table = _load_table(path, delimiter=delimiter)
    origin = Origin(table.record["path"], table.locate)
    frame = table.frame
    for column in (node, zone):
        _require_column(frame, column, origin, "the node or zone column option")
    ids, empty = _read_ids(frame, node, origin)
    _refuse_empty(empty, frame=frame, column=node, origin=origin)
    repeated = pd.Series(ids).duplicated().to_numpy()
    if repeated.any():
        row = int(np.flatnonzero(repeated)[0])
        first = int(np.flatnonzero(ids == ids[row])[0])
        raise origin.error(
            f"node {ids[row]!r} is listed again (first on data row {first + 1}); "
            "give each node one zone",
            frame=frame,
            column=node,
            row=row,
        )
    zones: np.ndarray
    if whole_numbers:
        zones = _whole_numbers(frame, zone, origin)
    else:
        zones = _zone_labels(frame, zone, origin)
    _refuse_unknown(ids, network, frame=frame, column=node, origin=origin, option=option)
    return dict(zip(ids.tolist(), zones.tolist(), strict=True))


def _zone_labels(frame: pd.DataFrame, column: Hashable, origin: Origin) -> np.ndarray:
    """The zone labels of a zone table by the rule of :func:`read_zone_file`."""
    whole = _plain_whole_numbers(frame[column])
    if whole is not None:
        return whole
    labels, missing = _read_ids(frame, column)
    stripped = pd.Series(labels, dtype=object).str.strip()
    blank = missing | (stripped == "").to_numpy(dtype=bool)
    if blank.any():
        raise origin.error(
            "the zone is empty; give every listed node a zone (a number or a name), or "
            "delete the row of a node in no zone",
            frame=frame,
            column=column,
            row=int(np.flatnonzero(blank)[0]),
        )
    negative = stripped.str.fullmatch(_NEGATIVE_WHOLE).to_numpy(dtype=bool)
    if negative.any():
        row = int(np.flatnonzero(negative)[0])
        raise origin.error(
            f"the zone {labels[row]!r} is a negative number; specgraph writes -1 for a node "
            "in no zone: delete the row of such a node, or name its zone",
            frame=frame,
            column=column,
            row=row,
        )
    return labels


def _plain_whole_numbers(series: pd.Series) -> np.ndarray | None:
    """The zones as int64 when every cell is a plain whole number below
    :data:`WHOLE_NUMBER_LIMIT`, else None (read by the text path, which also words
    the faults). Vectorized string matching: the common case of numbered zones costs
    about what parsing numbers did (1.8 s by cell for 10^6 rows, 0.4 s so)."""
    if pd.api.types.is_integer_dtype(series.dtype):
        values = series.to_numpy(dtype=np.int64)
        ok = values.size == 0 or (values.min() >= 0 and values.max() < WHOLE_NUMBER_LIMIT)
        return values if ok else None
    if not (pd.api.types.is_string_dtype(series.dtype) or series.dtype == object):
        return None
    if series.isna().any():
        return None
    stripped = series.astype(str).str.strip()
    if not stripped.str.fullmatch(_PLAIN_WHOLE).all():
        return None
    numbers = pd.to_numeric(stripped).to_numpy(dtype=np.float64)
    return numbers.astype(np.int64) if (numbers < WHOLE_NUMBER_LIMIT).all() else None


def _whole_numbers(frame: pd.DataFrame, column: Hashable, origin: Origin) -> np.ndarray:
    series = frame[column]
    text = series.astype(object).where(series.notna(), "").astype(str).str.strip()
    numbers = pd.to_numeric(text, errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    ok = np.isfinite(numbers) & (numbers >= 0) & (numbers == np.round(numbers))
    ok &= numbers < 2**31
    if not ok.all():
        row = int(np.flatnonzero(~ok)[0])
        value: Any = series.iloc[row]
        why = "is empty" if text.iloc[row] == "" else f"{value!r} is not a whole number >= 0"
        raise origin.error(
            f"the zone {why}; zones are whole numbers from 0", frame=frame, column=column, row=row
        )
    return numbers.astype(np.int64)
