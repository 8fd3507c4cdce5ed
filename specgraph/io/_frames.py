"""Turning an edge frame (and an optional node frame) into a :class:`Network`.

Every check here reports the first offending row, with the file, line and
column it came from when the frames were read from files, and says what to do.
"""

from __future__ import annotations

import logging
import re
from collections.abc import Callable, Hashable, Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from .._links import LinkEnds, arrow_text, encode_links, first_repeated, missing_or_empty
from .._validation import Boolean, Constraint, InstanceOf, NoneOk, check_params, parameter_error
from ..exceptions import InputError, ParameterError
from ..network import Network, affinity_from_distance, network_from_ends
from ._ids import warn_suspect_ids
from ._sources import shown_name

__all__ = ["Columns", "Origin", "build_network", "network_from_frames"]

logger = logging.getLogger(__name__)

#: Names of the link table's own columns; a passed-through column may not take them.
LINK_COLUMNS = ("source", "target", "weight")
#: Column used as weight when no weight column is named and the table has one.
DEFAULT_WEIGHT_COLUMN = "weight"
#: Longest cell text quoted in a message before it is cut short.
MAX_SHOWN_CHARACTERS = 40
#: Line of the header when a line finder does not say otherwise.
HEADER_LINE = 1
#: The installed pandas as (major, minor), for working around older releases' faults.
PANDAS_RELEASE = tuple(int(part) for part in re.findall(r"\d+", pd.__version__)[:2])
#: Whether pandas reads numbers in text exactly: correctly rounded (from 3.1; before,
#: '0.30000000000000004' gives 0.3) and overflowing to infinity (from 3.0; before,
#: '1e400' gives NaN). Before 3.1 the text cells are read again with ``float``.
_PANDAS_READS_NUMBERS_EXACTLY = PANDAS_RELEASE >= (3, 1)

#: What each column option holds, and how to choose another column for it.
_ROLES = {
    "source": ("the first node id of each link", "--source COLUMN (source= in Python)"),
    "target": ("the second node id of each link", "--target COLUMN (target= in Python)"),
    "weight": ("the weight of each link", "--weight COLUMN (weight= in Python)"),
    "node": ("the node ids", "node= in Python"),
    "x": ("the x coordinates", "x= in Python"),
    "y": ("the y coordinates", "y= in Python"),
    "size": ("the node sizes", "--size-col COLUMN (size= in Python)"),
}


@dataclass(frozen=True)
class Columns:
    """Which columns hold what (the options of :func:`network_from_frames`)."""

    source: Hashable = "source"
    target: Hashable = "target"
    weight: Hashable | None = None
    distance: bool = False
    node: Hashable = "node"
    x: Hashable | None = None
    y: Hashable | None = None
    size: Hashable | None = None


@dataclass(frozen=True)
class Origin:
    """Where a frame came from, so that errors can name the file and line."""

    path: str | None = None
    locate: Callable[[int], int | None] | None = None

    @property
    def header_line(self) -> int | None:
        if self.locate is None:
            return None
        return getattr(self.locate, "header_line", HEADER_LINE)

    def error(
        self,
        message: str,
        *,
        frame: pd.DataFrame | None = None,
        column: Hashable | None = None,
        row: int | None = None,
    ) -> InputError:
        """An :class:`InputError` at ``row`` (0-based position) of ``column``.

        Without a row the error points at the header; where no line is known
        the message names the 1-based data row instead.
        """
        line = self.header_line
        if row is not None:
            line = None if self.locate is None else self.locate(row)
            if line is None:
                message = f"row {row + 1}: {message}"
        number = None
        numbered = getattr(self.locate, "column_numbers", True)
        if numbered and frame is not None and column is not None and column in frame.columns:
            number = list[Hashable](frame.columns).index(column) + 1
        name = None if column is None else str(column)
        return InputError(message, path=self.path, line=line, column=name, column_number=number)


@dataclass(frozen=True)
class _Rule:
    """What a numeric column must hold, for checks and messages."""

    minimum: float | None
    strict: bool
    expected: str
    advice: str


