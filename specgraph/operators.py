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
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
import scipy.sparse as sp

from ._validation import check_choice, check_positive_float
from .exceptions import ParameterError
from .network import Network

__all__ = [
    "BETHE_MIN_R",
    "DEFAULT_TAU",
    "GraphOperator",
    "LaplacianKind",
    "bethe_radius",
    "laplacian",
]

LaplacianKind = Literal[
    "combinatorial", "normalized", "random_walk", "regularized", "bethe_hessian"
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
        Weighted degrees of the network.
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
    tau = check_positive_float(tau, "tau", allow_zero=True)
    d_tau = d + tau
    s = _inverse_sqrt(d_tau)
    scaled = sp.diags_array(s) @ network.adjacency @ sp.diags_array(s)
    matrix = (sp.diags_array((d_tau > 0).astype(float)) - scaled).tocsr()
    labels = network.component_labels
    sizes = np.bincount(labels, minlength=network.n_components)
    low_rank = s * np.sqrt(tau / sizes[labels]) if tau > 0 else None
    basis = _component_basis(network, np.sqrt(d_tau))
    return GraphOperator(matrix, "regularized", 2.0, basis, d, labels, low_rank, 0.0, {"tau": tau})


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


_BUILDERS: dict[str, Callable[[Network], GraphOperator]] = {
    "combinatorial": _combinatorial,
    "normalized": _normalized,
    "random_walk": _random_walk,
}

#: Kinds that take a parameter, with the name of that parameter.
_PARAMETRIZED = {"regularized": "tau", "bethe_hessian": "r"}


def laplacian(
    network: Network,
    *,
    kind: LaplacianKind = "normalized",
    tau: float | None = None,
    r: float | None = None,
) -> GraphOperator:
    r"""Build a Laplacian (or a deformed Laplacian) of ``network`` as a :class:`GraphOperator`.

    Parameters
    ----------
    network : Network
        The network.
    kind : str, default='normalized'
        One of ``'normalized'``, ``'combinatorial'``, ``'random_walk'``,
        ``'regularized'``, ``'bethe_hessian'``. ``'combinatorial'`` is
        :math:`L = D - A`; ``'normalized'`` is
        :math:`I - D^{-1/2} A D^{-1/2}`; ``'random_walk'`` is
        :math:`I - D^{-1} A`, represented by its symmetric similar matrix;
        ``'regularized'`` is :math:`I - D_\tau^{-1/2} A_\tau D_\tau^{-1/2}`
        with :math:`A_\tau = A + (\tau/n_c)\mathbf{1}\mathbf{1}^T` on each
        component of :math:`n_c` nodes; ``'bethe_hessian'`` is
        :math:`H(r) = (r^2 - 1) I - r A + D` with :math:`A` and :math:`D` the
        unweighted link pattern and its neighbour counts.
    tau : float, optional
        Regularization of ``'regularized'``, ``>= 0``; the mean weighted
        degree when None (:data:`DEFAULT_TAU`). ``tau=0`` gives the
        normalized Laplacian.
    r : float, optional
        Parameter of ``'bethe_hessian'``, ``> 0``; :func:`bethe_radius` when
        None. ``r=1`` gives :math:`D - A`.

    Returns
    -------
    GraphOperator

    Raises
    ------
    ParameterError
        For an unknown kind, or ``tau`` / ``r`` given to a kind that does not
        take it.

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
    for name, value in (("tau", tau), ("r", r)):
        if value is not None and _PARAMETRIZED.get(kind) != name:
            raise ParameterError(
                f"{name} applies to kind={_kind_of(name)!r} only; got {name}={value!r} "
                f"with kind={kind!r}."
            )
    if kind == "regularized":
        return _regularized(network, tau)
    if kind == "bethe_hessian":
        return _bethe_hessian(network, r)
    return _BUILDERS[kind](network)


def _kind_of(parameter: str) -> str:
    return next(kind for kind, name in _PARAMETRIZED.items() if name == parameter)
