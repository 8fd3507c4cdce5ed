"""Thick-restart Lanczos for the smallest nontrivial eigenpairs of a Laplacian.

The solver works on a spectral transformation ``op`` of the component's matrix
:math:`M` that turns the wanted (smallest) end of the spectrum into the largest
end, where Lanczos converges first:

* ``'shift_invert'``: :math:`op = (M + sI)^{-1}` with a tiny shift
  :math:`s > 0`, applied through one sparse LU factorization; the eigenvalue
  :math:`\\lambda` of :math:`M` becomes :math:`\\theta = 1/(\\lambda + s)` and
  the smallest :math:`\\lambda` are separated by large gaps in :math:`\\theta`
  (Ericsson and Ruhe [2]_).
* ``'flip'``: :math:`op = bI - M` with :math:`b` the norm bound, so
  :math:`\\theta = b - \\lambda`. It needs products with :math:`M` only (no
  factorization, so it fits wherever the matrix does) but converges slowly
  when the low spectrum is crowded, as on near-planar networks.

Steps of one Lanczos *run* (Wu and Simon [1]_):

1. Start from a random unit vector orthogonal to the *locked* block (the
   known null vector and any pairs already found).
2. Extend the basis by Lanczos steps up to ``ncv`` vectors. Every new vector is
   reorthogonalized against the locked block and the whole basis by classical
   Gram-Schmidt, with a second pass whenever the first kept less than
   :data:`REORTH_KEEP` of its norm ("twice is enough" [3]_; the criterion of
   Daniel et al. [4]_, as in ARPACK), so Ritz vectors never drift into the
   null space or into locked directions. When the second pass also keeps
   less than that share, the vector lay numerically in the span: the Krylov space is
   invariant and the step continues from a fresh random vector with a zero
   coupling.
3. After each step (once the basis can hold the wanted and guard pairs)
   diagonalize the small projected matrix (an arrowhead after a restart,
   tridiagonal below it), estimate each residual by
   :math:`|\\beta_j s_{j,i}|` mapped to the original problem, and stop when
   the wanted pairs pass.
4. With a full basis, keep the Ritz vectors of the ``count + GUARD_PAIRS``
   largest :math:`\\theta` and the residual direction (the thick restart) and
   go to 2.

Single-vector Lanczos sees one direction of each eigenspace in exact
arithmetic, so copies of a repeated eigenvalue can be missed. After the first
run the pairs are locked and a run deflated against them looks for anything
below the current edge (the largest value found); pairs found there are merged
by Rayleigh-Ritz and the check repeats until a run lowers no value. By Cauchy
interlacing a Ritz value of a deflated run is an upper bound on the smallest
eigenvalue left outside the locked block, so a value below the edge proves
that a pair was missed.

References
----------
.. [1] K. Wu and H. Simon, "Thick-restart Lanczos method for large symmetric
   eigenvalue problems", SIAM J. Matrix Anal. Appl. 22(2):602-616, 2000.
   :doi:`10.1137/S0895479898334605`
.. [2] T. Ericsson and A. Ruhe, "The spectral transformation Lanczos method
   for the numerical solution of large sparse generalized symmetric eigenvalue
   problems", Math. Comp. 35(152):1251-1268, 1980.
   :doi:`10.1090/S0025-5718-1980-0583502-2`
.. [3] L. Giraud, J. Langou and M. Rozloznik, "The loss of orthogonality in
   the Gram-Schmidt orthogonalization process", Comput. Math. Appl.
   50(7):1069-1075, 2005. :doi:`10.1016/j.camwa.2005.08.009`
.. [4] J. W. Daniel, W. B. Gragg, L. Kaufman and G. W. Stewart,
   "Reorthogonalization and stable algorithms for updating the Gram-Schmidt QR
   factorization", Math. Comp. 30(136):772-795, 1976.
   :doi:`10.1090/S0025-5718-1976-0431641-8`
.. [5] B. N. Parlett, *The Symmetric Eigenvalue Problem*, SIAM, 1998.
   :doi:`10.1137/1.9781611971163`
"""

