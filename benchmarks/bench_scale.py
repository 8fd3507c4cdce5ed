"""National size: ``specgraph zones`` and ``spectrum`` stage by stage, 1 to 24 million nodes.

What it measures (issue "National size on one machine")
--------------------------------------------------------
**Zoning** (default). For each size in ``--sizes`` a road-like network is
written once by :func:`specgraph.gallery.write_road_like` (Parquet, seed
``--seed``, default tile size) into ``--data`` and reused while its sidecar
``.json`` matches; then, for each count in ``--zones``, the command
``specgraph zones EDGES --zones K --out DIR --quiet`` runs ``--repeats``
times, each in a fresh child process. The child (this script, ``--child``)
wraps the library's stage functions (:data:`STAGES`: reading the file,
building the network, the memory guard, merging, the Laplacian, the
eigen-solve, the zone count, the one-level assignment, the multilevel
coarsening and zoning, the constraints, the refinement, the zone table, the
boundary links, the scores, the output tables, writing the files) by
replacing each function object wherever a ``specgraph`` module holds it, then
calls :func:`specgraph.cli.main`. Library code is not changed.

For each stage it records:

* **seconds**: exclusive wall time (time inside a nested stage counts for the
  nested one), so the stages and ``other`` add up to the command's time;
  ``other`` is what no wrapped function covers (option checks, Python glue);
* **peak**: the process's peak resident memory while the stage (or anything
  it calls) ran, from ``VmHWM`` in ``/proc/self/status``, reset at every stage
  entry and exit by writing ``5`` to ``/proc/self/clear_refs`` (Linux's peak
  RSS reset), so each interval's peak is exact, not sampled;
* **RSS at start**: ``VmRSS`` when the stage was first entered.

The command's own wall time (``main`` called to returned) and peak are shown
with the whole process's (wall from ``os.wait4``, which includes starting Python
and importing; peak the larger of ``ru_maxrss`` and the command's, as the
reset lowers the kernel's peak that ``ru_maxrss`` reports). A warm-up child zones a 20,000-node
network first, untimed, so numba's on-disk cache is filled (compiling is
measured by ``bench_first_run.py``). Tables: stages per size and zone count
(medians over repeats), then each stage's growth exponent
``log(t2/t1) / log(n2/n1)`` between consecutive sizes, for time and for peak
memory, against the goal of at most 1.15, and the whole command against 15
minutes and 16 GiB at 24 million nodes.

**Spectrum** (``--spectrum``). At each size the network is also written as
CSV, and for ``--repeats`` rounds: ``specgraph spectrum EDGES.csv --out DIR
--quiet`` (wrapped as above; its eigen-solve stage is the solve inside the
command), then, in the same child, the same :func:`specgraph.smallest_eigenpairs`
call again on the operator the command built ("eigen-solve alone"); and an
anchor child that reads the CSV with ``pandas.read_csv``, builds scipy's
normalized Laplacian ``I - D^-1/2 A D^-1/2`` (CSC) and runs
``scipy.sparse.linalg.eigsh(N, k, sigma=s, which="LM")`` with ``k`` the
command's default count (20) and ``s`` each of ``--shifts`` negated (default
1e-5, 1e-4, 1e-3: the first eigenvalues of a million-node road network are of
order 1e-5, and at 20,000 nodes -1e-1 took six times as long as -1e-3) in
the first round, one process per shift, stopped after ``--anchor-timeout``;
the fastest is the best shift and the only one run in later rounds.
Goals: the whole command at most 3x the eigen-solve alone and at most 0.3x
the anchor (read + build + best-shift solve).

How to run
----------
::

    python benchmarks/bench_scale.py --sizes 1e6 --zones 16 1000 --repeats 1
    python benchmarks/bench_scale.py --sizes 1e6 --spectrum --repeats 3
    python benchmarks/bench_scale.py --sizes 1e6 4e6 24e6 --zones 16   # national size
    python benchmarks/bench_scale.py --load /tmp/scale/results/*.json  # re-print saved runs

Every child's result is saved as JSON under ``--data``/results, and ``--load``
adds saved results to the tables (the exponents then span runs made at
different times: say so when quoting them). The Markdown report goes to
stdout (and ``--out``); progress to stderr. Needs Linux (``/proc``).
"""

