"""Directed networks, node importance and local zones through the command line.

Outside references: networkx ``pagerank`` (the random surfer with teleportation, Page et
al. 1999) for node importance; hand-known answers on small invented networks (two directed
cycles joined by one weak arc; networkx's ``barbell_graph``) for zones.
"""

from __future__ import annotations

import io
import json
from pathlib import Path

import networkx as nx
import numpy as np
import pandas as pd
import pytest

from specgraph.cli import main

# Two directed 6-cycles (A and B) joined by one weak arc A0 -> B0.
CYCLES = (
    "source,target,weight\n"
    + "".join(f"{c}{i},{c}{(i + 1) % 6},1\n" for c in "AB" for i in range(6))
    + "A0,B0,0.05\n"
)


def _cycles_graph() -> nx.DiGraph:
    frame = pd.read_csv(io.StringIO(CYCLES), dtype={"source": str, "target": str})
    graph = nx.DiGraph()
    for row in frame.itertuples():
        graph.add_edge(row.source, row.target, weight=row.weight)
    return graph


@pytest.fixture
def cycles(tmp_path: Path) -> Path:
    path = tmp_path / "oneway.csv"
    path.write_text(CYCLES, encoding="utf-8")
    return path


def test_directed_zones_follow_the_cycles(cycles: Path, tmp_path: Path) -> None:
    out = tmp_path / "out"
    args = ["zones", str(cycles), "--weight", "weight", "--directed", "--zones", "2"]
    assert main([*args, "--out", str(out), "--quiet"]) == 0
    record = json.loads((out / "run.json").read_text(encoding="utf-8"))
    assert record["decisions"]["operator"]["choice"] == "directed"
    zones = pd.read_csv(out / "zones.csv", dtype=str)
    groups = sorted(sorted(g) for g in zones.groupby("zone")["node"].apply(list))
    assert groups == [[f"A{i}" for i in range(6)], [f"B{i}" for i in range(6)]]


def test_score_importance_is_pagerank(cycles: Path, tmp_path: Path) -> None:
    zones = tmp_path / "zones.csv"
    rows = "".join(f"{c}{i},{z}\n" for c, z in (("A", 0), ("B", 1)) for i in range(6))
    zones.write_text("node,zone\n" + rows, encoding="utf-8")
    out = tmp_path / "out"
    args = ["score", str(cycles), str(zones), "--weight", "weight", "--directed"]
    assert main([*args, "--damping", "0.85", "--out", str(out), "--quiet"]) == 0
    # Reference: networkx's pagerank of the same weighted directed graph, tight tolerance.
    reference = nx.pagerank(_cycles_graph(), alpha=0.85, weight="weight", tol=1e-13, max_iter=1000)
    nodes = pd.read_csv(out / "node_importance.csv", dtype={"node": str})
    ours = dict(zip(nodes["node"], nodes["importance"], strict=True))
    np.testing.assert_allclose([ours[n] for n in reference], list(reference.values()), atol=1e-9)
    table = pd.read_csv(out / "zone_scores.csv")
    per_zone = [sum(v for n, v in reference.items() if n.startswith(c)) for c in "AB"]
    np.testing.assert_allclose(table["importance"], per_zone, atol=1e-9)
    # B receives the flow of the arc A0 -> B0 and gives none back: it holds more.
    assert per_zone[1] > per_zone[0]


def test_local_zone_is_the_bell_of_the_asset(tmp_path: Path) -> None:
    graph = nx.barbell_graph(8, 0)  # two K8 joined by the link 7-8 (networkx's numbering)
    edges = tmp_path / "bells.csv"
    edges.write_text(
        "source,target\n" + "".join(f"S{u},S{v}\n" for u, v in graph.edges()), encoding="utf-8"
    )
    out = tmp_path / "out"
    assert main(["local", str(edges), "--around", "S2", "--out", str(out), "--quiet"]) == 0
    zone = pd.read_csv(out / "local_zone.csv", dtype=str)
    assert sorted(zone["node"]) == sorted(f"S{i}" for i in range(8))
    boundary = pd.read_csv(out / "local_boundary.csv", dtype=str)
    assert boundary[["source", "target", "inside"]].values.tolist() == [["S7", "S8", "S7"]]
    record = json.loads((out / "run.json").read_text(encoding="utf-8"))
    # Conductance of one bell: 1 crossing link over its volume 8*7 + 1 = 57 (by hand).
    assert record["local_zone"]["conductance"] == pytest.approx(1 / 57)


def test_stability_of_a_directed_network(cycles: Path, tmp_path: Path) -> None:
    # The perturbed runs keep the arcs (each arc gets its own noise factor), so every run
    # uses the directed Laplacian; the two cycles are a stable answer (hand-known).
    out = tmp_path / "out"
    args = ["stability", str(cycles), "--weight", "weight", "--directed", "--zones", "2"]
    assert main([*args, "--repeats", "2", "--out", str(out), "--quiet"]) == 0
    record = json.loads((out / "run.json").read_text(encoding="utf-8"))
    assert record["overall"]["perturbed_ari_mean"] == 1.0
    assert record["overall"]["seed_ari_mean"] == 1.0


def test_perturbed_directed_network_keeps_its_arcs() -> None:
    from specgraph import Network
    from specgraph.studies import perturb_weights

    net = Network.from_links(["a", "b", "c"], ["b", "c", "a"], [1.0, 2.0, 4.0], directed=True)
    noisy = perturb_weights(net, spread=0.2, rng=0)
    assert noisy.directed
    assert (noisy.arcs != 0).nnz == 3
    # Same arcs, weights changed by factors with median 1 (all positive).
    assert ((noisy.arcs != 0) != (net.arcs != 0)).nnz == 0
    assert (noisy.adjacency != (noisy.arcs + noisy.arcs.T)).nnz == 0
