"""Spectral evidence: eigengaps and the Cheeger check.

:func:`eigengaps` and the relative gap are computed by :mod:`specgraph._figures`,
shared with the zone count and the scorecard.
"""

from __future__ import annotations

import numpy as np

from .._figures import eigengaps, relative_gap

__all__ = ["cheeger_bounds", "eigengaps", "suggest_zone_counts"]


def cheeger_bounds(lambda2: float) -> tuple[float, float]:
    """Cheeger interval :math:`[\\lambda_2/2, \\sqrt{2\\lambda_2}]` for the conductance.

    For a connected network, ``lambda2`` the second smallest eigenvalue of the
    normalized Laplacian, the least conductance of any cut lies in this
    interval, and the sweep cut of :math:`D^{-1/2} v_2` meets the upper end
    (F. Chung, *Spectral Graph Theory*, AMS 1997, Thm 2.2).

    Examples
    --------
    >>> cheeger_bounds(0.02)
    (0.01, 0.2)
    """
    lambda2 = max(float(lambda2), 0.0)
    return lambda2 / 2.0, float(np.sqrt(2.0 * lambda2))


def suggest_zone_counts(values: np.ndarray, *, n_components: int = 1, top: int = 3) -> list[dict]:
    """Zone counts ranked by the relative eigengap after them.

    For each candidate count ``k`` (from ``n_components + 1``, since fewer
    zones than components are impossible and ``k = c`` is always a perfect
    split) the relative gap :math:`(\\lambda_{k+1} - \\lambda_k)/\\lambda_{k+1}`
    measures how far the ``k``-th eigenvalue stands below the next. Relative
    rather than absolute gaps, since on large near-planar networks every small
    eigenvalue is tiny. The reading rests on the higher-order Cheeger
    inequality (see :func:`eigengaps`).

    Parameters
    ----------
    values : ndarray
        Smallest eigenvalues of the normalized Laplacian, ascending.
    n_components : int, default=1
        Number of connected components (zero eigenvalues).
    top : int, default=3
        How many candidates to return.

    Returns
    -------
    list of dict
        ``{"zones": k, "relative_gap": g, "eigenvalue": lambda_k,
        "next_eigenvalue": lambda_k+1}``, best first.

    Examples
    --------
    >>> vals = np.array([0.0, 0.010, 0.011, 0.012, 0.300, 0.320])
    >>> suggest_zone_counts(vals, top=1)[0]["zones"]
    4
    """
    values = np.sort(np.asarray(values, dtype=np.float64))
    ks = np.arange(max(n_components, 1) + 1, values.size, dtype=np.int64)
    lam, nxt = values[ks - 1], values[ks]
    gaps = relative_gap(lam, nxt)
    out = [
        {
            "zones": int(k),
            "relative_gap": float(gap),
            "eigenvalue": float(low),
            "next_eigenvalue": float(high),
        }
        for k, low, high, gap in zip(ks, lam, nxt, gaps, strict=True)
        if high > 0
    ]
    out.sort(key=lambda row: (-row["relative_gap"], row["zones"]))
    return out[:top]
