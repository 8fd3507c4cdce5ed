"""Figures of a zoning: the spectrum, a zone map, per-zone bars and a stability map.

Every figure is a :class:`matplotlib.figure.Figure` drawn on an Agg canvas;
pyplot and its global state are never touched, so building figures is safe
in libraries, servers and threads that each hold their own figures.

Maps and the number of nodes
----------------------------
A map must stay readable, and its file small, from a few thousand nodes to a
million. :func:`map_detail` picks one of three drawings by node count:

``'vector'`` (up to :data:`MAP_RASTER_NODES` nodes)
    every link as a line in its zone's colour, every node as a dot, boundary
    links on top in black with a white halo; an SVG keeps every element.
``'raster'`` (up to :data:`MAP_AGGREGATE_NODES` nodes)
    the same drawing, but links and nodes are rasterized
    (``rasterized=True``) so an SVG holds one image instead of a million
    paths; text, axes and the boundary stay vector where few.
``'aggregate'`` (above)
    nodes are binned into a grid of :data:`MAP_CELLS` cells along the longer
    side; each cell shows the zone holding most of its nodes (the stability
    map: the least confident node of the cell, so weak spots are not averaged
    away). The borders between cells of different zones are drawn as one
    vector path (instead of the boundary links, which at this size would
    cover the map), and sources on top.

At every size each zone carries its number, drawn as vector text at the
zone's *label node*: the node of the zone nearest the median of its nodes'
coordinates (:func:`zone_label_points`), which lies in the zone even when the
zone is not convex. The numbers identify the zones; the colours only tell
touching zones apart, so the legend lists zones one by one only while every
zone has a colour of its own.

Units and scale bar
-------------------
Every map carries a scale bar and says in which units its axes are
(:func:`coordinate_units`). The rule, with ``units='auto'``:

* the network was read from GeoJSON and every position lies within
  longitude/latitude bounds: RFC 7946 positions are longitude and latitude in
  degrees (WGS 84), so the map is drawn in degrees with its aspect stretched
  by :math:`1/\\cos\\varphi_0` at the middle latitude :math:`\\varphi_0` (the
  equirectangular projection, common practice for small areas) and the scale
  bar is in kilometres or metres along that latitude (a sphere of mean radius
  :data:`EARTH_RADIUS_KM`);
* otherwise the units of a node table's x and y columns are not known: the
  axes say "coordinate units" and the scale bar is in those units.

A network states its units in its notes, ``notes={"coordinate_units":
"metres"}`` (projected coordinates in metres) or ``"degrees"``, which every
map then follows (before the rule); :func:`coordinate_units` takes
``units=`` to state them for one call.

Colours
-------
Zones are coloured from Paul Tol's *muted* qualitative scheme [1]_, designed
to stay distinct for viewers with the common colour-vision deficiencies; the
per-node confidence uses *cividis* [2]_, a sequential map of near-uniform
lightness that reads the same with and without red-green deficiency. With
more zones than the palette has colours, touching zones still differ
(:func:`zone_colours`: a proper colouring of the zone adjacency graph).
Nodes of low confidence are drawn larger, on top, in
:data:`LOW_CONFIDENCE_COLOUR`, which no part of cividis comes near.

References
----------
.. [1] P. Tol, "Colour Schemes", SRON Technical Note SRON/EPS/TN/09-002,
   issue 3.2, 2021 (scheme "muted", figure 4).
.. [2] J. R. Nuñez, C. R. Anderton and R. S. Renslow, "Optimizing colormaps
   with consideration for color vision deficiency to enable accurate
   interpretation of scientific data", PLOS ONE 13(7): e0199239, 2018.
   doi:10.1371/journal.pone.0199239
"""

from __future__ import annotations

import io
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Literal, cast

import matplotlib
import networkx as nx
import numpy as np
import pandas as pd
import scipy.sparse as sp
from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.cm import ScalarMappable
from matplotlib.collections import LineCollection
from matplotlib.colors import to_rgb
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch, PathPatch
from matplotlib.path import Path as MplPath
from mpl_toolkits.axes_grid1.anchored_artists import AnchoredSizeBar

from .._figure_files import FIGURE_FORMATS
from .._figures import HIGH_GAP, MEDIUM_GAP, check_labels
from .._validation import NodeIds, check_choice, check_int, check_param, parameter_error
from ..network import Network

if TYPE_CHECKING:
    from ..studies import Stability
    from ..zones import Zoning

__all__ = [
    "BAR_ZONES_MAX",
    "BOUNDARY_COLOUR",
    "CONFIDENCE_COLOURMAP",
    "EARTH_RADIUS_KM",
    "FIGURE_DPI",
    "LABEL_BOX_ALPHA",
    "LABEL_FONT_MAX",
    "LABEL_FONT_MIN",
    "LABEL_FULL_SIZE_ZONES",
    "LOW_CONFIDENCE_COLOUR",
    "MAP_AGGREGATE_NODES",
    "MAP_BOUNDARY_VECTOR_LINKS",
    "MAP_CELLS",
    "MAP_RASTER_NODES",
    "MISSING_COLOUR",
    "PALETTE",
    "PALETTE_REFERENCE",
    "SPECTRUM_SERIES_MAX",
    "UNITS_NOTE",
    "ZERO_EIGENVALUE",
    "CoordinateUnits",
    "ZoneColouring",
    "cell_majority",
    "cell_minimum",
    "coordinate_units",
    "figure_bytes",
    "figure_files",
    "map_detail",
    "spectrum_figure",
    "stability_figure",
    "zone_bars_figure",
    "zone_colours",
    "zone_label_points",
    "zone_map_figure",
]

#: Zone colours: Paul Tol's "muted" qualitative scheme, in the order of its
#: figure (indigo, cyan, teal, green, olive, sand, rose, wine, purple) [1]_.
PALETTE: tuple[str, ...] = (
    "#332288",
    "#88CCEE",
    "#44AA99",
    "#117733",
    "#999933",
    "#DDCC77",
    "#CC6677",
    "#882255",
    "#AA4499",
)
#: Tol's pale grey of the same scheme, for cells or zones without data.
MISSING_COLOUR = "#DDDDDD"
#: Where :data:`PALETTE` comes from (also printed in the report).
PALETTE_REFERENCE = (
    'P. Tol, "Colour Schemes", SRON Technical Note SRON/EPS/TN/09-002, issue 3.2 (2021), '
    'qualitative scheme "muted"'
)
#: The fragments group (stray pieces set aside, role ``'fragments'``): a neutral
#: grey that no zone colour is, dark enough to see on white; it is not a zone.
FRAGMENTS_COLOUR = "#777777"
#: Boundary links and supply-point markers: black, which no zone colour is.
BOUNDARY_COLOUR = "#000000"
#: Sequential colour map of per-node confidence (matplotlib's ``cividis`` [2]_).
CONFIDENCE_COLOURMAP = "cividis"

