"""Background compile of specgraph's kernels into numba's cache (``python -m specgraph._warm``).

Started detached by :func:`specgraph._jit.start_background_compile` when a
process ran entry kernels as plain Python because numba's cache did not hold
them. Reads the request file (a pickled list of ``(module, qualname,
signature)``), compiles each signature with the dispatcher's ``compile``
(which loads it from the cache if another process got there first, and saves
what it compiles there), then deletes the request file. It runs at low
priority (``nice`` 10) and one at a time per installed package (a lock file
next to the requests, ``fcntl.flock`` where available): numba writes its
cache files under a temporary name and renames them, so even without the
lock concurrent writers would not corrupt the cache.
"""

from __future__ import annotations

import importlib
import os
import pickle
import sys
import time
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from ._jit import Kernel, spool_dir

__all__ = ["NICENESS", "compile_requests", "main", "wait_for_background"]

#: Scheduling priority of the background compile (``os.nice``; higher is
#: lower priority): the user's next run on a shared machine goes first.
NICENESS = 10


@contextmanager
def _one_at_a_time(spool: Path) -> Iterator[None]:
    try:
        import fcntl
    except ImportError:  # pragma: no cover - not on POSIX: no lock (writes stay atomic)
        yield
        return
    with open(spool / "compile.lock", "a+b") as lock:
        fcntl.flock(lock, fcntl.LOCK_EX)
        try:
            yield
        finally:
            fcntl.flock(lock, fcntl.LOCK_UN)


def compile_requests(pending: list[tuple[str, str, tuple[Any, ...]]]) -> int:
    """Compile each ``(module, qualname, signature)`` into numba's cache; return how many."""
    done = 0
    for module, qualname, signature in pending:
        kernel = importlib.import_module(module)
        for part in qualname.split("."):
            kernel = getattr(kernel, part)
        dispatcher = kernel.dispatcher if isinstance(kernel, Kernel) else kernel
        dispatcher.compile(signature)
        done += 1
    return done


def main(argv: list[str] | None = None, *, nice: bool = True) -> int:
    """Compile the requests of one request file, then delete it (``nice``: lower priority first)."""
    args = sys.argv[1:] if argv is None else argv
    request = Path(args[0])
    try:
        if nice and hasattr(os, "nice"):
            os.nice(NICENESS)
        pending = pickle.loads(request.read_bytes())
        with _one_at_a_time(request.parent):
            compile_requests(pending)
    finally:
        request.unlink(missing_ok=True)
    return 0


def wait_for_background(timeout: float = 600.0) -> bool:
    """Wait until no background compile of this installation is pending; False on timeout."""
    spool = spool_dir()
    end = time.monotonic() + timeout
    while any(spool.glob("*.req")) if spool.is_dir() else False:
        if time.monotonic() > end:
            return False
        time.sleep(0.2)
    return True


if __name__ == "__main__":
    raise SystemExit(main())
