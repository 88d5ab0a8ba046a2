"""One animal's steps laid on the regular time slots of its fix schedule.

The hidden Markov model runs in discrete time, one slot per nominal fix
interval.  Every step row gets the slot of its start; a step whose interval is
within ``SCHEDULE_TOLERANCE`` of the nominal one is an observation of that
slot.  A slot without such a step (a missed fix, or a step spanning several
intervals) is *missing*: its observation contributes density 1 and the chain
just moves on one transition (Zucchini, MacDonald & Langrock 2016, §2.3.3).
A turning angle is observed only when it joins two one-interval steps in
consecutive slots; otherwise it is missing too.  Nothing is interpolated.
The chain restarts from the initial distribution at the first slot of each
segment, and after more than ``MAX_MISSING_SLOTS`` missing slots in a row.

References
----------
Zucchini, W., MacDonald, I. L. & Langrock, R. (2016). Hidden Markov Models
for Time Series: An Introduction Using R, 2nd ed. CRC Press.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from roamstat.track import SCHEDULE_TOLERANCE, fix_schedule

#: Longer runs of missing slots restart the chain: with the stationary distribution as
#: initial law the two differ by less than the chain's mixing error after this many
#: transitions, and it bounds the number of slots to ~50 per step row.
MAX_MISSING_SLOTS = 50


@dataclass
class Chain:
    """Observations per slot and how step rows map onto slots.

    Attributes
    ----------
    step_m, turn_rad : ndarray (S,)
        Observed one-interval step length / turning angle per slot, NaN if missing.
    restart : ndarray of bool (S,)
        First slot of each independent piece of chain.
    row_slot : ndarray of int (n_rows,)
        Slot of each step row, in the row order of the input.
    row_step, row_turn : ndarray of bool (n_rows,)
        Whether the row's step length / turning angle is the observation of its slot.
    nominal_dt_s : float
        Seconds per slot.
    """

    step_m: np.ndarray
    turn_rad: np.ndarray
    restart: np.ndarray
    row_slot: np.ndarray
    row_step: np.ndarray
    row_turn: np.ndarray
    nominal_dt_s: float

    @property
    def n_slots(self) -> int:
        return int(self.step_m.size)

    @property
    def n_steps(self) -> int:
        """Observed one-interval steps."""
        return int(np.count_nonzero(np.isfinite(self.step_m)))


def build_chain(steps_a: pd.DataFrame) -> Chain:
    """Slots for one animal's steps (columns of ``track.STEP_COLUMNS``).

    Parameters
    ----------
    steps_a : DataFrame
        One animal's steps: ``segment, t_start, t_end, dt_s, step_m, turn_rad``.

    Returns
    -------
    Chain
    """
    n = len(steps_a)
    order = np.lexsort((steps_a["t_start"].to_numpy(), steps_a["segment"].to_numpy()))
    seg = steps_a["segment"].to_numpy()[order]
    t0 = steps_a["t_start"].to_numpy("datetime64[ns]")[order].astype(np.int64) / 1e9
    dt = steps_a["dt_s"].to_numpy(dtype=float)[order]
    times = np.concatenate([steps_a["t_start"].to_numpy("datetime64[ns]"),
                            steps_a["t_end"].to_numpy("datetime64[ns]")])
    nominal = float(fix_schedule(times)["nominal_dt_s"]) if n else np.nan
    if n == 0 or not np.isfinite(nominal) or nominal <= 0:
        empty, none = np.empty(0), np.zeros(n, bool)
        return Chain(empty, empty, np.zeros(0, bool), np.zeros(n, np.int64), none, none, nominal)

    new_seg = np.r_[True, seg[1:] != seg[:-1]]
    piece_start = np.maximum.accumulate(np.where(new_seg, np.arange(n), 0))
    offset = np.rint((t0 - t0[piece_start]) / nominal).astype(np.int64)
    # slots advanced between consecutive rows; long runs of missing slots restart the chain
    advance = np.r_[0, np.diff(offset)]
    cut = new_seg | (advance > MAX_MISSING_SLOTS + 1)
    advance = np.where(cut, 1, advance)
    advance[0] = 0
    slot = np.cumsum(advance)

    regular = np.abs(dt / nominal - 1.0) <= SCHEDULE_TOLERANCE
    first_in_slot = np.r_[True, slot[1:] != slot[:-1]]
    observed = regular & first_in_slot & np.isfinite(steps_a["step_m"].to_numpy(dtype=float)[order])
    n_slots = int(slot[-1]) + 1
    step = np.full(n_slots, np.nan)
    step[slot[observed]] = steps_a["step_m"].to_numpy(dtype=float)[order][observed]
    # a turn joins this step to the previous one: both one-interval steps in adjacent slots
    joined = observed & np.r_[False, observed[:-1] & (np.diff(slot) == 1) & ~cut[1:]]
    turn = np.full(n_slots, np.nan)
    turn[slot[joined]] = steps_a["turn_rad"].to_numpy(dtype=float)[order][joined]
    restart = np.zeros(n_slots, bool)
    restart[slot[cut]] = True

    row_slot, row_step, row_turn = np.empty(n, np.int64), np.empty(n, bool), np.empty(n, bool)
    row_slot[order], row_step[order], row_turn[order] = slot, observed, joined & np.isfinite(turn[slot])
    return Chain(step, turn, restart, row_slot, row_step, row_turn, nominal)
