"""Small canonical networks shared by tests, docs and benchmarks.

Each function returns a :class:`~specgraph.network.Network` with integer-like
string ids ``"0"``, ``"1"``, ... and unit weights unless stated. The spectra of
most of them are known in closed form (Brouwer and Haemers, *Spectra of Graphs*,
Springer 2012, ch. 1), which is why tests use them.
"""

from __future__ import annotations

import logging
import math
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import networkx as nx
import numpy as np
import scipy.sparse as sp

from ._validation import (
    check_choice,
    check_int,
    check_positive_float,
    check_rng,
    parameter_error,
)
from .network import Network

__all__ = [
    "RoadLikeFile",
    "barbell",
    "complete",
    "grid",
    "hypercube",
    "path",
    "ring",
    "road_like",
    "star",
    "two_zone",
    "write_road_like",
]

logger = logging.getLogger(__name__)


def _from_nx(graph: nx.Graph) -> Network:
    graph = nx.convert_node_labels_to_integers(graph, ordering="sorted")
    return Network.from_networkx(graph, weight=None)


def path(n: int) -> Network:
    """Path on ``n`` nodes."""
    return _from_nx(nx.path_graph(check_int(n, "n", minimum=1)))


def ring(n: int) -> Network:
    """Cycle on ``n >= 3`` nodes."""
    return _from_nx(nx.cycle_graph(check_int(n, "n", minimum=3)))


def complete(n: int) -> Network:
    """Complete graph on ``n`` nodes."""
    return _from_nx(nx.complete_graph(check_int(n, "n", minimum=1)))


def star(leaves: int) -> Network:
    """Star with a centre (node ``"0"``) and ``leaves`` leaves."""
    return _from_nx(nx.star_graph(check_int(leaves, "leaves", minimum=1)))


def hypercube(dimension: int) -> Network:
    """Hypercube graph :math:`Q_d` on :math:`2^d` nodes."""
    return _from_nx(nx.hypercube_graph(check_int(dimension, "dimension", minimum=1)))


def grid(rows: int, cols: int, *, periodic: bool = False) -> Network:
    """Grid graph :math:`P_m \\times P_n` (torus :math:`C_m \\times C_n` when periodic).

    Nodes are numbered row by row; coordinates are ``(col, row)``.
    """
    minimum = 3 if periodic else 1  # networkx collapses C_2 to a single link
    rows = check_int(rows, "rows", minimum=minimum)
    cols = check_int(cols, "cols", minimum=minimum)
    graph = nx.grid_2d_graph(rows, cols, periodic=periodic)
    order = sorted(graph.nodes)
    xy = np.array([(c, r) for r, c in order], dtype=float)
    mapping = {v: k for k, v in enumerate(order)}
    graph = nx.relabel_nodes(graph, mapping)
    net = _from_nx(graph)
    return Network(net.adjacency, net.node_ids, coordinates=xy)


def barbell(clique: int, *, bridge_weight: float = 1.0) -> Network:
    """Two cliques of ``clique`` nodes joined by one link of ``bridge_weight``.

    Nodes ``0 .. clique-1`` form the first bell; the bridge joins node
    ``clique-1`` to node ``clique``.
    """
    m = check_int(clique, "clique", minimum=2)
    w = check_positive_float(bridge_weight, "bridge_weight")
    graph = nx.barbell_graph(m, 0)
    nx.set_edge_attributes(graph, 1.0, "weight")
    graph[m - 1][m]["weight"] = w
    graph = nx.convert_node_labels_to_integers(graph, ordering="sorted")
    return Network.from_networkx(graph, weight="weight")


def two_zone(size: int, *, p_in: float = 0.3, links_between: int = 2, seed: int = 0) -> Network:
    """Two random dense zones of ``size`` nodes joined by ``links_between`` links.

    Each zone is a connected Erdos-Renyi graph with link probability ``p_in``
    (resampled until connected); nodes ``0..size-1`` form zone 0.
    """
    size = check_int(size, "size", minimum=2)
    rng = np.random.default_rng(seed)
    graph = nx.Graph()
    for offset in (0, size):
        zone = nx.empty_graph(size)
        while not nx.is_connected(zone):
            zone = nx.gnp_random_graph(size, p_in, seed=int(rng.integers(2**31)))
        graph.add_edges_from((u + offset, v + offset) for u, v in zone.edges)
    a = rng.choice(size, links_between, replace=False)
    b = rng.choice(size, links_between, replace=False) + size
    graph.add_edges_from(zip(a.tolist(), b.tolist(), strict=True))
    return _from_nx(graph)


