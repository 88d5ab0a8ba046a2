"""RTS smoother against dense Gaussian conditioning (conditional multivariate-normal formula)."""
from __future__ import annotations

import numpy as np
import pytest

from motion_reference import UNBOUNDED, draw, position_cov
from roamstat.motion import MOTION_MODELS, LocationError, smooth
from test_motion_simulate import CASES, make_fit


def _dense_posterior(name, p, t_obs, y, sd, t_new, mean):
    """Posterior mean and SD of x at t_new given y (one axis).

    Resident models: conditional MVN, mu + k' S^-1 (y - mu), c - k' S^-1 k (e.g. Rasmussen &
    Williams 2006, eq. 2.19). Unbounded models: the start is diffuse, i.e. an unknown constant
    mean with a flat prior -- ordinary kriging with its extra variance term
    (1 - 1' S^-1 k)^2 / (1' S^-1 1) (Cressie 1993, Statistics for Spatial Data, eq. 3.2.16).
    """
    t_all = np.concatenate([t_obs, t_new])
    C = position_cov(name, p, t_all)
    n = t_obs.size
    S = C[:n, :n] + np.diag(sd**2)
    K = C[:n, n:]
    Si_K = np.linalg.solve(S, K)
    var = np.diag(C[n:, n:]) - np.sum(K * Si_K, axis=0)
    if name not in UNBOUNDED:
        return mean + Si_K.T @ (y - mean), np.sqrt(var)
    ones = np.ones(n)
    Si_1 = np.linalg.solve(S, ones)
    m_hat = (Si_1 @ y) / (Si_1 @ ones)
    lam = 1.0 - ones @ Si_K
    return m_hat + Si_K.T @ (y - m_hat), np.sqrt(var + lam**2 / (ones @ Si_1))


@pytest.mark.parametrize("name", MOTION_MODELS)
def test_smoother_equals_dense_conditioning(name):
    rng = np.random.default_rng(10 + MOTION_MODELS.index(name))
    p = CASES[name]
    t = np.sort(rng.uniform(0.0, 40000.0, 14))
    t -= t[0]
    t[5] = t[4]
    sd = rng.uniform(10.0, 50.0, t.size)
    centre = np.array([120.0, 30.0])
    xy = draw(name, p, t, rng, error_sd=sd, centre=centre)[0] + 5000.0
    centre = centre + 5000.0
    grid = np.arange(0.0, t[-1], 1800.0)
    fit = make_fit(name, p, tuple(centre))
    out = smooth(fit, t, xy[:, 0], xy[:, 1], LocationError(sd, "dop_uere"), predict_t_s=grid)
    assert list(out.columns) == ["t_s", "x_m", "y_m", "se_m", "predicted"]
    assert out["predicted"].sum() == grid.size and (~out["predicted"]).sum() == t.size
    assert np.all(np.diff(out["t_s"]) >= 0)
    for axis, col in enumerate(("x_m", "y_m")):
        for predicted, times in ((False, t), (True, grid)):
            rows = out[out["predicted"] == predicted]
            ref_mean, ref_sd = _dense_posterior(name, p, t, xy[:, axis], sd, times, centre[axis])
            np.testing.assert_allclose(rows[col], ref_mean, rtol=1e-6, atol=1e-5)
            np.testing.assert_allclose(rows["se_m"], ref_sd, rtol=1e-5, atol=1e-5)
