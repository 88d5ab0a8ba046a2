"""The code blocks of docs/python-api.md run as written, so the documented API cannot drift.

This checks the documentation against the code, not the statistics (those are checked against
published examples, open data and simulations in the stage tests).  The blocks run in order in
one namespace, from the repository root, on the invented sample deployment with 19 replicates.
"""

from __future__ import annotations

import re
from pathlib import Path

import pandas as pd
import pytest

from roamstat import compare, track

REPO = Path(__file__).resolve().parents[1]
DOC = REPO / "docs" / "python-api.md"
BLOCK = re.compile(r"^```python\n(.*?)^```", re.S | re.M)


def python_blocks() -> list[str]:
    return BLOCK.findall(DOC.read_text(encoding="utf-8"))


@pytest.fixture(scope="module")
def namespace(tmp_path_factory):
    if not (REPO / "sample_tracks" / "collars.csv").exists():
        pytest.fail("sample_tracks/collars.csv missing: regenerate it with sample_tracks/make_sample.py")
    blocks = python_blocks()
    assert len(blocks) >= 5, "docs/python-api.md lost its runnable examples"
    ns: dict = {"__name__": "docs_python_api"}
    mp = pytest.MonkeyPatch()
    mp.chdir(REPO)
    try:
        for i, code in enumerate(blocks, start=1):
            exec(compile(code, f"{DOC.name} block {i}", "exec"), ns)
    finally:
        mp.undo()
    return ns


def test_examples_run_and_return_contract_tables(namespace):
    ns = namespace
    assert ns["cfg"].replicates == 19  # the docs promise a fast example
    assert isinstance(ns["null_tests"], pd.DataFrame)
    assert list(ns["null_tests"].columns) == compare.TABLE_COLUMNS
    assert set(ns["null_tests"]["verdict"]) <= set(compare.VERDICTS)
    assert list(ns["steps"].columns) == track.STEP_COLUMNS
    assert list(ns["summary"].columns) == track.SUMMARY_COLUMNS
    assert set(ns["written"]) >= {"fixes.csv", "rejected.csv", "steps.csv", "summary.csv", "fits.csv",
                                  "null_tests.csv", "residency.csv", "ranges.csv", "ranges.geojson",
                                  "manifest.json"}


def test_every_row_is_accounted_for(namespace):
    loaded = namespace["loaded"]
    assert loaded.read.n_read == len(loaded.fixes) + len(loaded.rejected)


def test_stage_by_stage_matches_the_runner(namespace):
    # The documented hand-made pipeline gives the runner's tables (same seed, same stage names).
    ns = namespace
    loaded = ns["loaded"]
    pd.testing.assert_frame_equal(ns["steps"], loaded.steps)
    pd.testing.assert_frame_equal(ns["summary"], loaded.summary)
    runner = ns["fits"][ns["fits"]["animal_id"] == ns["aid"]].drop(columns="animal_id").reset_index(drop=True)
    pd.testing.assert_frame_equal(ns["fitted"].rows.reset_index(drop=True), runner)
    by_hand = ns["rows"].drop(columns="note").reset_index(drop=True)
    in_run = (ns["null_tests"][ns["null_tests"]["animal_id"] == ns["aid"]]
              [by_hand.columns].reset_index(drop=True))
    pd.testing.assert_frame_equal(by_hand, in_run)


def test_geojson_is_a_feature_collection(namespace):
    geojson = namespace["geojson"]
    assert geojson["type"] == "FeatureCollection"
    assert {f["properties"]["method"] for f in geojson["features"]} == {"mcp", "kde"}
