"""Bootstrap p-values for the power-law tail: truncation test and goodness of fit.

Truncation test (``truncated_power_law`` row, ``vuong_p``)
---------------------------------------------------------
The likelihood-ratio statistic LR = 2 (ln L_truncated - ln L_power) compares
the truncated power law, with xmax fitted at the largest observation, against
the plain power law on the same tail x >= xmin.  xmax sits at an endpoint of
the sample, so Wilks' chi-square(1) reference does not hold (it rejects true
power laws about three times too often at 5 %).  Instead the p-value is a
parametric bootstrap under the fitted plain power law (Efron & Tibshirani
1993, ch. 16), conditional on xmin and the tail size n.  With
u = ln(x / xmin) the power law makes u exponential, and LR depends on the
data only through n, the mean of u and its maximum, and is unchanged when u
is rescaled; its null distribution therefore depends on n alone, so the
replicates draw standard exponentials and the test is exact up to Monte Carlo
error.  The truncated law's exponent in each replicate is the root of the
likelihood equation E_a[u] = mean(u) for the density proportional to e^(a u)
on [0, ln(xmax/xmin)] (a = 1 - alpha), found by bisection for all replicates
at once.

Goodness of fit (``power_law`` row, ``gof_p``)
----------------------------------------------
Clauset, Shalizi & Newman (2009), §4.1: the KS distance of the fitted power
law is compared with its distribution in semiparametric bootstrap samples of
the whole step set (each value, with probability n_tail / n, is drawn from the
fitted power law, otherwise resampled from the steps below xmin), each refitted
from scratch including the xmin scan.  p = (1 + #{D_b >= D}) / (1 + B).
Small p (Clauset et al. use p <= 0.1) rules the power law out.  To bound the
cost, D is the smallest KS distance over a grid of xmin candidates evenly
spaced by rank, for the data and every replicate alike (so like is compared
with like): ``GOF_CANDIDATES`` of them, fewer on long tracks so that
candidates x n x replicates stays within ``GOF_CELLS`` (at least
``GOF_MIN_CANDIDATES``).  The reported xmin comes from the full scan.

References
----------
Clauset, A., Shalizi, C. R. & Newman, M. E. J. (2009). Power-law
distributions in empirical data. SIAM Review 51: 661-703.
Efron, B. & Tibshirani, R. J. (1993). An Introduction to the Bootstrap.
Chapman & Hall.
"""

from __future__ import annotations

import math

import numpy as np

from roamstat.models.powerlaw_tail import ALPHA_BOUNDS, scan_xmin_distance

LR_REPLICATES = 999  # cheap: one exponential sample per replicate, no numerical optimiser
GOF_REPLICATES = 100  # each replicate rescans xmin; +-0.03 Monte Carlo error on p near 0.1
GOF_CANDIDATES = 100  # most xmin candidates per scan in the goodness-of-fit test
GOF_MIN_CANDIDATES = 10
GOF_CELLS = 20_000_000  # candidates x n x replicates per animal: bounds the test's cost on long tracks
_CHUNK_CELLS = 2_000_000  # replicate values drawn at once (memory bound ~16 MB)
_BISECTIONS = 60


def _log_integral(a: np.ndarray, t: np.ndarray) -> np.ndarray:
    """ln of the integral of e^(a u) over [0, t], stable for every real a."""
    at = a * t
    small = np.abs(at) < 1e-8
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        pos = at + np.log(-np.expm1(-at)) - np.log(a)
        neg = np.log(-np.expm1(at)) - np.log(-a)
    return np.where(small, np.log(t) + at / 2.0, np.where(at > 0, pos, neg))


def _mean_u(a: np.ndarray, t: np.ndarray) -> np.ndarray:
    """E[u] for the density proportional to e^(a u) on [0, t] (increasing in a)."""
    at = a * t
    small = np.abs(at) < 1e-8
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        exact = t / -np.expm1(-at) - 1.0 / a
    return np.where(small, t / 2.0 + a * t * t / 12.0, exact)


