"""The ``ou`` model's profiled log-likelihood and its exact gradient in the log parameters.

For ``ou`` the per-axis state is the position alone (F = phi, Q = q on each interval), so the
filter of :mod:`roamstat.motion.kfilter` is scalar, and the derivatives of its innovations and
their variances follow the same recursion (the sensitivity equations of the Kalman filter:
Gupta & Mehra 1974).  The mean position is profiled out by generalised least squares, as in
:func:`roamstat.motion.kfilter.innovation_loglik`; by the envelope theorem the gradient of the
profiled likelihood is the partial gradient at the profiled mean, and the mean enters the
innovations linearly (v - mu w, with w the innovations of a column of ones), so one pass
accumulates everything.  With sigma, tau the position scale and time scale and e the error SD:
phi = exp(-dt / tau), q = sigma^2 (1 - phi^2), P_0 = sigma^2, r = e^2, and
d phi / d ln tau = phi dt / tau, d q / d ln sigma = 2 q, d q / d ln tau = -2 sigma^2 phi^2 dt / tau.

References
----------
Gupta, N. K. & Mehra, R. K. (1974). Computational aspects of maximum likelihood estimation and
reduction in sensitivity function calculations. IEEE Trans. Automatic Control 19, 774-783.
Harvey, A. C. (1989). Forecasting, Structural Time Series Models and the Kalman Filter. CUP.
"""
from __future__ import annotations

import math

import numba
import numpy as np

from .kfilter import LOG_2PI, MIN_VAR_M2
from .kalman import transition
from .likelihood import Track, error_variance


def ou_loglik_gradient(p: dict, track: Track, estimate_error: bool) -> tuple[float, np.ndarray]:
    """log p(fixes 2..n | fix 1) under ``ou`` and its gradient in (ln sigma, ln tau[, ln error SD])."""
    sigma2, tau = p["sigma_m"] ** 2, p["tau_position_s"]
    dt = track.dt_unique
    F, Q = transition("ou", p, dt)
    phi, q = F[:, 0, 0], Q[:, 0, 0]
    dphi_dtau = phi * dt / tau
    dq_dtau = -2.0 * sigma2 * phi * phi * dt / tau
    return _pass(phi, q, dphi_dtau, dq_dtau, track.dt_index, error_variance(track, p), estimate_error, sigma2,
                 track.xy)


@numba.njit(cache=True, nogil=True)
def _pass(phi, q, dphi_dtau, dq_dtau, interval, r, estimate_error, sigma2, xy):
    n = xy.shape[0]
    n_par = 3 if estimate_error else 2
    m = np.zeros(3)  # filtered means of x, y and the column of ones (prior mean 0 for each)
    dm = np.zeros((n_par, 3))
    P = sigma2
    dP = np.zeros(n_par)
    dP[0] = 2.0 * sigma2
    ds = np.zeros(n_par)
    v = np.zeros(3)
    dv = np.zeros((n_par, 3))
    # sums over fixes 1..n-1 (fix 0 conditions): value terms and, per parameter, gradient terms
    log_s = vv_x = vv_y = vw_x = vw_y = ww = 0.0
    c_sum = np.zeros(n_par)
    a1 = np.zeros((n_par, 2))  # sum v dv / s per axis
    a2 = np.zeros((n_par, 2))  # sum (v dw + w dv) / s
    a3 = np.zeros(n_par)       # sum w dw / s
    b1 = np.zeros((n_par, 2))  # sum v^2 ds / s^2
    b2 = np.zeros((n_par, 2))  # sum v w ds / s^2
    b3 = np.zeros(n_par)       # sum w^2 ds / s^2
    for i in range(n):
        if i > 0:
            d = interval[i]
            f, df = phi[d], dphi_dtau[d]
            # parameters: 0 ln sigma (moves q), 1 ln tau (moves phi and q), 2 ln error SD (moves r only)
            for c in range(3):
                dm[:, c] *= f
                dm[1, c] += df * m[c]
            dP *= f * f
            dP[0] += 2.0 * q[d]
            dP[1] += 2.0 * f * df * P + dq_dtau[d]
            for c in range(3):
                m[c] = f * m[c]
            P = f * f * P + q[d]
        s = P + r[i]
        floored = s < MIN_VAR_M2
        if floored:
            s = MIN_VAR_M2
        for k in range(n_par):
            ds[k] = 0.0 if floored else dP[k] + (2.0 * r[i] if k == 2 else 0.0)
        v[0], v[1], v[2] = xy[i, 0] - m[0], xy[i, 1] - m[1], 1.0 - m[2]
        for k in range(n_par):
            for c in range(3):
                dv[k, c] = -dm[k, c]
        if i > 0:
            w = v[2]
            log_s += math.log(s)
            vv_x += v[0] * v[0] / s
            vv_y += v[1] * v[1] / s
            vw_x += v[0] * w / s
            vw_y += v[1] * w / s
            ww += w * w / s
            for k in range(n_par):
                dw = dv[k, 2]
                c_sum[k] += ds[k] / s
                a3[k] += w * dw / s
                b3[k] += w * w * ds[k] / (s * s)
                for c in range(2):
                    a1[k, c] += v[c] * dv[k, c] / s
                    a2[k, c] += (v[c] * dw + w * dv[k, c]) / s
                    b1[k, c] += v[c] * v[c] * ds[k] / (s * s)
                    b2[k, c] += v[c] * w * ds[k] / (s * s)
        gain = P / s
        for k in range(n_par):
            d_gain = (dP[k] * s - P * ds[k]) / (s * s)
            for c in range(3):
                dm[k, c] += d_gain * v[c] + gain * dv[k, c]
            dP[k] = dP[k] * (1.0 - gain) - P * d_gain
        for c in range(3):
            m[c] += gain * v[c]
        P = P * (1.0 - gain)
    mu_x, mu_y = vw_x / ww, vw_y / ww
    loglik = -((n - 1) * LOG_2PI + log_s
               + 0.5 * (vv_x - 2.0 * mu_x * vw_x + mu_x * mu_x * ww + vv_y - 2.0 * mu_y * vw_y + mu_y * mu_y * ww))
    grad = np.empty(n_par)
    for k in range(n_par):
        total = c_sum[k]
        for c in range(2):
            mu = mu_x if c == 0 else mu_y
            total += (a1[k, c] - mu * a2[k, c] + mu * mu * a3[k]
                      - 0.5 * (b1[k, c] - 2.0 * mu * b2[k, c] + mu * mu * b3[k]))
        grad[k] = -total
    return loglik, grad
