"""Benchmark of the smallest-eigenpair solvers against scipy and scikit-learn anchors.

What it measures
----------------
For each test network and ``k`` (default 8) it times the ``k`` smallest
eigenpairs of the normalized Laplacian ``N = I - D^{-1/2} A D^{-1/2}``:

* ours: :func:`specgraph.smallest_eigenpairs` with ``method="auto"`` (always)
  and every other name in :data:`specgraph.eigen.METHODS` (``"dense"`` only on
  small networks), on an operator built before the clock starts;
* anchors, all measured in the same run:

  1. ``scipy-shift-invert``: ``eigsh(N, k, sigma=-s, which="LM")``; the shift
     ``s`` is tuned fairly: each of ``{1e-5, 1e-6, 1e-7} x ||N||`` is timed at
     every size (the best shift changes with size: at 1,000,000 road-like
     nodes -1e-6 beat -1e-5 by 20%), and the fastest that meets the tolerance
     is the anchor of that size;
  2. ``scipy-flipped``: ``eigsh(2I - N, k, which="LA")``, the largest end of
     the flipped operator, without factorization;
  3. ``scipy-lobpcg-amg``: ``lobpcg(N, X, M=AMG, largest=False)`` with ``X``
     random and ``M`` the pyamg smoothed-aggregation preconditioner of
     ``N + 1e-5 I``;
  4. ``sklearn-arpack`` and ``sklearn-amg``:
     ``sklearn.manifold.spectral_embedding(A, n_components=k, norm_laplacian=True,
     drop_first=False)``; scikit-learn builds its own Laplacian from the
     adjacency inside the timed call.

Every method targets the same accuracy, a scaled residual
``||N v - lambda v|| / ||N||_bound <= 1e-6`` with ``||N||_bound = 2``, through
its own tolerance parameter in its own units. ARPACK gets ``tol=1e-6``: its
test is relative to the Ritz value of the operator it iterates on, which bounds
``||N v - lambda v||`` by ``tol * ||N + sI|| ~ 2 tol`` in shift-invert mode and
by ``tol * (2 - lambda) <= 2 tol`` on ``2I - N``. LOBPCG gets ``tol=2e-6``: it
bounds the plain residual of unit vectors. Afterwards the same
check is applied to every output: the vectors are normalized, eigenvalues are
recomputed as Rayleigh quotients and the largest scaled residual is reported.
scikit-learn returns ``D^{-1/2} u`` (rows of ``u`` eigenvectors of ``N``, with
deterministic sign flips), so its output is multiplied by ``D^{1/2}`` before
the check. A row is flagged when its residual exceeds 1e-6 or when its
eigenvalues differ from those of the reference (the first row of the table that
met the tolerance) by more than ``2e-6`` absolute.

Limits: a method whose first run on a network exceeds ``--anchor-timeout``
(ours included) is stopped and reported as skipped there and at the larger
sizes of the family; runs that would repeat the same work are skipped too (the
other shifts of the shift-invert anchor, which share its factorization; the
solver that ``auto`` picks). Each child's address space is capped
(``--memory-cap``, default half the physical memory) so that a runaway
factorization fails with ``MemoryError`` instead of starving a shared machine.

Each run happens in a fresh child process that loads the cached adjacency,
builds ``N`` and runs the method once, untimed, on a 5,000-node road-like
network (30,000 nodes for the multilevel method, so that both the serial and
the parallel compilations of its kernels are loaded; at most the size of the
timed network) to pay the one-off costs (imports, JIT kernels). After that set-up the child
returns freed heap to the system, resets its peak resident set size
(``/proc/self/clear_refs``) and reports peak minus current RSS (``VmHWM`` minus
``VmRSS``) after one call: the *extra memory* of the method. Wall time is
``time.perf_counter`` around the call; the median over ``--repeats`` runs is
reported, and repeats go round all methods in turn so that drift on a shared
machine hits them alike. Ratios are to ``auto`` measured in the same run.

Networks
--------
* ``road``: :func:`specgraph.gallery.road_like` (planar, mean degree 4,
  inverse-length weights);
* ``sbm``: a stochastic block model drawn here with numpy: ``SBM_GROUPS`` equal
  groups, links placed uniformly at random with expected degree
  ``SBM_DEGREE_IN`` inside a node's own group and ``SBM_DEGREE_OUT`` to the
  other groups (Poisson link counts, repeated pairs merged, no self-loops,
  unit weights); the few small components are joined to the largest one by
  one link each, and nodes are shuffled.

Adjacencies are cached as ``.npz`` under ``--cache-dir`` (default
``benchmarks/.cache/``, git-ignored), keyed by family, parameters, size and seed.

How to run
----------
::

    python benchmarks/bench_eigen.py --quick              # smoke run, a few minutes
    python benchmarks/bench_eigen.py --out docs/benchmarks.md   # full run, 1M nodes

The Markdown report goes to stdout (and to ``--out``); progress goes to stderr.
"""

from __future__ import annotations

import argparse
import datetime as dt
import gc
import itertools
import json
import logging
import math
import os
import platform
import re
import resource
import shlex
import signal
import statistics
import subprocess
import sys
import time
import warnings
from collections.abc import Callable
from dataclasses import dataclass, field
from importlib.metadata import PackageNotFoundError, version
from pathlib import Path
from typing import Any

import numpy as np
import scipy.sparse as sp

logger = logging.getLogger("bench_eigen")