from __future__ import annotations

import logging
import math
from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
import scipy.linalg as la
import scipy.sparse as sp
from scipy.sparse.linalg import splu

from .._progress import report_activity
from .._validation import check_choice
from ._problem import Problem, Solution
from ._subspace import deflate, rayleigh_ritz

#: A fresh start vector that loses all but this fraction of its norm to the
#: basis means the basis spans the whole space (Krylov space exhausted).
EXHAUSTED = 1e-8

__all__ = [
    "DENSE_ROW_FACTOR",
    "DENSE_ROW_MIN",
    "TRANSFORMS",
    "factorize",
    "ordering_for",
    "shift_of",
    "solve_lanczos",
    "solve_lanczos_flip",
]

logger = logging.getLogger(__name__)

#: The shift as a fraction of the norm bound (same reasoning as
#: :mod:`._shift_invert`): below the smallest nontrivial eigenvalue of graphs
#: of millions of nodes (about 1e-6 of the bound for road-like networks), yet
#: large enough for ``M + sI`` to factorize stably (condition number about
#: 1/SHIFT_FRACTION).
SHIFT_FRACTION = 1e-7

#: Ritz pairs kept at a restart beyond the wanted ones, and the headroom in the
#: basis size ``2 count + GUARD_PAIRS``. The edge of the wanted set converges
#: at a rate set by its gap to the first unwanted value; keeping the next few
#: Ritz vectors through the restart keeps that gap from being lost (Wu and
#: Simon [1]_).
GUARD_PAIRS = 2

#: Pairs asked of each verification run. Whether a pair was missed depends only
#: on the smallest eigenvalue left outside the locked block, and by interlacing
#: the top Ritz value of the deflated run bounds it, so one converged pair
#: decides; several missed copies are found by the next runs (or at once when a
#: breakdown brings in fresh directions).
VERIFY_PAIRS = 1

#: The wanted eigenvalues count as crowded below the shift when the first
#: cycle's largest wanted value (an upper bound, by interlacing) is under
#: ``shift / SHIFT_CROWDING`` (a factor of 2 at least keeps a rescale from
#: being undone by the next estimate): then ``(M + sI)^{-1}`` maps them all to about
#: ``1 / s``, their relative gaps shrink to ``gap / s`` and the cycles stall. A
#: long tree does this: the normalized Laplacian of a path on ``n`` nodes has
#: ``lambda_k`` about ``pi^2 k^2 / (2 n^2)``, 1.6e-12 at a million nodes for
#: ``k = 9``, far below the shift of 2e-7. Measured on a caterpillar of
#: 1,000,000 nodes (a spine of 200,000 with 4 leaves each): with the fixed
#: shift, ten cycles of 28 steps left residual estimates between 0.01 and 0.05
#: of the bound (issue "hostile shapes"). Road-like networks of a million
#: nodes keep their wanted values above the shift and never reach this rule.
SHIFT_CROWDING = 2.0

#: Most times the shift is brought down in one solve. After one cycle the
#: wanted values are known only from above (the first estimate on a
#: 300,000-node path was 4e-8 for a true 3.5e-9), so each rescale moves the
#: shift a factor of about 5 to 10 towards them; each costs a factorization of
#: the same pattern and one cycle.
SHIFT_RESCALES = 4

#: The smallest shift, as a fraction of the norm bound: the rescaled shift is
#: never below it, so ``M + sI`` keeps a condition number under about
#: ``1 / SHIFT_FLOOR`` (a path of 5,000,000 nodes has ``lambda_9`` about
#: 1.6e-11 of its bound of 2, above this floor).
SHIFT_FLOOR = 1e-14

#: Lowest number of basis vectors beyond the wanted ones (ARPACK's ``eigsh``
#: never uses fewer than 20 for the same reason): each cycle must add enough new
#: directions to resolve the crowded low spectrum of large meshes, and extra
#: vectors cost only reorthogonalization, cheap next to a product with ``op``.
MIN_EXTRA = 20

