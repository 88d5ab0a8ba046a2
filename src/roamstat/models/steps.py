"""Light-tailed step-length families backed by scipy.stats.

Exponential, gamma, Weibull and lognormal, each with the location fixed at 0
(``floc=0``), fitted by maximum likelihood.  The same class also holds a fit
*left-truncated at xmin* (density f(x) / S(xmin) on x >= xmin), used for the
tail comparison against the power laws, so that every model in that
comparison describes the same observations (Clauset et al. 2009, §5).

Full-range fits use scipy's own MLE (``dist.fit(x, floc=0)``).  Truncated
fits (exponential and lognormal only, the alternatives Clauset et al. test the
power law against): the exponential has the closed form rate = 1 / (mean - xmin)
(memorylessness); the lognormal maximises the truncated-normal likelihood of
ln x numerically (bounded Nelder-Mead on meanlog and ln sdlog, from its
sufficient statistics, started at the untruncated estimate; sdlog is capped at
``LOGNORMAL_TAIL_MAX_SDLOG``, see there).

References
----------
Clauset, A., Shalizi, C. R. & Newman, M. E. J. (2009). Power-law
distributions in empirical data. SIAM Review 51: 661-703.
Johnson, N. L., Kotz, S. & Balakrishnan, N. (1994). Continuous Univariate
Distributions, vol. 1, 2nd ed. Wiley (moments of the truncated families).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy import optimize, special, stats

from roamstat.models.base import StepModel, plain_params


# A left-truncated lognormal approaches a power law as meanlog -> -inf with sdlog growing
# (Clauset et al. 2009, §5); on power-law-like data its likelihood has no finite maximum.
# Capping sdlog keeps the fit finite; at the cap the lognormal is, over any realistic range of
# step lengths, a power law with a slight bend, so a Vuong comparison is rightly inconclusive.
LOGNORMAL_TAIL_MAX_SDLOG = 10.0


@dataclass(frozen=True)
class StepFamily:
    """How one scipy family maps to our parameter names."""

    name: str
    keys: tuple[str, ...]
    dist: stats.rv_continuous  # the scipy.stats distribution
    args: Callable[[dict], tuple]  # params -> (shape arguments, scale); scipy's freezing is slow
    fit_full: Callable[[np.ndarray], dict]  # MLE on x > 0, location 0
    fit_tail: Callable[[np.ndarray, float], dict] | None  # MLE left-truncated at xmin (tail families only)
    moment: Callable[[dict, int, float], float]  # E[X^k | X >= a]
    label: str = ""  # the name in prose (the report's methods text), when not the plain name

    @property
    def prose(self) -> str:
        return self.label or self.name


def _expon_args(p):
    return (), 1.0 / p["rate"]


def _expon_fit(x):
    _, scale = stats.expon.fit(x, floc=0)
    return plain_params(rate=1.0 / scale)


def _expon_moment(p, k, a):
    # memoryless: X | X >= a is a + Exp(rate)
    m = 1.0 / p["rate"]
    return a + m if k == 1 else a * a + 2.0 * a * m + 2.0 * m * m


def _expon_fit_tail(x, xmin):
    # X - xmin is exponential again (memoryless), so the MLE is 1 / mean excess
    return plain_params(rate=1.0 / (np.mean(x) - xmin))  # inf when all x == xmin: caught by the caller


def _gamma_args(p):
    return (p["shape"],), p["scale"]


def _gamma_fit(x):
    shape, _, scale = stats.gamma.fit(x, floc=0)
    return plain_params(shape=shape, scale=scale)


def _gamma_moment(p, k, a):
    shape, scale = p["shape"], p["scale"]
    ratio = special.gammaincc(shape + k, a / scale) / special.gammaincc(shape, a / scale)
    return float(scale**k * math.exp(special.gammaln(shape + k) - special.gammaln(shape)) * ratio)


def _weibull_args(p):
    return (p["shape"],), p["scale"]


def _weibull_fit(x):
    shape, _, scale = stats.weibull_min.fit(x, floc=0)
    return plain_params(shape=shape, scale=scale)


def _weibull_moment(p, k, a):
    c, scale = p["shape"], p["scale"]
    z = (a / scale) ** c
    upper = special.gammaincc(1.0 + k / c, z) * math.exp(special.gammaln(1.0 + k / c))
    return float(scale**k * upper / math.exp(-z))


def _lognorm_args(p):
    return (p["sdlog"],), math.exp(p["meanlog"])


def _lognorm_fit(x):
    s, _, scale = stats.lognorm.fit(x, floc=0)
    return plain_params(meanlog=math.log(scale), sdlog=s)


def _lognorm_fit_tail(x, xmin):
    # truncated normal likelihood of ln x, through its sufficient statistics
    lx = np.log(x)
    l1, l2, a = float(np.mean(lx)), float(np.mean(lx * lx)), math.log(xmin)

    def nll(v):
        mu, s = v[0], math.exp(v[1])
        return math.log(s) + (l2 - 2.0 * mu * l1 + mu * mu) / (2.0 * s * s) + special.log_ndtr((mu - a) / s)

    log_s_max = math.log(LOGNORMAL_TAIL_MAX_SDLOG)
    start = [l1, min(math.log(max(float(np.std(lx)), 1e-6)), log_s_max)]
    bounds = [(a - 50.0 * LOGNORMAL_TAIL_MAX_SDLOG**2, None), (math.log(1e-6), log_s_max)]
    res = optimize.minimize(nll, start, method="Nelder-Mead", bounds=bounds,
                            options={"xatol": 1e-10, "fatol": 1e-13, "maxiter": 4000})
    return plain_params(meanlog=res.x[0], sdlog=math.exp(res.x[1]))


def _lognorm_moment(p, k, a):
    mu, s = p["meanlog"], p["sdlog"]
    if a <= 0:
        return math.exp(k * mu + 0.5 * k * k * s * s)
    la = math.log(a)
    # E[X^k; X >= a] / P(X >= a), both in log form for stability
    log_num = k * mu + 0.5 * k * k * s * s + special.log_ndtr((mu + k * s * s - la) / s)
    return math.exp(log_num - special.log_ndtr((mu - la) / s))


FAMILIES = {
    f.name: f
    for f in (
        StepFamily("exponential", ("rate",), stats.expon, _expon_args, _expon_fit, _expon_fit_tail,
                   _expon_moment),
        StepFamily("gamma", ("shape", "scale"), stats.gamma, _gamma_args, _gamma_fit, None, _gamma_moment),
        StepFamily("weibull", ("shape", "scale"), stats.weibull_min, _weibull_args, _weibull_fit, None,
                   _weibull_moment, "Weibull"),
        StepFamily("lognormal", ("meanlog", "sdlog"), stats.lognorm, _lognorm_args, _lognorm_fit,
                   _lognorm_fit_tail, _lognorm_moment),
    )
}
#: The registry of light-tailed step families: every one is fitted to all steps (the ``full`` set).
FULL_RANGE = tuple(FAMILIES)
TAIL_REFIT = tuple(name for name, f in FAMILIES.items() if f.fit_tail is not None)


class ScipyStepModel(StepModel):
    """A scipy-backed step model, full range (xmin = 0) or left-truncated at xmin."""

    def __init__(self, family: StepFamily, params: dict, n: int, loglik: float, xmin: float = 0.0):
        self.family = family
        self.name = family.name
        self.params = params
        self.n = int(n)
        self.k = len(family.keys)
        self.loglik = float(loglik)
        self.xmin = float(xmin)
        self.support = (self.xmin, math.inf)

    def _call(self, method: str, x):
        shapes, scale = self.family.args(self.params)
        return getattr(self.family.dist, method)(x, *shapes, scale=scale)

    def _log_sf_min(self) -> float:
        return float(self._call("logsf", self.xmin)) if self.xmin > 0 else 0.0

    def logpdf(self, x):
        x = np.asarray(x, dtype=float)
        with np.errstate(divide="ignore"):
            out = self._call("logpdf", x) - self._log_sf_min()
        return np.where(x >= self.xmin, out, -np.inf)

    def cdf(self, x):
        x = np.asarray(x, dtype=float)
        if self.xmin <= 0:
            return self._call("cdf", x)
        # 1 - S(x) / S(xmin) in log form: S(xmin) may be below the smallest float
        log_ratio = self._call("logsf", np.maximum(x, self.xmin)) - self._log_sf_min()
        return np.clip(-np.expm1(log_ratio), 0.0, 1.0)

    def sample(self, n, rng):
        shapes, scale = self.family.args(self.params)
        if self.xmin <= 0:
            return np.asarray(self.family.dist.rvs(*shapes, scale=scale, size=n, random_state=rng), dtype=float)
        # inverse CDF of the truncated law: S(x) = u * S(xmin), u in (0, 1]
        u = 1.0 - rng.random(n)
        return np.asarray(self._call("isf", u * self._call("sf", self.xmin)), dtype=float)

    def mean(self):
        return self.family.moment(self.params, 1, self.xmin)

    def second_moment(self):
        return self.family.moment(self.params, 2, self.xmin)

    def refit(self, x):
        return fit_step_family(self.family.name, x, self.xmin)


def fit_step_family(name: str, x: np.ndarray, xmin: float = 0.0) -> ScipyStepModel:
    """Maximum-likelihood fit of one light-tailed family.

    Parameters
    ----------
    name : str
        One of ``exponential``, ``gamma``, ``weibull``, ``lognormal``.
    x : ndarray
        Positive step lengths (all >= xmin).
    xmin : float
        0 for a full-range fit; otherwise the likelihood is left-truncated at
        ``xmin`` (each density divided by the survival function at xmin).

    Returns
    -------
    ScipyStepModel
    """
    family = FAMILIES[name]
    x = np.asarray(x, dtype=float)
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        # scipy's optimisers warn on flat or extreme likelihoods; the result is checked below
        warnings.simplefilter("ignore", RuntimeWarning)
        if xmin <= 0:
            params = family.fit_full(x)
        else:
            assert family.fit_tail is not None, "only TAIL_REFIT families are fitted above xmin"
            params = family.fit_tail(x, xmin)
        model = ScipyStepModel(family, params, x.size, 0.0, xmin)
        model.loglik = float(np.sum(model.logpdf(x)))
    if not (np.isfinite(model.loglik) and all(np.isfinite(v) for v in params.values())):
        raise FloatingPointError(f"{name} fit did not converge")
    return model

