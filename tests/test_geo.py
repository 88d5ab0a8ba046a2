"""Geodesy and projection layer against published worked examples and geographiclib."""

from __future__ import annotations

import numpy as np
import pytest
from geographiclib.geodesic import Geodesic
from pyproj import CRS, Geod, Transformer

from roamstat import geo


def dms(deg: float, minutes: float, seconds: float) -> float:
    return deg + minutes / 60 + seconds / 3600


# --------------------------------------------------------------------------- published worked examples

# Snyder (1987), Map Projections - A Working Manual, USGS Professional Paper 1395,
# Transverse Mercator numerical example: Clarke 1866, phi = 40d30'N, lambda = 73d30'W,
# lambda0 = 75d W, k0 = 0.9996, no false easting/northing -> x = 127,106.5 m, y = 4,484,124.4 m.
SNYDER_TM = "+proj=tmerc +lat_0=0 +lon_0=-75 +k_0=0.9996 +x_0=0 +y_0=0 +ellps=clrk66 +units=m +no_defs"


def test_snyder_transverse_mercator_example_through_pyproj():
    clarke = CRS.from_proj4("+proj=longlat +ellps=clrk66 +no_defs")
    x, y = Transformer.from_crs(clarke, CRS.from_proj4(SNYDER_TM), always_xy=True).transform(-73.5, 40.5)
    assert x == pytest.approx(127_106.5, abs=0.05)
    assert y == pytest.approx(4_484_124.4, abs=0.05)


def test_snyder_transverse_mercator_example_through_project_lonlat():
    # Same example through roamstat's own call (longitude first, latitude second).  The
    # CRS carries only an ellipsoid, so PROJ applies no datum shift from WGS84 to it.
    x, y = geo.project_lonlat([-73.5], [40.5], SNYDER_TM)
    assert x[0] == pytest.approx(127_106.5, abs=0.05)
    assert y[0] == pytest.approx(4_484_124.4, abs=0.05)
    lon, lat = geo.unproject_xy(x, y, SNYDER_TM)
    assert lon[0] == pytest.approx(-73.5, abs=1e-9) and lat[0] == pytest.approx(40.5, abs=1e-9)


# Vincenty (1975) inverse example Flinders Peak -> Buninyong, as published by Geoscience
# Australia on GRS80 (values from memory of the published example):
# Flinders Peak 37d57'03.72030"S 144d25'29.52440"E, Buninyong 37d39'10.15610"S 143d55'35.38390"E,
# ellipsoidal distance 54,972.271 m, forward azimuth 306d52'05.37".
FLINDERS = (-dms(37, 57, 3.72030), dms(144, 25, 29.52440))
BUNINYONG = (-dms(37, 39, 10.15610), dms(143, 55, 35.38390))


def test_vincenty_flinders_peak_buninyong_on_grs80():
    az12, _az21, dist = Geod(ellps="GRS80").inv(FLINDERS[1], FLINDERS[0], BUNINYONG[1], BUNINYONG[0])
    assert dist == pytest.approx(54_972.271, abs=0.0005)
    assert (az12 % 360) * 3600 == pytest.approx(dms(306, 52, 5.37) * 3600, abs=0.005)


def test_wgs84_steps_reproduce_the_grs80_example_to_the_millimetre():
    # geo uses WGS84, whose flattening differs from GRS80 by about 1e-11; over 55 km
    # that moves the distance by well under a millimetre and the azimuth by far less than 0.01".
    dist, az = geo.geodesic_inverse([FLINDERS[0]], [FLINDERS[1]], [BUNINYONG[0]], [BUNINYONG[1]])
    assert dist[0] == pytest.approx(54_972.271, abs=0.0005)
    assert np.rad2deg(az[0]) % 360 * 3600 == pytest.approx(dms(306, 52, 5.37) * 3600, abs=0.005)


# --------------------------------------------------------------------------- geographiclib (Karney 2013)


