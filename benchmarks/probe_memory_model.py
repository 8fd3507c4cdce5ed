"""Measure the peak memory of each stage of a zoning and fit the memory model of the guard.

The memory guard (:mod:`specgraph._guard`) estimates the peak resident memory
of a run stage by stage, from the node count ``n``, the link count ``m`` and
the zone count ``k``::

    peak(stage) = BASE + per_node * n + per_link * m + per_node_zone * n * k

This probe measures those peaks and fits the coefficients. For each network
(``gallery.road_like`` written as an edge table of ``R<i>`` ids, as
``benchmarks/bench_real.py`` writes them) it starts a fresh Python process
that runs the command line's steps one after the other, in the order
``specgraph zones EDGES --zones K`` runs them:

1. ``reading the table``: :func:`specgraph.io.read_table` (CSV; a Parquet copy
   is measured beside it when pyarrow is installed);
2. ``building the network``: :func:`specgraph.io.network_from_frames`, with
   the table still held, as :func:`specgraph.io.read_edges` holds it;
3. ``operator`` and ``eigen-solve``: the normalized Laplacian and its ``k``
   smallest eigenpairs, as ``specgraph spectrum`` computes them (the
   eigen-solve is also measured at ``4k`` on the smallest network, which
   fits the per-node-per-zone term);
4. ``zoning``, ``constraints and refinement``: :func:`specgraph.find_zones`,
   split at its progress stages (``solving`` is the zoning row);
5. ``writing``: the zoning's tables, the run record and the files.

Each stage's peak is read from ``VmHWM`` of ``/proc/self/status`` after
resetting it by writing ``5`` to ``/proc/self/clear_refs`` (Linux 4.0 and
later; Documentation/admin-guide/mm/soft-dirty.rst and proc(5)), so every
figure is the true high-water mark of the process during that stage, not a
sample. ``BASE`` is the resident memory after imports and a warm-up zoning
of a small network (kernels compiled or loaded, caches filled).

The coefficients are fitted per stage by non-negative least squares
(:func:`scipy.optimize.nnls`) on the peaks above each run's own base
(``BASE`` is their median); the eigen-solve's
per-node-per-zone term is reused by the zoning row. The output ends with the
table of constants to paste into ``specgraph/_guard.py`` and, for each
network, the estimate against the measured peak.

Run (about 4 minutes on a shared 2-core machine)::

    PYTHONPATH=$PWD python benchmarks/probe_memory_model.py \
        --networks 250000:3 250000:5 500000:4 1000000:4 --zones 16

``N:D`` is a road-like network of ``N`` nodes and mean degree ``D``; two
densities at one size separate the per-node from the per-link cost. Linux only.
"""

from __future__ import annotations

import argparse
import contextlib
import functools
import gc
import itertools
import json
import math
import subprocess
import sys
import tempfile
import time
from pathlib import Path
from typing import Any

import numpy as np

#: Nodes of the warm-up network zoned before ``BASE`` is read.
WARMUP_NODES = 3_000
#: Stages in the order a zoning runs them; the names the guard uses.
STAGES = (
    "reading the table",
    "building the network",
    "operator",
    "eigen-solve",
    "zoning",
    "constraints and refinement",
    "writing",
)


def _status(field: str) -> int:
    """A ``Vm*`` figure of ``/proc/self/status``, in bytes."""
    with open("/proc/self/status", encoding="ascii") as handle:
        for line in handle:
            if line.startswith(field + ":"):
                return int(line.split()[1]) * 1024
    raise RuntimeError(f"{field} not in /proc/self/status")


def _reset_peak() -> None:
    gc.collect()
    with open("/proc/self/clear_refs", "w", encoding="ascii") as handle:
        handle.write("5")


def _peak() -> int:
    return _status("VmHWM")


