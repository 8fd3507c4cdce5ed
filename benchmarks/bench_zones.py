"""Benchmark of zoning quality: specgraph's ``find_zones`` against scikit-learn and networkx.

What it measures
----------------
Every method's labels are scored by one function, :func:`zone_quality`, the
same for every method and for the planted truth:

* normalized cut ``NCut = sum_z cut(z) / vol(z)`` (Shi and Malik, IEEE TPAMI 22,
  2000, in its k-way form), ``cut(z)`` the weight of links leaving zone ``z``
  and ``vol(z)`` the summed weighted degree of its nodes;
* the largest zone conductance ``cut(z) / min(vol z, vol V - vol z)``;
* how many zones induce a connected subgraph;
* zone sizes (in nodes, or in node size where the network has sizes): smallest,
  largest, their ratio and the coefficient of variation (population standard
  deviation over mean);
* against a planted truth: scikit-learn's ``normalized_mutual_info_score``
  (arithmetic normalization; not the overlapping NMI of the LFR papers) and the
  overlap ``(a - 1/q) / (1 - 1/q)``, ``a`` the accuracy maximised over
  relabellings (one-to-one, by the Hungarian method) and ``q`` the number of
  planted groups (Decelle, Krzakala, Moore, Zdeborova, Phys. Rev. E 84, 066106,
  2011; ``q = 2`` gives ``(a - 1/2) / (1/2)``).

``--self-check`` compares :func:`zone_quality` with networkx
(``cut_size``/``volume``, ``normalized_cut_size``, ``conductance``,
``is_connected``) and with a brute-force overlap on a small weighted graph;
every run does this first and stops if it fails.

Methods, all run in the same invocation:

* ours: :func:`specgraph.find_zones` with the option dict of each variant in
  :data:`VARIANTS` (edit them there); size bounds become a
  ``specgraph.zones.ZoneConstraints``; the notes of each row say which trees
  treatment, operator and assignment ``find_zones`` used (its
  ``Zoning.decisions``);
* ``sklearn``: ``SpectralClustering(n_clusters=k, random_state=seed,
  **SKLEARN_OPTIONS)`` fitted on the adjacency (precomputed affinity);
* ``louvain``: ``networkx.community.louvain_communities(G, seed=seed,
  **LOUVAIN_OPTIONS)``, which picks its own zone count.

Families
--------
``road``
    :func:`specgraph.gallery.road_like` (Delaunay-thinned, mean degree 4,
    inverse-length weights), ``--road-size`` nodes (100,000; ``--quick``
    10,000), ``--zones`` zones (16). Ours is bounded to ``ROAD_BOUNDS`` times
    the mean zone size in nodes. Goal: NCut at most ``NCUT_RATIO_GOAL`` times
    scikit-learn's, every zone connected, sizes within the bounds. Then ours
    (no bounds) at the zone count Louvain found: NCut at most Louvain's, every
    zone connected; and, for comparison, ours at that count with each
    assignment method of :data:`ASSIGN_VARIANTS` that ``assign="auto"`` did not
    pick.
``sized``
    The same road-like network whose nodes carry invented integer sizes
    (connections served), ``max(1, round(lognormal(SIZE_LOG_MEAN,
    SIZE_LOG_SIGMA)))`` from a fixed seed. Ours is bounded to ``ROAD_BOUNDS``
    times the mean zone size in that unit. Goal: every zone within the bounds.
``lfr``
    ``networkx.LFR_benchmark_graph`` (Lancichinetti, Fortunato, Radicchi, Phys.
    Rev. E 78, 046110, 2008) with the :data:`LFR_PARAMETERS`, sizes
    ``--lfr-sizes`` and mixing ``LFR_MIXING``; self-loops dropped; the planted
    communities come from the node attribute ``community``. A seed that fails
    to generate is replaced by the next one (the seed used is printed). Ours
    at the planted count and with ``zones="auto"``; scikit-learn at the planted
    count, also with ``assign="qr"`` and with ``operator="bethe_hessian"``;
    scikit-learn at the planted count; Louvain. Goal at mu = 0.5: NMI >=
    ``LFR_NMI_GOAL`` (shown for every variant of ours); the table also checks
    the claim that scikit-learn gets about ``LFR_SKLEARN_CLAIM`` there.
``sbm``
    Two equal groups, mean degrees ``c_in/2`` inside and ``c_out/2`` across
    (Decelle et al.'s convention), for each ``(c_in, c_out)`` of
    :data:`SBM_SETTINGS` (5.8/0.2 and 5.5/0.5, both mean degree 3), unit
    weights, drawn with numpy, kept to the largest connected component;
    ``--sbm-size`` nodes before that (20,000; ``--quick`` 5,000). 2 zones from
    ours (every option auto), the plain normalized Laplacian
    (``operator="normalized", trees="keep"``), ours with
    ``operator="bethe_hessian"`` and with ``operator="regularized"``, and
    scikit-learn. Goal in each setting: ours (auto) overlap >=
    ``SBM_OVERLAP_GOAL``; beside it, whether the premise "the plain normalized
    Laplacian's overlap is near 0" (at most ``NEAR_ZERO_OVERLAP``) held.

Time and memory
---------------
Each run happens in a fresh child process that loads the cached network,
builds the method's input (specgraph ``Network``, networkx graph) and runs the
method once, untimed, on a small road-like network (imports, JIT kernels).
Then it resets its peak resident set size (``/proc/self/clear_refs``) and
reports peak minus current RSS around one timed call (the *extra memory*).
Time is ``time.perf_counter`` around the call, the median over ``--repeats``
runs; repeats go round all methods of a network in turn. Labels of the first
run are scored; later runs that return other labels are flagged. A run longer
than ``--timeout`` is stopped and shown as skipped.

Networks are cached under ``--cache-dir`` (default ``benchmarks/.cache/``,
shared with ``bench_eigen.py``).

How to run
----------
::

    python benchmarks/bench_zones.py --quick            # smoke run, a few minutes
    python benchmarks/bench_zones.py --only lfr         # one family
    python benchmarks/bench_zones.py --self-check       # check the scores only

The Markdown report goes to stdout (and to ``--out``); progress goes to stderr.
"""

from __future__ import annotations

import argparse
import datetime as dt
import gc
import itertools
import json
import logging
import os
import platform
import re
import resource
import shlex
import signal
import statistics
import subprocess
import sys
import tempfile
import time
import warnings
from collections.abc import Callable
from dataclasses import dataclass, field
from importlib.metadata import PackageNotFoundError, version
from pathlib import Path
from typing import Any

