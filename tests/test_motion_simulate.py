"""MotionFit.simulate against the analytic covariance of each process, and the analytic curves."""
from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from motion_reference import UNBOUNDED, params, position_cov
from roamstat.motion import MOTION_MODELS, MotionFit

CASES = {
    "brownian": params("brownian", diffusion_m2_s=0.8),
    "ou": params("ou", sigma_m=300.0, tau_position_s=5000.0),
    "ctcrw": params("ctcrw", diffusion_m2_s=2.0, tau_velocity_s=900.0),
    "ou_ctcrw": params("ou_ctcrw", sigma_m=400.0, tau_position_s=8000.0, tau_velocity_s=700.0),
}
N_REPS = 6000


def make_fit(name, p, centre=(0.0, 0.0)):
    """A MotionFit carrying given parameters (only name, params, centre matter here)."""
    return MotionFit(name=name, params=p, se={}, free=(), cov_log=np.empty((0, 0)), centre_xy=centre,
                     loglik=np.nan, n_fixes=0, n_params=0, aicc=np.nan, error_source="estimated",
                     range_resident=name not in UNBOUNDED)


@pytest.mark.parametrize("name", MOTION_MODELS)
def test_simulated_covariance_matches_the_process(name):
    rng = np.random.default_rng(MOTION_MODELS.index(name))
    t = np.array([0.0, 300.0, 300.0, 2000.0, 2600.0, 9000.0, 30000.0])
    sd = np.array([0.0, 10.0, 40.0, 0.0, 25.0, 5.0, 80.0])
    centre = (500.0, -200.0)
    draws = make_fit(name, CASES[name], centre).simulate(t, N_REPS, rng, error_sd_m=sd)
    expected = position_cov(name, CASES[name], t) + np.diag(sd**2)
    for axis in range(2):
        x = draws[:, :, axis]
        # unbounded draws start at the true first position (0); resident ones around the centre
        mean = 0.0 if name in UNBOUNDED else centre[axis]
        got = (x - mean).T @ (x - mean) / N_REPS
        # SE of a second moment of zero-mean normals: sqrt((c_ii c_jj + c_ij^2) / N)
        d = np.diag(expected)
        se = np.sqrt((np.outer(d, d) + expected**2) / N_REPS) + 1e-12
        z = (got - expected) / se
        assert np.all(np.abs(z) < 4.5), np.round(z, 1)
        # the standardised last position is standard normal (KS, two-sided)
        assert stats.kstest((x[:, -1] - mean) / np.sqrt(expected[-1, -1]), "norm").pvalue > 1e-3


@pytest.mark.parametrize("name", MOTION_MODELS)
def test_semivariance_and_nsd_follow_the_covariance_function(name):
    p = CASES[name]
    lags = np.array([0.0, 1.0, 60.0, 700.0, 5000.0, 40000.0])
    C = position_cov(name, p, lags)
    # semi-variance 0.5 E[(x(lag) - x(0))^2] = 0.5 (C(l,l) + C(0,0) - 2 C(0,l))
    reference = 0.5 * (np.diag(C) + C[0, 0] - 2.0 * C[0])
    fit = make_fit(name, p)
    np.testing.assert_allclose(fit.semivariance(lags), reference, rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(fit.expected_nsd(lags), 4.0 * reference, rtol=1e-9, atol=1e-12)
    acf = fit.position_acf(lags)
    if name in UNBOUNDED:
        assert np.all(np.isnan(acf))
    else:
        np.testing.assert_allclose(acf, C[0] / C[0, 0], rtol=1e-9)


def test_critically_damped_ou_ctcrw_is_continuous():
    # tau_p = tau_v: the OUF autocorrelation tends to (1 + t/tau) e^{-t/tau} (limit of the formula)
    tau = 1000.0
    lags = np.array([10.0, 500.0, 3000.0])
    fit = make_fit("ou_ctcrw", params("ou_ctcrw", sigma_m=1.0, tau_position_s=tau, tau_velocity_s=tau))
    np.testing.assert_allclose(fit.position_acf(lags), (1 + lags / tau) * np.exp(-lags / tau), rtol=1e-9)


def test_effective_n_area_matches_the_spread_of_simulated_variances():
    # Var of the sample variance of N independent normals is 2 sigma^4 / N (textbook); an OU
    # track's per-axis sample variance, from our own AR(1) generator, should vary like N_area's.
    from roamstat.motion import effective_n_area

    rng = np.random.default_rng(5)
    sigma, tau, n_t, reps = 1.0, 100.0, 2000, 3000
    t = np.linspace(0.0, 50.0 * tau, n_t)
    a = np.exp(-np.diff(t)[0] / tau)
    x = np.empty((reps, n_t))
    x[:, 0] = rng.standard_normal(reps)
    z = rng.standard_normal((reps, n_t)) * np.sqrt(1.0 - a * a)
    for i in range(1, n_t):
        x[:, i] = a * x[:, i - 1] + z[:, i]
    spread = np.var(x.var(axis=1, ddof=0))
    n_area = effective_n_area(make_fit("ou", params("ou", sigma_m=sigma, tau_position_s=tau)), t[-1])
    assert n_area == pytest.approx(50.0, rel=1e-6)
    # a fitted mean costs a few degrees of freedom at N = 50: 20 % band both ways
    assert 0.8 < spread / (2.0 * sigma**4 / n_area) < 1.2


def test_effective_n_area_ou_ctcrw_limits():
    from roamstat.motion import effective_n_area

    # tau_v -> 0 gives the ou value T/tau_p; tau_p = tau_v: 2 int ((1 + u) e^-u)^2 tau du = 2.5 tau
    near_ou = make_fit("ou_ctcrw", params("ou_ctcrw", sigma_m=1.0, tau_position_s=100.0, tau_velocity_s=1e-4))
    assert effective_n_area(near_ou, 1e4) == pytest.approx(100.0, rel=1e-4)
    critical = make_fit("ou_ctcrw", params("ou_ctcrw", sigma_m=1.0, tau_position_s=100.0, tau_velocity_s=100.0))
    assert effective_n_area(critical, 1e4) == pytest.approx(1e4 / 250.0, rel=1e-6)
    assert np.isnan(effective_n_area(make_fit("ctcrw", CASES["ctcrw"]), 1e4))
