"""BLAS threads during a solve: one thread for components of moderate size."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager

__all__ = ["SERIAL_BLAS_ROWS", "blas_threads"]

#: Components of at most this many rows are solved with one BLAS thread. The
#: solvers call BLAS on one vector or a thin block at a time (Gram-Schmidt
#: passes, small projected eigenproblems, Rayleigh-Ritz steps): too little work
#: per call to share between threads, and on a busy machine each call waits for
#: a second core. Measured here under load (docs/methods.md, "Solver cost"):
#: one Gram-Schmidt pass against 60 columns took 0.5 ms on one thread against
#: 21 ms on two at 10,000 rows, 4.9 against 24 ms at 100,000 and 97 against
#: 84 ms at 1,000,000; a dense solve of 1,000 nodes (9 pairs) 0.2 to 0.3 s
#: against 1.1 to 3.5 s, and the multilevel solve of the same network 0.04 to
#: 0.09 s against 0.16 to 0.24 s.
SERIAL_BLAS_ROWS = 200_000


@contextmanager
def blas_threads(rows: int) -> Iterator[None]:
    """One BLAS thread inside the block when ``rows <= SERIAL_BLAS_ROWS``.

    Through ``threadpoolctl`` (a dependency of scikit-learn); without it the
    thread count is left alone. The limit holds for the whole process while
    the block runs, and the previous counts come back afterwards.
    """
    if rows > SERIAL_BLAS_ROWS:
        yield
        return
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:  # pragma: no cover - installed with scikit-learn
        yield
        return
    with threadpool_limits(limits=1, user_api="blas"):
        yield
