"""Log-likelihood of a movement HMM and its exact gradient, in one compiled pass.

The optimiser of :mod:`roamstat.states.fit` calls this thousands of times per
animal, so everything after the per-state special functions happens in one
numba call: the transition matrix from its multinomial logits, the stationary
distribution delta (Zucchini, MacDonald & Langrock 2016, exercise 2.8), the
scaled forward recursion with the slot log densities of
:mod:`roamstat.states.densities` formed on the fly, then a backward sweep that
forms the local state probabilities and the expected transition counts as it
goes and sums them against the densities' derivatives (Fisher's identity:
d log L / d theta = sum_t sum_k Pr(C_t = k | x) d log f_k(x_t) / d theta, and
d log L / d gamma_ij = N_ij / gamma_ij with N_ij the expected number of i -> j
transitions; ibid. §4.2 for the expectations).  The slope of the likelihood
through delta reuses the inverse of delta's linear system.  The arithmetic is
that of :func:`~roamstat.states.recursions.forward_backward` (same scaling,
same -inf rule), only fused: no (S, K) table of log densities, derivatives or
backward vectors is kept, and the forward normalisers are multiplied together
and their log taken only when the product grows small.

numba caches this module's compiled code against this file's timestamp only:
after editing :mod:`~roamstat.states.densities` or
:mod:`~roamstat.states.recursions`, touch this file (or clear its
``__pycache__``) so the pass is compiled again with the new functions.

References
----------
Zucchini, W., MacDonald, I. L. & Langrock, R. (2016). Hidden Markov Models
for Time Series: An Introduction Using R, 2nd ed. CRC Press.
"""

from __future__ import annotations

import numba
import numpy as np

from roamstat.states.densities import state_table, step_slopes, step_term, turn_slopes, turn_term
from roamstat.states.recursions import forward_step

#: The product of forward normalisers (each in (0, 1]) is logged and reset below this; a
#: normaliser below it is logged on its own, so the product never underflows.
_TINY = 1e-150


@numba.njit(cache=True, nogil=True)
def _transitions(theta, k, offset):
    """Transition matrix from its off-diagonal logits ``theta[offset:]`` (row-wise, diagonal the reference)."""
    gamma = np.zeros((k, k))
    idx = offset
    for i in range(k):
        top = 0.0
        for j in range(k):
            if j != i:
                gamma[i, j] = theta[idx]
                top = max(top, theta[idx])
                idx += 1
        total = 0.0
        for j in range(k):
            gamma[i, j] = np.exp(gamma[i, j] - top)
            total += gamma[i, j]
        for j in range(k):
            gamma[i, j] /= total
    return gamma


@numba.njit(cache=True, nogil=True)
def _stationary(gamma):
    """delta solving delta (I - Gamma + U) = 1 (clipped at 0, renormalised), and (I - Gamma + U)^-1."""
    k = gamma.shape[0]
    inv = np.linalg.inv(np.eye(k) - gamma + 1.0)
    delta = np.maximum(inv.sum(axis=0), 0.0)
    return delta / delta.sum(), inv


