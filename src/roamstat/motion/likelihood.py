"""Exact Gaussian log-likelihood of a track under a motion model (prediction-error form).

Every model is scored on the same data, the fixes after the first given the first:
log p(z_2..n | z_1). For unbounded models (brownian, ctcrw) this is the diffuse-prior
likelihood (the position has no distribution of its own, only its increments do); for
range-resident models it is the stationary likelihood minus the first fix's own term, so
AICc compares like with like. The mean position of a range-resident model enters the
innovations linearly and is profiled out in closed form (generalised least squares).

References
----------
Harvey, A.C. (1989) Forecasting, Structural Time Series Models and the Kalman Filter. CUP.
de Jong, P. (1991) The diffuse Kalman filter. Ann. Statist. 19, 1073-1083.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .kalman import RANGE_RESIDENT, initial_cov, transition
from .kfilter import forward, innovation_loglik



@dataclass(frozen=True)
class Track:
    """One animal's fixes prepared for the filter (positions relative to the first fix)."""

    t_s: np.ndarray
    dt_s: np.ndarray          # dt_s[i] = t_s[i] - t_s[i-1], dt_s[0] = 0
    xy: np.ndarray            # (n, 2) metres, relative to origin
    origin: np.ndarray        # (2,) the first fix
    error_var: np.ndarray | None  # (n,) known per-axis error variance, None = estimated
    # the distinct intervals and each fix's one: a fix schedule has few, so every likelihood
    # evaluation computes the transitions once per distinct interval, not once per fix
    dt_unique: np.ndarray
    dt_index: np.ndarray
    xy1: np.ndarray  # (n, 3) positions and a column of ones (the profiled mean)

    @property
    def n(self) -> int:
        return self.t_s.size


def prepare_track(t_s, x_m, y_m, error_sd_m) -> Track:
    """Check times and build a :class:`Track`; ``error_sd_m`` is per fix or None."""
    t = np.asarray(t_s, dtype=float)
    xy = np.column_stack([np.asarray(x_m, dtype=float), np.asarray(y_m, dtype=float)])
    if t.ndim != 1 or xy.shape[0] != t.size:
        raise ValueError("t_s, x_m and y_m must be 1-D and of equal length")
    if not (np.all(np.isfinite(t)) and np.all(np.isfinite(xy))):
        raise ValueError("times and positions must be finite")
    dt = np.diff(t, prepend=t[:1])
    if np.any(dt < 0):
        raise ValueError("fix times must be sorted")
    var = None
    if error_sd_m is not None:
        var = np.broadcast_to(np.asarray(error_sd_m, dtype=float), t.shape) ** 2
    rel = xy - xy[0]
    dt_unique, dt_index = np.unique(dt, return_inverse=True)
    return Track(t, dt, rel, xy[0].copy(), var, dt_unique, dt_index.ravel(),
                 np.column_stack([rel, np.ones(t.size)]))


def error_variance(track: Track, p: dict) -> np.ndarray:
    """Per-fix error variance: the known one, or the estimated SD squared at every fix."""
    if track.error_var is not None:
        return np.ascontiguousarray(track.error_var)
    return np.full(track.n, p["error_sd_m"] ** 2)


def conditional_loglik(name: str, p: dict, track: Track, mean_xy=None, transitions=None) -> tuple[float, np.ndarray]:
    """log p(fixes 2..n | fix 1) and the mean position used (NaN for unbounded models).

    Parameters
    ----------
    name : str
        Motion model.
    p : dict
        Natural parameters, including ``error_sd_m`` when the track's error is estimated.
    track : Track
    mean_xy : array-like of 2, optional
        Fixed mean position (absolute metres) for a range-resident model; profiled when None.
    transitions : (F, Q), optional
        ``kalman.transition`` over ``track.dt_unique``, when the caller has them already.
    """
    F, Q = transition(name, p, track.dt_unique) if transitions is None else transitions
    interval = track.dt_index
    r = error_variance(track, p)
    resident = name in RANGE_RESIDENT
    P0 = initial_cov(name, p, r[0])
    if not resident:
        Y, mean = track.xy, np.full(2, np.nan)
    elif mean_xy is None:
        Y = track.xy1
    else:
        mean = np.asarray(mean_xy, dtype=float)
        Y = track.xy - (mean - track.origin)
    observed = np.ones(track.n, dtype=np.bool_)
    V, S, *_ = forward(F, Q, interval, r, observed, np.ascontiguousarray(Y), P0, resident, False)
    profile = resident and mean_xy is None
    loglik, rel = innovation_loglik(V, S, profile)
    if profile:
        mean = rel + track.origin  # GLS mean from the innovations of y and of 1
    return float(loglik), mean
