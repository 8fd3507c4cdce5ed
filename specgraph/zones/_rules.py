"""The user's zone rules: :class:`ZoneConstraints` in node ids, resolved to row indices.

:meth:`ZoneConstraints.resolve` checks the rules against a network and gives
:class:`ResolvedConstraints`, the form every enforcement step and the audit
(:func:`~specgraph.zones._audit.constraint_violations`) work on.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any, Literal

import numpy as np

from .._validation import (
    POSITIVE,
    REFUSED,
    Array,
    Boolean,
    Constraint,
    NodeIds,
    NoneOk,
    Options,
    check_int,
    check_param,
    check_params,
    parameter_error,
)
from ..network import Network

__all__ = ["NAMES_SHOWN", "SIZE_BY", "ResolvedConstraints", "ZoneConstraints", "check_coverage"]

#: Node ids quoted in a message before "and N more".
NAMES_SHOWN = 5


#: The ways a zone's size is counted: node count, or summed node size.
SIZE_BY = ("nodes", "weight")


def _quote(ids: Any, total: int | None = None) -> str:
    """Node ids quoted for a message, the first :data:`NAMES_SHOWN` then "and N more"."""
    shown = [f"'{i}'" for i in list(ids)[:NAMES_SHOWN]]
    total = len(list(ids)) if total is None else total
    more = f" and {total - len(shown)} more" if total > len(shown) else ""
    return ", ".join(shown) + more


# ---------------------------------------------------------------- user level
#: What each rule of :class:`ZoneConstraints` accepts (``keep_links`` and
#: ``fixed`` are checked pair by pair and label by label).
_RULES: dict[str, list[Constraint]] = {
    "min_size": [POSITIVE, NoneOk()],
    "max_size": [POSITIVE, NoneOk()],
    "size_by": [Options(SIZE_BY)],
    "sources": [NodeIds(distinct=True)],
    "connected": [Boolean()],
}

#: A link that must not be cut: two node ids, not the same.
_PAIR = NodeIds(minimum=2, distinct=True)


def _checked_pair(pair: Any, name: str = "keep_links") -> tuple[str, str]:
    ends = _PAIR.parse(pair)
    if ends is REFUSED or len(ends) != 2:
        raise parameter_error(name, "pairs of two different node ids", pair)
    return ends[0], ends[1]


@dataclass(frozen=True)
class ZoneConstraints:
    """Rules a zoning must obey, in the user's node ids.

    Parameters
    ----------
    min_size, max_size : float, optional
        Bounds on every zone's size (node count, or summed node size with
        ``size_by='weight'``); ``0 < min_size <= max_size``.
    size_by : {'nodes', 'weight'}, default='nodes'
        ``'weight'`` counts the network's node size column.
    sources : tuple of str, default=()
        Supply points; when given, every zone holds exactly one of them.
    keep_links : tuple of (str, str), default=()
        Links that must never be cut: both ends always in one zone. Each must
        be a link of the network.
    fixed : mapping of str to int, optional
        Node id -> label (an integer >= 0) fixed in advance: nodes with one
        label end in one zone, nodes with different labels in different zones.
    connected : bool, default=True
        Every zone must be connected.
    trunk_links : tuple of (str, str), default=()
        Links of the network that are feeding (trunk, transmission) mains:
        their ends belong to no district, districts are formed on the rest,
        and every link from a trunk node into a district is one of its
        inlets (:mod:`specgraph.zones._trunk`). Each must be a link of the
        network.

    Examples
    --------
    >>> from specgraph import gallery
    >>> rules = ZoneConstraints(max_size=5, sources=("0", "9"), keep_links=(("4", "3"),))
    >>> resolved = rules.resolve(gallery.barbell(5))
    >>> resolved.sources.tolist(), resolved.keep_pairs.tolist()
    ([0, 9], [[4, 3]])
    """

    min_size: float | None = None
    max_size: float | None = None
    size_by: Literal["nodes", "weight"] = "nodes"
    sources: tuple[str, ...] = ()
    keep_links: tuple[tuple[str, str], ...] = ()
    fixed: Mapping[str, int] | None = None
    connected: bool = True
    trunk_links: tuple[tuple[str, str], ...] = ()

    def __post_init__(self) -> None:
        given = {name: getattr(self, name) for name in _RULES}
        checked = check_params(given, _RULES)
        low, high = checked["min_size"], checked["max_size"]
        if low is not None and high is not None and low > high:
            raise parameter_error("min_size", "<= max_size", low, shown=f"{low:g} > {high:g}")
        pairs = tuple(_checked_pair(pair) for pair in self.keep_links)
        fixed = None
        if self.fixed is not None:
            fixed = MappingProxyType(
                {str(k): check_int(v, f"fixed[{k!r}]", minimum=0) for k, v in self.fixed.items()}
            )
        object.__setattr__(self, "min_size", low)
        object.__setattr__(self, "max_size", high)
        object.__setattr__(self, "sources", checked["sources"])
        object.__setattr__(self, "keep_links", pairs)
        trunk = tuple(_checked_pair(pair, "trunk_links") for pair in self.trunk_links)
        object.__setattr__(self, "trunk_links", trunk)
        object.__setattr__(self, "fixed", fixed)

    def resolve(self, network: Network) -> ResolvedConstraints:
        """Turn node ids into row indices of ``network``.

        Raises
        ------
        ParameterError
            For an id that is not a node, a ``keep_links`` pair that is not a
            link, or ``size_by='weight'`` on a network without node sizes.
        """
        n = network.n_nodes
        if self.size_by == "weight":
            if network.sizes is None:
                raise parameter_error(
                    "size_by",
                    "'nodes' on a network without node sizes (size_by='weight' needs them: "
                    "read a node table with a size column)",
                    self.size_by,
                )
            sizes = np.array(network.sizes, dtype=np.float64)
        else:
            sizes = np.ones(n)
        index = network.index_of
        sources = _rows_of(index, self.sources, "sources")
        keep = _link_rows(network, self.keep_links, "keep_links")
        trunk = _link_rows(network, self.trunk_links, "trunk_links")
        pinned = np.full(n, -1, dtype=np.int64)
        if self.fixed:
            rows = _rows_of(index, list(self.fixed), "fixed")
            pinned[rows] = np.fromiter(self.fixed.values(), dtype=np.int64, count=rows.size)
        return ResolvedConstraints(
            self.min_size,
            self.max_size,
            sizes,
            sources=sources,
            keep_pairs=keep,
            pinned=pinned,
            connected=self.connected,
            node_ids=network.node_ids,
            coordinates=network.coordinates,
            trunk_pairs=trunk,
        )


def _link_rows(network: Network, pairs: tuple[tuple[str, str], ...], name: str) -> np.ndarray:
    """Rows of the two ends of each pair, shape (m, 2); refused unless each is a link."""
    flat = [end for pair in pairs for end in pair]
    rows = _rows_of(network.index_of, flat, name).reshape(-1, 2)
    if rows.size:
        linked = np.asarray(network.adjacency[rows[:, 0], rows[:, 1]]).ravel() > 0
        if not linked.all():
            bad = [f"{a}-{b}" for (a, b), ok in zip(pairs, linked, strict=True) if not ok]
            raise parameter_error(
                name,
                "links of the network",
                bad,
                shown=f"{len(bad)} pairs that are not ({_quote(bad)})",
            )
    return rows


def _rows_of(index: Mapping[str, int], ids: Any, name: str) -> np.ndarray:
    ids = list(ids)
    unknown = [i for i in ids if i not in index]
    if unknown:
        raise parameter_error(
            name,
            "node ids of the network",
            unknown,
            shown=f"{len(unknown)} unknown node ids ({_quote(unknown)})",
        )
    return np.fromiter((index[i] for i in ids), dtype=np.int64, count=len(ids))


@dataclass(frozen=True, eq=False)
class ResolvedConstraints:
    """Constraints on row indices, ready for :func:`enforce_constraints`.

    Attributes
    ----------
    min_size, max_size : float or None
    sizes : ndarray of float, shape (n,)
        Size of each node (ones, or the network's node sizes).
    sources : ndarray of int
        Rows of the sources; empty when zones need no source.
    keep_pairs : ndarray of int, shape (m, 2)
        Rows of the two ends of every link that must not be cut.
    pinned : ndarray of int, shape (n,)
        Fixed label of each node, ``-1`` for a free node.
    connected : bool
    node_ids : ndarray of str, optional
        Only used to name nodes in messages (rows are named otherwise).
    coordinates : ndarray of float, shape (n, 2), optional
        Only used in messages: the distance between two nodes a refusal names.
    trunk_pairs : ndarray of int, shape (t, 2)
        Rows of the two ends of every trunk link (:func:`find_zones` zones
        the network beside them; the enforcement steps never see them).
    """

    min_size: float | None
    max_size: float | None
    sizes: np.ndarray
    sources: np.ndarray = field(default_factory=lambda: np.empty(0, dtype=np.int64))
    keep_pairs: np.ndarray = field(default_factory=lambda: np.empty((0, 2), dtype=np.int64))
    pinned: np.ndarray | None = None
    connected: bool = True
    node_ids: np.ndarray | None = None
    coordinates: np.ndarray | None = None
    trunk_pairs: np.ndarray = field(default_factory=lambda: np.empty((0, 2), dtype=np.int64))

    def __post_init__(self) -> None:
        sizes = check_param(self.sizes, "sizes", [Array("float", (None,), low=0)])
        n = sizes.size
        sources = np.asarray(self.sources, dtype=np.int64).ravel()
        keep = np.asarray(self.keep_pairs, dtype=np.int64).reshape(-1, 2)
        trunk = np.asarray(self.trunk_pairs, dtype=np.int64).reshape(-1, 2)
        pinned = np.full(n, -1, dtype=np.int64) if self.pinned is None else self.pinned
        pinned = check_param(pinned, "pinned", [Array("int", (n,), low=-1)])
        named = (("sources", sources), ("keep_pairs", keep.ravel()), ("trunk_pairs", trunk.ravel()))
        for name, rows in named:
            if rows.size and (rows.min() < 0 or rows.max() >= n):
                raise parameter_error(name, f"row indices in [0, {n})", rows)
        if np.unique(sources).size != sources.size:
            raise parameter_error("sources", "distinct rows", sources)
        object.__setattr__(self, "sizes", sizes)
        object.__setattr__(self, "sources", sources)
        object.__setattr__(self, "keep_pairs", keep)
        object.__setattr__(self, "trunk_pairs", trunk)
        object.__setattr__(self, "pinned", pinned)
        if self.coordinates is not None:
            xy = check_param(self.coordinates, "coordinates", [Array("float", (n, 2))])
            object.__setattr__(self, "coordinates", xy)

    @property
    def n_nodes(self) -> int:
        return int(self.sizes.size)

    def name(self, rows: Any) -> str:
        """Quote nodes by id (or by row when no ids are known)."""
        rows = np.atleast_1d(np.asarray(rows, dtype=np.int64))
        ids = rows.tolist() if self.node_ids is None else self.node_ids[rows].tolist()
        return _quote(ids)

    def label_of(self, row: int) -> str:
        return "node " + self.name(row)

    def distance(self, a: int, b: int) -> float | None:
        """Straight-line distance between rows ``a`` and ``b``, None without coordinates."""
        if self.coordinates is None:
            return None
        return float(np.hypot(*(self.coordinates[a] - self.coordinates[b])))

    def apart(self, a: int, b: int) -> str:
        """``' (0.2 apart)'`` for two nodes a message names, ``''`` without coordinates."""
        d = self.distance(a, b)
        return "" if d is None else f" ({d:.3g} apart)"


def check_coverage(constraints: ResolvedConstraints, n: int) -> None:
    """Refuse constraints resolved for another number of nodes than ``n``."""
    if constraints.n_nodes != n:
        shown = str(constraints.n_nodes)
        raise parameter_error("constraints", f"{n} nodes", constraints, shown=shown, verb="cover")