from __future__ import annotations

import argparse
import importlib
import itertools
import json
import math
import os
import re
import shlex
import statistics
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parent.parent

#: Stages of a run: a label and the functions (``module:name``) whose calls it
#: counts. Found by cProfile of ``specgraph zones`` on a 200,000-node road-like
#: network; a name missing from the library (code moves) is reported and its
#: time falls to the stage around it.
STAGES: list[tuple[str, list[str]]] = [
    ("read file", ["specgraph.io._tables:_load_table"]),
    (
        "network build",
        ["specgraph.io._frames:build_network", "specgraph.io._frames:network_from_frames"],
    ),
    ("memory guard", ["specgraph._guard:check_memory"]),
    (
        "merging (weights, trees)",
        [
            "specgraph.zones._dominant:survey_weights",
            "specgraph.zones._stages:tree_pairs",
            "specgraph.zones._dominant:dominant_contraction",
            "specgraph.zones._stages:merge_together",
        ],
    ),
    ("operator (Laplacian)", ["specgraph.operators:laplacian"]),
    ("eigen-solve", ["specgraph.eigen:smallest_eigenpairs"]),
    ("zone count", ["specgraph.zones._stages:choose_count"]),
    ("assignment (one-level)", ["specgraph.zones._stages:assign_with"]),
    ("multilevel: coarsening", ["specgraph.zones._coarsen:coarsen"]),
    (
        "multilevel: zoning",
        ["specgraph.zones._levels:zone_by_levels", "specgraph.zones._levels:split_by_bisection"],
    ),
    (
        "constraints",
        ["specgraph.zones._stages:enforce_rules", "specgraph.zones._levels:within_bounds"],
    ),
    (
        "refinement",
        [
            "specgraph.zones._stages:refine_zones",
            "specgraph.zones._refine:refine_boundary",
            "specgraph.zones._levels:refine_levels",
            "specgraph.zones._levels:refine_by_cycles",
        ],
    ),
    ("zone table", ["specgraph._figures:zone_table"]),
    ("boundary links", ["specgraph._figures:boundary_links"]),
    ("scores", ["specgraph._figures:normalized_cut", "specgraph._figures:overall_scores"]),
    (
        "output tables",
        [
            "specgraph.export:zoning_tables",
            "specgraph.export:run_record",
            "specgraph.export:eigen_table",
        ],
    ),
    ("write files", ["specgraph.export:write_outputs"]),
]
OTHER = "other"

#: Goals of the issue.
GOAL_EXPONENT = 1.15
GOAL_SECONDS_24M = 15 * 60
GOAL_GIB_24M = 16.0
GOAL_N = 24_000_000
GOAL_SPECTRUM_VS_SOLVE = 3.0
GOAL_SPECTRUM_VS_ANCHOR = 0.3
#: Stages under this many seconds at both sizes get no verdict on their
#: exponent: timer noise on a shared machine is of that order.
SMALL_SECONDS = 0.5
#: Nodes of the warm-up network (fills numba's cache; untimed).
WARMUP_N = 20_000
#: The spectrum command's default eigenvalue count (``specgraph spectrum --help``).
SPECTRUM_COUNT = 20
KIB_PER_GIB = 1024**2
#: Exit code of coreutils ``timeout`` when it stopped the command.
TIMEOUT_EXIT = 124


# =============================================================== child: stage clock
def _status() -> dict[str, int]:
    with open("/proc/self/status") as handle:
        text = handle.read()
    return {key: int(value) for key, value in re.findall(r"(VmHWM|VmRSS):\s+(\d+)", text)}


