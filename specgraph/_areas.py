"""Zone areas: the part of the plane each zone serves, from its nodes' coordinates.

A zoning labels nodes; GIS users want areas. The area of a zone is built by
the classic nearest-node construction:

1. the **Voronoi cell** of every node position: the points of the plane
   nearer to it than to any other node (Voronoi 1908; Okabe, Boots, Sugihara
   and Chiu, *Spatial Tessellations*, 2nd ed., Wiley 2000, ch. 2), computed
   by GEOS through :func:`shapely.voronoi_polygons` and extended to cover the
   clipping region;
2. the cells of a zone's nodes are **unioned** (the cells form a coverage,
   edges shared exactly, so :func:`shapely.coverage_union_all` merges them;
   :func:`shapely.ops.unary_union` is the fallback should GEOS report the
   result invalid);
3. each union is **clipped** to the network's convex hull buffered by
   :data:`AREA_MARGIN_LINKS` times the median link length, so areas end a
   little beyond the outermost nodes instead of running to infinity.

Properties that follow from the construction (tests/test_geojson.py checks
them with shapely): each zone's area covers all its nodes (a node lies inside
its own cell, and inside the buffered hull); areas of different zones do not
overlap (Voronoi cells share only edges); and together the areas fill the
clipping region exactly (the cells cover it).

Nodes at one position share one cell. When such nodes lie in different zones
the cell goes to the zone of the first of them (network row order), and
:attr:`ZoneAreas.nodes_outside` counts, per zone, the nodes whose zone did
not get their position: their zone's area then does not cover them.

An area is a ``Polygon`` when the zone's cells form one piece, a
``MultiPolygon`` otherwise (a zone whose nodes lie apart, or a cell split by
the clipping). Areas are in the coordinates' own units (for a node table in
projected metres, metres; for RFC 7946 GeoJSON input, degrees: then the
Voronoi construction is planar in degrees, an approximation that is close
for a town-sized area and not an exact geodesic one).

This is a shared low-level module: it imports numpy, shapely, the validation
module and the network only.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
import scipy.sparse as sp

from ._figures import check_labels

if TYPE_CHECKING:
    from .network import Network

__all__ = [
    "AREA_MARGIN_LINKS",
    "AREA_MARGIN_SHARE",
    "AREA_QUAD_SEGMENTS",
    "ZoneAreas",
    "zone_areas",
]

#: Buffer of the clipping hull, in median link lengths: an area reaches about
#: one link beyond the outermost nodes, as far as a service line would.
AREA_MARGIN_LINKS = 1.0
#: Segments per quarter circle of the buffer's rounded corners (GEOS's
#: ``quad_segs``; 16, the default of shapely's ``Geometry.buffer``, keeps the
#: corner within 0.2% of the margin of a true circle).
AREA_QUAD_SEGMENTS = 16
#: Buffer of the clipping hull, as a share of the larger side of the nodes'
#: bounding box, when the network has no link of positive length to measure.
AREA_MARGIN_SHARE = 0.01


@dataclass(frozen=True, eq=False)
class ZoneAreas:
    """The area of each zone (see the module notes).

    Attributes
    ----------
    areas : ndarray of shapely geometries, shape (k,)
        ``Polygon`` or ``MultiPolygon`` of zone ``0..k-1``; an empty polygon
        for a zone without nodes.
    clip : shapely.Polygon
        The clipping region: the convex hull of the nodes buffered by
        ``margin``. The areas fill it.
    margin : float
        The buffer, in coordinate units.
    nodes_outside : ndarray of int, shape (k,)
        Per zone, its nodes whose position is shared with a node of another
        zone that got the position's cell (the zone's area does not cover
        them); 0 unless nodes of different zones sit at one position.
    method : str
        The construction, as one sentence for a run record.
    """

    areas: np.ndarray
    clip: Any
    margin: float
    nodes_outside: np.ndarray
    method: str


def _margin(network: Network, xy: np.ndarray) -> float:
    upper = sp.triu(network.adjacency, k=1, format="coo")
    lengths = np.hypot(*(xy[upper.row] - xy[upper.col]).T)
    lengths = lengths[lengths > 0]
    if lengths.size:
        return AREA_MARGIN_LINKS * float(np.median(lengths))
    side = float(np.max(xy.max(axis=0) - xy.min(axis=0))) if xy.size else 0.0
    return AREA_MARGIN_SHARE * side if side > 0 else 1.0


def zone_areas(network: Network, labels: np.ndarray) -> ZoneAreas:
    """The area of every zone: Voronoi cells of its nodes, unioned, clipped to the hull.

    Parameters
    ----------
    network : Network
        With node coordinates.
    labels : ndarray of int, shape (n_nodes,)
        Zone of each node, numbered from 0.

    Returns
    -------
    ZoneAreas

    Raises
    ------
    ParameterError
        The labels are not one zone per node (the network must have
        coordinates; callers check that first).

    References
    ----------
    G. Voronoi, "Nouvelles applications des paramètres continus à la théorie
    des formes quadratiques", J. reine angew. Math. 134: 198-287, 1908.
    A. Okabe, B. Boots, K. Sugihara and S. N. Chiu, *Spatial Tessellations:
    Concepts and Applications of Voronoi Diagrams*, 2nd ed., Wiley, 2000.

    Examples
    --------
    >>> from specgraph import gallery
    >>> net = gallery.grid(2, 4)  # coordinates (column, row)
    >>> found = zone_areas(net, np.array([0, 0, 1, 1, 0, 0, 1, 1]))
    >>> [round(a.area, 3) for a in found.areas], round(found.clip.area, 3)
    ([7.068, 7.068], 14.137)
    """
    import shapely

    xy = network.coordinates
    assert xy is not None, "zone_areas needs node coordinates"
    labels = check_labels(labels, n_nodes=network.n_nodes)
    k = int(labels.max()) + 1 if labels.size else 0
    xy = np.asarray(xy, dtype=np.float64)
    unique, first, inverse = np.unique(xy, axis=0, return_index=True, return_inverse=True)
    inverse = inverse.ravel()
    cell_zone = labels[first]
    outside = np.bincount(labels[cell_zone[inverse] != labels], minlength=k)
    margin = _margin(network, xy)
    hull = shapely.convex_hull(shapely.multipoints(unique))
    clip = shapely.buffer(hull, margin, quad_segs=AREA_QUAD_SEGMENTS)
    points = shapely.points(unique)
    if unique.shape[0] == 1:
        cells = np.array([clip], dtype=object)
    else:
        diagram = shapely.voronoi_polygons(shapely.multipoints(unique), extend_to=clip)
        found = shapely.get_parts(diagram)
        tree = shapely.STRtree(found)
        at_point, at_cell = tree.query(points, predicate="within")
        cells = np.empty(unique.shape[0], dtype=object)
        cells[at_point] = found[at_cell]
    order = np.argsort(cell_zone, kind="stable")
    bounds = np.searchsorted(cell_zone[order], np.arange(k + 1))
    areas = np.empty(k, dtype=object)
    for zone in range(k):
        mine = cells[order[bounds[zone] : bounds[zone + 1]]]
        if mine.size == 0:
            areas[zone] = shapely.Polygon()
            continue
        merged = shapely.coverage_union_all(mine)
        if not shapely.is_valid(merged):
            merged = shapely.union_all(mine)
        areas[zone] = shapely.intersection(merged, clip)
    method = (
        "Voronoi cells of the node positions (GEOS, shapely.voronoi_polygons), unioned per "
        f"zone and clipped to the convex hull of the nodes buffered by {margin:.6g} "
        f"({AREA_MARGIN_LINKS:g} median link length)"
    )
    return ZoneAreas(areas, clip, margin, outside, method)
