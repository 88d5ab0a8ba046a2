"""Step and turn log densities of every slot and state, with their exact derivatives.

Compiled per-slot, per-state functions (numba, like :mod:`roamstat.states.recursions`)
give the log density of a slot's step and of its turning angle and their
derivatives with respect to the state's free parameters
(:mod:`roamstat.states.params`): log shape and log scale of the step, the mean
direction mu and the free concentration (log kappa or logit rho) of the turn.
:func:`slot_terms` tabulates the densities for a whole chain; the likelihood
pass of :mod:`roamstat.states.evaluate` calls the same functions slot by slot.
The per-state constants that need special functions (log-gamma and digamma of
the gamma shape, log I0 and A(kappa) = I1(kappa) / I0(kappa) of the von Mises
concentration) are computed once per evaluation for the K states, in numpy and
scipy.special, and handed on in :func:`state_table`.

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


#: Rows of the per-state table of :func:`state_table`.
(SHAPE, LOG_SCALE, INV_SCALE, STEP_NORM, STEP_SLOPE, LOG_ZERO, LOG_MOVING, ZERO, MU, COS_MU, SIN_MU, CONC,
 TURN_NORM, TURN_SLOPE) = range(14)


@numba.njit(cache=True, nogil=True)
def state_table(shape, scale, zero, mu, conc, step_norm, step_slope, turn_norm, turn_slope):
    """Per-state inputs of the slot terms, shape (14, K), rows named by this module's constants.

    ``zero`` is the zero mass per state, or an empty array without one (log z_k and
    log(1 - z_k) are then 0).
    """
    k = shape.size
    tab = np.zeros((14, k))
    for j in range(k):
        tab[SHAPE, j], tab[LOG_SCALE, j], tab[INV_SCALE, j] = shape[j], np.log(scale[j]), 1.0 / scale[j]
        tab[STEP_NORM, j], tab[STEP_SLOPE, j] = step_norm[j], step_slope[j]
        if zero.size:
            tab[LOG_ZERO, j], tab[LOG_MOVING, j], tab[ZERO, j] = np.log(zero[j]), np.log1p(-zero[j]), zero[j]
        tab[MU, j], tab[COS_MU, j], tab[SIN_MU, j] = mu[j], np.cos(mu[j]), np.sin(mu[j])
        tab[CONC, j], tab[TURN_NORM, j], tab[TURN_SLOPE, j] = conc[j], turn_norm[j], turn_slope[j]
    return tab


@numba.njit(cache=True, nogil=True)
def step_term(kind, x, log_x, tab, j, weibull):
    """Log density of one slot's step under state ``j`` (0 if missing)."""
    if kind == ZERO:
        return tab[LOG_ZERO, j]
    if kind == MISSING:
        return 0.0
    a = tab[SHAPE, j]
    if weibull:
        lz = log_x - tab[LOG_SCALE, j]
        return a * lz - log_x - np.exp(a * lz) - tab[STEP_NORM, j] + tab[LOG_MOVING, j]
    return (a - 1.0) * log_x - x * tab[INV_SCALE, j] - tab[STEP_NORM, j] + tab[LOG_MOVING, j]


@numba.njit(cache=True, nogil=True)
def step_slopes(kind, x, log_x, tab, j, weibull, has_zero):
    """d step_term / d (log shape, log scale, logit z) for one slot and state (0 if missing)."""
    d_zero = 0.0
    if has_zero and kind != MISSING:
        d_zero = 1.0 - tab[ZERO, j] if kind == ZERO else -tab[ZERO, j]
    if kind != POSITIVE:
        return 0.0, 0.0, d_zero
    a = tab[SHAPE, j]
    if weibull:
        lz = log_x - tab[LOG_SCALE, j]
        zk = np.exp(a * lz)
        return 1.0 + a * lz * (1.0 - zk), a * (zk - 1.0), d_zero
    return a * (log_x - tab[LOG_SCALE, j] - tab[STEP_SLOPE, j]), x * tab[INV_SCALE, j] - a, d_zero


@numba.njit(cache=True, nogil=True)
def turn_term(turn, cos_t, sin_t, tab, j, cauchy):
    """Log density of one slot's observed turn under state ``j``."""
    if cauchy:
        rho, q = tab[CONC, j], tab[TURN_SLOPE, j]
        sh = np.sin(0.5 * (turn - tab[MU, j]))
        return -tab[TURN_NORM, j] - np.log(q * q + 4.0 * rho * sh * sh)
    c = cos_t * tab[COS_MU, j] + sin_t * tab[SIN_MU, j]
    return tab[CONC, j] * (c - 1.0) - tab[TURN_NORM, j]


@numba.njit(cache=True, nogil=True)
def turn_slopes(turn, cos_t, sin_t, tab, j, cauchy):
    """d turn_term / d (mu, free concentration) for one slot's observed turn and state ``j``."""
    if cauchy:
        rho, q = tab[CONC, j], tab[TURN_SLOPE, j]
        h = 0.5 * (turn - tab[MU, j])
        sh, ch = np.sin(h), np.cos(h)
        d = q * q + 4.0 * rho * sh * sh
        return 4.0 * rho * sh * ch / d, -2.0 * rho * rho / (1.0 + rho) - rho * q * (4.0 * sh * sh - 2.0 * q) / d
    kappa = tab[CONC, j]
    c = cos_t * tab[COS_MU, j] + sin_t * tab[SIN_MU, j]
    return kappa * (sin_t * tab[COS_MU, j] - cos_t * tab[SIN_MU, j]), kappa * (c - tab[TURN_SLOPE, j])


@numba.njit(cache=True, nogil=True)
def slot_terms(step_kind, x, log_x, turn_ok, turn, cos_t, sin_t, tab, weibull, cauchy):
    """Log densities of every slot's step and turn under every state.

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
    tab : ndarray (14, K)
        :func:`state_table`.
    weibull, cauchy : bool
        Weibull steps (else gamma); wrapped Cauchy turns (else von Mises).

    Returns
    -------
    step_lp, turn_lp : ndarray (S, K)
        Log densities (0 where missing).
    """
    n, k = x.size, tab.shape[1]
    step_lp = np.zeros((n, k))
    turn_lp = np.zeros((n, k))
    for t in range(n):
        for j in range(k):
            step_lp[t, j] = step_term(step_kind[t], x[t], log_x[t], tab, j, weibull)
            if turn_ok[t]:
                turn_lp[t, j] = turn_term(turn[t], cos_t[t], sin_t[t], tab, j, cauchy)
    return step_lp, turn_lp


__all__ = ["MISSING", "POSITIVE", "ZERO", "slot_terms", "state_table", "step_constants", "step_slopes", "step_term",
           "turn_constants", "turn_slopes", "turn_term"]