class StageClock:
    """Exclusive seconds and peak RSS per stage, with a stack for nested stages."""

    def __init__(self) -> None:
        self.stats: dict[str, dict[str, Any]] = {}
        self.stack: list[dict[str, Any]] = []
        self.top_peak = 0
        self.kept: dict[str, tuple[Callable[..., Any], tuple[Any, ...], dict[str, Any]]] = {}
        try:
            self._reset_peak()
            self.resettable = True
        except OSError:  # without clear_refs the peaks are the process's so far
            self.resettable = False

    @staticmethod
    def _reset_peak() -> None:
        with open("/proc/self/clear_refs", "w") as handle:
            handle.write("5")

    def _interval(self, now: float) -> int:
        """Close the interval since the last event: its peak goes to every open stage."""
        peak = _status()["VmHWM"]
        if self.resettable:
            self._reset_peak()
        self.top_peak = max(self.top_peak, peak)
        for frame in self.stack:
            frame["peak"] = max(frame["peak"], peak)
        if self.stack:
            top = self.stack[-1]
            top["seconds"] += now - top["since"]
        return peak

    def enter(self, label: str) -> None:
        now = time.perf_counter()
        self._interval(now)
        rss = _status()["VmRSS"]
        self.stack.append({"label": label, "since": now, "seconds": 0.0, "peak": rss})
        entry = self.stats.setdefault(
            label, {"seconds": 0.0, "calls": 0, "rss_start_kib": rss, "peak_kib": 0}
        )
        entry["calls"] += 1

    def leave(self) -> None:
        now = time.perf_counter()
        self._interval(now)
        frame = self.stack.pop()
        entry = self.stats[frame["label"]]
        entry["seconds"] += frame["seconds"]
        entry["peak_kib"] = max(entry["peak_kib"], frame["peak"])
        if self.stack:
            self.stack[-1]["since"] = now

    def wrap(
        self, label: str, function: Callable[..., Any], *, keep: bool = False
    ) -> Callable[..., Any]:
        """``function`` timed as ``label``; with ``keep``, its last call is kept to repeat."""

        def timed(*args: Any, **kwargs: Any) -> Any:
            if keep:
                self.kept[label] = (function, args, kwargs)
            self.enter(label)
            try:
                return function(*args, **kwargs)
            finally:
                self.leave()

        return timed


def instrument(clock: StageClock, keep: frozenset[str] = frozenset()) -> list[str]:
    """Replace every stage function wherever a loaded specgraph module holds it.

    Returns the stage functions not found.
    """
    importlib.import_module("specgraph.cli")
    importlib.import_module("specgraph._commands")
    missing, wrappers = [], {}
    for label, names in STAGES:
        for name in names:
            module_name, attribute = name.split(":")
            try:
                original = getattr(importlib.import_module(module_name), attribute)
            except (ImportError, AttributeError):
                missing.append(name)
                continue
            wrappers[id(original)] = (original, clock.wrap(label, original, keep=label in keep))
    for module_name, module in list(sys.modules.items()):
        if not module_name.startswith("specgraph") or module is None:
            continue
        for attribute, value in list(vars(module).items()):
            hit = wrappers.get(id(value))
            if hit is not None and hit[0] is value:
                setattr(module, attribute, hit[1])
    return missing


def run_child(result_path: Path, argv: list[str], *, solve_again: bool) -> int:
    """The child process: the command under the stage clock, its result as JSON."""
    clock = StageClock()
    missing = instrument(clock, frozenset({"eigen-solve"}) if solve_again else frozenset())
    from specgraph.cli import main

    clock.enter(OTHER)
    start = time.perf_counter()
    code = main(argv)
    seconds = time.perf_counter() - start
    clock.leave()
    result: dict[str, Any] = {
        "argv": argv,
        "exit_code": code,
        "seconds": seconds,
        "peak_kib": clock.top_peak,
        "peak_exact": clock.resettable,
        "stages": clock.stats,
        "missing": missing,
    }
    if "eigen-solve" in clock.kept:
        solve, args, kwargs = clock.kept.pop("eigen-solve")
        start = time.perf_counter()
        again = solve(*args, **kwargs)
        result["solve_alone_seconds"] = time.perf_counter() - start
        result["solve_alone_method"] = str(getattr(again, "method", ""))
    result_path.write_text(json.dumps(result, indent=1))
    return int(code)


