"""Reading edge and node tables: exact ids, input policies, and errors that say where."""

from __future__ import annotations

import csv
import io
import math
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from specgraph.exceptions import InputError, ParameterError
from specgraph.io import network_from_frames, read_edges, read_table

#: Examples per property test: enough to reach odd ids and bad weights, still fast.
PROPERTY_EXAMPLES = 60


def write(folder: Path, name: str, text: str | bytes) -> Path:
    """Write ``text`` byte for byte (no newline translation)."""
    path = folder / name
    path.write_bytes(text.encode("utf-8") if isinstance(text, str) else text)
    return path


def assert_points_at(
    err: InputError, path: Path, *, line: int | None, column: str | None = None
) -> None:
    message = str(err)
    assert path.name in message
    assert err.line == line
    if line is not None:
        assert f"line {line}" in message
    if column is not None:
        assert err.column == column
        assert f"'{column}'" in message


# --------------------------------------------------------------- good paths
def test_ids_kept_exactly(tmp_path: Path) -> None:
    path = write(tmp_path, "edges.csv", "source,target\n007,NA\nnull,None\n J1 ,007\n")
    net = read_edges(path)
    assert net.node_ids.tolist() == ["007", "NA", "null", "None", " J1 "]
    assert net.n_links == 3


def test_duplicates_reversed_and_self_loops_counted(tmp_path: Path) -> None:
    text = "source,target,weight\nJ1,J2,1\nJ2,J1,2.5\nJ1,J2,0.5\nJ3,J3,9\nJ2,J3,0\nJ3,J4,1\n"
    net = read_edges(write(tmp_path, "edges.csv", text))
    assert net.adjacency[0, 1] == pytest.approx(4.0)
    assert net.notes["duplicate_links_merged"] == 2
    assert net.notes["self_loops_dropped"] == 1
    assert net.notes["zero_weight_links_dropped"] == 1
    assert net.notes["input_links"] == 6
    assert net.notes["weight_column"] == "weight"
    assert net.notes["weight_read_as"] == "affinity"


def test_no_weight_column_gives_unit_weights(tmp_path: Path) -> None:
    net = read_edges(write(tmp_path, "edges.csv", "source,target\nJ1,J2\nJ2,J3\n"))
    assert net.link_table["weight"].tolist() == [1.0, 1.0]
    assert net.notes["weight_column"] is None
    assert net.notes["weight_read_as"] is None


def test_distance_converted_to_affinity(tmp_path: Path) -> None:
    text = "source,target,length_m\nJ1,J2,10\nJ2,J3,20\nJ3,J4,40\n"
    net = read_edges(write(tmp_path, "edges.csv", text), weight="length_m", distance=True)
    # affinity = median / length = 20 / length
    assert net.link_table["weight"].tolist() == [2.0, 1.0, 0.5]
    assert net.notes["weight_read_as"] == "distance"
    assert net.notes["weight_conversion"]["reference_distance"] == 20.0
    assert net.link_table["length_m"].tolist() == ["10", "20", "40"]


def test_zero_affinity_allowed(tmp_path: Path) -> None:
    net = read_edges(write(tmp_path, "edges.csv", "source,target,weight\nJ1,J2,0\nJ2,J3,1\n"))
    assert net.n_nodes == 3
    assert net.notes["zero_weight_links_dropped"] == 1


def test_extra_columns_passed_through(tmp_path: Path) -> None:
    text = "pipe_id,from,to,length_m,material\nP-01,J1,J2,5,PVC\nP-02,J2,J3,15,\n"
    path = write(tmp_path, "edges.csv", text)
    net = read_edges(path, source="from", target="to", weight="length_m")
    table = net.link_table
    assert list(table.columns) == ["source", "target", "weight", "pipe_id", "length_m", "material"]
    assert table["pipe_id"].tolist() == ["P-01", "P-02"]
    assert table["weight"].tolist() == [5.0, 15.0]
    assert table["material"].tolist() == ["PVC", ""]


