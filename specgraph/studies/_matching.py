"""Matching a run's zones to reference zones by maximum overlap.

Zone numbers are arbitrary, so two zonings are compared zone by zone only
after each zone of one is paired with a zone of the other: the pairing that
maximizes the total overlap (an assignment problem on the contingency table).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import linear_sum_assignment

from .._figures import check_labels

__all__ = ["ZoneMatch", "match_zones"]


@dataclass(frozen=True, eq=False)
class ZoneMatch:
    """One run's zones matched to the reference zones.

    Attributes
    ----------
    mapping : ndarray of int, shape (k_ref,)
        Run zone matched to each reference zone, ``-1`` when the run has fewer
        zones and this one was left unmatched.
    stayed : ndarray of bool, shape (n_nodes,)
        Whether each node's run zone is the one matched to its reference zone.
    overlap : ndarray of int, shape (k_ref,)
        Nodes each reference zone shares with its matched run zone.
    jaccard : ndarray of float, shape (k_ref,)
        ``|S ∩ T| / |S ∪ T|`` of each reference zone ``S`` and its matched
        zone ``T`` (0 when unmatched).
    """

    mapping: np.ndarray
    stayed: np.ndarray
    overlap: np.ndarray
    jaccard: np.ndarray


def match_zones(reference: np.ndarray, labels: np.ndarray) -> ZoneMatch:
    """Match a run's zones to reference zones by maximum total overlap.

    The contingency table :math:`C_{st} = |S_s \\cap T_t|` is built in one
    ``np.bincount``; the one-to-one matching that maximizes the total overlap
    is the linear assignment problem on it (Kuhn's Hungarian method, here
    :func:`scipy.optimize.linear_sum_assignment`). The two zonings may have
    different zone counts: the extra zones of the larger one stay unmatched.

    Parameters
    ----------
    reference, labels : ndarray of int, shape (n_nodes,)
        Zones numbered from 0.

    Returns
    -------
    ZoneMatch

    Raises
    ------
    ParameterError
        From the one label check (:func:`specgraph._figures.check_labels`):
        labels that are not one integer zone ``>= 0`` per node of ``reference``.

    Examples
    --------
    >>> m = match_zones(np.array([0, 0, 0, 1, 1, 2]), np.array([1, 1, 0, 0, 0, 0]))
    >>> m.mapping.tolist(), m.stayed.tolist()
    ([1, 0, -1], [True, True, False, True, True, False])
    """
    reference = check_labels(reference, name="reference")
    labels = check_labels(labels, n_nodes=reference.size)
    k_ref = int(reference.max()) + 1 if reference.size else 0
    k_run = int(labels.max()) + 1 if labels.size else 0
    table = np.bincount(reference * k_run + labels, minlength=k_ref * k_run)
    table = table.reshape(k_ref, k_run)
    rows, cols = linear_sum_assignment(table, maximize=True)
    mapping = np.full(k_ref, -1, dtype=np.int64)
    mapping[rows] = cols
    overlap = np.zeros(k_ref, dtype=np.int64)
    overlap[rows] = table[rows, cols]
    ref_size = table.sum(axis=1)
    run_size = table.sum(axis=0)
    union = ref_size.astype(np.float64)
    union[rows] += run_size[cols] - overlap[rows]
    jaccard = np.divide(overlap, union, out=np.zeros(k_ref), where=union > 0)
    stayed = labels == mapping[reference]
    return ZoneMatch(mapping=mapping, stayed=stayed, overlap=overlap, jaccard=jaccard)