_AFFINITY = _Rule(
    0.0,
    False,
    "a finite number >= 0 (an affinity: bigger means more strongly tied)",
    "correct the value, or leave out --weight to give every link weight 1",
)
_DISTANCE = _Rule(
    0.0,
    True,
    "a finite length > 0 (--distance reads this column as a length, impedance or latency)",
    "a zero length cannot become an affinity: merge the two nodes into one, or enter "
    "the real length",
)
_COORDINATE = _Rule(None, False, "a finite number", "correct the coordinate")
_SIZE = _Rule(
    0.0, False, "a finite number >= 0 (a node size)", "correct the value, or leave out --size-col"
)


#: A frame argument (named by its type when refused).
_FRAME = InstanceOf((pd.DataFrame,), "a pandas DataFrame", by_type=True)


def _shown(value: Any) -> str:
    text = value if isinstance(value, str) else repr(value)
    if len(text) > MAX_SHOWN_CHARACTERS:
        text = text[:MAX_SHOWN_CHARACTERS] + "..."
    return repr(text)


# ------------------------------------------------------------------ checks
#: What the frames and the distance flag of :func:`network_from_frames` accept.
_FRAMES: dict[str, list[Constraint]] = {
    "edges": [_FRAME],
    "nodes": [_FRAME, NoneOk()],
    "distance": [Boolean()],
}


def _check_options(edges: Any, nodes: Any, columns: Columns) -> None:
    """The frames and options, each alone, then the column names together."""
    check_params({"edges": edges, "nodes": nodes, "distance": columns.distance}, _FRAMES)
    for name in ("source", "target", "node"):
        if getattr(columns, name) is None:
            raise parameter_error(name, "a column name", None)
    if columns.source == columns.target:
        expected = f"a column other than source ({columns.source!r})"
        raise parameter_error("target", expected, columns.target)
    if columns.weight is not None and columns.weight in (columns.source, columns.target):
        expected = "a column other than the node id columns (source and target)"
        raise parameter_error("weight", expected, columns.weight)
    node_columns = {"x": columns.x, "y": columns.y, "size": columns.size}
    given = [name for name, value in node_columns.items() if value is not None]
    if nodes is None and given:
        expected = f"a node table when {given[0]} names one of its columns"
        raise parameter_error("nodes", expected, None)
    if (columns.x is None) != (columns.y is None):
        missing, other = ("y", "x") if columns.y is None else ("x", "y")
        expected = f"a column name when {other} is given (coordinates need both x and y)"
        raise parameter_error(missing, expected, None)


def _require(frame: pd.DataFrame, origin: Origin, wanted: Mapping[str, Hashable | None]) -> None:
    """Each named column exists, and no column name is used twice."""
    duplicated = frame.columns[frame.columns.duplicated()].unique().tolist()
    if duplicated:
        raise origin.error(f"the table names these columns more than once: {duplicated}")
    present = ", ".join(repr(str(c)) for c in frame.columns)
    for role, name in wanted.items():
        if name is not None and name not in frame.columns:
            holds, option = _ROLES[role]
            raise origin.error(
                f"there is no column {str(name)!r} for {holds}; the columns are {present}. "
                f"Rename the column in the file or choose it with {option}",
                column=name,
            )


def _weight_column(edges: pd.DataFrame, columns: Columns) -> Hashable | None:
    if columns.weight is not None:
        return columns.weight
    if DEFAULT_WEIGHT_COLUMN in edges.columns:
        return DEFAULT_WEIGHT_COLUMN
    if columns.distance:
        raise ParameterError(
            "distance=True (--distance) reads the weight column as a length, but no weight "
            "column is named; name it with --weight COLUMN (weight= in Python)."
        )
    return None


def _passthrough(
    edges: pd.DataFrame, columns: Columns, weight: Hashable | None, origin: Origin
) -> list[Hashable]:
    """Edge columns carried into the link table: all but the ids and a 'weight' column.

    A weight column under another name (say ``length_m``) is kept as it was
    written; the link table's ``weight`` holds the affinity.
    """
    used = {columns.source, columns.target}
    if weight == DEFAULT_WEIGHT_COLUMN:
        used.add(weight)
    kept: list[Hashable] = [c for c in edges.columns if c not in used]
    for name in kept:
        if name in LINK_COLUMNS:
            raise origin.error(
                f"this column is not used, but its name is taken by the link table's own "
                f"{name!r} column; rename it in the file, or choose it with "
                f"{_ROLES[str(name)][1]}",
                frame=edges,
                column=name,
            )
    return kept