#: Mean degree the road-like family is thinned to: near that of street
#: networks, whose junctions mostly join three or four segments (common practice).
ROAD_MEAN_DEGREE = 4.0


def road_like(n: int, *, mean_degree: float = ROAD_MEAN_DEGREE, rng: Any = None) -> Network:
    """A connected near-planar network like a road or pipe network.

    Uniform random points in the unit square are joined by their Delaunay
    triangulation (mean degree just under 6), which is thinned to
    ``mean_degree``: a Euclidean minimum spanning tree is kept, so the network
    stays connected, and random other triangulation links are added to it.
    Link affinities are the inverse link lengths.

    Parameters
    ----------
    n : int
        Number of nodes, at least 4.
    mean_degree : float, default=4.0
        Target mean degree, between 2 and the triangulation's (about 6).
    rng : None, int or numpy.random.Generator
        Seeds the points and the thinning.

    Returns
    -------
    Network
        With node coordinates.
    """
    from scipy.sparse.csgraph import minimum_spanning_tree
    from scipy.spatial import Delaunay

    n = check_int(n, "n", minimum=4)
    generator = check_rng(rng)
    points = generator.random((n, 2))
    simplices = Delaunay(points).simplices
    pairs = np.vstack([simplices[:, [0, 1]], simplices[:, [1, 2]], simplices[:, [0, 2]]])
    pairs = np.unique(np.sort(pairs, axis=1), axis=0)
    length = np.linalg.norm(points[pairs[:, 0]] - points[pairs[:, 1]], axis=1)
    graph = sp.coo_array((length, (pairs[:, 0], pairs[:, 1])), shape=(n, n)).tocsr()
    tree = minimum_spanning_tree(graph).tocoo()
    lo, hi = np.minimum(tree.row, tree.col), np.maximum(tree.row, tree.col)
    in_tree = np.isin(pairs[:, 0].astype(np.int64) * n + pairs[:, 1], lo.astype(np.int64) * n + hi)
    rest = np.flatnonzero(~in_tree)
    wanted = round(mean_degree * n / 2) - tree.nnz
    extra = generator.choice(rest, size=min(max(wanted, 0), rest.size), replace=False)
    keep_rows = np.concatenate([tree.row, pairs[extra, 0]])
    keep_cols = np.concatenate([tree.col, pairs[extra, 1]])
    weights = 1.0 / np.linalg.norm(points[keep_rows] - points[keep_cols], axis=1)
    upper = sp.coo_array((weights, (keep_rows, keep_cols)), shape=(n, n)).tocsr()
    return Network(upper + upper.T, np.arange(n).astype(str), coordinates=points)


# ------------------------------------------------- road-like, streamed to a file
#: Points per tile of :func:`write_road_like` unless told: one tile's
#: triangulation (scipy's qhull) then holds about 400 MB at the peak (measured
#: at 1,000,000 nodes), far less than zoning the network, and the tiles are
#: few enough (100 at 24 million nodes) for the seam bands to add only about
#: 5% more points to triangulate.
ROAD_TILE_NODES = 250_000

#: Smallest ``tile_nodes`` accepted: a tile then still has a few dozen points
#: (at least a quarter of ``tile_nodes``).
ROAD_MIN_TILE_NODES = 64

#: Smallest mean degree :func:`write_road_like` reaches: that of its backbone,
#: the Urquhart graph of uniform points, measured at 2.60 (100,000 and
#: 250,000 points; 2.55 at 2,000 where the square's sides weigh more), with a
#: margin so that every tile still has links to draw from.
ROAD_STREAM_MIN_DEGREE = 2.7