#: Target scaled residual ``||N v - lambda v|| / ||N||_bound`` for every method.
TOL = 1e-6
#: Eigenvalues may differ from the reference row by this much (absolute):
#: the tolerance times the norm bound 2 of ``N``.
VALUE_SLACK = 2 * TOL
#: Shifts tried for the shift-invert anchor, as fractions of ``||N||_bound``.
SHIFT_FRACTIONS = (1e-5, 1e-6, 1e-7)
#: Diagonal shift making the Laplacian definite for the AMG set-up (the value
#: scikit-learn uses for the same purpose).
AMG_SHIFT = 1e-5
#: Iteration cap of the LOBPCG anchor: generous, the residual check judges it.
LOBPCG_MAXITER = 500
#: ``method="dense"`` is timed only up to this many nodes (8 n^2 bytes, n^3 flops).
DENSE_MAX_N = 5000
#: Stochastic block model: number of equal groups and expected degrees.
SBM_GROUPS = 8
SBM_DEGREE_IN = 8.0
SBM_DEGREE_OUT = 1.0
#: Extra seconds a child may spend loading and building ``N`` before the parent
#: gives up on it (the method's own time limit is enforced inside the child).
SETUP_ALLOWANCE = 900.0
#: Size of the road-like network each child solves once, untimed, before the
#: timed call (above the dense limit, so that iterative solvers run).
WARMUP_N = 5000
#: Warm-up size for the multilevel method: its finest level must have more
#: rows than ``PARALLEL_MIN_ROWS`` (20,000) so that the parallel compilation of
#: every kernel is loaded too, not only the serial one of the coarse levels.
MULTILEVEL_WARMUP_N = 30_000
#: Marker of the child's result line on its stdout.
RESULT_MARK = "@@RESULT "

DEFAULT_SIZES = (10_000, 100_000, 1_000_000)
QUICK_SIZES = (10_000, 100_000)
DEFAULT_SBM_SIZES = (100_000,)
DEFAULT_CACHE = Path(__file__).resolve().parent / ".cache"

ANCHORS = (
    "scipy-shift-invert",
    "scipy-flipped",
    "scipy-lobpcg-amg",
    "sklearn-arpack",
    "sklearn-amg",
)
FAMILY_TITLES = {"road": "road-like", "sbm": "stochastic block model"}


# --------------------------------------------------------------------------- networks


def cache_path(cache_dir: Path, family: str, n: int, seed: int) -> Path:
    """Cache file of one network; the key names every parameter of the generator."""
    if family == "road":
        from specgraph.gallery import ROAD_MEAN_DEGREE

        tag = f"road-deg{ROAD_MEAN_DEGREE:g}"
    else:
        tag = f"sbm-q{SBM_GROUPS}-in{SBM_DEGREE_IN:g}-out{SBM_DEGREE_OUT:g}"
    return cache_dir / f"{tag}-n{n}-seed{seed}.npz"


def sbm_adjacency(n: int, seed: int) -> sp.csr_array:
    """A connected stochastic block model with unit weights (see the module docstring)."""
    rng = np.random.default_rng(seed)
    groups = SBM_GROUPS
    starts = (np.arange(groups + 1) * n) // groups
    sizes = np.diff(starts)
    label = np.repeat(np.arange(groups), sizes)

    m_in = rng.poisson(n * SBM_DEGREE_IN / 2)
    u = rng.integers(n, size=m_in)
    g = label[u]
    # A uniform other member of u's group: a nonzero offset modulo the group size.
    offset = (u - starts[g] + rng.integers(1, sizes[g])) % sizes[g]
    v = starts[g] + offset

    m_out = rng.poisson(n * SBM_DEGREE_OUT / 2)
    u2 = rng.integers(n, size=m_out)
    other = (label[u2] + rng.integers(1, groups, size=m_out)) % groups
    v2 = starts[other] + np.floor(rng.random(m_out) * sizes[other]).astype(np.int64)

    rows = np.concatenate([u, u2])
    cols = np.concatenate([v, v2])
    adjacency = _symmetric_unit(rows, cols, n)

    from scipy.sparse.csgraph import connected_components

    count, comp = connected_components(adjacency, directed=False)
    if count > 1:
        giant = np.bincount(comp).argmax()
        members = np.flatnonzero(comp == giant)
        first = np.unique(comp, return_index=True)[1]  # lowest node of each component
        lonely = first[comp[first] != giant]
        partners = rng.choice(members, size=lonely.size)
        adjacency = _symmetric_unit(
            np.concatenate([rows, lonely]), np.concatenate([cols, partners]), n
        )
    order = rng.permutation(n)
    return sp.csr_array(adjacency[order][:, order])


def _symmetric_unit(rows: np.ndarray, cols: np.ndarray, n: int) -> sp.csr_array:
    """Unit-weight symmetric adjacency of the given pairs, repeats merged."""
    lo, hi = np.minimum(rows, cols), np.maximum(rows, cols)
    keys = np.unique(lo.astype(np.int64) * n + hi)
    lo, hi = keys // n, keys % n
    upper = sp.coo_array((np.ones(keys.size), (lo, hi)), shape=(n, n)).tocsr()
    return sp.csr_array(upper + upper.T)


def ensure_cached(cache_dir: Path, family: str, n: int, seed: int) -> Path:
    """Build and store the adjacency unless it is cached already."""
    path = cache_path(cache_dir, family, n, seed)
    if path.exists():
        return path
    cache_dir.mkdir(parents=True, exist_ok=True)
    ignore = cache_dir / ".gitignore"
    if not ignore.exists():
        ignore.write_text("# benchmark cache, rebuilt on demand\n*\n")
    logger.info("building %s network, n=%d, seed=%d", family, n, seed)
    start = time.perf_counter()
    if family == "road":
        from specgraph import gallery

        adjacency = gallery.road_like(n, rng=seed).adjacency
    else:
        adjacency = sbm_adjacency(n, seed)
    tmp = path.with_suffix(".tmp.npz")
    sp.save_npz(tmp, sp.csr_array(adjacency))
    tmp.replace(path)
    logger.info("built in %.1f s -> %s", time.perf_counter() - start, path)
    return path


