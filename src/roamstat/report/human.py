"""Numbers as a biologist reads them: h, km, km², degrees; one precision per column.

Only the report rounds: the CSV files keep full precision.  Every function
returns display text (not yet escaped); :mod:`roamstat.report.html` escapes it.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd

SIGNIFICANT = 3  # 3 significant figures at the column's typical size (display choice, no source)
SMALLEST_SHOWN = 0.001  # p, q and weights below this read "< 0.001"
EXTREME_PARAMETER = 100.0  # |log-scale or shape parameter| beyond this marks a degenerate fit (judgement, no source)
#: Parameters of step-length models that carry metres (rates carry 1/m); turn locations are radians.
LENGTH_PARAMETERS = ("scale", "xmin", "xmax", "loc")
ANGLE_PARAMETERS = ("mu",)
DASH = "–"


def missing(value) -> bool:
    try:
        return value is None or value is pd.NA or bool(pd.isna(value))
    except (TypeError, ValueError):
        return False


def decimals_for(values, significant: int = SIGNIFICANT) -> int:
    """Decimals giving ``significant`` figures at the median magnitude of ``values`` (0 to 4)."""
    v = np.abs(np.asarray(pd.to_numeric(pd.Series(values), errors="coerce"), float))
    v = v[np.isfinite(v) & (v > 0)]
    if not v.size:
        return 0
    return int(min(4, max(0, significant - 1 - math.floor(math.log10(float(np.median(v)))))))


def number(value, decimals: int) -> str:
    """``value`` with ``decimals`` decimals and thousands separators; "–" when missing."""
    if missing(value):
        return DASH
    value = float(value)
    if not math.isfinite(value):
        return "∞" if value > 0 else ("−∞" if value < 0 else DASH)
    return f"{value:,.{decimals}f}".replace("-", "−")


def column(values, scale: float = 1.0, significant: int = SIGNIFICANT) -> list[str]:
    """Every value divided by ``scale``, at one precision for the whole column."""
    scaled = pd.to_numeric(pd.Series(values), errors="coerce") / scale
    d = decimals_for(scaled, significant)
    return [number(v, d) for v in scaled]


def probability(value) -> str:
    """p-, q-values and weights: 3 decimals, "< 0.001" below."""
    if missing(value):
        return DASH
    value = float(value)
    return "< 0.001" if value < SMALLEST_SHOWN else f"{value:.3f}"


def significant(value, digits: int = SIGNIFICANT) -> str:
    """One value to ``digits`` significant figures, in plain notation."""
    if missing(value):
        return DASH
    value = float(value)
    if value == 0 or not math.isfinite(value):
        return number(value, 0)
    return number(value, int(max(0, digits - 1 - math.floor(math.log10(abs(value))))))


def hours(seconds) -> str:
    return DASH if missing(seconds) else f"{significant(float(seconds) / 3600.0)} h"


def km(metres) -> str:
    return DASH if missing(metres) else f"{significant(float(metres) / 1000.0)} km"


def date(value) -> str:
    """The calendar date (UTC) of a timestamp or ISO text; "–" when missing or unreadable."""
    try:
        return DASH if missing(value) else pd.Timestamp(value).strftime("%Y-%m-%d")
    except (TypeError, ValueError):
        return DASH


def days(start, end) -> float:
    """Days from ``start`` to ``end`` (timestamps or ISO text); NaN if either is missing."""
    try:
        return (pd.Timestamp(end) - pd.Timestamp(start)).total_seconds() / 86400.0
    except (TypeError, ValueError):
        return math.nan


def parameters(params, variable: str = "step") -> str:
    """Fitted parameters as prose: "shape 1.62, scale 67.6 m"; turn locations in degrees."""
    values = _params(params)
    parts = []
    for name, value in values.items():
        if not isinstance(value, (int, float)) or isinstance(value, bool):
            parts.append(f"{name} {value}")
        elif variable == "turn" and name in ANGLE_PARAMETERS:
            parts.append(f"{name} {significant(math.degrees(value))}°")
        elif variable == "step" and name in LENGTH_PARAMETERS:
            parts.append(f"{name} {significant(value)} m")
        elif variable == "step" and name == "rate":
            parts.append(f"{name} {significant(value)} /m")
        else:
            parts.append(f"{name} {significant(value)}")
    return ", ".join(parts) or DASH


def degenerate(params, variable: str = "step") -> str:
    """Why a fit is degenerate ("" when it is not): a parameter non-finite or at an extreme."""
    for name, value in _params(params).items():
        if not isinstance(value, (int, float)) or isinstance(value, bool):
            continue
        unitless = not (variable == "step" and name in LENGTH_PARAMETERS + ("rate",))
        if not math.isfinite(value) or (unitless and abs(value) > EXTREME_PARAMETER):
            return f"degenerate fit ({name} {significant(value)}): do not interpret"
    return ""


def _params(params) -> dict:
    if isinstance(params, dict):
        return params
    if missing(params) or not str(params).strip():
        return {}
    try:
        value = json.loads(str(params))
    except ValueError:
        return {}
    return value if isinstance(value, dict) else {}
