"""Measure each eigen-solver's time against the work counts of ``specgraph.eigen._cost``.

The ``auto`` rule of :func:`specgraph.smallest_eigenpairs` predicts each
method's time from the component's size, stored entries, number of pairs and
the envelope of its matrix in reverse Cuthill-McKee order, with constants
fitted to measurements. This script makes those measurements and the fit:

1. For each network (road-like and stochastic block model families at several
   sizes, and the open infrastructure networks of ``real_networks.py``) and
   each ``k``, it times ``smallest_eigenpairs(N, k, method=m, rng=0)`` on the
   normalized Laplacian for ``m`` in dense, lanczos, multilevel, lanczos_flip,
   and scipy's ``eigsh(N, k, sigma=-2e-7, which="LM", tol=1e-6)`` as the anchor.
   Each network and method runs in its own child process (after an untimed
   warm-up solve that loads imports and compiled kernels), the ``k`` in
   increasing order; a child stopped by ``--timeout`` keeps what it printed.
   Times are medians of ``--repeats`` runs (one run above 2 s).
2. It fits the constants of the cost model by non-negative least squares on
   relative error (each row divided by its measured time) and prints them,
   with each method's predicted and measured times, the method ``auto``
   chooses with the library's constants, and its time against the fastest.

Measurements are cached in ``benchmarks/.cache/solver_cost.json`` (``--refit``
prints the tables again from it without measuring).

Usage::

    python benchmarks/real_networks.py          # once: fetch and convert the networks
    python benchmarks/probe_solver_cost.py      # about 40 minutes on 2 cores
    python benchmarks/probe_solver_cost.py --refit
"""

from __future__ import annotations

import argparse
import json
import statistics
import subprocess
import sys
import time
from pathlib import Path
from typing import Any

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

#: Networks measured by default: family:size or real:name.
DEFAULT_NETWORKS = (
    *(f"road:{n}" for n in (1000, 3000, 10000, 30000, 100000, 300000)),
    *(f"sbm:{n}" for n in (1000, 2000, 4000, 8000, 16000)),
    *(
        f"real:{name}"
        for name in (
            "ky4",
            "ky10",
            "Net6",
            "case1888rte",
            "case2848rte",
            "case3120sp",
            "case6470rte",
            "case9241pegase",
            "backbone-europe",
            "backbone-eastern",
            "backbone-world",
        )
    ),
)
DEFAULT_KS = (2, 9, 25, 51)
METHODS = ("dense", "lanczos", "multilevel", "lanczos_flip", "eigsh")
#: Methods timed only up to a size: ``dense`` (8 n^2 bytes, n^3 flops) and
#: ``lanczos_flip`` (hopeless on large near-planar networks, and not fitted).
MAX_NODES = {"dense": 4000, "lanczos_flip": 10_000}
#: The anchor's shift, as ``bench_eigen.py``'s best at these sizes (1e-7 x ||N|| = 2).
EIGSH_SIGMA = -2e-7
#: A run longer than this is timed once, not ``--repeats`` times.
SLOW_SECONDS = 2.0
CACHE = HERE / ".cache" / "solver_cost.json"
MARK = "@@ROW "


# --------------------------------------------------------------------------- child


def build(spec: str) -> Any:
    """The network of one spec (largest component for real networks)."""
    import specgraph as sg

    family, arg = spec.split(":", 1)
    if family == "road":
        return sg.gallery.road_like(int(arg), rng=0)
    if family == "sbm":
        from bench_eigen import sbm_adjacency

        adjacency = sbm_adjacency(int(arg), 0)
        return sg.Network(adjacency, np.arange(adjacency.shape[0]).astype(str))
    from real_networks import SOURCES, load

    source = next(s for s in SOURCES if s.name == arg)
    net = load(source)
    network = sg.read_edges(str(net.edges), weight="weight", distance=net.weight_is_distance)
    return network


