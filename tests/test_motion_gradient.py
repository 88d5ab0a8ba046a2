"""Every motion model's exact likelihood gradient against central differences of the filter's likelihood.

References: the prediction-error likelihood (Harvey 1989) computed by roamstat.motion.likelihood, and
Richardson-extrapolated central differences of it (common practice, no source); tracks simulated here
with numpy, with irregular intervals, repeated times and short gaps.
"""

from __future__ import annotations

import functools

import numpy as np
import pytest

from roamstat.motion.fit import _with_gradient, natural_params
from roamstat.motion.gradient import loglik_gradient
from roamstat.motion.kalman import MOTION_MODELS, MOVEMENT_PARAMS
from roamstat.motion.likelihood import conditional_loglik, prepare_track

PARAMS = {"sigma_m": 1800.0, "tau_position_s": 50_000.0, "tau_velocity_s": 4000.0,
          "diffusion_m2_s": 30.0, "error_sd_m": 30.0}
# tau_v: well below tau_p, equal to it (the critically damped limit), just below it, and below the
# shortest interval (the ctcrw variances' series branch)
TAU_V = [4000.0, 50_000.0, 49_999.0, 30.0]


def _track(error, seed=3, n=400):
    rng = np.random.default_rng(seed)
    t = np.cumsum(rng.choice([3600.0, 7200.0, 3600.0, 10800.0, 0.0, 60.0], n))
    t -= t[0]
    x = np.cumsum(rng.normal(0.0, 300.0, n)) * 0.2 + rng.normal(0.0, 2000.0, n)
    y = rng.normal(0.0, 2000.0, n)
    if error == "per fix":
        error = rng.uniform(5.0, 50.0, n)
    return prepare_track(t, x, y, error)


def _central(name, p, key, track, h):
    """Richardson-extrapolated central difference of the log-likelihood in ln p[key]."""
    def diff(step):
        up, down = dict(p), dict(p)
        up[key], down[key] = p[key] * np.exp(step), p[key] * np.exp(-step)
        return (conditional_loglik(name, _ordered(name, up), track)[0]
                - conditional_loglik(name, _ordered(name, down), track)[0]) / (2 * step)
    return (4.0 * diff(h / 2) - diff(h)) / 3.0


def _ordered(name, p):
    """ou_ctcrw's likelihood is symmetric in its time scales; the longer is named tau_p."""
    if name == "ou_ctcrw" and p["tau_velocity_s"] > p["tau_position_s"]:
        p["tau_position_s"], p["tau_velocity_s"] = p["tau_velocity_s"], p["tau_position_s"]
    return p


@pytest.mark.parametrize("error", [25.0, None, "per fix"], ids=["known", "estimated", "per-fix"])
@pytest.mark.parametrize("name", MOTION_MODELS)
@pytest.mark.parametrize("tau_v", TAU_V)
def test_value_and_gradient_match_the_filter(name, error, tau_v):
    p = {**PARAMS, "tau_velocity_s": tau_v}
    track = _track(error)
    estimate = track.error_var is None
    free = list(MOVEMENT_PARAMS[name]) + (["error_sd_m"] if estimate else [])
    loglik, grad = loglik_gradient(name, p, track, estimate)
    assert loglik == pytest.approx(conditional_loglik(name, p, track)[0], rel=1e-12)
    assert len(grad) == len(free)
    for key, value in zip(free, grad):
        assert value == pytest.approx(_central(name, p, key, track, 1e-3), rel=1e-6), key


def test_wrong_derivative_is_caught():
    """The check above has power: a gradient off by 1e-4 of its size fails it."""
    track = _track(25.0)
    _, grad = loglik_gradient("ou_ctcrw", PARAMS, track, False)
    central = _central("ou_ctcrw", PARAMS, "tau_velocity_s", track, 1e-3)
    assert grad[2] * (1 + 1e-4) != pytest.approx(central, rel=1e-6)


@pytest.mark.parametrize("tau_v", [6000.0, 80_000.0], ids=["in order", "swapped"])
def test_fit_objective_gradient_follows_the_time_scale_swap(tau_v):
    """ou_ctcrw's fit names the longer time scale tau_p (natural_params); where its log parameters
    have tau_v > tau_p, each must still get its own derivative (central differences in theta)."""
    track = _track(None)
    free = MOVEMENT_PARAMS["ou_ctcrw"] + ("error_sd_m",)
    theta = np.log([PARAMS[key] for key in free])
    theta[2] = np.log(tau_v)
    objective = _with_gradient("ou_ctcrw", functools.partial(natural_params, "ou_ctcrw", free), [track], True)
    value, grad = objective(theta)
    assert value == pytest.approx(-conditional_loglik("ou_ctcrw", natural_params("ou_ctcrw", free, theta), track)[0])
    h = 1e-4
    for i in range(theta.size):
        step = np.zeros(theta.size)
        step[i] = h
        central = (objective(theta + step)[0] - objective(theta - step)[0]) / (2 * h)
        assert grad[i] == pytest.approx(central, rel=1e-6), free[i]
