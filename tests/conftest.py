"""Shared fixtures: reference graphs built by networkx, never by specgraph itself."""

from __future__ import annotations

from collections.abc import Callable

import networkx as nx
import numpy as np
import pytest


def _weighted_graph(
    kind: str, n: int, seed: int, *, low: float = 0.5, high: float = 2.0, log_uniform: bool = False
) -> nx.Graph:
    """A connected random graph from networkx with random positive weights.

    ``kind`` is ``"gnm"`` (networkx ``gnm_random_graph`` with 4 n links) or
    ``"geometric"`` (networkx ``random_geometric_graph``); the largest
    component is kept and relabelled 0..m-1 so that node ``i`` is row ``i``.
    Weights are uniform in ``[low, high]``, or ``10**uniform(log10 low, log10 high)``
    when ``log_uniform``.
    """
    if kind == "gnm":
        graph = nx.gnm_random_graph(n, 4 * n, seed=seed)
    elif kind == "geometric":
        graph = nx.random_geometric_graph(n, 2.2 / np.sqrt(n), seed=seed)
    else:
        raise ValueError(kind)
    largest = max(nx.connected_components(graph), key=len)
    graph = nx.convert_node_labels_to_integers(graph.subgraph(largest), ordering="sorted")
    rng = np.random.default_rng(seed)
    for u, v in graph.edges:
        if log_uniform:
            w = 10.0 ** rng.uniform(np.log10(low), np.log10(high))
        else:
            w = rng.uniform(low, high)
        graph[u][v]["weight"] = float(w)
    ordered = nx.Graph()
    ordered.add_nodes_from(sorted(graph.nodes))
    ordered.add_edges_from(graph.edges(data=True))
    return ordered


@pytest.fixture
def weighted_graph() -> Callable[..., nx.Graph]:
    """Factory of connected random weighted networkx graphs, nodes 0..m-1 in row order."""
    return _weighted_graph
