"""2-core and dangling trees against networkx.k_core, and hand-built attachments."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest

from specgraph.exceptions import ParameterError
from specgraph.zones._trees import (
    MIN_TREE_SHARE,
    attach_trees,
    core_and_trees,
    trees_worth_stripping,
)


def split_of(graph: nx.Graph):
    return core_and_trees(nx.to_scipy_sparse_array(graph, nodelist=sorted(graph)))


def random_sparse_graph(seed: int) -> nx.Graph:
    """Mean degree about 2.4 with isolated nodes, small trees and cycles."""
    return nx.gnm_random_graph(300, 360, seed=seed)


@pytest.mark.parametrize("seed", range(5))
def test_core_matches_networkx_k_core(seed: int) -> None:
    graph = random_sparse_graph(seed)
    split = split_of(graph)
    expected = set(nx.k_core(graph, 2))  # networkx reference 2-core (Seidman 1983)
    assert set(np.flatnonzero(split.core).tolist()) == expected


@pytest.mark.parametrize("seed", range(5))
def test_roots_and_depths_follow_the_trees(seed: int) -> None:
    graph = random_sparse_graph(seed)
    split = split_of(graph)
    core = set(nx.k_core(graph, 2))
    forest = graph.subgraph(set(graph) - core)
    for v in graph:
        if v in core:
            assert split.root[v] == v
            assert split.depth[v] == 0
            continue
        root = int(split.root[v])
        if root in core:
            # The root is the one core node adjacent to v's tree (networkx paths).
            tree = nx.node_connected_component(forest, v)
            touching = {w for u in tree for w in graph[u] if w in core}
            assert touching == {root}
            assert split.depth[v] == nx.shortest_path_length(graph, v, root)
        else:
            # A whole-tree component: the root is a centre (networkx.center).
            component = graph.subgraph(nx.node_connected_component(graph, v))
            assert root in nx.center(component)
            assert split.depth[v] == nx.shortest_path_length(graph, v, root)


def test_two_cycles_joined_by_a_path_keep_the_path() -> None:
    # The path nodes have degree 2, so the 2-core keeps them (networkx agrees).
    graph = nx.disjoint_union(nx.cycle_graph(4), nx.cycle_graph(5))
    nx.add_path(graph, [0, 9, 10, 11, 4])
    graph.add_edge(10, 12)  # a leaf on the path
    split = split_of(graph)
    assert set(np.flatnonzero(split.core).tolist()) == set(nx.k_core(graph, 2))
    assert split.core[[9, 10, 11]].all()
    assert not split.core[12]
    assert split.root[12] == 10
    assert split.depth[12] == 1


def test_attach_trees_on_a_hand_built_network() -> None:
    # Triangle 0-1-2, branch 0-3-4, branch 2-5; separate path 6-7-8 (centre 7); node 9 alone.
    graph = nx.Graph([(0, 1), (1, 2), (2, 0), (0, 3), (3, 4), (2, 5), (6, 7), (7, 8)])
    graph.add_node(9)
    split = split_of(graph)
    assert split.core.tolist() == [True] * 3 + [False] * 7
    assert split.root.tolist() == [0, 1, 2, 0, 0, 2, 7, 7, 7, 9]
    assert split.depth.tolist() == [0, 0, 0, 1, 2, 1, 1, 0, 1, 0]
    labels = attach_trees(split, np.array([4, 1, 1]))
    assert labels.tolist() == [4, 1, 1, 4, 4, 1, 5, 5, 5, 6]


def test_attach_trees_refuses_wrong_labels() -> None:
    split = split_of(nx.cycle_graph(5))
    with pytest.raises(ParameterError, match="core_labels"):
        attach_trees(split, np.zeros(4, dtype=int))


def test_worth_stripping_rule() -> None:
    ring = nx.cycle_graph(40)
    assert not trees_worth_stripping(split_of(ring), 2)  # nothing to strip
    combed = ring.copy()
    combed.add_edges_from((i, 40 + i) for i in range(0, 40, 2))  # 20 leaves: a third
    assert split_of(combed).tree_share == pytest.approx(1 / 3)
    assert trees_worth_stripping(split_of(combed), 2)
    assert not trees_worth_stripping(split_of(combed), 2, min_share=0.5)
    broom = ring.copy()
    nx.add_path(broom, [0, *range(40, 100)])  # one 60-node tree: more than n / 2
    assert split_of(broom).tree_share > MIN_TREE_SHARE
    assert not trees_worth_stripping(split_of(broom), 2)
