"""find_zones and ``specgraph zones`` with the user's rules, end to end.

The rules are checked on the output by independent means: networkx for
connectivity and the 2-core, plain Python sums for sizes and sources, and
answers known by hand on small graphs.
"""

from __future__ import annotations

import json
from pathlib import Path

import networkx as nx
import numpy as np
import pandas as pd
import pytest

from specgraph import ConstraintError, Network, find_zones, gallery
from specgraph.cli import main
from specgraph.zones import ZoneConstraints


def zone_graphs(network: Network, labels: np.ndarray) -> list[nx.Graph]:
    graph = nx.from_scipy_sparse_array(network.adjacency)
    return [graph.subgraph(np.flatnonzero(labels == z).tolist()) for z in np.unique(labels)]


def assert_all_connected(network: Network, labels: np.ndarray) -> None:
    # networkx.is_connected on each zone's induced subgraph (outside reference).
    for sub in zone_graphs(network, labels):
        assert nx.is_connected(sub)


def test_sources_one_per_zone_and_auto_count() -> None:
    net = gallery.grid(12, 12)
    corners = ("0", "143", "11")
    zoning = find_zones(net, "auto", constraints=ZoneConstraints(sources=corners), rng=0)
    # With sources and zones='auto', one zone per source.
    assert zoning.n_zones == 3
    zones_of_sources = {int(zoning.labels[net.index_of[s]]) for s in corners}
    assert zones_of_sources == {0, 1, 2}
    assert_all_connected(net, zoning.labels)
    assert "3 sources" in zoning.decisions["zone_count"]["reason"]


def test_kept_link_is_never_on_the_boundary() -> None:
    # barbell(5): two 5-cliques joined by the link 4-5. Keeping the bridge forces
    # the 2-zone boundary inside a clique (known by hand: cutting one clique node off).
    net = gallery.barbell(5)
    free = find_zones(net, 2, rng=0)
    assert free.boundary[["source", "target"]].to_numpy().tolist() == [["4", "5"]]
    kept = find_zones(net, 2, constraints=ZoneConstraints(keep_links=(("5", "4"),)), rng=0)
    pairs = {frozenset(p) for p in kept.boundary[["source", "target"]].to_numpy().tolist()}
    assert frozenset(("4", "5")) not in pairs
    assert kept.labels[4] == kept.labels[5]
    assert_all_connected(net, kept.labels)


@pytest.mark.parametrize("seed", [0, 1])
def test_size_bounds_in_nodes_on_a_road_like_network(seed: int) -> None:
    net = gallery.road_like(2000, rng=seed)
    rules = ZoneConstraints(min_size=170, max_size=330)
    zoning = find_zones(net, 8, constraints=rules, rng=seed)
    counts = np.bincount(zoning.labels)
    assert counts.min() >= 170
    assert counts.max() <= 330
    assert_all_connected(net, zoning.labels)


def test_size_bounds_in_node_weight() -> None:
    base = gallery.road_like(1500, rng=4)
    sizes = np.random.default_rng(4).poisson(6.0, base.n_nodes).astype(float)
    net = Network(base.adjacency, base.node_ids, sizes=sizes)
    total = sizes.sum()
    low, high = 0.6 * total / 6, 1.4 * total / 6
    rules = ZoneConstraints(min_size=low, max_size=high, size_by="weight")
    zoning = find_zones(net, 6, constraints=rules, rng=0)
    served = np.bincount(zoning.labels, weights=sizes)
    assert served.min() >= low
    assert served.max() <= high
    # The zone table's size column is the same sum (plain bincount as reference).
    assert np.allclose(zoning.zones["size"].to_numpy(), served)


def test_fixed_nodes_stay_together_or_apart() -> None:
    net = gallery.barbell(6)
    apart = find_zones(net, 2, constraints=ZoneConstraints(fixed={"0": 0, "1": 1}), rng=0)
    assert apart.labels[0] != apart.labels[1]
    together = find_zones(net, 2, constraints=ZoneConstraints(fixed={"0": 3, "11": 3}), rng=0)
    assert together.labels[0] == together.labels[11]
    assert_all_connected(net, apart.labels)


def test_impossible_bound_names_the_rule() -> None:
    base = gallery.path(6)
    net = Network(base.adjacency, base.node_ids, sizes=np.array([1.0, 1.0, 9.0, 1.0, 1.0, 1.0]))
    rules = ZoneConstraints(max_size=5, size_by="weight")
    with pytest.raises(ConstraintError, match="max_size"):
        find_zones(net, 2, constraints=rules, rng=0)


def test_dangling_trees_do_not_become_slivers() -> None:
    # A 20 x 20 grid with 40 hanging paths of 8 nodes: 44% of the nodes hang in trees.
    graph = nx.grid_2d_graph(20, 20)
    graph = nx.convert_node_labels_to_integers(graph)
    rng = np.random.default_rng(0)
    nxt = graph.number_of_nodes()
    for root in rng.choice(400, size=40, replace=False).tolist():
        prev = root
        for _ in range(8):
            graph.add_edge(prev, nxt)
            prev, nxt = nxt, nxt + 1
    net = Network.from_networkx(graph)
    zoning = find_zones(net, 4, rng=0)
    # The auto rule attached the trees, then compared with them kept (the lower cut wins).
    assert set(zoning.decisions["trees"]["compared"]) == {"attach", "keep"}
    attached = find_zones(net, 4, trees="attach", rng=0)
    # networkx.k_core(2) is the outside reference for the core: every zone holds core nodes,
    # whichever treatment won, and with the trees attached on request.
    core = np.zeros(net.n_nodes, dtype=bool)
    core[[net.index_of[str(v)] for v in nx.k_core(graph, 2)]] = True
    for labels in (zoning.labels, attached.labels):
        for z in range(int(labels.max()) + 1):
            assert core[labels == z].sum() >= 40
        assert_all_connected(net, labels)


