"""Monte Carlo p-values, the ERL envelope test, BH q-values, verdicts and the per-animal table."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from nulls_doubles import START, crw_track, fits_double, gamma_steps, von_mises_turns
from roamstat import compare
from roamstat.config import Config
from roamstat.seeds import animal_rng


def test_monte_carlo_p_values_count_the_observed_as_one_replicate():
    # Davison & Hinkley (1997, §4.2): p = (1 + #{T* >= t}) / (M + 1); ties count against the observed value.
    sim = np.array([1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0])
    assert compare.monte_carlo_p(8.0, sim) == (0.3, 0.9, 0.6)
    assert compare.monte_carlo_p(100.0, sim) == (0.1, 1.0, 0.2)
    assert compare.monte_carlo_p(-1.0, sim) == (1.0, 0.1, 0.2)
    assert compare.monte_carlo_p(5.0, sim)[2] == 1.0  # min(1, 2 min) caps the two-sided value


def test_bh_q_values_match_scipy():
    # reference: scipy.stats.false_discovery_control(method="bh") (Benjamini & Hochberg 1995)
    p = np.random.default_rng(1).uniform(size=40) ** 3
    np.testing.assert_allclose(compare.bh_qvalues(p), stats.false_discovery_control(p, method="bh"), rtol=1e-12)
    with_gaps = np.r_[p[:10], np.nan, p[10:20]]
    q = compare.bh_qvalues(with_gaps)
    assert np.isnan(q[10])
    np.testing.assert_allclose(q[np.isfinite(q)], stats.false_discovery_control(np.r_[p[:10], p[10:20]]), rtol=1e-12)


def test_erl_p_value_on_small_examples():
    # Definition of the ERL measure (Myllymäki et al. 2017), worked by hand: simulated curves A = (1, 3),
    # B = (3, 1), C = (2, 2), observed (4, 2.5).  Two-sided pointwise ranks min(R_up, R_down):
    # point 1 -> obs 1, A 1, B 2, C 2; point 2 -> obs 2, A 1, B 1, C 2.  Sorted vectors obs (1, 2),
    # A (1, 1), B (1, 2), C (2, 2): A is more extreme, B ties, C is less -> p = 3/4.
    sims = np.array([[1.0, 3.0], [3.0, 1.0], [2.0, 2.0]])
    assert compare.erl_p_value(np.array([4.0, 2.5]), sims) == pytest.approx(0.75)
    # observed (4, 0) is beyond every simulated curve at both points, ranks (1, 1); but A is lowest at point 1
    # and highest at point 2, also (1, 1): a tie, so p = 2/4.  Observed (4, 3.5) has (1, 1) against A (1, 2).
    assert compare.erl_p_value(np.array([4.0, 0.0]), sims) == pytest.approx(0.5)
    assert compare.erl_p_value(np.array([4.0, 3.5]), sims) == pytest.approx(0.25)
    # a curve identical to all others has p = 1 (ties count as at least as extreme)
    assert compare.erl_p_value(np.ones(4), np.ones((9, 4))) == 1.0


def test_erl_p_value_lies_in_the_extreme_rank_interval():
    # Myllymäki et al. (2017): the ERL ordering refines the extreme-rank ordering, so its p-value lies between
    # the liberal and conservative p-values of the basic extreme-rank test (from memory of their §4).
    rng = np.random.default_rng(5)
    for _ in range(30):
        curves = np.round(rng.normal(size=(20, 6)), 1)  # rounding makes ties common
        curves[0] += rng.normal(0, 1.5)
        obs, sims = curves[0], curves[1:]
        up = stats.rankdata(curves, method="max", axis=0)
        down = stats.rankdata(-curves, method="max", axis=0)
        extreme = np.minimum(up, down).min(axis=1)
        liberal, conservative = np.mean(extreme < extreme[0]), np.mean(extreme <= extreme[0])
        p = compare.erl_p_value(obs, sims)
        assert liberal - 1e-12 <= p <= conservative + 1e-12


def test_finalise_gives_q_values_per_null_and_verdicts():
    cfg = Config(alpha=0.05)
    table = pd.DataFrame({
        "animal_id": ["a", "b", "c", "d", "a", "b"],
        "null_model": ["crw", "crw", "crw", "crw", "shuffle", "shuffle"],
        "observed_net_m": [900.0, 10.0, 500.0, np.nan, 900.0, 10.0],
        "null_median_m": [300.0, 300.0, 480.0, np.nan, 300.0, 300.0],
        "p_value": [0.001, 0.002, 0.6, np.nan, 0.04, 0.3],
        "note": ["", "", "", "track too short to test", "", ""],
    })
    out = compare.finalise(table, cfg)
    assert list(out.columns) == compare.TABLE_COLUMNS
    crw = out["null_model"] == "crw"
    # BH within each null model, over the animals that have a p-value (scipy as reference)
    np.testing.assert_allclose(out.loc[crw, "q_value"].to_numpy()[:3],
                               stats.false_discovery_control([0.001, 0.002, 0.6]))
    np.testing.assert_allclose(out.loc[~crw, "q_value"], stats.false_discovery_control([0.04, 0.3]))
    assert list(out["verdict"]) == ["farther", "closer", "consistent", "insufficient", "consistent", "consistent"]
    assert out.loc[3, "note"] == "track too short to test"


def test_finalise_of_an_empty_table_has_the_columns():
    assert list(compare.finalise(pd.DataFrame(), Config()).columns) == compare.TABLE_COLUMNS


def test_gaps_are_walked_and_fixes_map_to_nominal_step_indices():
    # hourly fixes with a 20-hour hole: the walk has one step per nominal interval of the whole period
    hours = np.r_[np.arange(0, 30), np.arange(50, 80)]
    rng = np.random.default_rng(2)
    x, y = np.cumsum(rng.normal(0, 30, hours.size)), np.cumsum(rng.normal(0, 30, hours.size))
    x, y = x - x[0], y - y[0]
    fixes = pd.DataFrame({"time": START + pd.to_timedelta(hours + 0.1, unit="h"), "x_m": x, "y_m": y})
    obs = compare.observed_curve(fixes, 3600.0)
    assert obs["n_steps"] == 79
    np.testing.assert_array_equal(obs["idx"], hours)
    np.testing.assert_allclose(obs["nsd_m2"], x ** 2 + y ** 2)
    assert obs["net_m"] == pytest.approx(math.hypot(x[-1], y[-1]))
    # rows out of time order and a fix without coordinates: sorted, and the dropped fix counted
    shuffled = pd.concat([fixes.iloc[::-1], fixes.iloc[:1].assign(x_m=np.nan)], ignore_index=True)
    again = compare.observed_curve(shuffled, 3600.0)
    np.testing.assert_array_equal(again["idx"], hours)
    assert again["n_dropped"] == 1 and again["net_m"] == obs["net_m"]
    thin = compare.observed_curve(fixes, 3600.0, max_points=7)
    assert thin["idx"].size == 7 and thin["idx"][0] == 0 and thin["idx"][-1] == 79


def test_test_animal_rows_curves_and_the_kareiva_shigesada_self_check():
    cfg = Config(replicates=999, nulls=("crw", "shuffle", "levy"))
    fixes, steps = crw_track(80, stats.gamma(2.0, scale=30.0), stats.vonmises(1.5), np.random.default_rng(3))
    fits = fits_double(gamma_steps(2.0, 30.0), von_mises_turns(1.5), step_values=steps["step_m"],
                       turn_values=steps["turn_rad"].dropna(), note="tail: too few steps")
    rows, curves = compare.test_animal(fixes, steps, fits, 3600.0, cfg, np.random.default_rng(4))
    assert list(rows.columns) == compare.ROW_COLUMNS
    assert list(rows["null_model"]) == ["crw", "shuffle", "levy"]
    crw, shuffle, levy = (rows.iloc[i] for i in range(3))
    # crw: Kareiva & Shigesada (1983) exact expectation at n_steps beside the simulated mean.  After 80
    # steps the displacement is close to isotropic bivariate normal, so the NSD is close to exponential
    # (SD = mean) and the Monte Carlo SE of the mean is mean / sqrt(M): a 99.9 % band is 3.29 SE (+-10.4 %)
    assert abs(crw["simulated_mean_nsd_m2"] - crw["expected_nsd_m2"]) < 3.29 * crw["expected_nsd_m2"] / math.sqrt(999)
    assert math.isnan(shuffle["expected_nsd_m2"])
    assert crw["null_q025_m"] < crw["null_median_m"] < crw["null_q975_m"]
    assert 0 < crw["p_value"] <= 1 and 0 < crw["p_curve"] <= 1
    assert levy["p_value"] != levy["p_value"] and "no fitted power-law tail" in levy["note"]
    assert set(curves) == {"crw", "shuffle"}
    c = curves["crw"].as_dict()
    assert {k: len(v) for k, v in c.items()} == {k: 81 for k in ("step", "t_s", "observed_m2", "lo_m2", "hi_m2",
                                                                  "mean_m2")}
    assert np.all(c["lo_m2"] <= c["mean_m2"]) and np.all(c["mean_m2"] <= c["hi_m2"] + 1e-9)


def test_short_tracks_and_missing_models_are_insufficient_with_a_note():
    cfg = Config(replicates=19, min_steps_test=20)
    fixes, steps = crw_track(12, stats.gamma(2.0, scale=30.0), stats.vonmises(1.5), np.random.default_rng(6))
    fits = fits_double(gamma_steps(), von_mises_turns(), step_values=steps["step_m"], turn_values=[0.1])
    rows, curves = compare.test_animal(fixes, steps, fits, 3600.0, cfg, np.random.default_rng(7))
    assert rows["p_value"].isna().all() and curves == {}
    assert rows["note"].str.contains("fewer than the 20 needed").all()
    table = compare.finalise(rows.assign(animal_id="short"), cfg)
    assert (table["verdict"] == "insufficient").all()
    one_fix, _ = crw_track(1, stats.gamma(2.0), stats.vonmises(1.0), np.random.default_rng(8))
    rows, _ = compare.test_animal(one_fix.iloc[:1], steps.iloc[:0], fits_double(), math.nan, cfg,
                                  np.random.default_rng(9))
    assert rows["p_value"].isna().all() and rows["note"].str.len().gt(0).all()


def test_same_seed_same_rows_and_animal_order_does_not_matter():
    # design contract (DEVELOPERS.md): per-animal generators keyed by run seed and animal id
    cfg = Config(replicates=99)
    animals = {}
    for i, aid in enumerate(["owl-1", "owl-2", "owl-3"]):
        fixes, steps = crw_track(40, stats.gamma(2.0, scale=20.0), stats.vonmises(1.0), np.random.default_rng(i))
        animals[aid] = (fixes, steps, fits_double(gamma_steps(2.0, 20.0), von_mises_turns(1.0),
                                                  step_values=steps["step_m"], turn_values=steps["turn_rad"].dropna()))

    def run(order, c=cfg):
        parts = []
        for aid in order:
            fixes, steps, fits = animals[aid]
            rows, _ = compare.test_animal(fixes, steps, fits, 3600.0, c, animal_rng(c.seed, aid, "null"))
            rows.insert(0, "animal_id", aid)
            parts.append(rows)
        out = compare.finalise(pd.concat(parts, ignore_index=True), c)
        return out.sort_values(["animal_id", "null_model"]).reset_index(drop=True)

    first = run(["owl-1", "owl-2", "owl-3"])
    pd.testing.assert_frame_equal(first, run(["owl-1", "owl-2", "owl-3"]), check_exact=True)
    pd.testing.assert_frame_equal(first, run(["owl-3", "owl-1", "owl-2"]), check_exact=True)
    # a null's draws do not depend on which other nulls run
    alone = run(["owl-2"], cfg.replace(nulls=("shuffle",)))
    both = first[(first["animal_id"] == "owl-2") & (first["null_model"] == "shuffle")]
    cols = ["null_median_m", "p_farther", "p_closer", "p_curve", "simulated_mean_nsd_m2"]
    np.testing.assert_array_equal(alone[cols].to_numpy(), both[cols].to_numpy())
    assert not first.equals(run(["owl-1", "owl-2", "owl-3"], cfg.replace(seed=cfg.seed + 1)))
