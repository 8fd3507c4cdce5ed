"""Figures and the HTML report: colours, map drawings at every size, tables, escaping.

Outside sources: Paul Tol's colour-scheme note for the palette values; the
sRGB (IEC 61966-2-1) and CIELAB (CIE 15) formulas for colour differences;
Machado, Oliveira and Fernandes (2009) for colour-vision-deficiency simulation;
networkx for the zone adjacency; collections.Counter and plain loops as brute
force for the per-cell aggregates; the stdlib html.parser to read the page back.
"""

from __future__ import annotations

import base64
import itertools
import re
import struct
from collections import Counter
from html.parser import HTMLParser
from pathlib import Path

import networkx as nx
import numpy as np
import pandas as pd
import pytest
from matplotlib.axes import Axes
from matplotlib.collections import LineCollection, PathCollection
from matplotlib.colors import to_rgb
from matplotlib.image import AxesImage
from matplotlib.patches import Rectangle

from specgraph import Network, find_zones, gallery, stability
from specgraph.exceptions import OutputError, ParameterError
from specgraph.export import CAUTION
from specgraph.report import (
    CAUTIONS,
    PALETTE,
    _plots,
    build_report,
    figure_bytes,
    map_detail,
    spectrum_figure,
    stability_figure,
    write_report,
    zone_bars_figure,
    zone_colours,
    zone_map_figure,
)
from specgraph.report._plots import cell_majority, cell_minimum

# Paul Tol, "Colour Schemes", SRON/EPS/TN/09-002 issue 3.2 (2021), qualitative
# scheme "muted" (figure 4), restated here from the note.
TOL_MUTED = ("#332288", "#88CCEE", "#44AA99", "#117733", "#999933", "#DDCC77", "#CC6677",
             "#882255", "#AA4499")  # fmt: skip

# Machado, Oliveira and Fernandes, "A physiologically-based model for simulation of
# color vision deficiency", IEEE TVCG 15(6), 2009, severity 1.0, on linear RGB.
MACHADO = {
    "protanopia": [[0.152286, 1.052583, -0.204868], [0.114503, 0.786281, 0.099216],
                   [-0.003882, -0.048116, 1.051998]],
    "deuteranopia": [[0.367322, 0.860646, -0.227968], [0.280085, 0.672501, 0.047413],
                     [-0.011820, 0.042940, 0.968881]],
    "tritanopia": [[1.255528, -0.076749, -0.178779], [-0.078411, 0.930809, 0.147602],
                   [0.004733, 0.691367, 0.303900]],
}  # fmt: skip

#: A CIELAB difference of about 2.3 is just noticeable (from memory: Sharma,
#: Digital Color Imaging Handbook, 2003); zone colours must be told apart at a
#: glance in small patches, so ask for several times that.
MIN_DELTA_E = 20.0
#: The same under simulated dichromacy, where every palette loses contrast.
MIN_DELTA_E_SIMULATED = 10.0


# ------------------------------------------------------------------ helpers
def _linear_rgb(colour: str) -> np.ndarray:
    # IEC 61966-2-1 (sRGB) decoding.
    c = np.array(to_rgb(colour))
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def _lab(linear: np.ndarray) -> np.ndarray:
    # sRGB primaries to XYZ (IEC 61966-2-1), then CIELAB with the D65 white (CIE 15).
    m = np.array([[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722], [0.0193, 0.1192, 0.9505]])
    xyz = m @ np.clip(linear, 0, 1) / np.array([0.95047, 1.0, 1.08883])
    f = np.where(xyz > (6 / 29) ** 3, np.cbrt(xyz), xyz / (3 * (6 / 29) ** 2) + 4 / 29)
    return np.array([116 * f[1] - 16, 500 * (f[0] - f[1]), 200 * (f[1] - f[2])])


def _min_delta_e(colours: tuple[str, ...], matrix: np.ndarray | None = None) -> float:
    labs = [_lab((matrix if matrix is not None else np.eye(3)) @ _linear_rgb(c)) for c in colours]
    return min(float(np.linalg.norm(a - b)) for a, b in itertools.combinations(labs, 2))


