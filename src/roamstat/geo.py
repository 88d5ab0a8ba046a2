"""Geodesy on the WGS84 ellipsoid and the choice of a planar frame.

Distances and azimuths come from the ellipsoid (Karney 2013, via pyproj.Geod),
so they are right anywhere on Earth, near the poles and across the
antimeridian included.

References
----------
Karney, C. F. F. (2013). Algorithms for geodesics. Journal of Geodesy 87, 43-55.
"""

from __future__ import annotations

import numpy as np
from pyproj import Geod

WGS84 = Geod(ellps="WGS84")


def geodesic_inverse(lat1, lon1, lat2, lon2):
    """Geodesic distance (m) and forward azimuth (rad, clockwise from north).

    Vectorised over equal-length arrays.  The azimuth is wrapped to (-pi, pi].
    """
    lat1, lon1, lat2, lon2 = (np.asarray(a, dtype=float) for a in (lat1, lon1, lat2, lon2))
    az12, _az21, dist = WGS84.inv(lon1, lat1, lon2, lat2)
    return np.asarray(dist, dtype=float), np.deg2rad(np.asarray(az12, dtype=float))
