"""docs/outputs.md against the columns the code writes: every column documented, nothing documented absent."""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from roamstat.pipeline import TAIL_COLUMNS
from roamstat import compare, track
from roamstat.cli import main
from roamstat.models import COLUMNS as FIT_COLUMNS
from roamstat.motion import TABLE_COLUMNS as MOTION_COLUMNS
from roamstat.motion.animal import SMOOTHED_COLUMNS
from roamstat.ranges.estimate import ROW_COLUMNS as RANGE_COLUMNS
from roamstat.ranges.residency import MODELS, finalise_residency, residency_animal
from roamstat.screen import REJECTED_FRONT
from roamstat.states import decoded_columns, model_columns

DOC = Path(__file__).parents[1] / "docs" / "outputs.md"


def documented(section: str) -> set[str]:
    """Column names in the first cell of each table row of one '## <section>' part of outputs.md."""
    text = DOC.read_text(encoding="utf-8")
    match = re.search(rf"^## {re.escape(section)}\n(.*?)(?=^##)", text, flags=re.M | re.S)
    assert match, f"no section '## {section}' in {DOC}"
    names = set()
    for line in match.group(1).splitlines():
        cells = line.split("|")
        if not line.startswith("| `") or len(cells) < 3:
            continue
        first = cells[1]
        if "…" in first:  # `aic_sedentary` … `aic_nomad`: a run of columns, expanded by the caller
            names.add(first.strip())
            continue
        names.update(re.findall(r"`([^`]+)`", first))
    return names


def written_headers(tmp_path: Path, sample_csv: Path) -> dict[str, list[str]]:
    out = tmp_path / "o"
    assert main(["clean", str(sample_csv), "--out", str(out), "--quiet"]) == 0
    return {name: list(pd.read_csv(out / name, nrows=0).columns) for name in ("fixes.csv", "rejected.csv")}


def test_fixes_and_rejected_columns_are_documented(tmp_path, sample_csv):
    headers = written_headers(tmp_path, sample_csv)
    # columns that exist only for some inputs (projected input) or options (--mask-locations):
    # documented, absent from the sample's plain run
    optional = {"x_in", "y_in", "tag"}  # tag: only with a deployment (tag/collar) column
    passed_through = {"collar_temp_c"}  # the sample's extra input column, documented as "other input columns"
    fixes_doc = documented("fixes.csv")
    assert set(headers["fixes.csv"]) - passed_through <= fixes_doc
    assert fixes_doc - optional <= set(headers["fixes.csv"]), fixes_doc - set(headers["fixes.csv"])
    rejected_doc = documented("rejected.csv")
    assert rejected_doc == {*REJECTED_FRONT, "orig_<name>", "extra_fields"}
    written = set(headers["rejected.csv"])
    assert set(REJECTED_FRONT) <= written
    assert all(c.startswith("orig_") for c in written - set(REJECTED_FRONT) - {"extra_fields"})


@pytest.mark.parametrize("section,columns", [
    ("steps.csv", track.STEP_COLUMNS),
    ("summary.csv", track.SUMMARY_COLUMNS),
    ("fits.csv", ["animal_id", *FIT_COLUMNS, "params_ci"]),
    ("null_tests.csv", compare.TABLE_COLUMNS),
    ("ranges.csv", ["animal_id", *RANGE_COLUMNS]),
])
def test_table_columns_match_the_docs(section, columns):
    # summary.csv gains `tag` only when a deployment (tag/collar) column splits animals, `species` only
    # when the input names one, and the tail columns only from the commands that fit step models
    optional = {"tag", "species"} if section == "summary.csv" else set()
    if section == "summary.csv":
        columns = [*columns, *TAIL_COLUMNS]
    assert documented(section) - optional == set(columns)
    assert len(set(columns)) == len(columns)


def test_motion_tables_match_the_docs():
    # motion_models.csv documents the standard errors as one row `*_se` (one per parameter)
    se = {c for c in MOTION_COLUMNS if c.endswith("_se")}
    assert documented("motion_models.csv") == {"animal_id", *(set(MOTION_COLUMNS) - se), "*_se"}
    # track_smoothed.csv gains `masked` (and loses lat, lon) with --mask-locations
    assert documented("track_smoothed.csv") == {*SMOOTHED_COLUMNS, "masked"}


@pytest.mark.parametrize("section,columns,run", [
    ("states.csv", decoded_columns(4), "p_state"),
    ("state_models.csv", model_columns(4), "p_to_state"),
])
def test_state_table_columns_match_the_docs(section, columns, run):
    # `<run>_1` … `<run>_K`: one column per state up to the largest K compared (here the most allowed, 4)
    cell = f"`{run}_1` … `{run}_K`"
    doc = documented(section)
    assert cell in doc
    expanded = (doc - {cell}) | {c for c in columns if c.startswith(run + "_")}
    assert expanded == set(columns)


def test_residency_columns_match_the_docs():
    times = pd.date_range("2024-01-01", periods=5, freq="1h", tz="UTC")
    fixes = pd.DataFrame({"animal_id": "a", "time": times, "lat": 0.0, "lon": 0.0, "x_m": np.arange(5.0), "y_m": 0.0,
                          "interpolated": False, "on_grid": True, "segment": 0})
    row, _ = residency_animal(fixes)  # too few fixes: the row still carries every column
    table = finalise_residency(pd.DataFrame([{"animal_id": "a", **row}]))
    doc = documented("residency.csv")
    run = f"`aic_{MODELS[0]}` … `aic_{MODELS[-1]}`"
    assert run in doc
    expanded = (doc - {run}) | {f"aic_{m}" for m in MODELS}
    assert expanded == set(table.columns)
