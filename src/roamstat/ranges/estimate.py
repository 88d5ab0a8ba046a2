"""One animal's range estimates: MCP and KDE areas, outlines, area curve, diagnostic.

Everything is computed in a Lambert azimuthal equal-area frame centred on the
animal's first observed fix (:mod:`roamstat.ranges.frames`), so areas are
areas on the ellipsoid.  Interpolated fixes are left out.
"""

from __future__ import annotations

import math
from typing import Callable, NamedTuple

import numpy as np
import pandas as pd
from shapely.geometry import MultiPolygon

from roamstat.ranges import geojson
from roamstat.ranges.frames import animal_frame, observed_fixes
from roamstat.ranges.kde import density_grid, isopleth, reference_bandwidth
from roamstat.ranges.mask import MASK_NOTE, MASKED_FRAME, hidden_origin, positive_metres
from roamstat.ranges.mcp import mcp_polygon
from roamstat.ranges.schoener import autocorrelation_note, schoener_ratio

MIN_FIXES = 10  # fewer fixes make no useful range (judgement, no source)
CURVE_POINTS = 8  # sample sizes on the area curve
NOT_LEVELLED_PCT = 10.0  # area still growing by this much over the last quarter of fixes (judgement, no source)
ROW_COLUMNS = ["method", "level", "area_km2", "n_fixes", "bandwidth_m", "schoener_ratio",
               "area_gain_last_quarter_pct", "note", "masked"]


def user_bandwidth(cfg) -> float | None:
    """``cfg.kde_bandwidth`` checked, or None for the reference bandwidth."""
    return positive_metres(getattr(cfg, "kde_bandwidth", None), "--kde-bandwidth", "500")


def _mcp_shapes(x, y, h_user: float | None, levels) -> dict:
    out = {}
    for level in levels:
        poly, n_used = mcp_polygon(x, y, level)
        out[level] = (poly, n_used, None)
    return out


def _kde_shapes(x, y, h_user: float | None, levels) -> dict:
    h = h_user if h_user is not None else reference_bandwidth(x, y)
    if not h > 0:
        return {}
    grid = density_grid(x, y, h)
    return {level: (isopleth(grid, level / 100.0), len(x), h) for level in levels}


class RangeMethod(NamedTuple):
    """A registered home-range method.

    ``shapes(x, y, h_user, levels)`` -> {level: (geometry in metres, n_fixes used, bandwidth_m or
    None)} for planar equal-area coordinates in time order; a level it cannot draw is left out.
    ``prose`` names the method, with its reference, in the report's methods text.
    """

    levels: tuple[int, ...]
    shapes: Callable
    prose: str


#: The registry of home-range methods (``method`` in ranges.csv), in output order.
RANGE_METHODS = {
    "mcp": RangeMethod((100, 95), _mcp_shapes, "minimum convex polygons (Mohr 1947)"),
    "kde": RangeMethod((95, 50), _kde_shapes, "fixed-kernel utilization distributions with the reference "
                       "bandwidth (Worton 1989)"),
}
#: Every (method, level) row of ranges.csv, in order.
RANGES = tuple((name, level) for name, method in RANGE_METHODS.items() for level in method.levels)


def range_shapes(x, y, h_user: float | None) -> dict:
    """{(method, level): (geometry in metres, n_fixes, bandwidth_m or None)} for every range."""
    return {(name, level): shape for name, method in RANGE_METHODS.items()
            for level, shape in method.shapes(x, y, h_user, method.levels).items()}


def area_curve(x, y, h_user: float | None) -> pd.DataFrame:
    """Area against the number of fixes used, fixes added in time order (Harris et al. 1990).

    Parameters
    ----------
    x, y : array_like
        Planar equal-area coordinates in metres, in time order.
    h_user : float or None
        Fixed bandwidth; None re-estimates h_ref for every subset.

    Returns
    -------
    pandas.DataFrame
        ``n_fixes, method, level, area_km2``.

    References
    ----------
    Harris, S., Cresswell, W. J., Forde, P. G., Trewhella, W. J., Woollard, T.
    & Wray, S. (1990). Home-range analysis using radio-tracking data - a review
    of problems and techniques particularly as applied to the study of
    mammals. Mammal Review 20, 97-123.
    """
    n = len(x)
    sizes = np.geomspace(min(MIN_FIXES, n), n, CURVE_POINTS).round().astype(int)
    sizes = np.unique(np.append(sizes, int(round(0.75 * n))))
    rows = []
    for m in sizes[sizes >= min(MIN_FIXES, n)]:
        for (method, level), (geom, _, _) in range_shapes(x[:m], y[:m], h_user).items():
            rows.append({"n_fixes": int(m), "method": method, "level": level, "area_km2": geom.area / 1e6})
    return pd.DataFrame(rows, columns=["n_fixes", "method", "level", "area_km2"])


def _gain_pct(curve: pd.DataFrame, method: str, level: int, n: int) -> float:
    part = curve[(curve["method"] == method) & (curve["level"] == level)].set_index("n_fixes")["area_km2"]
    quarter = int(round(0.75 * n))
    if n not in part.index or quarter not in part.index or part[quarter] <= 0:
        return math.nan
    return 100.0 * (part[n] - part[quarter]) / part[quarter]


