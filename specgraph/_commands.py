"""What each ``specgraph`` command runs: its options passed to the library, its files written.

:mod:`specgraph.cli` parses the command line and maps errors to exit codes;
the functions here turn the parsed options into library calls (reading,
zoning, scoring...), build the run record with
:func:`specgraph.export.run_record` and write the files with
:func:`specgraph.export.write_outputs`. Messages go to the ``specgraph``
logger, which the command line routes to stderr.
"""

from __future__ import annotations

import argparse
import logging
import shlex
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from . import export
from ._guard import check_memory, check_table_memory, note_stage
from ._progress import stage_progress
from ._validation import check_tol, parameter_error
from ._wording import count, figure, plural
from .diagnostics import (
    compare_frames,
    labels_from_mapping,
    robustness,
    score,
    suggest_zone_counts,
)
from .eigen import smallest_eigenpairs
from .exceptions import InputError, ParameterError
from .export import (
    FRAGMENTS_FILE,
    eigen_record,
    eigen_table,
    jsonable,
    parquet_available,
    run_record,
    scorecard_tables,
    write_outputs,
    zoning_geojson,
    zoning_parquet,
    zoning_tables,
)
from .io import (
    GRAPHML_SUFFIXES,
    flagged_links,
    links_at_least,
    read_edges,
    read_geojson_lines,
    read_link_list,
    read_node_list,
    read_zone_file,
    shown_name,
)
from .network import Network, negligible_warning
from .operators import laplacian
from .studies import stability
from .zones import (
    NORMALIZED_LIKE,
    ZoneConstraints,
    Zoning,
    choose_operator,
    find_zones,
    local_zone,
    refine_zoning,
)

__all__ = ["CAUTIONED", "COMMANDS", "GEOJSON_FILES", "REPORT_FILE", "holds_nodes"]

logger = logging.getLogger("specgraph")

#: File name of the HTML report that --report adds to the output folder.
REPORT_FILE = "report.html"
#: Files that --geojson adds (names of :func:`specgraph.export.zoning_geojson`).
GEOJSON_FILES = ["zones.geojson", "zone_summary.geojson", "boundary.geojson"]
#: Suffixes (lower case) of edge files read as GeoJSON line networks.
GEOJSON_SUFFIXES = frozenset({".geojson"})


def input_record(role: str, path: str | Path, *, shown: str | None = None) -> dict[str, str]:
    """:func:`specgraph.export.input_record`, naming a copied pipe or standard input as given."""
    return export.input_record(role, path, shown=shown_name(path) if shown is None else shown)


def holds_nodes(path: str) -> bool:
    """Whether the edge file also holds the node table (GraphML does)."""
    return Path(path).suffix.lower() in GRAPHML_SUFFIXES


def _node_table(args: argparse.Namespace) -> str:
    """The file whose node table node-column options refer to."""
    return str(args.nodes) if args.nodes else str(args.edges)


#: Stages of the memory model each command runs (:data:`specgraph._guard.TASK_STAGES`);
#: every other command zones.
_MEMORY_TASKS = {"spectrum": "spectrum", "score": "reading", "compare": "reading"}
#: Zone count the memory guard assumes for ``--zones auto``: the eigenpairs
#: the count search asks for first (``FIRST_PAIRS`` of specgraph.zones._count).
AUTO_ZONES_FOR_MEMORY = 12


def _memory_check(args: argparse.Namespace, network: Network | None = None) -> None:
    """The memory guard: before reading from the file's size, after from the counts."""
    spec = getattr(args, "count" if args.command == "spectrum" else "zones", None)
    zones = spec if isinstance(spec, int) else AUTO_ZONES_FOR_MEMORY
    if isinstance(spec, range):
        zones = spec.stop - 1
    options: dict[str, Any] = {"zones": zones, "task": _MEMORY_TASKS.get(args.command, "zoning")}
    what = f"{args.command} {args.edges}"
    if network is None:
        check_table_memory(args.edges, **options, what=what)
    else:
        check_memory(network.n_nodes, network.n_links, **options, loaded=True, what=what)