def truncation_lr(mean_u, max_u) -> np.ndarray:
    """LR = 2 (ln L_truncated - ln L_power) per unit of tail size n, vectorised.

    Parameters
    ----------
    mean_u, max_u : array_like
        Mean and maximum of u = ln(x / xmin) over the tail.

    Returns
    -------
    ndarray
        LR / n; multiply by n for the statistic.
    """
    mean_u, t = np.asarray(mean_u, dtype=float), np.asarray(max_u, dtype=float)
    lo = np.full(mean_u.shape, 1.0 - ALPHA_BOUNDS[1])
    hi = np.full(mean_u.shape, 1.0 - ALPHA_BOUNDS[0])
    for _ in range(_BISECTIONS):
        mid = 0.5 * (lo + hi)
        below = _mean_u(mid, t) < mean_u
        lo, hi = np.where(below, mid, lo), np.where(below, hi, mid)
    a = 0.5 * (lo + hi)
    # per observation: ln L_T = -ln xmin - (1 - a) mean_u - ln I(a, t);  ln L_P = -ln mean_u - ln xmin - mean_u - 1
    return 2.0 * (a * mean_u - _log_integral(a, t) + np.log(mean_u) + 1.0)


def truncation_p_value(tail: np.ndarray, xmin: float, rng: np.random.Generator,
                       replicates: int = LR_REPLICATES) -> tuple[float, float]:
    """Bootstrap p-value of truncated against plain power law (module docstring).

    Parameters
    ----------
    tail : ndarray
        The tail observations x >= xmin.
    xmin : float
        Lower bound of the tail.
    rng : numpy.random.Generator
        Source of the replicates.
    replicates : int
        Number of bootstrap replicates.

    Returns
    -------
    lr, p : float
        The observed statistic and its p-value (NaN for fewer than two distinct values).
    """
    u = np.log(np.asarray(tail, dtype=float) / xmin)
    n = u.size
    if n < 2 or u.max() <= 0:
        return math.nan, math.nan
    observed = n * float(truncation_lr(u.mean(), u.max()))
    exceed = 0
    per_chunk = max(1, _CHUNK_CELLS // n)
    for start in range(0, replicates, per_chunk):
        e = rng.standard_exponential((min(per_chunk, replicates - start), n))
        # ties at the observed value count as exceedances; the 1e-9 absorbs bisection round-off
        exceed += int(np.sum(n * truncation_lr(e.mean(axis=1), e.max(axis=1)) >= observed - 1e-9 * n))
    return observed, (1.0 + exceed) / (1.0 + replicates)


def goodness_of_fit_p_value(x: np.ndarray, xmin: float, exponent: float, rng: np.random.Generator,
                            replicates: int = GOF_REPLICATES) -> float:
    """Clauset et al. (2009, §4.1) semiparametric-bootstrap p-value of the power-law fit.

    Parameters
    ----------
    x : ndarray
        All step lengths the tail was selected from.
    xmin, exponent : float
        The fitted power law.
    rng : numpy.random.Generator
        Source of the replicates.
    replicates : int
        Number of bootstrap replicates.

    Returns
    -------
    float
        p-value; NaN when no replicate could be refitted.
    """
    x = np.sort(np.asarray(x, dtype=float))
    grid = int(np.clip(GOF_CELLS // max(1, replicates * x.size), GOF_MIN_CANDIDATES, GOF_CANDIDATES))
    observed = scan_xmin_distance(x, grid)
    if observed is None:
        return math.nan
    body = x[x < xmin]
    n = x.size
    share = float(np.mean(x >= xmin))
    exceed, done = 0, 0
    for _ in range(replicates):
        n_tail = rng.binomial(n, share) if body.size else n
        draw = np.concatenate([xmin * (1.0 - rng.random(n_tail)) ** (-1.0 / (exponent - 1.0)),
                               rng.choice(body, n - n_tail) if n_tail < n else body[:0]])
        found = scan_xmin_distance(np.sort(draw), grid)
        if found is None:
            continue
        done += 1
        exceed += found[1] >= observed[1]
    return (1.0 + exceed) / (1.0 + done) if done else math.nan
