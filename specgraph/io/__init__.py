"""Reading networks from tables: CSV, Parquet, GraphML and GeoJSON files, and pandas frames.

Node ids are read as strings, exactly as written. Every error names the file,
line and column it found and says what to do.
"""

from ._frames import network_from_frames
from ._geojson import DEFAULT_SNAP_TOLERANCE, SkippedPart, SnapReport, read_geojson_lines
from ._graphml import GRAPHML_SUFFIXES, read_graphml
from ._lists import flag_mask, flagged_links, read_link_list, read_node_list, read_zone_file
from ._sources import STDIN, shown_name, spooled_sources
from ._tables import read_edges, read_table
from ._thresholds import links_at_least

__all__ = [
    "DEFAULT_SNAP_TOLERANCE",
    "GRAPHML_SUFFIXES",
    "STDIN",
    "SkippedPart",
    "SnapReport",
    "flag_mask",
    "flagged_links",
    "links_at_least",
    "network_from_frames",
    "read_edges",
    "read_geojson_lines",
    "read_graphml",
    "read_link_list",
    "read_node_list",
    "read_table",
    "read_zone_file",
    "shown_name",
    "spooled_sources",
]
