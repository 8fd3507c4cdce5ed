"""Reading line networks from GeoJSON (RFC 7946): lines become links, line ends become nodes.

Each part of a ``LineString`` or ``MultiLineString`` feature becomes one link
between its first and last positions; the positions in between only give the
link its length. Line ends closer than a tolerance are snapped into one node,
so that a network digitized with small gaps is still connected, and the
:class:`SnapReport` says what was snapped and what was left out.

Steps:

1. parse the file with the standard :mod:`json` module and check that it is a
   FeatureCollection; a structural fault raises :class:`InputError` naming the
   file and the feature (its 0-based index in ``features``);
2. read every line part; features that are not lines, have no geometry or an
   empty one are skipped and listed in the report with the reason;
3. snap: every pair of ends within ``snap_tolerance`` is joined
   (:meth:`scipy.spatial.cKDTree.query_pairs`), and each connected group of
   joined ends (:func:`scipy.sparse.csgraph.connected_components`, a
   union-find) becomes one node, placed at the group's first end in file
   order. Joining is transitive: a chain of ends each within the tolerance of
   the next becomes one node even when its two extremes are further apart; the
   report's ``largest_snap`` shows how far any end moved;
4. a part whose two ends become one node (a closed ring, or ends snapped
   together) joins nothing: it is skipped and listed;
5. lengths are planar Euclidean sums along the line, over ``x`` and ``y``
   (an altitude is ignored), in coordinate units.

Units: RFC 7946 positions are longitude and latitude in degrees (WGS 84). A
degree is not a length: lengths and the snap tolerance are then in degrees,
and a degree of longitude shrinks with latitude. When every coordinate lies
within longitude and latitude bounds the report warns; project the data to a
metric coordinate system first when lengths matter (``distance=True``).

Lines must be split at their junctions: a line end touching another line
between its ends is not joined to it. The report counts dangling ends that
touch an interior vertex of another line, the usual sign of an unsplit
junction.
"""

from __future__ import annotations

import json
import numbers
import sys
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal

import numpy as np
import pandas as pd
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components
from scipy.spatial import cKDTree

from .._validation import (
    Boolean,
    InstanceOf,
    NoneOk,
    check_choice,
    check_param,
    check_positive_float,
)
from ..exceptions import InputError
from ..network import Network, affinity_from_distance

__all__ = [
    "DEFAULT_SNAP_TOLERANCE",
    "LINK_COLUMNS",
    "SkippedPart",
    "SnapReport",
    "read_geojson_lines",
]

#: Default distance, in coordinate units, within which line ends are snapped
#: into one node: ends that coincide up to rounding, 1 micrometre in metres or
#: about 0.1 m in degrees (1e-6 degree of latitude is 0.11 m). A network drawn
#: with gaps needs a tolerance of its own, say the drawing accuracy in metres.
DEFAULT_SNAP_TOLERANCE = 1e-6

#: Longitude and latitude bounds (degrees): coordinates that all lie within
#: them are probably geographic, not projected.
LONGITUDE_BOUND = 180.0
LATITUDE_BOUND = 90.0

#: Skipped parts listed by index in :meth:`SnapReport.to_dict` for each
#: reason (all of them are counted, and all are kept in the report itself).
MAX_LISTED_SKIPS = 20

#: Link table columns the reader sets; a feature property of the same name
#: is kept as ``property_<name>`` (and listed in the report).
LINK_COLUMNS = ("source", "target", "weight", "feature", "part", "feature_id", "geometry_length")

#: Geometry types that become links.
_LINE_TYPES = ("LineString", "MultiLineString")

_NO_FILE = "no such file; check the path (a relative path starts from the current folder)"


@dataclass(frozen=True)
class SkippedPart:
    """A feature, or one part of a MultiLineString, that did not become a link.

    Attributes
    ----------
    feature : int
        0-based index in the file's ``features`` array.
    part : int or None
        0-based part of a MultiLineString; None for the whole feature.
    reason : str
        Why: not a line geometry, no geometry, empty, invalid (with
        ``on_invalid='skip'``), or both ends at one node.
    """

    feature: int
    part: int | None
    reason: str


