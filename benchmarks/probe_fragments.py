"""Stray fragments on an export-shaped network: zones for the main network, before and after.

Builds the export of ``tests/export_shaped.py`` (a thinned Delaunay main network with
pipe ids, stray pieces of 2-5 nodes, isolated nodes listed only in the node table; numpy,
scipy and networkx only) at the size the issue measured (101,890 main nodes, 41 pieces,
456 isolated nodes by default), then runs whole ``specgraph zones`` processes for each
``--zones`` count, once with the fragments set aside (the default) and once with
``--fragments zone`` (the behaviour before: every component zoned). Prints per run: the
zones on the main network, the fragments group, wall time and peak memory of the process.

Run: ``python benchmarks/probe_fragments.py [--main 101890] [--zones 20 500]``.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))
from export_shaped import write_export


def _run(argv: list[str]) -> tuple[float, float]:
    """Wall seconds and peak resident GiB of one whole process (``os.wait4``'s rusage)."""
    start = time.perf_counter()
    child = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    _, status, usage = os.wait4(child.pid, 0)
    child.returncode = os.waitstatus_to_exitcode(status)
    if child.returncode:
        raise SystemExit(f"{' '.join(argv)} exited {child.returncode}")
    return time.perf_counter() - start, usage.ru_maxrss / 2**20


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--main", type=int, default=101_890)
    parser.add_argument("--pieces", type=int, default=41)
    parser.add_argument("--isolated", type=int, default=456)
    parser.add_argument("--zones", type=int, nargs="+", default=[20, 500])
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        export = write_export(
            folder, n_main=args.main, n_fragments=args.pieces, n_isolated=args.isolated
        )
        read = [str(export.edges), "--nodes", str(export.nodes), "--source", "from"]
        read += ["--target", "to", "--node-col", "node", "--weight", "length", "--distance"]
        print("| zones asked | fragments | main-network zones | fragments group | s | GiB |")
        print("|---|---|---|---|---|---|")
        for k in args.zones:
            for treatment in ("set_aside", "zone"):
                out = folder / f"out-{k}-{treatment}"
                argv = ["specgraph", "zones", *read, "--zones", str(k), "--quiet"]
                argv += ["--fragments", treatment, "--out", str(out)]
                seconds, gib = _run(argv)
                zones = pd.read_csv(out / "zones.csv", dtype={"node": str})
                main_zones = zones.loc[zones["node"].isin(export.main), "zone"].nunique()
                summary = pd.read_csv(out / "zone_summary.csv")
                group = "-"
                if "role" in summary and (summary["role"] == "fragments").any():
                    group = f"{int(summary.loc[summary['role'] == 'fragments', 'nodes'].iloc[0])}"
                    group += " nodes"
                print(f"| {k} | {treatment} | {main_zones} | {group} | {seconds:.1f} | {gib:.2f} |")


if __name__ == "__main__":
    main()
