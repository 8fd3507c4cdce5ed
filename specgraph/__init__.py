"""specgraph: spectral partitioning of infrastructure networks.

Split a water, power, road or telecom network into well-connected zones with
few and weak links between them, and get the evidence to defend the split.

The pipeline, one module or subpackage per stage::

    specgraph.io -> Network -> specgraph.operators -> specgraph.eigen
        -> specgraph.zones -> specgraph.diagnostics -> specgraph.export

and :mod:`specgraph.studies` (stability) above zones: a study re-runs zoning.

Zones are decision support only: validate them in a hydraulic, power-flow or
traffic model and defer to local codes and licensed engineers before acting.
"""

from __future__ import annotations

import importlib
from importlib.metadata import PackageNotFoundError, version
from typing import TYPE_CHECKING, Any

from .exceptions import (
    ConstraintError,
    ConvergenceError,
    InputError,
    ParameterError,
    ResourceError,
    SpecgraphError,
)

if TYPE_CHECKING:  # the names below are loaded on first use (PEP 562), see __getattr__
    from . import gallery, interop
    from ._guard import MemoryBudget, MemoryEstimate, check_memory, estimate_memory, memory_budget
    from .diagnostics import boundary_links, compare, score, zone_table
    from .eigen import EigenResult, smallest_eigenpairs
    from .estimator import ZoneSplitter
    from .io import read_edges
    from .network import Network
    from .operators import GraphOperator, laplacian
    from .studies import stability
    from .walks import StationaryResult, stationary_distribution
    from .zones import LocalZone, Zoning, find_zones, local_zone, refine_zoning

try:
    __version__ = version("specgraph")
except PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0+unknown"

#: Public names loaded on first use, and the module each comes from: importing
#: the package stays cheap (no scikit-learn, matplotlib or scipy.stats until a
#: name that needs them is touched). Module-level ``__getattr__`` is PEP 562.
_LAZY = {
    "EigenResult": "eigen",
    "smallest_eigenpairs": "eigen",
    "GraphOperator": "operators",
    "laplacian": "operators",
    "LocalZone": "zones",
    "Zoning": "zones",
    "find_zones": "zones",
    "local_zone": "zones",
    "refine_zoning": "zones",
    "Network": "network",
    "StationaryResult": "walks",
    "stationary_distribution": "walks",
    "ZoneSplitter": "estimator",
    "boundary_links": "diagnostics",
    "compare": "diagnostics",
    "score": "diagnostics",
    "zone_table": "diagnostics",
    "read_edges": "io",
    "stability": "studies",
    "MemoryBudget": "_guard",
    "MemoryEstimate": "_guard",
    "check_memory": "_guard",
    "estimate_memory": "_guard",
    "memory_budget": "_guard",
}

#: Subpackages and modules reachable as attributes (``specgraph.zones``) once
#: the package is imported, as they were when it imported them all eagerly.
_SUBMODULES = frozenset(
    {
        "demo",
        "diagnostics",
        "eigen",
        "estimator",
        "export",
        "gallery",
        "interop",
        "io",
        "network",
        "operators",
        "report",
        "studies",
        "walks",
        "zones",
    }
)


def __getattr__(name: str) -> Any:
    """Load a public name or a subpackage on first use (PEP 562)."""
    if name in _LAZY:
        value = getattr(importlib.import_module(f".{_LAZY[name]}", __name__), name)
    elif name in _SUBMODULES:
        value = importlib.import_module(f".{name}", __name__)
    else:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    globals()[name] = value  # later look-ups skip this function
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__) | _SUBMODULES)


__all__ = [
    "ConstraintError",
    "ConvergenceError",
    "EigenResult",
    "GraphOperator",
    "InputError",
    "LocalZone",
    "MemoryBudget",
    "MemoryEstimate",
    "Network",
    "ParameterError",
    "ResourceError",
    "SpecgraphError",
    "StationaryResult",
    "ZoneSplitter",
    "Zoning",
    "__version__",
    "boundary_links",
    "check_memory",
    "compare",
    "estimate_memory",
    "find_zones",
    "gallery",
    "interop",
    "laplacian",
    "local_zone",
    "memory_budget",
    "read_edges",
    "refine_zoning",
    "score",
    "smallest_eigenpairs",
    "stability",
    "stationary_distribution",
    "zone_table",
]
