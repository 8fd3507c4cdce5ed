"""Zone labels of any text, the user's link ids beside every link table, networkx round trips.

A utility's districts have names: ``score``, ``compare``, ``robustness
--zones-file`` and ``refine`` read them, figure as on the same zoning
numbered 0..k-1, and write the names back unchanged. Outside references:
networkx (``community.modularity``, ``cut_size``, ``volume``,
``normalized_cut_size``, ``bridges``, ``laplacian_matrix``), scikit-learn
(``adjusted_rand_score``) and, for the networkx round trips, networkx's own
modularity of the same partition.
"""

from __future__ import annotations

import json
import pickle
from pathlib import Path

import networkx as nx
import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import adjusted_rand_score

from specgraph import Network, find_zones, refine_zoning
from specgraph.cli import main
from specgraph.diagnostics import compare, compare_frames, robustness, score
from specgraph.exceptions import InputError, ParameterError
from specgraph.interop import annotate_graph, network_from_graph, zone_sets
from specgraph.io import read_edges, read_zone_file

#: Agreement of one figure computed two ways (rounding only).
RTOL = 1e-10

#: Districts of the invented town of Quillmere, by zone number. "7" and "07"
#: are two districts: labels are compared as text.
DISTRICTS = {0: "DMA-01 Quillmere North", 1: "DMA-02 Old Quay", 2: "07", 3: "7"}


def quillmere(folder: Path, *, clique: int = 5) -> tuple[Path, nx.Graph, list[str]]:
    """A ring of four cliques of invented junctions (one district each), with pipe ids.

    A two-junction spur hangs on the first junction (two bridges), so the
    network has bridges to list beside the ones of networkx.
    """
    graph = nx.ring_of_cliques(4, clique)
    graph.add_edges_from([(0, "spur-1"), ("spur-1", "spur-2")])
    name = {v: (f"QJ-{v:03d}" if isinstance(v, int) else f"QS-{v[-1]}") for v in graph}
    edges = pd.DataFrame(
        [
            {"source": name[a], "target": name[b], "pipe": f"QP-{i:03d}", "material": "PE"}
            for i, (a, b) in enumerate(graph.edges)
        ]
    )
    edges.to_csv(folder / "mains.csv", index=False)
    nx.relabel_nodes(graph, name, copy=False)
    return folder / "mains.csv", graph, list(edges["pipe"])


