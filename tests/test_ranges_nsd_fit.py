"""The compiled NSD polish against scipy.optimize.least_squares (trf) and the batched curves."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import least_squares

from roamstat.ranges.nsd_fit import FAILED, curve_residuals_jac, polish
from nsd_reference import search_fun_jac
from roamstat.ranges.residency import _gap_lo, _starts_and_bounds

MODELS = ["resident", "disperser", "migrant", "mixed_migrant"]
CODES = {"resident": 0, "disperser": 1, "migrant": 2, "mixed_migrant": 3}


def _noisy_nsd(model, seed, n=300, span=200.0):
    # Simulated here with the test's own expressions of the Bunnefeld et al. (2011, J. Anim. Ecol. 80:466-476)
    # and Börger & Fryxell (2012) forms, noise 5 % of the top (invented scales, not data).
    rng = np.random.default_rng(seed)
    t = np.linspace(0.0, span, n)
    shapes = {"resident": 40.0 * (1.0 - np.exp(-t / 15.0)),
              "disperser": 1500.0 / (1.0 + np.exp(-(t - 70.0) / 3.0)),
              "migrant": 900.0 / (1.0 + np.exp(-(t - 50.0) / 2.0)) - 900.0 / (1.0 + np.exp(-(t - 140.0) / 4.0)),
              "mixed_migrant": 900.0 / (1.0 + np.exp(-(t - 50.0) / 2.0)) - 500.0 / (1.0 + np.exp(-(t - 140.0) / 4.0))}
    return t, shapes[model] + rng.normal(0.0, 0.05 * shapes[model].max(), n)


def _scipy_trf(model, start, t, y, bounds, scale, max_nfev):
    dt = float(t[1] - t[0])
    span = float(t[-1])
    return least_squares(lambda q: search_fun_jac(model, q[None], t, span, dt)[0][0] - y, start,
                         jac=lambda q: search_fun_jac(model, q[None], t, span, dt)[1][0],
                         bounds=bounds, x_scale=scale, method="trf", max_nfev=max_nfev)


@pytest.mark.parametrize("model", MODELS)
def test_single_vector_curve_matches_the_batched_curve_and_central_differences(model):
    # references: the batched search_fun_jac (numpy), and central differences of the compiled residuals
    t, y = _noisy_nsd(model, 1)
    span, dt = float(t[-1]), float(t[1] - t[0])
    starts, (lo, hi) = _starts_and_bounds(model, t, y, dt)
    rng = np.random.default_rng(2)
    f, jac = np.empty(t.size), np.empty((t.size, len(lo)))
    for q in starts[:: max(len(starts) // 5, 1)]:
        q = np.clip(q * rng.uniform(0.8, 1.2, q.size), lo + 1e-6, hi - 1e-6)
        curve_residuals_jac(CODES[model], q, t, y, span, _gap_lo(span, dt), f, jac)
        f_ref, jac_ref = search_fun_jac(model, q[None], t, span, dt)
        np.testing.assert_allclose(f, f_ref[0] - y, rtol=1e-12, atol=1e-9)
        np.testing.assert_allclose(jac, jac_ref[0], rtol=1e-10, atol=1e-12 * np.abs(jac_ref).max())
        step = 1e-6 * np.maximum(np.abs(q), 1e-3)
        numeric = np.empty_like(jac)
        for j, h in enumerate(step):
            up, down, scratch = np.empty(t.size), np.empty(t.size), np.empty_like(jac)
            e = np.eye(q.size)[j] * h
            curve_residuals_jac(CODES[model], q + e, t, y, span, _gap_lo(span, dt), up, scratch)
            curve_residuals_jac(CODES[model], q - e, t, y, span, _gap_lo(span, dt), down, scratch)
            numeric[:, j] = (up - down) / (2 * h)
        np.testing.assert_allclose(jac, numeric, rtol=1e-5, atol=1e-6 * np.abs(numeric).max())


@pytest.mark.parametrize("model", MODELS)
@pytest.mark.parametrize("seed", [3, 4])
def test_polish_follows_scipy_least_squares_trf(model, seed):
    # reference: scipy.optimize.least_squares(method="trf") from the same start, bounds and x_scale: the polish
    # is its algorithm (Branch, Coleman & Li 1999), so it must stop after as many evaluations, for the same
    # reason, at the same point (to rounding)
    t, y = _noisy_nsd(model, seed)
    span, dt = float(t[-1]), float(t[1] - t[0])
    starts, bounds = _starts_and_bounds(model, t, y, dt)
    scale = np.maximum(np.abs(np.mean(starts, axis=0)), 1e-9)
    statuses = set()
    for start in starts[:: max(len(starts) // 4, 1)]:
        for max_nfev in (400, 7):  # converged, and cut off by the evaluation budget
            ref = _scipy_trf(model, start, t, y, bounds, scale, max_nfev)
            q, res, nfev, status = polish(model, start, t, y, span, _gap_lo(span, dt), bounds, scale, max_nfev)
            statuses.add(status)
            assert (nfev, status) == (ref.nfev, ref.status), (start, max_nfev)
            assert np.all(np.abs(q - ref.x) <= 1e-6 * np.abs(ref.x) + 1e-9 * scale), (q, ref.x)
            np.testing.assert_allclose(res @ res, ref.fun @ ref.fun, rtol=1e-9)
    assert 0 in statuses and statuses & {1, 2, 3, 4}  # both endings were exercised


def test_polish_on_a_bound_matches_scipy():
    # reference: scipy.optimize.least_squares(method="trf"); a resident curve whose time scale is pushed
    # against its upper bound (a straight NSD rise: the asymptote is never reached), so reflected and
    # bound-cut steps are taken
    t = np.linspace(0.0, 100.0, 200)
    y = 3.0 * t + np.random.default_rng(5).normal(0.0, 5.0, t.size)
    lo, hi = np.array([0.0, 0.01]), np.array([400.0, 60.0])
    start, scale = np.array([200.0, 20.0]), np.array([200.0, 20.0])
    ref = _scipy_trf("resident", start, t, y, (lo, hi), scale, 400)
    q, res, nfev, status = polish("resident", start, t, y, 100.0, 0.0, (lo, hi), scale)
    assert np.isclose(ref.x[1], hi[1], rtol=1e-3) or np.isclose(ref.x[0], hi[0], rtol=1e-3)  # a bound is active
    assert (nfev, status) == (ref.nfev, ref.status)
    np.testing.assert_allclose(q, ref.x, rtol=1e-6)


def test_start_with_overflowing_curve_fails_as_scipy_raises():
    # reference: scipy.optimize.least_squares raises "Residuals are not finite in the initial point"
    t = np.linspace(0.0, 10.0, 50)
    y = np.full_like(t, -1e308)  # the curve's residual after the midpoint is 2e308: not a float
    lo, hi = np.array([0.0, 0.0, 0.1]), np.array([1.5e308, 10.0, 5.0])
    start = np.array([1e308, 5.0, 1.0])
    with pytest.raises(ValueError), np.errstate(all="ignore"):
        _scipy_trf("disperser", start, t, y, (lo, hi), np.ones(3), 400)
    assert polish("disperser", start, t, y, 10.0, 0.0, (lo, hi), np.ones(3))[3] == FAILED
    with pytest.raises(ValueError):  # scipy refuses a start outside the box
        _scipy_trf("disperser", hi * 1.01, t, y, (lo, hi), np.ones(3), 400)
    assert polish("disperser", hi * 1.01, t, y, 10.0, 0.0, (lo, hi), np.ones(3))[3] == FAILED