# ----------------------------------------------------------------- generate
def generate(n: int, degree: float, folder: Path) -> dict[str, Any]:
    """Write ``road_like(n, mean_degree=degree, rng=0)`` as edges.csv (and .parquet)."""
    import pandas as pd
    import scipy.sparse as sp

    from specgraph import gallery

    net = gallery.road_like(n, mean_degree=degree, rng=0)
    upper = sp.triu(sp.csr_array(net.adjacency), k=1).tocoo()
    ids = np.char.add("R", np.arange(n).astype(str))
    frame = pd.DataFrame({"source": ids[upper.row], "target": ids[upper.col]})
    folder.mkdir(parents=True, exist_ok=True)
    frame.to_csv(folder / "edges.csv", index=False)
    with contextlib.suppress(ImportError):  # no pyarrow: CSV only
        frame.to_parquet(folder / "edges.parquet", index=False)
    return {"nodes": n, "links": int(upper.nnz)}


# ------------------------------------------------------------------ measure
def measure(folder: Path, zones: int, extra_zones: int) -> dict[str, Any]:
    """Peak resident memory of each stage (bytes, absolute) in this fresh process."""
    from specgraph import find_zones, gallery
    from specgraph.eigen import smallest_eigenpairs
    from specgraph.export import run_record, write_outputs, zoning_tables
    from specgraph.io import network_from_frames, read_table
    from specgraph.operators import laplacian

    warm = gallery.road_like(WARMUP_NODES, rng=1)
    warm_zoning = find_zones(warm, zones, rng=1)
    zoning_tables(warm_zoning)
    smallest_eigenpairs(laplacian(warm), zones, rng=1)
    del warm, warm_zoning
    gc.collect()
    base = _status("VmRSS")
    peaks: dict[str, int] = {}
    seconds: dict[str, float] = {}

    def run(stage: str, action: Any) -> Any:
        _reset_peak()
        start = time.perf_counter()
        value = action()
        seconds[stage] = time.perf_counter() - start
        peaks[stage] = _peak()
        return value

    parquet = folder / "edges.parquet"
    if parquet.exists():
        table = run("reading the table (Parquet)", lambda: read_table(parquet)[0])
        del table
    frame, _ = run("reading the table", lambda: read_table(folder / "edges.csv"))
    network = run("building the network", functools.partial(network_from_frames, frame))
    del frame
    gc.collect()
    held = _status("VmRSS")
    operator = run("operator", lambda: laplacian(network))
    run("eigen-solve", functools.partial(smallest_eigenpairs, operator, zones, rng=1))
    extra = None
    if extra_zones:
        _reset_peak()
        smallest_eigenpairs(operator, extra_zones, rng=1)
        extra = _peak()
    del operator
    gc.collect()

    marks: list[tuple[str, int, float]] = []

    def progress(stage: str) -> None:
        marks.append((stage, _peak(), time.perf_counter()))
        _reset_peak()

    _reset_peak()
    zoning = find_zones(network, zones, rng=1, progress=progress)
    marks.append(("end", _peak(), time.perf_counter()))
    names = {"solving": "zoning", "constraints": "constraints and refinement"}
    names["refining"] = "constraints and refinement"
    for (stage, _, began), (_, peak, ended) in itertools.pairwise(marks):
        name = names.get(stage, stage)
        peaks[name] = max(peaks.get(name, 0), peak)
        seconds[name] = seconds.get(name, 0.0) + ended - began

    def write() -> None:
        tables = zoning_tables(zoning)
        record = run_record(zoning, command=["specgraph", "zones"])
        with tempfile.TemporaryDirectory() as out:
            write_outputs(out, {**tables, "run.json": record})

    run("writing", write)
    return {
        "nodes": network.n_nodes,
        "links": network.n_links,
        "zones": zones,
        "base": base,
        "held": held,
        "peaks": peaks,
        "seconds": seconds,
        "extra_zones": extra_zones,
        "extra_eigen_peak": extra,
        "whole_peak": max(peaks[s] for s in STAGES if s in peaks),
    }


# ---------------------------------------------------------------------- fit
Row = tuple[float, float, float, float]  # fixed, per node, per link, per node per zone


