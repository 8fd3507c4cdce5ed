"""Random walks on a network: the stationary distribution of the random surfer.

The walk follows the network's arcs (:attr:`Network.arcs`) when the network is
directed, its undirected links otherwise, each with probability proportional
to the link's affinity. With probability ``1 - damping`` at every step, and
always from a node with no outgoing link (a *dangling* node: a sink of the
flow, the end of a one-way branch), it jumps to a node drawn from the
personalization distribution ``v`` (uniform unless given). This is the random
surfer of Page, Brin, Motwani and Winograd [1]_; its transition matrix

.. math::

    G = \\alpha P + \\bigl(\\alpha\\, \\delta + (1 - \\alpha)\\mathbf{1}\\bigr) v^T

(``alpha`` the damping, ``P`` the row-normalized affinities with zero rows at
dangling nodes, ``delta`` the indicator of dangling nodes) is row-stochastic,
irreducible on the support reachable from ``v`` and aperiodic, so it has one
stationary distribution :math:`\\phi = G^T \\phi`, the node importance.

Rule for dangling nodes, stated once: *their whole step goes to the
personalization distribution* (as in networkx's ``pagerank`` when its
``dangling`` argument is left out).

The power iteration :math:`x \\leftarrow G^T x` is a contraction of factor
``alpha`` in the L1 norm on vectors summing to zero [2]_, so after a step that
changed ``x`` by ``r`` in L1 the error is at most
:math:`\\alpha r / (1 - \\alpha)`; and from any start the change after ``t``
steps is at most :math:`2 \\alpha^t`, which fixes the default iteration cap
(:func:`default_maxiter`). Each step costs one sparse product with the
transpose of the affinities held in CSR, O(nnz) work and O(n) memory, so it
scales to millions of nodes; a Krylov method would save iterations on slowly
mixing chains, but at the default damping the contraction bound already caps
the count near 150.

References
----------
.. [1] L. Page, S. Brin, R. Motwani and T. Winograd, "The PageRank citation
   ranking: bringing order to the web", Stanford InfoLab technical report
   1999-66, 1999.
.. [2] A. N. Langville and C. D. Meyer, "Deeper inside PageRank", Internet
   Mathematics 1(3):335-380, 2004. :doi:`10.1080/15427951.2004.10129091`
"""

from __future__ import annotations

import logging
import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
import scipy.sparse as sp

from ._validation import OPEN_UNIT, Interval, check_int, check_param, parameter_error
from .exceptions import ConvergenceError, InputError
from .network import Network

__all__ = [
    "DEFAULT_DAMPING",
    "DEFAULT_WALK_TOL",
    "MAXITER_SLACK",
    "StationaryResult",
    "check_damping",
    "default_maxiter",
    "stationary_distribution",
    "transition_parts",
]

logger = logging.getLogger(__name__)

#: Default damping (probability of following a link rather than jumping): the
#: value of the original random-surfer paper [1]_ and of networkx (common
#: practice).
DEFAULT_DAMPING = 0.85

#: Default bound on the L1 change of the last power step. By the contraction
#: bound the L1 error of the result is then at most ``damping / (1 - damping)``
#: times this (5.7e-10 at the default damping), far below any use of node
#: importance and far above the round-off of an L1 sum of probabilities
#: (a few ulps).
DEFAULT_WALK_TOL = 1e-10

#: Iterations added to the contraction-bound count :func:`default_maxiter`,
#: to absorb round-off in the last steps.
MAXITER_SLACK = 10


@dataclass(frozen=True, eq=False)
class StationaryResult:
    """The stationary distribution of the random surfer, and how it was reached.

    Attributes
    ----------
    values : ndarray of shape (n,)
        Probability of each node (non-negative, sums to 1), in network row order.
    iterations : int
        Power steps taken.
    residual : float
        L1 change of the last step, :math:`\\lVert x_t - x_{t-1}\\rVert_1`.
    converged : bool
        Whether ``residual <= tol``.
    damping : float
        The damping used.
    dangling : int
        Number of dangling nodes (no outgoing affinity).
    tol : float
        The tolerance on ``residual``.
    error_bound : float
        Bound on the L1 distance of ``values`` to the exact distribution:
        ``damping * residual / (1 - damping)`` (contraction bound [2]_).
    """

    values: np.ndarray
    iterations: int
    residual: float
    converged: bool
    damping: float
    dangling: int
    tol: float
    error_bound: float


#: The walk's stopping bound on the change in 1-norm (a distribution moves by
#: at most 2 in that norm, so 2 or more would stop before the first step).
_WALK_TOL = Interval(float, 0.0, 2.0, closed="neither")


def default_maxiter(damping: float, tol: float) -> int:
    """Iterations after which the power method is sure to meet ``tol``.

    The L1 change after ``t`` steps is at most :math:`2\\alpha^t` (two
    distributions differ by at most 2 in L1, and each step contracts by
    ``alpha``), so :math:`t = \\lceil \\log(\\text{tol}/2)/\\log\\alpha\\rceil`
    steps suffice; :data:`MAXITER_SLACK` more absorb round-off.

    Examples
    --------
    >>> default_maxiter(0.85, 1e-10)
    156
    """
    return math.ceil(math.log(tol / 2.0) / math.log(damping)) + MAXITER_SLACK


def check_damping(damping: Any) -> float:
    """Return ``damping`` as a float in (0, 1), else raise naming ``damping``.

    Teleportation keeps the walk ergodic only below 1; at 0 there is no walk.
    """
    return float(check_param(damping, "damping", [OPEN_UNIT]))