# =============================================================== child: the anchor
def run_anchor(result_path: Path, csv: Path, k: int, shifts: list[float]) -> int:
    """pandas.read_csv, scipy's normalized Laplacian, shift-invert eigsh per shift."""
    import numpy as np
    import pandas as pd
    import scipy.sparse as sp
    from scipy.sparse.linalg import eigsh

    times: dict[str, Any] = {}
    start = time.perf_counter()
    table = pd.read_csv(csv)
    times["read_csv"] = time.perf_counter() - start
    start = time.perf_counter()
    ends = np.concatenate([table["source"].to_numpy(), table["target"].to_numpy()])
    nodes, index = np.unique(ends, return_inverse=True)
    n, m = nodes.size, len(table)
    w = table["weight"].to_numpy(dtype=float)
    a = sp.coo_array((w, (index[:m], index[m:])), shape=(n, n)).tocsr()
    a = (a + a.T).tocsr()
    scale = 1.0 / np.sqrt(a.sum(axis=1))
    laplacian = (
        sp.eye_array(n, format="csr") - sp.diags_array(scale) @ a @ sp.diags_array(scale)
    ).tocsc()
    times["build"] = time.perf_counter() - start
    solves = {}
    for shift in shifts:
        start = time.perf_counter()
        values, vectors = eigsh(laplacian, k=k, sigma=shift, which="LM")
        seconds = time.perf_counter() - start
        residual = np.linalg.norm(laplacian @ vectors - vectors * values, axis=0).max() / 2
        solves[repr(shift)] = {
            "seconds": seconds,
            "residual": float(residual),
            "lambda_max": float(values.max()),
        }
    times["eigsh"] = solves
    times["peak_kib"] = _status()["VmHWM"]
    result_path.write_text(json.dumps(times, indent=1))
    return 0


# =============================================================== parent: data
def size_label(n: int) -> str:
    for unit, name in ((1_000_000, "m"), (1_000, "k")):
        if n >= unit and n % (unit // 10) == 0:
            value = n / unit
            return f"{value:g}{name}"
    return str(n)


def network_file(data: Path, n: int, seed: int, suffix: str) -> Path:
    """The road-like network of ``n`` nodes, written once and reused while its sidecar matches."""
    path = data / f"road-{size_label(n)}{suffix}"
    meta = {"generator": "specgraph.gallery.write_road_like", "n": n, "seed": seed}
    sidecar = path.with_name(path.name + ".json")
    if path.exists() and sidecar.exists() and json.loads(sidecar.read_text()) == meta:
        return path
    if path.exists() and not sidecar.exists():
        raise SystemExit(
            f"{path} exists but was not written by this benchmark; move it or use --data"
        )
    log(f"writing {path} ({n:,} nodes)")
    code = "from specgraph.gallery import write_road_like; "
    code += f"write_road_like({str(path)!r}, {n}, rng={seed})"
    subprocess.run([sys.executable, "-c", code], check=True, env=_env())
    sidecar.write_text(json.dumps(meta))
    return path


# =============================================================== parent: children
def _env() -> dict[str, str]:
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(filter(None, [str(ROOT), env.get("PYTHONPATH", "")]))
    return env


def timed_child(command: list[str]) -> tuple[float, float, int, str]:
    """Wall seconds, the child's peak RSS (KiB, ``os.wait4``), exit code, end of stderr."""
    with tempfile.TemporaryFile() as err:
        start = time.perf_counter()
        child = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=err, env=_env())
        _, status, usage = os.wait4(child.pid, 0)
        seconds = time.perf_counter() - start
        err.seek(0)
        tail = err.read().decode("utf-8", "replace").strip().splitlines()[-3:]
    return seconds, float(usage.ru_maxrss), os.waitstatus_to_exitcode(status), " | ".join(tail)


