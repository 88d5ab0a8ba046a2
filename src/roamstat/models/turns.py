"""Turning-angle families on (-pi, pi]: uniform, von Mises, wrapped Cauchy.

Von Mises: scipy's MLE with the scale fixed at 1 (``vonmises.fit(x, fscale=1)``:
mu = circular mean, kappa solving A(kappa) = mean resultant length; Mardia &
Jupp 2000, §5.3).  Wrapped Cauchy: density from ``scipy.stats.wrapcauchy``,
whose support is [0, 2 pi) and centre 0, evaluated at (theta - mu) mod 2 pi;
mu and rho are found by numerical maximisation (Nelder-Mead on mu and
logit(rho), the same density written out), started at the trigonometric moments, which for this family are
E[exp(i theta)] = rho exp(i mu) (Mardia & Jupp 2000, §3.5.7).

The wrapped-Cauchy concentration is bounded, rho <= ``RHO_MAX`` (0.999, a
circular SD of about 2.6 degrees): when many turns are exactly equal (points
on a straight line, e.g. interpolated positions) the likelihood grows without
limit as rho -> 1 and the unbounded fit would describe the walk as perfectly
straight.  A fit that stops at the bound says so in the ``fits.csv`` note.

Von Mises draws come from a compiled sampler (:func:`von_mises_draws`): the
rejection algorithm of Best & Fisher (1979), with the envelope parameter
written without cancellation so a tiny kappa stays exact, reading its uniforms
from the caller's ``numpy.random.Generator`` (the same seed gives the same
turns) and releasing the GIL so null replicates run on threads side by side.

Mean cosine and sine (the analytic null needs them; Kareiva & Shigesada 1983):
von Mises A(kappa) cos mu, A(kappa) sin mu with A = I1/I0; wrapped Cauchy
rho cos mu, rho sin mu; uniform 0, 0.

The KS statistic for angles is measured from -pi; it depends on that origin
(Kuiper's statistic would not), which is fine for comparing families on the
same data.

References
----------
Best, D. J. & Fisher, N. I. (1979). Efficient simulation of the von Mises
distribution. Applied Statistics 28: 152-157.
Mardia, K. V. & Jupp, P. E. (2000). Directional Statistics. Wiley.
Kareiva, P. M. & Shigesada, N. (1983). Analyzing insect movement as a
correlated random walk. Oecologia 56: 234-238.
"""

from __future__ import annotations

import math
import warnings
from typing import Callable, NamedTuple

import numba
import numpy as np
from scipy import optimize, special, stats

from roamstat.models.base import TurnModel, plain_params, wrap_angle

TWO_PI = 2.0 * math.pi
#: Upper bound on the wrapped-Cauchy rho (degenerate data otherwise run to rho = 1; a numerical guard, no source).
RHO_MAX = 0.999
#: Above this kappa the von Mises law is drawn as its normal limit N(mu, 1/kappa) (Mardia & Jupp 2000,
#: §3.5.4; the rejection envelope loses precision as it nears a point mass; judgement, no source for the cut).
KAPPA_NORMAL = 1e6


class UniformTurns(TurnModel):
    """Uniform turning angles: no directional persistence."""

    name = "uniform"
    k = 0

    def __init__(self, n: int):
        self.params = {}
        self.n = int(n)
        self.loglik = -self.n * math.log(TWO_PI)

    def logpdf(self, x):
        return np.full(np.shape(x), -math.log(TWO_PI))

    def cdf(self, x):
        return (np.clip(np.asarray(x, dtype=float), -math.pi, math.pi) + math.pi) / TWO_PI

    def sample(self, n, rng):
        return wrap_angle(rng.uniform(-math.pi, math.pi, n))

    def mean_cos(self):
        return 0.0

    def mean_sin(self):
        return 0.0

    def refit(self, x):
        return fit_uniform(x)


def fit_uniform(x: np.ndarray) -> UniformTurns:
    """The uniform law has no parameters; its log-likelihood is -n ln(2 pi)."""
    return UniformTurns(np.size(x))


def _cdf_from_minus_pi(x, centred_cdf, shift, period_start):
    """CDF on (-pi, pi] of a law whose centred CDF ``centred_cdf`` runs over
    [period_start, period_start + 2 pi) in coordinates y = x - mu (``shift``)."""
    x = np.asarray(x, dtype=float)

    def centred(v):
        return np.mod(v - shift - period_start, TWO_PI) + period_start

    y, y0 = centred(x), centred(-math.pi)
    out = centred_cdf(y) - centred_cdf(y0) + (y < y0)
    return np.where(x >= math.pi, 1.0, np.clip(out, 0.0, 1.0))


