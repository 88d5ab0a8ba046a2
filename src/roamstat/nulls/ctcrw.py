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
    motion : roamstat.motion.animal.AnimalMotion, optional
        The animal's motion stage, fitted on the same fixes (the pipeline's, so the models are
        fitted once); without it brownian and ctcrw are fitted here.  Fits do not depend on
        which other models were fitted, so both ways give the same null.

    Raises
    ------
    NullUnavailable
        Too few fixes, all fixes at one position, or no unbounded model could be fitted.
    """

    in_time = True  # compared at the fixes' own times, not on nominal step indices

    def __init__(self, fixes_a: pd.DataFrame, cfg, motion=None):
        from roamstat import motion as models  # the Kalman-filter models; imported only when this null runs
        from roamstat.motion.animal import fit_animal_motion
        from roamstat.motion.fit import MIN_FIXES

        if motion is None:
            unbounded = tuple(m for m in models.MOTION_MODELS if m not in models.RANGE_RESIDENT)
            fixes = _in_time_order(fixes_a)
            _check_movement(fixes["x_m"].to_numpy(float), fixes["y_m"].to_numpy(float), MIN_FIXES)
            motion = fit_animal_motion(fixes, cfg, models=unbounded)
        _check_movement(motion.x_m, motion.y_m, MIN_FIXES)
        fit = motion.best_unbounded
        if fit is None:
            raise NullUnavailable("no unbounded motion model (brownian, ctcrw) could be fitted")
        self.fit, self.t_s = fit, motion.t_s
        self.error_sd_m = motion.error_sd_m(fit)
        self.note = f"null model {fit.name}, {motion.error.source} location error"

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


def _check_movement(x: np.ndarray, y: np.ndarray, min_fixes: int) -> None:
    """Raise NullUnavailable for too few fixes or a track that never moves."""
    if x.size < min_fixes:
        raise NullUnavailable(f"{x.size} fixes, fewer than the {min_fixes} a motion model needs")
    if np.ptp(x) == 0 and np.ptp(y) == 0:
        raise NullUnavailable("all fixes at one position: no movement to model")


def _in_time_order(fixes_a: pd.DataFrame) -> pd.DataFrame:
    """The fixes with finite time and position, sorted by time (stable)."""
    t = pd.to_datetime(fixes_a["time"], utc=True)
    x = pd.to_numeric(fixes_a["x_m"], errors="coerce").to_numpy(float)
    y = pd.to_numeric(fixes_a["y_m"], errors="coerce").to_numpy(float)
    good = t.notna().to_numpy() & np.isfinite(x) & np.isfinite(y)
    return fixes_a[good].assign(time=t[good]).sort_values("time", kind="stable")
