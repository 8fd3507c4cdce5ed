"""The Network: input policies, constructors and immutability, checked against networkx/scipy."""

from __future__ import annotations

import dataclasses
import statistics

import networkx as nx
import numpy as np
import pytest
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from specgraph import Network
from specgraph.exceptions import InputError


def multigraph_reference(source, target, weight, nodes) -> np.ndarray:
    """Adjacency by networkx: a MultiGraph without self-loops and zero links, parallels summed.

    ``networkx.to_numpy_array`` sums the weights of parallel edges of a
    multigraph by default (networkx docs, ``multigraph_weight=sum``).
    """
    graph = nx.MultiGraph()
    graph.add_nodes_from(nodes)
    for u, v, w in zip(source, target, weight, strict=True):
        if u != v and w != 0:
            graph.add_edge(u, v, weight=w)
    return nx.to_numpy_array(graph, nodelist=nodes, weight="weight")


# ---------------------------------------------------------------- from_links
def test_from_links_policies_match_networkx_multigraph() -> None:
    # a-b given three times (once reversed), a self-loop, a zero-weight link c-d.
    source = ["a", "b", "a", "c", "c", "d", "e"]
    target = ["b", "a", "b", "c", "d", "e", "a"]
    weight = [1.0, 2.5, 0.5, 9.0, 0.0, 3.0, 4.0]
    net = Network.from_links(source, target, weight)
    nodes = net.node_ids.tolist()
    assert sorted(nodes) == ["a", "b", "c", "d", "e"]
    # Parallel links conduct in sum (common practice for conductances in parallel).
    expected = multigraph_reference(source, target, weight, nodes)
    np.testing.assert_array_equal(net.adjacency.toarray(), expected)
    assert net.notes["input_links"] == 7
    assert net.notes["self_loops_dropped"] == 1
    assert net.notes["zero_weight_links_dropped"] == 1
    assert net.notes["duplicate_links_merged"] == 2
    # Ends of the zero link stay nodes; "c" lost every link, so it is isolated.
    assert net.degrees[nodes.index("c")] == 0
    assert net.n_links == 3


def test_from_links_keeps_every_input_row_in_link_table() -> None:
    source = ["x", "y", "x", "z"]
    target = ["y", "x", "x", "w"]
    weight = [1.0, 2.0, 5.0, 0.0]
    net = Network.from_links(source, target, weight)
    table = net.link_table
    assert table["source"].tolist() == source
    assert table["target"].tolist() == target
    assert table["weight"].tolist() == weight


def test_from_links_node_ids_add_isolated_nodes_and_fix_order() -> None:
    net = Network.from_links([1, 2], [2, 3], node_ids=[3, 2, 1, 9])
    assert net.node_ids.tolist() == ["3", "2", "1", "9"]
    assert net.degrees.tolist() == [1.0, 2.0, 1.0, 0.0]
    # scipy.sparse.csgraph counts the isolated node as its own component.
    count, _ = connected_components(net.adjacency, directed=False)
    assert net.n_components == count == 2


def test_from_links_unknown_end_is_refused() -> None:
    with pytest.raises(InputError, match="'q'"):
        Network.from_links(["a"], ["q"], node_ids=["a", "b"])


@pytest.mark.parametrize(
    "weight",
    [[1.0, -1.0], [1.0, float("nan")], [1.0, float("inf")]],
    ids=["negative", "nan", "inf"],
)
def test_from_links_bad_weights_are_refused(weight: list[float]) -> None:
    with pytest.raises(InputError):
        Network.from_links(["a", "b"], ["b", "c"], weight)


def test_link_ends_point_at_rows_of_the_link_table() -> None:
    source = ["p", "q", "r", "q"]
    target = ["q", "r", "s", "p"]
    net = Network.from_links(source, target, node_ids=["s", "r", "q", "p"])
    src, dst = net.link_ends
    ids = net.node_ids.tolist()
    assert [ids[i] for i in src] == source
    assert [ids[j] for j in dst] == target


# ------------------------------------------------------------ from_scipy
def test_from_scipy_refuses_asymmetric_matrix() -> None:
    directed = sp.csr_array(np.array([[0.0, 1.0, 0.0], [0.0, 0.0, 2.0], [0.0, 0.0, 0.0]]))
    with pytest.raises(InputError, match="symmetric"):
        Network.from_scipy(directed)


def test_from_scipy_symmetrize_gives_a_plus_a_transpose() -> None:
    rng = np.random.default_rng(5)
    dense = rng.uniform(0.0, 1.0, (6, 6)) * (rng.uniform(size=(6, 6)) < 0.5)
    np.fill_diagonal(dense, 0.0)
    net = Network.from_scipy(sp.csr_array(dense), symmetrize=True)
    # The documented rule: a directed matrix becomes A + A^T.
    np.testing.assert_array_equal(net.adjacency.toarray(), dense + dense.T)


