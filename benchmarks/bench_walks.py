"""Benchmark of the random-surfer stationary distribution and of local zones.

What it measures
----------------
On a directed version of the road-like family (:func:`specgraph.gallery.road_like`,
cached by ``bench_eigen.py``'s key), at each ``--sizes`` (default 1,000,000
nodes) and at ``--reference-size`` (default 100,000) in the same run:

* ``ours-stationary``: :func:`specgraph.walks.stationary_distribution` at the
  default damping 0.85 and tolerance (L1 change of the last step <= 1e-10);
* ``ours-local``: :func:`specgraph.zones.local_zone` around one asset with
  ``size_limit=LOCAL_SIZE``; each repeat takes the next of ``LOCAL_ASSETS``
  assets drawn with a fixed seed, and the table also gives the nodes the walk
  touched and the conductance found. The network's id-to-row map, built once
  per network on first use (O(n), then cached), is built in the set-up;
* at the reference size only, ``networkx-pagerank`` (``networkx.pagerank`` at
  alpha 0.85 with its default ``tol=1e-6``, which stops when the L1 change is
  below ``n * tol``, i.e. 0.1 at 100,000 nodes) and ``networkx-pagerank-tol``
  (``tol=1e-10 / n``, the same L1 test as ours). Each row gives the L1
  distance of its result to ours.

Directed network: every link of the road-like adjacency (upper triangle) is a
one-way arc with probability ``ONE_WAY_SHARE``, in a random direction, and
two opposite arcs of the link's affinity otherwise (fixed seed).

Each run is a fresh child process that loads the cached adjacency, builds the
network (and, for networkx, the ``DiGraph``) untimed, runs the method once on
a 5,000-node network untimed (imports), returns freed heap to the system,
resets its peak RSS and reports peak minus current RSS after the call (the
*extra memory*, probes shared with ``bench_eigen.py``). The median of
``--repeats`` wall times is reported; ratios are to ``ours-stationary`` at
the same size.

How to run
----------
::

    python benchmarks/bench_walks.py --sizes 100000          # a few minutes
    python benchmarks/bench_walks.py                         # 1,000,000 and 100,000
"""

from __future__ import annotations

import argparse
import json
import logging
import platform
import shlex
import statistics
import subprocess
import sys
import time
from importlib.metadata import PackageNotFoundError, version
from pathlib import Path
from typing import Any

import numpy as np
import scipy.sparse as sp

sys.path.insert(0, str(Path(__file__).resolve().parent))
# bench_eigen.py is a sibling script: its network cache and child-process memory
# probes are shared rather than copied.
from bench_eigen import (
    DEFAULT_CACHE,
    _git_state,
    _peak_kib,
    _release_free_heap,
    _reset_peak,
    _status_kib,
    ensure_cached,
    load_adjacency,
)

logger = logging.getLogger("bench_walks")

#: Share of road links made one-way (the rest are two opposite arcs).
ONE_WAY_SHARE = 0.2
#: Size limit of the local zones, in nodes.
LOCAL_SIZE = 500
#: Assets drawn (fixed seed) for the local zones; repeat i uses asset i.
LOCAL_ASSETS = 5
#: networkx's L1 test is ``err < n * tol``; this gives ours' 1e-10.
MATCHED_L1 = 1e-10
#: Road-like network each child runs once, untimed, before the timed call.
WARMUP_N = 5000
RESULT_MARK = "@@RESULT "
DEFAULT_SIZES = (1_000_000,)
DEFAULT_REFERENCE = 100_000


def directed_arcs(adjacency: sp.csr_array, seed: int) -> sp.csr_array:
    """Arcs of the directed road network (see the module docstring)."""
    upper = sp.triu(adjacency, k=1, format="coo")
    rng = np.random.default_rng(seed)
    one_way = rng.random(upper.nnz) < ONE_WAY_SHARE
    flip = rng.random(upper.nnz) < 0.5
    rows = np.concatenate([upper.row, upper.col[~one_way]])
    cols = np.concatenate([upper.col, upper.row[~one_way]])
    data = np.concatenate([upper.data, upper.data[~one_way]])
    swap = np.concatenate([one_way & flip, np.zeros((~one_way).sum(), dtype=bool)])
    rows, cols = np.where(swap, cols, rows), np.where(swap, rows, cols)
    n = adjacency.shape[0]
    return sp.csr_array(sp.coo_array((data, (rows, cols)), shape=(n, n)))


