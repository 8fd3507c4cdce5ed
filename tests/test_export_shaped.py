"""An export-shaped network through every command, checked against networkx and scikit-learn.

The network (``tests/export_shaped.py``, built with numpy, scipy and networkx only) holds
what real GIS exports hold: a main network with pipe ids in their own column, stray
fragments of 2-5 nodes, isolated nodes listed only in the node table, named existing
districts and supply points with text ids. Each command runs as a user runs it
(``specgraph.cli.main``) and its files are checked against networkx's own figures:
components (``nx.connected_components``), cut edges (``nx.edge_boundary``), bridges
(``nx.bridges``), the algebraic connectivity of a district (``nx.laplacian_spectrum``),
and against scikit-learn's adjusted Rand index for ``compare``.
"""

from __future__ import annotations

import json
from pathlib import Path

import networkx as nx
import numpy as np
import pandas as pd
import pytest
from export_shaped import ExportShaped, write_export
from sklearn.metrics import adjusted_rand_score

from specgraph.cli import main

#: Zones asked of the main network: one per supply point of the export.
ZONES = 6
#: Reading options of every command on the export (unit weights: networkx counts links).
READ = ["--source", "from", "--target", "to", "--node-col", "node"]


@pytest.fixture(scope="module")
def export(tmp_path_factory: pytest.TempPathFactory) -> ExportShaped:
    return write_export(
        tmp_path_factory.mktemp("export"), n_main=1500, n_fragments=8, n_isolated=10
    )


