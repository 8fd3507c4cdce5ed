"""Property-based checks (hypothesis): no reader crashes, every zoning keeps its invariants.

Readers get random bytes and randomly shaped tables; only :class:`InputError` and
:class:`ParameterError` may come out of them. Random small graphs built by networkx go
through :func:`specgraph.find_zones`; the result is either a :class:`ConstraintError` /
:class:`ParameterError` or a zoning whose invariants are checked against networkx:
each node in exactly one zone, zones numbered ``0..k-1``, the boundary table equal to
the set of links whose ends lie in different zones, conductance in ``[0, 1]`` (a ratio
of a cut to a volume no smaller than it, by definition), every zone connected
(``networkx.is_connected``) and the size bounds kept.

The default profile is small; the ``slow`` variants (``pytest -m slow``) run many more
examples. ``pytest --hypothesis-show-statistics`` shows how many inputs each test tried
and the outcome events.
"""

from __future__ import annotations

import csv
import io
import json
import math
import re
import tempfile
from collections import Counter
from collections.abc import Callable
from pathlib import Path
from typing import Any, Literal

import networkx as nx
import numpy as np
import pytest
from hypothesis import event, given, settings
from hypothesis import strategies as st

from specgraph import Network, find_zones
from specgraph.exceptions import ConstraintError, InputError, ParameterError
from specgraph.io import (
    read_edges,
    read_geojson_lines,
    read_node_list,
    read_table,
    read_zone_file,
)
from specgraph.zones import ZoneConstraints

#: Examples per reader test in the default run (each is one small file, milliseconds).
#: The default-run tests are derandomized (the same examples every run, so CI cannot
#: flake); the ``slow`` variants draw fresh examples each time.
READER_EXAMPLES = 60
#: Examples of the zoning test in the default run (each a full zoning of <= 60 nodes).
ZONING_EXAMPLES = 40
#: Examples per reader test in the ``slow`` profile.
READER_SLOW_EXAMPLES = 2000
#: Examples of the zoning test in the ``slow`` profile.
ZONING_SLOW_EXAMPLES = 500
#: Node counts of the random graphs.
MIN_NODES, MAX_NODES = 2, 60
#: Link weights are drawn log-uniformly in [10**-WEIGHT_DECADES, 10**WEIGHT_DECADES].
WEIGHT_DECADES = 2.0
#: Slack on the conductance bounds and the boundary weights (sums of at most 60 floats).
FLOAT_SLACK = 1e-9

#: Outcomes seen by each test in this session (also reported as hypothesis events).
OUTCOMES: Counter[str] = Counter()

READERS: dict[str, Callable[[Path], Any]] = {
    "read_edges": read_edges,
    "read_table": read_table,
    "read_zone_file": read_zone_file,
    "read_node_list": read_node_list,
    "read_geojson_lines": read_geojson_lines,
}


def _try_reader(name: str, path: Path) -> None:
    """Run one reader; only the documented refusals may escape (anything else fails)."""
    try:
        READERS[name](path)
    except (InputError, ParameterError) as exc:
        outcome = f"{name}: {type(exc).__name__}"
    else:
        outcome = f"{name}: read"
    OUTCOMES[outcome] += 1
    event(outcome)


# ------------------------------------------------------------- random bytes
@st.composite
def byte_files(draw: st.DrawFn) -> bytes:
    """Random bytes, sometimes after a plausible header or a byte-order mark."""
    lead = draw(
        st.sampled_from(
            [
                b"",
                b"\xef\xbb\xbf",
                b"source,target\n",
                b"node,zone\n",
                b"source,target,weight\n",
                b'<?xml version="1.0"?>\n<graphml>',
                b'{"type": "FeatureCollection", "features": [',
            ]
        )
    )
    return lead + draw(st.binary(max_size=300))


def _check_bytes(data: bytes, suffix: str) -> None:
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / f"table{suffix}"
        path.write_bytes(data)
        for name in READERS:
            _try_reader(name, path)


@settings(max_examples=READER_EXAMPLES, deadline=None, database=None, derandomize=True)
@given(
    data=byte_files(), suffix=st.sampled_from([".csv", ".txt", ".parquet", ".graphml", ".geojson"])
)
def test_random_bytes_never_crash_a_reader(data: bytes, suffix: str) -> None:
    _check_bytes(data, suffix)


@pytest.mark.slow
@settings(max_examples=READER_SLOW_EXAMPLES, deadline=None, database=None)
@given(
    data=byte_files(), suffix=st.sampled_from([".csv", ".txt", ".parquet", ".graphml", ".geojson"])
)
def test_random_bytes_never_crash_a_reader_long(data: bytes, suffix: str) -> None:
    _check_bytes(data, suffix)


