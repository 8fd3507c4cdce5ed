"""Compiled kernels for blocks of vectors (numba, parallel over rows).

The multilevel solver spends its time in products of a sparse matrix with a
block of vectors held row by row (C order, shape ``(n, b)``). scipy's CSR
product handles a block one column at a time in a single thread; these
kernels walk each matrix row once for all ``b`` columns, spread rows over the
cores, and fuse the vector updates of a smoothing step into the same pass, so
a block of a dozen vectors costs about as much as one scipy product on a
well-ordered matrix.

Every kernel writes each output row from one thread with a fixed summation
order, so results are bitwise reproducible whatever the thread count.
Tests compare every kernel with its scipy/numpy equivalent.
"""

from __future__ import annotations

import functools
import types
from collections.abc import Callable
from typing import Any

import numba
import numpy as np
from numba import njit, prange

__all__ = [
    "PARALLEL_MIN_ROWS",
    "add_combine",
    "chebyshev_step",
    "column_dots",
    "combine",
    "combine_add",
    "csr_matmat",
    "csr_projections",
    "fcg_update",
    "jacobi_sweep",
    "prolong_add",
    "residual_block",
    "residual_projections",
    "restrict_sum",
    "scale_rows",
    "subtract_scaled",
    "threads_for",
]


#: Blocks with fewer rows than this run serially. Below it, starting a
#: parallel region and waiting at its closing barrier costs more than the
#: pass itself (a 20,000 x 12 block of doubles is about 2 MB, a fraction of a
#: millisecond of work), and on a shared machine a parallel region waits for
#: its slowest thread: a descheduled thread turns microseconds into a time slice.
PARALLEL_MIN_ROWS = 20_000

_MAX_THREADS = numba.config.NUMBA_NUM_THREADS  # type: ignore[attr-defined]

# numba's own thread pool sleeps between parallel regions. The OpenMP pool
# spins instead, and its spinning threads steal the cores that LAPACK and BLAS
# (with threads of their own) need between our kernels: seen here to slow a
# small dense eigen-solve fiftyfold.
numba.config.THREADING_LAYER = "workqueue"  # type: ignore[attr-defined]

# Whether the next kernels run serially: set by :func:`threads_for`.
_SERIAL = [False]


def threads_for(rows: int) -> None:
    """Run the next kernels on every core for blocks of at least :data:`PARALLEL_MIN_ROWS` rows.

    Smaller blocks run the serial compilation of each kernel: a parallel
    kernel costs a few hundred microseconds to launch even on one thread
    (measured on the coarse levels of the multilevel solver, 3,000 rows),
    more than its work there.
    """
    serial = rows < PARALLEL_MIN_ROWS
    _SERIAL[0] = serial
    if not serial:
        numba.set_num_threads(_MAX_THREADS)


class _RowKernel:
    """A kernel compiled twice: parallel over rows, and serial (``prange`` as ``range``).

    Both compilations run the same loops in the same order per output row and
    per fixed chunk, so they give the same results to the bit; calls go to the
    one chosen by the last :func:`threads_for`.
    """

    def __init__(self, func: Callable[..., Any]) -> None:
        self.parallel = njit(parallel=True, cache=True)(func)
        twin = types.FunctionType(func.__code__, func.__globals__, func.__name__)
        twin.__qualname__ = f"{func.__qualname__}_serial"  # its own cache entry
        self.serial = njit(cache=True)(twin)
        functools.update_wrapper(self, func)

    def __call__(self, *args: Any) -> Any:
        return (self.serial if _SERIAL[0] else self.parallel)(*args)


@njit(inline="always")
def _row_product(indptr, indices, data, x, i, acc):  # pragma: no cover - compiled
    """``acc = (A @ x)[i]``: row ``i`` of a CSR matrix times a row-major block.

    Inlined into each kernel by numba, so the fused kernels below share this
    loop without a function call per row.
    """
    acc[:] = 0.0
    for p in range(indptr[i], indptr[i + 1]):
        j = indices[p]
        a = data[p]
        for c in range(acc.shape[0]):
            acc[c] += a * x[j, c]


@_RowKernel
def csr_matmat(indptr, indices, data, x, out):  # pragma: no cover - compiled
    """``out = A @ x`` for CSR ``A`` and a row-major block ``x``."""
    n, b = out.shape
    for i in prange(n):
        acc = np.empty(b)
        _row_product(indptr, indices, data, x, i, acc)
        for c in range(b):
            out[i, c] = acc[c]