#: Maps of more nodes than this rasterize their links and nodes (see the
#: module notes): beyond some tens of thousands of paths an SVG becomes
#: slow to open, and the eye no longer tells single links apart anyway.
MAP_RASTER_NODES = 20_000
#: Maps of more nodes than this show the majority zone per grid cell instead
#: of single nodes: at a million nodes single dots overlap many times per
#: pixel, so the drawn colour would be whichever zone happened to come last.
MAP_AGGREGATE_NODES = 250_000
#: Boundary links are rasterized above this many (an SVG would otherwise hold two
#: paths per link, halo and line: 5 MB at 18,000 links, measured).
MAP_BOUNDARY_VECTOR_LINKS = 5_000
#: Grid cells along the longer side of an aggregated map: about one cell per
#: two pixels of the map at :data:`FIGURE_DPI`.
MAP_CELLS = 500
#: Largest font size (points) of the zone numbers on a map.
LABEL_FONT_MAX = 9.0
#: Smallest font size (points) of the zone numbers: 4 pt is about 1 mm high,
#: still legible when the figure is printed at its size (8 in) or zoomed.
LABEL_FONT_MIN = 4.0
#: Zone numbers keep :data:`LABEL_FONT_MAX` up to this many zones; beyond,
#: the size falls with the square root of the zone count (a zone's width on
#: the map falls so), down to :data:`LABEL_FONT_MIN` (at 150 zones and more).
LABEL_FULL_SIZE_ZONES = 30
#: Opacity of the white box behind each zone number: the number reads on any
#: zone colour while the map shows through a little.
LABEL_BOX_ALPHA = 0.75
#: Nodes of low confidence on the stability map (Tol's "vibrant" magenta [1]_,
#: figure 3): far from every colour of cividis, which runs from dark blue to
#: yellow, and apart from the black boundary.
LOW_CONFIDENCE_COLOUR = "#EE3377"
#: Eigenvalues below this are zero up to rounding (the first eigenvalue of
#: each component is 0 exactly; the solvers' residual tolerance is far
#: larger): a log-scale spectrum marks them on its lower edge instead.
ZERO_EIGENVALUE = 1e-10
#: Mean Earth radius in kilometres (IUGG mean radius R1 = 6371.0088 km, from
#: memory), for the scale bar of a map in longitude/latitude degrees.
EARTH_RADIUS_KM = 6371.0088
#: Zones up to this count get one bar each in :func:`zone_bars_figure`;
#: beyond it the figure shows histograms.
BAR_ZONES_MAX = 60
#: Components whose spectra :func:`spectrum_figure` draws at most (the
#: largest first), when the zone count was not read from one spectrum.
SPECTRUM_SERIES_MAX = 8
#: Resolution of raster output (PNG, and the rasterized parts of an SVG).
FIGURE_DPI = 150

_MAP_SIZE = (8.0, 8.0)
#: Key of :attr:`Network.notes` that states the coordinates' units
#: (``'metres'`` or ``'degrees'``) for every map.
UNITS_NOTE = "coordinate_units"
#: Longitude and latitude bounds (degrees), as the GeoJSON reader checks them.
_LONGITUDE_BOUND = 180.0
_LATITUDE_BOUND = 90.0

MapDetail = Literal["vector", "raster", "aggregate"]


# ------------------------------------------------------------------ colours
@dataclass(frozen=True, eq=False)
class ZoneColouring:
    """The colour of each zone.

    Attributes
    ----------
    colours : tuple of str
        Hex colour of zone ``0, 1, ...``, all from :data:`PALETTE` (on maps
        and bars, the fragments group in :data:`FRAGMENTS_COLOUR`).
    slots : ndarray of int
        Index into :data:`PALETTE` of each zone's colour.
    method : str
        ``'one colour per zone'`` or ``'greedy colouring of the zone adjacency
        graph (<networkx strategy>)'``.
    clashes : int
        Pairs of neighbouring zones that share a colour: 0, unless the
        adjacency needs more colours than :data:`PALETTE` holds.
    """

    colours: tuple[str, ...]
    slots: np.ndarray
    method: str
    clashes: int


def _zone_pairs(network: Network, labels: np.ndarray) -> np.ndarray:
    """Distinct pairs ``(a, b)``, ``a < b``, of zones joined by at least one link."""
    upper = sp.triu(network.adjacency, k=1, format="coo")
    a, b = labels[upper.row], labels[upper.col]
    cross = a != b
    pairs = np.column_stack([np.minimum(a, b)[cross], np.maximum(a, b)[cross]])
    return np.unique(pairs, axis=0) if pairs.size else pairs.reshape(0, 2)


def zone_colours(network: Network, labels: np.ndarray) -> ZoneColouring:
    """Colour zones from :data:`PALETTE` so that touching zones always differ.

    Two zones *touch* when a link joins them. With at most ``len(PALETTE)``
    zones, zone ``z`` gets ``PALETTE[z]``: every zone its own colour. With
    more, the *zone adjacency graph* (one vertex per zone, an edge where a
    link joins two zones) is coloured properly, in two steps:

    1. a greedy colouring with :func:`networkx.greedy_color`; of the
       strategies ``'DSATUR'`` [3]_, ``'largest_first'`` and
       ``'smallest_last'`` the one using the fewest colours is kept (zone
       graphs of infrastructure networks are close to planar, and a planar
       graph needs at most four colours by the four colour theorem, K. Appel
       and W. Haken 1977, though a greedy colouring may use a few more);
    2. a balancing pass over the zones, most neighbours first: each zone
       moves to the palette colour used least so far among those none of its
       neighbours has (its own colour always qualifies, so the colouring stays
       proper). The map then uses the whole palette instead of repeating three
       colours, and zones far apart share colours evenly.

    Should the greedy colouring need more colours than the palette has (a
    dense zone graph), colours repeat cyclically and
    :attr:`ZoneColouring.clashes` counts the touching zones that share one.

    Parameters
    ----------
    network : Network
        The zoned network; its links make the zone adjacency graph.
    labels : ndarray of int, shape (n_nodes,)
        Zone of each node, numbered from 0.

    Returns
    -------
    ZoneColouring

    References
    ----------
    .. [3] D. Brélaz, "New methods to color the vertices of a graph",
       Communications of the ACM 22(4): 251-256, 1979. doi:10.1145/359094.359101

    Examples
    --------
    >>> from specgraph import gallery
    >>> net = gallery.path(4)
    >>> zone_colours(net, np.array([0, 0, 1, 1])).colours == PALETTE[:2]
    True
    """
    labels = check_labels(labels, n_nodes=network.n_nodes)
    k = int(labels.max()) + 1 if labels.size else 0
    p = len(PALETTE)
    if k <= p:
        slots = np.arange(k, dtype=np.int64)
        return ZoneColouring(tuple(PALETTE[:k]), slots, "one colour per zone", 0)
    pairs = _zone_pairs(network, labels)
    graph = nx.Graph()
    graph.add_nodes_from(range(k))
    graph.add_edges_from(pairs.tolist())
    best: tuple[int, str, dict[int, int]] | None = None
    for strategy in ("DSATUR", "largest_first", "smallest_last"):
        found = nx.greedy_color(graph, strategy=strategy)
        used = max(found.values()) + 1 if found else 0
        if best is None or used < best[0]:
            best = (used, strategy, found)
    assert best is not None
    used, strategy, found = best
    method = f"greedy colouring of the zone adjacency graph ({strategy})"
    if used <= p:
        found = _balance(graph, found, p)
        method += ", balanced over the palette"
    slots = np.array([found[z] % p for z in range(k)], dtype=np.int64)
    clashes = int(np.count_nonzero(slots[pairs[:, 0]] == slots[pairs[:, 1]]))
    return ZoneColouring(tuple(PALETTE[s] for s in slots.tolist()), slots, method, clashes)


