"""Generate the synthetic water distribution network of Quillmere.

Quillmere is an invented small town in the invented Harrowdene Valley. This
script synthesises a plausible, but entirely fictional, pipe network for it and
writes three plain CSV tables (``pipes.csv``, ``junctions.csv``,
``sources.csv``) plus a ``README.md`` describing them.

Usage::

    python datasets/generate_quillmere.py [--out DIR]

The construction narrates these steps:

1. each neighbourhood (district) gets a cloud of junctions inside a noisy
   ellipse, either a perturbed street grid or an organic cluster;
2. candidate street links (lattice neighbours, or short Delaunay edges) are
   thinned to a spanning tree plus a fraction of loop-closing links;
3. neighbouring districts are joined by one to three trunk mains;
4. each source (works, reservoir or tank) feeds its district by a short main;
5. short cul-de-sacs and long rural spurs dangle from the district rims;
6. diameters follow the role of each pipe and its hop distance from the
   sources; connection counts are drawn per junction.

Every random draw comes from one ``numpy.random.default_rng(SEED)`` in a fixed
order, and every output is rounded and sorted, so two runs give byte-identical
files.
"""

from __future__ import annotations

import argparse
import csv
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from scipy.sparse import coo_matrix, csr_matrix
from scipy.sparse.csgraph import (
    connected_components,
    dijkstra,
    minimum_spanning_tree,
)
from scipy.spatial import Delaunay, cKDTree

# --- global ---------------------------------------------------------------
SEED = 20_251_201  # seed of the single random generator used for everything
FRAME_SIZE_M = 8000.0  # side of the square local frame (metres) holding the town
FRAME_MARGIN_M = 60.0  # generated junctions keep this far inside the frame
COORD_DECIMALS = 2  # decimals kept for coordinates and pipe lengths
MEANDER_RANGE = (1.0, 1.15)  # pipe length / straight distance (streets bend)
CHAIN_NODE_SPACING_M = 160.0  # spacing of intermediate junctions on long mains
JUNCTION_COUNT_RANGE = (2500, 3500)  # accepted total number of nodes
CROSSING_CHUNK = 400  # pipes tested at once in the final crossing check (memory)

# The mere (lake) that names the town: no pipe or junction is placed in it.
MERE_CENTRE_M = (6000.0, 1900.0)  # centre of the circular mere
MERE_RADIUS_M = 650.0  # radius of the mere

# --- districts ------------------------------------------------------------
GRID = "grid"  # style: perturbed rectangular street grid
ORGANIC = "organic"  # style: irregular cluster of winding streets


@dataclass(frozen=True)
class DistrictSpec:
    """Layout of one invented neighbourhood.

    Parameters
    ----------
    name : str
        Invented district name written to ``junctions.csv``.
    centre : tuple of float
        Centre of the district in the local frame, metres.
    style : {'grid', 'organic'}
        Street pattern of the district.
    n_junctions : int
        Target number of junctions before trimming to one component.
    """

    name: str
    centre: tuple[float, float]
    style: str
    n_junctions: int


DISTRICTS = (
    DistrictSpec("Fennick Rise", (2000.0, 6000.0), ORGANIC, 300),
    DistrictSpec("Old Tannery", (4000.0, 5900.0), GRID, 370),
    DistrictSpec("Brindlemoor", (6000.0, 6100.0), ORGANIC, 320),
    DistrictSpec("Wrenhollow", (2000.0, 4000.0), GRID, 340),
    DistrictSpec("Quillmere Cross", (4000.0, 4000.0), GRID, 410),
    DistrictSpec("Corvane Heights", (6000.0, 3950.0), ORGANIC, 300),
    DistrictSpec("Sallowick End", (2100.0, 2000.0), ORGANIC, 290),
    DistrictSpec("Tessel Quay", (4000.0, 2000.0), GRID, 330),
)

# Pairs of neighbouring districts (indices into DISTRICTS) and how many trunk
# mains join them; one to three, so the zones are clear but not perfect.
DISTRICT_LINKS = (
    (0, 1, 2),
    (1, 2, 1),
    (0, 3, 1),
    (1, 4, 3),
    (2, 5, 2),
    (3, 4, 2),
    (4, 5, 1),
    (3, 6, 2),
    (4, 7, 2),
    (6, 7, 1),
    (3, 7, 1),
)

GRID_SPACING_M = 66.0  # street-grid block size
GRID_JITTER_FRACTION = 0.12  # sd of junction displacement / block size
GRID_DROP_FRACTION = 0.07  # lattice points removed (parks, yards, blocks)
ORGANIC_AREA_PER_NODE_M2 = 4600.0  # district area per junction, organic style
ORGANIC_MIN_SPACING_M = 38.0  # minimum distance between organic junctions
ORGANIC_MAX_EDGE_M = 105.0  # longest candidate street in an organic cluster
ORGANIC_MAX_ATTEMPTS_PER_NODE = 40  # dart-throwing budget per junction
ASPECT_RANGE = (0.65, 1.5)  # ratio of the two ellipse semi-axes
BOUNDARY_HARMONICS = (2, 3, 4)  # angular harmonics that wrinkle the outline
BOUNDARY_AMPLITUDE_MAX = 0.07  # largest relative amplitude of each harmonic
MST_WEIGHT_NOISE = 1.6  # tree weights = length * U(1, this): varied trees
LOOP_KEEP_PROBABILITY = {GRID: 0.5, ORGANIC: 0.25}  # share of loop links kept

