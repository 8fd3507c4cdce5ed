"""Hostile shapes: a hub with many leaves must not build a dense matrix of the network.

Sources: the normalized Laplacian of the star :math:`K_{1,m}` has eigenvalues
0, 1 (multiplicity :math:`m - 1`) and 2 (closed form; F. R. K. Chung,
*Spectral Graph Theory*, AMS, 1997, section 1.2, example 1.2), of the complete
bipartite :math:`K_{m,n}` 0, 1 (multiplicity :math:`m + n - 2`) and 2, of the
path on :math:`n` nodes :math:`1 - \\cos(\\pi k / (n - 1))` (same section); approximate
minimum degree's dense-row rule, :math:`10 \\sqrt{n}` entries (Amestoy, Davis
and Duff, ACM TOMS 30(3), 2004); networkx ``is_connected`` for the zones.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp
from hypothesis import given, settings
from hypothesis import strategies as st

from specgraph import Network, find_zones, gallery, laplacian, smallest_eigenpairs
from specgraph.cli import main
from specgraph.eigen import _api
from specgraph.eigen._cost import Forecast
from specgraph.eigen._hierarchy import DENSE_CORE_MAX, CoarseningStalled, build_hierarchy
from specgraph.eigen._lanczos import ordering_for
from specgraph.exceptions import ResourceError

LEAVES = 3 * DENSE_CORE_MAX


def _star_values(k: int) -> np.ndarray:
    """The k smallest normalized-Laplacian eigenvalues of a star (Chung 1997): 0, then 1s."""
    return np.concatenate([[0.0], np.ones(k - 1)])


def test_hub_rows_are_ordered_by_colamd_and_others_by_minimum_degree() -> None:
    """AMD's dense-row threshold 10 sqrt(n): a star's centre is dense, a grid has no such row."""
    assert ordering_for(laplacian(gallery.star(LEAVES)).matrix) == "COLAMD"
    assert ordering_for(laplacian(gallery.grid(60, 60)).matrix) == "MMD_AT_PLUS_A"
    # a hub of just over 10 sqrt(n) links among a path is dense; one just under is not
    n = 10_000
    for extra, expected in ((1_001, "COLAMD"), (999, "MMD_AT_PLUS_A")):
        path = sp.diags_array([np.ones(n - 1), np.ones(n - 1)], offsets=[-1, 1], format="lil")
        path[0, 2 : 2 + extra] = 1.0
        path[2 : 2 + extra, 0] = 1.0
        assert ordering_for(sp.csr_array(path)) == expected


def test_a_stalled_aggregation_refuses_the_dense_core() -> None:
    """No dense n x n core for a star: its one aggregate is too few for a block of 8."""
    op = laplacian(gallery.star(LEAVES))
    null = np.full(LEAVES + 1, 1.0)
    with pytest.raises(CoarseningStalled, match="coarsest level of"):
        build_hierarchy(op.matrix, null, width=8)


def test_auto_takes_shift_invert_when_the_multilevel_hierarchy_stalls(monkeypatch) -> None:
    """With multilevel forecast, a star's stall hands over to Lanczos; pairs by the closed form."""
    op = laplacian(gallery.star(LEAVES))
    forced = Forecast("multilevel", {}, {}, note="forced by the test")
    monkeypatch.setattr(_api, "_decide", lambda *args, **kwargs: (forced, None))
    result = smallest_eigenpairs(op, 6, rng=0)
    np.testing.assert_allclose(result.values, _star_values(6), atol=1e-9)
    assert "lanczos" in result.method
    with pytest.raises(ResourceError, match="hub"):
        smallest_eigenpairs(op, 6, method="multilevel", rng=0)


def test_a_star_is_zoned_into_connected_zones() -> None:
    """Every zone of a star connected (networkx); the only such zoning: hub zone and lone leaves."""
    net = gallery.star(LEAVES)
    zoning = find_zones(net, 4, rng=0)
    labels = np.asarray(zoning.labels)
    graph = nx.star_graph(LEAVES)
    for z in range(zoning.n_zones):
        assert nx.is_connected(graph.subgraph(np.flatnonzero(labels == z).tolist()))
    assert zoning.n_zones == 4
    assert np.bincount(labels).min() == 1


