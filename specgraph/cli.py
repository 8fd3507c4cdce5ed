"""The ``specgraph`` command: argument parsing over the library, nothing more.

Exit codes: 0 success; 2 bad usage or bad input; 3 an eigen-solve missed its
tolerance (nothing is written as if it had converged); 1 an unexpected
internal error. Data goes to files (and ``--json`` summaries to stdout);
messages go to stderr.
"""

from __future__ import annotations

import argparse
import contextlib
import json
import logging
import math
import os
import shlex
import sys
import textwrap
from collections.abc import Callable, Iterator, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from . import __version__
from ._guard import check_memory
from ._progress import stage_progress, wants_progress
from .diagnostics import (
    DEFAULT_TOP,
    boundary_links,
    compare_frames,
    labels_from_mapping,
    robustness,
    score,
    suggest_zone_counts,
)
from .eigen import DEFAULT_TOL, smallest_eigenpairs
from .exceptions import ConvergenceError, InputError, ParameterError, SpecgraphError
from .export import (
    CAUTION,
    file_checksum,
    jsonable,
    parquet_available,
    run_record,
    write_outputs,
    zoning_geojson,
    zoning_parquet,
    zoning_tables,
)
from .io import (
    DEFAULT_SNAP_TOLERANCE,
    GRAPHML_SUFFIXES,
    flagged_links,
    read_edges,
    read_geojson_lines,
    read_link_list,
    read_node_list,
    read_zone_file,
)
from .network import Network
from .operators import laplacian
from .report import build_report
from .studies import DEFAULT_REPEATS, DEFAULT_SPREAD, stability
from .walks import DEFAULT_DAMPING
from .zones import (
    ASSIGNMENTS,
    DEFAULT_LOCAL_ALPHA,
    OPERATOR_KINDS,
    TREE_TREATMENTS,
    ZoneConstraints,
    find_zones,
    local_zone,
    parse_zone_spec,
)

__all__ = ["build_parser", "main", "run"]

logger = logging.getLogger("specgraph")

EXIT_OK, EXIT_INTERNAL, EXIT_INPUT, EXIT_NOT_CONVERGED = 0, 1, 2, 3

#: Eigenvalues ``specgraph spectrum`` computes when ``--count`` is not given.
DEFAULT_SPECTRUM_COUNT = 20

