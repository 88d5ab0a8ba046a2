"""Range outlines as RFC 7946 GeoJSON (WGS84 longitude, latitude).

Polygons follow the right-hand rule of RFC 7946 sec. 3.1.6 (exteriors
counter-clockwise, holes clockwise) and are cut at the antimeridian
(sec. 3.1.9).  Edges are densified in metres before they leave the planar
frame, so a long straight MCP edge keeps its shape on the globe.

An outline is written only when it is a faithful copy of the planar range:
every vertex maps back to the globe, the result is a valid polygon, and its
geodesic area on the WGS84 ellipsoid (Karney 2013) is within
``AREA_AGREEMENT`` of the planar equal-area one.  A range that wraps around
a pole, or reaches past the hemisphere the frame can show, fails that check
(lon/lat polygons cannot enclose a pole), and :func:`checked_lonlat` says so.

References
----------
Butler, H. et al. (2016). The GeoJSON Format. IETF RFC 7946.
Karney, C. F. F. (2013). Algorithms for geodesics. Journal of Geodesy 87, 43-55.
"""

from __future__ import annotations

import math

import numpy as np
import shapely
from pyproj import Geod
from shapely.affinity import translate
from shapely.geometry import MultiPolygon, box, mapping
from shapely.geometry.polygon import orient
from shapely.ops import unary_union

COORD_GRID_DEG = 1e-7  # about 1 cm: positions are rounded to this (RFC 7946 sec. 11.2 advises limiting precision)
MAX_EDGE_M = 250.0  # densify edges longer than this before unprojecting (or 1/500 of the perimeter)
AREA_AGREEMENT = 0.01  # written outline's geodesic area within 1 % of the table's (judgement, no source)
NOT_PLANAR_NOTE = ("the fixes span too much of the globe (around a pole or across a hemisphere) for a planar "
                   "range: no meaningful {method} outline or area; analyse the stages of the journey separately")
_GEOD = Geod(ellps="WGS84")


def checked_lonlat(geom_m, inverse, lon_centre: float):
    """:func:`to_lonlat`, or None when the lon/lat outline would not be the planar range.

    Parameters
    ----------
    geom_m, inverse, lon_centre
        As for :func:`to_lonlat`; ``geom_m`` lies in an equal-area frame.

    Returns
    -------
    shapely Polygon or MultiPolygon, or None
        None when a vertex has no place on the globe, the outline is invalid
        or empty, or its geodesic area (Karney 2013) differs from the planar
        area by more than ``AREA_AGREEMENT``.
    """
    if geom_m.is_empty:
        return MultiPolygon()
    try:
        geom = to_lonlat(geom_m, inverse, lon_centre)
    except (shapely.errors.GEOSException, ValueError):
        return None
    if geom is None or geom.is_empty or not geom.is_valid:
        return None
    area_m2 = abs(_GEOD.geometry_area_perimeter(geom)[0])
    return geom if abs(area_m2 - geom_m.area) <= AREA_AGREEMENT * geom_m.area else None


def to_lonlat(geom_m, inverse, lon_centre: float):
    """A planar (Multi)Polygon in metres as WGS84 lon/lat, cut at the antimeridian.

    Parameters
    ----------
    geom_m : shapely Polygon or MultiPolygon
        Outline in the planar frame.
    inverse : callable
        ``inverse(x, y) -> (lon, lat)`` in degrees for that frame.
    lon_centre : float
        Longitude of the frame centre; longitudes are first unwrapped around
        it so a ring that crosses 180° stays continuous before it is cut.

    Returns
    -------
    shapely Polygon or MultiPolygon in degrees, right-hand wound.

    Raises
    ------
    ValueError
        When a vertex lies outside the frame's image of the globe.
    """
    if geom_m.is_empty:
        return MultiPolygon()
    edge = max(MAX_EDGE_M, geom_m.length / 500.0)
    dense = shapely.segmentize(geom_m, edge)

    def _inverse(xy):
        lon, lat = inverse(xy[:, 0], xy[:, 1])
        if not (np.isfinite(lon).all() and np.isfinite(lat).all()):
            raise ValueError("outline reaches past the globe in this frame")
        lon = lon_centre + (np.asarray(lon) - lon_centre + 180.0) % 360.0 - 180.0
        return np.column_stack([lon, lat])

    geom = shapely.transform(dense, _inverse)
    if not geom.is_valid:
        geom = shapely.make_valid(geom)
    parts = [geom.intersection(box(-180.0, -90.0, 180.0, 90.0))]
    for shift in (360.0, -360.0):  # pieces that spilled over 180° E or W come back by one turn
        spill = geom.intersection(box(-180.0 - shift, -90.0, 180.0 - shift, 90.0))
        if not spill.is_empty:
            parts.append(translate(spill, xoff=shift))
    geom = unary_union([p for p in parts if not p.is_empty])
    geom = shapely.set_precision(geom, COORD_GRID_DEG)
    return right_hand(geom)


def right_hand(geom):
    """Counter-clockwise exteriors and clockwise holes (RFC 7946 sec. 3.1.6); polygon parts only."""
    polygons = [g for g in getattr(geom, "geoms", [geom]) if g.geom_type == "Polygon" and not g.is_empty]
    polygons += [p for g in getattr(geom, "geoms", []) if g.geom_type == "MultiPolygon" for p in g.geoms]
    polygons = [orient(p, sign=1.0) for p in polygons]
    if len(polygons) == 1:
        return polygons[0]
    return MultiPolygon(polygons)


def feature(geom_lonlat, properties: dict) -> dict:
    """One GeoJSON Feature (geometry null when the outline is empty; NaN properties null, as JSON has no NaN)."""
    geometry = None if geom_lonlat.is_empty else _lists(mapping(geom_lonlat))
    plain = {k: (None if isinstance(v, float) and not math.isfinite(v) else v) for k, v in properties.items()}
    return {"type": "Feature", "geometry": geometry, "properties": plain}


def _lists(obj):
    # mapping() yields tuples; plain lists keep every JSON writer and reader happy.
    if isinstance(obj, dict):
        return {k: _lists(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_lists(v) for v in obj]
    return obj


def feature_collection(features) -> dict:
    """RFC 7946 FeatureCollection of range features (one per animal, method, level).

    Parameters
    ----------
    features : iterable of dict
        Features from :func:`roamstat.ranges.ranges_animal`.

    Returns
    -------
    dict
        ``{"type": "FeatureCollection", "features": [...]}``, ready for JSON.
    """
    return {"type": "FeatureCollection", "features": list(features)}