def test_a_hub_is_a_transfer_candidate_once() -> None:
    """Leaves of one zone all touch the hub of another: the hub is queued once, not per leaf.

    Queued per leaf, each entry read the hub's links again (quadratic in the leaves).
    """
    from specgraph.zones._balance import _buckets
    from specgraph.zones._connectivity import edge_rows
    from specgraph.zones._transfers import _candidates

    a = gallery.star(50).adjacency  # node 0 is the centre (networkx's star_graph)
    labels = np.zeros(51, dtype=np.int64)
    labels[1:31] = 1  # thirty leaves in zone 1, the hub and twenty leaves in zone 0
    pointers, nodes = _buckets(labels, edge_rows(a), a.indices, 2)
    out = _candidates(0, 1, pointers, nodes, a.indptr, a.indices, labels)
    assert out.tolist() == [0]


# ------------------------------------------------------------ the shape catalogue
# Small versions of the shapes of docs/shapes.md (benchmarks/bench_shapes.py runs
# them large). Each builder returns link ends; nodes are 0 .. n-1.


def _star_links(leaves: int) -> tuple[np.ndarray, np.ndarray]:
    return np.zeros(leaves, np.int64), np.arange(1, leaves + 1)


def _multi_star_links(hubs: int, leaves: int) -> tuple[np.ndarray, np.ndarray]:
    """``hubs`` hubs in a ring, each with ``leaves`` leaves."""
    ring = np.arange(hubs)
    leaf = np.arange(hubs, hubs + hubs * leaves)
    return np.concatenate([ring, leaf % hubs]), np.concatenate([(ring + 1) % hubs, leaf])


def _broom_links(handle: int, leaves: int) -> tuple[np.ndarray, np.ndarray]:
    """A path of ``handle`` nodes whose last node is the centre of a star of ``leaves``."""
    i = np.arange(handle - 1)
    leaf = np.arange(handle, handle + leaves)
    return np.concatenate([i, np.full(leaves, handle - 1)]), np.concatenate([i + 1, leaf])


