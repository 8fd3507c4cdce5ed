"""The ``specgraph`` command: argument parsing over the library, nothing more.

Exit codes: 0 success; 2 bad usage or bad input; 3 an eigen-solve missed its
tolerance (nothing is written as if it had converged); 1 an unexpected
internal error. Data goes to files (and ``--json`` summaries to stdout);
messages go to stderr.
"""

from __future__ import annotations

import argparse
import contextlib
import io
import json
import logging
import math
import os
import sys
import textwrap
import traceback
from collections.abc import Iterator, Mapping, Sequence
from pathlib import Path
from typing import Any

from . import __version__
from ._commands import CAUTIONED, COMMANDS, REPORT_FILE, holds_nodes
from ._commands import GEOJSON_FILES as GEOJSON_FILES  # re-exported: tests and users name it
from ._guard import out_of_memory
from ._option_names import for_command_line, option_names
from ._progress import compile_notice, wants_progress
from .diagnostics import (
    DEFAULT_TOP,
)
from .eigen import DEFAULT_TOL, METHODS
from .exceptions import ConvergenceError, OutputError, ParameterError, SpecgraphError
from .export import (
    CAUTION,
    NOT_CONVERGED_FILE,
    checked_folder,
    not_converged_record,
    write_outputs,
)
from .io import (
    DEFAULT_SNAP_TOLERANCE,
    spooled_sources,
)
from .studies import DEFAULT_REPEATS, DEFAULT_SPREAD
from .walks import DEFAULT_DAMPING
from .zones import (
    ASSIGNMENTS,
    CYCLE_RTOL,
    DEFAULT_LOCAL_ALPHA,
    DOMINANT_GAP,
    DOMINANT_TREATMENTS,
    FRAGMENT_TREATMENTS,
    MAX_CYCLES,
    MULTILEVEL_MIN_ZONES,
    OPERATOR_KINDS,
    TREE_TREATMENTS,
    parse_zone_spec,
)

__all__ = ["build_parser", "error_object", "main", "run"]

logger = logging.getLogger("specgraph")

EXIT_OK, EXIT_INTERNAL, EXIT_INPUT, EXIT_NOT_CONVERGED = 0, 1, 2, 3

#: Eigenvalues ``specgraph spectrum`` computes when ``--count`` is not given.
DEFAULT_SPECTRUM_COUNT = 20

_EXIT_CODES = """\
exit codes:
  0  success
  2  bad usage or bad input (the message names the file, line and column),
     or too little memory (the message names the stage and what would fit),
     or an output folder that cannot take the results (the message names the
     path and what to do; the folder keeps its previous files)
  3  the eigen-solve did not reach its tolerance; no zones were written, only
     not-converged.json with the partial figures
  1  unexpected internal error (please report it with --debug output)
"""


def _bounded(kind: type, minimum: float, *, strict: bool, expected: str) -> Any:
    """An argparse ``type`` that parses ``kind`` and refuses values below ``minimum``."""

    def parse(text: str) -> Any:
        try:
            value = kind(text)
        except ValueError:
            value = None
        ok = value is not None and math.isfinite(value)
        ok = ok and (value > minimum if strict else value >= minimum)
        if not ok:
            raise argparse.ArgumentTypeError(f"expected {expected}; got {text!r}")
        return value

    return parse


_positive_int = _bounded(int, 1, strict=False, expected="a whole number >= 1")
_seed = _bounded(int, 0, strict=False, expected="a whole number >= 0")
_positive_float = _bounded(float, 0.0, strict=True, expected="a finite number > 0")
_non_negative_float = _bounded(float, 0.0, strict=False, expected="a finite number >= 0")
_finite_float = _bounded(float, -math.inf, strict=True, expected="a finite number")