@pytest.fixture(scope="module")
def zoned(export: ExportShaped, tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("zones")
    argv = ["zones", str(export.edges), "--nodes", str(export.nodes), *READ]
    argv += ["--x-col", "x", "--y-col", "y", "--supply-list", str(export.supplies)]
    argv += ["--zones", str(ZONES)]
    assert main([*argv, "--geojson", "--figures", "--out", str(out), "--quiet"]) == 0
    return out


def _zones(folder: Path) -> dict[str, int]:
    table = pd.read_csv(folder / "zones.csv", dtype={"node": str})
    return dict(zip(table["node"], table["zone"], strict=True))


def test_zones_gives_the_main_network_its_zones_and_sets_fragments_aside(
    export: ExportShaped, zoned: Path
) -> None:
    """Stray pieces do not take the zone count: the main network gets the zones asked (one
    per supply point), the pieces form one group listed in fragments.csv, equal to
    networkx's small components."""
    zones = _zones(zoned)
    summary = pd.read_csv(zoned / "zone_summary.csv")
    districts = summary[summary["role"] == "district"]
    assert (summary["role"] == "fragments").sum() == 1
    assert len(districts) == ZONES
    main_ids = {v for v, z in zones.items() if z in set(districts["zone"])}
    assert main_ids == set(export.main)
    small = set().union(*(c for c in nx.connected_components(export.graph) if len(c) < 100))
    listed = pd.read_csv(zoned / "fragments.csv", dtype={"node": str})
    assert set(listed["node"]) == small == set().union(*export.fragments) | export.isolated
    for zone in districts["zone"]:  # every district one connected zone (networkx)
        members = [v for v, z in zones.items() if z == zone]
        assert nx.is_connected(export.graph.subgraph(members))
    # one supply point per district, named in zone_summary.csv
    supplies = set(pd.read_csv(export.supplies, dtype=str)["node"])
    points = districts["supply_points"].astype(str)
    assert sorted(points) == sorted(supplies)
    assert all(zones[p] == z for p, z in zip(points, districts["zone"], strict=True))


def test_boundary_carries_pipe_ids_in_zone_pair_order(export: ExportShaped, zoned: Path) -> None:
    """boundary.csv lists exactly networkx's cut edges, each with its own pipe id."""
    zones = _zones(zoned)
    boundary = pd.read_csv(zoned / "boundary.csv", dtype=str)
    cut = {
        export.graph[u][v]["pipe_id"]
        for z in set(zones.values())
        for u, v in nx.edge_boundary(export.graph, [n for n, y in zones.items() if y == z])
    }
    assert set(boundary["pipe_id"]) == cut
    for row in boundary.itertuples():
        assert {row.source, row.target} == set(_ends(export, row.pipe_id))
    a, b = boundary["zone_a"].astype(int), boundary["zone_b"].astype(int)
    pairs = list(zip(np.minimum(a, b), np.maximum(a, b), strict=True))
    assert pairs == sorted(pairs)  # by zone pair, the smaller zone first


def _ends(export: ExportShaped, pipe_id: str) -> tuple[str, str]:
    for u, v, data in export.graph.edges(data=True):
        if data["pipe_id"] == pipe_id:
            return u, v
    raise AssertionError(pipe_id)


def test_zone_areas_and_figure_files(zoned: Path) -> None:
    """Zone areas are polygons in compact GeoJSON; --figures wrote PNG and SVG files."""
    text = (zoned / "zone_summary.geojson").read_text(encoding="utf-8")
    assert "\n " not in text  # compact, not pretty-printed
    kinds = {f["geometry"]["type"] for f in json.loads(text)["features"]}
    assert kinds <= {"Polygon", "MultiPolygon"}
    figures = zoned / "figures"
    assert (figures / "zone_map.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert (figures / "zone_map.svg").stat().st_size > 0


def test_named_districts_through_score_robustness_refine_and_compare(
    export: ExportShaped, zoned: Path, tmp_path: Path
) -> None:
    """The utility's districts, by name, through the commands that read a zoning; names
    come back unchanged and nodes in no district (the stray pieces) are said, not refused."""
    districts = pd.read_csv(export.districts, dtype=str)
    names = set(districts["district"])
    zone_col = ["--zone-col", "district"]

    out = tmp_path / "score"
    argv = ["score", str(export.edges), str(export.districts), *READ, *zone_col]
    assert main([*argv, "--no-eigengap", "--out", str(out), "--quiet"]) == 0
    scores = pd.read_csv(out / "zone_scores.csv", dtype={"zone": str})
    assert set(scores["zone"]) == names
    sizes = districts["district"].value_counts()
    assert all(scores.set_index("zone")["nodes"][n] == sizes[n] for n in names)

    out = tmp_path / "robustness"
    argv = ["robustness", str(export.edges), *READ, "--zones-file", str(export.districts)]
    assert main([*argv, *zone_col, "--out", str(out), "--quiet"]) == 0
    bridges = pd.read_csv(out / "bridges.csv", dtype=str)
    expected = {export.graph[u][v]["pipe_id"] for u, v in nx.bridges(export.graph)}
    assert set(bridges["pipe_id"]) == expected  # networkx bridges, by the user's pipe id
    per_zone = pd.read_csv(out / "zone_connectivity.csv", dtype={"zone": str}).set_index("zone")
    assert set(per_zone.index) == names
    for name in names:
        members = districts.loc[districts["district"] == name, "node"]
        sub = export.graph.subgraph(members)
        if nx.is_connected(sub):  # algebraic connectivity: networkx's Laplacian spectrum
            want = np.sort(nx.laplacian_spectrum(sub))[1]
            assert per_zone.loc[name, "algebraic_connectivity"] == pytest.approx(want, rel=1e-6)
        else:
            assert per_zone.loc[name, "algebraic_connectivity"] == 0.0  # Fiedler 1973

    out = tmp_path / "refine"
    argv = ["refine", str(export.edges), str(export.districts), *READ, *zone_col]
    argv += ["--nodes", str(export.nodes)]
    assert main([*argv, "--cycles", "2", "--out", str(out), "--quiet"]) == 0
    refined = _zones(out)
    summary = pd.read_csv(out / "zone_summary.csv")
    group = int(summary.loc[summary["role"] == "fragments", "zone"].iloc[0])
    unzoned = set(export.graph) - set(districts["node"])  # the pieces the districts omit
    assert {v for v, z in refined.items() if z == group} == unzoned
    record = json.loads((out / "run.json").read_text(encoding="utf-8"))
    assert set(record["decisions"]["refinement"]["input_zones"]) == names
    for zone in summary.loc[summary["role"] == "district", "zone"]:  # still one zone each
        assert nx.is_connected(export.graph.subgraph(v for v, z in refined.items() if z == zone))

    # compare the districts with the zones of the zones command (scikit-learn's ARI)
    a = tmp_path / "a.csv"
    districts.rename(columns={"district": "zone"}).to_csv(a, index=False)
    out = tmp_path / "compare"
    assert main(["compare", str(a), str(zoned / "zones.csv"), "--out", str(out), "--quiet"]) == 0
    record = json.loads((out / "run.json").read_text(encoding="utf-8"))
    ari = record["summary"]["adjusted_rand"]
    zones = _zones(zoned)
    common = districts["node"].tolist()
    want = adjusted_rand_score(districts["district"], [zones[v] for v in common])
    assert ari == pytest.approx(want, abs=1e-9)


def test_spectrum_and_local_on_the_export(
    export: ExportShaped, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """spectrum counts one zero eigenvalue per component (a theorem: the multiplicity of 0
    in the Laplacian spectrum is the number of components; Chung 1997, Lemma 1.7) and
    says the caution; local finds a zone around a named junction."""
    out = tmp_path / "spectrum"
    argv = ["spectrum", str(export.edges), "--nodes", str(export.nodes), *READ]
    assert main([*argv, "--out", str(out)]) == 0
    assert "Decision support only" in capsys.readouterr().err
    record = json.loads((out / "run.json").read_text(encoding="utf-8"))
    assert record["network"]["components"] == nx.number_connected_components(export.graph)
    out = tmp_path / "local"
    argv = ["local", str(export.edges), *READ, "--around", "QM-J000010", "--out", str(out)]
    assert main([*argv, "--quiet"]) == 0


def test_nodes_in_no_zone_only_as_components_of_their_own() -> None:
    """refine_zoning leaves a stray piece in no zone as the fragments group, and refuses a
    node in no zone that is linked to zoned nodes (which zone it belongs to is the
    question refine cannot answer); robustness leaves such nodes out of every zone."""
    from specgraph import Network, refine_zoning
    from specgraph.diagnostics import robustness
    from specgraph.exceptions import ParameterError

    graph = nx.barbell_graph(5, 0)  # two 5-cliques joined by one link (networkx)
    graph.add_edge("x", "y")  # a stray piece
    net = Network.from_networkx(graph)
    ids = [str(v) for v in graph.nodes]
    labels = ["West"] * 5 + ["East"] * 5 + [None, None]
    assert ids[-2:] == ["x", "y"]
    zoning = refine_zoning(net, labels, rng=0)
    assert zoning.zones["role"].tolist() == ["district", "district", "fragments"]
    assert zoning.labels[-2:].tolist() == [2, 2]
    assert zoning.scores["normalized_cut"] == pytest.approx(  # networkx, the two cliques
        nx.normalized_cut_size(graph, range(5), range(5, 10))
    )
    with pytest.raises(ParameterError, match="linked to zoned nodes"):
        refine_zoning(net, ["West"] * 4 + [None] + ["East"] * 5 + [None, None], rng=0)
    zones = robustness(net, labels=labels, rng=0).zones.set_index("zone")
    clique = np.sort(nx.laplacian_spectrum(nx.complete_graph(5)))[1]  # 5, closed form
    assert zones.loc["West", "algebraic_connectivity"] == pytest.approx(clique)
    assert zones["nodes"].tolist() == [5, 5]


def test_a_network_of_self_loops_only_is_refused_by_the_library_too() -> None:
    """An edge table whose every link is a self-loop holds no link between two nodes
    (networkx: ``nx.selfloop_edges`` is all of it): find_zones refuses it, as the command
    line does, instead of zoning isolated nodes."""
    from specgraph import Network, find_zones
    from specgraph.exceptions import ParameterError

    graph = nx.Graph([("QM-J1", "QM-J1"), ("QM-J2", "QM-J2"), ("QM-J3", "QM-J3")])
    assert nx.number_of_selfloops(graph) == graph.number_of_edges()
    net = Network.from_links(["QM-J1", "QM-J2", "QM-J3"], ["QM-J1", "QM-J2", "QM-J3"])
    with pytest.raises(ParameterError, match="link between distinct nodes"):
        find_zones(net, 2, rng=0)
