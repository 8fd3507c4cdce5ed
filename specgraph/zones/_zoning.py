"""``find_zones``: from a network to a zoning with its evidence.

Steps for each connected component (a zone never spans two):

1. share the requested zones among components (:func:`allocate_zones`);
2. build the component's Laplacian and solve for its ``k_c + 1`` smallest
   eigenpairs (one more than needed, to read the eigengap after ``k_c``);
3. embed nodes by the ``k_c`` smallest eigenvectors, rows normalized;
4. assign zones by k-means;

then number zones by descending size and compute the zone table and the
boundary links.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from .._validation import check_choice, check_int, check_rng
from ..diagnostics import boundary_links, eigengaps, overall_scores, zone_table
from ..eigen import DEFAULT_TOL, METHODS, EigenResult, smallest_eigenpairs
from ..exceptions import ParameterError
from ..network import Network
from ..operators import laplacian
from ._allocate import allocate_zones
from ._assign import kmeans_labels
from ._embedding import normalized_rows

__all__ = ["ComponentSolve", "Zoning", "find_zones", "number_by_size"]

logger = logging.getLogger(__name__)

LAPLACIANS = ("normalized", "random_walk", "combinatorial")
ASSIGNMENTS = ("kmeans",)


@dataclass(frozen=True, eq=False)
class ComponentSolve:
    """The eigen-solve of one connected component."""

    component: int
    nodes: np.ndarray
    zones: int
    eigen: EigenResult


@dataclass(frozen=True, eq=False)
class Zoning:
    """A zoning of a network and the evidence behind it.

    Attributes
    ----------
    network : Network
    labels : ndarray of int, shape (n_nodes,)
        Zone of each node; zones numbered ``0..k-1`` by descending size
        (node count, or summed node size when the network has sizes).
    zones : pandas.DataFrame
        Per-zone figures (:func:`specgraph.diagnostics.zone_table`).
    boundary : pandas.DataFrame
        Links between zones (:func:`specgraph.diagnostics.boundary_links`).
    solves : tuple of ComponentSolve
        The eigen-solve of every component that was split.
    scores : dict
        Whole-zoning figures (:func:`specgraph.diagnostics.overall_scores`).
    parameters : dict
        The options used.
    warnings : tuple of str
        What the user should know (components, raised zone counts...).
    """

    network: Network
    labels: np.ndarray
    zones: pd.DataFrame
    boundary: pd.DataFrame
    solves: tuple[ComponentSolve, ...]
    scores: dict[str, Any]
    parameters: dict[str, Any]
    warnings: tuple[str, ...] = field(default=())

    @property
    def n_zones(self) -> int:
        return len(self.zones)

    def to_frame(self) -> pd.DataFrame:
        """``node, zone`` table, in network row order."""
        return pd.DataFrame({"node": self.network.node_ids, "zone": self.labels})

    def spectrum(self) -> pd.DataFrame:
        """Eigenvalues and scaled residuals of every component solve.

        Columns ``index`` (0 for the trivial pair of the component),
        ``eigenvalue``, ``residual``, ``component``, ``gap_after`` (distance to
        the next eigenvalue; empty for the last).
        """
        frames = []
        for solve in self.solves:
            values = solve.eigen.values
            gaps = np.append(eigengaps(values), np.nan)
            frames.append(
                pd.DataFrame(
                    {
                        "index": np.arange(values.size),
                        "eigenvalue": values,
                        "residual": solve.eigen.residuals,
                        "component": solve.component,
                        "gap_after": gaps,
                    }
                )
            )
        columns = ["index", "eigenvalue", "residual", "component", "gap_after"]
        return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame(columns=columns)


def number_by_size(labels: np.ndarray, weights: np.ndarray) -> np.ndarray:
    """Renumber zones ``0..k-1`` by descending size, ties by first node.

    Examples
    --------
    >>> number_by_size(np.array([5, 5, 2, 9, 9, 9]), np.ones(6)).tolist()
    [1, 1, 2, 0, 0, 0]
    """
    _, first, compact = np.unique(labels, return_index=True, return_inverse=True)
    size = np.bincount(compact, weights=weights)
    order = np.lexsort((first, -size))
    new = np.empty_like(order)
    new[order] = np.arange(order.size)
    return new[compact].astype(np.int64)


def _zones_per_component(network: Network, k: int) -> tuple[np.ndarray, list[str]]:
    labels = network.component_labels
    c = network.n_components
    notes = []
    if c > 1:
        notes.append(f"the network has {c} connected components; each is zoned on its own")
    if k < c:
        notes.append(
            f"zones={k} is fewer than the {c} connected components; "
            f"raised to {c}, one zone per component at least"
        )
        k = c
    nodes = np.bincount(labels, minlength=c)
    weight = np.bincount(labels, weights=network.node_weights, minlength=c)
    return allocate_zones(weight, nodes, k), notes


def find_zones(
    network: Network,
    zones: int,
    *,
    laplacian_kind: str = "normalized",
    assign: str = "kmeans",
    eigen_method: str = "auto",
    tol: float = DEFAULT_TOL,
    maxiter: int | None = None,
    rng: Any = None,
) -> Zoning:
    """Split a network into ``zones`` zones by spectral clustering.

    Parameters
    ----------
    network : Network
    zones : int
        Number of zones, ``1 <= zones <= n_nodes``. Raised (with a warning) to
        the number of connected components when smaller.

    Returns
    -------
    Zoning

    Raises
    ------
    ParameterError
        For an option outside its domain.
    ConvergenceError
        When an eigen-solve misses ``tol``; no zoning is returned.

    Other Parameters
    ----------------
    laplacian_kind : {'normalized', 'random_walk', 'combinatorial'}, default='normalized'
        Operator whose eigenvectors embed the nodes.
    assign : {'kmeans'}, default='kmeans'
        How embedded nodes become zones.
    eigen_method : {'auto', 'dense', 'lanczos', 'lanczos_flip', 'multilevel'}, default='auto'
        See :func:`specgraph.smallest_eigenpairs`.
    tol : float, default=1e-6
        Bound on scaled eigen-residuals.
    maxiter : int, optional
        Iteration cap of iterative eigen-solvers.
    rng : None, int or numpy.random.Generator
        Seeds start vectors and k-means.

    Notes
    -----
    This is normalized spectral clustering in the form of Ng, Jordan and
    Weiss (NIPS 2001) per connected component; see :mod:`specgraph.zones`.

    Examples
    --------
    >>> from specgraph import gallery
    >>> zoning = find_zones(gallery.barbell(5), 2, rng=0)
    >>> zoning.labels.tolist()
    [0, 0, 0, 0, 0, 1, 1, 1, 1, 1]
    >>> zoning.boundary[["source", "target"]].to_numpy().tolist()
    [['4', '5']]
    """
    zones = check_int(zones, "zones", minimum=1, maximum=max(network.n_nodes, 1))
    check_choice(laplacian_kind, "laplacian_kind", LAPLACIANS)
    check_choice(assign, "assign", ASSIGNMENTS)
    check_choice(eigen_method, "eigen_method", METHODS)
    if network.n_nodes == 0:
        raise ParameterError("network must have at least one node; got an empty network.")
    generator = check_rng(rng)
    per_component, notes = _zones_per_component(network, zones)
    raw = np.zeros(network.n_nodes, dtype=np.int64)
    solves = []
    offset = 0
    for comp, k_c in enumerate(per_component.tolist()):
        rows = np.flatnonzero(network.component_labels == comp)
        if k_c > 1:
            sub = network.subnetwork(rows)
            eig = smallest_eigenpairs(
                laplacian(sub, kind=laplacian_kind),  # type: ignore[arg-type]
                min(k_c + 1, rows.size),
                method=eigen_method,
                tol=tol,
                maxiter=maxiter,
                rng=generator,
            )
            solves.append(ComponentSolve(comp, rows, k_c, eig))
            local = kmeans_labels(normalized_rows(eig.vectors[:, :k_c]), k_c, generator)
            raw[rows] = local + offset
        else:
            raw[rows] = offset
        offset += k_c
    labels = number_by_size(raw, network.node_weights)
    table = zone_table(network, labels)
    return Zoning(
        network=network,
        labels=labels,
        zones=table,
        boundary=boundary_links(network, labels),
        solves=tuple(solves),
        scores=overall_scores(table),
        parameters={
            "zones": zones,
            "laplacian": laplacian_kind,
            "assign": assign,
            "eigen_method": eigen_method,
            "tol": tol,
            "maxiter": maxiter,
        },
        warnings=tuple(notes),
    )
