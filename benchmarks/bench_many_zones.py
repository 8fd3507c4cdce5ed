"""Benchmark of many zones: whole ``specgraph zones`` commands against whole anchor processes.

Goals measured (issue "hundreds to thousands of zones"), each one verdict row:

1. road-like network of ``ROAD_N`` nodes (:func:`specgraph.gallery.road_like`,
   ``rng=0``): networkx's Louvain, as a whole process, finds a zone count K;
   ``specgraph zones EDGES --nodes NODES --zones K`` then has a normalized cut
   at most ``LOUVAIN_NCUT_RATIO`` times Louvain's, every zone connected and a
   median wall time at most Louvain's process.
2. the same network at ``BOUNDED_ZONES`` zones bounded to ``ROAD_BOUNDS`` times
   n/16 (``--min-size``, ``--max-size``): normalized cut at most
   ``PREVIOUS_BOUNDED_NCUT`` (the one-level result, at ``ROAD_N`` nodes only)
   and at most ``NCUT_RATIO_GOAL`` times scikit-learn's ``SpectralClustering``
   process; every bound kept.
3. road-like ``LARGE_N`` nodes, ``LARGE_ZONES["3"]`` zones, bounds as above:
   at most ``LARGE_SECONDS`` s and ``LARGE_PEAK_GIB`` GiB of peak resident
   memory, every zone connected, every bound kept.
4. the same network at ``LARGE_ZONES["4"]`` zones: completes; time and memory.
5. LFR graphs (:func:`bench_zones.lfr_graph`: its parameters, mixing
   ``LFR_GOAL_MU`` and seeds) of ``LFR_SIZES`` nodes at the planted count: NMI
   (scikit-learn's ``normalized_mutual_info_score``, arithmetic) at least
   ``LFR_NMI_GOAL``; the command runs ``find_zones(network, K)`` with every
   option ``auto``.

Ours runs with ``--assign auto`` and, when ``specgraph zones --help`` lists it,
with ``--assign multilevel`` too. The anchors are ``bench_real.py --anchor``
processes: read the CSV with pandas, ``louvain_communities(G, seed=0)``
(weight ``"weight"``) or ``SpectralClustering(k, affinity="precomputed",
assign_labels="kmeans", random_state=0)``, write the labels.

Every process is timed from outside by :func:`bench_real.timed` (wall seconds,
the whole process's peak resident memory from ``os.wait4``), under coreutils
``timeout`` (``--timeout``) and util-linux ``prlimit --as`` (``--memory-cap``);
repeats go round the methods of a goal in turn and the median is shown. The
first labels file of each method is scored by :func:`score` (the same for
every method): normalized cut, sizes and NMI by :func:`bench_zones.zone_quality`
(checked against networkx by :func:`bench_zones.self_check`, run first), zones
connected by networkx ``is_connected`` on each zone's own links.

How to run::

    python benchmarks/bench_many_zones.py --quick              # goals 1, 2, 5, small
    python benchmarks/bench_many_zones.py --only 1 --only 5    # some goals
    python benchmarks/bench_many_zones.py --out /tmp/many-zones.md

The Markdown report goes to stdout (and ``--out``); progress to stderr.
"""

from __future__ import annotations

import argparse
import datetime as dt
import hashlib
import itertools
import json
import logging
import os
import platform
import re
import shlex
import statistics
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import scipy.sparse as sp

sys.path.insert(0, str(Path(__file__).resolve().parent))
# Sibling scripts: network generation, the timed runner, the anchors and the scores are
# shared rather than copied.
from bench_eigen import _git_state
from bench_real import generated, pairs_computed, read_affinity, timed
from bench_zones import (
    DEFAULT_CACHE,
    LFR_GOAL_MU,
    LFR_NMI_GOAL,
    NCUT_RATIO_GOAL,
    ROAD_BOUNDS,
    Quality,
    _default_cap,
    _version,
    _write_ignore,
    lfr_path,
    load_graph,
    self_check,
    zone_quality,
)
from real_networks import RealNetwork

logger = logging.getLogger("bench_many_zones")

