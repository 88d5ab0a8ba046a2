"""Step and turn log densities of every slot and state, with their exact derivatives.

One compiled pass (numba, like :mod:`roamstat.states.recursions`) gives, per
slot and state, the log density of the step and of the turning angle and, on
request, their derivatives with respect to the state's free parameters
(:mod:`roamstat.states.params`): log shape and log scale of the step, the mean
direction mu and the free concentration (log kappa or logit rho) of the turn.
The per-state constants that need special functions (log-gamma and digamma of
the gamma shape, log I0 and A(kappa) = I1(kappa) / I0(kappa) of the von Mises
concentration) are computed once per call for the K states, in numpy and
scipy.special, and handed to the pass.

Densities (x > 0 a step, theta a turn, d = theta - mu):

- gamma (shape a, scale b): log f = (a - 1) log x - x / b - log Gamma(a) - a log b;
  d/d log a = a (log(x / b) - psi(a)); d/d log b = x / b - a.
- Weibull (shape k, scale s), z = x / s: log f = log k + k log z - log x - z^k;
  d/d log k = 1 + k log z (1 - z^k); d/d log s = k (z^k - 1).
- von Mises (mu, kappa): log f = kappa (cos d - 1) - log(2 pi I0e(kappa)), I0e the
  exponentially scaled Bessel function; d/d mu = kappa sin d;
  d/d log kappa = kappa (cos d - A(kappa)) (Mardia & Jupp 2000, §3.5.4 and §5.3).
- wrapped Cauchy (mu, rho), q = 1 - rho, h = d / 2:
  log f = log(q (1 + rho)) - log(2 pi) - log D with D = 1 + rho^2 - 2 rho cos d
  = q^2 + 4 rho sin^2 h (the second form keeps D accurate as rho -> 1);
  d/d mu = 4 rho sin h cos h / D;
  d/d logit rho = -2 rho^2 / (1 + rho) - rho q (4 sin^2 h - 2 q) / D
  (Mardia & Jupp 2000, §3.5.7).

A zero step has log density log z_k (the state's zero mass) and a positive
step adds log(1 - z_k); a missing step or turn has log density 0 and
derivative 0 (Morales et al. 2004).

References
----------
Mardia, K. V. & Jupp, P. E. (2000). Directional Statistics. Wiley.
Morales, J. M., Haydon, D. T., Frair, J., Holsinger, K. E. & Fryxell, J. M.
(2004). Extracting more out of relocation data: building movement models as
mixtures of random walks. Ecology 85: 2436-2445.
"""

from __future__ import annotations

import numba
import numpy as np
from scipy import special

#: Codes of a slot's step in :func:`slot_terms`.
MISSING, POSITIVE, ZERO = 0, 1, 2

_LOG_2PI = float(np.log(2.0 * np.pi))


