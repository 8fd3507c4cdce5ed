"""What result files hold: JSON-ready values, a zoning's tables, GeoJSON and Parquet.

The contents are built here; :mod:`specgraph.export` writes them (and
re-exports every public name of this module, where users find them).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any, Literal

import numpy as np
import pandas as pd

from ._areas import zone_areas
from ._tables import ordered_boundary, supply_columns
from ._validation import check_choice, parameter_error
from .exceptions import OutputError
from .zones import Zoning, fragment_table

__all__ = [
    "FRAGMENTS_FILE",
    "boundary_geojson",
    "jsonable",
    "nodes_geojson",
    "parquet_available",
    "parquet_bytes",
    "zones_geojson",
    "zoning_geojson",
    "zoning_parquet",
    "zoning_tables",
]


#: The listing of the stray fragments set aside (:func:`specgraph.zones.fragment_table`).
FRAGMENTS_FILE = "fragments.csv"


def zoning_tables(zoning: Zoning, *, sources: Sequence[str] = ()) -> dict[str, pd.DataFrame]:
    """The contract's CSV tables of a zoning, by file name.

    ``zones.csv`` (``node,zone``), ``boundary.csv``
    (``source,target,weight,zone_a,zone_b`` then carried input columns; ordered
    by zone pair, then weight descending: :func:`specgraph._tables.ordered_boundary`),
    ``zone_summary.csv`` (``zone,nodes,size,internal_weight,boundary_weight,
    conductance,connected`` then more; with ``sources`` given, also ``sources``
    and ``supply_points``: :func:`specgraph._tables.supply_columns`) and
    ``spectrum.csv`` (``index,eigenvalue,residual,component,gap_after``,
    eigenvalues numbered from 1); when stray fragments were set aside,
    ``fragments.csv`` (``node,fragment,nodes,size``, :data:`FRAGMENTS_FILE`).
    """
    summary = zoning.zones
    if len(sources):
        summary = supply_columns(summary, zoning.network.node_ids, zoning.labels, sources)
    tables = {
        "zones.csv": zoning.to_frame(),
        "boundary.csv": ordered_boundary(zoning.boundary),
        "zone_summary.csv": summary,
        "spectrum.csv": zoning.spectrum(),
    }
    fragments = fragment_table(zoning)
    if fragments is not None:
        tables[FRAGMENTS_FILE] = fragments
    return tables


def jsonable(value: Any) -> Any:
    """``value`` with numpy scalars and arrays as Python values and non-finite floats as None."""
    if isinstance(value, Mapping):
        return {str(k): jsonable(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [jsonable(v) for v in value]
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, np.ndarray):
        return [jsonable(v) for v in value.tolist()]
    if isinstance(value, float) and not np.isfinite(value):
        return None
    return value


# ------------------------------------------------------------------ GeoJSON
# Zonings as RFC 7946 FeatureCollections (plain dicts, so that write_outputs
# writes them as JSON under a ``.geojson`` name). Positions are the network's
# node coordinates as they are: RFC 7946 expects longitude/latitude (WGS 84),
# so a network read in projected coordinates gives a file in those units,
# which GIS software then needs to be told. Links are drawn as straight
# segments between their two end nodes; the true geometry stays in the user's
# own layer, joined through the carried columns (a pipe or line id).


def _geojson_value(value: Any) -> Any:
    """A table cell as a JSON value: numpy scalars as Python, missing and non-finite as null."""
    if value is None or value is pd.NA or value is pd.NaT:
        return None
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float):
        return value if np.isfinite(value) else None
    if isinstance(value, bool | int | str):
        return value
    if isinstance(value, Mapping | list | tuple | np.ndarray):
        return jsonable(value)
    return str(value)


def _properties(table: pd.DataFrame) -> list[dict[str, Any]]:
    """One JSON-ready property object per row of ``table``."""
    columns = [str(c) for c in table.columns]
    return [
        {name: _geojson_value(cell) for name, cell in zip(columns, row, strict=True)}
        for row in table.itertuples(index=False, name=None)
    ]


def _coordinates_of(zoning: Zoning) -> np.ndarray:
    xy = zoning.network.coordinates
    if xy is None:
        raise parameter_error(
            "zoning",
            "a zoning of a network with node coordinates for GeoJSON output (give a node "
            "table with x and y columns, or read a GeoJSON line network)",
            zoning,
            shown="a zoning of a network without them",
        )
    return xy


def _collection(features: list[dict[str, Any]]) -> dict[str, Any]:
    return {"type": "FeatureCollection", "features": features}


def nodes_geojson(zoning: Zoning) -> dict[str, Any]:
    """One ``Point`` feature per node, with properties ``node`` and ``zone`` (and ``size``).

    Parameters
    ----------
    zoning : Zoning
        Of a network with node coordinates.

    Returns
    -------
    dict
        A GeoJSON FeatureCollection, in network row order; each feature's
        ``id`` is the node id.

    Raises
    ------
    ParameterError
        The network has no node coordinates.
    """
    xy = _coordinates_of(zoning)
    net = zoning.network
    table = pd.DataFrame({"node": net.node_ids, "zone": zoning.labels})
    if net.sizes is not None:
        table["size"] = net.sizes
    features = [
        {
            "type": "Feature",
            "id": props["node"],
            "geometry": {"type": "Point", "coordinates": [float(x), float(y)]},
            "properties": props,
        }
        for (x, y), props in zip(xy.tolist(), _properties(table), strict=True)
    ]
    return _collection(features)


def zones_geojson(zoning: Zoning, *, geometry: Literal["area", "nodes"] = "area") -> dict[str, Any]:
    """One feature per zone, its area (or its nodes), carrying the zone summary row.

    Parameters
    ----------
    zoning : Zoning
        Of a network with node coordinates.
    geometry : {'area', 'nodes'}, default='area'
        ``'area'``: the zone's area as a ``Polygon`` or ``MultiPolygon``,
        the Voronoi cells of its nodes unioned and clipped to the network's
        buffered convex hull (:func:`specgraph._areas.zone_areas`, which
        cites the construction). ``'nodes'``: a ``MultiPoint`` of the zone's
        node positions.

    Returns
    -------
    dict
        A GeoJSON FeatureCollection, zones in number order; properties are
        the columns of ``zoning.zones`` (``zone``, ``nodes``, ``size``,
        ``conductance``...), with ``geometry='area'`` also ``area`` (in the
        coordinates' units squared) and ``nodes_outside`` (nodes of the zone
        sharing a position with another zone's node, not covered; 0 almost
        always).
    """
    check_choice(geometry, "geometry", ("area", "nodes"))
    xy = _coordinates_of(zoning)
    labels = zoning.labels
    order = np.argsort(labels, kind="stable")
    bounds = np.searchsorted(labels[order], np.arange(zoning.n_zones + 1))
    table = zoning.zones.copy()
    shapes: list[dict[str, Any]]
    if geometry == "area":
        from shapely.geometry import mapping

        found = zone_areas(zoning.network, labels)
        table["area"] = [float(a.area) for a in found.areas]
        table["nodes_outside"] = found.nodes_outside
        shapes = [dict(mapping(a)) for a in found.areas]
    else:
        shapes = [
            {"type": "MultiPoint", "coordinates": xy[order[bounds[z] : bounds[z + 1]]].tolist()}
            for z in range(zoning.n_zones)
        ]
    features = [
        {"type": "Feature", "id": z, "geometry": shape, "properties": props}
        for z, (shape, props) in enumerate(zip(shapes, _properties(table), strict=True))
    ]
    return _collection(features)


def boundary_geojson(zoning: Zoning) -> dict[str, Any]:
    """One ``LineString`` feature per boundary link, carrying both zone ids and its columns.

    Parameters
    ----------
    zoning : Zoning
        Of a network with node coordinates.

    Returns
    -------
    dict
        A GeoJSON FeatureCollection, one feature per row of
        ``zoning.boundary`` (``source``, ``target``, ``weight``, ``zone_a``,
        ``zone_b``, then the columns carried from the input links), each a
        straight segment from the source node to the target node.
    """
    xy = _coordinates_of(zoning)
    table = zoning.boundary
    index = pd.Index(zoning.network.node_ids)
    src = index.get_indexer(table["source"].to_numpy(dtype=object))
    dst = index.get_indexer(table["target"].to_numpy(dtype=object))
    features = [
        {
            "type": "Feature",
            "geometry": {"type": "LineString", "coordinates": [a, b]},
            "properties": props,
        }
        for a, b, props in zip(xy[src].tolist(), xy[dst].tolist(), _properties(table), strict=True)
    ]
    return _collection(features)


def zoning_geojson(zoning: Zoning) -> dict[str, dict[str, Any]]:
    """The GeoJSON files of a zoning, by file name, for :func:`write_outputs`.

    ``zones.geojson`` (:func:`nodes_geojson`: one point per node),
    ``zone_summary.geojson`` (:func:`zones_geojson`: one area per zone) and
    ``boundary.geojson`` (:func:`boundary_geojson`). :func:`write_outputs`
    writes ``.geojson`` files as compact JSON (no indentation).
    """
    return {
        "zones.geojson": nodes_geojson(zoning),
        "zone_summary.geojson": zones_geojson(zoning),
        "boundary.geojson": boundary_geojson(zoning),
    }


# ------------------------------------------------------------------ Parquet
def parquet_available() -> bool:
    """True when pyarrow, which Parquet output needs, can be imported."""
    try:
        import pyarrow.parquet  # noqa: F401
    except ImportError:
        return False
    return True


def _parquet_ready(frame: pd.DataFrame) -> pd.DataFrame:
    """``frame`` with text column names, and object columns of mixed types as text.

    Parquet columns have one type; a carried input column holding, say, ints
    and strings is written as text (missing cells stay missing).
    """
    table = frame.copy()
    table.columns = [str(c) for c in table.columns]
    for name in table.columns:
        column = table[name]
        if column.dtype != object:
            continue
        kinds = {type(v) for v in column.dropna().tolist()}
        if len(kinds) > 1 or (kinds and not kinds <= {str, bool, int, float}):
            table[name] = column.map(lambda v: v if v is None or pd.isna(v) else str(v))
    return table


def parquet_bytes(frame: pd.DataFrame) -> bytes:
    """A table as the bytes of one Parquet file (pyarrow, no index).

    Parameters
    ----------
    frame : pandas.DataFrame

    Returns
    -------
    bytes
        A complete Parquet file; the same frame gives the same bytes with the
        same library versions.

    Raises
    ------
    OutputError
        pyarrow is not installed.
    """
    try:
        import pyarrow as pa
        import pyarrow.parquet as pq
    except ImportError as exc:
        raise OutputError(
            "Parquet output needs the optional package pyarrow; install it with "
            "pip install 'specgraph[parquet]', or write CSV instead"
        ) from exc
    table = pa.Table.from_pandas(_parquet_ready(frame), preserve_index=False)
    sink = pa.BufferOutputStream()
    pq.write_table(table, sink)
    return bytes(sink.getvalue().to_pybytes())


def zoning_parquet(zoning: Zoning) -> dict[str, bytes]:
    """The tables of :func:`zoning_tables` as Parquet files: ``zones.parquet`` and so on.

    File name to bytes, ready for :func:`write_outputs`.
    """
    return {
        name.removesuffix(".csv") + ".parquet": parquet_bytes(table)
        for name, table in zoning_tables(zoning).items()
    }
