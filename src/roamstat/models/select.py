"""Model comparison: AIC, AICc, Akaike weights, KS statistic, Vuong's test.

References
----------
Akaike, H. (1974). A new look at the statistical model identification.
IEEE Transactions on Automatic Control 19: 716-723.
Burnham, K. P. & Anderson, D. R. (2002). Model Selection and Multimodel
Inference, 2nd ed. Springer (Akaike weights, §2.9).
Vuong, Q. H. (1989). Likelihood ratio tests for model selection and non-nested
hypotheses. Econometrica 57: 307-333.
Clauset, A., Shalizi, C. R. & Newman, M. E. J. (2009). Power-law
distributions in empirical data. SIAM Review 51: 661-703 (§5 and Appendix C).
"""

from __future__ import annotations

import math

import numpy as np
from scipy import special


def akaike_weights(aic) -> tuple[np.ndarray, np.ndarray]:
    """Delta-AIC and Akaike weights exp(-delta/2) / sum (Burnham & Anderson 2002, §2.9).

    Parameters
    ----------
    aic : array_like
        AIC values of the models in one comparison set (non-finite = left out).

    Returns
    -------
    delta, weight : ndarray
        NaN for the left-out models.
    """
    aic = np.asarray(aic, dtype=float)
    ok = np.isfinite(aic)
    delta = np.full(aic.shape, np.nan)
    weight = np.full(aic.shape, np.nan)
    if ok.any():
        delta[ok] = aic[ok] - aic[ok].min()
        rel = np.exp(-0.5 * delta[ok])
        weight[ok] = rel / rel.sum()
    return delta, weight


def ks_statistic(x, cdf) -> float:
    """Kolmogorov-Smirnov distance sup |F_n(x) - F(x)| between data and a fitted CDF.

    Evaluated on both sides of every step of the empirical CDF, which is exact
    with ties as well (Clauset et al. 2009, eq. 3.9).

    Parameters
    ----------
    x : array_like
        Observations.
    cdf : callable
        Fitted cumulative distribution function (vectorised).

    Returns
    -------
    float
    """
    x = np.sort(np.asarray(x, dtype=float))
    n = x.size
    if n == 0:
        return math.nan
    f = np.asarray(cdf(x), dtype=float)
    i = np.arange(n)
    return float(max(np.max((i + 1) / n - f), np.max(f - i / n)))


def vuong_test(loglik_a, loglik_b) -> tuple[float, float]:
    """Normalised log-likelihood ratio of model a against model b (Vuong 1989).

    As in Clauset et al. (2009), §5 and Appendix C: with pointwise
    differences d_i = ln p_a(x_i) - ln p_b(x_i), R = sum d_i and sigma^2 the
    variance of d_i, the statistic is R / (sigma sqrt(n)); positive favours a,
    with two-sided p = erfc(|stat| / sqrt 2).  For non-nested models only; the
    nested truncated-versus-plain power-law pair has its own bootstrap test in
    :mod:`roamstat.models.tail_tests`.

    Parameters
    ----------
    loglik_a, loglik_b : array_like
        Pointwise log-likelihoods of the same observations.

    Returns
    -------
    stat, p : float
    """
    d = np.asarray(loglik_a, dtype=float) - np.asarray(loglik_b, dtype=float)
    n = d.size
    if n == 0 or not np.all(np.isfinite(d)):
        return math.nan, math.nan
    r = float(d.sum())
    sigma = float(d.std())
    stat = r / (sigma * math.sqrt(n)) if sigma > 0 else 0.0
    return stat, float(special.erfc(abs(stat) / math.sqrt(2.0)))