@numba.njit(cache=True, nogil=True, error_model="numpy")
def loglik_gradient(theta, shape, scale, conc, step_norm, step_slope, turn_norm, turn_slope, weibull, cauchy,
                    has_zero, step_kind, x, log_x, turn_ok, turn, cos_t, sin_t, restart):
    """Log-likelihood of a chain and its gradient with respect to the free parameters ``theta``.

    Parameters
    ----------
    theta : ndarray
        Free parameters in the order of :class:`~roamstat.states.params.Layout`.
    shape, scale, conc : ndarray (K,)
        Natural step shape, scale and turn concentration of ``theta``.
    step_norm, step_slope, turn_norm, turn_slope : ndarray (K,)
        :func:`~roamstat.states.densities.step_constants` and
        :func:`~roamstat.states.densities.turn_constants`.
    weibull, cauchy, has_zero : bool
        Weibull steps (else gamma), wrapped Cauchy turns (else von Mises), a zero mass.
    step_kind, x, log_x, turn_ok, turn, cos_t, sin_t : ndarray (S,)
        Per-slot observations, as :func:`~roamstat.states.densities.slot_terms`.
    restart : ndarray of bool (S,)
        True at each segment's first slot.

    Returns
    -------
    loglik : float
        -inf when a slot's log density is not finite or a slot has probability 0.
    grad : ndarray
        Same layout as ``theta`` (zeros when ``loglik`` is -inf).
    """
    k, n = shape.size, x.size
    n_eta = k * (k - 1)
    grad = np.zeros(theta.size)
    zero = np.empty(0)
    if has_zero:
        zero = 1.0 / (1.0 + np.exp(-theta[4 * k + n_eta:]))
    tab = state_table(shape, scale, zero, theta[2 * k:3 * k], conc, step_norm, step_slope, turn_norm, turn_slope)
    gamma = _transitions(theta, k, 4 * k)
    delta, inv = _stationary(gamma)

    # forward: alpha[t] = Pr(C_t | x up to t); dens[t] = f(x_t | C_t) / max over states
    alpha = np.empty((n, k))
    dens = np.empty((n, k))
    prior_t = np.empty(k)  # Pr(C_t | x before t) from forward_step; only alpha is kept
    lp = np.empty(k)
    ll, product = 0.0, 1.0
    for t in range(n):
        top = -np.inf
        for j in range(k):
            lp[j] = step_term(step_kind[t], x[t], log_x[t], tab, j, weibull)
            if turn_ok[t]:
                lp[j] += turn_term(turn[t], cos_t[t], sin_t[t], tab, j, cauchy)
            if not np.isfinite(lp[j]):
                return -np.inf, grad
            top = max(top, lp[j])
        ll += top
        for j in range(k):
            dens[t, j] = np.exp(lp[j] - top)
        total = forward_step(t, restart[t], delta, gamma, dens, prior_t, alpha)
        if total <= 0.0 or not np.isfinite(total):
            return -np.inf, grad
        scale_t = 1.0 / total
        for j in range(k):
            alpha[t, j] *= scale_t
        if total < _TINY:
            ll += np.log(total)
        else:
            product *= total
            if product < _TINY:
                ll += np.log(product)
                product = 1.0
    ll += np.log(product)

    # backward, fused with the posterior sums: beta[t] (rescaled) from beta[t + 1]
    sums = np.zeros((5, k))
    counts = np.zeros((k, k))
    first = np.zeros(k)
    beta = np.ones(k)
    carried = np.empty(k)  # dens[t] * beta[t]
    back = np.empty(k)
    local = np.empty(k)
    for t in range(n - 1, -1, -1):
        total = 0.0
        for j in range(k):
            local[j] = alpha[t, j] * beta[j]
            total += local[j]
        scale_t = 1.0 / total
        for j in range(k):
            w = local[j] * scale_t
            d_shape, d_scale, d_zero = step_slopes(step_kind[t], x[t], log_x[t], tab, j, weibull, has_zero)
            sums[0, j] += w * d_shape
            sums[1, j] += w * d_scale
            sums[4, j] += w * d_zero
            if turn_ok[t]:
                d_mu, d_conc = turn_slopes(turn[t], cos_t[t], sin_t[t], tab, j, cauchy)
                sums[2, j] += w * d_mu
                sums[3, j] += w * d_conc
        if restart[t]:
            for j in range(k):
                first[j] += local[j] * scale_t
                beta[j] = 1.0  # the previous slot ends a segment
            continue
        for j in range(k):
            carried[j] = dens[t, j] * beta[j]
        total, xi_total = 0.0, 0.0
        for i in range(k):
            b = 0.0
            for j in range(k):
                b += gamma[i, j] * carried[j]
            back[i] = b
            total += b
            xi_total += alpha[t - 1, i] * b
        xi_scale, beta_scale = 1.0 / xi_total, 1.0 / total
        for i in range(k):
            a = alpha[t - 1, i] * xi_scale
            for j in range(k):
                counts[i, j] += a * gamma[i, j] * carried[j]
            beta[i] = back[i] * beta_scale

    # assemble in the layout's order: shape, scale, mu, concentration, transition logits, zero mass
    for j in range(k):
        for d in range(4):
            grad[d * k + j] = sums[d, j]
        if has_zero:
            grad[4 * k + n_eta + j] = sums[4, j]
    # d log L / d eta_ij through the transition counts and through delta (delta A = 1' with
    # A = I - Gamma + U: sum_k w_k d delta_k / d gamma_il = delta_i (A^-1 w)_l, w = first / delta)
    solved = inv @ (first / delta)
    idx = 4 * k
    for i in range(k):
        row_counts = 0.0
        slope_mean = 0.0
        for j in range(k):
            row_counts += counts[i, j]
            slope_mean += delta[i] * solved[j] * gamma[i, j]
        for j in range(k):
            if j != i:
                grad[idx] = (counts[i, j] - gamma[i, j] * row_counts
                             + gamma[i, j] * (delta[i] * solved[j] - slope_mean))
                idx += 1
    return ll, grad


__all__ = ["loglik_gradient"]
