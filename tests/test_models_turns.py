"""Turning-angle families against closed-form MLEs, hand-written densities and directional identities."""

import math

import numpy as np
import pytest
from scipy import integrate, optimize, special, stats

from roamstat.models.base import wrap_angle
from roamstat.models.turns import fit_uniform, fit_von_mises, fit_wrapped_cauchy


@pytest.fixture(scope="module")
def vm_turns():
    return wrap_angle(np.random.default_rng(21).vonmises(2.8, 1.2, 800))  # mean near +pi on purpose


@pytest.fixture(scope="module")
def wc_turns():
    rng = np.random.default_rng(22)
    # wrapped Cauchy draws via scipy.stats.wrapcauchy (support [0, 2 pi)), shifted by mu = -0.4
    return wrap_angle(stats.wrapcauchy.rvs(0.6, size=800, random_state=rng) - 0.4)


def test_von_mises_is_the_closed_form_mle(vm_turns):
    model = fit_von_mises(vm_turns)
    mu, kappa = model.params["mu"], model.params["kappa"]
    # Mardia & Jupp (2000), §5.3.1: mu-hat is the direction of the mean resultant, and kappa-hat solves
    # A(kappa) = I1(kappa) / I0(kappa) = mean resultant length; solved here with brentq, not scipy.stats
    resultant = np.mean(np.exp(1j * vm_turns))
    kappa_ref = optimize.brentq(lambda k: special.i1e(k) / special.i0e(k) - abs(resultant), 1e-9, 1e3, xtol=1e-14)
    assert mu == pytest.approx(np.angle(resultant), abs=1e-9)
    assert kappa == pytest.approx(kappa_ref, rel=1e-6)
    # log-likelihood written out: sum kappa cos(t - mu) - n ln(2 pi I0(kappa)) (Mardia & Jupp 2000, §3.5; section from memory)
    n = vm_turns.size
    loglik = kappa * np.sum(np.cos(vm_turns - mu)) - n * (math.log(2 * math.pi * special.i0e(kappa)) + kappa)
    assert model.loglik == pytest.approx(loglik, rel=1e-10)
    a = special.i1(kappa) / special.i0(kappa)
    assert model.mean_cos() == pytest.approx(a * math.cos(mu))
    assert -math.pi < mu <= math.pi
    # generating parameters recovered (simulation of known parameters)
    assert mu == pytest.approx(2.8, abs=0.08) and kappa == pytest.approx(1.2, abs=0.15)


def test_wrapped_cauchy_matches_scipy(wc_turns):
    model = fit_wrapped_cauchy(wc_turns)
    mu, rho = model.params["mu"], model.params["rho"]
    shifted = np.mod(wc_turns - mu, 2 * math.pi)
    # reference: scipy.stats.wrapcauchy.fit for rho at our mu (loc and scale fixed)
    c_ref, _, _ = stats.wrapcauchy.fit(shifted, floc=0, fscale=1)
    assert rho == pytest.approx(c_ref, abs=1e-4)
    # density written out: (1 - rho^2) / (2 pi (1 + rho^2 - 2 rho cos(t - mu))) (Mardia & Jupp 2000, §3.5; section from memory)
    hand = np.log((1 - rho**2) / (2 * math.pi * (1 + rho**2 - 2 * rho * np.cos(wc_turns - mu))))
    assert model.loglik == pytest.approx(np.sum(hand), rel=1e-10)
    # a maximum over mu too: scipy's likelihood is lower a little to either side
    for d in (-0.01, 0.01):
        assert np.sum(stats.wrapcauchy.logpdf(np.mod(wc_turns - mu - d, 2 * math.pi), rho)) < model.loglik
    # generating parameters recovered (simulation of known parameters)
    assert mu == pytest.approx(-0.4, abs=0.08) and rho == pytest.approx(0.6, abs=0.05)


@pytest.mark.parametrize("fit", [fit_uniform, fit_von_mises, fit_wrapped_cauchy])
def test_density_cdf_moments_and_samples_agree(vm_turns, fit):
    model = fit(vm_turns)
    dens = lambda t: math.exp(model.logpdf(np.array([t]))[0])  # noqa: E731
    # reference: scipy.integrate.quad over (-pi, pi]
    assert integrate.quad(dens, -math.pi, math.pi, limit=200)[0] == pytest.approx(1.0, abs=1e-7)
    assert model.mean_cos() == pytest.approx(integrate.quad(lambda t: math.cos(t) * dens(t), -math.pi, math.pi, limit=200)[0], abs=1e-7)
    assert model.mean_sin() == pytest.approx(integrate.quad(lambda t: math.sin(t) * dens(t), -math.pi, math.pi, limit=200)[0], abs=1e-7)
    for t in (-2.0, 0.3, 3.0):
        assert float(model.cdf(np.array([t]))[0]) == pytest.approx(integrate.quad(dens, -math.pi, t, limit=200)[0], abs=1e-7)
    assert float(model.cdf(np.array([math.pi]))[0]) == 1.0
    draws = model.sample(4000, np.random.default_rng(1))
    assert np.all((draws > -math.pi) & (draws <= math.pi))
    assert stats.kstest(draws, model.cdf).pvalue > 0.01  # scipy.stats.kstest, fixed seed
    assert np.mean(np.cos(draws)) == pytest.approx(model.mean_cos(), abs=0.05)


def test_wrapped_cauchy_stops_at_its_bound_on_degenerate_turns():
    # half the turns exactly 0 (points on straight lines): the likelihood grows without limit as rho -> 1
    # (a point mass at 0; Mardia & Jupp 2000, §3.5.7), so the fit must stop at RHO_MAX and say so
    from roamstat.models.turns import RHO_MAX

    rng = np.random.default_rng(11)
    turns = np.r_[np.zeros(100), rng.uniform(-math.pi, math.pi, 100)]
    model = fit_wrapped_cauchy(turns)
    assert model.params["rho"] == pytest.approx(RHO_MAX) and model.at_bound
    # ordinary data stay inside, away from the bound: scipy's wrapcauchy samples with rho 0.6
    ordinary = fit_wrapped_cauchy(stats.wrapcauchy.rvs(0.6, size=400, random_state=rng))
    assert not ordinary.at_bound and abs(ordinary.params["rho"] - 0.6) < 0.06
