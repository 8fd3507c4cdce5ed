"""Benchmark of the diagnostics (``score``, ``robustness``, ``compare``) against networkx anchors.

What it measures
----------------
On the road-like family (:func:`specgraph.gallery.road_like`) at ``--sizes``
(default 10,000, 100,000 and 1,000,000 nodes), ours:

* ``score``: :func:`specgraph.score` with ``eigengap=False``, and with
  ``eigengap=True`` (the ``k + 1 = 17`` smallest eigenpairs of the normalized
  Laplacian on top);
* ``robustness``: :func:`specgraph.diagnostics.robustness` with the zones, and
  without them; and its stages, each timed on its own through public
  functions: :func:`~specgraph.diagnostics.cut_structure` (bridges and
  articulation nodes), the second smallest eigenpair of ``L = D - A`` and of
  the normalized Laplacian (``smallest_eigenpairs(laplacian(...), 2)``,
  operator build included), and
  :func:`~specgraph.diagnostics.effective_resistances` (which runs its own cut
  structure first);
* ``compare``: :func:`specgraph.compare` of two zonings.

The zonings are not from :func:`specgraph.find_zones` (far too slow to make
at 1,000,000 nodes for a diagnostics benchmark): they are scikit-learn
``MiniBatchKMeans(n_clusters=16 or 17, random_state=seed, n_init=3)`` on the
node coordinates, made once per size and cached. Such zones are compact
blobs of the plane; a few are not connected by their own links.

The anchors run on the 10,000-node network of the same family (``--nx-size``):
networkx ``community.modularity`` and ``conductance`` of each zone (the
counterpart of ``score`` without the eigengap; networkx has no sparse solver
for 17 eigenpairs, its spectrum functions are dense), ``bridges``,
``articulation_points``, ``algebraic_connectivity`` of the whole network (``L``
and normalized) and of each zone's induced sub-network (``robustness``), and
scikit-learn ``adjusted_rand_score`` plus ``normalized_mutual_info_score``
(``compare``). networkx's ``algebraic_connectivity`` has four methods; each is
timed once per Laplacian (time limit ``--pilot-timeout``), and the fastest whose
value agrees with the median of the finished ones to ``PILOT_AGREEMENT``
(relative) is the anchor.

The networkx counterpart of the bottleneck ranking is the effective resistance
of every link. ``nx.resistance_distance(G, u, v)`` builds the dense Laplacian
and its pseudo-inverse at every call, so one call on 10,000 nodes takes many
minutes: it is timed on sampled links at the smaller ``--resistance-sizes``
(default 2,000 and 3,000 nodes), the per-call time at the largest of them extrapolated to
``--nx-size`` as ``n^3`` (the cost of a dense eigendecomposition; the exponent
measured between the sizes is printed beside it), and multiplied by the number of links
there. Its memory is extrapolated as ``n^2`` (dense matrices). Both figures are
extrapolations and the report says so.

Method of measurement (as in ``bench_eigen.py``): each measured call runs in
a fresh child process that loads the cached network (and builds the networkx
graph for the anchors), runs the task once, untimed, on a cached 5,000-node
road-like network (500 nodes for the anchors: imports, compiled kernels),
returns freed heap to the system, resets
its peak resident set size (``/proc/self/clear_refs``) and reports peak minus
current RSS (``VmHWM - VmRSS``) after one call. Wall time is
``time.perf_counter`` around the call; medians over ``--repeats`` runs
(``--repeats-large``, default 1, at ``--large`` nodes and above), and repeats go round all
tasks in turn. Composite anchor rows add the times of their parts and take the
largest memory of their parts (they run one after the other).

How to run
----------
::

    python benchmarks/bench_diagnostics.py --quick            # 10,000 and 100,000 nodes
    python benchmarks/bench_diagnostics.py --out docs/benchmarks-diagnostics.md

The Markdown report goes to stdout (and to ``--out``); progress goes to stderr.
"""

from __future__ import annotations

import argparse
import datetime as dt
import functools
import gc
import json
import logging
import math
import os
import platform
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
from pathlib import Path
from typing import Any

import numpy as np
import scipy.sparse as sp

sys.path.insert(0, str(Path(__file__).resolve().parent))
# bench_eigen.py is a sibling script, importable through the path above.
from bench_eigen import (
    RESULT_MARK,
    _default_cap,
    _git_state,
    _peak_kib,
    _release_free_heap,
    _reset_peak,
    _status_kib,
    _version,
    blas_lines,
    ensure_cached,
    load_adjacency,
)

logger = logging.getLogger("bench_diagnostics")

