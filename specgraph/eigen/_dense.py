"""Dense eigen-solve for small operators (LAPACK through :func:`scipy.linalg.eigh`)."""

from __future__ import annotations

import numpy as np
import scipy.linalg as la

from ._problem import Problem, Solution

__all__ = ["solve_dense"]


def solve_dense(problem: Problem) -> Solution:
    """Smallest nontrivial eigenpairs by a dense symmetric eigensolver.

    The known null vector ``b`` is deflated by a Hotelling shift: the matrix
    :math:`M + \\sigma b b^T` with :math:`\\sigma` above the spectrum moves the
    trivial pair to the top and leaves every other pair unchanged, so the
    ``m`` smallest pairs of the shifted matrix are the nontrivial ones.
    """
    m = problem.count
    dense = problem.matrix.toarray()
    b = problem.null_vector
    sigma = 2.0 * problem.norm_bound + 1.0
    dense += sigma * np.outer(b, b)
    values, vectors = la.eigh(dense, subset_by_index=[0, m - 1], driver="evr")
    return Solution(values, vectors, matvecs=0, iterations=1)
