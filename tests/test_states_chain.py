"""Steps laid on slots: what is observed, what is missing, where the chain restarts.

Missing observations contribute density 1 and are never interpolated
(Zucchini, MacDonald & Langrock 2016, §2.3.3); each segment is an
independent chain.  The cases are worked by hand.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats
from states_sim import TWO_STATES, observed_steps

from roamstat.config import Config
from roamstat.states import fit_animal_states
from roamstat.states.chain import build_chain
from roamstat.states.decode import decode
from roamstat.states.likelihood import Observations

T0 = pd.Timestamp("2025-03-01", tz="UTC")


def _steps(hours_start, hours_end, segments, step_m, turn_rad):
    return pd.DataFrame({
        "animal_id": "x", "segment": segments,
        "t_start": [T0 + pd.Timedelta(hours=h) for h in hours_start],
        "t_end": [T0 + pd.Timedelta(hours=h) for h in hours_end],
        "dt_s": 3600.0 * (np.array(hours_end, float) - np.array(hours_start, float)),
        "step_m": step_m, "turn_rad": turn_rad,
    })


def test_missed_fix_makes_missing_slots_and_breaks_turns():
    # fixes at 0, 1, 2, 4, 5, 6 h: the 2 -> 4 h step spans two slots and observes neither
    steps = _steps([0, 1, 2, 4, 5], [1, 2, 4, 5, 6], 0, [10.0, 20.0, 30.0, 40.0, 50.0],
                   [np.nan, 0.1, 0.2, 0.3, 0.4])
    chain = build_chain(steps)
    assert chain.nominal_dt_s == 3600.0
    np.testing.assert_array_equal(chain.row_slot, [0, 1, 2, 4, 5])
    np.testing.assert_array_equal(np.isfinite(chain.step_m), [True, True, False, False, True, True])
    # turns need two one-interval steps in consecutive slots: only the 1 h and 5 h rows qualify
    np.testing.assert_array_equal(np.flatnonzero(np.isfinite(chain.turn_rad)), [1, 5])
    np.testing.assert_array_equal(chain.restart, [True, False, False, False, False, False])
    np.testing.assert_array_equal(chain.row_step, [True, True, False, True, True])
    np.testing.assert_array_equal(chain.row_turn, [False, True, False, False, True])


def test_segments_restart_and_row_order_is_kept():
    steps = _steps([10, 11, 0, 1], [11, 12, 1, 2], [1, 1, 0, 0], [1.0, 2.0, 3.0, 4.0], [np.nan, 0.5, np.nan, 0.5])
    chain = build_chain(steps)
    np.testing.assert_array_equal(chain.row_slot, [2, 3, 0, 1])
    np.testing.assert_array_equal(chain.restart, [True, False, True, False])
    np.testing.assert_array_equal(chain.step_m, [3.0, 4.0, 1.0, 2.0])


def test_too_few_steps_gives_no_model_and_says_why():
    steps = _steps(range(20), range(1, 21), 0, np.linspace(5, 100, 20), np.zeros(20))
    result = fit_animal_states(steps, Config(), np.random.default_rng(0))
    assert result.best is None and result.rows.empty and result.decoded.empty
    assert "30 per state" in result.note


def test_pseudo_residuals_normal_for_the_right_model_not_for_a_wrong_one():
    # ordinary pseudo-residuals are N(0, 1) under the true model (Zucchini et al. 2016, §6.2.2);
    # reference: scipy.stats.kstest.  The 1-state fit to 2-state data must be rejected.
    rng = np.random.default_rng(21)
    steps, _ = observed_steps(TWO_STATES, 1200, rng)
    result = fit_animal_states(steps, Config(state_counts=(1, 2), state_starts=4), rng)
    assert result.best.n_states == 2
    assert stats.kstest(result.decoded["step_residual"].dropna(), "norm").pvalue > 1e-3
    assert stats.kstest(result.decoded["turn_residual"].dropna(), "norm").pvalue > 1e-3
    right = result.decoded["step_residual"].to_numpy()
    assert abs(np.corrcoef(right[1:], right[:-1])[0, 1]) < 0.1  # no persistence left unexplained
    one = decode(Observations(result.chain), result.fits[1].params)
    assert abs(np.corrcoef(one.step_residual[1:], one.step_residual[:-1])[0, 1]) > 0.2  # unexplained persistence
