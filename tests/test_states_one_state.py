"""The one-state model is fitted from one start and still reaches the maximum likelihood.

With one state the HMM likelihood separates into the step law, the turn law
and the zero mass (Zucchini, MacDonald & Langrock 2016, §2.1: with K = 1 the
observations are independent), so its maximum is the sum of three ordinary
maximum-likelihood fits.  References outside the project: scipy.stats' own
maximum-likelihood fits (``gamma.fit`` / ``weibull_min.fit`` with location 0,
``vonmises.fit`` / ``wrapcauchy.fit`` with scale 1) and the binomial
proportion for the zero mass.  Tracks come from the independent simulator of
tests/states_sim.py and from an open dataset (../shared/realdata).  The
one-start fit is also compared with the best of ten starts drawn as
``fit_hmm`` draws them for K >= 2 (the multi-start search K = 1 used to run).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from conftest import realdata
from scipy import optimize, stats
from states_sim import observed_steps

from roamstat import pipeline
from roamstat.config import Config
from roamstat.states import fit_hmm
from roamstat.states.chain import build_chain
from roamstat.states.fit import _bounds, _minimise, _start
from roamstat.states.likelihood import Observations
from roamstat.states.params import Layout

ONE_STATE = {"shape": np.array([1.8]), "scale": np.array([120.0]), "mu": np.array([0.3]), "kappa": np.array([1.5]),
             "rho": np.array([0.5]), "gamma": np.ones((1, 1))}
STEP_REF = {"gamma": stats.gamma, "weibull": stats.weibull_min}
# log-likelihood units: BFGS stops at a gradient norm of 1e-3, which leaves ln L about g^2 / (2 n)
# below the maximum, far under this (common practice, no source)
TOLERANCE = 1e-6


def _reference_loglik(obs: Observations, step: str, turn: str) -> float:
    """Sum of scipy's separate maximum-likelihood fits: positive steps, turns, zero-step share."""
    x, theta = obs.step_pos, obs.turn_obs
    law = STEP_REF[step]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        a, _, b = law.fit(x, floc=0.0, method="MLE")
        if turn == "von_mises":
            kappa, mu, _ = stats.vonmises.fit(theta, fscale=1.0)
            turn_ll = stats.vonmises.logpdf(theta, kappa, loc=mu).sum()
        else:
            # wrapcauchy.fit is a generic simplex search: maximise over (mu, rho) ourselves, polished
            def nll(v):
                return -stats.wrapcauchy.logpdf(np.mod(theta - v[0], 2 * np.pi), v[1]).sum()
            r = np.mean(np.exp(1j * theta))
            res = optimize.minimize(nll, [np.angle(r), min(abs(r), 0.9)], method="Nelder-Mead",
                                    bounds=[(-2 * np.pi, 2 * np.pi), (1e-6, 1 - 1e-9)],
                                    options={"xatol": 1e-10, "fatol": 1e-12, "maxiter": 20000})
            turn_ll = -res.fun
    n0, n1 = obs.zeros.size, obs.step_pos.size
    zero_ll = n0 * np.log(n0 / (n0 + n1)) + n1 * np.log(n1 / (n0 + n1)) if n0 else 0.0
    return float(law.logpdf(x, a, scale=b).sum() + turn_ll + zero_ll)


def _best_of_starts(obs: Observations, step: str, turn: str, n_starts: int, rng) -> float:
    """The best log-likelihood of ``n_starts`` BFGS runs from fit_hmm's starting points."""
    layout = Layout(1, step, turn, zero_mass=obs.zeros.size > 0)
    lo, hi = np.array(_bounds(layout, obs)).T
    best = -np.inf
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore", RuntimeWarning)
        for s in range(n_starts):
            theta0 = np.clip(layout.pack(_start(layout, obs, rng, first=s == 0)), lo, hi)
            best = max(best, -_minimise(obs, layout, lo, hi, theta0).fun)
    return best


@pytest.mark.parametrize("step", ["gamma", "weibull"])
@pytest.mark.parametrize("turn", ["von_mises", "wrapped_cauchy"])
def test_one_state_fit_reaches_the_separate_maxima(step, turn):
    rng = np.random.default_rng(170)
    for missed in (0.0, 0.15):
        steps, _ = observed_steps(ONE_STATE | {"step": step, "turn": turn}, 600, rng, missed=missed)
        steps.loc[rng.choice(len(steps), 12, replace=False), "step_m"] = 0.0  # a zero mass to fit
        obs = Observations(build_chain(steps), zero_step_m=0.0)
        assert obs.zeros.size >= 8  # some fall on two-interval steps, not observations
        fit = fit_hmm(obs, 1, step, turn, 10, np.random.default_rng(1))
        assert fit is not None and fit.converged and (fit.n_starts, fit.n_best_starts) == (1, 1)
        reference = _reference_loglik(obs, step, turn)
        # two-sided: no higher than the maximum (scipy's fits are exact to ~1e-8 here), no lower either
        assert reference - TOLERANCE * 10 <= fit.loglik <= reference + 1e-4, (fit.loglik, reference)
        best = _best_of_starts(obs, step, turn, 10, np.random.default_rng(2))
        assert fit.loglik >= best - TOLERANCE, (fit.loglik, best)


def test_one_state_fit_on_open_tracks_matches_ten_starts():
    # RAATD subset (Ropert-Coudert et al. 2020, Scientific Data 7: 94), Darwin Core, ../shared/realdata
    cfg = Config()
    loaded = pipeline.load([realdata("antarctic_tracks_dwc.csv")], cfg)
    tasks = pipeline.animal_tasks(loaded, pipeline.command_stages("run", cfg), cfg)
    checked = 0
    for task in tasks:
        obs = Observations(build_chain(task.steps), cfg.min_step)
        if obs.n_obs < 30 or obs.step_pos.size < 30 or obs.turn_obs.size < 10:
            continue
        fit = fit_hmm(obs, 1, "gamma", "von_mises", 10, np.random.default_rng(3))
        best = _best_of_starts(obs, "gamma", "von_mises", 10, np.random.default_rng(4))
        assert fit.loglik >= best - TOLERANCE, (task.animal_id, fit.loglik, best)
        reference = _reference_loglik(obs, "gamma", "von_mises")
        assert reference - 1e-5 <= fit.loglik <= reference + 1e-4, (task.animal_id, fit.loglik, reference)
        checked += 1
        if checked == 6:
            break
    assert checked >= 3