@dataclass(frozen=True)
class SnapReport:
    """What reading a GeoJSON line network did: snapping figures and skipped features.

    Attributes
    ----------
    path : str
        The file read.
    features : int
        Features in the file.
    links : int
        Line parts that became links.
    nodes : int
        Nodes made from their ends.
    snap_tolerance : float
        Distance (coordinate units) within which ends were joined.
    merged_ends : int
        Ends that share their node with an earlier end (``2 links - nodes``):
        exact coincidences and snaps alike.
    snapped_ends : int
        Ends that moved a positive distance to reach their node.
    largest_snap : float
        Largest distance an end moved (0 when none moved).
    closest_unsnapped : float or None
        Smallest distance between two different nodes: a value just above
        ``snap_tolerance`` suggests a larger tolerance. None with one node.
    dangling_ends_on_lines : int
        Ends of degree one within the tolerance of an interior vertex of
        another line: probably junctions where that line was not split.
    geographic : bool
        Every coordinate lies within longitude/latitude bounds.
    crs : str or None
        The name of a ``crs`` member (an RFC 7946 file has none).
    renamed_properties : tuple of str
        Properties renamed ``property_<name>`` to avoid the reader's columns.
    skipped : tuple of SkippedPart
        Every feature or part left out, with the reason.
    warnings : tuple of str
        What the user should check.
    """

    path: str
    features: int
    links: int
    nodes: int
    snap_tolerance: float
    merged_ends: int
    snapped_ends: int
    largest_snap: float
    closest_unsnapped: float | None
    dangling_ends_on_lines: int
    geographic: bool
    crs: str | None
    renamed_properties: tuple[str, ...] = ()
    skipped: tuple[SkippedPart, ...] = ()
    warnings: tuple[str, ...] = field(default=())

    def skipped_counts(self) -> dict[str, int]:
        """Number of skipped features or parts by reason."""
        counts: dict[str, int] = {}
        for item in self.skipped:
            counts[item.reason] = counts.get(item.reason, 0) + 1
        return counts

    def to_dict(self) -> dict[str, Any]:
        """A JSON-ready summary (skipped parts counted, and the first few listed, per reason)."""
        listed: dict[str, list[dict[str, int | None]]] = {}
        for item in self.skipped:
            entries = listed.setdefault(item.reason, [])
            if len(entries) < MAX_LISTED_SKIPS:
                entries.append({"feature": item.feature, "part": item.part})
        return {
            "path": self.path,
            "features": self.features,
            "links": self.links,
            "nodes": self.nodes,
            "snap_tolerance": self.snap_tolerance,
            "merged_ends": self.merged_ends,
            "snapped_ends": self.snapped_ends,
            "largest_snap": self.largest_snap,
            "closest_unsnapped": self.closest_unsnapped,
            "dangling_ends_on_lines": self.dangling_ends_on_lines,
            "geographic": self.geographic,
            "crs": self.crs,
            "renamed_properties": list(self.renamed_properties),
            "skipped": self.skipped_counts(),
            "skipped_first": listed,
            "warnings": list(self.warnings),
        }


# ------------------------------------------------------------------ parsing
def _load(path: Path) -> Any:
    """The parsed JSON document of ``path``, or an InputError saying where it breaks."""
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise InputError(_NO_FILE, path=path) from None
    except IsADirectoryError:
        raise InputError("this is a folder, not a file; give the GeoJSON file", path=path) from None
    except OSError as exc:
        reason = exc.strerror or str(exc)
        raise InputError(f"the file cannot be read ({reason})", path=path) from None
    try:
        text = raw.decode("utf-8-sig")  # RFC 8259 allows a reader to ignore a byte order mark
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise InputError(
            "the file is not UTF-8 text (RFC 7946 GeoJSON is UTF-8); save it as UTF-8",
            path=path,
            line=line,
        ) from None
    try:
        return json.loads(text)
    except RecursionError:
        raise InputError(
            "the JSON nests arrays or objects deeper than the parser can follow (Python's "
            f"recursion limit, {sys.getrecursionlimit():,}); GeoJSON nests at most 4 levels "
            "of coordinates, so look for a property holding deeply nested lists",
            path=path,
        ) from None
    except json.JSONDecodeError as exc:
        raise InputError(
            f"not valid JSON: {exc.msg} (column {exc.colno}); a GeoJSON file is one JSON "
            "FeatureCollection",
            path=path,
            line=exc.lineno,
        ) from None


