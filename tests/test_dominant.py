"""Dominant links and the weight-range report, against networkx, scipy and closed forms."""

from __future__ import annotations

import json
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
import scipy.linalg as la
import scipy.sparse as sp

from specgraph import Network, find_zones
from specgraph.cli import main
from specgraph.exceptions import ParameterError
from specgraph.studies import ZoningOptions
from specgraph.zones import (
    DOMINANT_GAP,
    WEIGHT_RANGE_WARN,
    ZoneConstraints,
    _dominant,
    contract_links,
    coupler_trouble,
    find_dominant_links,
    weight_range,
)

STRONG = 1e6


def adjacency(graph: nx.Graph) -> sp.csr_array:
    return sp.csr_array(nx.to_scipy_sparse_array(graph, nodelist=sorted(graph), weight="weight"))


def with_weights(graph: nx.Graph, value: float = 1.0) -> nx.Graph:
    nx.set_edge_attributes(graph, value, "weight")
    return graph


def marked(graph: nx.Graph, **options: float) -> set[frozenset[int]]:
    pairs = find_dominant_links(adjacency(graph), **options).pairs
    return {frozenset(p) for p in pairs.tolist()}


# ------------------------------------------------------------------ the rule
@pytest.mark.parametrize(
    ("graph", "link"),
    [
        (nx.path_graph(12), (5, 6)),
        (nx.path_graph(12), (0, 1)),  # a pendant link: one end has no other link
        (nx.barbell_graph(6, 2), (6, 7)),  # inside the bridge path
        (nx.barbell_graph(6, 0), (2, 3)),  # inside a clique
        (nx.cycle_graph(9), (8, 0)),
        (nx.grid_2d_graph(5, 5), ((2, 2), (2, 3))),
    ],
    ids=["path", "path-pendant", "barbell-bridge", "barbell-clique", "cycle", "grid"],
)
def test_one_strong_link_is_marked_alone(graph: nx.Graph, link: tuple) -> None:
    graph = with_weights(graph)
    graph[link[0]][link[1]]["weight"] = STRONG
    rows = {v: i for i, v in enumerate(sorted(graph))}  # the adjacency's row order
    assert marked(graph) == {frozenset((rows[link[0]], rows[link[1]]))}


@pytest.mark.parametrize("seed", range(4))
def test_weights_within_the_gap_mark_nothing(seed: int) -> None:
    # Every inner/outer ratio is at most max/min < DOMINANT_GAP: nothing can be marked.
    graph = nx.gnm_random_graph(80, 200, seed=seed)
    rng = np.random.default_rng(seed)
    for u, v in graph.edges:
        graph[u][v]["weight"] = rng.uniform(1.0, 0.9 * DOMINANT_GAP)
    assert marked(graph) == set()


@pytest.mark.parametrize(("ratio", "expected"), [(0.95, False), (1.05, True)])
def test_the_gap_is_the_threshold(ratio: float, expected: bool) -> None:
    # Path 0-1-2-3-4-5: link 2-3 against the strongest other link at its ends (2.0 on 1-2).
    graph = with_weights(nx.path_graph(6))
    graph[1][2]["weight"] = 2.0
    graph[2][3]["weight"] = ratio * DOMINANT_GAP * 2.0
    assert (marked(graph) == {frozenset((2, 3))}) is expected


def test_a_chain_of_couplers_is_one_group() -> None:
    graph = with_weights(nx.path_graph(10))
    graph[3][4]["weight"] = graph[4][5]["weight"] = STRONG  # node 4 has couplers only
    pairs = find_dominant_links(adjacency(graph)).pairs
    groups = contract_links(adjacency(graph), pairs).groups
    assert {frozenset(p) for p in pairs.tolist()} == {frozenset((3, 4)), frozenset((4, 5))}
    assert groups[3] == groups[4] == groups[5]
    assert len(set(groups.tolist())) == 8


