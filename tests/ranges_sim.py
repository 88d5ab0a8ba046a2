"""Simulated fixes of known parameters for the ranges tests (not real data).

Positions are drawn in metres in the animal's azimuthal equidistant frame
(centred on the first fix, as track.prepare_fixes builds it) and turned into
WGS84 with pyproj, so the fixes table has the contract columns.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from roamstat.geo import animal_projection, unproject_xy

START = pd.Timestamp("2021-03-01", tz="UTC")


def fixes_from_xy(x, y, t_days, lat0=61.0, lon0=15.0, animal_id="a1") -> pd.DataFrame:
    """Contract fixes table for planar positions (metres) about (lat0, lon0)."""
    x, y = np.asarray(x, float), np.asarray(y, float)
    lon, lat = unproject_xy(x, y, animal_projection(lat0, lon0))
    return pd.DataFrame({"animal_id": animal_id, "time": START + pd.to_timedelta(np.asarray(t_days), unit="D"),
                         "lat": lat, "lon": lon, "x_m": x, "y_m": y, "segment": 0, "interpolated": False})


def shifted_range_track(centre_x, days, dt_h, sigma_m, tau_days, rng, lat0=61.0, lon0=15.0) -> pd.DataFrame:
    """Ornstein-Uhlenbeck positions about a moving range centre (x only), first fix at the origin.

    ``centre_x(t_days)`` gives the range centre; ``sigma_m`` is the stationary
    standard deviation per axis and ``tau_days`` the time scale of attraction.
    """
    n = int(days * 24 / dt_h) + 1
    t = np.arange(n) * dt_h / 24.0
    cx = centre_x(t)
    a = np.exp(-(dt_h / 24.0) / tau_days)
    e = rng.normal(size=(n, 2)) * sigma_m * np.sqrt(1 - a * a)
    x, y = np.zeros(n), np.zeros(n)
    for i in range(1, n):
        x[i] = cx[i] + a * (x[i - 1] - cx[i]) + e[i, 0]
        y[i] = a * y[i - 1] + e[i, 1]
    return fixes_from_xy(x - x[0], y - y[0], t, lat0, lon0)


def logistic_move(t, depart_day, distance_m, return_day=None, scale_days=1.0):
    """Range centre that moves out (and back, for a migrant) along x with logistic transitions."""
    out = distance_m / (1 + np.exp(-(t - depart_day) / scale_days))
    if return_day is not None:
        out = out - distance_m / (1 + np.exp(-(t - return_day) / scale_days))
    return out


def independent_normal(n, sigma_m, rng, lat0=61.0, lon0=15.0) -> pd.DataFrame:
    """Independent isotropic bivariate-normal fixes, one per hour."""
    xy = rng.normal(0.0, sigma_m, size=(n, 2))
    return fixes_from_xy(xy[:, 0], xy[:, 1], np.arange(n) / 24.0, lat0, lon0)


def ou_positions(t_s, sigma_m, tau_s, rng) -> np.ndarray:
    """Exact isotropic Ornstein-Uhlenbeck positions (n, 2) about the origin at times ``t_s``, started stationary.

    x(t + d) = a x(t) + sigma sqrt(1 - a²) e with a = exp(-d / tau): the exact transition of the OU
    process (Uhlenbeck & Ornstein 1930; Dunn & Gipson 1977).
    """
    t = np.asarray(t_s, float)
    xy = np.empty((t.size, 2))
    xy[0] = rng.normal(0.0, sigma_m, 2)
    a = np.exp(-np.diff(t) / tau_s)
    e = rng.normal(size=(t.size - 1, 2))
    for i in range(1, t.size):
        xy[i] = a[i - 1] * xy[i - 1] + sigma_m * np.sqrt(1 - a[i - 1] ** 2) * e[i - 1]
    return xy


def ou_sigma_given_tau(xy, dt_s, tau_s) -> tuple[float, np.ndarray]:
    """Maximum-likelihood stationary SD per axis and centre of regular OU fixes when tau is known.

    The exact AR(1) likelihood by the Prais-Winsten transform (Prais & Winsten 1954): z_1 = sqrt(1 - a²) x_1,
    z_i = x_i - a x_(i-1), so z = c mu + independent noise of variance sigma² (1 - a²); both axes pooled.
    """
    a = np.exp(-dt_s / tau_s)
    c = np.full(len(xy), 1 - a)
    c[0] = np.sqrt(1 - a * a)
    z = np.vstack([c[0] * xy[:1], xy[1:] - a * xy[:-1]])
    mu = (c @ z) / (c @ c)
    resid = z - c[:, None] * mu[None, :]
    return float(np.sqrt(np.sum(resid ** 2) / (2 * len(xy) * (1 - a * a)))), mu