# ------------------------------------------------------------------- cells
def _ids(frame: pd.DataFrame, column: Hashable) -> tuple[np.ndarray, np.ndarray]:
    """The ids of ``column`` as exact strings, and where they are missing or empty."""
    series = frame[column]
    missing = series.isna().to_numpy(dtype=bool)
    ids = np.array(
        [v if type(v) is str else str(v) for v in series.to_numpy(dtype=object)], dtype=object
    )
    return ids, missing | (ids == "")


def _first(mask: np.ndarray) -> int | None:
    hits = np.flatnonzero(mask)
    return int(hits[0]) if hits.size else None


#: Key of a frame's ``attrs`` naming columns that could not be read as text (the
#: Parquet reader sets it: :data:`specgraph.io._tables.NOT_TEXT`).
NOT_TEXT = "specgraph_not_text"


def refuse_not_text(frame: pd.DataFrame, names: tuple[Hashable, ...], origin: Origin) -> None:
    """Refuse node ids from a column of lists, structs, maps or non-UTF-8 bytes.

    Such a value is not one id: written as text it would become an id such as
    ``"[1 2]"`` that matches nothing the user wrote.
    """
    types = frame.attrs.get(NOT_TEXT) or {}
    for name in names:
        if name in types:
            raise origin.error(
                f"node ids must be single values (text or whole numbers), but this column "
                f"holds values of type {types[name]}; store one id per cell as text or "
                "integers (in pyarrow: a string or int64 column), or choose another column",
                frame=frame,
                column=name,
            )


def _check_ids(frame: pd.DataFrame, names: tuple[Hashable, ...], origin: Origin, what: str) -> None:
    """Refuse the first empty or missing id of the columns ``names`` (row, then column)."""
    refuse_not_text(frame, names, origin)
    firsts = [(_first(missing_or_empty(frame[name])), name) for name in names]
    bad = [(row, name) for row, name in firsts if row is not None]
    if bad:
        row, name = min(bad, key=lambda hit: hit[0])
        raise origin.error(
            f"the node id is empty; {what} (a row with fewer fields than the header "
            "leaves the last ones empty)",
            frame=frame,
            column=name,
            row=row,
        )


def _arrow_numbers(series: pd.Series) -> np.ndarray | None:
    """The numbers of a column of Arrow text when pyarrow reads every cell as what pandas
    reads, else None (the column then takes pandas' path, which also words the faults).

    pyarrow's cast reads decimal text correctly rounded, as Python's ``float``
    does (and pandas from 3.1; :func:`_read_exactly` before). It is taken only
    when every cell is read and the numbers are all finite and none is a
    negative zero: pandas reads a column of whole numbers as integers, so it
    reads ``-0`` as 0, and it reads words such as ``inf`` or text with spaces
    around it by rules of its own. At 2*10^6 cells this took 0.05 s where
    pandas took 0.8 s.
    """
    text = arrow_text(series)
    if text is None:
        return None
    import pyarrow as pa

    try:
        numbers = np.array(text.cast(pa.float64()).to_numpy(), dtype=np.float64)
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
        return None
    if not np.all(np.isfinite(numbers)) or np.any(np.signbit(numbers) & (numbers == 0)):
        return None
    return numbers


def _parse_numbers(series: pd.Series) -> np.ndarray:
    """Numbers of a column of text or numbers; anything unreadable becomes NaN."""
    if pd.api.types.is_numeric_dtype(series) and not pd.api.types.is_bool_dtype(series):
        return series.to_numpy(dtype=np.float64, na_value=np.nan)
    read = _arrow_numbers(series)
    if read is not None:
        return read
    values = series.to_numpy(dtype=object)
    try:
        parsed = pd.to_numeric(series.astype(object), errors="coerce")
        numbers = np.array(parsed.to_numpy(dtype=np.float64, na_value=np.nan), dtype=np.float64)
    except (TypeError, ValueError, OverflowError):
        return np.array([_one_number(v) for v in values], dtype=float)
    return numbers if _PANDAS_READS_NUMBERS_EXACTLY else _read_exactly(values, numbers)


