"""The HTML report of a zoning: one self-contained page to read, share and print.

The page holds everything it shows: figures are embedded as ``data:`` URIs
(base64 PNG, or base64 SVG), styles are inline, there is no script, and a
Content-Security-Policy forbids the browser to load anything from elsewhere.
It can be mailed, archived or opened offline, and shows the same thing in ten
years. Every text that comes from the user (node ids, column names, file
names, the command) is HTML-escaped.
"""

from __future__ import annotations

import base64
import contextlib
import html
import json
import math
import os
import tempfile
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any, Literal

import numpy as np
import pandas as pd
from matplotlib.figure import Figure

from .._validation import InstanceOf, check_choice, check_int, check_param
from .._wording import count
from ..exceptions import OutputError
from ..export import CAUTION, jsonable, run_record, zoning_tables
from ._plots import (
    MAP_AGGREGATE_NODES,
    MAP_CELLS,
    MAP_RASTER_NODES,
    PALETTE_REFERENCE,
    ZoneColouring,
    figure_bytes,
    map_detail,
    spectrum_figure,
    stability_figure,
    zone_bars_figure,
    zone_colours,
    zone_map_figure,
)

if TYPE_CHECKING:
    from ..studies import Stability
    from ..zones import Zoning

__all__ = [
    "BOUNDARY_ROWS",
    "CAUTIONS",
    "SIGNIFICANT_DIGITS",
    "ZONE_ROWS",
    "build_report",
    "report_figures",
    "write_report",
]

#: Boundary links listed in the report (the first ones of ``boundary.csv``);
#: the rest are counted and left to the CSV, so a report of a million-node
#: network stays a page a browser opens at once.
BOUNDARY_ROWS = 200
#: Zones listed in the zone table (all, unless there are more than this).
ZONE_ROWS = 1_000
#: Significant digits of the figures in the report's tables (the CSV files
#: hold every digit).
SIGNIFICANT_DIGITS = 6

#: What the report adds, at its top and again at its end, to the one-line caution of every run.
CAUTIONS = (
    "specgraph knows the network only as given: nothing of pressures, fire flows, water "
    "quality, voltages, protection settings or traffic demand.",
    "Check every boundary link on site: the valve, breaker or signal a map shows may be "
    "missing, seized or set otherwise.",
    "Licensed engineers answer for the operation of the network; the zones, counts and "
    "confidences here are evidence for their decision, not the decision.",
)

ImageFormat = Literal["png", "svg"]

_STYLE = """
:root { --ink: #1d1d1d; --muted: #5a5a5a; --line: #c8c8c8; --band: #f3f3f0; --warn: #8a4b00; }
* { box-sizing: border-box; }
body { margin: 0 auto; max-width: 72rem; padding: 1.5rem 2rem 3rem; color: var(--ink);
  font: 15px/1.5 system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial,
  sans-serif; }
h1 { font-size: 1.6rem; margin: 0 0 .25rem; }
h2 { font-size: 1.2rem; margin: 2rem 0 .5rem; padding-bottom: .2rem;
  border-bottom: 1px solid var(--line); }
p.lede { color: var(--muted); margin: 0 0 1rem; }
.caution { border: 2px solid var(--warn); background: #fff8ee; padding: .6rem 1rem;
  margin: 1rem 0; }
.caution h2 { border: 0; margin: 0 0 .3rem; font-size: 1.05rem; color: var(--warn); }
.caution ul { margin: .3rem 0 0 1.2rem; padding: 0; }
nav ol { columns: 2; margin: .5rem 0; padding-left: 1.4rem; }
nav a, a { color: #1f4e8c; }
table { border-collapse: collapse; margin: .5rem 0 1rem; font-size: .88rem; }
th, td { border: 1px solid var(--line); padding: .2rem .5rem; text-align: left;
  vertical-align: top; }
thead th { background: var(--band); position: sticky; top: 0; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
#summary th { white-space: nowrap; }
.scroll { max-height: 32rem; overflow: auto; border: 1px solid var(--line); display: inline-block;
  max-width: 100%; }
.scroll table { margin: 0; }
figure { margin: .5rem 0 1rem; }
figure img { max-width: 100%; height: auto; border: 1px solid var(--line); background: white; }
figcaption, .note { color: var(--muted); font-size: .88rem; }
.missing { border-left: 4px solid var(--warn); padding: .3rem .8rem; background: var(--band); }
pre { background: var(--band); padding: .6rem .8rem; overflow: auto; font-size: .8rem;
  max-height: 30rem; white-space: pre; }
pre.command { white-space: pre-wrap; word-break: break-all; max-height: none; }
footer { margin-top: 2.5rem; color: var(--muted); font-size: .85rem; }
@media print {
  body { max-width: none; padding: 0; font-size: 10.5pt; }
  nav { display: none; }
  h2 { break-after: avoid; }
  figure, .caution, tr { break-inside: avoid; }
  .scroll, pre { max-height: none; overflow: visible; border: 0; }
  pre { white-space: pre-wrap; word-break: break-all; }
  thead th { position: static; }
  a { color: inherit; text-decoration: none; }
}
"""

