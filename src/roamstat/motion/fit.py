"""Maximum-likelihood fits of the motion models, standard errors and AICc selection.

Parameters are optimised on the log scale (L-BFGS-B with the likelihood's exact gradient, from the
filter's sensitivity equations: :mod:`.gradient`) from the best of a small grid of starting values
taken from the data (step-based diffusion, positional variance, median interval). Standard errors
come from the inverse of a central-difference Hessian of the negative log-likelihood in log
parameters, carried to SI units by the delta method.
Long tracks (more than ``SCREEN_ABOVE`` fixes) choose the start and run the first optimisation
on ``SCREEN_WINDOWS`` evenly spaced windows of ``SCREEN_FIXES`` fixes in all (the windows'
conditional log-likelihoods summed, each window a track of its own), then polish on the whole
track from there; the optimum and everything after it (Hessian, AICc) are the whole track's.
AICc (Hurvich & Tsai 1989) counts the 2 (n - 1) scalar observations that the conditional
likelihood scores and every free parameter, the fitted mean position included.

References
----------
Hurvich, C.M. & Tsai, C.-L. (1989) Regression and time series model selection in small samples.
Biometrika 76, 297-307.
Burnham, K.P. & Anderson, D.R. (2002) Model Selection and Multimodel Inference, 2nd ed. Springer.
"""
from __future__ import annotations

import functools
import itertools
from dataclasses import dataclass

import numpy as np
from scipy.optimize import minimize

from .errors import LocationError
from .kalman import MOTION_MODELS, MOVEMENT_PARAMS, PARAM_KEYS, RANGE_RESIDENT, check_model
from .kalman import position_acf as _acf
from .kalman import semivariance as _semivariance
from .likelihood import Track, conditional_loglik, prepare_track
from .gradient import loglik_gradient

MIN_FIXES = 10          # fewer fixes than this: no fits (too few to tell the models apart)
HESSIAN_STEP = 1e-3     # step in log parameters for the numerical Hessian
# tracks longer than this start on windows of SCREEN_FIXES fixes in all (judgement, no source:
# 20,000 fixes pin the parameters down to a few per cent, so the polish on the whole track
# needs few iterations)
SCREEN_ABOVE = 60_000
SCREEN_FIXES = 20_000
SCREEN_WINDOWS = 20
BOUND_FACTOR = 1e4      # log-parameter box: start scale / BOUND_FACTOR .. start scale * BOUND_FACTOR
UNBOUNDED = ("brownian", "ctcrw")
# A range-resident model is eligible as the best model only when the track spans at least this
# many position autocorrelation times (duration / tau_p). Without it AICc prefers ou for about
# 40 % of pure random walks of 500 fixes (measured; the unit-root problem of Dickey & Fuller
# 1979): a random walk observed once looks "bounded" on the scale of its own duration. Requiring
# a resolved range is the usual semi-variogram check (the curve must reach its asymptote well
# within the track; Fleming et al. 2014); the value 10 is our choice.
MIN_RANGE_CROSSINGS = 10.0


@dataclass(frozen=True, eq=False)
class MotionFit:
    """A fitted continuous-time motion model of one animal (see ``kalman`` for the models)."""

    name: str
    params: dict
    se: dict
    free: tuple
    cov_log: np.ndarray
    centre_xy: tuple
    loglik: float
    n_fixes: int
    n_params: int
    aicc: float
    error_source: str
    range_resident: bool
    duration_s: float = np.nan

    @property
    def range_crossings(self) -> float:
        """Duration over tau_p: how many position autocorrelation times the track spans."""
        return self.duration_s / self.params["tau_position_s"] if self.range_resident else np.nan

    def semivariance(self, lag_s) -> np.ndarray:
        """Per-axis semi-variance 0.5 E[(x(t + lag) - x(t))^2] (m^2), without location error."""
        return _semivariance(self.name, self.params, lag_s)

    def position_acf(self, lag_s) -> np.ndarray:
        """Autocorrelation of position at the lags (NaN for unbounded models)."""
        return _acf(self.name, self.params, lag_s)

    def expected_nsd(self, t_s) -> np.ndarray:
        """E|r(t) - r(0)|^2 (m^2) over both axes, from a fix at time 0, without location error."""
        return 4.0 * self.semivariance(t_s)

    def simulate(self, t_s, n_reps: int, rng: np.random.Generator, error_sd_m=None) -> np.ndarray:
        """Exact draws at the times ``t_s``, shape (n_reps, len(t_s), 2); see ``simulate.simulate``."""
        from .simulate import simulate

        return simulate(self, t_s, n_reps, rng, error_sd_m)


def _start_scales(track: Track) -> dict:
    """Data-based scales for each parameter (also the centre of its search box)."""
    dt = np.diff(track.t_s)
    d2 = np.sum(np.diff(track.xy, axis=0) ** 2, axis=1)
    moving = dt > 0
    dt_med = float(np.median(dt[moving])) if moving.any() else 1.0
    diffusion = float(np.median(d2[moving] / (4.0 * dt[moving]))) if moving.any() else 1.0
    diffusion = max(diffusion, 1e-12)
    sigma = max(float(np.sqrt(0.5 * track.xy.var(axis=0).sum())), 1e-6)
    step_sd = max(float(np.sqrt(0.5 * np.median(d2))), 1e-6)
    return {"diffusion_m2_s": diffusion, "sigma_m": sigma,
            "tau_position_s": min(max(sigma**2 / diffusion, dt_med), 10.0 * (np.ptp(track.t_s) + dt_med)),
            "tau_velocity_s": dt_med, "error_sd_m": step_sd}


