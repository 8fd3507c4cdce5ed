"""Reading node lists, link flags and zone files: exact ids, and errors that say where."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from specgraph.exceptions import InputError
from specgraph.io import (
    flagged_links,
    read_edges,
    read_link_list,
    read_node_list,
    read_zone_file,
)


def write(folder: Path, name: str, text: str) -> Path:
    path = folder / name
    path.write_text(text, encoding="utf-8")
    return path


def test_node_list_all_rows_and_flagged_rows(tmp_path: Path) -> None:
    path = write(tmp_path, "n.csv", "node,inlet\nJ-01,yes\nJ-02,\nJ-03,1\nJ-01,yes\n007,TRUE\n")
    assert read_node_list(path) == ("J-01", "J-02", "J-03", "007")
    assert read_node_list(path, flag="inlet") == ("J-01", "J-03", "007")


def test_bad_flag_names_line_and_column(tmp_path: Path) -> None:
    path = write(tmp_path, "n.csv", "node,inlet\nJ-01,yes\n\nJ-02,maybe\n")
    with pytest.raises(InputError) as info:
        read_node_list(path, flag="inlet")
    err = info.value
    # Line 4: the header is line 1 and the blank line 3 counts (physical lines).
    assert err.line == 4
    assert err.column == "inlet"
    assert err.column_number == 2
    assert "'maybe' is not a yes/no value" in str(err)


def test_missing_column_is_named(tmp_path: Path) -> None:
    path = write(tmp_path, "n.csv", "id,inlet\nJ-01,1\n")
    with pytest.raises(InputError, match="no column 'node'"):
        read_node_list(path)


def test_zone_file_reads_whole_numbers(tmp_path: Path) -> None:
    path = write(tmp_path, "z.csv", "node,zone\nA,0\nB,2\nC,2.0\n")
    assert read_zone_file(path) == {"A": 0, "B": 2, "C": 2}


def test_zone_file_reads_names_exactly(tmp_path: Path) -> None:
    """Any text is a zone label, compared exactly: "7" and "07" are two zones."""
    path = write(tmp_path, "z.csv", "node,zone\nA,North Heights\nB,07\nC,7\nD,1.5\n")
    assert read_zone_file(path) == {"A": "North Heights", "B": "07", "C": "7", "D": "1.5"}
    # One zero-padded code makes every label text, the plain numbers included.
    path = write(tmp_path, "y.csv", "node,zone\nA,07\nB,7\n")
    assert read_zone_file(path) == {"A": "07", "B": "7"}
    # Rules such as --fixed still read whole numbers, any way written.
    assert read_zone_file(path, whole_numbers=True) == {"A": 7, "B": 7}


@pytest.mark.parametrize(
    ("body", "line", "column", "words"),
    [
        ("A,0\nA,1\n", 3, "node", "listed again"),
        ("A,0\nB,-1\n", 3, "zone", "negative number"),
        ("A,North\n\nB,\n", 4, "zone", "is empty"),
        ("A,North\nB,   \n", 3, "zone", "is empty"),
        ("A,0\nB,\n", 3, "zone", "is empty"),
        ("A,0\n,1\n", 3, "node", "node id is empty"),
    ],
)
def test_zone_file_errors(tmp_path: Path, body: str, line: int, column: str, words: str) -> None:
    path = write(tmp_path, "z.csv", "node,zone\n" + body)
    with pytest.raises(InputError) as info:
        read_zone_file(path)
    assert Path(str(info.value.path)).name == "z.csv"
    assert info.value.line == line
    assert info.value.column == column
    assert words in str(info.value)


def test_zone_file_whole_numbers_refuses_text(tmp_path: Path) -> None:
    path = write(tmp_path, "z.csv", "node,zone\nA,0\nB,1.5\n")
    with pytest.raises(InputError, match="not a whole number") as info:
        read_zone_file(path, whole_numbers=True)
    assert info.value.line == 3


def test_flagged_links_from_edge_table(tmp_path: Path) -> None:
    path = write(
        tmp_path,
        "e.csv",
        "source,target,trunk\nP1,P2,1\nP2,P3,0\nP3,P4,yes\nP4,P4,1\n",
    )
    net = read_edges(path)
    pairs = flagged_links(net, "trunk")
    ids = net.node_ids
    # The self-loop P4-P4 is left out of the network, and so of the flagged links.
    assert [sorted((ids[a], ids[b])) for a, b in pairs] == [["P1", "P2"], ["P3", "P4"]]


def test_flagged_links_bad_value_points_at_edge_file(tmp_path: Path) -> None:
    path = write(tmp_path, "e.csv", "source,target,trunk\nP1,P2,1\nP2,P3,2\n")
    net = read_edges(path)
    with pytest.raises(InputError) as info:
        flagged_links(net, "trunk")
    assert info.value.line == 3
    assert info.value.column == "trunk"
    assert Path(str(info.value.path)).name == "e.csv"


def test_flagged_links_unknown_column(tmp_path: Path) -> None:
    net = read_edges(write(tmp_path, "e.csv", "source,target\nP1,P2\n"))
    with pytest.raises(InputError, match="--keep-col"):
        flagged_links(net, "trunk")
    assert np.all(net.link_ends[0] >= 0)


def test_link_list_pairs(tmp_path: Path) -> None:
    path = write(tmp_path, "k.csv", "from,to\nP1,P2\n0042,P3\n")
    assert read_link_list(path, source="from", target="to") == (("P1", "P2"), ("0042", "P3"))
    with pytest.raises(InputError, match="no column 'source'"):
        read_link_list(path)