def _brute_force_groups(graph: nx.Graph, gap: float) -> set[frozenset[int]]:
    """Nodes merged by the rule, read from its definition with networkx.

    A cluster is a connected component of the links of affinity >= t for some
    t; it is dominated when the weakest link of its maximum spanning tree is at
    least ``gap`` times the strongest link leaving it (single linkage).
    """
    clusters = set()
    for t in {w for _, _, w in graph.edges(data="weight")}:
        strong = nx.Graph([(u, v) for u, v, w in graph.edges(data="weight") if w >= t])
        clusters |= {frozenset(c) for c in nx.connected_components(strong)}
    dominated = nx.Graph()
    for cluster in clusters:
        leaving = [graph[u][v]["weight"] for u, v in nx.edge_boundary(graph, cluster)]
        tree = nx.maximum_spanning_tree(graph.subgraph(cluster))
        inner = min(w for _, _, w in tree.edges(data="weight"))
        if leaving and inner >= gap * max(leaving):
            dominated.add_edges_from(tree.edges)
    return {frozenset(c) for c in nx.connected_components(dominated)}


@pytest.mark.parametrize("seed", range(6))
def test_groups_match_the_definition_read_with_networkx(seed: int) -> None:
    rng = np.random.default_rng(seed)
    graph = nx.connected_watts_strogatz_graph(40, 4, 0.3, seed=seed)
    for u, v in graph.edges:
        # Log-uniform over six decades, so that some groups pass the gap and some miss it.
        graph[u][v]["weight"] = float(10.0 ** rng.uniform(0, 6))
    pairs = find_dominant_links(adjacency(graph), gap=30.0).pairs
    found = {frozenset(c) for c in nx.connected_components(nx.Graph(pairs.tolist()))}
    assert found == _brute_force_groups(graph, 30.0)


def test_the_compiled_pass_marks_what_the_plain_one_marks(monkeypatch) -> None:
    # Same loop, compiled by numba above COMPILED_MIN_LINKS: forced here on a small forest.
    rng = np.random.default_rng(7)
    graph = nx.connected_watts_strogatz_graph(300, 4, 0.3, seed=7)
    for u, v in graph.edges:
        graph[u][v]["weight"] = float(10.0 ** rng.uniform(0, 6))
    plain = marked(graph, gap=30.0)
    monkeypatch.setattr(_dominant, "COMPILED_MIN_LINKS", 0)
    assert marked(graph, gap=30.0) == plain
    assert plain


def test_contraction_is_the_limit_of_an_infinitely_strong_link() -> None:
    # Courant-Fischer with a penalty (from memory; the penalty method's standard
    # limit): as w -> infinity, the eigenvalues of L_w = D - A below the one that
    # grows like 2w tend to those of the contracted graph's Laplacian with each
    # super-node weighted by its member count, L_c y = lambda M y (scipy.linalg.eigh).
    base = with_weights(nx.karate_club_graph())
    a, b = 0, 1
    graph = base.copy()
    graph[a][b]["weight"] = 1e9
    strong = adjacency(graph)
    contraction = contract_links(adjacency(base), find_dominant_links(strong).pairs)
    assert sorted(np.bincount(contraction.groups).tolist())[-1] == 2  # only a, b merged
    dense = strong.toarray()
    full = la.eigh(np.diag(dense.sum(1)) - dense, eigvals_only=True)
    merged = contraction.adjacency.toarray()
    mass = np.diag(np.bincount(contraction.groups).astype(float))
    limit = la.eigh(np.diag(merged.sum(1)) - merged, mass, eigvals_only=True)
    np.testing.assert_allclose(full[:-1], limit, atol=1e-6)
    assert full[-1] > 1e9  # the pair's own mode, 2w + O(1)


# ------------------------------------------------------------------ weight range
def test_weight_range_reads_each_link_once() -> None:
    graph = nx.path_graph(5)
    for (u, v), w in zip(graph.edges, (1.0, 2.0, 4.0, 40.0), strict=True):
        graph[u][v]["weight"] = w
    spread = weight_range(adjacency(graph))
    assert spread["links"] == 4
    assert spread["median"] == np.median([1, 2, 4, 40])
    assert spread["max_over_median"] == 40 / 3
    assert spread["max_over_min"] == 40.0


def _ring(ratio: float) -> Network:
    graph = with_weights(nx.cycle_graph(20))
    graph[0][1]["weight"] = ratio  # median 1: max/median = ratio
    graph = nx.relabel_nodes(graph, {v: f"QM-J{v}" for v in graph})
    return Network.from_networkx(graph)