def run_command(
    results: Path, tag: str, argv: list[str], n: int, *, solve_again: bool = False
) -> dict[str, Any]:
    out = results / f"{tag}.json"
    command = [sys.executable, __file__, "--child", str(out)]
    command += ["--solve-again"] if solve_again else []
    command += ["--", *argv]
    log("running " + shlex.join(["specgraph", *argv]))
    wall, peak, code, tail = timed_child(command)
    if code != 0 or not out.exists():
        raise SystemExit(f"child failed (exit {code}): {tail}")
    result = json.loads(out.read_text())
    # Resetting VmHWM resets the kernel's peak that ru_maxrss reports too: the
    # process's peak is the larger of the two.
    peak = max(peak, float(result["peak_kib"]))
    result.update(process_seconds=wall, process_peak_kib=peak, tag=tag, n=n)
    out.write_text(json.dumps(result, indent=1))
    log(
        f"  {result['seconds']:.1f} s in the command, {wall:.1f} s process, "
        f"{peak / KIB_PER_GIB:.2f} GiB"
    )
    return result


# =============================================================== parent: tables
def log(message: str) -> None:
    print(f"[{time.strftime('%H:%M:%S')}] {message}", file=sys.stderr, flush=True)


def gib(kib: float) -> str:
    return f"{kib / KIB_PER_GIB:.2f}"


def _median_stage(runs: list[dict[str, Any]], label: str, key: str) -> float:
    values = [run["stages"].get(label, {}).get(key, math.nan) for run in runs]
    values = [v for v in values if not math.isnan(v)]
    return statistics.median(values) if values else math.nan


def stage_labels(runs: list[dict[str, Any]]) -> list[str]:
    order = [label for label, _ in STAGES] + [OTHER]
    return [label for label in order if any(label in run["stages"] for run in runs)]


def stage_table(n: int, zones: str, runs: list[dict[str, Any]]) -> list[str]:
    seconds = statistics.median(run["seconds"] for run in runs)
    lines = [
        f"### {n:,} nodes, {zones} ({len(runs)} run{'s' if len(runs) > 1 else ''}, medians)",
        "",
        "| stage | calls | seconds | share | RSS at start (GiB) | peak during (GiB) |",
        "|---|---|---|---|---|---|",
    ]
    for label in stage_labels(runs):
        s = _median_stage(runs, label, "seconds")
        calls = int(_median_stage(runs, label, "calls"))
        lines.append(
            f"| {label} | {calls} | {s:.2f} | {s / seconds:.0%} | "
            f"{gib(_median_stage(runs, label, 'rss_start_kib'))} | "
            f"{gib(_median_stage(runs, label, 'peak_kib'))} |"
        )
    process = statistics.median(run["process_seconds"] for run in runs)
    lines += [
        f"| **command (main)** | | **{seconds:.2f}** | 100% | | "
        f"**{gib(statistics.median(run['peak_kib'] for run in runs))}** |",
        f"| whole process (Python start, imports) | | {process:.2f} | | | "
        f"{gib(statistics.median(run['process_peak_kib'] for run in runs))} |",
        "",
    ]
    missing = sorted({name for run in runs for name in run.get("missing", [])})
    if missing:
        lines += [
            "Stage functions not found (their time is in the stage around them): "
            + ", ".join(missing),
            "",
        ]
    return lines


def exponent(a: float, b: float, n1: int, n2: int) -> float:
    if not (a > 0 and b > 0):
        return math.nan
    return math.log(b / a) / math.log(n2 / n1)


