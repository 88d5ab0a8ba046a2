"""Kalman filter and Rauch-Tung-Striebel smoother for the per-axis 2-state models.

Both axes (and any extra columns, such as the column of ones used to profile out a mean)
share one set of gains, because the models are isotropic and the location error is the same
on both axes: the covariance recursion runs once and only the means are carried per column.
Compiled with numba so that one likelihood evaluation is a tight O(n) loop.

References
----------
Kalman, R.E. (1960) A new approach to linear filtering and prediction problems. J. Basic Eng.
82, 35-45.
Rauch, H.E., Tung, F. & Striebel, C.T. (1965) Maximum likelihood estimates of linear dynamic
systems. AIAA J. 3, 1445-1450.
Harvey, A.C. (1989) Forecasting, Structural Time Series Models and the Kalman Filter.
Cambridge University Press (prediction-error decomposition of the likelihood).
"""
from __future__ import annotations

import math

import numba
import numpy as np

# floor on an innovation variance (m^2): only reached with zero location error at dt = 0
MIN_VAR_M2 = 1e-9
LOG_2PI = math.log(2.0 * math.pi)


@numba.njit(cache=True, nogil=True)
def forward(F, Q, interval, r, observed, Y, P_first, update_first, store=True):
    """Run the filter through every time.

    Parameters
    ----------
    F, Q : ndarray (m, 2, 2)
        Transition and innovation covariance over each distinct interval.
    interval : ndarray of int (n,)
        Row of F and Q that leads into time i (entry 0 unused): a fix schedule has few distinct
        intervals, so the matrices are computed once per interval, not once per fix.
    r : ndarray (n,)
        Location-error variance per axis at each time.
    observed : ndarray of bool (n,)
        False for times where only a prediction is wanted.
    Y : ndarray (n, k)
        Observed positions, one column per series sharing the gains.
    P_first : ndarray (2, 2)
        State covariance at time 0 (state mean 0 for every column).
    update_first : bool
        Whether the observation at time 0 updates the state (False when P_first already
        conditions on it).
    store : bool
        Keep the predicted and filtered moments (for the smoother); the likelihood needs only
        V and S, and skipping the stores keeps its memory traffic small on long tracks.

    Returns
    -------
    V : ndarray (n, k)   innovations (0 where there is no update)
    S : ndarray (n,)     innovation variances (NaN where there is no update)
    mp, Pp, mf, Pf :     predicted and filtered means (n, k, 2) and covariances (n, 2, 2)
                         (length 0 when not stored)
    """
    n, k = Y.shape
    V = np.zeros((n, k))
    S = np.full(n, np.nan)
    n_kept = n if store else 0
    mp = np.zeros((n_kept, k, 2))
    mf = np.zeros((n_kept, k, 2))
    Pp = np.zeros((n_kept, 2, 2))
    Pf = np.zeros((n_kept, 2, 2))
    m = np.zeros((k, 2))
    p00, p01, p11 = P_first[0, 0], P_first[0, 1], P_first[1, 1]
    for i in range(n):
        if i > 0:
            d = interval[i]
            f00, f01, f10, f11 = F[d, 0, 0], F[d, 0, 1], F[d, 1, 0], F[d, 1, 1]
            for c in range(k):
                a, b = m[c, 0], m[c, 1]
                m[c, 0] = f00 * a + f01 * b
                m[c, 1] = f10 * a + f11 * b
            # F P F' + Q, written out for the symmetric 2x2 case
            t00 = f00 * p00 + f01 * p01
            t01 = f00 * p01 + f01 * p11
            t10 = f10 * p00 + f11 * p01
            t11 = f10 * p01 + f11 * p11
            p00, p01, p11 = (t00 * f00 + t01 * f01 + Q[d, 0, 0],
                             t00 * f10 + t01 * f11 + Q[d, 0, 1],
                             t10 * f10 + t11 * f11 + Q[d, 1, 1])
        if store:
            mp[i] = m
            Pp[i, 0, 0], Pp[i, 0, 1], Pp[i, 1, 0], Pp[i, 1, 1] = p00, p01, p01, p11
        if observed[i] and (i > 0 or update_first):
            s = max(p00 + r[i], MIN_VAR_M2)
            k0, k1 = p00 / s, p01 / s
            for c in range(k):
                v = Y[i, c] - m[c, 0]
                V[i, c] = v
                m[c, 0] += k0 * v
                m[c, 1] += k1 * v
            p00, p01, p11 = p00 - k0 * p00, p01 - k0 * p01, p11 - k1 * p01
            S[i] = s
        if store:
            mf[i] = m
            Pf[i, 0, 0], Pf[i, 0, 1], Pf[i, 1, 0], Pf[i, 1, 1] = p00, p01, p01, p11
    return V, S, mp, Pp, mf, Pf


@numba.njit(cache=True, nogil=True)
def innovation_loglik(V, S, profile):
    """Gaussian log-likelihood of the innovations of times 1..n-1 on the first two columns of V.

    With ``profile``, the third column holds the innovations of a column of ones: the mean position is
    fitted first by generalised least squares (weights 1/S) and its share removed from each axis.

    Returns
    -------
    loglik : float
        -sum(ln 2 pi + ln S_i) - 0.5 sum_i sum_c V_ic^2 / S_i.
    rel : ndarray (2,)
        The profiled mean (0 without ``profile``).
    """
    n = V.shape[0]
    rel = np.zeros(2)
    if profile:
        w_ones = w_x = w_y = 0.0
        for i in range(1, n):
            w = V[i, 2] / S[i]
            w_ones += w * V[i, 2]
            w_x += w * V[i, 0]
            w_y += w * V[i, 1]
        rel[0], rel[1] = w_x / w_ones, w_y / w_ones
    # in blocks, so rounding grows with the block and block counts, not with n (as numpy's pairwise sum)
    total = block = 0.0
    for i in range(1, n):
        u = V[i, 0] - (V[i, 2] * rel[0] if profile else 0.0)
        v = V[i, 1] - (V[i, 2] * rel[1] if profile else 0.0)
        block += LOG_2PI + math.log(S[i]) + 0.5 * (u * u + v * v) / S[i]
        if i % 1024 == 0:
            total += block
            block = 0.0
    return -(total + block), rel


@numba.njit(cache=True, nogil=True)
def backward(F, interval, mp, Pp, mf, Pf):
    """Rauch-Tung-Striebel pass, in place: ``mf`` and ``Pf`` become the smoothed means (n, k, 2) and
    covariances (n, 2, 2) (``F`` and ``interval`` as in :func:`forward`).

    In place because time i's filtered moments are read only when time i is smoothed, after time
    i + 1: on a 2,000,000-fix track the copies would cost 130 MB.  The pseudo-inverse of the
    predicted covariance covers the models whose velocity state is identically zero (brownian,
    ou), where that covariance is singular.
    """
    n, k = mf.shape[0], mf.shape[1]
    for i in range(n - 2, -1, -1):
        G = Pf[i] @ F[interval[i + 1]].T @ np.linalg.pinv(Pp[i + 1])
        for c in range(k):
            mf[i, c] = mf[i, c] + G @ (mf[i + 1, c] - mp[i + 1, c])
        Pf[i] = Pf[i] + G @ (Pf[i + 1] - Pp[i + 1]) @ G.T
    return mf, Pf
