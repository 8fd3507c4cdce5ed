"""Probe behind the constants of the multilevel path (specgraph/zones/_levels.py).

Prints Markdown tables, one per question, on ``gallery.road_like(N, rng=0)``:

``path``
    the one-level path (``assign="auto"``) against the multilevel path at
    several zone counts: normalized cut and seconds of ``find_zones``, and
    their ratios (behind ``MULTILEVEL_MIN_ZONES``);
``coarsest``
    nodes per zone of the coarsest level (``COARSEST_PER_ZONE``) against the
    normalized cut after the climb and after the V-cycles;
``cycle``
    nodes per zone where a V-cycle stops coarsening (``CYCLE_PER_ZONE``);
``cycles``
    the normalized cut after each V-cycle (``CYCLE_RTOL``, ``MAX_CYCLES``);
``size``
    one level against multilevel by network size (``--sizes``, each its own
    ``road_like(N, rng=3)``): ``assign="auto"`` with both paths compared (the
    one-level cut, the multilevel cut, seconds) and with the multilevel path
    alone from ``MULTILEVEL_ALONE_NODES`` (seconds), behind that constant.

Usage::

    python benchmarks/probe_levels.py                       # every table, 100,000 nodes
    python benchmarks/probe_levels.py --only path --counts 8 16 32 48 64
    python benchmarks/probe_levels.py --only cycles --nodes 1000000 --zones 1000
    python benchmarks/probe_levels.py --only size --sizes 250000 500000 1000000 --counts 4 16

Times are single runs on a shared 2-core machine: read the ratios.
"""

from __future__ import annotations

import argparse
import time
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

import specgraph.zones._levels as levels
from specgraph import Network, find_zones, gallery


@contextmanager
def patched(**values: Any) -> Iterator[None]:
    """Set module constants of specgraph.zones._levels for the duration."""
    old = {name: getattr(levels, name) for name in values}
    for name, value in values.items():
        setattr(levels, name, value)
    try:
        yield
    finally:
        for name, value in old.items():
            setattr(levels, name, value)


def run(net: Network, k: int, **options: Any) -> tuple[float, float, dict[str, Any]]:
    start = time.perf_counter()
    zoning = find_zones(net, k, rng=0, **options)
    return float(zoning.scores["normalized_cut"]), time.perf_counter() - start, zoning.decisions


def path_table(net: Network, counts: list[int]) -> list[str]:
    lines = [
        "| zones | one-level NCut | s | multilevel NCut | s | NCut ratio (ML/1L) | time ratio |",
        "|---:|---:|---:|---:|---:|---:|---:|",
    ]
    print("\n".join(lines), flush=True)
    for k in counts:
        one, t_one, _ = run(net, k, assign="auto")
        multi, t_multi, _ = run(net, k, assign="multilevel")
        lines.append(
            f"| {k} | {one:.4g} | {t_one:.1f} | {multi:.4g} | {t_multi:.1f} | "
            f"{multi / one:.3f} | {t_multi / t_one:.2f} |"
        )
        print(lines[-1], flush=True)
    return lines


def size_table(sizes: list[int], counts: list[int]) -> list[str]:
    lines = [
        "| nodes | zones | one-level NCut | multilevel NCut | both compared, s | "
        "multilevel alone, s | time ratio |",
        "|---:|---:|---:|---:|---:|---:|---:|",
    ]
    print("\n".join(lines), flush=True)
    for n in sizes:
        net = gallery.road_like(n, rng=3)
        for k in counts:
            with patched(MULTILEVEL_ALONE_NODES=10**15):
                cut_both, t_both, decided = run(net, k)
            record = decided["assign"]
            # the one-level cut: the zoning's own when that path won, else recorded beside it
            one = record.get("one_level", {}).get("ncut", cut_both)
            with patched(MULTILEVEL_ALONE_NODES=0):
                cut, t_alone, _ = run(net, k)
            lines.append(
                f"| {n:,} | {k} | {one:.4g} | {cut:.4g} | {t_both:.1f} | {t_alone:.1f} | "
                f"{t_alone / t_both:.2f} |"
            )
            print(lines[-1], flush=True)
    return lines


