"""Benchmark of the maps and zone areas at up to a million nodes: time and peak memory.

What it measures
----------------
On the road-like family (:func:`specgraph.gallery.road_like`) at ``--sizes``
(default 200,000 and 1,000,000 nodes) with ``--zones`` zones (default 1,000):

* ``map``: :func:`specgraph.report.zone_map_figure` (colouring, drawing, every
  zone numbered) and its bytes as PNG and as SVG
  (:func:`specgraph.report.figure_bytes`), with the file sizes;
* ``areas``: :func:`specgraph.export.zones_geojson` (Voronoi cells, unioned
  per zone, clipped) and the compact JSON text of it, with its size.

Each stage runs in a fresh process (``multiprocessing`` with ``spawn``) that
first builds the network and the zoning; then the resident high-water mark
is reset (``/proc/self/clear_refs``, Linux) and the stage runs. Reported:
the memory held before the stage (``VmRSS``: network and zoning), the peak
during the stage (``VmHWM``) and their difference, what the stage itself
added.

The zonings are not from :func:`specgraph.find_zones` (its cost is measured
in bench_many_zones.py): they are scikit-learn ``MiniBatchKMeans`` on the
node coordinates, compact blobs of the plane, turned into a
:class:`specgraph.zones.Zoning` with the same tables ``find_zones`` gives.

Run: ``PYTHONPATH=. python benchmarks/bench_maps.py [--sizes 1000000] [--zones 1000]``.
Results are printed as a Markdown table (docs/report.md quotes them).
"""

from __future__ import annotations

import argparse
import json
import multiprocessing
import resource
import time
from typing import Any


def _zoning(n: int, k: int, seed: int) -> Any:
    import numpy as np
    from sklearn.cluster import MiniBatchKMeans

    from specgraph import gallery
    from specgraph.diagnostics import boundary_links, overall_scores, zone_table
    from specgraph.zones import Zoning

    network = gallery.road_like(n, rng=seed)
    found = MiniBatchKMeans(n_clusters=k, random_state=seed, n_init=3).fit_predict(
        network.coordinates
    )
    # Zones numbered by descending size, as find_zones numbers them.
    sizes = np.bincount(found, minlength=k)
    rank = np.empty(k, dtype=np.int64)
    rank[np.argsort(-sizes, kind="stable")] = np.arange(k)
    labels = rank[found]
    table = zone_table(network, labels)
    return Zoning(
        network=network,
        labels=labels,
        zones=table,
        boundary=boundary_links(network, labels),
        solves=(),
        scores=overall_scores(table),
        parameters={"zones": k, "method": "MiniBatchKMeans on coordinates (benchmark)"},
    )


def _status_mib(field: str) -> float:
    """A memory line of /proc/self/status (Linux), in MiB."""
    with open("/proc/self/status", encoding="ascii") as status:
        for line in status:
            if line.startswith(field + ":"):
                return int(line.split()[1]) / 1024.0
    return float("nan")


def _reset_peak() -> None:
    """Reset the resident high-water mark (VmHWM) to the current size (Linux >= 4.0)."""
    with open("/proc/self/clear_refs", "w", encoding="ascii") as refs:
        refs.write("5")


def _stage(stage: str, n: int, k: int, seed: int, queue: Any) -> None:
    zoning = _zoning(n, k, seed)
    whole = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    _reset_peak()
    before = _status_mib("VmRSS")
    start = time.perf_counter()
    out: dict[str, Any] = {"stage": stage, "nodes": n, "zones": k}
    if stage == "map":
        from specgraph.report import figure_bytes, map_detail, zone_map_figure

        figure = zone_map_figure(zoning)
        out["detail"] = map_detail(n)
        out["png_bytes"] = len(figure_bytes(figure))
        out["svg_bytes"] = len(figure_bytes(figure, format="svg"))
    else:
        from specgraph.export import zones_geojson

        text = json.dumps(zones_geojson(zoning), separators=(",", ":"), allow_nan=False)
        out["geojson_bytes"] = len(text)
    out["seconds"] = time.perf_counter() - start
    out["setup_peak_mib"] = whole
    out["held_mib"] = before
    out["peak_mib"] = _status_mib("VmHWM")
    out["added_mib"] = out["peak_mib"] - before
    queue.put(out)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[200_000, 1_000_000])
    parser.add_argument("--zones", type=int, default=1_000)
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--stages", nargs="+", choices=("map", "areas"), default=["map", "areas"])
    args = parser.parse_args()
    context = multiprocessing.get_context("spawn")
    print("| nodes | zones | stage | seconds | held MiB | stage peak MiB | added MiB | output |")
    print("|---:|---:|---|---:|---:|---:|---:|---|")
    for n in args.sizes:
        for stage in args.stages:
            queue = context.Queue()
            worker = context.Process(target=_stage, args=(stage, n, args.zones, args.seed, queue))
            worker.start()
            row = queue.get()
            worker.join()
            output = (
                f"{row['detail']}; PNG {row['png_bytes'] / 1e6:.2f} MB, "
                f"SVG {row['svg_bytes'] / 1e6:.2f} MB"
                if stage == "map"
                else f"zone_summary.geojson {row['geojson_bytes'] / 1e6:.2f} MB"
            )
            print(
                f"| {n:,} | {args.zones:,} | {stage} | {row['seconds']:.1f} | "
                f"{row['held_mib']:.0f} | {row['peak_mib']:.0f} | {row['added_mib']:.0f} | "
                f"{output} |",
                flush=True,
            )


if __name__ == "__main__":
    main()
