"""Derivatives of the models' exact transitions and initial covariances in their log parameters.

For each model of :mod:`roamstat.motion.kalman` this gives dF/d ln theta and dQ/d ln theta over
each interval, and dP_0/d ln theta, in the order of ``MOVEMENT_PARAMS[name]`` followed by the
location-error SD when it is estimated; :mod:`roamstat.motion.gradient` carries them through the
filter.  Closed forms, derived here from the transitions:

- brownian: Q = 2 D dt, so dQ/d ln D = Q.
- ou: with x = dt / tau_p and phi = e^-x, dphi/d ln tau_p = phi x; q = sigma^2 (1 - phi^2), so
  dq/d ln sigma = 2 q and dq/d ln tau_p = -2 sigma^2 phi^2 x.
- ctcrw: with a = e^-x, x = dt / tau_v, F_01 = tau_v (1 - a) and F_11 = a; Q_00 = 2 D tau_v B(x),
  B(x) = x - 2 (1 - e^-x) + (1 - e^-2x) / 2, B'(x) = (1 - e^-x)^2; Q_01 = D (1 - a)^2;
  Q_11 = (D / tau_v) (1 - a^2).  Every Q is proportional to D.
- ou_ctcrw: F = exp(A dt) with eigenvalues l1 = -1/tau_p, l2 = -1/tau_v, written (Sylvester) as
  F = e1 I + g[l1, l2] (A - l1 I) = [[e1 - l1 c, c], [-l1 l2 c, e1 + l2 c]] with c = g[l1, l2] the
  divided difference of g(l) = e^(l dt).  Its derivative in l1 needs g[l1, l1, l2], which is
  dt^2 e1 phi_2(z), z = (l2 - l1) dt, phi_2(z) = (e^z - 1 - z) / z^2 (the second phi-function of
  exponential integrators: Hochbruck & Ostermann 2010), evaluated by its series near z = 0 so
  that it stays exact in the critically damped limit tau_p = tau_v.  Q = S - F S F' with S the
  stationary covariance, differentiated by the product rule.

References
----------
Hochbruck, M. & Ostermann, A. (2010). Exponential integrators. Acta Numerica 19, 209-286.
Johnson, D.S., London, J.M., Lea, M.-A. & Durban, J.W. (2008). Continuous-time correlated random
walk model for animal telemetry data. Ecology 89, 1208-1215.
"""
from __future__ import annotations

import math

import numba
import numpy as np

from .kalman import _SERIES_X, MOVEMENT_PARAMS, RANGE_RESIDENT, check_model, stationary_cov

# below this |z| phi_2 and its mirror use their Taylor series (the closed forms lose digits)
_PHI2_SERIES = 1e-2


