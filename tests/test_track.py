"""Schedule, segments, resampling, steps and summary.

Geodesic values are checked against geographiclib (Karney 2013); small tracks are
hand-computed (common practice, no source); the sinuosity index against its
defining formula in Benhamou (2004) and by simulation of walks of known parameters.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from geographiclib.geodesic import Geodesic
from hypothesis import given, settings
from hypothesis import strategies as st
from pyproj import Transformer

from roamstat.config import Config
from roamstat.errors import RoamstatError
from roamstat.track import (
    compute_steps,
    fix_schedule,
    planar_steps,
    prepare_fixes,
    summarise,
    wrap_angle,
)

T0 = pd.Timestamp("2025-03-01T00:00:00Z")
REALDATA = Path(__file__).resolve().parents[2] / "shared" / "realdata"
NO_REJECTED = pd.DataFrame({"animal_id": pd.Series([], dtype=object)})


def fixes_table(animal, lats, lons, seconds, **extra) -> pd.DataFrame:
    n = len(lats)
    table = pd.DataFrame({
        "animal_id": [animal] * n,
        "time": T0 + pd.to_timedelta(np.asarray(seconds, dtype=float), unit="s"),
        "lat": np.asarray(lats, dtype=float),
        "lon": np.asarray(lons, dtype=float),
        "source_file": "f.csv",
        "source_row": np.arange(n) + 2,
    })
    for name, values in extra.items():
        table[name] = values
    return table


def along_geodesic(lat, lon, azimuth, spacing_m, n):
    line = Geodesic.WGS84.Line(lat, lon, azimuth)
    points = [line.Position(k * spacing_m) for k in range(n)]
    return [p["lat2"] for p in points], [p["lon2"] for p in points]


# --------------------------------------------------------------------------- angles


@given(st.floats(min_value=-1e4, max_value=1e4, allow_nan=False))
def test_wrap_angle_lands_in_half_open_interval_and_keeps_direction(a):
    w = wrap_angle(a)
    assert -np.pi < w <= np.pi
    assert np.cos(w) == pytest.approx(np.cos(a), abs=1e-9)
    assert np.sin(w) == pytest.approx(np.sin(a), abs=1e-9)


def test_wrap_angle_edges():
    # pi stays pi, -pi becomes pi (the interval is open at -pi); common practice, no source.
    np.testing.assert_array_equal(wrap_angle(np.array([np.pi, -np.pi, 3 * np.pi, 0.0])), [np.pi, np.pi, np.pi, 0.0])
    assert np.isnan(wrap_angle(np.nan))


coords = st.lists(st.tuples(st.floats(-5e4, 5e4), st.floats(-5e4, 5e4)), min_size=3, max_size=30)


@settings(max_examples=60, deadline=None)
@given(coords, st.floats(-np.pi, np.pi), st.floats(-1e5, 1e5), st.floats(-1e5, 1e5))
def test_rotation_and_translation_leave_steps_and_turns_unchanged(points, theta, dx, dy):
    xy = np.array(points)
    x, y = xy[:, 0], xy[:, 1]
    xr = np.cos(theta) * x - np.sin(theta) * y + dx
    yr = np.sin(theta) * x + np.cos(theta) * y + dy
    step, _, turn = planar_steps(x, y)
    step_r, _, turn_r = planar_steps(xr, yr)
    np.testing.assert_allclose(step_r, step, rtol=1e-9, atol=1e-6)
    # Compare turns where both neighbouring steps are clearly non-zero (rounding can
    # make a near-zero step exactly zero in one frame only).
    long_enough = np.r_[False, (step[1:] > 1e-3) & (step[:-1] > 1e-3)]
    diff = np.angle(np.exp(1j * (turn_r[long_enough] - turn[long_enough])))
    assert np.all(np.abs(diff) < 1e-6)
    finite = turn[np.isfinite(turn)]
    assert np.all((finite > -np.pi) & (finite <= np.pi))


def test_planar_steps_hand_computed():
    # North 1 m, east 1 m, south 2 m: a right turn of pi/2, then another (common practice, no source).
    step, heading, turn = planar_steps([0, 0, 1, 1], [0, 1, 1, -1])
    np.testing.assert_allclose(step, [1, 1, 2])
    np.testing.assert_allclose(heading, [0, np.pi / 2, np.pi])
    assert np.isnan(turn[0])
    np.testing.assert_allclose(turn[1:], [np.pi / 2, np.pi / 2])
    # Stacks of tracks along the last axis, and zero steps without heading or turn.
    step, heading, turn = planar_steps(np.array([[0, 1, 1, 2.0]] * 2), np.zeros((2, 4)))
    assert step.shape == (2, 3) and np.isnan(heading[:, 1]).all() and np.isnan(turn[:, 1:]).all()


# --------------------------------------------------------------------------- schedule


def test_schedule_survives_many_missed_fixes():
    # A 2-h collar that missed 60 % of its fixes: the median interval is a multiple, the
    # schedule is still 2 h (common practice, no source).
    rng = np.random.default_rng(3)
    slots = np.sort(rng.choice(np.arange(2000), size=800, replace=False))
    seconds = slots * 7200 + rng.integers(0, 90, slots.size)
    schedule = fix_schedule(T0 + pd.to_timedelta(seconds, unit="s"))
    assert schedule["median_dt_s"] > 1.5 * 7200
    assert schedule["nominal_dt_s"] == 7200
    dt = np.diff(seconds)
    assert schedule["regularity"] == pytest.approx(np.mean(np.abs(dt / 7200 - 1) <= 0.1))


def test_schedule_of_irregular_fixes_is_the_median():
    rng = np.random.default_rng(4)
    dt = rng.uniform(100, 20_000, 300)  # satellite-style irregular intervals
    schedule = fix_schedule(T0 + pd.to_timedelta(np.cumsum(dt), unit="s"))
    assert schedule["nominal_dt_s"] == round(float(np.median(dt[1:])))
    assert schedule["regularity"] < 0.2


def test_schedule_hand_computed_and_degenerate():
    s = fix_schedule(T0 + pd.to_timedelta([0, 1800, 3600, 5400, 9000], unit="s"))
    assert s == {"median_dt_s": 1800.0, "nominal_dt_s": 1800.0, "regularity": 0.75}
    assert np.isnan(fix_schedule([T0])["nominal_dt_s"])


# --------------------------------------------------------------------------- preparing fixes


def test_sorted_projected_and_flagged():
    a = fixes_table("b", [55.0, 55.01, 55.02], [-3.6, -3.6, -3.6], [0, 7200, 14400])
    b = fixes_table("a", [56.0, 56.01], [-4.0, -4.0], [3600, 0])
    fixes, projections = prepare_fixes(pd.concat([a, b], ignore_index=True), Config())
    assert list(fixes["animal_id"]) == ["a", "a", "b", "b", "b"]
    assert fixes["time"].is_monotonic_increasing is False  # sorted per animal, not overall
    assert list(fixes.loc[fixes.animal_id == "a", "lat"]) == [56.01, 56.0]  # by time
    assert set(projections) == {"a", "b"} and "+proj=aeqd" in projections["a"]
    # The frame is centred on each animal's first fix; distances from it are geodesic.
    first_b = fixes[fixes.animal_id == "b"].iloc[0]
    assert (first_b.x_m, first_b.y_m) == pytest.approx((0.0, 0.0), abs=1e-6)
    last_b = fixes[fixes.animal_id == "b"].iloc[-1]
    ref = Geodesic.WGS84.Inverse(55.0, -3.6, 55.02, -3.6)["s12"]
    assert np.hypot(last_b.x_m, last_b.y_m) == pytest.approx(ref, abs=1e-3)
    assert not fixes["interpolated"].any() and fixes["on_grid"].all()
    assert (fixes["segment"] == 0).all()


def test_stable_sort_keeps_input_order_of_equal_times():
    table = fixes_table("a", [1.0, 2.0, 3.0], [1.0, 1.0, 1.0], [0, 0, 0])
    fixes, _ = prepare_fixes(table, Config())
    assert list(fixes["source_row"]) == [2, 3, 4]


def test_segments_split_at_gaps_and_steps_never_cross_them():
    # 2-h schedule, one 12-h gap: default threshold 5 x 2 h = 10 h splits it; --max-gap 1d does not.
    seconds = [0, 7200, 14400, 14400 + 43200, 14400 + 43200 + 7200]
    a = fixes_table("a", [55.00, 55.01, 55.02, 55.03, 55.04], [-3.6] * 5, seconds)
    b = fixes_table("b", [55.0, 55.01], [-3.0, -3.0], [0, 7200])
    fixes, _ = prepare_fixes(pd.concat([a, b]), Config())
    assert list(fixes["segment"]) == [0, 0, 0, 1, 1, 0, 0]
    steps = compute_steps(fixes)
    assert list(zip(steps.animal_id, steps.segment)) == [("a", 0), ("a", 0), ("a", 1), ("b", 0)]
    assert steps["dt_s"].max() == 7200  # no step over the gap or from one animal to the next
    turns = steps["turn_rad"].to_numpy()
    assert np.isnan(turns[0]) and np.isfinite(turns[1]) and np.isnan(turns[2]) and np.isnan(turns[3])
    fixes, _ = prepare_fixes(pd.concat([a, b]), Config(max_gap="1d"))
    assert list(fixes["segment"]) == [0] * 7
    fixes, _ = prepare_fixes(pd.concat([a, b]), Config(max_gap="90min"))
    assert list(fixes.loc[fixes.animal_id == "a", "segment"]) == [0, 1, 2, 3, 4]


@pytest.mark.parametrize("option, value", [("max_gap", "soon"), ("max_gap", "-2h"), ("resample", "0h"), ("resample", "1s")])
def test_bad_durations_are_user_errors(option, value):
    table = fixes_table("a", [55.0, 55.1], [-3.6, -3.6], [0, 86400 * 400])
    with pytest.raises(RoamstatError, match=f"--{option.replace('_', '-')}"):
        prepare_fixes(table, Config(**{option: value}))


def test_given_crs_is_used_for_everybody():
    table = fixes_table("a", [55.0, 55.1], [-3.6, -3.5], [0, 7200])
    fixes, projections = prepare_fixes(table, Config(crs="EPSG:32630"))
    ref = Transformer.from_crs("EPSG:4326", "EPSG:32630", always_xy=True).transform([-3.6, -3.5], [55.0, 55.1])
    np.testing.assert_allclose(fixes["x_m"], ref[0], atol=1e-6)
    np.testing.assert_allclose(fixes["y_m"], ref[1], atol=1e-6)
    assert projections == {"a": "EPSG:32630"}


@pytest.mark.parametrize("crs", ["EPSG:4326", "not a crs"])
def test_unusable_crs_is_a_user_error(crs):
    table = fixes_table("a", [55.0, 55.1], [-3.6, -3.5], [0, 7200])
    with pytest.raises(RoamstatError, match="--crs"):
        prepare_fixes(table, Config(crs=crs))


def test_projected_input_keeps_its_coordinates_and_steps_are_geodesic():
    to_utm = Transformer.from_crs("EPSG:4326", "EPSG:32630", always_xy=True)
    lats, lons = [55.0, 55.01, 55.03], [-3.6, -3.58, -3.58]
    x, y = to_utm.transform(lons, lats)
    table = fixes_table("a", lats, lons, [0, 3600, 7200], x_in=x, y_in=y)
    fixes, projections = prepare_fixes(table, Config(crs="EPSG:32630"), input_crs="EPSG:32630")
    np.testing.assert_array_equal(fixes["x_m"], x)
    assert projections == {"a": "EPSG:32630"}
    steps = compute_steps(fixes)
    ref = Geodesic.WGS84.Inverse(55.0, -3.6, 55.01, -3.58)
    assert steps["step_m"].iloc[0] == pytest.approx(ref["s12"], abs=1e-6)


# --------------------------------------------------------------------------- resampling


def test_resampling_interpolates_along_the_geodesic_on_an_hourly_grid():
    # Fixes every 2 h at 01:10, 03:10, ... along one geodesic at constant speed: grid
    # points on the hour sit at known fractions of the way (reference: geographiclib Line).
    spacing = 3000.0
    lats, lons = along_geodesic(62.0, 10.0, 40.0, spacing, 5)
    seconds = 4200 + 7200 * np.arange(5)
    fixes, _ = prepare_fixes(fixes_table("a", lats, lons, seconds), Config(resample="1h"))
    grid = fixes[fixes["on_grid"]]
    assert (grid["time"].dt.minute == 0).all() and (grid["time"].dt.second == 0).all()
    assert grid["interpolated"].all() and not fixes.loc[~fixes["on_grid"], "interpolated"].any()
    assert len(fixes[~fixes["interpolated"]]) == 5  # the observed fixes stay
    assert grid["time"].iloc[0] == T0 + pd.Timedelta("2h") and grid["time"].iloc[-1] == T0 + pd.Timedelta("9h")
    line = Geodesic.WGS84.Line(62.0, 10.0, 40.0)
    for _, row in grid.iterrows():
        along = (row["time"] - T0).total_seconds() - 4200
        ref = line.Position(spacing * along / 7200)
        assert row["lat"] == pytest.approx(ref["lat2"], abs=1e-9)
        assert row["lon"] == pytest.approx(ref["lon2"], abs=1e-9)
    assert pd.isna(grid["source_row"]).all() and fixes.loc[~fixes["interpolated"], "source_row"].notna().all()
    steps = compute_steps(fixes)
    np.testing.assert_allclose(steps["step_m"], spacing / 2, atol=1e-6)
    np.testing.assert_allclose(steps["dt_s"], 3600)
    np.testing.assert_allclose(steps["turn_rad"].iloc[1:], 0, atol=1e-9)
    # interp_s: grid times 02:00, 03:00, ... lie 50 or 10 min from the nearest fix; each step's farther end is 50 min
    ends = np.stack([(steps[c] - T0).dt.total_seconds().to_numpy() for c in ("t_start", "t_end")])
    nearest = np.abs(ends[..., None] - seconds).min(axis=-1).max(axis=0)
    np.testing.assert_allclose(steps["interp_s"], nearest)
    np.testing.assert_allclose(steps["interp_s"], 3000)


def test_resampling_uses_fixes_on_the_grid_and_never_crosses_gaps():
    seconds = [0, 3600, 7200, 7200 + 86400, 7200 + 86400 + 3600]
    table = fixes_table("a", [55.0, 55.01, 55.02, 55.3, 55.31], [-3.6] * 5, seconds)
    fixes, _ = prepare_fixes(table, Config(resample="30min"))
    observed = fixes[~fixes["interpolated"]]
    assert observed["on_grid"].all()  # all five fall exactly on the half-hour grid
    grid_times = fixes.loc[fixes["on_grid"], "time"]
    assert grid_times.is_unique
    gap = (grid_times > T0 + pd.Timedelta("2h")) & (grid_times < T0 + pd.Timedelta("26h"))
    assert not gap.any()
    assert len(fixes) == 5 + 2 + 1  # 00:30 and 01:30, then 02:30 on the next day
    steps = compute_steps(fixes)
    assert steps["dt_s"].max() == 1800


# --------------------------------------------------------------------------- steps


def test_steps_match_geographiclib_on_tracks_near_a_pole_and_across_the_antimeridian():
    rng = np.random.default_rng(11)
    tracks = {
        "pole": (89.6 + rng.uniform(-0.2, 0.2, 30), rng.uniform(-180, 180, 30)),
        "dateline": (-16.8 + rng.uniform(-0.05, 0.05, 30), (179.95 + rng.uniform(0, 0.1, 30) + 180) % 360 - 180),
        "plain": (55.4 + np.cumsum(rng.normal(0, 0.01, 30)), -3.6 + np.cumsum(rng.normal(0, 0.01, 30))),
    }
    table = pd.concat([fixes_table(k, la, lo, np.arange(30) * 3600) for k, (la, lo) in tracks.items()])
    steps = compute_steps(prepare_fixes(table, Config())[0])
    for name, (lat, lon) in tracks.items():
        got = steps[steps.animal_id == name]
        ref = [Geodesic.WGS84.Inverse(lat[i], lon[i], lat[i + 1], lon[i + 1]) for i in range(29)]
        np.testing.assert_allclose(got["step_m"], [r["s12"] for r in ref], atol=1e-6)
        azi1 = np.deg2rad([r["azi1"] for r in ref])
        azi2 = np.deg2rad([r["azi2"] for r in ref])
        np.testing.assert_allclose(np.angle(np.exp(1j * (got["heading_rad"] - azi1))), 0, atol=1e-9)
        # Turn at vertex k: departure azimuth of step k minus arrival azimuth of step k-1.
        expected = np.angle(np.exp(1j * (azi1[1:] - azi2[:-1])))
        np.testing.assert_allclose(np.angle(np.exp(1j * (got["turn_rad"].iloc[1:] - expected))), 0, atol=1e-9)
        np.testing.assert_allclose(got["speed_m_s"], got["step_m"] / 3600)


def test_walk_along_one_geodesic_has_no_turns_even_near_the_pole():
    # 20 km steps along a geodesic passing 1 deg from the pole: successive departure
    # azimuths differ by many degrees there, yet the animal never turns.
    lats, lons = along_geodesic(88.0, 0.0, 60.0, 20_000.0, 12)
    steps = compute_steps(prepare_fixes(fixes_table("a", lats, lons, np.arange(12) * 3600), Config())[0])
    assert np.nanmax(np.abs(np.diff(np.unwrap(steps["heading_rad"])))) > np.deg2rad(5)
    np.testing.assert_allclose(steps["turn_rad"].iloc[1:], 0, atol=1e-9)


def test_right_turn_is_positive():
    # North along a meridian, then east: about +pi/2 (common practice, no source).
    table = fixes_table("a", [0.0, 0.01, 0.01], [0.0, 0.0, 0.01], [0, 60, 120])
    steps = compute_steps(prepare_fixes(table, Config())[0])
    assert steps["turn_rad"].iloc[1] == pytest.approx(np.pi / 2, abs=1e-3)


def test_zero_length_steps_have_no_heading_and_no_turn():
    table = fixes_table("a", [55.0, 55.01, 55.01, 55.02, 55.03], [-3.6] * 5, np.arange(5) * 7200)
    fixes, _ = prepare_fixes(table, Config())
    steps = compute_steps(fixes)
    assert steps["step_m"].iloc[1] == 0
    assert np.isnan(steps["heading_rad"].iloc[1])
    assert np.isnan(steps["turn_rad"].iloc[[0, 1, 2]]).all()
    assert steps["turn_rad"].iloc[3] == pytest.approx(0, abs=1e-9)
    summary = summarise(fixes, steps, NO_REJECTED)
    assert summary["n_zero_steps"].iloc[0] == 1


def test_empty_and_single_fix_animals():
    table = pd.concat([fixes_table("solo", [55.0], [-3.6], [0]),
                       fixes_table("pair", [55.0, 55.1], [-3.6, -3.6], [0, 7200])])
    fixes, projections = prepare_fixes(table, Config())
    steps = compute_steps(fixes)
    assert list(steps.columns) == ["animal_id", "segment", "t_start", "t_end", "dt_s", "step_m", "heading_rad", "turn_rad", "speed_m_s", "interp_s"]
    summary = summarise(fixes, steps, NO_REJECTED).set_index("animal_id")
    assert summary.loc["solo", "n_steps"] == 0 and summary.loc["solo", "path_m"] == 0
    assert np.isnan(summary.loc["solo", "straightness"]) and np.isnan(summary.loc["solo", "sinuosity"])
    assert summary.loc["pair", "straightness"] == pytest.approx(1.0)
    empty = compute_steps(fixes.iloc[0:0])
    assert len(empty) == 0 and list(empty.columns) == list(steps.columns)


# --------------------------------------------------------------------------- summary


def test_summary_hand_computed():
    # Three 1-km legs along a meridian and back: path 3 km, net 1 km.
    lats, lons = along_geodesic(55.0, -3.6, 0.0, 1000.0, 3)
    lats = lats + [lats[1]]
    lons = lons + [lons[1]]
    table = fixes_table("a", lats, lons, [0, 7200, 14400, 21600])
    rejected = pd.DataFrame({"animal_id": ["a", "a", "b", None], "reason_code": ["spike"] * 4})
    fixes, _ = prepare_fixes(table, Config())
    steps = compute_steps(fixes)
    row = summarise(fixes, steps, rejected).iloc[0]
    assert row["n_fixes"] == 4 and row["n_rejected"] == 2 and row["n_steps"] == 3
    assert row["path_m"] == pytest.approx(3000.0, abs=1e-6)
    assert row["net_m"] == pytest.approx(1000.0, abs=1e-6)
    assert row["straightness"] == pytest.approx(1 / 3)
    assert row["first_time"] == T0 and row["last_time"] == T0 + pd.Timedelta("6h")
    assert row["nominal_dt_s"] == 7200 and row["regularity"] == 1.0
    # Benhamou (2004) eq. 8 with p = 1000 m, b = 0 and turns 0 and pi (c = (1 - 1) / 2 = 0).
    assert row["sinuosity"] == pytest.approx(2 / np.sqrt(1000.0), rel=1e-9)


def test_straightness_counts_gaps_as_straight_lines():
    seconds = [0, 7200, 7200 + 86400 * 3, 7200 * 2 + 86400 * 3]
    lats, lons = along_geodesic(55.0, -3.6, 90.0, 1000.0, 4)
    fixes, _ = prepare_fixes(fixes_table("a", lats, lons, seconds), Config())
    row = summarise(fixes, compute_steps(fixes), NO_REJECTED).iloc[0]
    assert row["n_segments"] == 2 and row["path_m"] == pytest.approx(2000.0, abs=1e-6)
    assert row["straightness"] == pytest.approx(1.0, abs=1e-9)


def wrapped_cauchy(rng, rho, n):
    # Inverse-CDF sampler of the wrapped Cauchy distribution (Fisher 1993, Statistical
    # Analysis of Circular Data, sec. 3.3.4).
    return 2 * np.arctan((1 - rho) / (1 + rho) * np.tan(np.pi * (rng.uniform(size=n) - 0.5)))


def test_sinuosity_recovers_its_value_for_walks_of_known_parameters():
    # Correlated random walks with gamma steps (shape k, mean p) and wrapped-Cauchy turns
    # (mean cosine rho): Benhamou (2004) S = 2 [p ((1 + rho) / (1 - rho) + 1 / k)]^(-1/2).
    rng = np.random.default_rng(2004)
    k, mean_step, rho, n_steps, n_animals = 2.0, 400.0, 0.6, 400, 40
    to_lonlat = Transformer.from_crs("+proj=aeqd +lat_0=55 +lon_0=-3.6 +datum=WGS84 +units=m", "EPSG:4326", always_xy=True)
    tables = []
    for i in range(n_animals):
        steps = rng.gamma(k, mean_step / k, n_steps)
        heading = rng.uniform(-np.pi, np.pi) + np.cumsum(np.r_[0, wrapped_cauchy(rng, rho, n_steps - 1)])
        x = np.r_[0, np.cumsum(steps * np.sin(heading))]
        y = np.r_[0, np.cumsum(steps * np.cos(heading))]
        lon, lat = to_lonlat.transform(x, y)
        tables.append(fixes_table(f"crw{i:02d}", lat, lon, np.arange(n_steps + 1) * 3600))
    fixes, _ = prepare_fixes(pd.concat(tables), Config())
    summary = summarise(fixes, compute_steps(fixes), NO_REJECTED)
    expected = 2 / np.sqrt(mean_step * ((1 + rho) / (1 - rho) + 1 / k))
    assert summary["sinuosity"].mean() == pytest.approx(expected, rel=0.03)


def test_resampling_projected_input_interpolates_in_its_plane():
    # Straight line in UTM zone 30N at constant speed: grid rows sit at the time fraction
    # of the way in x_in, y_in, and lat/lon are their inverse projection (pyproj reference).
    x = 500_000 + np.array([0.0, 4000.0, 8000.0])
    y = 6_100_000 + np.array([0.0, 3000.0, 6000.0])
    to_lonlat = Transformer.from_crs("EPSG:32630", "EPSG:4326", always_xy=True)
    lon, lat = to_lonlat.transform(x, y)
    table = fixes_table("a", lat, lon, [1800, 1800 + 7200, 1800 + 14400], x_in=x, y_in=y)
    fixes, _ = prepare_fixes(table, Config(crs="EPSG:32630", resample="1h"), input_crs="EPSG:32630")
    grid = fixes[fixes["interpolated"]]
    assert len(grid) == 4  # 01:00 ... 04:00
    fraction = ((grid["time"] - T0).dt.total_seconds().to_numpy() - 1800) / 7200  # in fix intervals
    np.testing.assert_allclose(grid["x_m"], 500_000 + 4000 * fraction, atol=1e-6)
    np.testing.assert_allclose(grid["y_m"], 6_100_000 + 3000 * fraction, atol=1e-6)
    ref_lon, ref_lat = to_lonlat.transform(grid["x_m"].to_numpy(), grid["y_m"].to_numpy())
    np.testing.assert_allclose(grid["lon"], ref_lon, atol=1e-9)
    np.testing.assert_allclose(grid["lat"], ref_lat, atol=1e-9)


def test_no_fixes_gives_empty_tables():
    table = fixes_table("a", [], [], [])
    fixes, projections = prepare_fixes(table, Config())
    assert len(fixes) == 0 and projections == {}
    assert {"x_m", "y_m", "segment", "interpolated", "on_grid"} <= set(fixes.columns)
    steps = compute_steps(fixes)
    assert len(steps) == 0 and len(summarise(fixes, steps, NO_REJECTED)) == 0


def test_real_antarctic_tracks_steps_match_geographiclib():
    # Open data: RAATD subset in Darwin Core (Ropert-Coudert et al. 2020, Sci. Data 7: 94),
    # read here with pandas alone so that only the track stage is under test.
    path = REALDATA / "antarctic_tracks_dwc.csv"
    if not path.exists():
        pytest.skip(f"open dataset {path.name} not found in {REALDATA} (it lives beside the repo, not in it)")
    raw = pd.read_csv(path)
    raw = raw[raw["eventID"].isin(raw["eventID"].unique()[:3])]
    table = pd.DataFrame({
        "animal_id": raw["eventID"].astype(str),
        "time": pd.to_datetime(raw["eventDate"], utc=True, format="ISO8601"),
        "lat": raw["decimalLatitude"].astype(float),
        "lon": raw["decimalLongitude"].astype(float),
    }).drop_duplicates(["animal_id", "time"])
    fixes, projections = prepare_fixes(table, Config())
    steps = compute_steps(fixes)
    assert len(projections) == 3 and len(steps) > 100
    sample = steps.sample(60, random_state=1)
    for _, row in sample.iterrows():
        a = fixes[(fixes.animal_id == row.animal_id) & (fixes.time == row.t_start)].iloc[0]
        b = fixes[(fixes.animal_id == row.animal_id) & (fixes.time == row.t_end)].iloc[0]
        ref = Geodesic.WGS84.Inverse(a.lat, a.lon, b.lat, b.lon)
        assert row.step_m == pytest.approx(ref["s12"], abs=1e-6)
        if ref["s12"] > 0:
            assert np.angle(np.exp(1j * (row.heading_rad - np.deg2rad(ref["azi1"])))) == pytest.approx(0, abs=1e-9)