def _read(args: argparse.Namespace) -> tuple[Network, list[dict[str, Any]]]:
    if getattr(args, "tol", None) is not None:  # refused before the file is read
        check_tol(args.tol)
    note_stage("reading")
    _memory_check(args)
    if Path(args.edges).suffix.lower() in GEOJSON_SUFFIXES:
        network = _read_geojson(args)
    else:
        network = _read_table(args)
    _refuse_without_links(network, args.edges)
    _warn([text for text in [negligible_warning(network)] if text])
    _memory_check(args, network)
    inputs = [input_record("edges", args.edges)]
    if args.nodes:
        inputs.append(input_record("nodes", args.nodes))
    return network, inputs


def _refuse_without_links(network: Network, path: str) -> None:
    """Refuse a network with no link between two distinct nodes: nothing to zone or measure.

    Self-loops (a link from a node to itself) are dropped on reading (they
    join nothing); a table holding only such links leaves every node alone.
    """
    if network.n_links:
        return
    loops = int(network.notes.get("self_loops_dropped", 0) or 0)
    why = (
        f"every one of its {count(loops, 'link')} joins a node to itself (a self-loop), "
        if loops
        else ""
    )
    raise InputError(
        f"the network has no links between distinct nodes: {why}so its "
        f"{count(network.n_nodes, 'node')} share no link and there is nothing to zone or "
        "measure; check the source and target columns (--source, --target)",
        path=path,
    )


