"""pyarrow's CSV reader (specgraph.io._arrow_csv): pandas' answers, faster.

The reference is pandas: ``pandas.read_csv(dtype=str, keep_default_na=False,
na_filter=False, index_col=False)`` for the cells.
"""

from __future__ import annotations

import csv
import io
import warnings
from pathlib import Path

import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from specgraph.io import _arrow_csv, _tables, read_table

pytest.importorskip("pyarrow")

#: Examples per property test.
PROPERTY_EXAMPLES = 80

cells = st.one_of(
    st.sampled_from(["J1", "007", "NA", "null", "", " ", "a,b", 'q"t', "x\ny", "x\r\ny", "ü", "#"]),
    st.text(alphabet='ab ,"\n\r\t;', max_size=4),
)
LINE_ENDS = ["\n", "\r\n", "\n\n", "\n \n", "\r"]


def write(folder: Path, name: str, text: str | bytes) -> Path:
    path = folder / name
    path.write_bytes(text.encode("utf-8") if isinstance(text, str) else text)
    return path


def pandas_reference(path: Path, delimiter: str = ",") -> pd.DataFrame | None:
    """pandas' reading of every cell as text, or None where pandas refuses the file."""
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error", pd.errors.ParserWarning)
            return pd.read_csv(
                path,
                sep=delimiter,
                dtype=str,
                keep_default_na=False,
                na_filter=False,
                encoding="utf-8-sig",
                index_col=False,
            )
    except (pd.errors.ParserError, pd.errors.ParserWarning, UnicodeDecodeError):
        return None


@settings(max_examples=PROPERTY_EXAMPLES, deadline=None)
@given(
    rows=st.lists(st.tuples(cells, cells, cells, st.sampled_from(LINE_ENDS)), max_size=8),
    bom=st.booleans(),
    final_end=st.booleans(),
)
def test_arrow_reads_every_file_it_takes_as_pandas_does(
    tmp_path_factory: pytest.TempPathFactory,
    rows: list[tuple[str, str, str, str]],
    bom: bool,
    final_end: bool,
) -> None:
    text = ("\ufeff" if bom else "") + "source,target,weight\n"
    for source, target, weight, end in rows:
        buffer = io.StringIO()
        csv.writer(buffer).writerow([source, target, weight])
        text += buffer.getvalue().removesuffix("\r\n") + end
    if not final_end:
        text = text.rstrip("\r\n")
    path = write(tmp_path_factory.mktemp("arrow"), "edges.csv", text)
    mine = _arrow_csv.read_plain_csv(path, ["source", "target", "weight"], ",", 1)
    reference = pandas_reference(path)
    if mine is None:
        return  # left to pandas: nothing to compare
    assert reference is not None, "pyarrow read a file pandas refuses"
    pd.testing.assert_frame_equal(mine, reference, check_column_type=True)


ST = ["source", "target"]


@pytest.mark.parametrize(
    ("text", "names", "line"),
    [
        pytest.param('source,target\nJ1,J2\nJ2,"J3\nJ3,J4\n', ST, 1, id="unclosed-quote-runs-on"),
        pytest.param('source,target\nJ1,J2\nJ2,"J3', ST, 1, id="unclosed-quote-on-last-line"),
        pytest.param("source,target\nJ1,J2\nJ2\n", ST, 1, id="short-row"),
        pytest.param("source,target\nJ1,J2,J3\n", ST, 1, id="long-row"),
        pytest.param("source,target\nJ1,J2\n  \nJ2,J3\n", ST, 1, id="line-of-spaces"),
        pytest.param("source,target\rJ1,J2\rJ2,J3\r", ST, 1, id="lone-carriage-returns"),
        pytest.param("\nsource,target\nJ1,J2\n", ST, 2, id="blank-line-before-header"),
        pytest.param("source,\nJ1,J2\n", ["source", ""], 1, id="unnamed-column"),
        pytest.param(b"source,target\nJ1,J\xff2\n", ST, 1, id="not-utf8"),
    ],
)
def test_files_pandas_reads_differently_are_left_to_pandas(
    tmp_path: Path, text: str | bytes, names: list[str], line: int
) -> None:
    path = write(tmp_path, "edges.csv", text)
    assert _arrow_csv.read_plain_csv(path, names, ",", line) is None


def test_one_column_tables_are_left_to_pandas(tmp_path: Path) -> None:
    path = write(tmp_path, "nodes.csv", "node\nJ1\n   \nJ2\n")
    assert _arrow_csv.read_plain_csv(path, ["node"], ",", 1) is None
    frame, _ = read_table(path)
    assert frame["node"].tolist() == ["J1", "J2"]  # pandas skips the line of spaces


@pytest.mark.parametrize("delimiter", [",", ";", "\t", "|"])
def test_read_table_same_frame_with_and_without_arrow(tmp_path: Path, delimiter: str) -> None:
    rows = [["007", "NA", "1.5", '"quoted, text"'], [" J1", "ü", "+2", "=SUM(A1)"]]
    text = delimiter.join(["source", "target", "weight", "note"]) + "\r\n"
    text += "".join(delimiter.join(row) + "\r\n" for row in rows)
    path = write(tmp_path, "edges.csv", text)
    fast, _ = read_table(path)
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(_tables, "read_plain_csv", lambda *args: None)
        slow, _ = read_table(path)
    pd.testing.assert_frame_equal(fast, slow, check_column_type=True)
    reference = pandas_reference(path, delimiter)
    assert reference is not None
    pd.testing.assert_frame_equal(fast, reference, check_column_type=True)
