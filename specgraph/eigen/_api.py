"""``smallest_eigenpairs``: the one entry point to every eigen-solver.

Steps:

1. Validate ``k`` and the options.
2. Split the operator into connected components (it is block diagonal in
   them), since each component's null vector is known exactly: zero pairs come
   from :attr:`GraphOperator.null_basis`, never from a solver.
3. Ask a solver for each component's smallest nontrivial pairs (at most
   ``k - c`` per component, where ``c`` is the number of components): the
   named one, or for ``method='auto'`` the one of least predicted cost
   (:func:`choose_method`, :mod:`._cost`); the reason goes to the result.
   Two kinds of operator need a different problem (see :func:`_component_problem`):
   one with a rank-one term per component (``regularized``) is handed to the
   solvers as products only, and one with no known null space
   (``bethe_hessian``, possibly indefinite) is shifted by its Gershgorin lower
   bound and bordered by a zero row and column whose unit vector is the null
   vector the solvers deflate.
4. Merge, keep the ``k`` smallest, fix signs, compute every residual with the
   same rule, and raise :class:`ConvergenceError` (with the pairs found so far)
   when any residual misses ``tol``.
"""

from __future__ import annotations

import logging
from collections.abc import Callable
from dataclasses import replace
from typing import Any

import numpy as np
import scipy.sparse as sp

from .._threads import one_thread
from .._validation import (
    POSITIVE,
    Constraint,
    Interval,
    NoneOk,
    Options,
    RandomState,
    check_int,
    check_param,
    check_rng,
    validate_params,
)
from ..exceptions import ConvergenceError, ResourceError
from ..operators import GraphOperator
from ._cost import DENSE_LIMIT, Forecast, envelope, forecast, settle, worst_envelope
from ._dense import solve_dense
from ._hierarchy import CoarseningStalled
from ._lanczos import factorize, shift_of, solve_lanczos, solve_lanczos_flip
from ._multilevel import solve_multilevel
from ._problem import Problem, Solution
from ._result import EigenResult

__all__ = [
    "DEFAULT_TOL",
    "DENSE_LIMIT",
    "SIGN_TIE_ULPS",
    "choose_method",
    "smallest_eigenpairs",
]

logger = logging.getLogger(__name__)

#: Default bound on the scaled residual ``||M v - lambda v|| / ||M||``. By the
#: Davis-Kahan theorem an eigenvector's angle error is at most about the
#: residual over the eigengap, so 1e-6 keeps embedding errors below 1e-3
#: wherever the gap exceeds 1e-3 of the norm; smaller gaps are flagged by the
#: diagnostics rather than chased here.
DEFAULT_TOL = 1e-6

#: Entries of an eigenvector whose magnitudes differ from the largest by less
#: than this many units in the last place of the vector's norm (or by less than
#: its scaled residual, whichever is larger) count as tied when its sign is
#: fixed. Entries equal in exact arithmetic came out 3 ulps apart from LAPACK on
#: a barbell (0.44514123264148625 against 0.4451412326414861), and the order of
#: the two flipped between builds; 16 leaves room for longer sums.
SIGN_TIE_ULPS = 16

#: Components up to this size are solved densely without a forecast: LAPACK
#: takes about 2 ms there (:data:`~specgraph.eigen._cost.DENSE_SECONDS_PER_CUBE`),
#: less than ordering the matrix for the forecast and factoring it.
DENSE_SMALL = 200

_SOLVERS: dict[str, Callable[[Problem], Solution]] = {
    "dense": solve_dense,
    "lanczos": solve_lanczos,
    "lanczos_flip": solve_lanczos_flip,
    "multilevel": solve_multilevel,
}

METHODS = ("auto", *_SOLVERS)

#: Methods that are correct for an operator with a rank-one term per component
#: (``regularized``): those that need products only. Shift-invert would factor
#: the dense matrix and the multilevel hierarchy aggregates the sparse part.
LOW_RANK_METHODS = ("dense", "lanczos_flip")