def zone_files(folder: Path, graph: nx.Graph, *, clique: int = 5) -> tuple[Path, Path]:
    """The same zoning numbered and named: the spur joins the first district."""
    nodes = list(graph)
    numbers = [0 if n.startswith("QS") else int(n[3:]) // clique for n in nodes]
    pd.DataFrame({"node": nodes, "zone": numbers}).to_csv(folder / "numbered.csv", index=False)
    named = pd.DataFrame({"node": nodes, "zone": [DISTRICTS[z] for z in numbers]})
    named.to_csv(folder / "named.csv", index=False)
    return folder / "numbered.csv", folder / "named.csv"


def text_table(path: Path) -> pd.DataFrame:
    """A CSV with every cell as written (no number parsing, no NA guessing)."""
    return pd.read_csv(path, dtype=str, keep_default_na=False)


def partition(graph: nx.Graph, zones_csv: Path) -> dict[str, set[str]]:
    frame = text_table(zones_csv)
    return {z: set(frame.loc[frame["zone"] == z, "node"]) for z in frame["zone"].unique()}


def test_score_names_written_back_and_figures_as_numbered(tmp_path: Path) -> None:
    edges, graph, _ = quillmere(tmp_path)
    numbered, named = zone_files(tmp_path, graph)
    for which, path in (("n", numbered), ("t", named)):
        assert (
            main(["score", str(edges), str(path), "--out", str(tmp_path / which), "--quiet"]) == 0
        )
    by_number = pd.read_csv(tmp_path / "n" / "zone_scores.csv")
    by_name = text_table(tmp_path / "t" / "zone_scores.csv")
    # Names come back exactly as written, in sorted text order: "07" and "7" are two zones.
    assert by_name["zone"].tolist() == sorted(DISTRICTS.values())
    as_numbers = by_name.assign(zone=by_name["zone"].map({v: k for k, v in DISTRICTS.items()}))
    as_numbers = as_numbers.astype({"zone": int}).sort_values("zone").reset_index(drop=True)
    for column in ("nodes", "boundary_links", "conductance", "ncut_share", "modularity_share"):
        np.testing.assert_allclose(
            as_numbers[column].astype(float), by_number[column].astype(float), rtol=RTOL
        )
    runs = [json.loads((tmp_path / w / "run.json").read_text(encoding="utf-8")) for w in "nt"]
    assert runs[0]["overall"] == runs[1]["overall"]
    # networkx is the outside reference: modularity, and each zone's cut / volume.
    zones = partition(graph, named)
    assert runs[1]["overall"]["modularity"] == pytest.approx(
        nx.community.modularity(graph, list(zones.values())), rel=RTOL
    )
    ncut = sum(nx.cut_size(graph, s) / nx.volume(graph, s) for s in zones.values())
    assert runs[1]["overall"]["normalized_cut"] == pytest.approx(ncut, rel=RTOL)
    importance = text_table(tmp_path / "t" / "node_importance.csv")
    assert set(importance["zone"]) == set(DISTRICTS.values())


def test_score_two_named_districts_against_normalized_cut_size(tmp_path: Path) -> None:
    edges, graph, _ = quillmere(tmp_path)
    nodes = list(graph)
    west = {n for n in nodes if n.startswith("QS") or int(n[3:]) < 10}
    zones = pd.DataFrame(
        {"node": nodes, "zone": ["West Quay" if n in west else "East" for n in nodes]}
    )
    zones.iloc[:-3].to_csv(tmp_path / "z.csv", index=False)  # three nodes in no zone
    out = tmp_path / "out"
    assert main(["score", str(edges), str(tmp_path / "z.csv"), "--out", str(out), "--quiet"]) == 0
    run = json.loads((out / "run.json").read_text(encoding="utf-8"))
    assert run["coverage"]["unassigned"] == 3
    # Unassigned nodes have an empty zone cell (a text label is never empty).
    importance = text_table(out / "node_importance.csv")
    assert (importance["zone"] == "").sum() == 3
    full = tmp_path / "full.csv"
    zones.to_csv(full, index=False)
    assert main(["score", str(edges), str(full), "--out", str(tmp_path / "f"), "--quiet"]) == 0
    run = json.loads((tmp_path / "f" / "run.json").read_text(encoding="utf-8"))
    # networkx: normalized_cut_size(S, T) = cut (1/vol S + 1/vol T), the two-zone Ncut.
    expected = nx.normalized_cut_size(graph, west, set(nodes) - west)
    assert run["overall"]["normalized_cut"] == pytest.approx(expected, rel=RTOL)


def test_compare_named_against_numbered(tmp_path: Path) -> None:
    _, graph, _ = quillmere(tmp_path)
    numbered, named = zone_files(tmp_path, graph)
    out = tmp_path / "out"
    assert main(["compare", str(named), str(numbered), "--out", str(out), "--quiet"]) == 0
    summary = json.loads((out / "run.json").read_text(encoding="utf-8"))["summary"]
    a = text_table(named).set_index("node")["zone"]
    b = text_table(numbered).set_index("node")["zone"].reindex(a.index)
    # scikit-learn is the outside reference; the same zoning named and numbered agrees fully.
    assert summary["adjusted_rand"] == pytest.approx(adjusted_rand_score(a, b)) == 1.0
    assert summary["zones_a"] == 4
    matched = text_table(out / "matched.csv")
    pairs = dict(zip(matched["zone_a"], matched["zone_b"].astype(int), strict=True))
    assert pairs == {name: number for number, name in DISTRICTS.items()}
    overlap = text_table(out / "overlap.csv")
    assert set(overlap["zone_a"]) == set(DISTRICTS.values())


def test_compare_splits_name_the_districts() -> None:
    a = {f"Q{i}": ("Harbour" if i < 6 else "Mill Lane") for i in range(12)}
    b = {f"Q{i}": ("07" if i < 3 else "7" if i < 9 else "12") for i in range(12)}
    result = compare_frames(a, b)
    assert result.splits["zone_a"].tolist() == ["Harbour", "Mill Lane"]
    assert result.splits["zones_b"].tolist() == ["07, 7", "12, 7"]
    codes = ([0] * 6 + [1] * 6, [0] * 3 + [1] * 6 + [2] * 3)
    # The same figures as the zoning numbered (scikit-learn's adjusted Rand index).
    assert result.adjusted_rand == pytest.approx(adjusted_rand_score(*codes))
    again = compare(list(a.values()), list(b.values()))
    assert again.adjusted_rand == pytest.approx(result.adjusted_rand)
    with_gap = compare(["x", None, "y"], [1, 1, -1])
    assert with_gap.nodes_compared == 1
    assert with_gap.only_in_a == 1
    assert with_gap.only_in_b == 1


def test_robustness_names_zones_and_keeps_pipe_ids(tmp_path: Path) -> None:
    edges, graph, _ = quillmere(tmp_path)
    numbered, named = zone_files(tmp_path, graph)
    for which, path in (("n", numbered), ("t", named)):
        args = ["robustness", str(edges), "--zones-file", str(path), "--out", str(tmp_path / which)]
        assert main([*args, "--quiet"]) == 0
    by_number = pd.read_csv(tmp_path / "n" / "zone_connectivity.csv")
    by_name = text_table(tmp_path / "t" / "zone_connectivity.csv")
    assert by_name["zone"].tolist() == sorted(DISTRICTS.values())
    numbers = [{v: k for k, v in DISTRICTS.items()}[z] for z in by_name["zone"]]
    np.testing.assert_allclose(
        by_name["algebraic_connectivity"].astype(float),
        by_number["algebraic_connectivity"].to_numpy()[numbers],
        rtol=1e-8,
    )
    # networkx's Laplacian of each district's induced sub-network, second smallest eigenvalue.
    for zone, nodes in partition(graph, named).items():
        lap = nx.laplacian_matrix(graph.subgraph(nodes)).toarray().astype(float)
        expected = np.linalg.eigvalsh(lap)[1]
        got = float(by_name.loc[by_name["zone"] == zone, "algebraic_connectivity"].iloc[0])
        assert got == pytest.approx(expected, rel=1e-8)
    # Every bridge of networkx, listed with the pipe id of the edge table.
    table = text_table(edges)
    pipe_of = {
        frozenset(p): q
        for p, q in zip(
            zip(table["source"], table["target"], strict=True), table["pipe"], strict=True
        )
    }
    bridges = text_table(tmp_path / "t" / "bridges.csv")
    expected_pipes = {pipe_of[frozenset(link)] for link in nx.bridges(graph)}
    assert set(bridges["pipe"]) == expected_pipes
    assert all(
        pipe_of[frozenset((s, t))] == p
        for s, t, p in zip(bridges["source"], bridges["target"], bridges["pipe"], strict=True)
    )
    assert (bridges["material"] == "PE").all()
    links = text_table(tmp_path / "t" / "links.csv")
    assert all(
        pipe_of[frozenset((s, t))] == p
        for s, t, p in zip(links["source"], links["target"], links["pipe"], strict=True)
    )


def test_robustness_parallel_pipes_list_both_ids_and_renames_taken_names() -> None:
    extra = pd.DataFrame(
        {"pipe": ["P-1", "P-2", "P-3", "P-4"], "bridge": ["no", "no", "yes", "yes"]}
    )
    net = Network.from_links(["a", "b", "b", "c"], ["b", "c", "c", "d"], extra=extra)
    result = robustness(net, rng=0)
    bridges = result.bridges.set_index(["source", "target"])
    # networkx: on the summed network (b-c one link) every link is a bridge.
    graph = nx.Graph([("a", "b"), ("b", "c"), ("c", "d")])
    assert len(result.bridges) == len(list(nx.bridges(graph)))
    assert bridges.loc[("b", "c"), "pipe"] == "P-2; P-3"
    assert bridges.loc[("a", "b"), "pipe"] == "P-1"
    # The input's own "bridge" column is carried as edge_bridge, said in the record.
    assert result.record["renamed_link_columns"] == {"bridge": "edge_bridge"}
    assert bridges.loc[("c", "d"), "edge_bridge"] == "yes"
    assert result.links["bridge"].dtype == bool


def test_robustness_without_link_columns_is_unchanged() -> None:
    net = Network.from_links(["a", "b"], ["b", "c"])
    assert list(robustness(net, rng=0).bridges.columns) == [
        "source",
        "target",
        "weight",
        "cut_nodes",
        "cut_size",
        "cut_end",
        "component",
    ]


def test_refine_named_districts_as_numbered(tmp_path: Path) -> None:
    edges, graph, _ = quillmere(tmp_path)
    numbered, named = zone_files(tmp_path, graph)
    # Move two junctions into the wrong district, as an old district plan would have them.
    for path in (numbered, named):
        frame = text_table(path)
        frame.loc[frame["node"].isin(["QJ-004", "QJ-009"]), "zone"] = frame["zone"].iloc[7]
        frame.to_csv(path, index=False)
    for which, path in (("n", numbered), ("t", named)):
        assert (
            main(["refine", str(edges), str(path), "--out", str(tmp_path / which), "--quiet"]) == 0
        )
    runs = [json.loads((tmp_path / w / "run.json").read_text(encoding="utf-8")) for w in "nt"]
    refinement = [run["decisions"]["refinement"] for run in runs]
    names = sorted(DISTRICTS.values())
    # Codes follow text order, numbers follow number order: map one onto the other.
    by_code = {str(DISTRICTS[n]): n for n in DISTRICTS}
    assert all(z in names for z in refinement[1]["input_zones"])
    assert refinement[0]["ncut_before"] == pytest.approx(refinement[1]["ncut_before"], rel=RTOL)
    assert refinement[0]["ncut_after"] == pytest.approx(refinement[1]["ncut_after"], rel=RTOL)
    assert [by_code[z] for z in refinement[1]["input_zones"]] == refinement[0]["input_zones"]
    zones = [text_table(tmp_path / w / "zones.csv") for w in "nt"]
    assert zones[0]["zone"].tolist() == zones[1]["zone"].tolist()
    # The normalized cut of networkx on the refined zoning.
    frame = zones[1]
    sets = [set(frame.loc[frame["zone"] == z, "node"]) for z in frame["zone"].unique()]
    ncut = sum(nx.cut_size(graph, s) / nx.volume(graph, s) for s in sets)
    assert refinement[1]["ncut_after"] == pytest.approx(ncut, rel=RTOL)


def test_library_functions_take_text_labels(tmp_path: Path) -> None:
    edges, graph, _ = quillmere(tmp_path)
    network = read_edges(edges)
    _, named = zone_files(tmp_path, graph)
    mapping = read_zone_file(named)
    text = np.array([mapping[i] for i in network.node_ids], dtype=object)
    codes = np.unique(text, return_inverse=True)[1]
    card, reference = score(network, text, eigengap=False), score(network, codes, eigengap=False)
    assert card.zones["zone"].tolist() == sorted(DISTRICTS.values())
    assert card.overall == reference.overall
    refined, by_code = refine_zoning(network, text, rng=0), refine_zoning(network, codes, rng=0)
    np.testing.assert_array_equal(refined.labels, by_code.labels)
    names = sorted(DISTRICTS.values())
    assert refined.decisions["refinement"]["input_zones"] == [
        names[z] for z in by_code.decisions["refinement"]["input_zones"]
    ]
    with pytest.raises(ParameterError, match="all text or all whole numbers"):
        score(network, np.where(codes == 0, 0, text), eigengap=False)
    with pytest.raises(ParameterError, match="non-empty"):
        score(network, np.where(codes == 0, "", text), eigengap=False)


def test_zone_file_empty_label_names_file_and_line(tmp_path: Path) -> None:
    path = tmp_path / "districts.csv"
    path.write_text("node,zone\nQJ-000,Old Quay\nQJ-001,\n", encoding="utf-8")
    with pytest.raises(InputError) as info:
        read_zone_file(path)
    assert info.value.line == 3
    assert info.value.column == "zone"
    assert "districts.csv" in str(info.value)


# ------------------------------------------------------------------ networkx
@pytest.mark.parametrize(
    "graph",
    [nx.ring_of_cliques(4, 5), nx.grid_2d_graph(6, 6)],
    ids=["integer nodes", "tuple nodes"],
)
def test_zone_sets_work_in_networkx_modularity(graph: nx.Graph) -> None:
    network = network_from_graph(graph, weight=None)
    zoning = find_zones(network, 4, rng=0)
    sets = zone_sets(zoning)
    # The sets hold the graph's own node objects: networkx takes them as a partition.
    assert nx.community.is_partition(graph, sets)
    # networkx's own modularity of the same partition, built from the zone attribute.
    zoned = annotate_graph(graph, zoning)
    by_attribute: dict[int, set[object]] = {}
    for node, zone in zoned.nodes(data="zone"):
        by_attribute.setdefault(zone, set()).add(node)
    expected = nx.community.modularity(graph, list(by_attribute.values()))
    assert nx.community.modularity(graph, sets) == pytest.approx(expected, rel=RTOL)
    assert score(network, zoning.labels, eigengap=False).overall["modularity"] == pytest.approx(
        expected, rel=RTOL
    )
    # Pickling (joblib, Dask) keeps the node objects.
    assert pickle.loads(pickle.dumps(network)).graph_nodes == tuple(graph.nodes)


def test_networks_not_from_networkx_give_text_ids() -> None:
    network = Network.from_links(["1", "2"], ["2", "3"])
    assert network.graph_nodes is None
    assert set().union(*zone_sets(find_zones(network, 1, rng=0))) == {"1", "2", "3"}


def test_pos_takes_a_layout_dict_or_an_attribute_name() -> None:
    graph = nx.grid_2d_graph(4, 3)
    pos = nx.spring_layout(graph, seed=7)
    from_dict = Network.from_networkx(graph, pos=pos)
    rows = [from_dict.index_of[str(node)] for node in graph]
    np.testing.assert_array_equal(from_dict.coordinates[rows], [pos[node] for node in graph])
    nx.set_node_attributes(graph, pos, "xy")
    from_name = Network.from_networkx(graph, pos="xy")
    np.testing.assert_array_equal(from_name.coordinates, from_dict.coordinates)
    assert network_from_graph(graph, weight=None, pos=pos).coordinates is not None


def test_pos_dict_faults_are_named() -> None:
    graph = nx.path_graph(4)
    pos = nx.spring_layout(graph, seed=1)
    with pytest.raises(
        InputError, match=r"no position for 2 of the graph's 4 nodes \(first: 2, 3\)"
    ):
        Network.from_networkx(graph, pos={n: pos[n] for n in (0, 1)})
    with pytest.raises(InputError, match="node 1: its position in pos must be a pair"):
        Network.from_networkx(graph, pos={**pos, 1: (0.0, 1.0, 2.0)})
    with pytest.raises(InputError, match="node 2"):
        Network.from_networkx(graph, pos={**pos, 2: (0.0, float("nan"))})
    with pytest.raises(ParameterError, match="pos"):
        Network.from_networkx(graph, pos=3)  # type: ignore[arg-type]


def test_parquet_zone_columns_of_numbers_and_names(tmp_path: Path) -> None:
    pytest.importorskip("pyarrow")
    frame = pd.DataFrame({"node": ["QJ-1", "QJ-2", "QJ-3"], "zone": [4, 0, 4]})
    frame.to_parquet(tmp_path / "numbers.parquet")
    assert read_zone_file(tmp_path / "numbers.parquet") == {"QJ-1": 4, "QJ-2": 0, "QJ-3": 4}
    frame.assign(zone=["Old Quay", "07", "Old Quay"]).to_parquet(tmp_path / "names.parquet")
    assert read_zone_file(tmp_path / "names.parquet") == {
        "QJ-1": "Old Quay",
        "QJ-2": "07",
        "QJ-3": "Old Quay",
    }
    frame.assign(zone=[4, -1, 4]).to_parquet(tmp_path / "negative.parquet")
    with pytest.raises(InputError, match="negative number"):
        read_zone_file(tmp_path / "negative.parquet")
