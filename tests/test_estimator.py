"""ZoneSplitter: scikit-learn's own estimator checks, clone safety, agreement with find_zones.

Estimator checks expected to fail (strict: ``xfail_strict = true`` in the pytest
options of ``pyproject.toml``, which scikit-learn's marks follow, so each must really
fail): with ``affinity='precomputed'`` only, ``check_clustering`` and its
read-only memory-map variant, because they feed a raw 50 x 2 feature matrix to a
precomputed estimator, which needs a square affinity; the same check passes on
the ``'rbf'`` and ``'nearest_neighbors'`` instances. ``check_array_api_input``
is skipped by scikit-learn itself unless SCIPY_ARRAY_API is set (the estimator
does not declare array API support).
"""

from __future__ import annotations

import pickle

import networkx as nx
import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp
from sklearn.base import clone
from sklearn.cluster import SpectralClustering
from sklearn.metrics import adjusted_rand_score
from sklearn.metrics.pairwise import rbf_kernel
from sklearn.utils.estimator_checks import parametrize_with_checks

from specgraph import Network, find_zones
from specgraph.estimator import ZoneSplitter, expected_failed_checks
from specgraph.exceptions import InputError, ParameterError


@parametrize_with_checks(
    [
        ZoneSplitter(),
        ZoneSplitter(affinity="rbf"),
        ZoneSplitter(affinity="nearest_neighbors"),
    ],
    expected_failed_checks=expected_failed_checks,
)
def test_sklearn_estimator_checks(estimator, check):
    # Source: scikit-learn's estimator checks (sklearn.utils.estimator_checks).
    check(estimator)


def planted_blocks(seed: int = 3) -> tuple[nx.Graph, np.ndarray]:
    """networkx planted partition: 4 groups of 40, p_in 0.3, p_out 0.01.

    In the scaling of Decelle et al. (Phys. Rev. E 84, 066106, 2011), p = c / N with
    N = 160: c_in = 48, c_out = 1.6, c = (48 + 3 * 1.6) / 4 = 13.2, and
    |c_in - c_out| = 46.4 is far above the detectability threshold q sqrt(c) = 14.5.
    """
    graph = nx.planted_partition_graph(4, 40, 0.3, 0.01, seed=seed)
    truth = np.repeat(np.arange(4), 40)
    return graph, truth


def test_planted_partition_recovered_against_truth_and_sklearn():
    graph, truth = planted_blocks()
    adjacency = nx.to_scipy_sparse_array(graph, nodelist=range(160), format="csr")
    model = ZoneSplitter(random_state=0).fit(adjacency)
    # Truth from networkx.planted_partition_graph; ARI from sklearn.metrics.
    assert model.n_zones_ == 4
    assert adjusted_rand_score(truth, model.labels_) >= 0.95
    # Reference implementation: scikit-learn's SpectralClustering on the same affinity.
    reference = SpectralClustering(4, affinity="precomputed", random_state=0).fit(
        adjacency.toarray()
    )
    assert adjusted_rand_score(reference.labels_, model.labels_) >= 0.95


@pytest.mark.parametrize("form", ["dense", "csr", "coo", "frame"])
def test_labels_equal_find_zones_with_the_same_seed(weighted_graph, form):
    graph = weighted_graph("geometric", 80, seed=4)
    dense = nx.to_numpy_array(graph, nodelist=sorted(graph), weight="weight")
    X = {
        "dense": dense,
        "csr": sp.csr_array(dense),
        "coo": sp.coo_matrix(dense),
        "frame": pd.DataFrame(dense, columns=[f"n{i}" for i in range(dense.shape[0])]),
    }[form]
    model = ZoneSplitter(3, operator="normalized", random_state=11).fit(X)
    direct = find_zones(Network.from_scipy(dense), 3, operator="normalized", rng=11)
    np.testing.assert_array_equal(model.labels_, direct.labels)
    np.testing.assert_allclose(model.eigenvalues_, direct.spectrum()["eigenvalue"])
    assert model.n_zones_ == direct.n_zones == 3
    assert model.labels_.dtype == np.int64