import numpy as np
import scipy.sparse as sp
from scipy.optimize import linear_sum_assignment
from scipy.sparse.csgraph import connected_components

sys.path.insert(0, str(Path(__file__).resolve().parent))
# bench_eigen.py is a sibling script: its child-process memory probes and the
# git state of the checkout are shared rather than copied.
from bench_eigen import _git_state, _peak_kib, _release_free_heap, _reset_peak, _status_kib

logger = logging.getLogger("bench_zones")

# --------------------------------------------------------------------------- options
# One dict per variant of ours, passed to find_zones as keywords. Two keys are the
# benchmark's own: "bounds" (lower, upper) as multiples of the mean zone size, and
# "size_by"; they become `constraints=ZoneConstraints(min_size, max_size, size_by)`.

#: Size bounds of the bounded variants, as multiples of the mean zone size.
ROAD_BOUNDS = (0.5, 1.5)

VARIANTS: dict[str, dict[str, Any]] = {
    "ours": {"operator": "auto", "assign": "auto", "refine": True},
    "ours-bounded": {
        "operator": "auto",
        "assign": "auto",
        "refine": True,
        "bounds": ROAD_BOUNDS,
        "size_by": "nodes",
    },
    "ours-sized": {
        "operator": "auto",
        "assign": "auto",
        "refine": True,
        "bounds": ROAD_BOUNDS,
        "size_by": "weight",
    },
    # The plain normalized Laplacian: no dangling trees attached.
    "ours-normalized": {
        "operator": "normalized",
        "trees": "keep",
        "assign": "auto",
        "refine": True,
    },
    "ours-bethe-hessian": {"operator": "bethe_hessian", "assign": "auto", "refine": True},
    "ours-regularized": {"operator": "regularized", "assign": "auto", "refine": True},
    "ours-kmeans": {"operator": "auto", "assign": "kmeans", "refine": True},
    "ours-qr": {"operator": "auto", "assign": "qr", "refine": True},
    "ours-bisection": {"operator": "auto", "assign": "bisection", "refine": True},
}
#: Variant of each assignment method, run at Louvain's zone count on the road family.
ASSIGN_VARIANTS = {"kmeans": "ours-kmeans", "qr": "ours-qr", "bisection": "ours-bisection"}
SKLEARN_OPTIONS: dict[str, Any] = {"affinity": "precomputed", "assign_labels": "kmeans"}
LOUVAIN_OPTIONS: dict[str, Any] = {"weight": "weight"}

# --------------------------------------------------------------------------- goals and data
#: Road family goal: our NCut at most this multiple of scikit-learn's.
NCUT_RATIO_GOAL = 0.8
#: LFR goal: NMI of ours at mu = LFR_GOAL_MU at least this.
LFR_NMI_GOAL = 0.9
LFR_GOAL_MU = 0.5
#: The claim checked in the same run: plain normalized spectral clustering with
#: k-means reaches about this NMI at mu = 0.5 (from the brief; checked, not assumed).
LFR_SKLEARN_CLAIM = 0.7
#: SBM goal: overlap of ours at least this, in every setting of SBM_SETTINGS. The
#: premise "the plain normalized Laplacian's overlap is near 0" is checked beside it
#: (at most NEAR_ZERO_OVERLAP).
SBM_OVERLAP_GOAL = 0.8
NEAR_ZERO_OVERLAP = 0.2

#: Invented node sizes of the sized family: parameters of numpy's lognormal.
SIZE_LOG_MEAN = 1.0
SIZE_LOG_SIGMA = 1.0
#: LFR generator parameters (networkx.LFR_benchmark_graph); accepted at seed 0 for
#: n = 1000 and 5000 and every mixing value below (networkx 3.6, tried here).
LFR_PARAMETERS: dict[str, Any] = {
    "tau1": 3.0,
    "tau2": 1.5,
    "average_degree": 20,
    "max_degree": 50,
    "min_community": 20,
}
LFR_MIXING = (0.1, 0.2, 0.3, 0.4, 0.5, 0.6)
#: Seeds tried, from --seed upward, before an LFR graph is given up.
LFR_SEED_TRIES = 20
#: Sparse two-group block model, (c_in, c_out) in the convention of Decelle et al.
#: 2011 (c = N p), both of mean degree 3: the issue's setting, where the plain
#: normalized Laplacian turned out to do well, then one closer to the detectability
#: threshold |c_in - c_out| = 2 sqrt(c) (5 against 3.46).
SBM_SETTINGS = ((5.8, 0.2), (5.5, 0.5))

#: Road-like network each child zones once, untimed, before the timed call.
WARMUP_N = 2000
WARMUP_ZONES = 4
#: Seconds a child may spend loading and warming up beyond --timeout.
SETUP_ALLOWANCE = 300.0
#: Relative tolerance of the self-check against networkx.
CHECK_RTOL = 1e-10
RESULT_MARK = "@@RESULT "
#: Decisions of find_zones shown in the notes of each row of ours.
CHOICES_SHOWN = ("trees", "operator", "assign")

DEFAULT_ROAD_N = 100_000
QUICK_ROAD_N = 10_000
DEFAULT_LFR_SIZES = (1000, 5000)
DEFAULT_SBM_N = 20_000
QUICK_SBM_N = 5000
DEFAULT_CACHE = Path(__file__).resolve().parent / ".cache"
FAMILIES = ("road", "sized", "lfr", "sbm")


# --------------------------------------------------------------------------- quality


@dataclass(frozen=True)
class Quality:
    """Scores of one labelling (see :func:`zone_quality`)."""

    zones: int
    ncut: float
    max_conductance: float
    connected: int
    size_min: float
    size_max: float
    size_cv: float
    nmi: float | None = None
    overlap: float | None = None

    @property
    def spread(self) -> float:
        return self.size_max / self.size_min if self.size_min > 0 else float("inf")


