"""What a solver for one connected component receives and returns.

Solvers see a connected operator only: the dispatcher in :mod:`._api` splits
disconnected networks into components and puts the trivial pairs back. A
solver returns the ``count`` smallest *nontrivial* pairs, orthogonal to the
null vector; residuals, signs and the convergence verdict are the
dispatcher's, so every method is judged by the same rule.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import scipy.sparse as sp

__all__ = ["Problem", "Solution"]


@dataclass(frozen=True, eq=False)
class Problem:
    """A connected symmetric PSD operator and the pairs wanted of it.

    Attributes
    ----------
    matrix : scipy.sparse.csr_array of shape (n, n)
    null_vector : ndarray of shape (n,)
        Unit vector spanning the operator's null space.
    norm_bound : float
        Upper bound on the operator's 2-norm.
    count : int
        Number of nontrivial pairs wanted, ``1 <= count <= n - 1``.
    tol : float
        Target scaled residual.
    maxiter : int or None
        Iteration cap, method-specific meaning; None for the method's default.
    rng : numpy.random.Generator
        Source of start vectors.
    ordering : ndarray of int or None
        A reverse Cuthill-McKee order of ``matrix`` when already computed (by
        the ``auto`` forecast), for solvers that reorder the matrix.
    factor : object or None
        The shift-invert factor of ``matrix`` when already computed (by the
        ``auto`` forecast's trial): :func:`~specgraph.eigen._lanczos.factorize`
        of the matrix at :func:`~specgraph.eigen._lanczos.shift_of` its norm
        bound.
    """

    matrix: sp.csr_array
    null_vector: np.ndarray
    norm_bound: float
    count: int
    tol: float
    maxiter: int | None
    rng: np.random.Generator
    ordering: np.ndarray | None = None
    factor: Any = None


@dataclass(frozen=True, eq=False)
class Solution:
    """Pairs found by a solver (possibly fewer accurate than asked).

    ``method`` names the solver that found them when it is not the one asked
    (the multilevel solver, called by ``auto``, hands a component whose wanted
    eigenvalues stand far below the rest to Lanczos on the flipped operator).
    """

    values: np.ndarray
    vectors: np.ndarray
    matvecs: int
    iterations: int
    method: str | None = None
