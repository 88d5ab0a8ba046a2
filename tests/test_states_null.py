"""The state-switching null walk and the HMM simulator.

References for the checks: the chain's stationary distribution and geometric
sojourn times with mean 1 / (1 - gamma_ii) (Zucchini, MacDonald & Langrock
2016, §1.3 and §2.1); a 1-state model is a correlated random walk, whose
expected net squared displacement is the Kareiva & Shigesada (1983) formula;
a 2-state walk against the independent simulator of tests/states_sim.py.
"""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pytest
from scipy import stats
from states_sim import TWO_STATES, track

from roamstat.nulls.analytic import expected_nsd
from roamstat.nulls.states import StatesNull
from roamstat.nulls.walk import NullUnavailable
from roamstat.states import HmmFit, HmmParams
from roamstat.states.simulate import simulate_states


def _params(truth) -> HmmParams:
    return HmmParams("gamma", "von_mises", truth["shape"], truth["scale"], None, truth["mu"], truth["kappa"],
                     truth["gamma"])


def _fits(params) -> SimpleNamespace:
    return SimpleNamespace(states=HmmFit(params, 0.0, 0, 1, 1, True))


def test_chain_occupancy_and_dwell_times():
    p = _params(TWO_STATES)
    s = simulate_states(p, 2000, 50, np.random.default_rng(1))
    # stationary share of state 2: gamma_12 / (gamma_12 + gamma_21) = 0.1 / 0.25 = 0.4 (two-state closed form)
    share = np.mean(s == 1)
    se = np.std(np.mean(s == 1, axis=1), ddof=1) / np.sqrt(s.shape[0])
    assert abs(share - 0.4) < 4 * se
    # completed runs of state 1 are geometric with mean 1 / (1 - 0.9) = 10 steps
    runs = []
    for row in s:
        change = np.flatnonzero(np.diff(row)) + 1
        lengths, first = np.diff(change), row[change[:-1]]
        runs.append(lengths[first == 0])
    runs = np.concatenate(runs)
    assert abs(runs.mean() - 10.0) < 4 * runs.std(ddof=1) / np.sqrt(runs.size)
    # and their distribution is geometric (scipy.stats.geom), by a chi-square test at 0.1 %
    observed = np.bincount(np.minimum(runs, 40), minlength=41)[1:]
    expected = stats.geom.pmf(np.arange(1, 41), 0.1) * runs.size
    expected[-1] = stats.geom.sf(39, 0.1) * runs.size
    assert stats.chisquare(observed, expected).pvalue > 1e-3


def test_one_state_null_is_a_correlated_random_walk():
    truth = {"shape": np.array([2.0]), "scale": np.array([100.0]), "mu": np.array([0.3]),
             "kappa": np.array([1.5]), "gamma": np.ones((1, 1))}
    walk = StatesNull(_fits(_params(truth)))
    n = np.array([0, 1, 10, 100, 400])
    nsd = walk.simulate(400, 4000, np.random.default_rng(2), n)
    mean_cos = float(stats.vonmises.expect(np.cos, args=(1.5,), loc=0.3))
    mean_sin = float(stats.vonmises.expect(np.sin, args=(1.5,), loc=0.3))
    want = expected_nsd(n, 200.0, 2.0 * 3.0 * 100.0**2, mean_cos, mean_sin)  # gamma: E l = k s, E l^2 = k(k+1)s^2
    se = nsd.std(axis=0, ddof=1) / np.sqrt(nsd.shape[0])
    assert nsd[:, 0].max() == 0.0
    assert np.all(np.abs(nsd.mean(axis=0)[1:] - want[1:]) < 4 * se[1:])


def test_two_state_null_matches_the_independent_simulator():
    walk = StatesNull(_fits(_params(TWO_STATES)))
    n = np.array([10, 50, 200])
    nsd = walk.simulate(200, 3000, np.random.default_rng(3), n)
    rng = np.random.default_rng(4)
    ref = []
    for _ in range(1000):
        _, x, y, _ = track(TWO_STATES, 200, rng)
        ref.append(x[n] ** 2 + y[n] ** 2)
    ref = np.array(ref)
    se = np.sqrt(nsd.var(axis=0, ddof=1) / nsd.shape[0] + ref.var(axis=0, ddof=1) / ref.shape[0])
    assert np.all(np.abs(nsd.mean(axis=0) - ref.mean(axis=0)) < 4 * se)


def test_null_is_reproducible_and_needs_a_state_model():
    walk = StatesNull(_fits(_params(TWO_STATES)))
    a = walk.simulate(100, 20, np.random.default_rng(9), np.array([0, 50, 100]))
    b = walk.simulate(100, 20, np.random.default_rng(9), np.array([0, 50, 100]))
    np.testing.assert_array_equal(a, b)
    with pytest.raises(NullUnavailable, match="no fitted state model"):
        StatesNull(SimpleNamespace(states=None))