class VonMisesTurns(TurnModel):
    """Von Mises turning angles (scipy.stats.vonmises)."""

    name = "von_mises"
    k = 2

    def __init__(self, mu: float, kappa: float, n: int, loglik: float):
        self.params = plain_params(mu=wrap_angle(mu), kappa=kappa)
        self.mu, self.kappa = self.params["mu"], self.params["kappa"]
        self.n, self.loglik = int(n), float(loglik)

    def logpdf(self, x):
        return stats.vonmises.logpdf(wrap_angle(np.asarray(x, dtype=float) - self.mu), self.kappa)

    def cdf(self, x):
        return _cdf_from_minus_pi(x, lambda y: stats.vonmises.cdf(y, self.kappa), self.mu, -math.pi)

    def sample(self, n, rng):
        return von_mises_draws(self.mu, self.kappa, int(n), rng)

    def sample_unit(self, n, rng):
        """Cosines and sines of ``sample(n, rng)``'s angles (see :func:`von_mises_unit`)."""
        return von_mises_unit(self.mu, self.kappa, int(n), rng)

    def _a(self) -> float:
        # A(kappa) = I1(kappa) / I0(kappa), with exponentially scaled Bessel functions
        return float(special.ive(1, self.kappa) / special.ive(0, self.kappa))

    def mean_cos(self):
        return self._a() * math.cos(self.mu)

    def mean_sin(self):
        return self._a() * math.sin(self.mu)

    def refit(self, x):
        return fit_von_mises(x)


class WrappedCauchyTurns(TurnModel):
    """Wrapped Cauchy turning angles (scipy.stats.wrapcauchy, shifted by mu)."""

    name = "wrapped_cauchy"
    k = 2
    at_bound = False  # set by fit_wrapped_cauchy when rho stopped at RHO_MAX

    def __init__(self, mu: float, rho: float, n: int, loglik: float):
        self.params = plain_params(mu=wrap_angle(mu), rho=rho)
        self.mu, self.rho = self.params["mu"], self.params["rho"]
        self.n, self.loglik = int(n), float(loglik)

    def logpdf(self, x):
        return stats.wrapcauchy.logpdf(np.mod(np.asarray(x, dtype=float) - self.mu, TWO_PI), self.rho)

    def cdf(self, x):
        return _cdf_from_minus_pi(x, lambda y: stats.wrapcauchy.cdf(y, self.rho), self.mu, 0.0)

    def sample(self, n, rng):
        # a Cauchy variate wrapped onto the circle; rho = exp(-scale) (Mardia & Jupp 2000, §3.5.7)
        return wrap_angle(self.mu - math.log(self.rho) * rng.standard_cauchy(n))

    def mean_cos(self):
        return self.rho * math.cos(self.mu)

    def mean_sin(self):
        return self.rho * math.sin(self.mu)

    def refit(self, x):
        return fit_wrapped_cauchy(x)


def von_mises_draws(mu: float, kappa: float, n: int, rng: np.random.Generator) -> np.ndarray:
    """``n`` von Mises(mu, kappa) angles on (-pi, pi], by Best & Fisher's (1979) rejection algorithm.

    The uniforms are drawn from ``rng`` in bulk (fast, and the same seed gives the same angles)
    and turned into angles by a compiled loop that releases the GIL.

    Parameters
    ----------
    mu : float
        Mean direction (rad).
    kappa : float
        Concentration, >= 0 (0: uniform; above ``KAPPA_NORMAL``: the normal limit).
    n : int
        Number of draws.
    rng : numpy.random.Generator
        The only source of randomness.

    Returns
    -------
    ndarray of float, shape (n,)

    References
    ----------
    Best, D. J. & Fisher, N. I. (1979). Applied Statistics 28: 152-157.
    """
    if kappa <= 0.0:
        return wrap_angle(rng.uniform(-math.pi, math.pi, n))
    if kappa > KAPPA_NORMAL:
        return wrap_angle(rng.normal(mu, 1.0 / math.sqrt(kappa), n))
    cos_off, sign = _best_fisher_draws(kappa, int(n), rng)
    return wrap_angle(mu + sign * np.arccos(cos_off))


