"""Gaussian range: the stationary distribution of a fitted range-resident motion model.

A stationary isotropic Gaussian position process with SD sigma per axis (the
Ornstein-Uhlenbeck position process and OU position with OU velocity; Dunn &
Gipson 1977, Fleming et al. 2014) has utilization distribution N(c, sigma² I).
Its highest-density region of mass p is the disc of radius
sigma sqrt(-2 ln(1 - p)), of area

    A_p = -2 ln(1 - p) pi sigma²

(95 %: 2 pi sigma² ln 20; 50 %: 2 pi sigma² ln 2).  The maximum-likelihood
sigma² comes with the range centre estimated, which biases it low by the
variance of that centre, W sigma² (W from
:func:`roamstat.ranges.autocorr.centre_variance_factor`; (n - 1)/n for
independent fixes); :func:`gaussian_area` divides it out when asked.

References
----------
Dunn, J. E. & Gipson, P. S. (1977). Analysis of radio telemetry data in
studies of home range. Biometrics 33, 85-101.
Fleming, C. H., Calabrese, J. M., Mueller, T., Olson, K. A., Leimgruber, P.
& Fagan, W. F. (2014). From fine-scale foraging to home ranges: a
semivariance approach to identifying movement modes across spatiotemporal
scales. The American Naturalist 183, E154-E167.
"""

from __future__ import annotations

import math

from shapely.geometry import Point

CIRCLE_SEGMENTS = 64  # vertices per quarter circle: area within 0.01 % of the disc


def gaussian_area(sigma_m: float, level: float, centre_variance: float = 0.0) -> float:
    """Area (km²) of the level-``level`` region of N(c, sigma² I), sigma² debiased by 1/(1 - W).

    Parameters
    ----------
    sigma_m : float
        Stationary SD per axis, metres.
    level : float
        Mass of the region, e.g. 0.95.
    centre_variance : float
        W; 0 for no debiasing.
    """
    return -2.0 * math.log1p(-level) * math.pi * sigma_m ** 2 / (1.0 - centre_variance) / 1e6


def gaussian_outline(centre_xy, area_km2: float):
    """The disc of ``area_km2`` around ``centre_xy`` (metres) as a shapely Polygon."""
    radius = math.sqrt(area_km2 * 1e6 / math.pi)
    return Point(*centre_xy).buffer(radius, quad_segs=CIRCLE_SEGMENTS)