#: Methods that are correct for an operator with no known null space
#: (``bethe_hessian``), solved shifted and bordered: the multilevel hierarchy
#: is built from a null vector spread over the component, which the bordered
#: problem does not have.
NO_NULL_METHODS = ("dense", "lanczos", "lanczos_flip")


def choose_method(n: int, k: int = 1, *, matrix: Any = None) -> str:
    """The ``auto`` rule for ``k`` pairs of a connected component of ``n`` nodes.

    The method of least predicted time (:mod:`specgraph.eigen._cost`), among
    ``'dense'`` (LAPACK, at most :data:`DENSE_LIMIT` nodes), ``'lanczos'``
    (shift-invert; never when the envelope bound on its factors exceeds
    :data:`~specgraph.eigen._cost.FACTOR_MEMORY_BUDGET`) and ``'multilevel'``;
    components of at most :data:`DENSE_SMALL` nodes are solved densely. The
    forecast of a factorization's fill and work is the envelope of ``matrix``
    (the component's sparse matrix) in reverse Cuthill-McKee order; without
    it, the envelope of a full matrix of order ``n``, the bound when nothing
    is known of the structure.

    Measured against this machine's times (docs/methods.md, "Solver cost"):
    shift-invert wins on the near-planar and tree-like networks of
    infrastructure up to about 100,000 nodes (on the real networks of the
    benchmark it ran in 0.01 to 0.5 s where the multilevel method took 0.4 to
    18 s at 51 pairs); its factorization fills in almost completely on
    networks with community structure (measured: 450 s and 1.5 GiB at 16,000
    nodes of a block model), where the forecast sends the component to the
    multilevel method. Within it, structure decides once more: when the
    multilevel start block shows the wanted eigenvalues far below the rest
    (gap ratio at least :data:`~specgraph.eigen._multilevel.FLIP_GAP_RATIO`),
    the component is handed to ``'lanczos_flip'`` for a capped trial, kept if
    it meets the tolerance (the result's ``method`` then says
    ``lanczos_flip``).

    Name a method to choose otherwise.

    Examples
    --------
    Without the matrix, the worst case (a full matrix) decides:

    >>> choose_method(150), choose_method(1500, 4), choose_method(2_000_000, 8)
    ('dense', 'dense', 'multilevel')

    A grid fills little:

    >>> from specgraph import gallery, laplacian
    >>> grid = laplacian(gallery.grid(30, 50)).matrix
    >>> choose_method(1500, 4, matrix=grid), choose_method(1500, 1400, matrix=grid)
    ('lanczos', 'dense')
    """
    if matrix is None:
        return _forecast(n, k, None, tuple(_SOLVERS)).method
    sparse = sp.csr_array(matrix)
    gershgorin = float(abs(sparse).sum(axis=1).max()) if sparse.nnz else 1.0  # the shift's scale
    return _decide(sparse, k, gershgorin, tuple(_SOLVERS))[0].method


def _forecast(n: int, k: int, matrix: Any, allowed: tuple[str, ...]) -> Forecast:
    """Stage 1 of the forecast for one component (dense up to :data:`DENSE_SMALL` nodes)."""
    if n <= DENSE_SMALL:
        return Forecast("dense", {}, {}, note=f"dense at most {DENSE_SMALL} nodes")
    env = worst_envelope(n) if matrix is None else envelope(matrix)
    chosen = forecast(env, k, allowed)
    # Without the matrix there is nothing to try: the bound decides.
    return chosen if matrix is not None or not chosen.trial else replace(chosen, trial=False)


