"""Compiled kernels that do not make the first run after installing wait for numba.

specgraph's loops over nodes and links are numba kernels compiled with
``cache=True``: the first process compiles them (about 11 s for the zoning
kernels on the project's 2-core machine), every later one loads them from
numba's on-disk cache in a fraction of a second. :func:`entry` wraps a kernel
that Python code calls (an *entry* kernel; the kernels it calls are compiled
into it) so that, while numba's cache does not hold it yet:

- an input of at most :data:`PLAIN_MAX_ENTRIES` array entries runs the same
  loop as plain Python (the kernel's ``py_func``, with every kernel it calls
  swapped for its own plain twin), so nothing compiles in the user's run;
- the signatures it ran with are handed, when the process exits, to a detached
  background process (:mod:`specgraph._warm`, at low priority, output to the
  null device) that compiles exactly them into numba's cache, so the next
  run loads the compiled kernel;
- a larger input compiles in the user's process, as without this module:
  plain Python would then cost more than the compilation.

Once the cache holds a kernel's signature, the wrapper only checks a flag
and calls numba: warm runs are not slower. The read-only arguments named by
``readonly`` are passed as read-only views (O(1)), so a kernel has one
signature whether its caller's arrays are writeable or not (numba compiles a
specialization per array flag: before this, most zoning kernels compiled
twice).

``SPECGRAPH_BACKGROUND_COMPILE=0`` in the environment turns this off: cold
kernels then compile in the user's process, as numba does by default.

References
----------
numba developer documentation, "Notes on Caching": one index file (``.nbi``)
per function listing its compiled signatures, one object file (``.nbc``) per
signature. numba issue #3470 (maintainers' comment) and
``numba.core.caching.IndexDataCacheFile`` (numba 0.68.1 source): each file is
written to a temporary name and moved into place, so a reader never sees a
half-written file; the index is read, extended and rewritten, so two
processes adding different signatures at once may drop one of them (it is
then compiled again later), which the background compile avoids by running
one at a time.
"""

from __future__ import annotations

import atexit
import hashlib
import os
import pickle
import subprocess
import sys
import tempfile
import threading
import time
import types
import uuid
from collections.abc import Callable, Iterable
from pathlib import Path
from typing import Any

import numpy as np

__all__ = [
    "BACKGROUND_ENV",
    "CACHE_RECHECK_SECONDS",
    "PLAIN_MAX_ENTRIES",
    "Kernel",
    "entry",
    "spool_dir",
]

#: Largest input (entries of the biggest array argument) that runs as plain
#: Python while a kernel is not in numba's cache: 100,000 index entries are a
#: road-like network of 25,000 nodes. Measured on the project's shared 2-core
#: machine (docs/benchmarks.md, "First run after install"): the zoning
#: kernels of ``find_zones(road_like(n), 8)`` spend 1.6 s as plain Python at
#: n = 3,000, 6.1 s at 10,000 and 11.5 s at 25,000, while compiling them (one
#: signature each) takes about 11 s (more under load); above this size,
#: compiling in the user's process costs less than the plain loops.
PLAIN_MAX_ENTRIES = 100_000
#: Seconds after which a cold kernel reads numba's cache index again (reading
#: it costs about 0.1 ms; a zoning run calls its entry kernels a few hundred times).
CACHE_RECHECK_SECONDS = 2.0
#: Environment variable: ``0`` turns off the plain path and the background compile.
BACKGROUND_ENV = "SPECGRAPH_BACKGROUND_COMPILE"

#: The background process: this installation's specgraph (its folder appended
#: to ``sys.path``, after the interpreter's own entries, for a run from a checkout).
_CHILD = (
    "import sys; sys.path.append(sys.argv[2]); "
    "from specgraph._warm import main; raise SystemExit(main(sys.argv[1:2]))"
)

_PENDING: dict[tuple[str, str, tuple[Any, ...]], None] = {}
_LOCK = threading.Lock()
_SPAWN_REGISTERED = False


