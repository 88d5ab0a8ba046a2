"""Power-law and truncated power-law step-length tails (hand-written).

Power law, x >= xmin:  p(x) = (alpha - 1) / xmin * (x / xmin)^(-alpha).
The exponent has the closed-form MLE  alpha = 1 + n [sum ln(x_i / xmin)]^-1
(Clauset et al. 2009, eq. 3.1); xmin is the candidate that minimises the
Kolmogorov-Smirnov distance between the tail data and the fitted law
(Clauset et al. 2009, §3.3, eq. 3.9).

Candidate xmin values: the distinct observed values in the lower 90 % of the
sorted data that leave at least ``MIN_TAIL`` observations in the tail.  All
of them are scanned while candidates x observations stays below
``SCAN_CELLS`` (every candidate for tracks up to about 2,000 steps); beyond
that an evenly spaced subset by rank (quantiles) of
max(``MIN_CANDIDATES``, SCAN_CELLS / n) candidates is scanned, so the cost
stays bounded however long the track.  The scan is vectorised.

Truncated power law, xmin <= x <= xmax:  p(x) = x^(-alpha) / Z(alpha) with
Z = (xmax^(1-alpha) - xmin^(1-alpha)) / (1 - alpha)  (ln(xmax/xmin) at
alpha = 1).  The exponent (any real, the law being bounded) is found by
numerical maximisation of the likelihood for the given bounds; xmax defaults
to the largest observation, which is its MLE, and then counts as a fitted
parameter (k = 2).  In the Lévy-walk literature this is the truncated Pareto
law (e.g. Humphries et al. 2012).  Both laws are sampled by inverse CDF.

References
----------
Clauset, A., Shalizi, C. R. & Newman, M. E. J. (2009). Power-law
distributions in empirical data. SIAM Review 51: 661-703.
Casella, G. & Berger, R. L. (2002). Statistical Inference, 2nd ed. Duxbury.
Humphries, N. E., Weimerskirch, H., Queiroz, N., Southall, E. J. & Sims, D. W.
(2012). Foraging success of biological Lévy flights recorded in situ. PNAS
109: 7169-7174.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import optimize

from roamstat.models.base import StepModel, plain_params

MIN_TAIL = 10  # fewest tail observations for an exponent worth reporting (common practice, no source)
XMIN_QUANTILE = 0.9  # xmin candidates come from the lower 90 % of the data
SCAN_CELLS = 4_000_000
MIN_CANDIDATES = 300
_CHUNK_CELLS = 2_000_000  # candidates x observations evaluated at once (memory bound ~16 MB)
ALPHA_BOUNDS = (-20.0, 20.0)  # search interval for the truncated law's exponent


class PowerLaw(StepModel):
    """Continuous power law on x >= xmin (Clauset et al. 2009, eq. 2.2)."""

    name = "power_law"
    k = 1  # xmin is conditioned on, as for every model of the tail comparison
    fixed_keys = ("xmin",)

    def __init__(self, exponent: float, xmin: float, n: int, loglik: float):
        self.params = plain_params(exponent=exponent, xmin=xmin)
        self.alpha, self.xmin = float(exponent), float(xmin)
        self.n, self.loglik = int(n), float(loglik)
        self.support = (self.xmin, math.inf)

    def logpdf(self, x):
        x = np.asarray(x, dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            out = math.log(self.alpha - 1.0) - math.log(self.xmin) - self.alpha * np.log(x / self.xmin)
        return np.where(x >= self.xmin, out, -np.inf)

    def cdf(self, x):
        x = np.maximum(np.asarray(x, dtype=float), self.xmin)
        return -np.expm1((1.0 - self.alpha) * np.log(x / self.xmin))

    def sample(self, n, rng):
        u = 1.0 - rng.random(n)  # in (0, 1]
        return self.xmin * u ** (-1.0 / (self.alpha - 1.0))

    def _moment(self, k: int) -> float:
        a = self.alpha
        return math.inf if a <= k + 1 else self.xmin**k * (a - 1.0) / (a - 1.0 - k)

    def mean(self):
        return self._moment(1)

    def second_moment(self):
        return self._moment(2)

    def refit(self, x):
        return fit_power_law(x, xmin=self.xmin)


class TruncatedPowerLaw(StepModel):
    """Power law bounded to [xmin, xmax]."""

    name = "truncated_power_law"

    def __init__(self, exponent: float, xmin: float, xmax: float, n: int, loglik: float, xmax_fitted: bool):
        self.params = plain_params(exponent=exponent, xmin=xmin, xmax=xmax)
        self.alpha, self.xmin, self.xmax = float(exponent), float(xmin), float(xmax)
        self.n, self.loglik = int(n), float(loglik)
        self.xmax_fitted = bool(xmax_fitted)
        self.k = 2 if xmax_fitted else 1
        self.fixed_keys = ("xmin",) if xmax_fitted else ("xmin", "xmax")
        self.endpoint_keys = ("xmax",) if xmax_fitted else ()
        self.support = (self.xmin, self.xmax)

    def logpdf(self, x):
        x = np.asarray(x, dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            out = -self.alpha * np.log(x) - log_norm_const(self.alpha, self.xmin, self.xmax)
        return np.where((x >= self.xmin) & (x <= self.xmax), out, -np.inf)

    def cdf(self, x):
        x = np.clip(np.asarray(x, dtype=float), self.xmin, self.xmax)
        a, t = 1.0 - self.alpha, math.log(self.xmax / self.xmin)
        if abs(a * t) < 1e-12:
            return np.log(x / self.xmin) / t
        return np.expm1(a * np.log(x / self.xmin)) / math.expm1(a * t)

    def sample(self, n, rng):
        u = rng.random(n)
        a, t = 1.0 - self.alpha, math.log(self.xmax / self.xmin)
        if abs(a * t) < 1e-12:
            return self.xmin * np.exp(u * t)
        # invert F(x) = expm1(a ln(x/xmin)) / expm1(a t)
        out = self.xmin * np.exp(np.log1p(u * math.expm1(a * t)) / a)
        return np.clip(out, self.xmin, self.xmax)

    def _moment(self, k: int) -> float:
        # E[X^k] = Z(alpha - k) / Z(alpha)
        return math.exp(log_norm_const(self.alpha - k, self.xmin, self.xmax)
                        - log_norm_const(self.alpha, self.xmin, self.xmax))

    def mean(self):
        return self._moment(1)

    def second_moment(self):
        return self._moment(2)

    def endpoint_interval(self, key: str, level: float) -> list:
        """One-sided interval [largest step, c] for a fitted xmax (exact when alpha is known).

        The largest of n steps, M, has P(M <= m) = F(m; xmax)^n, which is
        uniform at the true xmax; c is the xmax with F(M; c)^n = 1 - level, so
        the interval covers the true xmax with probability ``level``
        (a pivot on the maximum; Casella & Berger 2002, §9.2.3).  The exponent
        is plugged in at its estimate.  c is None (unbounded) when even an
        untruncated power law makes the observed maximum that likely.
        """
        if key != "xmax" or not self.xmax_fitted:
            raise KeyError(key)
        q = (1.0 - level) ** (1.0 / self.n)  # F(M; c) at the bound
        a, s = 1.0 - self.alpha, math.log(self.xmax / self.xmin)
        if abs(a * s) < 1e-12:
            return [self.xmax, self.xmin * math.exp(s / q)]
        inner = math.expm1(a * s) / q
        if inner <= -1.0:
            return [self.xmax, None]
        return [self.xmax, self.xmin * math.exp(math.log1p(inner) / a)]

    def refit(self, x):
        return fit_truncated_power_law(x, self.xmin, None if self.xmax_fitted else self.xmax)


def log_norm_const(alpha: float, xmin: float, xmax: float) -> float:
    """ln of Z = integral of x^-alpha over [xmin, xmax], stable for every real alpha."""
    a, t = 1.0 - alpha, math.log(xmax / xmin)
    at = a * t
    if abs(at) < 1e-12:
        return math.log(xmin) * a + math.log(t)
    if at > 0:
        # expm1(at) / a, with expm1(at) = e^at (1 - e^-at) to avoid overflow
        log_ratio = at + math.log(-math.expm1(-at)) - math.log(a)
    else:
        log_ratio = math.log(-math.expm1(at)) - math.log(-a)
    return a * math.log(xmin) + log_ratio


def power_law_exponent(x: np.ndarray, xmin: float) -> float:
    """Closed-form MLE alpha = 1 + n / sum ln(x_i / xmin) over x_i >= xmin (Clauset et al. 2009, eq. 3.1)."""
    tail = x[x >= xmin]
    return 1.0 + tail.size / float(np.sum(np.log(tail / xmin)))


def fit_power_law(x: np.ndarray, xmin: float | None = None) -> PowerLaw | None:
    """Fit a power law to the tail of ``x``.

    Parameters
    ----------
    x : ndarray
        Positive step lengths.
    xmin : float, optional
        Lower bound of the tail; chosen by the KS scan when omitted.

    Returns
    -------
    PowerLaw or None
        None when no candidate xmin leaves ``MIN_TAIL`` distinct-enough tail values.
    """
    x = np.sort(np.asarray(x, dtype=float))
    if xmin is None:
        xmin = scan_xmin(x)
        if xmin is None:
            return None
    tail = x[x >= xmin]
    log_sum = float(np.sum(np.log(tail / xmin)))
    if tail.size == 0 or log_sum <= 0:
        return None
    alpha = 1.0 + tail.size / log_sum
    model = PowerLaw(alpha, xmin, tail.size, 0.0)
    model.loglik = float(np.sum(model.logpdf(tail)))
    return model


def scan_xmin(x_sorted: np.ndarray) -> float | None:
    """The xmin minimising the KS distance of the power-law fit (Clauset et al. 2009, §3.3).

    Parameters
    ----------
    x_sorted : ndarray
        Positive values, sorted ascending.

    Returns
    -------
    float or None
        The chosen xmin, or None without a usable candidate.
    """
    found = scan_xmin_distance(x_sorted)
    return None if found is None else found[0]


def scan_xmin_distance(x_sorted: np.ndarray, max_candidates: int | None = None) -> tuple[float, float] | None:
    """:func:`scan_xmin` together with the smallest KS distance it found.

    Parameters
    ----------
    x_sorted : ndarray
        Positive values, sorted ascending.
    max_candidates : int, optional
        Scan at most this many candidates (evenly spaced by rank); default: the
        module's bound, max(``MIN_CANDIDATES``, ``SCAN_CELLS`` / n).

    Returns
    -------
    (xmin, distance) or None
        None without a usable candidate.
    """
    n = x_sorted.size
    lnx = np.log(x_sorted)
    values, first = np.unique(x_sorted[: int(XMIN_QUANTILE * n)], return_index=True)
    keep = (n - first >= MIN_TAIL) & (values < x_sorted[-1])
    first = first[keep]
    if first.size == 0:
        return None
    cap = max(MIN_CANDIDATES, SCAN_CELLS // n) if max_candidates is None else max_candidates
    if first.size > cap:
        first = first[np.unique(np.linspace(0, first.size - 1, cap).round().astype(int))]
    suffix = np.concatenate([np.cumsum(lnx[::-1])[::-1], [0.0]])  # suffix[i] = sum_{j>=i} ln x_j
    m = n - first
    alpha = 1.0 + m / (suffix[first] - m * lnx[first])
    best_d, best_i = math.inf, None
    lo = int(first.min())
    cols = np.arange(lo, n)
    step = max(1, _CHUNK_CELLS // max(1, n - lo))
    for s in range(0, first.size, step):
        idx, a, mm = first[s:s + step], alpha[s:s + step], m[s:s + step]
        rank = cols[None, :] - idx[:, None]
        with np.errstate(invalid="ignore"):
            model_cdf = -np.expm1((1.0 - a)[:, None] * (lnx[cols][None, :] - lnx[idx][:, None]))
            gap = np.maximum((rank + 1) / mm[:, None] - model_cdf, model_cdf - rank / mm[:, None])
        d = np.where(rank >= 0, gap, -np.inf).max(axis=1)
        j = int(np.argmin(d))
        if d[j] < best_d:
            best_d, best_i = float(d[j]), int(idx[j])
    return float(x_sorted[best_i]), best_d


def fit_truncated_power_law(x: np.ndarray, xmin: float, xmax: float | None = None) -> TruncatedPowerLaw | None:
    """Numerical MLE of the exponent of a power law bounded to [xmin, xmax].

    Parameters
    ----------
    x : ndarray
        Positive step lengths; values outside [xmin, xmax] are ignored.
    xmin : float
        Lower bound (the power law's xmin, so both describe the same tail).
    xmax : float, optional
        Upper bound; the largest observation (its MLE) when omitted.

    Returns
    -------
    TruncatedPowerLaw or None
        None when the tail has fewer than two distinct values.
    """
    x = np.asarray(x, dtype=float)
    fitted = xmax is None
    upper = float(np.max(x)) if xmax is None else float(xmax)
    tail = x[(x >= xmin) & (x <= upper)]
    if tail.size < 2 or upper <= xmin:
        return None
    mean_log = float(np.mean(np.log(tail)))

    def nll(alpha):
        return alpha * mean_log + log_norm_const(alpha, xmin, upper)

    res = optimize.minimize_scalar(nll, bounds=ALPHA_BOUNDS, method="bounded", options={"xatol": 1e-10})
    model = TruncatedPowerLaw(res.x, xmin, upper, tail.size, 0.0, fitted)
    model.loglik = float(np.sum(model.logpdf(tail)))
    return model