@_RowKernel
def residual_block(indptr, indices, data, rhs, x, out):  # pragma: no cover - compiled
    """``out = rhs - A @ x``."""
    n, b = out.shape
    for i in prange(n):
        acc = np.empty(b)
        _row_product(indptr, indices, data, x, i, acc)
        for c in range(b):
            out[i, c] = rhs[i, c] - acc[c]


@_RowKernel
def chebyshev_step(indptr, indices, data, y, x, alpha, beta, gamma, out):  # pragma: no cover
    """``out = alpha * (A @ y) + beta * y + gamma * x`` (``out`` may be ``x``, not ``y``)."""
    n, b = out.shape
    for i in prange(n):
        acc = np.empty(b)
        _row_product(indptr, indices, data, y, i, acc)
        for c in range(b):
            out[i, c] = alpha * acc[c] + beta * y[i, c] + gamma * x[i, c]


@_RowKernel
def jacobi_sweep(indptr, indices, data, scaled_inv_diag, rhs, x, out):  # pragma: no cover
    """One damped Jacobi sweep: ``out = x + w D^{-1} (rhs - A @ x)``.

    ``scaled_inv_diag`` holds ``w / A_ii`` per row.
    """
    n, b = out.shape
    for i in prange(n):
        acc = np.empty(b)
        _row_product(indptr, indices, data, x, i, acc)
        s = scaled_inv_diag[i]
        for c in range(b):
            out[i, c] = x[i, c] + s * (rhs[i, c] - acc[c])


@_RowKernel
def restrict_sum(members_ptr, members, weights, x, out):  # pragma: no cover - compiled
    """``out[g] = sum over fine rows i of aggregate g of weights[i] * x[i]`` (``P^T x``)."""
    m, b = out.shape
    for g in prange(m):
        acc = np.zeros(b)
        for p in range(members_ptr[g], members_ptr[g + 1]):
            i = members[p]
            w = weights[i]
            for c in range(b):
                acc[c] += w * x[i, c]
        for c in range(b):
            out[g, c] = acc[c]


@_RowKernel
def prolong_add(aggregate, weights, coarse, x):  # pragma: no cover - compiled
    """``x += P @ coarse`` where row ``i`` of ``P`` is ``weights[i]`` at ``aggregate[i]``."""
    n, b = x.shape
    for i in prange(n):
        g = aggregate[i]
        w = weights[i]
        for c in range(b):
            x[i, c] += w * coarse[g, c]


@njit(inline="always")
def _add_row_product(block, coefficients, i, acc):  # pragma: no cover - compiled
    """``acc += block[i] @ coefficients``, summed in column order of ``block``."""
    for a in range(block.shape[1]):
        v = block[i, a]
        for c in range(acc.shape[0]):
            acc[c] += v * coefficients[a, c]


@_RowKernel
def combine(x, kx, w, kw, p, kp, out):  # pragma: no cover - compiled
    """``out = x @ kx + w @ kw + p @ kp`` in one pass over the rows (any block may be empty)."""
    n, b = out.shape
    for i in prange(n):
        acc = np.zeros(b)
        _add_row_product(x, kx, i, acc)
        _add_row_product(w, kw, i, acc)
        _add_row_product(p, kp, i, acc)
        for c in range(b):
            out[i, c] = acc[c]


@_RowKernel
def add_combine(base, x, kx, w, kw, out):  # pragma: no cover - compiled
    """``out = base + x @ kx + w @ kw`` in one pass over the rows (``out`` may be ``base``).

    The sums run in the order of :func:`combine` with ``base`` times the
    identity first, so the result is the same to the bit, for fewer operations.
    """
    n, b = out.shape
    for i in prange(n):
        acc = np.empty(b)
        for c in range(b):
            acc[c] = base[i, c]
        _add_row_product(x, kx, i, acc)
        _add_row_product(w, kw, i, acc)
        for c in range(b):
            out[i, c] = acc[c]


@_RowKernel
def combine_add(x, kx, tail, out):  # pragma: no cover - compiled
    """``out = x @ kx + tail`` in one pass over the rows (``out`` may be ``x`` or ``tail``).

    The same to the bit as :func:`combine` with ``tail`` times the identity last.
    """
    n, b = out.shape
    for i in prange(n):
        acc = np.zeros(b)
        _add_row_product(x, kx, i, acc)
        for c in range(b):
            out[i, c] = acc[c] + tail[i, c]


@_RowKernel
def fcg_update(x, r, d, md, alpha):  # pragma: no cover - compiled
    """Flexible CG step per column: ``x += d * alpha``; ``r -= md * alpha``."""
    n, b = x.shape
    for i in prange(n):
        for c in range(b):
            x[i, c] += d[i, c] * alpha[c]
            r[i, c] -= md[i, c] * alpha[c]


