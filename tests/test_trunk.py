"""Trunk links: districts formed beside feeding mains, the trunk as one more zone.

References: networkx ``connected_components`` on the graph without the trunk
nodes gives the pieces; networkx ``edge_boundary`` on a MultiGraph of the input
rows (parallel links kept) gives each district's inlets; pandas counts the
links a threshold selects; scikit-learn's adjusted Rand index compares
partitions up to relabelling.
"""

from __future__ import annotations

import itertools
import json
from pathlib import Path

import networkx as nx
import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import adjusted_rand_score

from specgraph import ConstraintError, Network, ParameterError, find_zones
from specgraph.cli import main
from specgraph.studies import stability
from specgraph.zones import ZoneConstraints
from specgraph.zones._trunk import SMALL_PIECE_SHARE


def feeder_network(
    district_sizes: tuple[int, ...],
    *,
    trunk_length: int = 12,
    twigs: tuple[int, ...] = (),
    seed: int = 0,
) -> tuple[nx.MultiGraph, list[tuple[str, str]]]:
    """A trunk path T0..T{L-1}, districts (connected random graphs) hanging from it
    by 1 to 3 links each, and small twigs (paths of 1-3 nodes) on single trunk nodes.

    Returns the MultiGraph of the input rows (one parallel inlet doubled on
    purpose) and the trunk links.
    """
    rng = np.random.default_rng(seed)
    graph = nx.MultiGraph()
    trunk = [f"T{i}" for i in range(trunk_length)]
    trunk_links = list(itertools.pairwise(trunk))
    graph.add_edges_from(trunk_links)
    for d, size in enumerate(district_sizes):
        sub = nx.connected_watts_strogatz_graph(size, 4, 0.2, seed=seed + d)
        graph.add_edges_from((f"D{d}-{a}", f"D{d}-{b}") for a, b in sub.edges())
        for _ in range(int(rng.integers(1, 4))):
            graph.add_edge(trunk[int(rng.integers(trunk_length))], f"D{d}-{rng.integers(size)}")
    graph.add_edge(trunk[0], "D0-0")
    graph.add_edge(trunk[0], "D0-0")  # a parallel inlet: two physical links
    for t, length in enumerate(twigs):
        names = [f"W{t}-{i}" for i in range(length)]
        graph.add_edge(trunk[t % trunk_length], names[0])
        graph.add_edges_from(itertools.pairwise(names))
    return graph, trunk_links


def as_network(graph: nx.MultiGraph) -> Network:
    rows = list(graph.edges())
    return Network.from_links([a for a, _ in rows], [b for _, b in rows])


def pieces_beside(graph: nx.MultiGraph, trunk_links: list[tuple[str, str]]) -> list[set[str]]:
    """networkx.connected_components of the graph without the trunk nodes."""
    trunk_nodes = {end for link in trunk_links for end in link}
    rest = nx.Graph(graph).subgraph(set(graph) - trunk_nodes)
    return [set(c) for c in nx.connected_components(rest)]


def test_each_large_piece_is_a_district_and_small_ones_stay_with_the_trunk() -> None:
    # 1% of about 400 nodes is 4: twigs of 1 to 3 nodes are too small for districts.
    graph, trunk_links = feeder_network((160, 120, 80), twigs=(1, 2, 3, 1))
    net = as_network(graph)
    zoning = find_zones(net, 3, constraints=ZoneConstraints(trunk_links=tuple(trunk_links)), rng=0)
    pieces = pieces_beside(graph, trunk_links)
    limit = SMALL_PIECE_SHARE * net.n_nodes
    large = [p for p in pieces if len(p) >= limit]
    small = [p for p in pieces if len(p) < limit]
    assert len(large) == 3
    assert len(small) == 4
    k = len(large)
    labels = dict(zip(net.node_ids.tolist(), zoning.labels.tolist(), strict=True))
    # The districts are exactly the large pieces (ARI 1 on their nodes).
    nodes = [n for p in large for n in p]
    truth = [i for i, p in enumerate(large) for _ in p]
    assert adjusted_rand_score(truth, [labels[n] for n in nodes]) == 1.0
    # Trunk nodes and the small pieces form the last zone.
    outside = {end for link in trunk_links for end in link} | set().union(*small)
    assert {n for n, z in labels.items() if z == k} == outside
    table = zoning.zones
    assert table["role"].tolist() == ["district"] * k + ["trunk"]
    assert list(table["nodes"][:k]) == sorted((len(p) for p in large), reverse=True)
    trunk = zoning.decisions["trunk"]
    assert trunk["pieces"] == len(pieces)
    assert trunk["pieces_left_with_trunk"] == len(small)
    assert trunk["nodes_left_with_trunk"] == sum(len(p) for p in small)
    assert trunk["trunk_zone"] == k
    assert zoning.scores["districts"] == k
    assert any("stay with the trunk zone" in w for w in zoning.warnings)


