"""What limits the multilevel eigen-solver: a diagnostic, not a benchmark.

The eigen-engine issue sets goals at 1,000,000 road-like nodes (10x faster than
the fastest anchor, memory at most 4x the CSR matrix). This script measures the
quantities that decide how close the multilevel method can get, on the same
cached road-like network as ``bench_eigen.py``:

1. **Preconditioner strength.** The finest-level preconditioner approximates
   ``N^+ b`` by ``s`` flexible-CG steps, each one K-cycle. It prints the
   relative residual ``||b - N x|| / ||b||`` for random right-hand sides
   (orthogonal to the null vector) after ``s`` steps.
2. **Finest-level iterations for a given preconditioner.** From the same
   start block (the solver's cascade, interpolated and Chebyshev-filtered), it
   counts the LOBPCG iterations to the target residual with (a) the solver's
   own preconditioner, (b) an exact solve with ``N + 1e-9 I`` by scipy's
   ``splu`` (the best any preconditioner can do: a lower bound on the count),
   and, with ``--pyamg``, (c) one pyamg smoothed-aggregation V-cycle.
3. **Cost of one finest iteration.** Medians of the parts: the preconditioner,
   the two fused products with a block, and the block passes of the
   Rayleigh-Ritz step; and, for scale, one scipy product with a single vector.
4. **Cost before the finest iterations** (one run each, after a warm-up solve
   that loads the compiled kernels): reordering, hierarchy, cascade, start filter.

Run (the network is cached by ``bench_eigen.py``; about 2 minutes at 1,000,000
nodes with the exact solve, which needs about 3 GiB)::

    python benchmarks/probe_eigen_limits.py --n 1000000
    python benchmarks/probe_eigen_limits.py --n 100000 --pyamg
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from collections.abc import Callable
from pathlib import Path

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

sys.path.insert(0, str(Path(__file__).resolve().parent))

import bench_eigen as be

from specgraph import Network, gallery, laplacian, smallest_eigenpairs
from specgraph.eigen import _kernels as kern
from specgraph.eigen import _lobpcg, _multilevel
from specgraph.eigen._hierarchy import build_hierarchy
from specgraph.eigen._problem import Problem

#: Scaled residual target of the benchmark (as ``bench_eigen.py``).
TARGET = 1e-6

#: Pairs asked for, as in the benchmark (the trivial pair included).
K = 8


def _median_ms(func: Callable[[], object], repeats: int = 7) -> float:
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        func()
        times.append(time.perf_counter() - start)
    return 1e3 * statistics.median(times)


def _count_iterations(
    matrix: sp.csr_array,
    start: np.ndarray,
    null: np.ndarray,
    precondition: Callable[[np.ndarray, np.ndarray], object],
    tol: float,
) -> tuple[int, list[float]]:
    history: list[float] = []
    blocks = _lobpcg.CsrBlocks(matrix)
    original = blocks.residuals

    def residuals(x, values, p, out):  # type: ignore[no-untyped-def]
        result = original(x, values, p, out)
        history.append(float(np.sqrt(result[2][: K - 1]).max()) / 2.0)
        return result

    blocks.residuals = residuals  # type: ignore[method-assign]
    outcome = _lobpcg.lobpcg(
        blocks, precondition, start.copy(), null, count=K - 1, tol=tol, maxiter=60
    )
    return outcome.iterations, history


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--n", type=int, default=1_000_000, help="road-like network size")
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--pyamg", action="store_true", help="also try a pyamg SA V-cycle")
    parser.add_argument("--no-exact", action="store_true", help="skip the exact (LU) solve")
    parser.add_argument("--cache-dir", type=Path, default=Path(__file__).parent / ".cache")
    args = parser.parse_args(argv)

    # Load the compiled kernels (serial and parallel) before anything is timed.
    warm = laplacian(gallery.road_like(be.MULTILEVEL_WARMUP_N, rng=args.seed + 1))
    smallest_eigenpairs(warm, K, rng=0)
    adjacency = be.load_adjacency(be.ensure_cached(args.cache_dir, "road", args.n, args.seed))
    op = laplacian(Network(adjacency, np.arange(args.n).astype(str)), kind="normalized")
    problem = Problem(
        op.matrix, op.null_basis[:, 0], op.norm_bound, K - 1, TARGET, None,
        np.random.default_rng(0),
    )  # fmt: skip
    setup: dict[str, float] = {}
    clock = time.perf_counter()
    matrix, null, _ = _multilevel._reordered(problem)
    setup["reorder (reverse Cuthill-McKee and the permuted copy)"] = time.perf_counter() - clock
    guard = max(_multilevel.MIN_GUARD, int(_multilevel.GUARD_SHARE * problem.count))
    width = problem.count + guard
    clock = time.perf_counter()
    hierarchy = build_hierarchy(matrix, null, width=width)
    setup["hierarchy (aggregation, coarse operators, dense core)"] = time.perf_counter() - clock
    print(f"# Limits of the multilevel eigen-solver, road-like n = {args.n:,}\n")
    print(f"levels: {hierarchy.sizes}; block width {width}\n")

    # 1. preconditioner strength
    rng = np.random.default_rng(1)
    rhs = rng.standard_normal((args.n, 4))
    rhs -= null[:, None] * (null @ rhs)
    print("## 1. Preconditioner: relative residual after s flexible-CG steps (4 random rhs)\n")
    print("| s | relative residual |\n|---:|---|")
    for steps in (1, 2, 3, 4, 6, 8):
        x = hierarchy.solve(0, rhs.astype(np.float32), steps).astype(np.float64)
        rel = np.linalg.norm(rhs - matrix @ x, axis=0) / np.linalg.norm(rhs, axis=0)
        print(f"| {steps} | {np.array2string(rel, precision=2)} |")
    print(
        f"\nThe solver uses {_multilevel.PRECONDITIONER_STEPS} steps; a preconditioner"
        " as good as an exact solve would leave about 1e-6.\n"
    )

    # 2. iterations from the same start
    clock = time.perf_counter()
    start, _, _ = _multilevel._cascade(hierarchy, problem, width)
    setup["cascade down to the finest level"] = time.perf_counter() - clock
    clock = time.perf_counter()
    start = _multilevel._filtered(
        matrix, start, problem.norm_bound, _multilevel.START_FILTER_DEGREE
    )
    setup["start filter on the finest level"] = time.perf_counter() - clock
    tol = TARGET * problem.norm_bound
    nullb = null.reshape(-1, 1)
    rows = []
    its, hist = _count_iterations(
        matrix,
        start,
        nullb,
        lambda r, out: hierarchy.precondition(0, r, _multilevel.PRECONDITIONER_STEPS, out),
        tol,
    )
    rows.append(("ours (K-cycle, flexible CG)", its, hist))
    if not args.no_exact:
        lu = spla.splu(sp.csc_matrix(matrix + 1e-9 * sp.identity(args.n)))

        def exact(r: np.ndarray, out: np.ndarray) -> None:
            out[...] = lu.solve(np.asarray(r, dtype=np.float64))

        its, hist = _count_iterations(matrix, start, nullb, exact, tol)
        rows.append(("exact solve (scipy splu)", its, hist))
        del lu
    if args.pyamg:
        import pyamg

        ml = pyamg.smoothed_aggregation_solver(
            sp.csr_matrix(matrix), B=null[:, None], symmetry="symmetric", max_coarse=500,
            coarse_solver="pinv",
        )  # fmt: skip
        cycle = ml.aspreconditioner(cycle="V")

        def amg(r: np.ndarray, out: np.ndarray) -> None:
            for c in range(r.shape[1]):
                out[:, c] = cycle @ np.ascontiguousarray(r[:, c], dtype=np.float64)

        its, hist = _count_iterations(matrix, start, nullb, amg, tol)
        rows.append(("pyamg smoothed aggregation, one V-cycle", its, hist))
    print("## 2. Finest-level LOBPCG iterations from the same start block\n")
    print("| preconditioner | iterations | largest scaled residual per iteration |")
    print("|---|---:|---|")
    for name, its, hist in rows:
        print(f"| {name} | {its} | {' '.join(f'{h:.1e}' for h in hist)} |")

    # 3. cost of one finest iteration
    kern.threads_for(args.n)
    x = np.ascontiguousarray(start)
    w = np.random.default_rng(2).standard_normal(x.shape)
    p = np.random.default_rng(3).standard_normal(x.shape)
    blocks = _lobpcg.CsrBlocks(matrix)
    values = np.zeros(width)
    out = np.empty_like(x)
    k = np.eye(width)
    empty = x[:, :0]
    parts = {
        "preconditioner": _median_ms(
            lambda: hierarchy.precondition(0, w.copy(), _multilevel.PRECONDITIONER_STEPS, out),
            3,
        ),
        "residuals (fused product)": _median_ms(lambda: blocks.residuals(x, values, p, out)),
        "projections (fused product)": _median_ms(lambda: blocks.projections(w, x, w, p)),
        "Gram matrix of [X W P]": _median_ms(lambda: _lobpcg._gram([x, w, p])),
        "orthogonalize W": _median_ms(lambda: _lobpcg._orthogonalize(out, nullb, x, passes=1)),
        "update P and X": _median_ms(
            lambda: (kern.combine(w, k, p, k, empty, k[:0], out), kern.combine_add(x, k, p, out))
        ),
    }
    vector = np.ones(args.n)
    parts["(scipy product with one vector)"] = _median_ms(lambda: matrix @ vector)
    print(
        f"\n## 3. One finest-level iteration at n = {args.n:,}, block width {width} (median ms)\n"
    )
    print("| part | ms |\n|---|---:|")
    for name, ms in parts.items():
        print(f"| {name} | {ms:.1f} |")
    print("\n## 4. Before the finest iterations (one run, s)\n")
    print("| part | s |\n|---|---:|")
    for name, seconds in setup.items():
        print(f"| {name} | {seconds:.2f} |")


if __name__ == "__main__":
    main()
