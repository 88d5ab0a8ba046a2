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
mixed       d1 / (1 + exp((theta1 - t) / phi1))
_migrant    - d2 / (1 + exp((theta2 - t) / phi2)),  0 <= d2 <= d1        6
nomad       beta t                                                       1
=========== ============================================================ ===

The sigmoid (disperser, migrant, mixed migrant: a return only part of the
way), constant and linear forms are those of Bunnefeld et al. (2011); the asymptotic home-range form is that of Börger &
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
from scipy.special import expit

from roamstat.registry import UNBOUNDED_WALK_NULL
from roamstat.rows import located

MODELS = ("sedentary", "resident", "disperser", "migrant", "mixed_migrant", "nomad")
N_PARAMS = {"sedentary": 1, "resident": 2, "disperser": 3, "migrant": 5, "mixed_migrant": 6, "nomad": 1}
TWO_RANGE = ("disperser", "migrant", "mixed_migrant")  # patterns that claim a move to another range
MIN_FIXES = 20  # below this the five curves cannot be told apart (judgement, no source)
MAX_FIT_POINTS = 5000  # longer series are thinned evenly in time for the fits (speed)
EXPLORE_POINTS = 400  # starting values are screened on this many points of longer series
EXPLORE_NFEV = 8  # function evaluations a start gets before the best are polished
POLISHED_STARTS = 3
SAME_RSS = 1e-6  # polished RSS within this share of each other count as the same optimum (judgement)
MAX_CURVE_POINTS = 1500  # points handed to the report figure
WEAK_DELTA = 2.0  # delta AIC below which support is weak (Burnham & Anderson 2002)
# Fewer effective fixes make the area CI span more than a factor ~2.5 (chi-square, 2 n_eff dof) (judgement).
MIN_N_EFFECTIVE = 10.0
# A range part must spread less than this share of a random walk's spread over the same time: about a stay
# of 10 attraction times (3 tau / L); a random walk's window falls below it with probability of a few % (judgement).
SETTLED_MAX = 0.3
# A range part starts this many phi from a transition midpoint.  The sigmoid is fitted to NSD, the square
# of distance: at 2 phi the NSD is 12 % of the way, but the animal is already sqrt(0.12) = 35 % of the way
# in distance, so a directed move's first days fall into the "settled" start.  At 4 phi the NSD is within
# 1.8 % and the animal within 13 % of the way (derived here; judgement, no source).
PART_MARGIN_PHI = 4.0
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
    if model == "mixed_migrant":
        d1, theta1, phi1, theta2, phi2, d2 = p
        return d1 * _sigmoid(t, theta1, phi1) - d2 * _sigmoid(t, theta2, phi2)
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
    elif model == "mixed_migrant":
        # As the migrant, plus r = d2 / d1 in [0, 1]: the share of the way back.
        migrant_starts, (migrant_lo, migrant_hi) = _starts_and_bounds("migrant", t, y, dt_days)
        starts = [[*s, r] for s in migrant_starts for r in (0.3, 0.7)]
        lo, hi = [*migrant_lo, 0.0], [*migrant_hi, 1.0]
    else:
        raise ValueError(model)
    starts = [np.clip(np.asarray(s, float), np.asarray(lo) + 1e-12, np.asarray(hi) - 1e-12) for s in starts]
    return starts, (np.asarray(lo, float), np.asarray(hi, float))


def _gap_lo(span: float, dt_days: float) -> float:
    # A stay shorter than this at the far end is a spike, not a second range (judgement, no source).
    return min(max(5.0 * dt_days, span * 0.02), span / 2.0)


