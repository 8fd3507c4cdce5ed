"""Progress of long stages on standard error, through tqdm.

The library is silent unless a caller asks for progress (``progress=True`` on
the functions that take it); the command line asks for it when standard error
is a terminal and ``--quiet`` is not given, so logs of unattended runs and
redirected output never fill with bar redraws.
"""

from __future__ import annotations

import sys
from collections.abc import Iterable, Iterator
from contextlib import contextmanager
from typing import Any, TypeVar

from tqdm import tqdm

__all__ = [
    "MIN_REDRAW_SECONDS",
    "count_progress",
    "progress_bar",
    "stage_progress",
    "wants_progress",
]

T = TypeVar("T")

#: Shortest time between two redraws of a bar, in seconds (tqdm's ``mininterval``).
MIN_REDRAW_SECONDS = 0.5


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
    with tqdm(
        total=len(stages),
        desc=stages[0] if stages else "",
        file=sys.stderr,
        leave=False,
        mininterval=0.0,
        dynamic_ncols=True,
        bar_format="{desc}: stage {n_fmt}/{total_fmt} |{bar}| {elapsed}",
    ) as bar:
        started = False

        def step(name: str) -> None:
            nonlocal started
            if started:
                bar.update(1)
            started = True
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
    with tqdm(
        total=total,
        desc=what,
        file=sys.stderr,
        leave=False,
        mininterval=MIN_REDRAW_SECONDS,
        dynamic_ncols=True,
    ) as bar:
        yield lambda: bar.update(1)