#: Restart cycles per run when ``problem.maxiter`` is None. Shift-invert needs
#: a handful; ``flip`` on a mesh of ``n`` nodes needs of the order of
#: ``sqrt(n) log(1/tol)`` Lanczos steps (the Kaniel-Paige-Saad bounds, Parlett
#: [5]_, with a gap ratio of order 1/n), a few hundred cycles at a million
#: nodes. Beyond that the run is stuck.
DEFAULT_MAX_CYCLES = 1000

#: Cost of one convergence test (the projected eigenproblem of order ``j``,
#: about ``j^3`` flops) in Lanczos steps (about ``n j`` flops of
#: reorthogonalization each, plus the solve), per ``j^2 / n``. Measured on
#: the 2,848-node grid case with 51 pairs: a test 1.2 ms, a step 0.35 ms at
#: ``j`` about 80, so 3.4 steps, 1.5 times ``j^2 / n``.
CHECK_COST_RATIO = 1.5

#: The solver stops when the residual *estimates* fall below this fraction of
#: ``tol``: the final Rayleigh-Ritz with ``M``, rounding in the LU solves and
#: deflation against approximate locked vectors move the true residuals a
#: little, and the dispatcher judges them against ``tol`` itself.
RESIDUAL_MARGIN = 0.5

#: A Gram-Schmidt pass that keeps more than this fraction of the vector's norm
#: leaves it orthogonal to working precision, and no second pass is run; a
#: second pass keeping less means the vector lay numerically in the basis span
#: (Daniel et al. [4]_; ARPACK uses the same 1/sqrt(2)): the Krylov space is
#: invariant.
REORTH_KEEP = 1.0 / np.sqrt(2.0)


# ------------------------------------------------------------ transformations
@dataclass(eq=False)
class _Transform:
    """A spectral transformation of ``M`` that counts its applications.

    ``to_values`` maps Ritz values of ``op`` to eigenvalues of ``M``;
    ``residual_scale`` maps the residual norm of a unit Ritz pair of ``op`` to
    a bound on the scaled residual ``||M v - lambda v|| / norm_bound``.
    """

    product: Callable[[np.ndarray], np.ndarray]
    to_values: Callable[[np.ndarray], np.ndarray]
    residual_scale: Callable[[np.ndarray], np.ndarray]
    applications: int = 0
    shift: float | None = None

    def __call__(self, vector: np.ndarray) -> np.ndarray:
        self.applications += 1
        return self.product(vector)


#: A row with more than ``DENSE_ROW_FACTOR * sqrt(n)`` entries (and more than
#: :data:`DENSE_ROW_MIN`) counts as dense: the threshold by which approximate
#: minimum degree sets dense rows aside (Amestoy, Davis and Duff, "Algorithm
#: 837: AMD", ACM Trans. Math. Softw. 30(3), 2004, doi:10.1145/1024074.1024081,
#: whose default is 10). SuperLU's multiple minimum degree has no such rule and
#: grows with the square of a hub's degree: on a star, 0.19 s at 20,000 leaves
#: and 7.2 s at 100,000, where COLAMD took 0.01 and 0.05 s (0.41 s at
#: 1,000,000), with the same fill (issue "hostile shapes").
DENSE_ROW_FACTOR = 10.0

#: Fewest entries of a row counted as dense, whatever ``n`` (AMD's floor, as above).
DENSE_ROW_MIN = 16


def ordering_for(matrix: sp.csr_array) -> str:
    """SuperLU's column ordering: ``MMD_AT_PLUS_A``, or ``COLAMD`` when a row is dense.

    Examples
    --------
    >>> from specgraph import gallery, laplacian
    >>> ordering_for(laplacian(gallery.grid(20, 20)).matrix)
    'MMD_AT_PLUS_A'
    >>> ordering_for(laplacian(gallery.star(2_000)).matrix)
    'COLAMD'
    """
    n = matrix.shape[0]
    widest = int(np.diff(sp.csr_array(matrix).indptr).max()) if n else 0
    dense = widest > max(DENSE_ROW_MIN, DENSE_ROW_FACTOR * np.sqrt(n))
    return "COLAMD" if dense else "MMD_AT_PLUS_A"


