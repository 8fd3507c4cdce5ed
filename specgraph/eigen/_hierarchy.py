"""An aggregation hierarchy of a graph operator and the multigrid cycle built on it.

Coarsening. Nodes are grouped into aggregates (each node with its
neighbours, by pyamg's standard aggregation); the prolongator ``P`` maps an
aggregate's value to its members, weighted by the known null vector ``z``:
``P[i, g] = z_i / ||z_g||``. Its columns are orthonormal, it reproduces the
null vector exactly, and the coarse operator ``P^T M P`` is the Rayleigh-Ritz
restriction of ``M`` to the span of ``P``: for the normalized Laplacian it is
the normalized Laplacian of the aggregated graph with aggregate volumes as
degrees. This is the tentative prolongator of smoothed aggregation
(Vanek, Mandel and Brezina, Computing 56, 1996, doi:10.1007/BF02238511),
unsmoothed so that coarse operators stay as sparse as the graph.

Cycle. Plain aggregation gives a weak two-grid method; the K-cycle recovers a
convergence rate independent of the number of levels by solving each coarse
problem with a few steps of flexible conjugate gradients preconditioned by
the next cycle (Notay and Vassilevski, Numer. Linear Algebra Appl. 15, 2008,
doi:10.1002/nla.542). Smoothing is damped Jacobi.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import scipy.linalg as la
import scipy.sparse as sp

from .._sparse import int32_indexed
from . import _kernels as kern

__all__ = ["DENSE_CORE_MAX", "CoarseningStalled", "Hierarchy", "Level", "build_hierarchy"]

#: Stop coarsening at this many nodes: the coarsest operator is solved densely
#: (a dense eigen-solve of 500 nodes takes tens of milliseconds).
COARSEST_SIZE = 500

#: Every level keeps at least this many nodes per vector of the block the
#: cascade carries, so that the coarsest dense solve has pairs to spare.
COARSEST_PER_VECTOR = 2

#: Stop when a level keeps more than this share of its nodes (coarsening stalls).
STALL_RATIO = 0.7

#: Largest coarsest level solved densely when coarsening stalls above the
#: floor (a hub whose leaves aggregation cannot group: a star of 100,000
#: leaves stalled at 100,001 nodes and asked for a dense matrix of 74.5 GiB).
#: A dense eigen-solve of 2,000 nodes took 1.1 s here and 4,000 nodes 6.3 s;
#: above this size, or above 4 times the floor a wide block needs,
#: :func:`build_hierarchy` raises :class:`CoarseningStalled` and the caller
#: solves otherwise.
DENSE_CORE_MAX = 3_000

#: Damping of the Jacobi smoother: 2/3 is the classical choice that damps the
#: upper half of the spectrum of ``D^{-1} M`` by at least 1/3 per sweep.
JACOBI_DAMPING = 2.0 / 3.0

#: Jacobi sweeps before and after each coarse correction. One each way:
#: measured on the road-like networks of 100,000 and 1,000,000 nodes (k = 8),
#: a second sweep each way saved at most one outer iteration but cost a third
#: of every cycle's sparse passes, so one sweep was 5-17% faster overall.
SMOOTHING_SWEEPS = 1

#: Flexible CG steps on each coarse level of the K-cycle.
KCYCLE_STEPS = 2

#: Eigenvalues of the coarsest operator below this share of its largest are
#: treated as its null space when forming the pseudo-inverse.
NULL_RELATIVE = 1e-10


@dataclass(frozen=True, eq=False)
class Level:
    """One level: its operator, and (but for the coarsest) the map to the next."""

    matrix: sp.csr_array
    null: np.ndarray  # unit null vector of ``matrix``, shape (n, 1)
    smoother: np.ndarray  # damping / diagonal, per row (single precision)
    aggregate: np.ndarray | None = None  # coarse index of each row
    weights: np.ndarray | None = None  # prolongator entry of each row
    members_ptr: np.ndarray | None = None  # rows of each aggregate (CSR of P^T)
    members: np.ndarray | None = None

    @property
    def size(self) -> int:
        return int(self.matrix.shape[0])


#: Floating-point type of the preconditioner's operators and vectors. Single
#: precision halves the memory traffic of every cycle; a preconditioner only
#: needs to point the iteration in a good direction, and the outer iteration
#: computes every residual and Rayleigh quotient in double precision.
CYCLE_DTYPE = np.float32

#: Rows per fixed chunk of the deterministic column inner products.
DOT_CHUNKS = 64


class _Workspace:
    """Reusable blocks of one level and width (fresh large arrays cost page faults)."""

    def __init__(self, rows: int, width: int, names: tuple[str, ...]) -> None:
        for name in names:
            setattr(self, name, np.empty((rows, width), dtype=CYCLE_DTYPE))


@dataclass(frozen=True, eq=False)
class Hierarchy:
    """Levels from fine to coarse, and the coarsest operator's eigendecomposition.

    ``levels`` hold the operators in double precision (for the outer
    iteration); ``cycle_matrices`` are the same operators in
    :data:`CYCLE_DTYPE` for the preconditioner.
    """

    levels: tuple[Level, ...]
    coarse_values: np.ndarray
    coarse_vectors: np.ndarray
    coarse_pinv: np.ndarray
    cycle_matrices: tuple[sp.csr_array, ...]
    workspaces: dict = field(default_factory=dict)

    @property
    def sizes(self) -> list[int]:
        return [lv.size for lv in self.levels]

    def _workspace(self, kind: str, index: int, width: int, names: tuple[str, ...]) -> Any:
        key = (kind, index, width)
        if key not in self.workspaces:
            self.workspaces[key] = _Workspace(self.levels[index].size, width, names)
        return self.workspaces[key]

    # ------------------------------------------------------------- transfers
    def prolong(self, index: int, coarse: np.ndarray) -> np.ndarray:
        """``P_index @ coarse``: from level ``index + 1`` to level ``index``."""
        lv = self.levels[index]
        out = np.zeros((lv.size, coarse.shape[1]))
        kern.threads_for(lv.size)
        kern.prolong_add(lv.aggregate, lv.weights, np.ascontiguousarray(coarse), out)
        return out

    # ------------------------------------------------------------- products
    def apply(self, index: int, x: np.ndarray, out: np.ndarray) -> None:
        """``out = M_index @ x`` for a row-major block, in double precision."""
        m = self.levels[index].matrix
        kern.threads_for(m.shape[0])
        kern.csr_matmat(m.indptr, m.indices, m.data, x, out)

    def precondition(self, index: int, rhs: np.ndarray, steps: int, out: np.ndarray) -> None:
        """``out`` = approximately ``M_index^+ rhs`` (single-precision flexible CG).

        ``out`` may be ``rhs`` itself: the right-hand side is copied into a
        single-precision workspace first, and the iterate accumulates in ``out``.
        """
        self.solve(index, rhs, steps, out)
        kern.threads_for(self.levels[index].size)

    # ---------------------------------------------------------------- cycle
    def solve(
        self, index: int, rhs: np.ndarray, steps: int, out: np.ndarray | None = None
    ) -> np.ndarray:
        """Approximate ``M_index^+ rhs`` by ``steps`` flexible CG steps (block-diagonal).

        Each column has its own step lengths; the preconditioner is one cycle
        from this level down. On the coarsest level the pseudo-inverse is exact.
        The iterate accumulates in ``out`` (any float type; it may be ``rhs``);
        without ``out`` it lives in a workspace: use it before the next call.
        The level keeps five single-precision blocks: the residual, the
        direction and its product, the previous direction and its product.
        The cycle smooths in the block of the stale product (the product of
        the direction before the previous one, overwritten later in the step).
        """
        width = rhs.shape[1]
        if index == len(self.levels) - 1:
            result = self.coarse_pinv @ rhs
            if out is None:
                return result.astype(CYCLE_DTYPE)
            out[...] = result
            return out
        m = self.cycle_matrices[index]
        ws = self._workspace("solve", index, width, ("r", "d", "dp", "md", "mdp"))
        ws.r[...] = rhs  # before ``out`` is cleared: ``out`` may be ``rhs``
        if out is None:
            out = self._workspace("solution", index, width, ("x",)).x
        out[...] = 0.0
        d, dp, md, mdp = ws.d, ws.dp, ws.md, ws.mdp
        for step in range(steps):
            self.cycle(index, ws.r, d, scratch=md)
            kern.threads_for(m.shape[0])
            if step:
                beta = _column_dot(d, mdp) / _column_dot(dp, mdp)
                kern.subtract_scaled(d, dp, beta.astype(CYCLE_DTYPE))
            kern.csr_matmat(m.indptr, m.indices, m.data, d, md)
            alpha = _column_dot(d, ws.r) / _column_dot(d, md)
            kern.fcg_update(out, ws.r, d, md, alpha.astype(CYCLE_DTYPE))
            d, dp, md, mdp = dp, d, mdp, md
        return out

    def cycle(
        self,
        index: int,
        rhs: np.ndarray,
        out: np.ndarray | None = None,
        *,
        scratch: np.ndarray | None = None,
    ) -> np.ndarray:
        """One K-cycle for ``M_index x = rhs`` from a zero guess, written into ``out``.

        The Jacobi sweeps alternate between ``out`` and a ``scratch`` block
        (a workspace of the level if not given); the first buffer is chosen so
        that the last sweep lands in ``out``. Without ``out`` the result lives
        in a workspace.
        """
        lv = self.levels[index]
        m = self.cycle_matrices[index]
        width = rhs.shape[1]
        if scratch is None:
            scratch = self._workspace("cycle", index, width, ("x",)).x
        if out is None:
            out = self._workspace("cycle_out", index, width, ("x",)).x
        swaps = 2 * SMOOTHING_SWEEPS - 1  # sweeps that write the other buffer
        x, buf = (scratch, out) if swaps % 2 else (out, scratch)
        kern.threads_for(lv.size)
        kern.scale_rows(rhs, lv.smoother, x)  # first Jacobi sweep from zero
        for _ in range(SMOOTHING_SWEEPS - 1):
            kern.jacobi_sweep(m.indptr, m.indices, m.data, lv.smoother, rhs, x, buf)
            x, buf = buf, x
        kern.residual_block(m.indptr, m.indices, m.data, rhs, x, buf)
        coarse_ws = self._workspace("coarse", index + 1, width, ("b", "x"))
        kern.restrict_sum(lv.members_ptr, lv.members, lv.weights, buf, coarse_ws.b)
        coarse = self.solve(index + 1, coarse_ws.b, KCYCLE_STEPS, coarse_ws.x)
        kern.threads_for(lv.size)
        kern.prolong_add(lv.aggregate, lv.weights, coarse, x)
        for _ in range(SMOOTHING_SWEEPS):
            kern.jacobi_sweep(m.indptr, m.indices, m.data, lv.smoother, rhs, x, buf)
            x, buf = buf, x
        return x


def _column_dot(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    out = kern.column_dots(a, b, DOT_CHUNKS)
    out[out == 0] = 1.0  # a converged column: any finite step keeps it converged
    return out


def _aggregate(matrix: sp.csr_array) -> np.ndarray:
    """Aggregate index of each row (pyamg standard aggregation on |off-diagonal|)."""
    from pyamg.aggregation import standard_aggregation

    strength = sp.csr_matrix(abs(matrix))
    strength.setdiag(0)
    strength.eliminate_zeros()
    agg_op, _ = standard_aggregation(int32_indexed(strength))
    agg_op = agg_op.tocsr()
    counts = np.diff(agg_op.indptr)
    aggregate = np.full(matrix.shape[0], -1, dtype=np.int64)
    rows = np.flatnonzero(counts == 1)
    aggregate[rows] = agg_op.indices[agg_op.indptr[rows]]
    lonely = np.flatnonzero(aggregate < 0)  # rows pyamg left out become singletons
    aggregate[lonely] = agg_op.shape[1] + np.arange(lonely.size)
    return aggregate


def _coarsen(matrix: sp.csr_array, null: np.ndarray) -> tuple[Level, sp.csr_array, np.ndarray]:
    """One coarsening step: the level's transfer data, the coarse operator and null vector."""
    n = matrix.shape[0]
    aggregate = _aggregate(matrix)
    m = int(aggregate.max()) + 1
    coarse_null = np.sqrt(np.bincount(aggregate, weights=null * null, minlength=m))
    safe = np.where(coarse_null > 0, coarse_null, 1.0)
    weights = np.where(coarse_null[aggregate] > 0, null / safe[aggregate], 1.0)
    prolongator = sp.csr_array((weights, (np.arange(n), aggregate)), shape=(n, m))
    coarse = (prolongator.T @ (matrix @ prolongator)).tocsr()
    coarse.sort_indices()
    members = np.argsort(aggregate, kind="stable")
    members_ptr = np.concatenate([[0], np.cumsum(np.bincount(aggregate, minlength=m))])
    index = _index_dtype(n)
    level = Level(
        matrix=matrix,
        null=null.reshape(-1, 1),
        smoother=_smoother(matrix),
        aggregate=aggregate.astype(index),
        weights=weights,
        members_ptr=members_ptr.astype(index),
        members=members.astype(index),
    )
    unit = coarse_null / np.linalg.norm(coarse_null)
    return level, coarse, unit