def _features(document: Any, path: Path) -> list[Any]:
    if not isinstance(document, dict):
        raise InputError(
            f"expected a GeoJSON FeatureCollection object; the file holds a JSON "
            f"{type(document).__name__}",
            path=path,
        )
    kind = document.get("type")
    if kind != "FeatureCollection":
        raise InputError(
            f"expected a GeoJSON FeatureCollection (RFC 7946); got type {kind!r}. Wrap "
            "single features in a FeatureCollection",
            path=path,
        )
    features = document.get("features")
    if not isinstance(features, list):
        raise InputError("the FeatureCollection has no 'features' array", path=path)
    return features


def _crs_name(document: Mapping[str, Any]) -> str | None:
    """The name of an old-style (2008 GeoJSON) ``crs`` member, if any."""
    crs = document.get("crs")
    if not isinstance(crs, Mapping):
        return None
    props = crs.get("properties")
    name = props.get("name") if isinstance(props, Mapping) else None
    return str(name) if name is not None else json.dumps(crs, sort_keys=True)


class _Invalid(Exception):
    """A structural fault of one feature (raised or skipped by ``on_invalid``)."""


def _positions(value: Any, what: str) -> np.ndarray:
    """The ``(m, 2)`` planar positions of a line's coordinate array."""
    if not isinstance(value, list):
        raise _Invalid(f"{what} coordinates must be an array of positions; got {value!r:.60}")
    if not value:
        return np.empty((0, 2))
    try:
        array = np.asarray(value)
    except ValueError:
        raise _Invalid(f"{what} positions must all be arrays of numbers of one length") from None
    # JSON true/false would pass as 1/0 in a numeric array: refuse them by type.
    if (
        array.ndim != 2
        or array.dtype.kind not in "iuf"
        or any(type(c) is bool for position in value for c in position)
    ):
        raise _Invalid(f"{what} positions must be arrays of 2 or 3 numbers; got {value!r:.60}")
    if array.shape[1] < 2:
        raise _Invalid(f"{what} positions need at least 2 numbers (x, y); got {array.shape[1]}")
    xy = array[:, :2].astype(np.float64)
    if not np.all(np.isfinite(xy)):
        raise _Invalid(f"{what} has a coordinate that is not a finite number")
    if xy.shape[0] < 2:
        raise _Invalid(f"{what} needs two or more positions (RFC 7946, 3.1.4); got one")
    return xy


def _line_parts(geometry: Mapping[str, Any]) -> list[np.ndarray]:
    """The positions of each part of a line geometry (empty arrays for empty parts)."""
    kind = geometry["type"]
    coordinates = geometry.get("coordinates")
    if kind == "LineString":
        return [_positions(coordinates, "the LineString")]
    if not isinstance(coordinates, list):
        raise _Invalid("MultiLineString coordinates must be an array of lines")
    return [
        _positions(part, f"part {p} of the MultiLineString") for p, part in enumerate(coordinates)
    ]


@dataclass
class _Parsed:
    """Line parts read so far, with their feature's index, id and properties."""

    parts: list[np.ndarray] = field(default_factory=list)
    feature: list[int] = field(default_factory=list)
    part: list[int] = field(default_factory=list)
    properties: list[Mapping[str, Any]] = field(default_factory=list)
    ids: list[Any] = field(default_factory=list)
    skipped: list[SkippedPart] = field(default_factory=list)


