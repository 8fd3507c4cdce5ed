"""Zone assignment: spectral embedding, assignment, and the :class:`Zoning` result."""

from ._allocate import allocate_zones
from ._assign import KMEANS_RESTARTS, kmeans_labels
from ._embedding import normalized_rows
from ._sweep import SweepCut, sweep_cut
from ._zoning import ComponentSolve, Zoning, find_zones, number_by_size

__all__ = [
    "KMEANS_RESTARTS",
    "ComponentSolve",
    "SweepCut",
    "Zoning",
    "allocate_zones",
    "find_zones",
    "kmeans_labels",
    "normalized_rows",
    "number_by_size",
    "sweep_cut",
]
