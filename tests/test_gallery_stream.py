"""The streamed road-like generator (specgraph.gallery.write_road_like).

Every property is checked from the written file alone, by outside code:
components by scipy.sparse.csgraph.connected_components, duplicates and
self-loops by numpy, planarity by networkx.check_planarity (the
Boyer-Myrvold test), the file contents by pandas and pyarrow readers.
"""

from __future__ import annotations

from pathlib import Path

import networkx as nx
import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from specgraph._sparse import int32_indexed
from specgraph.exceptions import ParameterError
from specgraph.gallery import ROAD_MEAN_DEGREE, write_road_like
from specgraph.io import read_edges

pq = pytest.importorskip("pyarrow.parquet")

#: (nodes, tile_nodes) pairs: one tile, a 2 x 2 grid, a 3 x 3 grid with small
#: tiles (many seams, corners with eight neighbours) and an uneven split.
LAYOUTS = [(300, 500), (2_000, 500), (3_000, 300), (1_237, 100)]


def links_of(path: Path) -> pd.DataFrame:
    """The edge table as pandas reads it (CSV) or pyarrow (Parquet)."""
    if path.suffix == ".parquet":
        return pq.read_table(path).to_pandas()
    return pd.read_csv(path)


def adjacency(table: pd.DataFrame, n: int) -> sp.csr_array:
    source, target = table["source"].to_numpy(), table["target"].to_numpy()
    return sp.coo_array((np.ones(source.size), (source, target)), shape=(n, n)).tocsr()


@pytest.mark.parametrize(("n", "tile_nodes"), LAYOUTS, ids=lambda v: str(v))
def test_connected_simple_and_on_target(tmp_path: Path, n: int, tile_nodes: int) -> None:
    written = write_road_like(tmp_path / "roads.csv", n, tile_nodes=tile_nodes, rng=3)
    table = links_of(written.path)
    assert list(table.columns) == ["source", "target", "weight"]
    assert written.links == len(table)
    assert written.nodes == n
    source, target = table["source"].to_numpy(), table["target"].to_numpy()
    # ids 0..n-1, each link once with source < target: no self-loops, and no
    # duplicates once keyed (numpy.unique).
    assert source.min() >= 0
    assert target.max() < n
    assert np.all(source < target)
    assert np.unique(source.astype(np.int64) * n + target).size == len(table)
    # One component over all n nodes (scipy.sparse.csgraph.connected_components):
    # an isolated node would be a component of its own.
    count, _ = connected_components(adjacency(table, n), directed=False)
    assert count == 1
    # Mean degree 2m/n on target up to rounding of the link count.
    assert abs(2 * len(table) / n - ROAD_MEAN_DEGREE) <= 2 / n
    weight = table["weight"].to_numpy()
    assert np.all(np.isfinite(weight))
    assert np.all(weight > 0)


def test_planar(tmp_path: Path) -> None:
    """A many-tile network is planar (networkx.check_planarity, Boyer-Myrvold)."""
    written = write_road_like(tmp_path / "roads.csv", 3_000, tile_nodes=200, rng=11)
    assert written.tiles == 16
    table = links_of(written.path)
    graph = nx.Graph()
    graph.add_edges_from(zip(table["source"], table["target"], strict=True))
    planar, _ = nx.check_planarity(graph)
    assert planar


@pytest.mark.parametrize(("n", "tile_nodes"), [(3_000, 200), (5_000, 100)], ids=str)
def test_links_are_delaunay_links_holding_the_minimum_spanning_tree(
    tmp_path: Path, n: int, tile_nodes: int
) -> None:
    """Checked against scipy on the written node table.

    Every link is a link of scipy.spatial.Delaunay of all the points (so the
    network is planar), every link of the Euclidean minimum spanning tree is
    kept (scipy.sparse.csgraph.minimum_spanning_tree over the Delaunay links,
    which hold one: Shamos and Hoey 1975, doi:10.1109/SFCS.1975.8), and each
    weight is the inverse Euclidean length.
    """
    from scipy.sparse.csgraph import minimum_spanning_tree
    from scipy.spatial import Delaunay

    written = write_road_like(
        tmp_path / "r.parquet", n, tile_nodes=tile_nodes, rng=9, nodes=tmp_path / "n.parquet"
    )
    assert written.tiles >= 16
    nodes = links_of(tmp_path / "n.parquet")
    np.testing.assert_array_equal(nodes["node"], np.arange(n))
    xy = nodes[["x", "y"]].to_numpy()
    assert xy.min() >= 0.0
    assert xy.max() <= 1.0
    table = links_of(written.path)
    source, target = table["source"].to_numpy(), table["target"].to_numpy()
    indptr, indices = Delaunay(xy).vertex_neighbor_vertices
    delaunay = sp.csr_array((np.ones(indices.size), indices, indptr), shape=(n, n))
    assert np.all(delaunay[source, target] == 1)
    length = np.linalg.norm(xy[source] - xy[target], axis=1)
    np.testing.assert_allclose(table["weight"].to_numpy(), 1.0 / length, rtol=1e-12)
    rows = np.repeat(np.arange(n), np.diff(indptr))
    span = sp.csr_array((np.linalg.norm(xy[rows] - xy[indices], axis=1), (rows, indices)))
    # 32-bit indices: scipy 1.15, the oldest allowed, refuses 64-bit ones here
    tree = minimum_spanning_tree(int32_indexed(span)).tocoo()
    kept = set(zip(source.tolist(), target.tolist(), strict=True))
    lo, hi = np.minimum(tree.row, tree.col), np.maximum(tree.row, tree.col)
    assert set(zip(lo.tolist(), hi.tolist(), strict=True)) <= kept


