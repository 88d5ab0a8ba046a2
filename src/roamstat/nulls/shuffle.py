"""Resampling null: the animal's own steps and turns, each drawn independently with replacement.

It keeps the empirical distributions exactly and breaks their sequence (and
any coupling between step length and turn), in the spirit of the randomisation
tests of Manly (2007).

References
----------
Manly, B. F. J. (2007). Randomization, Bootstrap and Monte Carlo Methods in
Biology, 3rd edn. Chapman & Hall/CRC, Boca Raton.
"""

from __future__ import annotations

import numpy as np

from roamstat.nulls.observed import NO_SHORT_STEPS, ShortSteps
from roamstat.nulls.walk import NullUnavailable, Walk, resampler, turn_resampler


class ShuffleNull(Walk):
    """Steps resampled from ``fits.step_values``, turns from ``fits.turn_values``.

    Parameters
    ----------
    fits : AnimalFits-like
        Needs non-empty ``step_values`` (m) and ``turn_values`` (rad).
    short : ShortSteps
        Observed steps at or below the fitting threshold, kept in proportion.

    Raises
    ------
    NullUnavailable
        When there are no observed steps or no defined turns.
    """

    def __init__(self, fits, short: ShortSteps = NO_SHORT_STEPS):
        steps = _finite(getattr(fits, "step_values", None))
        turns = _finite(getattr(fits, "turn_values", None))
        if steps.size == 0 and short.values.size == 0:
            raise NullUnavailable("no observed step lengths to resample")
        if turns.size == 0:
            raise NullUnavailable("no defined turning angles to resample")
        source = short.wrap(resampler(steps)) if steps.size else resampler(short.values)
        super().__init__(source, turn_resampler(turns))


def _finite(values) -> np.ndarray:
    values = np.asarray([] if values is None else values, dtype=np.float64).ravel()
    return values[np.isfinite(values)]
