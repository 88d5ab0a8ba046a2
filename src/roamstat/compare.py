"""Displacement tests of each animal against its null walks.

For every null model in ``cfg.nulls`` the animal's observed net displacement
(first to last fix) is compared with ``cfg.replicates`` simulated walks of the
same duration: Monte Carlo p-values (Davison & Hinkley 1997, §4.2), the null's
median and central 95 % interval, and the whole net-squared-displacement curve
against the null's pointwise 95 % envelope with a global envelope test by the
extreme rank length (ERL) measure (Myllymäki et al. 2017).  :func:`finalise`
then controls the false discovery rate across the animals of a run for each
null model (Benjamini & Hochberg 1995) and gives the verdicts.

The null walk has as many steps as nominal fix intervals span the analysed
period, so gaps in the record are walked by the null too; the fix at time t is
compared with the walk after ``round((t - t_first) / nominal_dt_s)`` steps.

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

import numpy as np
import pandas as pd
from scipy import stats

from roamstat.config import NULL_MODELS
from roamstat.nulls import NullUnavailable, build_null, short_steps
from roamstat.split import simulate_replicates

MAX_CURVE_POINTS = 200  # NSD curve evaluated at most here (memory and figure size, no source)
ENVELOPE = (0.025, 0.975)  # pointwise and endpoint central 95 % interval

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
        coordinates).
    """
    t = pd.to_datetime(fixes_a["time"], utc=True)
    x = pd.to_numeric(fixes_a["x_m"], errors="coerce").to_numpy(dtype=float)
    y = pd.to_numeric(fixes_a["y_m"], errors="coerce").to_numpy(dtype=float)
    good = t.notna().to_numpy() & np.isfinite(x) & np.isfinite(y)
    n_dropped = int(np.count_nonzero(~good))
    if not good.any():
        return {"n_steps": 0, "idx": np.empty(0, np.int64), "t_s": np.empty(0), "nsd_m2": np.empty(0),
                "net_m": math.nan, "n_dropped": n_dropped}
    t = t[good]
    t_s = ((t - t.min()) / pd.Timedelta(seconds=1)).to_numpy(dtype=float)
    order = np.argsort(t_s, kind="stable")
    t_s, x, y = t_s[order], x[good][order], y[good][order]
    nsd = (x - x[0]) ** 2 + (y - y[0]) ** 2
    step = np.rint(t_s / nominal_dt_s).astype(np.int64)
    # the last fix at each step index (so the last index is the last fix)
    keep = np.flatnonzero(np.r_[step[1:] != step[:-1], True])
    if keep.size > max_points:
        keep = keep[np.unique(np.rint(np.linspace(0, keep.size - 1, max_points)).astype(np.int64))]
    return {"n_steps": int(step[-1]), "idx": step[keep], "t_s": t_s[keep], "nsd_m2": nsd[keep],
            "net_m": float(math.sqrt(nsd[-1])), "n_dropped": n_dropped}


def test_animal(fixes_a: pd.DataFrame, steps_a: pd.DataFrame, fits, nominal_dt_s: float, cfg,
                rng: np.random.Generator) -> tuple[pd.DataFrame, dict]:
    """Test one animal's net displacement and NSD curve against each null in ``cfg.nulls``.

    Parameters
    ----------
    fixes_a : DataFrame
        The animal's analysed fixes (``time``, ``x_m``, ``y_m``; metres in its own frame).
    steps_a : DataFrame
        Its steps (``step_m``); tracks with fewer than ``cfg.min_steps_test``
        finite steps are "insufficient".
    fits : AnimalFits-like
        ``best_step``, ``best_turn``, ``tail``, ``step_values``, ``turn_values``, ``note``.
    nominal_dt_s : float
        Nominal fix interval (s): one null step per interval.
    cfg : Config
        Uses ``nulls``, ``replicates``, ``min_steps_test``, ``min_step``.
    rng : numpy.random.Generator
        The animal's generator; each null gets a child generator spawned in the
        fixed order of the registry (``config.NULL_MODELS``), so a null's draws do not depend on
        which other nulls run.

    Returns
    -------
    rows : DataFrame
        One row per null (columns ``ROW_COLUMNS``); ``finalise`` adds ``q_value`` and ``verdict``.
    curves : dict
        Null name -> ``step``, ``t_s``, ``observed_m2``, ``lo_m2``, ``hi_m2``, ``mean_m2``
        (equal-length arrays; pointwise 2.5 % / 97.5 % envelope and mean) for nulls that ran.
    """
    children = dict(zip(NULL_MODELS, rng.spawn(len(NULL_MODELS))))
    obs, problem = _observed(fixes_a, steps_a, nominal_dt_s, cfg)
    short = short_steps(_column(steps_a, "step_m"), np.size(_values(fits, "step_values")), cfg.min_step)
    rows, curves = [], {}
    for name in cfg.nulls:
        row = {c: math.nan for c in ROW_COLUMNS}
        row.update(null_model=name, n_steps=obs.get("n_steps", 0), observed_net_m=obs.get("net_m", math.nan),
                   note=obs.get("note", ""))
        null, why = None, problem
        if not why:
            try:
                null = build_null(name, fits, short)
            except NullUnavailable as exc:
                why = str(exc)
        if why:
            row["note"] = _join(why, row["note"])
        else:
            row_stats, curves[name] = _one_null(null, obs, int(cfg.replicates), children[name],
                                                getattr(cfg, "workers", 1))
            row.update(row_stats)
        rows.append(row)
    return pd.DataFrame(rows, columns=ROW_COLUMNS), curves