def _natural(model: str, q, span: float, dt_days: float):
    """Search vector -> parameters of :func:`predict` (only the migrants differ)."""
    if model not in ("migrant", "mixed_migrant"):
        return q
    d, theta1, phi1, u, phi2 = q[:5]
    gap = _gap_lo(span, dt_days)
    natural = [d, theta1, phi1, theta1 + gap + u * max(span - theta1 - gap, 0.0), phi2]
    return np.array(natural if model == "migrant" else natural + [q[5] * d])


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
        # Every start briefly, all at once (on an even subsample of long series), then only the
        # best few polished on all points: most of the cost of many starts is iterations, not points.
        sub = _even_index(len(t), EXPLORE_POINTS) if len(t) > 2 * EXPLORE_POINTS else slice(None)
        explored, rss = explore(model, np.array(starts), t[sub], y[sub], span, dt_days, bounds, EXPLORE_NFEV)
        # the screen keeps its vectors in the box; the polish moves them off its faces itself
        starts = [explored[i] for i in np.argsort(rss, kind="stable")[:POLISHED_STARTS] if np.isfinite(rss[i])] or starts
    best, best_rss = None, math.inf
    found: list[float] = []
    for start in starts:
        result = _solve(model, start, t, y, span, dt_days, bounds, scale)
        if not (result and result[2]):
            continue
        if any(abs(result[1] - rss) <= SAME_RSS * rss for rss in found):
            # two polished starts reached the same optimum: the rest are not polished (their screen RSS is higher)
            break
        found.append(result[1])
        if result[1] < best_rss:
            best, best_rss = _natural(model, result[0], span, dt_days), result[1]
    return (best, best_rss) if best is not None else (None, math.nan)


def explore(model: str, q, t, y, span: float, dt_days: float, bounds, n_steps: int):
    """A few projected Levenberg-Marquardt steps from every start: (search vectors, RSS).

    Each step solves (JᵀJ + lambda diag(JᵀJ)) delta = -Jᵀr (Marquardt 1963) and
    projects q + delta onto the box (the projected LM of Kanzow, Yamashita &
    Fukushima 2004); a step that lowers the RSS is kept and lambda divided by 3,
    otherwise lambda doubles.  One evaluation per step: the screen only ranks
    the starts for the polish.  Compiled: :func:`roamstat.ranges.nsd_fit.screen`
    (full references there).
    """
    from roamstat.ranges.nsd_fit import screen  # imported late: numba is slow to load

    return screen(model, q, t, y, span, _gap_lo(span, dt_days), bounds, n_steps)


def _solve(model, start, t, y, span, dt_days, bounds, scale, max_nfev=400):
    """(search vector, RSS, converged) from one start, or None when the solver fails.

    The polish is :func:`roamstat.ranges.nsd_fit.polish`: the trust-region
    reflective steps of ``scipy.optimize.least_squares(method="trf")``
    (Branch, Coleman & Li 1999), compiled, so a polish costs the curve and a
    small SVD per evaluation instead of ~0.2 ms of scipy bookkeeping.
    """
    from roamstat.ranges.nsd_fit import FAILED, polish  # imported late: numba is slow to load

    q, res, _nfev, status = polish(model, start, t, y, span, _gap_lo(span, dt_days), bounds, scale, max_nfev)
    if status == FAILED:
        return None
    rss = float(res @ res)
    return (q, rss, status > 0) if np.isfinite(rss) else None


def aic_from_rss(rss: float, n: int, k: int) -> float:
    """AIC of a least-squares fit with Gaussian errors: n ln(RSS/n) + 2(k + 1).

    The +1 counts the error variance (Burnham & Anderson 2002, sec. 2.2).
    """
    return n * math.log(rss / n) + 2 * (k + 1)


