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

from importlib.metadata import PackageNotFoundError, version

from . import gallery, interop
from .diagnostics import boundary_links, compare, score, zone_table
from .eigen import EigenResult, smallest_eigenpairs
from .estimator import ZoneSplitter
from .exceptions import (
    ConstraintError,
    ConvergenceError,
    InputError,
    ParameterError,
    SpecgraphError,
)
from .io import read_edges
from .network import Network
from .operators import GraphOperator, laplacian
from .studies import stability
from .walks import StationaryResult, stationary_distribution
from .zones import LocalZone, Zoning, find_zones, local_zone

try:
    __version__ = version("specgraph")
except PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0+unknown"

__all__ = [
    "ConstraintError",
    "ConvergenceError",
    "EigenResult",
    "GraphOperator",
    "InputError",
    "LocalZone",
    "Network",
    "ParameterError",
    "SpecgraphError",
    "StationaryResult",
    "ZoneSplitter",
    "Zoning",
    "__version__",
    "boundary_links",
    "compare",
    "find_zones",
    "gallery",
    "interop",
    "laplacian",
    "local_zone",
    "read_edges",
    "score",
    "smallest_eigenpairs",
    "stability",
    "stationary_distribution",
    "zone_table",
]
