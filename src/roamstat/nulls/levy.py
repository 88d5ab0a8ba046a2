"""Lévy walk null: uniform turns, a fitted power-law tail and the observed body of step lengths.

Steps at or above xmin (the tail model's ``params["xmin"]``) make up the
observed share of the steps and are drawn from ``fits.tail.sample``; the rest
are resampled from the observed steps below xmin.  Turns are uniform, as in
the Lévy walks of Viswanathan et al. (1999).

References
----------
Viswanathan, G. M. et al. (1999). Optimizing the success of random searches.
Nature 401: 911-914.
Clauset, A., Shalizi, C. R. & Newman, M. E. J. (2009). Power-law
distributions in empirical data. SIAM Review 51: 661-703.
"""

from __future__ import annotations

import numpy as np

from roamstat.nulls.observed import NO_SHORT_STEPS, ShortSteps
from roamstat.nulls.walk import NullUnavailable, Walk, mixture, resampler, uniform_turns


class LevyNull(Walk):
    """Body resampled below xmin, tail from ``fits.tail``, uniform turns.

    Parameters
    ----------
    fits : AnimalFits-like
        Needs ``tail`` (a step model with ``sample`` and ``params["xmin"]``)
        and ``step_values`` (m).
    short : ShortSteps
        Observed steps at or below the fitting threshold, kept in proportion.

    Raises
    ------
    NullUnavailable
        When no tail model was fitted.
    """

    def __init__(self, fits, short: ShortSteps = NO_SHORT_STEPS):
        tail = getattr(fits, "tail", None)
        if tail is None:
            why = getattr(fits, "note", "") or "too few steps for a tail fit"
            raise NullUnavailable(f"no fitted power-law tail ({why})")
        steps = np.asarray(getattr(fits, "step_values", ()), dtype=np.float64)
        steps = steps[np.isfinite(steps)]
        xmin = float(tail.params["xmin"])
        body = steps[steps < xmin]
        p_tail = float(np.mean(steps >= xmin)) if steps.size else 1.0
        source = mixture(p_tail, resampler(body), tail.sample) if body.size else tail.sample
        super().__init__(short.wrap(source), uniform_turns)
        self.p_tail = p_tail
        self.xmin = xmin