def coarsest_table(net: Network, k: int, values: list[float]) -> list[str]:
    lines = [
        "| nodes per zone (coarsest) | coarsest nodes | NCut after climb | after V-cycles | s |",
        "|---:|---:|---:|---:|---:|",
    ]
    print("\n".join(lines), flush=True)
    for per in values:
        with patched(COARSEST_PER_ZONE=per, COARSEST_MIN_NODES=0):
            cut, seconds, decisions = run(net, k, assign="multilevel")
        record = decisions["assign"]
        lines.append(
            f"| {per:g} | {record['levels'][0]['nodes']:,} | {record['levels'][-1]['ncut']:.4g} "
            f"| {cut:.4g} | {seconds:.1f} |"
        )
        print(lines[-1], flush=True)
    return lines


def cycle_table(net: Network, k: int, values: list[float]) -> list[str]:
    lines = ["| nodes per zone (V-cycle) | cycles | NCut | s |", "|---:|---:|---:|---:|"]
    print("\n".join(lines), flush=True)
    for per in values:
        with patched(CYCLE_PER_ZONE=per):
            cut, seconds, decisions = run(net, k, assign="multilevel")
        lines.append(
            f"| {per:g} | {len(decisions['assign']['cycles'])} | {cut:.4g} | {seconds:.1f} |"
        )
        print(lines[-1], flush=True)
    return lines


def cycles_table(net: Network, k: int, most: int) -> list[str]:
    with patched(MAX_CYCLES=most, CYCLE_RTOL=0.0, CYCLE_NODE_BUDGET=10**15):
        start = time.perf_counter()
        zoning = find_zones(net, k, assign="multilevel", rng=0)
        seconds = time.perf_counter() - start
    record = zoning.decisions["assign"]
    cuts = [record["levels"][-1]["ncut"], *record["cycles"]]
    lines = [
        f"{most} V-cycles in {seconds:.1f} s in all",
        "",
        "| cycle | NCut | drop from the cycle before |",
        "|---:|---:|---:|",
    ]
    for i in range(1, len(cuts)):
        lines.append(f"| {i} | {cuts[i]:.4g} | {1 - cuts[i] / cuts[i - 1]:.2%} |")
    print("\n".join(lines), flush=True)
    return lines


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--nodes", type=int, default=100_000)
    parser.add_argument("--zones", type=int, default=162, help="zones of the constant probes")
    parser.add_argument("--counts", type=int, nargs="+", default=[8, 16, 32, 48, 64, 100])
    parser.add_argument("--sizes", type=int, nargs="+", default=[250_000, 500_000, 1_000_000])
    parser.add_argument(
        "--only", action="append", choices=["path", "coarsest", "cycle", "cycles", "size"]
    )
    parser.add_argument("--most-cycles", type=int, default=20)
    args = parser.parse_args(argv)
    chosen = args.only or ["path", "coarsest", "cycle", "cycles"]
    if chosen == ["size"]:
        print("## one level against multilevel, by size\n", flush=True)
        size_table(args.sizes, args.counts)
        return 0
    net = gallery.road_like(args.nodes, rng=0)
    print(f"# probe_levels: road_like({args.nodes}, rng=0), {net!r}\n", flush=True)
    if "path" in chosen:
        print("## one level against multilevel\n", flush=True)
        path_table(net, args.counts)
    if "coarsest" in chosen:
        print(f"\n## coarsest level, {args.zones} zones\n", flush=True)
        coarsest_table(net, args.zones, [3, 5, 10, 20, 40, 100])
    if "cycle" in chosen:
        print(f"\n## V-cycle depth, {args.zones} zones\n", flush=True)
        cycle_table(net, args.zones, [1, 3])
    if "cycles" in chosen:
        print(f"\n## cut after each V-cycle, {args.zones} zones\n", flush=True)
        cycles_table(net, args.zones, args.most_cycles)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
