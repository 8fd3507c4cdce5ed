"""A scikit-learn estimator over :func:`specgraph.find_zones`: :class:`ZoneSplitter`.

``ZoneSplitter`` fits on an affinity (adjacency) matrix, by default, or on a
feature matrix through an affinity built from it, and exposes the zoning as
``labels_``. It follows the scikit-learn estimator contract (Buitinck et al.
[1]_): parameters are stored unchanged by ``__init__`` and validated by
``fit``, so :func:`sklearn.base.clone`, ``get_params`` and ``set_params`` work;
the fitted attributes end with an underscore.

Inputs by ``affinity``:

* ``'precomputed'`` (default): ``X`` is a square, symmetric, non-negative
  affinity matrix, dense or sparse (any scipy sparse format); bigger means more
  strongly tied. The diagonal is ignored (a self-loop says nothing about zones).
  This is the network itself, as :meth:`specgraph.Network.from_scipy` reads it.
* ``'rbf'``: ``X`` holds one row of features per node and the affinity is the
  Gaussian kernel :math:`\\exp(-\\gamma \\lVert x_i - x_j \\rVert^2)`
  (:func:`sklearn.metrics.pairwise.rbf_kernel`): a dense ``n x n`` matrix, so
  for a few thousand rows at most.
* ``'nearest_neighbors'``: the symmetrized k-nearest-neighbour connectivity
  :math:`(C + C^T)/2` (:func:`sklearn.neighbors.kneighbors_graph`), sparse.

scikit-learn's estimator checks (``sklearn.utils.estimator_checks``) run in
``tests/test_estimator.py`` on one instance of each affinity. With
``affinity='precomputed'`` the estimator declares the ``pairwise`` and
``positive_only`` input tags, so the checks hand it Gram matrices of
non-negative features; two checks are expected to fail there, and only there,
because they feed a raw ``n x 2`` feature matrix to a precomputed estimator:
``check_clustering`` (both of its variants: plain and read-only memory map),
which is run on the feature-matrix instances instead. Every other check passes
on all three instances (see :func:`expected_failed_checks`), except
``check_array_api_input``, which scikit-learn itself skips unless the
SCIPY_ARRAY_API environment variable is set (the estimator does not declare
array API support: the eigen-solvers are numpy and scipy code).

References
----------
.. [1] L. Buitinck et al., "API design for machine learning software:
   experiences from the scikit-learn project", ECML PKDD Workshop, 2013,
   arXiv:1309.0238.
.. [2] U. von Luxburg, "A tutorial on spectral clustering", Statistics and
   Computing 17, 395-416, 2007, :doi:`10.1007/s11222-007-9033-z`.
"""

from __future__ import annotations

import contextlib
from collections.abc import Mapping
from dataclasses import dataclass, fields
from typing import Any

import numpy as np
import scipy.sparse as sp
from sklearn.base import BaseEstimator, ClusterMixin
from sklearn.metrics.pairwise import rbf_kernel
from sklearn.neighbors import kneighbors_graph
from sklearn.utils.validation import validate_data

from ._validation import (
    POSITIVE,
    TOLERANCE,
    Boolean,
    Constraint,
    Interval,
    Options,
    check_params,
    parameter_error,
)
from .eigen import DEFAULT_TOL, METHODS
from .exceptions import InputError, ParameterError
from .network import Network
from .zones import (
    ASSIGNMENTS,
    OPERATOR_KINDS,
    TREE_TREATMENTS,
    Zoning,
    find_zones,
    parse_zone_spec,
)

__all__ = ["AFFINITIES", "ZoneSplitter", "expected_failed_checks"]

#: The ways ``X`` becomes an affinity matrix.
AFFINITIES = ("precomputed", "rbf", "nearest_neighbors")

#: What each parameter of :class:`ZoneSplitter` accepts, checked at fit time as
#: scikit-learn checks its estimators' ``_parameter_constraints`` (``n_zones``
#: depends on the number of samples; ``random_state`` is checked as scikit-learn
#: checks it).
_PARAMETERS: dict[str, list[Constraint]] = {
    "affinity": [Options(AFFINITIES)],
    "operator": [Options(("auto", *OPERATOR_KINDS))],
    "assign": [Options(("auto", *ASSIGNMENTS))],
    "trees": [Options(("auto", *TREE_TREATMENTS))],
    "eigen_method": [Options(METHODS)],
    "refine": [Boolean()],
    "gamma": [POSITIVE],
    "tol": [TOLERANCE],
    "n_neighbors": [Interval(int, 1, None)],
}

