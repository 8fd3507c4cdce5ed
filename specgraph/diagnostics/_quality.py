"""Quality figures of a zoning: per-zone table, boundary links, overall scores.

The definitions (conductance, volume, normalized cut of Shi and Malik 2000,
:doi:`10.1109/34.868688`) and the one engine behind them live in
:mod:`specgraph._figures`, shared with zoning (which sits below diagnostics and
builds every :class:`~specgraph.Zoning`'s tables with them), scoring, refinement
and the report; this module is their public home.
"""

from __future__ import annotations

from .._figures import boundary_links, overall_scores, zone_table
from .._figures import check_zone_labels as check_labels

__all__ = ["boundary_links", "check_labels", "overall_scores", "zone_table"]
