"""The compiled step/turn densities of the HMM and the exact log-likelihood gradient.

References outside the project: scipy.stats' public logpdf (gamma,
weibull_min, vonmises, wrapcauchy) for the densities; mpmath at 50 digits
for the wrapped Cauchy where rho is within 1e-6 of 1 (scipy's own formula
loses digits there); central finite differences of those references for
the derivatives, and of the forward-algorithm log-likelihood for the
gradient (Fisher's identity, Zucchini, MacDonald & Langrock 2016, §4.2).
"""

from __future__ import annotations

import mpmath
import numpy as np
import pandas as pd
import pytest
from scipy import special, stats
from states_sim import TWO_STATES, observed_steps

from roamstat.states.chain import Chain, build_chain
from roamstat.states.densities import POSITIVE, state_table, step_constants, step_slopes, turn_constants, turn_slopes
from roamstat.states.likelihood import Observations
from roamstat.states.params import HmmParams, Layout

STEP_REF = {"gamma": stats.gamma, "weibull": stats.weibull_min}
H = 1e-5  # central-difference step on the free scale (error ~ H^2 times the third derivative)


def _chain(step_m: np.ndarray, turn_rad: np.ndarray) -> Chain:
    none = np.zeros(0, bool)
    restart = np.zeros(step_m.size, bool)
    restart[0] = True
    return Chain(step_m, turn_rad, restart, np.zeros(0, np.int64), none, none, 3600.0)


def _params(step, turn, shape, scale, mu, conc, zero=None) -> HmmParams:
    k = len(shape)
    return HmmParams(step, turn, np.asarray(shape, float), np.asarray(scale, float),
                     None if zero is None else np.asarray(zero, float), np.asarray(mu, float),
                     np.asarray(conc, float), np.full((k, k), 1.0 / k))


def _random_states(rng, k, turn):
    """Parameters spread over the fit's whole free range (states/fit.py bounds), ends included."""
    shape = np.exp(rng.uniform(np.log(0.05), np.log(200.0), k))
    scale = np.exp(rng.uniform(np.log(1.0), np.log(5000.0), k))
    mu = rng.uniform(-3 * np.pi, 3 * np.pi, k)
    conc = np.exp(rng.uniform(np.log(1e-4), np.log(500.0), k)) if turn == "von_mises" else rng.uniform(1e-4, 0.999, k)
    return shape, scale, mu, conc


def _steps_turns(rng, n=60):
    x = np.exp(rng.uniform(np.log(0.01), np.log(20000.0), n))
    theta = rng.uniform(-np.pi, np.pi, n)
    theta[:3] = [0.0, np.pi, -np.pi]
    return x, theta


def _slopes(x, theta, p: HmmParams) -> np.ndarray:
    """Derivatives (4, S, K) of the compiled per-slot functions: log shape, log scale, mu, free concentration."""
    weibull, cauchy = p.step_family == "weibull", p.turn_family == "wrapped_cauchy"
    tab = state_table(p.shape, p.scale, np.empty(0), p.mu, p.conc, *step_constants(p.step_family, p.shape, p.scale),
                      *turn_constants(p.turn_family, p.conc))
    out = np.empty((4, x.size, p.n_states))
    for t in range(x.size):
        for j in range(p.n_states):
            out[:2, t, j] = step_slopes(POSITIVE, x[t], np.log(x[t]), tab, j, weibull, False)[:2]
            out[2:, t, j] = turn_slopes(theta[t], np.cos(theta[t]), np.sin(theta[t]), tab, j, cauchy)
    return out


def _turn_ref(turn, theta, mu, conc):
    if turn == "von_mises":
        return stats.vonmises.logpdf(theta, conc, loc=mu)
    return stats.wrapcauchy.logpdf(np.mod(theta - mu, 2 * np.pi), conc)


