"""Maps that stay readable at any zone count and size: colours, numbers, scale, spectrum, stability.

Outside sources, named at each check:

* networkx (``quotient_graph``, ``grid_2d_graph``): the zone adjacency graph
  is rebuilt from networkx's own graph, not from our matrices; a colouring is
  proper when no edge of that graph joins two vertices of one colour (the
  definition, common practice);
* shapely: the number of each zone sits inside the zone's Voronoi area;
* the haversine formula (great-circle distance on a sphere, from memory) for
  the scale bar of a map in longitude/latitude degrees;
* matplotlib's own axis scale (``Axes.get_yscale``) and the SVG text of the
  figure (each zone number its own ``<g id="zone-label-N">`` group).
"""

from __future__ import annotations

import json
import math
import re
import time
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
from matplotlib.collections import PathCollection
from matplotlib.colors import to_hex
from mpl_toolkits.axes_grid1.anchored_artists import AnchoredSizeBar

from specgraph import Network, find_zones, gallery, stability
from specgraph.diagnostics import boundary_links, overall_scores, zone_table
from specgraph.io import read_geojson_lines
from specgraph.report import (
    PALETTE,
    _plots,
    coordinate_units,
    figure_bytes,
    spectrum_figure,
    stability_figure,
    zone_colours,
    zone_map_figure,
)
from specgraph.studies import CORE_CONFIDENCE
from specgraph.zones import Zoning


# ------------------------------------------------------------------ helpers
def zoning_of(network, labels: np.ndarray) -> Zoning:
    """A Zoning from given labels with the tables find_zones gives (a cheap zoning)."""
    labels = np.asarray(labels, dtype=np.int64)
    table = zone_table(network, labels)
    return Zoning(
        network=network,
        labels=labels,
        zones=table,
        boundary=boundary_links(network, labels),
        solves=(),
        scores=overall_scores(table),
        parameters={},
    )


def blocks(network, columns: int, rows: int) -> np.ndarray:
    """Zone of each node of a unit-square network: its block of a columns x rows grid."""
    xy = network.coordinates
    col = np.minimum((xy[:, 0] * columns).astype(np.int64), columns - 1)
    row = np.minimum((xy[:, 1] * rows).astype(np.int64), rows - 1)
    return row * columns + col


def zone_graph_networkx(zoning: Zoning) -> nx.Graph:
    """The zone adjacency graph by networkx's quotient graph of the network's own links."""
    net = zoning.network
    graph = nx.Graph()
    graph.add_nodes_from(range(net.n_nodes))
    upper = net.adjacency.tocoo()
    graph.add_edges_from(zip(upper.row.tolist(), upper.col.tolist(), strict=True))
    blocks_ = [set(np.flatnonzero(zoning.labels == z).tolist()) for z in range(zoning.n_zones)]
    quotient = nx.quotient_graph(graph, blocks_, relabel=True)
    # relabel=True numbers blocks in the order given: block z is zone z.
    return nx.Graph(quotient.edges())


def label_texts(figure) -> dict[int, tuple[float, float]]:
    """Zone number -> (x, y) of every zone label drawn on the figure's map axes."""
    found = {}
    for text in figure.axes[0].texts:
        gid = text.get_gid() or ""
        if gid.startswith("zone-label-"):
            assert text.get_text() == gid.removeprefix("zone-label-")
            found[int(text.get_text())] = text.get_position()
    return found


@pytest.fixture(scope="module")
def zoned16() -> Zoning:
    return find_zones(gallery.road_like(3_000, rng=1), 16, rng=0)


@pytest.fixture(scope="module")
def zoned40() -> Zoning:
    return find_zones(gallery.road_like(4_000, rng=2), 40, rng=0)


# ------------------------------------------------------------------ colours
@pytest.mark.parametrize("name", ["zoned16", "zoned40"])
def test_touching_zones_never_share_a_colour(name: str, request) -> None:
    zoning = request.getfixturevalue(name)
    colouring = zone_colours(zoning.network, zoning.labels)
    graph = zone_graph_networkx(zoning)
    assert graph.number_of_edges() > zoning.n_zones  # a real adjacency, not a path
    # Proper colouring (definition): no edge joins two zones of one colour.
    assert all(colouring.colours[a] != colouring.colours[b] for a, b in graph.edges)
    assert colouring.clashes == 0
    assert set(colouring.colours) <= set(PALETTE)
    # Balanced over the palette: every colour is used (more zones than colours),
    # not the three or four a bare greedy colouring of a near-planar graph needs.
    assert set(colouring.colours) == set(PALETTE)
    assert "greedy" in colouring.method