def child(spec: str, method: str, ks: list[int], repeats: int) -> None:
    import scipy.sparse as sp
    from scipy.sparse.csgraph import connected_components
    from scipy.sparse.linalg import eigsh

    from specgraph import gallery, laplacian, smallest_eigenpairs
    from specgraph.eigen._cost import envelope
    from specgraph.eigen._lanczos import factorize

    network = build(spec)
    if network.n_nodes > MAX_NODES.get(method, network.n_nodes):
        return
    op = laplacian(network, kind="normalized")
    matrix = op.matrix
    count, labels = connected_components(matrix, directed=False)
    largest = int(np.bincount(labels).max())
    start = time.perf_counter()
    env = envelope(matrix)
    env_seconds = time.perf_counter() - start
    info: dict[str, Any] = {
        "spec": spec,
        "n": int(matrix.shape[0]),
        "nnz": int(matrix.nnz),
        "components": int(count),
        "largest": largest,
        "envelope": env.size,
        "work": env.work,
        "envelope_seconds": env_seconds,
    }
    if method == "lanczos":
        start = time.perf_counter()
        factor = factorize(matrix, 2e-7)
        info["factor_seconds"] = time.perf_counter() - start
        info["fill"] = int(factor.L.nnz + factor.U.nnz)
        del factor
    # Warm-up: imports, compiled kernels (both compilations for multilevel).
    warm = laplacian(gallery.road_like(30_000 if method == "multilevel" else 3000, rng=1))
    if method == "eigsh":
        eigsh(warm.matrix, 3, sigma=EIGSH_SIGMA, which="LM", tol=1e-6)
    else:
        smallest_eigenpairs(warm, 3, method=method, rng=0)
    for k in ks:
        if k >= matrix.shape[0]:
            continue
        times, used, matvecs = [], method, 0
        for _ in range(repeats):
            start = time.perf_counter()
            if method == "eigsh":
                v0 = np.random.default_rng(0).standard_normal(matrix.shape[0])
                eigsh(sp.csr_array(matrix), k, sigma=EIGSH_SIGMA, which="LM", tol=1e-6, v0=v0)
            else:
                result = smallest_eigenpairs(op, k, method=method, rng=0)
                used, matvecs = result.method, result.matvecs
            times.append(time.perf_counter() - start)
            if times[-1] > SLOW_SECONDS:
                break
        row = {**info, "method": method, "k": k, "seconds": statistics.median(times)}
        row.update(runs=len(times), used=used, matvecs=matvecs)
        print(MARK + json.dumps(row), flush=True)


# --------------------------------------------------------------------------- parent


def measure(args: argparse.Namespace) -> list[dict[str, Any]]:
    rows: list[dict[str, Any]] = []
    for spec in args.networks:
        for method in args.methods:
            command = [sys.executable, __file__, "--child", spec, method]
            command += ["--ks", *map(str, args.ks), "--repeats", str(args.repeats)]
            started = time.perf_counter()
            try:
                done = subprocess.run(command, capture_output=True, text=True, timeout=args.timeout)
                out, status = done.stdout, "ok" if done.returncode == 0 else "failed"
            except subprocess.TimeoutExpired as stopped:
                raw = stopped.stdout or b""
                out = raw.decode() if isinstance(raw, bytes) else raw
                status = "timeout"
            found = [json.loads(x[len(MARK) :]) for x in out.splitlines() if x.startswith(MARK)]
            rows += found
            done_ks = {r["k"] for r in found}
            for k in args.ks:
                if k not in done_ks and status != "ok":
                    rows.append({"spec": spec, "method": method, "k": k, "status": status})
            print(
                f"{spec} {method}: {len(found)} rows, {status}, "
                f"{time.perf_counter() - started:.0f} s",
                file=sys.stderr,
                flush=True,
            )
    return rows


