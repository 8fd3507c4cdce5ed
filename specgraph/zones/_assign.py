"""Turning embedded points into zone labels."""

from __future__ import annotations

import numpy as np

__all__ = ["KMEANS_RESTARTS", "kmeans_labels"]

#: k-means restarts from different seeds, keeping the lowest inertia: the
#: common-practice default of scikit-learn before 1.4, enough for the few
#: well-separated clusters a spectral embedding gives.
KMEANS_RESTARTS = 10


def kmeans_labels(points: np.ndarray, k: int, rng: np.random.Generator) -> np.ndarray:
    """Label points by k-means (scikit-learn, k-means++ starts seeded from ``rng``).

    Examples
    --------
    >>> pts = np.array([[0.0, 0.0], [0.1, 0.0], [5.0, 5.0], [5.1, 5.0]])
    >>> labels = kmeans_labels(pts, 2, np.random.default_rng(0))
    >>> bool(labels[0] == labels[1] != labels[2] == labels[3])
    True
    """
    # Imported here: scikit-learn takes half a second to import, which every
    # command (even --help) would otherwise pay.
    from sklearn.cluster import KMeans

    seed = int(rng.integers(np.iinfo(np.int32).max))
    model = KMeans(n_clusters=k, n_init=KMEANS_RESTARTS, random_state=seed)
    return model.fit_predict(points).astype(np.int64)
