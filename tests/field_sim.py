"""Simulated animals under field sampling, for the calibration of the null tests.

Written with plain numpy, independently of ``roamstat.motion`` and ``roamstat.nulls``:
true movement (continuous-time correlated random walk, discrete correlated random
walk, Ornstein-Uhlenbeck home range, directed travel), then field sampling (missed
fixes and outages, exponential irregular fix times) and Gaussian location error
(fixed, or by location-quality class).

Exact transitions used (per axis, from memory of the standard Gaussian results,
also given by Johnson et al. 2008 for the integrated OU velocity):

* OU position, time scale tau, stationary SD sigma (Dunn & Gipson 1977):
  x(t+d) = c + (x - c) e^{-d/tau} + N(0, sigma^2 (1 - e^{-2d/tau})).
* Integrated OU velocity, beta = 1/tau_v, stationary velocity SD s:
  v' = v e^{-beta d} + ..., x' = x + v (1 - e^{-beta d}) / beta + ...,
  Var v' = s^2 (1 - e^{-2 beta d}), Cov(x', v') = (s^2 / beta) (1 - e^{-beta d})^2,
  Var x' = (2 s^2 / beta) [d - 2 (1 - e^{-beta d}) / beta + (1 - e^{-2 beta d}) / (2 beta)].

References
----------
Dunn, J. E. & Gipson, P. S. (1977). Analysis of radio telemetry data in studies of home
range. Biometrics 33: 85-101.
Johnson, D. S., London, J. M., Lea, M.-A. & Durban, J. W. (2008). Continuous-time
correlated random walk model for animal telemetry data. Ecology 89: 1208-1215.
Kareiva, P. M. & Shigesada, N. (1983). Oecologia 56: 234-238.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

START = pd.Timestamp("2023-03-01", tz="UTC")
HOUR = 3600.0
DAY = 86400.0


# --- true movement at given times (seconds from 0) -------------------------------------

def ctcrw_positions(t_s, tau_v_s, speed_sd_m_s, rng, drift_m_s=(0.0, 0.0)):
    """Positions (n, 2) of an integrated-OU-velocity walk, stationary velocity at t_s[0], start at 0.

    ``drift_m_s`` adds a constant mean velocity (a directed traveller).
    """
    t_s = np.asarray(t_s, dtype=float)
    beta, s2 = 1.0 / tau_v_s, speed_sd_m_s ** 2
    pos = np.zeros((t_s.size, 2))
    vel = rng.normal(0.0, speed_sd_m_s, 2)
    for k in range(1, t_s.size):
        u = beta * (t_s[k] - t_s[k - 1])
        one_e1, one_e2 = -np.expm1(-u), -np.expm1(-2 * u)
        # u - 2(1 - e^-u) + (1 - e^-2u)/2, by its series where the terms cancel
        g = u ** 3 / 3 - u ** 4 / 4 if u < 1e-3 else u - 2 * one_e1 + one_e2 / 2
        var_v, cov, var_x = s2 * one_e2, s2 / beta * one_e1 ** 2, 2 * s2 / beta ** 2 * g
        # the 2 x 2 Cholesky factor written out (stable when the gap is tiny); the two axes independent
        z_v = np.sqrt(var_v) * rng.standard_normal(2)
        z_x = cov / var_v * z_v + np.sqrt(max(var_x - cov ** 2 / var_v, 0.0)) * rng.standard_normal(2)
        pos[k] = pos[k - 1] + vel * one_e1 / beta + z_x
        vel = vel * (1 - one_e1) + z_v
    return pos + np.outer(t_s - t_s[0], drift_m_s)


def ou_positions(t_s, tau_s, sigma_m, rng):
    """Positions (n, 2) of an OU home range centred on 0, stationary at t_s[0]."""
    t_s = np.asarray(t_s, dtype=float)
    pos = np.empty((t_s.size, 2))
    pos[0] = rng.normal(0.0, sigma_m, 2)
    for k in range(1, t_s.size):
        a = np.exp(-(t_s[k] - t_s[k - 1]) / tau_s)
        pos[k] = pos[k - 1] * a + rng.normal(0.0, sigma_m * np.sqrt(1 - a * a), 2)
    return pos


def crw_positions(t_s, step_dt_s, mean_step_m, kappa, rng):
    """A discrete correlated random walk (gamma(2) steps, von Mises turns; Kareiva & Shigesada 1983)
    with one step per ``step_dt_s``, walked at constant speed within each step and read at ``t_s``."""
    t_s = np.asarray(t_s, dtype=float)
    n = int(np.ceil((t_s[-1] - t_s[0]) / step_dt_s)) + 1
    steps = rng.gamma(2.0, mean_step_m / 2.0, n)
    heading = np.cumsum(rng.vonmises(0.0, kappa, n)) + rng.uniform(-np.pi, np.pi)
    vertices = np.vstack([[0.0, 0.0], np.cumsum(np.c_[steps * np.sin(heading), steps * np.cos(heading)], axis=0)])
    u = (t_s - t_s[0]) / step_dt_s
    return np.c_[np.interp(u, np.arange(n + 1), vertices[:, 0]), np.interp(u, np.arange(n + 1), vertices[:, 1])]


# --- field sampling --------------------------------------------------------------------

def regular_times(n_fixes, dt_s=HOUR):
    return np.arange(n_fixes) * dt_s


def gappy_times(days, rng, dt_s=HOUR, p_missed=0.3, outage_days=2.0, n_outages=2):
    """Hourly schedule over ``days`` with ``p_missed`` missed fixes and two outages of two days,
    placed apart from each other and from the ends (first and last fix kept)."""
    t = np.arange(int(days * DAY / dt_s) + 1) * dt_s
    keep = rng.random(t.size) >= p_missed
    span = days / n_outages
    for k in range(n_outages):
        start = (k * span + rng.uniform(0.15, 0.85 - outage_days / span) * span) * DAY
        keep &= ~((t >= start) & (t < start + outage_days * DAY))
    keep[[0, -1]] = True
    return t[keep]


def exponential_times(days, mean_gap_s, rng):
    """Fix times with independent exponential gaps (a satellite-style irregular record)."""
    gaps = rng.exponential(mean_gap_s, int(3 * days * DAY / mean_gap_s) + 10)
    t = np.r_[0.0, np.cumsum(gaps)]
    return t[t <= days * DAY]


# --- observation ----------------------------------------------------------------------

def observe(t_s, true_xy, error_sd_m, rng, quality=None, animal_id="sim"):
    """Fixes (``time, x_m, y_m, segment``, and ``quality`` when given) and planar steps.

    ``error_sd_m``: per-axis SD of the Gaussian location error, a number or one per fix.
    Segments break where the gap exceeds five nominal intervals (the pipeline's default rule);
    steps follow the data contract with planar lengths and clockwise turns.
    """
    t_s = np.asarray(t_s, dtype=float)
    sd = np.broadcast_to(np.asarray(error_sd_m, dtype=float), t_s.shape)
    xy = true_xy + rng.standard_normal(true_xy.shape) * sd[:, None]
    xy = xy - xy[0]  # frame centred on the first fix, as the pipeline's projection
    dt = np.diff(t_s)
    nominal = float(np.median(dt)) if np.mean(np.abs(dt / HOUR - 1) < 0.1) < 0.25 else HOUR
    segment = np.r_[0, np.cumsum(dt > 5 * nominal)]
    fixes = pd.DataFrame({"animal_id": animal_id, "time": START + pd.to_timedelta(t_s, unit="s"),
                          "x_m": xy[:, 0], "y_m": xy[:, 1], "segment": segment})
    if quality is not None:
        fixes["quality"] = quality
    same = segment[1:] == segment[:-1]
    dx, dy = np.diff(xy[:, 0]), np.diff(xy[:, 1])
    heading = np.arctan2(dx, dy)
    turn = np.full(dx.size, np.nan)
    follows = same[1:] & same[:-1]
    turn[1:][follows] = np.angle(np.exp(1j * (heading[1:] - heading[:-1])))[follows]
    steps = pd.DataFrame({"animal_id": animal_id, "segment": segment[:-1], "dt_s": dt, "step_m": np.hypot(dx, dy),
                          "heading_rad": heading, "turn_rad": turn, "interp_s": 0.0})[same].reset_index(drop=True)
    return fixes, steps, nominal


# --- the calibration scenarios (tests/test_nulls_field.py, benchmarks/field_calibration.py) ---------

#: Location-quality classes of the simulated tags and their per-axis error SD (m); the generator's own
#: truth, handed to the null through --error-classes (invented for the simulation).
CLASSES = {"H": 15.0, "M": 40.0, "L": 100.0}
CLASS_SHARE = (0.4, 0.4, 0.2)
UERE_M = 5.0


def field_animal(kind: str, scenario: str, rng: np.random.Generator, scale: float = 1.0):
    """Fixes, steps and nominal interval of one simulated animal (``scale`` x the scenario's duration)."""
    quality = None
    if scenario == "a":
        t = regular_times(int(100 * scale))
        sd = np.full(t.size, 25.0)
    elif scenario == "b":
        t = gappy_times(10 * scale, rng)
        sd = np.full(t.size, 5.0)
    else:
        t = exponential_times(12 * scale, 3 * HOUR, rng)
        quality = rng.choice(list(CLASSES), t.size, p=CLASS_SHARE)
        sd = np.array([CLASSES[c] for c in quality])
    movement = {
        "crw": lambda: crw_positions(t, HOUR, 60.0, 2.0, rng),  # ~60 m hourly steps, kappa 2
        "ctcrw": lambda: ctcrw_positions(t, 2 * HOUR, 0.025, rng),  # tau_v 2 h, speed SD 2.5 cm/s per axis
        "resident": lambda: ou_positions(t, HOUR / 2, 300.0, rng),  # OU home range, tau 30 min, sigma 300 m
        # tortuous at the hour scale (tau_v 20 min), 90 m/h eastward on average
        "traveller": lambda: ctcrw_positions(t, HOUR / 3, 0.05, rng, drift_m_s=(0.025, 0.0)),
    }[kind]()
    fixes, steps, nominal = observe(t, movement, sd, rng, quality=quality)
    if quality is None:
        fixes["dop"] = sd / UERE_M
    return fixes, steps, nominal


def write_class_table(path) -> str:
    """The ``class,sd_m`` CSV of :data:`CLASSES` at ``path`` (for ``Config.error_class_table``)."""
    with open(path, "w", encoding="utf-8") as fh:
        fh.write("class,sd_m\n" + "".join(f"{k},{v}\n" for k, v in CLASSES.items()))
    return str(path)