def ranges_apart(model: str, p, t, x, y):
    """Whether a disperser, migrant or mixed-migrant fit describes distinct ranges.

    Autocorrelated wandering inside one range can be fitted by a sigmoid (the
    residuals of NSD are far from independent, so AIC alone over-rewards the
    flexible curves).  A fit counts only when the centroids of the fixes
    before departure and at the far end (more than ``PART_MARGIN_PHI`` = 4 phi from each
    transition midpoint, i.e. past 98 % of the NSD change) are farther apart than the sum
    of the two ranges' RMS radii; a migrant's return must be followed by at
    least 5 fixes, and a mixed migrant's final range must also be apart, in
    the same sense, from both the start and the far range (else it is a
    migrant or a disperser) (judgement, no source).

    Returns
    -------
    (bool, str)
        Verdict and a short reason for the note.
    """
    parts = range_parts(model, p, t)
    if "return range" in parts and parts["return range"].sum() < 5:
        return False, "fewer than 5 fixes after the fitted return"
    if parts["start"].sum() < 5 or parts["far range"].sum() < 5:
        return False, "fewer than 5 fixes before departure or at the far range"
    for name, mask in parts.items():
        spread = random_walk_spread(t, x, y, mask)
        if not spread < SETTLED_MAX:
            return False, (f"the {name} is not settled (its spread is {spread:.2f} of what a random walk with the "
                           f"track's own step rate would reach in that time)")
    pairs = [("start", "far range")]
    if model == "mixed_migrant":
        pairs += [("start", "return range"), ("far range", "return range")]
    for a, b in pairs:
        apart, why = _apart(x, y, parts[a], parts[b])
        if not apart:
            return False, f"{a} and {b} overlap ({why})"
    return True, ""


def range_parts(model: str, p, t) -> dict:
    """Masks of the fixes in each range of a two-range fit, ``PART_MARGIN_PHI`` phi from every transition midpoint.

    ``start`` and ``far range`` for a disperser, plus ``return range`` for the migrants.
    """
    m = PART_MARGIN_PHI
    parts = {"start": t < p[1] - m * p[2], "far range": t > p[1] + m * p[2]}
    if model != "disperser":
        parts["far range"] &= t < p[3] - m * p[4]
        parts["return range"] = t > p[3] + m * p[4]
    return parts


def parts_motion(model: str, p, t, located: pd.DataFrame, cfg):
    """Best motion model of each range of a two-range fit, fitted to that range's fixes alone.

    The whole track of a true disperser or migrant has no single stationary
    range, so its best whole-track model is unbounded (brownian or ctcrw);
    each of its ranges, fitted alone, is range-resident.  A range counts as
    range-resident when a range-resident model has the lowest AICc of its
    fits: the whole-track rule of 10 range crossings is not asked here,
    because a stay of 10-20 attraction times often fails it; the ranges have
    already passed the settled-spread test of :func:`ranges_apart`, and a
    random-walk piece prefers OU by AICc only about 40 % of the time.  One
    range-resident range is enough: the shorter first stay of a simulated
    disperser or migrant (15-20 attraction times) was fitted as brownian
    in 5 of 24 animals (tests/test_residency_pipeline.py).

    Parameters
    ----------
    model : str
        A two-range pattern (``TWO_RANGE``).
    p : array_like
        Its fitted NSD parameters; ``t`` the days of ``located``'s rows.
    located : pandas.DataFrame
        The fixes the NSD curve was fitted to (``time, x_m, y_m``).
    cfg : roamstat.config.Config
        Location-error settings for the motion fits.

    Returns
    -------
    resident : bool
        Whether some range's best motion model is range-resident: evidence of settling somewhere.
    summary : str
        ``"start ou, far range ou_ctcrw"``: the best model of each range.
    """
    from roamstat.motion.animal import fit_animal_motion  # imported late: numba is slow to load

    best = {}
    for name, mask in range_parts(model, p, t).items():
        part = fit_animal_motion(located[mask].reset_index(drop=True), cfg, standard_errors=False)  # AICc only
        fits = [f for f in part.fits if np.isfinite(f.aicc)]
        best[name] = min(fits, key=lambda f: f.aicc) if fits else None
    resident = any(f is not None and f.range_resident for f in best.values())
    return resident, ", ".join(f"{k} {f.name if f is not None else 'none'}" for k, f in best.items())