def test_the_balancing_pass_keeps_any_proper_colouring_proper() -> None:
    # Random planar-like graphs (Delaunay of random points, networkx's own greedy colouring):
    # the balanced colouring must stay proper whatever the start.
    for seed in range(5):
        net = gallery.road_like(60, rng=seed)
        graph = nx.Graph()
        upper = net.adjacency.tocoo()
        graph.add_edges_from(zip(upper.row.tolist(), upper.col.tolist(), strict=True))
        start = nx.greedy_color(graph, strategy="largest_first")
        assert max(start.values()) < len(PALETTE)
        balanced = _plots._balance(graph, start, len(PALETTE))
        assert all(balanced[a] != balanced[b] for a, b in graph.edges)
        counts = np.bincount(list(balanced.values()), minlength=len(PALETTE))
        assert counts.max() - counts.min() <= counts.max()  # every colour in range
        assert np.count_nonzero(counts) > max(start.values()) + 1  # more colours than greedy


# ------------------------------------------------------------------ numbers
def test_every_zone_is_numbered_inside_itself(zoned16) -> None:
    import shapely

    from specgraph._areas import zone_areas

    figure = zone_map_figure(zoned16)
    labels = label_texts(figure)
    assert sorted(labels) == list(range(16))
    svg = figure_bytes(figure, format="svg").decode()
    for zone in range(16):
        assert f'id="zone-label-{zone}"' in svg
    # Each number sits on a node of its own zone, inside the zone's area (shapely).
    xy = zoned16.network.coordinates
    areas = zone_areas(zoned16.network, zoned16.labels).areas
    for zone, (x, y) in labels.items():
        at = np.flatnonzero((xy[:, 0] == x) & (xy[:, 1] == y))
        assert zoned16.labels[at[0]] == zone
        assert areas[zone].covers(shapely.Point(x, y))


def test_legend_lists_zones_only_while_each_has_its_own_colour(zoned16) -> None:
    many = zone_map_figure(zoned16).axes[0].get_legend()
    assert not [t for t in many.get_texts() if t.get_text().startswith("zone ")]
    assert "numbers on the map" in many.get_title().get_text()
    few = find_zones(gallery.road_like(500, rng=3), 5, rng=0)
    entries = [t.get_text() for t in zone_map_figure(few).axes[0].get_legend().get_texts()]
    assert [e for e in entries if e.startswith("zone ")] == [f"zone {z}" for z in range(5)]


@pytest.mark.slow  # about 25 s; the browser test opens a 200,000-node map in every run
def test_a_200000_node_map_numbers_every_zone() -> None:
    net = gallery.road_like(200_000, rng=4)
    zoning = zoning_of(net, blocks(net, 8, 5))  # 40 zones
    start = time.perf_counter()
    figure = zone_map_figure(zoning)
    svg = figure_bytes(figure, format="svg").decode()
    seconds = time.perf_counter() - start
    assert _plots.map_detail(net.n_nodes) == "raster"
    found = set(int(z) for z in re.findall(r'id="zone-label-(\d+)"', svg))
    assert found == set(range(40))
    assert "<image" in svg  # nodes and links rasterized, numbers kept as vector groups
    assert seconds < 120  # a generous bound: about 15 s measured on a loaded 2-core machine