def von_mises_unit(mu: float, kappa: float, n: int, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """Cosines and sines of the angles :func:`von_mises_draws` gives for the same ``rng`` state.

    A walk can turn by these directly (a rotation), with no inverse cosine here and no sine or
    cosine of the heading there.

    Returns
    -------
    cos, sin : ndarray of float, shape (n,)
    """
    if kappa <= 0.0 or kappa > KAPPA_NORMAL:
        angle = von_mises_draws(mu, kappa, n, rng)
        return np.cos(angle), np.sin(angle)
    cos_off, sign = _best_fisher_draws(kappa, int(n), rng)
    sin_off = sign * np.sqrt(1.0 - cos_off * cos_off)  # sin of +-acos(f)
    cos_mu, sin_mu = math.cos(mu), math.sin(mu)
    return cos_mu * cos_off - sin_mu * sin_off, sin_mu * cos_off + cos_mu * sin_off


def _best_fisher_draws(kappa: float, n: int, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """cos(theta - mu) and the sign of theta - mu for ``n`` von Mises draws (0 < kappa <= KAPPA_NORMAL)."""
    # Best & Fisher's tau, rho = (tau - sqrt(2 tau)) / (2 kappa) and r; rho rewritten as
    # 2 kappa tau / ((s + 1)(tau + sqrt(2 tau))), s = sqrt(1 + 4 kappa^2), which cancels nothing as kappa -> 0
    s = math.sqrt(1.0 + 4.0 * kappa * kappa)
    tau = 1.0 + s
    rho = 2.0 * kappa * tau / ((s + 1.0) * (tau + math.sqrt(2.0 * tau)))
    r = (1.0 + rho * rho) / (2.0 * rho)
    cos_off, sign = np.empty(n), np.empty(n)
    filled = 0
    while filled < n:
        # three uniforms per accepted angle plus two per rejection; the acceptance rate is above 0.65
        # (Best & Fisher 1979, Table 1), so 3.5 per angle nearly always suffices in one pass
        filled = _best_fisher(kappa, r, rng.random(int(3.5 * (n - filled)) + 64), cos_off, sign, filled)
    return cos_off, sign


@numba.njit(cache=True, nogil=True)
def _best_fisher(kappa, r, u, cos_off, sign, filled):
    """Fill ``cos_off[filled:]``, ``sign[filled:]`` from the uniforms ``u`` while they last; the new fill count."""
    j = 0
    while filled < cos_off.size and j + 3 <= u.size:
        z = math.cos(math.pi * u[j])
        f = (1.0 + r * z) / (r + z)
        c = kappa * (r - f)
        if c * (2.0 - c) > u[j + 1] or math.log(c / u[j + 1]) + 1.0 - c >= 0.0:
            cos_off[filled] = min(1.0, max(-1.0, f))
            sign[filled] = 1.0 if u[j + 2] >= 0.5 else -1.0
            filled += 1
            j += 3
        else:
            j += 2
    return filled


def fit_von_mises(x: np.ndarray) -> VonMisesTurns:
    """Von Mises MLE via ``scipy.stats.vonmises.fit(x, fscale=1)``.

    Parameters
    ----------
    x : ndarray
        Turning angles in radians.

    Returns
    -------
    VonMisesTurns
    """
    x = np.asarray(x, dtype=float)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        kappa, mu, _ = stats.vonmises.fit(x, fscale=1)
    model = VonMisesTurns(mu, kappa, x.size, 0.0)
    model.loglik = float(np.sum(model.logpdf(x)))
    return model


def fit_wrapped_cauchy(x: np.ndarray) -> WrappedCauchyTurns:
    """Wrapped Cauchy MLE (Nelder-Mead on mu and logit rho, scipy density), rho <= ``RHO_MAX``.

    Parameters
    ----------
    x : ndarray
        Turning angles in radians.

    Returns
    -------
    WrappedCauchyTurns
    """
    x = np.asarray(x, dtype=float)
    moment = np.mean(np.exp(1j * x))
    rho0 = min(max(abs(moment), 1e-3), RHO_MAX)

    def nll(v):
        # the wrapcauchy density written out (scipy's call overhead dominates at this size)
        rho = special.expit(v[1])
        if not 0.0 < rho <= RHO_MAX:
            return math.inf
        return -np.sum(np.log1p(-rho * rho) - np.log1p(rho * rho - 2.0 * rho * np.cos(x - v[0])))

    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore", RuntimeWarning)
        res = optimize.minimize(nll, [float(np.angle(moment)), float(special.logit(rho0))],
                                method="Nelder-Mead", options={"xatol": 1e-9, "fatol": 1e-11, "maxiter": 2000})
    rho = min(float(special.expit(res.x[1])), RHO_MAX)
    model = WrappedCauchyTurns(res.x[0], rho, x.size, 0.0)
    model.loglik = float(np.sum(model.logpdf(x)))
    model.at_bound = rho >= RHO_MAX * (1 - 1e-6)
    return model


class TurnFamily(NamedTuple):
    """A registered turning-angle family: its fitting function and its name in prose."""

    fit: Callable[[np.ndarray], TurnModel]
    prose: str


#: The registry of turning-angle families, all compared by AIC (``fit_animal`` fits each).
TURN_FAMILIES = {
    UniformTurns.name: TurnFamily(fit_uniform, "uniform"),
    VonMisesTurns.name: TurnFamily(fit_von_mises, "von Mises"),
    WrappedCauchyTurns.name: TurnFamily(fit_wrapped_cauchy, "wrapped Cauchy"),
}
