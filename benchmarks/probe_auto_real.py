"""``method="auto"`` against every eigen-solver and scipy's shift-invert ``eigsh`` on real networks.

For each network (the open infrastructure networks of ``real_networks.py``, and
generated ones given as ``road:n`` or ``sbm:n``) and each ``k``, one child
process builds the normalized Laplacian ``N`` and times, round-robin over
``--repeats`` rounds so that drift on a shared machine hits them alike:

* ``smallest_eigenpairs(N, k, method=m, rng=0)`` for ``m`` in auto, dense
  (up to 4,000 nodes), lanczos, lanczos_flip and multilevel;
* scipy's ``eigsh(N, k, sigma=-2e-7, which="LM", tol=1e-6)`` (the anchor:
  ARPACK in shift-invert mode, SuperLU's default ordering).

Each method runs once untimed first (imports, compiled kernels). A method whose
first timed run exceeds ``--slow`` seconds is timed once. Reported: medians,
each method's ratio to the anchor, the method ``auto`` ran and its reason (the
predicted seconds), and the largest difference of the eigenvalues from the
anchor's.

Usage::

    python benchmarks/real_networks.py        # once: fetch and convert the networks
    python benchmarks/probe_auto_real.py      # about 15 minutes on 2 cores
    python benchmarks/probe_auto_real.py --networks real:Net6 road:100000 --ks 9
"""

from __future__ import annotations

import argparse
import contextlib
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

DEFAULT_NETWORKS = (
    "real:ky4",
    "real:backbone-europe",
    "real:case1888rte",
    "real:backbone-eastern",
    "real:case2848rte",
    "real:case3120sp",
    "real:Net6",
    "real:backbone-world",
    "real:case6470rte",
    "real:case9241pegase",
    "road:100000",
    "sbm:16000",
)
DEFAULT_KS = (9, 51)
OURS = ("auto", "dense", "lanczos", "lanczos_flip", "multilevel")
ANCHOR = "eigsh"
#: ``dense`` is run up to this many nodes.
DENSE_MAX_N = 4000
EIGSH_SIGMA = -2e-7
MARK = "@@ROW "


def child(spec: str, ks: list[int], repeats: int, slow: float, skip: list[str]) -> None:
    import scipy.sparse as sp
    from probe_solver_cost import build
    from scipy.sparse.linalg import eigsh

    from specgraph import ConvergenceError, laplacian, smallest_eigenpairs

    op = laplacian(build(spec), kind="normalized")
    matrix = sp.csr_array(op.matrix)
    n = matrix.shape[0]
    methods = [m for m in (*OURS, ANCHOR) if m not in skip]
    if n > DENSE_MAX_N and "dense" in methods:
        methods.remove("dense")

    def run(method: str, k: int) -> tuple[np.ndarray, str, str]:
        if method == ANCHOR:
            v0 = np.random.default_rng(0).standard_normal(n)
            values = eigsh(matrix, k, sigma=EIGSH_SIGMA, which="LM", tol=1e-6, v0=v0)[0]
            return np.sort(values), "eigsh", ""
        result = smallest_eigenpairs(op, k, method=method, rng=0)
        return result.values, result.method, result.reason

    for method in methods:  # untimed: imports, compiled kernels
        with contextlib.suppress(ConvergenceError):  # the timed runs report it
            run(method, 3)
    for k in ks:
        times: dict[str, list[float]] = {m: [] for m in methods}
        out: dict[str, tuple[np.ndarray, str, str]] = {}
        failed: dict[str, str] = {}
        for _ in range(repeats):
            for method in methods:
                if method in failed or (times[method] and times[method][0] > slow):
                    continue
                start = time.perf_counter()
                try:
                    out[method] = run(method, k)
                except ConvergenceError as error:
                    failed[method] = f"failed: residual {error.partial.max_residual:.1e}"
                    continue
                times[method].append(time.perf_counter() - start)
        anchor = out.get(ANCHOR)
        for method, status in failed.items():
            print(
                MARK
                + json.dumps({"spec": spec, "n": n, "k": k, "method": method, "status": status})
            )
        for method in out:
            values, used, reason = out[method]
            diff = float(np.max(np.abs(values - anchor[0]))) if anchor is not None else None
            row = {
                "spec": spec,
                "n": n,
                "k": k,
                "method": method,
                "seconds": statistics.median(times[method]),
                "runs": len(times[method]),
                "used": used,
                "reason": reason,
                "diff": diff,
            }
            print(MARK + json.dumps(row), flush=True)


