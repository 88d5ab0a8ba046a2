"""Tail statistics by simulation: truncation LR p-value, goodness-of-fit p-value, xmax interval.

Checks of statistical procedures by simulation from generators written here (inverse CDFs of the
laws, independent of the fitting code), with two-sided 99 % binomial bands on the rates
(DEVELOPERS.md testing policy).  Fixed seeds keep every run identical.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from roamstat.models.bootstrap import bootstrap_ci
from roamstat.models.powerlaw_tail import fit_power_law, fit_truncated_power_law
from roamstat.models.tail_tests import goodness_of_fit_p_value, truncation_lr, truncation_p_value


def pareto(n, alpha, xmin, rng):
    """Power law by inverse CDF: x = xmin u^(-1/(alpha-1)) (Clauset et al. 2009, eq. D.4; equation number from memory)."""
    return xmin * (1.0 - rng.random(n)) ** (-1.0 / (alpha - 1.0))


def bounded_pareto(n, alpha, xmin, xmax, rng):
    """Truncated power law by inverse CDF of F(x) = (x^(1-a) - xmin^(1-a)) / (xmax^(1-a) - xmin^(1-a))."""
    lo, hi = xmin ** (1.0 - alpha), xmax ** (1.0 - alpha)
    return (lo + rng.random(n) * (hi - lo)) ** (1.0 / (1.0 - alpha))


def band(n, rate):
    """Two-sided 99 % binomial band of a count."""
    return stats.binom.interval(0.99, n, rate)


def test_lr_statistic_is_twice_the_log_likelihood_gain():
    # the vectorised closed form equals 2 (ln L_truncated - ln L_power) from the two fitted models
    x = pareto(300, 1.8, 10.0, np.random.default_rng(0))
    u = np.log(x / 10.0)
    gain = fit_truncated_power_law(x, 10.0).loglik - fit_power_law(x, xmin=10.0).loglik
    assert x.size * float(truncation_lr(u.mean(), u.max())) == pytest.approx(2.0 * gain, rel=1e-6)


@pytest.mark.slow
def test_truncation_test_holds_its_level_on_true_power_laws_and_has_power():
    rng = np.random.default_rng(11)
    m = 300
    # the chi-square(1) reference rejected about 15 % of these at 5 %; the bootstrap must be in the band
    p = np.array([truncation_p_value(pareto(150, 1.7, 5.0, rng), 5.0, rng, 199)[1] for _ in range(m)])
    low, high = band(m, 10 / 200)  # p = (1 + k) / 200 <= 0.05 for k <= 9: exact rate 10/200
    assert low <= np.sum(p <= 0.05) <= high, np.sum(p <= 0.05)
    # power: truncated at two decades (alpha 1.5), the plain power law is rejected nearly always
    m_alt = 60
    p_alt = np.array([truncation_p_value(bounded_pareto(150, 1.5, 5.0, 500.0, rng), 5.0, rng, 199)[1]
                      for _ in range(m_alt)])
    assert np.sum(p_alt <= 0.05) >= 0.8 * m_alt, np.sum(p_alt <= 0.05)


def gof_p(x, rng, replicates):
    law = fit_power_law(x)
    return goodness_of_fit_p_value(x, law.xmin, law.alpha, rng, replicates)


@pytest.mark.slow
def test_goodness_of_fit_is_uniform_on_power_laws_and_rejects_lognormals():
    rng = np.random.default_rng(12)
    m, reps = 200, 39
    # a uniform body below a power-law tail (alpha 1.5 above 10): the tail is a true power law
    p = np.array([gof_p(np.concatenate([rng.uniform(1.0, 10.0, 100), pareto(200, 1.5, 10.0, rng)]), rng, reps)
                  for _ in range(m)])
    low, high = band(m, 4 / 40)  # p = (1 + k) / 40 <= 0.1 for k <= 3: exact rate 4/40 under the null
    assert low <= np.sum(p <= 0.1) <= high, np.sum(p <= 0.1)
    # power (Clauset et al. 2009, §4.1: lognormal data are rejected once n is large enough); about
    # 57 % of these are rejected, far above the null band's upper edge
    m_alt = 30
    p_alt = np.array([gof_p(rng.lognormal(3.0, 0.5, 1000), rng, reps) for _ in range(m_alt)])
    assert np.sum(p_alt <= 0.1) > band(m_alt, 4 / 40)[1], np.sum(p_alt <= 0.1)


def test_xmax_interval_covers_at_its_level_and_starts_at_the_largest_step():
    # F(M; xmax)^n is uniform at the true xmax, so [max, c] has coverage 0.95 when alpha is known;
    # alpha is estimated here, so this checks that the plug-in keeps the coverage in the band
    rng = np.random.default_rng(13)
    m, covered = 400, 0
    for _ in range(m):
        x = bounded_pareto(300, 1.5, 10.0, 1000.0, rng)
        lo, hi = fit_truncated_power_law(x, 10.0).endpoint_interval("xmax", 0.95)
        assert lo == x.max()
        covered += hi is None or hi >= 1000.0
    low, high = band(m, 0.95)
    assert low <= covered <= high, covered


def test_xmax_interval_is_unbounded_when_no_truncation_is_visible():
    # a true (untruncated) power law with alpha > 1: an infinite xmax explains the maximum, so some fits
    # must report no upper bound, and every bounded one must lie above the largest step
    rng = np.random.default_rng(14)
    bounds = [fit_truncated_power_law(pareto(200, 2.0, 1.0, rng), 1.0).endpoint_interval("xmax", 0.95)
              for _ in range(50)]
    assert sum(hi is None for _, hi in bounds) >= 10
    assert all(hi is None or hi > lo for lo, hi in bounds)


def test_bootstrap_interval_of_xmax_is_the_endpoint_interval():
    model = fit_truncated_power_law(bounded_pareto(300, 1.5, 10.0, 1000.0, np.random.default_rng(15)), 10.0)
    ci, failed = bootstrap_ci(model, 50, np.random.default_rng(16))
    assert failed == 0
    assert ci["xmax"] == model.endpoint_interval("xmax", 0.95)
    lo, hi = ci["exponent"]
    assert lo < model.params["exponent"] < hi and math.isfinite(lo)