def _minimax(columns: np.ndarray, peaks: np.ndarray, *, below: bool = False) -> np.ndarray:
    """Non-negative coefficients minimizing the largest relative error of ``columns @ x``.

    A linear program (scipy.optimize.linprog, HiGHS): minimize ``t`` subject to
    ``|columns @ x - peaks| <= t * peaks``. With ``below``, the fit may only
    under-estimate (``columns @ x <= peaks``) and minimizes the total shortfall:
    for what the process is credited with holding, where erring high is unsafe.
    """
    from scipy.optimize import linprog

    n_vars = columns.shape[1]
    if below:
        result = linprog(
            -columns.sum(axis=0), A_ub=columns, b_ub=peaks, bounds=[(0, None)] * n_vars
        )
        return np.asarray(result.x)
    cost = np.zeros(n_vars + 1)
    cost[-1] = 1.0
    upper = np.hstack([columns, -peaks[:, None]])
    lower = np.hstack([-columns, -peaks[:, None]])
    result = linprog(
        cost,
        A_ub=np.vstack([upper, lower]),
        b_ub=np.concatenate([peaks, -peaks]),
        bounds=[(0, None)] * (n_vars + 1),
    )
    return np.asarray(result.x[:n_vars])


def fit(runs: list[dict[str, Any]]) -> dict[str, Row]:
    """Per stage ``(fixed, per_node, per_link, per_node_zone)`` above the base, in bytes.

    Each stage's absolute peak ``base + fixed + a n + b m + c n k`` is fitted to
    minimize the largest relative error over the runs (:func:`_minimax`), the
    guard's goal being an estimate within 25 % of every measured peak. The
    eigen-solve is fitted first, with its extra zone count, for ``c``; the
    zoning row reuses that ``c`` (its own runs all have the same ``k``).
    """
    base = float(np.median([r["base"] for r in runs]))
    coefficients: dict[str, Row] = {}
    rows, peaks = [], []
    for r in runs:
        for zones, peak in ((r["zones"], r["peaks"]["eigen-solve"]),
                            (r["extra_zones"], r["extra_eigen_peak"])):  # fmt: skip
            if peak:
                rows.append([1.0, r["nodes"], r["links"], r["nodes"] * zones])
                peaks.append(peak - r["base"] + base)
    x = _minimax(np.array(rows, float), np.array(peaks, float) - base)
    coefficients["eigen-solve"] = (x[0], x[1], x[2], x[3])
    per_zone = float(x[3])
    names = [s for s in ("reading the table (Parquet)", *STAGES) if s in runs[0]["peaks"]]
    for stage in names:
        if stage == "eigen-solve":
            continue
        zone_term = per_zone if stage == "zoning" else 0.0
        columns = np.array([[1.0, r["nodes"], r["links"]] for r in runs], float)
        own = np.array(
            [r["peaks"][stage] - r["base"] - zone_term * r["nodes"] * r["zones"] for r in runs]
        )
        x = _minimax(columns, own)
        coefficients[stage] = (x[0], x[1], x[2], zone_term)
    columns = np.array([[1.0, r["nodes"], r["links"]] for r in runs], float)
    x = _minimax(columns, np.array([r["held"] - r["base"] for r in runs], float), below=True)
    coefficients["network held"] = (x[0], x[1], x[2], 0.0)
    coefficients["BASE"] = (base, 0.0, 0.0, 0.0)
    return coefficients


def estimate(coefficients: dict[str, Row], r: dict[str, Any]) -> float:
    base = coefficients["BASE"][0]
    return max(
        base + f + a * r["nodes"] + b * r["links"] + c * r["nodes"] * r["zones"]
        for stage, (f, a, b, c) in coefficients.items()
        if stage in STAGES
    )


def _mib(value: float) -> str:
    return f"{value / 2**20:,.0f}"