@pytest.mark.parametrize("degree", [2.7, 3.0, 5.0])
def test_other_mean_degrees(tmp_path: Path, degree: float) -> None:
    written = write_road_like(tmp_path / "r.csv", 2_000, mean_degree=degree, tile_nodes=400, rng=1)
    table = links_of(written.path)
    assert abs(2 * len(table) / 2_000 - degree) <= 2 / 2_000
    assert connected_components(adjacency(table, 2_000), directed=False)[0] == 1


def test_deterministic_bytes(tmp_path: Path) -> None:
    for name in ("a.parquet", "b.parquet", "a.csv", "b.csv"):
        write_road_like(tmp_path / name, 2_500, tile_nodes=300, rng=42)
    assert (tmp_path / "a.parquet").read_bytes() == (tmp_path / "b.parquet").read_bytes()
    assert (tmp_path / "a.csv").read_bytes() == (tmp_path / "b.csv").read_bytes()
    # A Generator seeds the same way as its int seed.
    write_road_like(tmp_path / "c.csv", 2_500, tile_nodes=300, rng=np.random.default_rng(42))
    assert (tmp_path / "c.csv").read_bytes() == (tmp_path / "a.csv").read_bytes()
    write_road_like(tmp_path / "d.csv", 2_500, tile_nodes=300, rng=43)
    assert (tmp_path / "d.csv").read_bytes() != (tmp_path / "a.csv").read_bytes()


def test_other_tile_size_is_another_valid_network(tmp_path: Path) -> None:
    small = write_road_like(tmp_path / "small.csv", 2_500, tile_nodes=200, rng=5)
    large = write_road_like(tmp_path / "large.csv", 2_500, tile_nodes=2_000, rng=5)
    assert small.tiles > large.tiles
    assert small.path.read_bytes() != large.path.read_bytes()
    for written in (small, large):
        table = links_of(written.path)
        assert connected_components(adjacency(table, 2_500), directed=False)[0] == 1
        assert len(table) == 5_000


def test_parquet_and_csv_hold_the_same_links(tmp_path: Path) -> None:
    csv = write_road_like(tmp_path / "r.csv", 2_000, tile_nodes=300, rng=8)
    parquet = write_road_like(tmp_path / "r.parquet", 2_000, tile_nodes=300, rng=8)
    assert (csv.format, parquet.format) == ("csv", "parquet")
    assert pq.ParquetFile(parquet.path).metadata.num_row_groups == parquet.tiles
    # pandas' CSV reader, weights parsed by Python's correctly rounded float(),
    # against pyarrow's Parquet reader.
    from_csv = pd.read_csv(csv.path, dtype={"weight": str})
    from_csv["weight"] = from_csv["weight"].map(float)
    pd.testing.assert_frame_equal(from_csv, links_of(parquet.path), check_dtype=False)
    # Format by argument, not suffix.
    other = write_road_like(tmp_path / "r.edges", 2_000, tile_nodes=300, rng=8, format="parquet")
    assert other.path.read_bytes() == parquet.path.read_bytes()


def test_specgraph_reads_it(tmp_path: Path) -> None:
    written = write_road_like(tmp_path / "r.parquet", 600, tile_nodes=200, rng=2)
    network = read_edges(written.path)
    assert network.n_nodes == 600
    # Undirected adjacency: each written link appears twice (scipy nnz).
    assert network.adjacency.nnz == 2 * written.links


def test_bad_arguments_write_nothing(tmp_path: Path) -> None:
    target = tmp_path / "r.csv"
    with pytest.raises(ParameterError, match="mean_degree"):
        write_road_like(target, 100, mean_degree=2.5)
    with pytest.raises(ParameterError, match="tile_nodes"):
        write_road_like(target, 100, tile_nodes=10)
    with pytest.raises(ParameterError, match="format"):
        write_road_like(target, 100, format="xlsx")
    with pytest.raises(ParameterError, match="n must"):
        write_road_like(target, 3)
    with pytest.raises(ParameterError, match="nodes"):
        write_road_like(target, 100, nodes=target)
    assert list(tmp_path.iterdir()) == []