# multipliers of the data scale tried as starting values
_START_GRID = {"diffusion_m2_s": (1.0,), "sigma_m": (1.0,), "tau_position_s": (1.0, 4.0),
               "tau_velocity_s": (0.1, 1.0, 10.0), "error_sd_m": (0.03, 0.3, 1.0)}


def _hessian(f, x: np.ndarray, h: float = HESSIAN_STEP) -> np.ndarray:
    """Central-difference Hessian of f at x."""
    k = x.size
    H = np.empty((k, k))
    f0 = f(x)
    E = np.eye(k) * h
    for i in range(k):
        H[i, i] = (f(x + E[i]) - 2.0 * f0 + f(x - E[i])) / h**2
        for j in range(i):
            H[i, j] = H[j, i] = (f(x + E[i] + E[j]) - f(x + E[i] - E[j])
                                 - f(x - E[i] + E[j]) + f(x - E[i] - E[j])) / (4.0 * h**2)
    return H


def _delta_se(name: str, params: dict, free: tuple, cov_log: np.ndarray) -> dict:
    """SEs in SI units: d(value) = value * d(log value); diffusion of ou/ou_ctcrw = sigma^2/tau_p."""
    se = dict.fromkeys(PARAM_KEYS, np.nan)
    for key, value in params.items():
        if not np.isfinite(value):
            continue
        if key in free:
            grad = np.zeros(len(free))
            grad[free.index(key)] = 1.0
        elif key == "diffusion_m2_s" and name in RANGE_RESIDENT:
            grad = np.zeros(len(free))
            grad[free.index("sigma_m")], grad[free.index("tau_position_s")] = 2.0, -1.0
        else:
            continue
        var = grad @ cov_log @ grad
        se[key] = float(value * np.sqrt(var)) if var >= 0 else np.nan
    return se


def aicc(loglik: float, k: int, n_obs: int) -> float:
    """AICc = -2 logL + 2k + 2k(k+1)/(n - k - 1); inf when n <= k + 1 (Hurvich & Tsai 1989)."""
    if n_obs - k - 1 <= 0:
        return np.inf
    return -2.0 * loglik + 2.0 * k + 2.0 * k * (k + 1) / (n_obs - k - 1)


def natural_params(name: str, free: tuple, theta: np.ndarray) -> dict:
    """The natural parameters of log parameters ``theta`` (in the order ``free``); for ``ou_ctcrw``,
    whose likelihood is symmetric in its two time scales, the longer one is named tau_p."""
    p = dict(zip(free, np.exp(theta)))
    if name == "ou_ctcrw" and p["tau_velocity_s"] > p["tau_position_s"]:
        p["tau_position_s"], p["tau_velocity_s"] = p["tau_velocity_s"], p["tau_position_s"]
    return p


def fit_model(name: str, track: Track, error: LocationError, standard_errors: bool = True) -> MotionFit:
    """Fit one model to a prepared track by maximum likelihood.

    With ``standard_errors=False`` the numerical Hessian is skipped (``se`` and ``cov_log`` are
    NaN), for fits whose estimates and AICc alone are used.
    """
    check_model(name)
    estimate_error = track.error_var is None
    free = MOVEMENT_PARAMS[name] + (("error_sd_m",) if estimate_error else ())
    scales = _start_scales(track)
    centre = np.log([scales[key] for key in free])
    bounds = [(c - np.log(BOUND_FACTOR), c + np.log(BOUND_FACTOR)) for c in centre]

    natural = functools.partial(natural_params, name, free)

    def objective(theta):
        value = -conditional_loglik(name, natural(theta), track)[0]
        return value if np.isfinite(value) else 1e300

    starts = [centre + np.log(mult) for mult in itertools.product(*(_START_GRID[key] for key in free))]
    windows = screening_windows(track)
    if windows:
        def screened(theta):
            p = natural(theta)
            value = -sum(conditional_loglik(name, p, w)[0] for w in windows)
            return value if np.isfinite(value) else 1e300

        first = _minimize(_with_gradient(name, natural, windows, estimate_error), min(starts, key=screened), bounds)
        result = _minimize(_with_gradient(name, natural, [track], estimate_error), first.x, bounds)
    else:
        result = _minimize(_with_gradient(name, natural, [track], estimate_error), min(starts, key=objective), bounds)
    p = natural(result.x)
    at_edge = {key for key, value, (low, high) in zip(free, result.x, bounds)
               if min(value - low, high - value) < 1e-6}
    if name == "ou_ctcrw" and p["tau_position_s"] != np.exp(result.x[free.index("tau_position_s")]):
        swap = {"tau_position_s": "tau_velocity_s", "tau_velocity_s": "tau_position_s"}
        at_edge = {swap.get(key, key) for key in at_edge}
    theta = np.log([p[key] for key in free])  # in the order of the named parameters
    loglik, mean = conditional_loglik(name, p, track)
    cov_log = np.full((len(free), len(free)), np.nan)
    if standard_errors:
        try:
            cov_log = np.linalg.inv(_hessian(objective, theta))
        except np.linalg.LinAlgError:
            pass
    params = dict.fromkeys(PARAM_KEYS, np.nan)
    params.update(p)
    if name in RANGE_RESIDENT:
        params["diffusion_m2_s"] = p["sigma_m"] ** 2 / p["tau_position_s"]
    if track.error_var is not None:  # known errors: report their typical size
        params["error_sd_m"] = float(np.median(np.sqrt(track.error_var)))
    se = _delta_se(name, params, free, cov_log)
    for key in at_edge:
        se[key] = np.nan  # on the edge of the search box: the curvature there is no SE
    resident = name in RANGE_RESIDENT
    k = len(free) + (2 if resident else 0)
    centre_xy = tuple(float(v) for v in (mean if resident else track.origin))
    return MotionFit(name=name, params={k_: float(v) for k_, v in params.items()}, se=se, free=free,
                     cov_log=cov_log, centre_xy=centre_xy, loglik=loglik, n_fixes=track.n,
                     n_params=k, aicc=aicc(loglik, k, 2 * (track.n - 1)),
                     error_source=error.source, range_resident=resident,
                     duration_s=float(track.t_s[-1] - track.t_s[0]))