def _decide(
    matrix: Any, k: int, norm_bound: float, allowed: tuple[str, ...]
) -> tuple[Forecast, Any]:
    """The method for one component, and the factor of a won shift-invert trial (or None).

    The trial factor is that of the shift-invert solver (same matrix, shift
    and ordering), so a solve that goes on with it repeats nothing.
    """
    chosen = _forecast(matrix.shape[0], k, matrix, allowed)
    if not chosen.trial:
        return chosen, None
    factor = factorize(matrix, shift_of(norm_bound))
    chosen = settle(chosen, matrix.shape[0], k, int(factor.L.nnz + factor.U.nnz))
    return chosen, (factor if chosen.method == "lanczos" else None)


def _allowed_methods(operator: GraphOperator) -> tuple[str, ...]:
    if operator.low_rank is not None:
        return LOW_RANK_METHODS
    if operator.null_basis.shape[1] == 0:
        return NO_NULL_METHODS
    return tuple(_SOLVERS)


#: What the options of :func:`smallest_eigenpairs` accept (``k`` depends on the operator).
_SOLVE_OPTIONS: dict[str, list[Constraint]] = {
    "method": [Options(METHODS)],
    "tol": [POSITIVE],
    "maxiter": [Interval(int, 1, None), NoneOk()],
    "rng": [RandomState()],
}


@validate_params(_SOLVE_OPTIONS)
def smallest_eigenpairs(
    operator: GraphOperator,
    k: int,
    *,
    method: str = "auto",
    tol: float = DEFAULT_TOL,
    maxiter: int | None = None,
    rng: Any = None,
) -> EigenResult:
    """Compute the ``k`` smallest eigenpairs of a graph operator.

    Parameters
    ----------
    operator : GraphOperator
        From :func:`specgraph.laplacian`.
    k : int
        Number of pairs, ``1 <= k <= n``. The first ``c`` pairs of a network
        with ``c`` components are the exact trivial pairs (eigenvalue 0);
        for an operator with no known null space (``bethe_hessian``) the
        ``k`` algebraically smallest pairs, negative ones first.
    method : {'auto', 'dense', 'lanczos', 'lanczos_flip', 'multilevel'}, default='auto'
        Solver for each component; ``'auto'`` follows :func:`choose_method`
        per component. ``'lanczos'`` is thick-restart Lanczos on the
        shift-inverted operator, ``'lanczos_flip'`` on :math:`\\|M\\| I - M`
        (no factorization), ``'multilevel'`` the aggregation cascade. The
        ``regularized`` kind takes :data:`LOW_RANK_METHODS` and
        ``bethe_hessian`` :data:`NO_NULL_METHODS` (``'auto'`` gives
        ``'lanczos_flip'`` where the method it predicts cheapest is not
        among them); another method raises :class:`ParameterError`.

    Returns
    -------
    EigenResult
        For the ``random_walk`` kind the vectors are mapped to eigenvectors of
        :math:`I - D^{-1}A` (unit norm); residuals refer to the symmetric form.

    Raises
    ------
    ConvergenceError
        When a residual misses ``tol``; ``err.partial`` holds the pairs.
    ParameterError
        For an option outside its domain, or a method that is not correct for
        the operator.

    Other Parameters
    ----------------
    tol : float, default=DEFAULT_TOL
        Bound on every scaled residual (see :class:`EigenResult`).
    maxiter : int, optional
        Iteration cap passed to iterative solvers.
    rng : None, int or numpy.random.Generator
        Seeds start vectors.

    Examples
    --------
    >>> from specgraph import gallery, laplacian
    >>> res = smallest_eigenpairs(laplacian(gallery.path(4), kind="combinatorial"), 2)
    >>> res.values.round(6).tolist(), res.converged
    ([0.0, 0.585786], True)
    """
    n = operator.shape[0]
    k = check_int(k, "k", minimum=1, maximum=n)
    if method != "auto":
        allowed = Options(_allowed_methods(operator), f"a method for a {operator.kind!r} operator")
        check_param(method, "method", [allowed])
    tol = float(tol)
    maxiter = None if maxiter is None else int(maxiter)
    generator = check_rng(rng)
    values, vectors, used, matvecs, iterations, reason = _solve_components(
        operator, k, method, tol, maxiter, generator
    )
    residuals = _scaled_residuals(operator, values, vectors)
    result = EigenResult(
        values=values,
        vectors=_fix_signs(operator.to_user_vectors(vectors), residuals),
        residuals=residuals,
        tol=tol,
        method="+".join(sorted(used)) or "trivial",
        matvecs=matvecs,
        iterations=iterations,
        converged=bool(values.size == k and np.all(residuals <= tol)),
        reason=reason,
        norm_bound=operator.norm_bound if operator.norm_bound > 0 else 1.0,
    )
    if not result.converged:
        shortfall = f"found {values.size} of {k} pairs" if values.size < k else "found all pairs"
        raise ConvergenceError(
            f"the eigen-solve ({result.method}) {shortfall}, largest scaled residual "
            f"{result.max_residual:.3g} against tol={tol:.3g}; raise maxiter or loosen tol",
            partial=result,
        )
    return result


