"""Reading edge and node tables from CSV or Parquet files into frames of strings.

Every cell is read as text, exactly as written, so that node ids keep leading
zeros and words such as ``NA`` or ``null`` stay ordinary ids; numbers are parsed
later, column by column, where the column's meaning is known.

Line numbers are only worked out when an error has to be reported: the success
path reads the file once, with pyarrow's multithreaded parser where it reads the
file exactly as pandas does (:mod:`specgraph.io._arrow_csv`), else with pandas.
"""

from __future__ import annotations

import csv
import itertools
import logging
import mmap
import os
import re
import warnings
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal, TextIO

import pandas as pd

from .._validation import Constraint, InstanceOf, NoneOk, check_param, parameter_error
from ..exceptions import InputError
from ..network import Network
from ._arrow_csv import read_plain_csv
from ._frames import NOT_TEXT as FRAME_NOT_TEXT
from ._frames import PANDAS_RELEASE, Columns, Origin, build_network
from ._graphml import GRAPHML_SUFFIXES, read_graphml
from ._sources import refuse_unseekable, shown_name

__all__ = ["read_edges", "read_table"]

logger = logging.getLogger(__name__)

#: File suffixes (lower case) read as Parquet; every other suffix is read as CSV.
PARQUET_SUFFIXES = frozenset({".parquet", ".pq"})
#: Delimiter used unless the header shows another one.
DEFAULT_DELIMITER = ","
#: Delimiters recognised in a header that holds no comma (semicolon: spreadsheets in
#: locales with a decimal comma; tab: copied tables; bar: database dumps).
ALTERNATIVE_DELIMITERS = (";", "\t", "|")
#: UTF-8, with an optional byte-order mark (spreadsheet programs write one).
ENCODING = "utf-8-sig"
_BOM = b"\xef\xbb\xbf"
#: Characters that make a line blank when nothing else is on it (pandas skips such lines).
_BLANK_CHARACTERS = " \t\r\n"
#: The pandas C parser's message for a row with too many fields.
_PANDAS_RAGGED = re.compile(r"Expected (\d+) fields in line (\d+), saw (\d+)")
#: A carriage return not followed by a line feed (an old-style line end).
_LONE_CR = re.compile(rb"\r(?!\n)")
#: Whether pandas' C parser reads every file holding a lone carriage return. Before
#: pandas 3.1 it misreads some (a quoted line break before a lone CR line end shifts the
#: later fields into other rows, or the read fails with "Buffer overflow caught"); with
#: those releases such a file is read by pandas' Python parser, which reads line ends
#: as the csv module does (it may word a refusal differently).
_C_PARSER_READS_LONE_CR = PANDAS_RELEASE >= (3, 1)
#: pandas' messages for a quoted field that never closes (C parser, Python parser).
_PANDAS_UNCLOSED = ("EOF inside string", "unexpected end of data")
_EMPTY_FILE = "the file is empty; expected a header row such as 'source,target'"
_NO_FILE = "no such file; check the path (a relative path starts from the current folder)"
_FOLDER = "this is a folder, not a file; give the path of the table file"


@dataclass(frozen=True)
class _Header:
    """The first non-blank record of a CSV file."""

    line: int
    names: list[str]
    delimiter: str
    detected: bool


@dataclass(frozen=True)
class _Table:
    """A table read from a file: its frame of strings, its line finder and a record."""

    frame: pd.DataFrame
    locate: Callable[[int], int | None]
    record: dict[str, Any]


class _NoLines:
    """Line finder of a file without lines (Parquet): always ``None``."""

    header_line = None

    def __call__(self, row_position: int) -> int | None:
        return None


class _LineLocator:
    """Physical line (1-based) on which data row ``row_position`` (0-based) starts.

    The file is scanned with the :mod:`csv` module only when asked, that is
    when an error is being reported; blank lines and quoted fields that hold
    line breaks are accounted for. Returns ``None`` when the row cannot be found.
    """

    def __init__(self, path: Path, header: _Header) -> None:
        self.path = path
        self.delimiter = header.delimiter
        self.header_line = header.line
        self._starts: list[int] = []

    def __call__(self, row_position: int) -> int | None:
        if row_position < 0:
            return None
        if row_position >= len(self._starts):
            self._starts = self._scan(until=row_position)
        return self._starts[row_position] if row_position < len(self._starts) else None

    def _scan(self, *, until: int) -> list[int]:
        starts: list[int] = []
        try:
            with _open_text(self.path) as handle:
                records = _records(handle, self.delimiter)
                next(records, None)  # the header
                for start, _ in records:
                    starts.append(start)
                    if len(starts) > until:
                        break
        except (OSError, UnicodeDecodeError, csv.Error) as exc:
            logger.debug("could not locate rows of %s: %s", self.path, exc)
        return starts


