"""Correlated random walk null: fitted step lengths and fitted turning angles, independent.

References
----------
Kareiva, P. M. & Shigesada, N. (1983). Analyzing insect movement as a
correlated random walk. Oecologia 56: 234-238.
Turchin, P. (1998). Quantitative Analysis of Movement. Sinauer, Sunderland MA.
"""

from __future__ import annotations

import math

from roamstat.nulls.analytic import expected_nsd
from roamstat.nulls.observed import NO_SHORT_STEPS, ShortSteps
from roamstat.nulls.walk import NullUnavailable, UnitTurns, Walk


class CrwNull(Walk):
    """Steps from ``fits.best_step.sample``, turns from ``fits.best_turn.sample``.

    Parameters
    ----------
    fits : AnimalFits-like
        Needs ``best_step`` (a step model with ``sample``, ``mean``,
        ``second_moment``) and ``best_turn`` (a turn model with ``sample``,
        ``mean_cos``, ``mean_sin``, optionally ``sample_unit``); ``note`` explains a missing one.
    short : ShortSteps
        Observed steps at or below the fitting threshold, kept in proportion.

    Raises
    ------
    NullUnavailable
        When either model is missing.

    References
    ----------
    Kareiva, P. M. & Shigesada, N. (1983). Oecologia 56: 234-238.
    """

    def __init__(self, fits, short: ShortSteps = NO_SHORT_STEPS):
        step, turn = getattr(fits, "best_step", None), getattr(fits, "best_turn", None)
        if step is None or turn is None:
            missing = [what for what, model in (("step-length", step), ("turning-angle", turn)) if model is None]
            why = getattr(fits, "note", "") or "too few observations"
            raise NullUnavailable(f"no fitted {' or '.join(missing)} model ({why})")
        # a turn model that gives cosines and sines directly (``sample_unit``) spares the walk its trigonometry
        unit = getattr(turn, "sample_unit", None)
        super().__init__(short.wrap(step.sample), turn.sample if unit is None else UnitTurns(turn.sample, unit))
        self._moments = short.moments(step.mean(), step.second_moment())
        self._turn = (turn.mean_cos(), turn.mean_sin())

    def expected_nsd(self, n_steps: int) -> float:
        """Kareiva & Shigesada (1983) E[R_n^2] (m^2) for this walk; NaN if a moment is not finite."""
        mean, second = self._moments
        if not (math.isfinite(mean) and math.isfinite(second)):
            return math.nan
        return expected_nsd(n_steps, mean, second, *self._turn)