# ------------------------------------------------------- random table shapes
#: Header names: the ones the readers look for, near misses, and odd ones.
NAMES = ["source", "target", "weight", "node", "zone", "Source", "from", "", " node", "NA", "w,t"]
#: Cells: ids, numbers, words pandas would read as missing, quotes, line breaks, odd bytes.
CELLS = st.one_of(
    st.sampled_from(
        [
            "J1",
            "J2",
            "007",
            "NA",
            "null",
            "None",
            "NaN",
            "",
            "inf",
            "-1",
            "0",
            "1.5",
            "1,5",
            "1e400",
            "yes",
            "x",
            '"',
            "a\nb",
            "\r",
            "\ufeff",
            "\x00",
            "=1+1",
        ]
    ),
    st.text(max_size=6),
)


@st.composite
def table_files(draw: st.DrawFn) -> bytes:
    """A CSV of random shape: header, ragged rows, delimiter, line ends, quoting, BOM."""
    width = draw(st.integers(min_value=1, max_value=5))
    header = draw(st.lists(st.sampled_from(NAMES), min_size=width, max_size=width))
    # Often the columns a reader looks for, so that rows get read, not only headers refused.
    header = draw(st.sampled_from([[], ["source", "target"], ["node", "zone"]])) + header
    width = len(header)
    rows = draw(st.lists(st.lists(CELLS, min_size=0, max_size=width + 2), min_size=0, max_size=8))
    delimiter = draw(st.sampled_from([",", ";", "\t", "|"]))
    ending = draw(st.sampled_from(["\n", "\r\n", "\r"]))
    quoting: Literal[0, 1, 2, 3] = draw(
        st.sampled_from([csv.QUOTE_MINIMAL, csv.QUOTE_ALL, csv.QUOTE_NONE])
    )
    buffer = io.StringIO()
    writer = csv.writer(
        buffer, delimiter=delimiter, lineterminator=ending, quoting=quoting, escapechar="\\"
    )
    try:
        writer.writerow(header)
        writer.writerows(rows)
    except csv.Error:  # QUOTE_NONE cannot write some cells: write them raw instead
        buffer = io.StringIO(ending.join(delimiter.join(row) for row in [header, *rows]) + ending)
    text = buffer.getvalue()
    bom = draw(st.booleans())
    encoding = draw(st.sampled_from(["utf-8", "utf-8", "latin-1"]))
    data = text.encode(encoding, errors="replace")
    return (b"\xef\xbb\xbf" if bom else b"") + data


# --------------------------------------------------------- random GraphML
#: Elements drawn for random GraphML documents: the format's own (Brandes et al. 2001,
#: GraphML structural layer) and some it does not allow where they are put.
_XML_ELEMENTS = ("graph", "node", "edge", "key", "data", "default", "hyperedge", "port", "desc")
_XML_ATTRIBUTES = ("id", "source", "target", "key", "for", "attr.name", "edgedefault", "directed")
_XML_TEXT = st.sampled_from(["", "a", "b", "1", "-2", "nan", "1e308", "&amp;", "edge", "node"])


@st.composite
def xml_elements(draw: st.DrawFn, depth: int = 0) -> str:
    """One random element with random attributes, text and (to depth 3) children."""
    name = draw(st.sampled_from(_XML_ELEMENTS))
    names = draw(st.lists(st.sampled_from(_XML_ATTRIBUTES), max_size=3, unique=True))
    attrs = "".join(f' {a}="{draw(_XML_TEXT)}"' for a in names)
    children = "" if depth >= 3 else "".join(draw(st.lists(xml_elements(depth + 1), max_size=3)))
    return f"<{name}{attrs}>{draw(_XML_TEXT)}{children}</{name}>"


@st.composite
def graphml_files(draw: st.DrawFn) -> bytes:
    """Random GraphML-shaped documents, sometimes cut short or with a document type."""
    root = draw(st.sampled_from(["graphml", "graph", "svg"]))
    doctype = draw(st.sampled_from(["", '<!DOCTYPE graphml [<!ENTITY e "x">]>\n']))
    body = "".join(draw(st.lists(xml_elements(), max_size=6)))
    text = f'<?xml version="1.0"?>\n{doctype}<{root}>{body}</{root}>\n'.encode()
    cut = draw(st.integers(min_value=0, max_value=len(text)))
    return text if draw(st.booleans()) else text[:cut]


@settings(max_examples=READER_EXAMPLES, deadline=None, database=None, derandomize=True)
@given(data=graphml_files())
def test_random_graphml_never_crashes_a_reader(data: bytes) -> None:
    _check_bytes(data, ".graphml")


@pytest.mark.slow
@settings(max_examples=READER_SLOW_EXAMPLES, deadline=None, database=None)
@given(data=graphml_files())
def test_random_graphml_never_crashes_a_reader_long(data: bytes) -> None:
    _check_bytes(data, ".graphml")