test_animal.__test__ = False  # a pipeline function, not a pytest test


def _observed(fixes_a, steps_a, nominal_dt_s, cfg) -> tuple[dict, str]:
    """The observed curve and, if the track cannot be tested, why."""
    n_obs_steps = int(np.count_nonzero(np.isfinite(_column(steps_a, "step_m"))))
    if not (isinstance(nominal_dt_s, (int, float)) and math.isfinite(nominal_dt_s) and nominal_dt_s > 0):
        return {}, "no nominal fix interval (fewer than two fixes in time)"
    if not {"time", "x_m", "y_m"} <= set(fixes_a.columns) or len(fixes_a) < 2:
        return {}, "fewer than two projected fixes"
    obs = observed_curve(fixes_a, float(nominal_dt_s))
    obs["note"] = f"{obs['n_dropped']} fixes without time or coordinates ignored" if obs["n_dropped"] else ""
    if len(fixes_a) - obs["n_dropped"] < 2:
        return obs, "fewer than two fixes with time and coordinates"
    if n_obs_steps < cfg.min_steps_test:
        return obs, f"track too short to test: {n_obs_steps} steps, fewer than the {cfg.min_steps_test} needed"
    if obs["n_steps"] < 1:
        return obs, "the fixes span less than one nominal interval"
    return obs, ""


def _one_null(null, obs: dict, replicates: int, rng: np.random.Generator, workers: int = 1) -> tuple[dict, dict]:
    idx = obs["idx"]
    nsd = simulate_replicates(null, obs["n_steps"], replicates, rng, idx, workers)
    net = np.sqrt(nsd[:, -1])
    p_farther, p_closer, p_value = monte_carlo_p(obs["net_m"], net)
    median, q025, q975 = np.quantile(net, [0.5, *ENVELOPE])
    moving = idx > 0  # at step 0 every walk is at the start
    expected = getattr(null, "expected_nsd", None)
    row = {"null_median_m": float(median), "null_q025_m": float(q025), "null_q975_m": float(q975),
           "p_farther": p_farther, "p_closer": p_closer, "p_value": p_value,
           "p_curve": erl_p_value(obs["nsd_m2"][moving], nsd[:, moving]),
           "expected_nsd_m2": float(expected(obs["n_steps"])) if expected else math.nan,
           "simulated_mean_nsd_m2": float(np.mean(nsd[:, -1]))}
    lo, hi = np.quantile(nsd, ENVELOPE, axis=0)
    curve = {"step": idx.copy(), "t_s": obs["t_s"].copy(), "observed_m2": obs["nsd_m2"].copy(),
             "lo_m2": lo, "hi_m2": hi, "mean_m2": nsd.mean(axis=0)}
    return row, curve


def _values(fits, name) -> np.ndarray:
    values = getattr(fits, name, None)
    return np.empty(0) if values is None else np.asarray(values, dtype=float).ravel()


def _column(frame, name) -> np.ndarray:
    if frame is None or name not in getattr(frame, "columns", ()):
        return np.empty(0)
    return pd.to_numeric(frame[name], errors="coerce").to_numpy(dtype=float)


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
