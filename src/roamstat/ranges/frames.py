"""The equal-area frame the ranges are computed in, and the fixes they use.

Areas are computed in a Lambert azimuthal equal-area frame (Snyder 1987,
ch. 24) centred on the animal's first observed fix: every area in it is the
area on the WGS84 ellipsoid, and near the centre it is close to the animal's
own ``x_m, y_m`` frame (azimuthal equidistant about the same fix), so figures
drawn in either frame agree.

References
----------
Snyder, J. P. (1987). Map Projections - A Working Manual. USGS Professional
Paper 1395.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from roamstat.errors import RoamstatError
from roamstat.geo import equal_area_projection, project_lonlat, unproject_xy


def observed_fixes(fixes_a: pd.DataFrame) -> pd.DataFrame:
    """Observed (not interpolated) fixes with finite coordinates, in time order.

    Interpolated fixes are left out of residency and range estimates: they are
    not locations the collar reported.
    """
    missing = [c for c in ("animal_id", "time", "lat", "lon", "x_m", "y_m") if c not in fixes_a.columns]
    if missing:
        raise RoamstatError(f"fixes table lacks column(s) {', '.join(missing)}; prepare fixes with track.prepare_fixes first")
    keep = np.isfinite(fixes_a["lat"].to_numpy(float)) & np.isfinite(fixes_a["lon"].to_numpy(float))
    keep &= np.isfinite(fixes_a["x_m"].to_numpy(float)) & np.isfinite(fixes_a["y_m"].to_numpy(float))
    keep &= fixes_a["time"].notna().to_numpy()
    if "interpolated" in fixes_a.columns:
        keep &= ~fixes_a["interpolated"].fillna(False).astype(bool).to_numpy()
    kept = fixes_a if keep.all() else fixes_a[keep]
    if not kept["time"].is_monotonic_increasing:  # sorting is the costly part for short tracks
        kept = kept.sort_values("time", kind="stable")
    return kept.reset_index(drop=True)


class EqualAreaFrame:
    """Lambert azimuthal equal-area frame (metres) centred on one point.

    Parameters
    ----------
    lat0, lon0 : float
        Centre in degrees (WGS84).
    """

    def __init__(self, lat0: float, lon0: float) -> None:
        self.lat0, self.lon0 = float(lat0), float(lon0)
        self.crs = equal_area_projection(self.lat0, self.lon0)

    def forward(self, lon, lat):
        """(x, y) metres from WGS84 longitudes and latitudes in degrees."""
        return project_lonlat(lon, lat, self.crs)

    def inverse(self, x, y):
        """(lon, lat) degrees from frame coordinates in metres."""
        return unproject_xy(x, y, self.crs)


def animal_frame(fixes_obs: pd.DataFrame) -> EqualAreaFrame:
    """The equal-area frame centred on an animal's first observed fix."""
    return EqualAreaFrame(float(fixes_obs["lat"].iloc[0]), float(fixes_obs["lon"].iloc[0]))