@_RowKernel
def subtract_scaled(d, d_prev, beta):  # pragma: no cover - compiled
    """``d -= d_prev * beta`` per column."""
    n, b = d.shape
    for i in prange(n):
        for c in range(b):
            d[i, c] -= d_prev[i, c] * beta[c]


@_RowKernel
def scale_rows(x, scale, out):  # pragma: no cover - compiled
    """``out = x * scale[:, None]`` (also casts to ``out``'s dtype)."""
    n, b = x.shape
    for i in prange(n):
        s = scale[i]
        for c in range(b):
            out[i, c] = x[i, c] * s


@_RowKernel
def column_dots(a, b_, chunks):  # pragma: no cover - compiled
    """Per-column inner products ``sum_i a[i, c] * b_[i, c]``, summed in fixed chunks.

    Partial sums over ``chunks`` fixed row ranges are added in order, so the
    result does not depend on how rows are spread over threads.
    """
    n, b = a.shape
    partial = np.zeros((chunks, b))
    step = (n + chunks - 1) // chunks
    for k in prange(chunks):
        for i in range(k * step, min(n, (k + 1) * step)):
            for c in range(b):
                partial[k, c] += a[i, c] * b_[i, c]
    out = np.zeros(b)
    for k in range(chunks):
        for c in range(b):
            out[c] += partial[k, c]
    return out


@njit(inline="always")
def _accumulate_outer(basis, i, acc, into):  # pragma: no cover - compiled
    """``into += outer(basis[i], acc)``: one row's share of ``basis^T Y``."""
    for a in range(basis.shape[1]):
        s = basis[i, a]
        for c in range(acc.shape[0]):
            into[a, c] += s * acc[c]


@njit(cache=True)
def _sum_chunks(partial):  # pragma: no cover - compiled
    """Sum of ``partial[k]`` over ``k`` in order (a fixed summation order)."""
    out = np.zeros(partial.shape[1:])
    for k in range(partial.shape[0]):
        out += partial[k]
    return out


@_RowKernel
def csr_projections(indptr, indices, data, v, x, w, p, chunks):  # pragma: no cover
    """``x^T (A v)``, ``w^T (A v)`` and ``p^T (A v)`` without storing ``A v``.

    Each row of ``A v`` is formed, projected on the matching rows of the
    three bases and dropped, so a Rayleigh-Ritz step needs no block for the
    product. Rows are summed in ``chunks`` fixed ranges, added in order.
    """
    n, b = v.shape
    px = np.zeros((chunks, x.shape[1], b))
    pw = np.zeros((chunks, w.shape[1], b))
    pp = np.zeros((chunks, p.shape[1], b))
    step = (n + chunks - 1) // chunks
    for k in prange(chunks):
        acc = np.empty(b)
        lx = np.zeros((x.shape[1], b))
        lw = np.zeros((w.shape[1], b))
        lp = np.zeros((p.shape[1], b))
        for i in range(k * step, min(n, (k + 1) * step)):
            _row_product(indptr, indices, data, v, i, acc)
            _accumulate_outer(x, i, acc, lx)
            _accumulate_outer(w, i, acc, lw)
            _accumulate_outer(p, i, acc, lp)
        px[k] = lx
        pw[k] = lw
        pp[k] = lp
    return _sum_chunks(px), _sum_chunks(pw), _sum_chunks(pp)


@_RowKernel
def residual_projections(indptr, indices, data, x, values, p, out, chunks):  # pragma: no cover
    """``out = A x - x diag(values)``; return ``x^T A x``, ``p^T A x``, squared norms of ``out``.

    One pass over the rows: ``A x`` is never stored. Summed in fixed chunks
    as :func:`csr_projections`.
    """
    n, b = x.shape
    px = np.zeros((chunks, b, b))
    pp = np.zeros((chunks, p.shape[1], b))
    pn = np.zeros((chunks, 1, b))
    step = (n + chunks - 1) // chunks
    for k in prange(chunks):
        acc = np.empty(b)
        lx = np.zeros((b, b))
        lp = np.zeros((p.shape[1], b))
        ln = np.zeros((1, b))
        for i in range(k * step, min(n, (k + 1) * step)):
            _row_product(indptr, indices, data, x, i, acc)
            _accumulate_outer(x, i, acc, lx)
            _accumulate_outer(p, i, acc, lp)
            for c in range(b):
                r = acc[c] - x[i, c] * values[c]
                out[i, c] = r
                ln[0, c] += r * r
        px[k] = lx
        pp[k] = lp
        pn[k] = ln
    return _sum_chunks(px), _sum_chunks(pp), _sum_chunks(pn)[0]