def _fragments_zone(zoning: Zoning) -> int | None:
    """The zone number of the fragments group (role ``'fragments'``), or None."""
    table = zoning.zones
    if "role" not in table.columns:
        return None
    found = table.loc[table["role"] == "fragments", "zone"]
    return int(found.iloc[0]) if len(found) else None


def _grey_fragments(colouring: ZoneColouring, zoning: Zoning) -> ZoneColouring:
    """``colouring`` with the fragments group in :data:`FRAGMENTS_COLOUR` (it touches no zone:
    no link leaves it, so the colouring stays proper)."""
    group = _fragments_zone(zoning)
    if group is None or group >= len(colouring.colours):
        return colouring
    colours = list(colouring.colours)
    colours[group] = FRAGMENTS_COLOUR
    return replace(colouring, colours=tuple(colours))


def _balance(graph: nx.Graph, colour: dict[int, int], p: int) -> dict[int, int]:
    """Move each vertex to the least used of the ``p`` colours its neighbours lack.

    ``colour`` is a proper colouring with colours below ``p``; so is the result.
    """
    colour = dict(colour)
    counts = np.bincount(list(colour.values()), minlength=p)
    for vertex in sorted(graph, key=lambda v: (-graph.degree(v), v)):
        taken = {colour[n] for n in graph[vertex]}
        own = colour[vertex]
        counts[own] -= 1
        free = [c for c in range(p) if c not in taken]  # holds ``own``: the colouring is proper
        chosen = min(free, key=lambda c: (counts[c], c))
        counts[chosen] += 1
        colour[vertex] = chosen
    return colour


# ------------------------------------------------------------------ output
def _new_figure(size: tuple[float, float]) -> Figure:
    figure = Figure(figsize=size, dpi=FIGURE_DPI, layout="constrained")
    FigureCanvasAgg(figure)
    return figure


def figure_bytes(figure: Figure, *, format: Literal["png", "svg"] = "png") -> bytes:
    """The figure as PNG or SVG bytes, the same bytes for the same figure.

    Dates and software versions are left out of the file's metadata, and SVG
    element ids are derived from a fixed salt, so output is reproducible.

    Examples
    --------
    >>> from specgraph import find_zones, gallery
    >>> figure_bytes(zone_bars_figure(find_zones(gallery.barbell(4), 2, rng=0)))[:4]
    b'\\x89PNG'
    """
    check_choice(format, "format", ("png", "svg"))
    buffer = io.BytesIO()
    metadata: dict[str, str | None] = (
        {"Date": None, "Creator": None} if format == "svg" else {"Software": None}
    )
    with matplotlib.rc_context({"svg.hashsalt": "specgraph", "svg.fonttype": "path"}):
        figure.savefig(buffer, format=format, dpi=FIGURE_DPI, metadata=metadata)
    return buffer.getvalue()


def figure_files(
    figures: Mapping[str, Figure],
    *,
    formats: Sequence[Literal["png", "svg"]] = FIGURE_FORMATS,
) -> dict[str, bytes]:
    """Every figure in every format, by file name: ``{"zone_map.png": b"...", ...}``.

    Parameters
    ----------
    figures : mapping of str to Figure
        Figures by file stem, as :func:`specgraph.report.report_figures`
        gives them.
    formats : sequence of {'png', 'svg'}, default=('png', 'svg')

    Returns
    -------
    dict of str to bytes
        Ready for :func:`specgraph.export.write_figures`, which writes them
        into the output folder's ``figures/``.

    Examples
    --------
    >>> from specgraph import find_zones, gallery
    >>> bars = zone_bars_figure(find_zones(gallery.barbell(4), 2, rng=0))
    >>> sorted(figure_files({"zone_bars": bars}))
    ['zone_bars.png', 'zone_bars.svg']
    """
    for ext in formats:
        check_choice(ext, "formats", ("png", "svg"))
    return {
        f"{stem}.{ext}": figure_bytes(figure, format=ext)
        for stem, figure in figures.items()
        for ext in formats
    }


# ------------------------------------------------------------------ spectrum
def _spectrum_series(zoning: Zoning) -> list[tuple[str, np.ndarray, np.ndarray, int]]:
    """(label, k, lambda_k, chosen k) per series: the zone-count solve, else each component."""
    count = zoning.decisions.get("zone_count", {})
    evidence = count.get("evidence")
    if evidence:
        table = pd.DataFrame(evidence)
        ks = np.append(table["zones"].to_numpy(), table["zones"].iloc[-1] + 1)
        values = np.append(table["eigenvalue"].to_numpy(), table["next_eigenvalue"].iloc[-1])
        return [("zone-count solve", ks, values, int(count["choice"]))]
    solves = sorted(zoning.solves, key=lambda s: -s.nodes.size)[:SPECTRUM_SERIES_MAX]
    return [
        (
            f"component {s.component} ({s.nodes.size:,} nodes)",
            np.arange(1, s.eigen.values.size + 1),
            np.asarray(s.eigen.values),
            s.zones,
        )
        for s in solves
    ]


