"""Sparse eigen-solve by ARPACK's Lanczos in shift-invert mode (scipy ``eigsh``).

With a shift :math:`-s < 0` the operator :math:`(M + sI)^{-1}` is positive
definite and its largest eigenvalues :math:`1/(\\lambda + s)` belong to the
smallest :math:`\\lambda`, which Lanczos finds in few steps. The cost is a
sparse LU factorization whose fill grows faster than linearly on large meshes.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import ArpackNoConvergence, eigsh

from ._problem import Problem, Solution

__all__ = ["solve_shift_invert"]

#: The shift as a fraction of the operator's norm bound. Small enough to sit
#: below the smallest nontrivial eigenvalue of graphs of millions of nodes
#: (about 1e-6 of the bound for road-like networks), large enough for the
#: shifted matrix to factorize stably (condition number about 1/SHIFT_FRACTION).
SHIFT_FRACTION = 1e-7

#: Extra pairs requested beyond those wanted, at least this many or half the
#: wanted count. Single-vector Lanczos finds the second copy of a repeated
#: eigenvalue only through rounding, and asked for exactly k pairs it can
#: return the next eigenvalue instead of the copy at the edge (seen on grid
#: graphs); the guard pairs let the copy converge before the edge is read.
GUARD_PAIRS = 2


def solve_shift_invert(problem: Problem) -> Solution:
    """Smallest nontrivial pairs by shift-invert Lanczos, null vector included then removed."""
    n = problem.matrix.shape[0]
    guard = max(GUARD_PAIRS, problem.count // 2)
    # The trivial pair comes along (and is dropped below); eigsh needs k < n.
    wanted = min(problem.count + 1 + guard, n - 1)
    shift = SHIFT_FRACTION * problem.norm_bound
    v0 = problem.rng.standard_normal(n)
    matrix = sp.csc_matrix(problem.matrix)
    try:
        values, vectors = eigsh(
            matrix,
            k=wanted,
            sigma=-shift,
            which="LM",
            v0=v0,
            tol=problem.tol,
            maxiter=problem.maxiter,
        )
        iterations = 1
    except ArpackNoConvergence as exc:
        values, vectors, iterations = exc.eigenvalues, exc.eigenvectors, -1
    order = np.argsort(values)
    values, vectors = values[order], vectors[:, order]
    overlap = np.abs(problem.null_vector @ vectors)
    keep = np.ones(values.size, bool)
    if values.size:
        keep[int(np.argmax(overlap))] = False
    values, vectors = values[keep][: problem.count], vectors[:, keep][:, : problem.count]
    vectors -= np.outer(problem.null_vector, problem.null_vector @ vectors)
    vectors /= np.linalg.norm(vectors, axis=0)
    return Solution(values, vectors, matvecs=0, iterations=iterations)
