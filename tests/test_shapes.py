"""Hostile shapes: a hub with many leaves must not build a dense matrix of the network.

Sources: the normalized Laplacian of the star :math:`K_{1,m}` has eigenvalues
0, 1 (multiplicity :math:`m - 1`) and 2 (closed form; F. R. K. Chung,
*Spectral Graph Theory*, AMS, 1997, section 1.2, example 1.2); approximate
minimum degree's dense-row rule, :math:`10 \\sqrt{n}` entries (Amestoy, Davis
and Duff, ACM TOMS 30(3), 2004); networkx ``is_connected`` for the zones.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
import scipy.sparse as sp

from specgraph import find_zones, gallery, laplacian, smallest_eigenpairs
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
