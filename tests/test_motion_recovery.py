"""Parameter recovery and model selection on tracks from generators written in the tests."""
from __future__ import annotations

import numpy as np
import pytest

from motion_reference import ctcrw_track, draw, ou_track, params
from roamstat.motion import LocationError, best_fit, best_unbounded, fit_motion_models

ESTIMATED = LocationError(None, "estimated")


def _check(fit, truth, keys):
    for key in keys:
        rel = fit.params[key] / truth[key] - 1.0
        # the 10 % target of issue 13 is only meaningful if the fit is precise enough for it
        assert fit.se[key] / fit.params[key] < 0.05, (key, fit.se[key])
        assert abs(rel) < 0.10, (key, fit.params[key], truth[key])
        assert abs(fit.params[key] - truth[key]) < 4.0 * fit.se[key], (key, "SE too small")


@pytest.mark.slow
def test_long_ou_track_recovers_sigma_tau_and_error():
    rng = np.random.default_rng(2013)
    truth = {"sigma_m": 400.0, "tau_position_s": 36000.0, "error_sd_m": 100.0}
    t = np.cumsum(rng.exponential(18000.0, 6000))
    xy = ou_track(t, truth["sigma_m"], truth["tau_position_s"], rng, centre=(3000.0, -2000.0))
    xy += rng.normal(0.0, truth["error_sd_m"], xy.shape)
    fits = fit_motion_models(t - t[0], xy[:, 0], xy[:, 1], ESTIMATED)
    best = best_fit(fits)
    assert best.name == "ou"
    _check(best, truth, truth)
    assert np.allclose(best.centre_xy, (3000.0, -2000.0), atol=4 * 400.0 / np.sqrt(6000 * 18000 / 36000))


@pytest.mark.slow
def test_long_ctcrw_track_recovers_diffusion_tau_and_error():
    rng = np.random.default_rng(2008)
    truth = {"diffusion_m2_s": 2.0, "tau_velocity_s": 1800.0, "error_sd_m": 30.0}
    t, xy = ctcrw_track(10000, 600.0, truth["diffusion_m2_s"], truth["tau_velocity_s"], rng)
    xy += rng.normal(0.0, truth["error_sd_m"], xy.shape)
    fits = fit_motion_models(t, xy[:, 0], xy[:, 1], ESTIMATED, models=("brownian", "ctcrw"))
    best = best_unbounded(fits)
    assert best.name == "ctcrw"
    _check(best, truth, truth)


@pytest.mark.slow
@pytest.mark.parametrize("truth", ["brownian", "ctcrw", "ou"])
def test_aicc_selects_the_generating_model(truth):
    # AIC-type selection picks a richer nested model by chance now and then, so the claim is a
    # rate: at least 6 of 10 tracks (measured rates over 20-30 tracks: brownian 25/30,
    # ou 19/20; a selector stuck on any one model fails two of the three cases).
    rng = np.random.default_rng(["brownian", "ctcrw", "ou"].index(truth))
    chosen = []
    for _ in range(10):
        t = np.cumsum(rng.exponential(1800.0, 500))
        t -= t[0]
        if truth == "brownian":
            xy = draw("brownian", params("brownian", diffusion_m2_s=1.0), t, rng, error_sd=30.0)[0]
        elif truth == "ctcrw":
            t, xy = ctcrw_track(500, 1800.0, 1.0, 3600.0, rng)
            xy += rng.normal(0.0, 30.0, xy.shape)
        else:
            xy = ou_track(t, 800.0, 86400.0 / 4, rng) + rng.normal(0.0, 30.0, (t.size, 2))
        chosen.append(best_fit(fit_motion_models(t, xy[:, 0], xy[:, 1], ESTIMATED)).name)
    assert chosen.count(truth) >= 6, chosen


def test_fits_without_standard_errors_give_the_same_estimates_and_aicc():
    # reference: the same fit with its Hessian; the OU track is drawn by the tests' own generator
    rng = np.random.default_rng(77)
    t = np.cumsum(rng.exponential(3600.0, 300))
    xy = ou_track(t, 300.0, 20000.0, rng) + rng.normal(0.0, 30.0, (300, 2))
    full = fit_motion_models(t - t[0], xy[:, 0], xy[:, 1], ESTIMATED, models=("ou", "ctcrw"))
    bare = fit_motion_models(t - t[0], xy[:, 0], xy[:, 1], ESTIMATED, models=("ou", "ctcrw"), standard_errors=False)
    for a, b in zip(full, bare):
        assert a.params == b.params and a.aicc == b.aicc
        assert np.isfinite(a.se["tau_position_s" if a.name == "ou" else "tau_velocity_s"])
        assert all(np.isnan(v) for v in b.se.values()) and np.isnan(b.cov_log).all()
