"""Maximum-likelihood fit of a K-state movement HMM from many random starts.

The negative log-likelihood (scaled forward algorithm) is minimised over the
unconstrained parameters (:mod:`roamstat.states.params`) by BFGS with
the exact gradient of :meth:`Observations.loglik_and_gradient` (bounds on the
free parameters are enforced by clipping), from ``n_starts`` starting points: the first from
quantiles of the step lengths, the others drawn at random around the data
(state means at sorted random quantiles of the steps, random coefficients of
variation, concentrations and persistence).  A likelihood with several local
maxima is the rule for HMMs, so the best of many starts is taken and the
number of starts that reached it (within ``BEST_TOLERANCE``) is reported
(Zucchini, MacDonald & Langrock 2016, §3.4.2; Michelot, Langrock & Patterson
2016).  States are then ordered by mean step length, state 1 slowest.

References
----------
Zucchini, W., MacDonald, I. L. & Langrock, R. (2016). Hidden Markov Models
for Time Series: An Introduction Using R, 2nd ed. CRC Press.
Michelot, T., Langrock, R. & Patterson, T. A. (2016). Statistical modelling
of animal movement with hidden Markov models. Methods in Ecology and
Evolution 7: 1308-1315.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np
from scipy import optimize

from roamstat.states.families import concentration, start_step, step_model
from roamstat.states.likelihood import Observations
from roamstat.states.params import HmmParams, Layout

#: Starts whose log-likelihood is within this of the best count as reaching it (log-likelihood
#: units, well above the optimiser's precision; common practice, no source).
BEST_TOLERANCE = 0.05

#: Bounds on the unconstrained scale, wide enough never to bind on sensible data; they keep
#: exp/expit finite while the optimiser explores (scipy's bounded L-BFGS-B costs more here than
#: the likelihood itself, so the bounds are applied by clipping).
LOG_SHAPE = (math.log(0.05), math.log(200.0))
LOGIT = (-15.0, 15.0)
LOG_KAPPA = (math.log(1e-4), math.log(500.0))
MU = (-3.0 * math.pi, 3.0 * math.pi)

#: Gradient norm at which BFGS stops (log-likelihood units per unit of the free parameters).
GTOL = 1e-3

#: Value returned where the likelihood is not finite (the optimiser needs finite numbers).
HUGE = 1e100


@dataclass
class HmmFit:
    """The best fit of one K-state model.

    Attributes
    ----------
    params : HmmParams
        States ordered by mean step length (state 1 slowest).
    loglik : float
    n_obs : int
        Slots with an observed step (sample size in BIC).
    n_starts, n_best_starts : int
        Starting points tried / reaching the best optimum within ``BEST_TOLERANCE``.
    converged : bool
        Whether the optimiser reported convergence from the best start.
    """

    params: HmmParams
    loglik: float
    n_obs: int
    n_starts: int
    n_best_starts: int
    converged: bool

    @property
    def n_states(self) -> int:
        return self.params.n_states

    @property
    def n_free(self) -> int:
        return self.params.n_free

    @property
    def aic(self) -> float:
        """2p - 2 log L (Akaike 1974)."""
        return 2.0 * self.n_free - 2.0 * self.loglik

    @property
    def bic(self) -> float:
        """p log n - 2 log L (Schwarz 1978), n = slots with an observed step."""
        return self.n_free * math.log(max(self.n_obs, 1)) - 2.0 * self.loglik


def fit_hmm(obs: Observations, n_states: int, step_family: str, turn_family: str, n_starts: int,
            rng: np.random.Generator) -> HmmFit | None:
    """Fit a ``n_states``-state HMM to one chain's observations.

    Parameters
    ----------
    obs : Observations
        The chain's observed steps and turns.
    n_states : int
        K >= 1.
    step_family, turn_family : str
        Families shared by all states (``families.STEP_FAMILIES``, ``families.TURN_FAMILIES``).
    n_starts : int
        Starting points (the first is deterministic).
    rng : numpy.random.Generator
        Draws the random starting points.

    Returns
    -------
    HmmFit or None
        None when no start gave a finite likelihood.
    """
    layout = Layout(n_states, step_family, turn_family, zero_mass=obs.zeros.size > 0)
    bounds = _bounds(layout, obs)
    lo, hi = np.array(bounds).T

    def nll(theta):
        inside = np.clip(theta, lo, hi)
        ll, grad = obs.loglik_and_gradient(layout, inside)
        if not np.isfinite(ll):
            return HUGE, np.zeros_like(theta)
        return -ll, np.where(inside == theta, -grad, 0.0)  # flat beyond the clipping bounds

    results = []
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore", RuntimeWarning)
        for s in range(n_starts):
            theta0 = np.clip(layout.pack(_start(layout, obs, rng, first=s == 0)), lo, hi)
            res = optimize.minimize(nll, theta0, method="BFGS", jac=True, options={"maxiter": 1000, "gtol": GTOL})
            if res.fun < HUGE:
                results.append(res)
    if not results:
        return None
    values = np.array([r.fun for r in results])
    best = results[int(np.argmin(values))]
    params = layout.unpack(np.clip(best.x, lo, hi))
    means = np.array([step_model(step_family, a, b).mean() for a, b in zip(params.shape, params.scale)])
    if params.zero is not None:
        means = means * (1.0 - params.zero)
    params = params.permuted(np.argsort(means, kind="stable"))
    return HmmFit(params, -float(best.fun), obs.n_obs, n_starts,
                  int(np.count_nonzero(values <= values.min() + BEST_TOLERANCE)), bool(best.success))


def _bounds(layout: Layout, obs: Observations) -> list[tuple[float, float]]:
    k = layout.n_states
    x = obs.step_pos
    log_scale = (math.log(x.min()) - 5.0, math.log(x.max()) + 5.0) if x.size else (-10.0, 20.0)
    conc = LOG_KAPPA if layout.turn_family == "von_mises" else LOGIT
    out = [LOG_SHAPE] * k + [log_scale] * k + [MU] * k + [conc] * k + [LOGIT] * (k * (k - 1))
    return out + [LOGIT] * (k if layout.zero_mass else 0)


def _start(layout: Layout, obs: Observations, rng: np.random.Generator, first: bool) -> HmmParams:
    """A starting point: deterministic quantiles for the first, random around the data after."""
    k = layout.n_states
    x = obs.step_pos if obs.step_pos.size else np.ones(1)
    if first:
        q = (np.arange(k) + 0.5) / k
        cv = np.full(k, 0.8)
        stay = np.full(k, 0.8)
    else:
        q = np.sort(rng.uniform(0.05, 0.95, k))
        cv = rng.uniform(0.4, 1.4, k)
        stay = rng.uniform(0.5, 0.97, k)
    mean = np.quantile(x, q)
    shape, scale = start_step(layout.step_family, mean, cv)
    mu, r = _turn_start(obs, mean, k)
    if not first:
        mu = mu + rng.normal(0.0, 0.5, k)
        r = rng.uniform(0.05, 0.8, k)
    gamma = np.where(np.eye(k, dtype=bool), stay[:, None], ((1.0 - stay) / max(k - 1, 1))[:, None])
    if k == 1:
        gamma = np.ones((1, 1))
    zero = None
    if layout.zero_mass:
        share = obs.zeros.size / max(obs.n_obs, 1)
        zero = np.full(k, min(max(share, 1e-3), 0.5)) if first else rng.uniform(1e-3, 0.5, k)
    return HmmParams(layout.step_family, layout.turn_family, shape, scale, zero, mu,
                     concentration(layout.turn_family, r), gamma)


def _turn_start(obs: Observations, mean: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray]:
    """Circular mean and mean resultant length of the turns nearest each state's mean step."""
    step = obs.chain.step_m[obs.turns]
    ok = np.isfinite(step) & (step > 0)
    mu, r = np.zeros(k), np.full(k, 0.3)
    if not np.any(ok):
        return mu, r
    group = np.argmin(np.abs(np.log(step[ok])[:, None] - np.log(mean)[None, :]), axis=1)
    for j in range(k):
        z = np.exp(1j * obs.turn_obs[ok][group == j])
        if z.size:
            m = z.mean()
            mu[j], r[j] = np.angle(m), abs(m)
    return mu, r


__all__ = ["BEST_TOLERANCE", "HmmFit", "fit_hmm"]