def _read_feature(index: int, feature: Any, parsed: _Parsed, path: Path, on_invalid: str) -> None:
    """Add the line parts of one feature to ``parsed``, or record why it is skipped."""
    if not isinstance(feature, dict) or feature.get("type") != "Feature":
        got = feature.get("type") if isinstance(feature, dict) else type(feature).__name__
        raise InputError(
            f"feature {index}: expected an object of type 'Feature'; got {got!r}", path=path
        )
    properties = feature.get("properties")
    if properties is not None and not isinstance(properties, dict):
        raise InputError(f"feature {index}: 'properties' must be an object or null", path=path)
    geometry = feature.get("geometry")
    if geometry is None:
        parsed.skipped.append(SkippedPart(index, None, "no geometry (null)"))
        return
    try:
        if not isinstance(geometry, dict) or not isinstance(geometry.get("type"), str):
            raise _Invalid("the geometry must be an object with a 'type'")
        if geometry["type"] not in _LINE_TYPES:
            parsed.skipped.append(SkippedPart(index, None, f"not a line ({geometry['type']})"))
            return
        parts = _line_parts(geometry)
    except _Invalid as exc:
        if on_invalid == "raise":
            raise InputError(
                f"feature {index}: {exc}; correct the feature, or leave invalid features "
                "out with --skip-invalid (on_invalid='skip' in Python): they are then "
                "listed in the run record",
                path=path,
            ) from None
        parsed.skipped.append(SkippedPart(index, None, f"invalid: {exc}"))
        return
    if not any(p.size for p in parts):
        parsed.skipped.append(SkippedPart(index, None, "empty geometry"))
        return
    multi = geometry["type"] == "MultiLineString"
    for number, xy in enumerate(parts):
        if not xy.size:
            parsed.skipped.append(SkippedPart(index, number, "empty part"))
            continue
        parsed.parts.append(xy)
        parsed.feature.append(index)
        parsed.part.append(number if multi else 0)
        parsed.properties.append(properties or {})
        parsed.ids.append(feature.get("id"))


# ----------------------------------------------------------------- snapping
def _snap(ends: np.ndarray, tolerance: float) -> np.ndarray:
    """Group label of each end: connected components of the within-tolerance pairs."""
    pairs = cKDTree(ends).query_pairs(r=tolerance, output_type="ndarray")
    n = ends.shape[0]
    graph = sp.coo_array(
        (np.ones(pairs.shape[0]), (pairs[:, 0], pairs[:, 1])), shape=(n, n)
    ).tocsr()
    _, labels = connected_components(graph, directed=False)
    return np.asarray(labels, dtype=np.int64)