def spectrum_figure(zoning: Zoning) -> Figure:
    """The smallest eigenvalues on a log scale, the gap after the chosen count, the candidates.

    Eigenvalue :math:`\\lambda_k` (1-based, ascending) against ``k``, the
    eigenvalue axis logarithmic: on large networks the first eigenvalues, the
    ones that decide the zone count, are orders of magnitude below the rest,
    and a linear axis squashes them at zero. Eigenvalues that are zero up to
    rounding (below :data:`ZERO_EIGENVALUE`: :math:`\\lambda_1` of every
    component) cannot sit on a log axis and are marked with open triangles
    on its lower edge. The gap after the chosen count is shaded and labelled
    with the ratio :math:`\\lambda_{k+1}/\\lambda_k`. When
    the zone count was chosen from the spectrum (``zones='auto'`` or a range)
    the figure shows that solve, the gap after the chosen count shaded, and a
    second panel with the relative gap
    :math:`(\\lambda_{k+1} - \\lambda_k)/\\lambda_{k+1}` of every candidate
    against the confidence levels of the zone count (``HIGH_GAP`` and
    ``MEDIUM_GAP``). Otherwise it shows the solve of each split component
    (up to :data:`SPECTRUM_SERIES_MAX`).

    Parameters
    ----------
    zoning : Zoning

    Returns
    -------
    matplotlib.figure.Figure
    """
    series = _spectrum_series(zoning)
    evidence = zoning.decisions.get("zone_count", {}).get("evidence")
    figure = _new_figure((8.0, 6.0 if evidence else 4.0))
    if not series:
        axes = figure.add_subplot()
        axes.set_axis_off()
        axes.text(0.5, 0.5, "No eigen-solve: every component is one zone.", ha="center")
        return figure
    top, bottom = (
        figure.subplots(2, 1, sharex=True, height_ratios=(3, 2))
        if evidence
        else (figure.add_subplot(), None)
    )
    top.set_yscale("log")
    positive = np.concatenate([v[v >= ZERO_EIGENVALUE] for _, _, v, _ in series])
    floor = float(positive.min()) / 3.0 if positive.size else ZERO_EIGENVALUE
    zeros_shown = False
    for index, (label, ks, values, chosen) in enumerate(series):
        colour = PALETTE[index % len(PALETTE)]
        values = np.asarray(values, dtype=float)
        zero = values < ZERO_EIGENVALUE
        top.plot(ks, np.where(zero, np.nan, values), "o-", ms=3.5, lw=1, color=colour, label=label)
        if zero.any():
            top.plot(
                ks[zero], np.full(int(zero.sum()), floor), "v", ms=5, mfc="none", color=colour,
                label=None if zeros_shown else "λ = 0 (below a log axis)",
            )  # fmt: skip
            zeros_shown = True
        at = np.flatnonzero(ks == chosen)
        if at.size and at[0] + 1 < ks.size:
            low, high = values[at[0]], values[at[0] + 1]
            top.axvspan(chosen, chosen + 1, color=colour, alpha=0.15, lw=0, gid="chosen-gap")
            ratio = f"λ_{chosen + 1}/λ_{chosen} = {high / low:.3g}" if low > 0 else "after λ = 0"
            top.annotate(
                f"chosen gap: {chosen} zones\n{ratio}",
                (chosen + 0.5, math.sqrt(max(low, floor) * max(high, floor))),
                xytext=(12, 0),
                textcoords="offset points",
                va="center",
                fontsize=8,
            )
    top.set_ylabel("eigenvalue λ_k (log scale)")
    top.set_title(f"Smallest eigenvalues; {zoning.n_zones} zones chosen", fontsize=10)
    top.grid(alpha=0.3, which="both")
    if len(series) > 1 or zeros_shown:
        top.legend(fontsize=8, loc="lower right")
    if bottom is None:
        top.set_xlabel("k")
        return figure
    _candidate_panel(bottom, pd.DataFrame(evidence), series[0][3])
    return figure


def _candidate_panel(axes: Axes, table: pd.DataFrame, chosen: int) -> None:
    ks = table["zones"].to_numpy()
    gaps = table["relative_gap"].to_numpy(dtype=float)
    colours = np.where(ks == chosen, PALETTE[0], MISSING_COLOUR)
    axes.bar(ks, gaps, color=colours, edgecolor="#555555", lw=0.4)
    checked = np.isfinite(table["ncut"].to_numpy(dtype=float))
    axes.plot(ks[checked], gaps[checked], "v", color=BOUNDARY_COLOUR, ms=4)
    for level, name in ((HIGH_GAP, "high"), (MEDIUM_GAP, "medium")):
        axes.axhline(level, color="#555555", ls="--", lw=0.8)
        axes.text(
            0.995,
            level,
            f"{name} confidence",
            transform=axes.get_yaxis_transform(),
            ha="right",
            va="bottom",
            fontsize=7,
        )
    axes.set_ylabel("relative gap")
    axes.set_xlabel("k (candidate zone count)")
    axes.set_ylim(0, 1)
    axes.legend(
        handles=[
            Patch(color=PALETTE[0], label="chosen"),
            Line2D(
                [], [], marker="v", ls="", color=BOUNDARY_COLOUR, label="normalized cut checked"
            ),
        ],
        fontsize=7,
        loc="upper center",
    )


# ------------------------------------------------------------------ maps
def map_detail(
    n_nodes: int,
    *,
    raster_above: int = MAP_RASTER_NODES,
    aggregate_above: int = MAP_AGGREGATE_NODES,
) -> MapDetail:
    """How a map of ``n_nodes`` nodes is drawn: ``'vector'``, ``'raster'`` or ``'aggregate'``.

    Examples
    --------
    >>> map_detail(3_000), map_detail(100_000), map_detail(1_000_000)
    ('vector', 'raster', 'aggregate')
    """
    check_int(n_nodes, "n_nodes", minimum=0)
    check_int(raster_above, "raster_above", minimum=0)
    check_int(aggregate_above, "aggregate_above", minimum=0)
    if n_nodes > aggregate_above:
        return "aggregate"
    return "raster" if n_nodes > raster_above else "vector"


@dataclass(frozen=True)
class _Grid:
    cell: np.ndarray  # cell of each node, row-major in (row, column)
    shape: tuple[int, int]  # (rows, columns)
    extent: tuple[float, float, float, float]  # left, right, bottom, top


def _grid(xy: np.ndarray, cells: int) -> _Grid:
    low, high = xy.min(axis=0), xy.max(axis=0)
    span = high - low
    longer = float(span.max()) or 1.0
    span = np.where(span > 0, span, longer)
    ncol = max(1, math.ceil(cells * span[0] / longer))
    nrow = max(1, math.ceil(cells * span[1] / longer))
    col = np.minimum(((xy[:, 0] - low[0]) / span[0] * ncol).astype(np.int64), ncol - 1)
    row = np.minimum(((xy[:, 1] - low[1]) / span[1] * nrow).astype(np.int64), nrow - 1)
    extent = (low[0], low[0] + span[0], low[1], low[1] + span[1])
    return _Grid(row * ncol + col, (nrow, ncol), extent)


