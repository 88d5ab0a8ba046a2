"""Null walks for the displacement tests.

Each null is built from one animal's fits (the protocol of
:mod:`roamstat.models.base`, never a family name) and offers
``simulate(n_steps, n_reps, rng, eval_idx)`` -> squared displacement (m^2) of
``n_reps`` walks at the given step indices.  :func:`build_null` builds one by
its name in ``Config.nulls``, looked up in the registry
:data:`roamstat.registry.NULLS`; the correlated random walk also gives the
Kareiva & Shigesada (1983) expectation (:mod:`roamstat.nulls.analytic`).
The continuous-time null ``ctcrw`` (:mod:`roamstat.nulls.ctcrw`, marked
``in_time``) is built from the observed fixes and the config instead and
simulates at the fixes' own times.
"""

from __future__ import annotations

from roamstat.nulls.analytic import expected_nsd, expected_nsd_symmetric
from roamstat.nulls.crw import CrwNull
from roamstat.nulls.ctcrw import CtcrwNull
from roamstat.nulls.levy import LevyNull
from roamstat.nulls.observed import NO_SHORT_STEPS, ShortSteps, short_steps
from roamstat.nulls.shuffle import ShuffleNull
from roamstat.nulls.states import StatesNull
from roamstat.nulls.walk import NullUnavailable, Walk, simulate_nsd
from roamstat.registry import NULLS



def build_null(name: str, fits, short: ShortSteps = NO_SHORT_STEPS) -> Walk:
    """The null walk ``name`` (a name in :data:`roamstat.registry.NULLS`) for one animal.

    Parameters
    ----------
    name : str
        Null model name.
    fits : AnimalFits-like
        The animal's fitted models and observed values.
    short : ShortSteps
        Observed steps at or below the fitting threshold.

    Returns
    -------
    Walk

    Raises
    ------
    NullUnavailable
        When the animal lacks what this null needs (the message says what).
    """
    return NULLS[name].load()(fits, short)


__all__ = ["CrwNull", "CtcrwNull", "LevyNull", "NO_SHORT_STEPS", "NullUnavailable", "ShortSteps", "ShuffleNull",
           "StatesNull", "Walk", "build_null", "expected_nsd", "expected_nsd_symmetric", "short_steps", "simulate_nsd"]