def growth_table(zones: str, by_size: dict[int, list[dict[str, Any]]]) -> list[str]:
    sizes = sorted(by_size)
    if len(sizes) < 2:
        return []
    pairs = list(itertools.pairwise(sizes))
    head = " | ".join(
        f"time {size_label(a)}->{size_label(b)} | peak {size_label(a)}->{size_label(b)}"
        for a, b in pairs
    )
    lines = [
        f"### Growth exponents, {zones} (goal: at most {GOAL_EXPONENT} for every stage)",
        "",
        f"| stage | {head} |",
        "|---|" + "---|" * (2 * len(pairs)),
    ]
    labels = stage_labels([run for runs in by_size.values() for run in runs])
    rows = [(label, "stage") for label in labels] + [("command (main)", "whole")]
    for label, kind in rows:
        cells = []
        for a, b in pairs:
            for key in ("seconds", "peak_kib"):
                if kind == "whole":
                    x = statistics.median(run[key] for run in by_size[a])
                    y = statistics.median(run[key] for run in by_size[b])
                else:
                    x, y = (
                        _median_stage(by_size[a], label, key),
                        _median_stage(by_size[b], label, key),
                    )
                e = exponent(x, y, a, b)
                small = key == "seconds" and max(x, y) < SMALL_SECONDS
                flag = " (small)" if small else (" **over**" if e > GOAL_EXPONENT else "")
                cells.append("n/a" if math.isnan(e) else f"{e:.2f}{flag}")
        lines.append(f"| {label} | " + " | ".join(cells) + " |")
    lines.append("")
    # The whole command at 24 million: measured, or extrapolated from the last pair.
    a, b = pairs[-1]
    t = statistics.median(run["seconds"] for run in by_size[b])
    p = statistics.median(run["peak_kib"] for run in by_size[b])
    if b >= GOAL_N:
        what, t24, p24 = f"measured at {b:,}", t, p
    else:
        et = exponent(statistics.median(run["seconds"] for run in by_size[a]), t, a, b)
        ep = exponent(statistics.median(run["peak_kib"] for run in by_size[a]), p, a, b)
        t24, p24 = t * (GOAL_N / b) ** et, p * (GOAL_N / b) ** ep
        what = f"extrapolated from {size_label(a)}->{size_label(b)} (exponents {et:.2f}, {ep:.2f})"
    ok = t24 <= GOAL_SECONDS_24M and p24 / KIB_PER_GIB <= GOAL_GIB_24M
    lines += [
        f"24,000,000 nodes, {zones}: {t24 / 60:.1f} min and {gib(p24)} GiB, {what}; goal at most "
        f"{GOAL_SECONDS_24M // 60} min and {GOAL_GIB_24M:g} GiB: {'met' if ok else '**not met**'}.",
        "",
    ]
    return lines


def spectrum_tables(n: int, runs: list[dict[str, Any]], anchors: list[dict[str, Any]]) -> list[str]:
    command = statistics.median(run["seconds"] for run in runs)
    process = statistics.median(run["process_seconds"] for run in runs)
    inside = statistics.median(run["stages"]["eigen-solve"]["seconds"] for run in runs)
    alone = statistics.median(run["solve_alone_seconds"] for run in runs)
    finished = [a for a in anchors if "read_csv" in a]
    read = statistics.median(a["read_csv"] for a in finished)
    build = statistics.median(a["build"] for a in finished)
    per_shift: dict[str, list[dict[str, Any]]] = {}
    for anchor in anchors:
        for shift, solve in anchor["eigsh"].items():
            per_shift.setdefault(shift, []).append(solve)
    best = repr(_best(anchors))
    eigsh = statistics.median(x["seconds"] for x in per_shift[best])
    anchor_total = read + build + eigsh
    lines = stage_table(n, "`specgraph spectrum` (CSV)", runs)
    lines += [
        f"### `specgraph spectrum` against its eigen-solve and the scipy anchor, {n:,} nodes",
        "",
        "| what | seconds |",
        "|---|---|",
        f"| `specgraph spectrum` command (main) | {command:.2f} |",
        f"| the same, whole process (includes the repeated solve below) | {process:.2f} |",
        f"| its eigen-solve inside the command | {inside:.2f} |",
        "| eigen-solve alone (same call again, same operator, method "
        f"{runs[0].get('solve_alone_method', '?')}) | {alone:.2f} |",
        f"| anchor: `pandas.read_csv` | {read:.2f} |",
        f"| anchor: scipy normalized Laplacian (CSC) | {build:.2f} |",
    ]
    for shift, solves in per_shift.items():
        mark = " (best)" if shift == best else ""
        done = [x for x in solves if x["seconds"] is not None]
        what = f"| anchor: `eigsh(k={SPECTRUM_COUNT}, sigma={shift}, which='LM')`{mark}"
        if not done:
            lines.append(f"{what}: stopped | > {solves[0]['stopped']:g} |")
            continue
        seconds = statistics.median(x["seconds"] for x in done)
        residual = max(x["residual"] for x in done)
        lines.append(
            f"{what}, {len(done)} run(s), scaled residual {residual:.1e} | {seconds:.2f} |"
        )
    lines += [
        f"| **anchor total** (read + build + best eigsh) | **{anchor_total:.2f}** |",
        f"| anchor process peak (GiB) | {gib(max(a['peak_kib'] for a in finished))} |",
        "",
        "| goal | measured | met? |",
        "|---|---|---|",
        f"| command at most {GOAL_SPECTRUM_VS_SOLVE:g}x the eigen-solve alone | "
        f"{command:.2f} / {alone:.2f} = {command / alone:.2f}x | "
        f"{'yes' if command / alone <= GOAL_SPECTRUM_VS_SOLVE else '**no**'} |",
        f"| command at most {GOAL_SPECTRUM_VS_ANCHOR:g}x the anchor | "
        f"{command:.2f} / {anchor_total:.2f} = {command / anchor_total:.2f}x | "
        f"{'yes' if command / anchor_total <= GOAL_SPECTRUM_VS_ANCHOR else '**no**'} |",
        "",
    ]
    return lines


