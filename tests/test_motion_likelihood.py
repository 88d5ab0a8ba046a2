"""Kalman-filter likelihood against the dense multivariate-normal density (scipy.stats)."""
from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import multivariate_normal

from motion_reference import UNBOUNDED, draw, params, position_cov
from roamstat.motion import MOTION_MODELS
from roamstat.motion.likelihood import conditional_loglik, prepare_track

CASES = {
    "brownian": params("brownian", diffusion_m2_s=0.8),
    "ou": params("ou", sigma_m=300.0, tau_position_s=5000.0),
    "ctcrw": params("ctcrw", diffusion_m2_s=2.0, tau_velocity_s=900.0),
    "ou_ctcrw": params("ou_ctcrw", sigma_m=400.0, tau_position_s=8000.0, tau_velocity_s=700.0),
}


def _times(rng):
    """Irregular times with a long gap, a tiny interval and two fixes at the same time."""
    t = np.cumsum(rng.exponential(1200.0, 12))
    t[6:] += 20000.0
    t[3] = t[2]
    t[8] = t[7] + 0.5
    return t - t[0]


def _dense_conditional(name, p, t, xy, sd, mean):
    """log p(fixes 2..n | fix 1) from dense covariance matrices (reference computation)."""
    C = position_cov(name, p, t)
    R = np.diag(sd**2)
    total = 0.0
    for axis in range(2):
        y = xy[:, axis]
        if name in UNBOUNDED:
            # diffuse start: the increments from the first fix are Gaussian with
            # Cov(w_i + e_i - e_1, w_j + e_j - e_1)
            S = C[1:, 1:] + R[1:, 1:] + sd[0] ** 2
            total += multivariate_normal(np.zeros(t.size - 1), S).logpdf(y[1:] - y[0])
        else:
            full = multivariate_normal(np.full(t.size, mean[axis]), C + R).logpdf(y)
            first = multivariate_normal(mean[axis], C[0, 0] + R[0, 0]).logpdf(y[0])
            total += full - first
    return total


@pytest.mark.parametrize("with_error", [False, True])
@pytest.mark.parametrize("name", list(CASES))
def test_kalman_likelihood_equals_dense_mvn(name, with_error):
    rng = np.random.default_rng([MOTION_MODELS.index(name), with_error])
    p = CASES[name]
    t = _times(rng)
    if not with_error:  # exact positions at (almost) one time make the covariance singular
        t[3] += 300.0
        t[8:] += 300.0
    sd = rng.uniform(5.0, 60.0, t.size) if with_error else np.zeros(t.size)
    mean = np.array([150.0, -80.0])
    xy = draw(name, p, t, rng, error_sd=sd, centre=mean)[0] + 1000.0
    mean = mean + 1000.0
    track = prepare_track(t, xy[:, 0], xy[:, 1], sd)
    got, _ = conditional_loglik(name, p, track, mean_xy=None if name in UNBOUNDED else mean)
    assert got == pytest.approx(_dense_conditional(name, p, t, xy, sd, mean), rel=1e-8, abs=1e-7)


@pytest.mark.parametrize("name", ["ou", "ou_ctcrw"])
def test_profiled_mean_maximises_the_likelihood(name):
    rng = np.random.default_rng(7)
    p = CASES[name]
    t = _times(rng)
    sd = np.full(t.size, 20.0)
    xy = draw(name, p, t, rng, error_sd=sd, centre=(40.0, 10.0))[0]
    track = prepare_track(t, xy[:, 0], xy[:, 1], sd)
    best, mean = conditional_loglik(name, p, track)
    # reference: dense likelihood at the profiled mean, and lower a step away from it
    assert best == pytest.approx(_dense_conditional(name, p, t, xy, sd, mean), rel=1e-8)
    for shift in ([5.0, 0.0], [0.0, -5.0]):
        assert _dense_conditional(name, p, t, xy, sd, mean + shift) < best
