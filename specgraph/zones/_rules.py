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

from .._validation import check_choice, check_int, check_positive_float
from ..exceptions import ParameterError
from ..network import Network

__all__ = ["NAMES_SHOWN", "SIZE_BY", "ResolvedConstraints", "ZoneConstraints"]

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

    def __post_init__(self) -> None:
        low = None if self.min_size is None else check_positive_float(self.min_size, "min_size")
        high = None if self.max_size is None else check_positive_float(self.max_size, "max_size")
        if low is not None and high is not None and low > high:
            raise ParameterError(f"min_size must be <= max_size; got {low:g} > {high:g}.")
        check_choice(self.size_by, "size_by", SIZE_BY)
        if isinstance(self.sources, str):
            raise ParameterError(f"sources must be a sequence of node ids; got {self.sources!r}.")
        sources = tuple(str(s) for s in self.sources)
        twice = sorted({s for s in sources if sources.count(s) > 1})
        if twice:
            raise ParameterError(f"sources must be distinct; got repeated {_quote(twice)}.")
        pairs = []
        for pair in self.keep_links:
            ends = tuple(str(e) for e in pair)
            if len(ends) != 2 or ends[0] == ends[1]:
                raise ParameterError(
                    f"keep_links must hold pairs of two different node ids; got {pair!r}."
                )
            pairs.append((ends[0], ends[1]))
        fixed = None
        if self.fixed is not None:
            fixed = MappingProxyType(
                {str(k): check_int(v, f"fixed[{k!r}]", minimum=0) for k, v in self.fixed.items()}
            )
        if not isinstance(self.connected, bool):
            raise ParameterError(f"connected must be True or False; got {self.connected!r}.")
        object.__setattr__(self, "min_size", low)
        object.__setattr__(self, "max_size", high)
        object.__setattr__(self, "sources", sources)
        object.__setattr__(self, "keep_links", tuple(pairs))
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
                raise ParameterError(
                    "size_by='weight' needs node sizes; the network has none "
                    "(read a node table with a size column, or use size_by='nodes')."
                )
            sizes = np.array(network.sizes, dtype=np.float64)
        else:
            sizes = np.ones(n)
        index = network.index_of
        sources = _rows_of(index, self.sources, "sources")
        flat = [end for pair in self.keep_links for end in pair]
        keep = _rows_of(index, flat, "keep_links").reshape(-1, 2)
        if keep.size:
            linked = np.asarray(network.adjacency[keep[:, 0], keep[:, 1]]).ravel() > 0
            if not linked.all():
                bad = [
                    f"{a}-{b}" for (a, b), ok in zip(self.keep_links, linked, strict=True) if not ok
                ]
                raise ParameterError(
                    f"keep_links must be links of the network; {len(bad)} pairs are not "
                    f"({_quote(bad)})."
                )
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
        )


def _rows_of(index: Mapping[str, int], ids: Any, name: str) -> np.ndarray:
    ids = list(ids)
    unknown = [i for i in ids if i not in index]
    if unknown:
        raise ParameterError(
            f"{name} must name nodes of the network; {len(unknown)} unknown "
            f"node ids ({_quote(unknown)})."
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
    """

    min_size: float | None
    max_size: float | None
    sizes: np.ndarray
    sources: np.ndarray = field(default_factory=lambda: np.empty(0, dtype=np.int64))
    keep_pairs: np.ndarray = field(default_factory=lambda: np.empty((0, 2), dtype=np.int64))
    pinned: np.ndarray | None = None
    connected: bool = True
    node_ids: np.ndarray | None = None

    def __post_init__(self) -> None:
        sizes = np.asarray(self.sizes, dtype=np.float64)
        n = sizes.size
        if sizes.ndim != 1 or not np.all(np.isfinite(sizes)) or np.any(sizes < 0):
            raise ParameterError("sizes must be a 1-D array of finite numbers >= 0.")
        sources = np.asarray(self.sources, dtype=np.int64).ravel()
        keep = np.asarray(self.keep_pairs, dtype=np.int64).reshape(-1, 2)
        pinned = np.full(n, -1, dtype=np.int64) if self.pinned is None else self.pinned
        pinned = np.asarray(pinned, dtype=np.int64)
        for name, rows in (("sources", sources), ("keep_pairs", keep.ravel())):
            if rows.size and (rows.min() < 0 or rows.max() >= n):
                raise ParameterError(f"{name} must hold row indices in [0, {n}); got {rows}.")
        if np.unique(sources).size != sources.size:
            raise ParameterError("sources must be distinct rows.")
        if pinned.shape != (n,) or np.any(pinned < -1):
            raise ParameterError(f"pinned must hold {n} labels >= -1 (-1 = free).")
        object.__setattr__(self, "sizes", sizes)
        object.__setattr__(self, "sources", sources)
        object.__setattr__(self, "keep_pairs", keep)
        object.__setattr__(self, "pinned", pinned)

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
