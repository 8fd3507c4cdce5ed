"""pyarrow's CSV reader and number cast (specgraph.io._arrow_csv, _frames): pandas' answers, faster.

The reference everywhere is pandas: ``pandas.read_csv(dtype=str, keep_default_na=False,
na_filter=False, index_col=False)`` for the cells, and Python's ``float`` (correctly
rounded, IEEE 754 round to nearest) for the numbers.
"""

from __future__ import annotations

import csv
import io
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from specgraph.io import _arrow_csv, _frames, _tables, read_edges, read_table

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
        pytest.param(
            'source,target,pipe\nJ1,J2,P1\nJ4,"a\n","c', [*ST, "pipe"], 1, id="unclosed-after-break"
        ),
    ],
)
def test_files_pandas_reads_differently_are_left_to_pandas(
    tmp_path: Path, text: str | bytes, names: list[str], line: int
) -> None:
    path = write(tmp_path, "edges.csv", text)
    assert _arrow_csv.read_plain_csv(path, names, ",", line) is None


@pytest.mark.parametrize("final_end", ["", "\n", "\r\n", "\n\n"])
def test_quoted_fields_on_every_line_are_read_by_arrow(tmp_path: Path, final_end: str) -> None:
    # Spreadsheets and databases often quote every text cell; such files, including
    # doubled quotes and a delimiter inside quotes on the last line, are not left to
    # pandas only for holding quotes.
    rows = ['"J1","J2","1.5"', '"J2","J3 ""x""","2"', '"J3","a,b","3"']
    path = write(tmp_path, "edges.csv", "source,target,weight\n" + "\n".join(rows) + final_end)
    mine = _arrow_csv.read_plain_csv(path, ["source", "target", "weight"], ",", 1)
    assert mine is not None
    reference = pandas_reference(path)
    assert reference is not None
    pd.testing.assert_frame_equal(mine, reference, check_column_type=True)


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


# ------------------------------------------------------------------ numbers
NUMBER_TEXTS = [
    "1", "+1", "-1", "00012", "1.", ".5", "+.5", "-.5e-3", "1e+05", "1E5", "0e0", "-0", "-0.0",
    "0", "1e-400", "4.9e-324", "2.4703282292062328e-324", "12345678901234567890",
    "9007199254740993", "0.30000000000000004", "1.7976931348623157e308", "1e400", "inf", "nan",
    " 1", "1 ", "1_000", "1,5", "abc", "", "0x10",
]  # fmt: skip


@settings(max_examples=PROPERTY_EXAMPLES, deadline=None)
@given(
    texts=st.lists(
        st.one_of(
            st.sampled_from(NUMBER_TEXTS),
            st.floats(allow_nan=False, allow_infinity=False).map(repr),
            st.integers(min_value=-(10**25), max_value=10**25).map(str),
        ),
        min_size=1,
        max_size=10,
    )
)
def test_numbers_read_by_arrow_are_pandas_numbers(texts: list[str]) -> None:
    arrow = pd.Series(pd.array(texts, dtype=pd.StringDtype("pyarrow")))
    fast = _frames._arrow_numbers(arrow)
    reference = _frames._parse_numbers(pd.Series(texts, dtype=object))  # pandas' path
    if fast is None:
        return  # left to pandas' path
    # Bit for bit, the sign of zero included; and what Python's float reads.
    np.testing.assert_array_equal(fast.view(np.int64), reference.view(np.int64))
    np.testing.assert_array_equal(fast, [float(t) for t in texts])


def test_number_faults_are_left_to_pandas_wording() -> None:
    for bad in ["inf", "nan", "abc", " 1", "-0", "1e400", ""]:
        arrow = pd.Series(pd.array(["1", bad], dtype=pd.StringDtype("pyarrow")))
        assert _frames._arrow_numbers(arrow) is None, bad


# ------------------------------------------------------------ whole reading
def test_read_edges_same_network_with_and_without_arrow(tmp_path: Path) -> None:
    edges = write(
        tmp_path,
        "edges.csv",
        "\ufeffsource,target,weight,pipe\r\n007,NA,1.5,P1\r\nNA, J1,0.30000000000000004,P2\r\n"
        '" J1",ü,+2.5,"P,3"\r\n007,NA,1e-3,P4\r\nü,ü,4,P5\r\n=SUM(A1),007,0,P6\r\n',
    )
    nodes = write(tmp_path, "nodes.csv", "node,x\n007,1\nNA,2\n J1,3\nü,4\n=SUM(A1),5\nlone,6\n")
    fast = read_edges(edges, nodes=nodes)
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(_tables, "read_plain_csv", lambda *args: None)
        patch.setattr("specgraph._links.arrow_text", lambda values: None)
        patch.setattr(_frames, "arrow_text", lambda values: None)
        slow = read_edges(edges, nodes=nodes)
    assert fast.node_ids.tolist() == slow.node_ids.tolist()
    assert (fast.adjacency != slow.adjacency).nnz == 0
    pd.testing.assert_frame_equal(fast.link_table, slow.link_table)
    assert dict(fast.notes) == dict(slow.notes)
    assert fast.notes["isolated_nodes"] == 1
    assert fast.notes["duplicate_links_merged"] == 1