def cell_majority(cell: np.ndarray, values: np.ndarray, n_cells: int) -> np.ndarray:
    """The most frequent value of each cell, ``-1`` for an empty cell (ties: smaller value).

    Parameters
    ----------
    cell : ndarray of int, shape (n,)
        Cell of each item, in ``0..n_cells-1``.
    values : ndarray of int, shape (n,)
        Non-negative value of each item (a zone number).
    n_cells : int

    Returns
    -------
    ndarray of int, shape (n_cells,)

    Examples
    --------
    >>> cell_majority(np.array([0, 0, 0, 2]), np.array([4, 1, 4, 3]), 3).tolist()
    [4, -1, 3]
    """
    cell = np.asarray(cell, dtype=np.int64)
    values = np.asarray(values, dtype=np.int64)
    out = np.full(n_cells, -1, dtype=np.int64)
    if cell.size == 0:
        return out
    width = int(values.max()) + 1
    keys, counts = np.unique(cell * width + values, return_counts=True)
    key_cell, key_value = keys // width, keys % width
    # Sort by cell, then most frequent first; the sort is stable and keys come
    # ascending, so equal counts keep the smaller value first.
    order = np.lexsort((-counts, key_cell))
    first = np.ones(order.size, dtype=bool)
    first[1:] = key_cell[order][1:] != key_cell[order][:-1]
    out[key_cell[order][first]] = key_value[order][first]
    return out


def cell_minimum(cell: np.ndarray, values: np.ndarray, n_cells: int) -> np.ndarray:
    """The smallest value of each cell, NaN for an empty cell.

    Examples
    --------
    >>> cell_minimum(np.array([0, 0, 2]), np.array([0.5, 0.2, 1.0]), 3).tolist()
    [0.2, nan, 1.0]
    """
    out = np.full(n_cells, np.inf)
    np.minimum.at(out, np.asarray(cell, dtype=np.int64), np.asarray(values, dtype=np.float64))
    out[np.isinf(out)] = np.nan
    return out


def _segments(xy: np.ndarray, a: np.ndarray, b: np.ndarray) -> Sequence[np.ndarray]:
    """Line segments of links ``a[i] - b[i]``: an array of shape (m, 2, 2), which
    LineCollection takes as it is (a list of m arrays would cost a million objects)."""
    return cast("Sequence[np.ndarray]", np.stack([xy[a], xy[b]], axis=1))


def _links(network: Network) -> tuple[np.ndarray, np.ndarray]:
    upper = sp.triu(network.adjacency, k=1, format="coo")
    return upper.row.astype(np.int64), upper.col.astype(np.int64)


def _draw_boundary(axes: Axes, xy: np.ndarray, a: np.ndarray, b: np.ndarray, raster: bool) -> None:
    segments = _segments(xy, a, b)
    for width, colour, z in ((4.0, "white", 3), (2.0, BOUNDARY_COLOUR, 4)):
        axes.add_collection(
            LineCollection(segments, colors=colour, linewidths=width, zorder=z, rasterized=raster)
        )


def _draw_sources(axes: Axes, network: Network, sources: Sequence[str]) -> int:
    if not sources:
        return 0
    index = network.index_of
    rows = [index[s] for s in sources if s in index]
    unknown = [s for s in sources if s not in index]
    if unknown:
        raise parameter_error(
            "sources",
            "node ids of the network",
            unknown,
            shown=f"{len(unknown)} unknown, for example {unknown[0]!r}",
        )
    xy = network.coordinates
    assert xy is not None
    axes.scatter(
        xy[rows, 0],
        xy[rows, 1],
        marker="*",
        s=220,
        c=BOUNDARY_COLOUR,
        edgecolors="white",
        linewidths=1.2,
        zorder=6,
    )
    return len(rows)


def _coordinates(network: Network) -> np.ndarray:
    if network.coordinates is None:
        raise parameter_error(
            "zoning",
            "a zoning of a network with node coordinates for a map (read a node table with "
            "x and y columns)",
            network,
            shown="a zoning of a network without them",
        )
    return network.coordinates


def _detail(network: Network, raster_above: int, aggregate_above: int) -> MapDetail:
    return map_detail(network.n_nodes, raster_above=raster_above, aggregate_above=aggregate_above)


# ------------------------------------------------------------------ units
Units = Literal["auto", "degrees", "metres", "unknown"]


@dataclass(frozen=True)
class CoordinateUnits:
    """The units of a map's coordinates and how they were decided.

    Attributes
    ----------
    name : {'degrees', 'metres', 'unknown'}
        Longitude/latitude degrees, projected metres, or units not known.
    reason : str
        Why (the rule of the module notes that applied).
    """

    name: Literal["degrees", "metres", "unknown"]
    reason: str


def coordinate_units(network: Network, *, units: Units = "auto") -> CoordinateUnits:
    """The units of the network's node coordinates, by the rule of the module notes.

    Parameters
    ----------
    network : Network
    units : {'auto', 'degrees', 'metres', 'unknown'}, default='auto'
        ``'auto'`` applies the rule (the network's
        ``notes["coordinate_units"]`` first); any other value states the units.

    Returns
    -------
    CoordinateUnits

    Examples
    --------
    >>> from specgraph import gallery
    >>> coordinate_units(gallery.road_like(10, rng=0)).name
    'unknown'
    >>> coordinate_units(gallery.road_like(10, rng=0), units="metres").name
    'metres'
    >>> net = gallery.road_like(10, rng=0)
    >>> stated = Network(net.adjacency, net.node_ids, coordinates=net.coordinates,
    ...                  notes={"coordinate_units": "metres"})
    >>> coordinate_units(stated).name
    'metres'
    """
    check_choice(units, "units", ("auto", "degrees", "metres", "unknown"))
    if units != "auto":
        return CoordinateUnits(units, "stated (units=)")
    stated = network.notes.get(UNITS_NOTE)
    if stated in ("degrees", "metres"):
        return CoordinateUnits(stated, f"stated by the network (notes[{UNITS_NOTE!r}])")
    geojson = network.notes.get("geojson")
    xy = network.coordinates
    if isinstance(geojson, Mapping) and xy is not None and xy.size:
        inside = bool(
            np.all(np.abs(xy[:, 0]) <= _LONGITUDE_BOUND)
            and np.all(np.abs(xy[:, 1]) <= _LATITUDE_BOUND)
        )
        if inside:
            return CoordinateUnits(
                "degrees",
                "read from GeoJSON (RFC 7946 positions are longitude/latitude) and every "
                "position lies within longitude/latitude bounds",
            )
    return CoordinateUnits("unknown", "the coordinates' units are not stated")


def _nice_length(target: float) -> float:
    """The largest of 1, 2 or 5 times a power of ten not above ``target`` (> 0)."""
    power = 10.0 ** math.floor(math.log10(target))
    return max(step * power for step in (1.0, 2.0, 5.0) if step * power <= target * (1 + 1e-12))


def _km_per_degree(latitude: float) -> float:
    """Kilometres per degree of longitude at ``latitude`` on the mean sphere."""
    return EARTH_RADIUS_KM * math.pi / 180.0 * math.cos(math.radians(latitude))


