"""Multilevel zoning: coarsening, refinement with coarse volumes, the multilevel path, V-cycles.

Sources: networkx's ``normalized_cut_size`` and ``volume`` for the objective
on the finest network (through :func:`nx_normalized_cut` of test_refine);
exhaustive enumeration of every labeling of a coarse network of at most 6
nodes for the optimum, each scored by networkx on the finer network it
stands for; networkx's ``is_connected`` for zone connectivity; the dense
product :math:`P^T A P` (numpy) for the coarse links.
"""

from __future__ import annotations

import itertools

import networkx as nx
import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp
from sklearn.metrics import adjusted_rand_score
from test_refine import NCUT_RTOL, nx_graph, nx_normalized_cut

from specgraph import Network, gallery, read_edges
from specgraph.exceptions import ConstraintError, ParameterError
from specgraph.zones import ZoneConstraints, find_zones, refine_zoning
from specgraph.zones._coarsen import coarsen
from specgraph.zones._levels import COARSEST_PER_ZONE, MULTILEVEL_MIN_ZONES, choose_path
from specgraph.zones._refine import ncut_with_volumes, refine_boundary


def _free(n: int) -> dict[str, np.ndarray]:
    return {
        "sizes": np.ones(n),
        "apart": np.full(n, -1),
        "sources": np.zeros(n, dtype=bool),
        "held": np.zeros(n, dtype=bool),
    }


def _weighted(graph: nx.Graph, seed: int) -> sp.csr_array:
    rng = np.random.default_rng(seed)
    for u, v in graph.edges:
        graph[u][v]["weight"] = float(rng.uniform(0.5, 2.0))
    return sp.csr_array(nx.to_scipy_sparse_array(graph, nodelist=range(len(graph))))


# ------------------------------------------------------------------ coarsening
def test_coarse_links_and_volumes_are_those_of_the_finer_network() -> None:
    """Coarse links = off-diagonal of P^T A P (dense numpy); volumes = summed fine degrees."""
    a = gallery.road_like(400, rng=3).adjacency
    ladder = coarsen(a, **_free(400), cap=np.inf, target=20, rng=np.random.default_rng(0))
    assert len(ladder.levels) > 2
    for fine, coarse in itertools.pairwise(ladder.levels):
        p = np.eye(coarse.n_nodes)[fine.parent]  # (n, m) node-to-coarse-node indicator
        dense = p.T @ fine.adjacency.toarray() @ p
        np.fill_diagonal(dense, 0.0)
        np.testing.assert_allclose(coarse.adjacency.toarray(), dense, rtol=1e-12)
        np.testing.assert_allclose(coarse.volumes, p.T @ fine.volumes, rtol=1e-12)
        # every coarse node holds one or two nodes of the level below
        assert np.bincount(fine.parent).max() <= 2
    np.testing.assert_allclose(ladder.levels[0].volumes, np.asarray(a.sum(axis=1)).ravel())


def test_coarsening_keeps_sources_tags_and_cap_apart() -> None:
    n = 600
    a = gallery.road_like(n, rng=5).adjacency
    rng = np.random.default_rng(1)
    sources = np.zeros(n, dtype=bool)
    sources[rng.choice(n, 40, replace=False)] = True
    apart = np.where(rng.random(n) < 0.3, rng.integers(0, 5, n), -1)
    sizes = rng.uniform(0.5, 3.0, n)
    cap = 12.0
    ladder = coarsen(
        a, sizes=sizes, apart=apart, sources=sources, held=sources, cap=cap, target=30, rng=rng
    )
    assert len(ladder.levels) >= 3
    assert ladder.coarsest.n_nodes < n / 2
    owner = ladder.owner(len(ladder.levels) - 1)
    m = ladder.coarsest.n_nodes
    assert np.bincount(owner[sources], minlength=m).max() == 1  # never two sources
    for c in range(m):
        tags = np.unique(apart[(owner == c) & (apart >= 0)])
        assert tags.size <= 1  # never two different tags
    coarse_sizes = np.bincount(owner, weights=sizes, minlength=m)
    np.testing.assert_allclose(ladder.coarsest.sizes, coarse_sizes)
    assert coarse_sizes.max() <= cap + 1e-9
    assert np.array_equal(ladder.coarsest.held, np.bincount(owner[sources], minlength=m) > 0)