#: Zones of the zoning that is scored, and of the second zoning for ``compare``.
ZONES = 16
ZONES_B = 17
#: ``n_init`` of the k-means that makes the zonings (scikit-learn's default is 3
#: for MiniBatchKMeans).
KMEANS_INIT = 3
#: A coordinate set derived from the seed is accepted when the inverse link
#: lengths it gives match the cached link weights to this relative tolerance.
COORD_RTOL = 1e-9
#: Nodes of the road-like network (seed + 1, cached) each child runs its task on,
#: untimed, first.
WARMUP_N = 5000
#: networkx anchors warm up on a smaller network (pure Python, nothing to compile).
NX_WARMUP_N = 500
#: Methods of ``nx.algebraic_connectivity`` tried in the pilot.
NX_METHODS = ("tracemin_pcg", "tracemin_lu", "lanczos", "lobpcg")
#: A pilot value agreeing with the median of the finished ones to this relative
#: difference counts as converged.
PILOT_AGREEMENT = 1e-6
#: Seconds a child may spend loading and building before the parent gives up.
SETUP_ALLOWANCE = 900.0
#: Cost exponent of one ``nx.resistance_distance`` call (its dense
#: eigendecomposition), used to extrapolate from the largest size measured. The
#: exponent measured between the sizes is printed only: on a loaded machine
#: small dense solves suffer most from BLAS threads waiting, and it came out
#: between -0.1 and 3.3 in runs of the same script.
DENSE_EXPONENT = 3.0

DEFAULT_SIZES = (10_000, 100_000, 1_000_000)
QUICK_SIZES = (10_000, 100_000)
DEFAULT_CACHE = Path(__file__).resolve().parent / ".cache"


# --------------------------------------------------------------------------- inputs


def coordinates(adjacency: sp.csr_array, n: int, seed: int, path: Path) -> np.ndarray:
    """Node coordinates of a cached road-like network.

    :func:`specgraph.gallery.road_like` draws its points first from
    ``default_rng(seed)``; the cache of ``bench_eigen.py`` keeps only the
    adjacency, so the points are drawn again and checked against the link
    weights (inverse lengths). If they do not match (the generator changed),
    the network is rebuilt and its coordinates stored beside the cache.
    """
    stored = path.with_name(path.stem + "-coords.npy")
    if stored.exists():
        return np.load(stored)
    points = np.random.default_rng(seed).random((n, 2))
    upper = sp.triu(adjacency).tocoo()
    weights = 1.0 / np.linalg.norm(points[upper.row] - points[upper.col], axis=1)
    if np.allclose(weights, upper.data, rtol=COORD_RTOL, atol=0.0):
        return points
    from specgraph import gallery

    logger.info("coordinates do not match the cached weights; rebuilding n=%d", n)
    network = gallery.road_like(n, rng=seed)
    sp.save_npz(path, sp.csr_array(network.adjacency))
    assert network.coordinates is not None
    np.save(stored, network.coordinates)
    return network.coordinates


