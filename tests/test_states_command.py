"""The behavioural-states stage from the command line: `roamstat states`, `--null states`, the report pieces.

The tracks come from the independent simulator of tests/states_sim.py (Morales et
al. 2004; Zucchini, MacDonald & Langrock 2016, §2.1), written out as a projected
collar file, so these checks pass only if the command reads, aligns and writes
what the states package fits.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from states_sim import TWO_STATES, markov_chain, track

from roamstat.cli import main
from roamstat.report.states_figures import dwell_runs, state_of_fixes, time_in_state
from roamstat.states import decoded_columns, model_columns

FAST = ["--state-starts", "2", "--quiet"]


@pytest.fixture(scope="module")
def collar_file(tmp_path_factory):
    """A 2-state animal of 1,200 hourly steps and a short one (40 steps) that no 2-state model can take."""
    rng = np.random.default_rng(15)
    parts, truth = [], None
    for animal, n in (("long", 1200), ("short", 40)):
        times, x, y, states = track(TWO_STATES, n, rng)
        if animal == "long":
            truth = pd.DataFrame({"time": times[:-1], "true_state": states + 1})
        # UTM zone 33N around 15 E, 45 N: planar metres the program reads with --crs
        parts.append(pd.DataFrame({"animal_id": animal, "time": times.strftime("%Y-%m-%dT%H:%M:%SZ"),
                                   "east": 500000.0 + x, "north": 5000000.0 + y}))
    path = tmp_path_factory.mktemp("collars") / "simulated.csv"
    pd.concat(parts).to_csv(path, index=False)
    return path, truth


def _cli(command, path, out, *flags):
    return main([command, str(path), "--out", str(out), "--x-col", "east", "--y-col", "north",
                 "--crs", "EPSG:32633", *FAST, *map(str, flags)])


@pytest.fixture(scope="module")
def states_run(collar_file, tmp_path_factory):
    path, truth = collar_file
    out = tmp_path_factory.mktemp("states") / "out"
    assert _cli("states", path, out, "--states", "1,2") == 0
    return out, truth


def test_states_command_writes_its_tables_and_no_others(states_run):
    out, _ = states_run
    written = {p.name for p in out.iterdir()}
    assert {"fixes.csv", "rejected.csv", "steps.csv", "summary.csv", "states.csv", "state_models.csv",
            "manifest.json"} == written
    assert list(pd.read_csv(out / "states.csv", nrows=0).columns) == decoded_columns(2)
    assert list(pd.read_csv(out / "state_models.csv", nrows=0).columns) == model_columns(2)


def test_states_command_recovers_the_simulated_states(states_run):
    out, truth = states_run
    models = pd.read_csv(out / "state_models.csv")
    long = models[models["animal_id"] == "long"]
    # 2 states simulated, BIC should select 2 (Zucchini et al. 2016, §6.1; the issue's >= 90 % rate per animal)
    assert set(long.loc[long["best"], "n_states"]) == {2}
    # 40 steps: enough for K = 1 only (30 steps per state)
    assert set(models.loc[models["animal_id"] == "short", "n_states"]) == {1}
    decoded = pd.read_csv(out / "states.csv", parse_dates=["time"])
    mine = decoded[decoded["animal_id"] == "long"].merge(truth, on="time", how="inner")
    assert len(mine) == 1200  # every step decoded, aligned to its start time
    # Viterbi accuracy on well-separated states >= 90 % (issue 15 criterion; Zucchini et al. 2016, §5.4)
    assert np.mean(mine["state"] == mine["true_state"]) >= 0.9
    probs = mine[["p_state_1", "p_state_2"]].to_numpy()
    assert np.allclose(probs.sum(axis=1), 1.0)
    steps = pd.read_csv(out / "steps.csv")
    assert len(decoded) == len(steps)  # both animals have a model: one row per step


def test_null_states_runs_end_to_end_and_short_tracks_are_insufficient(collar_file, tmp_path):
    path, _ = collar_file
    out = tmp_path / "o"
    assert _cli("nulltest", path, out, "--null", "crw,states", "--states", "2", "--replicates", "19") == 0
    tests = pd.read_csv(out / "null_tests.csv", keep_default_na=False)
    row = tests[(tests["animal_id"] == "long") & (tests["null_model"] == "states")].iloc[0]
    assert 0 < float(row["p_value"]) <= 1 and row["verdict"] in ("farther", "closer", "consistent")
    short = tests[(tests["animal_id"] == "short") & (tests["null_model"] == "states")].iloc[0]
    assert short["verdict"] == "insufficient" and "no fitted state model" in short["note"]
    # the model the null walked is on record
    assert (out / "state_models.csv").is_file() and (out / "states.csv").is_file()


def test_one_and_two_workers_write_identical_state_tables(collar_file, tmp_path):
    path, _ = collar_file
    tables = []
    for workers in ("1", "2"):
        out = tmp_path / f"w{workers}"
        assert _cli("states", path, out, "--states", "1,2", "--workers", workers) == 0
        tables.append({n: (out / n).read_bytes() for n in ("states.csv", "state_models.csv")})
    assert tables[0] == tables[1]


@pytest.mark.parametrize("flags, fragment", [
    (["--states", "two"], "--states"),
    (["--states", "0,2"], "--states"),
    (["--state-steps", "lognormal"], "--state-steps"),
    (["--state-turns", "uniform"], "--state-turns"),
    (["--state-starts", "0"], "--state-starts"),
])
def test_bad_state_options_are_one_line_errors(flags, fragment, collar_file, tmp_path, capsys):
    path, _ = collar_file
    code = main(["states", str(path), "--out", str(tmp_path / "o"), *flags])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1 and err[0].startswith("roamstat: error: ") and fragment in err[0]
    assert not (tmp_path / "o").exists()


def test_dwell_runs_have_the_geometric_mean_of_the_chain():
    # sojourn times of a Markov chain are geometric with mean 1 / (1 - gamma_ii)
    # (Zucchini, MacDonald & Langrock 2016, §1.3): 10 h and 6.67 h for TWO_STATES at hourly slots
    rng = np.random.default_rng(3)
    states = markov_chain(TWO_STATES["gamma"], 20000, rng) + 1
    decoded = pd.DataFrame({"time": pd.Timestamp("2025-01-01", tz="UTC") + pd.to_timedelta(np.arange(20000), "h"),
                            "state": states})
    runs = dwell_runs(decoded, 3600.0)
    assert runs["dwell_s"].sum() == 20000 * 3600.0
    for k, stay in ((1, 0.9), (2, 0.85)):
        mean_h = runs.loc[runs["state"] == k, "dwell_s"].mean() / 3600.0
        expected = 1.0 / (1.0 - stay)
        sd = np.sqrt(stay) / (1.0 - stay)  # geometric standard deviation
        n = (runs["state"] == k).sum()
        assert abs(mean_h - expected) < 4 * sd / np.sqrt(n), (k, mean_h, expected)
    # a gap breaks a run even in the same state
    gap = decoded.iloc[[0, 1, 2]].assign(state=1)
    gap.loc[2, "time"] += pd.Timedelta(hours=5)
    assert list(dwell_runs(gap, 3600.0)["dwell_s"]) == [7200.0, 3600.0]


def test_fixes_take_the_state_of_the_step_leaving_them():
    t0 = pd.Timestamp("2025-01-01", tz="UTC")
    decoded = pd.DataFrame({"time": [t0, t0 + pd.Timedelta(hours=1), t0 + pd.Timedelta(hours=5)], "state": [1, 2, 1]})
    track_ = pd.DataFrame({"time": [t0, t0 + pd.Timedelta(minutes=90), t0 + pd.Timedelta(hours=2),
                                    t0 + pd.Timedelta(hours=5), t0 + pd.Timedelta(hours=6)],
                           "x_m": 0.0, "y_m": 0.0})
    got = state_of_fixes(track_, decoded, 3600.0)
    # 01:30 lies inside the step leaving 01:00; 02:00 ends it (a gap follows); 06:00 ends the track
    np.testing.assert_array_equal(got, [1, 2, np.nan, 1, np.nan])


def test_time_in_state_reads_the_selected_models_stationary_shares():
    models = pd.DataFrame({"animal_id": ["a", "a", "a", "b"], "n_states": [1, 2, 2, 1], "state": [1, 2, 1, 1],
                           "stationary_p": [1.0, 0.4, 0.6, 1.0], "best": [False, True, True, True]})
    assert time_in_state(models) == {"a": "1: 60 % · 2: 40 %", "b": "1: 100 %"}
    assert time_in_state(None) == {}