def _read_exactly(values: np.ndarray, numbers: np.ndarray) -> np.ndarray:
    """``numbers`` (pandas' reading of ``values``) with the text cells read by ``float``.

    pandas before 3.1 reads text with a routine that can miss the nearest double
    by one unit in the last place (``'0.30000000000000004'`` gives 0.3), and
    before 3.0 reads a literal beyond the double range (``'1e400'``) as missing.
    Python's ``float`` rounds correctly (IEEE 754 round to nearest), as pandas
    3.1 does, so every text cell pandas read as a number is read again by it, and
    an overflowing literal becomes infinite; text pandas refused stays NaN.
    """
    text = np.fromiter((isinstance(v, str) for v in values), dtype=bool, count=values.size)
    again = np.flatnonzero(text & ~np.isnan(numbers))
    try:
        numbers[again] = values[again].astype(np.float64)
    except (ValueError, OverflowError):  # a form pandas reads and float does not: keep pandas'
        exact = np.array([_one_number(values[i]) for i in again], dtype=np.float64)
        numbers[again] = np.where(np.isnan(exact), numbers[again], exact)
    for i in np.flatnonzero(text & np.isnan(numbers)).tolist():
        number = _one_number(values[i])
        if np.isinf(number) and values[i].isascii() and "_" not in values[i]:
            numbers[i] = number
    return numbers


def _one_number(value: Any) -> float:
    try:
        return float(value)
    except (TypeError, ValueError, OverflowError):
        return np.nan


def _fault(value: Any, number: float, rule: _Rule) -> str:
    """Why one cell breaks ``rule``."""
    if value is None or (isinstance(value, float) and np.isnan(value)) or value is pd.NA:
        return "is missing"
    if isinstance(value, str) and not value.strip():
        return "is empty"
    if np.isnan(number) and not np.isnan(_one_number(_plain(value))):
        return "is not a plain number (write decimals with a point, no thousands separators)"
    if np.isnan(number):
        return "is not a number" if not _is_nan_text(value) else "is not finite"
    if not np.isfinite(number):
        return "is not finite"
    return "is zero" if number == 0 else "is negative"


def _plain(value: Any) -> Any:
    """``value`` with a decimal comma or digit-group underscores made plain."""
    return value.replace(",", ".").replace("_", "") if isinstance(value, str) else value


def _is_nan_text(value: Any) -> bool:
    return isinstance(value, str) and value.strip().lower().lstrip("+-") == "nan"


def _numbers(
    frame: pd.DataFrame, column: Hashable, rule: _Rule, origin: Origin, label: str
) -> np.ndarray:
    """The numbers of ``column``; refuse the first cell that breaks ``rule``."""
    series = frame[column]
    values = _parse_numbers(series)
    with np.errstate(invalid="ignore"):
        bad = ~np.isfinite(values)
        if rule.minimum is not None:
            bad |= values <= rule.minimum if rule.strict else values < rule.minimum
    row = _first(bad)
    if row is None:
        return values
    cell = series.iloc[row]
    raise origin.error(
        f"{label} {_shown(cell)} {_fault(cell, values[row], rule)}; expected {rule.expected}. "
        f"To fix: {rule.advice}",
        frame=frame,
        column=column,
        row=row,
    )


# ------------------------------------------------------------------- nodes
@dataclass(frozen=True)
class _Nodes:
    ends: LinkEnds  # the links' ends as rows of the node table
    coordinates: np.ndarray | None
    sizes: np.ndarray | None


def _refuse_repeat(nodes: pd.DataFrame, column: Hashable, origin: Origin) -> None:
    """Raise at the first node id listed again, naming where it was first listed."""
    ids = nodes[column]
    repeat = first_repeated(ids)
    if repeat is None:
        return
    repeated, earlier = repeat
    line = None if origin.locate is None else origin.locate(earlier)
    first_seen = f"line {line}" if line is not None else f"row {earlier + 1}"
    raise origin.error(
        f"node id {_shown(str(ids.iloc[repeated]))} is listed again (first on {first_seen}); "
        "list each node once",
        frame=nodes,
        column=column,
        row=repeated,
    )


