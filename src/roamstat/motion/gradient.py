"""Every motion model's conditional log-likelihood and its exact gradient in the log parameters.

The derivatives of the filter's innovations and their variances follow the filter's own recursion
(the sensitivity equations of the Kalman filter: Gupta & Mehra 1974), driven by the derivatives of
the transitions and of the initial covariance (:mod:`roamstat.motion.kalman_derivatives`), so one
pass gives the value and the whole gradient.  The per-axis state is (position, velocity); both
axes share the covariance recursion, as in :func:`roamstat.motion.kfilter.forward`.  For the
range-resident models the mean position is profiled out by generalised least squares; by the
envelope theorem the gradient of the profiled likelihood is the partial gradient at the profiled
mean, so the value comes first (:func:`roamstat.motion.likelihood.conditional_loglik`, which gives
that mean) and the sensitivities then run on the fixes centred on it.

References
----------
Gupta, N. K. & Mehra, R. K. (1974). Computational aspects of maximum likelihood estimation and
reduction in sensitivity function calculations. IEEE Trans. Automatic Control 19, 774-783.
Harvey, A. C. (1989). Forecasting, Structural Time Series Models and the Kalman Filter. CUP.
"""
from __future__ import annotations

import numba
import numpy as np

from .kalman import RANGE_RESIDENT, initial_cov, transition
from .kalman_derivatives import initial_cov_derivatives, transition_derivatives
from .kfilter import MIN_VAR_M2
from .likelihood import Track, conditional_loglik, error_variance


def loglik_gradient(name: str, p: dict, track: Track, estimate_error: bool) -> tuple[float, np.ndarray]:
    """log p(fixes 2..n | fix 1) (:func:`roamstat.motion.likelihood.conditional_loglik`'s value) and its
    gradient in the log of ``MOVEMENT_PARAMS[name]``, then of the error SD when ``estimate_error``.

    For ``ou_ctcrw`` ``p`` names the longer time scale ``tau_position_s``.
    """
    F, Q = transition(name, p, track.dt_unique)
    loglik, mean = conditional_loglik(name, p, track, transitions=(F, Q))
    dF, dQ = transition_derivatives(name, p, track.dt_unique, F, Q)
    r = error_variance(track, p)
    P0 = initial_cov(name, p, r[0])
    dP0 = initial_cov_derivatives(name, p, P0, estimate_error)
    resident = name in RANGE_RESIDENT
    Y = track.xy - (mean - track.origin) if resident else track.xy
    grad = _sensitivities(F, Q, dF, dQ, track.dt_index, r, estimate_error, P0, dP0, resident, Y)
    return loglik, grad


