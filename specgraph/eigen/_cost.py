"""Predicted cost of each eigen-solver on one component, before it runs.

``method='auto'`` takes the method of least predicted time among those whose
memory fits. The predictions use what is cheap to know beforehand: the
component's size ``n``, its stored entries ``nnz``, the number of pairs ``k``,
and the *envelope* of its matrix in reverse Cuthill-McKee order, one pass over
the matrix after the ordering (milliseconds at 100,000 nodes).

The envelope (George and Liu [1]_, ch. 4) of a symmetric matrix in a given
order: row ``i`` has width ``w_i = i - min{j : a_ij != 0}`` (0 when the row's
first entry is on the diagonal), and the envelope is ``E = sum(w_i)``. A
Cholesky factorization, or an LU factorization without pivoting, in that order
fills only inside the envelope: at most ``E + n`` entries in each triangular
factor, and about ``sum(w_i^2) / 2`` multiplications. The shift-invert solver
factors in SuperLU's minimum-degree order instead
(:func:`~specgraph.eigen._lanczos.factorize`), which filled 1% to 42% of the
envelope bound on the networks measured (the least on large near-planar and
tree-like networks, the most on block models): the bound decides the memory
guard, and its time forecast is pessimistic by as much.

So the forecast has two stages:

1. **Structure.** Predicted seconds of ``dense`` (:math:`c_d n^3`),
   ``multilevel`` (:math:`c_0 + c_1 n + c_2 \\,\\mathrm{nnz}\\, w + c_3 n w^2`
   for a block of ``w`` vectors), and two figures for ``lanczos``
   (shift-invert): a bound, with the factor filling its whole envelope
   (:math:`c_f \\sum w_i^2` to factor, then ``S`` steps of one solve,
   :math:`c_s \\cdot 2(E + n)`, and one reorthogonalization against ``b``
   basis vectors, :math:`c_o n b`), and a floor, with no fill at all. The
   shift-invert solve is chosen outright when its bound is the least, ruled
   out when its floor is not below the best other prediction, and otherwise
   *tried*.
2. **Trial.** The factorization, the first step of the shift-invert solve, is
   made (only when its bound is at most :data:`TRIAL_SHARE` times the best
   other prediction, so that a lost trial costs little); with the real fill
   ``F`` known, the rest of the solve is predicted as
   :math:`S (c_s F + c_o n b)` and compared again. When shift-invert wins, the
   factor is handed to the solver and nothing is wasted.

``lanczos_flip`` has no forecast: its step count follows the relative gap
above the wanted eigenvalues (the Kaniel-Paige-Saad bounds), unknown before a
solve, so ``auto`` reaches it only through the multilevel solver's measured
gap (:data:`~specgraph.eigen._multilevel.FLIP_GAP_RATIO`), or for operators
that only products can solve.

Guards: ``lanczos`` is never taken (nor tried) when the envelope bound on its
factors exceeds :data:`FACTOR_MEMORY_BUDGET`, nor ``dense`` above
:data:`DENSE_LIMIT` nodes.

Every constant was fitted to measurements on this project's machine (2 cores,
shared; ``python benchmarks/probe_solver_cost.py``): the table and the fit are
in docs/methods.md, "Solver cost".

References
----------
.. [1] A. George and J. W. H. Liu, *Computer Solution of Large Sparse Positive
   Definite Systems*, Prentice-Hall, 1981.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import reverse_cuthill_mckee

__all__ = [
    "DENSE_LIMIT",
    "FACTOR_MEMORY_BUDGET",
    "Envelope",
    "Forecast",
    "envelope",
    "forecast",
    "settle",
    "worst_envelope",
]

#: No component above this many nodes is solved densely by ``auto``: the dense
#: matrix alone takes ``8 n^2`` bytes (32 MB here) and LAPACK's time grows as
#: ``n^3`` (4 to 5 s at 3,000 to 3,800 nodes, where a sparse method took 0.01
#: to 0.2 s: docs/methods.md, "Solver cost").
DENSE_LIMIT = 2000

#: Bytes the shift-invert factors may take by the envelope bound (two
#: triangular factors of at most ``E + n`` entries, :data:`FACTOR_ENTRY_BYTES`
#: each); above it shift-invert is neither chosen nor tried. 1 GiB: below the
#: bound of the 16,000-node block model whose factorization once took 450 s and
#: 1.5 GiB (its bound is 1.6 GiB), and above the multilevel method's 0.7 GiB at
#: 1,000,000 road-like nodes (docs/benchmarks.md).
FACTOR_MEMORY_BUDGET = 2**30

#: Bytes of one factor entry: a float64 value and an int32 row index.
FACTOR_ENTRY_BYTES = 12

#: A shift-invert factorization is tried only when its time bound is at most
#: this many times the best other method's predicted time, so that a trial
#: which loses costs at most that much more (and in practice far less: the
#: bound assumes a full envelope). Measured ratios (docs/methods.md, "Solver
#: cost"): at most 3.0 on every real network of the benchmark (case6470rte,
#: k = 2), where every trial won; 4.3 and more on the block models of 4,000
#: nodes and more at k <= 25, where trials lose.
TRIAL_SHARE = 3.5

# Fitted constants (python benchmarks/probe_solver_cost.py; docs/methods.md).
#: Seconds per ``n^3`` of a dense solve (one BLAS thread).
DENSE_SECONDS_PER_CUBE = 8.1e-11

#: Seconds per unit of ``sum(w_i^2)`` to factor: the largest ratio measured on
#: any network with ``sum(w_i^2) >= 1e8`` (a bound, not a fit; the block
#: models set it, whose factors fill their envelope).
FACTOR_SECONDS_PER_WIDTH2 = 2.5e-10

#: Seconds per factor entry of one solve with the factors.
SOLVE_SECONDS_PER_ENTRY = 4.6e-9

#: Seconds per ``n x b`` entry of one reorthogonalization against ``b`` vectors.
ORTH_SECONDS_PER_ENTRY = 1.0e-9

#: Solves of a shift-invert solve for ``k`` pairs: this many per pair ...
LANCZOS_STEPS_PER_PAIR = 3.7

#: ... plus this many (the verification run and the first run's headroom).
LANCZOS_STEPS_BASE = 32.0

#: Seconds of the multilevel solve: fixed (imports aside: levels, coarse solve) ...
MULTILEVEL_SECONDS = 0.025

#: ... per node (aggregation, transfers, preconditioner set-up) ...
MULTILEVEL_SECONDS_PER_NODE = 3.3e-6

#: ... per stored entry and block vector (products with the block) ...
MULTILEVEL_SECONDS_PER_PRODUCT = 2.7e-7

#: ... and per node and squared block width (the Rayleigh-Ritz block passes).
MULTILEVEL_SECONDS_PER_PASS = 9.1e-9


@dataclass(frozen=True)
class Envelope:
    """The envelope of a symmetric matrix in reverse Cuthill-McKee order.

    Attributes
    ----------
    rows, entries : int
        Order and stored entries of the matrix.
    size : int
        ``E = sum(w_i)``: at most ``E + rows`` entries in each factor of a
        factorization without pivoting in this order.
    work : float
        ``sum(w_i^2)``: about twice the multiplications of that factorization.
    order : ndarray of int or None
        The order (None for the worst-case envelope of :func:`worst_envelope`).
    """

    rows: int
    entries: int
    size: int
    work: float
    order: np.ndarray | None

    @property
    def factor_bytes(self) -> int:
        """The envelope bound on the bytes of both factors."""
        return 2 * (self.size + self.rows) * FACTOR_ENTRY_BYTES


def envelope(matrix: sp.csr_array | sp.csr_matrix) -> Envelope:
    """Reverse Cuthill-McKee order of a structurally symmetric matrix and its envelope.

    Examples
    --------
    A path keeps its band of width 1; a star's hub, numbered last, spans every row:

    >>> from specgraph import gallery, laplacian
    >>> env = envelope(laplacian(gallery.path(6)).matrix)
    >>> env.size, env.work
    (5, 5.0)
    >>> envelope(laplacian(gallery.star(5)).matrix).size  # 6 nodes, hub last
    5
    """
    csr = sp.csr_matrix(matrix)
    n = csr.shape[0]
    order = reverse_cuthill_mckee(csr, symmetric_mode=True).astype(np.int64)
    position = np.empty(n, dtype=np.int64)
    position[order] = np.arange(n)
    widths = np.zeros(n, dtype=np.int64)
    filled = np.flatnonzero(np.diff(csr.indptr) > 0)
    if filled.size:
        first = np.minimum.reduceat(position[csr.indices], csr.indptr[filled])
        widths[filled] = np.maximum(position[filled] - first, 0)
    return Envelope(
        rows=n,
        entries=int(csr.nnz),
        size=int(widths.sum()),
        work=float(np.dot(widths.astype(np.float64), widths)),
        order=order,
    )


def worst_envelope(n: int, nnz: int | None = None) -> Envelope:
    """The envelope of a full matrix of order ``n``: the bound when nothing is known.

    Examples
    --------
    >>> worst_envelope(4).size, worst_envelope(4).work
    (6, 14.0)
    """
    return Envelope(
        rows=n,
        entries=n * n if nnz is None else nnz,
        size=n * (n - 1) // 2,
        work=float((n - 1) * n * (2 * n - 1) / 6),
        order=None,
    )


# ------------------------------------------------------------ the models
def dense_seconds(n: int) -> float:
    """Predicted seconds of a dense solve of order ``n``."""
    return DENSE_SECONDS_PER_CUBE * float(n) ** 3


def lanczos_steps(k: int) -> float:
    """Predicted solves of a shift-invert solve for ``k`` pairs (verification included)."""
    return LANCZOS_STEPS_PER_PAIR * k + LANCZOS_STEPS_BASE


def _basis(n: int, k: int) -> int:
    from ._lanczos import GUARD_PAIRS, MIN_EXTRA  # the solver's own basis rule

    return min(n, max(2 * k + GUARD_PAIRS, k + MIN_EXTRA))


def lanczos_seconds(n: int, k: int, fill: float) -> float:
    """Predicted seconds of the shift-invert steps with factors of ``fill`` entries."""
    per_step = SOLVE_SECONDS_PER_ENTRY * fill + ORTH_SECONDS_PER_ENTRY * n * _basis(n, k)
    return lanczos_steps(k) * per_step


def factor_seconds(env: Envelope) -> float:
    """The bound on the factorization's seconds from its envelope."""
    return FACTOR_SECONDS_PER_WIDTH2 * env.work


