"""The state the enforcement steps share: :class:`Work`, its zone graph, and the result.

Every step of :func:`~specgraph.zones._constraints.enforce_constraints` reads
and updates one :class:`Work` on the contracted graph (must-keep links merged);
:class:`Enforcement` is what the caller gets back.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components, dijkstra

from ._arrays import compact
from ._balance import SIZE_RTOL
from ._connectivity import edge_rows, inner_links, zone_pieces
from ._rules import ResolvedConstraints

__all__ = ["Enforcement", "Work", "ZoneGraph", "nearest_seed"]


@dataclass(frozen=True, eq=False)
class Enforcement:
    """Labels that honour the constraints, and what was changed to get them.

    Attributes
    ----------
    labels : ndarray of int, shape (n,)
        Zone of each node, numbered ``0..k-1``.
    notes : tuple of str
        One line per step that changed something, with counts.
    moved : int
        Nodes outside the best one-to-one match (by overlap) of the zones
        before and after: the nodes whose zone changed.
    """

    labels: np.ndarray
    notes: tuple[str, ...]
    moved: int

    @property
    def n_zones(self) -> int:
        return int(np.unique(self.labels).size)


class Work:
    """Mutable state of one enforcement run, on the contracted index space."""

    def __init__(
        self,
        adjacency: sp.csr_array,
        constraints: ResolvedConstraints,
        labels: np.ndarray,
        members: np.ndarray,
        rng: np.random.Generator,
    ) -> None:
        self.adjacency = adjacency
        self.rows = edge_rows(adjacency)
        self.c = constraints
        self.sizes = constraints.sizes
        assert constraints.pinned is not None
        self.pinned = constraints.pinned
        self.sources = constraints.sources
        self.is_source = np.zeros(self.sizes.size, dtype=bool)
        self.is_source[self.sources] = True
        self.anchor = self.is_source | (self.pinned >= 0)
        self.members = members
        self.labels = compact(labels)
        self.rng = rng
        self.notes: list[str] = []
        self.repaired: np.ndarray | None = None  # labels the last repair left
        self.locked = np.zeros(self.labels.size, dtype=bool)  # no join path may cross

    @cached_property
    def comp(self) -> np.ndarray:
        """Connected component of each node (scipy's numbering)."""
        return connected_components(self.adjacency, directed=False)[1].astype(np.int64)

    @property
    def n_comp(self) -> int:
        return int(self.comp.max()) + 1 if self.comp.size else 0

    @property
    def n_zones(self) -> int:
        return int(self.labels.max()) + 1 if self.labels.size else 0

    def compact(self) -> None:
        self.labels = compact(self.labels)

    def zone_sizes(self) -> np.ndarray:
        return np.bincount(self.labels, weights=self.sizes, minlength=self.n_zones)

    def lengths(self, blocked: np.ndarray | None = None) -> sp.csr_array:
        """Link lengths ``1 / weight`` (strong links are short), without blocked nodes."""
        a = self.adjacency
        keep = np.ones(a.nnz, dtype=bool)
        if blocked is not None:
            keep = ~(blocked[self.rows] | blocked[a.indices])
        n = a.shape[0]
        indptr = np.concatenate([[0], np.cumsum(np.bincount(self.rows[keep], minlength=n))])
        return sp.csr_array((1.0 / a.data[keep], a.indices[keep], indptr), shape=(n, n))

    def pieces(self) -> tuple[int, np.ndarray]:
        """Connected pieces of the zones (zone-and-component pieces if not ``connected``)."""
        if self.c.connected:
            return zone_pieces(self.adjacency, self.labels, self.rows)
        keys = self.labels * self.n_comp + self.comp
        uniq, piece = np.unique(keys, return_inverse=True)
        return int(uniq.size), piece.astype(np.int64).ravel()

    def zone_name(self, zone: int) -> str:
        """A zone named by a source, a fixed node or its first node."""
        inside = self.labels == zone
        for mask in (self.is_source, self.pinned >= 0, np.ones_like(inside)):
            hit = np.flatnonzero(inside & mask)
            if hit.size:
                return f"the zone holding {self.c.label_of(int(hit[0]))}"
        return f"zone {zone}"


def nearest_seed(work: Work, seeds: np.ndarray) -> np.ndarray:
    """Nearest seed of every node over the links inside zones (length 1/weight).

    A multi-source Dijkstra search (E. W. Dijkstra, Numer. Math. 1 (1959)
    269-271); ``-9999`` where no seed of the node's zone is reachable. The
    cell of each seed is connected: a node's predecessor on its shortest path
    lies in the same cell.
    """
    lengths = inner_links(work.adjacency, work.labels, work.rows)
    lengths.data = 1.0 / lengths.data
    _, _, origin = dijkstra(lengths, indices=seeds, min_only=True, return_predecessors=True)
    return np.asarray(origin, dtype=np.int64)


class ZoneGraph:
    """Zones as nodes, boundary weight as links; merges in O(degree)."""

    def __init__(self, work: Work) -> None:
        k = work.n_zones
        labels, a = work.labels, work.adjacency
        self.size = np.bincount(labels, weights=work.sizes, minlength=k)
        self.held = np.bincount(labels[work.sources], minlength=k)
        self.fixed = np.full(k, -1, dtype=np.int64)
        pinned = work.pinned >= 0
        self.fixed[labels[pinned]] = work.pinned[pinned]
        self.parent = np.arange(k)
        self.zone_comp = np.zeros(k, dtype=np.int64)
        self.zone_comp[labels] = work.comp
        self.links: list[dict[int, float]] = [{} for _ in range(k)]
        za, zb = labels[work.rows], labels[a.indices]
        cross = za != zb
        keys, inverse = np.unique(za[cross] * k + zb[cross], return_inverse=True)
        total = np.bincount(inverse.ravel(), weights=a.data[cross])
        for key, w in zip(keys.tolist(), total.tolist(), strict=True):
            self.links[key // k][key % k] = w

    def compatible(self, z: int, y: int) -> bool:
        """Whether zones ``z`` and ``y`` may merge: not fixed to two different labels."""
        return bool(self.fixed[z] < 0 or self.fixed[y] < 0 or self.fixed[z] == self.fixed[y])

    def fits(self, z: int, y: int, bound: float | None) -> bool:
        """Whether the union of zones ``z`` and ``y`` stays within ``bound``."""
        return bound is None or self.size[z] + self.size[y] <= bound * (1 + SIZE_RTOL)

    def merge(self, z: int, y: int) -> None:
        """Merge zone ``z`` into its neighbour ``y``."""
        for other, w in self.links[z].items():
            del self.links[other][z]
            if other != y:
                self.links[y][other] = self.links[y].get(other, 0.0) + w
                self.links[other][y] = self.links[other].get(y, 0.0) + w
        self.links[z] = {}
        self.size[y] += self.size[z]
        self.held[y] += self.held[z]
        self.fixed[y] = max(self.fixed[y], self.fixed[z])
        self.parent[z] = y

    def relabel(self, labels: np.ndarray) -> np.ndarray:
        root = self.parent.copy()
        while np.any(root[root] != root):
            root = root[root]
        return root[labels]
