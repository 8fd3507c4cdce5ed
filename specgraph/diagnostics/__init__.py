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

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # loaded on first use (PEP 562), see __getattr__
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
    from ._resistance import (
        EXACT_RESISTANCE_LIMIT,
        SKETCH_ROWS,
        LinkResistances,
        effective_resistances,
    )
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

#: Public names and the module each is loaded from on first use: comparing
#: two zonings needs scikit-learn, robustness needs numba kernels; neither is
#: imported until asked for. Module-level ``__getattr__`` is PEP 562.
_LAZY = {
    "MATCH_DENSE_CELLS": "_compare",
    "SPLIT_SHARE": "_compare",
    "Comparison": "_compare",
    "compare": "_compare",
    "compare_frames": "_compare",
    "variation_of_information": "_compare",
    "CutStructure": "_cuts",
    "cut_structure": "_cuts",
    "boundary_links": "_quality",
    "check_labels": "_quality",
    "overall_scores": "_quality",
    "zone_table": "_quality",
    "EXACT_RESISTANCE_LIMIT": "_resistance",
    "SKETCH_ROWS": "_resistance",
    "LinkResistances": "_resistance",
    "effective_resistances": "_resistance",
    "DEFAULT_TOP": "_robustness",
    "Robustness": "_robustness",
    "robustness": "_robustness",
    "EXAMPLES_SHOWN": "_score",
    "OUTLIER_MIN_RATIO": "_score",
    "OUTLIER_MIN_ZONES": "_score",
    "OUTLIER_Z": "_score",
    "UNASSIGNED": "_score",
    "LabelCoverage": "_score",
    "Scorecard": "_score",
    "labels_from_mapping": "_score",
    "outlier_flags": "_score",
    "score": "_score",
    "cheeger_bounds": "_spectral",
    "eigengaps": "_spectral",
    "suggest_zone_counts": "_spectral",
}


def __getattr__(name: str) -> Any:
    """Load a public name on first use (PEP 562)."""
    if name not in _LAZY:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(importlib.import_module(f".{_LAZY[name]}", __name__), name)
    globals()[name] = value  # later look-ups skip this function
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))


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
