"""Multilevel eigen-solver: coarse-to-fine cascade of preconditioned block iterations.

Steps:

1. Reorder the component for locality (reverse Cuthill-McKee), so that block
   products touch memory in order.
2. Coarsen by aggregation down to a dense core (:mod:`._hierarchy`).
3. Solve the core densely; its smallest nontrivial eigenvectors start the
   cascade.
4. On each finer level, interpolate the block and improve it by a few
   iterations of LOBPCG preconditioned by flexible CG with the K-cycle from
   that level down; on the finest level smooth the interpolated block with
   a Chebyshev filter first, then iterate until the tolerance is met.

This follows the multilevel lines of Barnard and Simon (Concurrency Pract.
Exper. 6(2), 1994, doi:10.1002/cpe.4330060203), Koren, Carmel and Harel
(J. Graph Algorithms Appl. 6(3), 2002) and Urschel, Xu, Hu and Zikatanov
(J. Comput. Math. 33(2), 2015, doi:10.4208/jcm.1412-m2014-0041), with
Knyazev's LOBPCG (2001) as the smoother of the cascade.
"""

from __future__ import annotations

import logging
from dataclasses import replace

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import reverse_cuthill_mckee

from .._progress import report_activity
from . import _kernels as kern
from ._hierarchy import Hierarchy, build_hierarchy
from ._lanczos import solve_lanczos_flip
from ._lobpcg import CsrBlocks, LobpcgOutcome, lobpcg, rayleigh_ritz_start
from ._problem import Problem, Solution

__all__ = ["solve_multilevel"]

logger = logging.getLogger(__name__)

#: Guard vectors carried beyond the wanted ones: at least this many, or
#: :data:`GUARD_SHARE` of the wanted count. They widen the gap that governs
#: convergence, from lambda_count / lambda_(count+1) to
#: lambda_count / lambda_(block+1). Every guard vector costs a column in
#: every stored block; measured on the 1,000,000-node road-like network
#: (k = 7 and 8), 2 guards needed the same iterations as 4.
MIN_GUARD = 2

#: Share of the wanted count carried as guard vectors when it exceeds :data:`MIN_GUARD`.
GUARD_SHARE = 0.25

#: LOBPCG iterations on each intermediate level of the cascade: enough to
#: remove the interpolation error the finer level cannot see, no more.
#: Measured with the finest level's start filter (k = 8, three alternating
#: runs each, 1 vs 2 iterations): road-like 1,000,000 nodes, the finest level
#: needed 5 iterations either way, median 5.9 s vs 7.1 s; road-like 100,000
#: nodes 0.72 s vs 0.73 s; stochastic block model 100,000 nodes 1.05 s vs
#: 1.11 s. With none, the finest level needed 6 (1,000,000 nodes, 6.8 s).
#: An accurate intermediate level does not help the finest one: on the
#: 100,000-node road-like network, with 2, 4 or 8 iterations on its
#: 17,843-node level, the finest level needed 6 iterations each time.
CASCADE_ITERATIONS = 1

#: Flexible CG steps of the preconditioner on the level being iterated.
PRECONDITIONER_STEPS = 3

#: Default cap on LOBPCG iterations on the finest level.
DEFAULT_MAXITER = 200

#: Degree of the Chebyshev filter that smooths the interpolated start block
#: on the finest level before its first iteration (0: no filter).
#: Interpolation from aggregates leaves a jagged error that the multigrid
#: preconditioner removes slowly; the filter removes it for one block product
#: per degree. Measured (k = 8, three alternating runs each): road-like
#: 1,000,000 nodes, finest iterations 6 -> 5 at degrees 8 and 16, median
#: 10.8 s -> 9.3 s (8) and 9.0 s (16); road-like 100,000 nodes, 6 -> 6 at
#: degree 8 but 5 at 16 (1.22 s -> 1.16 s); stochastic block model 100,000
#: nodes, no iteration saved (1.47 s -> 1.63 s at 16, within the noise).
START_FILTER_DEGREE = 16