def build_network(adjacency: sp.csr_array, seed: int) -> Any:
    from specgraph import Network

    arcs = directed_arcs(adjacency, seed)
    n = adjacency.shape[0]
    return Network(arcs + arcs.T, np.arange(n).astype(str), arcs=arcs)


def assets(n: int, seed: int) -> list[str]:
    rng = np.random.default_rng(seed + 7)
    return [str(i) for i in rng.choice(n, size=LOCAL_ASSETS, replace=False)]


def prepare(method: str, network: Any, spec: dict[str, Any]) -> Any:
    """The untimed set-up, returning the timed call."""
    from specgraph.walks import stationary_distribution
    from specgraph.zones import local_zone

    if method == "ours-stationary":
        return lambda: stationary_distribution(network)
    if method == "ours-local":
        asset = assets(network.n_nodes, spec["seed"])[spec["repeat"] % LOCAL_ASSETS]
        # The id -> row map is built once per network (O(n), then cached): set-up.
        network.index_of  # noqa: B018
        return lambda: local_zone(network, asset, size_limit=LOCAL_SIZE)
    import networkx as nx

    graph = nx.DiGraph()
    graph.add_nodes_from(range(network.n_nodes))
    arcs = network.arcs.tocoo()
    graph.add_weighted_edges_from(
        zip(arcs.row.tolist(), arcs.col.tolist(), arcs.data.tolist(), strict=True)
    )
    tol = 1e-6 if method == "networkx-pagerank" else MATCHED_L1 / network.n_nodes
    return lambda: nx.pagerank(graph, alpha=0.85, tol=tol, max_iter=10_000)


def worker(spec: dict[str, Any]) -> dict[str, Any]:
    from specgraph import gallery

    adjacency = load_adjacency(Path(spec["path"]))
    network = build_network(adjacency, spec["seed"])
    small = build_network(gallery.road_like(WARMUP_N, rng=spec["seed"] + 1).adjacency, 0)
    prepare(spec["method"], small, {**spec, "repeat": 0})()
    call = prepare(spec["method"], network, spec)
    _release_free_heap()
    reset = _reset_peak()
    floor = _peak_kib()
    start = time.perf_counter()
    result = call()
    seconds = time.perf_counter() - start
    report: dict[str, Any] = {
        "seconds": seconds,
        "extra_mib": (_peak_kib() - floor) / 1024 if reset else None,
        "rss_mib": (_status_kib("VmRSS") or 0) / 1024,
    }
    if spec["method"] == "ours-local":
        report.update(
            touched=result.touched,
            pushes=result.pushes,
            size=result.size,
            conductance=result.conductance,
        )
    elif spec["method"] == "ours-stationary":
        report.update(iterations=result.iterations, residual=result.residual)
        np.save(spec["values_path"], result.values)
    else:
        values = np.array([result[i] for i in range(network.n_nodes)])
        ours = Path(spec["values_path"])
        report["l1_to_ours"] = (
            float(np.abs(values - np.load(ours)).sum()) if ours.exists() else None
        )
    return report


def run_child(spec: dict[str, Any]) -> dict[str, Any]:
    command = [sys.executable, str(Path(__file__).resolve()), "--worker", json.dumps(spec)]
    done = subprocess.run(command, capture_output=True, text=True)
    for line in reversed(done.stdout.splitlines()):
        if line.startswith(RESULT_MARK):
            return dict(json.loads(line[len(RESULT_MARK) :]))
    tail = (done.stderr.strip().splitlines() or ["no output"])[-1]
    return {"failed": f"exit {done.returncode}: {tail[:160]}"}


