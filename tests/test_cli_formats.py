"""GeoJSON in, GeoJSON and Parquet out, through the command line.

The readers and writers themselves are checked in tests/test_geojson.py; here: the CLI
picks the GeoJSON reader by suffix, writes the extra formats in the same commit as the
tables, removes an earlier run's extras, and refuses what cannot be written (exit 2,
nothing written). The network is invented: two squares of lines joined by one line.
"""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pytest

from specgraph.cli import GEOJSON_FILES, main
from specgraph.export import zoning_geojson
from specgraph.zones import find_zones


def _line(feature_id: str, a: tuple[float, float], b: tuple[float, float]) -> dict:
    return {
        "type": "Feature",
        "properties": {"pipe_id": feature_id},
        "geometry": {"type": "LineString", "coordinates": [list(a), list(b)]},
    }


def _squares() -> dict:
    """Two unit squares with diagonals, 10 units apart, joined by one long line."""
    features = []
    for shift, tag in ((0.0, "W"), (11.0, "E")):
        corners = [(shift, 0.0), (shift + 1, 0.0), (shift + 1, 1.0), (shift, 1.0)]
        for i in range(4):
            features.append(_line(f"{tag}{i}", corners[i], corners[(i + 1) % 4]))
        features.append(_line(f"{tag}d", corners[0], corners[2]))
    features.append(_line("LINK", (1.0, 1.0), (11.0, 1.0)))
    return {"type": "FeatureCollection", "features": features}


@pytest.fixture
def lines(tmp_path: Path) -> Path:
    path = tmp_path / "mains.geojson"
    path.write_text(json.dumps(_squares()), encoding="utf-8")
    return path


def test_geojson_lines_zoned_and_written_as_geojson_and_parquet(
    lines: Path, tmp_path: Path
) -> None:
    out = tmp_path / "out"
    args = ["zones", str(lines), "--distance", "--zones", "2", "--out", str(out), "--quiet"]
    assert main([*args, "--geojson", "--parquet"]) == 0
    zones = pd.read_csv(out / "zones.csv", dtype={"node": str})
    assert len(zones) == 8  # 8 distinct line ends: the corners of the two squares
    boundary = pd.read_csv(out / "boundary.csv")
    # Hand-known answer: the one long line is the only boundary link.
    assert boundary["pipe_id"].tolist() == ["LINK"]
    for name in GEOJSON_FILES:
        document = json.loads((out / name).read_text(encoding="utf-8"))
        assert document["type"] == "FeatureCollection"
    lines_out = json.loads((out / "boundary.geojson").read_text(encoding="utf-8"))
    assert [f["properties"]["pipe_id"] for f in lines_out["features"]] == ["LINK"]
    # Parquet tables equal the CSV tables (pyarrow through pandas is the reference reader).
    pd.testing.assert_frame_equal(pd.read_parquet(out / "zones.parquet"), zones, check_dtype=False)
    # A second run without the extras removes them in the same commit.
    assert main(args) == 0
    assert not any((out / name).exists() for name in GEOJSON_FILES)
    assert not (out / "zones.parquet").exists()
    assert (out / "zones.csv").exists()


def test_geojson_file_names_match_the_writer() -> None:
    from specgraph import gallery

    network = gallery.grid(4, 4)
    assert sorted(zoning_geojson(find_zones(network, 2, rng=0))) == sorted(GEOJSON_FILES)


def test_geojson_output_needs_coordinates(tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    edges = tmp_path / "edges.csv"
    edges.write_text("source,target\na,b\nb,c\nc,a\n", encoding="utf-8")
    out = tmp_path / "out"
    assert main(["zones", str(edges), "--zones", "2", "--out", str(out), "--geojson"]) == 2
    assert "--geojson" in capsys.readouterr().err
    assert not out.exists()


def test_geojson_input_refuses_a_node_table(
    lines: Path, tmp_path: Path, capsys: pytest.CaptureFixture
) -> None:
    nodes = tmp_path / "nodes.csv"
    nodes.write_text("node\na\n", encoding="utf-8")
    out = tmp_path / "out"
    assert main(["zones", str(lines), "--nodes", str(nodes), "--out", str(out)]) == 2
    assert "--nodes" in capsys.readouterr().err
    assert not out.exists()


# ------------------------------------------------------- parallel links on the boundary
def _twin_mains_csv(path: Path) -> None:
    """Two rings of six junctions joined by a main laid twice (QM-M1, and QM-M2 listed in
    the other direction) and one single main (QM-M3): three physical links, two node pairs."""
    rows = ["source,target,pipe_id"]
    for tag in ("W", "E"):
        rows += [f"QM-{tag}{i},QM-{tag}{(i + 1) % 6},QM-{tag}P{i}" for i in range(6)]
    rows += ["QM-W0,QM-E0,QM-M1", "QM-E0,QM-W0,QM-M2", "QM-W3,QM-E3,QM-M3"]
    path.write_text("\n".join(rows) + "\n", encoding="utf-8")


def test_boundary_links_count_parallel_links_on_the_command_line(
    tmp_path: Path, capsys: pytest.CaptureFixture
) -> None:
    import networkx as nx

    edges = tmp_path / "mains.csv"
    _twin_mains_csv(edges)
    out = tmp_path / "out"
    assert main(["zones", str(edges), "--zones", "2", "--out", str(out)]) == 0
    err = capsys.readouterr().err
    boundary = pd.read_csv(out / "boundary.csv")
    summary = pd.read_csv(out / "zone_summary.csv")
    record = json.loads((out / "run.json").read_text(encoding="utf-8"))
    zone_of = dict(pd.read_csv(out / "zones.csv", dtype={"node": str}).to_numpy().tolist())
    # networkx MultiGraph of the file's rows: edge_boundary yields each parallel edge.
    table = pd.read_csv(edges)
    graph = nx.MultiGraph()
    graph.add_edges_from(table[["source", "target"]].to_numpy().tolist())
    crossing = [(u, v) for u, v in graph.edges() if zone_of[u] != zone_of[v]]
    for zone, members in pd.Series(zone_of).groupby(pd.Series(zone_of)):
        row = summary.loc[summary["zone"] == zone].iloc[0]
        assert row["boundary_links"] == len(list(nx.edge_boundary(graph, set(members.index))))
    assert record["scores"]["boundary_links"] == len(boundary) == len(crossing)
    assert f"{len(crossing)} boundary links" in err
    assert len(crossing) == 3  # the two rings are the zones: QM-M1, QM-M2 and QM-M3
    assert sorted(boundary["pipe_id"]) == ["QM-M1", "QM-M2", "QM-M3"]
