"""GeoJSON line networks in, zones and boundary links out, Parquet tables.

Oracles: brute-force pairwise distances with a hand-written union-find for the
snapping; hand-computed Pythagorean lengths (3-4-5 and 6-8-10 triangles); the
standard json module for parse positions and for the validity of what is written;
pyarrow/pandas as the Parquet reader; shapely (GEOS) for the zone areas: each
area covers its nodes, areas do not overlap, and together they fill the
network's convex hull buffered by the median link length (the construction of
specgraph._areas, rebuilt here from shapely and numpy alone).
"""

from __future__ import annotations

import io
import json
import math
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import adjusted_rand_score

from specgraph import find_zones
from specgraph.exceptions import InputError, ParameterError
from specgraph.export import (
    boundary_geojson,
    nodes_geojson,
    parquet_bytes,
    write_outputs,
    zones_geojson,
    zoning_geojson,
    zoning_parquet,
    zoning_tables,
)
from specgraph.io._geojson import read_geojson_lines


def feature(geometry: Any, **properties: Any) -> dict[str, Any]:
    return {"type": "Feature", "properties": properties, "geometry": geometry}


def line(*points: Any, **properties: Any) -> dict[str, Any]:
    return feature({"type": "LineString", "coordinates": [list(p) for p in points]}, **properties)


def write_collection(folder: Path, features: list[Any], name: str = "lines.geojson") -> Path:
    path = folder / name
    path.write_text(json.dumps({"type": "FeatureCollection", "features": features}), "utf-8")
    return path


def brute_force_groups(points: np.ndarray, tolerance: float) -> np.ndarray:
    """Union-find over every pair within ``tolerance`` (all n^2 distances, no tree)."""
    n = len(points)
    parent = list(range(n))

    def root(i: int) -> int:
        while parent[i] != i:
            i = parent[i]
        return i

    for i in range(n):
        for j in range(i + 1, n):
            if math.dist(points[i], points[j]) <= tolerance:
                parent[root(i)] = root(j)
    return np.array([root(i) for i in range(n)])


# ------------------------------------------------------------------ snapping
def test_snapping_matches_brute_force_pairwise_distances(tmp_path):
    rng = np.random.default_rng(8)
    sites = rng.uniform(0, 100, size=(40, 2))
    pairs = [rng.choice(40, size=2, replace=False) for _ in range(90)]
    # Ends jittered by up to 0.3 around their site; sites are mostly far apart,
    # but some will be near each other, which the brute force must agree on too.
    starts = sites[[a for a, _ in pairs]] + rng.uniform(-0.3, 0.3, size=(90, 2))
    stops = sites[[b for _, b in pairs]] + rng.uniform(-0.3, 0.3, size=(90, 2))
    tolerance = 1.0
    path = write_collection(
        tmp_path, [line(a, b, pipe=i) for i, (a, b) in enumerate(zip(starts, stops, strict=True))]
    )
    net, report = read_geojson_lines(path, snap_tolerance=tolerance)

    groups = brute_force_groups(np.concatenate([starts, stops]), tolerance)
    loops = groups[:90] == groups[90:]
    kept = np.flatnonzero(~loops)
    src, dst = net.link_ends
    assert net.link_table["feature"].tolist() == kept.tolist()
    ours = np.concatenate([src, dst])
    theirs = np.concatenate([groups[:90][kept], groups[90:][kept]])
    assert adjusted_rand_score(theirs, ours) == 1.0  # same grouping up to relabelling
    assert report.nodes == net.n_nodes == np.unique(theirs).size
    assert report.merged_ends == 2 * kept.size - np.unique(theirs).size
    assert [s.feature for s in report.skipped] == np.flatnonzero(loops).tolist()
    # Each node sits at its group's first end in file order; largest move by brute force.
    ends = np.concatenate([starts[kept], stops[kept]])
    order = np.column_stack([np.arange(kept.size), np.arange(kept.size) + kept.size]).ravel()
    first_position = {}
    for e in order:
        first_position.setdefault(theirs[e], ends[e])
    moved = [math.dist(ends[e], first_position[theirs[e]]) for e in range(ends.shape[0])]
    assert report.largest_snap == pytest.approx(max(moved), rel=1e-12)
    assert report.snapped_ends == sum(m > 0 for m in moved)
    # closest_unsnapped: smallest distance between two distinct nodes (brute force).
    xy = net.coordinates
    gaps = [math.dist(xy[i], xy[j]) for i in range(len(xy)) for j in range(i + 1, len(xy))]
    assert report.closest_unsnapped == pytest.approx(min(gaps), rel=1e-12)
    assert report.closest_unsnapped > tolerance