class _Tables(HTMLParser):
    """Tables of a page by id: header row and body rows of cell texts (entities decoded)."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tables: dict[str, list[list[str]]] = {}
        self.images: dict[str, str] = {}
        self._current: list[list[str]] | None = None
        self._cell: list[str] | None = None

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        found = dict(attrs)
        if tag == "table":
            self._current = self.tables.setdefault(str(found.get("id")), [])
        elif tag == "tr" and self._current is not None:
            self._current.append([])
        elif tag in ("td", "th") and self._current is not None:
            self._cell = []
        elif tag == "img":
            self.images[str(found.get("id"))] = str(found.get("src"))

    def handle_endtag(self, tag: str) -> None:
        if tag in ("td", "th") and self._cell is not None and self._current is not None:
            self._current[-1].append("".join(self._cell))
            self._cell = None
        elif tag == "table":
            self._current = None

    def handle_data(self, data: str) -> None:
        if self._cell is not None:
            self._cell.append(data)


def _parse(page: str) -> _Tables:
    parser = _Tables()
    parser.feed(page)
    return parser


def _frame(rows: list[list[str]]) -> pd.DataFrame:
    return pd.DataFrame(rows[1:], columns=rows[0])


def _bars(axes: Axes) -> list[Rectangle]:
    return [p for p in axes.patches if isinstance(p, Rectangle)]


def _png_size(data: bytes) -> tuple[int, int]:
    # PNG specification (ISO/IEC 15948): signature, then the IHDR chunk's width and height.
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    width, height = struct.unpack(">II", data[16:24])
    return width, height


# ------------------------------------------------------------------ fixtures
@pytest.fixture(scope="module")
def grid_zoning():
    """A 20 x 20 grid in 12 zones: more zones than the palette has colours."""
    return find_zones(gallery.grid(20, 20), 12, rng=0)


@pytest.fixture(scope="module")
def auto_zoning():
    """Four dense clusters on a plane, zone count read from the spectrum."""
    graph = nx.random_partition_graph([40, 40, 40, 40], 0.3, 0.004, seed=3)
    rng = np.random.default_rng(3)
    centres = np.array([[0, 0], [10, 0], [0, 10], [10, 10]], dtype=float)
    xy = np.vstack([centres[i] + rng.normal(size=(40, 2)) for i in range(4)])
    net = Network.from_networkx(graph)
    net = Network(net.adjacency, net.node_ids, coordinates=xy[[int(i) for i in net.node_ids]])
    return find_zones(net, "auto", rng=0)


@pytest.fixture(scope="module")
def hostile_zoning():
    """A barbell whose node ids, link columns and values are HTML."""
    ids = ["<script>alert(1)</script>", "a&b", '"q"', "<img src=x onerror=alert(2)>"]
    left = [*ids[:2], "n2", "n3"]
    right = [*ids[2:], "m2", "m3"]
    links = [(u, v) for part in (left, right) for u, v in itertools.combinations(part, 2)]
    links.append((left[0], right[0]))
    source, target = zip(*links, strict=True)
    extra = pd.DataFrame({"<b>col</b>": ["<i>x</i>"] * len(links)})
    xy = np.random.default_rng(0).uniform(size=(8, 2))
    order = list(dict.fromkeys(itertools.chain.from_iterable(links)))
    net = Network.from_links(source, target, node_ids=order, coordinates=xy, extra=extra)
    return find_zones(net, 2, rng=0)


# ------------------------------------------------------------------ colours
def test_palette_is_tol_muted() -> None:
    assert tuple(c.upper() for c in PALETTE) == TOL_MUTED


def test_palette_colours_are_far_apart() -> None:
    assert _min_delta_e(PALETTE) >= MIN_DELTA_E
    # Boundary links are black: every zone colour must stand apart from it too.
    assert _min_delta_e((*PALETTE, _plots.BOUNDARY_COLOUR)) >= MIN_DELTA_E


@pytest.mark.parametrize("kind", sorted(MACHADO))
def test_palette_stays_apart_under_simulated_dichromacy(kind: str) -> None:
    assert _min_delta_e(PALETTE, np.array(MACHADO[kind])) >= MIN_DELTA_E_SIMULATED


def test_few_zones_take_the_palette_in_order() -> None:
    colouring = zone_colours(gallery.path(6), np.array([0, 0, 1, 1, 2, 2]))
    assert colouring.colours == PALETTE[:3]
    assert colouring.clashes == 0


def test_neighbouring_zones_get_different_colours(grid_zoning) -> None:
    colouring = zone_colours(grid_zoning.network, grid_zoning.labels)
    assert grid_zoning.n_zones > len(PALETTE)
    assert "greedy" in colouring.method
    assert set(colouring.colours) <= set(PALETTE)
    # The zone adjacency rebuilt from networkx's own grid graph (row-major numbering,
    # as gallery.grid documents), not from the network's matrix.
    zone = grid_zoning.labels
    touching = {
        (zone[20 * r1 + c1], zone[20 * r2 + c2])
        for (r1, c1), (r2, c2) in nx.grid_2d_graph(20, 20).edges
        if zone[20 * r1 + c1] != zone[20 * r2 + c2]
    }
    assert touching
    assert all(colouring.colours[a] != colouring.colours[b] for a, b in touching)


def test_clashes_are_counted_when_the_palette_runs_out() -> None:
    # Every node its own zone on the complete graph K12: 12 mutually adjacent zones
    # need 12 colours (a clique), more than the palette has.
    k = 12
    colouring = zone_colours(gallery.complete(k), np.arange(k))
    brute = sum(
        colouring.colours[a] == colouring.colours[b] for a, b in itertools.combinations(range(k), 2)
    )
    assert colouring.clashes == brute > 0  # pigeonhole: 12 zones, 9 colours


# ------------------------------------------------------------------ aggregates
def test_cell_majority_matches_counting() -> None:
    rng = np.random.default_rng(1)
    cell = rng.integers(0, 30, size=2_000)
    values = rng.integers(0, 7, size=2_000)
    got = cell_majority(cell, values, 35)
    for c in range(35):
        counts = Counter(values[cell == c].tolist())
        if not counts:
            assert got[c] == -1
            continue
        top = max(counts.values())
        assert got[c] == min(v for v, n in counts.items() if n == top)


def test_cell_minimum_matches_a_loop() -> None:
    rng = np.random.default_rng(2)
    cell = rng.integers(0, 20, size=500)
    values = rng.uniform(size=500)
    got = cell_minimum(cell, values, 22)
    for c in range(22):
        inside = values[cell == c]
        assert (np.isnan(got[c]) and inside.size == 0) or got[c] == inside.min()


# ------------------------------------------------------------------ maps
@pytest.mark.parametrize(
    ("n", "expected"),
    [(10, "vector"), (20, "vector"), (21, "raster"), (50, "raster"), (51, "aggregate")],
)
def test_map_detail_thresholds(n: int, expected: str) -> None:
    assert map_detail(n, raster_above=20, aggregate_above=50) == expected


def _artists(figure):
    axes = figure.axes[0]
    return axes.collections, axes.images


def test_vector_map_draws_every_link(grid_zoning) -> None:
    figure = zone_map_figure(grid_zoning)
    collections, images = _artists(figure)
    assert not images
    lines = [c for c in collections if isinstance(c, LineCollection)]
    # Internal links in zone colours, plus the boundary twice (halo and line).
    drawn = len(lines[0].get_segments()) + len(lines[1].get_segments())
    assert drawn == grid_zoning.network.n_links
    assert len(lines[1].get_segments()) == len(grid_zoning.boundary)
    assert not any(c.get_rasterized() for c in collections)
    assert b"<image" not in figure_bytes(figure, format="svg")


def test_raster_map_rasterizes_links_and_nodes(grid_zoning) -> None:
    figure = zone_map_figure(grid_zoning, raster_above=100, aggregate_above=10_000)
    collections, images = _artists(figure)
    assert not images
    points = [c for c in collections if isinstance(c, PathCollection)]
    assert points[0].get_rasterized()
    assert next(c for c in collections if isinstance(c, LineCollection)).get_rasterized()
    assert b"<image" in figure_bytes(figure, format="svg")  # the rasterized layer


def test_aggregate_map_shows_the_zone_of_each_cell(grid_zoning) -> None:
    # With one cell per grid point (coordinates 0..19, 20 cells across), each
    # pixel of the aggregate is one node: its colour must be its zone's colour.
    figure = zone_map_figure(grid_zoning, raster_above=10, aggregate_above=100, cells=20)
    _, images = _artists(figure)
    assert isinstance(images[0], AxesImage)
    pixels = np.asarray(images[0].get_array())
    colours = zone_colours(grid_zoning.network, grid_zoning.labels).colours
    xy = grid_zoning.network.coordinates.astype(int)
    for node in range(grid_zoning.network.n_nodes):
        col, row = xy[node]
        expected = to_rgb(colours[grid_zoning.labels[node]])
        np.testing.assert_allclose(pixels[row, col, :3], expected)
    assert _png_size(figure_bytes(figure))[0] > 0


def test_map_marks_sources_and_refuses_unknown_ones(grid_zoning) -> None:
    ids = grid_zoning.network.node_ids
    figure = zone_map_figure(grid_zoning, sources=[ids[0], ids[-1]])
    stars = [c for c in figure.axes[0].collections if len(np.asarray(c.get_offsets())) == 2]
    np.testing.assert_allclose(
        np.asarray(stars[0].get_offsets()), grid_zoning.network.coordinates[[0, len(ids) - 1]]
    )
    with pytest.raises(ParameterError, match="sources"):
        zone_map_figure(grid_zoning, sources=["no such node"])


def test_no_map_without_coordinates() -> None:
    zoning = find_zones(gallery.barbell(5), 2, rng=0)
    with pytest.raises(ParameterError, match="coordinates"):
        zone_map_figure(zoning)


# ------------------------------------------------------------------ other figures
def test_spectrum_figure_marks_the_chosen_gap(auto_zoning) -> None:
    count = auto_zoning.decisions["zone_count"]
    evidence = pd.DataFrame(count["evidence"])
    figure = spectrum_figure(auto_zoning)
    top, bottom = figure.axes
    x, y = (np.asarray(v) for v in top.lines[0].get_data())
    np.testing.assert_array_equal(x[:-1], evidence["zones"])
    np.testing.assert_array_equal(y[:-1], evidence["eigenvalue"])
    band = top.patches[0].get_extents().transformed(top.transData.inverted())
    assert band.x0 == pytest.approx(count["choice"])
    assert band.x1 == pytest.approx(count["choice"] + 1)
    heights = [bar.get_height() for bar in _bars(bottom)]
    np.testing.assert_allclose(heights, evidence["relative_gap"])


def test_zone_bars_hold_the_zone_table(grid_zoning, monkeypatch) -> None:
    figure = zone_bars_figure(grid_zoning)
    left, right = figure.axes
    table = grid_zoning.zones
    np.testing.assert_allclose([b.get_width() for b in _bars(left)], table["size"])
    np.testing.assert_allclose([b.get_width() for b in _bars(right)], table["conductance"])
    monkeypatch.setattr(_plots, "BAR_ZONES_MAX", 5)
    many = zone_bars_figure(grid_zoning)  # 12 zones > 5: histograms
    assert sum(b.get_height() for b in _bars(many.axes[0])) == len(table)


def test_stability_map_and_bars() -> None:
    net = gallery.grid(10, 10)
    result = stability(net, 4, repeats=1, rng=0)
    figure = stability_figure(result.reference, result)
    points = next(c for c in figure.axes[0].collections if isinstance(c, PathCollection))
    np.testing.assert_allclose(
        np.sort(np.asarray(points.get_array())), np.sort(result.nodes["confidence"].to_numpy())
    )
    plain = Network(net.adjacency, net.node_ids)  # same network, no coordinates
    bars = stability_figure(find_zones(plain, 4, rng=0), result)
    widths = [b.get_width() for b in _bars(bars.axes[0])]
    np.testing.assert_allclose(widths[: len(result.zones)], result.zones["confidence"])


# ------------------------------------------------------------------ the page
def test_report_tables_equal_the_inputs(grid_zoning) -> None:
    page = build_report(grid_zoning, command="specgraph zones grid.csv --zones 12", boundary_rows=5)
    parsed = _parse(page)
    zones = _frame(parsed.tables["zones"])
    expected = grid_zoning.zones
    assert list(zones.columns) == list(expected.columns)
    for column in expected.columns:
        if expected[column].dtype == bool:
            assert zones[column].tolist() == ["yes" if v else "no" for v in expected[column]]
        else:
            # Figures are shown to 6 significant digits (SIGNIFICANT_DIGITS).
            np.testing.assert_allclose(zones[column].astype(float), expected[column], rtol=5e-6)
    boundary = _frame(parsed.tables["boundary"])
    # boundary.csv's documented order: zone pair (smaller zone first), then weight
    # descending, then input order; built here with pandas' stable sort.
    table = grid_zoning.boundary.assign(
        low=np.minimum(grid_zoning.boundary["zone_a"], grid_zoning.boundary["zone_b"]),
        high=np.maximum(grid_zoning.boundary["zone_a"], grid_zoning.boundary["zone_b"]),
    )
    head = table.sort_values(
        ["low", "high", "weight"], ascending=[True, True, False], kind="stable"
    ).head(5)
    assert boundary["source"].tolist() == head["source"].tolist()
    assert boundary["zone_b"].astype(int).tolist() == head["zone_b"].tolist()
    assert f"The first 5 of {len(grid_zoning.boundary):,} boundary links" in page
    summary = dict(parsed.tables["summary"])
    assert summary["nodes"] == "400"
    assert summary["zones"] == "12"
    assert summary["boundary links"] == str(grid_zoning.scores["boundary_links"])
    assert "specgraph zones grid.csv --zones 12" in page


def test_report_embeds_every_figure(auto_zoning) -> None:
    parsed = _parse(build_report(auto_zoning, command="x"))
    assert set(parsed.images) == {"zone-map", "spectrum", "zone-bars"}
    for src in parsed.images.values():
        head, data = src.split(",", 1)
        assert head == "data:image/png;base64"
        width, height = _png_size(base64.b64decode(data))
        assert width > 0
        assert height > 0
    svg = _parse(build_report(auto_zoning, command="x", image_format="svg"))
    assert all(s.startswith("data:image/svg+xml;base64,") for s in svg.images.values())


# Anything a browser would fetch: an absolute or protocol-relative URL, a CSS
# url() or @import, or a src/href that is neither a data: URI nor a fragment.
EXTERNAL = re.compile(
    r"""[a-z][a-z0-9+.-]*://|url\s*\(|@import|(?:src|href)\s*=\s*(?!["']?(?:data:|#))""", re.I
)