# --------------------------------------------------------- random GeoJSON
#: JSON values that can stand where RFC 7946 expects coordinates: numbers (finite or not),
#: text, nulls and nested lists of them.
_JSON_LEAVES = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True, width=32),
    st.integers(min_value=-(10**20), max_value=10**20),
    st.sampled_from(["", "x", "1"]),
    st.none(),
)
_NONSENSE = st.recursive(_JSON_LEAVES, lambda inner: st.lists(inner, max_size=4), max_leaves=12)
#: Valid line positions on a coarse grid, so that ends often coincide and lines join.
_POSITION = st.lists(st.integers(min_value=0, max_value=3).map(float), min_size=2, max_size=2)
_COORDINATES = st.one_of(st.lists(_POSITION, min_size=2, max_size=4), _NONSENSE)
_GEOMETRY_TYPES = st.sampled_from(
    ["LineString", "MultiLineString", "Point", "Polygon", "GeometryCollection", "", None]
)


@st.composite
def geojson_files(draw: st.DrawFn) -> bytes:
    """RFC 7946-shaped collections with random geometry types, coordinates and properties."""
    features = []
    for _ in range(draw(st.integers(min_value=0, max_value=6))):
        geometry = draw(
            st.one_of(
                st.none(),
                st.fixed_dictionaries({"type": _GEOMETRY_TYPES, "coordinates": _COORDINATES}),
            )
        )
        properties = draw(
            st.one_of(st.none(), st.dictionaries(st.sampled_from(["id", "w", ""]), _JSON_LEAVES))
        )
        features.append({"type": "Feature", "geometry": geometry, "properties": properties})
    kind = draw(st.sampled_from(["FeatureCollection", "FeatureCollection", "Feature", "Topology"]))
    return json.dumps({"type": kind, "features": features}).encode()


@settings(max_examples=READER_EXAMPLES, deadline=None, database=None, derandomize=True)
@given(data=geojson_files())
def test_random_geojson_never_crashes_a_reader(data: bytes) -> None:
    _check_bytes(data, ".geojson")


@pytest.mark.slow
@settings(max_examples=READER_SLOW_EXAMPLES, deadline=None, database=None)
@given(data=geojson_files())
def test_random_geojson_never_crashes_a_reader_long(data: bytes) -> None:
    _check_bytes(data, ".geojson")


@settings(max_examples=READER_EXAMPLES, deadline=None, database=None, derandomize=True)
@given(data=table_files())
def test_random_tables_never_crash_a_reader(data: bytes) -> None:
    _check_bytes(data, ".csv")


@pytest.mark.slow
@settings(max_examples=READER_SLOW_EXAMPLES, deadline=None, database=None)
@given(data=table_files())
def test_random_tables_never_crash_a_reader_long(data: bytes) -> None:
    _check_bytes(data, ".csv")


# ------------------------------------------------------------- random graphs
@st.composite
def graphs(draw: st.DrawFn) -> nx.Graph:
    """A networkx graph on nodes 0..n-1 with log-uniform positive weights.

    Kinds: G(n, p) (possibly disconnected, possibly with isolated nodes), a uniform random
    labelled tree, or the disjoint union of the two.
    """
    n = draw(st.integers(min_value=MIN_NODES, max_value=MAX_NODES))
    seed = draw(st.integers(min_value=0, max_value=2**31 - 1))
    kind = draw(st.sampled_from(["gnp", "tree", "union"]))
    if kind == "gnp":
        p = draw(st.floats(min_value=0.0, max_value=0.5))
        graph = nx.gnp_random_graph(n, p, seed=seed)
    elif kind == "tree":
        graph = nx.random_labeled_tree(n, seed=seed)
    else:
        split = draw(st.integers(min_value=1, max_value=n - 1))
        p = draw(st.floats(min_value=0.05, max_value=0.6))
        graph = nx.disjoint_union(
            nx.gnp_random_graph(split, p, seed=seed), nx.random_labeled_tree(n - split, seed=seed)
        )
    rng = np.random.default_rng(seed)
    for u, v in graph.edges:
        graph[u][v]["weight"] = float(10.0 ** rng.uniform(-WEIGHT_DECADES, WEIGHT_DECADES))
    event(f"graph kind: {kind}")
    return graph


@st.composite
def zone_requests(draw: st.DrawFn, n: int) -> tuple[int | str, dict[str, int | None] | None]:
    """A zone count (1..n or 'auto') and, sometimes, random min/max size bounds.

    The bounds may contradict each other (min above max): refusing them is part of the test.
    """
    zones: int | str = draw(st.one_of(st.just("auto"), st.integers(min_value=1, max_value=n)))
    if not draw(st.booleans()):
        return zones, None
    low = draw(st.none() | st.integers(min_value=1, max_value=n))
    high = draw(st.none() | st.integers(min_value=1, max_value=n))
    return zones, {"min_size": low, "max_size": high}