def _number_by_first(labels: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Relabel groups ``0..g-1`` by first appearance; also each group's first member."""
    _, first, inverse = np.unique(labels, return_index=True, return_inverse=True)
    order = np.argsort(first, kind="stable")
    rank = np.empty_like(order)
    rank[order] = np.arange(order.size)
    return rank[inverse].astype(np.int64), first[order]


def _on_other_lines(
    ends: np.ndarray, end_part: np.ndarray, parts: list[np.ndarray], tolerance: float
) -> int:
    """How many of ``ends`` lie within ``tolerance`` of an interior vertex of another part."""
    inner = [xy[1:-1] for xy in parts]
    owner = np.repeat(np.arange(len(parts)), [v.shape[0] for v in inner])
    if ends.shape[0] == 0 or owner.size == 0:
        return 0
    hits = cKDTree(np.concatenate(inner)).query_ball_point(ends, r=tolerance)
    return sum(any(owner[h] != end_part[e] for h in found) for e, found in enumerate(hits) if found)


@dataclass(frozen=True)
class _Nodes:
    end_node: np.ndarray  # node of each kept end, (2 * links,) as [starts..., stops...]
    xy: np.ndarray
    keep: np.ndarray  # mask over parts


def _make_nodes(parts: list[np.ndarray], tolerance: float) -> _Nodes:
    """Snap the ends of ``parts``; drop parts whose ends meet; number nodes in file order."""
    p = len(parts)
    starts = np.array([xy[0] for xy in parts])
    stops = np.array([xy[-1] for xy in parts])
    groups = _snap(np.concatenate([starts, stops]), tolerance)
    keep = groups[:p] != groups[p:]
    # Ends in file order (start, then end, of each kept link) fix the node numbers.
    ordered = np.column_stack([groups[:p][keep], groups[p:][keep]]).ravel()
    ordered_xy = np.stack([starts[keep], stops[keep]], axis=1).reshape(-1, 2)
    node_of, first = _number_by_first(ordered)
    pairs = node_of.reshape(-1, 2)
    return _Nodes(np.concatenate([pairs[:, 0], pairs[:, 1]]), ordered_xy[first], keep)


# ------------------------------------------------------------------ columns
def _cell(value: Any) -> Any:
    """A property value as a table cell: arrays and objects as JSON text."""
    if isinstance(value, dict | list):
        return json.dumps(value, sort_keys=True)
    return value


def _link_columns(
    parsed: _Parsed, keep: np.ndarray, lengths: np.ndarray
) -> tuple[pd.DataFrame, list[str]]:
    """Passthrough columns of the kept links, and the properties renamed."""
    rows = [parsed.properties[i] for i in np.flatnonzero(keep)]
    names: dict[str, None] = {}
    for row in rows:
        names.update(dict.fromkeys(row))
    renamed = [n for n in names if n in LINK_COLUMNS]
    table: dict[str, Any] = {
        "feature": np.asarray(parsed.feature, dtype=np.int64)[keep],
        "part": np.asarray(parsed.part, dtype=np.int64)[keep],
    }
    ids = [parsed.ids[i] for i in np.flatnonzero(keep)]
    if any(v is not None for v in ids):
        table["feature_id"] = ids
    table["geometry_length"] = lengths[keep]
    for name in names:
        column = f"property_{name}" if name in LINK_COLUMNS else name
        table[column] = [_cell(row.get(name)) for row in rows]
    return pd.DataFrame(table), renamed


def _weights(
    parsed: _Parsed,
    keep: np.ndarray,
    lengths: np.ndarray,
    weight: str | None,
    distance: bool,
    path: Path,
) -> tuple[np.ndarray | None, dict[str, Any]]:
    """Affinity per kept link and the record of how it was read."""
    record: dict[str, Any] = {"weight_column": weight, "weight_read_as": None}
    if weight is None and not distance:
        return None, record
    if weight is None:
        values = lengths[keep]
        record.update(weight_column="geometry_length", weight_read_as="distance")
    else:
        values = np.empty(int(keep.sum()))
        for k, i in enumerate(np.flatnonzero(keep)):
            values[k] = _weight_value(
                parsed.properties[i], weight, parsed.feature[i], distance, path
            )
        record["weight_read_as"] = "distance" if distance else "affinity"
    if not distance:
        return values, record
    affinity, record["weight_conversion"] = affinity_from_distance(values)
    return affinity, record


def _weight_value(
    properties: Mapping[str, Any], name: str, feature: int, distance: bool, path: Path
) -> float:
    value = properties.get(name)
    if isinstance(value, numbers.Real) and not isinstance(value, bool):
        number = float(value)
        if np.isfinite(number) and (number > 0 if distance else number >= 0):
            return number
    expected = "a finite length > 0" if distance else "a finite number >= 0 (an affinity)"
    raise InputError(
        f"feature {feature}: property {name!r} is {value!r}; expected {expected}. Correct the "
        "property, or choose another with weight=",
        path=path,
    )


# ------------------------------------------------------------------- public
def read_geojson_lines(
    path: str | Path,
    *,
    snap_tolerance: float = DEFAULT_SNAP_TOLERANCE,
    weight: str | None = None,
    distance: bool = False,
    on_invalid: Literal["raise", "skip"] = "raise",
) -> tuple[Network, SnapReport]:
    """Read a GeoJSON line network: each line part a link, line ends snapped into nodes.

    Parameters
    ----------
    path : str or Path
        A GeoJSON (RFC 7946) file holding one FeatureCollection.
    snap_tolerance : float, default=DEFAULT_SNAP_TOLERANCE
        Ends within this distance (coordinate units; degrees for RFC 7946
        longitude/latitude) become one node, transitively. 0 joins only
        ends at exactly the same position.
    weight : str, optional
        Feature property holding each link's weight. ``None``: every link
        weighs 1, or, with ``distance=True``, its length along the geometry.
    distance : bool, default=False
        Read the weight (the property, or the geometry length when ``weight``
        is None) as a length and turn it into an affinity
        (:func:`specgraph.network.affinity_from_distance`).
    on_invalid : {'raise', 'skip'}, default='raise'
        What to do with a feature whose geometry is malformed (bad positions,
        a line of one position): raise an :class:`InputError` naming it, or
        skip it and list it in the report.

    Returns
    -------
    network : Network
        Node ids ``"0"``, ``"1"``, ... in order of first appearance, node
        coordinates at the snapped positions. The link table holds
        ``source``, ``target``, ``weight`` (affinity), ``feature`` (index in
        ``features``), ``part``, ``feature_id`` (when features have an
        ``id``), ``geometry_length``, then every feature property.
        ``notes['geojson']`` holds :meth:`SnapReport.to_dict`.
    report : SnapReport
        What was snapped and what was skipped, and why.

    Raises
    ------
    InputError
        The file is missing, not UTF-8, not JSON (with line and column), not
        a FeatureCollection; a feature is malformed (naming its index), a
        weight property is missing or out of range; no line remains.
    ParameterError
        An option outside its domain.

    Examples
    --------
    >>> import json, tempfile, pathlib
    >>> lines = [[[0, 0], [3, 4]], [[3, 4], [3, 10]]]
    >>> doc = {"type": "FeatureCollection", "features": [
    ...     {"type": "Feature", "properties": {"pipe": f"P{i}"},
    ...      "geometry": {"type": "LineString", "coordinates": c}}
    ...     for i, c in enumerate(lines)]}
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "pipes.geojson"
    >>> _ = path.write_text(json.dumps(doc))
    >>> net, report = read_geojson_lines(path, distance=True)
    >>> net.link_table[["source", "target", "geometry_length", "pipe"]].to_numpy().tolist()
    [['0', '1', 5.0, 'P0'], ['1', '2', 6.0, 'P1']]
    >>> report.nodes, report.merged_ends
    (3, 1)
    """
    tolerance = check_positive_float(snap_tolerance, "snap_tolerance", allow_zero=True)
    check_choice(on_invalid, "on_invalid", ("raise", "skip"))
    check_param(distance, "distance", [Boolean()])
    check_param(weight, "weight", [NoneOk(), InstanceOf((str,), "a property name (str)")])
    path = Path(path)
    document = _load(path)
    features = _features(document, path)
    parsed = _Parsed()
    for index, feature in enumerate(features):
        _read_feature(index, feature, parsed, path, on_invalid)
    if not parsed.parts:
        reasons = _Counts(parsed.skipped)
        raise InputError(f"the file has no line features to read ({reasons})", path=path)
    nodes = _make_nodes(parsed.parts, tolerance)
    keep = nodes.keep
    for i in np.flatnonzero(~keep):
        parsed.skipped.append(
            SkippedPart(
                parsed.feature[i], parsed.part[i], "both ends at one node (closed or snapped)"
            )
        )
    if not keep.any():
        raise InputError(
            "every line starts and ends at one node (closed rings, or a snap_tolerance longer "
            "than the lines); no link remains",
            path=path,
        )
    lengths = _lengths(parsed.parts)
    extra, renamed = _link_columns(parsed, keep, lengths)
    affinity, weight_record = _weights(parsed, keep, lengths, weight, distance, path)
    report = _report(path, len(features), parsed, nodes, tolerance, _crs_name(document), renamed)
    links = int(keep.sum())
    try:
        network = Network.from_links(
            nodes.end_node[:links],
            nodes.end_node[links:],
            affinity,
            node_ids=[str(i) for i in range(nodes.xy.shape[0])],
            coordinates=nodes.xy,
            extra=extra,
            notes={**weight_record, "geojson": report.to_dict()},
        )
    except InputError as exc:  # weights past float64 (rows are the links, in feature order)
        raise InputError(exc.reason, path=path) from exc
    return network, report


def _lengths(parts: list[np.ndarray]) -> np.ndarray:
    """Planar length of each part: segment lengths summed, all parts in one pass."""
    counts = np.array([xy.shape[0] for xy in parts])
    steps = np.hypot(*np.diff(np.concatenate(parts), axis=0).T)
    starts = np.concatenate([[0], np.cumsum(counts)[:-1]])
    # Segment i joins positions i and i + 1; the one from a part's last position to
    # the next part's first is no segment: zero it before summing per part.
    steps = np.append(steps, 0.0)
    steps[starts[1:] - 1] = 0.0
    return np.add.reduceat(steps, starts)


class _Counts:
    """Skip reasons and counts, as a phrase."""

    def __init__(self, skipped: list[SkippedPart]) -> None:
        self.counts: dict[str, int] = {}
        for item in skipped:
            self.counts[item.reason] = self.counts.get(item.reason, 0) + 1

    def __str__(self) -> str:
        if not self.counts:
            return "no features"
        return "; ".join(f"{n} skipped: {reason}" for reason, n in self.counts.items())


def _report(
    path: Path,
    n_features: int,
    parsed: _Parsed,
    nodes: _Nodes,
    tolerance: float,
    crs: str | None,
    renamed: list[str],
) -> SnapReport:
    keep = nodes.keep
    kept_parts = [xy for xy, k in zip(parsed.parts, keep, strict=True) if k]
    ends = np.concatenate([[xy[0] for xy in kept_parts], [xy[-1] for xy in kept_parts]])
    moved = np.hypot(*(ends - nodes.xy[nodes.end_node]).T)
    n_nodes = nodes.xy.shape[0]
    closest = None
    if n_nodes >= 2:
        gaps, _ = cKDTree(nodes.xy).query(nodes.xy, k=2)
        closest = float(gaps[:, 1].min())
    degree = np.bincount(nodes.end_node, minlength=n_nodes)
    dangling = np.flatnonzero(degree[nodes.end_node] == 1)
    links = len(kept_parts)
    end_part = np.concatenate([np.arange(links), np.arange(links)])
    on_lines = _on_other_lines(ends[dangling], end_part[dangling], kept_parts, tolerance)
    xy = np.concatenate(kept_parts)
    geographic = bool(
        np.all(np.abs(xy[:, 0]) <= LONGITUDE_BOUND) and np.all(np.abs(xy[:, 1]) <= LATITUDE_BOUND)
    )
    warnings = _warnings(parsed.skipped, geographic, on_lines, renamed, moved, tolerance)
    return SnapReport(
        path=str(path),
        features=n_features,
        links=links,
        nodes=n_nodes,
        snap_tolerance=tolerance,
        merged_ends=int(2 * links - n_nodes),
        snapped_ends=int(np.count_nonzero(moved > 0)),
        largest_snap=float(moved.max()) if moved.size else 0.0,
        closest_unsnapped=closest,
        dangling_ends_on_lines=int(on_lines),
        geographic=geographic,
        crs=crs,
        renamed_properties=tuple(renamed),
        skipped=tuple(parsed.skipped),
        warnings=warnings,
    )


def _warnings(
    skipped: list[SkippedPart],
    geographic: bool,
    on_lines: int,
    renamed: list[str],
    moved: np.ndarray,
    tolerance: float,
) -> tuple[str, ...]:
    said = []
    if geographic:
        said.append(
            "coordinates look like longitude/latitude degrees: lengths and snap_tolerance are "
            "then in degrees, not metres (a degree of longitude shrinks with latitude); "
            "project the data to a metric coordinate system when lengths matter"
        )
    if skipped:
        said.append(f"features or parts left out: {_Counts(skipped)}")
    if on_lines:
        said.append(
            f"{on_lines} dangling line ends touch an interior vertex of another line: split "
            "lines at their junctions, or those ends stay unconnected"
        )
    if renamed:
        said.append(f"properties renamed to property_<name> (names the reader uses): {renamed}")
    if moved.size and moved.max() > tolerance:
        said.append(
            f"chained snapping moved an end {moved.max():.6g} (more than snap_tolerance="
            f"{tolerance:g}): ends each within the tolerance of the next were joined"
        )
    return tuple(said)
