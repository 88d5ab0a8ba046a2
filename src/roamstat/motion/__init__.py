"""Continuous-time movement models with location error (issue 13).

Brownian motion, Ornstein-Uhlenbeck position, integrated-OU velocity (the continuous-time
correlated random walk) and OU position with OU velocity, each fitted per animal by the exact
Kalman-filter likelihood at the observed fix times; RTS smoothing; exact simulation.
"""
from .errors import DEFAULT_CLASS_SD_M, LocationError, location_error, read_class_table
from .fit import MotionFit, best_fit, best_unbounded, fit_motion_models
from .kalman import MOTION_MODELS, RANGE_RESIDENT
from .smooth import SMOOTH_COLUMNS, smooth
from .table import TABLE_COLUMNS, effective_n_area, motion_table

__all__ = [
    "DEFAULT_CLASS_SD_M", "LocationError", "MOTION_MODELS", "MotionFit", "RANGE_RESIDENT",
    "SMOOTH_COLUMNS", "TABLE_COLUMNS", "best_fit", "best_unbounded", "effective_n_area",
    "fit_motion_models", "location_error", "motion_table", "read_class_table", "smooth",
]