def _check_zoning(graph: nx.Graph, zoning: Any, rules: ZoneConstraints | None) -> None:
    """The invariants of a zoning, each checked against networkx or by definition."""
    n = graph.number_of_nodes()
    ids = zoning.network.node_ids.tolist()
    # Each node in exactly one zone: one label per row, every graph node listed once.
    assert sorted(ids, key=int) == [str(v) for v in sorted(graph.nodes)]
    labels = np.asarray(zoning.labels)
    assert labels.shape == (n,)
    zone_of = {int(node): int(label) for node, label in zip(ids, labels, strict=True)}
    k = zoning.n_zones
    # Zones numbered 0..k-1, none empty.
    assert sorted(set(zone_of.values())) == list(range(k))
    assert int(zoning.zones["nodes"].sum()) == n
    # Boundary table = the links whose ends differ (networkx edges, checked independently).
    expected = Counter(
        (frozenset((u, v)), round(d["weight"], 9))
        for u, v, d in graph.edges(data=True)
        if zone_of[u] != zone_of[v]
    )
    table = zoning.boundary
    found = Counter(
        (frozenset((int(s), int(t))), round(float(w), 9))
        for s, t, w in table[["source", "target", "weight"]].itertuples(index=False)
    )
    assert found == expected
    for s, t, a, b in table[["source", "target", "zone_a", "zone_b"]].itertuples(index=False):
        assert {int(a), int(b)} == {zone_of[int(s)], zone_of[int(t)]}
    # Conductance cut/min(vol, vol_rest) lies in [0, 1] by definition.
    conductance = zoning.zones["conductance"].to_numpy(dtype=float)
    assert np.all(np.isfinite(conductance))
    assert np.all((conductance >= -FLOAT_SLACK) & (conductance <= 1 + FLOAT_SLACK))
    # Every zone connected (networkx.is_connected on the zone's induced subgraph).
    members: dict[int, list[int]] = {}
    for node, zone in zone_of.items():
        members.setdefault(zone, []).append(node)
    for nodes in members.values():
        assert nx.is_connected(graph.subgraph(nodes))
    # Size bounds (counted in nodes) kept whenever no ConstraintError was raised.
    sizes = [len(nodes) for nodes in members.values()]
    if rules is not None and rules.min_size is not None:
        assert min(sizes) >= rules.min_size
    if rules is not None and rules.max_size is not None:
        assert max(sizes) <= rules.max_size


def _check_pipeline(
    graph: nx.Graph, request: tuple[int | str, dict[str, int | None] | None]
) -> None:
    zones, bounds = request
    network = Network.from_networkx(graph)
    rules = None
    try:
        rules = (
            None
            if bounds is None
            else ZoneConstraints(min_size=bounds["min_size"], max_size=bounds["max_size"])
        )
        zoning = find_zones(network, zones, constraints=rules, rng=0)
    except (ConstraintError, ParameterError) as exc:
        outcome = f"find_zones: {type(exc).__name__}"
        if isinstance(exc, ParameterError):
            # Recorded so the report can say which parameter errors random input meets.
            outcome += f" ({re.sub(r'[0-9]+', '#', str(exc).split(';')[0][:60])})"
    else:
        _check_zoning(graph, zoning, rules)
        outcome = "find_zones: zoning"
    OUTCOMES[outcome] += 1
    event(outcome)


@settings(max_examples=ZONING_EXAMPLES, deadline=None, database=None, derandomize=True)
@given(data=st.data())
def test_random_graphs_zone_or_refuse(data: st.DataObject) -> None:
    graph = data.draw(graphs())
    _check_pipeline(graph, data.draw(zone_requests(graph.number_of_nodes())))


@pytest.mark.slow
@settings(max_examples=ZONING_SLOW_EXAMPLES, deadline=None, database=None)
@given(data=st.data())
def test_random_graphs_zone_or_refuse_long(data: st.DataObject) -> None:
    graph = data.draw(graphs())
    _check_pipeline(graph, data.draw(zone_requests(graph.number_of_nodes())))


def test_checker_catches_a_wrong_boundary() -> None:
    """The invariant checker itself can fail: a zoning with a link missing from its boundary."""
    graph = nx.path_graph(4)
    nx.set_edge_attributes(graph, 1.0, "weight")
    zoning = find_zones(Network.from_networkx(graph), 2, rng=0)
    assert math.isclose(float(zoning.boundary["weight"].sum()), 1.0)

    class Tampered:
        network = zoning.network
        labels = zoning.labels
        n_zones = zoning.n_zones
        zones = zoning.zones
        boundary = zoning.boundary.iloc[0:0]

    with pytest.raises(AssertionError):
        _check_zoning(graph, Tampered(), None)