# =============================================================== parent: main
def parse_args(argv: list[str]) -> argparse.Namespace:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument(
        "--sizes", nargs="+", type=float, default=[1e6, 4e6], help="node counts (default 1e6 4e6)"
    )
    parser.add_argument(
        "--zones", nargs="+", type=int, default=[16, 1000], help="zone counts (default 16 1000)"
    )
    parser.add_argument(
        "--repeats", type=int, default=1, help="runs per command (median shown; default 1)"
    )
    parser.add_argument("--seed", type=int, default=20261205, help="generator seed")
    parser.add_argument(
        "--data", type=Path, default=Path("/tmp/scale"), help="networks, outputs and results"
    )
    parser.add_argument(
        "--spectrum",
        action="store_true",
        help="time `specgraph spectrum` against the anchor instead",
    )
    parser.add_argument(
        "--shifts",
        nargs="+",
        type=float,
        default=[1e-5, 1e-4, 1e-3],
        help="anchor eigsh shifts as magnitudes s: sigma = -s (default 1e-5 1e-4 1e-3)",
    )
    parser.add_argument(
        "--anchor-timeout",
        type=float,
        default=240.0,
        help="seconds before an anchor process is stopped (default 240)",
    )
    parser.add_argument("--no-warmup", action="store_true", help="skip the untimed warm-up run")
    parser.add_argument(
        "--load", nargs="*", type=Path, default=[], help="saved results to add to the tables"
    )
    parser.add_argument("--out", type=Path, help="also write the report here")
    return parser.parse_args(argv)