def test_fit_predict_equals_labels_and_affinity_matrix_drops_the_diagonal():
    rng = np.random.default_rng(2)
    X = rng.normal(size=(30, 2)) + np.repeat([[0, 0], [6, 0]], 15, axis=0)
    model = ZoneSplitter(2, affinity="rbf", gamma=0.5, random_state=1)
    labels = model.fit_predict(X)
    np.testing.assert_array_equal(labels, model.labels_)
    # Reference: sklearn.metrics.pairwise.rbf_kernel, self-loops left out.
    expected = rbf_kernel(X, gamma=0.5)
    np.fill_diagonal(expected, 0.0)
    np.testing.assert_allclose(model.affinity_matrix_.toarray(), expected, rtol=1e-12)
    # Two blobs 6 standard deviations apart: the planted halves (common practice).
    assert adjusted_rand_score(np.repeat([0, 1], 15), labels) == 1.0


def test_clone_get_params_set_params_round_trip():
    model = ZoneSplitter("2:5", operator="combinatorial", refine=False, random_state=7)
    params = model.get_params()
    assert params["n_zones"] == "2:5"
    assert params["operator"] == "combinatorial"
    assert params["random_state"] == 7
    twin = clone(model)
    assert twin is not model
    assert twin.get_params() == params
    twin.set_params(n_zones=3, assign="qr")
    assert twin.get_params()["n_zones"] == 3
    assert model.get_params()["n_zones"] == "2:5"  # the original is untouched
    fitted = clone(model).fit(nx.to_scipy_sparse_array(nx.barbell_graph(6, 0)))
    assert not hasattr(clone(fitted), "labels_")


def test_pickle_keeps_the_fitted_zoning():
    adjacency = nx.to_scipy_sparse_array(nx.barbell_graph(5, 1))
    model = ZoneSplitter(2, random_state=0).fit(adjacency)
    again = pickle.loads(pickle.dumps(model))
    np.testing.assert_array_equal(again.labels_, model.labels_)
    np.testing.assert_array_equal(again.zoning_.labels, model.zoning_.labels)
    assert again.zoning_.network.n_links == model.zoning_.network.n_links
    pd.testing.assert_frame_equal(again.zoning_.boundary, model.zoning_.boundary)


def test_legacy_random_state_is_accepted_and_reproducible():
    adjacency = nx.to_scipy_sparse_array(nx.barbell_graph(5, 0))
    a = ZoneSplitter(2, random_state=np.random.RandomState(4)).fit_predict(adjacency)
    b = ZoneSplitter(2, random_state=np.random.RandomState(4)).fit_predict(adjacency)
    np.testing.assert_array_equal(a, b)


@pytest.mark.parametrize(
    ("matrix", "message"),
    [
        (np.ones((3, 4)), "square affinity matrix"),
        (np.array([[0.0, -1.0], [-1.0, 0.0]]), "Negative values in data"),
        (np.array([[0.0, 1.0], [2.0, 0.0]]), "symmetric"),
    ],
    ids=["non-square", "negative", "asymmetric"],
)
def test_bad_affinity_matrices_are_refused(matrix, message):
    with pytest.raises(InputError, match=message):
        ZoneSplitter(1).fit(matrix)


@pytest.mark.parametrize(
    ("params", "name"),
    [
        ({"n_zones": 0}, "n_zones"),
        ({"n_zones": 9}, "n_zones"),
        ({"n_zones": "many"}, "n_zones"),
        ({"affinity": "cosine"}, "affinity"),
        ({"operator": "adjacency"}, "operator"),
        ({"gamma": -1.0}, "gamma"),
        ({"n_neighbors": 0}, "n_neighbors"),
        ({"refine": "yes"}, "refine"),
    ],
    ids=lambda v: str(v),
)
def test_bad_parameters_are_refused_at_fit_naming_them(params, name):
    model = ZoneSplitter(**params)  # no error at construction (sklearn convention)
    with pytest.raises(ParameterError, match=f"^{name} must be"):
        model.fit(nx.to_scipy_sparse_array(nx.path_graph(4)))
