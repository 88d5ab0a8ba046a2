"""One animal's range estimates: MCP, KDE, autocorrelation-aware KDE and Gaussian ranges.

MCP and KDE (h_ref) describe the fixes; ``kde_autocorr`` and ``gaussian``
come from the animal's best continuous-time motion model and exist only when
that model is range-resident (:mod:`roamstat.ranges.autocorr`,
:mod:`roamstat.ranges.gaussian`), with a 95 % confidence interval and the
effective sample size for area.

Everything is computed in a Lambert azimuthal equal-area frame centred on the
animal's first observed fix (:mod:`roamstat.ranges.frames`), so areas are
areas on the ellipsoid.  Only observed fixes are used (:func:`roamstat.rows.located`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable, NamedTuple

import numpy as np
import pandas as pd
from shapely.geometry import MultiPolygon

from roamstat.config import Config
from roamstat.ranges import geojson
from roamstat.ranges.autocorr import (area_interval, autocorrelated_bandwidth, centre_variance_factor,
                                      corrected_isopleths, kde_area_factor, n_effective)
from roamstat.ranges.gaussian import gaussian_area, gaussian_outline
from roamstat.ranges.frames import animal_frame
from roamstat.ranges.kde import density_grid, isopleth, reference_bandwidth
from roamstat.ranges.mask import MASK_NOTE, MASKED_FRAME, HiddenOrigin, hidden_origin, positive_metres
from roamstat.ranges.mcp import mcp_polygon
from roamstat.ranges.model import RangeModel
from roamstat.ranges.schoener import autocorrelation_note, schoener_ratio
from roamstat.results import empty_table
from roamstat.rows import located

NOT_RESIDENT = "not range-resident over the tracking period: no stationary home range"
NO_MODEL = "no motion model fitted: no autocorrelation-aware range"
MIN_FIXES = 10  # fewer fixes make no useful range (judgement, no source)
CURVE_POINTS = 8  # sample sizes on the area curve
NOT_LEVELLED_PCT = 10.0  # area still growing by this much over the last quarter of fixes (judgement, no source)
ROW_COLUMNS = ["method", "level", "area_km2", "area_low_km2", "area_high_km2", "n_fixes", "n_effective",
               "bandwidth_m", "schoener_ratio", "area_gain_last_quarter_pct", "note", "masked"]
EMPTY_CURVE = ["n_fixes", "method", "level", "area_km2"]


@dataclass
class RangeExtras:
    """What the ranges stage hands to the report besides the table rows.

    Attributes
    ----------
    contours : list of dict
        ``{method, level, geometry}``, geometry in planar metres (the
        equal-area frame at the first fix, or relative to the hidden origin
        when masked).
    area_curve : pandas.DataFrame
        ``n_fixes, method, level, area_km2`` (:func:`area_curve`).
    track_xy : pandas.DataFrame
        ``x_m, y_m`` of the fixes in the contours' frame.
    masked : bool
    note : str
        Animal-level note for the report (e.g. not range-resident).
    """

    contours: list = field(default_factory=list)
    area_curve: pd.DataFrame = field(default_factory=lambda: empty_table(EMPTY_CURVE))
    track_xy: pd.DataFrame = field(default_factory=lambda: empty_table(("x_m", "y_m")))
    masked: bool = False
    note: str = ""


def model_ranges(t_s, x, y, model: RangeModel, centre_xy) -> dict:
    """Autocorrelation-aware KDE and Gaussian ranges of a range-resident model.

    Parameters
    ----------
    t_s : array_like
        Fix times in seconds.
    x, y : array_like
        Fixes in an equal-area frame, metres.
    model : RangeModel
        Range-resident: ``sigma_m`` and ``acf`` are used.
    centre_xy : tuple of float
        The model's range centre in the same frame as ``x, y``.

    Returns
    -------
    dict
        {(method, level): (geometry, area_km2, low_km2, high_km2, bandwidth_m or None)}, plus
        ``"n_effective"``.

    References
    ----------
    Fleming, C. H. et al. (2015). Ecology 96, 1182-1188.
    Fleming, C. H. & Calabrese, J. M. (2017). Methods Ecol. Evol. 8, 571-579.
    Fleming, C. H. et al. (2019). Methods Ecol. Evol. 10, 1679-1689.
    """
    x, y = np.asarray(x, float), np.asarray(y, float)
    acf = model.acf
    assert acf is not None  # a range-resident model always carries its position autocorrelation
    n_eff = n_effective(t_s, acf)
    w = centre_variance_factor(t_s, acf)
    h_rel = autocorrelated_bandwidth(t_s, acf)
    h_m = h_rel * model.sigma_m
    factor = kde_area_factor(h_rel, w)
    shapes = corrected_isopleths(x, y, h_m, {level: factor / model.kde_shape_factors.get(level, 1.0)
                                             for level in (95, 50)})
    out: dict = {"n_effective": n_eff}
    for level, shape in shapes.items():
        area = shape.area / 1e6
        out[("kde_autocorr", level)] = (shape, area, *area_interval(area, n_eff * model.dof_factor), h_m)
        area = gaussian_area(model.sigma_m, level / 100.0)
        out[("gaussian", level)] = (gaussian_outline(centre_xy, area), area,
                                    *area_interval(area, n_eff * model.dof_factor), None)
    return out


def _to_frame(fixes_obs: pd.DataFrame, x, y, point):
    """A point of the animal's ``x_m, y_m`` frame in the equal-area frame (least-squares affine map of the fixes)."""
    design = np.column_stack([fixes_obs["x_m"].to_numpy(float), fixes_obs["y_m"].to_numpy(float), np.ones(len(x))])
    coef, *_ = np.linalg.lstsq(design, np.column_stack([x, y]), rcond=None)
    return tuple(float(v) for v in np.array([point[0], point[1], 1.0]) @ coef)