def load_adjacency(path: Path) -> sp.csr_array:
    """The cached adjacency, with 32-bit indices when they fit (scikit-learn's ARPACK
    path accepts no other)."""
    adjacency = sp.csr_array(sp.load_npz(path))
    if max(adjacency.shape[0], adjacency.nnz) < np.iinfo(np.int32).max:
        adjacency.indices = adjacency.indices.astype(np.int32)
        adjacency.indptr = adjacency.indptr.astype(np.int32)
    adjacency.sort_indices()
    return adjacency


# --------------------------------------------------------------------------- methods


@dataclass
class Output:
    """What one method call returned, before the common accuracy check."""

    vectors: np.ndarray
    matvecs: str
    detail: str


@dataclass
class Inputs:
    """Everything prepared before the clock starts."""

    adjacency: sp.csr_array
    matrix: sp.csr_array  # N, as built by specgraph.laplacian
    operator: Any  # specgraph GraphOperator
    sqrt_degrees: np.ndarray
    k: int
    tol: float
    seed: int
    shift: float | None


class _Counted:
    """``x -> f(x)`` that counts products (a block of b vectors counts b)."""

    def __init__(self, apply: Callable[[np.ndarray], np.ndarray]) -> None:
        self.apply = apply
        self.count = 0

    def __call__(self, x: np.ndarray) -> np.ndarray:
        self.count += 1 if x.ndim == 1 else x.shape[1]
        return self.apply(x)


def run_ours(method: str, inputs: Inputs) -> Output:
    from specgraph import smallest_eigenpairs

    result = smallest_eigenpairs(
        inputs.operator, inputs.k, method=method, tol=inputs.tol, rng=inputs.seed
    )
    return Output(result.vectors, str(result.matvecs), result.method)


def run_shift_invert(inputs: Inputs) -> Output:
    from scipy.sparse.linalg import eigsh

    assert inputs.shift is not None
    norm = inputs.operator.norm_bound
    v0 = np.random.default_rng(inputs.seed).standard_normal(inputs.matrix.shape[0])
    sigma = -inputs.shift * norm
    _, vectors = eigsh(inputs.matrix, inputs.k, sigma=sigma, which="LM", tol=inputs.tol, v0=v0)
    return Output(vectors, "LU", f"sigma=-{inputs.shift:g}x{norm:g}")


def run_flipped(inputs: Inputs) -> Output:
    from scipy.sparse.linalg import LinearOperator, eigsh

    matrix = inputs.matrix
    n = matrix.shape[0]
    counted = _Counted(lambda x: 2.0 * x - matrix @ x)
    flipped = LinearOperator((n, n), matvec=counted, matmat=counted, dtype=float)
    v0 = np.random.default_rng(inputs.seed).standard_normal(n)
    _, vectors = eigsh(flipped, inputs.k, which="LA", tol=inputs.tol, v0=v0)
    return Output(vectors, str(counted.count), "2I - N, LA")


def run_lobpcg_amg(inputs: Inputs) -> Output:
    from pyamg import smoothed_aggregation_solver
    from scipy.sparse.linalg import LinearOperator, lobpcg

    matrix = inputs.matrix
    n = matrix.shape[0]
    shifted = sp.csr_matrix(matrix + AMG_SHIFT * sp.eye_array(n, format="csr"))
    preconditioner = smoothed_aggregation_solver(shifted).aspreconditioner()
    counted = _Counted(lambda x: matrix @ x)
    operator = LinearOperator((n, n), matvec=counted, matmat=counted, dtype=float)
    x = np.random.default_rng(inputs.seed).standard_normal((n, inputs.k))
    # LOBPCG's tol bounds the plain residual norm of unit vectors: scale by ||N||.
    tol = inputs.tol * inputs.operator.norm_bound
    _, vectors = lobpcg(
        operator, x, M=preconditioner, tol=tol, largest=False, maxiter=LOBPCG_MAXITER
    )
    return Output(vectors, str(counted.count), f"N, AMG(N+{AMG_SHIFT:g}I), tol={tol:g}")


def run_sklearn(solver: str, inputs: Inputs) -> Output:
    from sklearn.manifold import spectral_embedding

    # ARPACK's tol is relative to the (inverted) Ritz value; LOBPCG's is absolute.
    tol = inputs.tol if solver == "arpack" else inputs.tol * inputs.operator.norm_bound
    embedding = spectral_embedding(
        inputs.adjacency,
        n_components=inputs.k,
        eigen_solver=solver,
        eigen_tol=tol,
        norm_laplacian=True,
        drop_first=False,
        random_state=inputs.seed,
    )
    # scikit-learn returns D^{-1/2} u; undo that scaling to get eigenvectors of N.
    vectors = np.asarray(embedding) * inputs.sqrt_degrees[:, None]
    return Output(vectors, "n/a", f"own Laplacian, eigen_tol={tol:g}")


