"""Figures and the self-contained HTML report of a zoning.

:func:`build_report` returns one HTML page (figures embedded, tables, the run
record, the cautions and the command that reproduces the run);
:func:`write_report` writes it atomically. The figures are available on their
own (:func:`report_figures`, :func:`figure_bytes` for PNG or SVG bytes), all
drawn with matplotlib's Agg canvas, never through pyplot.

Zones are decision support only: validate them in a hydraulic, power-flow or
traffic model and defer to local codes and licensed engineers before acting.
"""

from ._html import BOUNDARY_ROWS, CAUTIONS, build_report, report_figures, write_report
from ._plots import (
    MAP_AGGREGATE_NODES,
    MAP_CELLS,
    MAP_RASTER_NODES,
    PALETTE,
    PALETTE_REFERENCE,
    ZoneColouring,
    coordinate_units,
    figure_bytes,
    figure_files,
    map_detail,
    spectrum_figure,
    stability_figure,
    zone_bars_figure,
    zone_colours,
    zone_map_figure,
)

__all__ = [
    "BOUNDARY_ROWS",
    "CAUTIONS",
    "MAP_AGGREGATE_NODES",
    "MAP_CELLS",
    "MAP_RASTER_NODES",
    "PALETTE",
    "PALETTE_REFERENCE",
    "ZoneColouring",
    "build_report",
    "coordinate_units",
    "figure_bytes",
    "figure_files",
    "map_detail",
    "report_figures",
    "spectrum_figure",
    "stability_figure",
    "write_report",
    "zone_bars_figure",
    "zone_colours",
    "zone_map_figure",
]
