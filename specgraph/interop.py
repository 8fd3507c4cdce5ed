"""networkx and pandas in and out: graphs to networks, zonings to node sets, attributes and frames.

What already exists and is not repeated here:

* :meth:`specgraph.Network.from_networkx` builds a network from a graph with
  a chosen weight attribute (a missing attribute counts as 1, or is
  refused), sizes and positions, carrying every other edge attribute;
* :func:`specgraph.io.network_from_frames`
  builds one from pandas edge and node frames;
* :meth:`specgraph.Zoning.to_frame`, ``Zoning.zones`` and ``Zoning.boundary``
  are the node, zone and boundary tables as frames.

This module adds :func:`network_from_graph`, the strict form of
:meth:`~specgraph.Network.from_networkx` (a missing weight is refused naming
its edge; both read the graph with the same code); and the way back: :func:`zone_sets`,
:func:`annotate_graph` and :func:`zones_frame`.

Node ids are compared as strings, as everywhere in specgraph: a graph node
``7`` is the network's node ``"7"``. A network read from a graph keeps the
graph's own node objects (:attr:`Network.graph_nodes`), and the way back
gives them: :func:`zone_sets` of a graph with integer or tuple nodes holds
those integers or tuples, so ``networkx.community.modularity(graph,
zone_sets(zoning))`` works on it.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from ._validation import Boolean, InstanceOf, Text, validate_params
from .exceptions import InputError
from .network import Network
from .zones import Zoning

if TYPE_CHECKING:
    import networkx as nx

__all__ = ["annotate_graph", "network_from_graph", "zone_sets", "zones_frame"]

#: What a zoning argument must be (named by its type when refused).
_ZONING = [InstanceOf((Zoning,), "a specgraph Zoning (from find_zones)", by_type=True)]


def network_from_graph(
    graph: nx.Graph,
    *,
    weight: str | None = "weight",
    distance: bool = False,
    size: str | None = None,
    pos: str | Mapping[Any, Any] | None = None,
) -> Network:
    """Build a :class:`~specgraph.Network` from a networkx graph, keeping its edge attributes.

    :meth:`Network.from_networkx` with ``missing_weight=None``: the same
    reading of the graph (every edge attribute other than the weight becomes
    a column of :attr:`Network.link_table`, so boundary tables carry pipe or
    line ids), but an edge without the weight attribute is refused naming
    the edge instead of counting as 1, and a graph without edges is refused.

    Parameters
    ----------
    graph, weight, distance, size, pos
        As in :meth:`Network.from_networkx` (described there once).

    Returns
    -------
    Network
        Nodes in the graph's node order, isolated nodes included.

    Raises
    ------
    InputError
        The graph has no edges, an edge lacks ``weight``, a node lacks
        ``size`` or ``pos``, or a value is out of range (the message names
        the edge or node).
    ParameterError
        ``graph`` is not a networkx graph.

    Examples
    --------
    >>> import networkx as nx
    >>> g = nx.Graph()
    >>> g.add_edge("a", "b", weight=2.0, pipe="P-1")
    >>> g.add_edge("b", "c", weight=1.0, pipe="P-2")
    >>> net = network_from_graph(g)
    >>> net.link_table[["source", "target", "weight", "pipe"]].to_numpy().tolist()
    [['a', 'b', 2.0, 'P-1'], ['b', 'c', 1.0, 'P-2']]
    """
    if hasattr(graph, "number_of_edges") and graph.number_of_edges() == 0:
        raise InputError("the graph has no edges; a network needs at least one link")
    return Network.from_networkx(
        graph, weight=weight, distance=distance, size=size, pos=pos, missing_weight=None
    )


@validate_params({"zoning": _ZONING})
def zone_sets(zoning: Zoning) -> list[frozenset[Any]]:
    """The zones as node sets: item ``z`` holds the nodes of zone ``z``.

    Parameters
    ----------
    zoning : Zoning

    Returns
    -------
    list of frozenset
        One set per zone, zones in number order (descending size); the sets
        are disjoint and cover every node, the form networkx's
        ``community.modularity`` and ``is_partition`` take. For a network
        read from a networkx graph the sets hold the graph's own node
        objects (integers, tuples...: :attr:`Network.graph_nodes`); for any
        other network, the node ids (text).

    Examples
    --------
    >>> import networkx as nx
    >>> from specgraph import find_zones
    >>> net = Network.from_links(["a", "b", "c", "d"], ["b", "c", "d", "e"])
    >>> [sorted(s) for s in zone_sets(find_zones(net, 2, rng=0))]
    [['a', 'b', 'c'], ['d', 'e']]
    >>> g = nx.barbell_graph(3, 0)
    >>> zoning = find_zones(network_from_graph(g, weight=None), 2, rng=0)
    >>> [sorted(s) for s in zone_sets(zoning)]
    [[0, 1, 2], [3, 4, 5]]
    >>> round(nx.community.modularity(g, zone_sets(zoning)), 6)
    0.357143
    """
    graph_nodes = zoning.network.graph_nodes
    ids = zoning.network.node_ids
    if graph_nodes is not None:
        ids = np.empty(len(graph_nodes), dtype=object)
        ids[:] = graph_nodes  # element by element: tuple nodes stay tuples
    order = np.argsort(zoning.labels, kind="stable")
    bounds = np.searchsorted(zoning.labels[order], np.arange(zoning.n_zones + 1))
    return [
        frozenset(ids[order[bounds[z] : bounds[z + 1]]].tolist()) for z in range(zoning.n_zones)
    ]


@validate_params({"zoning": _ZONING, "attribute": [Text()], "copy": [Boolean()]})
def annotate_graph(
    graph: nx.Graph, zoning: Zoning, *, attribute: str = "zone", copy: bool = True
) -> nx.Graph:
    """Write each node's zone into a node attribute of a networkx graph.

    Parameters
    ----------
    graph : networkx.Graph
        The graph the zoning's network came from: its nodes, compared as
        strings, must be exactly the network's nodes.
    zoning : Zoning
    attribute : str, default="zone"
        Node attribute to set (an int zone number).
    copy : bool, default=True
        When True the attributes are set on a copy (``graph.copy()``) and
        ``graph`` is left unchanged; when False they are set on ``graph``
        itself. Either way the annotated graph is returned.

    Returns
    -------
    networkx.Graph
        The annotated graph (a copy unless ``copy=False``).

    Raises
    ------
    InputError
        A graph node is not in the zoning, a zoning node is not in the
        graph, or two graph nodes have the same string id.

    Examples
    --------
    >>> import networkx as nx
    >>> from specgraph import find_zones
    >>> g = nx.barbell_graph(3, 0)
    >>> zoned = annotate_graph(g, find_zones(network_from_graph(g, weight=None), 2, rng=0))
    >>> [zoned.nodes[v]["zone"] for v in sorted(zoned)]
    [0, 0, 0, 1, 1, 1]
    >>> "zone" in g.nodes[0]
    False
    """
    index = zoning.network.index_of
    by_id: dict[str, Any] = {}
    for node in graph.nodes:
        key = str(node)
        if key in by_id:
            raise InputError(
                f"graph nodes {by_id[key]!r} and {node!r} have the same id {key!r} as text; "
                "relabel one of them"
            )
        if key not in index:
            raise InputError(f"graph node {node!r} is not in the zoning's network")
        by_id[key] = node
    if len(by_id) != zoning.network.n_nodes:
        missing = next(v for v in zoning.network.node_ids.tolist() if v not in by_id)
        raise InputError(f"node {missing!r} of the zoning's network is not in the graph")
    target = graph.copy() if copy else graph
    labels = zoning.labels
    for key, node in by_id.items():
        target.nodes[node][attribute] = int(labels[index[key]])
    return target


@validate_params({"zoning": _ZONING})
def zones_frame(zoning: Zoning) -> pd.DataFrame:
    """One row per node: ``node``, ``zone``, then ``x``, ``y`` and ``size`` where known.

    Parameters
    ----------
    zoning : Zoning

    Returns
    -------
    pandas.DataFrame
        In network row order; ``node`` as text, ``zone`` as int64.

    Examples
    --------
    >>> from specgraph import find_zones, gallery
    >>> zones_frame(find_zones(gallery.path(4), 2, rng=0)).to_numpy().tolist()
    [['0', 0], ['1', 0], ['2', 1], ['3', 1]]
    """
    frame = zoning.to_frame()
    net = zoning.network
    if net.coordinates is not None:
        frame["x"] = net.coordinates[:, 0]
        frame["y"] = net.coordinates[:, 1]
    if net.sizes is not None:
        frame["size"] = net.sizes
    return frame
