"""Spectral evidence: eigengaps and the Cheeger check."""

from __future__ import annotations

import numpy as np

__all__ = ["cheeger_bounds", "eigengaps", "suggest_zone_counts"]


def eigengaps(values: np.ndarray) -> np.ndarray:
    """Gaps :math:`\\lambda_{i+1} - \\lambda_i` between consecutive sorted eigenvalues.

    ``gaps[k-1]`` is the gap after the ``k``-th smallest eigenvalue: a large
    gap there says the network has ``k`` well-separated groups, by the
    higher-order Cheeger inequality :math:`\\lambda_k/2 \\le \\rho(k) \\le
    O(k^2)\\sqrt{\\lambda_k}` (Lee, Oveis Gharan and Trevisan, J. ACM 61(6), 2014,
    :doi:`10.1145/2665063`).

    Examples
    --------
    >>> eigengaps(np.array([0.0, 0.01, 0.02, 0.5])).round(2).tolist()
    [0.01, 0.01, 0.48]
    """
    values = np.sort(np.asarray(values, dtype=np.float64))
    return np.diff(values)


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
    out = []
    for k in range(max(n_components, 1) + 1, values.size):
        lam, nxt = float(values[k - 1]), float(values[k])
        if nxt <= 0:
            continue
        out.append(
            {
                "zones": k,
                "relative_gap": (nxt - lam) / nxt,
                "eigenvalue": lam,
                "next_eigenvalue": nxt,
            }
        )
    out.sort(key=lambda row: (-row["relative_gap"], row["zones"]))
    return out[:top]
