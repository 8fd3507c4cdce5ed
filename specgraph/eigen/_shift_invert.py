"""Sparse eigen-solve by ARPACK's Lanczos in shift-invert mode (scipy ``eigsh``).

With a shift :math:`-s < 0` the operator :math:`(M + sI)^{-1}` is positive
definite and its largest eigenvalues :math:`1/(\\lambda + s)` belong to the
smallest :math:`\\lambda`, which Lanczos finds in few steps. The cost is one
sparse LU factorization, whose fill grows faster than linearly on large meshes.

Single-vector Lanczos sees only one direction of each eigenspace in exact
arithmetic, so copies of a repeated eigenvalue are found through rounding
alone and can be missed. After each run the pairs found are therefore locked
and deflated, and Lanczos runs again on the rest: a pair it finds below the
current edge was missing, and the loop repeats until a run finds none.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import ArpackNoConvergence, LinearOperator, eigsh, splu

from ._problem import Problem, Solution
from ._subspace import deflate, rayleigh_ritz

__all__ = ["solve_shift_invert"]

#: The shift as a fraction of the operator's norm bound. Small enough to sit
#: below the smallest nontrivial eigenvalue of graphs of millions of nodes
#: (about 1e-6 of the bound for road-like networks), large enough for the
#: shifted matrix to factorize stably (condition number about 1/SHIFT_FRACTION).
SHIFT_FRACTION = 1e-7

#: Extra pairs asked of each Lanczos run beyond those still wanted, so that
#: the edge of the wanted set converges among neighbours rather than last.
GUARD_PAIRS = 2


def _inverse(problem: Problem) -> LinearOperator:
    """``(M + sI)^{-1}`` through one sparse LU factorization (SuperLU)."""
    n = problem.matrix.shape[0]
    shift = SHIFT_FRACTION * problem.norm_bound
    shifted = sp.csc_matrix(problem.matrix + shift * sp.eye_array(n, format="csr"))
    factor = splu(shifted)
    return LinearOperator((n, n), matvec=factor.solve, matmat=factor.solve, dtype=float)


def _lanczos_run(
    inverse: LinearOperator, locked: np.ndarray, wanted: int, problem: Problem
) -> np.ndarray:
    """Ritz vectors of the largest eigenvalues of the inverse, deflated against ``locked``."""
    n = inverse.shape[0]

    def apply(x: np.ndarray) -> np.ndarray:
        x = deflate(x.reshape(n, -1), locked)
        return deflate(inverse.matmat(x), locked).reshape(x.shape if x.ndim > 1 else -1)

    operator = LinearOperator((n, n), matvec=apply, matmat=apply, dtype=float)
    start = deflate(problem.rng.standard_normal((n, 1)), locked).ravel()
    k = min(wanted, n - locked.shape[1] - 1)
    if k < 1:
        return np.zeros((n, 0))
    try:
        _, vectors = eigsh(
            operator, k=k, which="LA", v0=start, tol=problem.tol, maxiter=problem.maxiter
        )
    except ArpackNoConvergence as exc:
        vectors = exc.eigenvectors  # partial pairs; the residual check judges them
    return np.asarray(vectors)


def solve_shift_invert(problem: Problem) -> Solution:
    """Smallest nontrivial pairs by shift-invert Lanczos with locking and deflation."""
    n = problem.matrix.shape[0]
    inverse = _inverse(problem)
    null = problem.null_vector.reshape(n, 1)
    slack = problem.tol * problem.norm_bound

    def apply(x: np.ndarray) -> np.ndarray:
        return problem.matrix @ x

    found = np.zeros((n, 0))
    values = np.zeros(0)
    runs = 0
    # Ritz values on a larger subspace can only move down (Cauchy interlacing),
    # so a run that lowers none of them found nothing missing and ends the loop;
    # every other run adds at least one pair, so count + 1 runs suffice.
    while runs <= problem.count:
        still = problem.count - found.shape[1]
        vectors = _lanczos_run(inverse, np.hstack([null, found]), still + GUARD_PAIRS, problem)
        runs += 1
        if vectors.shape[1] == 0:
            break
        previous = values
        values, ritz = rayleigh_ritz(apply, deflate(np.hstack([found, vectors]), null))
        values, found = values[: problem.count], ritz[:, : problem.count]
        if previous.size == problem.count and np.all(values >= previous - slack):
            break
    return Solution(values, found, matvecs=0, iterations=runs)