_EXIT_CODES = """\
exit codes:
  0  success
  2  bad usage or bad input (the message names the file, line and column)
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
    except ParameterError as exc:
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
        "GeoJSON file of lines (.geojson: line ends become nodes)",
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


def _add_common(parser: argparse.ArgumentParser, *, out: str) -> None:
    parser.add_argument("--out", default=out, metavar="DIR", help=f"output folder (default {out})")
    parser.add_argument("--json", action="store_true", help="print a JSON summary on stdout")
    parser.add_argument(
        "--quiet", action="store_true", help="only errors on stderr (no messages, no progress bars)"
    )
    parser.add_argument("--debug", action="store_true", help="show tracebacks of internal errors")


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
        help="how embedded nodes become zones (default auto)",
    )
    group.add_argument(
        "--trees",
        choices=("auto", *TREE_TREATMENTS),
        default="auto",
        help="dangling branches: 'attach' zones the network without them and gives each "
        "branch the zone of the node it hangs from; 'keep' zones them like any node",
    )
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
    group.add_argument(
        "--no-refine",
        action="store_true",
        help="skip the boundary refinement that lowers the normalized cut",
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


#: File name of the HTML report that --report adds to the output folder.
REPORT_FILE = "report.html"
#: Files that --geojson adds (names of :func:`specgraph.export.zoning_geojson`).
GEOJSON_FILES = ["zones.geojson", "zone_summary.geojson", "boundary.geojson"]
#: Suffixes (lower case) of edge files read as GeoJSON line networks.
GEOJSON_SUFFIXES = frozenset({".geojson"})


def _add_report(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--report",
        action="store_true",
        help=f"also write {REPORT_FILE}: one self-contained page with the zone map, "
        "spectrum, tables, run record and cautions",
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
    _add_formats(zones)
    _add_common(zones, out="specgraph-zones")

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
    robust.add_argument("--seed", type=_seed, default=0, help="random seed (default 0)")
    _add_common(robust, out="specgraph-robustness")

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
    _add_common(stable, out="specgraph-stability")

    local = commands.add_parser(
        "local",
        help="a compact, weakly attached zone around one or more assets",
        description="Find a compact zone of low conductance around one or more assets (a "
        "failed pump, a substation, a junction) from a random walk that restarts at them "
        "(Andersen-Chung-Lang push) and a sweep cut; only the part of the network the walk "
        "reaches is examined.",
        epilog=_caution_epilog(
            "  specgraph local pipes.csv --around QJ-0412\n"
            "  specgraph local pipes.csv --around QJ-0412 QJ-0977 --size-limit 300"
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
    _add_formats(demo)
    _add_common(demo, out="specgraph-demo")
    return parser


def _holds_nodes(path: str) -> bool:
    """Whether the edge file also holds the node table (GraphML does)."""
    return Path(path).suffix.lower() in GRAPHML_SUFFIXES


def _node_table(args: argparse.Namespace) -> str:
    """The file whose node table node-column options refer to."""
    return str(args.nodes) if args.nodes else str(args.edges)


def _check_node_options(parser: argparse.ArgumentParser, args: argparse.Namespace) -> None:
    if getattr(args, "edges", None) is None or args.nodes or _holds_nodes(args.edges):
        return
    for option, value in (
        ("--size-col", args.size_col),
        ("--x-col", args.x_col),
        ("--y-col", args.y_col),
        ("--supply-col", getattr(args, "supply_col", None)),
    ):
        if value is not None:
            parser.error(f"{option} names a column of the node table, so it needs --nodes")


def _read(args: argparse.Namespace) -> tuple[Network, list[dict[str, Any]]]:
    if Path(args.edges).suffix.lower() in GEOJSON_SUFFIXES:
        network = _read_geojson(args)
    else:
        network = _read_table(args)
    check_memory(network.n_nodes, network.n_links, what=f"{args.command} {args.edges}")
    inputs = [{"role": "edges", "path": args.edges, "checksum": file_checksum(args.edges)}]
    if args.nodes:
        inputs.append({"role": "nodes", "path": args.nodes, "checksum": file_checksum(args.nodes)})
    return network, inputs


def _read_geojson(args: argparse.Namespace) -> Network:
    """A line network from GeoJSON; what was snapped or skipped is said on stderr."""
    for option, value in (
        ("--nodes", args.nodes),
        ("--size-col", args.size_col),
        ("--directed", args.directed),
    ):
        if value:
            raise ParameterError(
                f"{option}: not available for a GeoJSON line network (its nodes are built "
                "from the line ends, and its lines are read without direction); leave the "
                f"option out, or convert the lines to an edge table; received {option} {value}"
            )
    network, report = read_geojson_lines(
        args.edges,
        snap_tolerance=args.snap,
        weight=args.weight,
        distance=args.distance,
        on_invalid="skip" if args.skip_invalid else "raise",
    )
    logger.info(
        "GeoJSON: %d features, %d links, %d nodes; %d line ends snapped (largest gap %.3g)",
        report.features,
        report.links,
        report.nodes,
        report.snapped_ends,
        report.largest_snap,
    )
    for message in report.warnings:
        logger.warning("warning: %s", message)
    return network


def _check_formats(network: Network, args: argparse.Namespace) -> None:
    """Refuse extra formats that cannot be written, before any work is done."""
    if getattr(args, "geojson", False) and network.coordinates is None:
        raise ParameterError(
            "--geojson: GeoJSON features need node coordinates, and this network has none; "
            "give --nodes with --x-col and --y-col (or read a GeoJSON line network)"
        )
    if getattr(args, "parquet", False) and not parquet_available():
        raise ParameterError(
            "--parquet: writing Parquet needs pyarrow, which is not installed; install it "
            "with: pip install 'specgraph[parquet]'"
        )


def _read_table(args: argparse.Namespace) -> Network:
    return read_edges(
        args.edges,
        source=args.source,
        target=args.target,
        weight=args.weight,
        distance=args.distance,
        nodes=args.nodes,
        node=args.node_col,
        x=args.x_col,
        y=args.y_col,
        size=args.size_col,
        directed=args.directed,
    )


def _read_sources(network: Network, args: argparse.Namespace) -> tuple[str, ...]:
    """Supply points from ``--supply-col`` and ``--supply-list``, each once, checked
    against the network so that an unknown id is reported at its file and line."""
    sources: tuple[str, ...] = ()
    if getattr(args, "supply_col", None):
        sources += read_node_list(
            _node_table(args),
            node=args.node_col,
            flag=args.supply_col,
            network=network,
            option="--supply-col",
        )
    if getattr(args, "supply_list", None):
        sources += read_node_list(
            args.supply_list, node=args.node_col, network=network, option="--supply-list"
        )
    return tuple(dict.fromkeys(sources))


def _constraints(network: Network, args: argparse.Namespace) -> ZoneConstraints:
    """The zone constraints the options ask for, read from their files and columns.

    Ids in rule files are checked against the network here, so that an unknown
    id is reported at its file, line and column.
    """
    sources = _read_sources(network, args)
    keep: list[tuple[str, str]] = []
    if getattr(args, "keep_col", None):
        ids = network.node_ids
        keep += [(ids[a], ids[b]) for a, b in flagged_links(network, args.keep_col).tolist()]
    if getattr(args, "keep_list", None):
        keep += read_link_list(
            args.keep_list,
            source=args.source,
            target=args.target,
            network=network,
            option="--keep-list",
        )
    fixed = None
    if getattr(args, "fixed", None):
        fixed = read_zone_file(args.fixed, node=args.node_col, network=network, option="--fixed")
    by_size = network.sizes is not None and not args.count_nodes
    return ZoneConstraints(
        min_size=args.min_size,
        max_size=args.max_size,
        size_by="weight" if by_size else "nodes",
        sources=sources,
        keep_links=tuple(keep),
        fixed=fixed,
    )


def _zone_and_write(
    network: Network,
    inputs: list[dict[str, Any]],
    args: argparse.Namespace,
    argv: list[str],
    step: Callable[[str], None],
    *,
    markers: Sequence[str] = (),
) -> dict[str, Any]:
    _check_formats(network, args)
    step("reading rules")
    constraints = _constraints(network, args)  # reads (and checks) the rule files first
    for option in ("supply_list", "keep_list", "fixed"):
        path = getattr(args, option, None)
        if path:
            role = option.replace("_", " ")
            inputs.append({"role": role, "path": path, "checksum": file_checksum(path)})
    zoning = find_zones(
        network,
        args.zones,
        operator=args.operator,
        assign=args.assign,
        trees=args.trees,
        constraints=constraints,
        refine=not args.no_refine,
        tol=args.tol,
        rng=args.seed,
        damping=args.damping,
        progress=step,
    )
    step("writing")
    record = run_record(zoning, inputs=inputs, command=["specgraph", *argv])
    tables = zoning_tables(zoning)
    files: dict[str, Any] = {**tables, "run.json": record}
    if args.report:
        files[REPORT_FILE] = build_report(
            zoning,
            command=shlex.join(["specgraph", *argv]),
            record=record,
            tables=tables,
            sources=tuple(dict.fromkeys([*constraints.sources, *markers])),
        )
    # Files of optional formats that this run does not write go in the same commit, so
    # that a folder never mixes this run's tables with an earlier run's extras.
    stale = [] if args.report else [REPORT_FILE]
    if args.geojson:
        files.update(zoning_geojson(zoning))
    else:
        stale += GEOJSON_FILES
    if args.parquet:
        files.update(zoning_parquet(zoning))
    else:
        stale += [str(Path(name).with_suffix(".parquet")) for name in tables]
    written = write_outputs(args.out, files, remove=stale)
    for message in zoning.warnings:
        logger.warning("warning: %s", message)
    for name, decision in zoning.decisions.items():
        logger.info("%s: %s", name, decision["reason"])
    scores = zoning.scores
    logger.info(
        "%d zones, normalized cut %.4g, %d boundary links, all zones connected: %s",
        scores["zones"],
        scores["normalized_cut"],
        scores["boundary_links"],
        "yes" if scores["all_connected"] else "NO",
    )
    logger.info("wrote %s", ", ".join(str(p) for p in written))
    return {"out": str(args.out), "scores": scores, "warnings": list(zoning.warnings)}


#: Stages of a zoning run, as the progress bar counts them.
ZONING_STAGES = ["reading", "reading rules", "solving", "constraints", "refining", "writing"]


def _cmd_zones(args: argparse.Namespace, argv: list[str]) -> dict[str, Any]:
    with stage_progress(ZONING_STAGES, enabled=args.progress) as step:
        step("reading")
        network, inputs = _read(args)
        logger.info("read %r", network)
        return _zone_and_write(network, inputs, args, argv, step)


def _cmd_demo(args: argparse.Namespace, argv: list[str]) -> dict[str, Any]:
    from .demo import demo_files, load_demo

    network = load_demo()
    files = demo_files()
    inputs = [
        {"role": role, "path": f"<demo>/{path.name}", "checksum": file_checksum(path)}
        for role, path in (("edges", files.pipes), ("nodes", files.junctions))
    ]
    args.count_nodes = False
    logger.info("demo: the invented town of Quillmere, %r", network)
    # The demo zones without rules; its treatment works are shown on the map as markers.
    works = read_node_list(files.sources, node="node")
    with stage_progress(ZONING_STAGES[1:], enabled=args.progress) as step:
        return _zone_and_write(network, inputs, args, argv, step, markers=works)


def _cmd_spectrum(args: argparse.Namespace, argv: list[str]) -> dict[str, Any]:
    import pandas as pd

    network, inputs = _read(args)
    count = min(args.count, network.n_nodes)
    # 'auto': the directed Laplacian for a network read with directions, else the normalized.
    if args.operator == "auto":
        args.operator = "directed" if network.directed else "normalized"
    damping = args.damping if args.operator == "directed" else None
    result = smallest_eigenpairs(
        laplacian(network, kind=args.operator, damping=damping),
        count,
        tol=args.tol,
        rng=args.seed,
    )
    table = pd.DataFrame(
        {"index": range(result.k), "eigenvalue": result.values, "residual": result.residuals}
    )
    # Eigengap suggestions read the normalized Laplacian's spectrum (Cheeger);
    # the other operators' eigenvalues are listed without them.
    suggested = (
        suggest_zone_counts(result.values, n_components=network.n_components)
        if args.operator in ("normalized", "random_walk", "directed")
        else []
    )
    record = {
        "specgraph_run": 1,
        "command": ["specgraph", *argv],
        "inputs": inputs,
        "network": {
            "nodes": network.n_nodes,
            "links": network.n_links,
            "components": network.n_components,
        },
        "eigen_solve": {
            "method": result.method,
            "pairs": result.k,
            "tol": result.tol,
            "max_residual": result.max_residual,
            "matvecs": result.matvecs,
            "iterations": result.iterations,
            "converged": result.converged,
        },
        "suggested_zone_counts": suggested,
        "caution": CAUTION,
    }
    write_outputs(args.out, {"spectrum.csv": table, "run.json": record})
    for row in suggested:
        logger.info(
            "suggested zones: %d (relative eigengap %.2f)", row["zones"], row["relative_gap"]
        )
    return {"out": str(args.out), "eigenvalues": result.values.tolist(), "suggested": suggested}


def _cmd_score(args: argparse.Namespace, argv: list[str]) -> dict[str, Any]:
    import pandas as pd

    network, inputs = _read(args)
    mapping = read_zone_file(args.zones_file, node=args.node_col, zone=args.zone_col)
    labels, coverage = labels_from_mapping(network, mapping, path=args.zones_file)
    sources = _read_sources(network, args)
    inputs.append(
        {"role": "zones", "path": args.zones_file, "checksum": file_checksum(args.zones_file)}
    )
    card = score(
        network,
        labels,
        sources=sources or None,
        eigengap=not args.no_eigengap,
        rng=args.seed,
        tol=args.tol,
        damping=args.damping,
    )
    if coverage.unassigned:
        logger.warning(
            "warning: %d nodes of the network are in no zone of %s (for example %s); they are "
            "scored as outside every zone",
            coverage.unassigned,
            args.zones_file,
            ", ".join(coverage.unassigned_examples),
        )
    record = {
        "specgraph_run": 1,
        "command": ["specgraph", *argv],
        "inputs": inputs,
        "coverage": coverage.as_dict(),
        "overall": card.overall,
        "eigenvalues": card.eigenvalues,
        "caution": CAUTION,
    }
    files: dict[str, Any] = {"zone_scores.csv": card.zones, "run.json": jsonable(record)}
    if card.node_importance is not None:
        files["node_importance.csv"] = pd.DataFrame(
            {"node": network.node_ids, "zone": labels, "importance": card.node_importance}
        )
    if coverage.unassigned:
        files["unassigned.csv"] = pd.DataFrame({"node": list(card.unassigned)})
    written = write_outputs(
        args.out, files, remove=() if coverage.unassigned else ["unassigned.csv"]
    )
    overall = card.overall
    logger.info(
        "%d zones, normalized cut %.4g, modularity %.4g, %d flagged as outliers, "
        "all zones connected: %s",
        overall["zones"],
        overall["normalized_cut"],
        overall["modularity"],
        overall["flagged_zones"],
        "yes" if overall["all_connected"] else "NO",
    )
    logger.info("wrote %s", ", ".join(str(p) for p in written))
    return {"out": str(args.out), "overall": jsonable(overall), "coverage": coverage.as_dict()}


def _cmd_compare(args: argparse.Namespace, argv: list[str]) -> dict[str, Any]:
    first = read_zone_file(args.zones_a, node=args.node_col, zone=args.zone_col)
    second = read_zone_file(args.zones_b, node=args.node_col, zone=args.zone_col)
    result = compare_frames(first, second)
    summary = result.summary()
    for side, count, examples in (
        (args.zones_a, result.only_in_a, result.examples_only_in_a),
        (args.zones_b, result.only_in_b, result.examples_only_in_b),
    ):
        if count:
            logger.warning(
                "warning: %d nodes are only in %s (for example %s); compared on the %d common "
                "nodes",
                count,
                side,
                ", ".join(examples),
                result.nodes_compared,
            )
    record = {
        "specgraph_run": 1,
        "command": ["specgraph", *argv],
        "inputs": [
            {"role": role, "path": path, "checksum": file_checksum(path)}
            for role, path in (("zones_a", args.zones_a), ("zones_b", args.zones_b))
        ],
        "summary": summary,
    }
    written = write_outputs(
        args.out,
        {
            "overlap.csv": result.overlap,
            "matched.csv": result.matched,
            "splits.csv": result.splits,
            "merges.csv": result.merges,
            "run.json": jsonable(record),
        },
    )
    logger.info(
        "adjusted Rand %.4f, NMI %.4f, variation of information %.4f nats; %d zones of A "
        "split, %d zones of B merge several of A",
        result.adjusted_rand,
        result.nmi,
        result.variation_of_information,
        len(result.splits),
        len(result.merges),
    )
    logger.info("wrote %s", ", ".join(str(p) for p in written))
    return {"out": str(args.out), "summary": jsonable(summary)}


def _cmd_robustness(args: argparse.Namespace, argv: list[str]) -> dict[str, Any]:
    network, inputs = _read(args)
    labels = None
    if args.zones_file:
        mapping = read_zone_file(args.zones_file, node=args.node_col, zone=args.zone_col)
        labels, coverage = labels_from_mapping(network, mapping, path=args.zones_file)
        if coverage.unassigned:
            raise InputError(
                f"{coverage.unassigned} nodes of the network are in no zone (for example "
                f"{', '.join(coverage.unassigned_examples)}); robustness per zone needs every "
                "node in a zone: complete the table, or leave out --zones-file",
                path=args.zones_file,
            )
        inputs.append(
            {"role": "zones", "path": args.zones_file, "checksum": file_checksum(args.zones_file)}
        )
    result = robustness(network, labels=labels, top=args.top, rng=args.seed, tol=args.tol)
    files: dict[str, Any] = {
        "links.csv": result.links,
        "bridges.csv": result.bridges,
        "articulation_nodes.csv": result.nodes,
        "components.csv": result.components,
    }
    if result.zones is not None:
        files["zone_connectivity.csv"] = result.zones
    record = {
        "specgraph_run": 1,
        "command": ["specgraph", *argv],
        "inputs": inputs,
        "summary": result.record,
        "caution": CAUTION,
    }
    files["run.json"] = jsonable(record)
    stale = [] if result.zones is not None else ["zone_connectivity.csv"]
    written = write_outputs(args.out, files, remove=stale)
    logger.info(
        "algebraic connectivity %.4g (normalized %.4g); %d bridges, %d articulation nodes",
        result.algebraic_connectivity,
        result.normalized_connectivity,
        len(result.bridges),
        len(result.nodes),
    )
    if len(result.bridges):
        worst = result.bridges.iloc[0]
        logger.info(
            "worst bridge %s - %s: its failure cuts off %d nodes (size %g)",
            worst["source"],
            worst["target"],
            worst["cut_nodes"],
            worst["cut_size"],
        )
    logger.info("wrote %s", ", ".join(str(p) for p in written))
    return {"out": str(args.out), "summary": jsonable(result.record)}


def _cmd_stability(args: argparse.Namespace, argv: list[str]) -> dict[str, Any]:
    network, inputs = _read(args)
    constraints = _constraints(network, args)
    options = {
        "operator": args.operator,
        "assign": args.assign,
        "trees": args.trees,
        "constraints": constraints,
        "refine": not args.no_refine,
        "tol": args.tol,
        "damping": args.damping,
    }
    logger.info(
        "zoning %d times (1 reference, %d other seeds, %d with weights perturbed by %.0f%%)",
        2 * args.repeats + 1,
        args.repeats,
        args.repeats,
        100 * args.spread,
    )
    result = stability(
        network,
        args.zones,
        repeats=args.repeats,
        spread=args.spread,
        zone_options=options,
        rng=args.seed,
        progress=args.progress,
    )
    record = {
        "specgraph_run": 1,
        "command": ["specgraph", *argv],
        "inputs": inputs,
        "overall": result.overall,
        "eigengap_checks": result.bounds.to_dict(orient="records"),
        "warnings": list(result.warnings),
        "caution": CAUTION,
    }
    files: dict[str, Any] = {
        "node_confidence.csv": result.nodes,
        "zone_stability.csv": result.zones,
        "runs.csv": result.runs,
        "run.json": jsonable(record),
    }
    if args.report:
        files[REPORT_FILE] = build_report(
            result.reference,
            command=shlex.join(["specgraph", *argv]),
            stability=result,
            sources=constraints.sources,
            title="Zoning stability report",
        )
    written = write_outputs(args.out, files, remove=() if args.report else (REPORT_FILE,))
    for message in result.warnings:
        logger.warning("warning: %s", message)
    overall = result.overall
    logger.info(
        "mean node confidence %.3f; adjusted Rand against the reference: seeds %.3f, "
        "perturbed weights %.3f; %d unstable zones",
        overall["mean_confidence"],
        overall["seed_ari_mean"],
        overall["perturbed_ari_mean"],
        len(overall["unstable_zones"]),
    )
    logger.info("wrote %s", ", ".join(str(p) for p in written))
    return {"out": str(args.out), "overall": jsonable(overall), "warnings": list(result.warnings)}


def _cmd_local(args: argparse.Namespace, argv: list[str]) -> dict[str, Any]:
    import pandas as pd

    network, inputs = _read(args)
    if network.directed:
        logger.warning(
            "warning: the local zone walks the links in both directions; --directed is "
            "recorded but does not change it"
        )
    found = local_zone(network, args.around, size_limit=args.size_limit, alpha=args.alpha)
    inside = np.zeros(network.n_nodes, dtype=np.int64)
    rows = np.array([network.index_of[node] for node in found.nodes], dtype=np.int64)
    inside[rows] = 1
    crossing = boundary_links(network, inside)
    crossing.insert(
        3, "inside", np.where(crossing["zone_a"] == 1, crossing["source"], crossing["target"])
    )
    crossing = crossing.drop(columns=["zone_a", "zone_b"])
    zone = pd.DataFrame({"node": found.nodes, "sweep_rank": np.arange(len(found.nodes))})
    figures = {
        "around": list(found.seeds),
        "nodes": len(found.nodes),
        "size": found.size,
        "volume": found.volume,
        "boundary_weight": found.boundary_weight,
        "boundary_links": len(crossing),
        "conductance": found.conductance,
        "connected": found.connected,
        "alpha": found.alpha,
        "epsilon": found.epsilon,
        "pushes": found.pushes,
        "touched_nodes": found.touched,
        "network_nodes": network.n_nodes,
        "pushed_volume": found.pushed_volume,
        "work_bound": found.work_bound,
        "sweep_conductance_bound": found.sweep_bound,
    }
    record = {
        "specgraph_run": 1,
        "command": ["specgraph", *argv],
        "inputs": inputs,
        "local_zone": figures,
        "caution": CAUTION,
    }
    written = write_outputs(
        args.out,
        {
            "local_zone.csv": zone,
            "local_boundary.csv": crossing,
            "sweep.csv": found.profile,
            "run.json": jsonable(record),
        },
    )
    if not found.connected:
        logger.warning(
            "warning: the zone is in several pieces (the assets are far apart); each piece "
            "is weakly attached, but they do not form one area"
        )
    logger.info(
        "local zone around %s: %d nodes, conductance %.4g, %d boundary links; the walk "
        "touched %d of %d nodes",
        ", ".join(found.seeds),
        len(found.nodes),
        found.conductance,
        len(crossing),
        found.touched,
        network.n_nodes,
    )
    logger.info("wrote %s", ", ".join(str(p) for p in written))
    return {"out": str(args.out), "local_zone": jsonable(figures)}


_COMMANDS = {
    "zones": _cmd_zones,
    "spectrum": _cmd_spectrum,
    "score": _cmd_score,
    "compare": _cmd_compare,
    "robustness": _cmd_robustness,
    "stability": _cmd_stability,
    "demo": _cmd_demo,
    "local": _cmd_local,
}


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
    try:
        args = parser.parse_args(argv)
        _check_node_options(parser, args)
    except SystemExit as exc:  # argparse exits 2 on bad usage, 0 on --help
        return int(exc.code or 0)
    args.progress = wants_progress(quiet=args.quiet)
    with _messages_to_stderr(args.quiet):
        code, summary = _dispatch(args, argv)
    if summary is not None and args.json:
        print(json.dumps(summary, indent=2))
    return code


def _dispatch(args: argparse.Namespace, argv: list[str]) -> tuple[int, dict[str, Any] | None]:
    """Run one command; map every failure to its exit code and a one-line message."""
    if args.command in ("zones", "demo", "score", "stability", "robustness", "local"):
        logger.info("caution: %s", CAUTION)
    try:
        summary = _COMMANDS[args.command](args, argv)
    except ConvergenceError as exc:
        partial = exc.partial
        logger.error("error: %s", exc)
        logger.error(
            "partial residuals: %s; no zones were written",
            [f"{r:.3g}" for r in partial.residuals],
        )
        _record_not_converged(args, argv, exc)
        return EXIT_NOT_CONVERGED, None
    except (SpecgraphError, ValueError) as exc:
        if args.debug:
            raise
        logger.error("error: %s", exc)
        return EXIT_INPUT, None
    except Exception as exc:
        if args.debug:
            raise
        logger.error(
            "internal error: %s: %s (rerun with --debug and report it)", type(exc).__name__, exc
        )
        return EXIT_INTERNAL, None
    return EXIT_OK, summary


#: The only file a run whose eigen-solve missed its tolerance writes: the
#: partial figures, for the record, next to (never in place of) earlier results.
NOT_CONVERGED_FILE = "not-converged.json"


def _record_not_converged(
    args: argparse.Namespace, argv: list[str], error: ConvergenceError
) -> None:
    """Write the partial eigen-solve figures of a failed run to ``NOT_CONVERGED_FILE``."""
    partial = error.partial
    record = {
        "specgraph_run": 1,
        "command": ["specgraph", *argv],
        "converged": False,
        "message": str(error),
        "eigen_solve": {
            "method": partial.method,
            "tol": partial.tol,
            "values": partial.values,
            "residuals": partial.residuals,
            "matvecs": partial.matvecs,
            "iterations": partial.iterations,
        },
        "caution": CAUTION,
    }
    try:
        write_outputs(args.out, {NOT_CONVERGED_FILE: jsonable(record)})
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