def _node_table(
    nodes: pd.DataFrame, columns: Columns, origin: Origin, link_ids: tuple[pd.Series, pd.Series]
) -> _Nodes:
    """Coordinates and sizes of a node frame, and the links' ends (``link_ids``) as its rows.

    The node ids are checked unique on the way, by the same hash pass that
    finds the ends among them.
    """
    _require(nodes, origin, {"node": columns.node, "x": columns.x, "y": columns.y})
    _require(nodes, origin, {"size": columns.size})
    if nodes.empty:
        raise origin.error(
            "the node table has a header but no rows; add one row per node or leave out --nodes"
        )
    _check_ids(nodes, (columns.node,), origin, "every node needs an id")
    ends = encode_links(*link_ids, nodes[columns.node])
    if not ends.unique:
        _refuse_repeat(nodes, columns.node, origin)
    coordinates = None
    if columns.x is not None:
        coordinates = np.column_stack(
            [
                _numbers(nodes, columns.x, _COORDINATE, origin, "coordinate"),
                _numbers(nodes, columns.y, _COORDINATE, origin, "coordinate"),
            ]
        )
    sizes = None
    if columns.size is not None:
        sizes = _numbers(nodes, columns.size, _SIZE, origin, "size")
    return _Nodes(ends, coordinates, sizes)


def _check_ends(
    edges: pd.DataFrame,
    ends: LinkEnds,
    names: tuple[Hashable, ...],
    origins: list[Origin],
) -> int:
    """Every link end is in the node table; return how many listed nodes are on no link."""
    edges_origin, nodes_origin = origins
    if ends.rows is None:  # not reached: repeated node ids were refused first
        raise InputError("node ids must be unique")
    firsts = [(_first(rows < 0), side) for side, rows in enumerate(ends.rows)]
    bad = [(row, side) for row, side in firsts if row is not None]
    if bad:
        row, side = min(bad, key=lambda hit: hit[0])
        table_name = nodes_origin.path or "the node table"
        raise edges_origin.error(
            f"node {_shown(ends.end_id(row, side))} is not in {table_name}; add it to the node "
            "table or leave out --nodes",
            frame=edges,
            column=names[side],
            row=row,
        )
    on_links = np.zeros(ends.node_ids.size, dtype=bool)
    for rows in ends.rows:
        on_links[rows] = True
    return int(on_links.size - np.count_nonzero(on_links))


# ------------------------------------------------------------------ build
def build_network(
    edges: pd.DataFrame,
    nodes: pd.DataFrame | None,
    columns: Columns,
    *,
    edge_origin: Origin,
    node_origin: Origin,
    notes: Mapping[str, Any],
    directed: bool = False,
) -> Network:
    """Check the frames, then build the network (shared by the public readers)."""
    _check_options(edges, nodes, columns)
    weight = _weight_column(edges, columns)
    names = (columns.source, columns.target)
    _require(edges, edge_origin, {"source": columns.source, "target": columns.target})
    _require(edges, edge_origin, {"weight": weight})
    extra = _passthrough(edges, columns, weight, edge_origin)
    if edges.empty:
        raise edge_origin.error(
            "the table has a header but no rows (no links); add one row per link"
        )
    _check_ids(edges, names, edge_origin, "every link needs two node ids")
    record = dict(notes)
    affinity = _affinities(edges, weight, columns.distance, edge_origin, record)
    link_ids = (edges[names[0]], edges[names[1]])
    table = None if nodes is None else _node_table(nodes, columns, node_origin, link_ids)
    # The ids are encoded once: the ends' rows serve the checks and the network.
    ends = encode_links(*link_ids) if table is None else table.ends
    origin = edge_origin if table is None else node_origin
    warn_suspect_ids(ends.node_ids, record, where=shown_name(origin.path or "node ids"))
    record["isolated_nodes"] = (
        0 if table is None else _check_ends(edges, ends, names, [edge_origin, node_origin])
    )
    return network_from_ends(
        ends,
        affinity,
        coordinates=None if table is None else table.coordinates,
        sizes=None if table is None else table.sizes,
        extra=edges[extra].reset_index(drop=True) if extra else None,
        notes=record,
        directed=directed,
        origin=edge_origin,
    )


def _affinities(
    edges: pd.DataFrame,
    weight: Hashable | None,
    distance: bool,
    origin: Origin,
    record: dict[str, Any],
) -> np.ndarray | None:
    """Affinity of each link (``None``: all 1), recording how the weight was read."""
    record["weight_column"] = None if weight is None else str(weight)
    record["weight_read_as"] = None
    if weight is None:
        return None
    if not distance:
        record["weight_read_as"] = "affinity"
        return _numbers(edges, weight, _AFFINITY, origin, "weight")
    record["weight_read_as"] = "distance"
    lengths = _numbers(edges, weight, _DISTANCE, origin, "length")
    affinity, record["weight_conversion"] = affinity_from_distance(lengths)
    return affinity


