"""Forward, backward and Viterbi recursions of a K-state hidden Markov model.

All three work on a chain of time slots with, per slot, the log density of
the observation under each state (``logp``, 0 where the observation is
missing, so that it contributes density 1) and a ``restart`` flag at the
first slot of each segment, where the chain starts afresh from ``delta``
(segments are independent given the parameters).  The forward recursion is
the scaled one of Zucchini, MacDonald & Langrock (2016, §3.2 and §5.1): each
forward vector is normalised to sum 1 and the log of the normaliser summed,
after the slot's largest log density has been taken out, so nothing under-
or overflows.  Viterbi works on log probabilities (ibid., §5.4.2).  Compiled
with numba: the recursion is sequential in time and K is small, so a Python
loop would cost more than everything else in a fit.  The kernels release the GIL
(``nogil``): a big animal's states fit runs on a thread beside its other stages.

References
----------
Zucchini, W., MacDonald, I. L. & Langrock, R. (2016). Hidden Markov Models
for Time Series: An Introduction Using R, 2nd ed. CRC Press.
"""

from __future__ import annotations

import numba
import numpy as np


@numba.njit(cache=True, nogil=True)
def forward_loglik(logp, restart, delta, gamma):
    """Log-likelihood of the chain (sum over segments).

    Parameters
    ----------
    logp : ndarray (S, K)
        Log observation density per slot and state (0 for a missing slot).
    restart : ndarray of bool (S,)
        True at each segment's first slot (slot 0 must be True).
    delta : ndarray (K,)
        Initial distribution of every segment.
    gamma : ndarray (K, K)
        Transition probability matrix (rows sum to 1).
    """
    n, k = logp.shape
    phi = np.empty(k)
    new = np.empty(k)
    ll = 0.0
    for t in range(n):
        m = logp[t, 0]
        for j in range(1, k):
            m = max(m, logp[t, j])
        total = 0.0
        for j in range(k):
            if restart[t]:
                prior = delta[j]
            else:
                prior = 0.0
                for i in range(k):
                    prior += phi[i] * gamma[i, j]
            new[j] = prior * np.exp(logp[t, j] - m)
            total += new[j]
        if total <= 0.0 or not np.isfinite(total):
            return -np.inf
        for j in range(k):
            phi[j] = new[j] / total
        ll += np.log(total) + m
    return ll


@numba.njit(cache=True, nogil=True, inline="always")
def forward_step(t, restart, delta, gamma, dens, prior_t, alpha):
    """Slot ``t`` of the scaled forward recursion on (S, K) tables; returns the normaliser.

    ``prior_t`` (K,) receives Pr(C_t | x before t): ``delta`` at a restart, else
    ``alpha[t - 1]`` Gamma (already normalised); ``alpha[t]`` = ``prior_t`` x ``dens[t]``,
    left unnormalised.
    """
    k = delta.size
    total = 0.0
    for j in range(k):
        if restart:
            p = delta[j]
        else:
            p = 0.0
            for i in range(k):
                p += alpha[t - 1, i] * gamma[i, j]
        prior_t[j] = p
        alpha[t, j] = p * dens[t, j]
        total += alpha[t, j]
    return total


@numba.njit(cache=True, nogil=True)
def forward_backward(logp, restart, delta, gamma):
    """Log-likelihood and normalised forward and backward vectors.

    Returns
    -------
    loglik : float
        As :func:`forward_loglik` (-inf if some slot has probability 0).
    alpha : ndarray (S, K)
        Pr(C_t = k | observations of the segment up to t).
    prior : ndarray (S, K)
        Pr(C_t = k | observations of the segment before t) (delta at a restart).
    beta : ndarray (S, K)
        Backward probabilities, rescaled per slot (only ratios across k matter).
    """
    n, k = logp.shape
    alpha = np.empty((n, k))
    prior = np.empty((n, k))
    beta = np.empty((n, k))
    dens = np.empty((n, k))
    ll = 0.0
    for t in range(n):
        m = logp[t, 0]
        for j in range(1, k):
            m = max(m, logp[t, j])
        ll += m
        for j in range(k):
            dens[t, j] = np.exp(logp[t, j] - m)
    for t in range(n):
        total = forward_step(t, restart[t], delta, gamma, dens, prior[t], alpha)
        if total <= 0.0 or not np.isfinite(total):
            return -np.inf, alpha, prior, beta
        ll += np.log(total)
        for j in range(k):
            alpha[t, j] /= total
    for t in range(n - 1, -1, -1):
        if t == n - 1 or restart[t + 1]:
            for i in range(k):
                beta[t, i] = 1.0
            continue
        total = 0.0
        for i in range(k):
            b = 0.0
            for j in range(k):
                b += gamma[i, j] * dens[t + 1, j] * beta[t + 1, j]
            beta[t, i] = b
            total += b
        for i in range(k):
            beta[t, i] /= total
    return ll, alpha, prior, beta


@numba.njit(cache=True, nogil=True)
def viterbi(logp, restart, delta, gamma):
    """Most probable state sequence (0-based state indices), per segment."""
    n, k = logp.shape
    log_delta = np.log(delta)
    log_gamma = np.log(gamma)
    v = np.empty((n, k))
    back = np.zeros((n, k), dtype=np.int64)
    for t in range(n):
        for j in range(k):
            if restart[t]:
                v[t, j] = log_delta[j] + logp[t, j]
            else:
                best = v[t - 1, 0] + log_gamma[0, j]
                arg = 0
                for i in range(1, k):
                    c = v[t - 1, i] + log_gamma[i, j]
                    if c > best:
                        best, arg = c, i
                v[t, j] = best + logp[t, j]
                back[t, j] = arg
    path = np.empty(n, dtype=np.int64)
    for t in range(n - 1, -1, -1):
        if t == n - 1 or restart[t + 1]:
            path[t] = np.argmax(v[t])
        else:
            path[t] = back[t + 1, path[t + 1]]
    return path
