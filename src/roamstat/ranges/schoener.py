"""Schoener's ratio t²/r²: a diagnostic of autocorrelation between successive fixes.

t² is the mean squared distance between successive fixes and r² the mean
squared distance of the fixes from their centroid (ddof 1).  For independent
fixes its expectation is 2 (Schoener 1981; Swihart & Slade 1985); positively
autocorrelated fixes (an animal that has not moved far since the last fix)
give smaller values.  Autocorrelation makes kernel areas too small and the
reference bandwidth too narrow, so ranges from such fixes are first
estimates only.

The caution band is exact for independent bivariate normal fixes.  The
ratio is then z'Az / z'Bz for the 2n coordinates z, with B the centring
projection (both axes) and A the successive-difference form D'D (both axes);
A B = A, so the ratio is independent of z'Bz (Pitman-Koopmans) and its moments
follow from the eigenvalues 2 - 2 cos(pi k / n), k = 1..n-1, of D'D, each
twice: mean 2 and variance 2 (n - 2) / (n (n - 1)) (derived here; the 1-D
analogue is von Neumann's 1941 ratio, whose variance 4 (n - 2) / (n² - 1)
was used before and flagged about 0.7 % of independent samples instead of
5 %).  The eigenvalues are symmetric about 2, so the ratio is symmetric
about 2 on [0, 4]; its 2.5 % and 97.5 % points are taken from the symmetric
beta distribution on [0, 4] with that variance, the beta approximation
Durbin & Watson (1950) used for the same kind of ratio.

References
----------
Schoener, T. W. (1981). An empirically based estimate of home range.
Theoretical Population Biology 20, 281-325.
Swihart, R. K. & Slade, N. A. (1985). Testing for independence of
observations in animal movements. Ecology 66, 1176-1184.
Durbin, J. & Watson, G. S. (1950). Testing for serial correlation in least
squares regression. I. Biometrika 37, 409-428.
von Neumann, J. (1941). Distribution of the ratio of the mean square
successive difference to the variance. Annals of Mathematical Statistics
12, 367-395.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.stats import beta

CAUTION_TAIL = 0.025  # each side of a two-sided 5 % band around 2 (judgement: the usual 5 % level)


def schoener_ratio(x, y) -> float:
    """t²/r² of fixes in time order (NaN for fewer than three fixes or no spread).

    Parameters
    ----------
    x, y : array_like
        Planar coordinates in metres, in time order.

    Returns
    -------
    float
    """
    x, y = np.asarray(x, float), np.asarray(y, float)
    n = x.size
    if n < 3:
        return math.nan
    t2 = float(np.mean(np.diff(x) ** 2 + np.diff(y) ** 2))
    r2 = float(np.sum((x - x.mean()) ** 2 + (y - y.mean()) ** 2) / (n - 1))
    return t2 / r2 if r2 > 0 else math.nan


def independence_band(n: int, tail: float = CAUTION_TAIL) -> tuple[float, float]:
    """Lower and upper ``tail`` points of t²/r² for n independent bivariate normal fixes.

    Symmetric beta on [0, 4] with the exact variance 2 (n - 2) / (n (n - 1))
    (module docstring; Durbin & Watson 1950 for the beta approximation).
    """
    variance = 2.0 * (n - 2) / (n * (n - 1.0))
    a = (4.0 / variance - 1.0) / 2.0  # Beta(a, a) on [0, 4] has variance 4 / (2a + 1)
    return 4.0 * float(beta.ppf(tail, a, a)), 4.0 * float(beta.isf(tail, a, a))


def autocorrelation_note(ratio: float, n: int) -> str:
    """The caution to print beside a range when the ratio is outside the 5 % band, else ''."""
    if not math.isfinite(ratio) or n < 3:
        return ""
    low, high = independence_band(n)
    if ratio < low:
        return (f"successive fixes are autocorrelated (Schoener's t2/r2 = {ratio:.2f}, independent fixes give 2): "
                "kernel areas are biased low and h_ref too narrow; treat areas as first estimates")
    if ratio > high:
        return (f"successive fixes alternate more than independent ones (t2/r2 = {ratio:.2f} > 2): "
                "check for a schedule or location-error artefact")
    return ""