def _scale_bar(axes: Axes, xy: np.ndarray, units: CoordinateUnits) -> None:
    """A scale bar of about a fifth of the map's width, in the map's units, lower left."""
    low, high = xy.min(axis=0), xy.max(axis=0)
    span = float(high[0] - low[0]) or float(high[1] - low[1]) or 1.0
    if units.name == "degrees":
        per_degree = _km_per_degree(float(low[1] + high[1]) / 2.0)
        if per_degree <= 0:
            return
        km = _nice_length(span * per_degree / 5.0)
        length = km / per_degree
        label = f"{km:g} km" if km >= 1 else f"{km * 1000:g} m"
    elif units.name == "metres":
        length = _nice_length(span / 5.0)
        label = f"{length / 1000:g} km" if length >= 1000 else f"{length:g} m"
    else:
        length = _nice_length(span / 5.0)
        label = f"{length:g} coordinate units"
    bar = AnchoredSizeBar(
        axes.transData,
        length,
        label,
        "lower left",
        pad=0.4,
        sep=3,
        frameon=True,
        size_vertical=0,
        fontproperties={"size": 7},
    )
    bar.patch.set_alpha(0.8)
    bar.set_zorder(8)  # above the zone numbers
    bar.set_gid("scale-bar")
    axes.add_artist(bar)


def _set_units(axes: Axes, xy: np.ndarray, units: CoordinateUnits) -> None:
    """Axis labels in the map's units; degrees stretched by 1/cos(middle latitude)."""
    if units.name == "degrees":
        middle = float(xy[:, 1].min() + xy[:, 1].max()) / 2.0
        axes.set_aspect(1.0 / max(math.cos(math.radians(middle)), 1e-6))
        axes.set_xlabel("longitude (degrees)")
        axes.set_ylabel("latitude (degrees)")
        return
    axes.set_aspect("equal")
    name = "m" if units.name == "metres" else "coordinate units"
    axes.set_xlabel(f"x ({name})")
    axes.set_ylabel(f"y ({name})")


# ------------------------------------------------------------------ zone numbers
def zone_label_points(xy: np.ndarray, labels: np.ndarray, k: int) -> np.ndarray:
    """The label node of each zone: its node nearest the median of its nodes' coordinates.

    A node of the zone, so the number sits inside the zone even when the
    zone is bent around another (where its centroid would not).

    Parameters
    ----------
    xy : ndarray, shape (n, 2)
    labels : ndarray of int, shape (n,)
        Zones ``0..k-1``.
    k : int

    Returns
    -------
    ndarray of int, shape (k,)
        Row of the label node of each zone, ``-1`` for a zone without nodes.

    Examples
    --------
    >>> xy = np.array([[0.0, 0.0], [1.0, 0.0], [2.0, 0.0], [9.0, 9.0]])
    >>> zone_label_points(xy, np.array([0, 0, 0, 1]), 2).tolist()
    [1, 3]
    """
    order = np.argsort(labels, kind="stable")
    starts = np.searchsorted(labels[order], np.arange(k + 1))
    rows = np.full(k, -1, dtype=np.int64)
    for zone in range(k):
        members = order[starts[zone] : starts[zone + 1]]
        if members.size == 0:
            continue
        points = xy[members]
        centre = np.median(points, axis=0)
        rows[zone] = members[int(np.argmin(((points - centre) ** 2).sum(axis=1)))]
    return rows


def _label_font(k: int) -> float:
    return float(
        np.clip(LABEL_FONT_MAX * math.sqrt(LABEL_FULL_SIZE_ZONES / max(k, 1)), LABEL_FONT_MIN,
                LABEL_FONT_MAX)
    )  # fmt: skip


def _label_zones(axes: Axes, xy: np.ndarray, labels: np.ndarray, k: int) -> None:
    """Every zone's number at its label node, vector text on a pale box.

    Each number is its own SVG group, ``id="zone-label-<zone>"``. A box rather
    than a stroked halo: a halo makes every glyph an outline of its own twice
    over (5 MB of SVG for 1,000 numbers, measured), while plain text refers to
    each glyph once.
    """
    size = _label_font(k)
    box = {"boxstyle": "round,pad=0.15", "fc": "white", "ec": "none", "alpha": LABEL_BOX_ALPHA}
    for zone, row in enumerate(zone_label_points(xy, labels, k).tolist()):
        if row < 0:
            continue
        axes.text(
            xy[row, 0], xy[row, 1], str(zone), ha="center", va="center", fontsize=size,
            weight="bold", zorder=7, bbox=box, gid=f"zone-label-{zone}",
        )  # fmt: skip