def test_star_halves_at_every_level() -> None:
    """A hub with many leaves: matching merges one leaf per level; leftover pairing halves it."""
    n = 1001
    star = nx.star_graph(n - 1)
    a = sp.csr_array(nx.to_scipy_sparse_array(star, nodelist=range(n)))
    ladder = coarsen(a, **_free(n), cap=np.inf, target=10, rng=np.random.default_rng(0))
    sizes = [level.n_nodes for level in ladder.levels]
    assert sizes[-1] <= 10
    assert all(b <= 0.6 * s for s, b in itertools.pairwise(sizes))


# ------------------------------------------------- refinement with coarse volumes
@pytest.mark.parametrize("seed", [0, 1, 2])
def test_coarse_ncut_equals_ncut_of_the_projection(seed: int) -> None:
    """Every labeling of a coarse level has, with its volumes, networkx's NCut of its projection."""
    graph = nx.gnm_random_graph(10, 22, seed=seed)
    assert nx.is_connected(graph)
    a = _weighted(graph, seed)
    ladder = coarsen(a, **_free(10), cap=np.inf, target=6, rng=np.random.default_rng(seed))
    owner = ladder.owner(len(ladder.levels) - 1)
    coarse = ladder.coarsest
    assert coarse.n_nodes <= 6
    for labels in itertools.product(range(2), repeat=coarse.n_nodes):
        labels = np.array(labels)
        if labels.min() == labels.max():
            continue
        fine = labels[owner]
        assert ncut_with_volumes(coarse.adjacency, labels, 2, coarse.volumes) == pytest.approx(
            nx_normalized_cut(graph, fine), rel=NCUT_RTOL
        )


def test_refinement_with_volumes_reaches_the_brute_force_optimum() -> None:
    """Brute force over every connected 2-zone labeling of a coarse level (scored by networkx on
    the finer graph): from one valid move away from the optimum, refinement with the coarse
    volumes reaches it (the argument of test_refine's one-move test, now with volumes)."""
    graph = nx.connected_watts_strogatz_graph(12, 4, 0.3, seed=4)
    a = _weighted(graph, 4)
    ladder = coarsen(a, **_free(12), cap=np.inf, target=6, rng=np.random.default_rng(2))
    coarse, owner = ladder.coarsest, ladder.owner(len(ladder.levels) - 1)
    m = coarse.n_nodes
    cgraph = nx.from_scipy_sparse_array(coarse.adjacency)
    valid, values = [], []
    for labels in itertools.product(range(2), repeat=m):
        zones = [[v for v in range(m) if labels[v] == z] for z in range(2)]
        if all(zones) and all(nx.is_connected(cgraph.subgraph(z)) for z in zones):
            valid.append(labels)
            values.append(nx_normalized_cut(graph, np.array(labels)[owner]))
    optimum = min(values)
    tried = 0
    optimal = [
        np.array(v) for v, x in zip(valid, values, strict=True) if x <= optimum * (1 + NCUT_RTOL)
    ]
    for best in optimal:
        for node in range(m):
            start = best.copy()
            start[node] = 1 - start[node]
            if tuple(start.tolist()) not in set(valid):
                continue
            result = refine_boundary(coarse.adjacency, start, volumes=coarse.volumes, rng=0)
            assert result.ncut_after == pytest.approx(optimum, rel=NCUT_RTOL)
            tried += 1
    assert tried > 0


def test_volumes_below_the_degree_are_refused() -> None:
    a = gallery.path(4).adjacency
    with pytest.raises(ParameterError, match="volumes"):
        refine_boundary(a, np.array([0, 0, 1, 1]), volumes=np.ones(4) * 0.5)


# ----------------------------------------------------------- the multilevel path
def _checked(net: Network, zoning, k: int) -> nx.Graph:
    """Every zone connected (networkx) and the reported NCut equal to networkx's."""
    graph = nx_graph(net.adjacency)
    labels = np.asarray(zoning.labels)
    assert zoning.n_zones == k
    for z in range(k):
        assert nx.is_connected(graph.subgraph(np.flatnonzero(labels == z).tolist()))
    assert zoning.scores["normalized_cut"] == pytest.approx(
        nx_normalized_cut(graph, labels), rel=1e-9
    )
    return graph


