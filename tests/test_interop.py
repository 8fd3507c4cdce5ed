"""networkx and pandas interop: graphs in, node sets, node attributes and frames out."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp

from specgraph import Network, find_zones
from specgraph.exceptions import InputError, ParameterError
from specgraph.interop import annotate_graph, network_from_graph, zone_sets, zones_frame


def dense(network: Network, order: list[str]) -> np.ndarray:
    """The adjacency in the node order ``order`` (ids as strings)."""
    rows = [network.index_of[v] for v in order]
    return network.adjacency.toarray()[np.ix_(rows, rows)]


def test_network_from_graph_matches_networkx_adjacency(weighted_graph):
    graph = weighted_graph("gnm", 60, seed=1)
    net = network_from_graph(graph)
    # Reference: networkx.to_numpy_array of the same graph and weight attribute.
    expected = nx.to_numpy_array(graph, nodelist=list(graph), weight="weight")
    np.testing.assert_allclose(dense(net, [str(v) for v in graph]), expected, rtol=1e-15)
    # Same network as the existing constructor.
    other = Network.from_networkx(graph)
    assert (abs(net.adjacency - other.adjacency)).max() <= 1e-15
    assert net.node_ids.tolist() == other.node_ids.tolist()


def test_edge_attributes_are_carried_into_boundary_tables():
    graph = nx.barbell_graph(4, 0)
    for number, (u, v) in enumerate(graph.edges):
        graph[u][v]["pipe"] = f"P{number}"
        graph[u][v]["diameter_mm"] = 100 + number
    net = network_from_graph(graph, weight=None)
    assert list(net.link_table.columns[:3]) == ["source", "target", "weight"]
    assert {"pipe", "diameter_mm"} <= set(net.link_table.columns)
    zoning = find_zones(net, 2, rng=0)
    crossing = zoning.boundary
    # The barbell's only bridge joins nodes 3 and 4 (networkx.barbell_graph layout).
    bridge = graph[3][4]["pipe"]
    assert crossing["pipe"].tolist() == [bridge]


def test_multigraph_and_directed_graph_parallel_links_summed():
    multi = nx.MultiGraph()
    multi.add_edge("a", "b", weight=1.0)
    multi.add_edge("a", "b", weight=2.5)
    multi.add_edge("b", "c", weight=1.0)
    net = network_from_graph(multi)
    # Reference: networkx sums parallel edges in to_numpy_array (multigraph_weight=sum).
    expected = nx.to_numpy_array(multi, nodelist=["a", "b", "c"])
    np.testing.assert_allclose(dense(net, ["a", "b", "c"]), expected)
    directed = nx.DiGraph([("a", "b", {"weight": 1.0}), ("b", "a", {"weight": 2.0})])
    net = network_from_graph(directed)
    assert net.adjacency[0, 1] == pytest.approx(3.0)  # input policy: repeated links summed


def test_positions_sizes_and_distance_weights():
    graph = nx.random_geometric_graph(30, 0.4, seed=5)
    for u, v in graph.edges:
        graph[u][v]["length"] = float(
            np.hypot(*np.subtract(graph.nodes[u]["pos"], graph.nodes[v]["pos"]))
        )
    for v in graph:
        graph.nodes[v]["demand"] = float(v % 3)
    net = network_from_graph(graph, weight="length", distance=True, pos="pos", size="demand")
    order = [str(v) for v in graph]
    assert net.node_ids.tolist() == order  # isolated nodes kept, graph order
    np.testing.assert_allclose(net.coordinates, [graph.nodes[v]["pos"] for v in graph])
    np.testing.assert_allclose(net.sizes, [v % 3 for v in graph])
    lengths = nx.to_numpy_array(graph, nodelist=list(graph), weight="length", nonedge=np.inf)
    # affinity = median(length) / length (specgraph.network.affinity_from_distance).
    median = np.median([d for _, _, d in graph.edges(data="length")])
    with np.errstate(divide="ignore"):
        expected = np.where(np.isfinite(lengths), median / lengths, 0.0)
    np.testing.assert_allclose(dense(net, order), expected, rtol=1e-12)


def test_missing_or_bad_weights_are_refused_naming_the_edge():
    graph = nx.Graph()
    graph.add_edge("a", "b", weight=1.0)
    graph.add_edge("b", "c")
    with pytest.raises(InputError, match=r"edge 1 \('b', 'c'\) has no attribute 'weight'"):
        network_from_graph(graph)
    graph["b"]["c"]["weight"] = -2.0
    with pytest.raises(InputError, match="is negative"):
        network_from_graph(graph)
    with pytest.raises(ParameterError, match="graph must be a networkx graph"):
        network_from_graph(sp.eye_array(3))  # type: ignore[arg-type]


def test_zone_sets_and_attributes_round_trip_through_networkx():
    graph = nx.ring_of_cliques(4, 5)
    zoning = find_zones(network_from_graph(graph, weight=None), 4, rng=0)
    sets = zone_sets(zoning)
    # Reference: networkx's own partition check and the planted cliques of ring_of_cliques.
    # The sets hold the graph's own (integer) nodes.
    assert nx.community.is_partition(graph, sets)
    cliques = {frozenset(5 * c + i for i in range(5)) for c in range(4)}
    assert set(sets) == cliques
    assert [len(s) for s in sets] == zoning.zones["nodes"].tolist()
    annotated = annotate_graph(graph, zoning)
    assert annotated is not graph
    assert all("zone" not in data for _, data in graph.nodes(data=True))
    zones = nx.get_node_attributes(annotated, "zone")
    assert {v: zones[v] for v in graph} == {
        v: int(zoning.labels[zoning.network.index_of[str(v)]]) for v in graph
    }
    regrouped = {frozenset(v for v in graph if zones[v] == z) for z in set(zones.values())}
    assert regrouped == set(sets)
    same = annotate_graph(graph, zoning, attribute="district", copy=False)
    assert same is graph
    assert nx.get_node_attributes(graph, "district") == zones


def test_annotate_graph_refuses_a_graph_that_is_not_the_zonings():
    graph = nx.path_graph(4)
    zoning = find_zones(network_from_graph(graph, weight=None), 2, rng=0)
    bigger = nx.path_graph(5)
    with pytest.raises(InputError, match="graph node 4 is not in the zoning"):
        annotate_graph(bigger, zoning)
    smaller = nx.path_graph(3)
    with pytest.raises(InputError, match="node '3' of the zoning's network is not in the graph"):
        annotate_graph(smaller, zoning)
    clash = nx.relabel_nodes(graph, {3: "2"})
    with pytest.raises(InputError, match="same id '2'"):
        annotate_graph(clash, zoning)
    with pytest.raises(ParameterError, match="zoning must be a specgraph Zoning"):
        zone_sets(zoning.labels)  # type: ignore[arg-type]


def test_zones_frame_carries_coordinates_and_sizes():
    graph = nx.grid_2d_graph(3, 4)
    graph = nx.convert_node_labels_to_integers(graph, label_attribute="cell")
    for v, data in graph.nodes(data=True):
        data["pos"] = data["cell"]
        data["people"] = 10.0 * v
    zoning = find_zones(network_from_graph(graph, weight=None, pos="pos", size="people"), 2, rng=0)
    frame = zones_frame(zoning)
    assert list(frame.columns) == ["node", "zone", "x", "y", "size"]
    pd.testing.assert_frame_equal(frame[["node", "zone"]], zoning.to_frame())
    np.testing.assert_array_equal(
        frame[["x", "y"]].to_numpy(), [graph.nodes[v]["cell"] for v in graph]
    )
    np.testing.assert_array_equal(frame["size"], [10.0 * v for v in graph])