def test_aggregated_map_draws_borders_between_zones_as_one_vector_path() -> None:
    # One node per cell on a 20 x 20 grid: cell borders are exactly the grid's links
    # between zones, counted on networkx's own grid graph.
    net = gallery.grid(20, 20)
    labels = np.array([(c // 5) + 4 * (r // 7) for r in range(20) for c in range(20)])
    zoning = zoning_of(net, labels)
    figure = zone_map_figure(zoning, raster_above=10, aggregate_above=100, cells=20)
    borders = [p for p in figure.axes[0].patches if p.get_gid() == "zone-borders"]
    assert len(borders) == 1
    ends = borders[0].get_path().vertices.reshape(-1, 2, 2)
    # Cells are one unit wide (coordinates 0..19 over 20 cells, span 19): the border's
    # total length in cells is one per crossing grid edge; merged runs are straight.
    cell = 19 / 20
    lengths = np.abs(ends[:, 1] - ends[:, 0]).sum(axis=1) / cell
    assert np.all((ends[:, 1] - ends[:, 0]).min(axis=1) == 0)  # horizontal or vertical
    crossing = sum(
        labels[20 * r1 + c1] != labels[20 * r2 + c2]
        for (r1, c1), (r2, c2) in nx.grid_2d_graph(20, 20).edges
    )
    assert lengths.sum() == pytest.approx(crossing)
    assert len(ends) < crossing  # straight runs merged
    assert sorted(label_texts(figure)) == list(range(zoning.n_zones))
    assert figure_bytes(figure, format="svg").count(b'id="zone-borders"') == 1


# ------------------------------------------------------------------ units and scale
def _scale_bar(figure) -> AnchoredSizeBar:
    bars = [a for a in figure.axes[0].artists if isinstance(a, AnchoredSizeBar)]
    assert len(bars) == 1
    return bars[0]


def test_scale_bar_in_coordinate_units_when_units_are_unknown(zoned16) -> None:
    figure = zone_map_figure(zoned16)
    assert figure.axes[0].get_xlabel() == "x (coordinate units)"
    label = _scale_bar(figure).txt_label.get_text()
    assert label == "0.1 coordinate units"  # a fifth of the unit square, rounded down to 1-2-5
    net = zoned16.network
    stated = Network(
        net.adjacency, net.node_ids, coordinates=net.coordinates,
        notes={"coordinate_units": "metres"},
    )  # fmt: skip
    metres = zone_map_figure(zoning_of(stated, zoned16.labels))
    assert metres.axes[0].get_xlabel() == "x (m)"
    assert _scale_bar(metres).txt_label.get_text() == "0.1 m"


def haversine_km(lon1: float, lat1: float, lon2: float, lat2: float) -> float:
    """Great-circle distance on a sphere of mean radius 6371.0088 km (haversine, from memory)."""
    p1, p2 = math.radians(lat1), math.radians(lat2)
    dp, dl = p2 - p1, math.radians(lon2 - lon1)
    h = math.sin(dp / 2) ** 2 + math.cos(p1) * math.cos(p2) * math.sin(dl / 2) ** 2
    return 2 * 6371.0088 * math.asin(math.sqrt(h))


def test_longitude_latitude_maps_say_degrees_and_measure_kilometres(tmp_path: Path) -> None:
    # An invented pipe grid near latitude 52 degrees north, in RFC 7946 lon/lat.
    features = []
    for i in range(6):
        for j in range(6):
            here = [4.0 + 0.01 * i, 52.0 + 0.01 * j]
            for step in ([0.01, 0], [0, 0.01]):
                there = [here[0] + step[0], here[1] + step[1]]
                if there[0] <= 4.05 + 1e-9 and there[1] <= 52.05 + 1e-9:
                    features.append(
                        {
                            "type": "Feature",
                            "properties": {},
                            "geometry": {"type": "LineString", "coordinates": [here, there]},
                        }
                    )
    path = tmp_path / "quillmere-lonlat.geojson"
    path.write_text(json.dumps({"type": "FeatureCollection", "features": features}))
    net, _ = read_geojson_lines(path, snap_tolerance=1e-9)
    assert coordinate_units(net).name == "degrees"
    figure = zone_map_figure(find_zones(net, 2, rng=0))
    axes = figure.axes[0]
    assert axes.get_xlabel() == "longitude (degrees)"
    # Aspect 1 / cos(middle latitude): a degree of longitude drawn shorter than one of latitude.
    assert axes.get_aspect() == pytest.approx(1 / math.cos(math.radians(52.025)))
    bar = _scale_bar(figure)
    text = bar.txt_label.get_text()
    value, unit = text.split()
    km = float(value) / (1000 if unit == "m" else 1)
    # The bar's length in degrees of longitude, read from its drawing (the size bar's
    # rectangle in data units), measured along the middle parallel by haversine.
    rectangle = bar.size_bar.get_children()[0]
    length_deg = rectangle.get_width()
    measured = haversine_km(4.0, 52.025, 4.0 + length_deg, 52.025)
    assert measured == pytest.approx(km, rel=1e-3)


# ------------------------------------------------------------------ spectrum
def test_spectrum_is_on_a_log_axis_with_the_chosen_gap_marked() -> None:
    graph = nx.random_partition_graph([40, 40, 40, 40], 0.3, 0.004, seed=3)
    zoning = find_zones(Network.from_networkx(graph), "auto", rng=0)
    figure = spectrum_figure(zoning)
    top = figure.axes[0]
    assert top.get_yscale() == "log"  # matplotlib's own record of the axis scale
    chosen = zoning.decisions["zone_count"]["choice"]
    band = [p for p in top.patches if p.get_gid() == "chosen-gap"]
    assert len(band) == 1
    extent = band[0].get_extents().transformed(top.transData.inverted())
    assert (extent.x0, extent.x1) == pytest.approx((chosen, chosen + 1))
    svg = figure_bytes(figure, format="svg")
    assert b'id="chosen-gap"' in svg


def test_zero_eigenvalues_are_marked_below_the_log_axis() -> None:
    zoning = find_zones(gallery.road_like(400, rng=5), 4, rng=0)  # zone count given
    figure = spectrum_figure(zoning)
    top = figure.axes[0]
    assert top.get_yscale() == "log"
    values = zoning.solves[0].eigen.values
    assert values[0] < _plots.ZERO_EIGENVALUE  # lambda_1 = 0 of a connected network
    line = top.lines[0]
    y = np.asarray(line.get_ydata(), dtype=float)
    assert np.isnan(y[0])
    assert np.all(y[1:] == values[1:])
    zeros = top.lines[1]
    assert list(zeros.get_xdata()) == [1]
    assert zeros.get_ydata()[0] < values[1]  # on the lower edge, below every shown value


# ------------------------------------------------------------------ stability
@pytest.fixture(scope="module")
def stable12():
    return stability(gallery.road_like(1_500, rng=6), 12, repeats=1, rng=0)


def test_low_confidence_nodes_stand_out_on_the_stability_map(stable12) -> None:
    result = stable12
    net = result.reference.network
    figure = stability_figure(result.reference, result)
    axes = figure.axes[0]
    weak = [c for c in axes.collections if c.get_gid() == "low-confidence"]
    assert len(weak) == 1
    confidence = result.nodes["confidence"].to_numpy()
    expected = net.coordinates[confidence < CORE_CONFIDENCE]
    assert expected.shape[0] > 0
    np.testing.assert_allclose(np.asarray(weak[0].get_offsets()), expected)
    assert to_hex(weak[0].get_facecolors()[0]) == _plots.LOW_CONFIDENCE_COLOUR.lower()
    every = next(c for c in axes.collections if isinstance(c, PathCollection))
    assert weak[0].get_zorder() > every.get_zorder()  # on top
    assert weak[0].get_sizes()[0] > every.get_sizes()[0]  # larger
    entries = [t.get_text() for t in axes.get_legend().get_texts()]
    assert entries[0] == f"confidence < {CORE_CONFIDENCE:g} ({expected.shape[0]:,})"
    assert sorted(label_texts(figure)) == list(range(result.reference.n_zones))


def test_aggregated_stability_map_marks_the_cells_holding_low_confidence(stable12) -> None:
    result = stable12
    net = result.reference.network
    cells = 10
    figure = stability_figure(
        result.reference, result, raster_above=10, aggregate_above=100, cells=cells
    )
    weak = next(c for c in figure.axes[0].collections if c.get_gid() == "low-confidence")
    # Cells by hand: 10 x 10 over the nodes' bounding box; a cell is marked when its least
    # confident node is below the core level.
    xy = net.coordinates
    low, high = xy.min(axis=0), xy.max(axis=0)
    index = np.minimum(((xy - low) / (high - low) * cells).astype(int), cells - 1)
    confidence = result.nodes["confidence"].to_numpy()
    marked = {tuple(i) for i in index[confidence < CORE_CONFIDENCE].tolist()}
    centres = np.asarray(weak.get_offsets())
    got = {tuple(v) for v in np.floor((centres - low) / (high - low) * cells).astype(int).tolist()}
    assert got == marked
    assert len(centres) == len(marked)


def test_the_fragments_group_is_grey_and_not_counted_as_a_zone() -> None:
    """A stray piece set aside is drawn in the fragments grey, and the title counts the
    zones asked apart from the group; the group has no link to any zone (networkx), so
    the colouring stays proper."""
    from specgraph.report._plots import FRAGMENTS_COLOUR

    graph = nx.grid_2d_graph(30, 30)
    graph.add_edge("s1", "s2")  # a stray piece of two nodes, under 1% of the network
    pos = {v: (v if isinstance(v, tuple) else (40.0, 40.0 + (v == "s2"))) for v in graph}
    net = Network.from_networkx(graph, pos=pos)
    zoning = find_zones(net, 4, rng=0)
    group = int(zoning.zones.loc[zoning.zones["role"] == "fragments", "zone"].iloc[0])
    figure = zone_map_figure(zoning)
    axes = figure.axes[0]
    assert axes.get_title(loc="left").startswith("4 zones and the fragments group")
    dots = next(c for c in axes.collections if isinstance(c, PathCollection))
    colours = [to_hex(c) for c in dots.get_facecolors()]
    rows = np.flatnonzero(zoning.labels == group)
    assert {colours[r] for r in rows} == {FRAGMENTS_COLOUR.lower()}
    others = np.flatnonzero(zoning.labels != group)
    assert FRAGMENTS_COLOUR.lower() not in {colours[r] for r in others}
    assert not list(nx.edge_boundary(graph, ["s1", "s2"]))