#: Nothing may load from anywhere: images are data: URIs, the style is inline,
#: and no script runs, whatever a node id contains.
_POLICY = "default-src 'none'; img-src data:; style-src 'unsafe-inline'"


# ------------------------------------------------------------------ formatting
def _esc(value: Any) -> str:
    return html.escape(str(value), quote=True)


def _is_number(value: Any) -> bool:
    return isinstance(value, int | float | np.integer | np.floating) and not isinstance(
        value, bool | np.bool_
    )


def _cell(value: Any) -> str:
    """Text of one table cell: numbers to :data:`SIGNIFICANT_DIGITS`, yes/no for booleans."""
    if value is None or (isinstance(value, float | np.floating) and math.isnan(value)):
        return ""
    if isinstance(value, bool | np.bool_):
        return "yes" if value else "no"
    if isinstance(value, int | np.integer):
        return str(int(value))
    if isinstance(value, float | np.floating):
        number = float(value)
        return (
            str(int(number))
            if number.is_integer() and abs(number) < 1e15
            else (f"{number:.{SIGNIFICANT_DIGITS}g}")
        )
    return str(value)


def _table(frame: pd.DataFrame, *, table_id: str, caption: str) -> str:
    """A DataFrame as an escaped HTML table (no index), numbers right-aligned."""
    head = "".join(f'<th scope="col">{_esc(c)}</th>' for c in frame.columns)
    rows = []
    for values in frame.itertuples(index=False, name=None):
        cells = "".join(
            f'<td class="num">{_esc(_cell(v))}</td>'
            if _is_number(v)
            else f"<td>{_esc(_cell(v))}</td>"
            for v in values
        )
        rows.append(f"<tr>{cells}</tr>")
    return (
        f'<div class="scroll"><table id="{table_id}"><caption class="note">{_esc(caption)}'
        f"</caption><thead><tr>{head}</tr></thead><tbody>{''.join(rows)}</tbody></table></div>"
    )


def _figure_html(
    figure: Figure, *, image_id: str, alt: str, caption: str, image_format: ImageFormat
) -> str:
    data = base64.b64encode(figure_bytes(figure, format=image_format)).decode("ascii")
    mime = "image/png" if image_format == "png" else "image/svg+xml"
    return (
        f'<figure><img id="{image_id}" src="data:{mime};base64,{data}" alt="{_esc(alt)}">'
        f"<figcaption>{_esc(caption)}</figcaption></figure>"
    )


