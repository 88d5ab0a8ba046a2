"""Simulated NSD of the null walks against the analytic results for random walks."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from nulls_doubles import StepDouble, TurnDouble, fits_double, gamma_steps, von_mises_turns
from roamstat.nulls import CrwNull, expected_nsd, expected_nsd_symmetric, simulate_nsd
from roamstat.nulls.walk import uniform_turns

STEPS_AT = np.array([0, 1, 2, 5, 20, 100])
Z_MAX = 4.0  # |mean - expectation| / standard error; 4 SE keeps six checks per test from flaking


def z_scores(nsd, expected):
    se = nsd.std(axis=0, ddof=1) / np.sqrt(nsd.shape[0])
    return np.abs(nsd.mean(axis=0) - expected) / np.where(se > 0, se, 1.0)


def test_symmetric_turns_match_kareiva_shigesada_closed_form():
    # Kareiva & Shigesada (1983): E[R_n^2] = n E[l^2] + 2 E[l]^2 c/(1-c) (n - (1-c^n)/(1-c)) for symmetric turns.
    null = CrwNull(fits_double(gamma_steps(2.0, 30.0), von_mises_turns(kappa=2.0)))
    nsd = null.simulate(100, 6000, np.random.default_rng(11), STEPS_AT)
    step = stats.gamma(2.0, scale=30.0)  # moments from scipy, the reference library
    c = stats.vonmises(2.0).expect(np.cos)
    expected = expected_nsd_symmetric(STEPS_AT, step.mean(), step.moment(2), c)
    assert np.all(z_scores(nsd, expected) < Z_MAX)
    assert nsd[:, 0].max() == 0.0
    # the walk's own expectation (moments read through the protocol) is the same closed form
    assert null.expected_nsd(100) == pytest.approx(expected[-1], rel=1e-9)


def test_mean_sine_enters_the_general_form():
    # Kareiva & Shigesada (1983), general form with E[sin]: a turning bias (wrapped Cauchy about 0.8 rad)
    # changes the expectation; the simulation follows the general form, not the form that ignores s.
    turn = TurnDouble(stats.wrapcauchy(0.6, loc=0.8))
    null = CrwNull(fits_double(gamma_steps(2.0, 30.0), turn))
    nsd = null.simulate(100, 6000, np.random.default_rng(12), STEPS_AT)
    c, s = turn.mean_cos(), turn.mean_sin()
    general = expected_nsd(STEPS_AT, 60.0, 2 * 3 * 30.0 ** 2, c, s)
    assert np.all(z_scores(nsd, general) < Z_MAX)
    ignoring_sine = expected_nsd_symmetric(STEPS_AT, 60.0, 2 * 3 * 30.0 ** 2, c)
    assert z_scores(nsd, ignoring_sine)[-1] > 10 * Z_MAX


def test_general_form_reduces_to_the_closed_forms():
    # Algebra of Kareiva & Shigesada (1983): s = 0 gives the symmetric closed form; c = s = 0 gives n E[l^2].
    n = np.arange(0, 60)
    assert np.allclose(expected_nsd(n, 3.0, 13.0, 0.4, 0.0), expected_nsd_symmetric(n, 3.0, 13.0, 0.4))
    assert np.allclose(expected_nsd(n, 3.0, 13.0, 0.0, 0.0), 13.0 * n)
    # straight-line limit (every turn 0): R_n = sum of steps, E = n E[l^2] + n(n-1) E[l]^2
    assert np.allclose(expected_nsd(n, 3.0, 13.0, 1.0, 0.0), 13.0 * n + n * (n - 1) * 9.0)


def test_uniform_turns_give_n_times_second_moment_and_rayleigh_net_displacement():
    # sqrt(n) law of random walks (common knowledge, no source): with uniform turns E[R_n^2] = n E[l^2]
    # and, for many steps, the net displacement is Rayleigh with scale sqrt(n E[l^2] / 2) (2-D CLT).
    step = stats.gamma(2.0, scale=30.0)
    n = 400
    nsd = simulate_nsd(lambda k, rng: step.rvs(size=k, random_state=rng), uniform_turns, n, 3000,
                       np.random.default_rng(13), np.array([1, 10, 100, n]))
    assert np.all(z_scores(nsd, np.array([1, 10, 100, n]) * step.moment(2)) < Z_MAX)
    scale = np.sqrt(n * step.moment(2) / 2.0)
    ks = stats.kstest(np.sqrt(nsd[:, -1]), stats.rayleigh(scale=scale).cdf)
    assert ks.pvalue > 0.01
    # and the test has power: a Rayleigh 10 % too wide is rejected
    assert stats.kstest(np.sqrt(nsd[:, -1]), stats.rayleigh(scale=1.1 * scale).cdf).pvalue < 0.01


def test_short_steps_are_kept_in_proportion_in_the_expectation():
    # A walk that rests (zero step) a third of the time: E[l] and E[l^2] shrink by 2/3 (mixture moments,
    # common knowledge); the simulated mean NSD follows Kareiva & Shigesada with those moments.
    from roamstat.nulls import ShortSteps

    short = ShortSteps(np.zeros(5), 1.0 / 3.0)
    null = CrwNull(fits_double(gamma_steps(2.0, 30.0), von_mises_turns(kappa=1.0)), short)
    nsd = null.simulate(50, 6000, np.random.default_rng(14), np.array([50]))
    c = stats.vonmises(1.0).expect(np.cos)
    expected = expected_nsd_symmetric(50, 2 / 3 * 60.0, 2 / 3 * 5400.0, c)
    assert null.expected_nsd(50) == pytest.approx(expected, rel=1e-9)
    assert z_scores(nsd, np.array([expected]))[0] < Z_MAX


def test_step_double_moments_come_from_scipy():
    # guard on the double itself: scipy's gamma moments, E[l] = k theta and E[l^2] = k (k + 1) theta^2
    d = StepDouble(stats.gamma(2.0, scale=30.0))
    assert (d.mean(), d.second_moment()) == pytest.approx((60.0, 5400.0))