def network_from_frames(
    edges: pd.DataFrame,
    *,
    source: Hashable = "source",
    target: Hashable = "target",
    weight: Hashable | None = None,
    distance: bool = False,
    nodes: pd.DataFrame | None = None,
    node: Hashable = "node",
    x: Hashable | None = None,
    y: Hashable | None = None,
    size: Hashable | None = None,
    path: str | None = None,
    node_path: str | None = None,
    locate: Callable[[int], int | None] | None = None,
    node_locate: Callable[[int], int | None] | None = None,
    directed: bool = False,
) -> Network:
    """Build a :class:`~specgraph.Network` from an edge frame and an optional node frame.

    Node ids are taken as strings exactly as they are (``"007"``, ``"NA"`` and
    ``" J1"`` are three ordinary ids; nothing is stripped); an empty or missing
    id is refused. The input policies of :class:`~specgraph.Network` apply
    (self-loops left out, repeated links summed, zero-affinity links left out),
    each counted in ``notes``.

    Parameters
    ----------
    edges : pandas.DataFrame
        One row per link.
    source, target : str, default="source", "target"
        Columns holding the node ids at the two ends of each link.
    weight : str, default=None
        Column holding each link's weight. ``None`` uses a column named
        ``weight`` if there is one, else gives every link weight 1.
    distance : bool, default=False
        Read the weight as a length, impedance or latency (finite, > 0) and
        turn it into an affinity with :func:`~specgraph.network.affinity_from_distance`;
        otherwise it is an affinity (finite, >= 0).
    nodes : pandas.DataFrame, default=None
        Optional node table, one row per node; it fixes the node order, and
        nodes on no link become isolated nodes. Every link end must be in it.
    node : str, default="node"
        Column of ``nodes`` holding the node ids.
    x, y : str, default=None
        Columns of ``nodes`` holding planar coordinates (both or neither).
    size : str, default=None
        Column of ``nodes`` holding node sizes (finite, >= 0).
    path, node_path : str, default=None
        Files the frames were read from, named in error messages.
    locate, node_locate : callable, default=None
        ``locate(row_position)`` gives the 1-based file line of a 0-based data
        row, or ``None``; errors then name the line, else the 1-based row.
    directed : bool, default=False
        Keep each link's direction ``source -> target`` in
        :attr:`~specgraph.Network.arcs` (one-way streets, flow from sources
        to consumers); the undirected adjacency is then ``arcs + arcs.T``.

    Returns
    -------
    Network
        Its :attr:`~specgraph.Network.link_table` holds ``source``, ``target``,
        ``weight`` (the affinity) and every other edge column as written. Its
        ``notes`` add ``weight_column``, ``weight_read_as`` (``"affinity"``,
        ``"distance"`` or ``None``), ``weight_conversion`` (with ``distance``)
        and ``isolated_nodes`` (nodes of the node table on no link).

    Raises
    ------
    InputError
        A named column is missing; an id is empty; a weight, coordinate or
        size is missing, not a number, not finite or out of range (the first
        such row is named); a node is listed twice or a link end is not in
        the node table; the edge frame has no rows; an unused column is named
        ``source``, ``target`` or ``weight``.
    ParameterError
        Inconsistent options, such as ``x`` without ``y``.

    Examples
    --------
    >>> import pandas as pd
    >>> edges = pd.DataFrame({"source": ["007", "NA"], "target": ["NA", "J1"],
    ...                       "length_m": ["10", "40"]})
    >>> net = network_from_frames(edges, weight="length_m", distance=True)
    >>> net.node_ids.tolist()
    ['007', 'NA', 'J1']
    >>> net.link_table["weight"].tolist()
    [2.5, 0.625]
    """
    return build_network(
        edges,
        nodes,
        Columns(source, target, weight, distance, node, x, y, size),
        edge_origin=Origin(path, locate),
        node_origin=Origin(node_path, node_locate),
        notes={},
        directed=directed,
    )