def multilevel_seconds(n: int, nnz: int, k: int) -> float:
    """Predicted seconds of the multilevel solve for ``k`` pairs."""
    from ._multilevel import GUARD_SHARE, MIN_GUARD  # the solver's own block rule

    width = k + max(MIN_GUARD, int(GUARD_SHARE * k))
    return (
        MULTILEVEL_SECONDS
        + MULTILEVEL_SECONDS_PER_NODE * n
        + MULTILEVEL_SECONDS_PER_PRODUCT * nnz * width
        + MULTILEVEL_SECONDS_PER_PASS * n * width * width
    )


# ------------------------------------------------------------ the choice
@dataclass(frozen=True)
class Forecast:
    """Predicted seconds of each method on one component, and the choice.

    Attributes
    ----------
    method : str
        The method to run (with :attr:`trial`: the method to run if the
        trial factorization does not make shift-invert the cheapest).
    seconds : dict of str to float
        Predicted seconds per method; for ``lanczos`` the envelope bound
        (empty when no forecast was needed).
    excluded : dict of str to str
        Why a method was excluded by a guard, by method.
    order : ndarray of int or None
        The reverse Cuthill-McKee order behind the forecast (reused by the
        multilevel solver, which reorders the component the same way).
    note : str
        Replaces the predicted seconds in :attr:`reason` when set.
    trial : bool
        Whether a factorization is to be tried before the choice is final
        (see :func:`settle`).
    after : float or None
        After a trial: the predicted seconds of the shift-invert steps with
        the factor's real fill, ``fill`` entries.
    fill : int or None
        After a trial: the factor's entries.
    """

    method: str
    seconds: dict[str, float]
    excluded: dict[str, str]
    order: np.ndarray | None = None
    note: str = ""
    trial: bool = False
    after: float | None = None
    fill: int | None = None

    @property
    def reason(self) -> str:
        """One line for logs and run records: the predicted seconds and the guards.

        Examples
        --------
        >>> Forecast("lanczos", {"dense": 2.5, "lanczos": 0.012}, {}).reason
        'auto: lanczos, predicted s: dense 2.5, lanczos at most 0.012'
        """
        if self.note:
            return f"auto: {self.note}"
        shown = ", ".join(
            f"{name} at most {value:.2g}" if name == "lanczos" else f"{name} {value:.2g}"
            for name, value in self.seconds.items()
        )
        guards = "".join(f"; {name} {why}" for name, why in self.excluded.items())
        tried = ""
        if self.after is not None:
            tried = f"; factor tried: {self.fill:,} entries, {self.after:.2g} s more"
        return f"auto: {self.method}, predicted s: {shown}{guards}{tried}"


