"""Graph Laplacians and related operators for the eigen-solve.

Three Laplacians of an undirected network with adjacency :math:`A` and weighted
degrees :math:`D = \\operatorname{diag}(A \\mathbf{1})`:

.. math::

    L = D - A, \\qquad
    N = I - D^{-1/2} A D^{-1/2}, \\qquad
    P = I - D^{-1} A .

``L`` (combinatorial) weighs every node alike; ``N`` (normalized) is the one
whose second eigenvalue bounds the best conductance through Cheeger's inequality
[1]_; ``P`` (random walk) has the same eigenvalues as ``N`` and eigenvectors
:math:`D^{-1/2} u`, the relaxed normalized-cut indicators of Shi and Malik [2]_.
``P`` is not symmetric, so it is solved through ``N`` and mapped back.

Two more operators serve very sparse, tree-like networks (mean degree 2 to 3),
where the leading eigenvectors of ``N`` localize on dangling branches and
low-degree nodes instead of following the large-scale structure:

* ``'regularized'``: the normalized Laplacian of
  :math:`A_\\tau = A + (\\tau / n_c) \\mathbf{1}\\mathbf{1}^T` on each
  connected component of :math:`n_c` nodes (Amini et al. [3]_, Qin and Rohe
  [4]_). It stays positive semi-definite with the exact null vector
  :math:`(d + \\tau)^{1/2}` per component; it is held as a sparse matrix plus
  one rank-one term per component (:attr:`GraphOperator.low_rank`), never as
  the dense :math:`A_\\tau`.
* ``'bethe_hessian'``: :math:`H(r) = (r^2 - 1) I - r A + D` on the link pattern
  (Saade, Krzakala and Zdeborova [5]_). It is indefinite: its negative
  eigenvalues carry the communities and their number estimates how many there
  are. Such an operator has no known null space (``null_basis`` with zero
  columns) and a Gershgorin lower bound :attr:`GraphOperator.lower_bound` below
  zero, from which the eigen-solver takes a shift.

One operator serves directed networks (:attr:`Network.arcs`):

* ``'directed'``: the directed Laplacian of Chung [6]_,
  :math:`\\mathcal{L} = I - (\\Phi^{1/2} P \\Phi^{-1/2} + \\Phi^{-1/2} P^T \\Phi^{1/2})/2`,
  with :math:`\\Phi` the stationary distribution of the random surfer
  (:func:`specgraph.walks.stationary_distribution`: the walk *with*
  teleportation, which has one positive stationary distribution even when
  the network is not strongly connected). The teleport jumps of that walk
  form a dense rank-one flow; they are kept as holding steps at each node
  (see :func:`laplacian`, Notes), so the operator stays sparse, positive
  semi-definite, block diagonal in the connected components, and has the
  exact null vector :math:`\\Phi^{1/2}` on each.

Isolated nodes follow the convention of scipy's ``csgraph.laplacian`` and
networkx: their row of ``N`` is zero, so each isolated node is a component with
eigenvalue 0 like any other.

References
----------
.. [1] F. R. K. Chung, *Spectral Graph Theory*, CBMS 92, AMS, 1997.
.. [2] J. Shi and J. Malik, "Normalized cuts and image segmentation",
   IEEE TPAMI 22(8):888-905, 2000. :doi:`10.1109/34.868688`
.. [3] A. A. Amini, A. Chen, P. J. Bickel and E. Levina, "Pseudo-likelihood
   methods for community detection in large sparse networks", Ann. Statist.
   41(4):2097-2122, 2013. :doi:`10.1214/13-AOS1138`
.. [4] T. Qin and K. Rohe, "Regularized spectral clustering under the
   degree-corrected stochastic blockmodel", NIPS 26, 2013.
.. [5] A. Saade, F. Krzakala and L. Zdeborova, "Spectral clustering of graphs
   with the Bethe Hessian", NIPS 27, 2014.
.. [6] F. Chung, "Laplacians and the Cheeger inequality for directed
   graphs", Annals of Combinatorics 9(1):1-19, 2005.
   :doi:`10.1007/s00026-005-0237-z`
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Literal

import numpy as np
import scipy.sparse as sp

from ._validation import check_choice, check_positive_float, parameter_error
from .network import Network

if TYPE_CHECKING:
    from .walks import StationaryResult

__all__ = [
    "BETHE_MIN_R",
    "DEFAULT_TAU",
    "GraphOperator",
    "LaplacianKind",
    "bethe_radius",
    "directed_flow",
    "laplacian",
]

LaplacianKind = Literal[
    "combinatorial", "normalized", "random_walk", "regularized", "bethe_hessian", "directed"
]

#: Default regularization of the ``'regularized'`` kind: ``tau`` is the mean
#: weighted degree of the network. Qin and Rohe [4]_ recommend it (their
#: analysis needs ``tau`` of the order of the mean degree); Amini et al. [3]_
#: use a multiple of it. With ``tau`` equal to the mean degree, a node of
#: degree 1 at the tip of a branch weighs about like an average node in
#: :math:`D_\tau`, which is what stops eigenvectors localizing on branches.
DEFAULT_TAU = "mean_degree"

#: Smallest ``r`` of the Bethe Hessian taken from the degree estimate. Saade et
#: al. [5]_ set :math:`r = \sqrt{\langle d^2\rangle/\langle d\rangle - 1}`, the
#: square root of the spectral-radius estimate of the non-backtracking matrix;
#: below 1 (a network whose pieces are paths and tiny trees) the estimate has
#: no meaning, and ``H(1) = D - A`` is the combinatorial Laplacian, the safe
#: limit, so ``r`` is clipped there.
BETHE_MIN_R = 1.0


@dataclass(frozen=True, eq=False)
class GraphOperator:
    r"""A symmetric graph operator and what is known of its spectrum.

    The operator is :math:`M = \text{matrix} - \sum_c u_c u_c^T`, where
    :math:`u_c` is :attr:`low_rank` restricted to connected component
    :math:`c` (no term when ``low_rank`` is None).

    Attributes
    ----------
    matrix : scipy.sparse.csr_array
        The sparse part of the symmetric operator the eigen-solvers work on
        (for ``random_walk``, the similar normalized Laplacian).
    kind : str
        Which operator this is.
    norm_bound : float
        An upper bound on the 2-norm of the operator (Gershgorin: twice the
        largest weighted degree for ``L``, 2 for ``N``); residuals are scaled
        by it.
    null_basis : ndarray of shape (n, c)
        Orthonormal basis of the known null space, one column per connected
        component: the trivial eigenvectors that solvers deflate. Zero
        columns for an operator with no known null space (``bethe_hessian``),
        which may then be indefinite.
    degrees : ndarray of shape (n,)
        Weighted degrees of the network, at its scale (the stored affinities:
        :attr:`Network.weight_exponent`). The normalized kinds do not depend on
        that scale; the eigenvalues of ``'combinatorial'`` are in its units
        (multiply by ``2**weight_exponent`` for the units given).
    component_labels : ndarray of shape (n,), optional
        Connected component of each node; the operator is block diagonal in
        them. When None, components are read off ``null_basis``.
    low_rank : ndarray of shape (n,), optional
        Vector :math:`u` of the per-component rank-one terms subtracted from
        ``matrix`` (``regularized`` kind); None for a purely sparse operator.
    lower_bound : float, default=0.0
        A lower bound on the smallest eigenvalue (0 for the positive
        semi-definite kinds; a Gershgorin bound for ``bethe_hessian``).
    parameters : dict
        The operator's own parameters (``tau``, ``r``), for the run record.
    """

    matrix: sp.csr_array
    kind: str
    norm_bound: float
    null_basis: np.ndarray
    degrees: np.ndarray
    component_labels: np.ndarray | None = None
    low_rank: np.ndarray | None = None
    lower_bound: float = 0.0
    parameters: dict[str, Any] | None = None

    @property
    def shape(self) -> tuple[int, int]:
        return self.matrix.shape

    @property
    def components(self) -> np.ndarray:
        """Connected component of each node (from ``null_basis`` when not stored)."""
        if self.component_labels is not None:
            return self.component_labels
        return np.argmax(self.null_basis != 0, axis=1)

    def apply(self, vectors: np.ndarray) -> np.ndarray:
        """The product of the operator with a vector or a block of vectors (columns)."""
        out = np.asarray(self.matrix @ vectors)
        if self.low_rank is None:
            return out
        return out - _rank_one_product(self.low_rank, self.components, vectors)

    def to_dense(self) -> np.ndarray:
        """The operator as a dense array (small networks: tests and checks)."""
        return self.apply(np.eye(self.shape[0]))

    def to_user_vectors(self, vectors: np.ndarray) -> np.ndarray:
        """Map eigenvectors of :attr:`matrix` to eigenvectors of the named Laplacian.

        Identity except for ``random_walk``, where ``v = D^{-1/2} u``, scaled to
        unit Euclidean norm per column. An isolated node's entry is kept as it
        is: its row of :math:`I - D^{-1}A` is zero, like its row of ``N``.
        """
        if self.kind != "random_walk":
            return vectors
        degrees = self.degrees
        scale = np.where(degrees > 0, _inverse_sqrt(degrees), 1.0)
        mapped = vectors * scale[:, None]
        norms = np.linalg.norm(mapped, axis=0)
        return mapped / np.where(norms > 0, norms, 1.0)


def _rank_one_product(u: np.ndarray, labels: np.ndarray, vectors: np.ndarray) -> np.ndarray:
    """``sum_c u_c (u_c^T x)``: per-component dot products, then scatter back."""
    block = vectors.reshape(vectors.shape[0], -1)
    count = int(labels.max()) + 1 if labels.size else 0
    dots = np.zeros((count, block.shape[1]))
    np.add.at(dots, labels, u[:, None] * block)
    return (u[:, None] * dots[labels]).reshape(vectors.shape)


def _inverse_sqrt(degrees: np.ndarray) -> np.ndarray:
    """``d^{-1/2}``, with 0 for isolated nodes (scipy csgraph convention)."""
    out = np.zeros_like(degrees)
    positive = degrees > 0
    out[positive] = 1.0 / np.sqrt(degrees[positive])
    return out


def _component_basis(network: Network, weights: np.ndarray) -> np.ndarray:
    """Columns ``w restricted to component c``, normalized (one per component)."""
    labels = network.component_labels
    c = network.n_components
    basis = np.zeros((network.n_nodes, c))
    basis[np.arange(network.n_nodes), labels] = weights
    norms = np.linalg.norm(basis, axis=0)
    # An isolated node has zero degree, so D^{1/2} 1 vanishes there; its null
    # vector is the unit vector at the node instead.
    empty = norms == 0
    basis[:, empty] = (labels[:, None] == np.flatnonzero(empty)[None, :]).astype(float)
    norms[empty] = 1.0
    return basis / norms


def _combinatorial(network: Network) -> GraphOperator:
    d = network.degrees
    matrix = (sp.diags_array(d) - network.adjacency).tocsr()
    bound = 2.0 * float(d.max()) if d.size else 0.0
    basis = _component_basis(network, np.ones(network.n_nodes))
    return GraphOperator(matrix, "combinatorial", bound, basis, d, network.component_labels)


def _normalized(network: Network, kind: str = "normalized") -> GraphOperator:
    d = network.degrees
    s = _inverse_sqrt(d)
    scaled = sp.diags_array(s) @ network.adjacency @ sp.diags_array(s)
    matrix = (sp.diags_array((d > 0).astype(float)) - scaled).tocsr()
    basis = _component_basis(network, np.sqrt(d))
    return GraphOperator(matrix, kind, 2.0, basis, d, network.component_labels)


def _random_walk(network: Network) -> GraphOperator:
    return _normalized(network, "random_walk")


def _regularized(network: Network, tau: float | None) -> GraphOperator:
    r"""Normalized Laplacian of ``A + (tau/n_c) 1 1^T`` per component, sparse plus rank one.

    With :math:`D_\tau = D + \tau I` (each row of the rank-one block sums to
    ``tau``) and :math:`u = \sqrt{\tau/n_c}\, D_\tau^{-1/2} \mathbf{1}` on
    component :math:`c`,

    .. math::

        I - D_\tau^{-1/2} A_\tau D_\tau^{-1/2}
        = \bigl(I - D_\tau^{-1/2} A D_\tau^{-1/2}\bigr) - \sum_c u_c u_c^T .

    The sparse part is the degree-only form of Qin and Rohe; the rank-one
    terms make :math:`(d + \tau)^{1/2}` an exact null vector per component.
    """
    d = network.degrees
    n = network.n_nodes
    if tau is None:
        tau = float(d.sum() / n) if n else 0.0
    else:  # given in the units of the affinities as read: to the network's scale
        tau = float(
            np.ldexp(check_positive_float(tau, "tau", allow_zero=True), -network.weight_exponent)
        )
    tau = check_positive_float(tau, "tau", allow_zero=True)
    d_tau = d + tau
    s = _inverse_sqrt(d_tau)
    scaled = sp.diags_array(s) @ network.adjacency @ sp.diags_array(s)
    matrix = (sp.diags_array((d_tau > 0).astype(float)) - scaled).tocsr()
    labels = network.component_labels
    sizes = np.bincount(labels, minlength=network.n_components)
    low_rank = s * np.sqrt(tau / sizes[labels]) if tau > 0 else None
    basis = _component_basis(network, np.sqrt(d_tau))
    recorded = {"tau": float(network.user_units(tau))}  # in the units given
    return GraphOperator(matrix, "regularized", 2.0, basis, d, labels, low_rank, 0.0, recorded)


def bethe_radius(network: Network) -> float:
    r"""The default ``r`` of the Bethe Hessian: :math:`\sqrt{\sum d^2 / \sum d - 1}`.

    Degrees are counted on the link pattern (number of neighbours). The value
    is the square root of the estimate :math:`\langle d^2\rangle/\langle
    d\rangle - 1` of the spectral radius of the non-backtracking matrix
    (Saade et al. [5]_), clipped below at :data:`BETHE_MIN_R`.

    Examples
    --------
    >>> from specgraph import gallery
    >>> bethe_radius(gallery.ring(6)), bethe_radius(gallery.barbell(4))
    (1.0, 1.5191090506254998)
    """
    counts = np.diff(network.adjacency.indptr).astype(float)
    total = counts.sum()
    if total == 0:
        return BETHE_MIN_R
    return float(np.sqrt(max(float((counts**2).sum() / total) - 1.0, BETHE_MIN_R**2)))


def directed_flow(
    network: Network, *, damping: float | None = None
) -> tuple[sp.csr_array, np.ndarray, StationaryResult]:
    r"""The symmetrized stationary flow along the arcs, and the stationary distribution.

    Returns :math:`S = \alpha(\Phi P + P^T \Phi)/2` (sparse, the flow of the
    random surfer along the network's own arcs at stationarity, made
    symmetric), :math:`\phi`, and the stationary solve.
    """
    from .walks import DEFAULT_DAMPING, stationary_distribution

    if network.arcs is None:
        raise parameter_error(
            "network",
            "a directed network for kind='directed' (one read with directed=True, "
            "which keeps its arcs)",
            network,
            shown="an undirected network",
        )
    walk = stationary_distribution(network, damping=DEFAULT_DAMPING if damping is None else damping)
    _, inv, _ = _walk_parts(network)
    phi = walk.values
    flow = sp.diags_array(walk.damping * phi * inv) @ network.arcs
    return ((flow + flow.T) * 0.5).tocsr(), phi, walk


def _walk_parts(network: Network) -> tuple[sp.csr_array, np.ndarray, np.ndarray]:
    from .walks import transition_parts

    return transition_parts(network)


def _directed(network: Network, damping: float | None) -> GraphOperator:
    r"""Chung's directed Laplacian with the teleport flow kept as holding steps.

    :math:`\mathcal{L} = I - \Phi^{-1/2}\bigl(S + \operatorname{diag}(\phi - S\mathbf{1})\bigr)
    \Phi^{-1/2} = \operatorname{diag}(S\mathbf{1}/\phi) - \Phi^{-1/2} S \Phi^{-1/2}`.
    """
    flow, phi, walk = directed_flow(network, damping=damping)
    through = np.asarray(flow.sum(axis=1)).ravel()
    s = _inverse_sqrt(phi)
    # Scale the one-sided flow, then symmetrize: (X + X^T)/2 is symmetric to
    # the last bit, which D^-1/2 S D^-1/2 computed in one go is not.
    _, inv, _ = _walk_parts(network)
    one_sided = sp.diags_array(walk.damping * phi * inv * s) @ network.arcs @ sp.diags_array(s)
    scaled = (one_sided + one_sided.T) * 0.5
    matrix = (sp.diags_array(through * s * s) - scaled).tocsr()
    matrix.eliminate_zeros()
    basis = _component_basis(network, np.sqrt(phi))
    parameters = {
        "damping": walk.damping,
        "stationary_iterations": walk.iterations,
        "stationary_residual": walk.residual,
        "stationary_error_bound": walk.error_bound,
        "dangling_nodes": walk.dangling,
        "teleport_share": float(1.0 - through.sum() / phi.sum()) if phi.sum() > 0 else 0.0,
    }
    return GraphOperator(
        matrix,
        "directed",
        2.0,
        basis,
        network.degrees,
        network.component_labels,
        None,
        0.0,
        parameters,
    )


def _bethe_hessian(network: Network, r: float | None) -> GraphOperator:
    """``H(r) = (r^2 - 1) I - r A + D`` on the link pattern, with Gershgorin bounds."""
    r = bethe_radius(network) if r is None else check_positive_float(r, "r")
    pattern = network.adjacency.copy()
    pattern.data = np.ones_like(pattern.data)
    counts = np.diff(pattern.indptr).astype(float)
    diagonal = r * r - 1.0 + counts
    matrix = (sp.diags_array(diagonal) - r * pattern).tocsr()
    # Gershgorin discs: centre (r^2 - 1 + d_i), radius r d_i.
    lower = float((diagonal - r * counts).min()) if counts.size else 0.0
    upper = float((diagonal + r * counts).max()) if counts.size else 0.0
    bound = max(abs(lower), abs(upper))
    return GraphOperator(
        matrix,
        "bethe_hessian",
        bound,
        np.zeros((network.n_nodes, 0)),
        network.degrees,
        network.component_labels,
        None,
        min(lower, 0.0),
        {"r": r},
    )


#: Kinds that take no parameter, by name.
_BUILDERS: dict[str, Callable[[Network], GraphOperator]] = {
    "combinatorial": _combinatorial,
    "normalized": _normalized,
    "random_walk": _random_walk,
}

#: Kinds that take a parameter: the name of that parameter, and the builder
#: given its value (None for the kind's default).
_PARAMETRIZED: dict[str, tuple[str, Callable[[Network, float | None], GraphOperator]]] = {
    "regularized": ("tau", _regularized),
    "bethe_hessian": ("r", _bethe_hessian),
    "directed": ("damping", _directed),
}


def laplacian(
    network: Network,
    *,
    kind: LaplacianKind = "normalized",
    tau: float | None = None,
    r: float | None = None,
    damping: float | None = None,
) -> GraphOperator:
    r"""Build a Laplacian (or a deformed Laplacian) of ``network`` as a :class:`GraphOperator`.

    Parameters
    ----------
    network : Network
        The network.
    kind : str, default='normalized'
        One of ``'normalized'``, ``'combinatorial'``, ``'random_walk'``,
        ``'regularized'``, ``'bethe_hessian'``, ``'directed'``. ``'combinatorial'`` is
        :math:`L = D - A`; ``'normalized'`` is
        :math:`I - D^{-1/2} A D^{-1/2}`; ``'random_walk'`` is
        :math:`I - D^{-1} A`, represented by its symmetric similar matrix;
        ``'regularized'`` is :math:`I - D_\tau^{-1/2} A_\tau D_\tau^{-1/2}`
        with :math:`A_\tau = A + (\tau/n_c)\mathbf{1}\mathbf{1}^T` on each
        component of :math:`n_c` nodes; ``'bethe_hessian'`` is
        :math:`H(r) = (r^2 - 1) I - r A + D` with :math:`A` and :math:`D` the
        unweighted link pattern and its neighbour counts; ``'directed'`` is
        Chung's directed Laplacian of the random surfer on
        :attr:`Network.arcs` (see Notes).
    tau : float, optional
        Regularization of ``'regularized'``, ``>= 0``; the mean weighted
        degree when None (:data:`DEFAULT_TAU`). ``tau=0`` gives the
        normalized Laplacian.
    r : float, optional
        Parameter of ``'bethe_hessian'``, ``> 0``; :func:`bethe_radius` when
        None. ``r=1`` gives :math:`D - A`.
    damping : float, optional
        Damping of the random surfer of ``'directed'``, in (0, 1);
        :data:`specgraph.walks.DEFAULT_DAMPING` (0.85) when None.

    Returns
    -------
    GraphOperator

    Raises
    ------
    ParameterError
        For an unknown kind, ``tau`` / ``r`` / ``damping`` given to a kind
        that does not take it, ``damping`` outside (0, 1), or
        ``kind='directed'`` on a network without arcs.
    ConvergenceError
        When the stationary distribution of ``'directed'`` misses its
        tolerance (it cannot with the default cap; see
        :func:`specgraph.walks.default_maxiter`).

    Notes
    -----
    *Regularized.* :math:`A_\tau` is dense, so the operator is kept as the
    sparse degree-only matrix :math:`I - D_\tau^{-1/2} A D_\tau^{-1/2}` minus
    one rank-one term per component (see :class:`GraphOperator`): products
    cost one sparse product and one dot product per component, and
    :math:`(d+\tau)^{1/2}` stays an exact null vector, so the eigen-solvers'
    per-component deflation holds. The degree-only matrix alone (Qin and Rohe
    [4]_) is positive definite with no exact null vector; its lowest pair is
    only near :math:`(d+\tau)^{1/2}`, and every downstream step that counts
    trivial pairs would have to guess, which is why the rank-one form is the
    one offered. :func:`specgraph.smallest_eigenpairs` solves it densely or by
    Lanczos on products only (``'lanczos_flip'``).

    *Bethe Hessian.* For a network drawn from a sparse block model, the
    eigenvectors of the negative eigenvalues of :math:`H(r)` at
    :math:`r = \sqrt{\langle d^2\rangle/\langle d\rangle - 1}` carry the
    groups down to the detectability threshold, where those of ``N`` fail
    (Saade et al. [5]_); the count of negative eigenvalues estimates the
    number of groups. ``H`` has no known null space and may be indefinite:
    ``null_basis`` has zero columns and ``lower_bound`` is a Gershgorin lower
    bound, from which the eigen-solver takes its shift.

    *Directed.* Let :math:`\phi` be the stationary distribution of the
    random surfer :math:`G = \alpha P + c v^T` (:mod:`specgraph.walks`; ``v``
    uniform, so :math:`\phi > 0`), and split its flow
    :math:`\Phi G` into the flow along arcs, :math:`\alpha\Phi P`, and the
    teleport flow :math:`\Phi c v^T`. Chung's Laplacian of ``G`` [6]_ is the
    normalized Laplacian :math:`I - \Phi^{-1/2} S_G \Phi^{-1/2}` of the
    symmetric flow :math:`S_G = (\Phi G + G^T\Phi)/2`, whose row sums are
    :math:`\phi` (stationarity). The teleport part of :math:`S_G` is dense
    and couples every node to every other; here each node's teleport flow
    is instead kept on the node itself (a holding step, a self-loop of the
    same weight), which changes no row sum:

    .. math::

        \mathcal{L} = I - \Phi^{-1/2}\bigl(S + \operatorname{diag}(\phi - S\mathbf{1})\bigr)
        \Phi^{-1/2}, \qquad S = \alpha(\Phi P + P^T\Phi)/2 .

    So :math:`\mathcal{L}` is the normalized Laplacian of a symmetric
    non-negative matrix with row sums :math:`\phi` (:math:`S\mathbf{1} \le
    \phi` because the teleport flow is non-negative): sparse (the pattern of
    the adjacency), positive semi-definite with eigenvalues in [0, 2], block
    diagonal in the connected components, with exact null vector
    :math:`\Phi^{1/2}` on each. It equals Chung's :math:`\mathcal{L}_G` minus
    :math:`\Phi^{-1/2} L_T \Phi^{-1/2}`, :math:`L_T` the combinatorial
    Laplacian of the symmetrized teleport flow, so its eigenvalues are at
    most Chung's (Weyl). Cheeger's inequality holds for it with cuts
    measured by the stationary flow along arcs and volumes by :math:`\phi`
    (Chung's circulation conductance without the teleport jumps). Within a
    component, a uniform teleport makes :math:`\phi` proportional to the
    component's own stationary distribution, so zoning components one at a
    time gives the same operator.

    Examples
    --------
    >>> from specgraph.gallery import path
    >>> op = laplacian(path(3), kind="combinatorial")
    >>> op.matrix.toarray()
    array([[ 1., -1.,  0.],
           [-1.,  2., -1.],
           [ 0., -1.,  1.]])
    >>> laplacian(path(3), kind="bethe_hessian", r=2.0).matrix.toarray()
    array([[ 4., -2.,  0.],
           [-2.,  5., -2.],
           [ 0., -2.,  4.]])
    """
    check_choice(kind, "kind", (*_BUILDERS, *_PARAMETRIZED))
    given = {"tau": tau, "r": r, "damping": damping}
    _check_parameters_of(kind, given)
    if kind in _PARAMETRIZED:
        name, build = _PARAMETRIZED[kind]
        return build(network, given[name])
    return _BUILDERS[kind](network)


def _check_parameters_of(kind: str, given: dict[str, float | None]) -> None:
    """Refuse a parameter given to a kind that does not take it."""
    own = _PARAMETRIZED[kind][0] if kind in _PARAMETRIZED else None
    for name, value in given.items():
        if value is not None and name != own:
            raise parameter_error(
                name,
                f"None unless kind={_kind_of(name)!r}",
                value,
                shown=f"{value!r} with kind={kind!r}",
            )


def _kind_of(parameter: str) -> str:
    return next(kind for kind, (name, _) in _PARAMETRIZED.items() if name == parameter)