def test_multilevel_zones_are_connected_and_scored_right() -> None:
    net = gallery.road_like(4000, rng=2)
    zoning = find_zones(net, 60, assign="multilevel", rng=0)
    _checked(net, zoning, 60)
    record = zoning.decisions["assign"]
    assert record["choice"] == "multilevel"
    levels = record["levels"]
    assert levels[-1]["nodes"] == net.n_nodes
    assert levels[0]["nodes"] < net.n_nodes
    assert zoning.solves == ()  # no solve of the whole network
    # each level's refinement never raised the cut, nor did any V-cycle
    assert all(r["ncut"] <= r["ncut_projected"] * (1 + 1e-12) for r in levels)
    assert np.all(np.diff([levels[-1]["ncut"], *record["cycles"]]) <= 1e-12)
    assert record["cycles"][-1] == pytest.approx(zoning.scores["normalized_cut"], rel=1e-9)


@pytest.mark.parametrize("bounded", [False, True])
def test_multilevel_keeps_every_rule(bounded: bool) -> None:
    """Links that must not be cut, fixed nodes, and either one source per zone or size bounds
    (random sources and tight bounds together are rarely feasible) on a generated network."""
    net = gallery.road_like(3000, rng=7)
    k = 50
    rng = np.random.default_rng(3)
    ids = net.node_ids
    src, dst = net.link_ends
    keep_rows = rng.choice(src.size, 30, replace=False)
    keep = [(ids[src[i]], ids[dst[i]]) for i in keep_rows]
    sources = rng.choice(net.n_nodes, k, replace=False)
    fixed_nodes = sources[:5]
    fixed = {ids[v]: j for j, v in enumerate(fixed_nodes)}
    lo, hi = 0.5 * net.n_nodes / k, 1.5 * net.n_nodes / k
    if bounded:
        rules = ZoneConstraints(keep_links=keep, fixed=fixed, min_size=lo, max_size=hi)
    else:
        rules = ZoneConstraints(sources=ids[sources].tolist(), keep_links=keep, fixed=fixed)
    zoning = find_zones(net, k, assign="multilevel", constraints=rules, rng=0)
    _checked(net, zoning, k)
    labels = np.asarray(zoning.labels)
    assert all(labels[src[i]] == labels[dst[i]] for i in keep_rows)  # kept links not cut
    assert np.unique(labels[fixed_nodes]).size == len(fixed_nodes)  # fixed apart
    if bounded:
        counts = np.bincount(labels)
        assert counts.min() >= lo
        assert counts.max() <= hi
    else:
        assert np.unique(labels[sources]).size == k  # one source per zone


def test_multilevel_with_a_lower_bound_below_one_coarse_node() -> None:
    """``min_size=1`` is smaller than a coarse node: the coarsest zoning gets no lower bound
    (it once got a bound of 0 and divided by it); every zone still has a node (arithmetic)."""
    net = gallery.road_like(1500, rng=4)
    zoning = find_zones(
        net, 60, assign="multilevel", constraints=ZoneConstraints(min_size=1), rng=0
    )
    _checked(net, zoning, 60)
    assert np.bincount(np.asarray(zoning.labels)).min() >= 1


def test_multilevel_refuses_rules_that_cannot_hold() -> None:
    """Three sources and zones of at most 50 nodes on 2,000 nodes: a zone holds one source,
    so three zones cannot hold them all (arithmetic)."""
    net = gallery.road_like(2000, rng=1)
    rules = ZoneConstraints(sources=net.node_ids[:3].tolist(), max_size=50)
    with pytest.raises(ConstraintError, match="max_size"):
        find_zones(net, 3, assign="multilevel", constraints=rules, rng=0)


