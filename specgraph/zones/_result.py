"""What :func:`~specgraph.zones.find_zones` returns: a :class:`Zoning` and its solves.

Kept apart from the zoning steps so that every step that builds a zoning
(:mod:`._zoning`, :mod:`._trunk`) imports the result type from below.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
import pandas as pd

from .._tables import spectrum_frame
from ..eigen import EigenResult
from ..network import Network
from ._readonly import read_only

__all__ = ["ComponentSolve", "Zoning"]


@dataclass(frozen=True, eq=False)
class ComponentSolve:
    """The eigen-solve of one connected component (of the merged network).

    ``nodes`` and the eigen-solve's arrays are read-only views.
    """

    component: int
    nodes: np.ndarray
    zones: int
    eigen: EigenResult

    def __post_init__(self) -> None:
        eig = self.eigen
        object.__setattr__(self, "nodes", read_only(np.asarray(self.nodes)))
        frozen = {
            name: read_only(getattr(eig, name)) for name in ("values", "vectors", "residuals")
        }
        object.__setattr__(self, "eigen", replace(eig, **frozen))

    def __setstate__(self, state: dict[str, Any]) -> None:
        # Unpickling skips __post_init__ and gives writable arrays: freeze them again.
        self.__dict__.update(state)
        self.__post_init__()


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
    decisions : dict
        Each choice made on the user's behalf or each step that changed the
        zones: ``{"operator": {...}, "zone_count": {...}, ...}``, every entry
        with a ``"reason"`` sentence and its figures.
    warnings : tuple of str
        What the user should know (components, raised zone counts...).

    Notes
    -----
    A zoning is read-only, not only its attributes: ``labels`` (and the
    arrays of :attr:`solves`) are read-only views, so ``zoning.labels[0] = 7``
    raises ``ValueError``; ``scores``, ``parameters`` and ``decisions`` (and
    the dicts and lists inside them) refuse changes with ``TypeError``. The
    records are ``dict`` and ``list`` subclasses, so they read, compare and
    serialize (``json.dumps``, :func:`specgraph.export.run_record`) like
    plain ones; to change one, copy it first (``dict(zoning.parameters)``,
    ``zoning.labels.copy()``). The tables ``zones`` and ``boundary`` are
    pandas DataFrames, which cannot be made read-only: treat them as such
    and work on ``.copy()``.
    """

    network: Network
    labels: np.ndarray
    zones: pd.DataFrame
    boundary: pd.DataFrame
    solves: tuple[ComponentSolve, ...]
    scores: dict[str, Any]
    parameters: dict[str, Any]
    decisions: dict[str, dict[str, Any]] = field(default_factory=dict)
    warnings: tuple[str, ...] = field(default=())

    def __post_init__(self) -> None:
        object.__setattr__(self, "labels", read_only(np.asarray(self.labels)))
        for name in ("scores", "parameters", "decisions"):
            object.__setattr__(self, name, read_only(dict(getattr(self, name))))
        object.__setattr__(self, "solves", tuple(self.solves))
        object.__setattr__(self, "warnings", tuple(self.warnings))

    def __setstate__(self, state: dict[str, Any]) -> None:
        # Unpickling skips __post_init__ and gives writable arrays: freeze them again.
        self.__dict__.update(state)
        self.__post_init__()

    @property
    def n_zones(self) -> int:
        return len(self.zones)

    def to_frame(self) -> pd.DataFrame:
        """``node, zone`` table, in network row order."""
        return pd.DataFrame({"node": self.network.node_ids, "zone": self.labels})

    def spectrum(self) -> pd.DataFrame:
        """Eigenvalues and scaled residuals of every component solve (``spectrum.csv``).

        Columns ``index`` (1 for the smallest pair of the component: eigenvalues
        are numbered from 1 everywhere), ``eigenvalue``, ``residual``,
        ``component``, ``gap_after`` (distance to the next eigenvalue; empty for
        the last): the one layout of :func:`specgraph._tables.spectrum_frame`.
        """
        frames = [
            spectrum_frame(s.eigen.values, s.eigen.residuals, component=s.component)
            for s in self.solves
        ]
        if not frames:
            return spectrum_frame(np.empty(0), np.empty(0), component=None)
        return pd.concat(frames, ignore_index=True)