def test_report_loads_nothing_from_outside(auto_zoning, grid_zoning) -> None:
    for zoning in (auto_zoning, grid_zoning):
        page = build_report(zoning, command="specgraph zones in.csv")
        assert EXTERNAL.search(page) is None
    # The pattern itself catches what it must (so the check above can fail).
    for bad in ('<img src="http://x/y.png">', "<link href=//cdn/x.css>", "a{background:url(x)}",
                '<img src="y.png">'):  # fmt: skip
        assert EXTERNAL.search(bad)


def test_report_escapes_user_strings(hostile_zoning) -> None:
    page = build_report(
        hostile_zoning,
        command="specgraph zones '<script>alert(3)</script>.csv'",
        title="<b>Title</b>",
        sources=["<script>alert(1)</script>"],
    )
    assert "<script" not in page.lower()
    assert "<b>" not in page
    assert "<i>x</i>" not in page
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in page
    parsed = _parse(page)
    boundary = _frame(parsed.tables["boundary"])
    assert "<script>alert(1)</script>" in boundary["source"].tolist()  # the id, intact
    assert boundary["<b>col</b>"].tolist() == ["<i>x</i>"]
    assert set(parsed.images) >= {"zone-map"}  # no stray <img> from an id


def test_report_states_the_cautions_top_and_bottom(grid_zoning) -> None:
    page = build_report(grid_zoning, command="x")
    boxes = page.split('class="caution"')
    assert len(boxes) == 3  # two caution boxes
    for box in boxes[1:]:
        text = box.split("</aside>")[0]
        assert CAUTION in text
        assert all(caution in text for caution in CAUTIONS)
    assert (
        len(boxes[0])
        < page.index('id="summary"')
        < page.index('id="run-record"')
        < len(page) - len(boxes[2])
    )