def factorize(matrix: sp.csr_array, shift: float) -> Any:
    """Sparse LU of ``M + shift I`` (SuperLU), for a symmetric ``M`` with ``M + shift I`` definite.

    SuperLU orders the columns by minimum degree on the symmetric structure
    (``MMD_AT_PLUS_A``) and, with ``SymmetricMode`` and no partial pivoting
    (``diag_pivot_thresh=0``), eliminates the diagonal in that order: an
    :math:`LDL^T`-like factorization, stable for a definite matrix and with
    the fill of the symmetric ordering. Measured against SuperLU's default
    (column ordering by COLAMD with partial pivoting) on a water network, a
    transmission grid, a road-like network and a block model of 2,000 to
    10,000 nodes: 1.1 to 2.5 times less fill, solves 1.3 to 2.4 times faster,
    factorization times within 1.6 times either way (twice as fast on the
    block model), residuals alike (docs/methods.md, "Solver cost"). A
    network with a hub (a row denser than :data:`DENSE_ROW_FACTOR` times
    ``sqrt(n)``) is ordered by COLAMD instead (:func:`ordering_for`).
    """
    n = matrix.shape[0]
    shifted = sp.csc_array(matrix + shift * sp.eye_array(n, format="csr"))
    return splu(
        shifted,
        permc_spec=ordering_for(matrix),
        diag_pivot_thresh=0.0,
        options={"SymmetricMode": True},
    )


def shift_of(norm_bound: float) -> float:
    """The shift ``s`` of ``(M + sI)^{-1}``: :data:`SHIFT_FRACTION` of the norm bound."""
    return SHIFT_FRACTION * norm_bound


def _shift_invert(problem: Problem) -> _Transform:
    """``op = (M + sI)^{-1}`` through one sparse factorization (:func:`factorize`).

    From :math:`op\\,v = \\theta v + r` follows
    :math:`M v - (1/\\theta - s) v = -(M + sI) r / \\theta`, hence
    :math:`\\|M v - \\lambda v\\| \\le (b + s) \\|r\\| / \\theta`.
    """
    shift = shift_of(problem.norm_bound)
    factor = problem.factor if problem.factor is not None else factorize(problem.matrix, shift)
    return _shift_invert_at(problem, shift, factor)


def _shift_invert_at(problem: Problem, shift: float, factor: Any) -> _Transform:
    """``op = (M + sI)^{-1}`` for a given shift and its factor."""
    bound = problem.norm_bound
    logger.debug(
        "shift-invert: %d rows, shift %.3g, factor fill %d",
        problem.matrix.shape[0],
        shift,
        factor.L.nnz + factor.U.nnz,
    )
    return _Transform(
        product=factor.solve,
        to_values=lambda theta: 1.0 / theta - shift,
        residual_scale=lambda theta: (bound + shift) / (np.abs(theta) * bound),
        shift=shift,
    )


def _flip(problem: Problem) -> _Transform:
    """``op = bI - M``: the residual of ``op`` is minus that of ``M``."""
    bound = problem.norm_bound
    matrix = problem.matrix
    return _Transform(
        product=lambda vector: bound * vector - matrix @ vector,
        to_values=lambda theta: bound - theta,
        residual_scale=lambda theta: np.full(theta.shape, 1.0 / bound),
    )


_TRANSFORMS: dict[str, Callable[[Problem], _Transform]] = {
    "shift_invert": _shift_invert,
    "flip": _flip,
}

#: Names accepted by the ``transform`` keyword of :func:`solve_lanczos`.
TRANSFORMS = tuple(_TRANSFORMS)