#: Largest seed drawn from a legacy :class:`numpy.random.RandomState` passed
#: as ``random_state`` (the range of a 32-bit seed, as scikit-learn draws them).
_SEED_BOUND = 2**32

#: Estimator checks that cannot pass with ``affinity='precomputed'``, and why.
_PRECOMPUTED_FAILURES = {
    "check_clustering": (
        "feeds a raw 50 x 2 feature matrix to a precomputed estimator, which needs a "
        "square affinity; run on the 'rbf' and 'nearest_neighbors' instances instead"
    ),
}


def expected_failed_checks(estimator: Any) -> dict[str, str]:
    """Estimator checks expected to fail for ``estimator``, each with the reason.

    For :func:`sklearn.utils.estimator_checks.parametrize_with_checks`'s
    ``expected_failed_checks`` argument: ``check_clustering`` with
    ``affinity='precomputed'``, nothing otherwise.
    """
    if getattr(estimator, "affinity", None) == "precomputed":
        return dict(_PRECOMPUTED_FAILURES)
    return {}


def _generator_seed(random_state: Any) -> Any:
    """``random_state`` in a form :func:`specgraph._validation.check_rng` takes.

    A legacy ``RandomState`` (scikit-learn's convention) gives one 32-bit seed
    drawn from it, so that repeated fits with the same instance differ as
    they do in scikit-learn; None, ints and Generators pass unchanged.
    """
    if isinstance(random_state, np.random.RandomState):
        return int(random_state.randint(_SEED_BOUND, dtype=np.int64))
    return random_state


def _plain(value: Any) -> Any:
    """``value`` with read-only mapping proxies turned into dicts, recursively."""
    if isinstance(value, Mapping):
        return {key: _plain(item) for key, item in value.items()}
    return value


@dataclass(frozen=True)
class _ZoningState:
    """A :class:`Zoning` in picklable pieces: the network's fields and the rest."""

    network: dict[str, Any]
    rest: dict[str, Any]

    @classmethod
    def of(cls, zoning: Zoning) -> _ZoningState:
        # Every constructor field of the network, whatever it holds, so that
        # fields added later are carried too; the notes become a plain dict.
        net = zoning.network
        network = {f.name: getattr(net, f.name) for f in fields(net) if f.init}
        network["notes"] = _plain(net.notes)
        rest = {f.name: getattr(zoning, f.name) for f in fields(zoning) if f.name != "network"}
        return cls(network, rest)

    def rebuild(self) -> Zoning:
        return Zoning(network=Network(**self.network), **self.rest)