@pytest.mark.parametrize("step", ["gamma", "weibull"])
@pytest.mark.parametrize("turn", ["von_mises", "wrapped_cauchy"])
def test_log_densities_equal_scipy_public_logpdf(step, turn):
    # reference: scipy.stats' public logpdf, parameters over the fit's whole range
    rng = np.random.default_rng(17)
    x, theta = _steps_turns(rng)
    obs = Observations(_chain(x, theta))
    for _ in range(20):
        shape, scale, mu, conc = _random_states(rng, 3, turn)
        step_lp, turn_lp = obs.log_densities(_params(step, turn, shape, scale, mu, conc))
        want = np.column_stack([STEP_REF[step].logpdf(x, a, scale=b) for a, b in zip(shape, scale)])
        finite = np.isfinite(want)
        np.testing.assert_array_equal(np.isfinite(step_lp), finite)  # overflow to -inf where scipy's does
        np.testing.assert_allclose(step_lp[finite], want[finite], rtol=1e-10, atol=1e-10)
        want = np.column_stack([_turn_ref(turn, theta, m, c) for m, c in zip(mu, conc)])
        np.testing.assert_allclose(turn_lp, want, rtol=1e-9, atol=1e-9)


def test_wrapped_cauchy_near_rho_one_against_50_digit_arithmetic():
    # reference: the wrapped Cauchy density (Mardia & Jupp 2000, eq. 3.5.60, from memory) in mpmath
    mpmath.mp.dps = 50
    theta = np.array([0.0, 1e-7, 1e-3, 0.5, np.pi])
    rho = special.expit(np.array([10.0, 15.0]))  # the fit's upper bound on logit rho is 15
    _, turn_lp = Observations(_chain(np.ones(theta.size), theta)).log_densities(
        _params("gamma", "wrapped_cauchy", [1.0, 1.0], [1.0, 1.0], [0.0, 0.0], rho))
    for j, r in enumerate(rho):
        r = mpmath.mpf(float(r))
        want = [float(mpmath.log((1 - r**2) / (2 * mpmath.pi * (1 + r**2 - 2 * r * mpmath.cos(mpmath.mpf(float(t)))))))
                for t in theta]
        np.testing.assert_allclose(turn_lp[:, j], want, rtol=1e-9)


def test_zero_mass_and_missing_values():
    # a zero step has log z, a positive one log(1 - z) + log f, a missing step or turn 0 (Morales et al. 2004)
    x = np.array([50.0, 0.0, np.nan, 120.0])
    theta = np.array([np.nan, 0.3, 1.0, np.nan])
    p = _params("gamma", "von_mises", [1.5, 3.0], [30.0, 150.0], [0.0, 1.0], [1.0, 4.0], zero=[0.1, 0.02])
    step_lp, turn_lp = Observations(_chain(x, theta)).log_densities(p)
    for j in range(2):
        for t in (0, 3):
            assert step_lp[t, j] == pytest.approx(np.log1p(-p.zero[j]) + stats.gamma.logpdf(x[t], p.shape[j],
                                                                                           scale=p.scale[j]), rel=1e-12)
        assert step_lp[1, j] == pytest.approx(np.log(p.zero[j]), rel=1e-12)
        assert step_lp[2, j] == 0.0 and turn_lp[0, j] == 0.0 and turn_lp[3, j] == 0.0


@pytest.mark.parametrize("step", ["gamma", "weibull"])
@pytest.mark.parametrize("turn", ["von_mises", "wrapped_cauchy"])
def test_density_derivatives_equal_central_differences_of_scipy(step, turn):
    # reference: central differences of scipy.stats' logpdf on the free scale (log shape, log scale, mu,
    # log kappa or logit rho)
    rng = np.random.default_rng(23)
    x, theta = _steps_turns(rng, 30)
    x = x[(x > 1.0) & (x < 3000.0)]
    theta = theta[: x.size]
    layout = Layout(2, step, turn, zero_mass=False)
    for _ in range(8):
        shape = np.exp(rng.uniform(np.log(0.2), np.log(20.0), 2))
        scale = np.exp(rng.uniform(np.log(20.0), np.log(800.0), 2))
        mu = rng.uniform(-np.pi, np.pi, 2)
        conc = np.exp(rng.uniform(np.log(0.01), np.log(50.0), 2)) if turn == "von_mises" else rng.uniform(0.01, 0.95, 2)
        p = _params(step, turn, shape, scale, mu, conc)
        theta_free = layout.pack(p)
        deriv = _slopes(x, theta, layout.unpack(theta_free))

        def ref(v):
            q = layout.unpack(v)
            return (np.column_stack([STEP_REF[step].logpdf(x, a, scale=b) for a, b in zip(q.shape, q.scale)]),
                    np.column_stack([_turn_ref(turn, theta, m, c) for m, c in zip(q.mu, q.conc)]))

        for block in range(4):
            for j in range(2):
                e = np.zeros(layout.size)
                e[block * 2 + j] = H
                (s_up, t_up), (s_dn, t_dn) = ref(theta_free + e), ref(theta_free - e)
                numeric = ((s_up - s_dn) if block < 2 else (t_up - t_dn))[:, j] / (2 * H)
                np.testing.assert_allclose(deriv[block, :, j], numeric, rtol=1e-6, atol=1e-6 * np.abs(numeric).max())


