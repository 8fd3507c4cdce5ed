"""The one result type of every eigen-solve."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["EigenResult"]


@dataclass(frozen=True, eq=False)
class EigenResult:
    """Smallest eigenpairs of a graph operator, with the evidence of their accuracy.

    Attributes
    ----------
    values : ndarray of shape (k,)
        Eigenvalues in ascending order.
    vectors : ndarray of shape (n, k)
        Orthonormal eigenvectors, column ``i`` for ``values[i]``; each column's
        sign is fixed so that its entry of largest magnitude is positive;
        entries within a few ulps of the norm (or within the residual) of the
        largest count as tied, and the first in node order decides.
    residuals : ndarray of shape (k,)
        Scaled residual norms :math:`\\|M v_i - \\lambda_i v_i\\| / \\|M\\|_{bound}`
        (the bound is the operator's Gershgorin bound; scaling by
        :math:`|\\lambda_i|` would mislead, since the first eigenvalue is 0).
    tol : float
        The tolerance every scaled residual had to meet.
    method : str
        The method that produced the pairs.
    matvecs : int
        Products of the operator with a vector (a block of ``b`` vectors
        counts ``b``); factorizations count none but are named in ``method``.
    iterations : int
        Outer iterations (restarts, sweeps or levels) summed over components.
    converged : bool
        True when every residual is at most ``tol``.
    reason : str
        Why each component was solved by its method: for ``method='auto'``
        the predicted seconds of each method and the guards that excluded
        any (see :func:`~specgraph.eigen.choose_method`), largest component
        first.
    norm_bound : float
        The operator's norm bound that scaled the residuals. By the
        residual bound for symmetric matrices (Bauer-Fike), each ``values[i]`` lies
        within ``residuals[i] * norm_bound`` of a true eigenvalue [1]_, so two
        values closer than the sum of their bounds may be one eigenvalue.

    References
    ----------
    .. [1] B. N. Parlett, "The Symmetric Eigenvalue Problem", SIAM, 1998,
       chapter 4 (error bounds from residuals).
    """

    values: np.ndarray
    vectors: np.ndarray
    residuals: np.ndarray
    tol: float
    method: str
    matvecs: int
    iterations: int
    converged: bool
    reason: str = ""
    norm_bound: float = 1.0

    @property
    def k(self) -> int:
        return int(self.values.size)

    @property
    def max_residual(self) -> float:
        return float(self.residuals.max()) if self.residuals.size else 0.0