def test_from_scipy_drops_and_counts_diagonal() -> None:
    dense = np.array([[3.0, 1.0, 0.0], [1.0, 0.0, 2.0], [0.0, 2.0, 7.0]])
    net = Network.from_scipy(dense, node_ids=["u", "v", "w"])
    assert net.notes["self_loops_dropped"] == 2
    assert net.adjacency.diagonal().tolist() == [0.0, 0.0, 0.0]
    assert net.node_ids.tolist() == ["u", "v", "w"]
    # Degrees as networkx counts them on the loop-free graph.
    graph = nx.from_numpy_array(dense - np.diag(np.diag(dense)))
    assert net.degrees.tolist() == [d for _, d in graph.degree(weight="weight")]


def test_from_scipy_accepts_roundoff_asymmetry() -> None:
    # A relative asymmetry of a few ulps is float64 summation noise (common practice).
    dense = np.array([[0.0, 1.0], [1.0 + 2.0 * np.finfo(float).eps, 0.0]])
    net = Network.from_scipy(dense)
    assert net.n_links == 1


# ---------------------------------------------------------- from_networkx
def test_from_networkx_weights_and_missing_weight(weighted_graph) -> None:
    graph = weighted_graph("gnm", 40, seed=3)
    first = next(iter(graph.edges))
    del graph.edges[first]["weight"]  # missing attribute counts as 1
    net = Network.from_networkx(graph)
    expected = nx.to_numpy_array(graph, nodelist=sorted(graph.nodes), weight="weight")
    np.testing.assert_array_equal(net.adjacency.toarray(), expected)
    unit = Network.from_networkx(graph, weight=None)
    np.testing.assert_array_equal(
        unit.adjacency.toarray(), nx.to_numpy_array(graph, nodelist=sorted(graph), weight=None)
    )


def test_from_networkx_distance_becomes_median_over_distance() -> None:
    graph = nx.Graph()
    lengths = {("a", "b"): 10.0, ("b", "c"): 20.0, ("c", "d"): 40.0, ("d", "a"): 25.0}
    for (u, v), d in lengths.items():
        graph.add_edge(u, v, length=d)
    net = Network.from_networkx(graph, weight="length", distance=True)
    median = statistics.median(lengths.values())  # stdlib median, (20 + 25) / 2
    index = {v: i for i, v in enumerate(net.node_ids.tolist())}
    for (u, v), d in lengths.items():
        assert net.adjacency[index[u], index[v]] == pytest.approx(median / d, rel=1e-15)
    assert net.notes["weight_conversion"]["reference_distance"] == median
    # The rule is unit-free: kilometres give the same affinities as metres.
    km = nx.Graph()
    km.add_edges_from((u, v, {"length": d / 1000.0}) for (u, v), d in lengths.items())
    net_km = Network.from_networkx(km, weight="length", distance=True)
    np.testing.assert_allclose(net_km.adjacency.toarray(), net.adjacency.toarray(), rtol=1e-14)


def test_from_networkx_sizes_and_positions() -> None:
    graph = nx.path_graph(4)
    for v in graph:
        graph.nodes[v]["pop"] = 10.0 * v
        graph.nodes[v]["xy"] = (v, -v)
    net = Network.from_networkx(graph, size="pop", pos="xy")
    assert net.sizes.tolist() == [0.0, 10.0, 20.0, 30.0]
    assert net.coordinates.tolist() == [[0, 0], [1, -1], [2, -2], [3, -3]]


def test_components_and_degrees_match_networkx(weighted_graph) -> None:
    graph = nx.disjoint_union(weighted_graph("gnm", 30, seed=1), weighted_graph("gnm", 20, seed=2))
    graph.add_node("lonely")
    net = Network.from_networkx(graph)
    assert net.n_components == nx.number_connected_components(graph)
    ids = net.node_ids.tolist()
    for comp in nx.connected_components(graph):
        rows = [ids.index(str(v)) for v in comp]
        assert len(set(net.component_labels[rows].tolist())) == 1
    expected = dict(graph.degree(weight="weight"))
    np.testing.assert_allclose(net.degrees, [expected[v] for v in graph.nodes], rtol=1e-14, atol=0)