def random_walk_spread(t, x, y, part) -> float:
    """Spread of the fixes in ``part`` relative to a random walk's over the same time.

    q = r² / (k L / 6), with r² the mean squared distance of the part's fixes
    from their centroid, L the part's duration and k the mean of
    |step|² / dt over the whole track: a 2-D Brownian motion of that step
    rate has expected r² = k L / 6 over a window of length L (the mean
    squared deviation of Brownian motion from its time average is a sixth of
    its variance rate times L), so q is about 1 for a random walk, however
    long, and about 3 tau / L for a range of attraction time tau << L
    (derived here; the idea of comparing spread with diffusion is Turchin's
    1998 NSD argument).
    """
    steps = np.diff(t)
    ok = steps > 0
    rate = float(np.mean((np.diff(x)[ok] ** 2 + np.diff(y)[ok] ** 2) / steps[ok])) if ok.any() else math.nan
    duration = float(t[part].max() - t[part].min())
    r2 = float(np.mean((x[part] - x[part].mean()) ** 2 + (y[part] - y[part].mean()) ** 2))
    return r2 / (rate * duration / 6.0) if rate > 0 and duration > 0 else math.nan


def _apart(x, y, first, second):
    centre = [(x[m].mean(), y[m].mean()) for m in (first, second)]
    radius = [math.sqrt(np.mean((x[m] - cx) ** 2 + (y[m] - cy) ** 2)) for m, (cx, cy) in zip((first, second), centre)]
    separation = math.hypot(centre[1][0] - centre[0][0], centre[1][1] - centre[0][1])
    return separation > sum(radius), (f"centroids {separation / 1000:.2f} km apart, RMS radii "
                                      f"{radius[0] / 1000:.2f} and {radius[1] / 1000:.2f} km")


def choose_pattern(aics: dict, fits: dict, t, x, y):
    """The residency class and the reason for it: the one place the NSD class is decided.

    The class is the curve of lowest AIC among those that pass
    :func:`ranges_apart`.  The deployment stage may still overrule a
    two-range class (:func:`finalise_residency`).

    Returns
    -------
    pattern : str
    reason : str
        One sentence: what won and by how much.
    notes : list of str
        Curves set aside and weak support.
    delta : float
        Runner-up AIC minus the chosen one's (NaN with one candidate).
    """
    notes: list[str] = []
    eligible = dict(aics)
    for model in TWO_RANGE:
        if model in fits:
            apart, why = ranges_apart(model, fits[model], t, x, y)
            if not apart:
                del eligible[model]
                notes.append(f"{model} set aside: {why}")
    ranked = sorted(eligible, key=lambda m: eligible[m])
    chosen, delta = ranked[0], math.nan
    reason = f"{chosen}: lowest AIC of the NSD curves"
    if len(ranked) > 1:
        delta = aics[ranked[1]] - aics[chosen]
        reason += f" ({delta:.1f} below {ranked[1]})"
        if delta < WEAK_DELTA:
            notes.append(f"weak support: {ranked[1]} is within {WEAK_DELTA:g} AIC units")
    return chosen, reason, notes, delta


# --- one animal ---------------------------------------------------------------------

def _undetermined(n_fixes: int) -> dict:
    """The row of an animal with ``n_fixes`` located fixes before any curve is fitted."""
    row = {"pattern": "undetermined", "pattern_reason": "", "n_fixes": int(n_fixes)}
    row.update({f"aic_{m}": math.nan for m in MODELS})
    row.update({"delta_aic": math.nan, "params": "{}", "ranges_resident": math.nan, "ranges_motion": "", "note": ""})
    return row