#: Gap ratio ``(theta_(c+1) - theta_c) / (||M|| - theta_(c+1))`` of the start
#: block's Ritz values (``c`` the wanted count; the first guard value above the
#: last wanted one) from which ``auto`` hands the component to thick-restart
#: Lanczos on the flipped operator ``||M|| I - M``. Lanczos needs about
#: ``log(2 / tol) / (2 sqrt(ratio))`` steps per pair there (the Kaniel-Paige-Saad
#: bound; about 32 at 0.05), fewer products than one multilevel iteration costs.
#: Ritz values only overestimate eigenvalues, so the ratio is an estimate; a
#: trial that misses the tolerance falls back to the multilevel iteration.
#: Measured (start block after the cascade and the filter, k = 8): stochastic
#: block model 100,000 nodes 0.32 and 20,000 nodes 0.25; road-like 100,000
#: nodes 2e-5; a 60 x 60 grid 1e-3.
FLIP_GAP_RATIO = 0.05

#: Restart cycles allowed to each run of that Lanczos trial (a run of 7 pairs
#: keeps 27 basis vectors and adds up to 18 per cycle): enough where the ratio
#: holds, and a bound on the products lost where it does not.
FLIP_TRIAL_CYCLES = 10

#: The start filter damps the spectrum above this share of the operator's norm
#: bound and keeps the part below it (the wanted pairs lie far below it on
#: large networks; where they do not, the filter only costs its products).
START_FILTER_CUT = 0.05


def _reordered(problem: Problem) -> tuple[sp.csr_array, np.ndarray, np.ndarray]:
    order = problem.ordering
    if order is None:
        order = reverse_cuthill_mckee(sp.csr_matrix(problem.matrix), symmetric_mode=True)
    matrix = sp.csr_array(problem.matrix)[order][:, order].tocsr()
    matrix.sort_indices()
    return matrix, problem.null_vector[order], order


def _cascade(hierarchy: Hierarchy, problem: Problem, width: int) -> tuple[np.ndarray, int, int]:
    """Run the coarse-to-fine cascade; return the finest-level start block."""
    levels = hierarchy.levels
    block = hierarchy.coarse_vectors[:, 1 : width + 1]
    if block.shape[1] < width:  # a tiny core: pad with random directions
        pad = problem.rng.standard_normal((block.shape[0], width - block.shape[1]))
        block = np.hstack([block, pad])
    iterations = matvecs = 0
    for index in range(len(levels) - 2, 0, -1):
        report_activity("eigen level", index)
        block = hierarchy.prolong(index, block)
        null = levels[index].null
        outcome = _iterate(hierarchy, index, block, null, problem, CASCADE_ITERATIONS)
        block = outcome.vectors
        logger.debug(
            "level %d (%d nodes): %d iterations", index, block.shape[0], outcome.iterations
        )
        iterations += outcome.iterations
        matvecs += outcome.matvecs
    # The start block is overwritten by the iteration: never a view of the core's vectors.
    block = hierarchy.prolong(0, block) if len(levels) > 1 else np.array(block, order="C")
    return block, iterations, matvecs


def _filtered(matrix: sp.csr_array, block: np.ndarray, upper: float, degree: int) -> np.ndarray:
    """Chebyshev-filtered ``block``: components above ``START_FILTER_CUT * upper`` damped.

    The scaled three-term recurrence of Zhou and Saad (J. Comput. Phys. 219,
    2006, doi:10.1016/j.jcp.2006.03.017, Algorithm 3.2) with the lower end of
    the spectrum at 0 (a PSD operator): components at 0 keep their size, those
    in ``[cut, upper]`` shrink by at least ``1 / T_degree((upper + cut) /
    (upper - cut))``. ``block`` is overwritten; two blocks are live at a time.
    """
    low = START_FILTER_CUT * upper
    half, centre = (upper - low) / 2.0, (upper + low) / 2.0
    sigma1 = sigma = half / (0.0 - centre)
    x = block
    y = np.empty_like(block)
    ptr, idx, data = matrix.indptr, matrix.indices, matrix.data
    kern.threads_for(matrix.shape[0])
    scale = sigma1 / half
    kern.chebyshev_step(ptr, idx, data, x, x, scale, -centre * scale, 0.0, y)
    for _ in range(2, degree + 1):
        sigma2 = 1.0 / (2.0 / sigma1 - sigma)
        scale = 2.0 * sigma2 / half
        kern.chebyshev_step(ptr, idx, data, y, x, scale, -centre * scale, -sigma * sigma2, x)
        x, y = y, x
        sigma = sigma2
    return y


