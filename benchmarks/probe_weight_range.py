"""The spread of link affinities on real networks, and what contracting dominant links changes.

For every network converted by ``real_networks.py`` (read as ``specgraph zones``
reads it: ``--weight weight``, plus ``--distance`` for the telecom lengths),
prints one Markdown table row with:

* the affinity quantiles over links (min, median, 99th percentile, max) and
  max/median;
* ``jump``: the largest ratio between consecutive sorted distinct affinities
  above the median (the simplest global rule one could try);
* ``group gap``: the largest ratio, over the single-linkage clusters of the
  links, of a cluster's weakest inner forest link to its strongest outer link
  (the rule of :func:`specgraph.zones.find_dominant_links`), and how many
  links the rule marks at gaps from ``DOMINANT_GAP / 10`` to ``DOMINANT_GAP * 10``;
* the smallest zone (nodes) of ``find_zones`` at 5, 8 and 12 zones with
  ``dominant='ignore'`` and with ``dominant='contract'`` (seed 0, as the
  command runs it).

Usage::

    python benchmarks/real_networks.py          # once: fetch and convert
    python benchmarks/probe_weight_range.py     # about 3 minutes on 2 cores
    python benchmarks/probe_weight_range.py --networks GBnetwork Net3 --counts 8
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import minimum_spanning_tree

sys.path.insert(0, str(Path(__file__).resolve().parent))
from real_networks import DEFAULT_CACHE, SOURCES, load

from specgraph import find_zones, read_edges
from specgraph.zones import DOMINANT_GAP, _dominant, find_dominant_links, weight_range

#: Gaps at which the marked links are counted (the chosen one in the middle).
GAPS = (DOMINANT_GAP / 10, DOMINANT_GAP / 3, DOMINANT_GAP, DOMINANT_GAP * 3, DOMINANT_GAP * 10)


def largest_jump(w: np.ndarray) -> float:
    """Largest ratio of consecutive distinct affinities at or above the median."""
    values = np.unique(w[w >= np.median(w)])
    return float((values[1:] / values[:-1]).max()) if values.size > 1 else 1.0


def largest_group_gap(adjacency: sp.csr_array) -> float:
    """Largest inner/outer ratio over single-linkage clusters (the rule's figure)."""
    upper = sp.triu(adjacency, k=1).tocoo()
    w = upper.data
    order = np.argsort(-w, kind="stable")
    rank = np.empty(w.size)
    rank[order] = np.arange(1, w.size + 1)
    forest = minimum_spanning_tree(
        sp.coo_array((rank, (upper.row, upper.col)), shape=upper.shape).tocsr()
    ).tocoo()
    by = np.argsort(forest.data, kind="stable")
    weights = w[order][forest.data[by].astype(np.int64) - 1]
    parent = list(range(adjacency.shape[0]))
    born: dict[int, float] = {}
    best = 1.0

    def find(v: int) -> int:
        while parent[v] != v:
            parent[v] = parent[parent[v]]
            v = parent[v]
        return v

    for a, b, level in zip(
        forest.row[by].tolist(), forest.col[by].tolist(), weights.tolist(), strict=True
    ):
        ra, rb = find(a), find(b)
        for root in (ra, rb):
            if root in born:
                best = max(best, born[root] / level)
        parent[rb] = ra
        born[ra] = level
        born.pop(rb, None)
    return best


def smallest_zone(network, k: int, dominant: str) -> int:
    zoning = find_zones(network, k, dominant=dominant, rng=0)
    return int(np.bincount(zoning.labels).min())


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--networks", nargs="*", help="names (default: every network)")
    parser.add_argument("--counts", nargs="*", type=int, default=[5, 8, 12])
    parser.add_argument(
        "--gap",
        type=float,
        help="contract at this gap instead of DOMINANT_GAP (to compare candidates)",
    )
    args = parser.parse_args(argv)
    if args.gap is not None:
        _dominant.DOMINANT_GAP = args.gap  # read at each call: the "contract" column uses it
    chosen = [s for s in SOURCES if not args.networks or s.name in args.networks]
    counts = "/".join(map(str, args.counts))
    print(
        f"| network | links | min | median | p99 | max | max/median | jump | group gap "
        f"| marked at gap {'/'.join(f'{g:g}' for g in GAPS)} "
        f"| smallest zone, k={counts}: ignore | contract |"
    )
    print("|" + "---|" * 12)
    for source in chosen:
        real = load(source, DEFAULT_CACHE)
        start = time.perf_counter()
        network = read_edges(real.edges, weight="weight", distance=real.weight_is_distance)
        w = sp.triu(network.adjacency, k=1).tocoo().data
        spread = weight_range(network.adjacency)
        marked = find_dominant_links(network.adjacency).weights.size
        sensitivity = "/".join(
            str(find_dominant_links(network.adjacency, gap=g).weights.size) for g in GAPS
        )
        ignore = "/".join(str(smallest_zone(network, k, "ignore")) for k in args.counts)
        contract = (
            "/".join(str(smallest_zone(network, k, "contract")) for k in args.counts)
            if marked
            else "same"
        )
        print(
            f"| {source.name} | {w.size} | {spread['min']:.3g} | {spread['median']:.3g} "
            f"| {np.quantile(w, 0.99):.3g} | {spread['max']:.3g} "
            f"| {spread['max_over_median']:.3g} | {largest_jump(w):.3g} "
            f"| {largest_group_gap(network.adjacency):.3g} | {sensitivity} "
            f"| {ignore} | {contract} |",
            flush=True,
        )
        print(f"{source.name}: {time.perf_counter() - start:.1f} s", file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