def _nnls_relative(rows: list[dict[str, Any]], features, offset=None) -> np.ndarray:
    """Non-negative least squares of ``offset + features . c`` against seconds, relative error."""
    from scipy.optimize import nnls

    seconds = np.array([r["seconds"] for r in rows])
    a = np.array([features(r) for r in rows], dtype=float) / seconds[:, None]
    b = np.ones(len(rows))
    if offset is not None:
        b -= np.array([offset(r) for r in rows]) / seconds
    scale = a.max(axis=0)
    scale[scale == 0] = 1.0
    coef, _ = nnls(a / scale, b)
    return coef / scale


def _width(k: int) -> int:
    from specgraph.eigen._multilevel import GUARD_SHARE, MIN_GUARD

    return k + max(MIN_GUARD, int(GUARD_SHARE * k))


#: Factorizations whose envelope work is below this are dominated by fixed
#: costs (milliseconds) and do not set the factor bound.
WORK_FLOOR = 1e8


def fit(rows: list[dict[str, Any]]) -> dict[str, float]:
    """Every constant of the cost model from the measurements (see the module docstring)."""
    from specgraph.eigen._cost import _basis

    timed = [r for r in rows if "seconds" in r and r.get("components", 1) == 1]
    fitted: dict[str, float] = {}
    dense = [r for r in timed if r["method"] == "dense"]
    if dense:
        (fitted["DENSE_SECONDS_PER_CUBE"],) = _nnls_relative(dense, lambda r: [r["n"] ** 3])
    multi = [r for r in timed if r["method"] == "multilevel"]
    if len(multi) >= 4:
        coef = _nnls_relative(
            multi,
            lambda r: [1.0, r["n"], r["nnz"] * _width(r["k"]), r["n"] * _width(r["k"]) ** 2],
        )
        names = ("", "_PER_NODE", "_PER_PRODUCT", "_PER_PASS")
        fitted.update(
            {f"MULTILEVEL_SECONDS{x}": float(c) for x, c in zip(names, coef, strict=True)}
        )
    factors = {r["spec"]: r for r in rows if "factor_seconds" in r}
    bounded = [r["factor_seconds"] / r["work"] for r in factors.values() if r["work"] >= WORK_FLOOR]
    if bounded:
        fitted["FACTOR_SECONDS_PER_WIDTH2"] = max(bounded)
    lanczos = [r for r in timed if r["method"] == "lanczos" and r["spec"] in factors]
    if len(lanczos) >= 3:
        a, b = steps_fit(rows)
        fitted["LANCZOS_STEPS_PER_PAIR"], fitted["LANCZOS_STEPS_BASE"] = a, b
        coef = _nnls_relative(
            lanczos,
            lambda r: [
                (a * r["k"] + b) * factors[r["spec"]]["fill"],
                (a * r["k"] + b) * r["n"] * _basis(r["n"], r["k"]),
            ],
            offset=lambda r: factors[r["spec"]]["factor_seconds"],
        )
        fitted["SOLVE_SECONDS_PER_ENTRY"], fitted["ORTH_SECONDS_PER_ENTRY"] = map(float, coef)
    return fitted


def steps_fit(rows: list[dict[str, Any]]) -> tuple[float, float]:
    """Least-squares line ``solves = a k + b`` over the shift-invert runs.

    A run's solves are its matvecs less the ``k`` products of the final
    Rayleigh-Ritz step (more when a verification run found a missed value).
    """
    data = [
        (r["k"], r["matvecs"] - r["k"]) for r in rows if r["method"] == "lanczos" and "matvecs" in r
    ]
    data = [d for d in data if d[1] > 0]
    ks = np.array([d[0] for d in data], dtype=float)
    solves = np.array([d[1] for d in data], dtype=float)
    a, b = np.polyfit(ks, solves, 1)
    return float(a), float(b)