def test_report_without_coordinates_says_why() -> None:
    zoning = find_zones(gallery.barbell(5), 2, rng=0)
    page = build_report(zoning, command="x")
    assert 'id="zone-map"' not in page
    assert "No map: the network has no node coordinates" in page


def test_report_with_stability() -> None:
    net = gallery.grid(10, 10)
    result = stability(net, 4, repeats=1, rng=0)
    parsed = _parse(build_report(result.reference, command="x", stability=result))
    assert "stability-map" in parsed.images
    table = _frame(parsed.tables["stability"])
    np.testing.assert_allclose(
        table["confidence"].astype(float), result.zones["confidence"], rtol=5e-6
    )


def test_report_is_reproducible(auto_zoning) -> None:
    for image_format in ("png", "svg"):
        first = build_report(auto_zoning, command="x", image_format=image_format)
        assert build_report(auto_zoning, command="x", image_format=image_format) == first


def test_report_options_are_checked(grid_zoning) -> None:
    with pytest.raises(ParameterError, match="image_format"):
        build_report(grid_zoning, command="x", image_format="jpeg")  # type: ignore[arg-type]
    with pytest.raises(ParameterError, match="boundary_rows"):
        build_report(grid_zoning, command="x", boundary_rows=-1)
    with pytest.raises(ParameterError, match="command"):
        build_report(grid_zoning, command=["specgraph"])  # type: ignore[arg-type]


def test_write_report_is_atomic(grid_zoning, tmp_path: Path) -> None:
    target = write_report(tmp_path / "out" / "report.html", grid_zoning, command="x")
    assert target.read_text(encoding="utf-8") == build_report(grid_zoning, command="x")
    assert sorted(p.name for p in target.parent.iterdir()) == ["report.html"]
    blocker = tmp_path / "file"
    blocker.write_text("not a folder")
    with pytest.raises(OutputError, match="report"):
        write_report(blocker / "report.html", grid_zoning, command="x")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["file", "out"]
