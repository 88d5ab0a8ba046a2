"""The HMM fits' own BFGS (roamstat.states.bfgs) against scipy's BFGS and known minima.

References: Rosenbrock (1960), An automatic method for finding the greatest or
least value of a function, Computer Journal 3: 175-184 (minimum 0 at (1, ..., 1);
scipy.optimize.rosen and rosen_der give the function and its gradient); a
quadratic's minimiser solves A x = b (common practice, no source); scipy's
``optimize.minimize(method="BFGS")`` is the reference implementation of the
same method (Nocedal & Wright 2006, Algorithm 6.1).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import optimize
from states_sim import TWO_STATES, observed_steps

from roamstat.states import bfgs
from roamstat.states import fit as hmm_fit
from roamstat.states.chain import build_chain
from roamstat.states.likelihood import Observations


def rosenbrock(x):
    return optimize.rosen(x), optimize.rosen_der(x)


@pytest.mark.parametrize("x0", [[-1.2, 1.0], np.zeros(5), np.zeros(10)], ids=["classical", "5-d", "10-d"])
def test_rosenbrock_minimum_found_as_scipy_finds_it(x0):
    # (-1.2, 1) is Rosenbrock's own start; from the origin the n-d function has no other minimum on the way
    n = len(x0)
    ours = bfgs.minimise(rosenbrock, x0, gtol=1e-6)
    ref = optimize.minimize(rosenbrock, x0, method="BFGS", jac=True, options={"gtol": 1e-6})
    assert ours.success and ref.success
    np.testing.assert_allclose(ours.x, np.ones(n), atol=1e-5)
    np.testing.assert_allclose(ours.x, ref.x, atol=1e-5)
    assert ours.fun < 1e-10
    assert np.max(np.abs(ours.jac)) <= 1e-6
    # same method: evaluations of the same order as scipy's (a broken update or line search costs far more)
    assert 0.5 * ref.nfev < ours.nfev < 2.0 * ref.nfev


def test_quadratic_minimiser_and_positive_definite_inverse_hessian():
    rng = np.random.default_rng(5)
    m = rng.normal(size=(6, 6))
    a = m @ m.T + 6.0 * np.eye(6)
    b = rng.normal(size=6)
    result = bfgs.minimise(lambda x: (0.5 * x @ a @ x - b @ x, a @ x - b), np.zeros(6), gtol=1e-10)
    assert result.success
    np.testing.assert_allclose(result.x, np.linalg.solve(a, b), rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(result.hess_inv, result.hess_inv.T, atol=1e-12)
    assert np.all(np.linalg.eigvalsh(result.hess_inv) > 0)


def test_given_inverse_hessian_is_the_first_metric():
    # with the exact inverse Hessian of an ill-conditioned quadratic the search direction points at the
    # minimiser: at most two iterations (the first trial step is scaled, as scipy's is), more from the identity
    a = np.diag([1.0, 1e4])
    quadratic = lambda x: (0.5 * x @ a @ x, a @ x)  # noqa: E731
    given = bfgs.minimise(quadratic, np.array([3.0, -2.0]), hess_inv0=np.linalg.inv(a), gtol=1e-10)
    plain = bfgs.minimise(quadratic, np.array([3.0, -2.0]), gtol=1e-10)
    assert given.success and given.nit <= 2 < plain.nit
    np.testing.assert_allclose(given.x, 0.0, atol=1e-10)


def test_stopping_rules():
    start = np.array([-1.2, 1.0])
    capped = bfgs.minimise(rosenbrock, start, maxiter=3)
    assert not capped.success and capped.nit == 3

    seen = []

    def stop_after_two(intermediate):
        seen.append(intermediate.fun)
        if len(seen) == 2:
            raise StopIteration

    stopped = bfgs.minimise(rosenbrock, start, callback=stop_after_two)
    assert stopped.success and stopped.nit == 2 and stopped.fun == seen[-1]

    # |x| has no step meeting the curvature condition (its slope is +-1): the run ends unconverged where
    # it started, after the one restart, in a bounded number of evaluations
    kinked = bfgs.minimise(lambda x: (float(np.abs(x).sum()), np.sign(x)), np.array([0.7]))
    assert not kinked.success and "precision" in kinked.message
    assert kinked.x[0] == 0.7
    assert kinked.nfev <= 1 + 2 * (bfgs.MAX_BRACKET + bfgs.MAX_ZOOM)


def scipy_bfgs(fun, x0, hess_inv0=None, gtol=1e-5, maxiter=1000, callback=None):
    options = {"gtol": gtol, "maxiter": maxiter}
    if hess_inv0 is not None:
        options["hess_inv0"] = hess_inv0
    return optimize.minimize(fun, x0, method="BFGS", jac=True, options=options, callback=callback)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_two_state_fit_reaches_scipys_best_optimum(seed, monkeypatch):
    # simulated two-state chains (tests/states_sim.py, independent of the fitting code), 10 starts each
    steps, _ = observed_steps(TWO_STATES, 800, np.random.default_rng(seed), missed=0.1)
    obs = Observations(build_chain(steps))
    ours = hmm_fit.fit_hmm(obs, 2, "gamma", "von_mises", 10, np.random.default_rng(100 + seed))
    monkeypatch.setattr(bfgs, "minimise", scipy_bfgs)
    ref = hmm_fit.fit_hmm(obs, 2, "gamma", "von_mises", 10, np.random.default_rng(100 + seed))
    assert ours.loglik == pytest.approx(ref.loglik, abs=1e-3)  # BEST_TOLERANCE is 0.05
    np.testing.assert_allclose(ours.params.scale, ref.params.scale, rtol=1e-3)
    np.testing.assert_allclose(ours.params.gamma, ref.params.gamma, atol=1e-3)
    assert ours.converged and ref.converged
