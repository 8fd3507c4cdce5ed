"""Benchmark of hostile network shapes: the whole ``specgraph zones`` command at two sizes.

Each shape of the catalogue (``docs/shapes.md``) is written with numpy to a
Parquet edge table in a temporary folder at a small size and at about ten
times that size, then ``python -m specgraph zones FILE --zones 8 --out DIR
--quiet`` runs as a child process, timed from outside: wall seconds and the
child's peak resident memory (``ru_maxrss`` from ``os.wait4`` on that child
alone). Times are medians over ``--repeats`` runs; the machine is shared, so
times are noisy and memory is the reliable figure.

Per shape the report gives, at each size, nodes, links, the median time, the
largest peak, the memory guard's estimate (``specgraph._guard.estimate_memory``
for the same nodes, links and zones) beside the peak, the zones delivered and
how many of them are connected (each zone's own links, scipy
``connected_components``). Between the two sizes it gives the growth
normalised by links: ``(time ratio) / (link ratio)`` and the same for peak
memory. The goal (issue 20) is at most ``GROWTH_GOAL`` for both.

Shapes (``n`` is the size argument):

* ``star``: node 0 linked to ``n`` leaves;
* ``multi-star``: ``MULTI_HUBS`` hubs in a ring, each with ``n / MULTI_HUBS`` leaves;
* ``broom``: a path of ``n / 2`` nodes whose last node is the centre of a star of ``n / 2`` leaves;
* ``caterpillar``: a spine of ``n / 5`` nodes, each with 4 leaves;
* ``bipartite``: complete bipartite ``K(4, n)``: 4 hubs each linked to all ``n`` others;
* ``path``: ``n`` nodes in a line;
* ``grid-hub``: a square grid of about ``n`` nodes plus one hub linked to 10% of them (rng 1);
* ``feeder``: a radial feeder, each node hanging from one of the 20 before it (rng 5);
* ``weights``: a square grid of about ``n`` nodes, weights log-uniform on [1e-6, 1e6] (rng 2).

How to run::

    python benchmarks/bench_shapes.py                       # every shape, both sizes
    python benchmarks/bench_shapes.py --only star --only path --repeats 3
    python benchmarks/bench_shapes.py --sizes small         # smaller size only (quick)

The Markdown report goes to stdout (and ``--out``); progress to stderr.
"""

from __future__ import annotations

import argparse
import datetime as dt
import os
import statistics
import sys
import tempfile
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))
from specgraph._guard import estimate_memory  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_real import timed  # noqa: E402  (the one timer of the command benchmarks)

#: Growth goal of issue 20: from the smaller to the larger size, time and peak
#: memory grow at most this many times the growth in links.
GROWTH_GOAL = 1.2

#: Hubs of the multi-star.
MULTI_HUBS = 16

#: Zones asked of every run (the issue's command line).
ZONES = 8

Edges = tuple[np.ndarray, np.ndarray, np.ndarray | None]


def star(n: int) -> Edges:
    return np.zeros(n, np.int64), np.arange(1, n + 1, dtype=np.int64), None


def multi_star(n: int) -> Edges:
    hubs = np.arange(MULTI_HUBS, dtype=np.int64)
    leaves = np.arange(MULTI_HUBS, MULTI_HUBS + n, dtype=np.int64)
    src = np.concatenate([hubs, leaves % MULTI_HUBS])
    dst = np.concatenate([(hubs + 1) % MULTI_HUBS, leaves])
    return src, dst, None


def broom(n: int) -> Edges:
    handle = n // 2
    i = np.arange(handle - 1, dtype=np.int64)
    leaves = np.arange(handle, n, dtype=np.int64)
    src = np.concatenate([i, np.full(leaves.size, handle - 1)])
    return src, np.concatenate([i + 1, leaves]), None


