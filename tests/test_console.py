"""What the console, run.json, the tables and the report say agree with each other and
with outside references (networkx, scipy, closed forms).

Everything runs through :func:`specgraph.cli.main` in-process; the console is
the ``specgraph:`` lines on standard error.
"""

from __future__ import annotations

import html
import json
import re
from html.parser import HTMLParser
from pathlib import Path

import networkx as nx
import numpy as np
import pandas as pd
import pytest
import scipy.linalg as la

from specgraph._commands import COMMANDS
from specgraph._wording import change_phrase, count, factor_phrase, plural
from specgraph.cli import build_parser, main
from specgraph.demo import demo_files
from specgraph.export import CAUTION

#: Agreement of eigenvalues with dense references: the solves' default tolerance
#: bounds scaled residuals by 1e-8, and an eigenvalue's error is below the
#: residual for a symmetric matrix (Bauer-Fike; common practice), with a norm of at most 2.
EIGEN_ATOL = 1e-7


# ------------------------------------------------------------------ helpers
def write_edges(folder: Path, graph: nx.Graph, name: str = "edges.csv") -> Path:
    """An edge table of ``graph`` (ids as text ``N<node>``; weights when the graph has them)."""
    rows = ["source,target,weight"]
    for u, v, data in graph.edges(data=True):
        rows.append(f"{_id(u)},{_id(v)},{data.get('weight', 1.0)!r}")
    path = folder / name
    path.write_text("\n".join(rows) + "\n", encoding="utf-8")
    return path


def _id(node: object) -> str:
    return "N" + re.sub(r"[^0-9A-Za-z]+", "_", str(node)).strip("_")


def read_csv(path: Path) -> pd.DataFrame:
    return pd.read_csv(path, dtype={"node": str, "source": str, "target": str})


def console(capsys: pytest.CaptureFixture[str]) -> list[str]:
    """The ``specgraph:`` lines on stderr since the last call, prefix removed."""
    err = capsys.readouterr().err
    return [
        line[len("specgraph: ") :] for line in err.splitlines() if line.startswith("specgraph: ")
    ]


def console_warnings(lines: list[str]) -> list[str]:
    return [line[len("warning: ") :] for line in lines if line.startswith("warning: ")]


class _Report(HTMLParser):
    """The warnings list and summary table of a report page (the standard library's parser)."""

    def __init__(self) -> None:
        super().__init__()
        self.warnings: list[str] = []
        self.summary: dict[str, str] = {}
        self._in: str | None = None
        self._text = ""
        self._row_key: str | None = None
        self._list: str | None = None

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        ident = dict(attrs).get("id")
        if tag == "ul" and ident == "warnings":
            self._list = "warnings"
        elif tag == "table" and ident == "summary":
            self._list = "summary"
        elif tag in ("li", "th", "td") and self._list:
            self._in, self._text = tag, ""

    def handle_endtag(self, tag: str) -> None:
        if tag in ("ul", "table") and self._list:
            self._list = None
        elif tag == self._in:
            text = self._text
            if tag == "li" and self._list == "warnings":
                self.warnings.append(text)
            elif tag == "th" and self._list == "summary":
                self._row_key = text
            elif tag == "td" and self._list == "summary" and self._row_key is not None:
                self.summary[self._row_key] = text
            self._in = None

    def handle_data(self, data: str) -> None:
        if self._in:
            self._text += data


def parse_report(path: Path) -> _Report:
    parser = _Report()
    parser.feed(path.read_text(encoding="utf-8"))
    return parser


def clustered_network() -> nx.Graph:
    """Four cliques of six in a ring (networkx ``connected_caveman_graph``) plus a
    separate three-node path: two components, so a zoning warns about them."""
    graph = nx.connected_caveman_graph(4, 6)
    graph.add_edges_from([("x1", "x2"), ("x2", "x3")])
    return graph


