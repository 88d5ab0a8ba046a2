"""Comparison statistics against reference implementations."""

import math

import numpy as np
import pytest
from scipy import stats

from roamstat.models.select import akaike_weights, ks_statistic, vuong_test


def test_akaike_weights_definition():
    delta, weight = akaike_weights([110.0, 100.0, np.nan, 104.0])
    # Burnham & Anderson (2002), §2.9: delta_i = AIC_i - min, w_i proportional to exp(-delta_i / 2)
    assert delta[[0, 1, 3]] == pytest.approx([10.0, 0.0, 4.0])
    assert np.isnan(delta[2]) and np.isnan(weight[2])
    assert np.nansum(weight) == pytest.approx(1.0)
    assert weight[3] / weight[1] == pytest.approx(math.exp(-2.0))


@pytest.mark.parametrize("ties", [False, True])
def test_ks_statistic_matches_scipy(ties):
    x = np.random.default_rng(0).normal(size=300)
    if ties:
        x = np.round(x, 1)
    # reference: scipy.stats.kstest (exact sup |F_n - F|)
    assert ks_statistic(x, stats.norm.cdf) == pytest.approx(stats.kstest(x, stats.norm.cdf).statistic, rel=1e-12)


def test_vuong_matches_the_powerlaw_package():
    statistics = pytest.importorskip("powerlaw.statistics", reason="test-only reference: pip install powerlaw")
    rng = np.random.default_rng(1)
    x = rng.lognormal(1.0, 0.8, 400)
    la = stats.lognorm.logpdf(x, 0.8, scale=math.e)
    lb = stats.lognorm.logpdf(x, 0.82, scale=math.exp(1.03))  # a near miss: moderate p-values
    stat, p = vuong_test(la, lb)
    # Alstott, Bullmore & Plenz (2014): loglikelihood_ratio implements Clauset et al. (2009), §5 / App. C
    r_norm, p_ref = statistics.loglikelihood_ratio(la.copy(), lb.copy(), nested=False, normalized_ratio=True)
    assert stat == pytest.approx(r_norm, rel=1e-10)
    assert 1e-5 < p_ref < 0.9 and p == pytest.approx(p_ref, rel=1e-8)
    assert stat > 0  # the generating parameters beat the near miss


def test_vuong_of_identical_models_is_uninformative():
    ll = np.log(np.random.default_rng(2).random(50))
    assert vuong_test(ll, ll) == (0.0, 1.0)
