"""Turn the per-animal results into the plain numbers the figures draw.

This is the only place that knows the shapes the upstream stages hand over;
every reader tolerates missing parts (a stage may have had too little data)
and returns ``None`` or an empty list, so a figure is skipped, not a crash.

What the report reads
---------------------
``AnimalResult.fitted`` (models.AnimalFits): ``step_values``, ``turn_values``,
``best_step``, ``tail``, ``best_turn``, ``tail_supported``; models are used
through the protocol only (``name`` as a legend label, ``logpdf``, and a tail
model's ``support[0]`` as its lower bound).

``AnimalResult.null_curves[null]``: a ``compare.NullCurve`` (read through its
``as_dict()``) or a dict of equal-length arrays —
the x axis under ``step`` (step index) or ``t_s`` (seconds since the first
fix), the observed NSD under ``observed_m2``, the pointwise envelope under
``lo_m2``/``hi_m2`` and the null mean under ``mean_m2``.  A few obvious
variants of those names are read too (see ``_NULL_KEYS``).

``AnimalResult.residency_curve``: times under ``time`` (datetimes) or
``t_days``; observed NSD under ``nsd_km2`` (or ``nsd_m2``); fitted curves
under ``fitted`` as {model name: values at the same times}; the chosen model
under ``pattern`` (else the residency row's ``pattern``).

``AnimalResult.range_extras``: ``contours`` — a list of
{``method``, ``level``, ``geometry``} or a dict {(method, level): geometry},
geometry a shapely (Multi)Polygon or a GeoJSON-like mapping in the animal's
planar metres; ``area_curve`` — a table (or dict of columns) with
``n_fixes``, ``area_km2`` and optionally ``method``, ``level``;
``track_xy`` — the fixes (``x_m``, ``y_m``) in the contours' frame;
``rejected_xy`` — rejected fixes with ``x_m``, ``y_m``.
"""

from __future__ import annotations

import math

from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

if TYPE_CHECKING:
    from roamstat.models.fit import AnimalFits

HEAVY_TAIL_RATIO = 50.0  # max/median step above which log axes read better (display choice, no source)

_NULL_KEYS = {
    "step": ("step", "steps", "step_index"),
    "t_s": ("t_s", "time_s", "elapsed_s"),
    "observed": ("observed_m2", "observed_nsd_m2", "nsd_obs_m2", "observed"),
    "lo": ("lo_m2", "envelope_lo_m2", "lo", "lower_m2"),
    "hi": ("hi_m2", "envelope_hi_m2", "hi", "upper_m2"),
    "mean": ("mean_m2", "mean_nsd_m2", "mean"),
}


def _first(mapping, names):
    for name in names:
        if isinstance(mapping, dict) and mapping.get(name) is not None:
            return mapping[name]
    return None


def _values(obj) -> np.ndarray:
    return np.asarray([] if obj is None else obj, dtype=float).ravel()


# --- step lengths and turning angles -----------------------------------------

def step_data(fitted: AnimalFits | None) -> dict | None:
    """Observed steps, fitted densities and the axis choice for the step figure."""
    if fitted is None:
        return None
    steps = _values(fitted.step_values)
    steps = steps[np.isfinite(steps) & (steps > 0)]
    if steps.size < 2:
        return None
    heavy = fitted.tail_supported or steps.max() / np.median(steps) > HEAVY_TAIL_RATIO
    grid = np.geomspace(steps.min(), steps.max(), 200) if heavy else np.linspace(steps.max() / 400, steps.max(), 200)
    curves = []
    best = fitted.best_step
    if best is not None:
        curves.append((f"{best.name} (best light-tailed)", grid, _density(best, grid)))
    tail = fitted.tail
    if tail is not None:
        lower = _lower_bound(tail, steps)
        share = float(np.mean(steps >= lower))
        tail_grid = grid[grid >= lower]
        curves.append((f"{tail.name} tail, x ≥ {lower:.3g} m", tail_grid, share * _density(tail, tail_grid)))
    return {"steps": steps, "curves": curves, "log_axes": heavy}


def _density(model, x) -> np.ndarray:
    with np.errstate(all="ignore"):
        return np.exp(np.asarray(model.logpdf(x), dtype=float))


def _lower_bound(model, steps) -> float:
    support = getattr(model, "support", None)
    if support is not None and np.isfinite(support[0]):
        return float(support[0])
    inside = steps[np.isfinite(np.asarray(model.logpdf(steps), dtype=float))]
    return float(inside.min()) if inside.size else float(steps.min())


def turn_data(fitted: AnimalFits | None) -> dict | None:
    """Observed turns and the fitted turn density for the rose."""
    if fitted is None:
        return None
    turns = _values(fitted.turn_values)
    turns = turns[np.isfinite(turns)]
    if turns.size < 2:
        return None
    theta = np.linspace(-math.pi, math.pi, 361)
    best = fitted.best_turn
    curves = [(f"{best.name} (best)", theta, _density(best, theta))] if best is not None else []
    return {"turns": turns, "curves": curves}


# --- NSD against the nulls -----------------------------------------------------