#: Width of the band of neighbouring points triangulated with each tile, in
#: mean point spacings (:math:`1/\sqrt{n}`). A link or triangle of the tile's
#: triangulation that is not one of the whole set's Delaunay triangulation
#: needs an empty circle reaching across the whole band; for uniform points
#: at unit density a disc of diameter 6 is empty with probability
#: :math:`e^{-9\pi} \approx 5 \times 10^{-13}` (Poisson void probability,
#: Stoyan, Kendall and Mecke, *Stochastic Geometry and its Applications*,
#: Wiley 1995, ch. 2), so the tiles agree, all but surely, with one Delaunay
#: triangulation of all the points. Near the square's sides the points are
#: mirrored across them for the same reason. Measured, for 30 networks in
#: three layouts (3,000 to 20,000 nodes, 16 and 64 tiles): every written
#: link was a link of scipy's Delaunay triangulation of all the points, and
#: networkx's planarity test passed; without the mirror images 8 of 20
#: networks had links along the sides that were not, and were not planar.
ROAD_BAND_SPACINGS = 6.0

_PARQUET_SUFFIXES = frozenset({".parquet", ".pq"})


@dataclass(frozen=True)
class RoadLikeFile:
    """What :func:`write_road_like` wrote.

    Attributes
    ----------
    path : pathlib.Path
        The edge table.
    format : {'csv', 'parquet'}
        Its format.
    nodes : int
        Number of nodes (ids ``0 .. nodes-1``).
    links : int
        Number of rows (links), each written once with ``source < target``.
    tiles : int
        Number of tiles the unit square was cut into.
    node_table : pathlib.Path or None
        The node table (``node``, ``x``, ``y``), when one was asked for.
    """

    path: Path
    format: str
    nodes: int
    links: int
    tiles: int
    node_table: Path | None = None


