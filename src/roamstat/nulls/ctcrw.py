"""Continuous-time null: the animal's fitted unbounded motion model, simulated at its own fix times.

The step-based nulls assume fixes on a regular schedule and exact positions.
This null does not: it fits Brownian motion and the continuous-time correlated
random walk (integrated Ornstein-Uhlenbeck velocity; Johnson et al. 2008) by
the exact Kalman-filter likelihood at the observed times with the fixes'
location error (:mod:`roamstat.motion`), keeps the one with the lower AICc,
and simulates it exactly at the observed times from the first fix, adding
Gaussian location error with each fix's own SD.  The simulated "observed"
track therefore has the animal's gaps, irregular times and error, and its
net displacement and NSD curve are compared with the animal's by the same
statistics as the other nulls.  A range-resident model (OU position) is never
the null: it would make "closer" untestable.

Self-check (in the spirit of Kareiva & Shigesada 1983): ``expected_nsd``
is the model's analytic E|r(t) - r(0)|^2 at the last fix plus the error term
2 (s_0^2 + s_n^2) (two axes, per-axis SDs s of the first and last fix), to
be compared with the simulated mean.

References
----------
Johnson, D. S., London, J. M., Lea, M.-A. & Durban, J. W. (2008). Continuous-time
correlated random walk model for animal telemetry data. Ecology 89: 1208-1215.
Kareiva, P. M. & Shigesada, N. (1983). Analyzing insect movement as a correlated
random walk. Oecologia 56: 234-238.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from roamstat.nulls.walk import NullUnavailable


class CtcrwNull:
    """The best unbounded motion model of one animal, simulated at its fix times with its error.

    Parameters
    ----------
    fixes_a : DataFrame
        The animal's observed fixes (``time``, ``x_m``, ``y_m``; ``dop`` and ``quality`` when present).
    cfg : Config
        Uses ``uere_m`` and ``error_class_table`` (see ``motion.location_error``).

    Raises
    ------
    NullUnavailable
        Too few fixes, all fixes at one position, or no unbounded model could be fitted.
    """

    in_time = True  # compared at the fixes' own times, not on nominal step indices

    def __init__(self, fixes_a: pd.DataFrame, cfg):
        from roamstat import motion  # the Kalman-filter models; imported only when this null runs
        from roamstat.motion.fit import MIN_FIXES

        t = pd.to_datetime(fixes_a["time"], utc=True)
        x = pd.to_numeric(fixes_a["x_m"], errors="coerce").to_numpy(float)
        y = pd.to_numeric(fixes_a["y_m"], errors="coerce").to_numpy(float)
        good = t.notna().to_numpy() & np.isfinite(x) & np.isfinite(y)
        fixes = fixes_a[good].assign(_t=t[good]).sort_values("_t", kind="stable")
        if len(fixes) < MIN_FIXES:
            raise NullUnavailable(f"{len(fixes)} fixes, fewer than the {MIN_FIXES} a motion model needs")
        if np.ptp(x[good]) == 0 and np.ptp(y[good]) == 0:
            raise NullUnavailable("all fixes at one position: no movement to model")
        t_s = ((fixes["_t"] - fixes["_t"].iloc[0]) / pd.Timedelta(seconds=1)).to_numpy(float)
        table = getattr(cfg, "error_class_table", None)
        error = motion.location_error(fixes.drop(columns="_t"), getattr(cfg, "uere_m", None),
                                      motion.read_class_table(table) if table else None)
        unbounded = tuple(m for m in motion.MOTION_MODELS if m not in motion.RANGE_RESIDENT)
        fit = motion.best_unbounded(motion.fit_motion_models(t_s, fixes["x_m"].to_numpy(float),
                                                             fixes["y_m"].to_numpy(float), error, models=unbounded))
        if fit is None:
            raise NullUnavailable("no unbounded motion model (brownian, ctcrw) could be fitted")
        sd = error.sd_m if error.sd_m is not None else np.full(t_s.size, fit.params["error_sd_m"])
        self.fit, self.t_s = fit, t_s
        self.error_sd_m = np.nan_to_num(np.asarray(sd, dtype=float), nan=0.0)
        self.note = f"null model {fit.name}, {error.source} location error"

    def simulate(self, n_steps: int, n_reps: int, rng: np.random.Generator, eval_idx) -> np.ndarray:
        """Squared displacement (m^2) from the simulated first fix at fixes ``eval_idx`` (index 0 first).

        ``n_steps`` (the number of observed intervals) is part of the common null signature and
        not needed here: the times are the fixes' own.
        """
        idx = np.asarray(eval_idx, dtype=np.int64)
        if idx.size == 0 or idx[0] != 0 or np.any(np.diff(idx) <= 0):
            raise ValueError("eval_idx must be strictly increasing fix positions starting at 0")
        # a Gaussian Markov process sampled at a subset of times is the process at those times
        pos = self.fit.simulate(self.t_s[idx], n_reps, rng, error_sd_m=self.error_sd_m[idx])
        return np.sum((pos - pos[:, :1, :]) ** 2, axis=2)

    def expected_nsd(self, last: int) -> float:
        """Analytic E[NSD] (m^2) at fix ``last``, location error of the first and that fix included."""
        lag = self.t_s[last] - self.t_s[0]
        error = 2.0 * (self.error_sd_m[0] ** 2 + self.error_sd_m[last] ** 2)
        return float(np.asarray(self.fit.expected_nsd(np.array([lag]))).ravel()[0] + error)