def transition_parts(network: Network) -> tuple[sp.csr_array, np.ndarray, np.ndarray]:
    """The pieces of the walk: ``W^T`` in CSR, ``1/out-degree`` (0 at dangling nodes), dangling.

    ``W`` is :attr:`Network.arcs` for a directed network, else the adjacency;
    ``P = diag(inv) W`` is the walk without teleportation.
    """
    weights = network.arcs if network.arcs is not None else network.adjacency
    out = np.asarray(weights.sum(axis=1)).ravel()
    dangling = out <= 0
    inv = np.zeros_like(out)
    inv[~dangling] = 1.0 / out[~dangling]
    return sp.csr_array(weights.T), inv, dangling


def _personalization(network: Network, personalization: Any) -> np.ndarray:
    """The teleport distribution: uniform, or the given weights normalized to sum 1."""
    n = network.n_nodes
    if personalization is None:
        return np.full(n, 1.0 / n)
    if isinstance(personalization, Mapping):
        v = np.zeros(n)
        for node, weight in personalization.items():
            index = network.index_of.get(str(node))
            if index is None:
                raise InputError(
                    f"personalization names node {str(node)!r}, which is not in the network"
                )
            v[index] = float(weight)
    else:
        v = np.array(personalization, dtype=np.float64).ravel()
        if v.shape != (n,):
            raise parameter_error(
                "personalization", f"one weight per node ({n})", v, shown=f"{v.size} values"
            )
    if not np.all(np.isfinite(v)) or np.any(v < 0) or v.sum() <= 0:
        minimum = float(np.min(v)) if v.size else 0.0
        raise parameter_error(
            "personalization",
            "finite weights >= 0 with a positive sum",
            v,
            shown=f"sum {float(np.sum(v))!r}, minimum {minimum!r}",
        )
    return v / v.sum()


def stationary_distribution(
    network: Network,
    *,
    damping: float = DEFAULT_DAMPING,
    personalization: Any = None,
    tol: float = DEFAULT_WALK_TOL,
    maxiter: int | None = None,
) -> StationaryResult:
    r"""Stationary distribution of the random surfer on ``network`` (node importance).

    Parameters
    ----------
    network : Network
        Its arcs are followed when it is directed, its links otherwise.

    Returns
    -------
    StationaryResult

    Raises
    ------
    ParameterError
        ``damping`` outside (0, 1), a bad ``tol``, ``maxiter`` or
        ``personalization``.
    InputError
        ``personalization`` names a node that is not in the network.
    ConvergenceError
        ``maxiter`` steps did not bring the L1 change to ``tol``; the
        unconverged :class:`StationaryResult` is in its ``partial``.

    Other Parameters
    ----------------
    damping : float, default=0.85
        Probability of following a link at each step (:data:`DEFAULT_DAMPING`).
    personalization : array-like of shape (n,) or mapping id -> weight, optional
        Weights (>= 0, positive sum) of the teleport distribution ``v``; also
        where dangling nodes send their step. Uniform when None.
    tol : float, default=1e-10
        Bound on the L1 change of the last step (:data:`DEFAULT_WALK_TOL`).
    maxiter : int, optional
        Step cap; :func:`default_maxiter` when None, which the contraction
        bound guarantees is enough.

    Notes
    -----
    One step is

    .. math::

        x \leftarrow \alpha W^T (x \odot o^{-1})
        + \bigl(\alpha\, x(\text{dangling}) + 1 - \alpha\bigr)\, v

    with ``o`` the out-degrees; ``x`` is renormalized to sum 1 after each step
    against drift. It starts from ``v`` and stops when
    :math:`\lVert x_t - x_{t-1}\rVert_1 \le \text{tol}`; the module notes give
    the error bound this implies.

    Examples
    --------
    >>> net = Network.from_links(["a", "b", "c"], ["b", "c", "a"], directed=True)
    >>> result = stationary_distribution(net)
    >>> result.values.round(6).tolist(), result.converged
    ([0.333333, 0.333333, 0.333333], True)
    """
    alpha = check_damping(damping)
    tol = float(check_param(tol, "tol", [_WALK_TOL]))
    limit = (
        default_maxiter(alpha, tol) if maxiter is None else check_int(maxiter, "maxiter", minimum=1)
    )
    n = network.n_nodes
    if n == 0:
        raise parameter_error(
            "network", "a network with at least one node", network, shown="an empty network"
        )
    v = _personalization(network, personalization)
    weights_t, inv, dangling = transition_parts(network)
    x = v.copy()
    residual = math.inf
    steps = 0
    while steps < limit:
        steps += 1
        spread = weights_t @ (x * inv)
        new = alpha * spread + (alpha * float(x[dangling].sum()) + (1.0 - alpha)) * v
        new /= new.sum()
        residual = float(np.abs(new - x).sum())
        x = new
        if residual <= tol:
            break
    converged = residual <= tol
    result = StationaryResult(
        values=x,
        iterations=steps,
        residual=residual,
        converged=converged,
        damping=alpha,
        dangling=int(dangling.sum()),
        tol=float(tol),
        error_bound=alpha * residual / (1.0 - alpha),
    )
    logger.debug("stationary distribution: %d steps, L1 change %.3g", steps, residual)
    if not converged:
        raise ConvergenceError(
            f"the stationary distribution did not converge: L1 change {residual:.3g} after "
            f"{steps} steps (maxiter={limit}), above tol={tol:g}; raise maxiter or tol",
            partial=result,
        )
    return result
