"""What the range estimates need from a fitted movement model, as plain values.

The ranges stage does not fit movement models; it receives the animal's best
continuous-time model (issue 13, :mod:`roamstat.motion`) through this small
record, so its functions can be tested with known parameters.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy.special import lambertw


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
    """

    name: str
    range_resident: bool
    sigma_m: float = math.nan
    acf: Callable[[np.ndarray], np.ndarray] | None = None
    centre_xy: tuple[float, float] = (math.nan, math.nan)
    dof_factor: float = 1.0


def from_motion_fit(fit) -> RangeModel | None:
    """The :class:`RangeModel` of a ``roamstat.motion.MotionFit`` (None passes through)."""
    if fit is None:
        return None
    if not fit.range_resident:
        return RangeModel(fit.name, False)
    return RangeModel(fit.name, True, float(fit.params["sigma_m"]), fit.position_acf, tuple(fit.centre_xy),
                      float(fit.params.get(DOF_FACTOR_KEY, 1.0)))


BIAS_REPS = 20  # bootstrap tracks per animal: the bias estimate's own SE is ~ 0.3 / sqrt(20) = 7 % (judgement)
DOF_FACTOR_KEY = "area_dof_factor"  # where debiased_fit leaves the interval's share of n_effective


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
    its location error, refitted with the same model.  The bias is of order
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
        A copy with corrected ``tau_position_s`` and ``sigma_m`` and the
        interval's share of n_effective under ``DOF_FACTOR_KEY`` (unbounded
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
        refit = fit_motion_models(t_s, track[:, 0], track[:, 1], error, models=(fit.name,))
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
    return replace(fit, params=params)