def run_size(n: int, methods: list[str], args: argparse.Namespace) -> list[dict[str, Any]]:
    path = ensure_cached(args.cache_dir, "road", n, args.seed)
    values_path = args.cache_dir / f"walks-stationary-n{n}-seed{args.seed}.npy"
    values_path.unlink(missing_ok=True)
    rows = []
    for method in methods:
        runs = []
        for repeat in range(args.repeats):
            spec = {
                "path": str(path),
                "method": method,
                "seed": args.seed,
                "repeat": repeat,
                "values_path": str(values_path),
            }
            logger.info("n=%d %s repeat %d", n, method, repeat + 1)
            runs.append(run_child(spec))
        rows.append({"n": n, "method": method, "runs": runs})
    return rows


def _median(runs: list[dict[str, Any]], key: str) -> float | None:
    values = [r[key] for r in runs if r.get(key) is not None]
    return statistics.median(values) if values else None


def table(rows: list[dict[str, Any]]) -> list[str]:
    lines = [
        "| nodes | method | median s | ratio to ours-stationary | extra MiB (peak) | notes |",
        "|---:|---|---:|---:|---:|---|",
    ]
    base = {r["n"]: _median(r["runs"], "seconds") for r in rows if r["method"] == "ours-stationary"}
    for row in rows:
        runs = row["runs"]
        failed = [r["failed"] for r in runs if "failed" in r]
        if failed:
            lines.append(f"| {row['n']:,} | {row['method']} | - | - | - | failed: {failed[0]} |")
            continue
        seconds = _median(runs, "seconds")
        memory = max((r["extra_mib"] or 0.0) for r in runs)
        ratio = seconds / base[row["n"]] if base.get(row["n"]) else float("nan")
        notes = ""
        if row["method"] == "ours-stationary":
            notes = f"{runs[0]['iterations']} steps, last L1 change {runs[0]['residual']:.1e}"
        elif row["method"] == "ours-local":
            touched = ", ".join(str(r["touched"]) for r in runs)
            cond = ", ".join(f"{r['conductance']:.3f}" for r in runs)
            notes = f"touched nodes {touched}; conductance {cond}; size <= {LOCAL_SIZE}"
        elif runs[0].get("l1_to_ours") is not None:
            notes = f"L1 distance to ours {runs[0]['l1_to_ours']:.1e}"
        cells = [f"{row['n']:,}", row["method"], f"{seconds:.3f}", f"{ratio:.2f}"]
        lines.append("| " + " | ".join([*cells, f"{memory:.0f}", notes]) + " |")
    return lines


def _version(package: str) -> str:
    try:
        return version(package)
    except PackageNotFoundError:
        return "not installed"


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=list(DEFAULT_SIZES))
    parser.add_argument("--reference-size", type=int, default=DEFAULT_REFERENCE)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--cache-dir", type=Path, default=DEFAULT_CACHE)
    parser.add_argument("--worker", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.worker:
        print(RESULT_MARK + json.dumps(worker(json.loads(args.worker))), flush=True)
        return 0
    logging.basicConfig(level=logging.INFO, format="%(message)s", stream=sys.stderr)
    ours = ["ours-stationary", "ours-local"]
    rows = run_size(
        args.reference_size, [*ours, "networkx-pagerank", "networkx-pagerank-tol"], args
    )
    for n in args.sizes:
        if n != args.reference_size:
            rows += run_size(n, ours, args)
    command = "python " + shlex.join(["benchmarks/bench_walks.py", *(argv or sys.argv[1:])])
    print(
        f"Command: `{command}`; {_git_state()}; Python {platform.python_version()}, "
        f"numpy {_version('numpy')}, scipy {_version('scipy')}, networkx {_version('networkx')}; "
        f"{args.repeats} repeats, road-like seed {args.seed}, {ONE_WAY_SHARE:.0%} one-way links.\n"
    )
    print("\n".join(table(rows)))
    return 0


if __name__ == "__main__":
    sys.exit(main())
