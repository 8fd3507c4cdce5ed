"""Block LOBPCG for the smallest eigenpairs of a symmetric operator, with a null vector.

The locally optimal block preconditioned conjugate gradient method (Knyazev,
SIAM J. Sci. Comput. 23(2), 2001, doi:10.1137/S1064827500366124): each
iteration finds the best block in the span of the current block ``X``, the
preconditioned residuals ``W`` and the previous search directions ``P`` by
Rayleigh-Ritz. The basis is orthonormalized implicitly by SVQB (Stathopoulos
and Wu, SIAM J. Sci. Comput. 23(6), 2002, doi:10.1137/S1064827500370883) on
its Gram matrix, which drops directions that have become dependent instead of
failing as a Cholesky factorization would.

Large blocks are allocated once and reused: on this workload a fresh array of
a few hundred megabytes costs more in page faults than the arithmetic done on
it. The new block and search directions are formed by one fused pass over the
rows (:func:`._kernels.combine`) instead of a chain of temporaries.

The known null vector is projected out of every new direction, so the
iteration sees only the nontrivial part of the spectrum.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import scipy.linalg as la

from . import _kernels as kern

__all__ = ["LobpcgOutcome", "lobpcg"]

#: Basis directions whose normalized Gram eigenvalue falls below this are
#: dropped as linearly dependent (SVQB's rule; near eps of float64 the
#: orthonormalized direction would be mostly rounding).
DEPENDENCE_RTOL = 1e-12

#: Fixed row chunks of the deterministic column inner products.
DOT_CHUNKS = 64

Apply = Callable[[np.ndarray, np.ndarray], object]  # f(x, out) writes into out


@dataclass(frozen=True, eq=False)
class LobpcgOutcome:
    """Ritz values and vectors, their absolute residual norms, and the work done."""

    values: np.ndarray
    vectors: np.ndarray
    residuals: np.ndarray
    iterations: int
    matvecs: int


class _Blocks:
    """The iteration's blocks, each ``(n, width)`` in row-major order.

    ``ax`` and ``ap`` are recomputed by a product with the operator rather
    than updated by linear combination: a sparse product with a block costs
    less than combining three dense blocks, and it keeps them exact.
    """

    def __init__(self, n: int, width: int) -> None:
        shape = (n, width)
        self.x, self.ax, self.w, self.aw = (np.empty(shape) for _ in range(4))
        self.p, self.ap = np.zeros(shape), np.zeros(shape)
        self.empty = np.empty((n, 0))  # a block with no columns, for unused terms

    def update(self, kx: np.ndarray, kw: np.ndarray, kp: np.ndarray, have_p: bool) -> None:
        """``P <- W kw + P kp`` and ``X <- X kx + P``, written over blocks no longer needed.

        After the Rayleigh-Ritz step ``AW`` is spent, so the new directions go
        there; the old ``P`` is then spent, so the new block goes there; the
        roles of the buffers rotate instead of two more blocks being kept.
        """
        none, no_rows = self.empty, kp[:0]
        kern.combine(self.w, kw, self.p if have_p else none, kp, none, no_rows, self.aw)
        kern.combine(self.x, kx, self.aw, np.eye(kx.shape[1]), none, no_rows, self.p)
        self.x, self.p, self.aw = self.p, self.aw, self.x


def _orthogonalize(
    block: np.ndarray, first: np.ndarray, second: np.ndarray, passes: int = 2
) -> None:
    """Remove from ``block``, in place, its components along two orthonormal bases.

    ``first`` and ``second`` must be orthogonal to each other (the null vector
    and the current block). Two passes by default ('twice is enough': Giraud,
    Langou and Rozloznik, Comput. Math. Appl. 50, 2005). Each pass is one
    fused sweep over the rows (row ``i`` of the output depends on row ``i`` of
    the input only, so the update can overwrite its input).
    """
    identity = np.eye(block.shape[1])
    for _ in range(passes):
        c1, c2 = -(first.T @ block), -(second.T @ block)
        kern.combine(block, identity, first, c1, second, c2, block)


def _gram(blocks: list[np.ndarray], applied: list[np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    """``B^T B`` and ``B^T A B`` for the basis ``B = [blocks]`` without forming ``B``."""
    gram = np.block([[u.T @ v for v in blocks] for u in blocks])
    projected = np.block([[u.T @ v for v in applied] for u in blocks])
    return (gram + gram.T) / 2.0, (projected + projected.T) / 2.0


def _ritz(gram: np.ndarray, projected: np.ndarray, width: int) -> tuple[np.ndarray, np.ndarray]:
    """Smallest Ritz pairs of the pencil (projected, gram) by SVQB: values, coefficients."""
    scale = 1.0 / np.sqrt(np.maximum(np.diag(gram), np.finfo(float).tiny))
    values, vectors = la.eigh(gram * scale[:, None] * scale[None, :])
    keep = values > DEPENDENCE_RTOL * values[-1]
    transform = (scale[:, None] * vectors[:, keep]) / np.sqrt(values[keep])
    small = transform.T @ projected @ transform
    ritz, coefficients = la.eigh((small + small.T) / 2.0)
    return ritz[:width], transform @ coefficients[:, :width]


def _start(apply: Apply, start: np.ndarray, null: np.ndarray, st: _Blocks) -> np.ndarray:
    """Rayleigh-Ritz on the start block: the first ``X``, ``AX`` and Ritz values."""
    width = start.shape[1]
    st.w[...] = start
    _orthogonalize(st.w, null, st.empty)
    apply(st.w, st.aw)
    values, coefficients = _ritz(*_gram([st.w], [st.aw]), width)
    kern.combine(
        st.w, coefficients, st.p[:, :0], coefficients[:0], st.p[:, :0], coefficients[:0], st.x
    )
    kern.combine(
        st.aw, coefficients, st.p[:, :0], coefficients[:0], st.p[:, :0], coefficients[:0], st.ax
    )
    return values


def lobpcg(
    apply: Apply,
    precondition: Apply,
    start: np.ndarray,
    null: np.ndarray,
    *,
    count: int,
    tol: float,
    maxiter: int,
) -> LobpcgOutcome:
    """Smallest eigenpairs of ``apply`` in the complement of ``null``.

    Parameters
    ----------
    apply, precondition : callable
        ``f(x, out)`` writes the operator's (preconditioner's) product with the
        row-major block ``x`` into ``out``.
    start : ndarray of shape (n, b)
        Initial block; ``b >= count`` (the extra columns are guard vectors).
    null : ndarray of shape (n, 1)
        Orthonormal basis of the known null space.
    count : int
        Columns that must converge.
    tol : float
        Absolute residual norm each of the first ``count`` columns must reach.
    maxiter : int
        Iteration cap.
    """
    n, width = start.shape
    kern.threads_for(n)
    st = _Blocks(n, width)
    values = _start(apply, start, null, st)
    matvecs, iterations, have_p = width, 0, False
    while True:
        np.multiply(st.x, values, out=st.w)
        np.subtract(st.ax, st.w, out=st.w)  # residuals
        norms = np.sqrt(kern.column_dots(st.w, st.w, DOT_CHUNKS))
        if np.all(norms[:count] <= tol) or iterations >= maxiter:
            return LobpcgOutcome(values, st.x.copy(), norms, iterations, matvecs)
        precondition(st.w, st.w)
        kern.threads_for(n)
        _orthogonalize(st.w, null, st.x)
        apply(st.w, st.aw)
        matvecs += width
        blocks = [st.x, st.w] + ([st.p] if have_p else [])
        applied = [st.ax, st.aw] + ([st.ap] if have_p else [])
        values, coefficients = _ritz(*_gram(blocks, applied), width)
        kx, kw = coefficients[:width], coefficients[width : 2 * width]
        kp = coefficients[2 * width :] if have_p else coefficients[:0]
        st.update(kx, kw, kp, have_p)
        apply(st.x, st.ax)
        apply(st.p, st.ap)
        matvecs += 2 * width
        have_p = True
        iterations += 1