@dataclass(eq=False)
class _MatrixProducts:
    """``M X``, counting one product per column (the Rayleigh-Ritz steps)."""

    matrix: sp.csr_array
    count: int = 0

    def __call__(self, block: np.ndarray) -> np.ndarray:
        self.count += block.shape[1]
        return np.asarray(self.matrix @ block)


# ------------------------------------------------------------ one Lanczos run
def _norm(vector: np.ndarray) -> float:
    """Euclidean norm by one dot product.

    Faster than ``numpy.linalg.norm`` on one vector; the entries here are far
    from overflow.
    """
    return float(np.sqrt(vector @ vector))


@dataclass(eq=False)
class _Lanczos:
    """Working state of one run.

    ``space`` holds the ``p`` locked columns followed by ``m + 1`` basis
    columns (one array, so each Gram-Schmidt pass is two matrix-vector
    products): the Lanczos vectors and the next direction. ``projected`` is
    the ``m x m`` matrix ``Q^T op Q`` (arrowhead plus tridiagonal) and
    ``couplings[j]`` the norm of the residual after step ``j``, so that
    ``op Q_j = Q_j projected_j + couplings[j - 1] q_{j+1} e_j^T``.
    """

    op: _Transform
    space: np.ndarray
    locked: int
    projected: np.ndarray
    couplings: np.ndarray
    rng: np.random.Generator

    @property
    def basis(self) -> np.ndarray:
        return self.space[:, self.locked :]

    def project_out(self, vector: np.ndarray, size: int) -> tuple[np.ndarray, float, bool]:
        """Classical Gram-Schmidt against the locked and ``size`` basis columns, once or twice.

        The criterion of Daniel et al. [4]_ (as in ARPACK): a pass that keeps
        more than :data:`REORTH_KEEP` of the vector's norm leaves it orthogonal
        to working precision, so the second pass runs only when the first
        kept less. Returns the vector, its norm, and whether the second pass
        also kept less than that share (the vector lay numerically in the
        span: the Krylov space is invariant).
        """
        columns = self.space[:, : self.locked + size]
        before = _norm(vector)
        vector = vector - columns @ (columns.T @ vector)
        after = _norm(vector)
        if after > REORTH_KEEP * before:
            return vector, after, False
        vector = vector - columns @ (columns.T @ vector)
        again = _norm(vector)
        return vector, again, again <= REORTH_KEEP * after

    def fresh(self, size: int) -> np.ndarray:
        """A random unit vector orthogonal to the locked and ``size`` basis columns.

        When those columns already span the whole space (tiny problems), no
        such vector exists: the zero vector is returned, with coupling 0, and
        the Ritz pairs are exact.
        """
        start = self.rng.standard_normal((self.basis.shape[0],))
        columns = self.space[:, : self.locked + size]
        vector = start
        for _ in range(2):  # "twice is enough" [3]_, whatever the first pass kept
            vector = vector - columns @ (columns.T @ vector)
        norm = _norm(vector)
        if norm <= EXHAUSTED * _norm(start):
            return np.zeros_like(vector)
        return vector / norm

    def step(self, j: int) -> bool:
        """Lanczos step ``j``: diagonal entry ``j``, basis column ``j + 1``; True on breakdown."""
        q = self.basis[:, j]
        w = self.op(q)
        self.projected[j, j] = q @ w
        w, beta, broke = self.project_out(w, j + 1)
        broke = broke or beta == 0.0
        if broke:
            # Invariant subspace: continue from a fresh direction, coupling 0.
            beta, w = 0.0, self.fresh(j + 1)
        self.basis[:, j + 1] = w if broke else w / beta
        self.couplings[j] = beta
        if j + 1 < self.projected.shape[0]:
            self.projected[j, j + 1] = self.projected[j + 1, j] = beta
        return broke

    def ritz(self, size: int, top: int) -> tuple[np.ndarray, np.ndarray]:
        """The ``top`` largest Ritz values of ``op`` on the first ``size`` columns, descending.

        Only those pairs are computed (LAPACK's ``dsyevr`` on an index range):
        the restart keeps no more, and the convergence test reads no more.
        """
        top = min(top, size)
        theta, small = la.eigh(
            self.projected[:size, :size],
            subset_by_index=[size - top, size - 1],
            check_finite=False,
        )
        return theta[::-1], small[:, ::-1]

    def restart(self, theta: np.ndarray, small: np.ndarray, keep: int) -> None:
        """Thick restart: keep ``keep`` Ritz vectors and the residual direction."""
        m = self.projected.shape[0]
        self.basis[:, :keep] = self.basis[:, :m] @ small[:, :keep]
        self.basis[:, keep] = self.basis[:, m]
        couplings = self.couplings[m - 1] * small[m - 1, :keep]
        self.projected[:] = 0.0
        self.projected[np.arange(keep), np.arange(keep)] = theta[:keep]
        self.projected[keep, :keep] = couplings
        self.projected[:keep, keep] = couplings


