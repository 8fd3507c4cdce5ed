"""Spectral embedding: nodes as points, from the smallest Laplacian eigenvectors."""

from __future__ import annotations

import numpy as np

__all__ = ["normalized_rows"]

#: Rows shorter than this (relative to the longest row) are left as they are
#: instead of being scaled to unit length: they carry no direction, and
#: scaling round-off would place them at random on the sphere.
ROW_NORM_FLOOR = 1e-12


def normalized_rows(vectors: np.ndarray) -> np.ndarray:
    """Scale each row of an eigenvector block to unit length.

    This is the embedding of Ng, Jordan and Weiss: with the ``k`` smallest
    eigenvectors of the normalized Laplacian as columns, nodes of one
    well-separated group point the same way, whatever their degree [1]_.

    Parameters
    ----------
    vectors : ndarray of shape (n, k)

    Returns
    -------
    ndarray of shape (n, k)

    References
    ----------
    .. [1] A. Y. Ng, M. I. Jordan and Y. Weiss, "On spectral clustering:
       analysis and an algorithm", NIPS 14, 2001.

    Examples
    --------
    >>> normalized_rows(np.array([[3.0, 4.0], [0.0, 2.0]])).tolist()
    [[0.6, 0.8], [0.0, 1.0]]
    """
    norms = np.linalg.norm(vectors, axis=1)
    floor = ROW_NORM_FLOOR * (norms.max() if norms.size else 1.0)
    scale = np.where(norms > floor, norms, 1.0)
    return vectors / scale[:, None]