def caterpillar(n: int) -> Edges:
    spine = n // 5
    i = np.arange(spine - 1, dtype=np.int64)
    leaves = np.arange(spine, spine + 4 * spine, dtype=np.int64)
    src = np.concatenate([i, (leaves - spine) // 4])
    return src, np.concatenate([i + 1, leaves]), None


def bipartite(n: int) -> Edges:
    hubs = 4
    others = np.arange(hubs, hubs + n, dtype=np.int64)
    return np.repeat(np.arange(hubs, dtype=np.int64), n), np.tile(others, hubs), None


def path(n: int) -> Edges:
    i = np.arange(n - 1, dtype=np.int64)
    return i, i + 1, None


def _grid(n: int) -> tuple[np.ndarray, np.ndarray, int]:
    side = round(np.sqrt(n))
    idx = np.arange(side * side, dtype=np.int64).reshape(side, side)
    src = np.concatenate([idx[:, :-1].ravel(), idx[:-1, :].ravel()])
    dst = np.concatenate([idx[:, 1:].ravel(), idx[1:, :].ravel()])
    return src, dst, side * side


def grid_hub(n: int) -> Edges:
    src, dst, nodes = _grid(n)
    chosen = np.random.default_rng(1).choice(nodes, size=nodes // 10, replace=False)
    return (
        np.concatenate([src, np.full(chosen.size, nodes, np.int64)]),
        np.concatenate([dst, chosen.astype(np.int64)]),
        None,
    )


def feeder(n: int) -> Edges:
    i = np.arange(1, n, dtype=np.int64)
    parent = np.maximum(0, i - 1 - np.random.default_rng(5).integers(0, 20, size=n - 1))
    return parent, i, None


def weights(n: int) -> Edges:
    src, dst, _ = _grid(n)
    w = 10.0 ** np.random.default_rng(2).uniform(-6.0, 6.0, size=src.size)
    return src, dst, w


@dataclass(frozen=True)
class Shape:
    name: str
    make: Callable[[int], Edges]
    small: int
    large: int
    what: str


SHAPES = (
    Shape("star", star, 100_000, 1_000_000, "one hub, every other node a leaf (leaves)"),
    Shape("multi-star", multi_star, 100_000, 1_000_000, f"{MULTI_HUBS} hubs in a ring (leaves)"),
    Shape("broom", broom, 100_000, 1_000_000, "a path ending in a star, half and half (nodes)"),
    Shape("caterpillar", caterpillar, 100_000, 1_000_000, "a spine, 4 leaves per spine node"),
    Shape("bipartite", bipartite, 100_000, 1_000_000, "complete bipartite K(4, m) (m)"),
    Shape("path", path, 500_000, 5_000_000, "one long path (nodes)"),
    Shape("grid-hub", grid_hub, 100_000, 1_000_000, "square grid, one hub linked to 10%"),
    Shape("feeder", feeder, 100_000, 1_000_000, "radial feeder, one big tree (nodes)"),
    Shape("weights", weights, 100_000, 1_000_000, "square grid, weights 1e-6..1e6 log-uniform"),
)


@dataclass
class Run:
    shape: str
    size: int
    nodes: int = 0
    links: int = 0
    seconds: list[float] = field(default_factory=list)
    peak_mib: list[float] = field(default_factory=list)
    estimate_mib: float = float("nan")
    zones: int = 0
    connected: int = 0
    failed: str = ""

    @property
    def time(self) -> float:
        return statistics.median(self.seconds) if self.seconds else float("nan")

    @property
    def peak(self) -> float:
        return max(self.peak_mib) if self.peak_mib else float("nan")


def write(edges: Edges, path: Path) -> tuple[int, int]:
    """Write the edge table; return nodes and links."""
    src, dst, w = edges
    columns = {"source": src, "target": dst}
    if w is not None:
        columns["weight"] = w
    pq.write_table(pa.table(columns), path)
    return int(max(src.max(), dst.max())) + 1, int(src.size)


def zone_check(edges: Edges, nodes: int, out: Path) -> tuple[int, int]:
    """Zones delivered and how many of them are connected (scipy connected_components)."""
    table = pd.read_csv(out / "zones.csv")
    labels = np.full(nodes, -1, np.int64)
    labels[table["node"].to_numpy(np.int64)] = table["zone"].to_numpy(np.int64)
    src, dst, _ = edges
    inside = labels[src] == labels[dst]
    a = sp.coo_array(
        (np.ones(int(inside.sum())), (src[inside], dst[inside])), shape=(nodes, nodes)
    ).tocsr()
    _, comp = connected_components(a, directed=False)
    zones = np.unique(labels)
    # a zone is connected when all its nodes share one component
    per_zone = pd.DataFrame({"zone": labels, "comp": comp}).groupby("zone")["comp"].nunique()
    return int(zones.size), int((per_zone == 1).sum())


def measure(shape: Shape, size: int, repeats: int, folder: Path, timeout: float) -> Run:
    run = Run(shape.name, size)
    print(f"[{shape.name} {size:,}] writing", file=sys.stderr, flush=True)
    edges = shape.make(size)
    file = folder / f"{shape.name}-{size}.parquet"
    run.nodes, run.links = write(edges, file)
    run.estimate_mib = estimate_memory(run.nodes, run.links, zones=ZONES).peak / 2**20
    out = folder / f"out-{shape.name}-{size}"
    command = [sys.executable, "-m", "specgraph", "zones", str(file), "--zones", str(ZONES)]
    command += ["--out", str(out), "--quiet"]
    if edges[2] is not None:
        command += ["--weight", "weight"]
    for r in range(repeats):
        seconds, peak, code, tail = timed(["timeout", str(timeout), *command])
        print(
            f"[{shape.name} {size:,}] run {r + 1}: {seconds:.1f} s {peak:.0f} MiB exit {code}",
            file=sys.stderr,
            flush=True,
        )
        if code != 0:
            run.failed = f"exit {code}: {tail}"
            return run
        run.seconds.append(seconds)
        run.peak_mib.append(peak)
    run.zones, run.connected = zone_check(edges, run.nodes, out)
    file.unlink()
    return run


def report(pairs: list[tuple[Shape, list[Run]]], argv: list[str]) -> str:
    lines = [
        f"`python benchmarks/bench_shapes.py {' '.join(argv)}`",
        "",
        f"{dt.datetime.now(dt.UTC):%Y-%m-%d %H:%M} UTC, {os.cpu_count()} cores, "
        f"load average {os.getloadavg()[0]:.1f}; times are medians (shared machine: noisy), "
        "peaks the largest over repeats.",
        "",
        "| shape | nodes | links | time | peak | estimate | zones (connected) "
        "| time growth / links | peak growth / links |",
        "|---|---|---|---|---|---|---|---|---|",
    ]
    for shape, runs in pairs:
        for i, run in enumerate(runs):
            growth_t = growth_m = ""
            if i == 1 and not runs[0].failed and not run.failed:
                ratio = run.links / runs[0].links
                gt = run.time / runs[0].time / ratio
                gm = run.peak / runs[0].peak / ratio
                flag_t = "" if gt <= GROWTH_GOAL else " **over**"
                flag_m = "" if gm <= GROWTH_GOAL else " **over**"
                growth_t, growth_m = f"{gt:.2f}{flag_t}", f"{gm:.2f}{flag_m}"
            if run.failed:
                lines.append(
                    f"| {shape.name} | {run.nodes:,} | {run.links:,} | {run.failed} | | "
                    f"{run.estimate_mib:,.0f} MiB | | | |"
                )
                continue
            lines.append(
                f"| {shape.name} | {run.nodes:,} | {run.links:,} | {run.time:.1f} s "
                f"| {run.peak:,.0f} MiB | {run.estimate_mib:,.0f} MiB "
                f"| {run.zones} ({run.connected}) | {growth_t} | {growth_m} |"
            )
    return "\n".join(lines) + "\n"


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    names = [s.name for s in SHAPES]
    parser.add_argument("--only", action="append", choices=names, help="shape (repeatable)")
    parser.add_argument("--repeats", type=int, default=1, help="runs per size (median time)")
    parser.add_argument("--sizes", choices=("small", "large", "both"), default="both")
    parser.add_argument("--timeout", type=float, default=600.0, help="seconds per run")
    parser.add_argument("--out", type=Path, help="also write the report here")
    args = parser.parse_args(argv)
    os.environ["PYTHONPATH"] = str(ROOT)  # the children import this checkout
    chosen = [s for s in SHAPES if not args.only or s.name in args.only]
    pairs: list[tuple[Shape, list[Run]]] = []
    with tempfile.TemporaryDirectory(prefix="shapes-") as tmp:
        for shape in chosen:
            sizes = {"small": [shape.small], "large": [shape.large]}.get(
                args.sizes, [shape.small, shape.large]
            )
            pairs.append(
                (shape, [measure(shape, n, args.repeats, Path(tmp), args.timeout) for n in sizes])
            )
    text = report(pairs, sys.argv[1:] if argv is None else argv)
    print(text)
    if args.out:
        args.out.write_text(text)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