@pytest.mark.parametrize(("factor", "warned"), [(0.9, False), (1.1, True)])
def test_the_range_warning_appears_above_its_threshold(factor: float, warned: bool) -> None:
    zoning = find_zones(_ring(factor * WEIGHT_RANGE_WARN), 2, rng=0)
    decision = zoning.decisions["weights"]
    assert decision["max_over_median"] == pytest.approx(factor * WEIGHT_RANGE_WARN)
    said = [w for w in zoning.warnings if "span a wide range" in w]
    assert bool(said) is warned
    assert decision["reason"]


# ------------------------------------------------------------------ find_zones
def coupler_grid(side: int = 8, seed: int = 0) -> tuple[nx.Graph, list[tuple[str, str]]]:
    """A grid of lines (affinity 1 to 3) with split buses and pendant sections on couplers."""
    rng = np.random.default_rng(seed)
    grid = nx.grid_2d_graph(side, side)
    graph = nx.Graph()
    for u, v in grid.edges:
        graph.add_edge(f"QM-B{u[0]}-{u[1]}", f"QM-B{v[0]}-{v[1]}", weight=rng.uniform(1, 3))
    couplers = []
    # Split buses: half of a bus's lines move to a second section, tied by a coupler.
    for i, j in [(2, 2), (2, 5), (5, 2), (5, 5), (3, 4)]:
        bus, section = f"QM-B{i}-{j}", f"QM-B{i}-{j}b"
        for other in sorted(graph[bus])[:2]:
            graph.add_edge(section, other, weight=graph[bus][other]["weight"])
            graph.remove_edge(bus, other)
        graph.add_edge(bus, section, weight=1e5)
        couplers.append((bus, section))
    # Pendant sections: a bus-bar reached through a coupler only.
    for i, j in [(1, 6), (6, 1)]:
        bus = f"QM-B{i}-{j}"
        graph.add_edge(bus, f"{bus}p", weight=1e5)
        couplers.append((bus, f"{bus}p"))
    return graph, couplers


def _zone_of(zoning, node: str) -> int:
    ids = zoning.network.node_ids.tolist()
    return int(zoning.labels[ids.index(node)])


def test_no_zone_is_a_couplers_two_ends() -> None:
    graph, couplers = coupler_grid()
    network = Network.from_networkx(graph)
    plain = find_zones(network, 8, dominant="ignore", rng=0)
    # Without the contraction the couplers' ends make zones of their own (the failure).
    assert np.bincount(plain.labels).min() <= 3
    zoning = find_zones(network, 8, rng=0)
    decision = zoning.decisions["weights"]
    assert decision["contracted"] == decision["dominant"] == len(couplers)
    assert {frozenset(link[:2]) for link in decision["contracted_links"]} == {
        frozenset(c) for c in couplers
    }
    assert all(_zone_of(zoning, a) == _zone_of(zoning, b) for a, b in couplers)
    assert np.bincount(zoning.labels).min() > 3
    boundary = {frozenset(p) for p in zoning.boundary[["source", "target"]].to_numpy().tolist()}
    assert not boundary & {frozenset(c) for c in couplers}
    assert zoning.parameters["dominant"] == "auto"
    # auto contracted because the zoning with them free had coupler zones, and says so.
    assert decision["choice"] == "auto"
    assert "auto: with them free" in decision["reason"]
    assert "inside one group held by dominant links" in decision["reason"]
    held = find_zones(network, 8, dominant="contract", rng=0)
    assert np.array_equal(held.labels, zoning.labels)


def test_auto_leaves_dominant_links_free_where_no_zone_needs_them_merged() -> None:
    # Two couplers deep inside a grid: 2 zones never fall inside a coupler's group
    # nor cut one, so auto gives the zoning of dominant='ignore', with the reason.
    graph, couplers = coupler_grid()
    for bus, section in couplers[-2:]:
        graph.remove_edge(bus, section)
        graph.remove_node(section)
    network = Network.from_networkx(graph)
    free = find_zones(network, 2, dominant="ignore", rng=0)
    assert not coupler_trouble(find_dominant_links(network.adjacency), free.labels)
    auto = find_zones(network, 2, rng=0)
    assert np.array_equal(auto.labels, free.labels)
    assert auto.decisions["weights"]["contracted"] == 0
    assert "left free" in auto.decisions["weights"]["reason"]