def too_few_row(n_fixes: int) -> dict:
    """:func:`residency_animal`'s row for an animal with ``n_fixes`` < ``MIN_FIXES`` located fixes."""
    row = _undetermined(n_fixes)
    row["note"] = row["pattern_reason"] = f"only {n_fixes} observed fixes; residency needs at least {MIN_FIXES}"
    return row


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
        ``pattern`` (sedentary, resident, disperser, migrant,
        mixed_migrant, nomad or undetermined), ``pattern_reason`` (one
        sentence: why), ``n_fixes``, ``aic_<model>`` for each model,
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
    if len(obs) < MIN_FIXES:
        return too_few_row(len(obs)), {}
    row = _undetermined(len(obs))
    t, y = nsd_series(obs)
    if t[-1] <= 0:
        row["note"] = row["pattern_reason"] = "all fixes share one time; residency needs a track through time"
        return row, {}
    notes = []
    fit_idx = _even_index(len(t), MAX_FIT_POINTS)
    if len(fit_idx) < len(t):
        notes.append(f"fitted to {len(fit_idx)} of {len(t)} fixes evenly spaced in time")
    tf, yf = t[fit_idx], y[fit_idx]
    if float(np.max(yf)) == 0.0:
        row.update(pattern="sedentary", params=json.dumps({"nsd_km2": 0.0}),
                   note="every fix at the first fix's position", pattern_reason="every fix at the first fix's position")
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
        row["pattern_reason"] = "no NSD curve converged"
        return row, {}
    xf = obs["x_m"].to_numpy(float)[fit_idx]
    yf_m = obs["y_m"].to_numpy(float)[fit_idx]
    chosen, reason, choice_notes, row["delta_aic"] = choose_pattern(aics, fits, tf, xf, yf_m)
    notes += choice_notes
    row.update(pattern=chosen, pattern_reason=reason)
    if chosen in TWO_RANGE and cfg is not None:
        row["ranges_resident"], row["ranges_motion"] = parts_motion(chosen, fits[chosen], tf, obs.iloc[fit_idx], cfg)
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
    notes: list[str] = []
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
    d, theta1, phi1, theta2, phi2 = (float(v) for v in p[:5])
    out = {"asymptote_km2": d, "distance_km": math.sqrt(d),
           "departure_time": _iso(t0, theta1), "departure_scale_days": phi1,
           "return_time": _iso(t0, theta2), "return_scale_days": phi2}
    if model == "mixed_migrant":
        out["final_nsd_km2"] = d - float(p[5])
        out["return_share"] = float(p[5]) / d if d > 0 else math.nan
    return out, notes


# --- the deployment ----------------------------------------------------------------

RANDOM_WALK_NULLS = ("ctcrw", UNBOUNDED_WALK_NULL)  # the unbounded null consulted, first present wins