def step_constants(family: str, shape: np.ndarray, scale: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per-state constants of the step density: (log normaliser, slope constant).

    The log normaliser is subtracted from the log density.  Gamma:
    (log Gamma(a) + a log b, psi(a)); Weibull: (-log k, 0).
    """
    if family == "gamma":
        return special.gammaln(shape) + shape * np.log(scale), special.digamma(shape)
    return -np.log(shape), np.zeros_like(shape)


def turn_constants(family: str, conc: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per-state constants of the turn density: (log normaliser, slope constant).

    Von Mises: (log(2 pi I0e(kappa)), A(kappa) = I1e / I0e); wrapped Cauchy:
    (log(2 pi) - log(q (1 + rho)), q = 1 - rho).
    """
    if family == "von_mises":
        i0e = special.i0e(conc)
        return _LOG_2PI + np.log(i0e), special.i1e(conc) / i0e
    q = 1.0 - conc
    return _LOG_2PI - np.log(q * (1.0 + conc)), q


@numba.njit(cache=True, nogil=True)
def slot_terms(step_kind, x, log_x, turn_ok, turn, cos_t, sin_t, weibull, shape, scale, step_norm, step_slope,
               has_zero, log_zero, log_moving, cauchy, mu, conc, turn_norm, turn_slope, gradient):
    """Log densities of every slot's step and turn under every state, and their derivatives.

    Parameters
    ----------
    step_kind : ndarray of int8 (S,)
        ``MISSING``, ``POSITIVE`` or ``ZERO``.
    x, log_x : ndarray (S,)
        Step length and its log (any value where the step is not positive).
    turn_ok : ndarray of bool (S,)
        Whether the turning angle is observed.
    turn, cos_t, sin_t : ndarray (S,)
        Turning angle, its cosine and sine (any value where missing).
    weibull : bool
        Weibull steps (else gamma).
    shape, scale, step_norm, step_slope : ndarray (K,)
        Step parameters and :func:`step_constants`.
    has_zero : bool
        Whether the states have a zero mass z_k.
    log_zero, log_moving : ndarray (K,)
        log z_k and log(1 - z_k) (both 0 without a zero mass).
    cauchy : bool
        Wrapped Cauchy turns (else von Mises).
    mu, conc, turn_norm, turn_slope : ndarray (K,)
        Turn parameters and :func:`turn_constants`.
    gradient : bool
        Whether to fill the derivatives.

    Returns
    -------
    step_lp, turn_lp : ndarray (S, K)
        Log densities (0 where missing).
    deriv : ndarray (5, S, K)
        d step_lp / d log shape, d step_lp / d log scale, d turn_lp / d mu,
        d turn_lp / d free concentration, d step_lp / d logit z (1 - z at a
        zero step, -z at a positive one; 0 without a zero mass), all 0 where
        missing; shape (5, 0, K) when ``gradient`` is False.
    """
    n, k = x.size, shape.size
    step_lp = np.zeros((n, k))
    turn_lp = np.zeros((n, k))
    deriv = np.zeros((5, n if gradient else 0, k))
    zero = np.exp(log_zero) if has_zero else np.zeros(k)
    log_scale = np.log(scale)
    cos_mu, sin_mu = np.cos(mu), np.sin(mu)
    for t in range(n):
        kind = step_kind[t]
        for j in range(k):
            if kind == ZERO:
                step_lp[t, j] = log_zero[j]
                if gradient and has_zero:
                    deriv[4, t, j] = 1.0 - zero[j]
            elif kind == POSITIVE:
                if gradient and has_zero:
                    deriv[4, t, j] = -zero[j]
                a = shape[j]
                if weibull:
                    lz = log_x[t] - log_scale[j]
                    zk = np.exp(a * lz)
                    step_lp[t, j] = a * lz - log_x[t] - zk - step_norm[j] + log_moving[j]
                    if gradient:
                        deriv[0, t, j] = 1.0 + a * lz * (1.0 - zk)
                        deriv[1, t, j] = a * (zk - 1.0)
                else:
                    r = x[t] / scale[j]
                    step_lp[t, j] = (a - 1.0) * log_x[t] - r - step_norm[j] + log_moving[j]
                    if gradient:
                        deriv[0, t, j] = a * (log_x[t] - log_scale[j] - step_slope[j])
                        deriv[1, t, j] = r - a
            if not turn_ok[t]:
                continue
            if cauchy:
                rho, q = conc[j], turn_slope[j]
                h = 0.5 * (turn[t] - mu[j])
                sh, ch = np.sin(h), np.cos(h)
                d = q * q + 4.0 * rho * sh * sh
                turn_lp[t, j] = -turn_norm[j] - np.log(d)
                if gradient:
                    deriv[2, t, j] = 4.0 * rho * sh * ch / d
                    deriv[3, t, j] = -2.0 * rho * rho / (1.0 + rho) - rho * q * (4.0 * sh * sh - 2.0 * q) / d
            else:
                kappa = conc[j]
                c = cos_t[t] * cos_mu[j] + sin_t[t] * sin_mu[j]
                turn_lp[t, j] = kappa * (c - 1.0) - turn_norm[j]
                if gradient:
                    deriv[2, t, j] = kappa * (sin_t[t] * cos_mu[j] - cos_t[t] * sin_mu[j])
                    deriv[3, t, j] = kappa * (c - turn_slope[j])
    return step_lp, turn_lp, deriv


__all__ = ["MISSING", "POSITIVE", "ZERO", "slot_terms", "step_constants", "turn_constants"]