def test_inlets_match_networkx_edge_boundary_on_the_input_rows() -> None:
    graph, trunk_links = feeder_network((40, 40, 25), seed=3)
    net = as_network(graph)
    zoning = find_zones(net, 3, constraints=ZoneConstraints(trunk_links=tuple(trunk_links)), rng=1)
    k = zoning.decisions["trunk"]["trunk_zone"]
    ids = net.node_ids
    trunk_zone = set(ids[zoning.labels == k].tolist())
    expected = []
    for z in range(k):
        district = set(ids[zoning.labels == z].tolist())
        # networkx.edge_boundary on the MultiGraph: each parallel row counted once.
        expected.append(len(list(nx.edge_boundary(graph, district, trunk_zone))))
    inlets = zoning.zones["inlets"].tolist()
    assert inlets[:k] == expected
    assert inlets[k] == sum(expected) == int(zoning.boundary["inlet"].sum())
    assert zoning.decisions["trunk"]["inlets"] == expected
    # Inlet rows are exactly the boundary rows that touch the trunk zone.
    touches = (zoning.boundary["zone_a"] == k) | (zoning.boundary["zone_b"] == k)
    assert zoning.boundary["inlet"].tolist() == touches.tolist()
    # Every inlet is counted in its district's boundary (zone_table's boundary_links).
    assert (zoning.zones["boundary_links"][:k] >= zoning.zones["inlets"][:k]).all()


def test_more_zones_than_pieces_split_pieces_and_the_rules_still_hold() -> None:
    graph, trunk_links = feeder_network((80, 30), seed=5)
    net = as_network(graph)
    zoning = find_zones(net, 4, constraints=ZoneConstraints(trunk_links=tuple(trunk_links)), rng=0)
    k = zoning.decisions["trunk"]["trunk_zone"]
    assert k == 4
    g = nx.Graph(graph)
    ids = net.node_ids
    for z in range(k):  # networkx.is_connected on each district
        assert nx.is_connected(g.subgraph(ids[zoning.labels == z].tolist()))
    # No district spans two pieces: each lies inside one piece of networkx's.
    pieces = pieces_beside(graph, trunk_links)
    for z in range(k):
        district = set(ids[zoning.labels == z].tolist())
        assert sum(district <= piece for piece in pieces) == 1


def test_zone_count_below_the_pieces_is_raised_with_the_usual_warning() -> None:
    # Net6-like: a long trunk, several districts and many one-to-three-node twigs.
    twigs = tuple(int(x) for x in np.random.default_rng(2).integers(1, 4, size=30))
    graph, trunk_links = feeder_network((120, 90, 70, 50, 40), trunk_length=40, twigs=twigs)
    net = as_network(graph)
    rules = ZoneConstraints(trunk_links=tuple(trunk_links))
    zoning = find_zones(net, 2, constraints=rules, rng=0)
    pieces = pieces_beside(graph, trunk_links)
    large = [p for p in pieces if len(p) >= SMALL_PIECE_SHARE * net.n_nodes]
    assert zoning.decisions["trunk"]["districts"] == len(large) == 5
    assert any("raised to 5" in w for w in zoning.warnings)
    assert zoning.decisions["trunk"]["pieces_left_with_trunk"] == len(pieces) - len(large)
    # "auto" reads the count on the districts' network and gives at least one per piece.
    auto = find_zones(net, "auto", constraints=rules, rng=0)
    assert auto.decisions["trunk"]["districts"] >= 5
    assert auto.parameters["zones"] == "auto"
    assert auto.parameters["constraints"]["trunk_links"] == len(trunk_links)