def ranges_animal(fixes_a: pd.DataFrame, cfg=None, rng: np.random.Generator | None = None):
    """MCP (100 %, 95 %) and KDE (95 %, 50 %) ranges of one animal.

    Parameters
    ----------
    fixes_a : pandas.DataFrame
        One animal's fixes (contract columns).
    cfg : roamstat.config.Config, optional
        Uses ``kde_bandwidth`` (metres; None for h_ref), ``mask_locations``
        and ``mask_grid``.
    rng : numpy.random.Generator, optional
        Only for the masking offset, and only in tests; see
        :func:`roamstat.ranges.mask.hidden_origin`.

    Returns
    -------
    rows : list of dict
        One per (method, level): ``method, level, area_km2, n_fixes,
        bandwidth_m, schoener_ratio, area_gain_last_quarter_pct, note,
        masked``.
    features : list of dict
        GeoJSON Features (WGS84, right-hand rule; placed around 0° N 0° E
        when masked), properties ``animal_id`` plus the row.
    extras : dict
        ``contours`` [{method, level, geometry}] and ``track_xy`` (fixes)
        in planar metres (equal-area frame at the first fix, or relative to
        the hidden origin when masked), ``area_curve`` table, ``masked``.

    References
    ----------
    Worton, B. J. (1989). Ecology 70, 164-168.
    Mohr, C. O. (1947). Am. Midl. Nat. 37, 223-249.
    Swihart, R. K. & Slade, N. A. (1985). Ecology 66, 1176-1184.
    """
    masked = bool(getattr(cfg, "mask_locations", False))
    h_user = user_bandwidth(cfg)
    obs = observed_fixes(fixes_a)
    animal_id = str(fixes_a["animal_id"].iloc[0]) if len(fixes_a) else ""
    n = len(obs)
    if n < MIN_FIXES:
        note = f"only {n} observed fixes; ranges need at least {MIN_FIXES}"
        rows = [_row(method, level, math.nan, n, None, math.nan, math.nan, note, masked) for method, level in RANGES]
        return rows, [], {"contours": [], "area_curve": pd.DataFrame(columns=["n_fixes", "method", "level", "area_km2"]),
                          "track_xy": pd.DataFrame({"x_m": [], "y_m": []}), "masked": masked}
    frame = animal_frame(obs)
    x, y = frame.forward(obs["lon"].to_numpy(float), obs["lat"].to_numpy(float))
    ratio = schoener_ratio(x, y)
    caution = autocorrelation_note(ratio, n)
    shapes = range_shapes(x, y, h_user)
    curve = area_curve(x, y, h_user)
    if masked:
        origin = hidden_origin(x, y, getattr(cfg, "mask_grid", None), rng)
        place, inverse, lon_centre = origin.geometry, MASKED_FRAME.inverse, 0.0
        track_x, track_y = origin.xy(x, y)
    else:
        place, inverse, lon_centre = (lambda g: g), frame.inverse, frame.lon0
        track_x, track_y = x, y
    rows, features, contours = [], [], []
    for method, level in RANGES:
        if (method, level) not in shapes:
            note = "fixes do not spread (zero variance): no kernel range"
            rows.append(_row(method, level, math.nan, n, None, ratio, math.nan, note, masked))
            continue
        geom, n_used, h = shapes[(method, level)]
        shown = place(geom)
        outline = geojson.checked_lonlat(shown, inverse, lon_centre)
        if outline is None:  # never a table area that its outline contradicts
            note = geojson.NOT_PLANAR_NOTE.format(method=method.upper())
            row = _row(method, level, math.nan, n_used, h, ratio, math.nan, note, masked)
            rows.append(row)
            features.append(geojson.feature(MultiPolygon(), {"animal_id": animal_id, **row}))
            continue
        notes = [caution] if caution and method == "kde" else []
        if geom.is_empty:
            notes.append("fixes are collinear or too few: the outline is empty")
        gain = _gain_pct(curve, method, level, n)
        if gain > NOT_LEVELLED_PCT:
            notes.append(f"area grew {gain:.0f} % over the last quarter of fixes: not levelled off, likely an underestimate")
        if masked:
            notes.append(MASK_NOTE)
        row = _row(method, level, geom.area / 1e6, n_used, h, ratio, gain, "; ".join(notes), masked)
        rows.append(row)
        contours.append({"method": method, "level": level, "geometry": shown})
        features.append(geojson.feature(outline, {"animal_id": animal_id, **row}))
    extras = {"contours": contours, "area_curve": curve,
              "track_xy": pd.DataFrame({"x_m": track_x, "y_m": track_y}), "masked": masked}
    return rows, features, extras


def _row(method, level, area_km2, n_fixes, bandwidth_m, ratio, gain, note, masked) -> dict:
    return {"method": method, "level": level, "area_km2": float(area_km2), "n_fixes": int(n_fixes),
            "bandwidth_m": float(bandwidth_m) if bandwidth_m is not None else math.nan,
            "schoener_ratio": float(ratio), "area_gain_last_quarter_pct": float(gain),
            "note": note, "masked": bool(masked)}