def _index_dtype(n: int) -> type[np.signedinteger]:
    """32-bit row indices where they fit (half the memory of the transfer maps)."""
    return np.int32 if n < np.iinfo(np.int32).max else np.int64


def _smoother(matrix: sp.csr_array) -> np.ndarray:
    diagonal = matrix.diagonal()
    damped = np.where(diagonal > 0, JACOBI_DAMPING / np.where(diagonal > 0, diagonal, 1.0), 0.0)
    return damped.astype(CYCLE_DTYPE)


def _single(matrix: sp.csr_array) -> sp.csr_array:
    """``matrix`` in :data:`CYCLE_DTYPE`, sharing its index arrays (only the values are copied)."""
    data = matrix.data.astype(CYCLE_DTYPE)
    return sp.csr_array((data, matrix.indices, matrix.indptr), shape=matrix.shape, copy=False)


class CoarseningStalled(RuntimeError):
    """Aggregation stopped above :data:`DENSE_CORE_MAX` nodes: no small dense core.

    A star stops at once: its one aggregate holds every node, too few for
    the block of vectors the cascade carries, and the level above it stays.

    Internal: the multilevel solver's caller chooses another method.
    """

    def __init__(self, size: int, core: int) -> None:
        super().__init__(
            f"the aggregation of {size:,} nodes left a coarsest level of {core:,} nodes "
            f"(the next level had too few or too many), above the {DENSE_CORE_MAX:,} a "
            "dense core may hold"
        )
        self.size, self.core = size, core