def table(rows: list[dict[str, Any]], ks: list[int]) -> list[str]:
    columns = [*OURS, ANCHOR]
    lines = [
        "| network | n | k | " + " | ".join(columns) + " | auto ran | auto / eigsh "
        "| max eigenvalue diff vs eigsh |",
        "|---|---:|---:|" + "---:|" * len(columns) + "---|---:|---:|",
    ]
    keyed: dict[tuple[str, int], dict[str, dict[str, Any]]] = {}
    for r in rows:
        keyed.setdefault((r["spec"], r["k"]), {})[r["method"]] = r
    reasons = []
    for (spec, k), cells in keyed.items():
        some = next(iter(cells.values()))
        anchor = cells.get(ANCHOR, {}).get("seconds")

        def cell(method: str, cells: dict[str, dict[str, Any]] = cells) -> str:
            c = cells.get(method)
            if c is None:
                return ""
            if "seconds" not in c:
                return c.get("status", "")
            note = f" ({c['used']})" if c["used"] != method and method != "auto" else ""
            return f"{c['seconds']:.3g}{note}"

        auto = cells.get("auto", {})
        ratio = f"{auto['seconds'] / anchor:.2f}" if anchor and "seconds" in auto else ""
        if not anchor and "seconds" in auto:  # no anchor: against the fastest of ours
            fastest = min(c["seconds"] for c in cells.values() if "seconds" in c)
            ratio = f"{auto['seconds'] / fastest:.2f} (of fastest)"
        diffs = [c["diff"] for c in cells.values() if c.get("diff") is not None]
        diff = f"{max(diffs):.1e}" if diffs else ""
        name = spec.split(":", 1)[1] if spec.startswith("real:") else spec
        lines.append(
            f"| {name} | {some['n']:,} | {k} | "
            + " | ".join(cell(m) for m in columns)
            + f" | {auto.get('used', '')} | {ratio} | {diff} |"
        )
        if auto.get("reason"):
            reasons.append(f"- {spec}, k = {k}: {auto['reason']}")
    return [*lines, "", "Reasons recorded by `auto` (`EigenResult.reason`):", "", *reasons]


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--networks", nargs="+", default=list(DEFAULT_NETWORKS))
    parser.add_argument("--ks", type=int, nargs="+", default=list(DEFAULT_KS))
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--slow", type=float, default=5.0, help="time once above this (s)")
    parser.add_argument("--timeout", type=float, default=900.0, help="seconds per network")
    parser.add_argument(
        "--skip", nargs="*", default=[], help="methods left out (e.g. lanczos_flip on large)"
    )
    parser.add_argument("--child", default=None, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.child:
        child(args.child, args.ks, args.repeats, args.slow, args.skip)
        return 0
    rows: list[dict[str, Any]] = []
    for spec in args.networks:
        command = [sys.executable, __file__, "--child", spec, "--ks", *map(str, args.ks)]
        command += ["--repeats", str(args.repeats), "--slow", str(args.slow)]
        if args.skip:
            command += ["--skip", *args.skip]
        started = time.perf_counter()
        try:
            done = subprocess.run(command, capture_output=True, text=True, timeout=args.timeout)
            out, status = done.stdout, ("ok" if done.returncode == 0 else done.stderr[-300:])
        except subprocess.TimeoutExpired as stopped:
            raw = stopped.stdout or b""
            out, status = (raw.decode() if isinstance(raw, bytes) else raw), "timeout"
        found = [json.loads(x[len(MARK) :]) for x in out.splitlines() if x.startswith(MARK)]
        rows += found
        print(
            f"{spec}: {len(found)} rows, {status}, {time.perf_counter() - started:.0f} s",
            file=sys.stderr,
            flush=True,
        )
    command = "python benchmarks/probe_auto_real.py " + " ".join(argv or sys.argv[1:])
    print(f"Command: `{command.strip()}`\n")
    print("\n".join(table(rows, args.ks)))
    return 0


if __name__ == "__main__":
    sys.exit(main())