def _open_text(path: Path) -> TextIO:
    """The file as text for the csv module (which wants ``newline=''``)."""
    return open(path, encoding=ENCODING, newline="")


def _records(handle: Iterable[str], delimiter: str) -> Iterator[tuple[int, list[str]]]:
    """Non-blank CSV records with the physical line each starts on, as pandas sees them.

    A line holding only spaces or tabs (and not the delimiter) is blank, as for
    pandas; a quoted field may span lines.
    """
    raw: list[str] = []

    def lines() -> Iterator[str]:
        for line in handle:
            raw.append(line)
            yield line

    reader = csv.reader(lines(), delimiter=delimiter)
    previous_end = 0
    for fields in reader:
        start, previous_end = previous_end + 1, reader.line_num
        consumed, raw[:] = list(raw), []
        if len(consumed) == 1 and _is_blank(consumed[0], delimiter):
            continue
        yield start, fields


def _is_blank(line: str, delimiter: str) -> bool:
    return delimiter not in line and not line.strip(_BLANK_CHARACTERS)


# ----------------------------------------------------------------- files
#: A file name argument.
_PATH = InstanceOf((str, os.PathLike), "a str or os.PathLike")


@dataclass(frozen=True)
class _Delimiter(Constraint):
    """One character that can separate fields (a quote or line break cannot)."""

    description: str = "one character other than a quote or line break"

    def accepts(self, value: Any) -> bool:
        return isinstance(value, str) and len(value) == 1 and value not in '"\r\n'


def _checked_path(path: Any) -> Path:
    path = Path(check_param(path, "path", [_PATH]))
    if not path.exists():
        raise InputError(_NO_FILE, path=path)
    if path.is_dir():
        raise InputError(_FOLDER, path=path)
    refuse_unseekable(path)
    return path


def _checked_delimiter(delimiter: Any) -> str | None:
    return check_param(delimiter, "delimiter", [NoneOk(), _Delimiter()])


def _unreadable(path: Path, exc: OSError) -> InputError:
    reason = exc.strerror or str(exc)
    return InputError(f"the file cannot be read ({reason}); check its permissions", path=path)


def _encoding_error(path: Path) -> InputError:
    """Find the first line that is not valid UTF-8 and say how to fix it."""
    line = 1
    with open(path, "rb") as handle:
        for number, raw in enumerate(handle):
            chunk = raw[len(_BOM) :] if number == 0 and raw.startswith(_BOM) else raw
            try:
                chunk.decode("utf-8")
            except UnicodeDecodeError as exc:
                # Old-style files end lines with a lone carriage return.
                before = chunk[: exc.start]
                line += before.count(b"\r") - before.count(b"\r\n")
                byte = chunk[exc.start]
                return InputError(
                    f"byte 0x{byte:02x} at byte {exc.start + 1} of this line is not UTF-8; "
                    "re-export the file as UTF-8 (in a spreadsheet: save as 'CSV UTF-8')",
                    path=path,
                    line=line,
                )
            line += 1 + chunk.count(b"\r") - chunk.count(b"\r\n")
    return InputError("the file is not valid UTF-8; re-export it as UTF-8", path=path)


# ------------------------------------------------------------------ CSV
def _sniff_delimiter(line: str) -> tuple[str, bool]:
    """Comma, unless the header has none and exactly one alternative delimiter."""
    if DEFAULT_DELIMITER in line:
        return DEFAULT_DELIMITER, False
    present = [d for d in ALTERNATIVE_DELIMITERS if d in line]
    if len(present) == 1:
        return present[0], True
    return DEFAULT_DELIMITER, False


def _read_header(path: Path, delimiter: str | None) -> _Header:
    try:
        with _open_text(path) as handle:
            for number, line in enumerate(handle, start=1):
                if not line.strip(_BLANK_CHARACTERS):
                    continue
                chosen, detected = (
                    (delimiter, False) if delimiter is not None else _sniff_delimiter(line)
                )
                # A quoted name may span lines: let the csv module read on.
                _, names = next(_records(itertools.chain([line], handle), chosen))
                return _Header(number, names, chosen, detected)
    except UnicodeDecodeError:
        raise _encoding_error(path) from None
    except csv.Error as exc:
        raise InputError(f"the header cannot be read as CSV ({exc})", path=path) from None
    raise InputError(_EMPTY_FILE, path=path, line=1)