def _enabled() -> bool:
    return os.environ.get(BACKGROUND_ENV, "1") != "0"


def spool_dir() -> Path:
    """Folder of the background compile's request files and lock, one per installed package."""
    package = str(Path(__file__).resolve().parent)
    import numba

    key = hashlib.sha256(f"{package}|{numba.__version__}|{sys.version}".encode()).hexdigest()[:16]
    user = str(os.getuid()) if hasattr(os, "getuid") else "user"
    return Path(tempfile.gettempdir()) / f"specgraph-warm-{user}" / key


class Kernel:
    """An entry kernel: numba's dispatcher, or its plain twin while numba's cache is cold.

    Calls go to the dispatcher once its cache holds the call's signature (or
    once it compiled in this process); attributes other than calling (``py_func``,
    ``signatures``, ...) are the dispatcher's.
    """

    def __init__(
        self,
        dispatcher: Any,
        readonly: Iterable[int],
        plain: Callable[..., Any] | None = None,
    ) -> None:
        self.dispatcher = dispatcher
        self.readonly = tuple(readonly)
        self._compiled = False
        self._cached: frozenset[tuple[Any, ...]] | None = None
        self._checked = 0.0
        self._plain: Callable[..., Any] | None = plain
        self.__doc__ = dispatcher.__doc__
        self.__name__ = dispatcher.__name__
        self.__qualname__ = dispatcher.py_func.__qualname__
        self.__module__ = dispatcher.py_func.__module__

    def __getattr__(self, name: str) -> Any:
        if name.startswith("__") or name == "dispatcher":  # copy and pickle probe dunders
            raise AttributeError(name)
        return getattr(self.dispatcher, name)

    def __call__(self, *args: Any) -> Any:
        if self.readonly:
            args = _readonly(args, self.readonly)
        if self._compiled:
            return self.dispatcher(*args)
        return self._cold_call(args)

    def signature_of(self, args: tuple[Any, ...]) -> tuple[Any, ...]:
        """numba's argument types of a call (as its cache index keys them)."""
        return tuple(self.dispatcher.typeof_pyval(a) for a in args)

    def in_cache(self, signature: tuple[Any, ...]) -> bool:
        """Whether numba's on-disk cache holds this signature (for this numba and source).

        Read again after :data:`CACHE_RECHECK_SECONDS`, so a long-lived process
        (a notebook) turns to the compiled kernel once the background compile is done.
        """
        now = time.monotonic()
        if self._cached is None or now - self._checked > CACHE_RECHECK_SECONDS:
            self._cached = _cached_signatures(self.dispatcher)
            self._checked = now
        return signature in self._cached

    def plain(self) -> Callable[..., Any]:
        """The kernel's plain-Python twin (every kernel it calls plain too), or the
        vectorized equivalent given to :func:`entry`."""
        if self._plain is None:
            self._plain = plain_twin(self.dispatcher)
        return self._plain

    def _cold_call(self, args: tuple[Any, ...]) -> Any:
        if not _enabled() or _entries(args) > PLAIN_MAX_ENTRIES:
            self._compiled = True
            return self.dispatcher(*args)
        signature = self.signature_of(args)
        if self.in_cache(signature):
            self._compiled = True
            return self.dispatcher(*args)
        _request(self.__module__, self.__qualname__, signature)
        return self.plain()(*args)


def entry(
    *, readonly: Iterable[int] = (), plain: Callable[..., Any] | None = None
) -> Callable[[Callable[..., Any]], Kernel]:
    """Decorator: compile ``func`` with ``numba.njit(cache=True)`` as an entry :class:`Kernel`.

    ``readonly`` lists the positions of arguments the kernel only reads, passed
    as read-only views so that one compiled signature serves every caller.
    ``plain`` is a numpy function returning the very same arrays (same
    operations in the same order), run instead of the kernel's source while
    the cache is cold.
    """

    def wrap(func: Callable[..., Any]) -> Any:
        from numba import njit

        compiled = njit(cache=True)(func)
        if not hasattr(compiled, "py_func"):
            # NUMBA_DISABLE_JIT=1 (numba's debugging switch): njit gives the
            # function back as it is, with nothing to compile or cache.
            return compiled
        return Kernel(compiled, readonly, plain)

    return wrap


