"""One test per row of docs/bad-input.md: every bad input class, through the command line.

Each error row checks the exit code (2), the message (file name, line and column where they
apply) and that no output folder appeared; each policy row checks that the run succeeds and
that ``run.json`` counts what was changed. The expected behaviour is the project's own
contract (docs/input-policy.md, docs/zones.md, docs/diagnostics.md, DESIGN.md "Exit codes");
the expected ids, lines and counts are worked out by hand from the small invented files below.
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import networkx as nx
import pandas as pd
import pytest

from specgraph.cli import main

EXIT_OK, EXIT_INPUT = 0, 2

# Two triangles (J1-J2-J3 and J4-J5-J6) joined by J3-J4: connected, six nodes, seven links.
TWO_TRIANGLES = "source,target\nJ1,J2\nJ2,J3\nJ3,J1\nJ3,J4\nJ4,J5\nJ5,J6\nJ6,J4\n"
# A path J1..J5 and a separate link J6-J7: two components of five and two nodes.
PATH_AND_PAIR = "source,target\nJ1,J2\nJ2,J3\nJ3,J4\nJ4,J5\nJ6,J7\n"


# ------------------------------------------------------------------ helpers
def write(folder: Path, name: str, data: str | bytes) -> Path:
    """Write ``data`` byte for byte (no newline translation)."""
    path = folder / name
    path.write_bytes(data.encode("utf-8") if isinstance(data, str) else data)
    return path


def run(
    capsys: pytest.CaptureFixture[str], out: Path, command: str, *args: str | Path
) -> tuple[int, str]:
    """Run ``specgraph COMMAND ARGS --out OUT --quiet``; return the exit code and stderr."""
    code = main([command, *map(str, args), "--out", str(out), "--quiet"])
    return code, capsys.readouterr().err


def refused(
    capsys: pytest.CaptureFixture[str],
    tmp_path: Path,
    command: str,
    *args: str | Path,
    names: Sequence[str] = (),
) -> str:
    """Run a command that must stop with exit 2, name ``names`` and write nothing."""
    out = tmp_path / "refused-out"
    code, err = run(capsys, out, command, *args)
    assert code == EXIT_INPUT, err
    assert "error" in err
    assert "Traceback" not in err
    for name in names:
        assert name in err, (name, err)
    assert not out.exists(), "an output folder appeared although the run was refused"
    return err


def zoned(
    capsys: pytest.CaptureFixture[str], tmp_path: Path, *args: str | Path
) -> tuple[dict[str, Any], pd.DataFrame, str]:
    """Run ``specgraph zones`` that must succeed; return run.json, zones.csv (ids as text)."""
    out = tmp_path / "out"
    code, err = run(capsys, out, "zones", *args)
    assert code == EXIT_OK, err
    record = json.loads((out / "run.json").read_text(encoding="utf-8"))
    zones = pd.read_csv(out / "zones.csv", dtype={"node": str}, keep_default_na=False)
    return record, zones, err


def policy(record: dict[str, Any]) -> dict[str, Any]:
    return dict(record["network"]["input_policy"])


# -------------------------------------------------------------- files, rows
@pytest.mark.parametrize(
    "data", [pytest.param("", id="zero-bytes"), pytest.param("\n \n\n", id="blank-lines")]
)
def test_empty_file(capsys: pytest.CaptureFixture[str], tmp_path: Path, data: str) -> None:
    edges = write(tmp_path, "edges.csv", data)
    refused(capsys, tmp_path, "zones", edges, names=["edges.csv", "line 1", "empty"])


def test_header_only_edge_table(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", "source,target,weight\n")
    refused(capsys, tmp_path, "zones", edges, names=["edges.csv", "line 1", "no rows"])


def test_header_only_node_table(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    nodes = write(tmp_path, "junctions.csv", "node\n")
    refused(
        capsys,
        tmp_path,
        "zones",
        edges,
        "--nodes",
        nodes,
        names=["junctions.csv", "line 1", "no rows"],
    )


def test_missing_file_and_folder(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    refused(capsys, tmp_path, "zones", tmp_path / "nowhere.csv", names=["nowhere.csv", "no such"])
    folder = tmp_path / "a-folder"
    folder.mkdir()
    refused(capsys, tmp_path, "zones", folder, names=["a-folder", "folder"])


def test_misnamed_column(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", "from,to\nJ1,J2\n")
    err = refused(
        capsys, tmp_path, "zones", edges, names=["edges.csv", "line 1", "column 'source'"]
    )
    # The message lists the columns present and the option that maps one.
    assert "'from', 'to'" in err
    assert "--source" in err


def test_missing_weight_column(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    refused(
        capsys,
        tmp_path,
        "zones",
        edges,
        "--weight",
        "length_m",
        names=["edges.csv", "line 1", "column 'length_m'", "--weight"],
    )


def test_column_named_twice(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", "source,target,source\nJ1,J2,J3\n")
    refused(
        capsys,
        tmp_path,
        "zones",
        edges,
        names=["edges.csv", "line 1", "column 'source' (column 3)", "twice"],
    )


def test_wrong_delimiter_not_recognised(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    # A colon is none of the recognised delimiters: the header reads as one column.
    edges = write(tmp_path, "edges.csv", "source:target\nJ1:J2\n")
    refused(capsys, tmp_path, "zones", edges, names=["edges.csv", "line 1", "'source:target'"])


def test_alternative_delimiter_detected_and_recorded(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    edges = write(tmp_path, "edges.csv", "source;target;weight\nJ1;J2;1.5\nJ2;J3;2\n")
    record, zones, _ = zoned(capsys, tmp_path, edges, "--zones", "1")
    table = policy(record)["edge_table"]
    assert table["delimiter"] == ";"
    assert table["delimiter_detected"] is True
    assert sorted(zones["node"]) == ["J1", "J2", "J3"]


def test_ragged_row_too_many_fields(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", "source,target\nJ1,J2\nJ2,J3,J4\n")
    refused(capsys, tmp_path, "zones", edges, names=["edges.csv", "line 3", "3 fields"])


def test_ragged_row_too_few_fields(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", "source,target\nJ1,J2\nJ2\n")
    refused(
        capsys,
        tmp_path,
        "zones",
        edges,
        names=["edges.csv", "line 3", "column 'target' (column 2)", "empty"],
    )


def test_embedded_newline_read_and_lines_stay_physical(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    # The quoted id "J\n1" spans lines 2-3, so the bad weight of the next row is on line 4.
    good = write(tmp_path, "good.csv", 'source,target\n"J\n1",J2\nJ2,J3\nJ3,"J\n1"\n')
    _, zones, _ = zoned(capsys, tmp_path, good, "--zones", "1")
    assert sorted(zones["node"]) == ["J\n1", "J2", "J3"]
    bad = write(tmp_path, "bad.csv", 'source,target,weight\n"J\n1",J2,1\nJ2,J3,x\n')
    refused(
        capsys,
        tmp_path,
        "zones",
        bad,
        names=["bad.csv", "line 4", "column 'weight' (column 3)"],
    )


def test_unterminated_quote_names_line(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    # The quote opened on line 3 is never closed.
    edges = write(tmp_path, "edges.csv", 'source,target\nJ1,J2\nJ2,"J3\nJ3,J4\n')
    refused(capsys, tmp_path, "zones", edges, names=["edges.csv", "line 3"])


def test_unterminated_quote_refused(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", 'source,target\nJ1,J2\nJ2,"J3\nJ3,J4\n')
    refused(capsys, tmp_path, "zones", edges, names=["edges.csv"])


# ------------------------------------------------------------------ weights
@pytest.mark.parametrize(
    ("cell", "why"),
    [
        pytest.param("NaN", "not finite", id="nan"),
        pytest.param("inf", "not finite", id="inf"),
        pytest.param("-inf", "not finite", id="minus-inf"),
        pytest.param("1e400", "not finite", id="overflows"),
        pytest.param("-2", "negative", id="negative"),
        pytest.param("heavy", "not a number", id="text"),
        pytest.param("", "empty", id="empty"),
        pytest.param('"1,5"', "not a plain number", id="decimal-comma"),
    ],
)
def test_bad_weight(
    capsys: pytest.CaptureFixture[str], tmp_path: Path, cell: str, why: str
) -> None:
    edges = write(tmp_path, "edges.csv", f"source,target,weight\nJ1,J2,1\nJ2,J3,{cell}\n")
    refused(
        capsys,
        tmp_path,
        "zones",
        edges,
        names=["edges.csv", "line 3", "column 'weight' (column 3)", why],
    )


@pytest.mark.parametrize("cell", ["NaN", "-1", "x", ""], ids=["nan", "negative", "text", "empty"])
def test_bad_length_in_distance_mode(
    capsys: pytest.CaptureFixture[str], tmp_path: Path, cell: str
) -> None:
    edges = write(tmp_path, "edges.csv", f"source,target,length_m\nJ1,J2,10\nJ2,J3,{cell}\n")
    refused(
        capsys,
        tmp_path,
        "zones",
        edges,
        "--weight",
        "length_m",
        "--distance",
        names=["edges.csv", "line 3", "column 'length_m' (column 3)"],
    )


def test_zero_weight_link_dropped_and_counted(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    edges = write(tmp_path, "edges.csv", "source,target,weight\nJ1,J2,1\nJ2,J3,0\nJ3,J4,1\n")
    record, zones, err = zoned(capsys, tmp_path, edges, "--zones", "2")
    assert policy(record)["zero_weight_links_dropped"] == 1
    # The ends are kept: the network falls into {J1, J2} and {J3, J4}.
    assert sorted(zones["node"]) == ["J1", "J2", "J3", "J4"]
    assert record["network"]["components"] == 2
    assert "2 connected components" in err


def test_zero_length_in_distance_mode(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", "source,target,weight\nJ1,J2,1\nJ2,J3,0\n")
    refused(
        capsys,
        tmp_path,
        "zones",
        edges,
        "--distance",
        names=["edges.csv", "line 3", "column 'weight' (column 3)", "zero"],
    )


def test_distance_without_weight_column(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    refused(capsys, tmp_path, "zones", edges, "--distance", names=["--distance", "--weight"])


# -------------------------------------------------------------------- links
def test_duplicate_and_reversed_links_merged_and_counted(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    # J1-J2 three times (once reversed): two rows merged into the first.
    edges = write(tmp_path, "edges.csv", "source,target\nJ1,J2\nJ2,J1\nJ1,J2\nJ2,J3\n")
    record, _, _ = zoned(capsys, tmp_path, edges, "--zones", "1")
    assert policy(record)["duplicate_links_merged"] == 2
    assert policy(record)["input_links"] == 4
    assert record["network"]["links"] == 2


def test_self_loop_dropped_and_counted(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", "source,target\nJ1,J1\nJ1,J2\nJ2,J3\n")
    record, zones, _ = zoned(capsys, tmp_path, edges, "--zones", "1")
    assert policy(record)["self_loops_dropped"] == 1
    assert record["network"]["links"] == 2
    assert sorted(zones["node"]) == ["J1", "J2", "J3"]


@pytest.mark.parametrize("command", ["zones", "spectrum", "robustness"])
def test_only_self_loops_refused(
    capsys: pytest.CaptureFixture[str], tmp_path: Path, command: str
) -> None:
    edges = write(tmp_path, "edges.csv", "source,target\nJ1,J1\nJ2,J2\n")
    refused(
        capsys, tmp_path, command, edges, names=["no links between distinct nodes", "self-loop"]
    )


# ---------------------------------------------------------------------- ids
def test_leading_zeros_kept(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", "source,target\n007,7\n7,0007\n")
    record, zones, _ = zoned(capsys, tmp_path, edges, "--zones", "1")
    assert sorted(zones["node"]) == ["0007", "007", "7"]
    assert record["network"]["nodes"] == 3


def test_ids_pandas_would_read_as_missing_are_ids(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    edges = write(tmp_path, "edges.csv", "source,target\nNA,null\nnull,None\nNone,NaN\nNaN,NA\n")
    record, zones, _ = zoned(capsys, tmp_path, edges, "--zones", "1")
    assert sorted(zones["node"]) == ["NA", "NaN", "None", "null"]
    assert record["network"]["nodes"] == 4


def test_empty_id_refused(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", "source,target\nJ1,J2\n,J3\n")
    refused(
        capsys,
        tmp_path,
        "zones",
        edges,
        names=["edges.csv", "line 3", "column 'source' (column 1)", "empty"],
    )


def test_missing_id_in_parquet_refused(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    pa = pytest.importorskip("pyarrow")
    pq = pytest.importorskip("pyarrow.parquet")
    path = tmp_path / "edges.parquet"
    pq.write_table(pa.table({"source": ["J1", None, "J3"], "target": ["J2", "J3", "J1"]}), path)
    # Parquet has no lines: the message names the 1-based data row instead.
    refused(
        capsys,
        tmp_path,
        "zones",
        path,
        names=["edges.parquet", "column 'source'", "row 2", "empty"],
    )


def test_mixed_type_ids_are_text(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    # "1" and "1.0" are two ids: nothing is parsed as a number.
    edges = write(tmp_path, "edges.csv", "source,target\n1,J2\n1.0,J2\nJ2,2\n")
    record, zones, _ = zoned(capsys, tmp_path, edges, "--zones", "1")
    assert sorted(zones["node"]) == ["1", "1.0", "2", "J2"]
    assert record["network"]["nodes"] == 4


def test_integer_ids_in_parquet_become_text(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    pa = pytest.importorskip("pyarrow")
    pq = pytest.importorskip("pyarrow.parquet")
    path = tmp_path / "edges.parquet"
    table = pa.table({"source": pa.array([1, 2, 3], pa.int64()), "target": ["2", "3", "01"]})
    pq.write_table(table, path)
    _, zones, _ = zoned(capsys, tmp_path, path, "--zones", "1")
    assert sorted(zones["node"]) == ["01", "1", "2", "3"]


@pytest.mark.parametrize(
    ("data", "line"),
    [
        pytest.param(b"source,target\nJ1,J2\nJ\xe92,J3\n", "line 3", id="latin-1-byte"),
        pytest.param("source,target\nJ1,J2\n".encode("utf-16"), "line 1", id="utf-16"),
    ],
)
def test_non_utf8_bytes(
    capsys: pytest.CaptureFixture[str], tmp_path: Path, data: bytes, line: str
) -> None:
    edges = write(tmp_path, "edges.csv", data)
    refused(capsys, tmp_path, "zones", edges, names=["edges.csv", line, "UTF-8"])


def test_byte_order_mark_accepted(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", b"\xef\xbb\xbfsource,target\r\nJ1,J2\r\nJ2,J3\r\n")
    _, zones, _ = zoned(capsys, tmp_path, edges, "--zones", "1")
    assert sorted(zones["node"]) == ["J1", "J2", "J3"]


def test_very_long_line(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    long_id = "X" * 1_000_000
    edges = write(tmp_path, "edges.csv", f"source,target\nJ1,J2\nJ2,{long_id}\n")
    _, zones, _ = zoned(capsys, tmp_path, edges, "--zones", "1")
    assert sorted(zones["node"], key=len) == ["J1", "J2", long_id]


def test_huge_numeric_id_kept_exactly(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    # 400 digits: far beyond int64 and float64 range; must stay the exact text.
    huge = "9" * 399 + "1"
    edges = write(tmp_path, "edges.csv", f"source,target\n{huge},J2\nJ2,J3\n")
    _, zones, _ = zoned(capsys, tmp_path, edges, "--zones", "1")
    assert huge in set(zones["node"])


# ------------------------------------------------------------ node tables
def test_duplicate_node_row(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    rows = "".join(f"J{i}\n" for i in range(1, 7))
    nodes = write(tmp_path, "junctions.csv", "node\n" + rows + "J3\n")
    refused(
        capsys,
        tmp_path,
        "zones",
        edges,
        "--nodes",
        nodes,
        names=["junctions.csv", "line 8", "column 'node'", "'J3'", "line 4"],
    )


def test_link_end_not_in_node_table(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    nodes = write(tmp_path, "junctions.csv", "node\n" + "".join(f"J{i}\n" for i in range(1, 6)))
    # J6 first appears as the target of line 7 (J5,J6).
    refused(
        capsys,
        tmp_path,
        "zones",
        edges,
        "--nodes",
        nodes,
        names=["edges.csv", "line 7", "column 'target'", "'J6'", "junctions.csv"],
    )


def test_bad_node_size(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    rows = "".join(f"J{i},{'nan' if i == 2 else 1}\n" for i in range(1, 7))
    nodes = write(tmp_path, "junctions.csv", "node,served\n" + rows)
    refused(
        capsys,
        tmp_path,
        "zones",
        edges,
        "--nodes",
        nodes,
        "--size-col",
        "served",
        names=["junctions.csv", "line 3", "column 'served' (column 2)", "not finite"],
    )


# ------------------------------------------------------------- network shape
def test_disconnected_network(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", PATH_AND_PAIR)
    record, zones, err = zoned(capsys, tmp_path, edges, "--zones", "1")
    assert record["network"]["components"] == 2
    # Raised to one zone per component, with a warning (docs/zones.md "Zone count").
    assert record["scores"]["zones"] == 2
    assert zones.groupby("zone")["node"].apply(set).tolist() in (
        [{"J1", "J2", "J3", "J4", "J5"}, {"J6", "J7"}],
    )
    assert "2 connected components" in err
    assert "raised to 2" in err


def test_isolated_nodes_counted(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    nodes = write(tmp_path, "junctions.csv", "node\n" + "".join(f"J{i}\n" for i in range(1, 9)))
    record, zones, _ = zoned(capsys, tmp_path, edges, "--nodes", nodes, "--zones", "2")
    assert policy(record)["isolated_nodes"] == 2
    assert record["network"]["components"] == 3
    # Each isolated node is its own component, hence its own zone.
    single = zones.groupby("zone")["node"].apply(set)
    assert {"J7"} in single.tolist()
    assert {"J8"} in single.tolist()


def test_zone_count_larger_than_a_component(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    # 5 zones on components of 5 and 2 nodes: allowed (5 <= 7 nodes), so it should run.
    edges = write(tmp_path, "edges.csv", PATH_AND_PAIR)
    record, zones, _ = zoned(capsys, tmp_path, edges, "--zones", "5")
    assert record["scores"]["zones"] == 5
    assert sorted(zones["zone"].unique().tolist()) == [0, 1, 2, 3, 4]


def test_zone_count_equal_to_node_count(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", "source,target\nJ1,J2\nJ2,J3\nJ3,J4\nJ4,J5\n")
    record, _, _ = zoned(capsys, tmp_path, edges, "--zones", "5")
    assert record["scores"]["zones"] == 5


def test_zone_count_larger_than_network(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    refused(capsys, tmp_path, "zones", edges, "--zones", "9", names=["zones", "6", "9"])


@pytest.mark.parametrize("value", ["0", "-3", "many", "1.5"])
def test_zone_count_not_a_count(
    capsys: pytest.CaptureFixture[str], tmp_path: Path, value: str
) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    refused(capsys, tmp_path, "zones", edges, "--zones", value, names=["--zones"])


# ------------------------------------------------------------------ GraphML
GRAPHML_HEAD = '<?xml version="1.0" encoding="UTF-8"?>\n'
GRAPHML_OPEN = '<graphml xmlns="http://graphml.graphdrawing.org/xmlns">\n'


def graphml(body: str, *, doctype: str = "", keys: str = "") -> str:
    """A GraphML document: line 1 the declaration, then the doctype lines, the root, keys, body."""
    return GRAPHML_HEAD + doctype + GRAPHML_OPEN + keys + body + "</graphml>\n"


TRIANGLES_GRAPHML = (
    '<graph edgedefault="undirected">\n'
    + "".join(f'<node id="J{i}"/>\n' for i in range(1, 7))
    + "".join(
        f'<edge source="{a}" target="{b}"/>\n'
        for a, b in [
            ("J1", "J2"),
            ("J2", "J3"),
            ("J3", "J1"),
            ("J3", "J4"),
            ("J4", "J5"),
            ("J5", "J6"),
            ("J6", "J4"),
        ]
    )
    + "</graph>\n"
)

# The "billion laughs" pattern (OWASP XML External Entity Prevention Cheat Sheet; the
# defusedxml documentation): nine levels of ten-fold entity references, 10**9 copies.
_LAUGHS = "".join(
    f'<!ENTITY lol{level} "{("&lol" + str(level - 1) + ";") * 10}">\n' for level in range(1, 10)
)
BOMB_DOCTYPE = '<!DOCTYPE graphml [\n<!ENTITY lol0 "lol">\n' + _LAUGHS + "]>\n"


def test_graphml_entity_bomb_refused(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    body = '<graph><node id="&lol9;"/><node id="b"/><edge source="b" target="b"/></graph>\n'
    path = write(tmp_path, "bomb.graphml", graphml(body, doctype=BOMB_DOCTYPE))
    # The first declaration is on line 3 (line 1: XML declaration, line 2: <!DOCTYPE).
    refused(capsys, tmp_path, "zones", path, names=["bomb.graphml", "line 3", "entit"])


def test_graphml_external_entity_refused(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    secret = write(tmp_path, "secret.txt", "J1")
    doctype = f'<!DOCTYPE graphml [ <!ENTITY leak SYSTEM "{secret.as_uri()}"> ]>\n'
    body = '<graph><node id="&leak;"/><node id="J2"/><edge source="J1" target="J2"/></graph>\n'
    path = write(tmp_path, "leak.graphml", graphml(body, doctype=doctype))
    err = refused(capsys, tmp_path, "zones", path, names=["leak.graphml", "line 2", "leak"])
    assert "J1," not in err


def test_graphml_external_dtd_refused(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    # A reserved, never-resolving name (RFC 6761 .invalid): a fetch attempt could not succeed.
    doctype = '<!DOCTYPE graphml SYSTEM "http://graphml.invalid/graphml.dtd">\n'
    path = write(tmp_path, "dtd.graphml", graphml(TRIANGLES_GRAPHML, doctype=doctype))
    refused(capsys, tmp_path, "zones", path, names=["dtd.graphml", "graphml.invalid"])


@pytest.mark.parametrize(
    ("text", "line", "column"),
    [
        # On line 3, </graph> (at 1-based column 50) does not match the open <edge>; the
        # XML parser (expat) points at the end tag's name, 1-based column 52.
        pytest.param(
            GRAPHML_HEAD + GRAPHML_OPEN + '<graph><node id="a"/><edge source="a" target="a">'
            "</graph>\n</graphml>\n",
            "line 3",
            "column 52",
            id="mismatched",
        ),
        pytest.param(
            GRAPHML_HEAD + GRAPHML_OPEN + "<graph>\n", "line 4", "column 1", id="truncated"
        ),
    ],
)
def test_graphml_not_well_formed(
    capsys: pytest.CaptureFixture[str], tmp_path: Path, text: str, line: str, column: str
) -> None:
    path = write(tmp_path, "broken.graphml", text)
    refused(capsys, tmp_path, "zones", path, names=["broken.graphml", line, column, "XML"])


def test_graphml_wrong_root(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    path = write(tmp_path, "svg.graphml", GRAPHML_HEAD + '<svg width="10"/>\n')
    refused(capsys, tmp_path, "zones", path, names=["svg.graphml", "line 2", "<svg>", "GraphML"])


@pytest.mark.parametrize(
    ("body", "element"),
    [
        pytest.param(
            '<graph>\n<node id="a"/>\n<hyperedge><endpoint node="a"/></hyperedge>\n</graph>\n',
            "<hyperedge>",
            id="hyperedge",
        ),
        pytest.param(
            '<graph>\n<node id="a"/>\n<node id="b"><port name="p"/></node>\n</graph>\n',
            "<port>",
            id="port",
        ),
        pytest.param(
            '<graph>\n<node id="a"/>\n<node id="b"><graph id="inner"/></node>\n</graph>\n',
            "nested",
            id="nested-graph",
        ),
        pytest.param(
            '<graph>\n<node id="a"/>\n</graph><graph>\n</graph>\n', "more than one", id="two-graphs"
        ),
    ],
)
def test_graphml_unsupported_elements(
    capsys: pytest.CaptureFixture[str], tmp_path: Path, body: str, element: str
) -> None:
    # Line 1 declaration, 2 root, 3 <graph>, 4 first node: the offending element is on line 5.
    path = write(tmp_path, "odd.graphml", graphml(body))
    refused(capsys, tmp_path, "zones", path, names=["odd.graphml", "line 5", element])


@pytest.mark.parametrize(
    ("keys", "data", "words"),
    [
        pytest.param("", '<data key="w">2</data>', "no <key>", id="undeclared"),
        pytest.param(
            '<key id="w" for="node" attr.name="pressure"/>\n',
            '<data key="w">2</data>',
            "for='node'",
            id="node-key-on-edge",
        ),
    ],
)
def test_graphml_undeclared_key(
    capsys: pytest.CaptureFixture[str], tmp_path: Path, keys: str, data: str, words: str
) -> None:
    body = (
        '<graph>\n<node id="a"/><node id="b"/>\n'
        f'<edge source="a" target="b">{data}</edge>\n</graph>\n'
    )
    path = write(tmp_path, "keys.graphml", graphml(body, keys=keys))
    line = 5 + keys.count("\n")
    refused(capsys, tmp_path, "zones", path, names=["keys.graphml", f"line {line}", words])


def test_graphml_bad_weight_names_edge_line(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    keys = '<key id="d0" for="edge" attr.name="capacity"/>\n'
    edges = [("J1", "J2", "3"), ("J2", "J3", "2"), ("J3", "J1", "-4")]
    body = (
        "<graph>\n"
        + "".join(f'<node id="J{i}"/>\n' for i in range(1, 4))
        + "".join(
            f'<edge source="{a}" target="{b}"><data key="d0">{w}</data></edge>\n'
            for a, b, w in edges
        )
        + "</graph>\n"
    )
    path = write(tmp_path, "caps.graphml", graphml(body, keys=keys))
    # Lines: 1 declaration, 2 root, 3 key, 4 <graph>, 5-7 nodes, 8-10 edges: -4 is on line 10.
    err = refused(
        capsys, tmp_path, "zones", path, "--weight", "capacity", names=["line 10", "capacity", "-4"]
    )
    assert "(column" not in err  # positions of frame columns mean nothing in XML


def test_graphml_edge_to_undeclared_node(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    body = (
        '<graph>\n<node id="a"/>\n<node id="b"/>\n<edge source="a" target="b"/>\n'
        '<edge source="b" target="zz"/>\n</graph>\n'
    )
    path = write(tmp_path, "ends.graphml", graphml(body))
    refused(capsys, tmp_path, "zones", path, names=["ends.graphml", "line 7", "zz"])


def test_graphml_with_node_table_refused(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    path = write(tmp_path, "net.graphml", graphml(TRIANGLES_GRAPHML))
    nodes = write(tmp_path, "nodes.csv", "node\nJ1\n")
    refused(capsys, tmp_path, "zones", path, "--nodes", nodes, names=["nodes", "GraphML"])


def test_graphml_directed_edges_counted(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    text = graphml(TRIANGLES_GRAPHML.replace("undirected", "directed"))
    path = write(tmp_path, "flow.graphml", text)
    record, zones, _ = zoned(capsys, tmp_path, path, "--zones", "2")
    assert policy(record)["edge_table"]["directed_edges"] == 7
    # Read as undirected: the two triangles are the two zones (hand-known answer).
    halves = zones.groupby("zone")["node"].apply(lambda s: sorted(s)).tolist()
    assert sorted(halves) == [["J1", "J2", "J3"], ["J4", "J5", "J6"]]


def test_graphml_key_defaults_applied(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    # Every link weighs 5 by default except the bridge J3-J4, which weighs 0.5.
    keys = '<key id="w" for="edge" attr.name="strength"><default>5</default></key>\n'
    body = TRIANGLES_GRAPHML.replace(
        '<edge source="J3" target="J4"/>',
        '<edge source="J3" target="J4"><data key="w">0.5</data></edge>',
    )
    path = write(tmp_path, "defaults.graphml", graphml(body, keys=keys))
    record, _, _ = zoned(capsys, tmp_path, path, "--weight", "strength", "--zones", "2")
    out = tmp_path / "out"
    boundary = pd.read_csv(out / "boundary.csv", dtype={"source": str, "target": str})
    assert boundary[["source", "target"]].values.tolist() == [["J3", "J4"]]
    assert boundary["weight"].tolist() == [0.5]
    assert record["network"]["links"] == 7


# ------------------------------------------------------------------ GeoJSON
def _feature(geometry: dict[str, Any], **properties: Any) -> dict[str, Any]:
    return {"type": "Feature", "properties": properties, "geometry": geometry}


def _collection(*features: dict[str, Any]) -> str:
    return json.dumps({"type": "FeatureCollection", "features": list(features)})


# A triangle of three lines in projected (metre-like) coordinates.
TRIANGLE_LINES = [
    _feature({"type": "LineString", "coordinates": [[500.0, 500.0], [600.0, 500.0]]}),
    _feature({"type": "LineString", "coordinates": [[600.0, 500.0], [550.0, 600.0]]}),
    _feature({"type": "LineString", "coordinates": [[550.0, 600.0], [500.0, 500.0]]}),
]


def test_geojson_not_json(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    path = write(tmp_path, "mains.geojson", '{"type": "FeatureCollection",\n "features": [,]}')
    # The stray comma is on line 2, column 15 (1-based, counted by hand).
    refused(capsys, tmp_path, "zones", path, names=["mains.geojson", "line 2", "column 15"])


def test_geojson_nested_too_deep(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    deep = "[" * 100_000 + "]" * 100_000
    text = (
        '{"type": "FeatureCollection", "features": [{"type": "Feature", "properties": '
        f'{{"note": {deep}}}, "geometry": {{"type": "LineString", "coordinates": '
        "[[0, 0], [1, 1]]}}]}"
    )
    path = write(tmp_path, "mains.geojson", text)
    err = refused(capsys, tmp_path, "zones", path, names=["mains.geojson", "recursion limit"])
    assert "internal error" not in err


@pytest.mark.parametrize("folder", ["", "   ", "/", "/tmp/.."])
def test_out_folder_empty_or_root(
    capsys: pytest.CaptureFixture[str], tmp_path: Path, monkeypatch: pytest.MonkeyPatch, folder: str
) -> None:
    from specgraph.exceptions import OutputError
    from specgraph.export import write_outputs

    monkeypatch.chdir(tmp_path)
    path = write(tmp_path, "mains.csv", TWO_TRIANGLES)
    assert main(["zones", str(path), "--zones", "2", "--out", folder, "--quiet"]) == EXIT_INPUT
    assert "--out" in capsys.readouterr().err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["mains.csv"]
    with pytest.raises(OutputError, match="output folder"):
        write_outputs(folder, {"run.json": {}})


def test_geojson_not_utf8(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    path = write(tmp_path, "mains.geojson", b'{"type": "FeatureCollection", "name": "\xe9"}')
    refused(capsys, tmp_path, "zones", path, names=["mains.geojson", "UTF-8"])


def test_geojson_not_a_feature_collection(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    path = write(tmp_path, "one.geojson", json.dumps(TRIANGLE_LINES[0]))
    refused(capsys, tmp_path, "zones", path, names=["one.geojson", "FeatureCollection", "Feature"])


def test_geojson_no_lines(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    points = _feature({"type": "Point", "coordinates": [1.0, 2.0]})
    path = write(tmp_path, "points.geojson", _collection(points))
    refused(capsys, tmp_path, "zones", path, names=["points.geojson", "no line"])


@pytest.mark.parametrize(
    "coordinates",
    [[[500.0, 500.0], ["x", 1.0]], [[500.0, 500.0], [float("nan"), 1.0]], [[500.0, 500.0]]],
    ids=["text", "nan", "one-position"],
)
def test_geojson_invalid_feature(
    capsys: pytest.CaptureFixture[str], tmp_path: Path, coordinates: list[Any]
) -> None:
    bad = _feature({"type": "LineString", "coordinates": coordinates})
    path = write(tmp_path, "mains.geojson", _collection(*TRIANGLE_LINES, bad))
    refused(capsys, tmp_path, "zones", path, names=["mains.geojson", "feature 3", "--skip-invalid"])


def test_geojson_invalid_feature_skipped(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    bad = _feature({"type": "LineString", "coordinates": [[500.0, 500.0], ["x", 1.0]]})
    path = write(tmp_path, "mains.geojson", _collection(bad, *TRIANGLE_LINES))
    record, zones, err = zoned(capsys, tmp_path, path, "--zones", "1", "--skip-invalid")
    assert "1 skipped" in err
    listed = policy(record)["geojson"]["skipped_first"]
    assert [entry["feature"] for entries in listed.values() for entry in entries] == [0]
    assert len(zones) == 3


def test_geojson_non_line_features_listed(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    # Longitude/latitude-looking coordinates (|x| <= 180, |y| <= 90) and one point feature.
    lines = [
        _feature({"type": "LineString", "coordinates": [[1.0, 1.0], [1.5, 1.0]]}),
        _feature({"type": "LineString", "coordinates": [[1.5, 1.0], [1.2, 1.4]]}),
        _feature({"type": "LineString", "coordinates": [[1.2, 1.4], [1.0, 1.0]]}),
    ]
    hydrant = _feature({"type": "Point", "coordinates": [1.1, 1.1]})
    path = write(tmp_path, "mains.geojson", _collection(*lines, hydrant))
    record, zones, err = zoned(capsys, tmp_path, path, "--zones", "1")
    assert "1 skipped" in err
    assert "degrees" in err
    skipped = policy(record)["geojson"]["skipped_first"]
    assert [entry["feature"] for entries in skipped.values() for entry in entries] == [3]
    assert len(zones) == 3


# ----------------------------------------------------------------- rules
UNKNOWN_IN_RULE_FILES = [
    pytest.param("--supply-list", "supply.csv", "node\nJ1\nQX-9\n", "'QX-9'", id="supply-list"),
    pytest.param("--keep-list", "keep.csv", "source,target\nJ1,J2\nJ1,QX-9\n", "'QX-9'", id="keep"),
    pytest.param(
        "--keep-list",
        "keep.csv",
        "source,target\nJ1,J2\nJ1,J5\n",
        "'J1' - 'J5'",
        id="keep-not-a-link",
    ),
    pytest.param("--fixed", "fixed.csv", "node,zone\nJ1,0\nQX-9,1\n", "'QX-9'", id="fixed"),
]


@pytest.mark.parametrize(("option", "name", "text", "shown"), UNKNOWN_IN_RULE_FILES)
def test_unknown_ids_in_rule_files_refused(
    capsys: pytest.CaptureFixture[str],
    tmp_path: Path,
    option: str,
    name: str,
    text: str,
    shown: str,
) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    rules = write(tmp_path, name, text)
    refused(capsys, tmp_path, "zones", edges, option, rules, names=[shown])


@pytest.mark.parametrize(("option", "name", "text", "shown"), UNKNOWN_IN_RULE_FILES)
def test_unknown_ids_in_rule_files_name_file_and_line(
    capsys: pytest.CaptureFixture[str],
    tmp_path: Path,
    option: str,
    name: str,
    text: str,
    shown: str,
) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    rules = write(tmp_path, name, text)
    # The offending row is line 3 of every rule file above.
    refused(capsys, tmp_path, "zones", edges, option, rules, names=[name, "line 3", option])


def test_rule_file_missing_column(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    supply = write(tmp_path, "supply.csv", "id\nJ1\n")
    refused(
        capsys,
        tmp_path,
        "zones",
        edges,
        "--supply-list",
        supply,
        names=["supply.csv", "line 1", "'node'", "'id'"],
    )


def test_bad_yes_no_flag(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    rows = "J1,yes\nJ2,maybe\nJ3,\nJ4,\nJ5,\nJ6,\n"
    nodes = write(tmp_path, "junctions.csv", "node,inlet\n" + rows)
    refused(
        capsys,
        tmp_path,
        "zones",
        edges,
        "--nodes",
        nodes,
        "--supply-col",
        "inlet",
        names=["junctions.csv", "line 3", "column 'inlet' (column 2)", "'maybe'"],
    )


def test_fixed_zone_not_whole(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    fixed = write(tmp_path, "fixed.csv", "node,zone\nJ1,0\nJ4,1.5\n")
    refused(
        capsys,
        tmp_path,
        "zones",
        edges,
        "--fixed",
        fixed,
        names=["fixed.csv", "line 3", "column 'zone' (column 2)", "'1.5'"],
    )


@pytest.mark.parametrize(
    ("edges_text", "options", "names"),
    [
        pytest.param(
            TWO_TRIANGLES,
            ["--min-size", "5", "--max-size", "2"],
            ["min_size", "5", "2"],
            id="min-above-max",
        ),
        pytest.param(
            TWO_TRIANGLES,
            ["--max-size", "0.5"],
            ["max_size", "'J1'", "0.5"],
            id="node-above-max",
        ),
        pytest.param(
            TWO_TRIANGLES,
            ["--min-size", "7"],
            ["min_size", "component", "7"],
            id="network-below-min",
        ),
        # A component below min_size is refused only when fragments are zoned; by
        # default it is set aside as a stray fragment (tests/test_fragments.py).
        pytest.param(
            PATH_AND_PAIR,
            ["--min-size", "3", "--fragments", "zone"],
            ["min_size", "component", "'J6'"],
            id="component-below-min",
        ),
    ],
)
def test_impossible_size_bounds(
    capsys: pytest.CaptureFixture[str],
    tmp_path: Path,
    edges_text: str,
    options: list[str],
    names: list[str],
) -> None:
    edges = write(tmp_path, "edges.csv", edges_text)
    refused(capsys, tmp_path, "zones", edges, *options, names=names)


def test_component_without_supply_point(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", PATH_AND_PAIR)
    supply = write(tmp_path, "supply.csv", "node\nJ1\n")
    refused(
        capsys,
        tmp_path,
        "zones",
        edges,
        "--supply-list",
        supply,
        names=["component", "'J6'", "no source"],
    )


def test_supply_points_tied_by_kept_link(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    supply = write(tmp_path, "supply.csv", "node\nJ1\nJ2\n")
    keep = write(tmp_path, "keep.csv", "source,target\nJ1,J2\n")
    refused(
        capsys,
        tmp_path,
        "zones",
        edges,
        "--supply-list",
        supply,
        "--keep-list",
        keep,
        names=["'J1'", "'J2'", "keep_links"],
    )


@pytest.mark.parametrize(
    ("option", "header"), [("--supply-list", "node\n"), ("--keep-list", "source,target\n")]
)
def test_rule_file_header_only(
    capsys: pytest.CaptureFixture[str], tmp_path: Path, option: str, header: str
) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    rules = write(tmp_path, "rules.csv", header)
    refused(
        capsys, tmp_path, "zones", edges, "--zones", "2", option, rules,
        names=["rules.csv", "line 1", option, "no rows"],
    )  # fmt: skip


def test_fewer_zones_delivered_than_asked(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    """Six nodes, at least three per zone: at most two zones can hold the bound (by hand)."""
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    code, err = run(capsys, tmp_path / "out", "zones", edges, "--zones", "3", "--min-size", "3")
    assert code == EXIT_OK, err
    assert "2 zones delivered where 3 were asked" in err
    record = json.loads((tmp_path / "out" / "run.json").read_text())
    assert any("delivered where 3 were asked" in w for w in record["warnings"])
    assert record["decisions"]["zone_count"]["choice"] == 3


# --------------------------------------------------- directed and local zones
def test_local_unknown_asset(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    refused(capsys, tmp_path, "local", edges, "--around", "J9", names=["J9"])


@pytest.mark.parametrize("value", ["0", "1", "1.5", "x"])
def test_damping_outside_unit_interval(
    capsys: pytest.CaptureFixture[str], tmp_path: Path, value: str
) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    args = ("--directed", "--damping", value)
    refused(capsys, tmp_path, "zones", edges, *args, names=["--damping", value])


@pytest.mark.parametrize("value", ["0", "1", "-0.1"])
def test_local_alpha_outside_unit_interval(
    capsys: pytest.CaptureFixture[str], tmp_path: Path, value: str
) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    args = ("--around", "J1", "--alpha", value)
    refused(capsys, tmp_path, "local", edges, *args, names=["--alpha", value])


def test_directed_geojson_refused(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    path = write(tmp_path, "mains.geojson", _collection(*TRIANGLE_LINES))
    refused(capsys, tmp_path, "zones", path, "--directed", names=["--directed"])


def test_directed_reverse_links_are_two_arcs(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES + "J2,J1\n")
    record, _, _ = zoned(capsys, tmp_path, edges, "--directed", "--zones", "2")
    assert policy(record)["duplicate_links_merged"] == 0
    assert record["network"]["links"] == 7  # the undirected view: J1-J2 once, weight 2


def test_directed_dead_ends_teleport(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    # J6 has no outgoing link in this orientation (a dead end).
    edges = write(
        tmp_path, "edges.csv", "source,target\nJ1,J2\nJ2,J3\nJ3,J1\nJ3,J4\nJ4,J5\nJ5,J6\n"
    )
    zones = write(tmp_path, "zones.csv", "node,zone\nJ1,0\nJ2,0\nJ3,0\nJ4,1\nJ5,1\nJ6,1\n")
    out = tmp_path / "out"
    code, err = run(capsys, out, "score", edges, zones, "--directed")
    assert code == EXIT_OK, err
    graph = nx.DiGraph([("J1", "J2"), ("J2", "J3"), ("J3", "J1"), ("J3", "J4")])
    graph.add_edges_from([("J4", "J5"), ("J5", "J6")])
    # networkx pagerank sends a dead end's step to a uniformly chosen node (its default).
    reference = nx.pagerank(graph, alpha=0.85, tol=1e-13, max_iter=1000)
    nodes = pd.read_csv(out / "node_importance.csv", dtype={"node": str})
    ours = dict(zip(nodes["node"], nodes["importance"], strict=True))
    assert all(abs(ours[n] - reference[n]) < 1e-9 for n in reference)


# ------------------------------------------------------- score: zone files
ZONES_OK = "node,zone\nJ1,0\nJ2,0\nJ3,0\nJ4,1\nJ5,1\nJ6,1\n"


def test_score_unknown_ids(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    zones = write(tmp_path, "districts.csv", ZONES_OK + "QZ-1,1\n")
    refused(capsys, tmp_path, "score", edges, zones, names=["districts.csv", "'QZ-1'", "1 of 7"])


def test_score_mixed_type_ids_do_not_match(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    # Ids are text: "2.0" in the zones file is not node "2" of the edge table.
    edges = write(tmp_path, "edges.csv", "source,target\n1,2\n2,3\n3,1\n")
    zones = write(tmp_path, "districts.csv", "node,zone\n1,0\n2.0,0\n3,0\n")
    refused(capsys, tmp_path, "score", edges, zones, names=["districts.csv", "'2.0'"])


def test_score_duplicate_node(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    zones = write(tmp_path, "districts.csv", ZONES_OK + "J2,1\n")
    refused(
        capsys,
        tmp_path,
        "score",
        edges,
        zones,
        names=["districts.csv", "line 8", "column 'node' (column 1)", "'J2'"],
    )


@pytest.mark.parametrize("cell", ["-1", "", "  "], ids=["negative", "empty", "spaces"])
def test_score_zone_negative_or_empty(
    capsys: pytest.CaptureFixture[str], tmp_path: Path, cell: str
) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    zones = write(tmp_path, "districts.csv", ZONES_OK.replace("J3,0", f"J3,{cell}"))
    refused(
        capsys,
        tmp_path,
        "score",
        edges,
        zones,
        names=["districts.csv", "line 4", "column 'zone' (column 2)"],
    )


@pytest.mark.parametrize("cell", ["north", "0.5", "00"], ids=["text", "half", "padded"])
def test_score_zone_text_is_a_name(
    capsys: pytest.CaptureFixture[str], tmp_path: Path, cell: str
) -> None:
    """A zone that is not a plain whole number makes every zone a name, written back as is."""
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    zones = write(tmp_path, "districts.csv", ZONES_OK.replace("J3,0", f"J3,{cell}"))
    out = tmp_path / "out"
    code, err = run(capsys, out, "score", edges, zones)
    assert code == 0, err
    table = pd.read_csv(out / "zone_scores.csv", dtype=str, keep_default_na=False)
    assert cell in table["zone"].tolist()


def test_score_missing_zone_column(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    zones = write(tmp_path, "districts.csv", "node,district\nJ1,0\n")
    refused(capsys, tmp_path, "score", edges, zones, names=["districts.csv", "line 1", "'zone'"])


def test_score_header_only_zones_file(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    zones = write(tmp_path, "districts.csv", "node,zone\n")
    refused(capsys, tmp_path, "score", edges, zones, names=["districts.csv", "no rows"])


def test_score_partial_zoning_counted(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    edges = write(tmp_path, "edges.csv", TWO_TRIANGLES)
    zones = write(tmp_path, "districts.csv", "node,zone\nJ1,0\nJ2,0\nJ3,0\nJ4,1\n")
    out = tmp_path / "out"
    code, err = run(capsys, out, "score", edges, zones)
    assert code == EXIT_OK, err
    record = json.loads((out / "run.json").read_text(encoding="utf-8"))
    assert record["coverage"]["unassigned"] == 2
    unassigned = pd.read_csv(out / "unassigned.csv", dtype=str)
    assert sorted(unassigned["node"]) == ["J5", "J6"]
