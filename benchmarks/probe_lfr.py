"""Where the normalized cut leaves the planted groups of the LFR graphs of goal 5.

Goal 5 of ``bench_many_zones.py`` asks NMI >= 0.9 at the planted count on
networkx LFR graphs at ``mu = 0.5`` (``bench_zones.lfr_graph``). This probe
prints, per size, two Markdown tables:

* ``planted``: the links, the share of them that cross planted groups (the
  mixing the graph has, against the ``mu`` asked), the planted partition's
  normalized cut beside ``k * mu``, the share of nodes with more links to one
  other group than to their own, and the planted partition refined by the
  normalized cut (:func:`refine_boundary`, then V-cycles): its cut and NMI;
* ``find_zones``: ``find_zones(net, k, rng=seed)`` over ``--seeds`` seeds:
  normalized cut, NMI, seconds, path;

then, with ``--mixing``, the same for other ``mu`` (the cut and NMI of
``find_zones`` at seed 0 and of the refined planted partition).

NMI is scikit-learn's ``normalized_mutual_info_score`` (arithmetic mean), as
the benchmark scores it.

Usage::

    python benchmarks/probe_lfr.py               # about 20 s on 2 cores
    python benchmarks/probe_lfr.py --sizes 1000 --seeds 10
    python benchmarks/probe_lfr.py --mixing 0.3 0.4 0.5    # about 1 minute
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np
import scipy.sparse as sp
from sklearn.metrics import normalized_mutual_info_score

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_zones import DEFAULT_CACHE, LFR_GOAL_MU, lfr_path, load_graph

from specgraph import Network, find_zones
from specgraph.zones import ZoneConstraints, normalized_cut, refine_boundary
from specgraph.zones._levels import refine_by_cycles

#: Sizes of goal 5 (bench_many_zones.LFR_SIZES).
SIZES = (1000, 2000, 5000)


def network(cache: Path, n: int, mu: float) -> tuple[Network, np.ndarray]:
    """The benchmark's LFR graph (seed 0, as goal 5), ids as its CSV writes them."""
    graph = load_graph(lfr_path(cache, n, mu, 0))
    assert graph.truth is not None
    ids = np.asarray([f"N{i}" for i in range(n)])
    return Network.from_scipy(graph.adjacency, node_ids=ids), graph.truth


def planted_row(net: Network, truth: np.ndarray, mu: float) -> str:
    a = sp.csr_array(net.adjacency)
    n, k = a.shape[0], int(truth.max()) + 1
    rows, cols = a.nonzero()
    crossing = float(np.mean(truth[rows] != truth[cols]))
    groups = sp.csr_array((np.ones(n), (np.arange(n), truth)), shape=(n, k))
    to_group = (a @ groups).toarray()
    own = to_group[np.arange(n), truth]
    to_group[np.arange(n), truth] = -1.0
    pulled = float(np.mean(to_group.max(axis=1) > own))
    refined = refine_boundary(a, truth, rng=0)
    rules = ZoneConstraints().resolve(net)
    cycled, _ = refine_by_cycles(net, refined.labels, rules, rng=np.random.default_rng(0))
    return (
        f"| {n:,} | {k} | {a.nnz // 2:,} | {crossing:.3f} | {k * mu:.1f} | "
        f"{normalized_cut(a, truth):.3f} | {pulled:.3f} | {refined.ncut_after:.3f} | "
        f"{nmi(truth, refined.labels):.3f} | {normalized_cut(a, cycled):.3f} | "
        f"{nmi(truth, cycled):.3f} |"
    )


def nmi(truth: np.ndarray, labels: np.ndarray) -> float:
    return float(normalized_mutual_info_score(truth, labels))


def zoned(net: Network, truth: np.ndarray, seed: int) -> tuple[float, float, float, str]:
    k = int(truth.max()) + 1
    start = time.perf_counter()
    zoning = find_zones(net, k, rng=seed)
    seconds = time.perf_counter() - start
    cut = float(zoning.scores["normalized_cut"])
    return cut, nmi(truth, zoning.labels), seconds, str(zoning.decisions["assign"]["choice"])


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--sizes", nargs="*", type=int, default=list(SIZES))
    parser.add_argument("--seeds", type=int, default=3, help="find_zones seeds per size")
    parser.add_argument("--mixing", nargs="*", type=float, default=[], help="other mu values")
    parser.add_argument("--cache-dir", type=Path, default=DEFAULT_CACHE)
    args = parser.parse_args(argv)

    print(f"## planted (mu = {LFR_GOAL_MU:g})\n")
    print(
        "| nodes | k | links | crossing share | k mu | planted NCut | pulled away | "
        "refined NCut | refined NMI | + V-cycles NCut | + V-cycles NMI |"
    )
    print("|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|")
    nets = {n: network(args.cache_dir, n, LFR_GOAL_MU) for n in args.sizes}
    for net, truth in nets.values():
        print(planted_row(net, truth, LFR_GOAL_MU), flush=True)

    print("\n## find_zones\n")
    print("| nodes | seed | NCut | NMI | seconds | assign |")
    print("|---:|---:|---:|---:|---:|---|")
    for n, (net, truth) in nets.items():
        for seed in range(args.seeds):
            cut, score, seconds, choice = zoned(net, truth, seed)
            print(f"| {n:,} | {seed} | {cut:.3f} | {score:.3f} | {seconds:.1f} | {choice} |")

    if args.mixing:
        print("\n## mixing\n")
        print("| mu | nodes | crossing share | find_zones NCut | NMI | refined planted NMI |")
        print("|---:|---:|---:|---:|---:|---:|")
    for mu in args.mixing:
        for n in args.sizes:
            net, truth = network(args.cache_dir, n, mu)
            a = sp.csr_array(net.adjacency)
            rows, cols = a.nonzero()
            crossing = float(np.mean(truth[rows] != truth[cols]))
            cut, score, _, _ = zoned(net, truth, 0)
            refined = refine_boundary(a, truth, rng=0).labels
            print(
                f"| {mu:g} | {n:,} | {crossing:.3f} | {cut:.3f} | {score:.3f} | "
                f"{nmi(truth, refined):.3f} |",
                flush=True,
            )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