# --- trunk mains ------------------------------------------------------------
TRUNK_NEIGHBOURS = 8  # nearest junctions of the other district paired with each
TRUNK_CANDIDATES = 2000  # closest junction pairs examined per district pair
TRUNK_MIN_SEPARATION_M = 300.0  # distance between the ends of parallel trunks
TRUNK_DIAMETERS_MM = (300, 400)  # nominal sizes drawn for trunk mains

# --- sources ----------------------------------------------------------------


@dataclass(frozen=True)
class SourceSpec:
    """One invented source: treatment-works outlet, reservoir or tank.

    Parameters
    ----------
    node : str
        Node id written to the CSV files.
    name : str
        Invented descriptive name.
    kind : {'treatment_works', 'reservoir', 'tank'}
        Type of source.
    district : int
        Index into ``DISTRICTS`` of the district it feeds.
    bearing_deg : float
        Direction from the district to the source site, degrees
        counter-clockwise from east.
    """

    node: str
    name: str
    kind: str
    district: int
    bearing_deg: float


SOURCES = (
    SourceSpec("QS-NORTHWORKS", "Quillmere North Treatment Works", "treatment_works", 1, 90.0),
    SourceSpec("QS-HARROWDENE-RES", "Harrowdene Upper Reservoir", "reservoir", 6, 225.0),
    SourceSpec("QS-CORVANE-TOWER", "Corvane Heights Water Tower", "tank", 5, 10.0),
    SourceSpec("QS-MEREBANK-BH", "Merebank Borehole Works", "treatment_works", 7, 270.0),
)
SOURCE_MAIN_LENGTH_M = 420.0  # distance from the district rim to a source
SOURCE_MAIN_DIAMETER_MM = 600  # nominal size of the main leaving a source

# --- dangling branches ------------------------------------------------------
CUL_DE_SACS_PER_DISTRICT = 11  # cul-de-sacs attempted per district
CUL_DE_SAC_NODES = (1, 5)  # junctions per cul-de-sac, [low, high)
CUL_DE_SAC_STEP_M = (40.0, 70.0)  # length of each cul-de-sac pipe
CUL_DE_SAC_SPREAD_RAD = 0.6  # heading deviation from straight outwards
CUL_DE_SAC_RIM_FRACTION = 0.7  # start junctions lie beyond this radius share
CUL_DE_SAC_DIAMETER_MM = 100  # nominal size of cul-de-sac pipes
RURAL_SPUR_COUNT = 7  # long rural spurs leaving the town
RURAL_SPUR_NODES = (8, 19)  # junctions per rural spur, [low, high)
RURAL_STEP_M = (80.0, 140.0)  # length of each rural spur pipe
RURAL_TURN_SD_RAD = 0.25  # sd of the heading change at each spur junction
RURAL_BEARING_JITTER_RAD = 0.3  # jitter of the evenly spread spur bearings
RURAL_LARGE_PIPES = 3  # first pipes of a rural spur use the larger size
RURAL_DIAMETERS_MM = (150, 100)  # sizes near the town, then further out
SPUR_CLEARANCE_M = 28.0  # new spur junctions keep this far from the network
SPUR_START_ATTEMPTS = 6  # tries to find a start junction for one spur

# --- diameters --------------------------------------------------------------
# (max hops from a source, nominal size): larger pipes close to sources.
SOURCE_HOP_DIAMETERS_MM = ((5, 500), (10, 400), (16, 300))
# (max hops from a feed point: source or trunk-main end, nominal size).
FEED_HOP_DIAMETERS_MM = ((2, 250), (6, 200))
DISTRIBUTION_DIAMETER_MM = 150  # ordinary looped street main
DEAD_END_DIAMETER_MM = 100  # district pipe on a dead-end (tree) branch

# --- connections (properties served per junction) --------------------------
MEAN_CONNECTIONS = {GRID: 5.2, ORGANIC: 3.9}  # Poisson means, district nodes
CUL_DE_SAC_MEAN_CONNECTIONS = 5.0  # Poisson mean on cul-de-sac junctions
RURAL_MEAN_CONNECTIONS = 0.7  # Poisson mean on rural spur junctions (farms)
MAX_RESIDENTIAL_CONNECTIONS = 12  # cap of an ordinary junction's count
LARGE_CONSUMER_COUNT = 14  # flats, schools, hospital, industrial estate
LARGE_CONSUMER_RANGE = (20, 91)  # connections of a large consumer, [low, high)

# --- roles of nodes and pipes ------------------------------------------------
ROLE_DISTRICT = "district"  # junction or pipe of a district street network
ROLE_TRUNK = "trunk"  # trunk main between districts
ROLE_SOURCE = "source"  # source node
ROLE_SOURCE_MAIN = "source_main"  # main between a source and its district
ROLE_CUL_DE_SAC = "cul_de_sac"  # short dead-end street
ROLE_RURAL = "rural"  # long rural spur
ZERO_CONNECTION_ROLES = (ROLE_TRUNK, ROLE_SOURCE, ROLE_SOURCE_MAIN)

DEFAULT_OUT_DIR = Path(__file__).resolve().parent / "quillmere"
DEFAULT_README = Path(__file__).resolve().parent / "README.md"