def test_byte_order_mark_header(tmp_path: Path) -> None:
    path = write(tmp_path, "edges.csv", b"\xef\xbb\xbfsource,target\r\nJ1,J2\r\n")
    net = read_edges(path)
    assert net.node_ids.tolist() == ["J1", "J2"]


@pytest.mark.parametrize(
    ("delimiter", "text"),
    [
        pytest.param(";", "source;target;weight\nJ1;J2;1.5\nJ2;J3;2\n", id="semicolon"),
        pytest.param("\t", "source\ttarget\tweight\nJ1\tJ2\t1.5\nJ2\tJ3\t2\n", id="tab"),
        pytest.param("|", "source|target|weight\nJ1|J2|1.5\nJ2|J3|2\n", id="bar"),
    ],
)
def test_delimiter_detected(tmp_path: Path, delimiter: str, text: str) -> None:
    net = read_edges(write(tmp_path, "edges.csv", text))
    assert net.link_table["weight"].tolist() == [1.5, 2.0]
    assert net.notes["edge_table"]["delimiter"] == delimiter
    assert net.notes["edge_table"]["delimiter_detected"] is True


def test_explicit_delimiter(tmp_path: Path) -> None:
    path = write(tmp_path, "edges.txt", "source;target;note\nJ1;J2;a,b\n")
    net = read_edges(path, delimiter=";")
    assert net.link_table["note"].tolist() == ["a,b"]
    assert net.notes["edge_table"]["delimiter_detected"] is False


