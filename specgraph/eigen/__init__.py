"""Eigen-solvers for the smallest eigenpairs of graph operators.

The public entry point is :func:`smallest_eigenpairs`; every method returns an
:class:`EigenResult` and every shortfall raises
:class:`~specgraph.exceptions.ConvergenceError` carrying the partial pairs.
"""

from ._api import (
    DEFAULT_TOL,
    DENSE_LIMIT,
    METHODS,
    choose_method,
    smallest_eigenpairs,
)
from ._hierarchy import build_hierarchy
from ._result import EigenResult

__all__ = [
    "DEFAULT_TOL",
    "DENSE_LIMIT",
    "METHODS",
    "EigenResult",
    "build_hierarchy",
    "choose_method",
    "smallest_eigenpairs",
]