def _solve_components(
    operator: GraphOperator,
    k: int,
    method: str,
    tol: float,
    maxiter: int | None,
    rng: np.random.Generator,
) -> tuple[np.ndarray, np.ndarray, set[str], int, int, str]:
    """Trivial pairs from the null basis, nontrivial pairs from each component."""
    n = operator.shape[0]
    basis = operator.null_basis
    c = basis.shape[1]
    values = [np.zeros(c)]
    columns: list[tuple[np.ndarray, np.ndarray]] = []  # (rows, vectors)
    used: set[str] = set()
    reasons: list[tuple[int, str]] = []  # (component size, why its method)
    matvecs = iterations = 0
    extra = k - c
    if extra > 0:
        labels = operator.components
        # One thread-limit scope for all components (entering one costs a
        # fraction of a millisecond, more than a tiny component's solve).
        with one_thread(int(np.bincount(labels).max())):
            for comp in range(int(labels.max()) + 1 if n else 0):
                rows = np.flatnonzero(labels == comp)
                wanted = min(extra, rows.size - 1 if c else rows.size)
                if wanted < 1:
                    continue
                problem, shift = _component_problem(operator, rows, comp, wanted, tol, maxiter, rng)
                found, chosen, reason = _solve_component(operator, problem, method)
                used.add(found.method or chosen)
                logger.debug(
                    "component %d: %d nodes, %d pairs by %s (%s)",
                    comp,
                    rows.size,
                    wanted,
                    found.method or chosen,
                    reason,
                )
                reasons.append((rows.size, reason))
                matvecs += found.matvecs
                iterations += found.iterations
                values.append(found.values - shift)
                columns.append((rows, found.vectors[: rows.size]))
    all_values = np.concatenate(values)
    order = np.argsort(all_values, kind="stable")[:k]
    # Assembled straight into the output, in the final order: at a million nodes every
    # intermediate n-by-k copy would cost as much as the sparse matrix itself.
    position = np.full(all_values.size, -1, dtype=np.int64)
    position[order] = np.arange(order.size)
    out = np.zeros((n, order.size))
    taken = position[:c]
    out[:, taken[taken >= 0]] = basis[:, taken >= 0]
    start = c
    for rows, vecs in columns:
        width = vecs.shape[1]
        where = position[start : start + width]
        keep = where >= 0
        if rows.size == n:
            out[:, where[keep]] = vecs[:, keep]
        else:
            out[np.ix_(rows, where[keep])] = vecs[:, keep]
        start += width
    columns.clear()
    return all_values[order], out, used, matvecs, iterations, _summary(reasons)


