"""Networks shaped like real GIS or asset-database exports, written as the files an analyst has.

Built with numpy, scipy and networkx only (never with specgraph), so the tests that read
them check specgraph against an outside construction. What real exports hold and the clean
gallery does not (common practice: every GIS export of a pipe or road layer has them):

* a main network (a thinned Delaunay triangulation of random points: near-planar, like
  pipes or roads; Delaunay, *Bull. Acad. Sci. URSS* 6 (1934) 793-800, as
  ``scipy.spatial.Delaunay``) with link ids in their own column (``pipe_id``) and lengths;
* stray fragments: small connected pieces of 2 to 5 nodes away from the main network
  (digitising leftovers, private pipes, a dead-end stub cut from its main);
* isolated nodes that only the node table lists (hydrants or meters without a link);
* named existing districts (text labels, as a utility holds them), one per grid cell of
  the main network's coordinates;
* supply points (text ids) in a separate list.

Ids are text such as ``"QM-J000123"`` (junctions) and ``"QM-P000045"`` (pipes) of the
invented town of Quillmere.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import networkx as nx
import numpy as np
from scipy.spatial import Delaunay

#: Share of the triangulation's non-tree links kept (mean degree about 3, like pipes).
EXTRA_LINK_SHARE = 0.35
#: District grid: DISTRICT_GRID x DISTRICT_GRID named cells over the unit square.
DISTRICT_GRID = 3
#: Names of the existing districts, row by row over the grid (invented).
DISTRICT_NAMES = (
    "Quillmere North Heights",
    "Bramble Rise",
    "Old Weir",
    "Millpond",
    "Town Centre",
    "Larkfield",
    "South Quay",
    "Tannery Lane",
    "Harrow End",
)


@dataclass(frozen=True)
class ExportShaped:
    """The files of one export and what a test needs to check against."""

    edges: Path
    nodes: Path
    districts: Path
    supplies: Path
    graph: nx.Graph  # every node and link, ids as written
    main: frozenset[str]  # node ids of the main network
    fragments: tuple[frozenset[str], ...]  # node ids of each stray fragment
    isolated: frozenset[str]  # node ids listed only in the node table


def junction(i: int) -> str:
    return f"QM-J{i:06d}"


def write_export(
    folder: Path,
    *,
    n_main: int = 3000,
    n_fragments: int = 12,
    n_isolated: int = 20,
    n_supplies: int = 6,
    seed: int = 0,
) -> ExportShaped:
    """Write ``edges.csv``, ``nodes.csv``, ``districts.csv`` and ``supplies.csv`` to ``folder``."""
    rng = np.random.default_rng(seed)
    points = rng.random((n_main, 2)) * 1000.0  # metres
    simplices = Delaunay(points).simplices
    pairs = np.vstack([simplices[:, [0, 1]], simplices[:, [1, 2]], simplices[:, [0, 2]]])
    pairs = np.unique(np.sort(pairs, axis=1), axis=0)
    full = nx.Graph()
    lengths = np.linalg.norm(points[pairs[:, 0]] - points[pairs[:, 1]], axis=1)
    for (a, b), d in zip(pairs, lengths, strict=True):
        full.add_edge(int(a), int(b), length=float(d))
    tree = nx.minimum_spanning_tree(full, weight="length")
    rest = [e for e in full.edges if not tree.has_edge(*e)]
    extra = rng.choice(len(rest), size=int(EXTRA_LINK_SHARE * len(rest)), replace=False)
    links = [(a, b, full[a][b]["length"]) for a, b in tree.edges]
    links += [(rest[i][0], rest[i][1], full[rest[i][0]][rest[i][1]]["length"]) for i in extra]
    coords = {junction(i): (float(x), float(y)) for i, (x, y) in enumerate(points)}

    # stray fragments: paths of 2-5 nodes placed outside the main network's square
    fragments = []
    next_id = n_main
    for f in range(n_fragments):
        size = int(rng.integers(2, 6))
        ids = [junction(next_id + j) for j in range(size)]
        next_id += size
        base = np.array([1100.0 + 40.0 * f, 1100.0 + 25.0 * (f % 3)])
        for j, node in enumerate(ids):
            coords[node] = (float(base[0] + 5.0 * j), float(base[1]))
        for j in range(size - 1):
            links.append((ids[j], ids[j + 1], 5.0))
        fragments.append(frozenset(ids))
    isolated = [junction(next_id + j) for j in range(n_isolated)]
    for j, node in enumerate(isolated):
        coords[node] = (float(rng.random() * 1000.0), float(-50.0 - j))

    graph = nx.Graph()
    graph.add_nodes_from(coords)
    rows = []
    for p, (a, b, length) in enumerate(links):
        u = a if isinstance(a, str) else junction(int(a))
        v = b if isinstance(b, str) else junction(int(b))
        graph.add_edge(u, v, length=length, pipe_id=f"QM-P{p:06d}")
        rows.append(f"QM-P{p:06d},{u},{v},{length:.3f}")
    folder.mkdir(parents=True, exist_ok=True)
    edges = folder / "edges.csv"
    edges.write_text("pipe_id,from,to,length\n" + "\n".join(rows) + "\n", encoding="utf-8")
    nodes = folder / "nodes.csv"
    nodes.write_text(
        "node,x,y\n" + "".join(f"{k},{x:.3f},{y:.3f}\n" for k, (x, y) in coords.items()),
        encoding="utf-8",
    )
    cell = np.minimum((points / 1000.0 * DISTRICT_GRID).astype(int), DISTRICT_GRID - 1)
    names = [DISTRICT_NAMES[r * DISTRICT_GRID + c] for c, r in cell]
    districts = folder / "districts.csv"
    districts.write_text(
        "node,district\n" + "".join(f"{junction(i)},{names[i]}\n" for i in range(n_main)),
        encoding="utf-8",
    )
    supplies = folder / "supplies.csv"
    chosen = rng.choice(n_main, size=n_supplies, replace=False)
    supplies.write_text("node\n" + "".join(f"{junction(int(i))}\n" for i in chosen), "utf-8")
    return ExportShaped(
        edges,
        nodes,
        districts,
        supplies,
        graph,
        frozenset(junction(i) for i in range(n_main)),
        tuple(fragments),
        frozenset(isolated),
    )
