"""Block LOBPCG for the smallest eigenpairs of a symmetric operator, with a null vector.

The locally optimal block preconditioned conjugate gradient method (Knyazev,
SIAM J. Sci. Comput. 23(2), 2001, doi:10.1137/S1064827500366124): each
iteration finds the best block in the span of the current block ``X``, the
preconditioned residuals ``W`` and the previous search directions ``P`` by
Rayleigh-Ritz. The basis is orthonormalized by SVQB (Stathopoulos and Wu,
SIAM J. Sci. Comput. 23(6), 2002, doi:10.1137/S1064827500370883), which drops
directions that have become dependent instead of failing like Cholesky.
Converged columns stop receiving new directions (soft locking, Knyazev et al.
2007) but stay in the Rayleigh-Ritz, so they keep improving for free.

The known null vector is projected out of every new direction, so the
iteration sees only the nontrivial part of the spectrum.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import scipy.linalg as la

from ._subspace import deflate

__all__ = ["LobpcgOutcome", "lobpcg"]

#: Basis directions whose Gram eigenvalue falls below this share of the
#: largest are dropped as linearly dependent (about sqrt(eps) of float64, as
#: SVQB recommends: below it the orthonormalized direction is mostly rounding).
DEPENDENCE_RTOL = 1e-12

Block = Callable[[np.ndarray], np.ndarray]


@dataclass(frozen=True, eq=False)
class LobpcgOutcome:
    values: np.ndarray
    vectors: np.ndarray
    residuals: np.ndarray  # absolute residual norms
    iterations: int
    matvecs: int


def _svqb(basis: np.ndarray, applied: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Orthonormalize ``basis`` (and carry ``applied = A @ basis`` along)."""
    gram = basis.T @ basis
    scale = 1.0 / np.sqrt(np.maximum(np.diag(gram), np.finfo(float).tiny))
    values, vectors = la.eigh(gram * scale[:, None] * scale[None, :])
    keep = values > DEPENDENCE_RTOL * values[-1]
    transform = (scale[:, None] * vectors[:, keep]) / np.sqrt(values[keep])
    return basis @ transform, applied @ transform


def _rayleigh_ritz(
    basis: np.ndarray, applied: np.ndarray, width: int
) -> tuple[np.ndarray, np.ndarray]:
    """The ``width`` smallest Ritz values and coefficients on an orthonormal basis."""
    projected = basis.T @ applied
    values, coefficients = la.eigh((projected + projected.T) / 2.0)
    return values[:width], coefficients[:, :width]


def lobpcg(
    apply: Block,
    precondition: Block,
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
        Products with the operator and the preconditioner, on row-major blocks.
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
    width = start.shape[1]
    x, ax = _svqb(deflate(start, null), apply(deflate(start, null)))
    matvecs = width
    values, coefficients = _rayleigh_ritz(x, ax, width)
    x, ax = x @ coefficients, ax @ coefficients
    p: np.ndarray | None = None
    ap = np.empty((0, 0))
    iterations = 0
    while True:
        residual = ax - x * values
        norms = np.linalg.norm(residual, axis=0)
        if np.all(norms[:count] <= tol) or iterations >= maxiter:
            return LobpcgOutcome(values, x, norms, iterations, matvecs)
        active = norms > tol
        w = deflate(precondition(np.ascontiguousarray(residual[:, active])), null)
        w -= x @ (x.T @ w)
        aw = apply(np.ascontiguousarray(w))
        matvecs += w.shape[1]
        blocks, applied = [x, w], [ax, aw]
        if p is not None:
            blocks.append(p[:, active])
            applied.append(ap[:, active])
        basis, abasis = _svqb(np.hstack(blocks), np.hstack(applied))
        values, coefficients = _rayleigh_ritz(basis, abasis, width)
        new_x, new_ax = basis @ coefficients, abasis @ coefficients
        # New search directions: the part of the update outside the old block.
        shift = x.T @ new_x
        p, ap = new_x - x @ shift, new_ax - ax @ shift
        x, ax = new_x, new_ax
        iterations += 1