class ZoneSplitter(ClusterMixin, BaseEstimator):
    """Spectral zones of an affinity matrix, as a scikit-learn clusterer.

    A thin layer over :func:`specgraph.find_zones`: ``fit`` builds a
    :class:`~specgraph.Network` from ``X`` and keeps the resulting
    :class:`~specgraph.Zoning` in ``zoning_``. With the same matrix and seed,
    ``labels_`` equals ``find_zones(Network.from_scipy(X), ...).labels``.

    Parameters
    ----------
    n_zones : int, 'auto', str or range, default='auto'
        Number of zones, as ``zones`` of :func:`specgraph.find_zones`:
        an int, ``'auto'`` (from the eigengaps), a range of candidate
        counts, or the text ``'8:20'`` (inclusive).
    affinity : {'precomputed', 'rbf', 'nearest_neighbors'}, default='precomputed'
        How ``X`` becomes the network (see the module notes).
    operator : {'auto', 'normalized', 'random_walk', 'combinatorial', \
'regularized', 'bethe_hessian'}, default='auto'
        Operator whose smallest eigenvectors embed the nodes.
    assign : {'auto', 'kmeans', 'qr', 'bisection', 'kmeans_rw'}, default='auto'
        How embedded nodes become zones.
    refine : bool, default=True
        Improve the boundary by local moves that lower the normalized cut.
    random_state : None, int, numpy.random.Generator or RandomState, default=None
        Seeds start vectors, k-means and tie-breaks: passed to ``find_zones``
        as ``rng``. A ``RandomState`` gives one seed drawn from it.

    Other Parameters
    ----------------
    gamma : float, default=1.0
        Kernel coefficient for ``affinity='rbf'``; ignored otherwise.
    n_neighbors : int, default=10
        Neighbours per row for ``affinity='nearest_neighbors'`` (capped at
        ``n_samples - 1``); ignored otherwise.
    trees : {'auto', 'attach', 'keep'}, default='auto'
        Treatment of dangling trees, as in :func:`specgraph.find_zones`.
    eigen_method : {'auto', 'dense', 'lanczos', 'lanczos_flip', 'multilevel'}, default='auto'
        Eigen-solver (:func:`specgraph.smallest_eigenpairs`).
    tol : float, default=1e-6
        Bound on scaled eigen-residuals.

    Attributes
    ----------
    labels_ : ndarray of int64, shape (n_samples,)
        Zone of each row of ``X``, numbered ``0..n_zones_-1`` by descending size.
    n_zones_ : int
        Number of zones found.
    eigenvalues_ : ndarray of float
        Eigenvalues computed by the solves, component after component
        (``zoning_.spectrum()['eigenvalue']``); for a connected network the
        smallest ``n_zones_ + 1`` eigenvalues of the operator. Empty when no
        component needed splitting.
    affinity_matrix_ : scipy.sparse.csr_array, shape (n_samples, n_samples)
        The affinities zoned (diagonal removed).
    zoning_ : Zoning
        The full result: zone table, boundary links, decisions, warnings.
    n_features_in_ : int
        Number of columns of ``X``.

    See Also
    --------
    specgraph.find_zones : the function this estimator wraps.

    Notes
    -----
    The zones minimize a relaxed normalized cut through the smallest
    eigenvectors of a graph Laplacian (von Luxburg [2]_ in the module
    references); zones are decision support only, to be validated in a
    hydraulic, power-flow or traffic model before any action on a network.

    Examples
    --------
    >>> import networkx as nx
    >>> from sklearn.base import clone
    >>> adjacency = nx.to_scipy_sparse_array(nx.barbell_graph(5, 0))
    >>> model = ZoneSplitter(n_zones=2, random_state=0).fit(adjacency)
    >>> model.labels_.tolist()
    [0, 0, 0, 0, 0, 1, 1, 1, 1, 1]
    >>> clone(model).get_params()["n_zones"]
    2
    """

    def __init__(
        self,
        n_zones: int | str | range = "auto",
        *,
        affinity: str = "precomputed",
        operator: str = "auto",
        assign: str = "auto",
        refine: bool = True,
        random_state: Any = None,
        gamma: float = 1.0,
        n_neighbors: int = 10,
        trees: str = "auto",
        eigen_method: str = "auto",
        tol: float = DEFAULT_TOL,
    ) -> None:
        self.n_zones = n_zones
        self.affinity = affinity
        self.operator = operator
        self.assign = assign
        self.refine = refine
        self.random_state = random_state
        self.gamma = gamma
        self.n_neighbors = n_neighbors
        self.trees = trees
        self.eigen_method = eigen_method
        self.tol = tol

    def __sklearn_tags__(self) -> Any:
        tags = super().__sklearn_tags__()
        precomputed = self.affinity == "precomputed"
        tags.input_tags.pairwise = precomputed
        tags.input_tags.positive_only = precomputed
        tags.input_tags.sparse = True
        return tags

    # ------------------------------------------------------------ validation
    def _check_parameters(self) -> None:
        check_params(self.get_params(deep=False), _PARAMETERS)

    def _zone_spec(self, n_samples: int) -> int | str | range:
        """``n_zones`` as ``find_zones`` takes it, refused by its own name when out of domain.

        The bound on an integer count is the number of samples, known only at fit time.
        """
        spec = self.n_zones
        if Interval(int, 1, n_samples).accepts(spec):
            return int(spec)  # type: ignore[arg-type]  # an Integral, just checked
        if isinstance(spec, range):
            return spec
        if isinstance(spec, str):
            with contextlib.suppress(ParameterError):
                return parse_zone_spec(spec)
        expected = f"an int in 1..n_samples={n_samples}, 'auto', a range or text like '8:20'"
        raise parameter_error("n_zones", expected, spec)

    def _affinity(self, X: Any) -> sp.csr_array:
        """The affinity matrix of validated ``X`` (diagonal kept; the network drops it)."""
        n = X.shape[0]
        if self.affinity == "precomputed":
            if X.shape != (n, n):
                raise InputError(
                    f"X must be a square affinity matrix with affinity='precomputed'; "
                    f"got shape {X.shape}. Pass a feature matrix with affinity='rbf' "
                    "or 'nearest_neighbors' instead"
                )
            matrix = sp.csr_array(X, dtype=np.float64)
            if matrix.nnz and matrix.data.min() < 0:
                raise InputError(
                    "Negative values in data passed to ZoneSplitter.fit: affinities must "
                    f"be >= 0 (bigger = more strongly tied); got {matrix.data.min():g}"
                )
            return matrix
        if self.affinity == "rbf":
            kernel = rbf_kernel(X, gamma=self.gamma)
            return sp.csr_array(0.5 * (kernel + kernel.T))  # exact symmetry for the network
        neighbors = min(int(self.n_neighbors), n - 1)
        if neighbors < 1:
            return sp.csr_array((n, n), dtype=np.float64)
        connectivity = sp.csr_array(kneighbors_graph(X, neighbors, include_self=False))
        return sp.csr_array(0.5 * (connectivity + connectivity.T))

    # ------------------------------------------------------------------- fit
    def fit(self, X: Any, y: Any = None) -> ZoneSplitter:
        """Zone the network of ``X``.

        Parameters
        ----------
        X : array-like or sparse matrix, shape (n_samples, n_samples) or \
(n_samples, n_features)
            The affinity matrix (``affinity='precomputed'``) or the features.
        y : ignored
            Present for the scikit-learn API.

        Returns
        -------
        self : ZoneSplitter

        Raises
        ------
        ParameterError
            For a parameter outside its domain.
        InputError
            For a non-square, negative or asymmetric affinity matrix.
        """
        self._check_parameters()
        X = validate_data(
            self,
            X,
            accept_sparse=["csr", "csc", "coo"],
            dtype=[np.float64, np.float32],
            ensure_min_samples=1,
        )
        matrix = self._affinity(X)
        spec = self._zone_spec(X.shape[0])
        network = Network.from_scipy(matrix)
        zoning = find_zones(
            network,
            spec,
            operator=self.operator,
            assign=self.assign,
            trees=self.trees,
            # Every sample gets one of the zones asked for, as scikit-learn clusterers
            # do: no unzoned fragments group (a component still gets a zone of its own).
            fragments="zone",
            refine=bool(self.refine),
            eigen_method=self.eigen_method,
            tol=float(self.tol),
            rng=_generator_seed(self.random_state),
        )
        self.zoning_: Zoning = zoning
        self.labels_: np.ndarray = zoning.labels.astype(np.int64, copy=True)
        self.n_zones_: int = int(zoning.n_zones)
        self.eigenvalues_: np.ndarray = zoning.spectrum()["eigenvalue"].to_numpy(dtype=np.float64)
        self.affinity_matrix_: sp.csr_array = network.adjacency
        return self

    # ---------------------------------------------------------------- pickle
    def __getstate__(self) -> dict[str, Any]:
        # A Network keeps its notes in a read-only mapping proxy, which pickle
        # refuses; the fitted zoning is stored as plain fields and rebuilt.
        state = dict(super().__getstate__())
        zoning = state.get("zoning_")
        if isinstance(zoning, Zoning):
            state["zoning_"] = _ZoningState.of(zoning)
        return state

    def __setstate__(self, state: dict[str, Any]) -> None:
        state = dict(state)
        saved = state.get("zoning_")
        if isinstance(saved, _ZoningState):
            state["zoning_"] = saved.rebuild()
        super().__setstate__(state)

    def fit_predict(self, X: Any, y: Any = None, **kwargs: Any) -> np.ndarray:
        """Fit on ``X`` and return ``labels_``.

        Parameters
        ----------
        X : array-like or sparse matrix
            As for :meth:`fit`.
        y : ignored
            Present for the scikit-learn API.

        Returns
        -------
        labels : ndarray of int64, shape (n_samples,)
        """
        return self.fit(X).labels_
