"""Thread pools during short numeric steps: one thread for work of moderate size."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager

__all__ = ["SERIAL_ROWS", "one_thread"]

#: Work on at most this many rows runs on one thread: the eigen-solvers' BLAS
#: calls and scikit-learn's k-means (OpenMP and BLAS). Both call their pools on
#: one vector, a thin block or one Lloyd pass at a time: too little work per
#: call to share between threads, and on a busy machine each call waits for a
#: second core. Measured here under load (docs/methods.md, "Solver cost"): one
#: Gram-Schmidt pass against 60 columns took 0.5 ms on one thread against 21 ms
#: on two at 10,000 rows, 4.9 against 24 ms at 100,000 and 97 against 84 ms at
#: 1,000,000; a dense solve of 1,000 nodes (9 pairs) 0.2 to 0.3 s against 1.1
#: to 3.5 s, and the multilevel solve of the same network 0.04 to 0.09 s
#: against 0.16 to 0.24 s. k-means (load average about 8): ten restarts on
#: 6,470 x 12 rows 0.22 s on one thread against 4.7 s on two, three restarts on
#: 50,000 x 12 rows 1.9 against 10.6 s, on 200,000 x 12 rows 6.9 against 9.9 s.
SERIAL_ROWS = 200_000


@contextmanager
def one_thread(rows: int, *, user_api: str | None = "blas") -> Iterator[None]:
    """One thread in the ``user_api`` pools inside the block when ``rows <= SERIAL_ROWS``.

    Through ``threadpoolctl`` (a dependency of scikit-learn); without it the
    thread count is left alone. ``user_api=None`` limits every pool (BLAS and
    OpenMP), ``'blas'`` the BLAS pools only. The limit holds for the whole
    process while the block runs, and the previous counts come back afterwards.
    """
    if rows > SERIAL_ROWS:
        yield
        return
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:  # pragma: no cover - installed with scikit-learn
        yield
        return
    with threadpool_limits(limits=1, user_api=user_api):
        yield