# ------------------------------------------------------------------ warnings
def test_zones_warnings_are_one_list(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    edges = write_edges(tmp_path, clustered_network())
    out = tmp_path / "out"
    assert main(["zones", str(edges), "--zones", "5", "--report", "--out", str(out)]) == 0
    printed = console_warnings(console(capsys))
    recorded = json.loads((out / "run.json").read_text())["warnings"]
    page = parse_report(out / "report.html")
    assert printed, "the two components must be warned about"
    assert printed == recorded == [html.unescape(w) for w in page.warnings]
    assert page.summary["warnings"] == str(len(recorded))


def test_stability_warnings_are_one_list(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """The report's summary counts every warning its stability section gives (Davis-Kahan)."""
    graph = nx.grid_2d_graph(6, 6)  # repeated eigenvalues: the eigengap check warns
    graph.add_edges_from([("x1", "x2"), ("x2", "x3")])
    edges = write_edges(tmp_path, graph)
    out = tmp_path / "out"
    args = ["stability", str(edges), "--zones", "4", "--repeats", "2", "--report"]
    assert main([*args, "--out", str(out)]) == 0
    printed = console_warnings(console(capsys))
    recorded = json.loads((out / "run.json").read_text())["warnings"]
    page = parse_report(out / "report.html")
    assert any("not trustworthy" in w for w in recorded)
    assert printed == recorded == [html.unescape(w) for w in page.warnings]
    assert page.summary["warnings"] == str(len(recorded)) != "0"


# ------------------------------------------------------------------ what the analyst sees
def test_zone_count_confidence_and_method_are_printed(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    edges = write_edges(tmp_path, nx.connected_caveman_graph(5, 8))
    out = tmp_path / "out"
    assert main(["zones", str(edges), "--out", str(out)]) == 0
    lines = console(capsys)
    decisions = json.loads((out / "run.json").read_text())["decisions"]
    confidence = decisions["zone_count"]["confidence"]
    method = decisions["assign"]["choice"]
    summary = [line for line in lines if "normalized cut" in line and "boundary link" in line]
    assert len(summary) == 1
    assert f"count confidence: {confidence}" in summary[0]
    assert f"assigned by {method}" in summary[0]
    assert summary[0].startswith(f"{decisions['zone_count']['choice']} zones")
    page = tmp_path / "page"
    assert main(["zones", str(edges), "--report", "--quiet", "--out", str(page)]) == 0
    table = parse_report(page / "report.html").summary
    assert table["zone count confidence"] == confidence
    assert table["assignment method"] == method


def test_supply_points_per_zone(tmp_path: Path) -> None:
    """Each zone's ``supply_points`` are the given sources lying in it: checked with networkx
    (the connected piece of the zone's subgraph that holds a source is the whole zone, and
    every source is listed in exactly the zone zones.csv gives it)."""
    graph = nx.connected_caveman_graph(4, 7)
    edges = write_edges(tmp_path, graph)
    sources = [_id(node) for node in (0, 7, 14, 21)]  # one node of each clique
    supply = tmp_path / "supply.csv"
    supply.write_text("node\n" + "\n".join(sources) + "\n", encoding="utf-8")
    out = tmp_path / "out"
    args = ["zones", str(edges), "--zones", "4", "--supply-list", str(supply), "--quiet"]
    assert main([*args, "--report", "--out", str(out)]) == 0
    zones = read_csv(out / "zones.csv")
    summary = pd.read_csv(out / "zone_summary.csv", keep_default_na=False)
    zone_of = dict(zip(zones["node"], zones["zone"], strict=True))
    named = nx.relabel_nodes(graph, {node: _id(node) for node in graph})
    listed: list[str] = []
    for row in summary.itertuples():
        points = [p for p in str(row.supply_points).split(";") if p]
        assert row.sources == len(points)
        members = {node for node, zone in zone_of.items() if zone == row.zone}
        for point in points:
            assert zone_of[point] == row.zone
            piece = nx.node_connected_component(named.subgraph(members), point)
            assert piece == members
        listed += points
    assert sorted(listed) == sorted(sources)
    page = (out / "report.html").read_text(encoding="utf-8")
    assert "supply_points" in page
    assert all(s in page for s in sources)


def test_boundary_order_and_links_match_networkx(tmp_path: Path) -> None:
    """boundary.csv holds exactly networkx's cut edges (``nx.edge_boundary`` of each zone),
    ordered by zone pair (smaller zone first), then weight descending."""
    graph = nx.connected_caveman_graph(5, 6)
    rng = np.random.default_rng(3)
    for u, v in graph.edges:
        graph[u][v]["weight"] = float(rng.uniform(0.5, 2.0))
    edges = write_edges(tmp_path, graph)
    out = tmp_path / "out"
    assert main(["zones", str(edges), "--zones", "5", "--quiet", "--out", str(out)]) == 0
    boundary = read_csv(out / "boundary.csv")
    zones = read_csv(out / "zones.csv")
    named = nx.relabel_nodes(graph, {node: _id(node) for node in graph})
    cut: set[frozenset[str]] = set()
    for _, members in zones.groupby("zone")["node"]:
        cut |= {frozenset(e) for e in nx.edge_boundary(named, set(members))}
    assert {frozenset(p) for p in zip(boundary["source"], boundary["target"], strict=True)} == cut
    assert len(boundary) == len(cut)
    pairs = list(
        zip(
            np.minimum(boundary["zone_a"], boundary["zone_b"]),
            np.maximum(boundary["zone_a"], boundary["zone_b"]),
            -boundary["weight"],
            strict=True,
        )
    )
    assert pairs == sorted(pairs)


# ------------------------------------------------------------------ spectrum.csv
def _normalized_spectrum(graph: nx.Graph) -> np.ndarray:
    """Eigenvalues of networkx's normalized Laplacian, by scipy's dense ``eigvalsh``."""
    matrix = nx.normalized_laplacian_matrix(graph, nodelist=sorted(graph)).toarray()
    return np.asarray(la.eigvalsh(matrix))


def test_one_spectrum_layout_from_both_commands(tmp_path: Path) -> None:
    """Both commands write the same columns, eigenvalues numbered from 1.

    Closed forms of the normalized Laplacian (F. Chung, Spectral Graph Theory,
    AMS 1997, ch. 1, from memory; Brouwer and Haemers, Spectra of Graphs, 2012):
    path P_n: 1 - cos(pi k / (n - 1)); cycle C_n: 1 - cos(2 pi k / n), k = 0..n-1.
    Both are also checked against scipy ``eigvalsh`` of networkx's matrix.
    """
    n = 14
    path_graph, cycle = nx.path_graph(n), nx.cycle_graph(n)
    path_closed = np.sort(1 - np.cos(np.pi * np.arange(n) / (n - 1)))
    cycle_closed = np.sort(1 - np.cos(2 * np.pi * np.arange(n) / n))
    np.testing.assert_allclose(_normalized_spectrum(path_graph), path_closed, atol=1e-12)
    np.testing.assert_allclose(_normalized_spectrum(cycle), cycle_closed, atol=1e-12)

    spec = tmp_path / "spectrum"
    edges = write_edges(tmp_path, path_graph, "path.csv")
    args = ["spectrum", str(edges), "--count", str(n), "--operator", "normalized"]
    assert main([*args, "--quiet", "--out", str(spec)]) == 0
    zoned = tmp_path / "zones"
    edges = write_edges(tmp_path, cycle, "cycle.csv")
    assert main(["zones", str(edges), "--zones", "2", "--quiet", "--out", str(zoned)]) == 0
    from_spectrum = pd.read_csv(spec / "spectrum.csv")
    from_zones = pd.read_csv(zoned / "spectrum.csv")
    assert list(from_spectrum.columns) == list(from_zones.columns)
    assert list(from_zones.columns) == ["index", "eigenvalue", "residual", "component", "gap_after"]
    for table, closed in ((from_spectrum, path_closed), (from_zones, cycle_closed)):
        assert table["index"].tolist() == list(range(1, len(table) + 1))
        values = table["eigenvalue"].to_numpy()
        np.testing.assert_allclose(values, closed[: values.size], atol=EIGEN_ATOL)
        np.testing.assert_allclose(table["gap_after"][:-1], np.diff(values), atol=1e-15)
        assert np.isnan(table["gap_after"].iloc[-1])
    assert from_spectrum["component"].tolist() == [0] * n  # a connected network


def test_message_eigenvalue_numbers_match_the_file(tmp_path: Path) -> None:
    """``lambda_k`` in a message is the row whose ``index`` is k in spectrum.csv."""
    edges = write_edges(tmp_path, nx.connected_caveman_graph(5, 8))
    out = tmp_path / "out"
    assert main(["zones", str(edges), "--quiet", "--out", str(out)]) == 0
    reason = json.loads((out / "run.json").read_text())["decisions"]["zone_count"]["reason"]
    table = pd.read_csv(out / "spectrum.csv").set_index("index")
    named = re.findall(r"lambda_(\d+) = ([0-9.e+-]+)", reason)
    assert named
    for number, value in named:
        assert float(f"{table.loc[int(number), 'eigenvalue']:.3g}") == pytest.approx(float(value))


# ------------------------------------------------------------------ cautions, errors
@pytest.mark.parametrize("command", ["spectrum", "compare"])
def test_caution_on_every_command(
    command: str, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    edges = write_edges(tmp_path, nx.connected_caveman_graph(3, 5))
    zones = tmp_path / "z.csv"
    nodes = sorted({_id(n) for n in nx.connected_caveman_graph(3, 5)})
    zones.write_text("node,zone\n" + "".join(f"{n},{i % 2}\n" for i, n in enumerate(nodes)))
    argv = {
        "spectrum": ["spectrum", str(edges), "--count", "4"],
        "compare": ["compare", str(zones), str(zones)],
    }[command]
    out = tmp_path / "out"
    assert main([*argv, "--out", str(out)]) == 0
    assert f"caution: {CAUTION}" in console(capsys)
    assert json.loads((out / "run.json").read_text())["caution"] == CAUTION
    assert command in COMMANDS


def test_json_error_object(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    missing = tmp_path / "missing.csv"
    code = main(["zones", str(missing), "--json", "--out", str(tmp_path / "o")])
    error = json.loads(capsys.readouterr().out)["error"]
    assert code == error["exit_code"] == 2
    assert error["type"] == "InputError"
    assert str(missing) in error["message"]
    bad = tmp_path / "bad.csv"
    bad.write_text("source,target,weight\na,b,1\nb,c,oops\n")
    code = main(["zones", str(bad), "--weight", "weight", "--json", "--out", str(tmp_path / "o")])
    error = json.loads(capsys.readouterr().out)["error"]
    assert code == error["exit_code"] == 2
    assert error["file"] == str(bad)
    assert error["line"] == 3
    assert error["column"] == "weight"
    code = main(["zones", str(bad), "--zones", "nine", "--json"])
    error = json.loads(capsys.readouterr().out)["error"]
    assert code == error["exit_code"] == 2
    assert error["type"] == "UsageError"
    assert "--zones" in error["message"]


def test_self_loop_only_network_is_refused(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    edges = tmp_path / "loops.csv"
    edges.write_text("source,target\na,a\nb,b\nc,c\n")
    out = tmp_path / "out"
    assert main(["zones", str(edges), "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert "no links between distinct nodes" in err
    assert "self-loop" in err
    assert not out.exists()  # nothing half-written
    assert main(["zones", str(edges), "--json", "--quiet", "--out", str(out)]) == 2
    error = json.loads(capsys.readouterr().out)["error"]
    assert error["type"] == "InputError"
    assert error["exit_code"] == 2


def test_local_help_examples_name_demo_nodes(capsys: pytest.CaptureFixture[str]) -> None:
    parser = build_parser()
    with pytest.raises(SystemExit):
        parser.parse_args(["local", "--help"])
    text = capsys.readouterr().out
    examples = text.split("examples:")[1].split("exit codes:")[0]
    ids = set(re.findall(r"QJ-\d+", examples))
    assert ids
    known = set(pd.read_csv(demo_files().junctions, dtype=str)["node"])
    assert ids <= known


# ------------------------------------------------------------------ wording
def test_plural_forms() -> None:
    assert [count(n, "zone") for n in (0, 1, 2)] == ["0 zones", "1 zone", "2 zones"]
    assert count(1, "pass") == "1 pass"
    assert count(3, "pass") == "3 passes"
    assert plural(1, "is", "are") == "is"
    assert plural(4, "is", "are") == "are"
    assert factor_phrase(0.94) == "falls to 0.94 times"
    assert factor_phrase(2.4) == "jumps 2.4 times"
    assert change_phrase("the normalized cut", 0.0, 0.0, 0).startswith("no move was needed")
    assert (
        change_phrase("the cut", 1.25e-5, 1.5e-6, 2)
        == "lowered the cut from 1.25e-05 to 1.5e-06 (2 moves)"
    )


def test_console_says_one_bridge(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """Two triangles joined by one link: networkx finds 1 bridge and 2 articulation nodes,
    and the console says "1 bridge", not "1 bridges"."""
    graph = nx.Graph([(0, 1), (1, 2), (2, 0), (3, 4), (4, 5), (5, 3), (2, 3)])
    assert len(list(nx.bridges(graph))) == 1
    assert len(list(nx.articulation_points(graph))) == 2
    edges = write_edges(tmp_path, graph)
    assert main(["robustness", str(edges), "--out", str(tmp_path / "out")]) == 0
    text = "\n".join(console(capsys))
    assert "1 bridge, 2 articulation nodes" in text
    assert not re.search(r"\b1 (zones|bridges|nodes|links|boundary links)\b", text)


def test_compile_notice_not_with_quiet_or_json(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    """The command line asks for the compile notice except with --quiet or --json."""
    import contextlib

    import specgraph.cli as cli

    asked: list[bool] = []

    @contextlib.contextmanager
    def recorder(*, enabled: bool):  # type: ignore[no-untyped-def]
        asked.append(enabled)
        yield

    monkeypatch.setattr(cli, "compile_notice", recorder)
    edges = write_edges(tmp_path, nx.cycle_graph(8))
    for extra in ([], ["--quiet"], ["--json"]):
        out = str(tmp_path / f"out{len(asked)}")
        assert main(["spectrum", str(edges), "--count", "3", "--out", out, *extra]) == 0
    capsys.readouterr()
    assert asked == [True, False, False]