def main(argv: list[str]) -> int:
    if argv[:1] == ["--child"]:
        solve_again = "--solve-again" in argv
        return run_child(Path(argv[1]), argv[argv.index("--") + 1 :], solve_again=solve_again)
    if argv[:1] == ["--anchor"]:
        k, csv, out = int(argv[3]), Path(argv[2]), Path(argv[1])
        return run_anchor(out, csv, k, [float(s) for s in argv[4:]])
    args = parse_args(argv)
    args.data.mkdir(parents=True, exist_ok=True)
    results = args.data / "results"
    results.mkdir(exist_ok=True)
    sizes = [int(s) for s in args.sizes]
    stamp = time.strftime("%Y%m%dT%H%M%S")
    zoning: dict[str, dict[int, list[dict[str, Any]]]] = {}
    for path in args.load:
        saved = json.loads(path.read_text())
        if saved["argv"][0] == "zones":
            zoning.setdefault(
                f"{saved['argv'][saved['argv'].index('--zones') + 1]} zones", {}
            ).setdefault(saved["n"], []).append(saved)
    lines = [
        "Command: `" + shlex.join(["python", "benchmarks/bench_scale.py", *argv]) + "`",
        "",
        f"Machine: {os.cpu_count()} cores, {_memory_gib():.0f} GiB; "
        f"{time.strftime('%Y-%m-%d %H:%M %Z')}; "
        f"commit {_commit()}. Peaks exact per stage: {_peaks_exact()}.",
        "",
    ]
    if not args.no_warmup:
        warm = network_file(args.data, WARMUP_N, args.seed, ".parquet")
        for k in [20] if args.spectrum else args.zones:
            argv_w = [
                "zones",
                str(warm),
                "--zones",
                str(min(k, 50)),
                "--out",
                str(args.data / "out-warmup"),
                "--quiet",
            ]
            run_command(results, f"warmup-{stamp}-{k}", argv_w, WARMUP_N)
    if args.spectrum:
        for n in sizes:
            csv = network_file(args.data, n, args.seed, ".csv")
            runs, anchors = [], []
            for r in range(args.repeats):
                argv_s = [
                    "spectrum",
                    str(csv),
                    "--out",
                    str(args.data / f"out-spectrum-{size_label(n)}"),
                    "--quiet",
                ]
                run = run_command(
                    results, f"spectrum-{size_label(n)}-{stamp}-{r}", argv_s, n, solve_again=True
                )
                runs.append(run)
                for shift in [-abs(s) for s in args.shifts] if r == 0 else [_best(anchors)]:
                    tag = f"{size_label(n)}-{stamp}-{r}-{shift:g}"
                    anchors.append(_anchor(results, csv, shift, tag, args.anchor_timeout))
            lines += spectrum_tables(n, runs, anchors)
    else:
        for n in sizes:
            edges = network_file(args.data, n, args.seed, ".parquet")
            for k in args.zones:
                for r in range(args.repeats):
                    out = args.data / f"out-{size_label(n)}-{k}"
                    argv_z = ["zones", str(edges), "--zones", str(k), "--out", str(out), "--quiet"]
                    run = run_command(results, f"zones-{size_label(n)}-{k}-{stamp}-{r}", argv_z, n)
                    zoning.setdefault(f"{k} zones", {}).setdefault(n, []).append(run)
        for zones, by_size in zoning.items():
            for n in sorted(by_size):
                lines += stage_table(n, f"`specgraph zones --zones {zones.split()[0]}`", by_size[n])
            lines += growth_table(zones, by_size)
    report = "\n".join(lines)
    print(report)
    if args.out:
        args.out.write_text(report + "\n")
    return 0


def _anchor(results: Path, csv: Path, shift: float, tag: str, timeout: float) -> dict[str, Any]:
    """One anchor process for one shift, stopped (coreutils ``timeout``) after ``timeout`` s."""
    out = results / f"anchor-{tag}.json"
    command = ["timeout", f"{timeout:g}", sys.executable, __file__, "--anchor", str(out)]
    command += [str(csv), str(SPECTRUM_COUNT), repr(shift)]
    log(f"anchor: pandas + scipy eigsh, shift {shift}")
    wall, _, code, tail = timed_child(command)
    if code == TIMEOUT_EXIT:
        log(f"  stopped after {timeout:g} s")
        return {"eigsh": {repr(shift): {"seconds": None, "stopped": timeout}}}
    if code != 0:
        raise SystemExit(f"anchor failed (exit {code}): {tail}")
    result = json.loads(out.read_text())
    log(f"  {wall:.1f} s process; eigsh {result['eigsh'][repr(shift)]['seconds']:.1f} s")
    return dict(result)


def _best(anchors: list[dict[str, Any]]) -> float:
    solves = {
        shift: solve["seconds"]
        for anchor in anchors
        for shift, solve in anchor["eigsh"].items()
        if solve["seconds"] is not None
    }
    if not solves:
        raise SystemExit("every anchor shift was stopped: raise --anchor-timeout")
    return float(min(solves, key=lambda s: solves[s]))


def _memory_gib() -> float:
    with open("/proc/meminfo") as handle:
        return int(re.search(r"MemTotal:\s+(\d+)", handle.read()).group(1)) / KIB_PER_GIB  # type: ignore[union-attr]


def _peaks_exact() -> str:
    try:
        StageClock._reset_peak()
        return "yes (VmHWM reset through /proc/self/clear_refs)"
    except OSError:
        return "no (clear_refs refused: peaks are the process's peak so far)"


def _commit() -> str:
    try:
        return subprocess.run(
            ["git", "-C", str(ROOT), "rev-parse", "--short", "HEAD"],
            capture_output=True,
            text=True,
            check=True,
        ).stdout.strip()
    except (OSError, subprocess.CalledProcessError):
        return "unknown"


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
