"""The ``ou`` model's exact likelihood gradient against central differences of the filter's likelihood.

References: the prediction-error likelihood (Harvey 1989) computed by roamstat.motion.likelihood, and
central differences of it (common practice, no source); tracks simulated here with numpy.
"""

from __future__ import annotations

import numpy as np
import pytest

from roamstat.motion.likelihood import conditional_loglik, prepare_track
from roamstat.motion.ou_gradient import ou_loglik_gradient

PARAMS = {"sigma_m": 1800.0, "tau_position_s": 50_000.0, "error_sd_m": 30.0}


def _track(error, seed=3, n=400):
    rng = np.random.default_rng(seed)
    t = np.cumsum(rng.choice([3600.0, 7200.0, 3600.0, 10800.0, 0.0], n))
    t -= t[0]
    x = np.cumsum(rng.normal(0.0, 300.0, n)) * 0.2 + rng.normal(0.0, 2000.0, n)
    y = rng.normal(0.0, 2000.0, n)
    if error == "per fix":
        error = rng.uniform(5.0, 50.0, n)
    return prepare_track(t, x, y, error)


@pytest.mark.parametrize("error", [25.0, None, "per fix"], ids=["known", "estimated", "per-fix"])
def test_value_and_gradient_match_the_filter(error):
    track = _track(error)
    estimate = track.error_var is None
    free = ["sigma_m", "tau_position_s"] + (["error_sd_m"] if estimate else [])
    loglik, grad = ou_loglik_gradient(PARAMS, track, estimate)
    assert loglik == pytest.approx(conditional_loglik("ou", PARAMS, track)[0], rel=1e-12)
    h = 1e-5
    for key, value in zip(free, grad):
        up, down = dict(PARAMS), dict(PARAMS)
        up[key], down[key] = PARAMS[key] * np.exp(h), PARAMS[key] * np.exp(-h)
        central = (conditional_loglik("ou", up, track)[0] - conditional_loglik("ou", down, track)[0]) / (2 * h)
        assert value == pytest.approx(central, rel=1e-6, abs=1e-4)