def test_multilevel_is_deterministic_and_ignores_link_order(tmp_path) -> None:
    """Same seed, same zones; the same links read in another order give the same zones by id."""
    net = gallery.road_like(3000, rng=11)
    first = find_zones(net, 64, assign="multilevel", rng=5)
    again = find_zones(net, 64, assign="multilevel", rng=5)
    assert np.array_equal(first.labels, again.labels)
    table = net.link_table[["source", "target", "weight"]]
    table.to_csv(tmp_path / "a.csv", index=False)
    table.sample(frac=1.0, random_state=0).to_csv(tmp_path / "b.csv", index=False)
    zones = []
    for name in ("a.csv", "b.csv"):
        read = read_edges(tmp_path / name, weight="weight")
        z = find_zones(read, 64, assign="multilevel", rng=5)
        zones.append(pd.Series(np.asarray(z.labels), index=read.node_ids).sort_index())
    # The same zones (scikit-learn's adjusted Rand index is 1 exactly for equal
    # partitions); their numbers may differ where two zones tie in size.
    assert adjusted_rand_score(zones[0].to_numpy(), zones[1].to_numpy()) == 1.0


def test_auto_takes_the_multilevel_path_for_many_zones() -> None:
    assert choose_path("auto", "normalized", 10_000, MULTILEVEL_MIN_ZONES).multilevel
    assert not choose_path("auto", "normalized", 10_000, MULTILEVEL_MIN_ZONES - 1).multilevel
    assert not choose_path("auto", "directed", 10_000, 500).multilevel
    assert not choose_path("kmeans", "normalized", 10_000, 500).multilevel
    with pytest.raises(ParameterError, match="directed"):
        choose_path("multilevel", "directed", 10, 2)
    net = gallery.road_like(3000, rng=0)
    zoning = find_zones(net, MULTILEVEL_MIN_ZONES, rng=0)
    assert zoning.decisions["assign"]["choice"] == "multilevel"
    assert "multilevel path" in zoning.decisions["assign"]["path"]


def test_auto_on_a_large_network_zones_by_levels_and_keeps_the_evidence(monkeypatch) -> None:
    """From MULTILEVEL_ALONE_NODES up, ``auto`` zones by levels alone but still solves.

    The evidence pairs are those of scipy's ``eigsh`` on the normalized Laplacian
    (reference library), and the zones are those ``assign="multilevel"`` gives.
    """
    from specgraph.zones import _levels

    assert choose_path("auto", "normalized", 2_000, 8).compare
    monkeypatch.setattr(_levels, "MULTILEVEL_ALONE_NODES", 2_000)
    path = choose_path("auto", "normalized", 2_000, 8)
    assert path.multilevel
    assert path.evidence
    assert not path.compare
    assert not choose_path("auto", "directed", 2_000, 8).multilevel
    net = gallery.road_like(2_000, rng=5)
    zoning = find_zones(net, 8, trees="keep", dominant="ignore", rng=0)
    assert zoning.decisions["assign"]["choice"] == "multilevel"
    assert "2,000 nodes" in zoning.decisions["assign"]["path"]
    (solve,) = zoning.solves
    a = net.adjacency
    d = 1.0 / np.sqrt(np.asarray(a.sum(axis=1)).ravel())
    lap = sp.eye_array(2_000) - sp.diags_array(d) @ a @ sp.diags_array(d)
    expected = np.sort(sp.linalg.eigsh(lap, k=9, sigma=-1e-3, which="LM")[0])
    np.testing.assert_allclose(solve.eigen.values, expected, rtol=1e-6, atol=1e-9)
    by_levels = find_zones(net, 8, assign="multilevel", trees="keep", dominant="ignore", rng=0)
    assert adjusted_rand_score(by_levels.labels, zoning.labels) == 1.0
    _checked(net, zoning, 8)


def test_multilevel_on_several_components() -> None:
    """Two road networks side by side: zones shared by size, none spans both (networkx)."""
    a = gallery.road_like(1500, rng=1).adjacency
    b = gallery.road_like(500, rng=2).adjacency
    net = Network.from_scipy(sp.block_diag([a, b], format="csr"))
    zoning = find_zones(net, 60, assign="multilevel", rng=0)
    _checked(net, zoning, 60)
    labels = np.asarray(zoning.labels)
    assert not set(labels[:1500]) & set(labels[1500:])
    assert COARSEST_PER_ZONE >= 1


