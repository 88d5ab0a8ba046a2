"""Light-tailed step families: MLEs against hand-written likelihoods and textbook likelihood equations."""

import math

import numpy as np
import pytest
from scipy import integrate, special, stats

from roamstat.models.steps import FULL_RANGE, TAIL_REFIT, fit_step_family

CASES = [(name, 0.0) for name in FULL_RANGE] + [(name, 150.0) for name in TAIL_REFIT]


@pytest.fixture(scope="module")
def steps():
    return np.random.default_rng(11).gamma(1.7, 80.0, 600)


# Reference: the textbook log densities written out by hand (Johnson, Kotz & Balakrishnan 1994,
# chs. 14, 17, 19, 21), independent of the scipy.stats distributions the fits use.
HAND_LOGPDF = {
    "exponential": lambda x, p: math.log(p["rate"]) - p["rate"] * x,
    "gamma": lambda x, p: ((p["shape"] - 1) * np.log(x) - x / p["scale"] - special.gammaln(p["shape"])
                           - p["shape"] * math.log(p["scale"])),
    "weibull": lambda x, p: (math.log(p["shape"] / p["scale"]) + (p["shape"] - 1) * np.log(x / p["scale"])
                             - (x / p["scale"]) ** p["shape"]),
    "lognormal": lambda x, p: (-np.log(x) - math.log(p["sdlog"]) - 0.5 * math.log(2 * math.pi)
                               - (np.log(x) - p["meanlog"]) ** 2 / (2 * p["sdlog"] ** 2)),
}
PARAMS = {"exponential": ["rate"], "gamma": ["scale", "shape"], "weibull": ["scale", "shape"],
          "lognormal": ["meanlog", "sdlog"]}


@pytest.mark.parametrize("name", FULL_RANGE)
def test_full_range_fit_loglik_is_the_hand_written_likelihood(steps, name):
    # the estimates themselves are checked against the likelihood equations in the next test
    model = fit_step_family(name, steps)
    assert sorted(model.params) == PARAMS[name]
    assert all(type(value) is float for value in model.params.values())
    assert model.loglik == pytest.approx(np.sum(HAND_LOGPDF[name](steps, model.params)), rel=1e-10)
    assert model.aic == pytest.approx(2 * model.k - 2 * model.loglik)
    assert model.k == len(model.params) and model.n == steps.size


def test_mles_solve_the_likelihood_equations(steps):
    x, lx = steps, np.log(steps)
    # exponential: rate = 1 / mean (textbook MLE, common practice, no source)
    assert fit_step_family("exponential", x).params["rate"] == pytest.approx(1 / x.mean(), rel=1e-10)
    # lognormal: meanlog, sdlog = mean and (ddof 0) sd of ln x (Johnson, Kotz & Balakrishnan 1994, ch. 14)
    p = fit_step_family("lognormal", x).params
    assert p["meanlog"] == pytest.approx(lx.mean(), rel=1e-9) and p["sdlog"] == pytest.approx(lx.std(), rel=1e-6)
    # gamma: ln k - digamma(k) = ln mean - mean ln x, scale = mean / k (Choi & Wette 1969, Technometrics 11)
    p = fit_step_family("gamma", x).params
    assert math.log(p["shape"]) - special.digamma(p["shape"]) == pytest.approx(math.log(x.mean()) - lx.mean(), rel=1e-5)
    assert p["scale"] == pytest.approx(x.mean() / p["shape"], rel=1e-5)
    # Weibull: 1/k + mean ln x - sum x^k ln x / sum x^k = 0, scale = mean(x^k)^(1/k) (Cohen 1965, Technometrics 7)
    p = fit_step_family("weibull", x).params
    k = p["shape"]
    assert 1 / k + lx.mean() - np.sum(x**k * lx) / np.sum(x**k) == pytest.approx(0.0, abs=1e-4)
    assert p["scale"] == pytest.approx(np.mean(x**k) ** (1 / k), rel=1e-4)


def test_left_truncated_exponential_closed_form(steps):
    # memoryless: the MLE on x >= xmin is 1 / (mean - xmin) (textbook, common practice, no source)
    xmin = float(np.quantile(steps, 0.6))
    tail = steps[steps >= xmin]
    model = fit_step_family("exponential", tail, xmin=xmin)
    assert model.params["rate"] == pytest.approx(1 / (tail.mean() - xmin), rel=1e-12)
    assert model.support == (xmin, math.inf)
    # truncated density = scipy expon pdf / sf(xmin)
    ref = stats.expon.logpdf(tail, scale=1 / model.params["rate"]) - stats.expon.logsf(xmin, scale=1 / model.params["rate"])
    assert np.allclose(model.logpdf(tail), ref)


def test_left_truncated_lognormal_is_the_truncated_normal_mle():
    x = np.random.default_rng(5).lognormal(3.0, 1.0, 3000)
    xmin = 30.0
    tail = x[x >= xmin]
    model = fit_step_family("lognormal", tail, xmin=xmin)
    mu, s = model.params["meanlog"], model.params["sdlog"]

    def ref_loglik(mu, s):
        # ln x is normal truncated below at ln xmin: scipy.stats.truncnorm, plus the Jacobian -ln x
        a = (math.log(xmin) - mu) / s
        return np.sum(stats.truncnorm.logpdf(np.log(tail), a, np.inf, loc=mu, scale=s) - np.log(tail))

    assert model.loglik == pytest.approx(ref_loglik(mu, s), rel=1e-9)
    for dmu, ds in [(0.01, 0), (-0.01, 0), (0, 0.01), (0, -0.01)]:
        assert ref_loglik(mu + dmu, s + ds) < model.loglik  # a maximum of scipy's likelihood
    # recovers the generating parameters from the tail alone (simulation of known parameters)
    assert mu == pytest.approx(3.0, abs=0.25) and s == pytest.approx(1.0, abs=0.15)


@pytest.mark.parametrize("name,xmin", CASES)
def test_moments_match_numerical_integration(steps, name, xmin):
    data = steps[steps >= xmin] if xmin else steps
    model = fit_step_family(name, data, xmin=xmin)
    dens = lambda t: math.exp(model.logpdf(np.array([t]))[0])  # noqa: E731
    # reference: scipy.integrate.quad of x^k p(x)
    assert integrate.quad(dens, xmin, np.inf)[0] == pytest.approx(1.0, abs=1e-6)
    assert model.mean() == pytest.approx(integrate.quad(lambda t: t * dens(t), xmin, np.inf)[0], rel=1e-5)
    assert model.second_moment() == pytest.approx(integrate.quad(lambda t: t * t * dens(t), xmin, np.inf)[0], rel=1e-5)


@pytest.mark.parametrize("name,xmin", CASES)
def test_samples_follow_the_model(steps, name, xmin):
    model = fit_step_family(name, steps[steps >= xmin] if xmin else steps, xmin=xmin)
    draws = model.sample(4000, np.random.default_rng(2))
    assert draws.min() >= xmin
    # scipy.stats.kstest against the model's own CDF; fixed seed, so deterministic
    assert stats.kstest(draws, model.cdf).pvalue > 0.01
    assert np.array_equal(draws, model.sample(4000, np.random.default_rng(2)))
