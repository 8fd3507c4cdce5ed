"""Diagnostics of any zoning, whoever made it: quality figures and spectral evidence."""

from ._quality import boundary_links, check_labels, overall_scores, zone_table
from ._spectral import cheeger_bounds, eigengaps, suggest_zone_counts

__all__ = [
    "boundary_links",
    "check_labels",
    "cheeger_bounds",
    "eigengaps",
    "overall_scores",
    "suggest_zone_counts",
    "zone_table",
]