def zone_quality(
    adjacency: sp.csr_array,
    labels: np.ndarray,
    *,
    sizes: np.ndarray | None = None,
    truth: np.ndarray | None = None,
) -> Quality:
    """Every quality figure of the benchmark, for any labels (one function for all)."""
    from sklearn.metrics import normalized_mutual_info_score

    _, zone = np.unique(np.asarray(labels), return_inverse=True)
    k = int(zone.max()) + 1
    coo = sp.coo_array(adjacency)
    row, col, data = coo.row, coo.col, coo.data
    inside = zone[row] == zone[col]
    degrees = np.bincount(row, weights=data, minlength=zone.size)
    vol = np.bincount(zone, weights=degrees, minlength=k)
    cut = vol - np.bincount(zone[row[inside]], weights=data[inside], minlength=k)
    ncut = float(np.sum(np.divide(cut, vol, out=np.zeros(k), where=vol > 0)))
    small_side = np.minimum(vol, vol.sum() - vol)
    conductance = np.divide(cut, small_side, out=np.zeros(k), where=small_side > 0)

    # A zone is connected when the links inside zones leave it in one piece.
    n = zone.size
    inner = sp.csr_array((data[inside], (row[inside], col[inside])), shape=(n, n))
    count, piece = connected_components(inner, directed=False)
    zone_of_piece = np.zeros(count, dtype=np.int64)
    zone_of_piece[piece] = zone
    pieces = np.bincount(zone_of_piece, minlength=k)

    weight = np.ones(n) if sizes is None else np.asarray(sizes, dtype=float)
    size = np.bincount(zone, weights=weight, minlength=k)
    nmi = overlap = None
    if truth is not None:
        nmi = float(normalized_mutual_info_score(truth, zone))
        overlap = planted_overlap(truth, zone)
    return Quality(
        zones=k,
        ncut=ncut,
        max_conductance=float(conductance.max()),
        connected=int(np.count_nonzero(pieces == 1)),
        size_min=float(size.min()),
        size_max=float(size.max()),
        size_cv=float(size.std() / size.mean()),
        nmi=nmi,
        overlap=overlap,
    )


def planted_overlap(truth: np.ndarray, labels: np.ndarray) -> float:
    """``(a - 1/q) / (1 - 1/q)``, ``a`` the best one-to-one matched accuracy."""
    _, t = np.unique(truth, return_inverse=True)
    _, z = np.unique(labels, return_inverse=True)
    q = int(t.max()) + 1
    table = np.zeros((q, int(z.max()) + 1))
    np.add.at(table, (t, z), 1.0)
    rows, cols = linear_sum_assignment(table, maximize=True)
    accuracy = table[rows, cols].sum() / t.size
    return float((accuracy - 1.0 / q) / (1.0 - 1.0 / q))


def self_check(seed: int) -> list[str]:
    """Compare :func:`zone_quality` with networkx and brute force; return failures."""
    import networkx as nx

    from specgraph import gallery

    net = gallery.road_like(80, rng=seed)
    adjacency = sp.csr_array(net.adjacency)
    graph = nx.from_scipy_sparse_array(adjacency)  # weights in edge attribute "weight"
    rng = np.random.default_rng(seed)
    x = net.coordinates[:, 0] if net.coordinates is not None else np.arange(80.0)
    cases = {
        "random 4 zones": rng.integers(4, size=80),  # zones mostly in pieces
        "4 strips": np.searchsorted(np.quantile(x, [0.25, 0.5, 0.75]), x),
        "2 halves": (x > np.median(x)).astype(int),
    }
    failures = []
    sizes = rng.integers(1, 9, size=80).astype(float)
    for name, labels in cases.items():
        quality = zone_quality(adjacency, labels, sizes=sizes)
        zones = [set(np.flatnonzero(labels == z).tolist()) for z in np.unique(labels)]
        # networkx reference (networkx.algorithms.cuts).
        ncut = sum(
            nx.cut_size(graph, s, weight="weight") / nx.volume(graph, s, "weight") for s in zones
        )
        cond = max(nx.conductance(graph, s, weight="weight") for s in zones)
        conn = sum(nx.is_connected(graph.subgraph(s)) for s in zones)
        size = [sizes[list(s)].sum() for s in zones]
        checks = [
            ("NCut", quality.ncut, ncut),
            ("max conductance", quality.max_conductance, cond),
            ("connected zones", quality.connected, conn),
            ("largest size", quality.size_max, max(size)),
            ("smallest size", quality.size_min, min(size)),
        ]
        if len(zones) == 2:  # the two-sided form networkx implements
            two = nx.normalized_cut_size(graph, zones[0], zones[1], weight="weight")
            checks.append(("NCut vs normalized_cut_size", quality.ncut, two))
        failures += [
            f"{name}: {what} {ours!r} != {ref!r}"
            for what, ours, ref in checks
            if not np.isclose(ours, ref, rtol=CHECK_RTOL, atol=0)
        ]
    # Overlap against brute force over every relabelling (3 groups, 3 zones).
    truth = rng.integers(3, size=60)
    guess = np.where(rng.random(60) < 0.6, (truth + 1) % 3, rng.integers(3, size=60))
    best = max(np.mean(np.array(p)[guess] == truth) for p in itertools.permutations(range(3)))
    brute = (best - 1 / 3) / (1 - 1 / 3)
    if not np.isclose(planted_overlap(truth, guess), brute, rtol=CHECK_RTOL):
        failures.append(f"overlap {planted_overlap(truth, guess)!r} != brute force {brute!r}")
    return failures


# --------------------------------------------------------------------------- networks


@dataclass(frozen=True)
class Graph:
    """A benchmark network: adjacency, and optionally node sizes and planted groups."""

    adjacency: sp.csr_array
    sizes: np.ndarray | None = None
    truth: np.ndarray | None = None
    meta: dict[str, Any] = field(default_factory=dict)


def _write_ignore(cache_dir: Path) -> None:
    cache_dir.mkdir(parents=True, exist_ok=True)
    ignore = cache_dir / ".gitignore"
    if not ignore.exists():
        ignore.write_text("# benchmark cache, rebuilt on demand\n*\n")


def road_path(cache_dir: Path, n: int, seed: int) -> Path:
    """Cache file of a road-like network; the same key as ``bench_eigen.py``."""
    from specgraph.gallery import ROAD_MEAN_DEGREE

    path = cache_dir / f"road-deg{ROAD_MEAN_DEGREE:g}-n{n}-seed{seed}.npz"
    if not path.exists():
        from specgraph import gallery

        _write_ignore(cache_dir)
        logger.info("building road-like network, n=%d", n)
        tmp = path.with_suffix(".tmp.npz")
        sp.save_npz(tmp, sp.csr_array(gallery.road_like(n, rng=seed).adjacency))
        tmp.replace(path)
    return path


def node_sizes(n: int, seed: int) -> np.ndarray:
    """Invented integer node sizes (connections served) of the sized family."""
    rng = np.random.default_rng([seed, n, 2])  # a stream of its own
    return np.maximum(1.0, np.rint(rng.lognormal(SIZE_LOG_MEAN, SIZE_LOG_SIGMA, size=n)))


