"""``specgraph score``, ``compare`` and ``stability`` end to end.

Expected figures come from outside the project: networkx (modularity,
conductance) and scikit-learn (adjusted Rand index, NMI), on small invented
networks whose answers are also known by hand.
"""

from __future__ import annotations

import json
from pathlib import Path

import networkx as nx
import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import adjusted_rand_score, normalized_mutual_info_score

from specgraph.cli import main


def barbell_files(folder: Path, clique: int = 5) -> tuple[Path, Path, nx.Graph]:
    """Two cliques of invented junctions joined by one main."""
    graph = nx.barbell_graph(clique, 0)
    name = {v: f"BJ-{v:03d}" for v in graph}
    edges = pd.DataFrame(
        [
            {"source": name[a], "target": name[b], "pipe": f"BP-{i}"}
            for i, (a, b) in enumerate(graph.edges)
        ]
    )
    zones = pd.DataFrame({"node": [name[v] for v in graph], "zone": [v // clique for v in graph]})
    edges.to_csv(folder / "mains.csv", index=False)
    zones.to_csv(folder / "zones.csv", index=False)
    return folder / "mains.csv", folder / "zones.csv", graph


def test_score_matches_networkx(tmp_path: Path) -> None:
    edges, zones, graph = barbell_files(tmp_path)
    out = tmp_path / "out"
    assert main(["score", str(edges), str(zones), "--out", str(out), "--quiet"]) == 0
    run = json.loads((out / "run.json").read_text(encoding="utf-8"))
    halves = [set(range(5)), set(range(5, 10))]
    # networkx.community.modularity and conductance are the outside references.
    assert run["overall"]["modularity"] == pytest.approx(nx.community.modularity(graph, halves))
    table = pd.read_csv(out / "zone_scores.csv")
    expected = nx.conductance(graph, halves[0], halves[1])
    assert table["conductance"].tolist() == pytest.approx([expected, expected])
    assert run["overall"]["unassigned_nodes"] == 0
    assert "caution" in run


def test_score_partial_zoning_reports_unassigned(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    edges, zones, _ = barbell_files(tmp_path)
    frame = pd.read_csv(zones).iloc[:-2]
    frame.to_csv(zones, index=False)
    out = tmp_path / "out"
    assert main(["score", str(edges), str(zones), "--out", str(out)]) == 0
    err = capsys.readouterr().err
    assert "2 nodes of the network are in no zone" in err
    assert sorted(pd.read_csv(out / "unassigned.csv")["node"]) == ["BJ-008", "BJ-009"]


@pytest.mark.parametrize(
    ("body", "words"),
    [
        ("node,zone\nBJ-000,0\nXX-1,1\n", ["not nodes", "XX-1"]),
        ("node,zone\nBJ-000,0\nBJ-000,1\n", ["listed again"]),
        ("node,zone\nBJ-000,0\nBJ-001,-1\n", ["negative number", "line 3"]),
        ("node,zone\nBJ-000,North\nBJ-001,\n", ["zone is empty", "line 3"]),
    ],
)
def test_score_bad_zone_files_exit_2(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], body: str, words: list[str]
) -> None:
    edges, zones, _ = barbell_files(tmp_path)
    zones.write_text(body, encoding="utf-8")
    out = tmp_path / "out"
    assert main(["score", str(edges), str(zones), "--out", str(out)]) == 2
    err = capsys.readouterr().err
    for word in words:
        assert word in err
    assert "zones.csv" in err
    assert not out.exists()


def test_compare_matches_scikit_learn(tmp_path: Path) -> None:
    rng = np.random.default_rng(3)
    nodes = [f"N{i}" for i in range(60)]
    a = rng.integers(0, 4, 60)
    b = np.where(rng.random(60) < 0.8, a, rng.integers(0, 5, 60))
    pd.DataFrame({"node": nodes, "zone": a}).to_csv(tmp_path / "a.csv", index=False)
    pd.DataFrame({"node": nodes[::-1], "zone": b[::-1]}).to_csv(tmp_path / "b.csv", index=False)
    out = tmp_path / "out"
    code = main(["compare", str(tmp_path / "a.csv"), str(tmp_path / "b.csv"), "--out", str(out)])
    assert code == 0
    summary = json.loads((out / "run.json").read_text(encoding="utf-8"))["summary"]
    assert summary["adjusted_rand"] == pytest.approx(adjusted_rand_score(a, b))
    assert summary["nmi"] == pytest.approx(normalized_mutual_info_score(a, b))
    overlap = pd.read_csv(out / "overlap.csv")
    assert overlap["nodes"].sum() == 60


def test_stability_on_clear_structure(tmp_path: Path) -> None:
    edges, _, _ = barbell_files(tmp_path, clique=6)
    out = tmp_path / "out"
    code = main(
        ["stability", str(edges), "--zones", "2", "--repeats", "2", "--out", str(out), "--quiet"]
    )
    assert code == 0
    nodes = pd.read_csv(out / "node_confidence.csv")
    # Two 6-cliques joined by one link: every run finds the same halves.
    assert (nodes["confidence"] == 1.0).all()
    run = json.loads((out / "run.json").read_text(encoding="utf-8"))
    assert run["overall"]["unstable_zones"] == []
    assert len(pd.read_csv(out / "runs.csv")) == 4


def test_robustness_reports_the_single_bridge_first(tmp_path: Path) -> None:
    edges, _zones, graph = barbell_files(tmp_path, clique=5)
    # Hang a two-node branch on BJ-000: two more bridges, cutting off 2 and 1 nodes.
    frame = pd.read_csv(edges)
    extra = pd.DataFrame(
        {"source": ["BJ-000", "BT-1"], "target": ["BT-1", "BT-2"], "pipe": ["BP-x", "BP-y"]}
    )
    pd.concat([frame, extra]).to_csv(edges, index=False)
    out = tmp_path / "out"
    assert main(["robustness", str(edges), "--out", str(out), "--quiet"]) == 0
    bridges = pd.read_csv(out / "bridges.csv")
    graph.add_edges_from([(0, "t1"), ("t1", "t2")])
    # networkx.bridges is the outside reference for which links are bridges.
    assert len(bridges) == len(list(nx.bridges(graph)))
    first = bridges.iloc[0]
    assert {first["source"], first["target"]} == {"BJ-004", "BJ-005"}
    # Its failure cuts off the smaller side: the second clique (5 nodes; the
    # first side holds 5 + 2 branch nodes).
    assert first["cut_nodes"] == 5
    assert bridges["cut_nodes"].tolist() == [5, 2, 1]
    nodes = pd.read_csv(out / "articulation_nodes.csv")
    assert len(nodes) == len(list(nx.articulation_points(graph)))


@pytest.mark.parametrize("command", ["score", "compare", "robustness"])
def test_json_summaries(tmp_path: Path, capsys: pytest.CaptureFixture[str], command: str) -> None:
    edges, zones, graph = barbell_files(tmp_path)
    out = tmp_path / "out"
    args = {
        "score": ["score", str(edges), str(zones)],
        "compare": ["compare", str(zones), str(zones)],
        "robustness": ["robustness", str(edges), "--zones-file", str(zones)],
    }[command]
    assert main([*args, "--out", str(out), "--json", "--quiet"]) == 0
    summary = json.loads(capsys.readouterr().out)
    assert summary["out"] == str(out)
    if command == "score":
        halves = [set(range(5)), set(range(5, 10))]
        assert summary["overall"]["modularity"] == pytest.approx(
            nx.community.modularity(graph, halves)
        )
    elif command == "compare":
        assert summary["summary"]["adjusted_rand"] == pytest.approx(1.0)
    else:
        assert summary["summary"]["bridges"] == len(list(nx.bridges(graph)))


def test_score_unknown_supply_id_named_at_its_line(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    edges, zones, _ = barbell_files(tmp_path)
    supply = tmp_path / "inlets.csv"
    supply.write_text("node\nBJ-000\nBJ-999\n", encoding="utf-8")
    out = tmp_path / "out"
    code = main(["score", str(edges), str(zones), "--supply-list", str(supply), "--out", str(out)])
    err = capsys.readouterr().err
    assert code == 2, err
    # Same rule as `specgraph zones`: the file, the line and the option are named.
    for words in ("inlets.csv", "line 3", "'BJ-999'", "--supply-list"):
        assert words in err
    assert not out.exists()
