"""Residency patterns from net squared displacement (NSD) through time.

Five curves are fitted to NSD(t), the squared distance from the first
observed fix (Turchin 1998; Bunnefeld et al. 2011), by nonlinear least squares
from several starting values, and the one with the lowest AIC (Gaussian
errors, from the residual sum of squares; Burnham & Anderson 2002) names the
pattern:

=========== ============================================================ ===
pattern     NSD(t)                                                       k
=========== ============================================================ ===
sedentary   c                                                            1
resident    A (1 - exp(-t / tau))                                        2
disperser   d / (1 + exp((theta - t) / phi))                             3
migrant     d / (1 + exp((theta1 - t) / phi1))
            - d / (1 + exp((theta2 - t) / phi2)),  theta2 > theta1       5
nomad       beta t                                                       1
=========== ============================================================ ===

The sigmoid (disperser, migrant), constant and linear forms are those of
Bunnefeld et al. (2011); the asymptotic home-range form is that of Börger &
Fryxell (2012) (both from memory of the papers).  NSD is in km² and time in
days since the first fix; theta is the midpoint of a transition and phi its
time scale (the NSD goes from 12 % to 88 % of the way in 4 phi).

References
----------
Bunnefeld, N., Börger, L., van Moorter, B., Rolandsen, C. M., Dettki, H.,
Solberg, E. J. & Ericsson, G. (2011). A model-driven approach to quantify
migration patterns: individual, regional and yearly differences. Journal of
Animal Ecology 80, 466-476.
Börger, L. & Fryxell, J. (2012). Quantifying individual differences in
dispersal using net squared displacement. In Dispersal Ecology and Evolution
(eds Clobert et al.), Oxford University Press, 222-230.
Burnham, K. P. & Anderson, D. R. (2002). Model Selection and Multimodel
Inference, 2nd ed. Springer.
Turchin, P. (1998). Quantitative Analysis of Movement. Sinauer.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
from scipy.optimize import least_squares
from scipy.special import expit

from roamstat.registry import UNBOUNDED_WALK_NULL
from roamstat.rows import located

MODELS = ("sedentary", "resident", "disperser", "migrant", "nomad")
N_PARAMS = {"sedentary": 1, "resident": 2, "disperser": 3, "migrant": 5, "nomad": 1}
MIN_FIXES = 20  # below this the five curves cannot be told apart (judgement, no source)
MAX_FIT_POINTS = 5000  # longer series are thinned evenly in time for the fits (speed)
EXPLORE_POINTS = 400  # starting values are screened on this many points of longer series
EXPLORE_NFEV = 8  # function evaluations a start gets before the best are polished
POLISHED_STARTS = 3
MAX_CURVE_POINTS = 1500  # points handed to the report figure
WEAK_DELTA = 2.0  # delta AIC below which support is weak (Burnham & Anderson 2002)
DAY_S = 86400.0


def nsd_series(fixes_obs: pd.DataFrame):
    """Days since the first fix and NSD (km²) from that fix, from ``x_m, y_m``."""
    ns = fixes_obs["time"].dt.tz_convert("UTC").astype("datetime64[ns, UTC]").array.asi8
    t_days = (ns - ns[0]) / 1e9 / DAY_S
    x, y = fixes_obs["x_m"].to_numpy(float), fixes_obs["y_m"].to_numpy(float)
    nsd_km2 = ((x - x[0]) ** 2 + (y - y[0]) ** 2) / 1e6
    return t_days, nsd_km2


# --- the curves -----------------------------------------------------------------

def _sigmoid(t, theta, phi):
    return expit((t - theta) / phi)


def predict(model: str, p, t):
    """NSD (km²) of ``model`` with parameter vector ``p`` at times ``t`` (days)."""
    t = np.asarray(t, float)
    if model == "sedentary":
        return np.full_like(t, p[0])
    if model == "resident":
        return p[0] * -np.expm1(-t / p[1])
    if model == "disperser":
        return p[0] * _sigmoid(t, p[1], p[2])
    if model == "migrant":
        d, theta1, phi1, theta2, phi2 = p
        return d * (_sigmoid(t, theta1, phi1) - _sigmoid(t, theta2, phi2))
    if model == "nomad":
        return p[0] * t
    raise ValueError(f"unknown residency model {model!r}")


def _starts_and_bounds(model: str, t, y, dt_days):
    """Starting vectors and box bounds for the nonlinear fits."""
    span = float(t[-1])
    top = float(np.max(y))
    high = float(np.quantile(y, 0.9))
    phi_lo = max(dt_days / 4.0, span * 1e-4)
    if model == "resident":
        lo, hi = [0.0, span * 1e-4], [100.0 * top, 10.0 * span]
        starts = [[a, span * f] for a in (high, top) for f in (0.02, 0.1, 0.3)]
    elif model == "disperser":
        lo, hi = [0.0, 0.0, phi_lo], [10.0 * top, span, span / 2.0]
        late = float(np.median(y[t >= 0.8 * span])) if np.any(t >= 0.8 * span) else high
        starts = [[max(late, high * 0.5), span * f, span * g] for f in (0.2, 0.4, 0.6, 0.8) for g in (0.01, 0.05)]
    elif model == "migrant":
        # Searched as (d, theta1, phi1, u, phi2) mapped by _natural: box bounds then
        # keep the return after a stay of at least gap_lo and before the last fix.
        lo, hi = [0.0, 0.0, phi_lo, 0.0, phi_lo], [10.0 * top, span - _gap_lo(span, dt_days), span / 2.0, 1.0, span / 2.0]
        starts = [[high, span * a, span * g, u, span * g]
                  for a in (0.1, 0.25, 0.4) for u in (0.2, 0.5, 0.8) for g in (0.01, 0.04)]
    else:
        raise ValueError(model)
    starts = [np.clip(np.asarray(s, float), np.asarray(lo) + 1e-12, np.asarray(hi) - 1e-12) for s in starts]
    return starts, (np.asarray(lo, float), np.asarray(hi, float))


def _gap_lo(span: float, dt_days: float) -> float:
    # A stay shorter than this at the far end is a spike, not a second range (judgement, no source).
    return min(max(5.0 * dt_days, span * 0.02), span / 2.0)


def _natural(model: str, q, span: float, dt_days: float):
    """Search vector -> parameters of :func:`predict` (only the migrant differs)."""
    if model != "migrant":
        return q
    d, theta1, phi1, u, phi2 = q
    gap = _gap_lo(span, dt_days)
    return np.array([d, theta1, phi1, theta1 + gap + u * max(span - theta1 - gap, 0.0), phi2])


def fit_model(model: str, t, y, dt_days: float):
    """Least-squares fit of one curve: (parameters, RSS) or (None, nan) if no start converged."""
    if model == "sedentary":
        p = np.array([float(np.mean(y))])
        return p, float(np.sum((y - p[0]) ** 2))
    if model == "nomad":
        denom = float(np.sum(t * t))
        p = np.array([max(float(np.sum(t * y)) / denom, 0.0) if denom > 0 else 0.0])
        return p, float(np.sum((y - p[0] * t) ** 2))
    starts, bounds = _starts_and_bounds(model, t, y, dt_days)
    span = float(t[-1])
    scale = np.maximum(np.abs(np.mean(starts, axis=0)), 1e-9)
    if len(starts) > 2:
        # Every start briefly (on an even subsample of long series), then only the best few
        # polished on all points: most of the cost of many starts is iterations, not points.
        sub = _even_index(len(t), EXPLORE_POINTS) if len(t) > 2 * EXPLORE_POINTS else slice(None)
        explored = [r for r in (_solve(model, q, t[sub], y[sub], span, dt_days, bounds, scale, EXPLORE_NFEV)
                                for q in starts) if r]
        starts = [r[0] for r in sorted(explored, key=lambda r: r[1])[:POLISHED_STARTS]] or starts
    best, best_rss = None, math.inf
    for start in starts:
        result = _solve(model, start, t, y, span, dt_days, bounds, scale)
        if result and result[2] and result[1] < best_rss:
            best, best_rss = _natural(model, result[0], span, dt_days), result[1]
    return (best, best_rss) if best is not None else (None, math.nan)


def _solve(model, start, t, y, span, dt_days, bounds, scale, max_nfev=400):
    """(search vector, RSS, converged) from one start, or None when the solver fails."""
    try:
        res = least_squares(lambda q: predict(model, _natural(model, q, span, dt_days), t) - y, start,
                            bounds=bounds, x_scale=scale, method="trf", max_nfev=max_nfev)
    except (ValueError, FloatingPointError):
        return None
    rss = float(np.sum(res.fun ** 2))
    return (res.x, rss, res.status > 0) if np.isfinite(rss) else None


def aic_from_rss(rss: float, n: int, k: int) -> float:
    """AIC of a least-squares fit with Gaussian errors: n ln(RSS/n) + 2(k + 1).

    The +1 counts the error variance (Burnham & Anderson 2002, sec. 2.2).
    """
    return n * math.log(rss / n) + 2 * (k + 1)


def ranges_apart(model: str, p, t, x, y):
    """Whether a disperser or migrant fit describes two distinct ranges.

    Autocorrelated wandering inside one range can be fitted by a sigmoid (the
    residuals of NSD are far from independent, so AIC alone over-rewards the
    flexible curves).  A fit counts only when the centroids of the fixes
    before departure and at the far end (more than 2 phi from each transition
    midpoint, i.e. past 88 % of the transition) are farther apart than the sum
    of the two ranges' RMS radii, and a migrant's return must be followed by
    at least 5 fixes (judgement, no source).

    Returns
    -------
    (bool, str)
        Verdict and a short reason for the note.
    """
    if model == "disperser":
        start, far = t < p[1] - 2 * p[2], t > p[1] + 2 * p[2]
    else:
        start, far = t < p[1] - 2 * p[2], (t > p[1] + 2 * p[2]) & (t < p[3] - 2 * p[4])
        if np.sum(t > p[3] + 2 * p[4]) < 5:
            return False, "fewer than 5 fixes after the fitted return"
    if start.sum() < 5 or far.sum() < 5:
        return False, "fewer than 5 fixes before departure or at the far range"
    centre = [(x[m].mean(), y[m].mean()) for m in (start, far)]
    radius = [math.sqrt(np.mean((x[m] - cx) ** 2 + (y[m] - cy) ** 2)) for m, (cx, cy) in zip((start, far), centre)]
    separation = math.hypot(centre[1][0] - centre[0][0], centre[1][1] - centre[0][1])
    if separation > sum(radius):
        return True, ""
    return False, (f"ranges overlap (centroids {separation / 1000:.2f} km apart, RMS radii "
                   f"{radius[0] / 1000:.2f} and {radius[1] / 1000:.2f} km)")


# --- one animal ---------------------------------------------------------------------

def residency_animal(fixes_a: pd.DataFrame, cfg=None):
    """Classify one animal's NSD-through-time pattern.

    Parameters
    ----------
    fixes_a : pandas.DataFrame
        One animal's fixes (contract columns; ``x_m, y_m`` in metres).
    cfg : roamstat.config.Config, optional
        Not used by the fits today; accepted for a uniform stage signature.

    Returns
    -------
    row : dict
        ``pattern`` (sedentary, resident, disperser, migrant, nomad or
        undetermined), ``n_fixes``, ``aic_<model>`` for each model,
        ``delta_aic`` (runner-up minus chosen), ``params`` (JSON of the
        chosen curve: asymptote in km², departure and return times as ISO
        8601 with offset) and ``note``.
    curve : dict
        ``time`` (UTC timestamps), ``t_days``, ``nsd_km2`` (observed),
        ``fitted`` {model: NSD km² at the same times} and ``pattern``, for the
        report figure; empty when undetermined for lack of fixes.

    References
    ----------
    Bunnefeld, N. et al. (2011). J. Anim. Ecol. 80, 466-476.
    """
    obs = located(fixes_a)
    row = {"pattern": "undetermined", "n_fixes": int(len(obs))}
    row.update({f"aic_{m}": math.nan for m in MODELS})
    row.update({"delta_aic": math.nan, "params": "{}", "note": ""})
    if len(obs) < MIN_FIXES:
        row["note"] = f"only {len(obs)} observed fixes; residency needs at least {MIN_FIXES}"
        return row, {}
    t, y = nsd_series(obs)
    if t[-1] <= 0:
        row["note"] = "all fixes share one time; residency needs a track through time"
        return row, {}
    notes = []
    fit_idx = _even_index(len(t), MAX_FIT_POINTS)
    if len(fit_idx) < len(t):
        notes.append(f"fitted to {len(fit_idx)} of {len(t)} fixes evenly spaced in time")
    tf, yf = t[fit_idx], y[fit_idx]
    if float(np.max(yf)) == 0.0:
        row.update(pattern="sedentary", params=json.dumps({"nsd_km2": 0.0}),
                   note="every fix at the first fix's position")
        return row, {}
    dt_days = float(np.median(np.diff(tf))) if len(tf) > 1 else 0.0
    floor = 1e-12 * float(np.sum(yf ** 2))  # keeps ln(RSS) finite for a perfect fit
    fits, aics = {}, {}
    for model in MODELS:
        p, rss = fit_model(model, tf, yf, dt_days)
        if p is None:
            notes.append(f"{model} fit did not converge")
            continue
        fits[model] = p
        aics[model] = aic_from_rss(max(rss, floor), len(tf), N_PARAMS[model])
        row[f"aic_{model}"] = aics[model]
    if not aics:
        row["note"] = "; ".join(notes + ["no model converged"])
        return row, {}
    xf = obs["x_m"].to_numpy(float)[fit_idx]
    yf_m = obs["y_m"].to_numpy(float)[fit_idx]
    eligible = dict(aics)
    for model in ("disperser", "migrant"):
        if model in fits:
            apart, why = ranges_apart(model, fits[model], tf, xf, yf_m)
            if not apart:
                del eligible[model]
                notes.append(f"{model} set aside: {why}")
    ranked = sorted(eligible, key=eligible.get)
    chosen = ranked[0]
    row["pattern"] = chosen
    if len(ranked) > 1:
        row["delta_aic"] = aics[ranked[1]] - aics[chosen]
        if row["delta_aic"] < WEAK_DELTA:
            notes.append(f"weak support: {ranked[1]} is within {WEAK_DELTA:g} AIC units")
    params, param_notes = describe_params(chosen, fits[chosen], obs["time"].iloc[0], t[-1])
    row["params"] = json.dumps(params, ensure_ascii=False)
    row["note"] = "; ".join(notes + param_notes)
    show = _even_index(len(t), MAX_CURVE_POINTS)
    curve = {
        "time": obs["time"].iloc[show].reset_index(drop=True),
        "t_days": t[show],
        "nsd_km2": y[show],
        "fitted": {m: predict(m, p, t[show]) for m, p in fits.items()},
        "pattern": chosen,
    }
    return row, curve


def _even_index(n: int, cap: int) -> np.ndarray:
    return np.arange(n) if n <= cap else np.unique(np.linspace(0, n - 1, cap).round().astype(int))


def _iso(t0: pd.Timestamp, days: float) -> str:
    return (t0 + pd.Timedelta(seconds=round(days * DAY_S))).tz_convert("UTC").isoformat()


def describe_params(model: str, p, t0: pd.Timestamp, span_days: float):
    """Plain, unit-named parameters of the chosen curve, and notes about them."""
    notes = []
    if model == "sedentary":
        return {"nsd_km2": float(p[0])}, notes
    if model == "nomad":
        return {"nsd_rate_km2_per_day": float(p[0])}, notes
    if model == "resident":
        if p[1] > span_days:
            notes.append("asymptote not reached within the track (time scale longer than the track)")
        return {"asymptote_km2": float(p[0]), "time_scale_days": float(p[1])}, notes
    if model == "disperser":
        return {"asymptote_km2": float(p[0]), "distance_km": math.sqrt(float(p[0])),
                "departure_time": _iso(t0, p[1]), "departure_scale_days": float(p[2])}, notes
    d, theta1, phi1, theta2, phi2 = (float(v) for v in p)
    return {"asymptote_km2": d, "distance_km": math.sqrt(d),
            "departure_time": _iso(t0, theta1), "departure_scale_days": phi1,
            "return_time": _iso(t0, theta2), "return_scale_days": phi2}, notes


# --- the deployment ----------------------------------------------------------------

def finalise_residency(residency: pd.DataFrame, null_tests: pd.DataFrame | None = None) -> pd.DataFrame:
    """Add ``range_study_candidate`` to the residency table.

    An animal is a candidate for a home-range study when its pattern is
    resident or sedentary and, where the null-model table exists, its verdict
    under the correlated-random-walk null is not "farther" (net displacement
    larger than a random walk of its own steps and turns would give).

    Parameters
    ----------
    residency : pandas.DataFrame
        One row per animal from :func:`residency_animal` with ``animal_id``.
    null_tests : pandas.DataFrame or None
        The null-model table (``animal_id, null_model, verdict``), if run.

    Returns
    -------
    pandas.DataFrame
        A copy with ``range_study_candidate`` (bool).
    """
    out = residency.copy()
    if out.empty:
        out["range_study_candidate"] = pd.Series(dtype=bool)
        return out
    candidate = out["pattern"].isin(["resident", "sedentary"])
    if null_tests is not None and len(null_tests) and {"animal_id", "null_model", "verdict"} <= set(null_tests.columns):
        walk = null_tests[null_tests["null_model"].astype(str) == UNBOUNDED_WALK_NULL]
        farther = set(walk.loc[walk["verdict"].astype(str) == "farther", "animal_id"].astype(str))
        candidate &= ~out["animal_id"].astype(str).isin(farther)
    out["range_study_candidate"] = candidate.astype(bool)
    return out
