"""GeoJSON output checked against RFC 7946 rules, shapely validity and ellipsoidal areas."""

from __future__ import annotations

import json

import numpy as np
import pytest
from pyproj import Geod
from shapely.geometry import shape

from ranges_sim import fixes_from_xy, independent_normal
from roamstat.config import Config
from roamstat.ranges import feature_collection, ranges_animal

GEOD = Geod(ellps="WGS84")


def _signed_area(ring) -> float:
    # Shoelace formula: positive for counter-clockwise rings in (lon, lat).
    xy = np.asarray(ring, float)
    return 0.5 * float(np.sum(xy[:-1, 0] * xy[1:, 1] - xy[1:, 0] * xy[:-1, 1]))


def _polygons(geometry):
    return [geometry["coordinates"]] if geometry["type"] == "Polygon" else geometry["coordinates"]


def _ring_track(n, rng, lat0, lon0):
    angle = rng.uniform(0, 2 * np.pi, n)
    radius = 6000 + rng.normal(0, 400, n)
    return fixes_from_xy(radius * np.cos(angle), radius * np.sin(angle), np.arange(n) / 24, lat0, lon0)


# Across the antimeridian the annulus is cut into two C-shaped parts, so it has no hole there.
@pytest.mark.parametrize("lat0, lon0, has_hole", [(61.0, 15.0, True), (-20.0, 179.97, False), (-75.0, 100.0, True)])
def test_features_are_valid_lonlat_right_hand_wound(lat0, lon0, has_hole):
    rng = np.random.default_rng(17)
    fixes = _ring_track(1500, rng, lat0, lon0)
    rows, features, _ = ranges_animal(fixes, Config(kde_bandwidth=300.0))
    collection = json.loads(json.dumps(feature_collection(features), allow_nan=False))
    assert collection["type"] == "FeatureCollection" and len(collection["features"]) == 4
    holes = 0
    for feat, row in zip(collection["features"], rows):
        assert feat["type"] == "Feature"
        props = feat["properties"]
        assert {"animal_id", "method", "level", "area_km2", "n_fixes", "bandwidth_m", "schoener_ratio",
                "masked"} <= set(props)
        geom = shape(feat["geometry"])
        assert geom.is_valid  # shapely (GEOS) validity
        for polygon in _polygons(feat["geometry"]):
            for k, ring in enumerate(polygon):
                ring = np.asarray(ring)
                # RFC 7946 sec. 3.1.1 (lon first, in range), 3.1.6 (closed rings, CCW exterior, CW holes).
                assert np.all(np.abs(ring[:, 0]) <= 180) and np.all(np.abs(ring[:, 1]) <= 90)
                assert np.array_equal(ring[0], ring[-1])
                assert (_signed_area(ring) > 0) == (k == 0)
                holes += k > 0
        # Area of the written outline on the ellipsoid (pyproj.Geod, Karney 2013) equals the table's,
        # also where the outline is cut at the antimeridian (RFC 7946 sec. 3.1.9).
        assert abs(GEOD.geometry_area_perimeter(geom)[0]) / 1e6 == pytest.approx(row["area_km2"], rel=2e-3)
    assert (holes >= 1) == has_hole  # the 95 % kernel range of a ring of use is an annulus


def test_outline_across_the_antimeridian_is_cut_into_two_parts():
    fixes = independent_normal(800, 2000.0, np.random.default_rng(3), lat0=10.0, lon0=180.0)
    _, features, _ = ranges_animal(fixes, Config())
    mcp = next(f for f in features if f["properties"]["method"] == "mcp" and f["properties"]["level"] == 100)
    assert mcp["geometry"]["type"] == "MultiPolygon"
    lons = np.concatenate([np.asarray(r)[:, 0] for p in mcp["geometry"]["coordinates"] for r in p])
    assert lons.min() < -179.9 and lons.max() > 179.9 and np.all(np.abs(lons) <= 180)