def runner_for(method: str) -> Callable[[Inputs], Output]:
    table: dict[str, Callable[[Inputs], Output]] = {
        "scipy-shift-invert": run_shift_invert,
        "scipy-flipped": run_flipped,
        "scipy-lobpcg-amg": run_lobpcg_amg,
        "sklearn-arpack": lambda inputs: run_sklearn("arpack", inputs),
        "sklearn-amg": lambda inputs: run_sklearn("amg", inputs),
    }
    if method in table:
        return table[method]
    return lambda inputs: run_ours(method, inputs)


def check_pairs(
    matrix: sp.csr_array, vectors: np.ndarray, norm_bound: float
) -> tuple[np.ndarray, np.ndarray]:
    """Rayleigh quotients and scaled residuals of the normalized columns, sorted."""
    vectors = np.asarray(vectors, dtype=float)
    norms = np.linalg.norm(vectors, axis=0)
    vectors = vectors / np.where(norms > 0, norms, 1.0)
    product = matrix @ vectors
    values = np.einsum("ij,ij->j", vectors, product)
    residuals = np.linalg.norm(product - vectors * values, axis=0) / norm_bound
    order = np.argsort(values)
    return values[order], residuals[order]


# --------------------------------------------------------------------------- child process


def _status_kib(field_name: str) -> int | None:
    try:
        text = Path("/proc/self/status").read_text()
    except OSError:
        return None
    match = re.search(rf"^{field_name}:\s+(\d+)\s+kB", text, re.MULTILINE)
    return int(match.group(1)) if match else None


def _release_free_heap() -> None:
    """Hand freed heap pages back to the system (glibc), so that memory the warm-up
    freed is not silently reused by the timed call and missed by the RSS count."""
    try:
        import ctypes

        ctypes.CDLL("libc.so.6").malloc_trim(0)
    except (OSError, AttributeError):
        pass


def _reset_peak() -> bool:
    """Reset this process's peak RSS to its current RSS (Linux >= 4.0)."""
    try:
        Path("/proc/self/clear_refs").write_text("5")
    except OSError:
        return False
    return True


def _peak_kib() -> int:
    """Peak RSS of this process: ``VmHWM``, else ``ru_maxrss`` (KiB on Linux).

    ``ru_maxrss`` alone would mislead here: a process started by ``exec``
    inherits the peak of the process it replaced (our parent, which may have
    built a large network), and it is not reset by ``clear_refs``.
    """
    peak = _status_kib("VmHWM")
    return peak if peak is not None else resource.getrusage(resource.RUSAGE_SELF).ru_maxrss


