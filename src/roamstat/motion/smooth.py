"""Posterior (smoothed) positions of a fitted model at the fixes and at prediction times.

Rauch-Tung-Striebel fixed-interval smoother on the same exact state-space form as the
likelihood; the result is what ``track_smoothed.csv`` holds. Smoothed points are an output
only: they never feed the step and turn fits.

References
----------
Rauch, H.E., Tung, F. & Striebel, C.T. (1965) Maximum likelihood estimates of linear dynamic
systems. AIAA J. 3, 1445-1450.
Johnson, D.S. et al. (2008) Continuous-time correlated random walk model for animal telemetry
data. Ecology 89, 1208-1215 (prediction at arbitrary times).
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from .errors import LocationError
from .kalman import initial_cov, transition
from .kfilter import backward, forward
from .likelihood import error_variance, prepare_track

SMOOTH_COLUMNS = ("t_s", "x_m", "y_m", "se_m", "predicted")


def smooth(fit, t_s, x_m, y_m, error: LocationError, predict_t_s=None) -> pd.DataFrame:
    """Smoothed position and its SE at every fix and, optionally, at extra times.

    Parameters
    ----------
    fit : MotionFit
        The model to smooth with (usually the best by AICc).
    t_s, x_m, y_m : array-like
        The fixes the model was fitted to.
    error : LocationError
        Their location error (the fit's estimated SD is used when ``error.sd_m`` is None).
    predict_t_s : array-like, optional
        Extra times (s), e.g. a regular grid; those outside the fixes' time span are dropped.

    Returns
    -------
    DataFrame
        ``t_s, x_m, y_m, se_m, predicted`` sorted by time (fix rows first at equal times);
        ``se_m`` is the posterior SD per axis (m); ``predicted`` is True for the extra times.
    """
    track = prepare_track(t_s, x_m, y_m, error.sd_m)
    r_obs = error_variance(track, fit.params)
    extra = np.asarray([] if predict_t_s is None else predict_t_s, dtype=float)
    extra = extra[(extra >= track.t_s[0]) & (extra <= track.t_s[-1])]
    times = np.concatenate([track.t_s, extra])
    observed = np.concatenate([np.ones(track.n, bool), np.zeros(extra.size, bool)])
    order = np.lexsort((~observed, times))
    times, observed = times[order], observed[order]
    offset = np.zeros(2) if not fit.range_resident else np.asarray(fit.centre_xy) - track.origin
    Y = np.zeros((times.size, 2))
    Y[observed] = (track.xy - offset)[order[observed]]
    r = np.zeros(times.size)
    r[observed] = r_obs[order[observed]]
    # F and Q once per distinct interval, as in the likelihood: a schedule has few of them
    dt_unique, interval = np.unique(np.diff(times, prepend=times[:1]), return_inverse=True)
    F, Q = transition(fit.name, fit.params, dt_unique)
    P0 = initial_cov(fit.name, fit.params, r[0])
    _, _, mp, Pp, mf, Pf = forward(F, Q, interval, r, observed, Y, P0, fit.range_resident)
    ms, Ps = backward(F, interval, mp, Pp, mf, Pf)
    xy = ms[:, :, 0] + offset + track.origin
    return pd.DataFrame({"t_s": times, "x_m": xy[:, 0], "y_m": xy[:, 1],
                         "se_m": np.sqrt(np.maximum(Ps[:, 0, 0], 0.0)), "predicted": ~observed})