def _solve_component(
    operator: GraphOperator, problem: Problem, method: str
) -> tuple[Solution, str, str]:
    """One component's pairs, the method chosen and why."""
    size = problem.matrix.shape[0]
    if problem.count + 1 >= size:
        # Iterative methods cannot return every pair of a component
        # (ARPACK needs k < n); the full spectrum is a dense job.
        return solve_dense(problem), "dense", "every pair wanted: dense"
    if method != "auto":
        try:
            return _SOLVERS[method](problem), method, f"{method} asked"
        except CoarseningStalled as exc:
            raise ResourceError(
                f"method='multilevel' cannot solve this network: {exc} (a hub with many "
                "leaves); use method='auto' or 'lanczos'"
            ) from None
    sparse = getattr(problem.matrix, "sparse", problem.matrix)  # the sparse part of S - u u^T
    chosen, factor = _decide(sparse, problem.count, problem.norm_bound, _allowed_methods(operator))
    if chosen.method == "multilevel":
        # The multilevel solver may hand the component over to lanczos_flip.
        try:
            found = solve_multilevel(replace(problem, ordering=chosen.order), switch=True)
        except CoarseningStalled as exc:
            # A hub the aggregation cannot group: shift-invert Lanczos, whose
            # ordering sets dense rows aside (factorize), instead of a dense core.
            logger.info("%s; lanczos takes over", exc)
            reason = f"{chosen.reason}; {exc}, so shift-invert Lanczos took over"
            return _SOLVERS["lanczos"](problem), "lanczos", reason
        if found.method is None and not _meets_tolerance(problem, found):
            # Products only, no factorization: the method that cannot run out of
            # memory, for what the multilevel iteration could not finish.
            logger.info("multilevel missed the tolerance; lanczos_flip takes over")
            retry = solve_lanczos_flip(problem)
            found = replace(
                retry,
                matvecs=found.matvecs + retry.matvecs,
                iterations=found.iterations + retry.iterations,
                method="lanczos_flip",
            )
            reason = f"{chosen.reason}; multilevel missed the tolerance, lanczos_flip took over"
            return found, "lanczos_flip", reason
        return found, "multilevel", chosen.reason
    if factor is not None:
        problem = replace(problem, factor=factor)
    return _SOLVERS[chosen.method](problem), chosen.method, chosen.reason


def _meets_tolerance(problem: Problem, found: Solution) -> bool:
    """Whether every pair's scaled residual ``||M v - lambda v|| / bound`` is at most ``tol``."""
    if found.values.size < problem.count:
        return False
    residual = problem.matrix @ found.vectors - found.vectors * found.values
    scaled = np.linalg.norm(residual, axis=0) / problem.norm_bound
    return bool(np.all(scaled <= problem.tol))


def _summary(reasons: list[tuple[int, str]]) -> str:
    """Why each component's method: the largest components first, repeats counted once.

    Examples
    --------
    >>> _summary([(5, "dense at most 200 nodes"), (900, "x"), (4, "dense at most 200 nodes")])
    'component of 900 nodes: x | 2 components of 4 to 5 nodes: dense at most 200 nodes'
    """
    groups: dict[str, list[int]] = {}
    for size, reason in sorted(reasons, key=lambda item: -item[0]):
        groups.setdefault(reason, []).append(size)
    parts = []
    for reason, sizes in groups.items():
        if len(sizes) == 1:
            parts.append(f"component of {sizes[0]:,} nodes: {reason}")
        else:
            parts.append(
                f"{len(sizes)} components of {min(sizes):,} to {max(sizes):,} nodes: {reason}"
            )
    return " | ".join(parts) or "trivial pairs only"