@dataclass
class Network:
    """Growing undirected simple graph with coordinates and labels.

    Attributes
    ----------
    xy : list of tuple of float
        Rounded coordinates of each node, metres.
    district : list of int
        Index of the district each node was generated in.
    role : list of str
        Role of each node (one of the ``ROLE_*`` constants).
    edges : dict
        Maps a sorted node pair to ``(role, diameter_mm or None)``.
    """

    xy: list[tuple[float, float]] = field(default_factory=list)
    district: list[int] = field(default_factory=list)
    role: list[str] = field(default_factory=list)
    edges: dict[tuple[int, int], tuple[str, int | None]] = field(default_factory=dict)

    def add_node(self, point: Sequence[float], district: int, role: str) -> int:
        """Append a node and return its index."""
        x, y = (round(float(c), COORD_DECIMALS) for c in point)
        self.xy.append((x, y))
        self.district.append(district)
        self.role.append(role)
        return len(self.xy) - 1

    def add_edge(self, u: int, v: int, role: str, diameter: int | None = None) -> None:
        """Add pipe ``u``-``v``; self-loops and duplicates are errors."""
        assert u != v, f"self-loop at node {u}"
        key = (min(u, v), max(u, v))
        assert key not in self.edges, f"duplicate pipe {key}"
        self.edges[key] = (role, diameter)

    def positions(self) -> np.ndarray:
        """Return node coordinates as an ``(n, 2)`` array."""
        return np.asarray(self.xy, dtype=float)

    def edge_array(self) -> np.ndarray:
        """Return the sorted pairs as an ``(m, 2)`` integer array."""
        return np.asarray(sorted(self.edges), dtype=np.int64).reshape(-1, 2)

    def adjacency(self) -> csr_matrix:
        """Return the symmetric 0/1 adjacency matrix."""
        e = self.edge_array()
        n = len(self.xy)
        rows = np.concatenate([e[:, 0], e[:, 1]])
        cols = np.concatenate([e[:, 1], e[:, 0]])
        data = np.ones(len(rows))
        return coo_matrix((data, (rows, cols)), shape=(n, n)).tocsr()


# --- geometry helpers --------------------------------------------------------