GOALS = ("1", "2", "3", "4", "5")
QUICK_GOALS = ("1", "2", "5")
#: Road-like network of goals 1 and 2 (and of ``--quick``).
ROAD_N = 100_000
QUICK_ROAD_N = 20_000
#: Goal 1: our normalized cut at most this multiple of Louvain's.
LOUVAIN_NCUT_RATIO = 0.9
#: Goal 2: zones, and the one-level bounded result at ROAD_N nodes (docs/benchmarks-zones.md,
#: 0.06837 at commit 40fbc36) our normalized cut must not exceed.
BOUNDED_ZONES = 16
PREVIOUS_BOUNDED_NCUT = 0.0684
#: Goals 3 and 4: network size, zone counts, and goal 3's time and memory limits.
LARGE_N = 1_000_000
QUICK_LARGE_N = 100_000  # only with --quick --only 3/4; zone counts scale with n
LARGE_ZONES = {"3": 1000, "4": 5000}
LARGE_SECONDS = 60.0
LARGE_PEAK_GIB = 3.0
#: Goal 5: LFR sizes (mixing LFR_GOAL_MU, bench_zones' parameters and first seed).
LFR_SIZES = (1000, 2000, 5000)
QUICK_LFR_SIZES = (1000,)
LFR_SEED = 0
#: Seconds ``timeout`` waits after its TERM before it sends KILL; its exit code on expiry.
KILL_GRACE = 30
TIMEOUT_EXIT = 124
KILLED_EXIT = 128 + 9
BENCH_REAL = Path(__file__).resolve().parent / "bench_real.py"
OUT_TOKEN = "OUT"
PACKAGES = ("specgraph", "numpy", "scipy", "scikit-learn", "networkx", "pandas", "numba", "pyamg")


# --------------------------------------------------------------------------- scoring


@dataclass(frozen=True)
class Score:
    """Scores of one labels file: :func:`zone_quality`'s, and zones connected by networkx."""

    quality: Quality
    connected: int

    def bounds_kept(self, low: int, high: int) -> bool:
        return low <= self.quality.size_min and self.quality.size_max <= high


def connected_zones(adjacency: sp.csr_array, zone: np.ndarray) -> int:
    """Zones whose own links keep them in one piece (networkx ``is_connected``)."""
    import networkx as nx

    order = np.argsort(zone, kind="stable")
    edges = np.searchsorted(zone[order], np.arange(int(zone.max()) + 2))
    permuted = sp.csr_array(adjacency[order][:, order])
    return sum(
        nx.is_connected(nx.from_scipy_sparse_array(permuted[lo:hi, lo:hi]))
        for lo, hi in itertools.pairwise(edges)
    )


def score(
    labels_csv: Path, adjacency: sp.csr_array, ids: list[str], truth: np.ndarray | None = None
) -> Score:
    """The scores of every method, from its ``node,zone`` file, in the node table's order."""
    table = pd.read_csv(labels_csv, dtype={"node": str}, keep_default_na=False)
    labels = table.set_index("node")["zone"].reindex(ids)
    if labels.isna().any():
        raise ValueError(f"{labels_csv}: {int(labels.isna().sum())} nodes without a zone")
    _, zone = np.unique(labels.to_numpy(), return_inverse=True)
    return Score(zone_quality(adjacency, zone, truth=truth), connected_zones(adjacency, zone))


# --------------------------------------------------------------------------- processes


@dataclass
class Method:
    """One whole process, run ``--repeats`` times; ``OUT`` in its command is its folder."""

    label: str
    command: list[str]
    seconds: list[float] = field(default_factory=list)
    peak_mib: list[float] = field(default_factory=list)
    status: str = ""  # empty while every run succeeded
    out: Path | None = None  # the first successful run's folder
    digests: set[str] = field(default_factory=set)
    score: Score | None = None
    record: dict[str, Any] = field(default_factory=dict)

    @property
    def median(self) -> float:
        return statistics.median(self.seconds) if self.seconds else float("nan")

    @property
    def peak(self) -> float:
        return max(self.peak_mib) if self.peak_mib else float("nan")

    def shown(self) -> str:
        return shlex.join(["python", *self.command[1:]])


