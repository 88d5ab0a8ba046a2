"""State-switching null: the animal's own fitted movement HMM, walked.

Each replicate runs the fitted Markov chain from its stationary distribution
and draws every step and turn from the current state's fitted models
(:func:`roamstat.states.simulate_hmm`), so consecutive steps are dependent
through the state; the walk engine then turns them into squared
displacements.  It answers "does the animal end up farther or closer than its
own switching between behaviours explains?".  Zero steps are part of the
model (its zero mass), so the short-step share of the other nulls is not
added again.

References
----------
Morales, J. M. et al. (2004). Extracting more out of relocation data:
building movement models as mixtures of random walks. Ecology 85: 2436-2445.
Zucchini, W., MacDonald, I. L. & Langrock, R. (2016). Hidden Markov Models
for Time Series: An Introduction Using R, 2nd ed. CRC Press.
"""

from __future__ import annotations

import numpy as np

from roamstat.nulls.observed import NO_SHORT_STEPS, ShortSteps
from roamstat.nulls.walk import CHUNK_ELEMENTS, NullUnavailable, Walk, simulate_nsd
from roamstat.states.simulate import simulate_hmm


class StatesNull(Walk):
    """Walks of the fitted state model ``fits.states`` (an ``HmmFit``).

    Parameters
    ----------
    fits : AnimalFits-like
        Needs ``states``: the selected state model (``states.fit_animal_states(...).best``).
    short : ShortSteps
        Not used (the model's zero mass covers zero steps); accepted for the common signature.

    Raises
    ------
    NullUnavailable
        When the animal has no fitted state model.
    """

    def __init__(self, fits, short: ShortSteps = NO_SHORT_STEPS):
        model = getattr(fits, "states", None)
        if model is None:
            raise NullUnavailable("no fitted state model (too few regular steps for a hidden Markov model)")
        self.params = model.params
        # steps and turns share the hidden state, so there are no independent sources: simulate() draws both
        self.step_source = self.turn_source = None

    def simulate(self, n_steps: int, n_reps: int, rng: np.random.Generator, eval_idx) -> np.ndarray:
        """Squared displacement (m^2), shape (n_reps, len(eval_idx)); chunks of replicates."""
        idx = np.asarray(eval_idx, dtype=np.int64)
        m = int(idx.max(initial=0))
        out = np.zeros((n_reps, idx.size))
        if m == 0:
            return out
        chunk = max(1, CHUNK_ELEMENTS // m)
        for first in range(0, n_reps, chunk):
            c = min(chunk, n_reps - first)
            _, steps, turns = simulate_hmm(self.params, m, c, rng)
            out[first:first + c] = simulate_nsd(_replay(steps), _replay(turns), n_steps, c, rng, idx)
        return out


def _replay(values: np.ndarray):
    """A variate source that hands back pre-drawn values (all of them, once)."""
    flat = values.ravel()

    def draw(n, rng):
        if n != flat.size:
            raise ValueError(f"{n} values asked for, {flat.size} drawn")
        return flat

    return draw