def test_coupler_trouble_names_zones_inside_a_group_and_cut_couplers() -> None:
    graph, couplers = coupler_grid()
    network = Network.from_networkx(graph)
    ids = network.node_ids.tolist()
    bus, section = (ids.index(v) for v in couplers[-1])  # a pendant section
    labels = np.zeros(network.n_nodes, dtype=np.int64)
    labels[[bus, section]] = 1  # the coupler's two ends alone: a zone of 2
    assert coupler_trouble(find_dominant_links(network.adjacency), labels) == (
        "1 zone lies inside one group held by dominant links (2 nodes)"
    )
    labels[:] = 0
    labels[section] = 1  # the pendant section alone: inside its group, its coupler cut
    assert coupler_trouble(find_dominant_links(network.adjacency), labels) == (
        "1 zone lies inside one group held by dominant links (1 node); 1 dominant link cut"
    )


def test_a_coupler_between_two_sources_is_left() -> None:
    graph, couplers = coupler_grid()
    bus, section = couplers[0]
    sources = (bus, section, "QM-B0-0", "QM-B7-7")
    rules = ZoneConstraints(sources=sources)
    zoning = find_zones(Network.from_networkx(graph), constraints=rules, rng=0)
    decision = zoning.decisions["weights"]
    assert decision["contracted"] == len(couplers) - 1
    assert [link[:2] for link in decision["left_links"]] in ([[bus, section]], [[section, bus]])
    assert "source" in decision["left_links"][0][3]
    assert _zone_of(zoning, bus) != _zone_of(zoning, section)


def test_a_coupler_between_two_fixed_zones_or_above_max_size_is_left() -> None:
    graph, couplers = coupler_grid()
    bus, section = couplers[1]
    fixed = ZoneConstraints(fixed={bus: 0, section: 1})
    decision = find_zones(Network.from_networkx(graph), 4, constraints=fixed, rng=0).decisions
    assert [link[3] for link in decision["weights"]["left_links"]] == [
        "the sides are fixed to different zones"
    ]
    # max_size=1: no two nodes may share a super-node, so no coupler is contracted.
    rules = ZoneConstraints(max_size=1)
    small = nx.path_graph(3)
    nx.set_edge_attributes(small, {(0, 1): 1.0, (1, 2): STRONG}, "weight")
    network = Network.from_networkx(nx.relabel_nodes(small, lambda v: f"QM-J{v}"))
    weights = find_zones(network, 3, constraints=rules, rng=0).decisions["weights"]
    assert weights["dominant"] == 1
    assert weights["contracted"] == 0
    assert "max_size" in weights["left_links"][0][3]


def test_the_option_is_checked_and_shared_with_studies() -> None:
    network = _ring(10.0)
    with pytest.raises(ParameterError, match="dominant"):
        find_zones(network, 2, dominant="merge")
    assert ZoningOptions(dominant="ignore").keywords()["dominant"] == "ignore"
    with pytest.raises(ParameterError, match="dominant"):
        ZoningOptions(dominant="merge")


# ------------------------------------------------------------------ command line
def _write_grid(tmp_path: Path) -> tuple[Path, list[tuple[str, str]]]:
    graph, couplers = coupler_grid()
    path = tmp_path / "edges.csv"
    rows = ["source,target,weight"] + [f"{u},{v},{w!r}" for u, v, w in graph.edges(data="weight")]
    path.write_text("\n".join(rows) + "\n", encoding="utf-8")
    return path, couplers


@pytest.mark.parametrize("dominant", [None, "ignore"])
def test_the_command_records_the_option(tmp_path: Path, dominant: str | None) -> None:
    edges, couplers = _write_grid(tmp_path)
    out = tmp_path / "out"
    given = [] if dominant is None else ["--dominant", dominant]
    argv = ["zones", str(edges), "--weight", "weight", "--zones", "8", "--out", str(out)]
    assert main([*argv, *given, "--quiet"]) == 0
    record = json.loads((out / "run.json").read_text(encoding="utf-8"))
    assert record["parameters"]["dominant"] == (dominant or "auto")
    weights = record["decisions"]["weights"]
    assert weights["dominant"] == len(couplers)
    assert weights["contracted"] == (0 if dominant == "ignore" else len(couplers))
    assert weights["reason"]