def _check_header(path: Path, header: _Header) -> None:
    seen: dict[str, int] = {}
    for number, name in enumerate(header.names, start=1):
        if name in seen and name:
            raise InputError(
                f"the header names this column twice (columns {seen[name]} and {number}); "
                "rename one of them",
                path=path,
                line=header.line,
                column=name,
                column_number=number,
            )
        seen[name] = number


def _parse_csv(path: Path, header: _Header) -> pd.DataFrame:
    plain = read_plain_csv(path, header.names, header.delimiter, header.line)
    if plain is not None:
        return plain
    with warnings.catch_warnings():
        # A first data row longer than the header only warns; make it a ragged row.
        warnings.simplefilter("error", pd.errors.ParserWarning)
        try:
            if not _C_PARSER_READS_LONE_CR and _has_lone_cr(path):
                with _open_text(path) as handle:
                    return _pandas_csv(handle, header, engine="python")
            return _pandas_csv(path, header, engine="c")
        except UnicodeDecodeError:
            raise _encoding_error(path) from None
        except pd.errors.EmptyDataError:
            raise InputError(_EMPTY_FILE, path=path, line=1) from None
        except (pd.errors.ParserError, pd.errors.ParserWarning) as exc:
            raise _ragged_error(path, header, str(exc)) from None


def _has_lone_cr(path: Path) -> bool:
    """Whether the file holds a carriage return that no line feed follows."""
    with open(path, "rb") as handle:
        try:
            with mmap.mmap(handle.fileno(), 0, access=mmap.ACCESS_READ) as data:
                return _LONE_CR.search(data) is not None
        except ValueError:  # an empty file cannot be mapped
            return False


def _pandas_csv(
    source: Path | TextIO, header: _Header, *, engine: Literal["c", "python"]
) -> pd.DataFrame:
    """The table as text cells, read by pandas' ``engine`` parser."""
    return pd.read_csv(
        source,
        sep=header.delimiter,
        dtype=str,
        keep_default_na=False,
        na_filter=False,
        encoding=ENCODING,
        index_col=False,
        engine=engine,
    )


def _ragged_error(path: Path, header: _Header, pandas_message: str) -> InputError:
    """Find the first row with more fields than the header."""
    expected = len(header.names)
    line, seen = None, None
    try:
        with _open_text(path) as handle:
            for start, fields in _records(handle, header.delimiter):
                if start > header.line and len(fields) > expected:
                    line, seen = start, len(fields)
                    break
    except (OSError, UnicodeDecodeError, csv.Error):
        pass
    if line is None and any(text in pandas_message for text in _PANDAS_UNCLOSED):
        opened = _unclosed_quote_line(path, header.delimiter)
        return InputError(
            "a double quote opened here is never closed, so the rest of the file would be one "
            'value; close the quote, or double it ("") where it is part of the text',
            path=path,
            line=opened,
        )
    if line is None:
        match = _PANDAS_RAGGED.search(pandas_message)
        if match is None:
            return InputError(f"the file cannot be read as CSV ({pandas_message})", path=path)
        line, seen = int(match.group(2)), int(match.group(3))
    return InputError(
        f"this row has {seen} fields but the header has {expected}; a value probably "
        f"holds the delimiter {header.delimiter!r}: put that value in double quotes, "
        "or remove the extra fields",
        path=path,
        line=line,
    )


def _unclosed_quote_line(path: Path, delimiter: str) -> int | None:
    """Physical line on which the quoted field that never closes opens (CSV quoting rules)."""
    opened, inside = None, False
    try:
        with _open_text(path) as handle:
            for number, text in enumerate(handle, start=1):
                previous = delimiter
                i = 0
                while i < len(text):
                    char = text[i]
                    if inside:
                        if char == '"':
                            if text[i + 1 : i + 2] == '"':
                                i += 1
                            else:
                                inside = False
                    elif char == '"' and previous in (delimiter, "\n", "\r"):
                        inside, opened = True, number
                    previous = char
                    i += 1
    except (OSError, UnicodeDecodeError):
        return None
    return opened if inside else None


