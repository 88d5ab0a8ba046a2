"""Minimum convex polygons checked against ellipsoidal areas and a reference convex hull."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from pyproj import Geod
from scipy.spatial import ConvexHull
from shapely.geometry import MultiPoint, shape

from ranges_sim import fixes_from_xy
from roamstat.config import Config
from roamstat.ranges import mcp_polygon, ranges_animal

GEOD = Geod(ellps="WGS84")


def _row(rows, method, level):
    return next(r for r in rows if r["method"] == method and r["level"] == level)


@pytest.mark.parametrize("lat0, lon0", [(61.0, 15.0), (-35.0, 150.0), (72.0, -50.0), (1.0, -60.0)])
def test_mcp100_area_equals_ellipsoidal_area_of_the_lonlat_hull(lat0, lon0):
    rng = np.random.default_rng(int(abs(lat0 * 100 + lon0)))
    xy = rng.normal(0, 4000, size=(300, 2)) * [1.0, 0.6]
    fixes = fixes_from_xy(xy[:, 0], xy[:, 1], np.arange(300) / 24, lat0, lon0)
    rows, features, _ = ranges_animal(fixes, Config())
    # Reference: area of the convex hull of the lon/lat points on the WGS84 ellipsoid, by
    # pyproj.Geod.geometry_area_perimeter (Karney 2013, Algorithms for geodesics, J. Geodesy 87).
    hull = MultiPoint(np.column_stack([fixes["lon"], fixes["lat"]])).convex_hull
    reference_m2 = abs(GEOD.geometry_area_perimeter(hull)[0])
    assert _row(rows, "mcp", 100)["area_km2"] * 1e6 == pytest.approx(reference_m2, rel=2e-4)
    # The written outline measures the same on the ellipsoid.
    outline = next(f for f in features if f["properties"]["method"] == "mcp" and f["properties"]["level"] == 100)
    assert abs(GEOD.geometry_area_perimeter(shape(outline["geometry"]))[0]) == pytest.approx(reference_m2, rel=2e-4)


def test_mcp95_is_the_hull_of_the_95_percent_nearest_the_centroid():
    # Definition (White & Garrott 1990): drop the 5 % of fixes farthest from the centroid; scipy's
    # ConvexHull (Qhull, Barber et al. 1996) gives the reference area ("volume" in 2-D).
    rng = np.random.default_rng(4)
    xy = rng.standard_t(3, size=(401, 2)) * 1000
    poly, n_used = mcp_polygon(xy[:, 0], xy[:, 1], 95)
    assert n_used == math.ceil(0.95 * 401)
    d2 = ((xy - xy.mean(axis=0)) ** 2).sum(axis=1)
    kept = xy[np.argsort(d2)[:n_used]]
    assert poly.area == pytest.approx(ConvexHull(kept).volume, rel=1e-9)
    assert poly.area < ConvexHull(xy).volume


def test_fixes_at_one_place_give_zero_area_and_say_why():
    # A hull of coincident points has no area (common practice, no source); the kernel needs spread.
    fixes = fixes_from_xy(np.zeros(30), np.zeros(30), np.arange(30) / 24)
    rows, features, _ = ranges_animal(fixes, Config())
    assert _row(rows, "mcp", 100)["area_km2"] == 0.0
    assert "empty" in _row(rows, "mcp", 100)["note"]
    assert math.isnan(_row(rows, "kde", 95)["area_km2"]) and "spread" in _row(rows, "kde", 95)["note"]
    assert all(f["geometry"] is None for f in features)


def test_mcp100_on_real_antarctic_tracks_matches_the_geodesic_hull():
    # Open data: RAATD subset in Darwin Core (Ropert-Coudert et al. 2020, Sci. Data 7:94), ../shared/realdata.
    # Reference: the geodesically convex hull, found as the planar hull in a gnomonic projection (great
    # circles are straight lines there; Snyder 1987, ch. 22), its area on the ellipsoid from pyproj.Geod
    # (Karney 2013). For ranges of thousands of km the plain lon/lat hull is not convex on the globe, so it
    # is not used as the reference here.
    import pandas as pd
    from pyproj import CRS

    from roamstat.geo import animal_projection, centroid_of, project_lonlat, unit_vector_sum, unproject_xy

    path = Path(__file__).parents[2] / "shared" / "realdata" / "antarctic_tracks_dwc.csv"
    if not path.exists():
        pytest.skip(f"open dataset {path.name} not found in {path.parent} (it lives beside the repo, not in it)")
    table = pd.read_csv(path)
    checked = 0
    for animal_id, part in table.groupby("eventID"):
        part = part.assign(time=pd.to_datetime(part["eventDate"], utc=True, format="mixed")).sort_values("time")
        lat, lon = part["decimalLatitude"].to_numpy(float), part["decimalLongitude"].to_numpy(float)
        if len(lat) < 10:
            continue
        x, y = project_lonlat(lon, lat, animal_projection(lat[0], lon[0]))
        fixes = pd.DataFrame({"animal_id": animal_id, "time": part["time"].to_numpy(), "lat": lat, "lon": lon,
                              "x_m": x, "y_m": y, "segment": 0, "interpolated": False})
        fixes["time"] = pd.to_datetime(fixes["time"], utc=True)
        rows, _, _ = ranges_animal(fixes, Config())
        lat_c, lon_c = centroid_of(unit_vector_sum(lat, lon))
        gnomonic = CRS.from_proj4(f"+proj=gnom +lat_0={lat_c} +lon_0={lon_c} +datum=WGS84 +units=m +no_defs")
        hull = MultiPoint(np.column_stack(project_lonlat(lon, lat, gnomonic))).convex_hull
        hull_lon, hull_lat = unproject_xy(*np.asarray(hull.exterior.coords).T, gnomonic)
        reference_m2 = abs(GEOD.polygon_area_perimeter(hull_lon, hull_lat)[0])
        assert _row(rows, "mcp", 100)["area_km2"] * 1e6 == pytest.approx(reference_m2, rel=6e-3), animal_id
        checked += 1
    assert checked >= 20


@pytest.mark.parametrize("shape_of_cloud", ["normal", "uniform", "rounded", "circle"])
def test_culled_fixes_give_the_hull_of_all_fixes(shape_of_cloud):
    # Akl & Toussaint (1978): no fix strictly inside the octagon of extreme fixes is a hull vertex,
    # so the hull is GEOS's hull of every fix, coordinate for coordinate; "rounded" has ties and
    # collinear fixes, "circle" has every fix on the hull
    from roamstat.ranges.mcp import hull_candidates

    rng = np.random.default_rng(11)
    for _ in range(25):
        n = int(rng.integers(64, 4000))
        if shape_of_cloud == "normal":
            x, y = rng.normal(size=(2, n)) * 1e4
        elif shape_of_cloud == "uniform":
            x, y = rng.uniform(-1e5, 1e5, (2, n))
        elif shape_of_cloud == "rounded":
            x, y = np.round(rng.normal(size=(2, n)) * 3) * 100.0
        else:
            angle = rng.uniform(0, 2 * np.pi, n)
            x, y = 1e4 * np.cos(angle), 1e4 * np.sin(angle)
        full = MultiPoint(np.column_stack([x, y])).convex_hull
        assert list(mcp_polygon(x, y)[0].exterior.coords) == list(full.exterior.coords)
        kept = hull_candidates(x, y)
        vertices = ConvexHull(np.column_stack([x, y])).vertices  # Qhull, an independent hull
        assert kept[vertices].all()
        if shape_of_cloud in ("normal", "uniform"):
            assert kept.sum() < n / 4  # the culling sets most fixes aside
