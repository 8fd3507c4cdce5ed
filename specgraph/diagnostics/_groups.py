"""Nodes grouped by a label (component, 2-edge-connected piece, zone piece), and small blocks.

Networks often carry thousands of tiny islands; the robustness figures handle
groups of up to :data:`STACKED_LIMIT` nodes together, as stacked dense
matrices of one size (one LAPACK call per size), instead of one call each.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

__all__ = ["STACKED_LIMIT"]

#: Components or pieces of at most this many nodes are handled together, as
#: stacked dense matrices of one size (one LAPACK call per size), instead of
#: one call each: networks often carry thousands of tiny islands.
STACKED_LIMIT = 16


@dataclass(frozen=True, eq=False)
class _Groups:
    """Nodes grouped by a label (component or piece): members of each group, contiguous."""

    labels: np.ndarray
    counts: np.ndarray
    order: np.ndarray  # nodes sorted by label (stable)
    starts: np.ndarray

    @classmethod
    def of(cls, labels: np.ndarray, count: int) -> _Groups:
        counts = np.bincount(labels, minlength=count)
        order = np.argsort(labels, kind="stable")
        starts = np.concatenate([[0], np.cumsum(counts)[:-1]]).astype(np.int64)
        return cls(labels, counts, order, starts)

    def members(self, group: int) -> np.ndarray:
        start = int(self.starts[group])
        return self.order[start : start + int(self.counts[group])]

    def stacked(self, adjacency: sp.csr_array, size: int) -> tuple[np.ndarray, np.ndarray]:
        """Groups of exactly ``size`` nodes: their ids ``(c,)`` and adjacency blocks ``(c, s, s)``.

        The sub-matrix on all their nodes is block diagonal, one block per group.
        """
        groups = np.flatnonzero(self.counts == size)
        rows = self.order[self.starts[groups][:, None] + np.arange(size)].ravel()
        block = adjacency[rows][:, rows].tocoo()
        stacked = np.zeros((groups.size, size, size))
        stacked[block.row // size, block.row % size, block.col % size] = block.data
        return groups, stacked


def _stacked_laplacians(blocks: np.ndarray, kind: str) -> np.ndarray:
    degrees = blocks.sum(axis=2)
    if kind == "combinatorial":
        out = -blocks
        idx = np.arange(blocks.shape[1])
        out[:, idx, idx] += degrees
        return out
    scale = 1.0 / np.sqrt(degrees)  # connected groups of two nodes or more: degrees > 0
    out = -blocks * scale[:, :, None] * scale[:, None, :]
    idx = np.arange(blocks.shape[1])
    out[:, idx, idx] += 1.0
    return out