# ------------------------------------------------------------------ content
def _summary_rows(
    zoning: Zoning, record: Mapping[str, Any], stability: Stability | None
) -> list[tuple[str, Any]]:
    net = zoning.network
    scores = zoning.scores
    count = zoning.decisions.get("zone_count", {})
    rows: list[tuple[str, Any]] = [
        ("nodes", net.n_nodes),
        ("links", net.n_links),
        ("connected components", net.n_components),
        ("zones", zoning.n_zones),
        ("zone count", f"{count.get('choice', zoning.n_zones)} ({count.get('reason', 'given')})"),
    ]
    if "confidence" in count:
        rows.append(("zone count confidence", count["confidence"]))
    method = zoning.decisions.get("assign", {}).get("choice")
    if method is not None:
        rows.append(("assignment method", method))
    rows += [
        ("normalized cut", scores.get("normalized_cut")),
        ("largest zone conductance", scores.get("max_conductance")),
        ("mean zone conductance", scores.get("mean_conductance")),
        ("boundary links", scores.get("boundary_links")),
        ("boundary weight", scores.get("boundary_weight")),
        ("every zone connected", scores.get("all_connected")),
        ("operator", zoning.decisions.get("operator", {}).get("choice")),
    ]
    solves = record.get("eigen_solves") or []
    if solves:
        rows.append(("eigen-solver", ", ".join(sorted({str(s["method"]) for s in solves}))))
        rows.append(("largest scaled residual", max(float(s["max_residual"]) for s in solves)))
        rows.append(("eigen-solves converged", all(bool(s["converged"]) for s in solves)))
    if stability is not None:
        overall = stability.overall
        rows += [
            ("mean node confidence", overall.get("mean_confidence")),
            ("unstable zones", ", ".join(map(str, overall.get("unstable_zones", []))) or "none"),
            ("zone count trustworthy (Davis-Kahan)", overall.get("zone_count_trustworthy")),
        ]
    # The run record's list: the one the console printed and run.json holds.
    rows.append(("warnings", len(record.get("warnings") or [])))
    return rows


def _summary_table(rows: list[tuple[str, Any]]) -> str:
    body = "".join(
        f'<tr><th scope="row">{_esc(name)}</th><td>{_esc(_cell(value))}</td></tr>'
        for name, value in rows
    )
    return f'<table id="summary"><tbody>{body}</tbody></table>'


def _caution_box() -> str:
    items = "".join(f"<li>{_esc(c)}</li>" for c in CAUTIONS)
    return (
        '<aside class="caution" role="note" id="caution"><h2>Caution</h2>'
        f"<p>{_esc(CAUTION)}</p><ul>{items}</ul></aside>"
    )


def _section(anchor: str, title: str, body: str) -> str:
    return f'<section id="{anchor}"><h2>{_esc(title)}</h2>{body}</section>'


def _decisions(zoning: Zoning) -> str:
    items = "".join(
        f"<li><strong>{_esc(name.replace('_', ' '))}</strong>: {_esc(d.get('reason', ''))}</li>"
        for name, d in zoning.decisions.items()
    )
    return f'<ul id="decisions">{items}</ul>' if items else ""


def report_figures(
    zoning: Zoning,
    *,
    sources: Sequence[str] = (),
    stability: Stability | None = None,
    raster_above: int = MAP_RASTER_NODES,
    aggregate_above: int = MAP_AGGREGATE_NODES,
    cells: int = MAP_CELLS,
) -> dict[str, Figure]:
    """The report's figures by file stem, for saving as PNG or SVG files too.

    Keys: ``'spectrum'``, ``'zone_bars'``, ``'zone_map'`` (only with
    coordinates) and ``'stability'`` (only with ``stability``). Arguments as
    for :func:`build_report`. Save one with
    ``figure_bytes(figures["zone_map"], format="svg")``.
    """
    colouring = zone_colours(zoning.network, zoning.labels)
    figures = {
        "spectrum": spectrum_figure(zoning),
        "zone_bars": zone_bars_figure(zoning, colouring=colouring),
    }
    options = {"raster_above": raster_above, "aggregate_above": aggregate_above, "cells": cells}
    if zoning.network.coordinates is not None:
        figures["zone_map"] = zone_map_figure(
            zoning, sources=sources, colouring=colouring, **options
        )
    if stability is not None:
        figures["stability"] = stability_figure(zoning, stability, **options)
    return figures


