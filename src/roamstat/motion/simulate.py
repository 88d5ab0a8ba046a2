"""Exact simulation of a fitted motion model at arbitrary times, vectorised over replicates.

The state is propagated with the same exact transition (F, Q) as the likelihood, so the draws
have exactly the model's Gaussian law at the requested times, whatever their spacing.
"""
from __future__ import annotations

import numba
import numpy as np

from .kalman import initial_cov, transition


_CHUNK = 256  # time steps of normal deviates drawn at once (memory stays flat)


@numba.njit(cache=True, nogil=True)
def _propagate(F, L, z0, z1, state, out):
    """Advance ``state`` (2, reps, axes) through each step, writing positions to ``out``."""
    for i in range(F.shape[0]):
        for rep in range(state.shape[1]):
            for ax in range(2):
                pos, vel = state[0, rep, ax], state[1, rep, ax]
                a, b = z0[i, rep, ax], z1[i, rep, ax]
                state[0, rep, ax] = F[i, 0, 0] * pos + F[i, 0, 1] * vel + L[i, 0, 0] * a
                state[1, rep, ax] = F[i, 1, 0] * pos + F[i, 1, 1] * vel + L[i, 1, 0] * a + L[i, 1, 1] * b
                out[rep, i, ax] = state[0, rep, ax]


def _chol2(Q: np.ndarray) -> np.ndarray:
    """Lower Cholesky factors of a stack of 2x2 PSD matrices (zero-safe), shape (n, 2, 2)."""
    L = np.zeros_like(Q)
    L[:, 0, 0] = np.sqrt(np.maximum(Q[:, 0, 0], 0.0))
    safe = L[:, 0, 0] > 0
    L[:, 1, 0] = np.where(safe, Q[:, 1, 0] / np.where(safe, L[:, 0, 0], 1.0), 0.0)
    L[:, 1, 1] = np.sqrt(np.maximum(Q[:, 1, 1] - L[:, 1, 0] ** 2, 0.0))
    return L


def simulate(fit, t_s, n_reps: int, rng: np.random.Generator, error_sd_m=None) -> np.ndarray:
    """Draw ``n_reps`` tracks of ``fit``'s model at times ``t_s``.

    Parameters
    ----------
    fit : MotionFit
    t_s : array-like
        Sorted times (s); spacing arbitrary, repeats allowed.
    n_reps : int
    rng : numpy.random.Generator
    error_sd_m : float or array-like, optional
        Per-fix location-error SD per axis (m) added to the true positions.

    Returns
    -------
    ndarray, shape (n_reps, len(t_s), 2)
        Unbounded models: positions relative to the true position at ``t_s[0]`` (which is 0),
        velocity started from its stationary law. Range-resident models: positions drawn from
        the stationary law around ``fit.centre_xy``.
    """
    t = np.asarray(t_s, dtype=float)
    dt = np.diff(t, prepend=t[:1])
    F, Q = transition(fit.name, fit.params, dt)
    L = _chol2(Q)
    L0 = _chol2(initial_cov(fit.name, fit.params, 0.0)[None])[0]
    z = rng.standard_normal((2, n_reps, 2))
    state = np.stack([L0[0, 0] * z[0], L0[1, 0] * z[0] + L0[1, 1] * z[1]])  # (pos/vel, rep, axis)
    out = np.empty((n_reps, t.size, 2))
    out[:, 0] = state[0]
    # models without a velocity (brownian, ou) need one deviate per step, not two
    no_velocity = np.zeros((_CHUNK, n_reps, 2)) if fit.name in ("brownian", "ou") else None
    for start in range(1, t.size, _CHUNK):
        stop = min(start + _CHUNK, t.size)
        z0 = rng.standard_normal((stop - start, n_reps, 2))
        z1 = rng.standard_normal(z0.shape) if no_velocity is None else no_velocity[: stop - start]
        _propagate(F[start:stop], L[start:stop], z0, z1, state, out[:, start:stop])
    if fit.range_resident:
        out += np.asarray(fit.centre_xy)
    if error_sd_m is not None:
        sd = np.broadcast_to(np.asarray(error_sd_m, dtype=float), t.shape)
        out += rng.standard_normal(out.shape) * sd[None, :, None]
    return out
