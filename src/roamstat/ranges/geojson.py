"""Range outlines as RFC 7946 GeoJSON (WGS84 longitude, latitude).

Polygons follow the right-hand rule of RFC 7946 sec. 3.1.6 (exteriors
counter-clockwise, holes clockwise) and are cut at the antimeridian
(sec. 3.1.9).  Edges are densified in metres before they leave the planar
frame, so a long straight MCP edge keeps its shape on the globe.

References
----------
Butler, H. et al. (2016). The GeoJSON Format. IETF RFC 7946.
"""

from __future__ import annotations

import math

import numpy as np
import shapely
from shapely.affinity import translate
from shapely.geometry import MultiPolygon, box, mapping
from shapely.geometry.polygon import orient
from shapely.ops import unary_union

COORD_GRID_DEG = 1e-7  # about 1 cm: positions are rounded to this (RFC 7946 sec. 11.2 advises limiting precision)
MAX_EDGE_M = 250.0  # densify edges longer than this before unprojecting (or 1/500 of the perimeter)


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
    """
    if geom_m.is_empty:
        return MultiPolygon()
    edge = max(MAX_EDGE_M, geom_m.length / 500.0)
    dense = shapely.segmentize(geom_m, edge)

    def _inverse(xy):
        lon, lat = inverse(xy[:, 0], xy[:, 1])
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