def build_report(
    zoning: Zoning,
    *,
    command: str,
    record: Mapping[str, Any] | None = None,
    tables: Mapping[str, pd.DataFrame] | None = None,
    stability: Stability | None = None,
    sources: Sequence[str] = (),
    title: str = "Zoning report",
    image_format: ImageFormat = "png",
    boundary_rows: int = BOUNDARY_ROWS,
    raster_above: int = MAP_RASTER_NODES,
    aggregate_above: int = MAP_AGGREGATE_NODES,
    cells: int = MAP_CELLS,
) -> str:
    """A self-contained HTML page of a zoning: figures, tables, run record, cautions.

    The page shows, in order: the cautions; a summary table; the zone map
    (or why there is none); the spectrum with the chosen eigengap and the
    automatic decisions; per-zone bars and the zone table; the stability map
    and table when ``stability`` is given; the first ``boundary_rows``
    boundary links; warnings; the command that reproduces the run; the run
    record; and the cautions again. Figures are embedded (see the module
    notes); every user string is HTML-escaped.

    Parameters
    ----------
    zoning : Zoning
    command : str
        The command line that reproduces the run, shown as given (quote it
        for a shell before passing it, e.g. with :func:`shlex.join`).
    record : mapping, optional
        The run record (:func:`specgraph.export.run_record`); built from the
        zoning when not given. Its ``warnings`` are the page's warnings (the
        summary counts them and the warnings section lists them), so the
        page, ``run.json`` and the console say the same.
    tables : mapping of str to DataFrame, optional
        The result tables by file name (:func:`specgraph.export.zoning_tables`);
        ``zone_summary.csv`` and ``boundary.csv`` are shown. Built from the
        zoning (and ``sources``: a supply-point column) when not given.
    stability : Stability, optional
        Stability of the zoning (:func:`specgraph.stability`), for the
        confidence map and per-zone stability table.
    sources : sequence of str, default=()
        Node ids of supply points, marked on the map.
    title : str, default='Zoning report'

    Returns
    -------
    str
        The HTML document (UTF-8 when written; see :func:`write_report`).

    Raises
    ------
    ParameterError
        For an option outside its domain or a source that is not a node.

    Other Parameters
    ----------------
    image_format : {'png', 'svg'}, default='png'
        How figures are embedded (both as base64 ``data:`` URIs).
    boundary_rows : int, default=BOUNDARY_ROWS
        Boundary links listed; the page says how many more ``boundary.csv``
        holds.
    raster_above, aggregate_above, cells : int
        Map drawing thresholds (:func:`specgraph.report.map_detail`).

    Examples
    --------
    >>> from specgraph import find_zones, gallery
    >>> page = build_report(find_zones(gallery.grid(6, 6), 2, rng=0), command="(example)")
    >>> page.startswith("<!DOCTYPE html>"), 'id="zone-map"' in page
    (True, True)
    """
    check_choice(image_format, "image_format", ("png", "svg"))
    boundary_rows = check_int(boundary_rows, "boundary_rows", minimum=0)
    check_param(command, "command", [InstanceOf((str,), "a string")])
    record = run_record(zoning) if record is None else record
    tables = zoning_tables(zoning, sources=sources) if tables is None else tables
    warnings = [str(w) for w in record.get("warnings") or []]
    figures = report_figures(
        zoning,
        sources=sources,
        stability=stability,
        raster_above=raster_above,
        aggregate_above=aggregate_above,
        cells=cells,
    )
    embed = {"image_format": image_format}
    parts = [
        _caution_box(),
        _contents(stability is not None, bool(warnings)),
        _section(
            "summary-section", "Summary", _summary_table(_summary_rows(zoning, record, stability))
        ),
        _map_section(zoning, figures, sources, raster_above, aggregate_above, embed),
        _spectrum_section(zoning, figures, embed),
        _zones_section(tables["zone_summary.csv"], figures, embed),
        "" if stability is None else _stability_section(figures, stability, embed),
        _boundary_section(tables["boundary.csv"], boundary_rows),
        _warnings_section(warnings),
        *_reproduce_sections(command, record),
    ]
    net = zoning.network
    lede = (
        f"{count(zoning.n_zones, 'zone')} of a network of {count(net.n_nodes, 'node')} and "
        f"{count(net.n_links, 'link')}"
    )
    return _page(title, lede, "".join(parts))


def _warnings_section(warnings: Sequence[str]) -> str:
    """The run's warnings (the run record's list, as the console printed it), or nothing."""
    if not warnings:
        return ""
    items = "".join(f"<li>{_esc(w)}</li>" for w in warnings)
    return _section("warnings-section", "Warnings", f'<ul id="warnings">{items}</ul>')


def _spectrum_section(
    zoning: Zoning, figures: Mapping[str, Figure], embed: Mapping[str, Any]
) -> str:
    """The spectrum figure and the choices made on the user's behalf."""
    return _section(
        "spectrum-section",
        "Spectrum and zone count",
        _figure_html(
            figures["spectrum"],
            image_id="spectrum",
            alt="smallest eigenvalues with the chosen eigengap",
            caption="Smallest eigenvalues of the operator; the shaded band is the gap after "
            "the chosen zone count. Lower panel (when the count was chosen automatically): "
            "relative gap of each candidate count against the confidence levels.",
            **embed,
        )
        + "<p>Choices made on the user's behalf:</p>"
        + _decisions(zoning),
    )