def _minimize(value_and_gradient, x0, bounds):
    """L-BFGS-B on ``value_and_gradient`` (one call gives both) in the box ``bounds``."""
    return minimize(value_and_gradient, x0, method="L-BFGS-B", jac=True, bounds=bounds)


def _with_gradient(name: str, natural, tracks: list[Track], estimate_error: bool):
    """The negative log-likelihood summed over ``tracks`` with its exact gradient in the log parameters
    ``theta`` (:func:`.gradient.loglik_gradient`: one filter pass gives both)."""
    swaps = name == "ou_ctcrw"

    def value_and_gradient(theta):
        p = natural(theta)
        value, grad = 0.0, np.zeros(theta.size)
        for track in tracks:
            ll, g = loglik_gradient(name, p, track, estimate_error)
            value, grad = value - ll, grad - g
        if swaps and p["tau_position_s"] != np.exp(theta[1]):
            grad[[1, 2]] = grad[[2, 1]]  # natural() named theta's tau_v tau_p: give each its own derivative
        if not (np.isfinite(value) and np.all(np.isfinite(grad))):
            return 1e300, np.zeros(theta.size)
        return value, grad

    return value_and_gradient


def screening_windows(track: Track) -> list[Track]:
    """``SCREEN_WINDOWS`` evenly spaced windows of a long track (empty up to ``SCREEN_ABOVE`` fixes)."""
    if track.n <= SCREEN_ABOVE:
        return []
    width = SCREEN_FIXES // SCREEN_WINDOWS
    out = []
    for first in np.linspace(0, track.n - width, SCREEN_WINDOWS).astype(np.int64):
        part = slice(first, first + width)
        sd = None if track.error_var is None else np.sqrt(track.error_var[part])
        out.append(prepare_track(track.t_s[part], track.xy[part, 0], track.xy[part, 1], sd))
    return out


def fit_motion_models(t_s, x_m, y_m, error: LocationError, models=MOTION_MODELS,
                      standard_errors: bool = True) -> list[MotionFit]:
    """Fit each motion model to one animal's fixes.

    Parameters
    ----------
    t_s : array-like
        Fix times in seconds (sorted; equal times allowed).
    x_m, y_m : array-like
        Positions in the animal's planar frame (m).
    error : LocationError
        Known per-fix error SDs, or None to estimate one SD with each model.
    models : sequence of str
        Names from ``MOTION_MODELS``.
    standard_errors : bool
        False skips the Hessian (NaN ``se`` and ``cov_log``).

    Returns
    -------
    list of MotionFit
        One per model, in the order asked; empty when there are fewer than ``MIN_FIXES`` fixes.
    """
    track = prepare_track(t_s, x_m, y_m, error.sd_m)
    if track.n < MIN_FIXES:
        return []
    return [fit_model(name, track, error, standard_errors) for name in models]


def best_fit(fits) -> MotionFit | None:
    """The fit with the lowest AICc among the eligible ones (None when there is none).

    A range-resident fit is eligible only if its range is resolved: the track spans at least
    ``MIN_RANGE_CROSSINGS`` position autocorrelation times.
    """
    fits = [f for f in fits if np.isfinite(f.aicc)
            and (not f.range_resident or f.range_crossings >= MIN_RANGE_CROSSINGS)]
    return min(fits, key=lambda f: f.aicc) if fits else None


def best_unbounded(fits) -> MotionFit | None:
    """The lowest-AICc fit among the unbounded models (brownian, ctcrw): the null's candidate."""
    return best_fit([f for f in fits if f.name in UNBOUNDED])
