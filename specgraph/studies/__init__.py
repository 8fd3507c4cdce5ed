"""Studies: whatever re-runs zoning to judge it, above :mod:`specgraph.zones`.

A study calls :func:`~specgraph.find_zones` many times (other seeds, other
weights) and reads the runs together; zoning itself never calls a study, as
scikit-learn's ``model_selection`` sits above its estimators.

- :mod:`._options`: :class:`ZoningOptions`, the zoning options every run of a study shares;
- :mod:`._perturb`: log-normal weight noise and the operator change it causes;
- :mod:`._matching`: a run's zones matched to reference zones by maximum overlap;
- :mod:`._stability`: how much a zoning moves under other seeds and perturbed weights.
"""

from ._matching import ZoneMatch, match_zones
from ._options import RESERVED_OPTIONS, ZoningOptions
from ._perturb import perturb_weights, perturbation_norm
from ._stability import (
    CORE_CONFIDENCE,
    DEFAULT_REPEATS,
    DEFAULT_SPREAD,
    ROTATION_WARNING,
    UNSTABLE_CORE_SHARE,
    Stability,
    stability,
)

__all__ = [
    "CORE_CONFIDENCE",
    "DEFAULT_REPEATS",
    "DEFAULT_SPREAD",
    "RESERVED_OPTIONS",
    "ROTATION_WARNING",
    "UNSTABLE_CORE_SHARE",
    "Stability",
    "ZoneMatch",
    "ZoningOptions",
    "match_zones",
    "perturb_weights",
    "perturbation_norm",
    "stability",
]