def _open_unit(text: str) -> float:
    """A number strictly between 0 and 1 (a damping factor or a teleport probability)."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number in (0, 1), got {text!r}") from None
    if not 0.0 < value < 1.0:
        raise argparse.ArgumentTypeError(f"expected a number in (0, 1), got {text!r}")
    return value


def _zone_spec(text: str) -> Any:
    try:
        return parse_zone_spec(text)
    except ParameterError as exc:  # argparse puts "argument --zones:" in front
        raise argparse.ArgumentTypeError(str(exc)) from None


def _caution_epilog(examples: str) -> str:
    return f"examples:\n{examples}\n{_EXIT_CODES}\ncaution:\n" + textwrap.fill(
        CAUTION, width=78, initial_indent="  ", subsequent_indent="  "
    )


def _add_reading(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group("reading the network")
    group.add_argument(
        "edges",
        metavar="EDGES",
        help="edge table (CSV or Parquet), a GraphML file holding nodes and edges, or a "
        "GeoJSON file of lines (.geojson: line ends become nodes); - reads standard input "
        "(format from its first bytes: Parquet, GraphML, GeoJSON, else CSV)",
    )
    group.add_argument(
        "--nodes", metavar="NODES", help="node table (ids, coordinates, sizes); not with GraphML"
    )
    group.add_argument("--source", default="source", metavar="COL", help="link start column")
    group.add_argument("--target", default="target", metavar="COL", help="link end column")
    group.add_argument(
        "--directed",
        action="store_true",
        help="keep each link's direction, source to target (one-way streets, flow from "
        "sources to consumers); zones then follow the random walk along the links (the "
        "directed Laplacian) and importance follows the arcs",
    )
    group.add_argument(
        "--weight", metavar="COL", help="weight column (affinity: bigger = more strongly tied)"
    )
    group.add_argument(
        "--distance",
        action="store_true",
        help="read --weight as a length, impedance or latency and convert it to an affinity",
    )
    group.add_argument("--node-col", default="node", metavar="COL", help="node id column")
    group.add_argument("--x-col", metavar="COL", help="x coordinate column of the node table")
    group.add_argument("--y-col", metavar="COL", help="y coordinate column of the node table")
    group.add_argument(
        "--size-col", metavar="COL", help="node size column (e.g. connections served)"
    )
    group.add_argument(
        "--snap",
        type=_non_negative_float,
        default=DEFAULT_SNAP_TOLERANCE,
        metavar="TOL",
        help="GeoJSON only: line ends closer than TOL (coordinate units) become one node "
        f"(default {DEFAULT_SNAP_TOLERANCE:g}: ends that coincide up to rounding)",
    )
    group.add_argument(
        "--skip-invalid",
        action="store_true",
        help="GeoJSON only: leave out features with invalid geometry instead of stopping "
        "(counted in a warning; the first 20 of each reason listed in run.json)",
    )


def _out_folder(value: str) -> str:
    """``--out``: refused at parsing when empty or a root folder (:func:`checked_folder`)."""
    try:
        checked_folder(value)
    except OutputError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None
    return value


def _add_common(parser: argparse.ArgumentParser, *, out: str) -> None:
    parser.add_argument(
        "--out",
        default=out,
        type=_out_folder,
        metavar="DIR",
        help=f"output folder (default {out}; not empty, not a root folder)",
    )
    parser.add_argument(
        "--json",
        action="store_true",
        help="print a JSON summary on stdout; on failure, a JSON error object (type, "
        "message, exit_code, file, line, column)",
    )
    parser.add_argument(
        "--quiet",
        action="store_true",
        help="only warnings and errors on stderr (no messages, no progress bars)",
    )
    parser.add_argument("--debug", action="store_true", help="show tracebacks of internal errors")


#: Help of ``--solver``, the same on every command that solves.
_SOLVER_HELP = (
    "eigen-solver: 'auto' picks one from the network's size, 'dense' (LAPACK, small "
    "networks), 'lanczos' or 'lanczos_flip' (Krylov), 'multilevel' (coarsened "
    "hierarchy, large networks); recorded in run.json (default auto)"
)


def _add_solver(group: Any) -> None:
    """The ``--solver`` option: the eigen-solver every eigen-solve of the command uses."""
    group.add_argument("--solver", choices=METHODS, default="auto", help=_SOLVER_HELP)


def _add_solving(parser: argparse.ArgumentParser, *, auto: bool) -> None:
    group = parser.add_argument_group("solving")
    kinds = (("auto",) if auto else ()) + OPERATOR_KINDS
    default = "auto" if auto else "normalized"
    group.add_argument(
        "--operator",
        choices=kinds,
        default=default,
        help=f"graph operator whose smallest eigenvectors place the nodes (default {default})",
    )
    group.add_argument(
        "--tol",
        type=_positive_float,
        default=DEFAULT_TOL,
        help=f"eigen residual bound (default {DEFAULT_TOL})",
    )
    _add_solver(group)
    group.add_argument(
        "--damping",
        type=_open_unit,
        default=DEFAULT_DAMPING,
        metavar="D",
        help="with --directed: probability that the random walk follows a link rather than "
        f"jumping to a random node (default {DEFAULT_DAMPING})",
    )
    group.add_argument("--seed", type=_seed, default=0, help="random seed (default 0)")


def _add_zoning(parser: argparse.ArgumentParser, *, reading: bool) -> None:
    group = parser.add_argument_group("zones and constraints")
    group.add_argument(
        "--zones",
        type=_zone_spec,
        default="auto",
        metavar="K|auto|A:B",
        help="number of zones, 'auto' to read it from the eigengaps, or a range such as "
        "8:20 to choose within (default auto)",
    )
    group.add_argument(
        "--assign",
        choices=("auto", *ASSIGNMENTS),
        default="auto",
        help="how embedded nodes become zones; 'multilevel' coarsens the network, zones the "
        "coarsest and refines at every level back up (hundreds to thousands of zones, no "
        "eigenvectors of the whole network); 'auto' takes it from "
        f"{MULTILEVEL_MIN_ZONES} zones up, otherwise compares the others (default auto)",
    )
    group.add_argument(
        "--trees",
        choices=("auto", *TREE_TREATMENTS),
        default="auto",
        help="dangling branches: 'attach' zones the network without them and gives each "
        "branch the zone of the node it hangs from; 'keep' zones them like any node",
    )
    group.add_argument(
        "--dominant",
        choices=DOMINANT_TREATMENTS,
        default="auto",
        help=f"links at least {DOMINANT_GAP:g}x stronger than every link around them (bus "
        "couplers): 'contract' merges their ends before the solve so no zone is a coupler's "
        "two ends; 'auto' does so only where zoning with them free leaves a zone inside "
        "their group or cuts one; 'ignore' leaves them (default auto)",
    )
    group.add_argument(
        "--fragments",
        choices=FRAGMENT_TREATMENTS,
        default="set_aside",
        help="connected components too small to be zones (stray pieces, isolated nodes of "
        "the node table): 'set_aside' puts them in one extra zone numbered last (role "
        "'fragments', listed in fragments.csv) and gives every zone asked to the rest; "
        "'zone' zones every component, one zone each at least (default set_aside)",
    )
    group.add_argument(
        "--no-refine",
        action="store_true",
        help="skip the boundary refinement that lowers the normalized cut",
    )
    _add_rules(group, reading=reading, trunk=True)


def _add_rules(group: Any, *, reading: bool, trunk: bool) -> None:
    """Size bounds, then (when the command reads a network) the rules read from it."""
    group.add_argument(
        "--min-size",
        type=_positive_float,
        metavar="N",
        help="smallest zone, in --size-col units when given, else in nodes",
    )
    group.add_argument(
        "--max-size",
        type=_positive_float,
        metavar="N",
        help="largest zone, in --size-col units when given, else in nodes",
    )
    group.add_argument(
        "--count-nodes",
        action="store_true",
        help="count --min-size/--max-size in nodes even when --size-col is given",
    )
    if not reading:
        return
    group.add_argument(
        "--supply-col",
        metavar="COL",
        help="yes/no column of the node table marking supply points: one per zone",
    )
    group.add_argument(
        "--supply-list",
        metavar="FILE",
        help="table listing supply points in its --node-col column: one per zone",
    )
    group.add_argument(
        "--keep-col",
        metavar="COL",
        help="yes/no column of the edge table marking links that must not be cut",
    )
    group.add_argument(
        "--keep-list",
        metavar="FILE",
        help="table of links (--source/--target columns) that must not be cut",
    )
    group.add_argument(
        "--fixed",
        metavar="FILE",
        help="table of node,zone rows fixing those nodes' zones in advance",
    )
    if not trunk:
        return
    group.add_argument(
        "--trunk-col",
        metavar="COL",
        help="yes/no column of the edge table marking trunk links (feeding mains): their "
        "nodes belong to no district, districts are formed on the rest, and the trunk "
        "becomes one more zone, numbered last",
    )
    group.add_argument(
        "--trunk-above",
        type=_finite_float,
        metavar="X",
        help="with it, --trunk-col is numeric and links whose value is >= X are trunk links "
        "(e.g. --trunk-col diameter --trunk-above 24)",
    )


def _add_report(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--report",
        action="store_true",
        help=f"also write {REPORT_FILE}: one self-contained page with the zone map, "
        "spectrum, tables, run record and cautions",
    )


def _add_figures(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--figures",
        action="store_true",
        help="also write every figure (zone map, spectrum, zone bars, stability map) as PNG "
        "and SVG into the output folder's figures/ subfolder",
    )


def _add_formats(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group("extra output formats")
    group.add_argument(
        "--geojson",
        action="store_true",
        help="also write zones, zone summary and boundary links as GeoJSON (RFC 7946) "
        "features carrying the zone ids (needs node coordinates)",
    )
    group.add_argument(
        "--parquet",
        action="store_true",
        help="also write the tables as Parquet (needs pyarrow)",
    )


def _add_zones_command(commands: Any) -> None:
    """The ``zones`` subcommand."""
    raw = argparse.RawDescriptionHelpFormatter
    zones = commands.add_parser(
        "zones",
        help="split a network into zones and write zones, boundary links and a summary",
        description="Split a network into K well-connected zones with few, weak links between.",
        epilog=_caution_epilog(
            "  specgraph zones pipes.csv --zones 8\n"
            "  specgraph zones pipes.csv --nodes junctions.csv --node-col node \\\n"
            "      --weight length_m --distance --size-col connections --zones auto \\\n"
            "      --min-size 500 --max-size 3000 --supply-col inlet --keep-col trunk \\\n"
            "      --out districts"
        ),
        formatter_class=raw,
    )
    _add_reading(zones)
    _add_zoning(zones, reading=True)
    _add_solving(zones, auto=True)
    _add_report(zones)
    _add_figures(zones)
    _add_formats(zones)
    _add_common(zones, out="specgraph-zones")


def _add_refine_command(commands: Any) -> None:
    """The ``refine`` subcommand."""
    raw = argparse.RawDescriptionHelpFormatter
    refine = commands.add_parser(
        "refine",
        help="improve an existing zoning by multilevel V-cycles, keeping its zones and the rules",
        description="Improve a zoning, whoever made it (node,zone table), by moving groups of "
        "nodes and single nodes across its boundaries where that lowers the normalized cut; "
        "every zone stays one zone, and the rules given are kept. Writes the files of `zones`.",
        epilog=_caution_epilog(
            "  specgraph refine pipes.csv districts.csv --weight length_m --distance\
"
            "      --nodes junctions.csv --size-col connections --min-size 500 --max-size 3000"
        ),
        formatter_class=raw,
    )
    _add_reading(refine)
    refine.add_argument("zones_file", metavar="ZONES_CSV", help="node,zone table to improve")
    refine.add_argument("--zone-col", default="zone", metavar="COL", help="zone column")
    group = refine.add_argument_group("rules the result keeps")
    _add_rules(group, reading=True, trunk=False)
    refine.add_argument(
        "--cycles",
        type=_seed,
        metavar="N",
        help=f"most V-cycles (default {MAX_CYCLES}, fewer above a million nodes); fewer run "
        f"when two in a row each lower the normalized cut by less than {CYCLE_RTOL:.1%}".replace(
            "%", "%%"
        ),
    )
    refine.add_argument("--seed", type=_seed, default=0, help="random seed (default 0)")
    _add_report(refine)
    _add_formats(refine)
    _add_common(refine, out="specgraph-refine")


def _add_spectrum_command(commands: Any) -> None:
    """The ``spectrum`` subcommand."""
    raw = argparse.RawDescriptionHelpFormatter
    spectrum = commands.add_parser(
        "spectrum",
        help="smallest eigenvalues, residuals and suggested zone counts",
        description="Smallest Laplacian eigenvalues, their residuals, and zone counts "
        "suggested by the eigengaps.",
        epilog=_caution_epilog("  specgraph spectrum pipes.csv --count 30"),
        formatter_class=raw,
    )
    _add_reading(spectrum)
    spectrum.add_argument(
        "--count",
        type=_positive_int,
        default=DEFAULT_SPECTRUM_COUNT,
        metavar="M",
        help=f"eigenvalues to compute (default {DEFAULT_SPECTRUM_COUNT})",
    )
    _add_solving(spectrum, auto=True)
    _add_common(spectrum, out="specgraph-spectrum")


def _add_score_command(commands: Any) -> None:
    """The ``score`` subcommand."""
    raw = argparse.RawDescriptionHelpFormatter
    score = commands.add_parser(
        "score",
        help="figures of an existing zoning: conductance, normalized cut, modularity, outliers",
        description="Score a zoning, whoever made it (node,zone table), on a network: per-zone "
        "and overall figures, outlier zones, and the eigengap at its zone count.",
        epilog=_caution_epilog(
            "  specgraph score pipes.csv districts.csv --weight length_m --distance\n"
            "  specgraph score pipes.csv districts.csv --nodes junctions.csv "
            "--size-col connections --supply-col inlet"
        ),
        formatter_class=raw,
    )
    _add_reading(score)
    score.add_argument("zones_file", metavar="ZONES_CSV", help="node,zone table to score")
    score.add_argument("--zone-col", default="zone", metavar="COL", help="zone column")
    score.add_argument(
        "--supply-col", metavar="COL", help="yes/no column of the node table marking supply points"
    )
    score.add_argument(
        "--supply-list", metavar="FILE", help="table listing supply points (--node-col column)"
    )
    score.add_argument(
        "--no-eigengap",
        action="store_true",
        help="skip the eigen-solve for the eigengap at the zone count (large networks)",
    )
    _add_solver(score)
    score.add_argument("--tol", type=_positive_float, default=DEFAULT_TOL, help=argparse.SUPPRESS)
    score.add_argument(
        "--damping",
        type=_open_unit,
        default=DEFAULT_DAMPING,
        metavar="D",
        help="node importance: probability that the random walk follows a link rather than "
        f"jumping to a random node (default {DEFAULT_DAMPING})",
    )
    score.add_argument("--seed", type=_seed, default=0, help="random seed (default 0)")
    _add_common(score, out="specgraph-score")


def _add_compare_command(commands: Any) -> None:
    """The ``compare`` subcommand."""
    raw = argparse.RawDescriptionHelpFormatter
    compare = commands.add_parser(
        "compare",
        help="agreement of two zonings: ARI, NMI, variation of information, splits and merges",
        description="Compare two node,zone tables: adjusted Rand index, normalized mutual "
        "information, variation of information, the overlap of every pair of zones, and "
        "which zones split or merge.",
        epilog=_caution_epilog("  specgraph compare current-districts.csv proposal/zones.csv"),
        formatter_class=raw,
    )
    compare.add_argument("zones_a", metavar="ZONES_A", help="first node,zone table")
    compare.add_argument("zones_b", metavar="ZONES_B", help="second node,zone table")
    compare.add_argument("--node-col", default="node", metavar="COL", help="node id column")
    compare.add_argument("--zone-col", default="zone", metavar="COL", help="zone column")
    _add_common(compare, out="specgraph-compare")


def _add_robustness_command(commands: Any) -> None:
    """The ``robustness`` subcommand."""
    raw = argparse.RawDescriptionHelpFormatter
    robust = commands.add_parser(
        "robustness",
        help="algebraic connectivity, bridges, articulation nodes and bottleneck links",
        description="Where is the network fragile? Algebraic connectivity of the network (and "
        "of each zone with --zones-file), every bridge and articulation node with what its "
        "failure would cut off, and the links ranked by leverage (effective resistance times "
        "weight: 1 for a bridge, near 0 for a link with many parallel routes).",
        epilog=_caution_epilog(
            "  specgraph robustness pipes.csv --nodes junctions.csv --size-col connections\n"
            "  specgraph robustness pipes.csv --zones-file districts.csv --top 200"
        ),
        formatter_class=raw,
    )
    _add_reading(robust)
    robust.add_argument(
        "--zones-file", metavar="ZONES_CSV", help="node,zone table: also score each zone"
    )
    robust.add_argument("--zone-col", default="zone", metavar="COL", help="zone column")
    robust.add_argument(
        "--top",
        type=_positive_int,
        default=DEFAULT_TOP,
        metavar="N",
        help=f"bottleneck links listed (default {DEFAULT_TOP})",
    )
    robust.add_argument("--tol", type=_positive_float, default=DEFAULT_TOL, help=argparse.SUPPRESS)
    _add_solver(robust)
    robust.add_argument("--seed", type=_seed, default=0, help="random seed (default 0)")
    _add_common(robust, out="specgraph-robustness")


def _add_stability_command(commands: Any) -> None:
    """The ``stability`` subcommand."""
    raw = argparse.RawDescriptionHelpFormatter
    stable = commands.add_parser(
        "stability",
        help="how much the zones move under other seeds and slightly perturbed weights",
        description="Zone the network repeatedly (other seeds; link weights perturbed by "
        "log-normal noise) and report each node's confidence, unstable zones, and whether the "
        "eigengap is large enough for the zone count (Davis-Kahan).",
        epilog=_caution_epilog(
            "  specgraph stability pipes.csv --zones 12 --repeats 5 --spread 0.1"
        ),
        formatter_class=raw,
    )
    _add_reading(stable)
    _add_zoning(stable, reading=True)
    stable.add_argument(
        "--repeats",
        type=_positive_int,
        default=DEFAULT_REPEATS,
        metavar="N",
        help="runs with other seeds, and as many with perturbed weights "
        f"(default {DEFAULT_REPEATS})",
    )
    stable.add_argument(
        "--spread",
        type=_positive_float,
        default=DEFAULT_SPREAD,
        metavar="S",
        help="standard deviation of the log-normal weight noise (default "
        f"{DEFAULT_SPREAD}: about {DEFAULT_SPREAD * 100:.0f}%% per link)",
    )
    _add_solving(stable, auto=True)
    _add_report(stable)
    _add_figures(stable)
    _add_common(stable, out="specgraph-stability")


def _add_local_command(commands: Any) -> None:
    """The ``local`` subcommand."""
    raw = argparse.RawDescriptionHelpFormatter
    local = commands.add_parser(
        "local",
        help="a compact, weakly attached zone around one or more assets",
        description="Find a compact zone of low conductance around one or more assets (a "
        "failed pump, a substation, a junction) from a random walk that restarts at them "
        "(Andersen-Chung-Lang push) and a sweep cut; only the part of the network the walk "
        "reaches is examined.",
        epilog=_caution_epilog(
            "  specgraph local pipes.csv --around QJ-00412\n"
            "  specgraph local pipes.csv --around QJ-00412 QJ-00977 --size-limit 300"
        ),
        formatter_class=raw,
    )
    _add_reading(local)
    local.add_argument(
        "--around",
        nargs="+",
        required=True,
        metavar="NODE",
        help="id of the asset (or several ids): the zone holds all of them",
    )
    local.add_argument(
        "--size-limit",
        type=_positive_float,
        metavar="N",
        help="largest zone, in --size-col units when given, else in nodes",
    )
    local.add_argument(
        "--alpha",
        type=_open_unit,
        default=DEFAULT_LOCAL_ALPHA,
        metavar="A",
        help="restart probability of the walk: larger keeps the zone tighter "
        f"(default {DEFAULT_LOCAL_ALPHA})",
    )
    _add_common(local, out="specgraph-local")


def _add_demo_command(commands: Any) -> None:
    """The ``demo`` subcommand."""
    raw = argparse.RawDescriptionHelpFormatter
    demo = commands.add_parser(
        "demo",
        help="zone the bundled demo network (the invented town of Quillmere)",
        description="Run `zones` on the bundled demo water network and write the results.",
        epilog=_caution_epilog("  specgraph demo --out quillmere-zones"),
        formatter_class=raw,
    )
    _add_zoning(demo, reading=False)
    _add_solving(demo, auto=True)
    _add_report(demo)
    _add_figures(demo)
    _add_formats(demo)
    _add_common(demo, out="specgraph-demo")


#: The subcommands, in the order ``specgraph --help`` lists them.
_SUBCOMMANDS = (
    _add_zones_command,
    _add_refine_command,
    _add_spectrum_command,
    _add_score_command,
    _add_compare_command,
    _add_robustness_command,
    _add_stability_command,
    _add_local_command,
    _add_demo_command,
)


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of the ``specgraph`` command."""
    parser = argparse.ArgumentParser(
        prog="specgraph",
        description="Split infrastructure networks into well-connected zones by spectral methods.",
        epilog=_EXIT_CODES,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"specgraph {__version__}")
    commands = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    for add_command in _SUBCOMMANDS:
        add_command(commands)
    return parser