# ------------------------------------------------------------------ the map
def _runs(mask: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Runs of True down each column of ``mask``: (column, first row, row after the last)."""
    padded = np.zeros((mask.shape[0] + 2, mask.shape[1]), dtype=np.int8)
    padded[1:-1] = mask
    step = np.diff(padded, axis=0)
    start_row, start_col = np.nonzero(step == 1)
    stop_row, stop_col = np.nonzero(step == -1)
    first = np.lexsort((start_row, start_col))
    after = np.lexsort((stop_row, stop_col))
    return start_col[first], start_row[first], stop_row[after]


def _cell_borders(winner: np.ndarray, grid: _Grid) -> np.ndarray:
    """Segments, shape (m, 2, 2), between side-by-side cells of different zones.

    Borders running straight across several cells are merged into one
    segment, which keeps the SVG path short.
    """
    nrow, ncol = grid.shape
    w = winner.reshape(nrow, ncol)
    left, right, bottom, top = grid.extent
    dx, dy = (right - left) / ncol, (top - bottom) / nrow
    # Vertical borders between columns c and c + 1, merged down the rows.
    side = (w[:, :-1] != w[:, 1:]) & (w[:, :-1] >= 0) & (w[:, 1:] >= 0)
    c, r0, r1 = _runs(side)
    x = left + (c + 1) * dx
    vertical = np.stack(
        [np.column_stack([x, bottom + r0 * dy]), np.column_stack([x, bottom + r1 * dy])], axis=1
    )
    # Horizontal borders between rows r and r + 1, merged along the columns.
    above = (w[:-1, :] != w[1:, :]) & (w[:-1, :] >= 0) & (w[1:, :] >= 0)
    r, c0, c1 = _runs(above.T)
    y = bottom + (r + 1) * dy
    horizontal = np.stack(
        [np.column_stack([left + c0 * dx, y]), np.column_stack([left + c1 * dx, y])], axis=1
    )
    return np.concatenate([vertical, horizontal]).reshape(-1, 2, 2)


def _draw_borders(axes: Axes, segments: np.ndarray) -> None:
    """Cell borders as one vector path (one SVG element however many segments)."""
    if segments.size == 0:
        return
    codes = np.tile([MplPath.MOVETO, MplPath.LINETO], segments.shape[0])
    path = MplPath(segments.reshape(-1, 2), codes)
    axes.add_patch(
        PathPatch(path, fill=False, edgecolor=BOUNDARY_COLOUR, lw=0.7, zorder=4, gid="zone-borders")
    )


def zone_map_figure(
    zoning: Zoning,
    *,
    sources: Sequence[str] = (),
    colouring: ZoneColouring | None = None,
    raster_above: int = MAP_RASTER_NODES,
    aggregate_above: int = MAP_AGGREGATE_NODES,
    cells: int = MAP_CELLS,
) -> Figure:
    """A map of the zones, each numbered, boundary highlighted, sources marked, a scale bar.

    Parameters
    ----------
    zoning : Zoning
        Its network must have coordinates.
    sources : sequence of str, default=()
        Node ids of supply points, drawn as black stars.
    colouring : ZoneColouring, optional
        Default :func:`zone_colours` of the zoning: touching zones differ.

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    ParameterError
        When the network has no coordinates or a source is not a node.

    Other Parameters
    ----------------
    raster_above, aggregate_above : int
        Node counts above which the map is rasterized or aggregated
        (:func:`map_detail`; defaults :data:`MAP_RASTER_NODES`,
        :data:`MAP_AGGREGATE_NODES`).
    cells : int, default=MAP_CELLS
        Grid cells along the longer side of an aggregated map.

    Notes
    -----
    Boundary links are drawn black over a white halo, on top of every zone
    colour (an aggregated map draws the borders between its cells instead).
    Every zone is numbered at its label node (:func:`zone_label_points`), at
    every size: the numbers, not the colours, identify zones, so the legend
    lists zones only while each has a colour of its own. In an SVG, zone
    ``z``'s number is the group ``id="zone-label-z"``.
    """
    network = zoning.network
    sources = check_param(sources, "sources", [NodeIds()])
    xy = _coordinates(network)
    cells = check_int(cells, "cells", minimum=1)
    found_units = coordinate_units(network)
    detail = _detail(network, raster_above, aggregate_above)
    colouring = _grey_fragments(colouring or zone_colours(network, zoning.labels), zoning)
    labels = zoning.labels
    rgb = np.array([to_rgb(c) for c in colouring.colours]).reshape(-1, 3)
    a, b = _links(network)
    cross = labels[a] != labels[b]
    figure = _new_figure(_MAP_SIZE)
    axes = figure.add_subplot()
    if detail == "aggregate":
        grid = _grid(xy, cells)
        winner = cell_majority(grid.cell, labels, grid.shape[0] * grid.shape[1])
        image = np.ones((winner.size, 4))
        image[winner >= 0, :3] = rgb[winner[winner >= 0]]
        image[winner < 0, 3] = 0.0
        axes.imshow(
            image.reshape(*grid.shape, 4),
            origin="lower",
            extent=grid.extent,
            interpolation="nearest",
            zorder=1,
        )
        _draw_borders(axes, _cell_borders(winner, grid))
    else:
        raster = detail == "raster"
        inside = ~cross
        axes.add_collection(
            LineCollection(
                _segments(xy, a[inside], b[inside]),
                colors=rgb[labels[a[inside]]],
                linewidths=0.8,
                zorder=1,
                rasterized=raster,
            )
        )
        size = float(np.clip(20_000 / max(network.n_nodes, 1), 0.3, 10.0))
        axes.scatter(xy[:, 0], xy[:, 1], s=size, c=rgb[labels], lw=0, zorder=2, rasterized=raster)
        _draw_boundary(
            axes, xy, a[cross], b[cross], raster=int(cross.sum()) > MAP_BOUNDARY_VECTOR_LINKS
        )
    marked = _draw_sources(axes, network, sources)
    _label_zones(axes, xy, labels, zoning.n_zones)
    axes.autoscale_view()
    _set_units(axes, xy, found_units)
    _scale_bar(axes, xy, found_units)
    how = {
        "vector": "every link and node drawn",
        "raster": "links and nodes rasterized",
        "aggregate": f"majority zone per cell, {cells} cells across",
    }[detail]
    group = _fragments_zone(zoning)
    counted = (
        f"{zoning.n_zones} zones"
        if group is None
        else f"{zoning.n_zones - 1} zones and the fragments group ({group}, grey)"
    )
    axes.set_title(f"{counted}, {network.n_nodes:,} nodes ({how})", fontsize=10, loc="left")
    _map_legend(axes, colouring, marked, borders=detail == "aggregate")
    return figure


_NUMBERED_LEGEND = "numbers on the map\nname the zones;\ntouching zones\ndiffer in colour"


def _map_legend(axes: Axes, colouring: ZoneColouring, marked: int, *, borders: bool) -> None:
    line = "zone border (grid cells)" if borders else "boundary link"
    handles: list[Patch | Line2D] = [Line2D([], [], color=BOUNDARY_COLOUR, lw=1.6, label=line)]
    if marked:
        handles.append(
            Line2D(
                [],
                [],
                marker="*",
                ls="",
                ms=12,
                color=BOUNDARY_COLOUR,
                mec="white",
                label="supply point",
            )
        )
    own = colouring.method == "one colour per zone"
    if own:
        handles += [Patch(color=c, label=f"zone {z}") for z, c in enumerate(colouring.colours)]
    axes.legend(
        handles=handles,
        fontsize=7,
        loc="upper left",
        bbox_to_anchor=(1.01, 1.0),
        frameon=False,
        title=None
        if own
        else "numbers on the map\nname the zones;\ntouching zones\ndiffer in colour",
        title_fontsize=7,
    )


# ------------------------------------------------------------------ per-zone bars
def zone_bars_figure(zoning: Zoning, *, colouring: ZoneColouring | None = None) -> Figure:
    """Per-zone size and conductance, side by side (histograms beyond :data:`BAR_ZONES_MAX`).

    Size is the summed node size when the network has sizes, else the node
    count; conductance is the zone's boundary weight over the smaller of its
    volume and the rest's (lower is a better separated zone).

    Parameters
    ----------
    zoning : Zoning
    colouring : ZoneColouring, optional
        Default :func:`zone_colours` of the zoning (the map's colours).

    Returns
    -------
    matplotlib.figure.Figure
    """
    table = zoning.zones
    k = len(table)
    size_label = "size (node sizes)" if zoning.network.sizes is not None else "size (nodes)"
    if k > BAR_ZONES_MAX:
        figure = _new_figure((8.0, 3.5))
        left, right = figure.subplots(1, 2)
        left.hist(table["size"], bins="auto", color=PALETTE[0])
        right.hist(table["conductance"], bins="auto", color=PALETTE[6])
        left.set_xlabel(size_label)
        right.set_xlabel("conductance")
        left.set_ylabel("zones")
        figure.suptitle(f"{k} zones (too many for one bar each)", fontsize=10)
        return figure
    colouring = _grey_fragments(colouring or zone_colours(zoning.network, zoning.labels), zoning)
    figure = _new_figure((8.0, max(2.5, 0.22 * k + 1.2)))
    left, right = figure.subplots(1, 2, sharey=True)
    zones = table["zone"].to_numpy()
    colours = [colouring.colours[z] for z in zones]
    left.barh(zones, table["size"], color=colours, edgecolor="#555555", lw=0.4)
    right.barh(zones, table["conductance"], color=colours, edgecolor="#555555", lw=0.4)
    left.set_xlabel(size_label)
    right.set_xlabel("conductance (lower is better separated)")
    left.set_ylabel("zone")
    left.set_yticks(zones)
    left.invert_yaxis()
    for axes in (left, right):
        axes.grid(axis="x", alpha=0.3)
        axes.tick_params(axis="y", labelsize=7)
    return figure


# ------------------------------------------------------------------ stability
def stability_figure(
    zoning: Zoning,
    stability: Stability,
    *,
    raster_above: int = MAP_RASTER_NODES,
    aggregate_above: int = MAP_AGGREGATE_NODES,
    cells: int = MAP_CELLS,
) -> Figure:
    """Per-node confidence on the map, low confidence standing out; bars without coordinates.

    The confidence of a node is the share of the stability runs in which it
    stayed in its zone (:func:`specgraph.stability`). On the map every node
    is a dot in :data:`CONFIDENCE_COLOURMAP`; nodes of low confidence (below
    :data:`specgraph.studies.CORE_CONFIDENCE`, outside their zone's core)
    are drawn again on top, larger, in :data:`LOW_CONFIDENCE_COLOUR` with a
    black rim, and counted in the legend. Boundary links of ``zoning`` are
    drawn over the colours, zone numbers and a scale bar as on the zone map.
    An aggregated map shows the least confident node of each cell, and marks
    the cells holding a low-confidence node. Without coordinates the figure
    shows each zone's mean confidence and core share.

    Parameters
    ----------
    zoning : Zoning
    stability : Stability
        Computed on the same network (one confidence per node).

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    ParameterError
        When ``stability`` has not one row per node of the zoning's network.

    Other Parameters
    ----------------
    raster_above, aggregate_above, cells : int
        As for :func:`zone_map_figure`.
    """
    from ..studies import CORE_CONFIDENCE

    network = zoning.network
    nodes = stability.nodes
    if len(nodes) != network.n_nodes:
        expected = f"one row per node ({network.n_nodes})"
        raise parameter_error(
            "stability", expected, stability, shown=f"{len(nodes)} rows", verb="have"
        )
    if network.coordinates is None:
        return _stability_bars(stability.zones)
    xy = network.coordinates
    found_units = coordinate_units(network)
    confidence = nodes["confidence"].to_numpy(dtype=float)
    detail = _detail(network, raster_above, aggregate_above)
    low_xy: np.ndarray
    figure = _new_figure(_MAP_SIZE)
    axes = figure.add_subplot()
    norm = matplotlib.colors.Normalize(0.0, 1.0)
    mappable: ScalarMappable
    if detail == "aggregate":
        grid = _grid(xy, check_int(cells, "cells", minimum=1))
        low = cell_minimum(grid.cell, confidence, grid.shape[0] * grid.shape[1])
        mappable = axes.imshow(
            np.ma.masked_invalid(low.reshape(grid.shape)),
            origin="lower",
            extent=grid.extent,
            interpolation="nearest",
            cmap=CONFIDENCE_COLOURMAP,
            norm=norm,
            zorder=1,
        )
        left, right, bottom, top = grid.extent
        nrow, ncol = grid.shape
        weak = np.flatnonzero(low < CORE_CONFIDENCE)  # NaN (empty cells) compares False
        low_xy = np.column_stack(
            [
                left + (weak % ncol + 0.5) * (right - left) / ncol,
                bottom + (weak // ncol + 0.5) * (top - bottom) / nrow,
            ]
        )
        weak_label = f"cells holding a node of confidence < {CORE_CONFIDENCE:g}"
    else:
        size = float(np.clip(20_000 / max(network.n_nodes, 1), 0.3, 10.0))
        order = np.argsort(-confidence, kind="stable")  # least confident drawn last, on top
        mappable = axes.scatter(
            xy[order, 0],
            xy[order, 1],
            c=confidence[order],
            s=size * 1.5,
            cmap=CONFIDENCE_COLOURMAP,
            norm=norm,
            lw=0,
            zorder=2,
            rasterized=detail == "raster",
        )
        low_xy = xy[confidence < CORE_CONFIDENCE]
        weak_label = f"confidence < {CORE_CONFIDENCE:g}"
    marker = float(np.clip(4 * 20_000 / max(network.n_nodes, 1), 9.0, 40.0))
    axes.scatter(
        low_xy[:, 0], low_xy[:, 1], s=marker, c=LOW_CONFIDENCE_COLOUR, edgecolors=BOUNDARY_COLOUR,
        linewidths=0.4, zorder=5, rasterized=low_xy.shape[0] > MAP_RASTER_NODES,
        gid="low-confidence",
    )  # fmt: skip
    a, b = _links(network)
    cross = zoning.labels[a] != zoning.labels[b]
    _draw_boundary(
        axes, xy, a[cross], b[cross], raster=int(cross.sum()) > MAP_BOUNDARY_VECTOR_LINKS
    )
    figure.colorbar(mappable, ax=axes, shrink=0.7, label="confidence (share of runs stayed)")
    _label_zones(axes, xy, zoning.labels, zoning.n_zones)
    axes.autoscale_view()
    _set_units(axes, xy, found_units)
    _scale_bar(axes, xy, found_units)
    axes.legend(
        handles=[
            Line2D([], [], marker="o", ls="", ms=6, color=LOW_CONFIDENCE_COLOUR,
                   mec=BOUNDARY_COLOUR, label=f"{weak_label} ({low_xy.shape[0]:,})"),
            Line2D([], [], color=BOUNDARY_COLOUR, lw=1.6, label="boundary link"),
        ],
        fontsize=7, loc="upper left", bbox_to_anchor=(0.0, -0.08), frameon=False, ncols=2,
    )  # fmt: skip
    axes.set_title(
        f"Node confidence over {len(stability.runs)} runs (mean {float(np.mean(confidence)):.3f})",
        fontsize=10,
        loc="left",
    )
    return figure


def _stability_bars(zones: pd.DataFrame) -> Figure:
    k = len(zones)
    figure = _new_figure((8.0, max(2.5, 0.22 * min(k, BAR_ZONES_MAX) + 1.2)))
    axes = figure.add_subplot()
    shown = zones.head(BAR_ZONES_MAX)
    ids = shown["zone"].to_numpy()
    axes.barh(ids - 0.2, shown["confidence"], height=0.4, color=PALETTE[0], label="confidence")
    axes.barh(ids + 0.2, shown["core_share"], height=0.4, color=PALETTE[5], label="core share")
    axes.set_xlim(0, 1)
    axes.set_ylabel("zone")
    axes.invert_yaxis()
    axes.legend(fontsize=7, loc="lower right")
    axes.set_title(
        "Zone confidence (no coordinates for a map)"
        + (f"; first {BAR_ZONES_MAX} of {k} zones" if k > BAR_ZONES_MAX else ""),
        fontsize=10,
        loc="left",
    )
    return figure
