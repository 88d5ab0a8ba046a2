"""Independent reference for the motion tests: covariance functions and a dense generator.

Written from the published covariance functions of each process, not from the state-space
code in roamstat.motion, so that agreement between the two is a real check:
- Brownian motion: Cov(x(s), x(t)) = 2 D min(s, t) from x(0) (textbook; e.g. Karlin &
  Taylor 1975, A First Course in Stochastic Processes, ch. 7).
- OU position: sigma^2 exp(-|t - s|/tau) (Uhlenbeck & Ornstein 1930).
- Integrated OU velocity from x(0) with stationary velocity variance s2:
  s2 tau [s + t - |t - s| - tau (1 - e^{-s/tau} - e^{-t/tau} + e^{-|t-s|/tau})]
  (double integral of s2 exp(-|u - u'|/tau); Johnson et al. 2008, eq. for Var of position).
- OU position with OU velocity: sigma^2 (tau_p e^{-|d|/tau_p} - tau_v e^{-|d|/tau_v})/(tau_p - tau_v)
  (Fleming et al. 2014, Am. Nat. 183, E154, the OUF autocorrelation).
"""
from __future__ import annotations

import numpy as np

UNBOUNDED = ("brownian", "ctcrw")


def position_cov(name: str, p: dict, t) -> np.ndarray:
    """Per-axis covariance of true positions at times t (relative to x(t[0]) if unbounded)."""
    t = np.asarray(t, float)
    s_, t_ = np.meshgrid(t - t[0], t - t[0], indexing="ij")
    d = np.abs(s_ - t_)
    if name == "brownian":
        return 2.0 * p["diffusion_m2_s"] * np.minimum(s_, t_)
    if name == "ctcrw":
        tau = p["tau_velocity_s"]
        s2 = p["diffusion_m2_s"] / tau
        return s2 * tau * (s_ + t_ - d - tau * (1 - np.exp(-s_ / tau) - np.exp(-t_ / tau) + np.exp(-d / tau)))
    if name == "ou":
        return p["sigma_m"] ** 2 * np.exp(-d / p["tau_position_s"])
    if name == "ou_ctcrw":
        tp, tv = p["tau_position_s"], p["tau_velocity_s"]
        return p["sigma_m"] ** 2 * (tp * np.exp(-d / tp) - tv * np.exp(-d / tv)) / (tp - tv)
    raise ValueError(name)


def params(name: str, **values) -> dict:
    """A full parameter dict (NaN where absent) as MotionFit carries it."""
    p = dict.fromkeys(("diffusion_m2_s", "sigma_m", "tau_position_s", "tau_velocity_s", "error_sd_m"), np.nan)
    p.update(values)
    if name in ("ou", "ou_ctcrw"):
        p["diffusion_m2_s"] = p["sigma_m"] ** 2 / p["tau_position_s"]
    return p


def draw(name: str, p: dict, t, rng: np.random.Generator, n_reps: int = 1, error_sd=0.0,
         centre=(0.0, 0.0)) -> np.ndarray:
    """Dense-Cholesky draws (n_reps, n, 2): true positions (+ centre) plus Gaussian error."""
    t = np.asarray(t, float)
    C = position_cov(name, p, t)
    if name in UNBOUNDED:  # x(t0) = 0 exactly: draw the rest
        L = np.linalg.cholesky(C[1:, 1:] + 1e-9 * np.eye(t.size - 1))
        true = np.zeros((n_reps, t.size, 2))
        true[:, 1:] = np.einsum("ij,rjk->rik", L, rng.standard_normal((n_reps, t.size - 1, 2)))
    else:
        L = np.linalg.cholesky(C + 1e-9 * np.eye(t.size))
        true = np.einsum("ij,rjk->rik", L, rng.standard_normal((n_reps, t.size, 2))) + np.asarray(centre)
    sd = np.broadcast_to(np.asarray(error_sd, float), t.shape)
    return true + rng.standard_normal(true.shape) * sd[None, :, None]


def ou_track(t, sigma, tau, rng, centre=(0.0, 0.0)) -> np.ndarray:
    """OU positions (n, 2) at times t by the exact AR(1) transition density
    x_i | x_{i-1} ~ N(mu + a (x_{i-1} - mu), sigma^2 (1 - a^2)), a = exp(-dt/tau)
    (Uhlenbeck & Ornstein 1930), started from the stationary law."""
    t = np.asarray(t, float)
    a = np.exp(-np.diff(t) / tau)
    z = rng.standard_normal((t.size, 2))
    x = np.empty((t.size, 2))
    x[0] = sigma * z[0]
    for i in range(1, t.size):
        x[i] = a[i - 1] * x[i - 1] + sigma * np.sqrt(1.0 - a[i - 1] ** 2) * z[i]
    return x + np.asarray(centre)


def ctcrw_track(n, mean_dt, diffusion, tau, rng, h=20.0) -> tuple[np.ndarray, np.ndarray]:
    """Integrated-OU positions by a different route from the filter: the velocity is an AR(1)
    on a fine grid of step h (scipy.signal.lfilter), integrated by the trapezoid rule
    (discretisation error of order (h/tau)^2); fixes at exponential gaps rounded to the grid.
    Returns (t, positions (n, 2)) with x(t0) = 0."""
    from scipy.signal import lfilter

    gaps = np.round(rng.exponential(mean_dt, n - 1) / h).astype(int)
    k = np.concatenate([[0], np.cumsum(gaps)])
    a = np.exp(-h / tau)
    z = rng.standard_normal((k[-1] + 1, 2))
    z[0] /= np.sqrt(1.0 - a * a)  # stationary start
    v = lfilter([np.sqrt(diffusion / tau * (1.0 - a * a))], [1.0, -a], z, axis=0)
    pos = np.concatenate([np.zeros((1, 2)), np.cumsum(0.5 * h * (v[1:] + v[:-1]), axis=0)])
    return k * h, pos[k]
