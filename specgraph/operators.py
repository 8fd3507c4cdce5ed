"""Graph Laplacians as operators for the eigen-solve.

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

Isolated nodes follow the convention of scipy's ``csgraph.laplacian`` and
networkx: their row of ``N`` is zero, so each isolated node is a component with
eigenvalue 0 like any other.

References
----------
.. [1] F. R. K. Chung, *Spectral Graph Theory*, CBMS 92, AMS, 1997.
.. [2] J. Shi and J. Malik, "Normalized cuts and image segmentation",
   IEEE TPAMI 22(8):888-905, 2000. :doi:`10.1109/34.868688`
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Literal

import numpy as np
import scipy.sparse as sp

from ._validation import check_choice
from .network import Network

__all__ = ["GraphOperator", "LaplacianKind", "laplacian"]

LaplacianKind = Literal["combinatorial", "normalized", "random_walk"]


@dataclass(frozen=True, eq=False)
class GraphOperator:
    """A symmetric positive semi-definite graph operator and what is known of it.

    Attributes
    ----------
    matrix : scipy.sparse.csr_array
        The symmetric matrix the eigen-solvers work on (for ``random_walk``,
        the similar normalized Laplacian).
    kind : str
        Which Laplacian this is.
    norm_bound : float
        An upper bound on the 2-norm of ``matrix`` (Gershgorin: twice the
        largest weighted degree for ``L``, 2 for ``N``); residuals are scaled
        by it.
    null_basis : ndarray of shape (n, c)
        Orthonormal basis of the known null space, one column per connected
        component: the trivial eigenvectors that solvers deflate.
    degrees : ndarray of shape (n,)
        Weighted degrees of the network.
    """

    matrix: sp.csr_array
    kind: str
    norm_bound: float
    null_basis: np.ndarray
    degrees: np.ndarray

    @property
    def shape(self) -> tuple[int, int]:
        return self.matrix.shape

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
    return GraphOperator(matrix, "combinatorial", bound, basis, d)


def _normalized(network: Network, kind: str = "normalized") -> GraphOperator:
    d = network.degrees
    s = _inverse_sqrt(d)
    scaled = sp.diags_array(s) @ network.adjacency @ sp.diags_array(s)
    matrix = (sp.diags_array((d > 0).astype(float)) - scaled).tocsr()
    basis = _component_basis(network, np.sqrt(d))
    return GraphOperator(matrix, kind, 2.0, basis, d)


def _random_walk(network: Network) -> GraphOperator:
    return _normalized(network, "random_walk")


_BUILDERS: dict[str, Callable[[Network], GraphOperator]] = {
    "combinatorial": _combinatorial,
    "normalized": _normalized,
    "random_walk": _random_walk,
}


def laplacian(network: Network, *, kind: LaplacianKind = "normalized") -> GraphOperator:
    """Build a Laplacian of ``network`` as a :class:`GraphOperator`.

    Parameters
    ----------
    network : Network
        The network.
    kind : {'normalized', 'combinatorial', 'random_walk'}, default='normalized'
        ``'combinatorial'`` is :math:`L = D - A`; ``'normalized'`` is
        :math:`I - D^{-1/2} A D^{-1/2}`; ``'random_walk'`` is
        :math:`I - D^{-1} A`, represented by its symmetric similar matrix.

    Returns
    -------
    GraphOperator

    Examples
    --------
    >>> from specgraph.gallery import path
    >>> op = laplacian(path(3), kind="combinatorial")
    >>> op.matrix.toarray()
    array([[ 1., -1.,  0.],
           [-1.,  2., -1.],
           [ 0., -1.,  1.]])
    """
    check_choice(kind, "kind", _BUILDERS)
    return _BUILDERS[kind](network)