def save_graph(path: Path, graph: Graph) -> None:
    a = graph.adjacency
    arrays = {"data": a.data, "indices": a.indices, "indptr": a.indptr, "n": a.shape[0]}
    if graph.truth is not None:
        arrays["truth"] = graph.truth
    _write_ignore(path.parent)
    tmp = path.with_suffix(".tmp.npz")
    np.savez(tmp, meta=json.dumps(graph.meta), **arrays)
    tmp.replace(path)


def load_graph(path: Path, sizes_seed: int | None = None) -> Graph:
    """A cached network; road files are scipy ``.npz``, the others this script's own."""
    if path.name.startswith("road-"):
        adjacency = sp.csr_array(sp.load_npz(path))
        n = adjacency.shape[0]
        sizes = None if sizes_seed is None else node_sizes(n, sizes_seed)
        return Graph(_int32(adjacency), sizes=sizes)
    with np.load(path) as f:
        n = int(f["n"])
        adjacency = sp.csr_array((f["data"], f["indices"], f["indptr"]), shape=(n, n))
        truth = f.get("truth", None)
        meta = json.loads(str(f["meta"]))
    return Graph(_int32(adjacency), truth=truth, meta=meta)


def _int32(adjacency: sp.csr_array) -> sp.csr_array:
    """32-bit indices (scikit-learn's ARPACK path accepts no other), sorted."""
    adjacency = sp.csr_array(adjacency, dtype=np.float64)
    if max(adjacency.shape[0], adjacency.nnz) < np.iinfo(np.int32).max:
        adjacency.indices = adjacency.indices.astype(np.int32)
        adjacency.indptr = adjacency.indptr.astype(np.int32)
    adjacency.sort_indices()
    return adjacency


def lfr_path(cache_dir: Path, n: int, mu: float, seed: int) -> Path:
    p = LFR_PARAMETERS
    tag = (
        f"lfr-n{n}-mu{mu:g}-t{p['tau1']:g}-{p['tau2']:g}-k{p['average_degree']}"
        f"-max{p['max_degree']}-c{p['min_community']}-seed{seed}"
    )
    path = cache_dir / f"{tag}.npz"
    if not path.exists():
        save_graph(path, lfr_graph(n, mu, seed))
    return path


def lfr_graph(n: int, mu: float, seed: int) -> Graph:
    """An LFR graph, self-loops dropped; the next seed is tried when one fails."""
    import networkx as nx

    failed = []
    for trial in range(seed, seed + LFR_SEED_TRIES):
        try:
            graph = nx.LFR_benchmark_graph(n, mu=mu, seed=trial, **LFR_PARAMETERS)
        except nx.ExceededMaxIterations as exc:
            failed.append(f"{trial} ({type(exc).__name__})")
            continue
        graph.remove_edges_from(list(nx.selfloop_edges(graph)))
        nodes = sorted(graph)
        adjacency = nx.to_scipy_sparse_array(graph, nodelist=nodes, weight=None, format="csr")
        first = np.array([min(graph.nodes[v]["community"]) for v in nodes])
        truth = np.unique(first, return_inverse=True)[1]
        meta = {"seed_used": trial, "seeds_failed": failed}
        return Graph(sp.csr_array(adjacency, dtype=float), truth=truth, meta=meta)
    raise RuntimeError(f"LFR generation failed for n={n}, mu={mu} at seeds {failed}")


def sbm_path(cache_dir: Path, n: int, c_in: float, c_out: float, seed: int) -> Path:
    path = cache_dir / f"sbm2-cin{c_in:g}-cout{c_out:g}-n{n}-seed{seed}.npz"
    if not path.exists():
        save_graph(path, sbm_graph(n, c_in, c_out, seed))
    return path


