"""pyarrow's multithreaded CSV reader, for the plain files it reads exactly as pandas does.

:func:`specgraph.io.read_table` reads every CSV cell as text with pandas'
parser. pyarrow's parser reads a file in blocks on every core and, asked for
text columns with no missing-value words, gives the same frame: at 2*10^6 rows
of five columns it took 0.5 to 0.8 s where pandas took 2.4 to 3.1 s (two cores).
It is used only for files on which the two were checked to agree, and pandas
reads every other file (and words every refusal) as before:

* pyarrow is installed (it is optional: the ``parquet`` extra);
* the header is on the first line and names every column (pandas names an
  unnamed column ``Unnamed: N``, and skips blank lines before the header by
  rules of its own);
* the table has at least :data:`MIN_ARROW_COLUMNS` columns: pandas skips a line
  of spaces as blank, which pyarrow reads as a one-field row, so only where
  every row has several fields does such a line make pyarrow refuse the file;
* no carriage return stands alone (older pandas reads such line ends with its
  Python parser, see :mod:`specgraph.io._tables`);
* pyarrow reads the file without an error and finds the header's names: a
  short or long row or bytes that are not UTF-8 make it stop, and pandas then
  reads the file and says what is wrong, where;
* no quoted field can have run on to the end of the file: pandas refuses a
  quote that never closes, which pyarrow reads as a value holding the rest of
  the file (see :func:`_quotes_closed`).

Quoted fields may hold line breaks; pyarrow is told so (which costs it some
speed) only when the file holds a double quote at all.
"""

from __future__ import annotations

import mmap
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pandas as pd

__all__ = ["MIN_ARROW_COLUMNS", "read_plain_csv"]

#: Fewest columns of a table read by pyarrow (see the module notes: with one
#: column, a line of spaces would be a row for pyarrow and a blank for pandas).
MIN_ARROW_COLUMNS = 2
#: The quote character of both parsers.
_QUOTE = b'"'
#: A carriage return not followed by a line feed (an old-style line end).
_LONE_CR = re.compile(rb"\r(?!\n)")


@dataclass(frozen=True)
class _Scan:
    """What one pass of byte searches finds in a file."""

    quoted: bool  # a double quote anywhere
    lone_cr: bool  # a carriage return not followed by a line feed
    last_line: bytes  # the last line that is not empty, without its line end


def _scan(path: Path) -> _Scan:
    with open(path, "rb") as handle:
        try:
            with mmap.mmap(handle.fileno(), 0, access=mmap.ACCESS_READ) as data:
                quoted = data.find(_QUOTE) >= 0
                lone_cr = data.find(b"\r") >= 0 and _LONE_CR.search(data) is not None
                end = len(data)
                while end and data[end - 1 : end] in (b"\n", b"\r"):
                    end -= 1
                start = max(data.rfind(b"\n", 0, end), data.rfind(b"\r", 0, end)) + 1
                return _Scan(quoted, lone_cr, data[start:end] if quoted else b"")
        except ValueError:  # an empty file cannot be mapped
            return _Scan(False, False, b"")


def _ends_inside_quotes(line: str, delimiter: str) -> bool:
    """Whether a line read from outside any quote ends inside a quoted field.

    Quoting as both parsers read it: a quote opens a quoted field only at the
    start of a field; inside, two quotes are one quote and one quote closes
    the field; after it, and anywhere else, a quote is an ordinary character.
    """
    inside, field_start, i = False, True, 0
    while i < len(line):
        char = line[i]
        if inside:
            if char == '"' and line[i + 1 : i + 2] == '"':
                i += 1
            elif char == '"':
                inside = False
        elif char == '"' and field_start:
            inside = True
        field_start = not inside and char == delimiter
        i += 1
    return inside


def _quotes_closed(scan: _Scan, table: Any, delimiter: str) -> bool:
    """Whether no quoted field runs on to the end of the file (pandas refuses one; pyarrow not).

    A field whose quote never closes takes the rest of the file, so it is the
    last cell pyarrow reads (in an earlier column it would leave its row short,
    which pyarrow refuses). When no cell of the last row holds a line break,
    that row is the last line, read from outside any quote: then the field is
    unclosed exactly when that line ends inside quotes. A last row holding a
    line break is left to pandas.
    """
    if not scan.quoted:
        return True
    if table.num_rows == 0:
        return False
    last_row = [table.column(k)[table.num_rows - 1].as_py() for k in range(table.num_columns)]
    if any("\n" in cell or "\r" in cell for cell in last_row):
        return False
    try:
        line = scan.last_line.decode("utf-8")
    except UnicodeDecodeError:
        return False
    return not _ends_inside_quotes(line, delimiter)


def read_plain_csv(path: Path, names: list[str], delimiter: str, header_line: int) -> Any:
    """The table as text cells, read by pyarrow, or None where pandas must read it.

    Parameters
    ----------
    path : Path
        A CSV file in UTF-8 (a byte-order mark is skipped by both parsers).
    names : list of str
        The header's names, as the :mod:`csv` module read them.
    delimiter : str
        The field delimiter.
    header_line : int
        Physical line of the header (1-based).

    Returns
    -------
    pandas.DataFrame or None
        The same frame as ``pd.read_csv(path, dtype=str, keep_default_na=False,
        na_filter=False, index_col=False)``, or None when the file is not one
        of those the module notes list.
    """
    if header_line != 1 or len(names) < MIN_ARROW_COLUMNS or not all(names):
        return None
    try:
        import pyarrow as pa
        import pyarrow.csv as pcsv
    except ImportError:
        return None
    scan = _scan(path)
    if scan.lone_cr:
        return None
    parse = pcsv.ParseOptions(
        delimiter=delimiter,
        quote_char='"',
        double_quote=True,
        newlines_in_values=scan.quoted,
        ignore_empty_lines=True,
    )
    convert = pcsv.ConvertOptions(
        column_types=dict.fromkeys(names, pa.string()),
        null_values=[],
        strings_can_be_null=False,
        quoted_strings_can_be_null=False,
    )
    try:
        table = pcsv.read_csv(path, parse_options=parse, convert_options=convert)
    except (pa.ArrowException, UnicodeDecodeError):
        return None
    if table.column_names != names or not _quotes_closed(scan, table, delimiter):
        return None
    frame: pd.DataFrame = table.to_pandas()
    return frame