@dataclass
class Context:
    args: argparse.Namespace
    work: Path
    assigns: tuple[str, ...]
    runs: int = 0


def guarded(command: list[str], args: argparse.Namespace) -> list[str]:
    """The command under ``timeout`` and, with a cap, ``prlimit --as``."""
    wrapper = ["timeout", f"--kill-after={KILL_GRACE}", f"{args.timeout:g}"]
    if args.memory_cap:
        wrapper += ["prlimit", f"--as={int(args.memory_cap * 2**30)}", "--"]
    return wrapper + command


def run_once(ctx: Context, method: Method) -> None:
    ctx.runs += 1
    out = ctx.work / f"run-{ctx.runs}"
    out.mkdir()
    command = [
        str(out) + part[len(OUT_TOKEN) :] if part.split("/")[0] == OUT_TOKEN else part
        for part in method.command
    ]
    logger.info("%s, run %d: %s", method.label, len(method.seconds) + 1, method.shown())
    seconds, peak, code, tail = timed(guarded(command, ctx.args))
    if code == TIMEOUT_EXIT or (code == KILLED_EXIT and seconds >= ctx.args.timeout):
        method.status = f"timed out after {ctx.args.timeout:g} s (peak {peak:,.0f} MiB)"
    elif code != 0:
        method.status = f"exit {code} after {seconds:.0f} s: {tail[:160]}"
    else:
        method.seconds.append(seconds)
        method.peak_mib.append(peak)
        method.digests.add(hashlib.sha256((out / "zones.csv").read_bytes()).hexdigest())
        method.out = method.out or out
    logger.info("  %s", method.status or f"{seconds:.1f} s, peak {peak:,.0f} MiB")


def run_all(ctx: Context, methods: list[Method]) -> None:
    """``--repeats`` runs of each method, round-robin; a method that fails stops."""
    for repeat in range(ctx.args.repeats):
        for method in methods:
            if not method.status and len(method.seconds) <= repeat:
                run_once(ctx, method)


def score_all(methods: list[Method], net: RealNetwork, truth: np.ndarray | None = None) -> None:
    adjacency, ids = read_affinity(net.edges, net.nodes, False)
    for method in methods:
        if method.out is not None and method.score is None:
            method.score = score(method.out / "zones.csv", adjacency, ids, truth)
            record = method.out / "run.json"
            if record.exists():
                method.record = json.loads(record.read_text(encoding="utf-8"))


def anchor(kind: str, net: RealNetwork, k: int) -> Method:
    """A ``bench_real.py --anchor`` process: ``louvain`` or ``sk-kmeans``."""
    command = [sys.executable, str(BENCH_REAL), "--anchor", kind, str(net.edges)]
    command += [str(net.nodes), "0", str(k), f"{OUT_TOKEN}/zones.csv"]
    return Method({"louvain": "louvain", "sk-kmeans": "scikit-learn"}[kind], command)


def ours(ctx: Context, net: RealNetwork, k: int, extra: list[str] | None = None) -> list[Method]:
    """``specgraph zones`` at ``k`` zones, once per assignment compared."""
    methods = []
    for assign in ctx.assigns:
        command = [sys.executable, "-m", "specgraph", "zones", str(net.edges), "--nodes"]
        command += [str(net.nodes), "--zones", str(k), "--assign", assign, *(extra or [])]
        command += ["--seed", "0", "--out", OUT_TOKEN, "--quiet"]
        methods.append(Method(f"specgraph {assign}", command))
    return methods


# --------------------------------------------------------------------------- networks


def road(ctx: Context, n: int) -> RealNetwork:
    _write_ignore(ctx.args.cache_dir)
    logger.info("road-like network, %d nodes (cached in %s)", n, ctx.args.cache_dir)
    return generated(f"road:{n}", ctx.args.cache_dir)