def forecast(env: Envelope, k: int, allowed: tuple[str, ...]) -> Forecast:
    """Stage 1: predicted seconds of each method for ``k`` pairs, and the choice or a trial.

    ``allowed`` holds the methods correct for the operator; when the method
    predicted cheapest is not among them, ``lanczos_flip`` (products only) is
    taken, as for operators with a rank-one term.

    Examples
    --------
    A path of 1,000 nodes fills nothing; a full matrix of 1,500 nodes asked for
    400 pairs is a job for LAPACK:

    >>> from specgraph import gallery, laplacian
    >>> forecast(envelope(laplacian(gallery.path(1000)).matrix), 4, ("dense", "lanczos")).method
    'lanczos'
    >>> forecast(worst_envelope(1500), 400, ("dense", "lanczos")).method
    'dense'
    """
    n = env.rows
    fill_bound = 2 * (env.size + n)
    seconds = {
        "dense": dense_seconds(n),
        "lanczos": factor_seconds(env) + lanczos_seconds(n, k, fill_bound),
        "multilevel": multilevel_seconds(n, env.entries, k),
    }
    excluded: dict[str, str] = {}
    if n > DENSE_LIMIT:
        excluded["dense"] = f"excluded above {DENSE_LIMIT} nodes"
    if env.factor_bytes > FACTOR_MEMORY_BUDGET:
        excluded["lanczos"] = (
            f"excluded: factor bound {env.factor_bytes / 2**30:.2g} GiB over "
            f"{FACTOR_MEMORY_BUDGET / 2**30:.2g} GiB"
        )
    others = [m for m in ("dense", "multilevel") if m not in excluded]
    other = min(others, key=lambda m: seconds[m])
    first = Forecast(_allowed(other, allowed), seconds, excluded, order=env.order)
    if "lanczos" in excluded or "lanczos" not in allowed:
        if "lanczos" not in excluded and seconds["lanczos"] < seconds[other]:
            return replace(first, method=_allowed("lanczos", allowed))
        return first
    if seconds["lanczos"] <= seconds[other]:
        return replace(first, method="lanczos")
    floor = lanczos_seconds(n, k, 2 * n)  # no fill beyond the diagonals
    if floor < seconds[other] and factor_seconds(env) <= TRIAL_SHARE * seconds[other]:
        return replace(first, trial=True)
    return first


def settle(first: Forecast, rows: int, k: int, fill: int) -> Forecast:
    """Stage 2: the choice once the trial factor's ``fill`` is known.

    Shift-invert is kept when the rest of its solve is predicted to cost no
    more than the best other method; the factorization itself is spent.
    """
    after = lanczos_seconds(rows, k, fill)
    others = [m for m in ("dense", "multilevel") if m not in first.excluded]
    best = min(first.seconds[m] for m in others)
    method = "lanczos" if after <= best else first.method
    return replace(first, method=method, trial=False, after=after, fill=fill)


def _allowed(method: str, allowed: tuple[str, ...]) -> str:
    """``method`` if the operator allows it, else ``lanczos_flip`` (products only)."""
    if method in allowed:
        return method
    return "lanczos_flip" if "lanczos_flip" in allowed else allowed[0]
