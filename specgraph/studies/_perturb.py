"""Weight noise for a study: perturbed networks and the operator change they cause.

:func:`perturb_weights` multiplies every link's affinity by log-normal noise;
:func:`perturbation_norm` measures the spectral norm of the resulting change
of a graph operator, the :math:`\\|E\\|_2` of the Davis-Kahan check of
:func:`~specgraph.studies.stability`.
"""

from __future__ import annotations

import logging
from typing import Any

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import ArpackNoConvergence, LinearOperator, eigsh

from .._validation import check_positive_float, check_rng, parameter_error
from ..exceptions import ConvergenceError
from ..network import Network
from ..operators import laplacian

__all__ = ["DENSE_NORM_ROWS", "NORM_RTOL", "perturb_weights", "perturbation_norm"]

logger = logging.getLogger(__name__)

#: Relative accuracy asked of the Lanczos estimate of ``||E||``: the warning
#: compares it with a threshold, so three digits are plenty.
NORM_RTOL = 1e-3

#: Below this many rows the norm is taken from a dense matrix: ARPACK needs a
#: few more rows than its Krylov basis, and a dense norm is cheaper anyway.
DENSE_NORM_ROWS = 10


def perturb_weights(network: Network, *, spread: float, rng: Any = None) -> Network:
    """The network with every link's affinity multiplied by log-normal noise.

    Each undirected link gets one factor :math:`\\exp(s Z)`, :math:`Z \\sim
    N(0, 1)`, applied to both of its stored entries, so the adjacency stays
    exactly symmetric. In a directed network each arc gets its own factor and
    the arcs are kept. Node ids, sizes and coordinates are kept.

    Multiplicative noise because affinities are positive and scale-free: a
    factor keeps every weight positive (additive noise could make one zero or
    negative, which is not a link), perturbs a 0.01 and a 100 by the same
    relative amount, and does not depend on the unit the weights came in. The
    factor has median 1; its mean :math:`e^{s^2/2}` is a global scale, which
    leaves the normalized Laplacian unchanged.

    Parameters
    ----------
    network : Network
    spread : float
        Standard deviation :math:`s \\ge 0` of the log of the factor.
    rng : None, int or numpy.random.Generator

    Returns
    -------
    Network

    Examples
    --------
    >>> from specgraph import gallery
    >>> noisy = perturb_weights(gallery.ring(5), spread=0.1, rng=0)
    >>> bool((noisy.adjacency != noisy.adjacency.T).nnz == 0)
    True
    >>> noisy.adjacency.nnz == gallery.ring(5).adjacency.nnz
    True
    """
    spread = check_positive_float(spread, "spread", allow_zero=True)
    generator = check_rng(rng)
    notes = {**network.notes, "weight_noise_spread": spread}
    if network.arcs is not None:
        # A directed network: every arc (each direction of a two-way link is an arc of
        # its own) gets its factor; the adjacency is again the arcs' symmetrized sum.
        arcs = network.arcs.copy()
        arcs.data = arcs.data * np.exp(spread * generator.standard_normal(arcs.data.size))
        return Network(
            sp.csr_array(arcs + arcs.T),
            network.node_ids,
            coordinates=network.coordinates,
            sizes=network.sizes,
            notes=notes,
            arcs=arcs,
            weight_exponent=network.weight_exponent,
        )
    upper = sp.triu(network.adjacency, k=1, format="coo")
    data = upper.data * np.exp(spread * generator.standard_normal(upper.data.size))
    n = network.n_nodes
    adjacency = sp.coo_array(
        (
            np.concatenate([data, data]),
            (np.concatenate([upper.row, upper.col]), np.concatenate([upper.col, upper.row])),
        ),
        shape=(n, n),
    ).tocsr()
    return Network(
        adjacency,
        network.node_ids,
        coordinates=network.coordinates,
        sizes=network.sizes,
        notes=notes,
        weight_exponent=network.weight_exponent,
    )


def perturbation_norm(
    network: Network,
    perturbed: Network,
    *,
    kind: str = "normalized",
    nodes: np.ndarray | None = None,
    rng: Any = None,
) -> float:
    """Spectral norm of the change of a graph operator between two weightings.

    Computes :math:`\\|M(\\tilde A) - M(A)\\|_2` for the operator ``kind`` of
    :func:`specgraph.laplacian` (for ``'random_walk'``, its symmetric similar
    matrix, the one the eigen-solvers work on), restricted to the rows and
    columns ``nodes`` (a connected component: the operators are block
    diagonal in components). The difference is symmetric, so its 2-norm is
    its eigenvalue of largest magnitude, found by Lanczos (ARPACK through
    :func:`scipy.sparse.linalg.eigsh`) to :data:`NORM_RTOL`.

    Parameters
    ----------
    network, perturbed : Network
        The same nodes and links, different affinities.
    kind : str, default='normalized'
        Operator kind.
    nodes : ndarray of int, optional
        Rows to restrict to; all rows when None.
    rng : None, int or numpy.random.Generator
        Seeds the Lanczos start vector.

    Returns
    -------
    float

    Raises
    ------
    ParameterError
        When the two networks differ in size.
    ConvergenceError
        When Lanczos finds no eigenvalue at all (``partial`` is None).

    Examples
    --------
    >>> from specgraph import gallery
    >>> net = gallery.grid(4, 4)
    >>> perturbation_norm(net, net)
    0.0
    """
    if perturbed.n_nodes != network.n_nodes:
        expected = f"the {network.n_nodes} nodes of network"
        shown = f"{perturbed.n_nodes} nodes"
        raise parameter_error("perturbed", expected, perturbed, shown=shown, verb="have")
    before = laplacian(network, kind=kind)  # type: ignore[arg-type]
    after = laplacian(perturbed, kind=kind)  # type: ignore[arg-type]
    n = network.n_nodes
    rows = np.arange(n) if nodes is None else np.asarray(nodes, dtype=np.int64)
    m = rows.size
    if before.low_rank is None and after.low_rank is None:
        diff = sp.csr_array(after.matrix - before.matrix)
        if m < n:
            diff = diff[rows][:, rows]
        if diff.nnz == 0:
            return 0.0
        operator: Any = diff
    else:

        def product(x: np.ndarray) -> np.ndarray:
            full = np.zeros((n, *x.shape[1:]))
            full[rows] = x
            return (after.apply(full) - before.apply(full))[rows]

        operator = LinearOperator((m, m), matvec=product, matmat=product, dtype=np.float64)
    if m < DENSE_NORM_ROWS:
        dense = operator.toarray() if sp.issparse(operator) else operator.matmat(np.eye(m))
        return float(np.linalg.norm(dense, 2))
    start = check_rng(rng).standard_normal(m)
    try:
        values = eigsh(
            operator, k=1, which="LM", tol=NORM_RTOL, v0=start, return_eigenvectors=False
        )
    except ArpackNoConvergence as exc:
        if not len(exc.eigenvalues):
            raise ConvergenceError(
                "perturbation_norm: Lanczos found no eigenvalue of the operator change.",
                partial=None,
            ) from exc
        values = exc.eigenvalues  # a lower bound on the norm; logged
        logger.warning("perturbation norm from a partial Lanczos run: %s", values)
    return float(np.max(np.abs(values)))