def test_snap_tolerance_is_inclusive_and_chains_are_reported(tmp_path):
    # Ends at x = 0, 0.5, 1.0 (exact binary fractions): with tolerance 0.5 each is
    # within the tolerance of the next, so all three join, and one end moves 1.0.
    path = write_collection(
        tmp_path,
        [line([0, 0], [0, 5]), line([0.5, 0], [5, 5]), line([1.0, 0], [9, 9])],
    )
    net, report = read_geojson_lines(path, snap_tolerance=0.5)
    assert net.n_nodes == 4
    assert report.largest_snap == 1.0
    assert report.snapped_ends == 2
    assert any("chained snapping" in w for w in report.warnings)
    net0, report0 = read_geojson_lines(path, snap_tolerance=0.0)
    assert net0.n_nodes == 6
    assert report0.merged_ends == 0
    assert report0.closest_unsnapped == 0.5


def test_dangling_end_on_another_lines_vertex_is_counted(tmp_path):
    # A T-junction drawn without splitting the through line at (5, 0).
    path = write_collection(tmp_path, [line([0, 0], [5, 0], [10, 0]), line([5, 0], [5, 7])])
    net, report = read_geojson_lines(path)
    assert net.n_components == 2
    assert report.dangling_ends_on_lines == 1
    assert any("split lines at their junctions" in w for w in report.warnings)


# ------------------------------------------------------------------ lengths
def test_lengths_are_planar_sums_along_the_line(tmp_path):
    multi = {"type": "MultiLineString", "coordinates": [[[0, 0], [6, 8]], [[20, 0], [23, 4]]]}
    path = write_collection(
        tmp_path,
        [
            line([0, 0], [3, 4], [3, 10]),  # 3-4-5 triangle then 6 up: 11
            line([3, 10, 120.0], [6, 14, -40.0]),  # altitude ignored: 5
            feature(multi, road="R1"),  # parts: 6-8-10 triangle, 3-4-5 triangle
        ],
    )
    net, _ = read_geojson_lines(path, snap_tolerance=0.0, distance=True)
    table = net.link_table
    assert table["geometry_length"].tolist() == [11.0, 5.0, 10.0, 5.0]
    assert table["part"].tolist() == [0, 0, 0, 1]
    assert table["feature"].tolist() == [0, 1, 2, 2]
    assert table["road"].tolist()[2:] == ["R1", "R1"]
    # affinity = median length / length = 7.5 / length (affinity_from_distance rule).
    np.testing.assert_allclose(table["weight"], [7.5 / 11, 7.5 / 5, 7.5 / 10, 7.5 / 5])
    assert net.notes["weight_read_as"] == "distance"


def test_weight_from_a_property_and_its_errors(tmp_path):
    path = write_collection(tmp_path, [line([0, 0], [1, 0], k=2.0), line([1, 0], [2, 0], k=0.5)])
    net, _ = read_geojson_lines(path, weight="k")
    assert net.link_table["weight"].tolist() == [2.0, 0.5]
    bad = write_collection(tmp_path, [line([0, 0], [1, 0], k=2.0), line([1, 0], [2, 0], k="x")])
    with pytest.raises(InputError, match="feature 1: property 'k' is 'x'") as err:
        read_geojson_lines(bad, weight="k")
    assert str(bad) in str(err.value)
    zero = write_collection(tmp_path, [line([0, 0], [1, 0], k=0.0)], name="zero.geojson")
    with pytest.raises(InputError, match=r"feature 0: .*expected a finite length > 0"):
        read_geojson_lines(zero, weight="k", distance=True)


