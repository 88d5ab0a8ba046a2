"""Geodesy on the WGS84 ellipsoid and the choice of a planar frame.

Distances and azimuths come from the ellipsoid (Karney 2013, via pyproj.Geod),
so they are right anywhere on Earth, near the poles and across the
antimeridian included.  Planar frames are built with PROJ: an azimuthal
equidistant projection centred on an animal's first fix keeps every distance
from that fix exact (Snyder 1987, ch. 25), and a Lambert azimuthal equal-area
projection centred on a range keeps areas exact (Snyder 1987, ch. 24).

References
----------
Karney, C. F. F. (2013). Algorithms for geodesics. Journal of Geodesy 87, 43-55.
Snyder, J. P. (1987). Map Projections - A Working Manual. USGS Professional
Paper 1395.
"""

from __future__ import annotations

import math
import re
from functools import lru_cache

import numpy as np
from pyproj import CRS, Geod, Transformer
from pyproj.enums import TransformDirection

WGS84 = Geod(ellps="WGS84")
LONLAT = CRS.from_epsg(4326)


def geodesic_inverse(lat1, lon1, lat2, lon2):
    """Geodesic distance (m) and forward azimuth (rad, clockwise from north).

    Vectorised over equal-length arrays.  The azimuth is wrapped to (-pi, pi].
    """
    dist, az12, _arrive = geodesic_inverse_full(lat1, lon1, lat2, lon2)
    return dist, az12


def geodesic_inverse_full(lat1, lon1, lat2, lon2):
    """Geodesic distance (m), departure azimuth and arrival azimuth (rad).

    The arrival azimuth is the direction of travel where the geodesic reaches
    the second point (the back azimuth turned by pi).  Turning angles are
    measured at a vertex, between the arrival azimuth of one step and the
    departure azimuth of the next, so a walk along one geodesic has zero turn
    even where meridians converge.

    Parameters
    ----------
    lat1, lon1, lat2, lon2 : array_like
        Degrees on WGS84, equal lengths.

    Returns
    -------
    dist_m, depart_rad, arrive_rad : numpy.ndarray
        Azimuths clockwise from north in (-pi, pi].

    References
    ----------
    Karney, C. F. F. (2013). Algorithms for geodesics. J. Geodesy 87, 43-55.
    """
    lat1, lon1, lat2, lon2 = (np.asarray(a, dtype=float) for a in (lat1, lon1, lat2, lon2))
    az12, az21, dist = WGS84.inv(lon1, lat1, lon2, lat2)
    # PROJ returns azimuths in [-180, 180]; only the ends of the range need moving.
    depart = np.deg2rad(np.asarray(az12, dtype=float))
    depart[depart <= -np.pi] += 2 * np.pi
    arrive = np.deg2rad(np.asarray(az21, dtype=float))
    arrive += np.where(arrive > 0, -np.pi, np.pi)
    return np.asarray(dist, dtype=float), depart, arrive


def geodesic_forward(lat, lon, azimuth_rad, dist_m):
    """End point (lat, lon in degrees) of geodesics of given azimuth and length."""
    lat, lon, az, dist = (np.asarray(a, dtype=float) for a in (lat, lon, azimuth_rad, dist_m))
    lon2, lat2, _ = WGS84.fwd(lon, lat, np.rad2deg(az), dist)
    return np.asarray(lat2, dtype=float), np.asarray(lon2, dtype=float)


def animal_projection(lat0: float, lon0: float) -> CRS:
    """Azimuthal equidistant frame (metres, WGS84) centred on an animal's first fix.

    Distances and azimuths from the centre are exact on the ellipsoid, so net
    displacement from the first fix is exact in ``x_m, y_m``; other distances
    are distorted by less than 0.1 % within about 150 km of the centre.

    Parameters
    ----------
    lat0, lon0 : float
        Centre in degrees.

    Returns
    -------
    pyproj.CRS

    References
    ----------
    Snyder, J. P. (1987). Map Projections - A Working Manual, ch. 25 (azimuthal
    equidistant). USGS Professional Paper 1395.
    """
    return CRS.from_proj4(
        f"+proj=aeqd +lat_0={float(lat0):.10f} +lon_0={float(lon0):.10f} +datum=WGS84 +units=m +no_defs"
    )