def finalise_residency(residency: pd.DataFrame, null_tests: pd.DataFrame | None = None,
                       motion: pd.DataFrame | None = None, ranges: pd.DataFrame | None = None) -> pd.DataFrame:
    """Overrule two-range classes a random walk explains; add the range-study candidates.

    A disperser, migrant or mixed migrant becomes ``nomad`` when the
    unbounded random-walk null (``ctcrw`` if run, else ``crw``) finds the
    net displacement ``consistent`` with it and the best motion model is
    not range-resident, unless ``ranges_resident`` (from :func:`parts_motion`)
    says some range of the two-range fit, fitted alone, has a range-resident
    best model: such a track gives no evidence of settling anywhere.  All are
    needed: a true disperser's displacement is often within a random walk's
    reach and its whole track has no single stationary range (its best model
    is brownian or ctcrw), so the verdict and the whole-track model alone
    would overrule true dispersers and migrants (measured: 8 of 8 simulated
    dispersers; tests/test_residency_pipeline.py).  Without motion models
    nothing is overruled; the NSD fit's own guard, :func:`ranges_apart`,
    already asks every range to be settled.

    An animal is a candidate for a home-range study when (1) its pattern is
    resident or sedentary, (2) its verdict under that null is not
    ``farther``, (3) where motion models were fitted, the best one is
    range-resident, and (4) where ranges were estimated, its effective sample
    size for area is at least ``MIN_N_EFFECTIVE``.  ``range_study_note``
    names every condition that failed.

    Parameters
    ----------
    residency : pandas.DataFrame
        One row per animal from :func:`residency_animal` with ``animal_id``.
    null_tests : pandas.DataFrame or None
        The null-model table (``animal_id, null_model, verdict``), if run.
    motion : pandas.DataFrame or None
        motion_models.csv (``animal_id, model, best``), if fitted.
    ranges : pandas.DataFrame or None
        ranges.csv (``animal_id, n_effective``), if estimated.

    Returns
    -------
    pandas.DataFrame
        A copy with ``pattern``/``pattern_reason`` possibly overruled and
        ``range_study_candidate`` (bool), ``range_study_note``.
    """
    from roamstat.motion import RANGE_RESIDENT  # the registry's one list (imported late: numba is slow to load)

    out = residency.copy()
    if "pattern_reason" not in out.columns:
        out["pattern_reason"] = ""
    if out.empty:
        out["range_study_candidate"] = pd.Series(dtype=bool)
        out["range_study_note"] = pd.Series(dtype=str)
        return out
    ids = out["animal_id"].astype(str)
    verdicts, null_name = _random_walk_verdicts(null_tests)
    best = _best_motion(motion)
    n_eff = _n_effective(ranges)
    explained = ids.map(verdicts).eq("consistent") & out["pattern"].isin(TWO_RANGE)
    explained &= ids.map(best or {}).notna() & ~ids.map(best or {}).isin(sorted(RANGE_RESIDENT))
    if "ranges_resident" in out.columns:  # a true disperser's ranges, fitted alone, are range-resident
        explained &= ~out["ranges_resident"].eq(True).to_numpy()
    for i in np.flatnonzero(explained.to_numpy()).tolist():
        old = out["pattern"].iat[i]
        out.iat[i, out.columns.get_loc("pattern")] = "nomad"
        out.iat[i, out.columns.get_loc("pattern_reason")] = (
            f"nomad: the NSD curve suggested {old}, but the net displacement is consistent with the {null_name} "
            f"random-walk null and the best motion model ({best[ids.iat[i]]}) has no home range"
            + (f", nor does any of its ranges fitted alone ({out['ranges_motion'].iat[i]})"
               if "ranges_motion" in out.columns and out["ranges_motion"].iat[i] else ""))
    failed: list[list[str]] = [[] for _ in range(len(out))]
    for i, (animal, pattern) in enumerate(zip(ids, out["pattern"].astype(str))):
        if pattern not in ("resident", "sedentary"):
            failed[i].append(f"pattern is {pattern}, not resident or sedentary")
        if verdicts.get(animal) == "farther":
            failed[i].append(f"farther than the {null_name} null")
        if best is not None and best.get(animal) not in RANGE_RESIDENT:
            failed[i].append(f"best motion model {best.get(animal) or 'missing'} is not range-resident")
        elif n_eff is not None and not n_eff.get(animal, 0.0) >= MIN_N_EFFECTIVE:  # (no area without a range model)
            failed[i].append(f"effective sample size {n_eff.get(animal, math.nan):.1f} below {MIN_N_EFFECTIVE:g}")
    out["range_study_candidate"] = [not f for f in failed]
    out["range_study_note"] = ["; ".join(f) for f in failed]
    return out


def _random_walk_verdicts(null_tests):
    """({animal_id: verdict} under the first unbounded null present, its name)."""
    if null_tests is None or not len(null_tests) or not {"animal_id", "null_model", "verdict"} <= set(null_tests.columns):
        return {}, ""
    names = null_tests["null_model"].astype(str)
    for name in RANDOM_WALK_NULLS:
        rows = null_tests[names == name]
        if len(rows):
            return dict(zip(rows["animal_id"].astype(str), rows["verdict"].astype(str))), name
    return {}, ""


def _best_motion(motion):
    """{animal_id: best motion model}, or None when no motion table was made."""
    if motion is None or not {"animal_id", "model", "best"} <= set(motion.columns):
        return None
    rows = motion[motion["best"].fillna(False).astype(bool)]
    return dict(zip(rows["animal_id"].astype(str), rows["model"].astype(str)))


def _n_effective(ranges):
    """{animal_id: n_effective}, or None when no range table with it was made."""
    if ranges is None or not {"animal_id", "n_effective"} <= set(ranges.columns):
        return None
    known = ranges.dropna(subset=["n_effective"])
    return dict(zip(known["animal_id"].astype(str), known["n_effective"].astype(float)))