def _cross2(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Z component of the cross product of 2-D vectors (broadcasting)."""
    return a[..., 0] * b[..., 1] - a[..., 1] * b[..., 0]


def _crosses_any(p: np.ndarray, q: np.ndarray, net: Network) -> bool:
    """Whether segment ``p``-``q`` properly crosses any pipe of ``net``.

    Pipes that merely share an end point with the segment do not count.
    """
    if not net.edges:
        return False
    xy = net.positions()
    e = net.edge_array()
    a, b = xy[e[:, 0]], xy[e[:, 1]]
    o1 = _cross2(q - p, a - p)
    o2 = _cross2(q - p, b - p)
    o3 = _cross2(b - a, p - a)
    o4 = _cross2(b - a, q - a)
    return bool(np.any((o1 * o2 < 0) & (o3 * o4 < 0)))


def _site_is_free(net: Network, point: np.ndarray, anchor: int) -> bool:
    """Whether a new spur junction may sit at ``point`` next to ``anchor``."""
    low, high = FRAME_MARGIN_M, FRAME_SIZE_M - FRAME_MARGIN_M
    if np.any(point < low) or np.any(point > high):
        return False
    if np.hypot(*(point - np.asarray(MERE_CENTRE_M))) < MERE_RADIUS_M:
        return False
    xy = net.positions()
    dist = np.hypot(*(xy - point).T)
    dist[anchor] = np.inf
    if dist.min() < SPUR_CLEARANCE_M:
        return False
    return not _crosses_any(xy[anchor], point, net)


def _unit(angle: float) -> np.ndarray:
    """Unit vector at ``angle`` radians counter-clockwise from east."""
    return np.array([np.cos(angle), np.sin(angle)])


# --- district street networks -------------------------------------------------


@dataclass(frozen=True)
class Blob:
    """Noisy rotated ellipse that bounds one district."""

    centre: np.ndarray
    semi_axes: tuple[float, float]
    rotation: float
    amplitudes: np.ndarray
    phases: np.ndarray

    def to_local(self, points: np.ndarray) -> np.ndarray:
        """Rotate world points into the blob's axis frame."""
        c, s = np.cos(self.rotation), np.sin(self.rotation)
        d = np.atleast_2d(points) - self.centre
        return np.column_stack([c * d[:, 0] + s * d[:, 1], -s * d[:, 0] + c * d[:, 1]])

    def contains_local(self, local: np.ndarray) -> np.ndarray:
        """Whether points given in the axis frame lie inside the outline."""
        u = local[:, 0] / self.semi_axes[0]
        v = local[:, 1] / self.semi_axes[1]
        theta = np.arctan2(v, u)
        k = np.asarray(BOUNDARY_HARMONICS)[:, None]
        limit = 1.0 + np.sum(
            self.amplitudes[:, None] * np.cos(k * theta + self.phases[:, None]), axis=0
        )
        return np.hypot(u, v) <= limit


def _make_blob(rng: np.random.Generator, spec: DistrictSpec, area_m2: float) -> Blob:
    """Draw the outline of a district of the given area."""
    aspect = rng.uniform(*ASPECT_RANGE)
    radius = np.sqrt(area_m2 / np.pi)
    n_harm = len(BOUNDARY_HARMONICS)
    return Blob(
        centre=np.asarray(spec.centre, dtype=float),
        semi_axes=(radius * np.sqrt(aspect), radius / np.sqrt(aspect)),
        rotation=rng.uniform(0.0, np.pi),
        amplitudes=rng.uniform(0.0, BOUNDARY_AMPLITUDE_MAX, size=n_harm),
        phases=rng.uniform(0.0, 2.0 * np.pi, size=n_harm),
    )


def _grid_district(rng: np.random.Generator, spec: DistrictSpec) -> tuple[np.ndarray, np.ndarray]:
    """Perturbed street grid: junction coordinates and candidate links."""
    blob = _make_blob(rng, spec, spec.n_junctions * GRID_SPACING_M**2)
    reach = max(blob.semi_axes) * (1.0 + len(BOUNDARY_HARMONICS) * BOUNDARY_AMPLITUDE_MAX)
    half = int(np.ceil(reach / GRID_SPACING_M))
    ii, jj = np.meshgrid(np.arange(-half, half + 1), np.arange(-half, half + 1), indexing="ij")
    local = np.column_stack([ii.ravel(), jj.ravel()]) * GRID_SPACING_M
    keep = blob.contains_local(local)
    keep &= rng.random(len(local)) >= GRID_DROP_FRACTION
    index = np.full(ii.size, -1)
    index[keep] = np.arange(keep.sum())
    index = index.reshape(ii.shape)
    pairs = [
        np.column_stack([index[:-1, :].ravel(), index[1:, :].ravel()]),
        np.column_stack([index[:, :-1].ravel(), index[:, 1:].ravel()]),
    ]
    cand = np.concatenate(pairs)
    cand = cand[(cand >= 0).all(axis=1)]
    c, s = np.cos(blob.rotation), np.sin(blob.rotation)
    pts = local[keep]
    jitter = rng.normal(0.0, GRID_JITTER_FRACTION * GRID_SPACING_M, pts.shape)
    world = np.column_stack([c * pts[:, 0] - s * pts[:, 1], s * pts[:, 0] + c * pts[:, 1]])
    return world + blob.centre + jitter, np.sort(cand, axis=1)


def _organic_district(
    rng: np.random.Generator, spec: DistrictSpec
) -> tuple[np.ndarray, np.ndarray]:
    """Organic cluster: dart-thrown junctions and short Delaunay links."""
    blob = _make_blob(rng, spec, spec.n_junctions * ORGANIC_AREA_PER_NODE_M2)
    reach = max(blob.semi_axes) * (1.0 + len(BOUNDARY_HARMONICS) * BOUNDARY_AMPLITUDE_MAX)
    accepted = np.empty((0, 2))
    for _ in range(spec.n_junctions * ORGANIC_MAX_ATTEMPTS_PER_NODE):
        if len(accepted) == spec.n_junctions:
            break
        local = rng.uniform(-reach, reach, size=(1, 2))
        if not blob.contains_local(local)[0]:
            continue
        if len(accepted) and np.hypot(*(accepted - local).T).min() < ORGANIC_MIN_SPACING_M:
            continue
        accepted = np.vstack([accepted, local])
    world = blob.centre + accepted @ np.array(
        [
            [np.cos(blob.rotation), np.sin(blob.rotation)],
            [-np.sin(blob.rotation), np.cos(blob.rotation)],
        ]
    )
    tri = Delaunay(world).simplices
    cand = np.sort(np.concatenate([tri[:, [0, 1]], tri[:, [1, 2]], tri[:, [0, 2]]]), axis=1)
    cand = np.unique(cand, axis=0)
    length = np.hypot(*(world[cand[:, 0]] - world[cand[:, 1]]).T)
    return world, cand[length <= ORGANIC_MAX_EDGE_M]


def _largest_component(xy: np.ndarray, cand: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Restrict points and candidate links to the largest component."""
    n = len(xy)
    adj = coo_matrix((np.ones(len(cand)), (cand[:, 0], cand[:, 1])), shape=(n, n))
    _, labels = connected_components(adj, directed=False)
    main = np.argmax(np.bincount(labels))
    keep = labels == main
    new_index = np.cumsum(keep) - 1
    cand = cand[keep[cand[:, 0]] & keep[cand[:, 1]]]
    return xy[keep], new_index[cand]


def _tree_plus_loops(
    rng: np.random.Generator, xy: np.ndarray, cand: np.ndarray, keep_prob: float
) -> np.ndarray:
    """Spanning tree of the candidate links plus some loop-closing links."""
    n = len(xy)
    length = np.hypot(*(xy[cand[:, 0]] - xy[cand[:, 1]]).T)
    weight = length * rng.uniform(1.0, MST_WEIGHT_NOISE, size=len(cand))
    mat = coo_matrix((weight, (cand[:, 0], cand[:, 1])), shape=(n, n))
    tree = minimum_spanning_tree(mat.tocsr()).tocoo()
    tree_pairs = np.sort(np.column_stack([tree.row, tree.col]), axis=1)
    in_tree = np.isin(cand[:, 0] * n + cand[:, 1], tree_pairs[:, 0] * n + tree_pairs[:, 1])
    keep = in_tree | (rng.random(len(cand)) < keep_prob)
    return cand[keep]


DISTRICT_BUILDERS: dict[str, Callable[..., tuple[np.ndarray, np.ndarray]]] = {
    GRID: _grid_district,
    ORGANIC: _organic_district,
}


def add_districts(rng: np.random.Generator, net: Network) -> list[np.ndarray]:
    """Build every district; return the node indices of each."""
    members = []
    for k, spec in enumerate(DISTRICTS):
        xy, cand = DISTRICT_BUILDERS[spec.style](rng, spec)
        xy, cand = _largest_component(xy, cand)
        links = _tree_plus_loops(rng, xy, cand, LOOP_KEEP_PROBABILITY[spec.style])
        ids = np.array([net.add_node(p, k, ROLE_DISTRICT) for p in xy])
        for u, v in links:
            net.add_edge(int(ids[u]), int(ids[v]), ROLE_DISTRICT)
        members.append(ids)
    return members


# --- mains between districts and from sources ---------------------------------


def _add_chain(
    net: Network, u: int, v: int, role: str, diameter: int, districts: tuple[int, int]
) -> None:
    """Join ``u`` to ``v`` by a straight main with intermediate junctions.

    Intermediate junctions belong to the district of the nearer end.
    """
    p, q = np.asarray(net.xy[u]), np.asarray(net.xy[v])
    n_mid = max(0, int(np.ceil(np.hypot(*(q - p)) / CHAIN_NODE_SPACING_M)) - 1)
    prev = u
    for k in range(1, n_mid + 1):
        t = k / (n_mid + 1)
        node = net.add_node(p + t * (q - p), districts[int(t >= 0.5)], role)
        net.add_edge(prev, node, role, diameter)
        prev = node
    net.add_edge(prev, v, role, diameter)


def _far_from(net: Network, node: int, chosen: list[int]) -> bool:
    """Whether ``node`` is at least the trunk separation from all ``chosen``."""
    p = np.asarray(net.xy[node])
    return all(np.hypot(*(p - np.asarray(net.xy[c]))) >= TRUNK_MIN_SEPARATION_M for c in chosen)


def link_districts(rng: np.random.Generator, net: Network, members: list[np.ndarray]) -> None:
    """Join neighbouring districts by one to three trunk mains each."""
    for da, db, n_links in DISTRICT_LINKS:
        xy = net.positions()
        nodes_a, nodes_b = members[da], members[db]
        dist, nearest = cKDTree(xy[nodes_b]).query(xy[nodes_a], k=TRUNK_NEIGHBOURS)
        order = np.argsort(dist.ravel(), kind="stable")[:TRUNK_CANDIDATES]
        ends_a: list[int] = []
        ends_b: list[int] = []
        for k in order:
            a = int(nodes_a[k // TRUNK_NEIGHBOURS])
            b = int(nodes_b[nearest.ravel()[k]])
            if not (_far_from(net, a, ends_a) and _far_from(net, b, ends_b)):
                continue
            if _crosses_any(xy[a], xy[b], net):
                continue
            diameter = int(rng.choice(TRUNK_DIAMETERS_MM))
            _add_chain(net, a, b, ROLE_TRUNK, diameter, (da, db))
            ends_a.append(a)
            ends_b.append(b)
            if len(ends_a) == n_links:
                break
        assert ends_a, f"no trunk main between districts {da} and {db}"


def add_sources(net: Network, members: list[np.ndarray]) -> dict[int, SourceSpec]:
    """Site each source beyond its district rim and join it by a main."""
    sources = {}
    for spec in SOURCES:
        nodes = members[spec.district]
        direction = _unit(np.deg2rad(spec.bearing_deg))
        anchor = int(nodes[np.argmax(net.positions()[nodes] @ direction)])
        site = np.asarray(net.xy[anchor]) + SOURCE_MAIN_LENGTH_M * direction
        node = net.add_node(site, spec.district, ROLE_SOURCE)
        _add_chain(
            net,
            node,
            anchor,
            ROLE_SOURCE_MAIN,
            SOURCE_MAIN_DIAMETER_MM,
            (spec.district, spec.district),
        )
        sources[node] = spec
    return sources


# --- dangling branches -----------------------------------------------------------


def _grow_spur(
    rng: np.random.Generator,
    net: Network,
    start: int,
    heading: float,
    diameters: Sequence[int],
    walk: tuple[tuple[float, float], float, str],
) -> int:
    """Grow a dead-end branch from ``start``; return junctions placed.

    ``walk`` is ``(step range in metres, heading sd in radians, role)``.
    Growth stops early where the next site is taken, crosses a pipe or
    leaves the frame.
    """
    (step_low, step_high), turn_sd, role = walk
    prev, placed = start, 0
    for diameter in diameters:
        heading += rng.normal(0.0, turn_sd) if turn_sd > 0 else 0.0
        step = rng.uniform(step_low, step_high)
        point = np.asarray(net.xy[prev]) + step * _unit(heading)
        if not _site_is_free(net, point, prev):
            break
        node = net.add_node(point, net.district[start], role)
        net.add_edge(prev, node, role, diameter)
        prev, placed = node, placed + 1
    return placed


def add_cul_de_sacs(rng: np.random.Generator, net: Network, members: list[np.ndarray]) -> None:
    """Attach short dead-end streets to junctions on each district rim."""
    degree = np.asarray(net.adjacency().sum(axis=1)).ravel()
    for nodes in members:
        xy = net.positions()[nodes]
        centre = xy.mean(axis=0)
        radius = np.hypot(*(xy - centre).T)
        rim = nodes[(radius >= CUL_DE_SAC_RIM_FRACTION * radius.max()) & (degree[nodes] <= 2)]
        for _ in range(CUL_DE_SACS_PER_DISTRICT):
            for _attempt in range(SPUR_START_ATTEMPTS):
                start = int(rng.choice(rim))
                outward = np.arctan2(*(np.asarray(net.xy[start]) - centre)[::-1])
                heading = outward + rng.uniform(-CUL_DE_SAC_SPREAD_RAD, CUL_DE_SAC_SPREAD_RAD)
                n_nodes = int(rng.integers(*CUL_DE_SAC_NODES))
                walk = (CUL_DE_SAC_STEP_M, 0.0, ROLE_CUL_DE_SAC)
                if _grow_spur(rng, net, start, heading, [CUL_DE_SAC_DIAMETER_MM] * n_nodes, walk):
                    break


def add_rural_spurs(rng: np.random.Generator, net: Network) -> None:
    """Send long rural spurs outwards from the junctions furthest out."""
    district_nodes = np.flatnonzero(np.asarray(net.role) == ROLE_DISTRICT)
    frame_centre = np.full(2, FRAME_SIZE_M / 2.0)
    for k in range(RURAL_SPUR_COUNT):
        bearing = 2.0 * np.pi * k / RURAL_SPUR_COUNT + rng.uniform(
            -RURAL_BEARING_JITTER_RAD, RURAL_BEARING_JITTER_RAD
        )
        offsets = net.positions()[district_nodes] - frame_centre
        start = int(district_nodes[np.argmax(offsets @ _unit(bearing))])
        n_nodes = int(rng.integers(*RURAL_SPUR_NODES))
        diameters = [RURAL_DIAMETERS_MM[int(i >= RURAL_LARGE_PIPES)] for i in range(n_nodes)]
        walk = (RURAL_STEP_M, RURAL_TURN_SD_RAD, ROLE_RURAL)
        _grow_spur(rng, net, start, bearing, diameters, walk)


# --- attributes ------------------------------------------------------------------


def _two_core(adj: csr_matrix) -> np.ndarray:
    """Boolean mask of the nodes in the 2-core (not on dead-end trees)."""
    alive = np.ones(adj.shape[0], dtype=bool)
    while True:
        degree = adj @ alive.astype(float)
        leaves = alive & (degree <= 1)
        if not leaves.any():
            return alive
        alive &= ~leaves


def _size_by_hops(hops: float, table: tuple[tuple[int, int], ...]) -> int:
    """Nominal size for a hop distance from a (max hops, size) table."""
    for max_hops, size in table:
        if hops <= max_hops:
            return size
    return DISTRIBUTION_DIAMETER_MM


def assign_diameters(net: Network, sources: dict[int, SourceSpec]) -> None:
    """Size district pipes by hop distance from sources and feed points."""
    adj = net.adjacency()
    feeds = sorted(
        {
            n
            for (u, v), (role, _) in net.edges.items()
            if role in (ROLE_TRUNK, ROLE_SOURCE_MAIN)
            for n in (u, v)
        }
    )
    src_hops = dijkstra(adj, indices=sorted(sources), unweighted=True, min_only=True)
    feed_hops = dijkstra(adj, indices=feeds, unweighted=True, min_only=True)
    core = _two_core(adj)
    for (u, v), (role, _) in sorted(net.edges.items()):
        if role != ROLE_DISTRICT:
            continue
        if not (core[u] and core[v]):
            net.edges[(u, v)] = (role, DEAD_END_DIAMETER_MM)
            continue
        size = max(
            _size_by_hops(min(src_hops[u], src_hops[v]), SOURCE_HOP_DIAMETERS_MM),
            _size_by_hops(min(feed_hops[u], feed_hops[v]), FEED_HOP_DIAMETERS_MM),
        )
        net.edges[(u, v)] = (role, size)


def draw_connections(rng: np.random.Generator, net: Network) -> np.ndarray:
    """Draw the number of properties served by each node."""
    role = np.asarray(net.role)
    style = np.array([DISTRICTS[d].style for d in net.district])
    mean = np.zeros(len(role))
    for name, value in MEAN_CONNECTIONS.items():
        mean[(role == ROLE_DISTRICT) & (style == name)] = value
    mean[role == ROLE_CUL_DE_SAC] = CUL_DE_SAC_MEAN_CONNECTIONS
    mean[role == ROLE_RURAL] = RURAL_MEAN_CONNECTIONS
    counts = np.minimum(rng.poisson(mean), MAX_RESIDENTIAL_CONNECTIONS)
    candidates = np.flatnonzero(role == ROLE_DISTRICT)
    large = rng.choice(candidates, size=LARGE_CONSUMER_COUNT, replace=False)
    counts[large] = rng.integers(*LARGE_CONSUMER_RANGE, size=len(large))
    counts[np.isin(role, ZERO_CONNECTION_ROLES)] = 0
    return counts


# --- checks and output -------------------------------------------------------------


def count_crossings(net: Network) -> int:
    """Number of pipe pairs that properly cross in the plane."""
    xy = net.positions()
    e = net.edge_array()
    a, b = xy[e[:, 0]], xy[e[:, 1]]
    total = 0
    for start in range(0, len(e), CROSSING_CHUNK):
        p, q = a[start : start + CROSSING_CHUNK, None], b[start : start + CROSSING_CHUNK, None]
        o1 = _cross2(q - p, a - p)
        o2 = _cross2(q - p, b - p)
        o3 = _cross2(b - a, p - a)
        o4 = _cross2(b - a, q - a)
        total += int(np.sum((o1 * o2 < 0) & (o3 * o4 < 0)))
    return total // 2


def check_network(net: Network) -> None:
    """Assert that the network is connected, simple and of the right size."""
    adj = net.adjacency()
    n_comp, _ = connected_components(adj, directed=False)
    assert n_comp == 1, f"network has {n_comp} components"
    assert adj.diagonal().sum() == 0, "self-loop found"
    assert adj.max() == 1, "duplicate pipe found"
    low, high = JUNCTION_COUNT_RANGE
    assert low <= len(net.xy) <= high, f"{len(net.xy)} nodes out of range"
    assert len(set(net.xy)) == len(net.xy), "two junctions share a site"
    assert count_crossings(net) == 0, "two pipes cross"


def node_ids(rng: np.random.Generator, net: Network, sources: dict[int, SourceSpec]) -> list[str]:
    """Name nodes; junction numbers are shuffled so order hides districts."""
    junctions = [i for i in range(len(net.xy)) if i not in sources]
    numbers = rng.permutation(len(junctions)) + 1
    ids = [""] * len(net.xy)
    for i, number in zip(junctions, numbers, strict=True):
        ids[i] = f"QJ-{number:05d}"
    for i, spec in sources.items():
        ids[i] = spec.node
    return ids


def _write_csv(path: Path, header: Sequence[str], rows: list[list[str]]) -> None:
    """Write a UTF-8 CSV with ``\\n`` line endings."""
    with path.open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(header)
        writer.writerows(rows)


def pipe_rows(rng: np.random.Generator, net: Network, ids: list[str]) -> list[list[str]]:
    """Rows of ``pipes.csv``, sorted by end ids, with meandered lengths."""
    ends = sorted((min(ids[u], ids[v]), max(ids[u], ids[v]), (u, v)) for u, v in net.edges)
    meander = rng.uniform(*MEANDER_RANGE, size=len(ends))
    rows = []
    for k, (a, b, (u, v)) in enumerate(ends):
        straight = np.hypot(*(np.subtract(net.xy[u], net.xy[v])))
        length = round(float(straight * meander[k]), COORD_DECIMALS)
        rows.append(
            [a, b, f"QP-{k + 1:05d}", f"{length:.{COORD_DECIMALS}f}", str(net.edges[(u, v)][1])]
        )
    return rows


def junction_rows(
    net: Network, ids: list[str], connections: np.ndarray, sources: dict[int, SourceSpec]
) -> list[list[str]]:
    """Rows of ``junctions.csv``, sorted by node id."""
    rows = []
    for i in sorted(range(len(ids)), key=ids.__getitem__):
        x, y = net.xy[i]
        kind = "source" if i in sources else "junction"
        rows.append(
            [
                ids[i],
                f"{x:.{COORD_DECIMALS}f}",
                f"{y:.{COORD_DECIMALS}f}",
                str(int(connections[i])),
                kind,
                DISTRICTS[net.district[i]].name,
            ]
        )
    return rows


# --- README ----------------------------------------------------------------------

README_TEMPLATE = """\
# Quillmere: an invented water distribution network

Quillmere is an **invented** small town in the invented Harrowdene Valley.
Its water network in `quillmere/` was **generated** by
`generate_quillmere.py`; it is not a survey of any real network, and every
name, id and number in it is made up.

> **Demo data only.** The tables describe the shape of a network (who is
> joined to whom, how long, how wide, how many properties hang off each
> junction). They are not a hydraulic model: there are no elevations,
> roughness values, demands, pumps, valves or pressure zones, and the sizes
> were drawn by simple rules. Do not use them for engineering decisions.

## Files

All files are UTF-8 CSV with a header row, `\\n` line endings and no index
column. Coordinates and lengths carry two decimals.

### `quillmere/pipes.csv`: one row per pipe (undirected)

| column | meaning | unit |
|---|---|---|
| `source` | id of one end junction (the alphabetically smaller id) | |
| `target` | id of the other end junction | |
| `pipe_id` | invented pipe id, `QP-00001` ... | |
| `length_m` | straight distance x meander factor in [{meander[0]:.2f}, {meander[1]:.2f}) | metres |
| `diameter_mm` | nominal diameter, one of {sizes} | millimetres |

### `quillmere/junctions.csv`: one row per node, each node once

| column | meaning | unit |
|---|---|---|
| `node` | `QJ-00001` ... for junctions, `QS-...` for sources | |
| `x`, `y` | position in a local projected frame, 0 to {frame:.0f} | metres |
| `connections` | properties served at the junction (0 for sources and mains) | count |
| `kind` | `junction` or `source` | |
| `district` | invented neighbourhood the node was generated in | |

Junction numbers are shuffled, so the row order says nothing about the
districts. The `district` column records how the town was drawn; it is a
useful reference zoning, not a ground truth of hydraulic zones.

### `quillmere/sources.csv`: one row per source

| column | meaning |
|---|---|
| `node` | node id, also listed in `junctions.csv` |
| `name` | invented name of the works, reservoir or tank |
| `kind` | `treatment_works`, `reservoir` or `tank` |

## Counts

| quantity | value |
|---|---|
| nodes (junctions + sources) | {nodes} |
| junctions | {junctions} |
| sources | {sources} |
| pipes | {pipes} |
| total pipe length | {length_km:.2f} km |
| total connections (properties served) | {connections} |
| mean degree (2 x pipes / nodes) | {mean_degree:.3f} |
| dead-end junctions (degree 1) | {dead_ends} |
| districts | {districts} |

| district | street pattern | nodes | connections |
|---|---|---|---|
{district_table}

## How it was generated

1. Each of the {districts} districts is a cloud of junctions inside a noisy
   ellipse: either a perturbed street grid (block about {grid:.0f} m) or an
   organic cluster of dart-thrown junctions joined by short Delaunay links.
2. The candidate streets of each district are thinned to a random spanning
   tree plus a share of loop-closing links, so districts have both loops and
   dendritic branches. Streets only join nearby junctions, and trunk mains
   and dangling branches are only placed where they cross no existing pipe,
   so the drawn network is planar: no two pipes cross (the script checks
   this).
3. Neighbouring districts are joined by only one to three trunk mains
   ({trunk} mm), with intermediate junctions every {chain:.0f} m or so.
   This gives the town a clear, but not perfect, zone structure.
4. Each source sits beyond its district rim and feeds it through a
   {source_main} mm main.
5. Short cul-de-sacs and long rural spurs dangle from the edges; new
   branches never cross an existing pipe and avoid the mere (lake).
6. District pipes are sized by hop distance from the sources and from the
   trunk-main ends; pipes on dead-end branches are {dead_end} mm. Connections per
   junction are Poisson draws capped at {cap}, plus {large} large consumers.

Every random draw comes from one `numpy.random.default_rng({seed})`, and
all output is rounded and sorted, so regenerating gives byte-identical
files. All tunable values are named constants at the top of the script.
The committed files were produced with NumPy 2.4 and SciPy 1.17; other
versions may draw a different, equally valid, town.

## Regenerate

```
python datasets/generate_quillmere.py            # writes datasets/quillmere/
python datasets/generate_quillmere.py --out DIR  # writes DIR/ (with its own README.md)
```

The script checks that the network is connected, has no self-loops, no
duplicate pipes and no crossing pipes, and that the node count is within {low} to {high}.
"""


def _district_table(net: Network, connections: np.ndarray) -> str:
    """Markdown rows of nodes and connections per district."""
    district = np.asarray(net.district)
    return "\n".join(
        f"| {spec.name} | {spec.style} | {int(np.sum(district == k))} "
        f"| {int(connections[district == k].sum())} |"
        for k, spec in enumerate(DISTRICTS)
    )


def render_readme(
    net: Network, connections: np.ndarray, n_sources: int, pipes: list[list[str]]
) -> str:
    """Fill the README template with the counts of the generated network."""
    degree = np.asarray(net.adjacency().sum(axis=1)).ravel()
    diameters = sorted({int(row[4]) for row in pipes})
    return README_TEMPLATE.format(
        frame=FRAME_SIZE_M,
        meander=MEANDER_RANGE,
        sizes=", ".join(str(d) for d in diameters),
        nodes=len(net.xy),
        junctions=len(net.xy) - n_sources,
        sources=n_sources,
        pipes=len(pipes),
        length_km=sum(float(row[3]) for row in pipes) / 1000.0,
        connections=int(connections.sum()),
        mean_degree=2.0 * len(pipes) / len(net.xy),
        dead_ends=int(np.sum(degree == 1)),
        districts=len(DISTRICTS),
        district_table=_district_table(net, connections),
        grid=GRID_SPACING_M,
        trunk=" or ".join(str(d) for d in TRUNK_DIAMETERS_MM),
        chain=CHAIN_NODE_SPACING_M,
        source_main=SOURCE_MAIN_DIAMETER_MM,
        dead_end=DEAD_END_DIAMETER_MM,
        cap=MAX_RESIDENTIAL_CONNECTIONS,
        large=LARGE_CONSUMER_COUNT,
        seed=SEED,
        low=JUNCTION_COUNT_RANGE[0],
        high=JUNCTION_COUNT_RANGE[1],
    )


# --- driver ------------------------------------------------------------------------


def build_network(rng: np.random.Generator) -> tuple[Network, dict[int, SourceSpec]]:
    """Run the construction steps listed in the module docstring."""
    net = Network()
    members = add_districts(rng, net)
    link_districts(rng, net, members)
    sources = add_sources(net, members)
    add_cul_de_sacs(rng, net, members)
    add_rural_spurs(rng, net)
    assign_diameters(net, sources)
    check_network(net)
    return net, sources


def write_outputs(out_dir: Path, readme: Path, seed: int = SEED) -> str:
    """Generate the network, write all files and return a summary line."""
    rng = np.random.default_rng(seed)
    net, sources = build_network(rng)
    connections = draw_connections(rng, net)
    ids = node_ids(rng, net, sources)
    pipes = pipe_rows(rng, net, ids)
    out_dir.mkdir(parents=True, exist_ok=True)
    _write_csv(
        out_dir / "pipes.csv",
        ["source", "target", "pipe_id", "length_m", "diameter_mm"],
        pipes,
    )
    _write_csv(
        out_dir / "junctions.csv",
        ["node", "x", "y", "connections", "kind", "district"],
        junction_rows(net, ids, connections, sources),
    )
    _write_csv(
        out_dir / "sources.csv",
        ["node", "name", "kind"],
        sorted([s.node, s.name, s.kind] for s in sources.values()),
    )
    readme.write_text(
        render_readme(net, connections, len(sources), pipes), encoding="utf-8", newline="\n"
    )
    return (
        f"Quillmere: {len(net.xy)} nodes, {len(net.edges)} pipes, "
        f"{len(sources)} sources, {int(connections.sum())} connections, "
        f"mean degree {2.0 * len(net.edges) / len(net.xy):.3f} -> {out_dir}"
    )


def build_parser() -> argparse.ArgumentParser:
    """Command-line parser of the generator."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument(
        "--out",
        type=Path,
        default=DEFAULT_OUT_DIR,
        help="output folder (default: quillmere/ next to this script); "
        "a non-default folder also receives its own README.md",
    )
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point; returns the process exit code."""
    args = build_parser().parse_args(argv)
    out_dir = args.out.resolve()
    readme = DEFAULT_README if out_dir == DEFAULT_OUT_DIR else out_dir / "README.md"
    print(write_outputs(out_dir, readme))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