def steps_table(rows: list[dict[str, Any]]) -> list[str]:
    """Solves per shift-invert solve against k (the step model's data), per k."""
    from specgraph.eigen import _cost

    a, b = steps_fit(rows)
    lines = [
        f"Least squares: solves = {a:.3g} k + {b:.3g} (library: "
        f"{_cost.LANCZOS_STEPS_PER_PAIR:g} k + {_cost.LANCZOS_STEPS_BASE:g}).",
        "",
        "| k | solves: min | median | max | networks |",
        "|---:|---:|---:|---:|---:|",
    ]
    by_k: dict[int, list[int]] = {}
    for r in rows:
        if r["method"] == "lanczos" and "matvecs" in r:
            by_k.setdefault(r["k"], []).append(r["matvecs"] - r["k"])
    for k, solves in sorted(by_k.items()):
        lines.append(
            f"| {k} | {min(solves)} | {statistics.median(solves):g} | {max(solves)} "
            f"| {len(solves)} |"
        )
    return lines


def model_errors(rows: list[dict[str, Any]]) -> list[str]:
    """Measured over predicted seconds per method, with the library's constants."""
    from specgraph.eigen import _cost

    factors = {r["spec"]: r for r in rows if "fill" in r}

    def predicted(r: dict[str, Any]) -> float | None:
        if r["method"] == "dense":
            return _cost.dense_seconds(r["n"])
        if r["method"] == "multilevel":
            return _cost.multilevel_seconds(r["n"], r["nnz"], r["k"])
        if r["method"] == "lanczos" and r["spec"] in factors:
            f = factors[r["spec"]]
            return f["factor_seconds"] + _cost.lanczos_seconds(r["n"], r["k"], f["fill"])
        return None

    lines = [
        "| method | runs | measured / predicted: min | median | max |",
        "|---|---:|---:|---:|---:|",
    ]
    for method in ("dense", "lanczos", "multilevel"):
        ratios = [
            r["seconds"] / p
            for r in rows
            if r["method"] == method and "seconds" in r and (p := predicted(r))
        ]
        if ratios:
            lines.append(
                f"| {method} | {len(ratios)} | {min(ratios):.2g} | "
                f"{statistics.median(ratios):.2g} | {max(ratios):.2g} |"
            )
    return [
        *lines,
        "",
        "(`lanczos`: the factorization as measured plus the predicted steps with the real fill.)",
    ]


def decision(row: dict[str, Any], fill: int | None) -> tuple[Any, str]:
    """What ``auto`` decides for one network and k, with the library's constants."""
    from specgraph.eigen import _cost

    env = _cost.Envelope(row["n"], row["nnz"], row["envelope"], row["work"], None)
    allowed = ("dense", "lanczos", "lanczos_flip", "multilevel")
    first = _cost.forecast(env, row["k"], allowed)
    if first.trial and fill is not None:
        return _cost.settle(first, row["n"], row["k"], fill), "tried"
    return first, ""