def user_bandwidth(cfg: Config) -> float | None:
    """``cfg.kde_bandwidth`` checked, or None for the reference bandwidth."""
    return positive_metres(cfg.kde_bandwidth, "--kde-bandwidth", "500")


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
    ``shapes`` is None for a method drawn from the fitted motion model (:func:`model_ranges`).
    ``prose`` names the method, with its reference, in the report's methods text.
    """

    levels: tuple[int, ...]
    shapes: Callable | None
    prose: str


#: The registry of home-range methods (``method`` in ranges.csv), in output order.
RANGE_METHODS = {
    "mcp": RangeMethod((100, 95), _mcp_shapes, "minimum convex polygons (Mohr 1947)"),
    "kde": RangeMethod((95, 50), _kde_shapes, "fixed-kernel utilization distributions with the reference "
                       "bandwidth (Worton 1989)"),
    "kde_autocorr": RangeMethod((95, 50), None, "kernel utilization distributions with the bandwidth and area "
                                "correction for the fitted autocorrelation (Fleming et al. 2015; Fleming &amp; "
                                "Calabrese 2017), with 95 % intervals from the effective sample size"),
    "gaussian": RangeMethod((95, 50), None, "the stationary Gaussian distribution of the fitted range-resident "
                            "motion model (Dunn &amp; Gipson 1977)"),
}
#: (method, level) rows drawn from the fixes alone, then those drawn from the fitted motion model.
RANGES = tuple((name, level) for name, method in RANGE_METHODS.items() if method.shapes for level in method.levels)
MODEL_RANGES = tuple((name, level) for name, method in RANGE_METHODS.items() if not method.shapes
                     for level in method.levels)


def range_shapes(x, y, h_user: float | None) -> dict:
    """{(method, level): (geometry in metres, n_fixes, bandwidth_m or None)} for every range."""
    return {(name, level): shape for name, method in RANGE_METHODS.items() if method.shapes
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


def ranges_animal(fixes_a: pd.DataFrame, cfg: Config | None = None, origin: HiddenOrigin | None = None,
                  model: RangeModel | None = None):
    """MCP (100 %, 95 %), KDE, autocorrelation-aware KDE and Gaussian (95 %, 50 %) ranges of one animal.

    Parameters
    ----------
    fixes_a : pandas.DataFrame
        One animal's fixes (contract columns).
    cfg : roamstat.config.Config, optional
        Uses ``kde_bandwidth`` (metres; None for h_ref), ``mask_locations``
        and ``mask_grid``.
    origin : HiddenOrigin, optional
        The run's hidden origin when masking (one per run, shared with
        every masked output).  Left out, one is drawn for this animal alone.
    model : RangeModel, optional
        The animal's best motion model (:func:`roamstat.ranges.model.from_motion_fit`).
        Without it, or when it is not range-resident, the ``kde_autocorr``
        and ``gaussian`` rows have no area and a note says why.

    Returns
    -------
    rows : list of dict
        One per (method, level), columns ``ROW_COLUMNS``.
    features : list of dict
        GeoJSON Features (WGS84, right-hand rule; placed around 0° N 0° E
        when masked), properties ``animal_id`` plus the row.
    extras : RangeExtras

    References
    ----------
    Worton, B. J. (1989). Ecology 70, 164-168.
    Mohr, C. O. (1947). Am. Midl. Nat. 37, 223-249.
    Swihart, R. K. & Slade, N. A. (1985). Ecology 66, 1176-1184.
    Fleming, C. H. et al. (2015). Ecology 96, 1182-1188.
    """
    cfg = cfg or Config()
    masked = cfg.mask_locations
    h_user = user_bandwidth(cfg)
    obs = located(fixes_a)
    animal_id = str(fixes_a["animal_id"].iloc[0]) if len(fixes_a) else ""
    n = len(obs)
    if n < MIN_FIXES:
        return too_few_fixes(n, masked)
    frame = animal_frame(obs)
    x, y = frame.forward(obs["lon"].to_numpy(float), obs["lat"].to_numpy(float))
    ratio = schoener_ratio(x, y)
    caution = autocorrelation_note(ratio, n)
    shapes = {k: (geom, None, math.nan, math.nan, h, n_used) for k, (geom, n_used, h) in range_shapes(x, y, h_user).items()}
    n_eff, model_note = math.nan, NO_MODEL if model is None else ""
    if model is not None and not model.range_resident:
        model_note = f"{NOT_RESIDENT} (best motion model {model.name})"
    elif model is not None:
        t_s = (obs["time"] - obs["time"].iloc[0]).dt.total_seconds().to_numpy(float)
        fitted = model_ranges(t_s, x, y, model, _to_frame(obs, x, y, model.centre_xy))
        n_eff = fitted.pop("n_effective")
        shapes.update({k: (*v, n) for k, v in fitted.items()})
    curve = area_curve(x, y, h_user)
    if masked:
        if origin is None:
            origin = hidden_origin(obs["lat"], obs["lon"], cfg.mask_grid)
        place, inverse, lon_centre = (lambda g: origin.geometry(g, frame)), MASKED_FRAME.inverse, 0.0
        track_x, track_y = origin.xy(obs["lon"], obs["lat"])
    else:
        place, inverse, lon_centre = (lambda g: g), frame.inverse, frame.lon0
        track_x, track_y = x, y
    rows, features, contours = [], [], []
    for method, level in RANGES + MODEL_RANGES:
        from_model = (method, level) in MODEL_RANGES
        if (method, level) not in shapes:
            note = model_note if from_model and model_note else "fixes do not spread (zero variance): no kernel range"
            note = f"{note}; {MASK_NOTE}" if masked else note
            rows.append(_row(method, level, n=n, ratio=ratio, note=note, masked=masked))
            continue
        geom, area, low, high, h, n_used = shapes[(method, level)]
        shown = place(geom)
        outline = geojson.checked_lonlat(shown, inverse, lon_centre)
        if outline is None:  # never a table area that its outline contradicts
            note = geojson.NOT_PLANAR_NOTE.format(method=method.upper())
            row = _row(method, level, n=n_used, bandwidth_m=h, ratio=ratio, note=note, masked=masked)
            rows.append(row)
            features.append(geojson.feature(MultiPolygon(), {"animal_id": animal_id, **row}))
            continue
        notes = [caution] if caution and method == "kde" else []
        if geom.is_empty:
            notes.append("fixes are collinear or too few: the outline is empty")
        gain = _gain_pct(curve, method, level, n) if not from_model else math.nan
        if gain > NOT_LEVELLED_PCT:
            notes.append(f"area grew {gain:.0f} % over the last quarter of fixes: not levelled off, likely an underestimate")
        if model_note and not from_model:
            notes.append(model_note)
        if masked:
            notes.append(MASK_NOTE)
        row = _row(method, level, geom.area / 1e6 if area is None else area, low, high, n_used,
                   n_eff if from_model else math.nan,
                   h, ratio, gain, "; ".join(notes), masked)
        rows.append(row)
        contours.append({"method": method, "level": level, "geometry": shown})
        features.append(geojson.feature(outline, {"animal_id": animal_id, **row}))
    note = model_note if model is not None and not model.range_resident else ""
    return rows, features, RangeExtras(contours, curve, pd.DataFrame({"x_m": track_x, "y_m": track_y}), masked, note)


def too_few_fixes(n: int, masked: bool) -> tuple[list[dict], list, RangeExtras]:
    """:func:`ranges_animal` of an animal with ``n`` < ``MIN_FIXES`` located fixes: rows that say so."""
    note = f"only {n} observed fixes; ranges need at least {MIN_FIXES}"
    return [_row(m, level, n=n, note=note, masked=masked) for m, level in RANGES + MODEL_RANGES], [], \
        RangeExtras(masked=masked)


def _row(method, level, area_km2=math.nan, low=math.nan, high=math.nan, n=0, n_eff=math.nan, bandwidth_m=None,
         ratio=math.nan, gain=math.nan, note="", masked=False) -> dict:
    return {"method": method, "level": level, "area_km2": float(area_km2),
            "area_low_km2": float(low), "area_high_km2": float(high), "n_fixes": int(n), "n_effective": float(n_eff),
            "bandwidth_m": float(bandwidth_m) if bandwidth_m is not None else math.nan,
            "schoener_ratio": float(ratio), "area_gain_last_quarter_pct": float(gain),
            "note": note, "masked": bool(masked)}
