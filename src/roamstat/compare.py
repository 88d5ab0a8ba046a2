"""Displacement tests of each animal against its null walks.

For every null model in ``cfg.nulls`` the animal's observed net displacement
(first to last fix) is compared with ``cfg.replicates`` simulated walks of the
same duration: Monte Carlo p-values (Davison & Hinkley 1997, §4.2), the null's
median and central 95 % interval, and the whole net-squared-displacement curve
against the null's pointwise 95 % envelope with a global envelope test by the
extreme rank length (ERL) measure (Myllymäki et al. 2017).  :func:`finalise`
then controls the false discovery rate across the animals of a run for each
null model (Benjamini & Hochberg 1995) and gives the verdicts.

A step-based null (crw, shuffle, levy) walks one step per nominal fix interval
over the whole analysed period, so each gap of k missed fixes is walked as k
steps; the fix at time t is compared with the walk after
``round((t - t_first) / nominal_dt_s)`` steps.  The step and turn models it
draws from are fitted on one-interval steps only (``models/fit.py``), so no
gap is counted twice.  With ``--resample`` the interval is the grid's.  These
nulls need fixes on the schedule (``MIN_ON_SCHEDULE``); on irregular fix times
they are not run and the note says so.

The continuous-time null (``ctcrw``, :mod:`roamstat.nulls.ctcrw`) simulates
the animal's fitted unbounded motion model at the observed fix times
themselves, with the fixes' own location error; its curve points are fixes,
not step indices, and its ``n_steps`` is the number of observed intervals.

References
----------
Benjamini, Y. & Hochberg, Y. (1995). Controlling the false discovery rate: a
practical and powerful approach to multiple testing. JRSS B 57: 289-300.
Davison, A. C. & Hinkley, D. V. (1997). Bootstrap Methods and their
Application. Cambridge University Press.
Myllymäki, M., Mrkvička, T., Grabarnik, P., Seijo, H. & Hahn, U. (2017).
Global envelope tests for spatial processes. JRSS B 79: 381-404.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import partial
from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

from roamstat.config import NULL_MODELS
from roamstat import rows as views
from roamstat.models.fit import FIT_INTERVAL_TOLERANCE, on_interval
from roamstat.nulls import NullUnavailable, build_null, short_steps
from roamstat.split import simulate_replicates
from roamstat.registry import NULLS
from roamstat.track import NAT_NS, as_ns, duration_s

MAX_CURVE_POINTS = 200  # NSD curve evaluated at most here (memory and figure size, no source)
ENVELOPE = (0.025, 0.975)  # pointwise and endpoint central 95 % interval
#: Share of fixes within FIT_INTERVAL_TOLERANCE of the nominal schedule that a step-based null needs (missed
#: fixes keep the schedule, irregular fix times do not; judgement, checked by tests/test_nulls_field.py).
MIN_ON_SCHEDULE = 0.8
# Notes of a track the nulls cannot test (also written by roamstat.too_short, which must match them).
NO_NOMINAL = "no nominal fix interval (fewer than two fixes in time)"
FEW_PROJECTED = "fewer than two projected fixes"
FEW_LOCATED = "fewer than two fixes with time and coordinates"


def dropped_note(n_dropped: int) -> str:
    """The note on fixes the observed curve left out."""
    return f"{n_dropped} fixes without time or coordinates ignored" if n_dropped else ""


def too_short_note(n_steps: int, min_steps: int, between_fixes: bool = False) -> str:
    """Why a track with ``n_steps`` steps is not tested (``between_fixes``: counted between observed fixes)."""
    counted = "steps between observed fixes" if between_fixes else "steps"
    return f"track too short to test: {n_steps} {counted}, fewer than the {min_steps} needed"

ROW_COLUMNS = ["null_model", "n_steps", "observed_net_m", "null_median_m", "null_q025_m", "null_q975_m",
               "p_farther", "p_closer", "p_value", "p_curve", "expected_nsd_m2", "simulated_mean_nsd_m2", "note"]
TABLE_COLUMNS = ["animal_id", "null_model", "n_steps", "observed_net_m", "null_median_m", "null_q025_m",
                 "null_q975_m", "p_farther", "p_closer", "p_value", "p_curve", "q_value", "verdict",
                 "expected_nsd_m2", "simulated_mean_nsd_m2", "note"]
VERDICTS = ("farther", "closer", "consistent", "insufficient")


# --- statistics ----------------------------------------------------------------

def monte_carlo_p(observed: float, simulated) -> tuple[float, float, float]:
    """One- and two-sided Monte Carlo p-values of an observed statistic.

    ``p_farther = (1 + #{sim >= obs}) / (M + 1)``, ``p_closer`` likewise with
    ``<=``, and ``p_value = min(1, 2 min(p_farther, p_closer))``.

    Parameters
    ----------
    observed : float
        The observed statistic (net displacement, m).
    simulated : array of M floats
        The statistic in M simulated null walks.

    Returns
    -------
    (p_farther, p_closer, p_value)

    References
    ----------
    Davison, A. C. & Hinkley, D. V. (1997). Bootstrap Methods and their
    Application, §4.2. Cambridge University Press.
    """
    sim = np.asarray(simulated, dtype=float)
    m = sim.size
    p_farther = (1.0 + np.count_nonzero(sim >= observed)) / (m + 1.0)
    p_closer = (1.0 + np.count_nonzero(sim <= observed)) / (m + 1.0)
    return float(p_farther), float(p_closer), float(min(1.0, 2.0 * min(p_farther, p_closer)))


def erl_p_value(observed, simulated) -> float:
    """Two-sided global envelope test of a curve by the extreme rank length (ERL).

    With the observed curve T_1 and simulated curves T_2..T_s at d points, the
    pointwise rank of curve i at point k is ``min(R_up, R_down)``, where
    ``R_up = #{j: T_j(k) <= T_i(k)}`` and ``R_down = #{j: T_j(k) >= T_i(k)}``
    (ties take the less extreme rank).  Each curve's ranks sorted increasingly
    form a vector; curves are ordered lexicographically by it (smaller is more
    extreme), which refines the ordering by the extreme rank alone (its first
    element).  The p-value is the share of the s curves whose vector is
    lexicographically at most the observed one (equal vectors count).

    Parameters
    ----------
    observed : array, shape (d,)
        The observed curve.
    simulated : array, shape (M, d)
        Curves of M simulated walks at the same points.

    Returns
    -------
    float
        p-value in [1/(M+1), 1].

    References
    ----------
    Myllymäki, M., Mrkvička, T., Grabarnik, P., Seijo, H. & Hahn, U. (2017).
    Global envelope tests for spatial processes. JRSS B 79: 381-404
    (the extreme rank length measure).
    """
    curves = np.vstack([np.asarray(observed, dtype=float)[None, :], np.asarray(simulated, dtype=float)])
    up = stats.rankdata(curves, method="max", axis=0)
    down = stats.rankdata(-curves, method="max", axis=0)
    ranks = np.sort(np.minimum(up, down), axis=1)
    diff = ranks - ranks[0]
    differs = diff != 0
    first = np.argmax(differs, axis=1)
    sign = diff[np.arange(diff.shape[0]), first]
    as_extreme = ~differs.any(axis=1) | (sign < 0)
    return float(np.count_nonzero(as_extreme) / curves.shape[0])


def bh_qvalues(p) -> np.ndarray:
    """Benjamini–Hochberg adjusted p-values (q-values); NaN entries stay NaN and are not counted.

    Parameters
    ----------
    p : array of float
        p-values.

    Returns
    -------
    ndarray
        ``q_(i) = min_{j >= i} min(1, m p_(j) / j)`` in the input order.

    References
    ----------
    Benjamini, Y. & Hochberg, Y. (1995). JRSS B 57: 289-300.
    """
    p = np.asarray(p, dtype=float)
    q = np.full(p.shape, np.nan)
    ok = np.flatnonzero(np.isfinite(p))
    if ok.size:
        order = ok[np.argsort(p[ok], kind="stable")]
        scaled = p[order] * ok.size / np.arange(1, ok.size + 1)
        q[order] = np.minimum(1.0, np.minimum.accumulate(scaled[::-1])[::-1])
    return q


# --- one animal ------------------------------------------------------------------

@dataclass(frozen=True)
class NullCurve:
    """The observed NSD curve of one animal against one null's simulations.

    Attributes
    ----------
    t_s : ndarray
        Seconds since the first fix of each curve point.
    step : ndarray or None
        Nominal step index of each point (discrete nulls); None for the
        continuous-time null, which lives at the fixes' own times.
    observed_m2, lo_m2, hi_m2, mean_m2 : ndarray
        Observed NSD, the pointwise 2.5 % / 97.5 % envelope and mean of the
        simulated NSD (m^2), all of the length of ``t_s``.
    """

    t_s: np.ndarray
    step: np.ndarray | None
    observed_m2: np.ndarray
    lo_m2: np.ndarray
    hi_m2: np.ndarray
    mean_m2: np.ndarray

    def as_dict(self) -> dict:
        """Plain dict of the arrays (``step`` only where there is one)."""
        out = {"step": self.step} if self.step is not None else {}
        out.update(t_s=self.t_s, observed_m2=self.observed_m2, lo_m2=self.lo_m2, hi_m2=self.hi_m2,
                   mean_m2=self.mean_m2)
        return out


def _clean_track(fixes_a: pd.DataFrame):
    """Seconds since the first fix, x, y (sorted by time) and the number of rows without them."""
    ns = as_ns(fixes_a["time"])
    x = _column(fixes_a, "x_m")
    y = _column(fixes_a, "y_m")
    good = (ns != NAT_NS) & np.isfinite(x) & np.isfinite(y)
    if not good.any():
        return np.empty(0), np.empty(0), np.empty(0), int(np.count_nonzero(~good)), good
    ns = ns[good]
    t_s = (ns - ns.min()) / 1e9  # plain integer nanoseconds: pandas' Timedelta arithmetic costs per call
    order = np.argsort(t_s, kind="stable")
    return t_s[order], x[good][order], y[good][order], int(np.count_nonzero(~good)), good


def _thin(n: int, max_points: int) -> np.ndarray:
    """At most ``max_points`` evenly spaced positions of 0..n-1, first and last kept."""
    keep = np.arange(n)
    if n > max_points:
        keep = np.unique(np.rint(np.linspace(0, n - 1, max_points)).astype(np.int64))
    return keep


def observed_curve(fixes_a: pd.DataFrame, nominal_dt_s: float, max_points: int = MAX_CURVE_POINTS):
    """Step indices of the fixes and the observed NSD at (at most ``max_points``) of them.

    Parameters
    ----------
    fixes_a : DataFrame
        One animal's analysed fixes (``time``, ``x_m``, ``y_m``).
    nominal_dt_s : float
        The animal's nominal fix interval (s).
    max_points : int
        Most curve points kept (evenly spaced among the fixes' step indices; the last is always kept).

    Returns
    -------
    dict
        ``n_steps``, ``idx`` (step indices, increasing, from 0), ``t_s`` (seconds since the first fix),
        ``nsd_m2`` (observed NSD), ``net_m`` (first to last fix), ``n_dropped`` (fixes without time or
        coordinates), ``on_schedule`` (share of fixes within ``FIT_INTERVAL_TOLERANCE`` of a whole
        number of nominal intervals after the first).
    """
    t_s, x, y, n_dropped, _ = _clean_track(fixes_a)
    if not t_s.size:
        return {"n_steps": 0, "idx": np.empty(0, np.int64), "t_s": np.empty(0), "nsd_m2": np.empty(0),
                "net_m": math.nan, "n_dropped": n_dropped, "on_schedule": math.nan}
    nsd = (x - x[0]) ** 2 + (y - y[0]) ** 2
    intervals = t_s / nominal_dt_s
    step = np.rint(intervals).astype(np.int64)
    on_schedule = float(np.mean(np.abs(intervals - step) <= FIT_INTERVAL_TOLERANCE))
    # the last fix at each step index (so the last index is the last fix)
    keep = np.flatnonzero(np.r_[step[1:] != step[:-1], True])
    keep = keep[_thin(keep.size, max_points)]
    return {"n_steps": int(step[-1]), "idx": step[keep], "t_s": t_s[keep], "nsd_m2": nsd[keep],
            "net_m": float(math.sqrt(nsd[-1])), "n_dropped": n_dropped, "on_schedule": on_schedule}


def test_animal(fixes_a: pd.DataFrame, steps_a: pd.DataFrame, fits, nominal_dt_s: float, cfg,
                rng: np.random.Generator, motion=None) -> tuple[pd.DataFrame, dict]:
    """Test one animal's net displacement and NSD curve against each null in ``cfg.nulls``.

    Parameters
    ----------
    fixes_a : DataFrame
        The animal's fixes (``time``, ``x_m``, ``y_m``; metres in its own frame), all rows or the
        analysed track.  The discrete nulls use the ``on_grid`` rows (all rows without that column);
        the continuous-time null uses the observed rows (``interpolated`` false) and their ``dop`` /
        ``quality`` columns for the location error.
    steps_a : DataFrame
        Its steps (``step_m``, ``dt_s``, ``interp_s``); tracks with fewer than ``cfg.min_steps_test``
        finite steps are "insufficient".
    fits : AnimalFits-like
        ``best_step``, ``best_turn``, ``tail``, ``step_values``, ``turn_values``, ``note``.
    nominal_dt_s : float
        Nominal fix interval (s): one discrete null step per interval.  With ``cfg.resample`` the
        grid's interval is used instead (the steps are grid steps).
    cfg : Config
        Uses ``nulls``, ``replicates``, ``min_steps_test``, ``min_step``, ``resample``, ``uere_m``,
        ``error_class_table``.
    rng : numpy.random.Generator
        The animal's generator; each null gets a child generator spawned in the
        fixed order of the registry (``config.NULL_MODELS``), so a null's draws do not depend on
        which other nulls run.
    motion : roamstat.motion.animal.AnimalMotion, optional
        The animal's motion models, fitted on its observed fixes by the pipeline's motion stage;
        the continuous-time null reuses them instead of fitting again (same result).

    Returns
    -------
    rows : DataFrame
        One row per null (columns ``ROW_COLUMNS``); ``finalise`` adds ``q_value`` and ``verdict``.
    curves : dict
        Null name -> :class:`NullCurve` for the nulls that ran.
    """
    children = dict(zip(NULL_MODELS, rng.spawn(len(NULL_MODELS))))
    if getattr(cfg, "resample", None):
        nominal_dt_s = duration_s(cfg.resample, "--resample")
    step_m = _column(steps_a, "step_m")
    n_obs_steps = int(np.count_nonzero(np.isfinite(step_m)))
    discrete_obs = None  # the observed curve is the same for every step-based null: built once
    rows, curves = [], {}
    for name in cfg.nulls:
        walk = NULLS[name].load()
        if getattr(walk, "in_time", False):
            observed = views.observed(fixes_a)
            obs, why = _observed_in_time(observed, cfg)
            make = partial(walk, observed, cfg, motion)
        else:
            if discrete_obs is None:
                # only the columns the curve reads: copying every column costs more than the curve
                track = views.analysed(fixes_a, [c for c in ("time", "x_m", "y_m") if c in fixes_a.columns])
                discrete_obs = _observed(track, n_obs_steps, nominal_dt_s, cfg)
            obs, why = discrete_obs
            make = partial(_step_null, name, fits, steps_a, step_m, cfg.min_step)
        row: dict[str, Any] = {c: math.nan for c in ROW_COLUMNS}
        row.update(null_model=name, n_steps=obs.get("n_steps", 0), observed_net_m=obs.get("net_m", math.nan),
                   note=obs.get("note", ""))
        null = None
        if not why:
            try:
                null = make()
            except NullUnavailable as exc:
                why = str(exc)
        if why:
            row["note"] = _join(why, row["note"])
        else:
            row_stats, curves[name] = _one_null(null, obs, int(cfg.replicates), children[name],
                                                cfg.workers)
            row.update(row_stats)
            row["note"] = _join(getattr(null, "note", ""), row["note"])
        rows.append(row)
    return pd.DataFrame(rows, columns=ROW_COLUMNS), curves


def _step_null(name: str, fits, steps_a: pd.DataFrame, step_m: np.ndarray, min_step: float):
    """A step-based null; the short steps it keeps in proportion come from the fits' one-interval steps."""
    short = short_steps(step_m[on_interval(steps_a)[0]], np.size(_values(fits, "step_values")), min_step)
    return build_null(name, fits, short)


def _observed(fixes_a, n_obs_steps, nominal_dt_s, cfg) -> tuple[dict, str]:
    """The observed curve on the nominal step indices and, if a discrete null cannot test it, why."""
    if not (isinstance(nominal_dt_s, (int, float)) and math.isfinite(nominal_dt_s) and nominal_dt_s > 0):
        return {}, NO_NOMINAL
    if not {"time", "x_m", "y_m"} <= set(fixes_a.columns) or len(fixes_a) < 2:
        return {}, FEW_PROJECTED
    obs = observed_curve(fixes_a, float(nominal_dt_s))
    obs["note"] = dropped_note(obs["n_dropped"])
    if len(fixes_a) - obs["n_dropped"] < 2:
        return obs, FEW_LOCATED
    if n_obs_steps < cfg.min_steps_test:
        return obs, too_short_note(n_obs_steps, cfg.min_steps_test)
    obs["step"] = obs["idx"]
    if obs["n_steps"] < 1:
        return obs, "the fixes span less than one nominal interval"
    if obs["on_schedule"] < MIN_ON_SCHEDULE:
        return obs, (f"fix times irregular: {obs['on_schedule']:.0%} of fixes on the {nominal_dt_s:g} s schedule "
                     f"(a step-based null needs {MIN_ON_SCHEDULE:.0%}); the ctcrw null works at any fix times")
    return obs, ""


def _observed_in_time(fixes_a, cfg) -> tuple[dict, str]:
    """The observed curve at the fixes' own times and, if the continuous-time null cannot test it, why."""
    if not {"time", "x_m", "y_m"} <= set(fixes_a.columns) or len(fixes_a) < 2:
        return {}, FEW_PROJECTED
    t_s, x, y, n_dropped, _ = _clean_track(fixes_a)
    note = dropped_note(n_dropped)
    if t_s.size < cfg.min_steps_test + 1:
        n_steps = max(t_s.size - 1, 0)
        return {"n_steps": n_steps, "note": note}, too_short_note(n_steps, cfg.min_steps_test, between_fixes=True)
    if t_s[-1] <= 0:
        return {"n_steps": t_s.size - 1, "note": note}, "all fixes at one time"
    keep = _thin(t_s.size, MAX_CURVE_POINTS)
    nsd = (x - x[0]) ** 2 + (y - y[0]) ** 2
    return {"n_steps": t_s.size - 1, "idx": keep, "t_s": t_s[keep], "nsd_m2": nsd[keep],
            "net_m": float(math.sqrt(nsd[-1])), "note": note, "step": None}, ""


def _one_null(null, obs: dict, replicates: int, rng: np.random.Generator, workers: int = 1) -> tuple[dict, NullCurve]:
    idx = obs["idx"]
    nsd = simulate_replicates(null, obs["n_steps"], replicates, rng, idx, workers)
    net = np.sqrt(nsd[:, -1])
    p_farther, p_closer, p_value = monte_carlo_p(obs["net_m"], net)
    median, q025, q975 = np.quantile(net, [0.5, *ENVELOPE])
    moving = obs["t_s"] > 0  # at the first fix every walk is at the start
    expected = getattr(null, "expected_nsd", None)
    row = {"null_median_m": float(median), "null_q025_m": float(q025), "null_q975_m": float(q975),
           "p_farther": p_farther, "p_closer": p_closer, "p_value": p_value,
           "p_curve": erl_p_value(obs["nsd_m2"][moving], nsd[:, moving]),
           "expected_nsd_m2": float(expected(obs["n_steps"])) if expected else math.nan,
           "simulated_mean_nsd_m2": float(np.mean(nsd[:, -1]))}
    lo, hi = np.quantile(nsd, ENVELOPE, axis=0)
    curve = NullCurve(t_s=obs["t_s"].copy(), step=obs["step"], observed_m2=obs["nsd_m2"].copy(), lo_m2=lo,
                      hi_m2=hi, mean_m2=nsd.mean(axis=0))
    return row, curve


def _values(fits, name) -> np.ndarray:
    values = getattr(fits, name, None)
    return np.empty(0) if values is None else np.asarray(values, dtype=float).ravel()


def _column(frame, name) -> np.ndarray:
    if frame is None or name not in getattr(frame, "columns", ()):
        return np.empty(0)
    column = frame[name]
    if column.dtype.kind == "f":  # already numeric: skip the costly coercion
        return column.to_numpy(dtype=float)
    return pd.to_numeric(column, errors="coerce").to_numpy(dtype=float)


def _join(*parts: str) -> str:
    return "; ".join(p for p in parts if p)


# --- the deployment ------------------------------------------------------------------

def finalise(table: pd.DataFrame, cfg) -> pd.DataFrame:
    """Add Benjamini–Hochberg q-values (per null model, across animals) and verdicts.

    verdict is "farther" when ``q_value < cfg.alpha`` and the observed net
    displacement is above the null median, "closer" when below, "consistent"
    otherwise, and "insufficient" for rows without a p-value (the ``note``
    says why).

    Parameters
    ----------
    table : DataFrame
        ``test_animal`` rows of all animals, with ``animal_id``.
    cfg : Config
        Uses ``alpha``.

    Returns
    -------
    DataFrame
        The rows in their input order, columns ``TABLE_COLUMNS``.

    References
    ----------
    Benjamini, Y. & Hochberg, Y. (1995). JRSS B 57: 289-300.
    """
    out = pd.DataFrame(table).reset_index(drop=True).copy()
    for column in TABLE_COLUMNS:
        if column not in out:
            out[column] = "" if column in ("note", "verdict") else math.nan
    if not len(out):
        return out[TABLE_COLUMNS]
    p = pd.to_numeric(out["p_value"], errors="coerce").to_numpy(dtype=float)
    q = np.full(len(out), np.nan)
    for _, rows in out.groupby(out["null_model"].astype(str), sort=False).indices.items():
        q[rows] = bh_qvalues(p[rows])
    out["q_value"] = q
    observed = pd.to_numeric(out["observed_net_m"], errors="coerce").to_numpy(dtype=float)
    median = pd.to_numeric(out["null_median_m"], errors="coerce").to_numpy(dtype=float)
    significant = np.isfinite(q) & (q < cfg.alpha)
    verdict = np.where(~np.isfinite(q), "insufficient", "consistent").astype(object)
    verdict[significant & (observed > median)] = "farther"
    verdict[significant & (observed < median)] = "closer"
    out["verdict"] = verdict
    out["note"] = out["note"].fillna("").astype(str)
    return out[TABLE_COLUMNS]