@dataclass(frozen=True, eq=False)
class _Run:
    """Outcome of one run: ``values`` are eigenvalues of ``M`` mapped from ``op``."""

    values: np.ndarray
    vectors: np.ndarray
    converged: bool
    cycles: int
    crowded: bool = False


def _basis_size(wanted: int, n: int) -> int:
    """``ncv = min(n - 1, max(2 wanted + GUARD_PAIRS, wanted + MIN_EXTRA))``.

    Examples
    --------
    >>> _basis_size(7, 100_000), _basis_size(30, 100_000), _basis_size(3, 10)
    (27, 62, 9)
    """
    return min(n - 1, max(2 * wanted + GUARD_PAIRS, wanted + MIN_EXTRA))


def _check_stride(steps: int, rows: int, left: int) -> int:
    """Lanczos steps until the next convergence test, at ``steps`` columns with ``left`` to go.

    A test costs about ``r = CHECK_COST_RATIO * steps^2 / rows`` steps. Testing
    every ``s`` steps spends ``r left / s`` on tests and overshoots the step
    where the pairs pass by ``s / 2`` on average; ``s = sqrt(2 r left)``
    minimizes the sum (at least 1).

    Examples
    --------
    >>> _check_stride(11, 100_000, 18), _check_stride(53, 9_241, 51), _check_stride(80, 2_848, 24)
    (1, 7, 13)
    """
    ratio = CHECK_COST_RATIO * steps * steps / rows
    return max(1, math.ceil(math.sqrt(2.0 * ratio * left)))


def _cycle(
    state: _Lanczos, start: int, wanted: int, tol: float
) -> tuple[bool, np.ndarray, np.ndarray]:
    """Lanczos steps from ``start`` until the wanted pairs pass or the basis is full.

    Convergence is tested once the basis holds the wanted and guard pairs,
    then after the steps of :func:`_check_stride`, so a run stops soon after it can;
    after a breakdown the cycle runs to the end, since the fresh directions
    may reveal further copies of a repeated eigenvalue.
    """
    size = state.projected.shape[0]
    rows = state.space.shape[0]
    broke, j = False, start
    test_at = wanted + GUARD_PAIRS
    while True:
        broke = state.step(j) or broke
        j += 1
        if j < size and (broke or j < test_at):
            continue
        theta, small = state.ritz(j, wanted + GUARD_PAIRS)
        last = np.abs(state.couplings[j - 1] * small[j - 1, :wanted])
        estimates = state.op.residual_scale(theta[:wanted]) * last
        converged = bool(np.all(estimates <= RESIDUAL_MARGIN * tol))
        if converged or j == size:
            logger.debug("%d steps: largest residual estimate %.3g", j, estimates.max())
            return converged, theta, small
        test_at = j + _check_stride(j, rows, size - j)