def test_subnetwork_matches_networkx_subgraph(weighted_graph) -> None:
    graph = weighted_graph("geometric", 50, seed=4)
    net = Network.from_networkx(graph)
    rows = np.array([7, 3, 11, 0, 20, 5])
    sub = net.subnetwork(rows)
    nodes = [int(net.node_ids[r]) for r in rows]
    expected = nx.to_numpy_array(graph.subgraph(nodes), nodelist=nodes, weight="weight")
    np.testing.assert_array_equal(sub.adjacency.toarray(), expected)
    assert sub.node_ids.tolist() == [str(v) for v in nodes]
    assert type(sub.node_ids) is np.ndarray
    assert not sub.node_ids.flags.writeable
    # A sub-network of a sub-network (the path recursive bisection takes).
    inner = sub.subnetwork(np.array([4, 1, 2]))
    kept = [nodes[4], nodes[1], nodes[2]]
    expected = nx.to_numpy_array(graph.subgraph(kept), nodelist=kept, weight="weight")
    np.testing.assert_array_equal(inner.adjacency.toarray(), expected)


def test_subnetwork_on_repeated_rows_is_refused_as_before() -> None:
    net = Network.from_links(["a", "b"], ["b", "c"])
    with pytest.raises(InputError, match="unique"):
        net.subnetwork(np.array([0, 1, 0]))
    # Negative rows count from the end, as numpy indexing does.
    assert net.subnetwork(np.array([-1, 0])).node_ids.tolist() == ["c", "a"]


def test_subnetwork_of_a_nearly_symmetric_network_is_checked_again() -> None:
    # The parent passes the symmetry check (asymmetry 5e-7 <= SYMMETRY_RTOL * 1e6),
    # but the block on c, d alone does not (5e-7 > SYMMETRY_RTOL * 1): only blocks of
    # an exactly symmetric adjacency skip the check.
    dense = np.zeros((4, 4))
    dense[0, 1] = dense[1, 0] = 1e6
    dense[2, 3], dense[3, 2] = 1.0, 1.0 + 5e-7
    net = Network(sp.csr_array(dense), np.array(["a", "b", "c", "d"], dtype=object))
    with pytest.raises(InputError, match="symmetric"):
        net.subnetwork(np.array([2, 3]))


def test_index_of_maps_each_id_to_its_row() -> None:
    net = Network.from_links(["b", "c", "a"], ["a", "a", "d"])
    assert dict(net.index_of) == {v: i for i, v in enumerate(net.node_ids.tolist())}


# ----------------------------------------------------------- immutability
def test_network_is_a_frozen_dataclass() -> None:
    net = Network.from_links(["a"], ["b"])
    with pytest.raises(dataclasses.FrozenInstanceError):
        net.node_ids = np.array(["x", "y"], dtype=object)
    with pytest.raises(TypeError):
        net.notes["input_links"] = 99


@pytest.mark.parametrize(
    "attribute",
    ["node_ids", "degrees", "component_labels", "coordinates", "sizes", "node_weights"],
)
def test_node_arrays_are_read_only(attribute: str) -> None:
    net = Network.from_links(["a", "b"], ["b", "c"], coordinates=np.zeros((3, 2)), sizes=np.ones(3))
    array = getattr(net, attribute)
    assert not array.flags.writeable
    with pytest.raises(ValueError, match="read-only"):
        array[0] = array[1]


def test_link_ends_are_read_only() -> None:
    net = Network.from_links(["a", "b"], ["b", "c"])
    for ends in net.link_ends:
        assert not ends.flags.writeable


def test_adjacency_arrays_are_read_only() -> None:
    # "An undirected weighted network, frozen once built" (Network docstring):
    # writing into the CSR buffers would silently change the network and leave
    # the cached degrees and components stale.
    net = Network.from_links(["a", "b"], ["b", "c"], [1.0, 2.0])
    adjacency = net.adjacency
    assert not adjacency.data.flags.writeable
    assert not adjacency.indices.flags.writeable
    assert not adjacency.indptr.flags.writeable


def test_constructor_refuses_bad_matrices() -> None:
    with pytest.raises(InputError, match="unique"):
        Network(sp.csr_array((2, 2)), np.array(["a", "a"], dtype=object))
    with pytest.raises(InputError, match="diagonal"):
        Network(sp.csr_array(np.eye(2)), np.array(["a", "b"], dtype=object))
    with pytest.raises(InputError):
        Network(sp.csr_array(np.array([[0.0, -1.0], [-1.0, 0.0]])), np.array(["a", "b"]))


def test_pickle_round_trip_keeps_everything() -> None:
    # pickle is how joblib, Dask and multiprocessing ship networks to workers.
    import pickle

    net = Network.from_links(
        ["a", "b", "c"], ["b", "c", "a"], [1.0, 2.0, 3.0], directed=True, sizes=np.ones(3)
    )
    back = pickle.loads(pickle.dumps(net))
    assert (back.adjacency != net.adjacency).nnz == 0
    assert (back.arcs != net.arcs).nnz == 0
    assert back.node_ids.tolist() == net.node_ids.tolist()
    assert dict(back.notes) == dict(net.notes)
    assert back.link_table.equals(net.link_table)
    assert not back.adjacency.data.flags.writeable  # still frozen
