"""Figures as files: every figure of a run as PNG and SVG in the output folder's ``figures/``.

The figures themselves come from :func:`specgraph.report.report_figures` and
their bytes from :func:`specgraph.report.figure_files`; this module names the
files, and :func:`specgraph.export.write_figures` writes them, atomically like
every other output (:func:`specgraph.export.write_outputs`: all files of the
set or none), into the subfolder :data:`FIGURES_FOLDER` of an output folder.
It does not import matplotlib, so a run without figures stays light.

A run that writes figures removes the figure files of an earlier run that it
does not write itself (for example ``stability.png`` when the new run has no
stability study), in the same commit; a run without figures removes all of
them, so a folder never mixes one run's tables with another run's figures.
"""

from __future__ import annotations

from typing import Literal

__all__ = ["FIGURES_FOLDER", "FIGURE_FORMATS", "FIGURE_STEMS", "figure_names"]

#: Subfolder of an output folder that receives the figure files.
FIGURES_FOLDER = "figures"
#: File formats of every figure: PNG for documents and slides, SVG to zoom and edit.
FIGURE_FORMATS: tuple[Literal["png", "svg"], ...] = ("png", "svg")
#: Every figure a run may write, by file stem (:func:`specgraph.report.report_figures`).
FIGURE_STEMS = ("spectrum", "zone_bars", "zone_map", "stability")


def figure_names() -> list[str]:
    """Every figure file name a run may write: ``spectrum.png``, ``spectrum.svg``, ...

    Examples
    --------
    >>> figure_names()[:2]
    ['spectrum.png', 'spectrum.svg']
    """
    return [f"{stem}.{ext}" for stem in FIGURE_STEMS for ext in FIGURE_FORMATS]
