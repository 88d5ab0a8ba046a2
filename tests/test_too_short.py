"""Animals too short for any test: the direct rows of roamstat.too_short equal the stages' own.

The reference is the general path itself (every stage run on the short animals too), so this is a
design contract, not an external check: the fast path must write byte-identical tables.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import roamstat.too_short as too_short
from roamstat.cli import build_parser, config_from_args
from roamstat.config import Config
from roamstat.io.write import csv_bytes
from roamstat.pipeline import analyse_animal, animal_tasks, command_stages, deployment_tables, load
from roamstat.ranges.mask import HiddenOrigin
from roamstat.run import run_command

ORIGIN = HiddenOrigin(55.0, -3.0)
TABLES = ("fixes", "rejected", "steps", "summary", "fits", "null_tests", "residency", "ranges", "states",
          "state_models", "motion_models", "track_smoothed")


def mixed_deployment(path: Path, seed: int = 3) -> Path:
    """Animals of 1 to 12 fixes (irregular, unsorted, one bad DOP, one duplicate time) and two of 45.

    Simulated here (a Gaussian random walk on a 2-h schedule), independently of the fitting code.
    """
    rng = np.random.default_rng(seed)
    start = pd.Timestamp("2025-04-01", tz="UTC")
    parts = []
    for n in [*range(1, 13), 45, 45]:
        for variant in range(2):
            hours = np.arange(n) * 2.0 + (rng.random(n) * 0.3 if variant else 0.0)
            part = pd.DataFrame({"animal_id": f"A{n:02d}{'ab'[variant]}{len(parts)}",
                                 "timestamp": (start + pd.to_timedelta(hours, unit="h")).strftime("%Y-%m-%dT%H:%M:%SZ"),
                                 "latitude": 55.4 + np.cumsum(rng.normal(0, 0.004, n)),
                                 "longitude": -3.6 + np.cumsum(rng.normal(0, 0.006, n)), "dop": 1.5})
            if variant and n > 3:
                part.loc[1, "dop"] = 40.0  # rejected with --max-dop
                part.loc[2, "timestamp"] = part.loc[3, "timestamp"]  # a duplicate time
                part = part.iloc[::-1]
            parts.append(part)
    pd.concat(parts).to_csv(path, index=False)
    return path


def many_short(path: Path, n_animals: int = 300, seed: int = 4) -> Path:
    """Animals of 1 to 9 fixes at irregular times, spread over tens of kilometres (simulated here)."""
    rng = np.random.default_rng(seed)
    sizes = rng.integers(1, 10, n_animals)
    ids = np.repeat([f"S{i:04d}" for i in range(n_animals)], sizes)
    hours = np.concatenate([np.sort(rng.uniform(0, 6 * n, n)) for n in sizes])
    times = pd.Timestamp("2025-06-01", tz="UTC") + pd.to_timedelta(np.round(hours * 3600), unit="s")
    pd.DataFrame({"animal_id": ids, "timestamp": times.strftime("%Y-%m-%dT%H:%M:%SZ"),
                  "latitude": 60.0 + rng.normal(0, 0.2, ids.size),
                  "longitude": 20.0 + rng.normal(0, 0.4, ids.size)}).to_csv(path, index=False)
    return path


def test_short_animal_rows_equal_the_stages_rows(tmp_path, monkeypatch):
    # in process, on many animals: a last-bit difference in a float shows up within a few hundred
    cfg = Config(replicates=19, state_starts=1)
    stages = tuple(s for s in command_stages("run", cfg) if s != "report")
    loaded = load([str(many_short(tmp_path / "short.csv"))], cfg)
    tasks = animal_tasks(loaded, stages, cfg)
    assert len(tasks) == 300 and all(too_short.is_too_short(t) for t in tasks)
    fast = deployment_tables([analyse_animal(t) for t in tasks], stages, cfg, loaded.summary)
    monkeypatch.setattr(too_short, "is_too_short", lambda task: False)
    general = deployment_tables([analyse_animal(t) for t in tasks], stages, cfg, loaded.summary)
    for name in ("fits", "null_tests", "residency", "ranges", "summary", "motion_models", "states"):
        # the id column may be either of pandas' string dtypes; the written bytes may not differ
        pd.testing.assert_frame_equal(fast[name], general[name], check_exact=True, check_dtype=False, obj=name)
        assert csv_bytes(fast[name]) == csv_bytes(general[name]), name


def _run(command: str, csv: Path, out: Path, options: list[str]) -> Path:
    args = build_parser().parse_args([command, str(csv), "--out", str(out), "--replicates", "19",
                                      "--state-starts", "1", "--quiet", *options])
    run_command(command, [str(csv)], out, config_from_args(args), [], origin=ORIGIN)
    return out


@pytest.mark.slow
@pytest.mark.parametrize("command,options", [
    ("run", ["--no-report", "--max-dop", "10"]),
    ("run", ["--no-report", "--resample", "2h", "--min-step", "5", "--bootstrap", "2"]),
    ("run", ["--no-report", "--mask-locations", "--low-memory"]),
    ("nulltest", ["--null", "crw,states,ctcrw"]),
])
def test_short_animals_fast_path_equals_general_path(tmp_path, monkeypatch, command, options):
    csv = mixed_deployment(tmp_path / "mixed.csv")
    fast = _run(command, csv, tmp_path / "fast", options)
    monkeypatch.setattr(too_short, "is_too_short", lambda task: False)
    general = _run(command, csv, tmp_path / "general", options)
    written = [name for name in TABLES if (general / f"{name}.csv").exists()]
    assert {"fits", "null_tests"} <= set(written)
    for name in written:
        assert (fast / f"{name}.csv").read_bytes() == (general / f"{name}.csv").read_bytes(), name
    if (general / "ranges.geojson").exists():
        assert (fast / "ranges.geojson").read_bytes() == (general / "ranges.geojson").read_bytes()


def test_too_short_is_below_every_stage_minimum():
    # the stages' minimums (models.fit 10 values, motion 10 fixes, ranges 10 fixes, residency 20,
    # 30 steps per state, min_steps_test + 1 fixes): the smallest decides
    assert too_short.shortest_analysed(Config()) == 10
    assert too_short.shortest_analysed(Config(min_steps_test=4)) == 5
    assert too_short.shortest_analysed(Config(state_counts=(1,), min_steps_test=40)) == 10


def test_discrete_summary_equals_the_observed_curve_to_the_last_bit():
    # compare._observed on thousands of random short tracks: a float computed in another order
    # (e.g. scalar rather than array squares) differs in about 1 case in 1,000
    from roamstat import compare
    from roamstat.track import NAT_NS, as_ns

    rng = np.random.default_rng(7)
    cfg = Config()
    for n in rng.integers(2, 10, 4000):
        frame = pd.DataFrame({"time": pd.Timestamp("2025-01-01", tz="UTC")
                              + pd.to_timedelta(np.sort(rng.uniform(0, 36_000, n)).round(), unit="s"),
                              "x_m": rng.normal(0, 5_000, n), "y_m": rng.normal(0, 5_000, n)})
        ns, x, y = as_ns(frame["time"]), frame["x_m"].to_numpy(), frame["y_m"].to_numpy()
        fast = too_short._discrete_summary((ns, x, y, ns != NAT_NS), np.ones(n, bool), 3600.0, n - 1, 20)
        general = compare._observed(frame, n - 1, 3600.0, cfg)
        assert (fast[0]["n_steps"], fast[0]["net_m"], fast[1]) == (general[0]["n_steps"], general[0]["net_m"],
                                                                   general[1])