def equal_area_projection(lat0: float, lon0: float) -> CRS:
    """Lambert azimuthal equal-area frame (metres, WGS84) centred on a point, for areas.

    References
    ----------
    Snyder, J. P. (1987). Map Projections - A Working Manual, ch. 24 (Lambert
    azimuthal equal-area). USGS Professional Paper 1395.
    """
    return CRS.from_proj4(
        f"+proj=laea +lat_0={float(lat0):.10f} +lon_0={float(lon0):.10f} +datum=WGS84 +units=m +no_defs"
    )


_OWN_FRAME = re.compile(r"^\+proj=(aeqd|laea) \+lat_0=(\S+) \+lon_0=(\S+) \+datum=WGS84 \+units=m \+no_defs( \+type=crs)?$")


@lru_cache(maxsize=512)
def _transformer(crs_key: str) -> Transformer:
    """Longitude/latitude (degrees, WGS84) -> ``crs``; reused for every call with the same CRS."""
    own = _OWN_FRAME.match(crs_key)
    if own:
        # The frames built here are one PROJ operation; a pipeline skips the
        # database search of from_crs (4 ms each, which adds up over animals).
        method, lat0, lon0 = own.group(1, 2, 3)
        return Transformer.from_pipeline(
            "+proj=pipeline +step +proj=unitconvert +xy_in=deg +xy_out=rad "
            f"+step +proj={method} +lat_0={lat0} +lon_0={lon0} +ellps=WGS84"
        )
    return Transformer.from_crs(LONLAT, CRS.from_user_input(crs_key), always_xy=True)


def crs_text(crs) -> str:
    """Text that rebuilds ``crs`` (an EPSG code or a PROJ string), for the manifest."""
    return crs if isinstance(crs, str) else CRS.from_user_input(crs).srs


def project_lonlat(lon, lat, crs):
    """Project WGS84 longitudes and latitudes (degrees) into ``crs``.

    One :class:`pyproj.Transformer` is built per CRS and reused (axis order
    always x = easting/longitude first).

    Returns
    -------
    x, y : numpy.ndarray
        Coordinates in the units of ``crs`` (metres for the frames built here).
    """
    x, y = _transformer(crs_text(crs)).transform(np.asarray(lon, dtype=float), np.asarray(lat, dtype=float))
    return np.asarray(x, dtype=float), np.asarray(y, dtype=float)


def unproject_xy(x, y, crs):
    """Inverse of :func:`project_lonlat`: WGS84 (lon, lat) in degrees from ``crs`` coordinates."""
    lon, lat = _transformer(crs_text(crs)).transform(
        np.asarray(x, dtype=float), np.asarray(y, dtype=float), direction=TransformDirection.INVERSE
    )
    return np.asarray(lon, dtype=float), np.asarray(lat, dtype=float)


def is_metric_projected(crs) -> bool:
    """True when ``crs`` is a projected CRS whose axes are in metres."""
    crs = CRS.from_user_input(crs)
    if not crs.is_projected:
        return False
    return all(axis.unit_name in ("metre", "meter") for axis in crs.axis_info[:2])


def unit_vector_sum(lat, lon) -> np.ndarray:
    """Sum of the unit vectors of the finite positions (adds up across chunks of a file)."""
    la, lo = np.deg2rad(np.asarray(lat, float)), np.deg2rad(np.asarray(lon, float))
    good = np.isfinite(la) & np.isfinite(lo) & (np.abs(la) <= np.pi / 2) & (np.abs(lo) <= np.pi)
    la, lo = la[good], lo[good]
    return np.array([np.sum(np.cos(la) * np.cos(lo)), np.sum(np.cos(la) * np.sin(lo)), np.sum(np.sin(la))])


def centroid_of(vector_sum) -> tuple[float, float]:
    """Latitude and longitude of a sum of unit vectors (right across the antimeridian)."""
    v = np.asarray(vector_sum, float)
    return math.degrees(math.atan2(v[2], math.hypot(v[0], v[1]))), math.degrees(math.atan2(v[1], v[0]))