# ------------------------------------------------------------- units warning
def test_geographic_coordinates_are_warned_about(tmp_path):
    lonlat = write_collection(tmp_path, [line([4.35, 50.85], [4.36, 50.86])], name="ll.geojson")
    _, report = read_geojson_lines(lonlat)
    assert report.geographic
    assert any("degrees, not metres" in w for w in report.warnings)
    metres = write_collection(tmp_path, [line([512000, 6500000], [512300, 6500400])])
    _, report = read_geojson_lines(metres)
    assert not report.geographic
    assert not any("degrees" in w for w in report.warnings)


# -------------------------------------------------------- skipped and errors
def test_nothing_is_dropped_silently(tmp_path):
    features = [
        line([0, 0], [1, 0], name="ok"),
        feature({"type": "Point", "coordinates": [0, 0]}),
        feature(None),
        feature({"type": "LineString", "coordinates": []}),
        feature({"type": "MultiLineString", "coordinates": [[], [[1, 0], [2, 0]]]}),
        feature({"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [1, 1], [0, 0]]]}),
        line([5, 5], [6, 5], [5, 5]),  # closed: both ends at one node
    ]
    path = write_collection(tmp_path, features)
    net, report = read_geojson_lines(path)
    reasons = {(s.feature, s.part): s.reason for s in report.skipped}
    assert reasons == {
        (1, None): "not a line (Point)",
        (2, None): "no geometry (null)",
        (3, None): "empty geometry",
        (4, 0): "empty part",
        (5, None): "not a line (Polygon)",
        (6, 0): "both ends at one node (closed or snapped)",
    }
    # Every feature either became a link or is listed as skipped.
    accounted = set(net.link_table["feature"]) | {s.feature for s in report.skipped}
    assert accounted == set(range(len(features)))
    assert net.notes["geojson"]["skipped"] == report.skipped_counts()
    assert report.features == 7
    assert report.links == 2


@pytest.mark.parametrize(
    ("geometry", "fault"),
    [
        ({"type": "LineString", "coordinates": [[0, 0], ["a", 1]]}, "arrays of 2 or 3 numbers"),
        ({"type": "LineString", "coordinates": [[0, 0], [1]]}, "of one length"),
        ({"type": "LineString", "coordinates": [[0, 0]]}, "two or more positions"),
        ({"type": "LineString", "coordinates": [[0, 0], [True, 1]]}, "arrays of 2 or 3 numbers"),
        ({"type": "LineString", "coordinates": "0 0, 1 1"}, "array of positions"),
        ({"type": "MultiLineString", "coordinates": [[[0, 0], [1e400, 0]]]}, "not a finite"),
        ({"coordinates": [[0, 0], [1, 1]]}, "with a 'type'"),
    ],
    ids=["text", "ragged", "one-position", "boolean", "not-array", "infinite", "no-type"],
)
def test_bad_coordinates_name_the_file_and_feature(tmp_path, geometry, fault):
    path = write_collection(
        tmp_path, [line([0, 0], [1, 0]), line([1, 0], [2, 0]), feature(geometry)]
    )
    with pytest.raises(InputError, match=f"feature 2: .*{fault}") as err:
        read_geojson_lines(path)
    assert str(err.value).startswith(str(path))
    net, report = read_geojson_lines(path, on_invalid="skip")
    assert net.n_links == 2
    assert [(s.feature, s.reason.split(":")[0]) for s in report.skipped] == [(2, "invalid")]


def test_invalid_json_reports_line_and_column_like_the_json_module(tmp_path):
    text = '{"type": "FeatureCollection",\n "features": [\n   {"type": "Feature",, }\n ]}'
    path = tmp_path / "broken.geojson"
    path.write_text(text, "utf-8")
    # Reference: the standard json module's own error position.
    with pytest.raises(json.JSONDecodeError) as reference:
        json.loads(text)
    with pytest.raises(InputError, match="not valid JSON") as err:
        read_geojson_lines(path)
    assert err.value.line == reference.value.lineno == 3
    assert f"(column {reference.value.colno})" in str(err.value)
    assert f"{path}, line 3" in str(err.value)


@pytest.mark.parametrize(
    ("document", "message"),
    [
        ({"type": "Feature", "geometry": None, "properties": {}}, "got type 'Feature'"),
        ([1, 2], "JSON list"),
        ({"type": "FeatureCollection"}, "no 'features' array"),
        ({"type": "FeatureCollection", "features": [{"type": "Point"}]}, "feature 0: expected"),
        ({"type": "FeatureCollection", "features": []}, "no line features"),
    ],
    ids=["single-feature", "array", "no-features", "not-a-feature", "empty"],
)
def test_documents_that_are_not_line_collections_are_refused(tmp_path, document, message):
    path = tmp_path / "doc.geojson"
    path.write_text(json.dumps(document), "utf-8")
    with pytest.raises(InputError, match=message):
        read_geojson_lines(path)


def test_file_and_option_errors(tmp_path):
    with pytest.raises(InputError, match="no such file"):
        read_geojson_lines(tmp_path / "missing.geojson")
    latin = tmp_path / "latin.geojson"
    latin.write_bytes(b'{"type": "FeatureCollection",\n"features": [], "name": "Gr\xfcn"}')
    with pytest.raises(InputError, match="not UTF-8") as err:
        read_geojson_lines(latin)
    assert err.value.line == 2
    path = write_collection(tmp_path, [line([0, 0], [1, 0])])
    with pytest.raises(ParameterError, match="snap_tolerance must be"):
        read_geojson_lines(path, snap_tolerance=-1.0)
    with pytest.raises(ParameterError, match="on_invalid must be"):
        read_geojson_lines(path, on_invalid="ignore")  # type: ignore[arg-type]


def test_properties_colliding_with_reader_columns_are_renamed_and_nested_kept_as_json(tmp_path):
    path = write_collection(
        tmp_path, [line([0, 0], [1, 0], source="tank", weight=3, tags={"b": 1, "a": [2]})]
    )
    net, report = read_geojson_lines(path)
    table = net.link_table
    assert table["property_source"].tolist() == ["tank"]
    assert table["property_weight"].tolist() == [3]
    assert table["weight"].tolist() == [1.0]
    assert json.loads(table["tags"][0]) == {"a": [2], "b": 1}
    assert report.renamed_properties == ("source", "weight")


# -------------------------------------------------------------- GeoJSON out
def two_districts(folder: Path) -> Path:
    """Two 4 x 4 grids of pipes, 100 apart inside, joined by one long main (invented)."""
    features = []
    for offset in (0, 1000):
        for i in range(4):
            for j in range(4):
                here = [offset + 100 * i, 100 * j]
                if i < 3:
                    features.append(line(here, [here[0] + 100, here[1]], pipe=f"{offset}h{i}{j}"))
                if j < 3:
                    features.append(line(here, [here[0], here[1] + 100], pipe=f"{offset}v{i}{j}"))
    features.append(line([300, 0], [650, 0], [1000, 0], pipe="main", note=None))
    return write_collection(folder, features, name="districts.geojson")


def strict_json(path: Path) -> Any:
    """Parse with the json module, refusing NaN and Infinity (not JSON, RFC 8259)."""

    def refuse(token: str) -> None:
        raise ValueError(f"non-standard JSON token {token}")

    return json.loads(path.read_text("utf-8"), parse_constant=refuse)


def test_zones_written_as_geojson_read_back(tmp_path):
    net, _ = read_geojson_lines(two_districts(tmp_path), distance=True)
    zoning = find_zones(net, 2, rng=0)
    written = write_outputs(tmp_path / "out", zoning_geojson(zoning))
    assert sorted(p.name for p in written) == [
        "boundary.geojson",
        "zone_summary.geojson",
        "zones.geojson",
    ]
    points = strict_json(tmp_path / "out" / "zones.geojson")
    assert points["type"] == "FeatureCollection"
    assert [f["geometry"]["type"] for f in points["features"]] == ["Point"] * net.n_nodes
    np.testing.assert_array_equal(
        [f["geometry"]["coordinates"] for f in points["features"]], net.coordinates
    )
    assert [f["properties"]["zone"] for f in points["features"]] == zoning.labels.tolist()
    assert [f["id"] for f in points["features"]] == net.node_ids.tolist()

    areas = strict_json(tmp_path / "out" / "zone_summary.geojson")
    assert [f["geometry"]["type"] for f in areas["features"]] == ["Polygon", "Polygon"]
    assert [f["properties"]["nodes"] for f in areas["features"]] == [16, 16]
    assert [f["properties"]["nodes_outside"] for f in areas["features"]] == [0, 0]
    # Written compact (no indentation): the text is json.dumps with the tightest separators.
    for name in ("zones.geojson", "zone_summary.geojson", "boundary.geojson"):
        text = (tmp_path / "out" / name).read_text("utf-8")
        assert "\n " not in text
        assert ", " not in text
        assert '": ' not in text
        assert text == json.dumps(json.loads(text), separators=(",", ":")) + "\n"

    # Read the boundary back as a line network: the main is the only boundary link.
    back, report = read_geojson_lines(tmp_path / "out" / "boundary.geojson")
    assert report.skipped == ()
    row = back.link_table.iloc[0]
    assert back.n_links == 1
    assert row["pipe"] == "main"
    assert {row["zone_a"], row["zone_b"]} == {0, 1}
    assert row["geometry_length"] == 700.0  # drawn straight from (300, 0) to (1000, 0)
    assert row["note"] is None
    boundary = strict_json(tmp_path / "out" / "boundary.geojson")
    assert boundary["features"][0]["properties"]["note"] is None


def test_nan_cells_become_null_and_geojson_needs_coordinates(tmp_path):
    net, _ = read_geojson_lines(two_districts(tmp_path))
    zoning = find_zones(net, 2, rng=0)
    collection = boundary_geojson(zoning)
    text = json.dumps(collection, allow_nan=False)  # raises on NaN or Infinity
    assert json.loads(text)["features"][0]["properties"]["zone_a"] in (0, 1)
    from specgraph import gallery

    plain = find_zones(gallery.barbell(4), 2, rng=0)
    for build in (nodes_geojson, zones_geojson, boundary_geojson):
        with pytest.raises(ParameterError, match="node coordinates"):
            build(plain)


# ------------------------------------------------------------------ zone areas
def _areas_and_nodes(zoning: Any) -> tuple[list[Any], Any]:
    import shapely
    from shapely.geometry import shape

    collection = json.loads(json.dumps(zones_geojson(zoning), separators=(",", ":")))
    areas = [shape(f["geometry"]) for f in collection["features"]]
    assert all(shapely.is_valid(a) for a in areas)
    return areas, collection


def _clip_by_hand(net: Any) -> Any:
    """The network's convex hull buffered by its median link length, by shapely and numpy."""
    import shapely

    xy = net.coordinates
    rows, cols = net.adjacency.tocoo().row, net.adjacency.tocoo().col
    median = float(np.median(np.hypot(*(xy[rows] - xy[cols]).T)))
    return shapely.MultiPoint(xy).convex_hull.buffer(median, quad_segs=16)


@pytest.mark.parametrize(("n", "k"), [(800, 6), (3_000, 16)])
def test_zone_areas_cover_their_nodes_do_not_overlap_and_fill_the_buffered_hull(n, k):
    import shapely
    from shapely.ops import unary_union

    from specgraph import gallery

    net = gallery.road_like(n, rng=n)
    zoning = find_zones(net, k, rng=0)
    areas, collection = _areas_and_nodes(zoning)
    assert len(areas) == k
    points = shapely.points(net.coordinates)
    for zone, area in enumerate(areas):
        mine = points[zoning.labels == zone]
        assert shapely.covers(area, mine).all()  # each zone's area covers its nodes
        others = points[zoning.labels != zone]
        assert not shapely.contains_properly(area, others).any()  # and no other node inside
    # shapely 2.0.0 (the oldest release allowed) reports a floating-point "invalid value"
    # from its intersection ufunc on polygons that share an edge, with a correct result
    # (seen in the oldest-pins CI; later releases do not): numpy's error state silences it.
    with np.errstate(invalid="ignore"):
        for a in range(k):
            for b in range(a + 1, k):
                assert areas[a].intersection(areas[b]).area <= 1e-9 * areas[a].area
    clip = _clip_by_hand(net)
    union = unary_union(areas)
    assert union.area == pytest.approx(clip.area, rel=1e-9)
    assert sum(a.area for a in areas) == pytest.approx(clip.area, rel=1e-9)
    assert union.symmetric_difference(clip).area <= 1e-9 * clip.area
    reported = [f["properties"]["area"] for f in collection["features"]]
    np.testing.assert_allclose(reported, [a.area for a in areas], rtol=1e-12)


def test_nodes_at_one_position_in_two_zones_are_counted_not_covered():
    import shapely

    from specgraph import Network

    # A path a-b-c-d with c and d at one position but in different zones.
    net = Network.from_links(
        ["a", "b", "c"],
        ["b", "c", "d"],
        node_ids=["a", "b", "c", "d"],
        coordinates=np.array([[0.0, 0.0], [1.0, 0.0], [2.0, 0.0], [2.0, 0.0]]),
    )
    from specgraph.diagnostics import boundary_links, overall_scores, zone_table
    from specgraph.zones import Zoning

    labels = np.array([0, 0, 0, 1])
    table = zone_table(net, labels)
    zoning = Zoning(
        network=net, labels=labels, zones=table, boundary=boundary_links(net, labels),
        solves=(), scores=overall_scores(table), parameters={},
    )  # fmt: skip
    areas, collection = _areas_and_nodes(zoning)
    assert [f["properties"]["nodes_outside"] for f in collection["features"]] == [0, 1]
    assert areas[1].is_empty
    assert shapely.covers(areas[0], shapely.points(net.coordinates[:3])).all()


def test_zone_nodes_stay_available_as_points_and_multipoints(tmp_path):
    net, _ = read_geojson_lines(two_districts(tmp_path))
    zoning = find_zones(net, 2, rng=0)
    multi = zones_geojson(zoning, geometry="nodes")
    assert [f["geometry"]["type"] for f in multi["features"]] == ["MultiPoint"] * 2
    assert [len(f["geometry"]["coordinates"]) for f in multi["features"]] == [16, 16]
    with pytest.raises(ParameterError, match="geometry"):
        zones_geojson(zoning, geometry="hull")


# ------------------------------------------------------------------ Parquet
def test_parquet_tables_read_back_equal(tmp_path):
    pytest.importorskip("pyarrow")
    net, _ = read_geojson_lines(two_districts(tmp_path))
    zoning = find_zones(net, 2, rng=0)
    files = zoning_parquet(zoning)
    tables = zoning_tables(zoning)
    assert sorted(files) == sorted(n.replace(".csv", ".parquet") for n in tables)
    for name, table in tables.items():
        # Reference reader: pandas over pyarrow.
        back = pd.read_parquet(io.BytesIO(files[name.replace(".csv", ".parquet")]))
        pd.testing.assert_frame_equal(back, table.reset_index(drop=True), check_dtype=False)
    assert parquet_bytes(tables["zones.csv"]) == parquet_bytes(tables["zones.csv"])
    written = write_outputs(tmp_path / "out", files)
    on_disk = pd.read_parquet(tmp_path / "out" / "boundary.parquet")
    pd.testing.assert_frame_equal(on_disk, tables["boundary.csv"], check_dtype=False)
    assert len(written) == 4


def test_parquet_writes_mixed_type_columns_as_text():
    pytest.importorskip("pyarrow")
    frame = pd.DataFrame({"asset": [12, "V-7", None], "x": [1.0, 2.0, 3.0]})
    back = pd.read_parquet(io.BytesIO(parquet_bytes(frame)))
    assert back["asset"].tolist()[:2] == ["12", "V-7"]
    assert back["asset"].isna().tolist() == [False, False, True]
    assert back["x"].tolist() == [1.0, 2.0, 3.0]