def _zones_section(
    summary: pd.DataFrame, figures: Mapping[str, Figure], embed: Mapping[str, Any]
) -> str:
    """Per-zone bars and the first :data:`ZONE_ROWS` rows of ``zone_summary.csv``."""
    shown = summary.head(ZONE_ROWS)
    return _section(
        "zones-section",
        "Zones",
        _figure_html(
            figures["zone_bars"],
            image_id="zone-bars",
            alt="size and conductance of each zone",
            caption="Size and conductance of each zone, in the map's colours.",
            **embed,
        )
        + _table(
            shown,
            table_id="zones",
            caption=_shown_note(len(shown), len(summary), "zones", "zone_summary.csv"),
        ),
    )


def _boundary_section(boundary: pd.DataFrame, rows: int) -> str:
    """The first ``rows`` rows of ``boundary.csv``, with how many more it holds."""
    return _section(
        "boundary-section",
        "Boundary links",
        _table(
            boundary.head(rows),
            table_id="boundary",
            caption=_shown_note(
                min(rows, len(boundary)), len(boundary), "boundary links", "boundary.csv"
            ),
        ),
    )


def _reproduce_sections(command: str, record: Mapping[str, Any]) -> list[str]:
    """The command that reproduces the run, then the run record."""
    text = json.dumps(jsonable(record), indent=2, allow_nan=False, default=str)
    return [
        _section(
            "reproduce-section",
            "Reproduce",
            "<p>This command, run on the same input files, gives the same zones:</p>"
            f'<pre class="command" id="command"><code>{_esc(command)}</code></pre>',
        ),
        _section(
            "record-section",
            "Run record",
            "<p class=note>The contents of run.json: inputs and their checksums, parameters, "
            "decisions, eigen-solves, scores and library versions.</p>"
            f'<pre id="run-record">{_esc(text)}</pre>',
        ),
    ]


def _shown_note(shown: int, total: int, what: str, file: str) -> str:
    if shown >= total:
        return (
            f"All {total:,} {what}; figures to {SIGNIFICANT_DIGITS} significant digits "
            f"({file} holds every digit)."
        )
    return f"The first {shown:,} of {total:,} {what}; all of them are in {file}."


def _contents(stability: bool, warnings: bool) -> str:
    entries = [
        ("summary-section", "Summary"),
        ("map-section", "Zone map"),
        ("spectrum-section", "Spectrum and zone count"),
        ("zones-section", "Zones"),
        *([("stability-section", "Stability")] if stability else []),
        ("boundary-section", "Boundary links"),
        *([("warnings-section", "Warnings")] if warnings else []),
        ("reproduce-section", "Reproduce"),
        ("record-section", "Run record"),
    ]
    items = "".join(f'<li><a href="#{a}">{_esc(t)}</a></li>' for a, t in entries)
    return f'<nav aria-label="contents"><ol>{items}</ol></nav>'


def _map_section(
    zoning: Zoning,
    figures: Mapping[str, Figure],
    sources: Sequence[str],
    raster_above: int,
    aggregate_above: int,
    embed: Mapping[str, Any],
) -> str:
    """The zone map with its caption, or why there is none."""
    if "zone_map" not in figures:
        body = (
            '<p class="missing" id="no-map">No map: the network has no node coordinates. '
            "Give a node table with x and y columns to draw one.</p>"
        )
        return _section("map-section", "Zone map", body)
    colouring = zone_colours(zoning.network, zoning.labels)
    body = _figure_html(
        figures["zone_map"],
        image_id="zone-map",
        alt=f"map of {count(zoning.n_zones, 'zone')}",
        caption=_map_caption(
            zoning.network.n_nodes, raster_above, aggregate_above, colouring, bool(sources)
        ),
        **embed,
    )
    return _section("map-section", "Zone map", body)