def null_panels(null_curves: dict | None) -> list | None:
    """One panel per null model with an observed curve, each with its x-axis label (steps or days)."""
    panels = []
    for name, curve in (null_curves or {}).items():
        curve = curve.as_dict() if hasattr(curve, "as_dict") else curve  # compare.NullCurve
        observed = _first(curve, _NULL_KEYS["observed"])
        steps, seconds = _first(curve, _NULL_KEYS["step"]), _first(curve, _NULL_KEYS["t_s"])
        if observed is None:
            continue
        observed = _values(observed)
        if steps is not None:
            x, label = _values(steps), "steps since the first fix"
        elif seconds is not None:
            x, label = _values(seconds) / 86400.0, "days since the first fix"
        else:
            x, label = np.arange(observed.size, dtype=float), "steps since the first fix"
        panel: dict[str, object] = {"name": str(name), "x": x, "x_label": label, "observed": observed}
        for key in ("lo", "hi", "mean"):
            value = _first(curve, _NULL_KEYS[key])
            panel[key] = None if value is None or _values(value).size != x.size else _values(value)
        if x.size == observed.size and x.size >= 2:
            panels.append(panel)
    return panels or None


# --- residency ----------------------------------------------------------------

def residency_data(curve: dict | None, residency_row: dict | None) -> dict | None:
    """Times, observed NSD and fitted curves for the residency figure."""
    curve = curve or {}
    time = _first(curve, ("time", "times", "t"))
    if time is not None:
        t, t_label = pd.to_datetime(pd.Series(list(time)), utc=True).dt.tz_localize(None).to_numpy(), "date (UTC)"
    else:
        days = _first(curve, ("t_days", "days"))
        if days is None:
            return None
        t, t_label = _values(days), "days since the first fix"
    observed, divisor = _first(curve, ("nsd_km2", "observed_km2")), 1.0
    if observed is None:
        observed, divisor = _first(curve, ("nsd_m2", "observed_m2")), 1e6
    if observed is None or len(observed) != len(t) or len(t) < 2:
        return None
    chosen = curve.get("pattern") or (residency_row or {}).get("pattern")
    fitted = []
    models = curve.get("fitted")
    if isinstance(models, dict):
        for name, values in models.items():
            values = _values(values)
            if values.size == len(t):
                fitted.append((str(name), t, values / divisor, str(name) == str(chosen)))
    elif models is not None and len(models) == len(t):
        fitted.append((str(chosen or "fitted"), t, _values(models) / divisor, True))
    return {"t": t, "observed": _values(observed) / divisor, "fitted": fitted, "t_label": t_label,
            "y_label": "net squared displacement (km²)"}


# --- ranges -------------------------------------------------------------------

def contour_data(extras: dict) -> list:
    """[(label, rings)] for every home-range outline, rings oriented for filling."""
    from shapely.geometry import shape
    from shapely.geometry.polygon import orient

    raw = (extras or {}).get("contours")
    if isinstance(raw, dict):
        items = [(key if isinstance(key, tuple) else (key, None), geom) for key, geom in raw.items()]
    elif isinstance(raw, (list, tuple)):
        items = [((c.get("method"), c.get("level")), c.get("geometry")) for c in raw if isinstance(c, dict)]
    else:
        return []
    out = []
    for (method, level), geom in items:
        if geom is None:
            continue
        if isinstance(geom, dict):
            geom = shape(geom)
        polygons = getattr(geom, "geoms", [geom])
        rings = []
        for polygon in polygons:
            if getattr(polygon, "geom_type", "") != "Polygon" or polygon.is_empty:
                continue
            polygon = orient(polygon, 1.0)
            rings.append(np.asarray(polygon.exterior.coords))
            rings.extend(np.asarray(hole.coords) for hole in polygon.interiors)
        label = f"{str(method).upper()} {level:g} %" if isinstance(level, (int, float)) else str(method).upper()
        if rings:
            out.append((label, rings))
    return sorted(out, key=lambda item: item[0])  # same order, hence colours, as area_series


def area_series(extras: dict) -> list:
    """[(label, n_fixes, area_km2)] for the area–sample-size figure."""
    raw = (extras or {}).get("area_curve")
    if raw is None:
        return []
    table = raw if isinstance(raw, pd.DataFrame) else pd.DataFrame(raw)
    if not {"n_fixes", "area_km2"} <= set(table.columns) or table.empty:
        return []
    keys = [c for c in ("method", "level") if c in table.columns]
    groups = table.groupby(keys, sort=True) if keys else [((), table)]
    series = []
    for key, part in groups:
        key = key if isinstance(key, tuple) else (key,)
        label = " ".join(f"{v:g} %" if isinstance(v, (int, float, np.number)) else str(v).upper() for v in key) or "area"
        part = part.sort_values("n_fixes")
        series.append((label, part["n_fixes"].to_numpy(float), part["area_km2"].to_numpy(float)))
    return sorted(series, key=lambda item: item[0])


def xy_table(obj) -> pd.DataFrame | None:
    """A table or (N, 2) array of planar coordinates as columns ``x_m``, ``y_m``."""
    if obj is None:
        return None
    if isinstance(obj, pd.DataFrame):
        return obj[["x_m", "y_m"]] if {"x_m", "y_m"} <= set(obj.columns) else None
    array = np.asarray(obj, dtype=float)
    return pd.DataFrame(array[:, :2], columns=["x_m", "y_m"]) if array.ndim == 2 and array.shape[1] >= 2 else None
