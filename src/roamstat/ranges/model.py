"""What the range estimates need from a fitted movement model, as plain values.

The ranges stage does not fit movement models; it receives the animal's best
continuous-time model (issue 13, :mod:`roamstat.motion`) through this small
record, so its functions can be tested with known parameters.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
from scipy.special import lambertw

from roamstat.ranges.autocorr import (autocorrelated_bandwidth, centre_variance_factor, corrected_isopleths,
                                      gaussian_equivalent_area, kde_area_factor)


@dataclass(frozen=True)
class RangeModel:
    """The best motion model of one animal, as the range estimates use it.

    Attributes
    ----------
    name : str
        Model name (e.g. ``ou``, ``brownian``).
    range_resident : bool
        Whether the model is stationary (has a home range).
    sigma_m : float
        Stationary SD per axis in metres (NaN when not range-resident).
    acf : callable or None
        Position autocorrelation at lags in seconds (1 at lag 0).
    centre_xy : tuple of float
        Fitted range centre in the animal's ``x_m, y_m`` frame.
    dof_factor : float
        Share of the effective sample size that the area intervals keep:
        below 1 when the time scale was corrected for small-sample bias
        (:func:`debiased_fit`), 1 for a model taken as known.
    kde_shape_factors : dict
        {percent level: expected ratio of the ``kde_autocorr`` isopleth area
        to the normal area of the same spread} under the model
        (:func:`kde_shape_factors`); missing levels count as 1.
    """

    name: str
    range_resident: bool
    sigma_m: float = math.nan
    acf: Callable[[np.ndarray], np.ndarray] | None = None
    centre_xy: tuple[float, float] = (math.nan, math.nan)
    dof_factor: float = 1.0
    kde_shape_factors: dict = field(default_factory=dict)


def from_motion_fit(fit) -> RangeModel | None:
    """The :class:`RangeModel` of a ``roamstat.motion.MotionFit`` (None passes through)."""
    if fit is None:
        return None
    if not fit.range_resident:
        return RangeModel(fit.name, False)
    shape = {level: fit.params[key] for level, key in SHAPE_KEYS.items() if key in fit.params}
    return RangeModel(fit.name, True, float(fit.params["sigma_m"]), fit.position_acf, tuple(fit.centre_xy),
                      float(fit.params.get(DOF_FACTOR_KEY, 1.0)), shape)


BIAS_REPS = 20  # bootstrap tracks per animal: the bias estimate's own SE is ~ 0.3 / sqrt(20) = 7 % (judgement)
DOF_FACTOR_KEY = "area_dof_factor"  # where debiased_fit leaves the interval's share of n_effective
SHAPE_KEYS = {95: "kde95_shape_factor", 50: "kde50_shape_factor"}  # ... and the kernel shape factors


def kde_shape_factors(fit, t_s, tracks) -> dict:
    """Expected ratio of the ``kde_autocorr`` isopleth area to the normal area of the same spread.

    The area correction of :func:`roamstat.ranges.autocorr.kde_area_factor`
    gives the kernel estimate the range's variance, but a kernel estimate
    from few effective fixes is lumpy, and for a given variance the normal
    law has the largest high-density regions, so the isopleths come out
    too small (about 8 % at 95 % and ten to thirty range crossings,
    measured).  Tracks simulated from the fitted model measure that ratio
    (a parametric-bootstrap bias estimate, Efron & Tibshirani 1993, ch. 10);
    each is compared with the normal law of its own kernel estimate's
    spread, so the sampling noise of the spread cancels.

    Parameters
    ----------
    fit : roamstat.motion.MotionFit
        Range-resident, already corrected for bias.
    t_s : array_like
        Fix times.
    tracks : numpy.ndarray
        (reps, n, 2) tracks simulated from ``fit`` at ``t_s``.

    Returns
    -------
    dict
        {95: factor, 50: factor}, geometric means over the tracks.

    References
    ----------
    Efron, B. & Tibshirani, R. J. (1993). An Introduction to the Bootstrap. Chapman & Hall.
    Fleming, C. H. & Calabrese, J. M. (2017). Methods Ecol. Evol. 8, 571-579.
    """
    acf = fit.position_acf
    h_rel = autocorrelated_bandwidth(t_s, acf)
    h_m = h_rel * fit.params["sigma_m"]
    factor = kde_area_factor(h_rel, centre_variance_factor(t_s, acf))
    logs: dict = {level: [] for level in SHAPE_KEYS}
    for track in tracks:
        x, y = track[:, 0], track[:, 1]
        for level, shape in corrected_isopleths(x, y, h_m, dict.fromkeys(SHAPE_KEYS, factor)).items():
            logs[level].append(math.log(shape.area / gaussian_equivalent_area(x, y, h_m, factor, level)))
    return {level: math.exp(float(np.mean(values))) for level, values in logs.items()}


def correction_dof_factor(log_r: float, n_reps: int) -> float:
    """Share of the area's degrees of freedom left after the bias correction of the time scale.

    The correction is an indirect-inference estimator (Gourieroux, Monfort &
    Renault 1993): tau_c solves b(log tau_c) = log tau_hat for the binding
    function b(theta) = theta + s exp(theta - log tau_hat), the mean refitted
    log tau when the bias grows in proportion to tau.  Its variance is that
    of log tau_hat divided by b'(log tau_c)² = (1 + s r)² = (1 - log r)²
    and multiplied by (1 + 1/R) for the R simulated tracks.  As sigma_c² =
    D tau_c with D nearly exact, the area's log-variance, 2 / nu, grows by
    the same factor, so nu = 2 n_effective (1 - log r)² / (1 + 1/R).

    Parameters
    ----------
    log_r : float
        log(tau_c / tau_hat), below 1.
    n_reps : int
        Simulated tracks R.

    References
    ----------
    Gourieroux, C., Monfort, A. & Renault, E. (1993). Indirect inference.
    Journal of Applied Econometrics 8, S85-S118.
    """
    return (1.0 - log_r) ** 2 / (1.0 + 1.0 / n_reps)


def debiased_fit(fit, t_s, error, rng: np.random.Generator, n_reps: int = BIAS_REPS):
    """A range-resident fit with its position time scale, hence sigma, corrected for small-sample bias.

    Maximum-likelihood time scales of short tracks come out too short, so
    sigma² = D tau (and every area) too small, by roughly 3 / n_effective
    (about 25 % at ten range crossings), while the diffusion rate D, fixed
    by the many short steps, is nearly unbiased.  The bias of log tau is
    estimated by parametric bootstrap (Efron & Tibshirani 1993, ch. 10):
    ``n_reps`` tracks simulated from the fit at the animal's own times, with
    its location error, refitted with the same model (without the Hessian:
    only the estimate of tau is used).  The bias is of order
    tau / duration and was measured at the biased estimate, so it is scaled
    to the corrected tau: with s the mean shift of log tau, the correction
    r = tau_c / tau_hat solves log r = -s r, i.e. log r = -W(s) (Lambert W;
    at most e).  Then sigma_c = sigma_hat sqrt(r) (D kept).  Fleming et al.
    (2019) correct the same bias by other means.  The correction stretches
    the estimate's sampling spread by 1 / (1 - log r) (about 1.35 at ten
    range crossings), which :func:`correction_dof_factor` passes on to the
    area intervals.

    Parameters
    ----------
    fit : roamstat.motion.MotionFit
    t_s : array_like
        The fix times the fit used.
    error : roamstat.motion.LocationError
        The location error the fit used.
    rng : numpy.random.Generator
    n_reps : int

    Returns
    -------
    MotionFit
        A copy with corrected ``tau_position_s`` and ``sigma_m``, the
        interval's share of n_effective under ``DOF_FACTOR_KEY`` and the
        kernel shape factors under ``SHAPE_KEYS`` (:func:`kde_shape_factors`,
        from ``n_reps`` more tracks simulated from the corrected fit; unbounded
        fits, and fits whose refits all fail, are returned as they are).

    References
    ----------
    Efron, B. & Tibshirani, R. J. (1993). An Introduction to the Bootstrap. Chapman & Hall.
    Fleming, C. H. et al. (2019). Methods Ecol. Evol. 10, 1679-1689.
    Gourieroux, C., Monfort, A. & Renault, E. (1993). J. Appl. Econometrics 8, S85-S118.
    """
    from dataclasses import replace

    from roamstat.motion import fit_motion_models

    if fit is None or not fit.range_resident:
        return fit
    tau = fit.params["tau_position_s"]
    error_sd = error.sd_m if error.sd_m is not None else fit.params["error_sd_m"]
    logs = []
    for track in fit.simulate(t_s, n_reps, rng, error_sd):
        refit = fit_motion_models(t_s, track[:, 0], track[:, 1], error, models=(fit.name,), standard_errors=False)
        value = refit[0].params["tau_position_s"] if refit else math.nan
        if math.isfinite(value) and value > 0:
            logs.append(math.log(value))
    if not logs:
        return fit
    shift = float(np.mean(logs)) - math.log(tau)
    log_r = -float(lambertw(max(shift, -1.0 / math.e + 1e-9)).real)  # just inside the branch point
    r = math.exp(log_r)
    params = {**fit.params, "tau_position_s": tau * r, "sigma_m": fit.params["sigma_m"] * math.sqrt(r),
              DOF_FACTOR_KEY: correction_dof_factor(log_r, len(logs))}
    corrected = replace(fit, params=params)
    shape = kde_shape_factors(corrected, t_s, corrected.simulate(t_s, n_reps, rng, error_sd))
    return replace(corrected, params={**params, **{SHAPE_KEYS[level]: v for level, v in shape.items()}})