def sbm_graph(n: int, c_in: float, c_out: float, seed: int) -> Graph:
    """Two equal groups; Poisson link counts; largest connected component, shuffled."""
    rng = np.random.default_rng([seed, n, 4])
    half = n // 2
    group = (np.arange(n) >= half).astype(np.int64)
    start, size = np.array([0, half]), np.array([half, n - half])
    # Decelle et al.: c_in = N p_in, so a node has c_in/2 neighbours in its group.
    m_in, m_out = rng.poisson(n * c_in / 4), rng.poisson(n * c_out / 4)
    u = rng.integers(n, size=m_in)
    g = group[u]
    v = start[g] + (u - start[g] + rng.integers(1, size[g])) % size[g]
    u2 = rng.integers(n, size=m_out)
    g2 = 1 - group[u2]
    v2 = start[g2] + rng.integers(0, size[g2])
    lo = np.minimum(np.concatenate([u, u2]), np.concatenate([v, v2]))
    hi = np.maximum(np.concatenate([u, u2]), np.concatenate([v, v2]))
    keys = np.unique(lo.astype(np.int64) * n + hi)
    upper = sp.coo_array((np.ones(keys.size), (keys // n, keys % n)), shape=(n, n)).tocsr()
    adjacency = sp.csr_array(upper + upper.T)
    _, comp = connected_components(adjacency, directed=False)
    keep = np.flatnonzero(comp == np.bincount(comp).argmax())
    keep = keep[rng.permutation(keep.size)]
    meta = {"nodes_before": n, "links_before": int(keys.size)}
    return Graph(sp.csr_array(adjacency[keep][:, keep]), truth=group[keep], meta=meta)


# --------------------------------------------------------------------------- methods


def ours_options(variant: str, constraints: dict[str, Any] | None) -> dict[str, Any]:
    """Keywords for find_zones: the variant's dict, bounds turned into constraints."""
    from specgraph.zones import ZoneConstraints

    options = {k: v for k, v in VARIANTS[variant].items() if k not in {"bounds", "size_by"}}
    if constraints is not None:
        options["constraints"] = ZoneConstraints(**constraints)
    return options


@dataclass
class Prepared:
    """The timed call of one method, and notes the child reports."""

    call: Callable[[], np.ndarray]
    notes: list[str] = field(default_factory=list)
    choices: dict[str, Any] = field(default_factory=dict)


def prepare_ours(graph: Graph, spec: dict[str, Any]) -> Prepared:
    from specgraph import Network, find_zones

    n = graph.adjacency.shape[0]
    network = Network(graph.adjacency, np.arange(n).astype(str), sizes=graph.sizes)
    options = ours_options(spec["variant"], spec.get("constraints"))
    prepared = Prepared(call=lambda: np.empty(0))

    def call() -> np.ndarray:
        zoning = find_zones(network, spec["zones"], rng=spec["seed"], **options)
        decisions = zoning.decisions
        prepared.choices = {k: decisions[k]["choice"] for k in CHOICES_SHOWN if k in decisions}
        used = ", ".join(f"{k}={v}" for k, v in prepared.choices.items())
        prepared.notes = [f"used {used}", *map(str, zoning.warnings)]
        return np.asarray(zoning.labels)

    prepared.call = call
    return prepared


def prepare_sklearn(graph: Graph, spec: dict[str, Any]) -> Prepared:
    from sklearn.cluster import SpectralClustering

    model = SpectralClustering(
        n_clusters=spec["zones"], random_state=spec["seed"], **SKLEARN_OPTIONS
    )
    return Prepared(call=lambda: np.asarray(model.fit_predict(graph.adjacency)))


def prepare_louvain(graph: Graph, spec: dict[str, Any]) -> Prepared:
    import networkx as nx

    nxgraph = nx.from_scipy_sparse_array(graph.adjacency)  # weights as "weight"
    n = graph.adjacency.shape[0]

    def call() -> np.ndarray:
        found = nx.community.louvain_communities(nxgraph, seed=spec["seed"], **LOUVAIN_OPTIONS)
        labels = np.empty(n, dtype=np.int64)
        for z, members in enumerate(found):
            labels[list(members)] = z
        return labels

    return Prepared(call=call)


PREPARE: dict[str, Callable[[Graph, dict[str, Any]], Prepared]] = {
    "ours": prepare_ours,
    "sklearn": prepare_sklearn,
    "louvain": prepare_louvain,
}


# --------------------------------------------------------------------------- child process


def warm_up(spec: dict[str, Any]) -> None:
    """Run the method once, untimed, on a small road-like network (imports, JIT)."""
    from specgraph import gallery

    small = Graph(_int32(gallery.road_like(WARMUP_N, rng=spec["seed"] + 1).adjacency))
    small_spec = {**spec, "zones": WARMUP_ZONES, "constraints": None}
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            PREPARE[spec["method"]](small, small_spec).call()
    except Exception as exc:  # the timed run reports failures
        logger.debug("warm-up failed: %s", exc)


def worker(spec: dict[str, Any]) -> dict[str, Any]:
    """Run one method once on one cached network; labels go to ``spec['labels_out']``."""
    cap = spec.get("memory_cap")
    if cap:
        limit = int(cap * 2**30)
        resource.setrlimit(resource.RLIMIT_AS, (limit, limit))
    graph = load_graph(Path(spec["path"]), spec.get("sizes_seed"))
    prepared = PREPARE[spec["method"]](graph, spec)
    warm_up(spec)
    gc.collect()
    _release_free_heap()
    report: dict[str, Any] = {"peak_reset": _reset_peak()}
    baseline = _status_kib("VmRSS") or 0
    floor = _peak_kib()
    if spec.get("timeout"):
        # SIGALRM's default action ends the process even inside C code.
        signal.setitimer(signal.ITIMER_REAL, float(spec["timeout"]))
    start = time.perf_counter()
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            labels = prepared.call()
        seconds = time.perf_counter() - start
    except Exception as exc:
        signal.setitimer(signal.ITIMER_REAL, 0)
        reason = " ".join(str(exc).split())[:160]
        return {"status": "failed", "error": f"{type(exc).__name__}: {reason}"}
    signal.setitimer(signal.ITIMER_REAL, 0)
    peak = _peak_kib()
    np.save(spec["labels_out"], labels.astype(np.int64))
    messages = sorted({" ".join(str(w.message).split())[:80] for w in caught})
    report.update(
        status="ok",
        seconds=seconds,
        extra_kib=max(peak - max(baseline, floor), 0),
        notes=prepared.notes + [f"warned: {m}" for m in messages],
        choices=prepared.choices,
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


# --------------------------------------------------------------------------- rows


@dataclass
class Row:
    """One method on one network: runs, labels of the first run, and its scores."""

    name: str
    method: str  # ours | sklearn | louvain | truth
    zones: Any
    variant: str | None = None
    constraints: dict[str, Any] | None = None
    runs: list[dict[str, Any]] = field(default_factory=list)
    labels: np.ndarray | None = None
    quality: Quality | None = None
    status: str = "pending"  # ok | failed | timeout
    note: str = ""
    goal: str = ""
    differs: bool = False
    choices: dict[str, Any] = field(default_factory=dict)

    @property
    def median(self) -> float | None:
        times = [r["seconds"] for r in self.runs]
        return statistics.median(times) if times else None

    @property
    def extra_mib(self) -> float | None:
        return max(r["extra_kib"] for r in self.runs) / 1024 if self.runs else None


@dataclass
class Context:
    args: argparse.Namespace
    workdir: Path
    counter: itertools.count = field(default_factory=itertools.count)


def run_rows(ctx: Context, path: Path, graph: Graph, rows: list[Row], sizes_seed: Any) -> None:
    """Run every row ``--repeats`` times, round-robin, and score the first labels."""
    args = ctx.args
    for repeat in range(args.repeats):
        for row in rows:
            if row.method == "truth" or row.status in {"failed", "timeout"}:
                continue
            out = ctx.workdir / f"labels-{next(ctx.counter)}.npy"
            spec = {
                "path": str(path),
                "method": row.method,
                "variant": row.variant,
                "zones": row.zones,
                "constraints": row.constraints,
                "seed": args.seed,
                "sizes_seed": sizes_seed,
                "timeout": args.timeout,
                "memory_cap": args.memory_cap,
                "labels_out": str(out),
            }
            logger.info("  %s, repeat %d/%d", row.name, repeat + 1, args.repeats)
            outcome = run_child(spec)
            status = outcome.get("status")
            if status != "ok":
                logger.info("    %s %s", status, outcome.get("error", ""))
                if not row.runs:
                    row.status, row.note = str(status), str(outcome.get("error", ""))
                continue
            labels = np.load(out)
            out.unlink()
            row.runs.append(outcome)
            logger.info(
                "    %.2f s, extra %.1f MiB", outcome["seconds"], outcome["extra_kib"] / 1024
            )
            if row.labels is None:
                row.status, row.labels = "ok", labels
                row.note = "; ".join(outcome.get("notes", []))
                row.choices = dict(outcome.get("choices", {}))
                row.quality = zone_quality(
                    graph.adjacency, labels, sizes=graph.sizes, truth=graph.truth
                )
            elif not np.array_equal(row.labels, labels):
                row.differs = True
    for row in rows:
        if row.method == "truth" and graph.truth is not None:
            row.status, row.labels = "ok", graph.truth
            row.quality = zone_quality(
                graph.adjacency, graph.truth, sizes=graph.sizes, truth=graph.truth
            )


# --------------------------------------------------------------------------- goals


def _verdict(parts: list[tuple[bool, str]]) -> str:
    ok = all(p for p, _ in parts)
    return ("met: " if ok else "NOT MET: ") + "; ".join(text for _, text in parts)


def _connected_part(q: Quality) -> tuple[bool, str]:
    return q.connected == q.zones, f"{q.connected}/{q.zones} connected"


def _bounds_part(q: Quality, bounds: dict[str, Any]) -> tuple[bool, str]:
    lo, hi = bounds["min_size"], bounds["max_size"]
    ok = lo <= q.size_min and q.size_max <= hi
    return ok, f"sizes {q.size_min:,.0f}..{q.size_max:,.0f} in [{lo:,.0f}, {hi:,.0f}]"


def goal_bounded(row: Row, reference: Row) -> str:
    q, r = row.quality, reference.quality
    if q is None or r is None:
        return "n/a (a run failed)"
    limit = NCUT_RATIO_GOAL * r.ncut
    parts = [
        (q.ncut <= limit, f"NCut {q.ncut:.4g} vs {NCUT_RATIO_GOAL:g} x {r.ncut:.4g} = {limit:.4g}"),
        _connected_part(q),
    ]
    if row.constraints is not None:
        parts.append(_bounds_part(q, row.constraints))
    return _verdict(parts)


def goal_vs_louvain(row: Row, louvain: Row) -> str:
    q, r = row.quality, louvain.quality
    if q is None or r is None:
        return "n/a (a run failed)"
    text = f"NCut {q.ncut:.4g} vs Louvain {r.ncut:.4g}"
    return _verdict([(q.ncut <= r.ncut, text), _connected_part(q)])


def goal_sized(row: Row) -> str:
    if row.quality is None or row.constraints is None:
        return "n/a"
    return _verdict([_bounds_part(row.quality, row.constraints)])


def goal_lfr(row: Row) -> str:
    q = row.quality
    if q is None or q.nmi is None:
        return "n/a"
    if row.method == "sklearn":
        return f"claim about {LFR_SKLEARN_CLAIM:g}: measured {q.nmi:.3f}"
    return _verdict([(q.nmi >= LFR_NMI_GOAL, f"NMI {q.nmi:.3f} >= {LFR_NMI_GOAL:g}")])


def goal_sbm(row: Row, plain: Row) -> str:
    """Verdict on our overlap, and whether the premise (plain normalized near 0) held."""
    q, p = row.quality, plain.quality
    if q is None or q.overlap is None:
        return "n/a"
    text = _verdict(
        [(q.overlap >= SBM_OVERLAP_GOAL, f"overlap {q.overlap:.3f} >= {SBM_OVERLAP_GOAL:g}")]
    )
    if p is not None and p.overlap is not None:
        held = "holds" if p.overlap <= NEAR_ZERO_OVERLAP else "does NOT hold"
        text += (
            f" (premise, plain normalized overlap <= {NEAR_ZERO_OVERLAP:g}: {held}, "
            f"{p.overlap:.3f})"
        )
    return text


# --------------------------------------------------------------------------- tables


def _cell(text: str) -> str:
    return text.replace("|", "\\|")


def _time_cells(row: Row) -> str:
    if row.method == "truth":
        return " | "
    if row.status == "ok":
        median = row.median or 0.0
        runs = f" ({len(row.runs)} runs)" if len(row.runs) > 1 else ""
        return f"{median:.3g}{runs} | {row.extra_mib:.1f}"
    return " | "


def _status_text(row: Row, args: argparse.Namespace) -> str:
    if row.status == "timeout":
        return f"skipped (> {args.timeout:g} s)"
    return f"failed: {row.note}"


def _notes(row: Row) -> str:
    notes = [row.note] if row.note else []
    if row.differs:
        notes.append("LABELS DIFFER across repeats")
    return _cell("; ".join(notes))


def zoning_table(rows: list[Row], args: argparse.Namespace, truth_cols: bool) -> list[str]:
    """Table of rows with the size columns; ``truth_cols`` adds NMI and overlap."""
    extra = " NMI | overlap |" if truth_cols else ""
    lines = [
        f"| method | zones | NCut | max conductance | connected | sizes min..max | max/min "
        f"| CV |{extra} median s | extra MiB | notes | goal |",
        "|---|---:|---:|---:|---:|---:|---:|---:|"
        + ("---:|---:|" if truth_cols else "")
        + "---:|---:|---|---|",
    ]
    blank = 8 + (2 if truth_cols else 0)
    for row in rows:
        q = row.quality
        if q is None:
            text = _cell(_status_text(row, args))
            lines.append(f"| {row.name} | {row.zones} | {text} |" + " |" * blank + f" {row.goal} |")
            continue
        tail = f" {q.nmi:.3f} | {q.overlap:.3f} |" if truth_cols and q.nmi is not None else ""
        if truth_cols and q.nmi is None:
            tail = " | |"
        lines.append(
            f"| {row.name} | {q.zones} | {q.ncut:.4g} | {q.max_conductance:.3g} "
            f"| {q.connected}/{q.zones} | {q.size_min:,.0f}..{q.size_max:,.0f} | {q.spread:.2f} "
            f"| {q.size_cv:.3f} |{tail} {_time_cells(row)} | {_notes(row)} | {_cell(row.goal)} |"
        )
    return [*lines, ""]


def graph_facts(graph: Graph) -> str:
    a = graph.adjacency
    count, _ = connected_components(a, directed=False)
    n = a.shape[0]
    text = f"{n:,} nodes, {a.nnz // 2:,} links, mean degree {a.nnz / n:.2f}, {count} component(s)"
    if graph.sizes is not None:
        text += f", node sizes summing to {graph.sizes.sum():,.0f} (mean {graph.sizes.mean():.2f})"
    return text


# --------------------------------------------------------------------------- families


def bounds_for(graph: Graph, zones: int, size_by: str) -> dict[str, Any]:
    """Size bounds ``ROAD_BOUNDS`` x mean zone size, in nodes or node size."""
    total = graph.adjacency.shape[0] if graph.sizes is None else float(graph.sizes.sum())
    mean = total / zones
    lo, hi = int(np.floor(ROAD_BOUNDS[0] * mean)), int(np.ceil(ROAD_BOUNDS[1] * mean))
    return {"min_size": lo, "max_size": hi, "size_by": size_by}


def family_road(ctx: Context) -> list[str]:
    args = ctx.args
    path = road_path(args.cache_dir, args.road_size, args.seed)
    graph = load_graph(path)
    k = args.zones
    bounds = bounds_for(graph, k, "nodes")
    logger.info("road-like, n=%d", args.road_size)
    bounded = Row("ours-bounded", "ours", k, "ours-bounded", bounds)
    sklearn = Row("sklearn", "sklearn", k)
    louvain = Row("louvain", "louvain", "own")
    run_rows(ctx, path, graph, [bounded, sklearn, louvain], None)
    bounded.goal = goal_bounded(bounded, sklearn)
    sklearn.goal, louvain.goal = "reference", "reference"
    rows = [bounded, sklearn, louvain]
    if louvain.quality is not None:
        at_louvain = Row(
            f"ours at Louvain's {louvain.quality.zones}", "ours", louvain.quality.zones, "ours"
        )
        run_rows(ctx, path, graph, [at_louvain], None)
        at_louvain.goal = goal_vs_louvain(at_louvain, louvain)
        rows.append(at_louvain)
        # The assignment methods auto did not pick, at the same count, for comparison;
        # not tried when auto ran out of time (they share its eigen-solve).
        others = [
            Row(f"ours {a} at Louvain's {louvain.quality.zones}", "ours", at_louvain.zones, v)
            for a, v in ASSIGN_VARIANTS.items()
            if at_louvain.status == "ok" and a != at_louvain.choices.get("assign")
        ]
        run_rows(ctx, path, graph, others, None)
        for row in others:
            row.goal = "comparison: " + goal_vs_louvain(row, louvain)
        rows += others
    return [
        f"### road-like, n = {args.road_size:,}, {k} zones",
        "",
        graph_facts(graph) + ".",
        f"Bounds of ours-bounded: {bounds['min_size']:,} to {bounds['max_size']:,} nodes "
        f"({ROAD_BOUNDS[0]:g} and {ROAD_BOUNDS[1]:g} x n/{k}). The rows after Louvain's run "
        "ours without bounds at the zone count Louvain found: first with every option auto "
        "(the goal row), then with each assignment method auto did not pick.",
        "",
        *zoning_table(rows, args, truth_cols=False),
    ]


def family_sized(ctx: Context) -> list[str]:
    args = ctx.args
    path = road_path(args.cache_dir, args.road_size, args.seed)
    graph = load_graph(path, args.seed)
    k = args.zones
    bounds = bounds_for(graph, k, "weight")
    logger.info("sized road-like, n=%d", args.road_size)
    sized = Row("ours-sized", "ours", k, "ours-sized", bounds)
    rows = [sized, Row("ours", "ours", k, "ours"), Row("sklearn", "sklearn", k)]
    rows.append(Row("louvain", "louvain", "own"))
    run_rows(ctx, path, graph, rows, args.seed)
    sized.goal = goal_sized(sized)
    return [
        f"### road-like with node sizes, n = {args.road_size:,}, {k} zones",
        "",
        graph_facts(graph) + ".",
        f"Node sizes: max(1, round(lognormal({SIZE_LOG_MEAN:g}, {SIZE_LOG_SIGMA:g}))), "
        f"invented. Bounds of ours-sized: {bounds['min_size']:,} to {bounds['max_size']:,} in "
        f"node size ({ROAD_BOUNDS[0]:g} and {ROAD_BOUNDS[1]:g} x total/{k}). Sizes columns "
        "count node size. Only ours-sized is told the bounds.",
        "",
        *zoning_table(rows, args, truth_cols=False),
    ]


def family_lfr(ctx: Context) -> list[str]:
    args = ctx.args
    lines = [
        "### LFR benchmark graphs",
        "",
        "networkx `LFR_benchmark_graph` with "
        + ", ".join(f"{k}={v}" for k, v in LFR_PARAMETERS.items())
        + "; self-loops dropped. NMI: scikit-learn `normalized_mutual_info_score` (arithmetic), "
        "not the overlapping NMI of the LFR papers.",
        "",
    ]
    summary = []
    for n, mu in itertools.product(args.lfr_sizes, LFR_MIXING):
        path = lfr_path(args.cache_dir, n, mu, args.seed)
        graph = load_graph(path)
        assert graph.truth is not None
        planted = int(graph.truth.max()) + 1
        logger.info("LFR n=%d mu=%g", n, mu)
        rows = [
            Row("planted", "truth", planted),
            Row("ours", "ours", planted, "ours"),
            Row("ours qr", "ours", planted, "ours-qr"),
            Row("ours bethe_hessian", "ours", planted, "ours-bethe-hessian"),
            Row("ours auto", "ours", "auto", "ours"),
            Row("sklearn", "sklearn", planted),
            Row("louvain", "louvain", "own"),
        ]
        run_rows(ctx, path, graph, rows, None)
        if np.isclose(mu, LFR_GOAL_MU):
            for row in rows:
                if row.method not in {"ours", "sklearn"}:
                    continue
                row.goal = goal_lfr(row)
                if row.quality is not None and row.quality.nmi is not None:
                    summary.append(f"{row.name} {row.quality.nmi:.3f} (n={n:,})")
        meta = graph.meta
        failed = (
            f"; seeds that failed: {', '.join(meta['seeds_failed'])}"
            if meta["seeds_failed"]
            else ""
        )
        lines += [
            f"#### n = {n:,}, mu = {mu:g}: seed {meta['seed_used']}{failed}, "
            f"{planted} planted communities",
            "",
            graph_facts(graph) + ".",
            "",
            *zoning_table(rows, args, truth_cols=True),
        ]
    if summary:
        lines += [f"NMI at mu = {LFR_GOAL_MU:g}: " + "; ".join(summary) + ".", ""]
    return lines


def family_sbm(ctx: Context) -> list[str]:
    args = ctx.args
    lines = []
    for c_in, c_out in SBM_SETTINGS:
        path = sbm_path(args.cache_dir, args.sbm_size, c_in, c_out, args.seed)
        graph = load_graph(path)
        logger.info("SBM n=%d c_in=%g c_out=%g", args.sbm_size, c_in, c_out)
        ours = Row("ours", "ours", 2, "ours")
        plain = Row("ours normalized, trees kept", "ours", 2, "ours-normalized")
        rows = [
            Row("planted", "truth", 2),
            ours,
            plain,
            Row("ours bethe_hessian", "ours", 2, "ours-bethe-hessian"),
            Row("ours regularized", "ours", 2, "ours-regularized"),
            Row("sklearn", "sklearn", 2),
        ]
        run_rows(ctx, path, graph, rows, None)
        ours.goal = goal_sbm(ours, plain)
        c = (c_in + c_out) / 2
        lines += [
            f"### sparse two-group block model, c_in = {c_in:g}, c_out = {c_out:g}, "
            f"n = {args.sbm_size:,} before the largest component",
            "",
            f"Mean degree {c:g}; detectable since |c_in - c_out| = {c_in - c_out:g} > "
            f"2 sqrt(c) = {2 * np.sqrt(c):.3g} (Decelle et al. 2011); largest connected "
            "component: " + graph_facts(graph) + '. "ours normalized, trees kept" is the '
            "plain normalized Laplacian (`operator='normalized', trees='keep'`).",
            "",
            *zoning_table(rows, args, truth_cols=True),
        ]
    return lines


FAMILY_RUNNERS: dict[str, Callable[[Context], list[str]]] = {
    "road": family_road,
    "sized": family_sized,
    "lfr": family_lfr,
    "sbm": family_sbm,
}


# --------------------------------------------------------------------------- report


def _version(package: str) -> str:
    try:
        return version(package)
    except PackageNotFoundError:
        return "not installed"


def header(args: argparse.Namespace, argv: list[str]) -> list[str]:
    now = dt.datetime.now(dt.UTC).astimezone()
    packages = ("specgraph", "numpy", "scipy", "scikit-learn", "networkx", "numba")
    return [
        "## Zoning quality benchmark",
        "",
        f"Command: `python {shlex.join(argv)}`",
        "",
        f"- date: {now.isoformat(timespec='seconds')}; source: {_git_state()}",
        f"- python {platform.python_version()}, "
        + ", ".join(f"{p} {_version(p)}" for p in packages),
        f"- nproc: {os.cpu_count()}; seed {args.seed}; repeats {args.repeats} (median time); "
        f"time limit per run {args.timeout:g} s; memory cap per child {args.memory_cap:g} GiB",
        f"- ours: `find_zones(network, zones, rng=seed, **options)`; options per variant: "
        f"`{json.dumps(VARIANTS)}`",
        f"- scikit-learn: `SpectralClustering(n_clusters=k, random_state=seed, "
        f"**{json.dumps(SKLEARN_OPTIONS)})`; networkx: `louvain_communities(G, seed=seed, "
        f"**{json.dumps(LOUVAIN_OPTIONS)})`",
        "- self-check of the scores against networkx: passed",
        "",
    ]


NOTES = """\
Notes:

- Every figure comes from one scoring function applied to the labels of each method's first
  run (and to the planted truth): NCut = sum over zones of cut/volume; max conductance =
  max over zones of cut / min(volume, rest of the volume); connected = zones whose own links
  keep them in one piece; sizes in nodes, or in node size where nodes have sizes; CV = standard
  deviation / mean of zone sizes; overlap = (accuracy - 1/q)/(1 - 1/q) with the best one-to-one
  matching of zones to planted groups (Decelle et al., PRE 84, 066106, 2011).
- Times: median wall time around one call in a fresh process, after an untimed warm-up on a
  2,000-node road-like network. Extra MiB: peak RSS during the call minus RSS before it
  (`/proc/self/clear_refs`, `VmHWM`), max over runs; the method's input (specgraph `Network`,
  networkx graph) is built before.
"""


# --------------------------------------------------------------------------- command line


def _default_cap() -> float:
    """Half the physical memory, in GiB."""
    try:
        found = re.search(r"MemTotal:\s+(\d+)", Path("/proc/meminfo").read_text())
    except OSError:
        return 0.0
    return round(int(found.group(1)) / 2**21, 1) if found else 0.0


def parse_args(argv: list[str] | None = None) -> argparse.Namespace:
    parser = argparse.ArgumentParser(
        description="Zoning quality of specgraph.find_zones against scikit-learn and networkx.",
        formatter_class=argparse.ArgumentDefaultsHelpFormatter,
    )
    parser.add_argument("--only", choices=FAMILIES, action="append", help="run only this family")
    parser.add_argument(
        "--quick", action="store_true", help="smaller road and SBM networks, one repeat"
    )
    parser.add_argument("--road-size", type=int, default=DEFAULT_ROAD_N, help="road-like nodes")
    parser.add_argument("--zones", type=int, default=16, help="zones of the road families")
    parser.add_argument(
        "--lfr-sizes", type=int, nargs="+", default=list(DEFAULT_LFR_SIZES), help="LFR node counts"
    )
    parser.add_argument("--sbm-size", type=int, default=DEFAULT_SBM_N, help="block-model nodes")
    parser.add_argument("--repeats", type=int, default=3, help="timed runs per method")
    parser.add_argument("--timeout", type=float, default=600.0, help="seconds per run")
    parser.add_argument(
        "--memory-cap", type=float, default=_default_cap(), help="GiB per child (0: none)"
    )
    parser.add_argument("--seed", type=int, default=0, help="seed of networks and methods")
    parser.add_argument("--cache-dir", type=Path, default=DEFAULT_CACHE, help="network cache")
    parser.add_argument("--out", type=Path, default=None, help="also write the report here")
    parser.add_argument(
        "--self-check", action="store_true", help="only check the scores against networkx"
    )
    parser.add_argument("--worker", default=None, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.quick:
        args.road_size, args.sbm_size, args.repeats = QUICK_ROAD_N, QUICK_SBM_N, 1
    if args.repeats < 1:
        parser.error("--repeats must be at least 1")
    return args


def main(argv: list[str] | None = None) -> int:
    args = parse_args(argv)
    if args.worker is not None:
        print(RESULT_MARK + json.dumps(worker(json.loads(args.worker))), flush=True)
        return 0
    logging.basicConfig(level=logging.INFO, format="%(asctime)s %(message)s", stream=sys.stderr)
    failures = self_check(args.seed)
    if failures or args.self_check:
        for failure in failures:
            print(f"self-check FAILED: {failure}")
        if not failures:
            print(
                "self-check passed: NCut, conductance, connectedness, sizes and overlap agree "
                "with networkx and brute force"
            )
        return 1 if failures else 0
    started = time.perf_counter()
    lines = header(args, sys.argv)
    with tempfile.TemporaryDirectory(prefix="bench_zones_") as workdir:
        ctx = Context(args, Path(workdir))
        for family in args.only or FAMILIES:
            lines += FAMILY_RUNNERS[family](ctx)
    lines += [NOTES, f"Total benchmark wall time: {time.perf_counter() - started:.0f} s."]
    text = "\n".join(lines) + "\n"
    sys.stdout.write(text)
    if args.out is not None:
        args.out.parent.mkdir(parents=True, exist_ok=True)
        args.out.write_text(text)
    return 0


if __name__ == "__main__":
    sys.exit(main())
