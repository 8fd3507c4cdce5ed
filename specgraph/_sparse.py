"""Sparse-matrix helpers shared by the pipeline's stages."""

from __future__ import annotations

from typing import TypeVar

import numpy as np
import scipy.sparse as sp

__all__ = ["int32_indexed"]

_Compressed = TypeVar("_Compressed", sp.csr_array, sp.csr_matrix)


def int32_indexed(matrix: _Compressed) -> _Compressed:
    """``matrix`` with 32-bit index arrays where its size allows (changed in place).

    scipy keeps 64-bit index arrays for a matrix built from 64-bit
    coordinates, and some compiled routines take 32-bit ones only: pyamg's
    aggregation before pyamg 5.4 (5.4 casts them itself), and scipy 1.15's
    ``minimum_spanning_tree`` (the oldest scipy this package allows refuses
    64-bit ones with "Buffer dtype mismatch", found by ``.ci/oldest``; scipy
    1.17 accepts them). A matrix too large for 32-bit indices is left as it is.

    Examples
    --------
    >>> m = sp.csr_array((np.ones(2), (np.array([0, 1]), np.array([1, 0]))), shape=(2, 2))
    >>> m.indices = m.indices.astype(np.int64)
    >>> int32_indexed(m).indices.dtype
    dtype('int32')
    """
    limit = np.iinfo(np.int32).max
    if matrix.nnz <= limit and max(matrix.shape) <= limit:
        matrix.indices = matrix.indices.astype(np.int32, copy=False)
        matrix.indptr = matrix.indptr.astype(np.int32, copy=False)
    return matrix
