"""Progress of long stages on standard error, through tqdm.

The library is silent unless a caller asks for progress (``progress=True`` on
the functions that take it); the command line asks for it when standard error
is a terminal and ``--quiet`` is not given, so logs of unattended runs and
redirected output never fill with bar redraws.

Within a stage, long loops (the restarts and iterations of an eigen-solver,
the levels and passes of refinement) say where they are with
:func:`report_activity`; the bar on screen shows it after the stage's name
(``solving 3/6 ... Lanczos restart 12``). With no bar open the call costs one
list test, so the loops call it unconditionally.

The first run after installing compiles specgraph's numba kernels (about
30 s); :func:`compile_notice` says so on standard error as the first
compilation starts (numba's ``numba:compile`` event, which a kernel loaded
from numba's on-disk cache does not raise), so a warm cache says nothing.
"""

from __future__ import annotations

import sys
import time
from collections.abc import Callable, Iterable, Iterator
from contextlib import contextmanager
from typing import Any, TypeVar

from tqdm import tqdm

__all__ = [
    "ACTIVITY_REDRAW_SECONDS",
    "COMPILE_NOTICE",
    "MIN_REDRAW_SECONDS",
    "compile_notice",
    "count_progress",
    "progress_bar",
    "report_activity",
    "stage_progress",
    "wants_progress",
]

T = TypeVar("T")

#: Shortest time between two redraws of a bar, in seconds (tqdm's ``mininterval``).
MIN_REDRAW_SECONDS = 0.5
#: Shortest time between two redraws for activity within a stage, in seconds:
#: LOBPCG runs hundreds of iterations a second on small blocks, and a terminal
#: redraw costs about a millisecond; ten a second reads as live (common practice).
ACTIVITY_REDRAW_SECONDS = 0.1
#: Said on standard error when the first numba kernel compiles.
COMPILE_NOTICE = "specgraph: preparing compiled kernels (first run only)…"

#: Listeners of :func:`report_activity`, innermost (last opened bar) last.
_LISTENERS: list[Callable[[str, int], None]] = []


def report_activity(what: str, number: int) -> None:
    """Say which step of a long loop is running (``what`` and its ``number``).

    Shown after the name of the stage on the innermost open progress bar
    (:func:`stage_progress`, :func:`count_progress`); a no-op when none is
    open. ``what`` is a fixed text (``"Lanczos restart"``) so callers build
    no string per step.

    Examples
    --------
    >>> report_activity("refinement pass", 2)  # no bar open: nothing happens
    """
    if _LISTENERS:
        _LISTENERS[-1](what, number)


@contextmanager
def _listening(bar: Any) -> Iterator[None]:
    """Route :func:`report_activity` to ``bar``'s postfix while the block runs."""
    last = [0.0]

    def listen(what: str, number: int) -> None:
        now = time.monotonic()
        if now - last[0] >= ACTIVITY_REDRAW_SECONDS:
            last[0] = now
            bar.set_postfix_str(f"{what} {number}", refresh=True)

    _LISTENERS.append(listen)
    try:
        yield
    finally:
        _LISTENERS.remove(listen)


@contextmanager
def compile_notice(*, enabled: bool, stream: Any = None) -> Iterator[None]:
    """Say :data:`COMPILE_NOTICE` once, on ``stream``, if a numba kernel compiles in the block.

    Listens to numba's ``numba:compile`` event, raised before a function is
    compiled and not when it is loaded from numba's cache, so only a cold
    cache (the first run after installing or upgrading) is announced.

    Examples
    --------
    >>> with compile_notice(enabled=False):
    ...     pass
    """
    if not enabled:
        yield
        return
    from numba.core import event  # numba is a dependency; loaded only for the notice

    said = [False]
    out = sys.stderr if stream is None else stream

    class _Notice(event.Listener):
        def on_start(self, _event: Any) -> None:
            if not said[0]:
                said[0] = True
                tqdm.write(COMPILE_NOTICE, file=out)

        def on_end(self, _event: Any) -> None:
            return

    listener = _Notice()
    event.register("numba:compile", listener)
    try:
        yield
    finally:
        event.unregister("numba:compile", listener)


def wants_progress(*, quiet: bool, stream: Any = None) -> bool:
    """Whether a command should show progress: not quiet and writing to a terminal.

    Examples
    --------
    >>> import io
    >>> wants_progress(quiet=False, stream=io.StringIO())
    False
    """
    stream = sys.stderr if stream is None else stream
    isatty = getattr(stream, "isatty", None)
    return (not quiet) and bool(isatty is not None and isatty())


def progress_bar(
    iterable: Iterable[T], *, total: int | None = None, what: str, enabled: bool
) -> Iterator[T]:
    """Iterate over ``iterable``, drawing a bar on standard error when ``enabled``.

    Parameters
    ----------
    iterable : iterable
        What to iterate over.
    total : int, optional
        Number of items, when ``iterable`` has no length.
    what : str
        Label shown before the bar.
    enabled : bool
        False makes this a plain iteration (nothing is drawn or imported lazily).

    Examples
    --------
    >>> list(progress_bar(range(3), what="runs", enabled=False))
    [0, 1, 2]
    """
    if not enabled:
        yield from iterable
        return
    with tqdm(
        iterable,
        total=total,
        desc=what,
        file=sys.stderr,
        leave=False,
        mininterval=MIN_REDRAW_SECONDS,
        dynamic_ncols=True,
    ) as bar:
        yield from bar


@contextmanager
def stage_progress(stages: list[str], *, enabled: bool) -> Iterator[Any]:
    """A bar over the named stages of a command; call the yielded function per stage.

    ``step("solving")`` marks the previous stage done and shows the new one.

    Examples
    --------
    >>> with stage_progress(["reading", "solving"], enabled=False) as step:
    ...     step("reading")
    ...     step("solving")
    """
    if not enabled:
        yield lambda name: None
        return
    with (
        tqdm(
            total=len(stages),
            desc=stages[0] if stages else "",
            file=sys.stderr,
            leave=False,
            mininterval=0.0,
            dynamic_ncols=True,
            bar_format="{desc}: stage {n_fmt}/{total_fmt} |{bar}| {elapsed}{postfix}",
        ) as bar,
        _listening(bar),
    ):
        started = False

        def step(name: str) -> None:
            nonlocal started
            if started:
                bar.update(1)
            started = True
            bar.set_postfix_str("", refresh=False)
            bar.set_description_str(name)

        yield step
        if started:
            bar.update(1)


@contextmanager
def count_progress(total: int, *, what: str, enabled: bool) -> Iterator[Any]:
    """A bar of ``total`` steps; call the yielded function once per finished step.

    Examples
    --------
    >>> with count_progress(2, what="runs", enabled=False) as advance:
    ...     advance()
    """
    if not enabled:
        yield lambda: None
        return
    with (
        tqdm(
            total=total,
            desc=what,
            file=sys.stderr,
            leave=False,
            mininterval=MIN_REDRAW_SECONDS,
            dynamic_ncols=True,
        ) as bar,
        _listening(bar),
    ):
        yield lambda: bar.update(1)