def test_min_size_sets_which_pieces_stay_with_the_trunk() -> None:
    graph, trunk_links = feeder_network((60, 45, 12), seed=1)
    net = as_network(graph)
    rules = ZoneConstraints(min_size=20, trunk_links=tuple(trunk_links))
    zoning = find_zones(net, 2, constraints=rules, rng=0)
    pieces = pieces_beside(graph, trunk_links)
    kept = [p for p in pieces if len(p) >= 20]
    assert zoning.decisions["trunk"]["districts"] == len(kept) == 2
    assert zoning.decisions["trunk"]["small_piece_limit"] == 20
    assert (zoning.zones["nodes"][:2] >= 20).all()


def test_a_small_piece_holding_a_source_is_a_district() -> None:
    graph, trunk_links = feeder_network((200, 150), twigs=(3,), seed=4)
    assert SMALL_PIECE_SHARE * as_network(graph).n_nodes > 3  # the twig alone stays
    net = as_network(graph)
    rules = ZoneConstraints(sources=("D0-1", "D1-1", "W0-2"), trunk_links=tuple(trunk_links))
    zoning = find_zones(net, "auto", constraints=rules, rng=0)
    k = zoning.decisions["trunk"]["districts"]
    assert k == 3  # one per source, the three-node twig among them
    zone_of = {s: int(zoning.labels[net.index_of[s]]) for s in rules.sources}
    assert sorted(zone_of.values()) == list(range(k))


@pytest.mark.parametrize(
    ("extra", "words"),
    [
        ({"sources": ("T3",)}, ["sources", "'T3'", "trunk"]),
        ({"fixed": {"T4": 0}}, ["fixed nodes", "'T4'"]),
        ({"keep_links": (("T0", "D0-0"),)}, ["must not be cut", "inlet"]),
    ],
    ids=["source-on-trunk", "fixed-on-trunk", "kept-inlet"],
)
def test_rules_that_contradict_the_trunk_are_refused(extra: dict, words: list[str]) -> None:
    graph, trunk_links = feeder_network((40, 30))
    rules = ZoneConstraints(trunk_links=tuple(trunk_links), **extra)
    with pytest.raises(ConstraintError) as caught:
        find_zones(as_network(graph), 2, constraints=rules, rng=0)
    for word in words:
        assert word in str(caught.value)


def test_a_kept_link_between_trunk_nodes_is_accepted() -> None:
    graph, trunk_links = feeder_network((40, 30))
    rules = ZoneConstraints(trunk_links=tuple(trunk_links), keep_links=(("T1", "T2"),))
    zoning = find_zones(as_network(graph), 2, constraints=rules, rng=0)
    assert zoning.parameters["constraints"]["keep_links"] == 1


def test_refusals_of_trunk_links_themselves() -> None:
    graph, trunk_links = feeder_network((40, 30))
    net = as_network(graph)
    with pytest.raises(ParameterError, match="trunk_links"):
        find_zones(net, 2, constraints=ZoneConstraints(trunk_links=(("T0", "T5"),)))
    everything = tuple(nx.Graph(graph).edges())
    with pytest.raises(ConstraintError, match="no node is left"):
        find_zones(net, 2, constraints=ZoneConstraints(trunk_links=everything))
    rules = ZoneConstraints(min_size=500, trunk_links=tuple(trunk_links))
    with pytest.raises(ConstraintError, match="no district can be formed"):
        find_zones(net, 2, constraints=rules)


def test_without_trunk_links_the_tables_have_no_trunk_columns() -> None:
    graph, _ = feeder_network((40, 30))
    zoning = find_zones(as_network(graph), 2, rng=0)
    assert "role" not in zoning.zones.columns
    assert "inlets" not in zoning.zones.columns
    assert "inlet" not in zoning.boundary.columns
    assert "trunk" not in zoning.decisions
    assert "trunk_links" not in zoning.parameters["constraints"]