def _read_csv(path: Path, delimiter: str | None) -> _Table:
    header = _read_header(path, delimiter)
    _check_header(path, header)
    if header.detected:
        logger.info(
            "%s: no comma in the header; using delimiter %r", shown_name(path), header.delimiter
        )
    frame = _parse_csv(path, header)
    record = {
        "path": str(path),
        "format": "csv",
        "delimiter": header.delimiter,
        "delimiter_detected": header.detected,
    }
    return _Table(frame, _LineLocator(path, header), record)


# --------------------------------------------------------------- Parquet
def _read_parquet(path: Path) -> _Table:
    try:
        import pyarrow as pa
        import pyarrow.parquet as pq
    except ImportError:
        raise InputError(
            "reading Parquet needs pyarrow; install it with: pip install 'specgraph[parquet]'",
            path=path,
        ) from None
    try:
        table = pq.read_table(path)
    except (pa.ArrowException, OSError) as exc:
        raise InputError(
            f"this is not a readable Parquet file ({exc}); check the file, or save the "
            "table as CSV",
            path=path,
        ) from None
    names = table.column_names
    duplicated = sorted({name for name in names if names.count(name) > 1})
    if duplicated:
        raise InputError(
            f"the table names a column more than once: {duplicated}; rename the copies",
            path=path,
        )
    columns = {name: _parquet_text(table.column(name)) for name in names}
    frame = pd.DataFrame({name: column for name, (column, _) in columns.items()})
    frame.attrs[NOT_TEXT] = {
        name: _type_words(table.column(name).type)
        for name, (_, is_text) in columns.items()
        if not is_text
    }
    return _Table(frame, _NoLines(), {"path": str(path), "format": "parquet"})


#: Key of a Parquet frame's ``attrs``: the columns whose values cannot be read as
#: text (lists, structs, maps, bytes that are not UTF-8), each with its Arrow type in
#: words; node ids are refused from them (:func:`specgraph.io._frames.refuse_not_text`).
NOT_TEXT = FRAME_NOT_TEXT


def _type_words(arrow_type: Any) -> str:
    import pyarrow as pa

    if pa.types.is_binary(arrow_type) or pa.types.is_large_binary(arrow_type):
        return f"{arrow_type} (bytes that are not all UTF-8 text)"
    return str(arrow_type)


def _parquet_text(column: Any) -> tuple[pd.Series, bool]:
    """A Parquet column as exact text (missing values as ''), or as is if it cannot be.

    Returns the column and whether it was read as text. Binary values are text
    when every one is UTF-8 (the cast checks it), as string values are;
    dictionary-encoded values are read through their dictionary; list, struct
    and map values cannot be cast to text (Apache Arrow's cast table) and stay
    as they are (see :data:`NOT_TEXT`).
    """
    import pyarrow as pa
    import pyarrow.compute as pc

    try:
        text = pc.cast(column, pa.string()).fill_null("")
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
        return column.to_pandas(), False
    return text.to_pandas(), True


# ------------------------------------------------------------ GraphML
def _load_graphml(path: Any, nodes: Any) -> tuple[_Table, _Table | None]:
    """The edge and node tables of a GraphML file (which holds both)."""
    checked = _checked_path(path)
    if nodes is not None:
        raise parameter_error(
            "nodes",
            "left out with a GraphML file (it holds its own nodes, so no separate node "
            "table can be given)",
            nodes,
            shown=f"{str(nodes)!r} with the GraphML file {str(checked)!r}",
        )
    try:
        tables = read_graphml(checked)
    except IsADirectoryError:
        raise InputError(_FOLDER, path=checked) from None
    except FileNotFoundError:
        raise InputError(_NO_FILE, path=checked) from None
    except OSError as exc:
        raise _unreadable(checked, exc) from None
    edges = _Table(tables.edges, tables.edge_lines, tables.record)
    if tables.nodes.empty:
        return edges, None
    return edges, _Table(tables.nodes, tables.node_lines, tables.record)


# ------------------------------------------------------------ public API
def _load_table(
    path: Any, *, delimiter: str | None, graphml: Literal["nodes", "edges"] = "nodes"
) -> _Table:
    """One table of a file; of a GraphML file (which holds two), the one ``graphml`` names."""
    checked = _checked_path(path)
    delimiter = _checked_delimiter(delimiter)
    try:
        if checked.suffix.lower() in PARQUET_SUFFIXES:
            return _read_parquet(checked)
        if checked.suffix.lower() in GRAPHML_SUFFIXES:
            tables = read_graphml(checked)
            if graphml == "edges":
                return _Table(tables.edges, tables.edge_lines, tables.record)
            return _Table(tables.nodes, tables.node_lines, tables.record)
        return _read_csv(checked, delimiter)
    except IsADirectoryError:
        raise InputError(_FOLDER, path=checked) from None
    except FileNotFoundError:
        raise InputError(_NO_FILE, path=checked) from None
    except OSError as exc:
        raise _unreadable(checked, exc) from None