def transition_derivatives(name: str, p: dict, dt: np.ndarray, F: np.ndarray,
                           Q: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """dF and dQ in the log movement parameters, each (n_params, n, 2, 2); F and Q from ``kalman.transition``.

    Compiled, as the fits call this once per likelihood evaluation and a schedule can have
    hundreds of distinct intervals.
    """
    check_model(name)
    dt = np.asarray(dt, dtype=float)
    k = len(MOVEMENT_PARAMS[name])
    dF = np.zeros((k, dt.size, 2, 2))
    dQ = np.zeros((k, dt.size, 2, 2))
    if name == "brownian":
        dQ[0] = Q
    elif name == "ou":
        _ou(p["sigma_m"], p["tau_position_s"], dt, F, Q, dF, dQ)
    elif name == "ctcrw":
        _ctcrw(p["diffusion_m2_s"], p["tau_velocity_s"], dt, F, Q, dF, dQ)
    else:
        s0, s1 = np.diag(stationary_cov(name, p))
        _ou_ctcrw(p["tau_position_s"], p["tau_velocity_s"], s0, s1, dt, F, Q, dF, dQ)
    return dF, dQ


@numba.njit(cache=True, nogil=True)
def _ou(sigma, tau, dt, F, Q, dF, dQ):
    for i in range(dt.size):
        x = dt[i] / tau
        phi = F[i, 0, 0]
        dF[1, i, 0, 0] = phi * x
        dQ[0, i, 0, 0] = 2.0 * Q[i, 0, 0]
        dQ[1, i, 0, 0] = -2.0 * sigma * sigma * phi * phi * x


@numba.njit(cache=True, nogil=True)
def _ctcrw(D, tau, dt, F, Q, dF, dQ):
    for i in range(dt.size):
        x = dt[i] / tau
        a = F[i, 1, 1]
        one_minus_a = -math.expm1(-x)
        dQ[0, i] = Q[i]
        dF[1, i, 0, 1] = F[i, 0, 1] - a * dt[i]
        dF[1, i, 1, 1] = a * x
        if x < _SERIES_X:  # S(x) - x S'(x) of kalman's series for Q_00
            dQ[1, i, 0, 0] = 2.0 * D * tau * x**3 * (-2.0 / 3.0 + x * (3.0 / 4.0 - x * 7.0 / 15.0))
        else:
            dQ[1, i, 0, 0] = Q[i, 0, 0] - 2.0 * D * tau * x * one_minus_a**2
        dQ[1, i, 0, 1] = dQ[1, i, 1, 0] = -2.0 * D * one_minus_a * a * x
        dQ[1, i, 1, 1] = -Q[i, 1, 1] - 2.0 * (D / tau) * a * a * x


@numba.njit(cache=True, nogil=True)
def _phi2_series(z):
    """sum_k z^k / (k + 2)!, k = 0..5: (e^z - 1 - z) / z^2 near z = 0."""
    return 1.0 / 2.0 + z * (1.0 / 6.0 + z * (1.0 / 24.0 + z * (1.0 / 120.0 + z * (1.0 / 720.0 + z / 5040.0))))


@numba.njit(cache=True, nogil=True)
def _ou_ctcrw(tau_p, tau_v, s0, s1, dt, F, Q, dF, dQ):
    """tau_p >= tau_v; S = diag(s0, s1) the stationary covariance."""
    lam_1, lam_2 = -1.0 / tau_p, -1.0 / tau_v
    for i in range(dt.size):
        t = dt[i]
        e_1, e_2 = math.exp(lam_1 * t), math.exp(lam_2 * t)
        z = (lam_2 - lam_1) * t  # <= 0
        if abs(z) < _PHI2_SERIES:
            phi_1 = 1.0 + z * _phi2_series(z)
            phi_2 = _phi2_series(z)
            mirror = math.exp(z) * _phi2_series(-z)
        else:
            phi_1 = math.expm1(z) / z
            phi_2 = (math.expm1(z) - z) / (z * z)
            mirror = (-math.expm1(z) + z * math.exp(z)) / (z * z)  # e^z phi_2(-z), finite as z -> -inf
        c = t * e_1 * phi_1
        for j, lam, other, e, g in ((1, lam_1, lam_2, e_1, t * t * e_1 * phi_2),    # g = g[l1, l1, l2]
                                    (2, lam_2, lam_1, e_2, t * t * e_1 * mirror)):  # g = g[l2, l2, l1]
            scale = -lam  # d l / d ln tau
            dF[j, i, 0, 0] = scale * (t * e - c - lam * g)
            dF[j, i, 0, 1] = scale * g
            dF[j, i, 1, 0] = scale * (-other * c - lam * other * g)
            dF[j, i, 1, 1] = scale * (t * e + other * g)
        # Q = S - F S F': d over ln sigma (dS = 2 S), ln tau_p and ln tau_v (dS = diag(0, -s1))
        for j in range(3):
            ds0 = 2.0 * s0 if j == 0 else 0.0
            ds1 = 2.0 * s1 if j == 0 else -s1
            for a in range(2):
                for b in range(a, 2):
                    d = (ds0 * F[i, a, 0] * F[i, b, 0] + ds1 * F[i, a, 1] * F[i, b, 1]
                         + s0 * (dF[j, i, a, 0] * F[i, b, 0] + F[i, a, 0] * dF[j, i, b, 0])
                         + s1 * (dF[j, i, a, 1] * F[i, b, 1] + F[i, a, 1] * dF[j, i, b, 1]))
                    value = (ds0 if a == 0 else ds1) - d if a == b else -d
                    if a == b and Q[i, a, a] <= 0.0:
                        value = 0.0  # kalman clipped this variance to 0
                    dQ[j, i, a, b] = dQ[j, i, b, a] = value


def initial_cov_derivatives(name: str, p: dict, P0: np.ndarray, estimate_error: bool) -> np.ndarray:
    """d P_0 (``kalman.initial_cov``) in the log parameters, (n_params, 2, 2), error SD last when estimated."""
    k = len(MOVEMENT_PARAMS[name])
    dP0 = np.zeros((k + int(estimate_error), 2, 2))
    if name == "ou":
        dP0[0] = 2.0 * P0
    elif name == "ou_ctcrw":
        dP0[0] = 2.0 * P0
        dP0[1, 1, 1] = dP0[2, 1, 1] = -P0[1, 1]
    elif name == "ctcrw":
        dP0[0, 1, 1], dP0[1, 1, 1] = P0[1, 1], -P0[1, 1]
    if estimate_error and name not in RANGE_RESIDENT:
        dP0[-1, 0, 0] = 2.0 * P0[0, 0]  # the first fix's error variance sets the diffuse position's
    return dP0