def zonings(points: np.ndarray, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """The two k-means zonings of the node coordinates (see the module docstring)."""
    from sklearn.cluster import MiniBatchKMeans

    def run(k: int) -> np.ndarray:
        model = MiniBatchKMeans(n_clusters=k, random_state=seed, n_init=KMEANS_INIT)
        return np.asarray(model.fit_predict(points), dtype=np.int64)

    return run(ZONES), run(ZONES_B)


def ensure_labels(cache_dir: Path, path: Path, n: int, seed: int) -> tuple[Path, float]:
    """Cache both zonings of one network; returns the file and the k-means time."""
    out = path.with_name(f"{path.stem}-kmeans{ZONES}-{ZONES_B}-seed{seed}.npz")
    if out.exists():
        return out, float(np.load(out)["seconds"])
    adjacency = load_adjacency(path)
    points = coordinates(adjacency, n, seed, path)
    start = time.perf_counter()
    a, b = zonings(points, seed)
    seconds = time.perf_counter() - start
    np.savez(out, a=a, b=b, seconds=seconds)
    logger.info("k-means zonings of n=%d in %.1f s", n, seconds)
    return out, seconds


@dataclass
class Context:
    """What a task works on, built before the clock starts."""

    network: Any  # specgraph.Network
    adjacency: sp.csr_array
    labels: np.ndarray
    labels_b: np.ndarray
    seed: int
    graph: Any = None  # networkx.Graph, for the anchors
    zone_sets: list[set[int]] = field(default_factory=list)
    nx_methods: dict[str, str] = field(default_factory=dict)
    link: tuple[int, int] = (0, 1)


def build_context(
    adjacency: sp.csr_array,
    points: np.ndarray,
    labels: np.ndarray,
    labels_b: np.ndarray,
    spec: dict[str, Any],
    nx_graph: bool,
) -> Context:
    from specgraph import Network

    n = adjacency.shape[0]
    network = Network(adjacency, np.arange(n).astype(str), coordinates=points)
    context = Context(network, adjacency, labels, labels_b, spec["seed"])
    context.nx_methods = dict(spec.get("nx_methods") or {})
    if nx_graph:
        import networkx as nx

        context.graph = nx.from_scipy_sparse_array(adjacency)
        context.zone_sets = [set(np.flatnonzero(labels == z).tolist()) for z in range(ZONES)]
        upper = sp.triu(adjacency).tocoo()
        pick = np.random.default_rng([spec["seed"], spec.get("repeat", 0)]).integers(upper.nnz)
        context.link = (int(upper.row[pick]), int(upper.col[pick]))
    return context


# --------------------------------------------------------------------------- tasks


def _ours_score(ctx: Context, eigengap: bool) -> str:
    from specgraph import score

    card = score(ctx.network, ctx.labels, eigengap=eigengap, rng=ctx.seed)
    o = card.overall
    text = f"Q={o['modularity']:.4f}, max cond {o['max_conductance']:.4f}"
    if eigengap:
        text += f", relative eigengap {o['relative_eigengap']:.3g}"
    return text


def _ours_robustness(ctx: Context, zones: bool) -> str:
    from specgraph.diagnostics import robustness

    report = robustness(ctx.network, labels=ctx.labels if zones else None, rng=ctx.seed)
    r = report.record
    return (
        f"{r['bridges']} bridges, {r['articulation_nodes']} articulation; "
        f"l2(L)={report.algebraic_connectivity:.7g}, l2(N)={report.normalized_connectivity:.7g}; "
        f"eigen {'+'.join(r['eigen_methods'])}; resistance {r['resistance_method']}"
    )


def _ours_cuts(ctx: Context) -> str:
    from specgraph.diagnostics import cut_structure

    cuts = cut_structure(ctx.network)
    return f"{cuts.n_bridges} bridges, {cuts.articulation.size} articulation"


def _ours_lambda2(ctx: Context, normalized: bool) -> str:
    from specgraph import laplacian, smallest_eigenpairs

    operator = laplacian(ctx.network, kind="normalized" if normalized else "combinatorial")
    result = smallest_eigenpairs(operator, 2, rng=ctx.seed)
    return f"l2={result.values[1]:.7g} ({result.method}, {result.matvecs} matvecs)"


def _ours_resistance(ctx: Context) -> str:
    from specgraph.diagnostics import effective_resistances

    res = effective_resistances(ctx.network, rng=ctx.seed)
    # Foster's theorem: leverages of a connected network sum to n - 1.
    total = float(res.leverage.sum())
    return f"{res.method}, sum of leverages {total:.6g} (n - 1 = {ctx.network.n_nodes - 1})"


def _ours_compare(ctx: Context) -> str:
    from specgraph import compare

    result = compare(ctx.labels, ctx.labels_b)
    return f"ARI {result.adjusted_rand:.4f}, NMI {result.nmi:.4f}"


def _nx_modularity(ctx: Context) -> str:
    import networkx as nx

    return f"Q={nx.community.modularity(ctx.graph, ctx.zone_sets, weight='weight'):.4f}"


def _nx_conductance(ctx: Context) -> str:
    import networkx as nx

    values = [nx.conductance(ctx.graph, zone, weight="weight") for zone in ctx.zone_sets]
    return f"max cond {max(values):.4f}"


def _nx_bridges(ctx: Context) -> str:
    import networkx as nx

    return f"{len(list(nx.bridges(ctx.graph)))} bridges"


def _nx_articulation(ctx: Context) -> str:
    import networkx as nx

    return f"{len(list(nx.articulation_points(ctx.graph)))} articulation"


def _nx_lambda2(ctx: Context, normalized: bool, method: str | None = None) -> str:
    import networkx as nx

    kind = "normalized" if normalized else "combinatorial"
    chosen = method or ctx.nx_methods.get(kind, "tracemin_pcg")
    value = nx.algebraic_connectivity(
        ctx.graph, weight="weight", normalized=normalized, method=chosen, seed=ctx.seed
    )
    return f"l2={value:.7g} ({chosen})"


def _nx_zone_lambda2(ctx: Context) -> str:
    import networkx as nx

    connected = 0
    for zone in ctx.zone_sets:
        sub = ctx.graph.subgraph(zone)
        connected += nx.is_connected(sub)
        for normalized, kind in ((False, "combinatorial"), (True, "normalized")):
            nx.algebraic_connectivity(
                sub,
                weight="weight",
                normalized=normalized,
                method=ctx.nx_methods.get(kind, "tracemin_pcg"),
                seed=ctx.seed,
            )
    return f"{connected} of {len(ctx.zone_sets)} zones connected"


def _nx_resistance(ctx: Context) -> str:
    import networkx as nx

    u, v = ctx.link
    # Weights are affinities (conductances): no inversion.
    value = nx.resistance_distance(ctx.graph, u, v, weight="weight", invert_weight=False)
    return f"R({u},{v})={value:.6g}"


def _sk_compare(ctx: Context) -> str:
    from sklearn.metrics import adjusted_rand_score, normalized_mutual_info_score

    ari = adjusted_rand_score(ctx.labels, ctx.labels_b)
    nmi = normalized_mutual_info_score(ctx.labels, ctx.labels_b)
    return f"ARI {ari:.4f}, NMI {nmi:.4f}"


@dataclass(frozen=True)
class Task:
    """One measured call: who runs it, what the table calls it, and the call."""

    side: str  # "ours" or "anchor"
    label: str
    run: Callable[[Context], str]


TASKS: dict[str, Task] = {
    "score": Task("ours", "`score(eigengap=False)`", lambda c: _ours_score(c, False)),
    "score-eigengap": Task("ours", "`score(eigengap=True)`", lambda c: _ours_score(c, True)),
    "robustness": Task(
        "ours", "`robustness(labels=16 zones)`", lambda c: _ours_robustness(c, True)
    ),
    "robustness-whole": Task(
        "ours", "`robustness()` (no zones)", lambda c: _ours_robustness(c, False)
    ),
    "stage-cuts": Task("ours", "stage: `cut_structure`", _ours_cuts),
    "stage-l2-L": Task("ours", "stage: 2 smallest pairs of L", lambda c: _ours_lambda2(c, False)),
    "stage-l2-N": Task("ours", "stage: 2 smallest pairs of N", lambda c: _ours_lambda2(c, True)),
    "stage-resistance": Task("ours", "stage: `effective_resistances`", _ours_resistance),
    "compare": Task("ours", "`compare` (16 vs 17 zones)", _ours_compare),
    "nx-modularity": Task("anchor", "networkx `community.modularity`", _nx_modularity),
    "nx-conductance": Task("anchor", "networkx `conductance` x 16 zones", _nx_conductance),
    "nx-bridges": Task("anchor", "networkx `bridges`", _nx_bridges),
    "nx-articulation": Task("anchor", "networkx `articulation_points`", _nx_articulation),
    "nx-l2-L": Task(
        "anchor", "networkx `algebraic_connectivity` (L)", lambda c: _nx_lambda2(c, False)
    ),
    "nx-l2-N": Task(
        "anchor", "networkx `algebraic_connectivity` (N)", lambda c: _nx_lambda2(c, True)
    ),
    "nx-zone-l2": Task(
        "anchor", "networkx `algebraic_connectivity` x 16 zones (L and N)", _nx_zone_lambda2
    ),
    "nx-resistance": Task("anchor", "networkx `resistance_distance`, one link", _nx_resistance),
    "sk-compare": Task(
        "anchor",
        "scikit-learn `adjusted_rand_score` + `normalized_mutual_info_score`",
        _sk_compare,
    ),
}
for _method in NX_METHODS:
    for _kind, _normalized in (("L", False), ("N", True)):
        TASKS[f"pilot-{_kind}-{_method}"] = Task(
            "anchor",
            f"pilot: networkx `algebraic_connectivity` ({_kind}, {_method})",
            functools.partial(_nx_lambda2, normalized=_normalized, method=_method),
        )

OURS = [name for name, task in TASKS.items() if task.side == "ours"]
NX_ROWS = [
    "nx-modularity",
    "nx-conductance",
    "nx-bridges",
    "nx-articulation",
    "nx-l2-L",
    "nx-l2-N",
    "nx-zone-l2",
    "sk-compare",
]
#: Anchor parts doing the work of each of our rows ("resistance" stands for the
#: extrapolated effective resistance of every link).
SAME_WORK: dict[str, tuple[str, ...]] = {
    "score": ("nx-modularity", "nx-conductance"),
    "score-eigengap": ("nx-modularity", "nx-conductance"),
    "robustness": (
        "nx-bridges",
        "nx-articulation",
        "nx-l2-L",
        "nx-l2-N",
        "nx-zone-l2",
        "resistance",
    ),
    "robustness-whole": ("nx-bridges", "nx-articulation", "nx-l2-L", "nx-l2-N", "resistance"),
    "stage-cuts": ("nx-bridges", "nx-articulation"),
    "stage-l2-L": ("nx-l2-L",),
    "stage-l2-N": ("nx-l2-N",),
    "stage-resistance": ("resistance",),
    "compare": ("sk-compare",),
}


# --------------------------------------------------------------------------- child process


def warm_up(task: Task, spec: dict[str, Any]) -> None:
    """Run the task once, untimed, on a small cached road-like network of the same family."""
    small = spec["warmup_anchor" if task.side == "anchor" else "warmup_ours"]
    path = Path(small["path"])
    adjacency = load_adjacency(path)
    points = coordinates(adjacency, adjacency.shape[0], small["seed"], path)
    stored = np.load(small["labels"])
    nx_graph = task.side == "anchor"
    context = build_context(adjacency, points, stored["a"], stored["b"], spec, nx_graph)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            task.run(context)
    except Exception as exc:  # the timed run reports failures
        logger.debug("warm-up failed: %s", exc)


def worker(spec: dict[str, Any]) -> dict[str, Any]:
    """Run one task once on one cached network; report time, memory and its result."""
    cap = spec.get("memory_cap")
    if cap:
        limit = int(cap * 2**30)
        resource.setrlimit(resource.RLIMIT_AS, (limit, limit))
    task = TASKS[spec["task"]]
    path = Path(spec["path"])
    adjacency = load_adjacency(path)
    n = adjacency.shape[0]
    points = coordinates(adjacency, n, spec["seed"], path)
    stored = np.load(spec["labels"])
    context = build_context(
        adjacency, points, stored["a"], stored["b"], spec, task.side == "anchor"
    )
    warm_up(task, spec)

    report: dict[str, Any] = {"n": n, "links": int(adjacency.nnz // 2)}
    gc.collect()
    _release_free_heap()
    report["peak_reset"] = _reset_peak()
    baseline = _status_kib("VmRSS") or resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    floor = _peak_kib()
    timeout = spec.get("timeout")
    if timeout:
        signal.setitimer(signal.ITIMER_REAL, float(timeout))
    start = time.perf_counter()
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            result = task.run(context)
        seconds = time.perf_counter() - start
    except Exception as exc:
        signal.setitimer(signal.ITIMER_REAL, 0)
        reason = " ".join(str(exc).split())[:160]
        report.update(status="failed", error=f"{type(exc).__name__}: {reason}")
        return report
    signal.setitimer(signal.ITIMER_REAL, 0)
    peak = _peak_kib()
    report.update(
        status="ok",
        seconds=seconds,
        extra_kib=max(peak - max(baseline, floor), 0),
        result=result,
        warnings=sorted({" ".join(str(w.message).split())[:80] for w in caught}),
    )
    return report


def run_child(spec: dict[str, Any]) -> dict[str, Any]:
    """Run :func:`worker` in a fresh interpreter and parse its result line."""
    command = [sys.executable, str(Path(__file__).resolve()), "--worker", json.dumps(spec)]
    limit = spec["timeout"] + SETUP_ALLOWANCE if spec.get("timeout") else None
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
    return {"status": "failed", "error": f"exit {done.returncode}: {tail[0][:160]}"}


# --------------------------------------------------------------------------- the run


@dataclass
class Row:
    """One task on one network, aggregated over repeats."""

    task: str
    n: int
    runs: list[dict[str, Any]] = field(default_factory=list)
    status: str = "pending"  # ok | failed | timeout
    note: str = ""

    @property
    def times(self) -> list[float]:
        return [r["seconds"] for r in self.runs if r.get("status") == "ok"]

    @property
    def median(self) -> float | None:
        return statistics.median(self.times) if self.times else None

    @property
    def extra_mib(self) -> float | None:
        values = [r["extra_kib"] for r in self.runs if r.get("status") == "ok"]
        return max(values) / 1024 if values else None

    @property
    def result(self) -> str:
        first = next((r for r in self.runs if r.get("status") == "ok"), None)
        return str(first["result"]) if first else ""


@dataclass
class Cached:
    """A cached network of the run and the facts the report needs."""

    n: int
    path: Path
    labels: Path
    kmeans_seconds: float
    links: int = 0


def prepare(cache_dir: Path, n: int, seed: int) -> Cached:
    path = ensure_cached(cache_dir, "road", n, seed)
    labels, seconds = ensure_labels(cache_dir, path, n, seed)
    return Cached(n, path, labels, seconds)


def measure(
    rows: list[Row],
    net: Cached,
    repeats: int,
    args: argparse.Namespace,
    timeout: float,
    *,
    first_repeat: int = 0,
) -> None:
    """Run every row ``repeats`` times, going round the rows in turn."""
    for repeat in range(first_repeat, first_repeat + repeats):
        for row in rows:
            if row.status in {"failed", "timeout"}:
                continue
            spec = {
                "path": str(net.path),
                "labels": str(net.labels),
                "task": row.task,
                "seed": args.seed,
                "repeat": repeat,
                "timeout": timeout,
                "memory_cap": args.memory_cap,
                "nx_methods": args.nx_methods,
                "warmup_ours": args.warmup_ours,
                "warmup_anchor": args.warmup_anchor,
            }
            logger.info("n=%d repeat %d: %s", net.n, repeat + 1, row.task)
            key = f"{row.task}|{net.n}|{repeat}|{args.seed}"
            outcome = args.journal_done.get(key)
            if outcome is None:
                outcome = run_child(spec)
                if args.journal is not None:
                    with args.journal.open("a") as out:
                        out.write(json.dumps({"key": key, "outcome": outcome}) + "\n")
            else:
                logger.info("  from the journal")
            net.links = outcome.get("links", net.links)
            status = outcome.get("status")
            if status == "ok":
                row.runs.append(outcome)
                row.status = "ok"
                logger.info(
                    "  %.3f s, extra %.1f MiB: %s",
                    outcome["seconds"],
                    outcome["extra_kib"] / 1024,
                    outcome["result"],
                )
            elif not row.runs:
                row.status = "timeout" if status == "timeout" else "failed"
                row.note = outcome.get("error", f"over {timeout:g} s")
                logger.info("  %s: %s", row.status, row.note)


def pilot(net: Cached, args: argparse.Namespace) -> tuple[dict[str, str], list[Row]]:
    """Time each networkx ``algebraic_connectivity`` method once; keep the fastest that agrees."""
    rows = [Row(f"pilot-{k}-{m}", net.n) for k in ("L", "N") for m in NX_METHODS]
    measure(rows, net, 1, args, args.pilot_timeout)
    chosen: dict[str, str] = {}
    for kind, name in (("L", "combinatorial"), ("N", "normalized")):
        done = [r for r in rows if r.task.startswith(f"pilot-{kind}-") and r.median]
        values = {r.task: float(r.result.split("=")[1].split()[0]) for r in done}
        if not values:
            continue
        middle = statistics.median(values.values())
        agree = [r for r in done if abs(values[r.task] - middle) <= PILOT_AGREEMENT * abs(middle)]
        best = min(agree or done, key=lambda r: r.median or math.inf)
        chosen[name] = best.task.split("-", 2)[2]
    return chosen, rows


@dataclass
class Extrapolation:
    """Effective resistance of every link by networkx, extrapolated (see the module docstring)."""

    rows: list[Row]
    exponent: float
    per_link: float
    links: int
    seconds: float
    extra_mib: float


def resistance_anchor(
    sizes: list[int], target: Cached, args: argparse.Namespace
) -> Extrapolation | None:
    nets = [prepare(args.cache_dir, n, args.seed) for n in sizes]
    rows = [Row("nx-resistance", n) for n in sizes]
    # Repeats go round the sizes in turn, so that load on a shared machine
    # hits every size alike (the growth exponent compares them).
    for repeat in range(args.resistance_repeats):
        for row, net in zip(rows, nets, strict=True):
            measure([row], net, 1, args, args.timeout, first_repeat=repeat)
    good = [r for r in rows if r.median]
    if not good:
        return None
    last = good[-1]
    assert last.median is not None
    assert last.extra_mib is not None
    measured = math.nan
    if len(good) >= 2 and good[0].median:
        measured = math.log(last.median / good[0].median) / math.log(last.n / good[0].n)
    per_link = last.median * (target.n / last.n) ** DENSE_EXPONENT
    mib = last.extra_mib * (target.n / last.n) ** 2
    return Extrapolation(rows, measured, per_link, target.links, per_link * target.links, mib)


# --------------------------------------------------------------------------- report


def _seconds(value: float) -> str:
    if value >= 86400 * 2:
        return f"{value:.3g} ({value / 86400:.0f} days)"
    return f"{value:.3g}" if value < 100 else f"{value:,.0f}"


def _cell(text: str) -> str:
    return text.replace("|", "\\|")


def anchor_figure(
    parts: tuple[str, ...], anchors: dict[str, Row], res: Extrapolation | None
) -> tuple[float, float] | None:
    """Time (sum) and memory (max) of the anchor parts doing the same work."""
    seconds, mib = 0.0, 0.0
    for part in parts:
        if part == "resistance":
            if res is None:
                return None
            seconds, mib = seconds + res.seconds, max(mib, res.extra_mib)
            continue
        row = anchors.get(part)
        if row is None or row.median is None or row.extra_mib is None:
            return None
        seconds, mib = seconds + row.median, max(mib, row.extra_mib)
    return seconds, mib


def _row_line(row: Row, label: str, ratio: str, repeats_note: str = "") -> str:
    if row.median is None:
        return f"| {row.n:,} | {label} | {row.status}: {_cell(row.note)} | | | | |"
    runs = f" ({len(row.times)})" if len(row.times) > 1 else " (1)"
    return (
        f"| {row.n:,} | {label} | {_seconds(row.median)}{runs}{repeats_note} "
        f"| {row.extra_mib:.1f} | {ratio} | {_cell(row.result)} |"
    )


def tables(
    ours: list[Row],
    anchors: dict[str, Row],
    res: Extrapolation | None,
    pilot_rows: list[Row],
    args: argparse.Namespace,
) -> list[str]:
    lines = [
        "### All rows",
        "",
        "Time: median wall seconds (runs). Extra MiB: peak RSS during the call minus RSS "
        "before it. `x networkx` divides our time and memory by those of the networkx "
        f"row(s) doing the same work at {args.nx_size:,} nodes.",
        "",
        "| n | what | median s (runs) | extra MiB | x networkx at "
        f"{args.nx_size:,}: time, memory | result |",
        "|---:|---|---:|---:|---:|---|",
    ]
    for row in ours:
        figure = anchor_figure(SAME_WORK[row.task], anchors, res)
        ratio = ""
        if figure and row.median is not None and row.extra_mib is not None:
            ratio = f"{row.median / figure[0]:.3g}, {row.extra_mib / max(figure[1], 0.1):.3g}"
        lines.append(_row_line(row, TASKS[row.task].label, ratio))
    for name in NX_ROWS:
        if name in anchors:
            lines.append(_row_line(anchors[name], TASKS[name].label, ""))
    composite = [
        ("networkx counterpart of `score(eigengap=False)` (sum)", SAME_WORK["score"]),
        ("networkx counterpart of `robustness(labels=...)` (sum)", SAME_WORK["robustness"]),
        ("networkx counterpart of `robustness()` (sum)", SAME_WORK["robustness-whole"]),
    ]
    for label, parts in composite:
        figure = anchor_figure(parts, anchors, res)
        if figure:
            extra = " (extrapolated)" if "resistance" in parts else ""
            lines.append(
                f"| {args.nx_size:,} | {label} | {_seconds(figure[0])}{extra} | {figure[1]:.1f} "
                "| | |"
            )
    if res is not None:
        for row in res.rows:
            lines.append(_row_line(row, TASKS[row.task].label, ""))
        lines.append(
            f"| {args.nx_size:,} | networkx `resistance_distance` of every link, extrapolated "
            f"| {_seconds(res.seconds)} | {res.extra_mib:.0f} | | per call {_seconds(res.per_link)}"
            f" s (as n^3; measured exponent {res.exponent:.2f}) x {res.links:,} links |"
        )
    lines += [
        "",
        f"### Pilot: networkx `algebraic_connectivity` methods at {args.nx_size:,} nodes "
        f"(one run each, limit {args.pilot_timeout:g} s)",
        "",
        "| method | L: s | L: value | N: s | N: value |",
        "|---|---:|---|---:|---|",
    ]
    by_task = {r.task: r for r in pilot_rows}
    for method in NX_METHODS:
        cells = []
        for kind in ("L", "N"):
            found = by_task.get(f"pilot-{kind}-{method}")
            if found is None or found.median is None:
                over = found is not None and found.status == "timeout"
                cells += [f"> {args.pilot_timeout:g}" if over else "", ""]
            else:
                cells += [_seconds(found.median), found.result]
        lines.append(f"| `{method}` | " + " | ".join(cells) + " |")
    chosen = ", ".join(f"{k}: `{m}`" for k, m in args.nx_methods.items())
    lines += ["", f"Kept (fastest agreeing to {PILOT_AGREEMENT:g} relative): {chosen}.", ""]
    return lines


def header(nets: list[Cached], args: argparse.Namespace, argv: list[str]) -> list[str]:
    command = "python " + shlex.join(argv)
    now = dt.datetime.now(dt.UTC).astimezone()
    load = " / ".join(f"{x:.1f}" for x in os.getloadavg())
    facts = "; ".join(
        f"{net.n:,} nodes, {net.links:,} links, k-means {net.kmeans_seconds:.1f} s" for net in nets
    )
    return [
        "## Diagnostics benchmark",
        "",
        f"Command: `{command}`",
        "",
        f"- date: {now.isoformat(timespec='seconds')}; load average at the end {load}",
        f"- python {platform.python_version()}, specgraph {_version('specgraph')}, "
        f"numpy {_version('numpy')}, scipy {_version('scipy')}, networkx {_version('networkx')}, "
        f"scikit-learn {_version('scikit-learn')}, numba {_version('numba')}",
        f"- source: {_git_state()}",
        *blas_lines(),
        f"- nproc: {os.cpu_count()}; repeats {args.repeats} (at {args.large:,} nodes and above: "
        f"{args.repeats_large}); seed {args.seed}; time limit per call {args.timeout:g} s",
        f"- networks (road-like, seed {args.seed}): {facts}",
        f"- zonings: scikit-learn MiniBatchKMeans on the coordinates, {ZONES} zones "
        f"(scored) and {ZONES_B} (second zoning of `compare`), random_state={args.seed}, "
        f"n_init={KMEANS_INIT}",
        "",
    ]


# --------------------------------------------------------------------------- command line


def parse_args(argv: list[str] | None = None) -> argparse.Namespace:
    parser = argparse.ArgumentParser(
        description="Time specgraph's diagnostics against networkx and scikit-learn anchors.",
        formatter_class=argparse.ArgumentDefaultsHelpFormatter,
    )
    parser.add_argument("--sizes", type=int, nargs="+", default=list(DEFAULT_SIZES))
    parser.add_argument("--nx-size", type=int, default=10_000, help="nodes of the anchors' network")
    parser.add_argument(
        "--resistance-sizes",
        type=int,
        nargs="*",
        default=[2000, 3000],
        help="nodes where nx.resistance_distance is timed (none: leave it out)",
    )
    parser.add_argument("--repeats", type=int, default=3, help="timed runs per task")
    parser.add_argument("--repeats-large", type=int, default=1, help="runs at --large and above")
    parser.add_argument("--resistance-repeats", type=int, default=2, help="links sampled per size")
    parser.add_argument("--large", type=int, default=1_000_000)
    parser.add_argument("--timeout", type=float, default=900.0, help="seconds per call")
    parser.add_argument("--pilot-timeout", type=float, default=30.0)
    parser.add_argument("--memory-cap", type=float, default=_default_cap(), help="GiB (0: none)")
    parser.add_argument("--quick", action="store_true", help="sizes 10000 and 100000, one repeat")
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--cache-dir", type=Path, default=DEFAULT_CACHE)
    parser.add_argument("--out", type=Path, default=None, help="also write the report here")
    parser.add_argument(
        "--journal",
        type=Path,
        default=None,
        help="JSON-lines file of finished runs: appended to, and runs found in it are not "
        "run again (to resume a stopped run with the same options)",
    )
    parser.add_argument("--worker", default=None, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.quick:
        args.sizes, args.repeats, args.resistance_repeats = list(QUICK_SIZES), 1, 1
    return args


def main(argv: list[str] | None = None) -> int:
    args = parse_args(argv)
    if args.worker is not None:
        print(RESULT_MARK + json.dumps(worker(json.loads(args.worker))), flush=True)
        return 0
    logging.basicConfig(level=logging.INFO, format="%(asctime)s %(message)s", stream=sys.stderr)
    started = time.perf_counter()
    args.nx_methods = {}
    args.journal_done = {}
    if args.journal is not None and args.journal.exists():
        for line in args.journal.read_text().splitlines():
            entry = json.loads(line)
            args.journal_done[entry["key"]] = entry["outcome"]
    for name, n in (("warmup_ours", WARMUP_N), ("warmup_anchor", NX_WARMUP_N)):
        small = prepare(args.cache_dir, n, args.seed + 1)
        files = {"path": str(small.path), "labels": str(small.labels), "seed": args.seed + 1}
        setattr(args, name, files)

    anchor_net = prepare(args.cache_dir, args.nx_size, args.seed)
    args.nx_methods, pilot_rows = pilot(anchor_net, args)
    logger.info("networkx methods kept: %s", args.nx_methods)
    anchor_rows = [Row(name, args.nx_size) for name in NX_ROWS]
    measure(anchor_rows, anchor_net, args.repeats, args, args.timeout)
    anchors = {row.task: row for row in anchor_rows}
    res = resistance_anchor(sorted(args.resistance_sizes), anchor_net, args)

    nets, ours = [], []
    for n in sorted(set(args.sizes)):
        net = prepare(args.cache_dir, n, args.seed)
        rows = [Row(name, n) for name in OURS]
        measure(
            rows, net, args.repeats_large if n >= args.large else args.repeats, args, args.timeout
        )
        nets.append(net)
        ours += rows
    if anchor_net.n not in {net.n for net in nets}:
        nets.append(anchor_net)

    lines = header(sorted(nets, key=lambda x: x.n), args, sys.argv)
    lines += tables(ours, anchors, res, pilot_rows, args)
    lines.append(f"Total benchmark wall time: {time.perf_counter() - started:.0f} s.")
    text = "\n".join(lines) + "\n"
    sys.stdout.write(text)
    if args.out is not None:
        args.out.parent.mkdir(parents=True, exist_ok=True)
        args.out.write_text(text)
    return 0


if __name__ == "__main__":
    sys.exit(main())
