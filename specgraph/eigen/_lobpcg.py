"""Block LOBPCG for the smallest eigenpairs of a symmetric operator, with a null vector.

The locally optimal block preconditioned conjugate gradient method (Knyazev,
SIAM J. Sci. Comput. 23(2), 2001, doi:10.1137/S1064827500366124): each
iteration finds the best block in the span of the current block ``X``, the
preconditioned residuals ``W`` and the previous search directions ``P`` by
Rayleigh-Ritz. The basis is orthonormalized implicitly by SVQB (Stathopoulos
and Wu, SIAM J. Sci. Comput. 23(6), 2002, doi:10.1137/S1064827500370883) on
its Gram matrix, which drops directions that have become dependent instead of
failing as a Cholesky factorization would.

Memory. Only the three blocks ``X``, ``W`` and ``P`` are stored; the
products ``AX``, ``AW`` and ``AP`` of the textbook method are not:

* ``A X`` is formed row by row, turned into the residual block (written over
  ``W``) and projected on ``X`` and ``P`` in the same pass
  (:func:`._kernels.residual_projections`);
* ``A W`` is formed row by row and projected on ``X``, ``W`` and ``P``
  (:func:`._kernels.csr_projections`);
* ``P^T A P`` is carried as a small matrix: the new ``P`` is ``W k_w + P k_p``,
  so its projection is ``c_p^T H c_p`` with ``H`` the projected matrix of the
  Rayleigh-Ritz step and ``c_p = (0, k_w, k_p)`` (the same algebra as the
  implicit update of ``AP`` in Knyazev's method, on ``b x b`` matrices instead
  of ``n x b`` blocks).

That is two products with a block per iteration instead of three, and three
stored blocks instead of six. Blocks are updated in place by one fused pass
over the rows (:func:`._kernels.combine`: row ``i`` of the output depends on
row ``i`` of the inputs only).

The known null vector is projected out of every new direction, so the
iteration sees only the nontrivial part of the spectrum.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Protocol

import numpy as np
import scipy.linalg as la
import scipy.sparse as sp

from .._progress import report_activity
from . import _kernels as kern

__all__ = [
    "BlockOperator",
    "CsrBlocks",
    "LobpcgOutcome",
    "ProductBlocks",
    "lobpcg",
    "rayleigh_ritz_start",
]

#: Basis directions whose normalized Gram eigenvalue falls below this are
#: dropped as linearly dependent (SVQB's rule; near eps of float64 the
#: orthonormalized direction would be mostly rounding).
DEPENDENCE_RTOL = 1e-12

#: Fixed row chunks of the deterministic column inner products.
DOT_CHUNKS = 64

#: Passes that remove the null vector and the current block from the
#: preconditioned residuals ``W`` each iteration. One is enough there: the
#: Rayleigh-Ritz step orthonormalizes the whole basis by SVQB, which needs
#: ``W`` well separated from ``X`` (after one pass their overlap is at the
#: rounding level of the removed part), not orthogonal to the last bit.
#: Measured on the road-like networks (100,000 and 1,000,000 nodes, k = 8):
#: the same iterations as with two passes, for one pass over three blocks less.
#: The start block gets two passes ('twice is enough').
W_PASSES = 1

Apply = Callable[[np.ndarray, np.ndarray], object]  # f(x, out) writes into out

Projections = tuple[np.ndarray, np.ndarray, np.ndarray]


class BlockOperator(Protocol):
    """What LOBPCG needs of the operator ``A``: two fused products with a block."""

    def residuals(
        self, x: np.ndarray, values: np.ndarray, p: np.ndarray, out: np.ndarray
    ) -> Projections:
        """``out = A x - x diag(values)``; return ``x^T A x``, ``p^T A x`` and ``||out_c||^2``."""
        ...

    def projections(
        self, v: np.ndarray, x: np.ndarray, w: np.ndarray, p: np.ndarray
    ) -> Projections:
        """``x^T A v``, ``w^T A v`` and ``p^T A v``."""
        ...


class CsrBlocks:
    """A sparse matrix (CSR, float64) as a :class:`BlockOperator`; ``A v`` is never stored."""

    def __init__(self, matrix: sp.csr_array) -> None:
        self.matrix = matrix

    def residuals(
        self, x: np.ndarray, values: np.ndarray, p: np.ndarray, out: np.ndarray
    ) -> Projections:
        m = self.matrix
        kern.threads_for(m.shape[0])
        result: Projections = kern.residual_projections(
            m.indptr, m.indices, m.data, x, values, p, out, DOT_CHUNKS
        )
        return result

    def projections(
        self, v: np.ndarray, x: np.ndarray, w: np.ndarray, p: np.ndarray
    ) -> Projections:
        m = self.matrix
        kern.threads_for(m.shape[0])
        result: Projections = kern.csr_projections(
            m.indptr, m.indices, m.data, v, x, w, p, DOT_CHUNKS
        )
        return result


class ProductBlocks:
    """Any operator given by ``apply(x, out)`` as a :class:`BlockOperator` (stores ``A v``)."""

    def __init__(self, apply: Apply) -> None:
        self.apply = apply

    def _product(self, v: np.ndarray) -> np.ndarray:
        out = np.empty_like(v)
        self.apply(v, out)
        return out

    def residuals(
        self, x: np.ndarray, values: np.ndarray, p: np.ndarray, out: np.ndarray
    ) -> Projections:
        ax = self._product(x)
        np.subtract(ax, x * values, out=out)
        return x.T @ ax, p.T @ ax, np.einsum("ij,ij->j", out, out)

    def projections(
        self, v: np.ndarray, x: np.ndarray, w: np.ndarray, p: np.ndarray
    ) -> Projections:
        av = self._product(v)
        return x.T @ av, w.T @ av, p.T @ av


@dataclass(frozen=True, eq=False)
class LobpcgOutcome:
    """Ritz values and vectors, their absolute residual norms, and the work done."""

    values: np.ndarray
    vectors: np.ndarray
    residuals: np.ndarray
    iterations: int
    matvecs: int


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
    for _ in range(passes):
        c1, c2 = -(first.T @ block), -(second.T @ block)
        kern.add_combine(block, first, c1, second, c2, block)


def _symmetric(matrix: np.ndarray) -> np.ndarray:
    return (matrix + matrix.T) / 2.0


def _gram(blocks: list[np.ndarray]) -> np.ndarray:
    """``B^T B`` for the basis ``B = [blocks]`` without forming ``B``.

    Only the blocks on and above the diagonal are computed (each is a pass
    over the rows); those below are their transposes.
    """
    products = {
        (i, j): blocks[i].T @ blocks[j] for i in range(len(blocks)) for j in range(i, len(blocks))
    }
    rows = [
        [products[(i, j)] if i <= j else products[(j, i)].T for j in range(len(blocks))]
        for i in range(len(blocks))
    ]
    return _symmetric(np.block(rows))


def _ritz(gram: np.ndarray, projected: np.ndarray, width: int) -> tuple[np.ndarray, np.ndarray]:
    """Smallest Ritz pairs of the pencil (projected, gram) by SVQB: values, coefficients."""
    scale = 1.0 / np.sqrt(np.maximum(np.diag(gram), np.finfo(float).tiny))
    values, vectors = la.eigh(gram * scale[:, None] * scale[None, :])
    keep = values > DEPENDENCE_RTOL * values[-1]
    transform = (scale[:, None] * vectors[:, keep]) / np.sqrt(values[keep])
    small = transform.T @ projected @ transform
    ritz, coefficients = la.eigh((small + small.T) / 2.0)
    return ritz[:width], transform @ coefficients[:, :width]


def rayleigh_ritz_start(operator: BlockOperator, x: np.ndarray, null: np.ndarray) -> np.ndarray:
    """Rayleigh-Ritz on the start block, in place: the first ``X`` and its Ritz values."""
    empty = x[:, :0]
    _orthogonalize(x, null, empty)
    xax, _, _ = operator.projections(x, x, empty, empty)
    values, coefficients = _ritz(_gram([x]), _symmetric(xax), x.shape[1])
    kern.combine(x, coefficients, empty, coefficients[:0], empty, coefficients[:0], x)
    return values


def lobpcg(
    operator: BlockOperator,
    precondition: Apply,
    start: np.ndarray,
    null: np.ndarray,
    *,
    count: int,
    tol: float,
    maxiter: int,
    start_values: np.ndarray | None = None,
) -> LobpcgOutcome:
    """Smallest eigenpairs of ``operator`` in the complement of ``null``.

    Parameters
    ----------
    operator : BlockOperator
        The symmetric operator (:class:`CsrBlocks` or :class:`ProductBlocks`).
    precondition : callable
        ``f(r, out)`` writes the preconditioner's product with the row-major
        block ``r`` into ``out`` (called with ``out is r``).
    start : ndarray of shape (n, b)
        Initial block; ``b >= count`` (the extra columns are guard vectors).
        A C-ordered float64 array is used as the iteration's ``X`` block and
        overwritten (it becomes ``vectors`` of the outcome); pass a copy to keep it.
    null : ndarray of shape (n, 1)
        Orthonormal basis of the known null space.
    count : int
        Columns that must converge.
    tol : float
        Absolute residual norm each of the first ``count`` columns must reach.
    maxiter : int
        Iteration cap.
    start_values : ndarray of shape (b,), optional
        The Ritz values of ``start`` when it is already the output of
        :func:`rayleigh_ritz_start` (orthonormal Ritz vectors orthogonal to
        ``null``): the first Rayleigh-Ritz step is then not repeated.

    References
    ----------
    A. V. Knyazev, "Toward the optimal preconditioned eigensolver: locally
    optimal block preconditioned conjugate gradient method", SIAM J. Sci.
    Comput. 23(2), 2001.
    """
    x = np.require(start, dtype=np.float64, requirements=["C", "W"])
    n, width = x.shape
    kern.threads_for(n)
    w = np.empty((n, width))
    p = np.zeros((n, width))
    no_p, empty = p[:, :0], x[:, :0]
    if start_values is None:
        values, matvecs = rayleigh_ritz_start(operator, x, null), width
    else:
        values, matvecs = np.array(start_values, dtype=np.float64), 0
    iterations, have_p = 0, False
    pap = np.zeros((0, 0))
    while True:
        current_p = p if have_p else no_p
        xax, pax, squares = operator.residuals(x, values, current_p, w)
        matvecs += width
        norms = np.sqrt(squares)
        if np.all(norms[:count] <= tol) or iterations >= maxiter:
            return LobpcgOutcome(values, x, norms, iterations, matvecs)
        precondition(w, w)
        kern.threads_for(n)
        _orthogonalize(w, null, x, passes=W_PASSES)
        xaw, waw, paw = operator.projections(w, x, w, current_p)
        matvecs += width
        blocks = [x, w, current_p] if have_p else [x, w]
        projected = np.block(
            [[xax, xaw, pax.T], [xaw.T, waw, paw.T], [pax, paw, pap]]
            if have_p
            else [[xax, xaw], [xaw.T, waw]]
        )
        projected = _symmetric(projected)
        values, coefficients = _ritz(_gram(blocks), projected, width)
        kx, kw = coefficients[:width], coefficients[width : 2 * width]
        kp = coefficients[2 * width :]
        # P <- W kw + P kp and X <- X kx + P, both in place, row by row.
        kern.combine(w, kw, current_p, kp, empty, kp[:0], p)
        kern.combine_add(x, kx, p, x)
        cp = coefficients.copy()
        cp[:width] = 0.0
        pap = _symmetric(cp.T @ projected @ cp)
        have_p = True
        iterations += 1
        report_activity("LOBPCG iteration", iterations)
