"""Reading a networkx graph: the one walk behind every networkx constructor.

:meth:`specgraph.Network.from_networkx` and
:func:`specgraph.interop.network_from_graph` both read a graph here, so a
graph gives the same network, the same link table and the same refusals
whichever door it comes in by; they differ only in what an edge without the
weight attribute means (:data:`MISSING_WEIGHT_DEFAULT` or a refusal).

This module builds no :class:`~specgraph.Network`; it returns plain arrays
(:class:`GraphLinks`), so that ``network.py`` can use it without an import
running back up.
"""

from __future__ import annotations

from collections.abc import Hashable, Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from ._validation import HasMethods, InstanceOf, NoneOk, Text, check_param
from .exceptions import InputError

if TYPE_CHECKING:
    import networkx as nx
    import pandas as pd

__all__ = [
    "GRAPH_LINK_COLUMNS",
    "MISSING_WEIGHT_DEFAULT",
    "POSITION_EXAMPLES",
    "RENAMED_PREFIX",
    "GraphLinks",
    "read_graph",
]

#: Columns of :attr:`Network.link_table` that an edge attribute may not take:
#: the two ends and the affinity (an attribute of that name is refused, named).
GRAPH_LINK_COLUMNS = ("source", "target", "weight")

#: Prefix of an edge attribute whose name is a link-table column (a ``weight``
#: attribute that is not the chosen weight, a ``source`` flag): carried as
#: ``edge_weight``, ``edge_source``, and said in the network's notes.
RENAMED_PREFIX = "edge_"

#: Weight of an edge without the weight attribute in
#: :meth:`Network.from_networkx` (networkx's own convention: ``to_numpy_array``
#: and the shortest-path functions count a missing weight as 1).
MISSING_WEIGHT_DEFAULT = 1.0


@dataclass(frozen=True)
class GraphLinks:
    """What a graph says, checked, in the arrays :meth:`Network.from_links` takes.

    Attributes
    ----------
    source, target : ndarray of object
        The two ends of each edge, in ``graph.edges`` order.
    values : ndarray of float
        The weight attribute of each edge (an affinity, or a length when
        ``distance`` was asked for), or 1 with no weight attribute.
    extra : pandas.DataFrame or None
        Every other edge attribute, one column each in order of first use
        (``None`` when the edges carry none).
    node_ids : list
        Every node, in ``graph.nodes`` order (isolated nodes included).
    sizes, coordinates : ndarray or None
        Node sizes and ``(x, y)`` positions, when asked for.
    renamed : dict of str to str
        Edge attributes carried under another name because theirs is a
        column of the link table (:data:`GRAPH_LINK_COLUMNS`): old to new.
    """

    source: np.ndarray
    target: np.ndarray
    values: np.ndarray
    extra: pd.DataFrame | None
    node_ids: list[Any]
    sizes: np.ndarray | None
    coordinates: np.ndarray | None
    renamed: dict[str, str]


#: Nodes named as examples when a mapping of positions misses some (as many as
#: :data:`specgraph.diagnostics.EXAMPLES_SHOWN` names; a message stays one line).
POSITION_EXAMPLES = 5

#: What a graph argument must be: networkx's graph protocol, by duck typing.
_GRAPH = HasMethods(("edges", "nodes"), "a networkx graph")
#: What ``pos`` may be: a node attribute's name, or a mapping node -> (x, y).
_POSITIONS = [
    Text(),
    InstanceOf((Mapping,), "a mapping from each node to its (x, y)", by_type=True),
    NoneOk(),
]


def read_graph(
    graph: nx.Graph,
    *,
    weight: str | None,
    distance: bool,
    size: str | None,
    pos: str | Mapping[Any, Any] | None,
    missing_weight: float | None,
) -> GraphLinks:
    """Read the edges, edge attributes and node attributes of a networkx graph.

    Parameters
    ----------
    graph : networkx.Graph
        Any networkx graph (directed graphs and multigraphs included; their
        edges are listed as they are, the network's input policy merges them).
    weight : str or None
        Edge attribute holding the weight; ``None`` gives every edge 1.
    distance : bool
        The weight is a length: it must then be ``> 0`` (an affinity may be 0).
    size : str or None
        Node attribute holding sizes.
    pos : str, mapping or None
        Node attribute holding ``(x, y)`` positions, or a mapping from every
        node to its ``(x, y)`` (what ``networkx.spring_layout`` returns;
        positions of nodes not in the graph are not used).
    missing_weight : float or None
        Weight of an edge without the ``weight`` attribute; ``None`` refuses
        such an edge, naming it.

    Returns
    -------
    GraphLinks

    Raises
    ------
    ParameterError
        ``graph`` is not a networkx graph.
    InputError
        An edge lacks the weight (with ``missing_weight=None``) or holds one
        that is not a finite number in range; a node lacks ``size`` or ``pos``, or holds a bad one.
        The message names the edge (its number and ends) or the node.
    """
    check_param(graph, "graph", [_GRAPH])
    check_param(pos, "pos", _POSITIONS)
    import pandas as pd

    source, target, values, rows = [], [], [], []
    renamed: dict[str, str] = {}
    for number, (u, v, data) in enumerate(graph.edges(data=True)):
        source.append(u)
        target.append(v)
        values.append(_edge_value(number, u, v, data, weight, distance, missing_weight))
        kept = {key: value for key, value in data.items() if not (key == weight == "weight")}
        rows.append(_renamed(kept, renamed))
    columns = list(dict.fromkeys(key for row in rows for key in row))
    nodes = list(graph.nodes)
    return GraphLinks(
        source=_objects(source),
        target=_objects(target),
        values=np.asarray(values, dtype=np.float64),
        extra=pd.DataFrame(rows, columns=columns) if columns else None,
        node_ids=nodes,
        sizes=None if size is None else _node_sizes(graph, nodes, size),
        coordinates=None if pos is None else _node_positions(graph, nodes, pos),
        renamed=renamed,
    )