def _read_geojson(args: argparse.Namespace) -> Network:
    """A line network from GeoJSON; what was snapped or skipped is said on stderr."""
    for option, value in (
        ("--nodes", args.nodes),
        ("--size-col", args.size_col),
        ("--directed", args.directed),
    ):
        if value:
            raise parameter_error(
                option,
                "left out for a GeoJSON line network (its nodes are built from the line "
                "ends, and its lines are read without direction), or the lines converted to "
                "an edge table",
                value,
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
        raise parameter_error(
            "--geojson",
            "given for a network with node coordinates (GeoJSON features need them: give "
            "--nodes with --x-col and --y-col, or read a GeoJSON line network)",
            True,
            shown="a network without them",
        )
    if getattr(args, "parquet", False) and not parquet_available():
        # Not a value refused but a package missing: said as it is.
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
        fixed = read_zone_file(
            args.fixed, node=args.node_col, network=network, option="--fixed", whole_numbers=True
        )
    by_size = network.sizes is not None and not args.count_nodes
    return ZoneConstraints(
        min_size=args.min_size,
        max_size=args.max_size,
        size_by="weight" if by_size else "nodes",
        sources=sources,
        keep_links=tuple(keep),
        fixed=fixed,
        trunk_links=_trunk_links(network, args),
    )


def _trunk_links(network: Network, args: argparse.Namespace) -> tuple[tuple[str, str], ...]:
    """Trunk links from ``--trunk-col`` (yes/no, or a number with ``--trunk-above``)."""
    column, above = getattr(args, "trunk_col", None), getattr(args, "trunk_above", None)
    if above is not None and not column:
        raise parameter_error("--trunk-above", "given with --trunk-col", above)
    if not column:
        return ()
    if above is None:
        pairs = flagged_links(network, column, option="--trunk-col")
    else:
        pairs = links_at_least(network, column, above, option="--trunk-col")
    ids = network.node_ids
    return tuple((ids[a], ids[b]) for a, b in pairs.tolist())


def _zone_options(args: argparse.Namespace, constraints: ZoneConstraints) -> dict[str, Any]:
    """The keywords of :func:`specgraph.find_zones` that the options ask for."""
    return {
        "operator": args.operator,
        "assign": args.assign,
        "trees": args.trees,
        "dominant": args.dominant,
        "fragments": args.fragments,
        "constraints": constraints,
        "refine": not args.no_refine,
        "tol": args.tol,
        "damping": args.damping,
        "eigen_method": args.solver,
    }


def _rule_inputs(args: argparse.Namespace) -> list[dict[str, str]]:
    """Input records of the rule files given (supply list, keep list, fixed zones)."""
    found = []
    for option in ("supply_list", "keep_list", "fixed"):
        path = getattr(args, option, None)
        if path:
            found.append(input_record(option.replace("_", " "), path))
    return found


def _zone_labels(network: Network, args: argparse.Namespace) -> tuple[Any, Any]:
    """Labels of ``args.zones_file`` on the network, and which nodes it covers."""
    mapping = read_zone_file(args.zones_file, node=args.node_col, zone=args.zone_col)
    return labels_from_mapping(network, mapping, path=args.zones_file)


def _warn(messages: Sequence[str]) -> None:
    for message in messages:
        logger.warning("warning: %s", message)


# ------------------------------------------------------------------ commands
#: Stages of a zoning run, as the progress bar counts them.
ZONING_STAGES = ["reading", "reading rules", "solving", "constraints", "refining", "writing"]
#: Stages of ``specgraph refine``.
REFINE_STAGES = ["reading", "reading rules", "refining", "writing"]


@contextmanager
def _stages(names: Sequence[str], *, enabled: bool) -> Iterator[Callable[[str], None]]:
    """:func:`stage_progress`, each stage also noted for the memory guard's messages."""
    with stage_progress(list(names), enabled=enabled) as step:

        def step_and_note(stage: str) -> None:
            note_stage(stage)
            step(stage)

        yield step_and_note


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
    inputs += _rule_inputs(args)
    options = _zone_options(args, constraints)
    zoning = find_zones(network, args.zones, **options, rng=args.seed, progress=step)
    step("writing")
    record = run_record(zoning, inputs=inputs, command=["specgraph", *argv])
    sources = tuple(dict.fromkeys([*constraints.sources, *markers]))
    files, stale = _zoning_files(
        zoning, record, args, argv, sources, supply=tuple(constraints.sources)
    )
    figures = _figure_files(args, zoning, sources=sources)
    written = write_outputs(args.out, files, remove=stale, figures=figures)
    _warn(record["warnings"])
    for name, decision in zoning.decisions.items():
        logger.info("%s: %s", name, decision["reason"])
    scores = zoning.scores
    logger.info("%s", _zoning_summary(zoning))
    logger.info("wrote %s", ", ".join(str(p) for p in written))
    return {
        "out": str(args.out),
        "scores": scores,
        "zone_count": _count_figures(zoning),
        "assignment": _assignment(zoning),
        "warnings": list(record["warnings"]),
    }


def _count_figures(zoning: Zoning) -> dict[str, Any]:
    """The zone count and its confidence (None when the count was given)."""
    count_decision = zoning.decisions.get("zone_count", {})
    return {
        "zones": zoning.n_zones,
        "confidence": count_decision.get("confidence"),
    }


def _assignment(zoning: Zoning) -> str | None:
    """The assignment method actually used (``multilevel``, ``qr``, ...), when recorded."""
    choice = zoning.decisions.get("assign", {}).get("choice")
    return None if choice is None else str(choice)


def _zoning_summary(zoning: Zoning) -> str:
    """The one-line console summary of a zoning: count, its confidence, method, figures.

    Examples: ``8 zones (count confidence: medium; assigned by multilevel),
    normalized cut 0.01521, 18 boundary links, all zones connected: yes``.
    """
    scores = zoning.scores
    confidence = _count_figures(zoning)["confidence"]
    how = [f"count confidence: {confidence}" if confidence else "count as given"]
    asked = zoning.decisions.get("zone_count", {}).get("choice")
    delivered = int(scores["zones"]) - (1 if scores.get("fragment_nodes") else 0)
    if not confidence and isinstance(asked, int) and asked > delivered:
        how[0] = f"{asked} asked, fewer delivered: see the warning"
    method = _assignment(zoning)
    if method:
        how.append(f"assigned by {method}")
    zones, group = count(scores["zones"], "zone"), ""
    if scores.get("fragment_nodes"):  # the fragments group is a zone row, not a district
        zones = count(scores["zones"] - 1, "zone")
        group = f" and the fragments group of {count(int(scores['fragment_nodes']), 'node')}"
    return (
        f"{zones} ({'; '.join(how)}){group}, normalized cut "
        f"{figure(scores['normalized_cut'])}, {count(scores['boundary_links'], 'boundary link')}"
        f", all zones connected: {'yes' if scores['all_connected'] else 'NO'}"
    )


def _zoning_files(
    zoning: Zoning,
    record: dict[str, Any],
    args: argparse.Namespace,
    argv: list[str],
    sources: tuple[str, ...],
    *,
    supply: tuple[str, ...] = (),
) -> tuple[dict[str, Any], list[str]]:
    """The files of a zoning run, and the optional files it does not write (stale).

    ``sources`` are marked on the report's map (the demo's works among them);
    ``supply`` are the supply-point rules, listed per zone in ``zone_summary.csv``.
    """
    tables = zoning_tables(zoning, sources=supply)
    files: dict[str, Any] = {**tables, "run.json": record}
    if args.report:
        from .report import build_report  # matplotlib: loaded only for a report

        files[REPORT_FILE] = build_report(
            zoning,
            command=shlex.join(["specgraph", *argv]),
            record=record,
            tables=tables,
            sources=sources,
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
    if FRAGMENTS_FILE not in tables:  # no fragments set aside: no listing of an earlier run
        stale += [FRAGMENTS_FILE, str(Path(FRAGMENTS_FILE).with_suffix(".parquet"))]
    return files, stale


def _figure_files(args: argparse.Namespace, zoning: Zoning, **options: Any) -> dict[str, bytes]:
    """With --figures, every figure as PNG and SVG bytes (rendered before anything is written)."""
    if not getattr(args, "figures", False):
        return {}
    from .report import figure_files, report_figures  # matplotlib: loaded only for figures

    return figure_files(report_figures(zoning, **options))


def _cmd_zones(args: argparse.Namespace, argv: list[str]) -> dict[str, Any]:
    with _stages(ZONING_STAGES, enabled=args.progress) as step:
        step("reading")
        network, inputs = _read(args)
        logger.info("read %r", network)
        return _zone_and_write(network, inputs, args, argv, step)


def _cmd_refine(args: argparse.Namespace, argv: list[str]) -> dict[str, Any]:
    """V-cycles on a zoning read from a node,zone table; the outputs of ``zones``."""
    with _stages(REFINE_STAGES, enabled=args.progress) as step:
        step("reading")
        network, inputs = _read(args)
        labels, _ = _zone_labels(network, args)  # nodes in no zone: refine_zoning says
        inputs.append(input_record("zones", args.zones_file))
        _check_formats(network, args)
        step("reading rules")
        constraints = _constraints(network, args)
        inputs += _rule_inputs(args)
        step("refining")
        zoning = refine_zoning(
            network, labels, constraints=constraints, max_cycles=args.cycles, rng=args.seed
        )
        step("writing")
        record = run_record(zoning, inputs=inputs, command=["specgraph", *argv])
        supply = tuple(constraints.sources)
        files, stale = _zoning_files(zoning, record, args, argv, supply, supply=supply)
        written = write_outputs(args.out, files, remove=stale)
    _warn(record["warnings"])
    for name, decision in zoning.decisions.items():
        logger.info("%s: %s", name, decision["reason"])
    logger.info("%s", _zoning_summary(zoning))
    logger.info("wrote %s", ", ".join(str(p) for p in written))
    refinement = zoning.decisions["refinement"]
    return {
        "out": str(args.out),
        "scores": zoning.scores,
        "ncut_before": refinement["ncut_before"],
        "moved_nodes": refinement["moved_nodes"],
        "warnings": list(record["warnings"]),
    }


def _cmd_demo(args: argparse.Namespace, argv: list[str]) -> dict[str, Any]:
    from .demo import demo_files, load_demo

    network = load_demo()
    files = demo_files()
    inputs = [
        input_record(role, path, shown=f"<demo>/{path.name}")
        for role, path in (("edges", files.pipes), ("nodes", files.junctions))
    ]
    args.count_nodes = False
    logger.info("demo: the invented town of Quillmere, %r", network)
    # The demo zones without rules; its treatment works are shown on the map as markers.
    works = read_node_list(files.sources, node="node")
    with _stages(ZONING_STAGES[1:], enabled=args.progress) as step:
        return _zone_and_write(network, inputs, args, argv, step, markers=works)


def _cmd_spectrum(args: argparse.Namespace, argv: list[str]) -> dict[str, Any]:
    network, inputs = _read(args)
    choice = choose_operator(args.operator, directed=network.directed)
    damping = args.damping if choice.kind == "directed" else None
    options = {"tol": args.tol, "rng": args.seed, "method": args.solver}
    operator = laplacian(network, kind=choice.kind, damping=damping)  # type: ignore[arg-type]
    result = smallest_eigenpairs(operator, min(args.count, network.n_nodes), **options)
    # Eigengap suggestions read the normalized Laplacian's spectrum (Cheeger);
    # the other operators' eigenvalues are listed without them.
    suggested = (
        suggest_zone_counts(result.values, n_components=network.n_components)
        if choice.kind in NORMALIZED_LIKE
        else []
    )
    record = run_record(
        command=["specgraph", *argv],
        inputs=inputs,
        network=network,
        parameters={"count": args.count, "operator": args.operator, "damping": damping, **options},
        decisions={"operator": choice.as_decision()},
        results={"eigen_solve": eigen_record(result), "suggested_zone_counts": suggested},
    )
    component = 0 if network.n_components == 1 else None
    table = eigen_table(result, component=component)
    written = write_outputs(args.out, {"spectrum.csv": table, "run.json": record})
    logger.info(
        "%s computed, lambda_1 = %s to lambda_%d = %s (largest scaled residual %.2g)",
        count(result.k, "eigenvalue"),
        figure(float(result.values[0])),
        result.k,
        figure(float(result.values[-1])),
        result.max_residual,
    )
    for row in suggested:
        k = row["zones"]
        logger.info(
            "suggested: %s (gap after lambda_%d, relative eigengap %.2f)",
            count(k, "zone"),
            k,
            row["relative_gap"],
        )
    logger.info("wrote %s", ", ".join(str(p) for p in written))
    return {"out": str(args.out), "eigenvalues": result.values.tolist(), "suggested": suggested}


def _cmd_score(args: argparse.Namespace, argv: list[str]) -> dict[str, Any]:
    network, inputs = _read(args)
    labels, coverage = _zone_labels(network, args)
    sources = _read_sources(network, args)
    inputs.append(input_record("zones", args.zones_file))
    options = {
        "eigengap": not args.no_eigengap,
        "rng": args.seed,
        "tol": args.tol,
        "damping": args.damping,
        "eigen_method": args.solver,
    }
    card = score(network, labels, sources=sources or None, **options)
    warnings = []
    if coverage.unassigned:
        warnings.append(
            f"{coverage.unassigned} nodes of the network are in no zone of {args.zones_file} "
            f"(for example {', '.join(coverage.unassigned_examples)}); they are scored as "
            "outside every zone"
        )
    _warn(warnings)
    record = run_record(
        command=["specgraph", *argv],
        inputs=inputs,
        network=network,
        parameters={"sources": len(sources), **options},
        warnings=warnings,
        results={
            "coverage": coverage.as_dict(),
            "overall": card.overall,
            "eigenvalues": card.eigenvalues,
        },
    )
    tables = scorecard_tables(network, labels, card)
    files: dict[str, Any] = {"zone_scores.csv": tables.pop("zone_scores.csv"), "run.json": record}
    files.update(tables)
    stale = () if coverage.unassigned else ["unassigned.csv"]
    written = write_outputs(args.out, files, remove=stale)
    overall = card.overall
    logger.info(
        "%s, normalized cut %s, modularity %.4g, %d flagged as outliers, all zones connected: %s",
        count(overall["zones"], "zone"),
        figure(overall["normalized_cut"]),
        overall["modularity"],
        overall["flagged_zones"],
        "yes" if overall["all_connected"] else "NO",
    )
    logger.info("wrote %s", ", ".join(str(p) for p in written))
    return {"out": str(args.out), "overall": jsonable(overall), "coverage": coverage.as_dict()}


def _cmd_compare(args: argparse.Namespace, argv: list[str]) -> dict[str, Any]:
    columns = {"node": args.node_col, "zone": args.zone_col}
    result = compare_frames(
        read_zone_file(args.zones_a, **columns), read_zone_file(args.zones_b, **columns)
    )
    summary = result.summary()
    warnings = [
        f"{count} nodes are only in {side} (for example {', '.join(examples)}); compared on "
        f"the {result.nodes_compared} common nodes"
        for side, count, examples in (
            (args.zones_a, result.only_in_a, result.examples_only_in_a),
            (args.zones_b, result.only_in_b, result.examples_only_in_b),
        )
        if count
    ]
    _warn(warnings)
    record = run_record(
        command=["specgraph", *argv],
        inputs=[input_record("zones_a", args.zones_a), input_record("zones_b", args.zones_b)],
        parameters=columns,
        warnings=warnings,
        results={"summary": summary},
    )
    files: dict[str, Any] = {
        "overlap.csv": result.overlap,
        "matched.csv": result.matched,
        "splits.csv": result.splits,
        "merges.csv": result.merges,
        "run.json": record,
    }
    written = write_outputs(args.out, files)
    splits, merges = len(result.splits), len(result.merges)
    logger.info(
        "adjusted Rand %.4f, NMI %.4f, variation of information %.4f nats; %s of A "
        "%s, %s of B %s several of A",
        result.adjusted_rand,
        result.nmi,
        result.variation_of_information,
        count(splits, "zone"),
        plural(splits, "splits", "split"),
        count(merges, "zone"),
        plural(merges, "merges", "merge"),
    )
    logger.info("wrote %s", ", ".join(str(p) for p in written))
    return {"out": str(args.out), "summary": jsonable(summary)}


def _cmd_robustness(args: argparse.Namespace, argv: list[str]) -> dict[str, Any]:
    network, inputs = _read(args)
    labels = None
    if args.zones_file:
        labels, coverage = _zone_labels(network, args)
        if coverage.unassigned:
            _warn(
                [
                    f"{count(coverage.unassigned, 'node')} of the network in no zone of "
                    f"{args.zones_file} (for example "
                    f"{', '.join(coverage.unassigned_examples)}); they count in no zone's "
                    "figures (stray pieces and isolated nodes of an export often are in none)"
                ]
            )
        inputs.append(input_record("zones", args.zones_file))
    options = {"top": args.top, "rng": args.seed, "tol": args.tol, "eigen_method": args.solver}
    result = robustness(network, labels=labels, **options)
    _warn(result.record.get("warnings", []))
    files: dict[str, Any] = {
        "links.csv": result.links,
        "bridges.csv": result.bridges,
        "articulation_nodes.csv": result.nodes,
        "components.csv": result.components,
    }
    if result.zones is not None:
        files["zone_connectivity.csv"] = result.zones
    files["run.json"] = run_record(
        command=["specgraph", *argv],
        inputs=inputs,
        network=network,
        parameters=options,
        results={"summary": result.record},
    )
    stale = [] if result.zones is not None else ["zone_connectivity.csv"]
    written = write_outputs(args.out, files, remove=stale)
    logger.info(
        "algebraic connectivity %s (normalized %s); %s, %s",
        figure(result.algebraic_connectivity),
        figure(result.normalized_connectivity),
        count(len(result.bridges), "bridge"),
        count(len(result.nodes), "articulation node"),
    )
    if len(result.bridges):
        worst = result.bridges.iloc[0]
        logger.info(
            "worst bridge %s - %s: its failure cuts off %s (size %g)",
            worst["source"],
            worst["target"],
            count(int(worst["cut_nodes"]), "node"),
            worst["cut_size"],
        )
    logger.info("wrote %s", ", ".join(str(p) for p in written))
    return {"out": str(args.out), "summary": jsonable(result.record)}


def _cmd_stability(args: argparse.Namespace, argv: list[str]) -> dict[str, Any]:
    network, inputs = _read(args)
    constraints = _constraints(network, args)
    inputs += _rule_inputs(args)
    logger.info(
        "zoning %d times (1 reference, %d other seeds, %d with weights perturbed by %.0f%%)",
        2 * args.repeats + 1,
        args.repeats,
        args.repeats,
        100 * args.spread,
    )
    options = {"repeats": args.repeats, "spread": args.spread, "rng": args.seed}
    result = stability(
        network,
        args.zones,
        zone_options=_zone_options(args, constraints),
        progress=args.progress,
        **options,
    )
    reference = result.reference
    # One list: the reference zoning's warnings, then the stability study's.
    warnings = list(dict.fromkeys([*reference.warnings, *result.warnings]))
    record = run_record(
        command=["specgraph", *argv],
        inputs=inputs,
        network=network,
        parameters={**reference.parameters, **options},
        decisions=reference.decisions,
        warnings=warnings,
        results={
            "overall": result.overall,
            "eigengap_checks": result.bounds.to_dict(orient="records"),
        },
    )
    files: dict[str, Any] = {
        "node_confidence.csv": result.nodes,
        "zone_stability.csv": result.zones,
        "runs.csv": result.runs,
        "run.json": record,
    }
    if args.report:
        from .report import build_report  # matplotlib: loaded only for a report

        files[REPORT_FILE] = build_report(
            reference,
            command=shlex.join(["specgraph", *argv]),
            record=record,
            stability=result,
            sources=constraints.sources,
            title="Zoning stability report",
        )
    figures = _figure_files(args, reference, sources=constraints.sources, stability=result)
    stale = () if args.report else (REPORT_FILE,)
    written = write_outputs(args.out, files, remove=stale, figures=figures)
    _warn(warnings)
    overall = result.overall
    logger.info("reference: %s", _zoning_summary(reference))
    logger.info(
        "mean node confidence %.3f; adjusted Rand against the reference: seeds %.3f, "
        "perturbed weights %.3f; %s",
        overall["mean_confidence"],
        overall["seed_ari_mean"],
        overall["perturbed_ari_mean"],
        count(len(overall["unstable_zones"]), "unstable zone"),
    )
    logger.info("wrote %s", ", ".join(str(p) for p in written))
    return {"out": str(args.out), "overall": jsonable(overall), "warnings": warnings}


#: Said when ``local`` is asked for a directed network.
LOCAL_UNDIRECTED = (
    "the local zone walks the links in both directions; --directed is recorded but does "
    "not change it"
)
#: Said when a local zone comes in pieces.
LOCAL_IN_PIECES = (
    "the zone is in several pieces (the assets are far apart); each piece is weakly "
    "attached, but they do not form one area"
)


def _cmd_local(args: argparse.Namespace, argv: list[str]) -> dict[str, Any]:
    network, inputs = _read(args)
    options = {"size_limit": args.size_limit, "alpha": args.alpha}
    found = local_zone(network, args.around, **options)
    warnings = [LOCAL_UNDIRECTED] if network.directed else []
    warnings += [] if found.connected else [LOCAL_IN_PIECES]
    figures = found.figures()
    record = run_record(
        command=["specgraph", *argv],
        inputs=inputs,
        network=network,
        parameters={"around": list(args.around), **options},
        warnings=warnings,
        results={"local_zone": figures},
    )
    files: dict[str, Any] = {
        "local_zone.csv": found.to_frame(),
        "local_boundary.csv": found.boundary,
        "sweep.csv": found.profile,
        "run.json": record,
    }
    written = write_outputs(args.out, files)
    _warn(warnings)
    logger.info(
        "local zone around %s: %s, conductance %s, %s; the walk touched %d of %s",
        ", ".join(found.seeds),
        count(len(found.nodes), "node"),
        figure(found.conductance),
        count(len(found.boundary), "boundary link"),
        found.touched,
        count(network.n_nodes, "node"),
    )
    logger.info("wrote %s", ", ".join(str(p) for p in written))
    return {"out": str(args.out), "local_zone": jsonable(figures)}


COMMANDS = {
    "zones": _cmd_zones,
    "refine": _cmd_refine,
    "spectrum": _cmd_spectrum,
    "score": _cmd_score,
    "compare": _cmd_compare,
    "robustness": _cmd_robustness,
    "stability": _cmd_stability,
    "demo": _cmd_demo,
    "local": _cmd_local,
}
#: Commands whose caution is said first: every one (each result may reach an
#: engineer's decision, a spectrum and a comparison included).
CAUTIONED = tuple(COMMANDS)
