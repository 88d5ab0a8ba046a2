"""The compiled von Mises sampler (Best & Fisher 1979) against scipy.stats.vonmises."""

import math

import numpy as np
import pytest
from scipy import special, stats

from roamstat.models.turns import KAPPA_NORMAL, VonMisesTurns, von_mises_draws, von_mises_unit
from roamstat.track import wrap_angle

N = 40_000


@pytest.mark.parametrize("kappa", [1e-7, 0.05, 0.7, 2.0, 30.0, 2000.0])
def test_draws_follow_scipy_von_mises(kappa):
    mu = 2.9  # near +pi: the wrap must not bend the law
    x = von_mises_draws(mu, kappa, N, np.random.default_rng(int(kappa * 1000) + 1))
    assert x.shape == (N,) and np.all((x > -math.pi) & (x <= math.pi))
    centred = wrap_angle(x - mu)
    # external reference: scipy.stats.vonmises CDF (centred at 0, support [-pi, pi])
    assert stats.kstest(centred, stats.vonmises(kappa).cdf).pvalue > 1e-3
    # circular moments: E cos(theta - mu) = A(kappa) = I1/I0, E sin(theta - mu) = 0, and
    # E cos 2(theta - mu) = I2/I0 (Mardia & Jupp 2000, §3.5.4; from memory); two-sided 4.5-SE bands
    for values, expected in ((np.cos(centred), special.ive(1, kappa) / special.ive(0, kappa)),
                             (np.sin(centred), 0.0),
                             (np.cos(2 * centred), special.ive(2, kappa) / special.ive(0, kappa))):
        se = max(values.std(ddof=1), 1e-12) / math.sqrt(N)
        assert values.mean() == pytest.approx(expected, abs=4.5 * se)


def test_uniform_and_normal_limits():
    # kappa = 0 is the circular uniform law; a huge kappa is N(mu, 1/kappa) (Mardia & Jupp 2000, §3.5.4)
    flat = von_mises_draws(1.0, 0.0, N, np.random.default_rng(3))
    assert stats.kstest(flat, stats.uniform(-math.pi, 2 * math.pi).cdf).pvalue > 1e-3
    kappa = 100 * KAPPA_NORMAL
    tight = von_mises_draws(-3.1, kappa, N, np.random.default_rng(4))
    z = wrap_angle(tight + 3.1) * math.sqrt(kappa)
    assert stats.kstest(z, stats.norm.cdf).pvalue > 1e-3


def test_same_generator_state_same_draws():
    a = von_mises_draws(0.2, 1.5, 1000, np.random.default_rng(9))
    b = von_mises_draws(0.2, 1.5, 1000, np.random.default_rng(9))
    np.testing.assert_array_equal(a, b)
    assert not np.array_equal(a, von_mises_draws(0.2, 1.5, 1000, np.random.default_rng(10)))


def test_the_turn_model_samples_with_it():
    model = VonMisesTurns(0.4, 3.0, 10, 0.0)
    np.testing.assert_array_equal(model.sample(500, np.random.default_rng(5)),
                                  von_mises_draws(model.mu, model.kappa, 500, np.random.default_rng(5)))


@pytest.mark.parametrize("kappa", [0.0, 0.4, 8.0, 100 * KAPPA_NORMAL])
def test_unit_draws_are_the_cosines_and_sines_of_the_angles(kappa):
    # the walk turns by these: they must be the same turns as the angles drawn from the same state
    angles = von_mises_draws(-2.5, kappa, 5000, np.random.default_rng(12))
    cos_t, sin_t = von_mises_unit(-2.5, kappa, 5000, np.random.default_rng(12))
    np.testing.assert_allclose(cos_t, np.cos(angles), atol=1e-12)
    np.testing.assert_allclose(sin_t, np.sin(angles), atol=1e-12)
