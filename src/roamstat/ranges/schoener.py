"""Schoener's ratio t²/r²: a diagnostic of autocorrelation between successive fixes.

t² is the mean squared distance between successive fixes and r² the mean
squared distance of the fixes from their centroid (ddof 1).  For independent
fixes its expectation is 2 (Schoener 1981; Swihart & Slade 1985); positively
autocorrelated fixes (an animal that has not moved far since the last fix)
give smaller values.  Autocorrelation makes kernel areas too small and the
reference bandwidth too narrow, so ranges from such fixes are first
estimates only.

The ratio is the two-dimensional form of von Neumann's ratio of the mean
square successive difference to the variance; under independence (normal
data) the one-dimensional ratio has variance 4 (n - 2) / (n² - 1)
(von Neumann 1941), which is used here as a conservative spread (the
two-dimensional ratio averages two such components and varies less).

References
----------
Schoener, T. W. (1981). An empirically based estimate of home range.
Theoretical Population Biology 20, 281-325.
Swihart, R. K. & Slade, N. A. (1985). Testing for independence of
observations in animal movements. Ecology 66, 1176-1184.
von Neumann, J. (1941). Distribution of the ratio of the mean square
successive difference to the variance. Annals of Mathematical Statistics
12, 367-395.
"""

from __future__ import annotations

import math

import numpy as np

Z_CAUTION = 1.96  # two-sided 5 % band around 2 (judgement: the usual 5 % level)


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


def autocorrelation_note(ratio: float, n: int) -> str:
    """The caution to print beside a range when the ratio is far from 2, else ''."""
    if not math.isfinite(ratio) or n < 3:
        return ""
    spread = math.sqrt(4.0 * (n - 2) / (n * n - 1.0))
    if ratio < 2.0 - Z_CAUTION * spread:
        return (f"successive fixes are autocorrelated (Schoener's t2/r2 = {ratio:.2f}, independent fixes give 2): "
                "kernel areas are biased low and h_ref too narrow; treat areas as first estimates")
    if ratio > 2.0 + Z_CAUTION * spread:
        return (f"successive fixes alternate more than independent ones (t2/r2 = {ratio:.2f} > 2): "
                "check for a schedule or location-error artefact")
    return ""