def random_pairs(rng: np.random.Generator, n: int):
    """Pairs at steps of a metre to a thousand kilometres, anywhere, near the poles and across 180 deg."""
    lat1 = rng.uniform(-89.9, 89.9, n)
    lon1 = rng.uniform(-180, 180, n)
    lat1[: n // 4] = rng.uniform(88.5, 89.999, n // 4) * rng.choice([-1, 1], n // 4)  # near a pole
    lon1[n // 4 : n // 2] = rng.uniform(179.0, 180.0, n // 4)  # about to cross the antimeridian
    dist = 10 ** rng.uniform(0, 6, n)
    az = rng.uniform(-180, 180, n)
    az[n // 4 : n // 2] = rng.uniform(30, 150, n // 4)  # eastwards, over 180 deg
    end = [Geodesic.WGS84.Direct(a, b, c, d) for a, b, c, d in zip(lat1, lon1, az, dist)]
    lat2 = np.array([e["lat2"] for e in end])
    lon2 = np.array([e["lon2"] for e in end])
    return lat1, lon1, lat2, lon2


def test_distance_and_azimuths_match_geographiclib_for_random_pairs():
    rng = np.random.default_rng(20261201)
    lat1, lon1, lat2, lon2 = random_pairs(rng, 400)
    assert np.any(np.sign(lon1) != np.sign(lon2))  # some pairs straddle the antimeridian
    dist, depart, arrive = geo.geodesic_inverse_full(lat1, lon1, lat2, lon2)
    ref = [Geodesic.WGS84.Inverse(a, b, c, d) for a, b, c, d in zip(lat1, lon1, lat2, lon2)]
    np.testing.assert_allclose(dist, [r["s12"] for r in ref], rtol=0, atol=1e-6)
    # Azimuths compared as directions (unit vectors), so +-180 deg ties do not matter.
    for ours, key in ((depart, "azi1"), (arrive, "azi2")):
        theirs = np.deg2rad([r[key] for r in ref])
        assert np.max(np.abs(np.angle(np.exp(1j * (ours - theirs))))) < 1e-9
    assert np.all((depart > -np.pi) & (depart <= np.pi))


# --------------------------------------------------------------------------- frames


@pytest.mark.parametrize("lat0, lon0", [(55.4, -3.6), (-66.7, 140.0), (89.5, 0.0), (0.0, 179.9)])
def test_animal_frame_keeps_distance_and_azimuth_from_the_centre_exact(lat0, lon0):
    # Azimuthal equidistant (Snyder 1987, ch. 25): the distance and azimuth from the centre
    # are the geodesic ones; geographiclib gives the reference.
    rng = np.random.default_rng(7)
    crs = geo.animal_projection(lat0, lon0)
    az = rng.uniform(-180, 180, 50)
    dist = rng.uniform(10, 300_000, 50)
    end = [Geodesic.WGS84.Direct(lat0, lon0, a, d) for a, d in zip(az, dist)]
    x, y = geo.project_lonlat([e["lon2"] for e in end], [e["lat2"] for e in end], crs)
    np.testing.assert_allclose(np.hypot(x, y), dist, rtol=0, atol=1e-3)
    np.testing.assert_allclose(np.angle(np.exp(1j * (np.arctan2(x, y) - np.deg2rad(az)))), 0, atol=1e-8)


def test_own_frames_match_pyproj_built_from_the_crs():
    # The fast path (one PROJ pipeline) must agree with pyproj's general route.
    lon = np.array([-4.1, -3.6, -2.9, 10.0])
    lat = np.array([55.0, 55.4, 56.1, 60.0])
    for crs in (geo.animal_projection(55.4, -3.6), geo.equal_area_projection(55.4, -3.6)):
        ref = Transformer.from_crs("EPSG:4326", crs, always_xy=True).transform(lon, lat)
        x, y = geo.project_lonlat(lon, lat, crs)
        np.testing.assert_allclose(x, ref[0], atol=1e-6)
        np.testing.assert_allclose(y, ref[1], atol=1e-6)
        back_lon, back_lat = geo.unproject_xy(x, y, crs)
        np.testing.assert_allclose(back_lon, lon, atol=1e-10)
        np.testing.assert_allclose(back_lat, lat, atol=1e-10)


def test_equal_area_frame_gives_geodesic_polygon_area():
    # Lambert azimuthal equal-area (Snyder 1987, ch. 24) against the ellipsoidal polygon
    # area of geographiclib (Karney 2013).  A 20 km square: edges straight in the plane
    # and geodesic on the ellipsoid differ by far less than the tolerance.
    lat0, lon0 = -42.0, 147.0
    corners = [Geodesic.WGS84.Direct(lat0, lon0, az, 14_142.0) for az in (45, 135, 225, 315)]
    lats = [c["lat2"] for c in corners]
    lons = [c["lon2"] for c in corners]
    polygon = Geodesic.WGS84.Polygon()
    for la, lo in zip(lats, lons):
        polygon.AddPoint(la, lo)
    _n, _perimeter, area_ref = polygon.Compute(False, True)
    x, y = geo.project_lonlat(lons, lats, geo.equal_area_projection(lat0, lon0))
    shoelace = 0.5 * abs(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1)))
    assert shoelace == pytest.approx(abs(area_ref), rel=1e-5)


def test_metric_projected_check():
    assert geo.is_metric_projected("EPSG:32630")
    assert not geo.is_metric_projected("EPSG:4326")
    assert not geo.is_metric_projected("EPSG:2222")  # a US state plane in feet
    assert geo.is_metric_projected(geo.animal_projection(10, 10))