def report(rows: list[dict[str, Any]]) -> list[str]:
    from specgraph.eigen import _cost

    fitted = fit(rows)
    lines = ["#### Fitted constants", ""]
    lines += ["| constant | fitted | library |", "|---|---:|---:|"]
    for name, value in fitted.items():
        lines.append(f"| `{name}` | {value:.3g} | {getattr(_cost, name):.3g} |")
    lines += ["", "#### Measured against predicted (library constants)", ""]
    lines += model_errors(rows)
    lines += ["", "#### Measured seconds and the `auto` choice", ""]
    lines += [
        "| network | n | nnz | E/nnz | fill / bound | k | dense | lanczos | multilevel "
        "| lanczos_flip | scipy eigsh | forecast: dense / lanczos bound / multilevel "
        "| trial gate | auto | auto / fastest |",
        "|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---|---:|---|---:|",
    ]
    by_key: dict[tuple[str, int], dict[str, dict[str, Any]]] = {}
    for r in rows:
        by_key.setdefault((r["spec"], r["k"]), {})[r["method"]] = r
    fills = {r["spec"]: r["fill"] for r in rows if "fill" in r}
    factor_times = {r["spec"]: r["factor_seconds"] for r in rows if "factor_seconds" in r}
    for (spec, k), cells in by_key.items():
        some = next((c for c in cells.values() if "n" in c), None)
        if some is None:
            continue
        n = some["n"]
        fc, tried = decision(some, fills.get(spec))
        others = [fc.seconds[m] for m in ("dense", "multilevel") if m not in fc.excluded]
        env = _cost.Envelope(n, some["nnz"], some["envelope"], some["work"], None)
        gate = _cost.factor_seconds(env) / min(others)

        def cell(method: str, cells: dict[str, dict[str, Any]] = cells) -> str:
            c = cells.get(method)
            if c is None:
                return ""
            return f"{c['seconds']:.3g}" if "seconds" in c else c.get("status", "")

        timed = {m: c["seconds"] for m, c in cells.items() if "seconds" in c and m != "eigsh"}
        ratio = ""
        if fc.method in timed:
            spent = timed[fc.method]
            if tried and fc.method != "lanczos":  # the lost trial's factorization
                spent += factor_times.get(spec, 0.0)
            ratio = f"{spent / min(timed.values()):.2f}"
        fill = fills.get(spec)
        share = f"{fill / (2 * (some['envelope'] + n)):.3f}" if fill else ""
        predicted = " / ".join(
            f"{fc.seconds[m]:.2g}" + ("x" if m in fc.excluded else "")
            for m in ("dense", "lanczos", "multilevel")
        )
        pick = fc.method + (f" ({tried})" if tried else "")
        lines.append(
            f"| {spec} | {n:,} | {some['nnz']:,} | {some['envelope'] / some['nnz']:.3g} "
            f"| {share} | {k} | {cell('dense')} | {cell('lanczos')} | {cell('multilevel')} "
            f"| {cell('lanczos_flip')} | {cell('eigsh')} | {predicted} | {gate:.2g} "
            f"| {pick} | {ratio} |"
        )
    lines += [
        "",
        "`fill / bound`: entries of the minimum-degree factors (the solver's) over the "
        "envelope bound `2 (E + n)`. `x`: excluded by a guard. `trial gate`: the factor's "
        "time bound over the best other prediction (a trial needs at most "
        f"{_cost.TRIAL_SHARE:g}). `(tried)`: decided after the trial factorization, with "
        "the factor's real fill. `auto / fastest`: measured time of the method `auto` "
        "picks (library constants; plus the factorization of a lost trial) over the "
        "fastest of ours; `lanczos_flip` is not a "
        "forecast choice (the multilevel solver hands over to it where it finds a wide "
        "gap), so where it was fastest the ratio is against it.",
        "",
        "#### Shift-invert solves against k",
        "",
        *steps_table(rows),
    ]
    return lines


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--networks", nargs="+", default=list(DEFAULT_NETWORKS))
    parser.add_argument("--methods", nargs="+", default=list(METHODS))
    parser.add_argument("--ks", type=int, nargs="+", default=list(DEFAULT_KS))
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--timeout", type=float, default=240.0, help="seconds per child")
    parser.add_argument("--refit", action="store_true", help="report from the cache only")
    parser.add_argument("--child", nargs=2, default=None, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.child:
        child(args.child[0], args.child[1], args.ks, args.repeats)
        return 0
    if args.refit:
        rows = json.loads(CACHE.read_text())
    else:
        rows = measure(args)
        CACHE.parent.mkdir(parents=True, exist_ok=True)
        old = json.loads(CACHE.read_text()) if CACHE.exists() else []
        fresh = {(r["spec"], r["method"], r["k"]) for r in rows}
        kept = [r for r in old if (r["spec"], r["method"], r["k"]) not in fresh]
        rows = kept + rows
        CACHE.write_text(json.dumps(rows, indent=1))
    command = "python benchmarks/probe_solver_cost.py " + " ".join(argv or sys.argv[1:])
    print(f"Command: `{command.strip()}`\n")
    print("\n".join(report(rows)))
    return 0


if __name__ == "__main__":
    sys.exit(main())