def test_zone_range_picks_the_planted_count() -> None:
    # networkx.ring_of_cliques(5, 6): 5 cliques joined in a ring; the eigengap after
    # lambda_5 is the clear one (von Luxburg 2007, section 8.3).
    net = Network.from_networkx(nx.ring_of_cliques(5, 6))
    zoning = find_zones(net, range(2, 9), rng=0)
    assert zoning.n_zones == 5
    assert zoning.parameters["zones"] == "2:8"


def test_refinement_never_raises_the_normalized_cut() -> None:
    net = gallery.road_like(3000, rng=2)
    raw = find_zones(net, 10, refine=False, assign="kmeans", rng=0)
    refined = find_zones(net, 10, refine=True, assign="kmeans", rng=0)
    assert refined.scores["normalized_cut"] <= raw.scores["normalized_cut"] + 1e-12
    assert "refinement" not in raw.decisions


# --------------------------------------------------------------------- CLI
def grid_files(folder: Path) -> tuple[Path, Path]:
    """A 10 x 10 grid of invented junctions, with inlets and trunk mains marked."""
    graph = nx.grid_2d_graph(10, 10)
    name = {v: f"TJ-{v[0]:02d}{v[1]:02d}" for v in graph}
    trunk = {frozenset(((0, c), (0, c + 1))) for c in range(9)}
    edges = pd.DataFrame(
        [
            {
                "source": name[a],
                "target": name[b],
                "trunk": "yes" if frozenset((a, b)) in trunk else "no",
            }
            for a, b in graph.edges
        ]
    )
    inlets = {name[(0, 0)], name[(9, 9)]}
    nodes = pd.DataFrame(
        {
            "node": [name[v] for v in graph],
            "served": [3] * 100,
            "inlet": [1 if name[v] in inlets else 0 for v in graph],
        }
    )
    edges.to_csv(folder / "mains.csv", index=False)
    nodes.to_csv(folder / "junctions.csv", index=False)
    return folder / "mains.csv", folder / "junctions.csv"


def test_cli_rules_end_to_end(tmp_path: Path) -> None:
    edges, nodes = grid_files(tmp_path)
    out = tmp_path / "out"
    code = main(
        [
            "zones",
            str(edges),
            "--nodes",
            str(nodes),
            "--size-col",
            "served",
            "--supply-col",
            "inlet",
            "--keep-col",
            "trunk",
            "--min-size",
            "90",
            "--max-size",
            "210",
            "--out",
            str(out),
            "--quiet",
        ]
    )
    assert code == 0
    zones = pd.read_csv(out / "zones.csv", dtype={"node": str})
    boundary = pd.read_csv(out / "boundary.csv", dtype={"source": str, "target": str})
    table = pd.read_csv(nodes, dtype={"node": str})
    merged = zones.merge(table, on="node")
    assert merged.groupby("zone")["inlet"].sum().tolist() == [1, 1]
    served = merged.groupby("zone")["served"].sum()
    assert served.between(90, 210).all()
    assert (boundary["trunk"] == "no").all()
    run = json.loads((out / "run.json").read_text(encoding="utf-8"))
    assert run["parameters"]["constraints"]["sources"] == 2
    assert run["parameters"]["constraints"]["keep_links"] == 9
    assert run["decisions"]["zone_count"]["choice"] == 2


def test_cli_fixed_file(tmp_path: Path) -> None:
    edges, _ = grid_files(tmp_path)
    fixed = tmp_path / "fixed.csv"
    fixed.write_text("node,zone\nTJ-0000,7\nTJ-0909,7\n", encoding="utf-8")
    out = tmp_path / "out"
    code = main(["zones", str(edges), "--zones", "3", "--fixed", str(fixed), "--out", str(out)])
    assert code == 0
    zones = pd.read_csv(out / "zones.csv", dtype={"node": str}).set_index("node")["zone"]
    assert zones["TJ-0000"] == zones["TJ-0909"]


@pytest.mark.parametrize(
    ("options", "words"),
    [
        (["--size-col", "served", "--max-size", "2"], ["max_size", "TJ-"]),
        (["--min-size", "101"], ["min_size"]),
        (["--supply-list", "MISSING"], ["MISSING"]),
    ],
)
def test_cli_impossible_rules_exit_2(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], options: list[str], words: list[str]
) -> None:
    edges, nodes = grid_files(tmp_path)
    out = tmp_path / "out"
    options = [str(tmp_path / o) if o == "MISSING" else o for o in options]
    code = main(["zones", str(edges), "--nodes", str(nodes), *options, "--out", str(out)])
    err = capsys.readouterr().err
    assert code == 2, err
    for word in words:
        assert word in err
    assert not out.exists()