@dataclass(frozen=True)
class _Tiling:
    """The grid of ``side x side`` tiles, each tile's nodes and seed."""

    n: int
    side: int
    entropy: tuple[int, ...]
    band: float

    @property
    def count(self) -> int:
        return self.side * self.side

    def offset(self, k: int) -> int:
        """First node id of tile ``k`` (tiles number nodes contiguously, row by row)."""
        base, spare = divmod(self.n, self.count)
        return k * base + min(k, spare)

    def size(self, k: int) -> int:
        return self.offset(k + 1) - self.offset(k)

    def links_target(self, k: int, links: int) -> int:
        """Tile ``k``'s share of ``links`` (the shares add up to ``links`` exactly)."""
        return links * self.offset(k + 1) // self.n - links * self.offset(k) // self.n

    def generator(self, k: int) -> np.random.Generator:
        # The k-th child exactly as SeedSequence.spawn makes it, built on
        # demand so that a neighbour's points can be drawn again at any time.
        return np.random.default_rng(np.random.SeedSequence(self.entropy, spawn_key=(k,)))

    def box(self, k: int) -> tuple[float, float, float, float]:
        row, col = divmod(k, self.side)
        return col / self.side, (col + 1) / self.side, row / self.side, (row + 1) / self.side

    def points(self, k: int, generator: np.random.Generator | None = None) -> np.ndarray:
        """Tile ``k``'s uniform points (the first draws of its generator)."""
        x0, x1, y0, y1 = self.box(k)
        gen = self.generator(k) if generator is None else generator
        unit = gen.random((self.size(k), 2))
        return np.column_stack([x0 + unit[:, 0] * (x1 - x0), y0 + unit[:, 1] * (y1 - y0)])

    def neighbours(self, k: int) -> list[int]:
        row, col = divmod(k, self.side)
        return [
            (row + dr) * self.side + col + dc
            for dr in (-1, 0, 1)
            for dc in (-1, 0, 1)
            if (dr or dc) and 0 <= row + dr < self.side and 0 <= col + dc < self.side
        ]

    def local_points(
        self, k: int, generator: np.random.Generator
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Tile ``k``'s points first (drawn from ``generator``), then its neighbours' in the band.

        Returns the points, their global ids and their tiles.
        """
        own = self.points(k, generator)
        x0, x1, y0, y1 = self.box(k)
        w = self.band
        points, ids, tiles = [own], [self.offset(k) + np.arange(own.shape[0])], [k]
        for other in self.neighbours(k):
            pts = self.points(other)
            near = (pts[:, 0] > x0 - w) & (pts[:, 0] < x1 + w)
            near &= (pts[:, 1] > y0 - w) & (pts[:, 1] < y1 + w)
            index = np.flatnonzero(near)
            points.append(pts[index])
            ids.append(self.offset(other) + index)
            tiles.append(other)
        real = np.vstack(points)
        mirrored = self._mirrored(real, (x0 - w, x1 + w, y0 - w, y1 + w))
        points.append(mirrored)
        ids.append(np.full(mirrored.shape[0], -1))
        tiles.append(-1)
        sizes = [block.shape[0] for block in points]
        return (
            np.vstack(points),
            np.concatenate(ids).astype(np.int64),
            np.repeat(np.array(tiles), sizes),
        )

    def _mirrored(self, real: np.ndarray, box: tuple[float, float, float, float]) -> np.ndarray:
        """Mirror images, across the square's sides and corners, of ``real`` points near them.

        Reflecting the points near each side (and, twice, near each corner)
        gives the triangulation the same point density across the square's
        sides, so that no Delaunay circle there reaches past the band; the
        images only shape the triangulation and are never linked (see
        :func:`_urquhart_links`).
        """
        x0, x1, y0, y1 = box
        images = []
        for axis, low, high in ((0, x0, x1), (1, y0, y1)):
            for side, reach in ((0.0, low < 0.0), (1.0, high > 1.0)):
                if reach:
                    near = np.abs(real[:, axis] - side) < self.band
                    image = real[near].copy()
                    image[:, axis] = 2 * side - image[:, axis]
                    images.append(image)
        for cx, cy in ((0.0, 0.0), (0.0, 1.0), (1.0, 0.0), (1.0, 1.0)):
            if (x0 < 0.0 if cx == 0 else x1 > 1.0) and (y0 < 0.0 if cy == 0 else y1 > 1.0):
                near = (np.abs(real[:, 0] - cx) < self.band) & (np.abs(real[:, 1] - cy) < self.band)
                images.append(np.column_stack([2 * cx - real[near, 0], 2 * cy - real[near, 1]]))
        return np.vstack(images) if images else np.empty((0, 2))


def _urquhart_links(points: np.ndarray, real: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The Delaunay links of ``points`` as sorted pairs, and which are Urquhart links.

    ``real`` marks the points that are not mirror images. The Urquhart graph
    drops the longest side of every Delaunay triangle
    (Urquhart, "Some properties of the planar Euclidean relative neighbourhood
    graph", Pattern Recognition Letters 1, 1983, doi:10.1016/0167-8655(83)90079-3).
    It contains the relative neighbourhood graph, which contains a Euclidean
    minimum spanning tree (Toussaint, "The relative neighbourhood graph of a
    finite planar set", Pattern Recognition 12, 1980,
    doi:10.1016/0031-3203(80)90066-7), so it is connected; and unlike a
    spanning tree each of its links is decided by the two triangles beside it,
    so tiles decide their links alone and agree across seams.

    Only triangles of three real points drop a side: the third point then
    lies in the side's lune, so the side is not a relative-neighbourhood link
    of the real points, and every such link stays. Mirror images only add
    Delaunay links to it: a relative-neighbourhood link's diametral disc holds
    no real point, and, as a reflection across a side moves no point of the
    square closer to a centre inside it, no image either.
    """
    from scipy.spatial import Delaunay

    n = points.shape[0]
    simplices = Delaunay(points).simplices.astype(np.int64)
    sides = np.stack([simplices[:, [0, 1]], simplices[:, [1, 2]], simplices[:, [0, 2]]], axis=1)
    sides.sort(axis=2)
    length = np.linalg.norm(points[sides[..., 0]] - points[sides[..., 1]], axis=2)
    keys = sides[..., 0] * n + sides[..., 1]
    longest = keys[np.arange(keys.shape[0]), np.argmax(length, axis=1)]
    longest = longest[real[simplices].all(axis=1)]
    unique = np.unique(keys)
    backbone = ~np.isin(unique, longest)
    return np.column_stack([unique // n, unique % n]), backbone


def _tile_links(tiling: _Tiling, k: int, links: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Tile ``k``'s links as global ``(source, target)`` rows, their weights, its points.

    The tile's points and the points of its neighbours within the band are
    triangulated together. The tile writes the links that join two of its own
    points and the seam links that join one of its points to a later tile's
    (so each link is written once, by the earlier tile): all those of the
    Urquhart graph, and a random draw of the others up to its share of
    ``links``.
    """
    generator = tiling.generator(k)
    points, ids, tiles = tiling.local_points(k, generator)
    pairs, backbone = _urquhart_links(points, tiles >= 0)
    # The first point of a sorted pair is the tile's own whenever either is.
    mine = (tiles[pairs[:, 0]] == k) & (tiles[pairs[:, 1]] >= k)
    pairs, backbone = pairs[mine], backbone[mine]
    others = np.flatnonzero(~backbone)
    wanted = tiling.links_target(k, links) - int(np.count_nonzero(backbone))
    wanted = min(max(wanted, 0), others.size)
    # The tile's generator has drawn its points; it draws the thinning next.
    chosen = np.sort(generator.choice(others, size=wanted, replace=False))
    kept = pairs[np.concatenate([np.flatnonzero(backbone), chosen])]
    weight = 1.0 / np.linalg.norm(points[kept[:, 0]] - points[kept[:, 1]], axis=1)
    rows = ids[kept]
    order = np.lexsort((rows[:, 1], rows[:, 0]))
    return rows[order], weight[order], points[: tiling.size(k)]


def _edge_format(path: Path, format: str | None) -> str:
    if format is None:
        return "parquet" if path.suffix.lower() in _PARQUET_SUFFIXES else "csv"
    return check_choice(format, "format", {"csv", "parquet"})


class _TableSink:
    """Appends tiles of rows to a CSV or Parquet file (Parquet: a row group a tile)."""

    def __init__(self, path: Path, format: str, columns: dict[str, str]) -> None:
        self.format = format
        self.rows = 0
        if format == "parquet":
            import pyarrow as pa
            import pyarrow.parquet as pq

            types = {"int": pa.int64(), "float": pa.float64()}
            schema = pa.schema([(name, types[kind]) for name, kind in columns.items()])
            self._writer = pq.ParquetWriter(path, schema)
        else:
            self._file = open(path, "w", encoding="utf-8", newline="")  # noqa: SIM115

    def write(self, columns: dict[str, np.ndarray]) -> None:
        if self.format == "parquet":
            import pyarrow as pa

            self._writer.write_table(pa.table(columns, schema=self._writer.schema))
        else:
            import pandas as pd

            pd.DataFrame(columns).to_csv(
                self._file, header=self.rows == 0, index=False, lineterminator="\n"
            )
        self.rows += len(next(iter(columns.values())))

    def close(self) -> None:
        """Finish the file (safe to call again)."""
        if self.format == "parquet":
            self._writer.close()
        elif not self._file.closed:
            self._file.close()


_EDGE_COLUMNS = {"source": "int", "target": "int", "weight": "float"}
_NODE_COLUMNS = {"node": "int", "x": "float", "y": "float"}


def write_road_like(
    path: str | os.PathLike[str],
    n: int,
    *,
    mean_degree: float = ROAD_MEAN_DEGREE,
    tile_nodes: int = ROAD_TILE_NODES,
    rng: Any = None,
    format: str | None = None,
    nodes: str | os.PathLike[str] | None = None,
) -> RoadLikeFile:
    """Write a large road-like network to an edge table, one tile at a time.

    The streamed counterpart of :func:`road_like`, for networks too large to
    hold: uniform random points in the unit square, joined by links of their
    Delaunay triangulation thinned to ``mean_degree``, link affinities the
    inverse link lengths. The square is cut into a grid of square tiles of
    about ``tile_nodes`` points; each tile is triangulated together with the
    points of its neighbours within a narrow band
    (:data:`ROAD_BAND_SPACINGS`), and writes its Urquhart links (which
    contain a Euclidean minimum spanning tree, so the network is connected)
    and random others of its links up to its share of ``mean_degree * n / 2``.
    Memory holds one tile and its band (about 400 MB at the default tile size)
    whatever ``n`` is.

    Parameters
    ----------
    path : str or path-like
        The file to write (replaced if it exists). It appears only when
        complete: the table is written to a hidden file beside it first.
    n : int
        Number of nodes, at least 4. Node ids are ``0 .. n-1``, numbered
        contiguously tile by tile, row by row from the bottom left.
    mean_degree : float, default=4.0
        Target mean degree, between 2.7 (:data:`ROAD_STREAM_MIN_DEGREE`)
        and 6 (the triangulation's).
    tile_nodes : int, default=250_000
        About how many points a tile holds (at least 64); it bounds memory.
        Other values give other, equally valid networks.
    rng : None, int or numpy.random.Generator
        Seeds the whole network: each tile draws its points and its thinning
        from its own child seed (as :meth:`numpy.random.SeedSequence.spawn`
        makes them), so the same seed and ``tile_nodes`` give a
        byte-identical file.
    format : {'csv', 'parquet'} or None, default=None
        ``None`` picks Parquet for a ``.parquet`` or ``.pq`` suffix (this
        needs pyarrow) and CSV otherwise.
    nodes : str, path-like or None, default=None
        Also write the node table here (columns ``node``, ``x``, ``y``: the
        points in the unit square), in ``format`` or by its own suffix; it
        serves as ``specgraph zones --nodes`` for maps.

    Returns
    -------
    RoadLikeFile
        The file, its format and its node, link and tile counts.

    See Also
    --------
    road_like : the same family in memory, with a Euclidean minimum spanning
        tree as the backbone (so its mean degree can go down to 2).

    Notes
    -----
    The columns are ``source``, ``target`` (int64, ``source < target``) and
    ``weight`` (float64); Parquet files hold one row group per tile. The link
    count is ``round(mean_degree * n / 2)`` unless a tile runs out of links
    to draw. The network differs from the one :func:`road_like` draws for the
    same seed. The links are, all but surely, links of the Delaunay
    triangulation of all ``n`` points (see :data:`ROAD_BAND_SPACINGS`), so
    the network is planar, and they include all its Urquhart links, so it is
    connected.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     target = pathlib.Path(folder) / "roads.csv"
    ...     written = write_road_like(target, 2_000, tile_nodes=500, rng=7)
    >>> written.nodes, written.links, written.tiles
    (2000, 4000, 4)
    """
    n = check_int(n, "n", minimum=4)
    degree = check_positive_float(mean_degree, "mean_degree")
    if not ROAD_STREAM_MIN_DEGREE <= degree <= 6.0:
        raise parameter_error(
            "mean_degree", f"a number between {ROAD_STREAM_MIN_DEGREE} and 6", mean_degree
        )
    tile_nodes = check_int(tile_nodes, "tile_nodes", minimum=ROAD_MIN_TILE_NODES)
    target = Path(path)
    kind = _edge_format(target, format)
    generator = check_rng(rng)
    entropy = tuple(int(v) for v in generator.integers(0, 2**63, size=4))
    side = max(1, math.ceil(math.sqrt(n / tile_nodes)))
    band = min(ROAD_BAND_SPACINGS / math.sqrt(n), 1.0 / side)
    tiling = _Tiling(n=n, side=side, entropy=entropy, band=band)
    links = round(degree * n / 2)
    outputs = {target: (kind, _EDGE_COLUMNS)}
    if nodes is not None:
        node_target = Path(nodes)
        if node_target.resolve() == target.resolve():
            raise parameter_error("nodes", "a file other than the edge table", nodes)
        outputs[node_target] = (_edge_format(node_target, format), _NODE_COLUMNS)
    partials = {path: path.with_name(f".{path.name}.partial") for path in outputs}
    sinks: list[_TableSink] = []
    try:
        for path, (kind_of, columns) in outputs.items():
            sinks.append(_TableSink(partials[path], kind_of, columns))
        for k in range(tiling.count):
            rows, weight, points = _tile_links(tiling, k, links)
            sinks[0].write({"source": rows[:, 0], "target": rows[:, 1], "weight": weight})
            if len(sinks) > 1:
                ids = tiling.offset(k) + np.arange(points.shape[0], dtype=np.int64)
                sinks[1].write({"node": ids, "x": points[:, 0], "y": points[:, 1]})
            logger.debug("tile %d of %d: %d links", k + 1, tiling.count, rows.shape[0])
        for sink in sinks:
            sink.close()
        for path, partial in partials.items():
            os.replace(partial, path)
    except BaseException:
        for sink in sinks:
            sink.close()
        for partial in partials.values():
            partial.unlink(missing_ok=True)
        raise
    return RoadLikeFile(
        path=target,
        format=kind,
        nodes=n,
        links=sinks[0].rows,
        tiles=tiling.count,
        node_table=None if nodes is None else Path(nodes),
    )
