"""A big animal's independent stages on threads give byte-identical tables to the serial order.

A design contract, not an external check: the reference is the serial order itself.  A small real-
looking deployment (the demo collars) is forced through the threaded path.
"""

from __future__ import annotations

import threading
from pathlib import Path

import pandas as pd
import pytest

import roamstat.pipeline as pipeline
from roamstat.config import Config
from roamstat.io.write import csv_bytes

COLLARS = Path(__file__).resolve().parents[1] / "sample_tracks" / "collars.csv"
TABLES = ("fits", "null_tests", "residency", "ranges", "summary", "motion_models", "track_smoothed", "states",
          "state_models")


def _tables(cfg: Config, loaded) -> dict:
    stages = tuple(s for s in pipeline.command_stages("run", cfg) if s != "report")
    tasks = pipeline.animal_tasks(loaded, stages, cfg)[:2]
    return pipeline.deployment_tables([pipeline.analyse_animal(t) for t in tasks], stages, cfg, loaded.summary)


@pytest.fixture(scope="module")
def loaded_and_cfg():
    # the states null makes the nulls wait for the states thread; the others run without it
    cfg = Config(replicates=49, state_starts=2, workers=2, nulls=("crw", "shuffle", "levy", "ctcrw", "states"))
    return pipeline.load([str(COLLARS)], cfg), cfg


def test_threaded_stages_equal_the_serial_order(loaded_and_cfg, monkeypatch):
    loaded, cfg = loaded_and_cfg
    serial = _tables(cfg, loaded)
    ran_on = []
    states_stage = pipeline._states_stage

    def recorded(task):
        ran_on.append(threading.current_thread() is threading.main_thread())
        return states_stage(task)

    monkeypatch.setattr(pipeline, "ALONGSIDE_STEPS", 0)
    monkeypatch.setattr(pipeline, "_states_stage", recorded)
    threaded = _tables(cfg, loaded)
    assert ran_on == [False, False]  # the path under test really ran on threads
    for name in TABLES:
        assert len(serial[name]), name
        pd.testing.assert_frame_equal(threaded[name], serial[name], check_exact=True, obj=name)
        assert csv_bytes(threaded[name]) == csv_bytes(serial[name]), name


def test_one_worker_stays_serial(loaded_and_cfg, monkeypatch):
    loaded, cfg = loaded_and_cfg
    monkeypatch.setattr(pipeline, "ALONGSIDE_STEPS", 0)
    task = pipeline.animal_tasks(loaded, ("steps", "states"), cfg)[0]
    assert pipeline._runs_alongside(task)
    assert not pipeline._runs_alongside(pipeline.AnimalTask(**{**task.__dict__, "cfg": Config(workers=1)}))


def test_an_error_on_a_thread_reaches_the_caller(loaded_and_cfg, monkeypatch):
    loaded, cfg = loaded_and_cfg

    def broken(task):
        raise RuntimeError("states failed")

    monkeypatch.setattr(pipeline, "ALONGSIDE_STEPS", 0)
    monkeypatch.setattr(pipeline, "_states_stage", broken)
    task = pipeline.animal_tasks(loaded, ("steps", "motion", "fit", "states"), cfg)[0]
    with pytest.raises(RuntimeError, match="states failed"):
        pipeline.analyse_animal(task)