def _gappy_steps(rng, zero_step: bool, n=40):
    """Hourly steps with two missed fixes (missing slots), missing turns and maybe a zero step."""
    t0 = pd.Timestamp("2025-01-01", tz="UTC")
    hours = np.delete(np.arange(n + 2), [9, 25])  # two missed fixes
    start, end = hours[:-1], hours[1:]
    step = rng.gamma(2.0, 80.0, start.size)
    step[5] = 0.0 if zero_step else 10.0
    turn = rng.vonmises(0.0, 1.0, start.size)
    turn[[0, 12]] = np.nan
    return pd.DataFrame({"animal_id": "a", "segment": np.where(start < 30, 0, 1),
                         "t_start": [t0 + pd.Timedelta(hours=int(h)) for h in start],
                         "t_end": [t0 + pd.Timedelta(hours=int(h)) for h in end],
                         "dt_s": 3600.0 * (end - start), "step_m": step, "turn_rad": turn})


@pytest.mark.parametrize("step", ["gamma", "weibull"])
@pytest.mark.parametrize("turn", ["von_mises", "wrapped_cauchy"])
def test_loglik_gradient_equals_central_differences(step, turn):
    # reference: central differences of the forward-algorithm log-likelihood (Zucchini et al. 2016, §3.2)
    rng = np.random.default_rng(31)
    for zero_mass in (True, False):
        chain = build_chain(_gappy_steps(np.random.default_rng(31), zero_mass))
        assert np.isnan(chain.step_m).sum() >= 2 and np.isnan(chain.turn_rad).sum() >= 3 and chain.restart.sum() == 2
        obs = Observations(chain)
        assert (obs.zeros.size > 0) == zero_mass
        for k in (1, 2, 3):
            layout = Layout(k, step, turn, zero_mass=zero_mass)
            free = rng.normal(0.0, 0.5, layout.size)
            free[k:2 * k] = np.log(rng.uniform(50.0, 300.0, k))
            ll, grad = obs.loglik_and_gradient(layout, free)
            assert ll == pytest.approx(obs.loglik(layout.unpack(free)), rel=1e-12)
            numeric = np.array([(obs.loglik(layout.unpack(free + e)) - obs.loglik(layout.unpack(free - e))) / (2 * H)
                                for e in np.eye(layout.size) * H])
            np.testing.assert_allclose(grad, numeric, rtol=1e-6, atol=1e-6)


def test_fused_loglik_equals_forward_algorithm_on_a_long_chain():
    # reference: the scaled forward algorithm on the tabulated log densities (Zucchini et al. 2016, §3.2);
    # 3,000 slots, so the fused pass's product of normalisers is logged and reset many times
    rng = np.random.default_rng(41)
    steps, _ = observed_steps(TWO_STATES, 3000, rng, missed=0.05)
    obs = Observations(build_chain(steps))
    for k in (2, 3):
        layout = Layout(k, "gamma", "von_mises", zero_mass=False)
        free = rng.normal(0.0, 0.5, layout.size)
        free[k:2 * k] = np.log(rng.uniform(30.0, 300.0, k))
        ll, _ = obs.loglik_and_gradient(layout, free)
        assert ll < -1000.0 and ll == pytest.approx(obs.loglik(layout.unpack(free)), rel=1e-12)
