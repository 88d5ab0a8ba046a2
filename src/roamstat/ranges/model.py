"""What the range estimates need from a fitted movement model, as plain values.

The ranges stage does not fit movement models; it receives the animal's best
continuous-time model (issue 13, :mod:`roamstat.motion`) through this small
record, so its functions can be tested with known parameters.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class RangeModel:
    """The best motion model of one animal, as the range estimates use it.

    Attributes
    ----------
    name : str
        Model name (e.g. ``ou``, ``brownian``).
    range_resident : bool
        Whether the model is stationary (has a home range).
    sigma_m : float
        Stationary SD per axis in metres (NaN when not range-resident).
    acf : callable or None
        Position autocorrelation at lags in seconds (1 at lag 0).
    centre_xy : tuple of float
        Fitted range centre in the animal's ``x_m, y_m`` frame.
    """

    name: str
    range_resident: bool
    sigma_m: float = math.nan
    acf: Callable[[np.ndarray], np.ndarray] | None = None
    centre_xy: tuple[float, float] = (math.nan, math.nan)


def from_motion_fit(fit) -> RangeModel | None:
    """The :class:`RangeModel` of a ``roamstat.motion.MotionFit`` (None passes through)."""
    if fit is None:
        return None
    if not fit.range_resident:
        return RangeModel(fit.name, False)
    return RangeModel(fit.name, True, float(fit.params["sigma_m"]), fit.position_acf, tuple(fit.centre_xy))