def _readonly(args: tuple[Any, ...], positions: tuple[int, ...]) -> tuple[Any, ...]:
    out = list(args)
    for i in positions:
        a = out[i]
        if isinstance(a, np.ndarray) and a.flags.writeable:
            view = a.view()
            view.flags.writeable = False
            out[i] = view
    return tuple(out)


def _entries(args: tuple[Any, ...]) -> int:
    return max((a.size for a in args if isinstance(a, np.ndarray)), default=0)


def _cached_signatures(dispatcher: Any) -> frozenset[tuple[Any, ...]]:
    """Signatures in numba's cache index of ``dispatcher`` (empty if stale or absent).

    numba has no public call for this; its index (``numba.core.caching``,
    ``IndexDataCacheFile._load_index``) already returns nothing for another numba
    version or a changed source file. If numba's internals change, every
    signature counts as cached: the kernel then compiles as numba does by default.
    """
    try:
        index = dispatcher._cache._cache_file._load_index()
        return frozenset(key[0] for key in index)
    except Exception:  # pragma: no cover - depends on numba's internals
        return _ALL


class _All(frozenset):
    def __contains__(self, item: object) -> bool:
        return True


_ALL = _All()


def plain_twin(dispatcher: Any, memo: dict[int, Any] | None = None) -> Callable[..., Any]:
    """``dispatcher.py_func`` with the kernels it names (through its globals) plain too.

    The twin runs the same source in the interpreter: numba's own
    ``py_func`` would call the compiled kernels it names, compiling them.
    """
    memo = {} if memo is None else memo
    if isinstance(dispatcher, Kernel):
        dispatcher = dispatcher.dispatcher
    if id(dispatcher) in memo:
        return memo[id(dispatcher)]
    from numba.core.dispatcher import Dispatcher

    py = dispatcher.py_func
    scope = dict(py.__globals__)
    twin = types.FunctionType(py.__code__, scope, py.__name__, py.__defaults__, py.__closure__)
    twin.__kwdefaults__ = py.__kwdefaults__
    memo[id(dispatcher)] = twin
    for name, value in py.__globals__.items():
        if isinstance(value, Kernel | Dispatcher):
            scope[name] = plain_twin(value, memo)
    return twin


def _request(module: str, qualname: str, signature: tuple[Any, ...]) -> None:
    """Remember a signature for the background compile started when this process exits."""
    global _SPAWN_REGISTERED
    with _LOCK:
        _PENDING[module, qualname, signature] = None
        if not _SPAWN_REGISTERED:
            atexit.register(start_background_compile)
            _SPAWN_REGISTERED = True


def start_background_compile() -> subprocess.Popen[bytes] | None:
    """Start the background compile (:mod:`specgraph._warm`) of the signatures run plain so far.

    The request goes to a file in :func:`spool_dir` that the background process
    deletes when done. Nothing is started when nothing ran plain; any failure
    to start is silent (the next run then tries again).
    """
    with _LOCK:
        pending = list(_PENDING)
        _PENDING.clear()
    if not pending:
        return None
    try:
        spool = spool_dir()
        spool.mkdir(parents=True, exist_ok=True)
        request = spool / f"{uuid.uuid4().hex}.req"
        tmp = request.with_suffix(".tmp")
        tmp.write_bytes(pickle.dumps(pending))
        tmp.replace(request)
        home = str(Path(__file__).resolve().parent.parent)
        return subprocess.Popen(
            [sys.executable, "-c", _CHILD, str(request), home],
            stdin=subprocess.DEVNULL,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
            start_new_session=True,
            close_fds=True,
        )
    except Exception:  # pragma: no cover - best effort; the next run retries
        return None