def read_table(
    path: str | os.PathLike[str], *, delimiter: str | None = None
) -> tuple[pd.DataFrame, Callable[[int], int | None]]:
    """Read a CSV or Parquet table as a frame of strings, with a line finder.

    Parameters
    ----------
    path : str or path-like
        A ``.parquet`` or ``.pq`` file is read as Parquet (this needs
        ``pyarrow``: ``pip install 'specgraph[parquet]'``); any other file as
        CSV in UTF-8, with or without a byte-order mark.
    delimiter : str, default=None
        Field delimiter of a CSV file. ``None`` means a comma, except that when
        the header holds no comma and exactly one of ``;``, tab or ``|``, that
        one is used (and logged).

    Returns
    -------
    frame : pandas.DataFrame
        Every cell as text, exactly as written: nothing is stripped and no word
        (``NA``, ``null``, ...) is read as missing. An empty cell is ``''``;
        a missing Parquet value is ``''`` too.
    locate : callable
        ``locate(row_position)`` gives the 1-based physical line of the file on
        which data row ``row_position`` (0-based position in ``frame``)
        starts, counting blank lines and line breaks inside quoted fields
        (the header is line 1 unless blank lines precede it). The file is
        scanned only when ``locate`` is called. For Parquet, always ``None``.

    Raises
    ------
    InputError
        For a missing or unreadable file, a folder, an empty file, bytes that
        are not UTF-8, a column named twice, or a row with more fields than
        the header; the message names the file and line.
    """
    table = _load_table(path, delimiter=delimiter)
    return table.frame, table.locate


def read_edges(
    path: str | os.PathLike[str],
    *,
    source: str = "source",
    target: str = "target",
    weight: str | None = None,
    distance: bool = False,
    nodes: str | os.PathLike[str] | None = None,
    node: str = "node",
    x: str | None = None,
    y: str | None = None,
    size: str | None = None,
    delimiter: str | None = None,
    directed: bool = False,
) -> Network:
    """Read an edge table (and optionally a node table) from CSV, Parquet or GraphML.

    Both tables are read with :func:`read_table` and turned into a network by
    :func:`network_from_frames`; errors name the file, line and column.

    Parameters
    ----------
    path : str or path-like
        The edge table: one row per link. A ``.graphml`` file holds both
        tables: its edges (columns ``source``, ``target`` and one per edge
        key, by the key's ``attr.name``) and its nodes (column ``node`` and
        one per node key); it is parsed with entity declarations and external
        references refused (see :mod:`specgraph.io._graphml`), and ``nodes``
        must then be ``None``.
    source, target, weight, distance, node, x, y, size
        As for :func:`network_from_frames`.
    nodes : str or path-like, default=None
        Optional node table, read the same way.
    delimiter : str, default=None
        CSV delimiter of both tables; ``None`` chooses per file as in
        :func:`read_table`.
    directed : bool, default=False
        Keep each link's direction ``source -> target``
        (see :func:`network_from_frames`).

    Returns
    -------
    Network
        Its ``notes`` also record, under ``"edge_table"`` (and ``"node_table"``),
        the file, its format and the delimiter used.
    """
    if _checked_path(path).suffix.lower() in GRAPHML_SUFFIXES:
        edges, node_table = _load_graphml(path, nodes)
        marked = edges.record["directed_edges"]
        if marked and not directed:
            logger.warning(
                "%s: %d edges are marked directed; they are read as undirected links (read "
                "with --directed, directed=True in Python, to keep their direction)",
                shown_name(path),
                marked,
            )
    else:
        edges = _load_table(path, delimiter=delimiter)
        node_table = None if nodes is None else _load_table(nodes, delimiter=delimiter)
    notes = {"edge_table": edges.record}
    if node_table is not None:
        notes["node_table"] = node_table.record
    columns = Columns(source, target, weight, distance, node, x, y, size)
    return build_network(
        edges.frame,
        None if node_table is None else node_table.frame,
        columns,
        edge_origin=Origin(edges.record["path"], edges.locate),
        node_origin=(
            Origin() if node_table is None else Origin(node_table.record["path"], node_table.locate)
        ),
        notes=notes,
        directed=directed,
    )