# ------------------------------------------------------------ options -> library
def _check_node_options(parser: argparse.ArgumentParser, args: argparse.Namespace) -> None:
    if getattr(args, "edges", None) is None or args.nodes or holds_nodes(args.edges):
        return
    for option, value in (
        ("--size-col", args.size_col),
        ("--x-col", args.x_col),
        ("--y-col", args.y_col),
        ("--supply-col", getattr(args, "supply_col", None)),
    ):
        if value is not None:
            parser.error(f"{option} names a column of the node table, so it needs --nodes")


# ------------------------------------------------------------------ running
@contextlib.contextmanager
def _messages_to_stderr(quiet: bool) -> Iterator[None]:
    """Route the library's log records to stderr for one command, then restore."""
    handler = logging.StreamHandler(sys.stderr)
    handler.setFormatter(logging.Formatter("specgraph: %(message)s"))
    saved = (logger.handlers[:], logger.level, logger.propagate)
    logger.handlers[:] = [handler]
    logger.setLevel(logging.WARNING if quiet else logging.INFO)
    logger.propagate = False
    try:
        yield
    finally:
        logger.handlers[:], level, logger.propagate = saved
        logger.setLevel(level)


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit code (callable from tests)."""
    argv = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser()
    args, usage_code = _parse(parser, argv)
    if args is None:
        return usage_code
    args.progress = wants_progress(quiet=args.quiet)
    args.compile_notice = not (args.quiet or args.json)
    with _messages_to_stderr(args.quiet):
        code, summary = _dispatch(args, argv, option_names(parser, args.command))
    if summary is not None and args.json:
        print(json.dumps(summary, indent=2))
    return code


def _parse(parser: argparse.ArgumentParser, argv: list[str]) -> tuple[Any, int]:
    """The parsed options, or None and argparse's exit code (2 bad usage, 0 ``--help``).

    With ``--json`` among the arguments, a usage error is also printed as a
    JSON error object on stdout (:func:`error_object`), as every other error is.
    """
    wants_json = "--json" in argv
    captured = io.StringIO()
    try:
        with contextlib.redirect_stderr(captured) if wants_json else contextlib.nullcontext():
            args = parser.parse_args(argv)
            _check_node_options(parser, args)
    except SystemExit as exc:  # argparse exits 2 on bad usage, 0 on --help
        code = int(exc.code or 0)
        if wants_json:
            sys.stderr.write(captured.getvalue())
            if code:
                lines = [line for line in captured.getvalue().splitlines() if line.strip()]
                message = lines[-1] if lines else "bad usage"
                message = message.split(": error: ", 1)[-1]
                _print_error("UsageError", message, code)
        return None, code
    sys.stderr.write(captured.getvalue())
    return args, EXIT_OK


def error_object(
    kind: str, message: str, exit_code: int, error: BaseException | None = None
) -> dict[str, Any]:
    """The JSON object ``--json`` prints on stdout when a command fails.

    ``{"error": {"type", "message", "exit_code", "file", "line", "column"}}``:
    ``type`` is the exception's class name (``InputError``, ``ParameterError``,
    ``ConstraintError``, ``ConvergenceError``..., ``UsageError`` for a command
    line argparse refused, ``InternalError`` for an unexpected failure);
    ``file``, ``line`` and ``column`` are null unless the error names them.
    """
    return {
        "error": {
            "type": kind,
            "message": message,
            "exit_code": exit_code,
            "file": getattr(error, "path", None),
            "line": getattr(error, "line", None),
            "column": getattr(error, "column", None),
        }
    }


def _print_error(
    kind: str, message: str, exit_code: int, error: BaseException | None = None
) -> None:
    print(json.dumps(error_object(kind, message, exit_code, error), indent=2))


#: Arguments that name an input file, and how a refusal names them.
_FILE_ARGUMENTS = {
    "edges": "EDGES",
    "nodes": "--nodes",
    "supply_list": "--supply-list",
    "keep_list": "--keep-list",
    "fixed": "--fixed",
    "zones_file": "the zones file",
    "zones_a": "ZONES_A",
    "zones_b": "ZONES_B",
}


@contextlib.contextmanager
def _spooled(args: argparse.Namespace) -> Iterator[None]:
    """Read ``-`` (standard input) and pipes once, into temporary files the command reads."""
    given = {label: getattr(args, name, None) for name, label in _FILE_ARGUMENTS.items()}
    with spooled_sources(given) as paths:
        for name, label in _FILE_ARGUMENTS.items():
            if label in paths:
                setattr(args, name, paths[label])
        yield


def _dispatch(
    args: argparse.Namespace, argv: list[str], options: Mapping[str, str] | None = None
) -> tuple[int, dict[str, Any] | None]:
    """Run one command; map every failure to its exit code and a one-line message.

    Errors raised on purpose (:class:`SpecgraphError`: bad input, parameters or
    constraints, unwritable output, too little memory) exit 2, a missed
    tolerance exits 3, anything else is an internal error (exit 1). The
    traceback is shown with ``--debug`` only. The option that set a refused
    library argument (``options``: library keyword -> option, from
    :func:`~specgraph._option_names.option_names`) is written in front of the
    library's own words.
    """
    if args.command in CAUTIONED:
        logger.info("caution: %s", CAUTION)
    as_json = bool(getattr(args, "json", False))
    try:
        with compile_notice(enabled=getattr(args, "compile_notice", False)), _spooled(args):
            summary = COMMANDS[args.command](args, argv)
    except ConvergenceError as exc:
        message = for_command_line(exc, options or {})  # advice in this command's options
        logger.error("error: %s", message)
        logger.error(
            "partial residuals: %s; no zones were written",
            [f"{r:.3g}" for r in exc.partial.residuals],
        )
        _debug_traceback(args)
        _record_not_converged(args, argv, exc)
        if as_json:
            _print_error(type(exc).__name__, message, EXIT_NOT_CONVERGED, exc)
        return EXIT_NOT_CONVERGED, None
    except SpecgraphError as exc:
        message = for_command_line(exc, options or {})
        logger.error("error: %s", message)
        _debug_traceback(args)
        if as_json:
            _print_error(type(exc).__name__, message, EXIT_INPUT, exc)
        return EXIT_INPUT, None
    except MemoryError as exc:  # not foreseen by the guard: the stage and the need, exit 2
        refusal = out_of_memory(exc)
        logger.error("error: %s", refusal)
        _debug_traceback(args)
        if as_json:
            _print_error(type(refusal).__name__, str(refusal), EXIT_INPUT, refusal)
        return EXIT_INPUT, None
    except Exception as exc:
        message = " ".join(str(exc).split())
        logger.error(
            "internal error: %s: %s (rerun with --debug and report it)",
            type(exc).__name__,
            message,
        )
        _debug_traceback(args)
        if as_json:
            _print_error("InternalError", f"{type(exc).__name__}: {message}", EXIT_INTERNAL)
        return EXIT_INTERNAL, None
    return EXIT_OK, summary


def _debug_traceback(args: argparse.Namespace) -> None:
    """With ``--debug``, the traceback of the error being handled, on stderr."""
    if args.debug:
        traceback.print_exc(file=sys.stderr)


def _record_not_converged(
    args: argparse.Namespace, argv: list[str], error: ConvergenceError
) -> None:
    """Write the partial eigen-solve figures of a failed run to ``NOT_CONVERGED_FILE``."""
    record = not_converged_record(error, command=["specgraph", *argv])
    try:
        write_outputs(args.out, {NOT_CONVERGED_FILE: record})
    except SpecgraphError as exc:  # the error already reported matters more
        logger.error("could not record the partial figures: %s", exc)
    else:
        logger.error("partial figures recorded in %s", Path(args.out) / NOT_CONVERGED_FILE)


def run() -> None:
    """Console-script entry point."""
    try:
        code = main()
        sys.stdout.flush()
    except BrokenPipeError:
        # The reader of stdout went away (e.g. `| head`): not an error of ours.
        # Point stdout at devnull so the interpreter's final flush stays quiet.
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        code = EXIT_OK
    sys.exit(code)
