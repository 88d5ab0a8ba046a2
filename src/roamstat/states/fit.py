"""Maximum-likelihood fit of a K-state movement HMM from many random starts.

The negative log-likelihood (scaled forward algorithm) is minimised over the
unconstrained parameters (:mod:`roamstat.states.params`) by BFGS
(:mod:`roamstat.states.bfgs`) with
the exact gradient of :meth:`Observations.loglik_and_gradient` (bounds on the
free parameters are enforced by clipping), from ``n_starts`` starting points: the first from
quantiles of the step lengths, the others drawn at random around the data
(state means at sorted random quantiles of the steps, random coefficients of
variation, concentrations and persistence).  A likelihood with several local
maxima is the rule for HMMs, so the best of many starts is taken and the
number of starts that reached it (within ``BEST_TOLERANCE``) is reported
(Zucchini, MacDonald & Langrock 2016, §3.4.2; Michelot, Langrock & Patterson
2016).  States are then ordered by mean step length, state 1 slowest.

A one-state model is fitted from one start only, the first (for K = 1 its
step law from the moments of the steps): with one state the likelihood
separates into the step law, the turn law and the zero mass, each of which
has a single maximum (gamma and Weibull: the profile likelihood of the shape
is unimodal, Johnson, Kotz & Balakrishnan 1994, chapters 17 and 21; von Mises:
Mardia & Jupp 2000, §5.3.1; both from memory; wrapped Cauchy: Kent & Tyler 1988;
the zero mass: a binomial proportion), so further starts only find it again.
It reports ``n_starts = n_best_starts = 1``.

Long chains (more than ``SCREEN_ABOVE`` slots) screen the starts on a
systematic subsample: ``SCREEN_WINDOWS`` contiguous windows of the chain,
evenly spaced, ``SCREEN_SLOTS`` slots in all, each window a fresh piece of
chain (it starts from the initial distribution, as after a gap).  Every start
is optimised on the subsample; the ``POLISH`` best are then optimised on the
whole chain from there, BFGS starting from the subsample's inverse Hessian
scaled by the ratio of observations (the information grows in proportion),
and the best of these is the fit.  A polish ends when ``POLISH_PATIENCE``
iterations together gained less than ``BEST_TOLERANCE`` (on a flat, over-
parameterised surface BFGS otherwise creeps on for dozens of costly whole-chain
evaluations), or when the gradient is within floating point's reach on a
chain that long (:func:`_reachable_gtol`).  The count of starts reaching the best is
then the subsample's.  The starting points are the same draws as without
screening, and chains up to ``SCREEN_ABOVE`` slots are fitted exactly as
before.  (Fitting candidate starts on part of the data and refining the best
on all of it is the usual two-stage multi-start strategy, e.g. Zucchini,
MacDonald & Langrock 2016, §3.4.2 advise many starts; the subsample
is our choice of how to afford them on a 2,000,000-step chain.)

References
----------
Gill, P. E., Murray, W. & Wright, M. H. (1981). Practical Optimization.
Academic Press.
Johnson, N. L., Kotz, S. & Balakrishnan, N. (1994). Continuous Univariate
Distributions, vol. 1, 2nd ed. Wiley.
Kent, J. T. & Tyler, D. E. (1988). Maximum likelihood estimation for the
wrapped Cauchy distribution. Journal of Applied Statistics 15: 247-254.
Mardia, K. V. & Jupp, P. E. (2000). Directional Statistics. Wiley.
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

from roamstat.states import bfgs
from roamstat.states.chain import Chain
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

#: BFGS iterations of one start before it stops unconverged (judgement, no source: rarely reached).
MAX_ITERATIONS = 1000

#: Relative rounding of a double, square-rooted: the reach of a gradient on a long chain.
SQRT_EPS = math.sqrt(np.finfo(float).eps)

#: Value returned where the likelihood is not finite (the optimiser needs finite numbers).
HUGE = 1e100

#: Chains longer than this (slots) screen their starts on a subsample of ``SCREEN_SLOTS`` slots
#: in ``SCREEN_WINDOWS`` evenly spaced windows, then polish the ``POLISH`` best on the whole
#: chain (judgement, no source: 10,000 slots pin a 3-state model's optima down well, and the
#: windows sample the whole deployment, seasons included).
SCREEN_ABOVE = 60_000
SCREEN_SLOTS = 10_000
SCREEN_WINDOWS = 20
POLISH = 2
#: A polish on the whole chain stops once its last ``POLISH_PATIENCE`` iterations gained less
#: than ``BEST_TOLERANCE`` log-likelihood together (what counts as the same optimum anyway).
POLISH_PATIENCE = 3


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
        Starting points (the first is deterministic); one only when ``n_states`` is 1.
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
    screen = screening_subsample(obs)
    results = []
    n_starts = 1 if n_states == 1 else n_starts  # a single maximum (module docstring)
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore", RuntimeWarning)
        for s in range(n_starts):
            theta0 = np.clip(layout.pack(_start(layout, obs, rng, first=s == 0)), lo, hi)
            res = (_minimise(obs, layout, lo, hi, theta0) if screen is None
                   else _minimise(screen, layout, lo, hi, theta0, gtol=_reachable_gtol(screen)))
            if res.fun < HUGE:
                results.append(res)
        screened = np.array([r.fun for r in results])
        if screen is not None and results:
            # the information grows with the observations: the inverse Hessian shrinks in proportion
            ratio = screen.n_obs / max(obs.n_obs, 1)
            polished = [_minimise(obs, layout, lo, hi, r.x, r.hess_inv * ratio, _reachable_gtol(obs))
                        for r in (results[i] for i in np.argsort(screened, kind="stable")[:POLISH])]
            results = [r for r in polished if r.fun < HUGE]
    if not results:
        return None
    best = min(results, key=lambda r: r.fun)
    params = layout.unpack(np.clip(best.x, lo, hi))
    means = np.array([step_model(step_family, a, b).mean() for a, b in zip(params.shape, params.scale)])
    if params.zero is not None:
        means = means * (1.0 - params.zero)
    params = params.permuted(np.argsort(means, kind="stable"))
    return HmmFit(params, -float(best.fun), obs.n_obs, n_starts,
                  int(np.count_nonzero(screened <= screened.min() + BEST_TOLERANCE)), bool(best.success))


def _minimise(obs: Observations, layout: Layout, lo: np.ndarray, hi: np.ndarray, theta0: np.ndarray,
              hess_inv0: np.ndarray | None = None, gtol: float = GTOL):
    """BFGS on the negative log-likelihood of ``obs``, the bounds applied by clipping."""

    def nll(theta):
        inside = np.clip(theta, lo, hi)
        ll, grad = obs.loglik_and_gradient(layout, inside)
        if not np.isfinite(ll):
            return HUGE, np.zeros_like(theta)
        return -ll, np.where(inside == theta, -grad, 0.0)  # flat beyond the clipping bounds

    callback = None
    if hess_inv0 is not None:
        callback = _stalled(POLISH_PATIENCE, BEST_TOLERANCE)
        hess_inv0 = 0.5 * (hess_inv0 + hess_inv0.T)
        if not (np.all(np.isfinite(hess_inv0)) and np.all(np.linalg.eigvalsh(hess_inv0) > 0)):
            hess_inv0 = None  # BFGS starts from the identity, as usual
    result = bfgs.minimise(nll, theta0, hess_inv0, gtol=gtol, maxiter=MAX_ITERATIONS, callback=callback)
    if callback is not None and callback.stalled:
        result.success = True  # stopped by the stall rule: converged by that rule's standard
    return result


class _stalled:
    """A BFGS callback that ends the run once ``patience`` iterations gained less than ``tolerance``."""

    def __init__(self, patience: int, tolerance: float) -> None:
        self.patience, self.tolerance = patience, tolerance
        self.values: list[float] = []
        self.stalled = False

    def __call__(self, intermediate_result) -> None:
        self.values.append(float(intermediate_result.fun))
        if len(self.values) > self.patience and self.values[-self.patience - 1] - self.values[-1] < self.tolerance:
            self.stalled = True
            raise StopIteration


def _reachable_gtol(obs: Observations) -> float:
    """``GTOL``, or the smallest gradient a long chain's rounding lets BFGS resolve when larger.

    The log-likelihood sums ``n`` terms, so its rounding error grows like
    eps * n while its curvature grows like n: a line search cannot see the
    decrease a gradient g still promises (about g^2 / n) once g is below about
    sqrt(eps) * n, and BFGS would only spend evaluations until the search fails
    (the sqrt(eps) limit on attainable accuracy, Gill, Murray & Wright 1981,
    §8.2.2, from memory).  That is ``GTOL`` up to about 67,000 observations and
    0.03 on 2,000,000.
    """
    return max(GTOL, SQRT_EPS * obs.n_obs)


def screening_subsample(obs: Observations) -> Observations | None:
    """The chain's screening subsample (``SCREEN_WINDOWS`` evenly spaced windows), or None when short."""
    n = obs.n_slots
    if n <= SCREEN_ABOVE:
        return None
    width = SCREEN_SLOTS // SCREEN_WINDOWS
    starts = np.linspace(0, n - width, SCREEN_WINDOWS).astype(np.int64)
    take = (starts[:, None] + np.arange(width)[None, :]).ravel()
    chain = obs.chain
    restart = chain.restart[take].copy()
    restart[::width] = True  # each window is a piece of chain of its own
    none = np.zeros(0, bool)
    sub = Chain(chain.step_m[take], chain.turn_rad[take], restart, np.zeros(0, np.int64), none, none,
                chain.nominal_dt_s)
    screen = Observations(sub, obs.zero_step_m)
    return screen if screen.n_obs >= SCREEN_SLOTS // 2 else None  # mostly gaps there: fit on the whole chain


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
    if k == 1 and x.size > 1 and x.std() > 0:  # one state: its law's moments (the fit's only start)
        mean, cv = np.full(1, x.mean()), np.full(1, x.std() / x.mean())
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


__all__ = ["BEST_TOLERANCE", "HmmFit", "fit_hmm", "screening_subsample"]