def warm_up(method: str, inputs: Inputs) -> None:
    """Run the method once on a small network, untimed.

    This pays for lazy imports and for loading or compiling JIT kernels (numba
    caches compiled code on disk, but a fresh process still loads it on the
    first call, and an edited source recompiles), which are one-off costs, not
    costs of the solve. For ``auto`` the solver it picks at this size is warmed.
    """
    from specgraph import Network, gallery, laplacian

    names = [method]
    if method == "auto":
        # auto's choice depends on the matrix (and may take a trial factorization):
        # warm every solver it can run on a component of this size.
        names = [m for m in our_names() if m not in {"auto", "dense"}]
    for name in names:
        if name == "dense":  # LAPACK needs no warming, and 5000^3 flops would be slow
            continue
        size = MULTILEVEL_WARMUP_N if name == "multilevel" else WARMUP_N
        size = min(size, inputs.matrix.shape[0])
        small_net = gallery.road_like(size, rng=inputs.seed + 1)
        small_adj = small_net.adjacency
        small = Network(small_adj, small_net.node_ids)
        small_op = laplacian(small, kind="normalized")
        small_inputs = Inputs(
            adjacency=small_adj,
            matrix=small_op.matrix,
            operator=small_op,
            sqrt_degrees=np.sqrt(small.degrees),
            k=min(inputs.k, size // 10),
            tol=inputs.tol,
            seed=inputs.seed,
            shift=inputs.shift,
        )
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                runner_for(name)(small_inputs)
        except Exception as exc:  # the timed run reports failures
            logger.debug("warm-up of %s failed: %s", name, exc)


def worker(spec: dict[str, Any]) -> dict[str, Any]:
    """Run one method once on one cached network and report time, memory, accuracy."""
    cap = spec.get("memory_cap")
    if cap:
        limit = int(cap * 2**30)
        resource.setrlimit(resource.RLIMIT_AS, (limit, limit))
    from specgraph import Network, laplacian

    adjacency = load_adjacency(Path(spec["path"]))
    n = adjacency.shape[0]
    network = Network(adjacency, np.arange(n).astype(str))
    operator = laplacian(network, kind="normalized")
    matrix = operator.matrix
    inputs = Inputs(
        adjacency=adjacency,
        matrix=matrix,
        operator=operator,
        sqrt_degrees=np.sqrt(network.degrees),
        k=spec["k"],
        tol=spec["tol"],
        seed=spec["seed"],
        shift=spec.get("shift"),
    )
    method = spec["method"]
    run = runner_for(method)
    warm_up(method, inputs)

    report: dict[str, Any] = {
        "n": n,
        "links": int(adjacency.nnz // 2),
        "csr_bytes": int(matrix.data.nbytes + matrix.indices.nbytes + matrix.indptr.nbytes),
    }
    gc.collect()
    _release_free_heap()
    report["peak_reset"] = _reset_peak()
    baseline = _status_kib("VmRSS") or resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    floor = _peak_kib()  # equals baseline when the reset worked
    timeout = spec.get("timeout")
    if timeout:
        # Default action of SIGALRM ends the process even inside C or Fortran
        # code; the parent reads the signal as "over the time limit".
        signal.setitimer(signal.ITIMER_REAL, float(timeout))
    caught: list[warnings.WarningMessage] = []
    start = time.perf_counter()
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            output = run(inputs)
        seconds = time.perf_counter() - start
    except Exception as exc:
        signal.setitimer(signal.ITIMER_REAL, 0)
        reason = " ".join(str(exc).split())[:160]
        error = f"{type(exc).__name__}: {reason}" if reason else type(exc).__name__
        if isinstance(exc, MemoryError):
            error, report["fatal"] = f"{error} (cap {cap:g} GiB)", True
        report.update(status="failed", error=error)
        return report
    signal.setitimer(signal.ITIMER_REAL, 0)
    peak = _peak_kib()
    values, residuals = check_pairs(matrix, output.vectors, operator.norm_bound)
    # LOBPCG's messages end in long arrays of accuracies: keep the words before them.
    messages = sorted({" ".join(str(w.message).split("[")[0].split())[:80] for w in caught})
    report.update(
        status="ok",
        seconds=seconds,
        extra_kib=max(peak - max(baseline, floor), 0),
        baseline_kib=baseline,
        matvecs=output.matvecs,
        detail=output.detail,
        values=values.tolist(),
        max_residual=float(residuals.max()) if residuals.size else 0.0,
        warnings=messages,
    )
    return report


def run_child(spec: dict[str, Any]) -> dict[str, Any]:
    """Run :func:`worker` in a fresh interpreter and parse its result line."""
    command = [sys.executable, str(Path(__file__).resolve()), "--worker", json.dumps(spec)]
    limit = None if not spec.get("timeout") else spec["timeout"] + SETUP_ALLOWANCE
    try:
        done = subprocess.run(command, capture_output=True, text=True, timeout=limit)
    except subprocess.TimeoutExpired:
        return {"status": "timeout"}
    if done.returncode == -signal.SIGALRM:
        return {"status": "timeout"}
    for line in reversed(done.stdout.splitlines()):
        if line.startswith(RESULT_MARK):
            return dict(json.loads(line[len(RESULT_MARK) :]))
    tail = done.stderr.strip().splitlines()[-1:] or ["no output"]
    if done.returncode < 0:
        reason = f"killed by signal {-done.returncode} ({signal.Signals(-done.returncode).name})"
        return {"status": "failed", "error": reason, "fatal": True}
    return {"status": "failed", "error": f"exit {done.returncode}: {tail[0][:160]}"}


# --------------------------------------------------------------------------- the run


@dataclass
class Row:
    """One method on one network, aggregated over repeats."""

    key: str  # method name, with the shift for the tuned anchor
    method: str
    shift: float | None = None
    runs: list[dict[str, Any]] = field(default_factory=list)
    status: str = "pending"  # ok | failed | timeout | skipped
    note: str = ""

    @property
    def ours(self) -> bool:
        return self.method not in ANCHORS

    @property
    def times(self) -> list[float]:
        return [r["seconds"] for r in self.runs if r.get("status") == "ok"]

    @property
    def median(self) -> float | None:
        return statistics.median(self.times) if self.times else None

    @property
    def first(self) -> dict[str, Any] | None:
        return next((r for r in self.runs if r.get("status") == "ok"), None)

    @property
    def extra_mib(self) -> float | None:
        values = [r["extra_kib"] for r in self.runs if r.get("status") == "ok"]
        return max(values) / 1024 if values else None


@dataclass
class GraphResult:
    family: str
    n: int
    rows: list[Row]
    info: dict[str, Any] = field(default_factory=dict)

    def row(self, key: str) -> Row | None:
        return next((r for r in self.rows if r.key == key), None)


def our_names() -> list[str]:
    """``auto`` first, then the other names of :data:`specgraph.eigen.METHODS`."""
    from specgraph.eigen import METHODS

    return ["auto"] + [m for m in METHODS if m != "auto"]


def our_methods(n: int, selected: set[str] | None) -> list[str]:
    names = our_names()
    names = [m for m in names if m != "dense" or n <= DENSE_MAX_N]
    return [m for m in names if m == "auto" or selected is None or m in selected]


def plan_rows(
    n: int, tune: bool, shift: float | None, selected: set[str] | None, skipped: dict[str, str]
) -> list[Row]:
    """Rows of one network; ``skipped`` maps methods stopped at a smaller size to why."""
    rows = [Row(key=m, method=m) for m in our_methods(n, selected)]
    for anchor in ANCHORS:
        if selected is not None and anchor not in selected:
            continue
        if anchor == "scipy-shift-invert":
            tuning = tune or shift is None
            shifts = SHIFT_FRACTIONS if tuning and anchor not in skipped else (shift,)
            rows += [Row(key=f"{anchor} {s}", method=anchor, shift=s) for s in shifts]
        else:
            rows.append(Row(key=anchor, method=anchor))
    for row in rows:
        if row.method in skipped:
            row.status, row.note = "skipped", skipped[row.method]
    return rows


def _auto_choice(n: int) -> str | None:
    """The solver ``auto`` uses on a connected network of ``n`` nodes when nothing else
    is known of it (the rule's worst case: ``choose_method`` without the matrix)."""
    try:
        from specgraph.eigen import choose_method

        return str(choose_method(n))
    except Exception:  # the rule's signature may change; then nothing is inferred
        return None


def _skip_siblings(row: Row, rows: list[Row], n: int) -> None:
    """After ``row`` was stopped, skip rows that would repeat the same work."""
    for other in rows:
        if other is row or other.runs or other.status != "pending":
            continue
        if row.method == "scipy-shift-invert" and other.method == row.method:
            other.status = "skipped"
            other.note = f"skipped (shift {row.shift:g} stopped; same factorization)"
        elif row.key == "auto" and other.key == _auto_choice(n):
            other.status, other.note = "skipped", "skipped (what auto runs; auto stopped)"


def run_graph(
    family: str,
    n: int,
    path: Path,
    rows: list[Row],
    args: argparse.Namespace,
) -> GraphResult:
    result = GraphResult(family, n, rows)
    for repeat in range(args.repeats):
        for row in rows:
            if row.status in {"failed", "timeout", "skipped"}:
                continue
            spec = {
                "path": str(path),
                "method": row.method,
                "shift": row.shift,
                "k": args.k,
                "tol": TOL,
                "seed": args.seed,
                "timeout": args.anchor_timeout,
                "memory_cap": args.memory_cap,
            }
            logger.info("%s n=%d repeat %d/%d: %s", family, n, repeat + 1, args.repeats, row.key)
            outcome = run_child(spec)
            for name in ("n", "links", "csr_bytes"):
                if name in outcome:
                    result.info[name] = outcome[name]
            status = outcome.get("status")
            if status == "ok":
                row.runs.append(outcome)
                row.status = "ok"
                logger.info(
                    "  %.3f s, extra %.1f MiB, max residual %.2g",
                    outcome["seconds"],
                    outcome["extra_kib"] / 1024,
                    outcome["max_residual"],
                )
            elif status == "timeout":
                logger.info("  over %g s, stopped", args.anchor_timeout)
                if not row.runs:
                    row.status = "timeout"
                    _skip_siblings(row, rows, n)
            else:
                logger.info("  failed: %s", outcome.get("error"))
                if not row.runs:
                    row.status, row.note = "failed", outcome.get("error", "unknown")
                    if outcome.get("fatal"):
                        _skip_siblings(row, rows, n)
    return result


def choose_shift(result: GraphResult) -> float | None:
    """Fastest shift whose run met the tolerance (fastest overall if none did)."""
    candidates = [r for r in result.rows if r.method == "scipy-shift-invert" and r.median]
    if not candidates:
        return None
    good = [r for r in candidates if r.first and r.first["max_residual"] <= TOL]
    best = min(good or candidates, key=lambda r: r.median or math.inf)
    return best.shift


# --------------------------------------------------------------------------- report


def _fmt_seconds(value: float) -> str:
    return f"{value:.3g}" if value < 100 else f"{value:.0f}"


def _cell(text: str) -> str:
    return text.replace("|", "\\|")


def graph_table(result: GraphResult, args: argparse.Namespace, chosen: float | None) -> list[str]:
    title = FAMILY_TITLES[result.family]
    info = result.info
    lines = [f"### {title}, n = {result.n:,}", ""]
    csr = info.get("csr_bytes")
    auto = result.row("auto")
    auto_time = auto.median if auto else None
    auto_mem = auto.extra_mib if auto else None
    facts = []
    if "links" in info:
        facts.append(f"{info['links']:,} links")
    if csr:
        facts.append(f"N as CSR (data+indices+indptr): {csr / 2**20:.1f} MiB")
    if csr and auto_mem is not None:
        facts.append(f"auto extra memory / CSR size: {auto_mem * 2**20 / csr:.1f}")
    lines += ["; ".join(facts) + ".", ""]

    reference = next((r for r in result.rows if r.first and r.first["max_residual"] <= TOL), None)
    ref_values = np.array(reference.first["values"]) if reference and reference.first else None
    lines += [
        "| method | detail | median s | x auto | matvecs | extra MiB | max scaled residual "
        "| max abs eigenvalue diff vs ref | flags |",
        "|---|---|---:|---:|---:|---:|---:|---:|---|",
    ]
    for row in result.rows:
        label = f"specgraph `{row.method}`" if row.ours else f"`{row.method}`"
        if row.method == "scipy-shift-invert":
            mark = " (kept)" if chosen is not None and row.shift == chosen else ""
            label = f"`{row.method}` {row.shift:g}{mark}"
        first = row.first
        if row.status == "skipped":
            lines.append(f"| {label} | | {_cell(row.note)} | | | | | | |")
            continue
        if row.status == "timeout":
            text = f"skipped (> {args.anchor_timeout:g} s)"
            lines.append(f"| {label} | | {text} | | | | | | |")
            continue
        if first is None:
            lines.append(f"| {label} | | failed: {_cell(row.note)} | | | | | | FAIL |")
            continue
        median = row.median or 0.0
        ratio = f"{median / auto_time:.2f}" if auto_time else "n/a"
        values = np.array(first["values"])
        flags = []
        if first["max_residual"] > TOL:
            flags.append("RESIDUAL")
        if row is reference:
            diff_text = "ref"
        elif ref_values is not None and values.size == ref_values.size:
            diff = float(np.max(np.abs(values - ref_values)))
            diff_text = f"{diff:.1e}"
            if diff > VALUE_SLACK:
                flags.append("EIGENVALUES")
        else:
            diff_text = "n/a"
            flags.append("EIGENVALUES" if ref_values is not None else "")
        if first.get("warnings"):
            flags.append("warned: " + "; ".join(first["warnings"])[:120])
        if not first.get("peak_reset", True):
            flags.append("peak not reset")
        timing = _fmt_seconds(median) + (f" ({len(row.times)} runs)" if len(row.times) > 1 else "")
        lines.append(
            f"| {label} | {_cell(first['detail'])} | {timing} | {ratio} | {first['matvecs']} "
            f"| {row.extra_mib:.1f} | {first['max_residual']:.1e} | {diff_text} "
            f"| {_cell(', '.join(f for f in flags if f))} |"
        )
    if reference is not None and ref_values is not None:
        shown = ", ".join(f"{v:.6g}" for v in ref_values)
        lines += ["", f"Reference eigenvalues ({reference.key}): {shown}."]
    lines.append("")
    return lines


def growth_table(results: list[GraphResult]) -> list[str]:
    road = sorted((r for r in results if r.family == "road"), key=lambda r: r.n)
    pairs = []
    for small, large in itertools.pairwise(road):
        a, b = small.row("auto"), large.row("auto")
        if a and b and a.median and b.median:
            pairs.append((small.n, large.n, a.median, b.median))
    if not pairs:
        return []
    lines = [
        "### Growth of `auto` time, road-like family",
        "",
        "| from n | to n | size ratio | time ratio | exponent log(time ratio)/log(size ratio) |",
        "|---:|---:|---:|---:|---:|",
    ]
    for n1, n2, t1, t2 in pairs:
        exponent = math.log(t2 / t1) / math.log(n2 / n1)
        lines.append(f"| {n1:,} | {n2:,} | {n2 / n1:.0f} | {t2 / t1:.1f} | {exponent:.2f} |")
    return [*lines, ""]


def blas_lines() -> list[str]:
    try:
        from threadpoolctl import threadpool_info
    except ImportError:
        return ["- threadpoolctl: not installed"]
    import scipy.sparse.linalg  # noqa: F401  (loads the BLAS/LAPACK in use)

    lines = []
    for pool in threadpool_info():
        lines.append(
            f"- thread pool: {pool.get('internal_api')} {pool.get('version')} "
            f"({pool.get('user_api')}, {pool.get('threading_layer', 'n/a')} threading), "
            f"{pool.get('num_threads')} threads"
        )
    try:
        import numba

        lines.append(f"- numba: {numba.config.NUMBA_NUM_THREADS} threads")
    except ImportError:
        pass
    return lines or ["- thread pools: none found"]


def _git_state() -> str:
    """Commit of the working tree, and whether it has uncommitted changes."""
    root = Path(__file__).resolve().parent.parent
    try:
        commit = subprocess.run(
            ["git", "-C", str(root), "rev-parse", "--short", "HEAD"],
            capture_output=True,
            text=True,
            check=True,
        ).stdout.strip()
        dirty = subprocess.run(
            ["git", "-C", str(root), "status", "--porcelain", "--untracked-files=no"],
            capture_output=True,
            text=True,
            check=True,
        ).stdout.strip()
    except (OSError, subprocess.CalledProcessError):
        return "not a git checkout"
    return f"commit {commit}" + (" with uncommitted changes" if dirty else "")


def _version(package: str) -> str:
    try:
        return version(package)
    except PackageNotFoundError:
        return "not installed"


def header(args: argparse.Namespace, argv: list[str]) -> list[str]:
    command = "python " + shlex.join(argv)
    now = dt.datetime.now(dt.UTC).astimezone()
    try:
        nproc = subprocess.run(["nproc"], capture_output=True, text=True).stdout.strip()
    except OSError:
        nproc = str(os.cpu_count())
    try:
        meminfo = Path("/proc/meminfo").read_text()
        found = re.search(r"MemTotal:\s+(\d+)", meminfo)
        mem = int(found.group(1)) if found else None
    except OSError:
        mem = None
    lines = [
        "## Eigen-solver benchmark",
        "",
        f"Command: `{command}`",
        "",
        f"- date: {now.isoformat(timespec='seconds')}",
        f"- python {platform.python_version()}, specgraph {_version('specgraph')}, "
        f"numpy {_version('numpy')}, scipy {_version('scipy')}, "
        f"scikit-learn {_version('scikit-learn')}, pyamg {_version('pyamg')}, "
        f"numba {_version('numba')}",
        f"- source: {_git_state()}",
        *blas_lines(),
        f"- nproc: {nproc}; memory: {mem / 2**20:.1f} GiB" if mem else f"- nproc: {nproc}",
        f"- k = {args.k}; target scaled residual {TOL:g}; eigenvalue slack {VALUE_SLACK:g}; "
        f"repeats = {args.repeats} (median); time limit per first run {args.anchor_timeout:g} s; "
        f"seed {args.seed}; memory cap per child {args.memory_cap:g} GiB",
        f"- stochastic block model: {SBM_GROUPS} equal groups, expected degree "
        f"{SBM_DEGREE_IN:g} inside and {SBM_DEGREE_OUT:g} across, unit weights",
        "",
    ]
    return lines


NOTES = """\
Notes:

- Times are medians of wall time (`time.perf_counter`) around one call, each run in a fresh
  process after an untimed warm-up solve on a 5,000-node road-like network (30,000 for the
  multilevel method, whose kernels have serial and parallel compilations; imports, JIT
  kernels); `x auto` divides by the `auto` median on the same network in the same run.
- Ours time `smallest_eigenpairs` on an operator built beforehand; scipy anchors get the
  same `N`; scikit-learn builds its own Laplacian from the adjacency inside the timed call.
- Extra MiB: peak RSS during the call minus RSS just before it, in a child process that has
  loaded the network and built `N` (peak reset through `/proc/self/clear_refs`, read as
  `VmHWM`); max over runs.
- matvecs: products with `N` (or `2I - N`), a block of b vectors counting b; "LU" where a
  sparse factorization does the work; "n/a" where the method does not expose it.
- Accuracy: every output is normalized, its Rayleigh quotients recomputed and its largest
  residual `||N v - lambda v|| / 2` reported. RESIDUAL flags a value above the target;
  EIGENVALUES flags eigenvalues further than the slack from the reference row (the first
  row that met the target).
"""


def report(
    results: list[GraphResult], chosen: dict[str, float | None], args: argparse.Namespace
) -> list[str]:
    lines = header(args, sys.argv)
    for result in results:
        lines += graph_table(result, args, chosen.get(f"{result.family}:{result.n}"))
    lines += growth_table(results)
    for key, shift in chosen.items():
        family, n = key.split(":")
        if shift is not None:
            lines.append(
                f"Shift-invert anchor, {FAMILY_TITLES[family]} family, n = {int(n):,}: kept "
                f"sigma = -{shift:g} x ||N|| (fastest of "
                f"{', '.join(f'{s:g}' for s in SHIFT_FRACTIONS)} at that size)."
            )
    lines += ["", NOTES]
    return lines


# --------------------------------------------------------------------------- command line


def _default_cap() -> float:
    """Half the physical memory, in GiB: a runaway factorization fails, not the machine."""
    try:
        found = re.search(r"MemTotal:\s+(\d+)", Path("/proc/meminfo").read_text())
    except OSError:
        return 0.0
    return round(int(found.group(1)) / 2**21, 1) if found else 0.0


def parse_args(argv: list[str] | None = None) -> argparse.Namespace:
    parser = argparse.ArgumentParser(
        description="Time specgraph's eigen-solvers against scipy and scikit-learn anchors.",
        formatter_class=argparse.ArgumentDefaultsHelpFormatter,
    )
    parser.add_argument(
        "--sizes",
        type=int,
        nargs="+",
        default=list(DEFAULT_SIZES),
        help="node counts of the road-like family",
    )
    parser.add_argument(
        "--sbm-sizes",
        type=int,
        nargs="*",
        default=list(DEFAULT_SBM_SIZES),
        help="node counts of the stochastic block model family",
    )
    parser.add_argument("--k", type=int, default=8, help="number of eigenpairs")
    parser.add_argument("--repeats", type=int, default=3, help="timed runs per method")
    parser.add_argument(
        "--anchor-timeout",
        type=float,
        default=300.0,
        help="seconds after which a method's first run is stopped and the method skipped "
        "(ours included) at this and larger sizes of the family",
    )
    parser.add_argument(
        "--memory-cap",
        type=float,
        default=_default_cap(),
        help="address-space cap of each child process in GiB (0: none)",
    )
    parser.add_argument(
        "--methods",
        nargs="+",
        default=None,
        help="subset of methods (ours as in specgraph.eigen.METHODS, and "
        f"{', '.join(ANCHORS)}); 'auto' is always run",
    )
    parser.add_argument(
        "--quick", action="store_true", help="smoke run: road sizes 10000 and 100000, one repeat"
    )
    parser.add_argument("--seed", type=int, default=0, help="seed of networks and start vectors")
    parser.add_argument(
        "--cache-dir", type=Path, default=DEFAULT_CACHE, help="folder of cached adjacencies (.npz)"
    )
    parser.add_argument("--out", type=Path, default=None, help="also write the report here")
    parser.add_argument("--worker", default=None, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.quick:
        args.sizes, args.repeats = list(QUICK_SIZES), 1
    if args.worker is None:
        from specgraph.eigen import METHODS

        known = set(METHODS) | set(ANCHORS)
        unknown = sorted(set(args.methods or ()) - known)
        if unknown:
            parser.error(f"unknown methods {unknown}; choose from {sorted(known)}")
        if args.k < 1 or args.repeats < 1:
            parser.error("--k and --repeats must be at least 1")
    return args


def main(argv: list[str] | None = None) -> int:
    args = parse_args(argv)
    if args.worker is not None:
        print(RESULT_MARK + json.dumps(worker(json.loads(args.worker))), flush=True)
        return 0
    logging.basicConfig(level=logging.INFO, format="%(asctime)s %(message)s", stream=sys.stderr)
    selected = set(args.methods) if args.methods else None
    families = [("road", sorted(set(args.sizes))), ("sbm", sorted(set(args.sbm_sizes)))]
    started = time.perf_counter()
    results: list[GraphResult] = []
    chosen: dict[str, float | None] = {}
    for family, sizes in families:
        if not sizes:
            continue
        shift: float | None = None
        skipped: dict[str, str] = {}
        for n in sizes:
            path = ensure_cached(args.cache_dir, family, n, args.seed)
            rows = plan_rows(n, True, shift, selected, skipped)  # tune at every size
            result = run_graph(family, n, path, rows, args)
            results.append(result)
            shift = choose_shift(result)
            chosen[f"{family}:{n}"] = shift
            for row in rows:
                # Time and memory only grow with n: do not retry what ran out of either.
                if row.status == "timeout" and row.method not in skipped:
                    skipped[row.method] = f"skipped (> {args.anchor_timeout:g} s at n = {n:,})"
                elif row.status == "failed" and not row.runs and "MemoryError" in row.note:
                    skipped.setdefault(row.method, f"skipped (out of memory at n = {n:,})")
    lines = report(results, chosen, args)
    lines.append(f"Total benchmark wall time: {time.perf_counter() - started:.0f} s.")
    text = "\n".join(lines) + "\n"
    sys.stdout.write(text)
    if args.out is not None:
        args.out.parent.mkdir(parents=True, exist_ok=True)
        args.out.write_text(text)
    return 0


if __name__ == "__main__":
    sys.exit(main())
