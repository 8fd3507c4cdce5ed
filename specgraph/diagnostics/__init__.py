"""Diagnostics of any zoning, whoever made it: quality, comparison, robustness.

- :mod:`._quality`: the zone table, boundary links and overall scores of a zoning;
- :mod:`._spectral`: eigengaps, the Cheeger interval, suggested zone counts;
- :mod:`._score`: the scorecard of any (even partial) zoning, with modularity and outliers;
- :mod:`._compare`: agreement of two zonings (ARI, NMI, variation of information, overlaps);
- :mod:`._cuts`: bridges and articulation nodes, and what each failure cuts off;
- :mod:`._resistance`: effective resistance and leverage of every link;
- :mod:`._robustness`: algebraic connectivity and the ranked bottleneck links, over both.

Studies that re-run zoning (stability across seeds and weights) live above
:mod:`specgraph.zones`, in :mod:`specgraph.studies`: diagnostics never call
:func:`~specgraph.find_zones`.
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

__all__ = [
    "DEFAULT_TOP",
    "EXACT_RESISTANCE_LIMIT",
    "EXAMPLES_SHOWN",
    "MATCH_DENSE_CELLS",
    "OUTLIER_MIN_RATIO",
    "OUTLIER_MIN_ZONES",
    "OUTLIER_Z",
    "SKETCH_ROWS",
    "SPLIT_SHARE",
    "UNASSIGNED",
    "Comparison",
    "CutStructure",
    "LabelCoverage",
    "LinkResistances",
    "Robustness",
    "Scorecard",
    "boundary_links",
    "check_labels",
    "cheeger_bounds",
    "compare",
    "compare_frames",
    "cut_structure",
    "effective_resistances",
    "eigengaps",
    "labels_from_mapping",
    "outlier_flags",
    "overall_scores",
    "robustness",
    "score",
    "suggest_zone_counts",
    "variation_of_information",
    "zone_table",
]
