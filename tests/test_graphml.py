"""GraphML reading against networkx's own GraphML writer and reader.

networkx (``write_graphml`` / ``read_graphml``) is the reference implementation here: a
graph it writes must come back as the same network (same links, weights, coordinates),
and a file it reads must give the same adjacency as ours. The refusals of unsafe XML are
tested through the command line in tests/test_bad_input_catalogue.py.
"""

from __future__ import annotations

import logging
from pathlib import Path

import networkx as nx
import numpy as np
import pytest

from specgraph.io import read_edges, read_graphml, read_link_list, read_node_list


def _weighted_graph() -> nx.Graph:
    """networkx's bundled Les Miserables co-occurrence graph (77 nodes, weighted links),
    with invented coordinates and a text attribute added."""
    graph = nx.les_miserables_graph()
    for position, node in enumerate(graph):
        graph.nodes[node]["x"] = float(position)
        graph.nodes[node]["y"] = float(position % 7) / 3.0
        graph.nodes[node]["kind"] = "hub" if graph.degree(node) > 10 else "leaf"
    return graph


def _dense(network, order) -> np.ndarray:
    index = network.index_of
    rows = [index[str(node)] for node in order]
    return network.adjacency.toarray()[np.ix_(rows, rows)]


def test_round_trip_through_networkx_writer(tmp_path: Path) -> None:
    graph = _weighted_graph()
    path = tmp_path / "novel.graphml"
    nx.write_graphml(graph, path)
    network = read_edges(path, weight="weight", x="x", y="y")
    # Reference: networkx's adjacency of the same graph, same node order.
    expected = nx.to_numpy_array(graph, nodelist=list(graph), weight="weight")
    np.testing.assert_array_equal(_dense(network, list(graph)), expected)
    assert network.n_nodes == graph.number_of_nodes()
    assert network.n_links == graph.number_of_edges()
    rows = [network.index_of[node] for node in graph]
    xs = [graph.nodes[node]["x"] for node in graph]
    np.testing.assert_array_equal(network.coordinates[rows, 0], xs)


def test_same_adjacency_as_networkx_reader(tmp_path: Path) -> None:
    # A hand-written file with a key default and an edge with an id; networkx's reader
    # is the reference for what the file means.
    text = """<?xml version="1.0" encoding="UTF-8"?>
<graphml xmlns="http://graphml.graphdrawing.org/xmlns">
  <key id="w" for="edge" attr.name="weight" attr.type="double"><default>2.5</default></key>
  <graph id="G" edgedefault="undirected">
    <node id="P-01"/><node id="P-02"/><node id="P-03"/><node id="007"/>
    <edge id="e1" source="P-01" target="P-02"><data key="w">4</data></edge>
    <edge id="e2" source="P-02" target="P-03"/>
    <edge id="e3" source="P-03" target="007"><data key="w">0.125</data></edge>
  </graph>
</graphml>
"""
    path = tmp_path / "small.graphml"
    path.write_text(text, encoding="utf-8")
    reference = nx.read_graphml(path)
    # networkx keeps a key's <default> aside (graph attribute "edge_default"); the GraphML
    # Primer (graphml.graphdrawing.org, section 2.4.2 "Default values") says it is the
    # value of every edge without a <data> of that key, so apply it to the reference.
    for name, value in reference.graph.get("edge_default", {}).items():
        for _, _, data in reference.edges(data=True):
            data.setdefault(name, value)
    network = read_edges(path, weight="weight")
    order = list(reference)
    expected = nx.to_numpy_array(reference, nodelist=order, weight="weight")
    np.testing.assert_array_equal(_dense(network, order), expected)
    # Ids stay exact text (leading zeros kept); edge ids are passed through.
    assert "007" in network.index_of
    assert network.link_table["id"].tolist() == ["e1", "e2", "e3"]


def test_tables_and_lines(tmp_path: Path) -> None:
    text = (
        '<?xml version="1.0"?>\n'
        '<graphml xmlns="http://graphml.graphdrawing.org/xmlns">\n'
        '<key id="c" for="node" attr.name="connections"/>\n'
        "<graph>\n"
        '<node id="a"><data key="c">12</data></node>\n'
        '<node id="b"/>\n'
        '<edge source="a" target="b"/>\n'
        "</graph></graphml>\n"
    )
    path = tmp_path / "lines.graphml"
    path.write_text(text, encoding="utf-8")
    tables = read_graphml(path)
    # Hand-counted: nodes on lines 5 and 6, the edge on line 7; b has no value (empty cell).
    assert tables.nodes["node"].tolist() == ["a", "b"]
    assert tables.nodes["connections"].tolist() == ["12", ""]
    assert [tables.node_lines(0), tables.node_lines(1), tables.edge_lines(0)] == [5, 6, 7]
    assert tables.record["nodes"] == 2
    assert tables.record["edges"] == 1


def test_rule_readers_take_the_right_table(tmp_path: Path) -> None:
    graph = nx.path_graph(["a", "b", "c"])
    nx.set_node_attributes(graph, {"a": "yes", "b": "no", "c": "no"}, "plant")
    nx.set_edge_attributes(graph, {("a", "b"): "yes", ("b", "c"): "no"}, "keep")
    path = tmp_path / "rules.graphml"
    nx.write_graphml(graph, path)
    assert read_node_list(path, flag="plant") == ("a",)
    assert list(read_link_list(path)) == [("a", "b"), ("b", "c")]


def test_foreign_vocabulary_ignored(tmp_path: Path) -> None:
    # Drawing programs add elements of their own namespace; they carry no network data.
    text = (
        '<?xml version="1.0"?>\n'
        '<graphml xmlns="http://graphml.graphdrawing.org/xmlns" xmlns:d="urn:example:draw">\n'
        "<d:style colour='grey'/>\n"
        '<graph><node id="a"><d:shape kind="box"/></node><node id="b"/>'
        '<edge source="a" target="b"/></graph></graphml>\n'
    )
    path = tmp_path / "drawn.graphml"
    path.write_text(text, encoding="utf-8")
    network = read_edges(path)
    assert (network.n_nodes, network.n_links) == (2, 1)


def test_directed_edges_warned(tmp_path: Path, caplog: pytest.LogCaptureFixture) -> None:
    path = tmp_path / "flow.graphml"
    nx.write_graphml(nx.DiGraph([("s", "t"), ("t", "u")]), path)
    with caplog.at_level(logging.WARNING, logger="specgraph"):
        network = read_edges(path)
    assert network.notes["edge_table"]["directed_edges"] == 2
    assert "read as undirected" in caplog.text
