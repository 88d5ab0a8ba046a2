"""Step-based nulls under missed fixes, resampling and irregular fix times (issue 13, item 4).

Tracks come from the independent generator ``field_sim`` (plain numpy); truths are the
Kareiva & Shigesada (1983) expectation written out here with scipy's Bessel functions.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from scipy import special

from field_sim import HOUR, START, crw_positions, exponential_times, gappy_times, observe, regular_times
from roamstat import compare
from roamstat.config import Config
from roamstat.models import fit_animal
from roamstat.track import compute_steps, prepare_fixes

MEAN_STEP, KAPPA = 60.0, 2.0
STEP_NULLS = ("crw", "shuffle")


def crw_truth_nsd(n):
    """Kareiva & Shigesada (1983) E[R_n^2], symmetric turns: gamma(2) steps of mean m (E l^2 = 1.5 m^2),
    von Mises turns (c = I1(kappa)/I0(kappa), Mardia & Jupp 2000)."""
    m2, c = 1.5 * MEAN_STEP ** 2, special.i1(KAPPA) / special.i0(KAPPA)
    return n * m2 + 2 * MEAN_STEP ** 2 * c / (1 - c) * (n - (1 - c ** n) / (1 - c))


def test_fits_use_one_interval_steps_and_turns_between_them_only():
    rng = np.random.default_rng(1)
    t = gappy_times(6, rng)
    fixes, steps, _ = observe(t, crw_positions(t, HOUR, MEAN_STEP, KAPPA, rng), 0.0, rng)
    fits = fit_animal(steps, Config(), rng)
    one = (steps["dt_s"] == HOUR).to_numpy()
    assert 0 < one.sum() < len(steps)  # the record has both
    np.testing.assert_array_equal(np.sort(fits.step_values), np.sort(steps["step_m"][one]))
    same_seg = np.r_[False, steps["segment"].to_numpy()[1:] == steps["segment"].to_numpy()[:-1]]
    both = one & np.r_[False, one[:-1]] & same_seg & steps["turn_rad"].notna().to_numpy()
    np.testing.assert_array_equal(np.sort(fits.turn_values), np.sort(steps["turn_rad"][both]))
    step_note = fits.rows.loc[fits.rows["variable"] == "step", "note"].iloc[0]
    assert f"{int((~one).sum())} steps not within 10% of the nominal interval 3600 s left out" in step_note


@pytest.mark.slow
def test_at_half_fix_success_the_null_expectation_is_the_truth_not_double():
    # before the repair a step across k missed fixes was fitted as one step and the null walked k steps:
    # the null's NSD was ~2.2 x the truth at 50 % fix success.  Two-sided band on the mean ratio.
    cfg = Config(replicates=49, nulls=("crw",))
    ratios = []
    for i in range(30):
        rng = np.random.default_rng(100 + i)
        t = regular_times(241)
        keep = rng.random(t.size) >= 0.5
        keep[[0, -1]] = True
        fixes, steps, _ = observe(t[keep], crw_positions(t[keep], HOUR, MEAN_STEP, KAPPA, rng), 0.0, rng)
        rows, _ = compare.test_animal(fixes, steps, fit_animal(steps, cfg, rng), HOUR, cfg, rng)
        ratios.append(rows["expected_nsd_m2"].iloc[0] / crw_truth_nsd(rows["n_steps"].iloc[0]))
    assert 0.8 < np.mean(ratios) < 1.25


def _lat_lon_fixes(seconds, rng, jitter_s=0.0):
    """An animal near 60 N 10 E moving as a discrete CRW; lat/lon from small planar offsets (spherical)."""
    t = np.asarray(seconds, dtype=float) + rng.uniform(-jitter_s, jitter_s, len(seconds))
    t[0] = seconds[0]
    xy = crw_positions(t, HOUR, MEAN_STEP, KAPPA, rng)
    lat = 60.0 + xy[:, 1] / 111_195.0
    lon = 10.0 + xy[:, 0] / (111_195.0 * math.cos(math.radians(60.0)))
    return pd.DataFrame({"animal_id": "a", "time": START + pd.to_timedelta(t, unit="s"), "lat": lat, "lon": lon,
                         "source_file": "f.csv", "source_row": np.arange(t.size) + 2})


def test_resampling_walks_grid_steps_and_keeps_interpolated_points_out_of_the_fits():
    rng = np.random.default_rng(5)
    cfg = Config(resample="1h", replicates=19, nulls=STEP_NULLS)
    # 5-min fixes (a minute of jitter) on a 1-h grid for 3 days: 72 grid steps, not 864 null steps
    fixes, _ = prepare_fixes(_lat_lon_fixes(np.arange(0, 3 * 86400 + 1, 300.0), rng, 60.0), cfg)
    steps = compute_steps(fixes)
    fits = fit_animal(steps, cfg, rng)
    assert fits.step_values.size == len(steps) == 72  # grid points a few minutes from a fix are kept
    rows, curves = compare.test_animal(fixes, steps, fits, 300.0, cfg, rng)
    assert (rows["n_steps"] == 72).all() and curves["crw"].step[-1] == 72
    # 2-h fixes on a 1-h grid: every other grid point is an hour from any fix, on a straight line
    fixes, _ = prepare_fixes(_lat_lon_fixes(np.arange(0, 6 * 86400 + 1, 7200.0), rng), cfg)
    steps = compute_steps(fixes)
    assert np.count_nonzero(np.abs(steps["turn_rad"]) < 1e-9) >= 60  # the interpolation's exact-zero turns
    fits = fit_animal(steps, cfg, rng)
    assert fits.step_values.size == 0 and fits.turn_values.size == 0
    assert "144 steps with an interpolated end left out" in fits.rows["note"].iloc[0]
    rows, _ = compare.test_animal(fixes, steps, fits, 7200.0, cfg, rng)
    assert rows["p_value"].isna().all()  # no fitted step model, no shuffle values: insufficient, not wrong


def test_step_based_nulls_are_not_run_on_irregular_fix_times():
    rng = np.random.default_rng(9)
    t = exponential_times(12, 3 * HOUR, rng)
    fixes, steps, nominal = observe(t, crw_positions(t, HOUR, MEAN_STEP, KAPPA, rng), 0.0, rng)
    cfg = Config(replicates=19, nulls=STEP_NULLS)
    rows, curves = compare.test_animal(fixes, steps, fit_animal(steps, cfg, rng), nominal, cfg, rng)
    assert rows["p_value"].isna().all() and curves == {}
    assert rows["note"].str.contains("fix times irregular").all()