def report(runs: list[dict[str, Any]]) -> None:
    coefficients = fit(runs)
    print("\nmeasured peak RSS per stage (MiB) and seconds")
    names = [s for s in ("reading the table (Parquet)", *STAGES) if s in runs[0]["peaks"]]
    print("| stage | " + " | ".join(f"{r['nodes']:,} n / {r['links']:,} m" for r in runs) + " |")
    print("|---" * (len(runs) + 1) + "|")
    for stage in names:
        cells = [f"{_mib(r['peaks'][stage])} ({r['seconds'][stage]:.1f} s)" for r in runs]
        print(f"| {stage} | " + " | ".join(cells) + " |")
    print("| base (after warm-up) | " + " | ".join(_mib(r["base"]) for r in runs) + " |")
    print("| held after reading | " + " | ".join(_mib(r["held"]) for r in runs) + " |")
    print("\nfitted rows for specgraph/_guard.py (bytes: fixed, per node, per link, per node-zone)")
    for stage, (f, a, b, c) in coefficients.items():
        print(f'    StageCost("{stage}", {math.ceil(a)}, {math.ceil(b)}, {math.ceil(c)}, '
              f"{math.ceil(f / 2**20)} * 2**20, _PROBE),")  # fmt: skip
    print("\n| nodes | links | zones | measured peak (MiB) | estimate (MiB) | estimate/measured |")
    print("|---|---|---|---|---|---|")
    for r in runs:
        guess = estimate(coefficients, r)
        print(
            f"| {r['nodes']:,} | {r['links']:,} | {r['zones']} | {_mib(r['whole_peak'])} | "
            f"{_mib(guess)} | {guess / r['whole_peak']:.2f} |"
        )
    try:
        from specgraph._guard import estimate_memory
    except ImportError:
        return
    print("\nthe guard's current table against the same runs")
    print("| nodes | links | measured peak (MiB) | guard estimate (MiB) | ratio | largest stage |")
    print("|---|---|---|---|---|---|")
    for r in runs:
        guess = estimate_memory(r["nodes"], r["links"], zones=r["zones"])
        print(
            f"| {r['nodes']:,} | {r['links']:,} | {_mib(r['whole_peak'])} | {_mib(guess.peak)} "
            f"| {guess.peak / r['whole_peak']:.2f} | {guess.largest} |"
        )


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--networks", nargs="+", default=["250000:3", "250000:5", "500000:4"])
    parser.add_argument("--zones", type=int, default=16)
    parser.add_argument("--cache", type=Path, default=Path(tempfile.gettempdir()) / "sg-memory")
    parser.add_argument("--json", type=Path, help="also write the measurements here")
    parser.add_argument("--from-json", type=Path, help="refit measurements saved by --json")
    parser.add_argument("--generate", nargs=2, help=argparse.SUPPRESS)
    parser.add_argument("--measure", help=argparse.SUPPRESS)
    parser.add_argument("--extra-zones", type=int, default=0, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.generate:
        n, degree = args.generate
        print(json.dumps(generate(int(n), float(degree), args.cache / f"road-{n}-{degree}")))
        return 0
    if args.measure:
        print(json.dumps(measure(Path(args.measure), args.zones, args.extra_zones)))
        return 0
    if args.from_json:
        report(json.loads(args.from_json.read_text()))
        return 0
    runs = []
    for position, spec in enumerate(args.networks):
        n, degree = spec.split(":")
        folder = args.cache / f"road-{n}-{degree}"
        me = [sys.executable, __file__, "--cache", str(args.cache), "--zones", str(args.zones)]
        if not (folder / "edges.csv").exists():
            subprocess.run([*me, "--generate", n, degree], check=True)
        extra = ["--extra-zones", str(4 * args.zones)] if position == 0 else []
        done = subprocess.run(
            [*me, "--measure", str(folder), *extra], check=True, capture_output=True, text=True
        )
        runs.append(json.loads(done.stdout.strip().splitlines()[-1]))
        print(f"{spec}: whole peak {_mib(runs[-1]['whole_peak'])} MiB", flush=True)
    if args.json:
        args.json.write_text(json.dumps(runs, indent=1))
    report(runs)
    return 0


if __name__ == "__main__":
    sys.exit(main())