def _objects(items: list[Any]) -> np.ndarray:
    """A one-dimensional object array of ``items``, tuple nodes kept whole
    (``numpy.asarray`` would make a list of pairs a two-column array)."""
    array = np.empty(len(items), dtype=object)
    for row, item in enumerate(items):
        array[row] = item
    return array


def _edge_value(
    number: int,
    u: Any,
    v: Any,
    data: dict[Hashable, Any],
    weight: str | None,
    distance: bool,
    missing_weight: float | None,
) -> float:
    """The checked weight of one edge."""
    if weight is None:
        return 1.0
    if weight not in data:
        if missing_weight is None:
            raise InputError(
                f"edge {number} ({u!r}, {v!r}) has no attribute {weight!r}; give every edge "
                "one, or pass weight=None to give every link weight 1"
            )
        return float(missing_weight)
    raw = data[weight]
    fault: str | None
    try:
        value = float(raw)
    except (TypeError, ValueError, OverflowError):
        value, fault = np.nan, "is not a number"
    else:
        fault = _fault(value, distance)
    if fault is None:
        return value
    expected = "a finite length > 0" if distance else "a finite affinity >= 0"
    raise InputError(
        f"edge {number} ({u!r}, {v!r}): {weight!r} = {raw!r} {fault}; expected {expected}"
    )


def _fault(value: float, distance: bool) -> str | None:
    """Why a weight breaks its rule, or ``None``."""
    if not np.isfinite(value):
        return "is not finite"
    if value < 0:
        return "is negative"
    if value == 0 and distance:
        return "is zero (a length must be > 0)"
    return None


def _renamed(attributes: dict[Hashable, Any], renamed: dict[str, str]) -> dict[Hashable, Any]:
    """``attributes`` with any that takes a link-table column's name prefixed, noting it."""
    out: dict[Hashable, Any] = {}
    for key, value in attributes.items():
        if key in GRAPH_LINK_COLUMNS:
            renamed[str(key)] = RENAMED_PREFIX + str(key)
            key = RENAMED_PREFIX + str(key)
        out[key] = value
    return out


def _node_value(graph: nx.Graph, node: Any, attribute: str) -> Any:
    data = graph.nodes[node]
    if attribute not in data:
        raise InputError(f"node {node!r} has no attribute {attribute!r}; give every node one")
    return data[attribute]


def _node_sizes(graph: nx.Graph, nodes: list[Any], attribute: str) -> np.ndarray:
    sizes = np.empty(len(nodes))
    for row, node in enumerate(nodes):
        value = _node_value(graph, node, attribute)
        try:
            sizes[row] = float(value)
        except (TypeError, ValueError, OverflowError):
            sizes[row] = np.nan
        if not (np.isfinite(sizes[row]) and sizes[row] >= 0):
            raise InputError(
                f"node {node!r}: size {attribute!r} = {value!r} must be a finite number >= 0"
            )
    return sizes


def _node_positions(
    graph: nx.Graph, nodes: list[Any], attribute: str | Mapping[Any, Any]
) -> np.ndarray:
    if isinstance(attribute, Mapping):
        _refuse_unplaced(nodes, attribute)
    xy = np.empty((len(nodes), 2))
    for row, node in enumerate(nodes):
        if isinstance(attribute, Mapping):
            value, where = attribute[node], "its position in pos"
        else:
            value, where = _node_value(graph, node, attribute), f"attribute {attribute!r}"
        try:
            x, y = value
            xy[row] = float(x), float(y)
        except (TypeError, ValueError, OverflowError):
            xy[row] = np.nan
        if not np.all(np.isfinite(xy[row])):
            raise InputError(
                f"node {node!r}: {where} must be a pair of finite numbers (x, y); got {value!r}"
            )
    return xy


def _refuse_unplaced(nodes: list[Any], positions: Mapping[Any, Any]) -> None:
    """Refuse a mapping of positions that misses nodes of the graph, naming the first few."""
    missing = [node for node in nodes if node not in positions]
    if missing:
        shown = ", ".join(repr(node) for node in missing[:POSITION_EXAMPLES])
        raise InputError(
            f"pos has no position for {len(missing)} of the graph's {len(nodes)} nodes "
            f"(first: {shown}); give every node one (networkx's layouts, such as "
            "spring_layout(G), do), or pass pos=None"
        )