def build_hierarchy(matrix: sp.csr_array, null: np.ndarray, *, width: int = 0) -> Hierarchy:
    """Coarsen ``matrix`` (symmetric PSD, one-dimensional null space ``null``) to a dense core.

    ``width`` is the block of vectors the cascade carries: no level may have
    fewer than ``COARSEST_PER_VECTOR * width`` nodes, or its dense solve could
    not give that many pairs (a zoning into 161 zones asks for 241 vectors).

    Raises
    ------
    CoarseningStalled
        When aggregation stops at a level too large to solve densely
        (:data:`DENSE_CORE_MAX`).
    """
    levels = []
    current, z = sp.csr_array(matrix), null
    floor = max(COARSEST_SIZE, COARSEST_PER_VECTOR * width)
    while current.shape[0] > floor:
        level, coarse, coarse_null = _coarsen(current, z)
        if coarse.shape[0] > STALL_RATIO * current.shape[0]:
            break
        if coarse.shape[0] < COARSEST_PER_VECTOR * width:
            break
        levels.append(level)
        current, z = coarse, coarse_null
    if current.shape[0] > max(DENSE_CORE_MAX, 4 * floor):
        raise CoarseningStalled(matrix.shape[0], current.shape[0])
    levels.append(Level(matrix=current, null=z.reshape(-1, 1), smoother=_smoother(current)))
    dense = current.toarray()
    values, vectors = la.eigh((dense + dense.T) / 2.0)
    keep = values > NULL_RELATIVE * max(values[-1], 0.0)
    pinv = (vectors[:, keep] / values[keep]) @ vectors[:, keep].T
    singles = tuple(_single(lv.matrix) for lv in levels)
    return Hierarchy(tuple(levels), values, vectors, pinv, singles)