def _map_caption(
    n: int, raster_above: int, aggregate_above: int, colouring: ZoneColouring, sources: bool
) -> str:
    """How the map was drawn (by its level of detail) and how its colours were chosen."""
    detail = map_detail(n, raster_above=raster_above, aggregate_above=aggregate_above)
    how = {
        "vector": "Every link is drawn in its zone's colour",
        "raster": f"Links and nodes are rasterized (more than {raster_above:,} nodes)",
        "aggregate": f"Each grid cell shows the zone holding most of its nodes (more than "
        f"{aggregate_above:,} nodes)",
    }[detail]
    return (
        f"{how}; boundary links in black, "
        + ("supply points as stars; " if sources else "")
        + f"zone colours: {PALETTE_REFERENCE}"
        + (
            f", assigned by {colouring.method} so that neighbouring zones differ"
            if colouring.method != "one colour per zone"
            else ""
        )
        + (
            f" ({colouring.clashes} pairs of neighbouring zones share a colour: the palette "
            "ran out)"
            if colouring.clashes
            else ""
        )
        + "."
    )


def _stability_section(
    figures: Mapping[str, Figure], stability: Stability, embed: Mapping[str, Any]
) -> str:
    overall = stability.overall
    note = (
        f"<p>{_esc(len(stability.runs))} runs ({_esc(overall.get('repeats'))} with other seeds, "
        f"as many with link weights perturbed by a log-normal spread of "
        f"{_esc(_cell(overall.get('spread')))}). A node's confidence is the share of runs in "
        "which it stayed in its zone.</p>"
    )
    items = "".join(f"<li>{_esc(w)}</li>" for w in stability.warnings)
    return _section(
        "stability-section",
        "Stability",
        note
        + _figure_html(
            figures["stability"],
            image_id="stability-map",
            alt="confidence of each node",
            caption="Confidence of each node (colour map cividis, readable with colour-vision "
            "deficiencies); boundary links in black.",
            **embed,
        )
        + (f'<ul id="stability-warnings">{items}</ul>' if items else "")
        + _table(
            stability.zones,
            table_id="stability",
            caption="Per-zone stability: mean confidence, share of core nodes, mean Jaccard index "
            "with the matched zone of each run.",
        ),
    )


def _page(title: str, lede: str, body: str) -> str:
    from .. import __version__

    return (
        "<!DOCTYPE html>\n"
        '<html lang="en">\n<head>\n<meta charset="utf-8">\n'
        f'<meta http-equiv="Content-Security-Policy" content="{_POLICY}">\n'
        '<meta name="viewport" content="width=device-width, initial-scale=1">\n'
        f'<meta name="generator" content="specgraph {_esc(__version__)}">\n'
        '<link rel="icon" href="data:,">\n'
        f"<title>{_esc(title)}</title>\n<style>{_STYLE}</style>\n</head>\n<body>\n"
        f"<header><h1>{_esc(title)}</h1><p class=lede>{_esc(lede)}</p></header>\n"
        f"{body}\n"
        f"<footer>{_caution_box()}<p>Made by specgraph {_esc(__version__)}.</p></footer>\n"
        "</body>\n</html>\n"
    )


# ------------------------------------------------------------------ writing
def write_report(path: str | os.PathLike[str], zoning: Zoning, **options: Any) -> Path:
    """Write :func:`build_report` to ``path`` (UTF-8), atomically; return the path.

    The page is written in full to a hidden temporary file beside ``path``,
    synced, then moved into place with :func:`os.replace`, so a reader sees
    the old report or the new one, never half of one. ``options`` are the
    keyword arguments of :func:`build_report` (``command`` among them).

    Raises
    ------
    OutputError
        When the file cannot be written (the message names it).
    """
    target = Path(path)
    page = build_report(zoning, **options).encode("utf-8")
    temp: Path | None = None
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        with tempfile.NamedTemporaryFile(
            "wb", dir=target.parent, prefix=f".{target.name}.", suffix=".partial", delete=False
        ) as handle:
            temp = Path(handle.name)
            handle.write(page)
            handle.flush()
            os.fsync(handle.fileno())
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(temp, 0o666 & ~umask)
        os.replace(temp, target)
    except OSError as exc:
        if temp is not None:
            with contextlib.suppress(OSError):
                temp.unlink()
        raise OutputError(
            f"cannot write the report '{target}': {exc.strerror or exc}; choose another path"
        ) from exc
    return target