def _caterpillar_links(spine: int, legs: int) -> tuple[np.ndarray, np.ndarray]:
    """A path of ``spine`` nodes, each with ``legs`` leaves."""
    i = np.arange(spine - 1)
    leaf = np.arange(spine, spine + spine * legs)
    return np.concatenate([i, (leaf - spine) // legs]), np.concatenate([i + 1, leaf])


def _bipartite_links(hubs: int, others: int) -> tuple[np.ndarray, np.ndarray]:
    """Complete bipartite K(hubs, others): nodes 0..hubs-1 on one side."""
    return np.repeat(np.arange(hubs), others), np.tile(np.arange(hubs, hubs + others), hubs)


def _path_links(n: int) -> tuple[np.ndarray, np.ndarray]:
    return np.arange(n - 1), np.arange(1, n)


def _grid_hub_links(side: int, rng: int) -> tuple[np.ndarray, np.ndarray]:
    """A side x side grid plus one hub linked to 10% of its nodes."""
    idx = np.arange(side * side).reshape(side, side)
    src = np.concatenate([idx[:, :-1].ravel(), idx[:-1, :].ravel()])
    dst = np.concatenate([idx[:, 1:].ravel(), idx[1:, :].ravel()])
    chosen = np.random.default_rng(rng).choice(side * side, size=side * side // 10, replace=False)
    return np.concatenate([src, np.full(chosen.size, side * side)]), np.concatenate([dst, chosen])


def _feeder_links(n: int, rng: int) -> tuple[np.ndarray, np.ndarray]:
    """A radial feeder: each node hangs from one of the 20 nodes before it."""
    i = np.arange(1, n)
    parent = np.maximum(0, i - 1 - np.random.default_rng(rng).integers(0, 20, size=n - 1))
    return parent, i


def _network(links: tuple[np.ndarray, np.ndarray], weight: np.ndarray | None = None) -> Network:
    src, dst = links
    n = int(max(src.max(), dst.max())) + 1
    return Network.from_links(src, dst, weight, node_ids=np.arange(n))


def _check_zoning(links: tuple[np.ndarray, np.ndarray], zoning, asked: int) -> None:
    """Every node in exactly one zone, every zone connected (networkx), the count as asked.

    A count below the one asked must come with a warning that explains it.
    """
    labels = np.asarray(zoning.labels)
    n = labels.size
    assert labels.min() == 0
    assert labels.max() == zoning.n_zones - 1
    assert np.unique(labels).size == zoning.n_zones
    graph = nx.Graph()
    graph.add_nodes_from(range(n))
    graph.add_edges_from(zip(*(a.tolist() for a in links), strict=True))
    for z in range(zoning.n_zones):
        assert nx.is_connected(graph.subgraph(np.flatnonzero(labels == z).tolist()))
    if zoning.n_zones < asked:
        assert zoning.warnings, "fewer zones than asked, without a warning"
    else:
        assert zoning.n_zones == asked


SHAPES = {
    "star": lambda: _star_links(2_000),
    "multi-star": lambda: _multi_star_links(6, 300),
    "broom": lambda: _broom_links(500, 1_500),
    "caterpillar": lambda: _caterpillar_links(400, 4),
    "bipartite": lambda: _bipartite_links(4, 1_000),
    "path": lambda: _path_links(3_000),
    "grid-hub": lambda: _grid_hub_links(40, 1),
    "feeder": lambda: _feeder_links(3_000, 5),
}


@pytest.mark.parametrize("name", sorted(SHAPES))
def test_every_catalogue_shape_is_zoned_into_connected_zones(name: str) -> None:
    """Each shape of docs/shapes.md, small: 8 connected zones (networkx is_connected)."""
    links = SHAPES[name]()
    _check_zoning(links, find_zones(_network(links), 8, rng=0), 8)


def test_very_unequal_weights_give_connected_zones_and_finite_scores() -> None:
    """Grid weights log-uniform on [1e-6, 1e6]: zones connected (networkx), scores finite."""
    idx = np.arange(30 * 30).reshape(30, 30)
    src = np.concatenate([idx[:, :-1].ravel(), idx[:-1, :].ravel()])
    dst = np.concatenate([idx[:, 1:].ravel(), idx[1:, :].ravel()])
    w = 10.0 ** np.random.default_rng(2).uniform(-6, 6, size=src.size)
    zoning = find_zones(_network((src, dst), w), 8, rng=0)
    _check_zoning((src, dst), zoning, 8)
    numbers = zoning.zones.select_dtypes("number").to_numpy(float)
    assert np.isfinite(numbers).all()


def test_the_shapes_through_the_command_line(tmp_path) -> None:
    """A broom written as CSV, zoned by ``specgraph zones``: zones.csv connected (networkx)."""
    links = _broom_links(300, 700)
    edges = tmp_path / "broom.csv"
    pd.DataFrame({"source": links[0], "target": links[1]}).to_csv(edges, index=False)
    out = tmp_path / "out"
    assert main(["zones", str(edges), "--zones", "8", "--out", str(out), "--quiet"]) == 0
    table = pd.read_csv(out / "zones.csv")
    labels = np.empty(1_000, np.int64)
    labels[table["node"].to_numpy()] = table["zone"].to_numpy()
    graph = nx.Graph(list(zip(*(a.tolist() for a in links), strict=True)))
    assert sorted(set(labels.tolist())) == list(range(8))
    for z in range(8):
        assert nx.is_connected(graph.subgraph(np.flatnonzero(labels == z).tolist()))


# Closed forms of the normalized Laplacian N = I - D^-1/2 A D^-1/2 (F. R. K. Chung,
# Spectral Graph Theory, AMS 1997, section 1.2, examples 1.2 to 1.4): the complete
# bipartite K(m, n) has 0, 1 (multiplicity m + n - 2) and 2; the path on n nodes
# has 1 - cos(pi k / (n - 1)), k = 0 .. n - 1.


@pytest.mark.parametrize(("hubs", "others"), [(4, 60), (3, 200), (1, 50)])
def test_complete_bipartite_spectrum_is_the_closed_form(hubs: int, others: int) -> None:
    """Every eigenvalue of N for K(m, n) (numpy eigvalsh) against 0, 1 x (m+n-2), 2 (Chung 1997)."""
    op = laplacian(_network(_bipartite_links(hubs, others)))
    values = np.linalg.eigvalsh(op.matrix.toarray())
    expected = np.concatenate([[0.0], np.ones(hubs + others - 2), [2.0]])
    np.testing.assert_allclose(values, expected, atol=1e-10)


def test_complete_bipartite_smallest_pairs_at_a_hub_heavy_size() -> None:
    """K(4, 12,000), too large for a dense solve: the smallest pairs are 0 then 1s (Chung 1997)."""
    op = laplacian(_network(_bipartite_links(4, 12_000)))
    result = smallest_eigenpairs(op, 6, rng=0)
    np.testing.assert_allclose(result.values, _star_values(6), atol=1e-8)


def test_path_spectrum_is_the_closed_form() -> None:
    """The smallest eigenvalues of N on a 20,000-node path: 1 - cos(pi k / (n - 1)) (Chung 1997)."""
    n = 20_000
    op = laplacian(_network(_path_links(n)))
    result = smallest_eigenpairs(op, 6, rng=0)
    expected = 1.0 - np.cos(np.pi * np.arange(6) / (n - 1))
    np.testing.assert_allclose(result.values, expected, rtol=1e-4, atol=1e-10)
    # and every eigenvalue of a short path (numpy eigvalsh)
    small = laplacian(_network(_path_links(40))).matrix.toarray()
    np.testing.assert_allclose(
        np.linalg.eigvalsh(small), 1.0 - np.cos(np.pi * np.arange(40) / 39), atol=1e-10
    )


# ------------------------------------------------------------ property tests
_SHAPE_STRATEGY = st.one_of(
    st.tuples(st.just("star"), st.integers(8, 400)).map(lambda t: _star_links(t[1])),
    st.tuples(st.integers(2, 9), st.integers(2, 60)).map(lambda t: _multi_star_links(*t)),
    st.tuples(st.integers(2, 200), st.integers(1, 300)).map(lambda t: _broom_links(*t)),
    st.tuples(st.integers(2, 150), st.integers(0, 6)).map(lambda t: _caterpillar_links(*t)),
    st.tuples(st.integers(1, 6), st.integers(2, 200)).map(lambda t: _bipartite_links(*t)),
    st.integers(2, 600).map(_path_links),
)


@settings(max_examples=25, deadline=None, database=None, derandomize=True)
@given(links=_SHAPE_STRATEGY, asked=st.integers(2, 8))
def test_generated_shapes_keep_the_zoning_invariants(links, asked: int) -> None:
    """Random hub, leaf, handle and spine counts: every node in one zone, zones connected."""
    net = _network(links)
    asked = min(asked, net.n_nodes)  # more zones than nodes is refused (a ParameterError)
    _check_zoning(links, find_zones(net, asked, rng=0), asked)


@pytest.mark.slow
@settings(max_examples=15, deadline=None, database=None)
@given(
    links=st.one_of(
        st.integers(2_000, 20_000).map(_star_links),
        st.tuples(st.integers(2, 40), st.integers(50, 800)).map(lambda t: _multi_star_links(*t)),
        st.tuples(st.integers(100, 5_000), st.integers(100, 10_000)).map(
            lambda t: _broom_links(*t)
        ),
        st.tuples(st.integers(1, 8), st.integers(1_000, 10_000)).map(
            lambda t: _bipartite_links(*t)
        ),
        st.tuples(st.integers(10, 80), st.integers(0, 10)).map(lambda t: _grid_hub_links(*t)),
        st.tuples(st.integers(1_000, 20_000), st.integers(0, 99)).map(lambda t: _feeder_links(*t)),
    ),
    asked=st.integers(2, 16),
)
def test_larger_generated_shapes_keep_the_zoning_invariants(links, asked: int) -> None:
    """The same invariants on shapes of thousands of nodes (slow)."""
    net = _network(links)
    asked = min(asked, net.n_nodes)  # more zones than nodes is refused (a ParameterError)
    _check_zoning(links, find_zones(net, asked, rng=0), asked)


def test_a_long_path_brings_the_shift_down_to_its_eigenvalues(caplog) -> None:
    """A 100,000-node path: wanted values far below the shift; the shift follows them.

    The values against the closed form 1 - cos(pi k / (n - 1)) (Chung 1997, as above).
    """
    n = 100_000
    op = laplacian(_network(_path_links(n)))
    with caplog.at_level("INFO", logger="specgraph.eigen._lanczos"):
        result = smallest_eigenpairs(op, 9, method="lanczos", rng=0)
    assert "crowd below the shift" in caplog.text
    expected = 1.0 - np.cos(np.pi * np.arange(9) / (n - 1))
    np.testing.assert_allclose(result.values, expected, rtol=1e-6, atol=1e-14)
