"""The first ``specgraph demo`` after ``pip install`` against the second.

What it measures
----------------
Builds a fresh virtual environment outside the checkout (``--venv``, default a
new temporary folder), installs the checkout into it with pip, then for each of
``--trials`` trials:

1. deletes numba's on-disk cache of specgraph's kernels (the ``*.nbi`` and
   ``*.nbc`` files numba writes into ``__pycache__`` next to the installed
   modules; ``NUMBA_CACHE_DIR`` is unset for the children so that is where
   they go), so the trial starts as a fresh install does;
2. times ``specgraph demo --out DIR --quiet`` (the whole process, the console
   script as a user runs it) twice: the first run, then the second. The first
   run leaves numba's compilation to a detached background process
   (``specgraph._warm``, see ``specgraph/_jit.py``); before the second run the
   benchmark waits until that process is done (and reports how long after the
   first run that was), so the second run is a warm one.

It prints the median first and second times, their ratio (the goal of the
national-size issue: at most 1.5), every trial's times, and, from one more
cold run with the background compile turned off
(``SPECGRAPH_BACKGROUND_COMPILE=0``, so the kernels compile in the process as
numba does by default) under numba's event API (``numba.core.event``, event
``numba:compile``), which specgraph kernels a cold run compiles with how
many seconds each (inclusive of the kernels they call): what the background
process compiles. The machine is shared: report medians.

How to run
----------
``python benchmarks/bench_first_run.py`` (about 1 minute plus the install),
``--trials 5``, ``--venv /tmp/fr-venv`` to keep the environment,
``--no-install`` to reuse one already installed.
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent

#: Run in the fresh environment: the demo through the CLI's ``main`` while
#: numba's ``numba:compile`` event times each compilation of a specgraph kernel.
_TRACE = r"""
import sys, time
from numba.core import event

found = []

class Timer(event.Listener):
    def __init__(self):
        self.started = {}

    def on_start(self, ev):
        self.started[id(ev.data["dispatcher"]), str(ev.data["args"])] = time.perf_counter()

    def on_end(self, ev):
        d = ev.data["dispatcher"]
        t0 = self.started.pop((id(d), str(ev.data["args"])), time.perf_counter())
        name = d.py_func.__module__ + "." + d.py_func.__qualname__
        if name.startswith("specgraph."):
            found.append((time.perf_counter() - t0, name, len(ev.data["args"])))

event.register("numba:compile", Timer())
from specgraph.cli import main

main(["demo", "--out", sys.argv[1], "--quiet"])
for seconds, name, n_args in sorted(found, reverse=True):
    print(f"{seconds:.2f}\t{name}\t{n_args}")
"""


def _site_packages(python: Path) -> Path:
    out = subprocess.run(
        [str(python), "-c", "import sysconfig; print(sysconfig.get_paths()['purelib'])"],
        check=True,
        capture_output=True,
        text=True,
    )
    return Path(out.stdout.strip())


def _clear_numba_cache(site: Path) -> int:
    """Delete numba's cache files of the installed specgraph; return how many."""
    files = [p for p in (site / "specgraph").rglob("*") if p.suffix in (".nbi", ".nbc")]
    for p in files:
        p.unlink()
    return len(files)


def _child_env() -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "NUMBA_CACHE_DIR")}
    env.pop("VIRTUAL_ENV", None)
    return env


#: Run in the fresh environment: wait for the background compile of specgraph's kernels.
_WAIT = "from specgraph._warm import wait_for_background; wait_for_background(900)"


def _wait_background(python: Path, cwd: Path) -> float:
    t0 = time.perf_counter()
    subprocess.run([str(python), "-c", _WAIT], check=True, env=_child_env(), cwd=cwd)
    return time.perf_counter() - t0


def _time_demo(venv: Path, out: Path) -> float:
    t0 = time.perf_counter()
    subprocess.run(
        [str(venv / "bin" / "specgraph"), "demo", "--out", str(out), "--quiet"],
        check=True,
        capture_output=True,
        env=_child_env(),
        cwd=out.parent,
    )
    return time.perf_counter() - t0


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--trials", type=int, default=3)
    parser.add_argument("--venv", type=Path, default=None)
    parser.add_argument("--no-install", action="store_true")
    args = parser.parse_args(argv)

    work = Path(tempfile.mkdtemp(prefix="specgraph-first-run-"))
    venv = args.venv or work / "venv"
    if not args.no_install:
        subprocess.run([sys.executable, "-m", "venv", "--clear", str(venv)], check=True)
        subprocess.run(
            [str(venv / "bin" / "pip"), "install", "-q", str(ROOT)],
            check=True,
            env=_child_env(),
            cwd=work,
        )
    python = venv / "bin" / "python"
    site = _site_packages(python)

    firsts, seconds, waits = [], [], []
    for trial in range(args.trials):
        _clear_numba_cache(site)
        firsts.append(_time_demo(venv, work / f"first-{trial}"))
        waits.append(_wait_background(python, work))
        seconds.append(_time_demo(venv, work / f"second-{trial}"))
    cached = len([p for p in (site / "specgraph").rglob("*.nbi")])

    _clear_numba_cache(site)
    trace = subprocess.run(
        [str(python), "-c", _TRACE, str(work / "trace")],
        check=True,
        capture_output=True,
        text=True,
        env={**_child_env(), "SPECGRAPH_BACKGROUND_COMPILE": "0"},
        cwd=work,
    ).stdout.strip()

    first, second = statistics.median(firsts), statistics.median(seconds)
    print(f"`python benchmarks/bench_first_run.py --trials {args.trials}` (venv {venv})\n")
    print("| run | median s | trials s |")
    print("|---|---|---|")
    print(f"| first after install | {first:.2f} | {', '.join(f'{t:.2f}' for t in firsts)} |")
    print(f"| second | {second:.2f} | {', '.join(f'{t:.2f}' for t in seconds)} |")
    print(f"\nratio first / second: {first / second:.2f} (goal: at most 1.5)")
    print(
        "background compile still running after the first run: "
        f"{statistics.median(waits):.2f} s median ({', '.join(f'{t:.2f}' for t in waits)})"
    )
    print(f"numba cache files after a trial: {cached}")
    lines = trace.splitlines()
    print(f"specgraph kernels compiled by a cold run compiling in-process: {len(lines)}")
    for line in lines:
        s, name, n_args = line.split("\t")
        print(f"  {float(s):6.2f} s  {name} ({n_args} arguments)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