def lfr(ctx: Context, n: int) -> tuple[RealNetwork, np.ndarray, dict[str, Any]]:
    """An LFR graph of bench_zones, written once as edge and node tables (unit weights)."""
    path = lfr_path(ctx.args.cache_dir, n, LFR_GOAL_MU, LFR_SEED)
    graph = load_graph(path)
    assert graph.truth is not None
    folder = ctx.args.cache_dir / f"{path.stem}-csv"
    if not (folder / "nodes.csv").exists():
        folder.mkdir(parents=True, exist_ok=True)
        upper = sp.triu(graph.adjacency, k=1).tocoo()
        ids = np.asarray([f"N{i}" for i in range(n)])
        frame = {"source": ids[upper.row], "target": ids[upper.col], "weight": upper.data}
        pd.DataFrame(frame).to_csv(folder / "edges.csv", index=False)
        pd.DataFrame({"node": ids}).to_csv(folder / "nodes.csv", index=False)
    record = {"nodes": n, "links": int(graph.adjacency.nnz // 2)}
    net = RealNetwork(f"lfr:{n}", "LFR", folder / "edges.csv", folder / "nodes.csv", False, record)
    return net, graph.truth, graph.meta


def size_bounds(n: int, k: int) -> tuple[int, int]:
    low, high = ROAD_BOUNDS
    return round(low * n / k), round(high * n / k)


# --------------------------------------------------------------------------- goals


#: One verdict row: goal, method, what was measured, met (None: reported only).
Verdict = tuple[str, str, str, bool | None]


@dataclass
class Section:
    title: str
    intro: list[str]
    methods: list[Method]
    verdicts: list[Verdict]


def check(parts: list[tuple[str, bool | None]]) -> tuple[str, bool | None]:
    """Measured text and whether every part with a verdict was met."""
    judged = [ok for _, ok in parts if ok is not None]
    text = "; ".join(t + ("" if ok is None else (" ok" if ok else " MISSED")) for t, ok in parts)
    return text, (all(judged) if judged else None)


def failed(method: Method) -> tuple[str, bool]:
    return (method.status or "no labels"), False


def connected_part(s: Score) -> tuple[str, bool]:
    return f"{s.connected}/{s.quality.zones} connected", s.connected == s.quality.zones


def bounds_part(s: Score, low: int, high: int) -> tuple[str, bool]:
    q = s.quality
    return f"sizes {q.size_min:,.0f}..{q.size_max:,.0f} in [{low:,}, {high:,}]", s.bounds_kept(
        low, high
    )


def goal_louvain(ctx: Context) -> Section:
    n = QUICK_ROAD_N if ctx.args.quick else ROAD_N
    net = road(ctx, n)
    louvain = anchor("louvain", net, 0)
    run_once(ctx, louvain)
    score_all([louvain], net)
    title = f"Goal 1: road-like {n:,} nodes at Louvain's count"
    if louvain.score is None:
        return Section(title, [], [louvain], [("1", "louvain", *failed(louvain))])
    k, ref = louvain.score.quality.zones, louvain.score.quality.ncut
    methods = [louvain, *ours(ctx, net, k)]
    run_all(ctx, methods)
    score_all(methods, net)
    verdicts: list[Verdict] = []
    for m in methods[1:]:
        if m.score is None:
            verdicts.append(("1", m.label, *failed(m)))
            continue
        q = m.score.quality
        measured = check(
            [
                (
                    f"NCut {q.ncut:.4f} = {q.ncut / ref:.2f}x Louvain's {ref:.4f} "
                    f"(goal {LOUVAIN_NCUT_RATIO:g}x)",
                    q.ncut <= LOUVAIN_NCUT_RATIO * ref,
                ),
                connected_part(m.score),
                (
                    f"{m.median:.1f} s vs Louvain {louvain.median:.1f} s "
                    f"({m.median / louvain.median:.2f}x)",
                    m.median <= louvain.median,
                ),
            ]
        )
        verdicts.append(("1", m.label, *measured))
    intro = [f"Louvain found {k} zones; ours runs at that count."]
    return Section(title, intro, methods, verdicts)


def goal_bounded(ctx: Context) -> Section:
    n = QUICK_ROAD_N if ctx.args.quick else ROAD_N
    net, k = road(ctx, n), BOUNDED_ZONES
    low, high = size_bounds(n, k)
    sklearn = anchor("sk-kmeans", net, k)
    methods = [sklearn, *ours(ctx, net, k, ["--min-size", str(low), "--max-size", str(high)])]
    run_all(ctx, methods)
    score_all(methods, net)
    verdicts: list[Verdict] = []
    for m in methods[1:]:
        if m.score is None or sklearn.score is None:
            verdicts.append(("2", m.label, *failed(m if m.score is None else sklearn)))
            continue
        q, ref = m.score.quality, sklearn.score.quality.ncut
        parts: list[tuple[str, bool | None]] = [
            (
                f"NCut {q.ncut:.5f} = {q.ncut / ref:.2f}x scikit-learn's {ref:.5f} "
                f"(goal {NCUT_RATIO_GOAL:g}x)",
                q.ncut <= NCUT_RATIO_GOAL * ref,
            ),
            (
                f"vs one-level {PREVIOUS_BOUNDED_NCUT:g}"
                + ("" if n == ROAD_N else f" (n/a: measured at {ROAD_N:,} nodes)"),
                q.ncut <= PREVIOUS_BOUNDED_NCUT if n == ROAD_N else None,
            ),
            bounds_part(m.score, low, high),
            (f"{m.median:.1f} s ({m.median / sklearn.median:.2f}x scikit-learn)", None),
        ]
        verdicts.append(("2", m.label, *check(parts)))
    intro = [f"Bounds `--min-size {low} --max-size {high}` ({ROAD_BOUNDS} x n/{k}), ours only."]
    return Section(f"Goal 2: road-like {n:,} nodes, {k} bounded zones", intro, methods, verdicts)


def large_parts(
    goal: str, m: Method, s: Score, low: int, high: int
) -> list[tuple[str, bool | None]]:
    """Goal 3's four limits; goal 4 only has to complete (the same figures, reported)."""
    time_text, peak_text = f"{m.median:.1f} s", f"peak {m.peak / 1024:.2f} GiB"
    if goal == "3":
        return [
            (time_text, m.median <= LARGE_SECONDS),
            (peak_text, m.peak <= LARGE_PEAK_GIB * 1024),
            connected_part(s),
            bounds_part(s, low, high),
        ]
    connected, bounds = connected_part(s)[0], bounds_part(s, low, high)[0]
    return [
        ("completed", True),
        (time_text, None),
        (peak_text, None),
        (connected, None),
        (bounds, None),
    ]


def goal_large(ctx: Context, goal: str) -> Section:
    n = QUICK_LARGE_N if ctx.args.quick else LARGE_N
    k = max(2, round(LARGE_ZONES[goal] * n / LARGE_N))
    net = road(ctx, n)
    low, high = size_bounds(n, k)
    methods = ours(ctx, net, k, ["--min-size", str(low), "--max-size", str(high)])
    run_all(ctx, methods)
    score_all(methods, net)
    verdicts: list[Verdict] = []
    for m in methods:
        if m.score is None:
            verdicts.append((goal, m.label, *failed(m)))
            continue
        verdicts.append((goal, m.label, *check(large_parts(goal, m, m.score, low, high))))
    intro = [f"Bounds `--min-size {low} --max-size {high}` ({ROAD_BOUNDS} x n/{k})."]
    return Section(f"Goal {goal}: road-like {n:,} nodes, {k:,} zones", intro, methods, verdicts)


def goal_lfr(ctx: Context) -> Section:
    methods: list[Method] = []
    verdicts: list[Verdict] = []
    intro: list[str] = []
    for n in QUICK_LFR_SIZES if ctx.args.quick else LFR_SIZES:
        net, truth, meta = lfr(ctx, n)
        k = int(truth.max()) + 1
        mine = ours(ctx, net, k)
        for m in mine:
            m.label += f", LFR {n:,}, k={k}"
        run_all(ctx, mine)
        score_all(mine, net, truth)
        methods += mine
        intro.append(
            f"- LFR {n:,}: {k} planted groups, {net.record['links']:,} links; generator seed "
            f"{meta.get('seed_used')} (failed before it: {meta.get('seeds_failed') or 'none'})"
        )
        for m in mine:
            if m.score is None or m.score.quality.nmi is None:
                verdicts.append(("5", m.label, *failed(m)))
                continue
            nmi = m.score.quality.nmi
            verdicts.append(("5", m.label, *check([(f"NMI {nmi:.3f}", nmi >= LFR_NMI_GOAL)])))
    title = f"Goal 5: LFR, mu = {LFR_GOAL_MU:g}, planted count"
    return Section(title, intro, methods, verdicts)


RUNNERS: dict[str, Callable[[Context], Section]] = {
    "1": goal_louvain,
    "2": goal_bounded,
    "3": lambda ctx: goal_large(ctx, "3"),
    "4": lambda ctx: goal_large(ctx, "4"),
    "5": goal_lfr,
}
GOAL_TEXT = {
    "1": f"NCut <= {LOUVAIN_NCUT_RATIO:g} x Louvain's; all connected; time <= Louvain's",
    "2": f"NCut <= {PREVIOUS_BOUNDED_NCUT:g} and <= {NCUT_RATIO_GOAL:g} x scikit-learn's; "
    "bounds kept",
    "3": f"<= {LARGE_SECONDS:g} s, <= {LARGE_PEAK_GIB:g} GiB, all connected, bounds kept",
    "4": "completes; time and memory",
    "5": f"NMI >= {LFR_NMI_GOAL:g}",
}


# --------------------------------------------------------------------------- report


def used(record: dict[str, Any]) -> str:
    """What the run chose, from its run.json: assignment, operator, levels, eigenpairs."""
    decisions = record.get("decisions", {})
    shown = [f"{k}={decisions[k].get('choice')}" for k in ("assign", "operator") if k in decisions]
    if "levels" in decisions:
        levels = decisions["levels"]
        choice = levels.get("choice", levels) if isinstance(levels, dict) else levels
        shown.append(f"levels={json.dumps(choice)[:60]}")
    if record:
        shown.append(f"{pairs_computed(record)} pairs")
    return ", ".join(shown)


def method_table(methods: list[Method]) -> list[str]:
    lines = [
        "| method | zones | NCut | connected | sizes | NMI | median s | runs | peak MiB | used |",
        "|---|---:|---:|---:|---:|---:|---:|---:|---:|---|",
    ]
    for m in methods:
        if m.score is None:
            lines.append(f"| {m.label} | | | | | | | | | {m.status or 'no labels'} |")
            continue
        q = m.score.quality
        nmi = "" if q.nmi is None else f"{q.nmi:.3f}"
        note = used(m.record) + ("; labels differ between runs" if len(m.digests) > 1 else "")
        note += f"; later run: {m.status}" if m.status else ""
        lines.append(
            f"| {m.label} | {q.zones:,} | {q.ncut:.5g} | {m.score.connected}/{q.zones} | "
            f"{q.size_min:,.0f}..{q.size_max:,.0f} | {nmi} | {m.median:.2f} | {len(m.seconds)} | "
            f"{m.peak:,.0f} | {note} |"
        )
    return lines


def section_lines(section: Section) -> list[str]:
    commands = [f"- {m.label}: `{m.shown()}`" for m in section.methods]
    return [
        f"## {section.title}",
        "",
        *section.intro,
        "",
        *method_table(section.methods),
        "",
        "Commands (`OUT` is the run's folder):",
        "",
        *commands,
        "",
    ]


def summary(sections: list[Section]) -> list[str]:
    lines = [
        "## Goals",
        "",
        "| goal | target | method | measured | met? |",
        "|---|---|---|---|---|",
    ]
    for section in sections:
        for goal, label, measured, met in section.verdicts:
            verdict = {True: "met", False: "**not met**", None: "reported"}[met]
            lines.append(f"| {goal} | {GOAL_TEXT[goal]} | {label} | {measured} | {verdict} |")
    return [*lines, ""]


def specgraph_source() -> str:
    """Where the children import specgraph from, and that checkout's commit."""
    import specgraph

    root = Path(specgraph.__file__).resolve().parent.parent
    done = subprocess.run(
        ["git", "-C", str(root), "rev-parse", "--short", "HEAD"], capture_output=True, text=True
    )
    return f"{root} (commit {done.stdout.strip() or 'unknown'})"


def header(args: argparse.Namespace, argv: list[str], assigns: tuple[str, ...]) -> list[str]:
    load = ", ".join(f"{x:.2f}" for x in os.getloadavg())
    return [
        "# Many zones: whole commands against whole anchor processes",
        "",
        "Command: `" + shlex.join(["python", "benchmarks/bench_many_zones.py", *argv]) + "`",
        "",
        f"- date: {dt.datetime.now(dt.UTC).astimezone().isoformat(timespec='seconds')}; "
        f"benchmark source: {_git_state()}; specgraph imported from {specgraph_source()}",
        f"- python {platform.python_version()} (`python` below is {sys.executable}), "
        + ", ".join(f"{p} {_version(p)}" for p in PACKAGES),
        f"- {os.cpu_count()} cores; load average at start {load}; repeats {args.repeats} "
        f"(median time, largest peak); limit per process {args.timeout:g} s and "
        f"{args.memory_cap:g} GiB of address space (`timeout`, `prlimit --as`)",
        f"- `specgraph zones --assign` accepts {', '.join(assigns) or 'nothing found'}; "
        f"compared here: {', '.join(a for a in ('auto', 'multilevel') if a in assigns)}",
        "- scores: normalized cut sum_z cut(z)/vol(z), sizes and NMI by "
        "`bench_zones.zone_quality` (self-check against networkx passed); connected zones "
        "by networkx `is_connected`; peak MiB: the whole process's peak resident memory",
        "",
    ]


def assign_choices() -> tuple[str, ...]:
    """The ``--assign`` choices ``specgraph zones --help`` lists."""
    done = subprocess.run(
        [sys.executable, "-m", "specgraph", "zones", "--help"], capture_output=True, text=True
    )
    found = re.search(r"--assign\s+\{([^}]*)\}", done.stdout)
    return tuple(found.group(1).split(",")) if found else ()


def parse_args(argv: list[str]) -> argparse.Namespace:
    parser = argparse.ArgumentParser(
        description=__doc__.split("\n\n")[0],
        formatter_class=argparse.ArgumentDefaultsHelpFormatter,
    )
    parser.add_argument("--only", choices=GOALS, action="append", help="run this goal")
    parser.add_argument("--quick", action="store_true", help="goals 1, 2, 5 small, one repeat")
    parser.add_argument("--repeats", type=int, default=3, help="runs per method (median)")
    parser.add_argument("--timeout", type=float, default=1800.0, help="seconds per process")
    parser.add_argument(
        "--memory-cap", type=float, default=_default_cap(), help="GiB per process (0: none)"
    )
    parser.add_argument("--cache-dir", type=Path, default=DEFAULT_CACHE, help="network cache")
    parser.add_argument("--out", type=Path, default=None, help="also write the report here")
    args = parser.parse_args(argv)
    if args.quick:
        args.repeats = 1
    if args.repeats < 1:
        parser.error("--repeats must be at least 1")
    args.goals = sorted(set(args.only or (QUICK_GOALS if args.quick else GOALS)))
    return args


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    args = parse_args(argv)
    logging.basicConfig(level=logging.INFO, format="%(asctime)s %(message)s", stream=sys.stderr)
    failures = self_check(0)
    if failures:
        print("\n".join(f"self-check FAILED: {f}" for f in failures))
        return 1
    started = time.perf_counter()
    choices = assign_choices()
    assigns = tuple(a for a in ("auto", "multilevel") if a in choices)
    lines = header(args, argv, choices)
    sections = []
    with tempfile.TemporaryDirectory(prefix="bench_many_zones_") as work:
        ctx = Context(args, Path(work), assigns)
        for goal in args.goals:
            sections.append(RUNNERS[goal](ctx))
    load = ", ".join(f"{x:.2f}" for x in os.getloadavg())
    lines += summary(sections)
    for section in sections:
        lines += section_lines(section)
    lines.append(
        f"Total wall time {time.perf_counter() - started:.0f} s; load average at end {load}."
    )
    text = "\n".join(lines) + "\n"
    sys.stdout.write(text)
    if args.out is not None:
        args.out.parent.mkdir(parents=True, exist_ok=True)
        args.out.write_text(text, encoding="utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main())