# ------------------------------------------------------- V-cycles on a given zoning
def test_refine_zoning_improves_a_louvain_zoning_and_keeps_its_zones() -> None:
    """Start from networkx's Louvain communities (an outside zoning): the normalized cut
    (networkx) falls, every zone stays connected, and each output zone maps to its input zone."""
    net = gallery.road_like(3000, rng=4)
    graph = nx_graph(net.adjacency)
    communities = nx.community.louvain_communities(graph, weight="weight", seed=0)
    start = np.empty(net.n_nodes, dtype=np.int64)
    for z, members in enumerate(communities):
        start[list(members)] = 10 + 3 * z  # any integers >= 0 are zone numbers
    zoning = refine_zoning(net, start, rng=0)
    k = len(communities)
    _checked(net, zoning, k)
    record = zoning.decisions["refinement"]
    assert record["ncut_before"] == pytest.approx(nx_normalized_cut(graph, start), rel=1e-9)
    assert record["ncut_after"] < record["ncut_before"]
    labels = np.asarray(zoning.labels)
    origin = np.asarray(record["input_zones"])
    assert sorted(origin.tolist()) == sorted(10 + 3 * np.arange(k))  # one output zone each
    assert record["moved_nodes"] == np.count_nonzero(origin[labels] != start)
    assert zoning.solves == ()


def test_refine_zoning_repairs_a_zone_in_two_pieces_and_says_so() -> None:
    net = gallery.path(40)
    start = np.r_[np.zeros(10), np.ones(20), np.zeros(10)].astype(int)  # zone 0 in two pieces
    zoning = refine_zoning(net, start, rng=0)
    graph = nx_graph(net.adjacency)
    labels = np.asarray(zoning.labels)
    for z in range(zoning.n_zones):
        assert nx.is_connected(graph.subgraph(np.flatnonzero(labels == z).tolist()))
    assert zoning.decisions["constraints"]["reason"] != "no change was needed"


def test_refine_zoning_refuses_wrong_labels() -> None:
    net = gallery.path(5)
    with pytest.raises(ParameterError, match="labels"):
        refine_zoning(net, [0, 1, 1])
    with pytest.raises(ParameterError, match="labels"):
        refine_zoning(net, [0, 1, -1, 1, 0])


def test_refine_command_writes_the_zones_files_and_refuses_missing_nodes(tmp_path) -> None:
    from specgraph.cli import main

    net = gallery.road_like(600, rng=3)
    edges = tmp_path / "edges.csv"
    net.link_table[["source", "target", "weight"]].to_csv(edges, index=False)
    graph = nx_graph(net.adjacency)
    communities = nx.community.louvain_communities(graph, weight="weight", seed=1)
    table = pd.DataFrame(
        [(net.node_ids[v], z) for z, members in enumerate(communities) for v in members],
        columns=["node", "zone"],
    )
    table.to_csv(tmp_path / "zones.csv", index=False)
    out = tmp_path / "out"
    args = ["refine", str(edges), str(tmp_path / "zones.csv"), "--weight", "weight"]
    assert main([*args, "--out", str(out), "--quiet"]) == 0
    written = pd.read_csv(out / "zones.csv", dtype={"node": str})
    assert len(written) == net.n_nodes
    assert written["zone"].nunique() == len(communities)
    assert {"zone_summary.csv", "boundary.csv", "run.json"} <= {p.name for p in out.iterdir()}
    table.iloc[5:].to_csv(tmp_path / "partial.csv", index=False)
    partial = ["refine", str(edges), str(tmp_path / "partial.csv"), "--weight", "weight"]
    assert main([*partial, "--out", str(tmp_path / "bad"), "--quiet"]) == 2
    assert not (tmp_path / "bad").exists()  # nothing half-written


def test_small_zone_warning_scales_with_the_zone_count() -> None:
    """A thousand-zone zoning is not 'small zones'; one zone of a tenth of the average is."""
    from specgraph.zones._compare import zone_warnings

    net = gallery.path(10_000)
    labels = np.repeat(np.arange(200), 50)
    assert zone_warnings(net, labels, 200, []) == []
    labels[4:50] = 1  # zone 0 keeps 4 nodes: under a tenth of the average 50
    warned = zone_warnings(net, labels, 200, [])
    assert warned[0].startswith("1 of 200 zones hold under 0.05% (10% of an average zone)")