def _component_problem(
    operator: GraphOperator,
    rows: np.ndarray,
    comp: int,
    wanted: int,
    tol: float,
    maxiter: int | None,
    rng: np.random.Generator,
) -> tuple[Problem, float]:
    """The solver's problem for one component, and the shift to take off its values.

    * Known null vector, sparse operator: the component's block as it is.
    * Known null vector plus a rank-one term: the block as products
      (:class:`_SparsePlusRankOne`), for the products-only methods.
    * No known null space: :math:`\\begin{pmatrix} M + sI & 0 \\\\ 0 & 0
      \\end{pmatrix}` with :math:`s = \\max(0, -\\text{lower bound})`,
      positive semi-definite, whose last unit vector is an exact null vector;
      every pair orthogonal to it is :math:`(\\lambda + s, [v; 0])` for a pair
      :math:`(\\lambda, v)` of :math:`M`. Its norm bound grows by ``s``, so the
      solver's tolerance shrinks in proportion and its pairs meet ``tol``
      against the operator's own bound.
    """
    # A connected network is one component: its block is the matrix itself (no copy).
    whole = rows.size == operator.shape[0]
    block = operator.matrix if whole else operator.matrix[rows][:, rows]
    if operator.null_basis.shape[1] == 0:
        shift = max(0.0, -operator.lower_bound)
        bound = operator.norm_bound + shift
        size = rows.size
        bordered = sp.block_diag(
            [block + shift * sp.eye_array(size, format="csr"), sp.csr_array((1, 1))],
            format="csr",
        )
        null = np.zeros(size + 1)
        null[-1] = 1.0
        scaled_tol = tol * operator.norm_bound / bound if bound > 0 else tol
        return Problem(bordered, null, bound, wanted, scaled_tol, maxiter, rng), shift
    matrix: Any = block
    if operator.low_rank is not None:
        matrix = _SparsePlusRankOne(block, operator.low_rank[rows])
    null = operator.null_basis[rows, comp]
    return Problem(matrix, null, operator.norm_bound, wanted, tol, maxiter, rng), 0.0


class _SparsePlusRankOne:
    """``S - u u^T`` for one component, as products (``@``) and a dense copy (``toarray``)."""

    def __init__(self, sparse: sp.csr_array, u: np.ndarray) -> None:
        self.sparse = sparse
        self.u = u
        self.shape = sparse.shape

    def __matmul__(self, x: np.ndarray) -> np.ndarray:
        return np.asarray(self.sparse @ x) - np.multiply.outer(self.u, self.u @ x)

    def toarray(self) -> np.ndarray:
        return self.sparse.toarray() - np.outer(self.u, self.u)


def _fix_signs(vectors: np.ndarray, residuals: np.ndarray) -> np.ndarray:
    """Make each column's largest-magnitude entry positive, ties to the first node.

    Entries whose magnitude lies within ``max(SIGN_TIE_ULPS * eps, r_j) * ||v_j||``
    of the column's largest magnitude count as tied (``r_j`` is the column's
    scaled residual), and the first of them in node order decides the sign.
    The exact arg-max of ``|v|`` would let the last bits of rounding choose
    between entries that are equal in exact arithmetic (the two ends of a
    symmetric network), and so the sign and the zone numbers would change
    between builds of the same libraries. scikit-learn's
    ``_deterministic_vector_sign_flip`` uses the exact arg-max.
    """
    if vectors.size == 0:
        return vectors
    eps = np.finfo(vectors.dtype).eps
    for j in range(vectors.shape[1]):
        column = vectors[:, j]
        magnitude = np.abs(column)
        band = max(SIGN_TIE_ULPS * eps, float(residuals[j])) * float(np.linalg.norm(column))
        pivot = int(np.argmax(magnitude >= magnitude.max() - band))
        if column[pivot] < 0:
            column *= -1.0  # in place: the caller's array is a fresh one
    return vectors


def _scaled_residuals(
    operator: GraphOperator, values: np.ndarray, vectors: np.ndarray
) -> np.ndarray:
    if values.size == 0:
        return np.zeros(0)
    # One column at a time, so that only vectors of length n are made.
    raw = np.empty(values.size)
    for j, value in enumerate(values):
        column = vectors[:, j]
        residual = operator.apply(column)
        residual -= value * column
        raw[j] = np.linalg.norm(residual)
    scale = operator.norm_bound if operator.norm_bound > 0 else 1.0
    return raw / scale
