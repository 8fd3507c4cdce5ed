"""Small dense steps shared by the solvers: orthonormalization and Rayleigh-Ritz."""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import scipy.linalg as la

__all__ = ["deflate", "rayleigh_ritz"]


def deflate(block: np.ndarray, basis: np.ndarray) -> np.ndarray:
    """Remove from ``block`` its components along the orthonormal columns of ``basis``.

    Two passes of classical Gram-Schmidt ("twice is enough": Giraud, Langou,
    Rozloznik, Comput. Math. Appl. 50, 2005), so the result is orthogonal to
    ``basis`` to working precision even when ``block`` nearly lies in its span.
    """
    for _ in range(2):
        block = block - basis @ (basis.T @ block)
    return block


def rayleigh_ritz(
    apply: Callable[[np.ndarray], np.ndarray], block: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Ritz pairs of a symmetric operator on the span of ``block``.

    The block is orthonormalized (QR), the operator projected onto it, and the
    small projected matrix diagonalized; the Ritz vectors are orthonormal to
    working precision and the Ritz values ascend.

    Parameters
    ----------
    apply : callable
        ``apply(X)`` returns the operator times the columns of ``X``.
    block : ndarray of shape (n, b)

    Returns
    -------
    values : ndarray of shape (b,)
    vectors : ndarray of shape (n, b)
    """
    q, _ = np.linalg.qr(block)
    projected = q.T @ apply(q)
    projected = (projected + projected.T) / 2.0  # symmetric up to rounding; make it exact
    values, small = la.eigh(projected)
    return values, q @ small