def _run(
    op: _Transform, problem: Problem, locked: np.ndarray, wanted: int, *, probe: bool = False
) -> _Run:
    """Thick-restart Lanczos for the ``wanted`` largest pairs of ``op`` off ``locked``.

    With ``probe``, a first cycle that has not converged and finds the wanted
    values crowded below the shift (:data:`SHIFT_CROWDING`) ends the run
    there, marked ``crowded``.
    """
    n, p = locked.shape
    size = min(_basis_size(wanted, n), n - p)
    keep = min(wanted + GUARD_PAIRS, size - 1)
    space = np.zeros((n, p + size + 1), order="F")
    space[:, :p] = locked
    state = _Lanczos(op, space, p, np.zeros((size, size)), np.zeros(size), problem.rng)
    state.basis[:, 0] = state.fresh(0)
    limit = problem.maxiter if problem.maxiter is not None else DEFAULT_MAX_CYCLES
    start, cycle = 0, 0
    while True:
        converged, theta, small = _cycle(state, start, wanted, problem.tol)
        cycle += 1
        report_activity("Lanczos cycle", cycle)
        # A basis spanning the whole deflated space gives exact pairs already.
        if converged or cycle >= limit or keep < 1 or size == n - p:
            break
        if probe and cycle == 1 and _crowded(op, theta[:wanted]):
            vectors = state.basis[:, : small.shape[0]] @ small[:, :wanted]
            return _Run(op.to_values(theta[:wanted]), vectors, False, cycle, crowded=True)
        state.restart(theta, small, keep)
        start = keep
    vectors = state.basis[:, : small.shape[0]] @ small[:, :wanted]
    return _Run(op.to_values(theta[:wanted]), vectors, converged, cycle)


def _crowded(op: _Transform, theta: np.ndarray) -> bool:
    """Whether the wanted values lie far below a shift-invert shift (:data:`SHIFT_CROWDING`)."""
    if op.shift is None or theta.size == 0 or not np.all(theta > 0):
        return False
    return float(op.to_values(theta).max()) < op.shift / SHIFT_CROWDING


def _first_run(op: _Transform, problem: Problem) -> tuple[_Transform, _Run]:
    """The first run, with the shift brought down to the wanted values when they crowd below it.

    The largest wanted Ritz value after one cycle bounds ``lambda_count`` from
    above (Cauchy interlacing: Ritz values of ``op`` are below its eigenvalues),
    so the new shift ``s'`` is at least the largest wanted eigenvalue: the
    wanted values map to ``[1 / (2 s'), 1 / s']`` and separate from the rest.
    One more factorization, of the same pattern (a tree's costs its size).
    """
    null = problem.null_vector.reshape(-1, 1)
    cycles = 0
    for rescales in range(SHIFT_RESCALES + 1):
        probe = op.shift is not None and rescales < SHIFT_RESCALES
        first = _run(op, problem, null, problem.count, probe=probe)
        cycles += first.cycles
        floor = SHIFT_FLOOR * problem.norm_bound
        if not first.crowded or op.shift is None or op.shift <= floor:
            break
        edge = float(first.values.max())
        shift = max(edge, floor)
        logger.info("wanted eigenvalues up to %.3g crowd below the shift %.3g", edge, op.shift)
        rescaled = _shift_invert_at(problem, shift, factorize(problem.matrix, shift))
        rescaled.applications = op.applications
        op = rescaled
    return op, replace(first, cycles=cycles)


# ------------------------------------------------------------ the solver
def _lock_and_verify(
    op: _Transform, problem: Problem, products: _MatrixProducts, first: _Run
) -> tuple[np.ndarray, np.ndarray, int]:
    """Rayleigh-Ritz on the first run, then deflated runs until none lowers a value."""
    null = problem.null_vector.reshape(-1, 1)
    n, count = null.shape[0], problem.count
    slack = problem.tol * problem.norm_bound
    values, found = rayleigh_ritz(products, deflate(first.vectors, null))
    cycles, converged = first.cycles, first.converged
    # Each run that lowers a value adds a direction the locked block lacked, so
    # count + 1 runs in all (this loop's count plus the first) always suffice.
    for _ in range(count):
        locked = np.hstack([null, found])
        wanted = min(VERIFY_PAIRS, n - locked.shape[1])
        if not converged or wanted < 1:
            break
        extra = _run(op, problem, locked, wanted)
        cycles, converged = cycles + extra.cycles, extra.converged
        missed = int(np.sum(extra.values < values[-1] - slack))
        if missed == 0:
            break
        logger.info("deflated run found %d value(s) below the edge %.6g", missed, values[-1])
        values, found = rayleigh_ritz(products, deflate(np.hstack([found, extra.vectors]), null))
        values, found = values[:count], found[:, :count]
    if not converged:
        logger.info("Lanczos stopped at the cycle cap; the dispatcher judges the residuals")
    return values, found, cycles