def test_stability_runs_on_a_zoning_with_a_trunk() -> None:
    graph, trunk_links = feeder_network((50, 40), seed=2)
    net = as_network(graph)
    options = {"constraints": ZoneConstraints(trunk_links=tuple(trunk_links))}
    result = stability(net, 3, zone_options=options, repeats=1, rng=0)
    assert result.overall["zones"] == 4  # 3 districts and the trunk zone
    # Davis-Kahan rows are computed on the districts' network: finite figures.
    assert np.isfinite(result.bounds["perturbation_norm"]).all()


# ------------------------------------------------------------------ command line
def write_tables(tmp_path: Path) -> tuple[Path, nx.MultiGraph, list[tuple[str, str]]]:
    graph, trunk_links = feeder_network((50, 40, 30), twigs=(1,), seed=6)
    trunk = {frozenset(link) for link in trunk_links}
    rows = [
        {
            "source": a,
            "target": b,
            "dia": 30 if frozenset((a, b)) in trunk else 6 + (i % 3),
            "main": "yes" if frozenset((a, b)) in trunk else "no",
        }
        for i, (a, b) in enumerate(graph.edges())
    ]
    path = tmp_path / "pipes.csv"
    pd.DataFrame(rows).to_csv(path, index=False)
    return path, graph, trunk_links


def run_cli(argv: list[str], capsys: pytest.CaptureFixture[str]) -> tuple[int, str]:
    code = main(argv)
    return code, capsys.readouterr().err


def test_cli_threshold_and_yes_no_column_give_the_same_zoning(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    edges, _graph, trunk_links = write_tables(tmp_path)
    common = ["zones", str(edges), "--zones", "3", "--seed", "0"]
    above = tmp_path / "above"
    flag = tmp_path / "flag"
    code, _ = run_cli(
        [*common, "--trunk-col", "dia", "--trunk-above", "24", "--out", str(above)], capsys
    )
    assert code == 0
    code, _ = run_cli([*common, "--trunk-col", "main", "--out", str(flag)], capsys)
    assert code == 0
    table = pd.read_csv(edges)
    chosen = int((table["dia"] >= 24).sum())  # pandas' count of links at the threshold
    for out in (above, flag):
        run = json.loads((out / "run.json").read_text())
        assert run["parameters"]["constraints"]["trunk_links"] == chosen == len(trunk_links)
        summary = pd.read_csv(out / "zone_summary.csv")
        assert summary["role"].tolist()[-1] == "trunk"
        boundary = pd.read_csv(out / "boundary.csv")
        assert int(boundary["inlet"].sum()) == int(summary["inlets"].iloc[-1])
    zones_a = pd.read_csv(above / "zones.csv", dtype=str)
    zones_b = pd.read_csv(flag / "zones.csv", dtype=str)
    assert zones_a.equals(zones_b)


def zones_with_threshold(edges: Path, column: str, tmp_path: Path) -> list[str]:
    """The zones command with trunk links read as ``column >= 24``."""
    out = str(tmp_path / "o")
    return ["zones", str(edges), "--trunk-col", column, "--trunk-above", "24", "--out", out]


def test_cli_refuses_a_non_numeric_threshold_column_at_its_line(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    edges, _, _ = write_tables(tmp_path)
    table = pd.read_csv(edges, dtype=str)
    table.loc[4, "dia"] = "wide"
    table.to_csv(edges, index=False)
    code, err = run_cli(zones_with_threshold(edges, "dia", tmp_path), capsys)
    assert code == 2
    # Data row 4 (0-based) is file line 6: the header is line 1.
    for word in ["pipes.csv", "line 6", "dia", "'wide'"]:
        assert word in err
    code, err = run_cli(zones_with_threshold(edges, "bore", tmp_path), capsys)
    assert code == 2
    assert "bore" in err
    assert "--trunk-col" in err
    code, err = run_cli(
        ["zones", str(edges), "--trunk-above", "24", "--out", str(tmp_path / "o")], capsys
    )
    assert code == 2
    assert "--trunk-above" in err
    assert "--trunk-col" in err