@numba.njit(cache=True, nogil=True)
def _sensitivities(F, Q, dF, dQ, interval, r, estimate_error, P0, dP0, resident, Y):
    """Gradient of the log-likelihood of fixes 1..n-1 of ``Y`` (n, 2) in the log parameters.

    ``dF``, ``dQ`` (movement parameters first), ``dP0`` (every parameter) as in
    :mod:`.kalman_derivatives`; with ``estimate_error`` the last parameter moves r (dr = 2 r) alone.
    ``resident``: fix 0 updates the stationary prior; else it only conditions (diffuse position).
    """
    n = Y.shape[0]
    n_par = dP0.shape[0]
    n_move = dF.shape[0]
    mx0 = mx1 = my0 = my1 = 0.0  # state means (position, velocity) per axis; prior mean 0
    p00, p01, p11 = P0[0, 0], P0[0, 1], P0[1, 1]
    # per parameter: d of mx0, mx1, my0, my1, p00, p01, p11
    D = np.zeros((n_par, 7))
    for j in range(n_par):
        D[j, 4], D[j, 5], D[j, 6] = dP0[j, 0, 0], dP0[j, 0, 1], dP0[j, 1, 1]
    grad = np.zeros(n_par)
    for i in range(n):
        if i > 0:
            d = interval[i]
            f00, f01, f10, f11 = F[d, 0, 0], F[d, 0, 1], F[d, 1, 0], F[d, 1, 1]
            for j in range(n_par):
                a0, a1, b0, b1 = D[j, 0], D[j, 1], D[j, 2], D[j, 3]
                q00, q01, q11 = D[j, 4], D[j, 5], D[j, 6]
                # F dm, and F dP F'
                u00, u01 = f00 * q00 + f01 * q01, f00 * q01 + f01 * q11
                u10, u11 = f10 * q00 + f11 * q01, f10 * q01 + f11 * q11
                D[j, 0], D[j, 1] = f00 * a0 + f01 * a1, f10 * a0 + f11 * a1
                D[j, 2], D[j, 3] = f00 * b0 + f01 * b1, f10 * b0 + f11 * b1
                D[j, 4] = u00 * f00 + u01 * f01
                D[j, 5] = u00 * f10 + u01 * f11
                D[j, 6] = u10 * f10 + u11 * f11
                if j < n_move:  # + dF m, and dF P F' + F P dF' + dQ
                    g00, g01, g10, g11 = dF[j, d, 0, 0], dF[j, d, 0, 1], dF[j, d, 1, 0], dF[j, d, 1, 1]
                    D[j, 0] += g00 * mx0 + g01 * mx1
                    D[j, 1] += g10 * mx0 + g11 * mx1
                    D[j, 2] += g00 * my0 + g01 * my1
                    D[j, 3] += g10 * my0 + g11 * my1
                    t00, t01 = g00 * p00 + g01 * p01, g00 * p01 + g01 * p11
                    t10, t11 = g10 * p00 + g11 * p01, g10 * p01 + g11 * p11
                    D[j, 4] += 2.0 * (t00 * f00 + t01 * f01) + dQ[j, d, 0, 0]
                    D[j, 5] += t00 * f10 + t01 * f11 + t10 * f00 + t11 * f01 + dQ[j, d, 0, 1]
                    D[j, 6] += 2.0 * (t10 * f10 + t11 * f11) + dQ[j, d, 1, 1]
            mx0, mx1 = f00 * mx0 + f01 * mx1, f10 * mx0 + f11 * mx1
            my0, my1 = f00 * my0 + f01 * my1, f10 * my0 + f11 * my1
            t00, t01 = f00 * p00 + f01 * p01, f00 * p01 + f01 * p11
            t10, t11 = f10 * p00 + f11 * p01, f10 * p01 + f11 * p11
            p00, p01, p11 = (t00 * f00 + t01 * f01 + Q[d, 0, 0],
                             t00 * f10 + t01 * f11 + Q[d, 0, 1],
                             t10 * f10 + t11 * f11 + Q[d, 1, 1])
        elif not resident:
            continue  # the first fix of an unbounded model is the origin: nothing to update
        s = p00 + r[i]
        floored = s < MIN_VAR_M2
        if floored:
            s = MIN_VAR_M2
        inv = 1.0 / s
        vx, vy = Y[i, 0] - mx0, Y[i, 1] - my0
        k0, k1 = p00 * inv, p01 * inv
        scored = i > 0
        half_q = 0.5 * (vx * vx + vy * vy) * inv
        for j in range(n_par):
            ds = 0.0 if floored else D[j, 4] + (2.0 * r[i] if estimate_error and j == n_par - 1 else 0.0)
            dvx, dvy = -D[j, 0], -D[j, 2]
            if scored:  # d of -(ln s + 0.5 (vx^2 + vy^2) / s)
                grad[j] -= ds * inv * (1.0 - half_q) + (vx * dvx + vy * dvy) * inv
            dk0, dk1 = (D[j, 4] - k0 * ds) * inv, (D[j, 5] - k1 * ds) * inv
            D[j, 0] += dk0 * vx + k0 * dvx
            D[j, 1] += dk1 * vx + k1 * dvx
            D[j, 2] += dk0 * vy + k0 * dvy
            D[j, 3] += dk1 * vy + k1 * dvy
            dq00, dq01 = D[j, 4], D[j, 5]
            D[j, 4] = dq00 - dk0 * p00 - k0 * dq00
            D[j, 5] = dq01 - dk0 * p01 - k0 * dq01
            D[j, 6] = D[j, 6] - dk1 * p01 - k1 * dq01
        mx0, mx1 = mx0 + k0 * vx, mx1 + k1 * vx
        my0, my1 = my0 + k0 * vy, my1 + k1 * vy
        p00, p01, p11 = p00 - k0 * p00, p01 - k0 * p01, p11 - k1 * p01
    return grad