def solve_lanczos(problem: Problem, *, transform: str = "shift_invert") -> Solution:
    """Smallest nontrivial eigenpairs by thick-restart Lanczos with locking.

    Parameters
    ----------
    problem : Problem
        One connected component's matrix, null vector, norm bound, number of
        pairs wanted, tolerance, cycle cap and random generator.

    Returns
    -------
    Solution
        ``count`` Rayleigh-Ritz pairs of the matrix, ascending, with orthonormal
        vectors orthogonal to the null vector; possibly inaccurate when the
        cycle cap was reached (the dispatcher judges the residuals).
        ``matvecs`` counts applications of ``op`` to a vector (an LU solve
        counts one) plus products with the matrix in the Rayleigh-Ritz steps;
        ``iterations`` counts restart cycles over all runs.

    Other Parameters
    ----------------
    transform : {'shift_invert', 'flip'}, default='shift_invert'
        Spectral transformation: ``(M + sI)^{-1}`` through one sparse LU
        factorization (fast; needs memory for the factors), or ``bI - M``
        (products only; slow when the low spectrum is crowded).

    Notes
    -----
    ``problem.maxiter`` caps the restart cycles of each run
    (:data:`DEFAULT_MAX_CYCLES` when None). A run converges when, for each
    wanted Ritz pair :math:`(\\theta_i, Q s_i)` of ``op``, the residual estimate
    :math:`|\\beta_m s_{m,i}|`, mapped to :math:`M` and scaled by the norm
    bound, is at most ``RESIDUAL_MARGIN * tol``. The same seed gives bitwise
    identical output. See the module docstring for the method and references.

    Examples
    --------
    >>> import numpy as np
    >>> from specgraph import gallery, laplacian
    >>> from specgraph.eigen._problem import Problem
    >>> op = laplacian(gallery.path(10), kind="combinatorial")
    >>> problem = Problem(op.matrix, op.null_basis[:, 0], op.norm_bound, count=2,
    ...                   tol=1e-8, maxiter=None, rng=np.random.default_rng(0))
    >>> solve_lanczos(problem).values.round(6).tolist()
    [0.097887, 0.381966]
    """
    check_choice(transform, "transform", TRANSFORMS)
    op = _TRANSFORMS[transform](problem)
    products = _MatrixProducts(problem.matrix)
    op, first = _first_run(op, problem)
    values, vectors, cycles = _lock_and_verify(op, problem, products, first)
    return Solution(values, vectors, op.applications + products.count, cycles)


def solve_lanczos_flip(problem: Problem) -> Solution:
    """:func:`solve_lanczos` with ``transform='flip'`` (no factorization).

    Examples
    --------
    >>> import numpy as np
    >>> from specgraph import gallery, laplacian
    >>> from specgraph.eigen._problem import Problem
    >>> op = laplacian(gallery.ring(12), kind="combinatorial")
    >>> problem = Problem(op.matrix, op.null_basis[:, 0], op.norm_bound, count=3,
    ...                   tol=1e-8, maxiter=None, rng=np.random.default_rng(0))
    >>> solve_lanczos_flip(problem).values.round(6).tolist()
    [0.267949, 0.267949, 1.0]
    """
    return solve_lanczos(problem, transform="flip")