def test_node_table_with_sizes_and_coordinates(tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", "source,target\nQJ-002,QJ-001\nQJ-001,QJ-003\n")
    nodes = write(
        tmp_path,
        "nodes.csv",
        "node,east,north,served\nQJ-001,0,0,10\nQJ-002,1.5,-2,0\nQJ-003,3,4,7.5\nQJ-004,9,9,1\n",
    )
    net = read_edges(edges, nodes=nodes, x="east", y="north", size="served")
    assert net.node_ids.tolist() == ["QJ-001", "QJ-002", "QJ-003", "QJ-004"]
    np.testing.assert_array_equal(net.coordinates, [[0, 0], [1.5, -2], [3, 4], [9, 9]])
    np.testing.assert_array_equal(net.sizes, [10, 0, 7.5, 1])
    assert net.notes["isolated_nodes"] == 1
    assert net.n_components == 2
    assert net.notes["node_table"]["path"] == str(nodes)


def test_read_table_locates_lines(tmp_path: Path) -> None:
    text = '\nsource,target\nJ1,J2\n\n"J\n3",J4\n   \nJ5,J6\n'
    frame, locate = read_table(write(tmp_path, "edges.csv", text))
    assert frame["source"].tolist() == ["J1", "J\n3", "J5"]
    assert [locate(k) for k in range(3)] == [3, 5, 8]
    assert locate(3) is None


def test_parquet_roundtrip(tmp_path: Path) -> None:
    pytest.importorskip("pyarrow")
    frame = pd.DataFrame(
        {
            "source": ["007", "NA", "J1"],
            "target": ["NA", "J1", "007"],
            "weight": [0.1 + 0.2, 2.0, 1e-7],
            "pipe_id": [11, 12, 13],
        }
    )
    path = tmp_path / "edges.parquet"
    frame.to_parquet(path)
    net = read_edges(path)
    assert net.node_ids.tolist() == ["007", "NA", "J1"]
    assert net.link_table["weight"].tolist() == [0.1 + 0.2, 2.0, 1e-7]
    assert net.link_table["pipe_id"].tolist() == ["11", "12", "13"]
    assert net.notes["edge_table"]["format"] == "parquet"


def test_parquet_integer_ids_exact(tmp_path: Path) -> None:
    pytest.importorskip("pyarrow")
    frame = pd.DataFrame({"source": [1, 2], "target": [2, 30]})
    path = tmp_path / "edges.pq"
    frame.to_parquet(path)
    assert read_edges(path).node_ids.tolist() == ["1", "2", "30"]


def test_frames_in_memory() -> None:
    edges = pd.DataFrame({"a": ["J1", "J2"], "b": ["J2", "J3"], "w": [1.0, 2.0]})
    net = network_from_frames(edges, source="a", target="b", weight="w")
    assert net.link_table["w"].tolist() == [1.0, 2.0]
    assert net.n_nodes == 3


# -------------------------------------------------------------- bad files
@pytest.mark.parametrize(
    ("text", "line", "needle"),
    [
        pytest.param("", 1, "the file is empty", id="zero-bytes"),
        pytest.param("\n   \n\n", 1, "the file is empty", id="only-whitespace"),
        pytest.param("source,target\n", 1, "no links", id="header-only"),
        pytest.param("source,target\nJ1,J2,J3\n", 2, "3 fields", id="ragged-first-row"),
        pytest.param(
            'source,target\nJ1,J2\n\n"J\n3",J4\nJ5,J6,J7\n', 6, "3 fields", id="ragged-late-row"
        ),
        pytest.param(b"source,target\nJ1,J2\nJ\xe93,J4\n", 3, "UTF-8", id="not-utf8"),
        pytest.param(b"source,target\rJ1,J2\rJ\xe93,J4\r", 3, "UTF-8", id="not-utf8-cr-lines"),
        pytest.param("source,source\nJ1,J2\n", 1, "twice", id="column-named-twice"),
    ],
)
def test_bad_file(tmp_path: Path, text: str | bytes, line: int, needle: str) -> None:
    path = write(tmp_path, "edges.csv", text)
    with pytest.raises(InputError, match=needle) as info:
        read_edges(path)
    assert_points_at(info.value, path, line=line)


@pytest.mark.parametrize(
    ("name", "needle"),
    [
        pytest.param("missing.csv", "check the path", id="missing-file"),
        pytest.param("folder", "folder", id="directory"),
    ],
)
def test_bad_path(tmp_path: Path, name: str, needle: str) -> None:
    (tmp_path / "folder").mkdir()
    with pytest.raises(InputError, match=needle) as info:
        read_edges(tmp_path / name)
    assert name in str(info.value)


def test_missing_column(tmp_path: Path) -> None:
    path = write(tmp_path, "edges.csv", "from,to\nJ1,J2\n")
    with pytest.raises(InputError, match="--source") as info:
        read_edges(path)
    assert_points_at(info.value, path, line=1, column="source")
    assert "'from', 'to'" in str(info.value)


def test_missing_weight_column(tmp_path: Path) -> None:
    path = write(tmp_path, "edges.csv", "source,target\nJ1,J2\n")
    with pytest.raises(InputError, match="--weight") as info:
        read_edges(path, weight="length_m")
    assert_points_at(info.value, path, line=1, column="length_m")


@pytest.mark.parametrize(
    ("cell", "needle"),
    [
        pytest.param("", "is empty", id="empty"),
        pytest.param("abc", "is not a number", id="text"),
        pytest.param("1,5", "not a plain number", id="decimal-comma"),
        pytest.param("nan", "not finite", id="nan"),
        pytest.param("inf", "not finite", id="inf"),
        pytest.param("-2", "negative", id="negative"),
    ],
)
def test_bad_weight(tmp_path: Path, cell: str, needle: str) -> None:
    text = f'source,target,weight\nJ1,J2,1\nJ2,J3,"{cell}"\nJ3,J4,also-bad\n'
    path = write(tmp_path, "edges.csv", text)
    with pytest.raises(InputError, match=needle) as info:
        read_edges(path)
    assert_points_at(info.value, path, line=3, column="weight")
    assert "(column 3)" in str(info.value)
    assert repr(cell) in str(info.value)


@pytest.mark.parametrize("cell", ["0", "-0", "0.0"], ids=["zero", "minus-zero", "zero-point"])
def test_zero_length_refused(tmp_path: Path, cell: str) -> None:
    path = write(tmp_path, "edges.csv", f"source,target,length_m\nJ1,J2,4\nJ2,J3,{cell}\n")
    with pytest.raises(InputError, match="zero length") as info:
        read_edges(path, weight="length_m", distance=True)
    assert_points_at(info.value, path, line=3, column="length_m")


def test_bad_weight_after_multiline_field(tmp_path: Path) -> None:
    text = 'source,target,weight,note\nJ1,J2,1,"two\nlines"\n\nJ2,J3,1,""\nJ3,J4,x,\n'
    path = write(tmp_path, "edges.csv", text)
    with pytest.raises(InputError, match="not a number") as info:
        read_edges(path)
    assert_points_at(info.value, path, line=6, column="weight")


@pytest.mark.parametrize(
    ("text", "line", "column"),
    [
        pytest.param("source,target\nJ1,J2\nJ2,\n", 3, "target", id="empty-target"),
        pytest.param("source,target\nJ1,J2\n,J3\n", 3, "source", id="empty-source"),
        pytest.param("note,source,target\nJ1,J2\n", 2, "target", id="short-row"),
    ],
)
def test_empty_id(tmp_path: Path, text: str, line: int, column: str) -> None:
    path = write(tmp_path, "edges.csv", text)
    with pytest.raises(InputError, match="node id is empty") as info:
        read_edges(path)
    assert_points_at(info.value, path, line=line, column=column)


def test_unused_column_named_weight(tmp_path: Path) -> None:
    path = write(tmp_path, "edges.csv", "source,target,weight,length_m\nJ1,J2,1,5\n")
    with pytest.raises(InputError, match="link table") as info:
        read_edges(path, weight="length_m")
    assert_points_at(info.value, path, line=1, column="weight")


# ------------------------------------------------------------- node tables
EDGES = "source,target\nJ1,J2\nJ2,J3\n"


SIZE = {"size": "size"}
XY = {"x": "x", "y": "y"}


@pytest.mark.parametrize(
    ("nodes", "options", "line", "column", "needle"),
    [
        pytest.param("node\nJ1\nJ2\nJ3\nJ2\n", {}, 5, "node", "first on line 3", id="duplicate"),
        pytest.param("node,size\nJ1,1\nJ2,-1\nJ3,1\n", SIZE, 3, "size", "negative", id="size"),
        pytest.param("node,x,y\nJ1,0,0\nJ2,0,\nJ3,1,1\n", XY, 3, "y", "is empty", id="coordinate"),
        pytest.param("id,size\nJ1,1\n", SIZE, 1, "node", "node=", id="no-node-column"),
        pytest.param("node\nJ1\n", SIZE, 1, "size", "--size-col", id="no-size-column"),
        pytest.param("node,size\n", SIZE, 1, None, "no rows", id="header-only"),
    ],
)
def test_bad_node_table(
    tmp_path: Path,
    nodes: str,
    options: dict[str, str],
    line: int,
    column: str | None,
    needle: str,
) -> None:
    edges = write(tmp_path, "edges.csv", EDGES)
    node_path = write(tmp_path, "nodes.csv", nodes)
    with pytest.raises(InputError, match=needle) as info:
        read_edges(edges, nodes=node_path, **options)
    assert_points_at(info.value, node_path, line=line, column=column)


def test_link_end_not_in_node_table(tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", EDGES)
    nodes = write(tmp_path, "nodes.csv", "node\nJ1\nJ2\n")
    with pytest.raises(InputError, match="add it to the node table or leave out --nodes") as info:
        read_edges(edges, nodes=nodes)
    assert_points_at(info.value, edges, line=3, column="target")
    assert "'J3'" in str(info.value)
    assert "nodes.csv" in str(info.value)


@pytest.mark.parametrize(
    "options",
    [
        pytest.param({"x": "x"}, id="x-without-y"),
        pytest.param({"distance": True}, id="distance-without-weight"),
        pytest.param({"source": "a", "target": "a"}, id="same-id-columns"),
        pytest.param({"delimiter": ";;"}, id="long-delimiter"),
    ],
)
def test_bad_options(tmp_path: Path, options: dict[str, object]) -> None:
    path = write(tmp_path, "edges.csv", "a,source,target\nJ0,J1,J2\n")
    with pytest.raises(ParameterError):
        read_edges(path, **options)  # type: ignore[arg-type]


# ---------------------------------------------------- frames and Parquet
def test_frame_without_lines_names_rows() -> None:
    edges = pd.DataFrame({"source": ["J1", "J2"], "target": ["J2", "J3"], "w": [1.0, -1.0]})
    with pytest.raises(InputError, match="row 2: weight") as info:
        network_from_frames(edges, weight="w")
    assert info.value.line is None
    assert info.value.column_number == 3


def test_parquet_bad_weight_names_row(tmp_path: Path) -> None:
    pytest.importorskip("pyarrow")
    path = tmp_path / "edges.parquet"
    pd.DataFrame(
        {"source": ["J1", "J2"], "target": ["J2", "J3"], "weight": [1.0, None]}
    ).to_parquet(path)
    with pytest.raises(InputError, match="row 2: weight") as info:
        read_edges(path)
    assert "edges.parquet" in str(info.value)
    assert info.value.column == "weight"


def test_parquet_unreadable(tmp_path: Path) -> None:
    pytest.importorskip("pyarrow")
    path = write(tmp_path, "edges.parquet", "source,target\nJ1,J2\n")
    with pytest.raises(InputError, match="Parquet") as info:
        read_edges(path)
    assert "edges.parquet" in str(info.value)


def test_parquet_without_pyarrow(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    path = write(tmp_path, "edges.parquet", b"PAR1")
    monkeypatch.setitem(sys.modules, "pyarrow", None)
    monkeypatch.setitem(sys.modules, "pyarrow.parquet", None)
    with pytest.raises(InputError, match=r"pip install 'specgraph\[parquet\]'") as info:
        read_edges(path)
    assert "edges.parquet" in str(info.value)


# ------------------------------------------------------------- property
ODD_IDS = ["J1", "007", "NA", "null", "None", "", " ", " J2", "a,b", 'q"t', "x\ny", "ü", "#"]
BAD_WEIGHTS = ["", "abc", "nan", "-inf", "-1", "1,5"]

ids = st.one_of(st.sampled_from(ODD_IDS), st.text(max_size=4))
weights = st.one_of(
    st.floats(min_value=0, max_value=1e6).map(repr),
    st.integers(min_value=0, max_value=10**6).map(str),
    st.sampled_from(BAD_WEIGHTS),
)
rows = st.lists(st.tuples(ids, ids, weights), min_size=1, max_size=8)


def _valid(table: list[tuple[str, str, str]]) -> bool:
    def fine(weight: str) -> bool:
        try:
            value = float(weight)
        except ValueError:
            return False
        return math.isfinite(value) and value >= 0 and "," not in weight

    return all(s != "" and t != "" and fine(w) for s, t, w in table)


@settings(max_examples=PROPERTY_EXAMPLES, deadline=None)
@given(table=rows)
def test_random_tables_load_or_raise_input_error(
    tmp_path_factory: pytest.TempPathFactory, table: list[tuple[str, str, str]]
) -> None:
    path = tmp_path_factory.mktemp("random") / "edges.csv"
    with path.open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["source", "target", "weight"])
        writer.writerows(table)
    try:
        net = read_edges(path)
    except InputError:
        assert not _valid(table)
        return
    assert _valid(table)
    assert net.n_nodes == len({end for s, t, _ in table for end in (s, t)})


LINE_ENDS = ["\n", "\r\n", "\r", "\n\n", "\n  \n"]
awkward_ids = st.text(alphabet='ab \n\r",', min_size=1, max_size=4)


def _physical_lines_before(text: str) -> int:
    return text.count("\n") + text.count("\r") - text.count("\r\n")


@settings(max_examples=PROPERTY_EXAMPLES, deadline=None)
@given(
    table=st.lists(st.tuples(awkward_ids, awkward_ids, st.sampled_from(LINE_ENDS)), min_size=1),
    bad=st.integers(min_value=0),
    lead=st.sampled_from(["", "\n", "\n \n"]),
)
def test_error_line_is_physical_line(
    tmp_path_factory: pytest.TempPathFactory,
    table: list[tuple[str, str, str]],
    bad: int,
    lead: str,
) -> None:
    bad %= len(table)
    text, expected = lead + "source,target,weight\n", 0
    for k, (source, target, end) in enumerate(table):
        buffer = io.StringIO()
        csv.writer(buffer).writerow([source, target, "x" if k == bad else "1"])
        if k == bad:
            expected = _physical_lines_before(text) + 1
        text += buffer.getvalue().removesuffix("\r\n") + end
    path = write(tmp_path_factory.mktemp("lines"), "edges.csv", text)
    with pytest.raises(InputError, match="not a number") as info:
        read_edges(path)
    assert info.value.line == expected


@settings(max_examples=PROPERTY_EXAMPLES, deadline=None)
@given(table=st.lists(st.tuples(awkward_ids, awkward_ids, st.sampled_from(LINE_ENDS)), min_size=1))
def test_python_parser_path_reads_lone_cr_files_as_written(
    tmp_path_factory: pytest.TempPathFactory, table: list[tuple[str, str, str]]
) -> None:
    # pandas' C parser before 3.1 misreads some files holding a lone CR, so with those
    # releases the reader takes pandas' Python parser for them; that path is forced here,
    # whatever pandas is installed. Reference: the cells written by csv.writer.
    from specgraph.io import _tables

    text = "source,target,weight\r"
    for source, target, end in table:
        buffer = io.StringIO()
        csv.writer(buffer).writerow([source, target, "1"])
        text += buffer.getvalue().removesuffix("\r\n") + end
    path = write(tmp_path_factory.mktemp("lone-cr"), "edges.csv", text)
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(_tables, "_C_PARSER_READS_LONE_CR", False)
        frame, locate = read_table(path)
    assert frame["source"].tolist() == [source for source, _, _ in table]
    assert frame["target"].tolist() == [target for _, target, _ in table]
    assert locate(0) == 2


@settings(max_examples=PROPERTY_EXAMPLES, deadline=None)
@given(weights=st.lists(st.floats(min_value=1e-300, max_value=1e300), min_size=1, max_size=20))
def test_number_rereading_path_keeps_weights_exact(weights: list[float]) -> None:
    # pandas before 3.1 rounds some numbers in text by one unit in the last place (and
    # before 3.0 reads '1e400' as NaN), so with those releases the reader reads text
    # cells again with float; that path is forced here, whatever pandas is installed.
    # Reference: repr of a double is a string that float reads back to the same double
    # (Python's float repr, round-trip guarantee), and 1e400 exceeds the largest double.
    from specgraph.io import _frames

    n = len(weights)
    edges = pd.DataFrame(
        {
            "source": [f"J{i}" for i in range(n)],
            "target": [f"K{i}" for i in range(n)],
            "w": [repr(w) for w in weights],
        }
    )
    overflow = edges.assign(w=[*edges["w"][:-1], "1e400"])
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(_frames, "_PANDAS_READS_NUMBERS_EXACTLY", False)
        net = network_from_frames(edges, weight="w")
        with pytest.raises(InputError, match="not finite"):
            network_from_frames(overflow, weight="w")
    assert net.link_table["weight"].tolist() == weights