def _iterate(
    hierarchy: Hierarchy,
    index: int,
    block: np.ndarray,
    null: np.ndarray,
    problem: Problem,
    maxiter: int,
    start_values: np.ndarray | None = None,
) -> LobpcgOutcome:
    """LOBPCG on level ``index``, preconditioned by flexible CG with the K-cycle."""
    return lobpcg(
        CsrBlocks(hierarchy.levels[index].matrix),
        lambda r, out: hierarchy.precondition(index, r, PRECONDITIONER_STEPS, out),
        block,
        null,
        count=problem.count,
        tol=problem.tol * problem.norm_bound,
        maxiter=maxiter,
        start_values=start_values,
    )


def _flip_trial(problem: Problem) -> tuple[Solution, bool]:
    """Lanczos on the flipped operator, capped; whether every pair meets the tolerance."""
    trial = solve_lanczos_flip(replace(problem, maxiter=FLIP_TRIAL_CYCLES))
    if trial.values.size < problem.count:
        return trial, False
    residual = problem.matrix @ trial.vectors - trial.vectors * trial.values
    scaled = np.linalg.norm(residual, axis=0) / problem.norm_bound
    return trial, bool(np.all(scaled <= problem.tol))


def solve_multilevel(problem: Problem, *, switch: bool = False) -> Solution:
    """Smallest nontrivial pairs of a large sparse component by the multilevel cascade.

    With ``switch`` (the ``auto`` rule), a component whose start block shows a
    gap ratio of at least :data:`FLIP_GAP_RATIO` above the wanted pairs is
    tried first by Lanczos on the flipped operator (:data:`FLIP_TRIAL_CYCLES`);
    its pairs are kept when every scaled residual meets the tolerance, and the
    multilevel iteration goes on otherwise (the trial's products are counted).
    """
    matrix, null, order = _reordered(problem)
    guard = max(MIN_GUARD, int(GUARD_SHARE * problem.count))
    width = min(problem.count + guard, matrix.shape[0] - 1)
    hierarchy = build_hierarchy(matrix, null, width=width)
    logger.debug("multilevel: levels %s", hierarchy.sizes)
    start, iterations, matvecs = _cascade(hierarchy, problem, width)
    if len(hierarchy.levels) > 1 and START_FILTER_DEGREE > 0:  # interpolated vectors
        start = _filtered(matrix, start, problem.norm_bound, START_FILTER_DEGREE)
        matvecs += START_FILTER_DEGREE * width
    ritz = None  # the start block's Ritz values, once computed (LOBPCG then skips its own)
    if switch and width > problem.count:
        ritz = rayleigh_ritz_start(CsrBlocks(matrix), start, hierarchy.levels[0].null)
        matvecs += width
        above = ritz[problem.count]
        ratio = (above - ritz[problem.count - 1]) / max(problem.norm_bound - above, 1e-300)
        logger.debug("start block gap ratio %.3g", ratio)
        if ratio >= FLIP_GAP_RATIO:
            trial, met = _flip_trial(problem)
            matvecs += trial.matvecs
            iterations += trial.iterations
            if met:
                return replace(trial, matvecs=matvecs, iterations=iterations, method="lanczos_flip")
            logger.info("flipped Lanczos missed the tolerance; the multilevel iteration goes on")
    maxiter = problem.maxiter or DEFAULT_MAXITER
    outcome = _iterate(hierarchy, 0, start, hierarchy.levels[0].null, problem, maxiter, ritz)
    logger.debug("finest level: %d iterations", outcome.iterations)
    vectors = np.empty_like(outcome.vectors[:, : problem.count])
    vectors[order] = outcome.vectors[:, : problem.count]
    return Solution(
        values=outcome.values[: problem.count],
        vectors=vectors,
        matvecs=matvecs + outcome.matvecs,
        iterations=iterations + outcome.iterations,
    )
