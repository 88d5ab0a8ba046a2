"""One animal's motion stage: its location error resolved once and the models fitted once.

The pipeline fits the continuous-time models (:mod:`roamstat.motion.fit`) on the animal's
observed fixes (``rows.located``: reported positions, never interpolated ones, in time order)
and hands the one :class:`AnimalMotion` to every consumer: motion_models.csv, the ctcrw null
(:mod:`roamstat.nulls.ctcrw`), the autocorrelation-aware ranges and track_smoothed.csv.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..errors import RoamstatError
from ..track import as_ns
from .errors import LocationError, location_error, read_class_table
from .fit import MotionFit, best_fit, best_unbounded, fit_motion_models
from .kalman import MOTION_MODELS
from .smooth import smooth

#: Most grid points ``--predict`` may add per animal (a typo such as "1s" for "1h" on a year of data).
MAX_PREDICT_POINTS = 1_000_000
#: Columns of track_smoothed.csv (``x_m, y_m`` in the animal's frame; ``lat, lon`` from it).
SMOOTHED_COLUMNS = ("animal_id", "time", "t_s", "model", "x_m", "y_m", "lat", "lon", "se_m", "predicted")


@dataclass(frozen=True, eq=False)
class AnimalMotion:
    """The fixes the models saw, their location error and the fits (one per model asked).

    Attributes
    ----------
    time0 : pandas.Timestamp or None
        Time of the first fix (``t_s`` counts seconds from it); None without fixes.
    t_s, x_m, y_m : ndarray
        Fix times (s) and positions (m, the animal's planar frame), in time order.
    error : LocationError
    fits : tuple of MotionFit
        Empty when the track has too few fixes (``fit.MIN_FIXES``).
    """

    time0: pd.Timestamp | None
    t_s: np.ndarray
    x_m: np.ndarray
    y_m: np.ndarray
    error: LocationError
    fits: tuple[MotionFit, ...]

    @property
    def best(self) -> MotionFit | None:
        """Lowest AICc among the eligible fits (:func:`roamstat.motion.best_fit`)."""
        return best_fit(self.fits)

    @property
    def best_unbounded(self) -> MotionFit | None:
        """Lowest AICc among brownian / ctcrw: the continuous-time null's model."""
        return best_unbounded(self.fits)

    def error_sd_m(self, fit: MotionFit) -> np.ndarray:
        """Per-fix error SD per axis (m): the known one, else the fit's estimate at every fix."""
        sd = self.error.sd_m if self.error.sd_m is not None else np.full(self.t_s.size, fit.params["error_sd_m"])
        return np.nan_to_num(np.asarray(sd, dtype=float), nan=0.0)


def error_of(fixes_a: pd.DataFrame, cfg) -> LocationError:
    """The location error of one animal's fixes under ``cfg.uere_m`` and ``cfg.error_class_table``."""
    table = getattr(cfg, "error_class_table", None)
    return location_error(fixes_a, getattr(cfg, "uere_m", None), read_class_table(table) if table else None)


def fit_animal_motion(located: pd.DataFrame, cfg, models=MOTION_MODELS, standard_errors: bool = True) -> AnimalMotion:
    """Resolve the location error and fit ``models`` to one animal's located fixes.

    Parameters
    ----------
    located : DataFrame
        ``rows.located`` fixes of one animal (observed, finite ``time, x_m, y_m``, time order);
        ``dop`` and ``quality`` give the location error.
    cfg : Config
        Uses ``uere_m`` and ``error_class_table``.
    models : sequence of str
        Names from ``MOTION_MODELS``.
    standard_errors : bool
        False skips the Hessians (NaN standard errors) when only estimates and AICc are used.

    Returns
    -------
    AnimalMotion
    """
    ns = as_ns(located["time"])
    time0 = pd.to_datetime(located["time"].iloc[0], utc=True) if len(located) else None
    t_s = (ns - ns[0]) / 1e9 if len(located) else np.empty(0)
    x = located["x_m"].to_numpy(float)
    y = located["y_m"].to_numpy(float)
    error = error_of(located, cfg)
    fits = tuple(fit_motion_models(t_s, x, y, error, models=models, standard_errors=standard_errors)) if len(located) else ()
    return AnimalMotion(time0, t_s, x, y, error, fits)


def smoothed_track(motion: AnimalMotion, animal_id: str, predict_s: float | None = None) -> pd.DataFrame:
    """Smoothed positions (RTS, best model) at the fixes and, with ``predict_s``, on a regular grid.

    The grid holds the whole multiples of ``predict_s`` seconds since the Unix epoch within the
    fixes' time span (aligned like the ``--resample`` grid); its points are ``predicted``.
    ``lat, lon`` are left empty here (the caller knows the animal's frame).  Empty (columns
    ``SMOOTHED_COLUMNS``) when no model was fitted.
    """
    fit = motion.best
    if fit is None:
        return pd.DataFrame(columns=list(SMOOTHED_COLUMNS))
    assert motion.time0 is not None  # a fitted model implies fixes, so a first fix time
    grid = None
    if predict_s:
        if motion.t_s[-1] / predict_s > MAX_PREDICT_POINTS:
            raise RoamstatError(f"--predict {predict_s:g} s: animal {animal_id} would get more than "
                                f"{MAX_PREDICT_POINTS:,} predicted points; give a longer interval, e.g. 1h")
        first = (-motion.time0.value % round(predict_s * 1e9)) / 1e9  # seconds from the first fix to the first grid time
        grid = np.arange(first, motion.t_s[-1] + 1e-9, predict_s)
    table = smooth(fit, motion.t_s, motion.x_m, motion.y_m, motion.error, predict_t_s=grid)
    table.insert(0, "animal_id", animal_id)
    table.insert(1, "time", motion.time0 + pd.to_timedelta(table["t_s"], unit="s"))
    table.insert(3, "model", fit.name)
    table["lat"] = np.nan
    table["lon"] = np.nan
    return table[list(SMOOTHED_COLUMNS)]
