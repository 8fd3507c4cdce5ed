"""Diagnostics of any zoning, whoever made it: quality, comparison, stability, robustness.

- :mod:`._quality`: the zone table, boundary links and overall scores of a zoning;
- :mod:`._spectral`: eigengaps, the Cheeger interval, suggested zone counts;
- :mod:`._score`: the scorecard of any (even partial) zoning, with modularity and outliers;
- :mod:`._compare`: agreement of two zonings (ARI, NMI, variation of information, overlaps);
- :mod:`._stability`: how much a zoning moves under other seeds and perturbed weights;
- :mod:`._cuts`: bridges and articulation nodes, and what each failure cuts off;
- :mod:`._resistance`: effective resistance and leverage of every link;
- :mod:`._robustness`: algebraic connectivity and the ranked bottleneck links, over both.
"""

from ._compare import (
    MATCH_DENSE_CELLS,
    SPLIT_SHARE,
    Comparison,
    compare,
    compare_frames,
    variation_of_information,
)
from ._cuts import CutStructure, cut_structure
from ._quality import boundary_links, check_labels, overall_scores, zone_table
from ._resistance import EXACT_RESISTANCE_LIMIT, SKETCH_ROWS, LinkResistances, effective_resistances
from ._robustness import DEFAULT_TOP, Robustness, robustness
from ._score import (
    EXAMPLES_SHOWN,
    OUTLIER_MIN_RATIO,
    OUTLIER_MIN_ZONES,
    OUTLIER_Z,
    UNASSIGNED,
    LabelCoverage,
    Scorecard,
    labels_from_mapping,
    outlier_flags,
    score,
)
from ._spectral import cheeger_bounds, eigengaps, suggest_zone_counts
from ._stability import (
    CORE_CONFIDENCE,
    DEFAULT_REPEATS,
    DEFAULT_SPREAD,
    ROTATION_WARNING,
    UNSTABLE_CORE_SHARE,
    Stability,
    ZoneMatch,
    match_zones,
    perturb_weights,
    perturbation_norm,
    stability,
)

__all__ = [
    "CORE_CONFIDENCE",
    "DEFAULT_REPEATS",
    "DEFAULT_SPREAD",
    "DEFAULT_TOP",
    "EXACT_RESISTANCE_LIMIT",
    "EXAMPLES_SHOWN",
    "MATCH_DENSE_CELLS",
    "OUTLIER_MIN_RATIO",
    "OUTLIER_MIN_ZONES",
    "OUTLIER_Z",
    "ROTATION_WARNING",
    "SKETCH_ROWS",
    "SPLIT_SHARE",
    "UNASSIGNED",
    "UNSTABLE_CORE_SHARE",
    "Comparison",
    "CutStructure",
    "LabelCoverage",
    "LinkResistances",
    "Robustness",
    "Scorecard",
    "Stability",
    "ZoneMatch",
    "boundary_links",
    "check_labels",
    "cheeger_bounds",
    "compare",
    "compare_frames",
    "cut_structure",
    "effective_resistances",
    "eigengaps",
    "labels_from_mapping",
    "match_zones",
    "outlier_flags",
    "overall_scores",
    "perturb_weights",
    "perturbation_norm",
    "robustness",
    "score",
    "stability",
    "suggest_zone_counts",
    "variation_of_information",
    "zone_table",
]
