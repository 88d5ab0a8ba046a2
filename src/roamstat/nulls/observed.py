"""The share of very short observed steps, which every null walk keeps.

The step models are fitted to steps longer than ``cfg.min_step`` only (zero
steps by default: no continuous family describes them).  A null walk made of
fitted steps alone would leave out every time the animal stayed put and so
travel farther than the animal could have; each null therefore takes a short
step, resampled from the observed ones, in the observed proportion.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from roamstat.nulls.walk import Source, mixture, resampler


@dataclass(frozen=True)
class ShortSteps:
    """Observed steps at or below ``min_step`` and their share of all steps.

    Attributes
    ----------
    values : ndarray
        The short step lengths (m).
    proportion : float
        Their share among the short steps plus the steps the models used.
    """

    values: np.ndarray
    proportion: float

    def wrap(self, source: Source) -> Source:
        """A step source that draws a short step with probability ``proportion``."""
        return mixture(self.proportion, source, resampler(self.values)) if self.values.size else source

    def moments(self, mean: float, second_moment: float) -> tuple[float, float]:
        """E[l] and E[l^2] of the wrapped source, given those of the wrapped-up one."""
        if not self.values.size:
            return mean, second_moment
        p = self.proportion
        return ((1 - p) * mean + p * float(np.mean(self.values)),
                (1 - p) * second_moment + p * float(np.mean(self.values ** 2)))


NO_SHORT_STEPS = ShortSteps(np.empty(0), 0.0)


def short_steps(step_m, n_used: int, min_step: float) -> ShortSteps:
    """The short steps of one animal.

    Parameters
    ----------
    step_m : array
        All observed step lengths of the animal (NaN allowed, ignored).
    n_used : int
        Number of step values the models were fitted to (those > min_step).
    min_step : float
        The ``--min-step`` threshold (m).

    Returns
    -------
    ShortSteps
    """
    step_m = np.asarray(step_m, dtype=np.float64)
    short = step_m[np.isfinite(step_m) & (step_m <= min_step)]
    total = short.size + int(n_used)
    return ShortSteps(short, short.size / total) if short.size and total else NO_SHORT_STEPS
