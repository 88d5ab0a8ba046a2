"""Spreadsheet-saved exports, deployments, inspect advice and the spreadsheet guard (issue 16).

Expected times in tests/fixtures/spreadsheet/EXPECTED.csv are calendar facts worked by hand from
the values in each file (common practice, no source).  Spreadsheet serial days: the 1900 date
system counts 1900-01-01 as day 1 and keeps the non-existent 1900-02-29 as day 60, so day 45658 is
2025-01-01 (from memory; checked below against Python's own calendar from 1899-12-30).
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from roamstat.cli import main
from roamstat.config import Config
from roamstat.errors import RoamstatError
from roamstat.inspect import advise
from roamstat.io.read import read_inputs
from roamstat.io.sheetdates import from_serial_days
from roamstat.io.times import parse_times
from roamstat.io.write import csv_bytes
from roamstat.screen import screen
from roamstat.track import summarise

from conftest import realdata

CORPUS = Path(__file__).parent / "fixtures" / "spreadsheet"
EXPECTED = pd.read_csv(CORPUS / "EXPECTED.csv", dtype=str, keep_default_na=False)


@pytest.mark.parametrize("case", EXPECTED.to_dict("records"), ids=list(EXPECTED["file"]))
def test_spreadsheet_corpus(case):
    path = CORPUS / case["file"]
    if case["outcome"] == "error":
        with pytest.raises(RoamstatError, match="settles the date order") as err:
            read_inputs([path], Config())
        assert case["detail"] in str(err.value) and "--time-format" in str(err.value)
        return
    result = read_inputs([path], Config())
    times = result.rows["time"]
    assert len(times) == int(case["n_rows"]) and times.notna().all()
    assert times.iloc[0] == pd.Timestamp(case["first_time_utc"])
    assert times.iloc[-1] == pd.Timestamp(case["last_time_utc"])
    assert f"times read as {case['detail']}" in result.files[0]["notes"]


def test_decimal_comma_negative_longitude_reads_and_writes_as_a_number():
    result = read_inputs([CORPUS / "dotted_semicolon_decimal_comma.csv"], Config())
    assert result.rows["lon"].iloc[0] == pytest.approx(-3.625001)
    text = csv_bytes(result.rows[["orig_lon"]]).decode()
    assert "-3,625001" in text and "'-3,625001" not in text


def test_time_format_settles_an_ambiguous_file_both_ways():
    path = CORPUS / "ambiguous_order.csv"
    day = read_inputs([path], Config(time_format="%d/%m/%Y %H:%M")).rows["time"]
    month = read_inputs([path], Config(time_format="%m/%d/%Y %H:%M")).rows["time"]
    assert day.iloc[1] == pd.Timestamp("2025-04-02T00:00Z")  # 02/04/2025 day first: 2 April
    assert month.iloc[1] == pd.Timestamp("2025-02-04T00:00Z")  # month first: 4 February


def test_time_format_honours_tz_and_offsets():
    local = pd.Series(["13.04.2025 12:00"])
    out, _, note = parse_times(local, "Europe/Oslo", "f", "time", "%d.%m.%Y %H:%M")
    assert out.iloc[0] == pd.Timestamp("2025-04-13T10:00Z")  # Oslo keeps summer time (UTC+2) in April
    offset = pd.Series(["13.04.2025 12:00 +0100"])
    out, _, _ = parse_times(offset, "UTC", "f", "time", "%d.%m.%Y %H:%M %z")
    assert out.iloc[0] == pd.Timestamp("2025-04-13T11:00Z") and note.pattern == "%d.%m.%Y %H:%M"


def test_wrong_time_format_names_the_option():
    with pytest.raises(RoamstatError, match="--time-format"):
        read_inputs([CORPUS / "day_first_slash.csv"], Config(time_format="%Y-%m-%d"))


def test_serial_days_against_python_calendar():
    days = np.array([1.0, 59.0, 61.0, 45658.0, 45658.75, 60.0])
    out = from_serial_days(pd.Series(days), "f")
    base = dt.datetime(1899, 12, 30)
    assert out.iloc[0] == pd.Timestamp("1900-01-01") and out.iloc[1] == pd.Timestamp("1900-02-28")
    for i in (2, 3, 4):
        assert out.iloc[i] == pd.Timestamp(base + dt.timedelta(days=days[i]))
    assert out.iloc[3] == pd.Timestamp("2025-01-01")
    assert pd.isna(out.iloc[5])  # day 60 is 29 February 1900, which never existed


def test_numbers_in_a_non_date_column_stay_epoch_and_odd_numbers_are_refused():
    epoch, note, _ = parse_times(pd.Series(["1714521600"]), "UTC", "f", "timestamp")
    assert epoch.iloc[0] == pd.Timestamp("2024-05-01T00:00Z") and note == "Unix epoch"
    with pytest.raises(RoamstatError, match="neither Unix epoch"):
        parse_times(pd.Series(["45760.5"]), "UTC", "f", "reading")


def test_day_and_month_above_twelve_in_one_column_is_refused():
    with pytest.raises(RoamstatError, match="one date order"):
        parse_times(pd.Series(["13/04/2025", "04/13/2025"]), "UTC", "f", "date")


def test_many_rows_parse_with_one_detected_format():
    # Speed on a million rows: benchmarks/bench_sheet_dates.py.
    stamps = pd.date_range("2020-01-01", periods=20_000, freq="37min")  # spans days above 12
    text = pd.Series(stamps.strftime("%d.%m.%Y %H:%M:%S"), dtype="string")
    out, _, note = parse_times(text, "UTC", "f", "timestamp")
    assert note.description.startswith("day-first") and (out.dt.tz_convert(None).to_numpy() == stamps.to_numpy()).all()


# --- deployments ------------------------------------------------------------------------------------


def _recollared(tmp_path: Path) -> Path:
    rows = ["animal,collar,timestamp,lat,lon"]
    # Tag T1 walks north in March, tag T2 sits 50 km away in July: one animal, two deployments.
    rows += [f"wolf,T1,2024-03-01T{h:02d}:00:00Z,{60 + 0.001 * h},10.0" for h in range(24)]
    rows += [f"wolf,T2,2024-07-01T{h:02d}:00:00Z,{60.45 + 0.001 * (h % 2)},10.0" for h in range(24)]
    rows += [f"fox,F9,2024-03-01T{h:02d}:00:00Z,59.0,{11 + 0.001 * h}" for h in range(24)]
    path = tmp_path / "recollared.csv"
    path.write_text("\n".join(rows) + "\n")
    return path


def test_recollared_animal_becomes_two_deployments(tmp_path):
    result = read_inputs([_recollared(tmp_path)], Config())
    assert result.files[0]["columns"]["deployment"] == "collar"
    assert sorted(result.rows["animal_id"].unique()) == ["fox/F9", "wolf/T1", "wolf/T2"]
    assert any("'wolf' carries 2 tags" in n for n in result.files[0]["notes"])
    assert set(result.rows["tag"]) == {"T1", "T2", "F9"}


def test_deployment_col_option_and_its_errors(tmp_path):
    path = _recollared(tmp_path)
    result = read_inputs([path], Config(deployment_col="COLLAR"))
    assert result.files[0]["columns"]["deployment"] == "collar"
    with pytest.raises(RoamstatError, match="--deployment-col 'sensor'.*no such column"):
        read_inputs([path], Config(deployment_col="sensor"))


def test_one_tag_per_animal_leaves_ids_alone(tmp_path):
    path = tmp_path / "one_tag.csv"
    path.write_text("animal,tag,timestamp,lat,lon\n" + "".join(
        f"a,T1,2024-03-01T{h:02d}:00:00Z,60,{10 + 0.01 * h}\n" for h in range(3)))
    result = read_inputs([path], Config())
    assert "deployment" not in result.files[0]["columns"] and set(result.rows["animal_id"]) == {"a"}


def test_carnivore_deployments_net_within_path():
    # README of the open dataset: one coyote id is shared by two tags (recorded months apart).
    path = realdata("carnivore_gps_cr_endings.csv")
    from roamstat.pipeline import load

    loaded = load([path], Config())
    summary = loaded.summary.set_index("animal_id")
    assert {"IdCoy_P3_1/166560", "IdCoy_P3_1/166760"} <= set(summary.index)
    assert summary.loc["IdCoy_P3_1/166560", "tag"] == "166560"
    # A straight line is never longer than the path: net displacement <= path length (geometry).
    assert (summary["net_m"] <= summary["path_m"] * (1 + 1e-9)).all()


def test_summary_says_tag_only_with_deployments(tmp_path):
    result = read_inputs([_recollared(tmp_path)], Config())
    fixes, rejected = screen(result.rows, Config())
    steps = pd.DataFrame({"animal_id": pd.Series([], dtype=object), "step_m": [], "turn_rad": []})
    fixes = fixes.assign(segment=0, interpolated=False, on_grid=True)
    table = summarise(fixes, steps, rejected)
    assert dict(zip(table["animal_id"], table["tag"])) == {"fox/F9": "F9", "wolf/T1": "T1", "wolf/T2": "T2"}


# --- inspect ----------------------------------------------------------------------------------------


def test_inspect_prints_format_pairing_and_short_track_advice(tmp_path, capsys):
    assert main(["inspect", str(CORPUS / "separate_date_time_dotted.csv")]) == 0
    out = capsys.readouterr().out
    assert "times read as day-first dates" in out
    assert "paired 'Date' with 'Time'" in out
    assert "elk1: only 3 fixes kept; too few for null-walk verdicts (insufficient), residency class, home ranges" in out


def test_advice_on_quality_classes():
    rows = pd.DataFrame({"quality": ["3", "2", "A", "B", "B", "Z", None]})
    summary = pd.DataFrame({"animal_id": ["s"], "n_fixes": [500], "regularity": [0.9]})
    lines = advise(rows, summary, Config())
    assert lines[0] == "fixes per quality class: 3 1, 2 1, A 1, B 2, Z 1"
    assert "--min-quality A drops classes B and Z" in lines[1] and "keeps 3 of 6 fixes" in lines[1]
    assert "--null ctcrw" in lines[2]
    clean = advise(pd.DataFrame({"quality": ["3", "2"]}), summary, Config())
    assert not any("--min-quality" in line for line in clean)
    assert advise(pd.DataFrame({"quality": [None]}), summary, Config()) == []


# --- spreadsheet guard ------------------------------------------------------------------------------


@pytest.mark.parametrize("cell, written", [
    # OWASP CSV-injection guidance: cells starting with = + - @ tab CR are evaluated, numbers are values.
    ("-3,625001", "-3,625001"), ("-3.625001", "-3.625001"), ("+12", "+12"), ("-1e-5", "-1e-5"),
    ("=1+2", "'=1+2"), ("-2+3", "'-2+3"), ("@SUM(A1)", "'@SUM(A1)"), ("+cmd|x", "'+cmd|x"), ("\t=x", "'\t=x"),
])
def test_guard_neutralises_only_formulas(cell, written):
    text = csv_bytes(pd.DataFrame({"c": [cell]})).decode().splitlines()[1]
    assert text.strip('"') == written


def test_chunked_read_keeps_deployments_and_date_order_of_the_whole_file(tmp_path):
    # The first 10-record chunk holds only tag T1 and days above 12; the later ones only tag T2 on
    # 01.07.2024, which alone could not settle the date order.
    from roamstat.io.chunks import read_in_chunks

    rows = ["animal,collar,timestamp,lat,lon"]
    rows += [f"wolf,T1,13.03.2024 {h:02d}:00:00,{60 + 0.001 * h},10.0" for h in range(24)]
    rows += [f"wolf,T2,01.07.2024 {h:02d}:00:00,{60.45 + 0.001 * (h % 2)},10.0" for h in range(24)]
    path = tmp_path / "chunked.csv"
    path.write_text("\n".join(rows) + "\n")
    whole = read_inputs([path], Config()).rows
    chunked = pd.concat([p.rows for p in read_in_chunks(str(path), Config(), 10)], ignore_index=True)
    assert list(chunked["animal_id"]) == list(whole["animal_id"]) == ["wolf/T1"] * 24 + ["wolf/T2"] * 24
    assert chunked["time"].equals(whole["time"]) and whole["time"].iloc[-1] == pd.Timestamp("2024-07-01T23:00Z")


def test_impossible_dates_are_unreadable_not_rolled_over():
    # 31 February and 29 February 2025 do not exist; 2024 is a leap year (Gregorian calendar).
    out, _, _ = parse_times(pd.Series(["31.02.2025 12:00", "29.02.2025 01:00", "29.02.2024 01:00"]), "UTC", "f", "t")
    assert pd.isna(out.iloc[0]) and pd.isna(out.iloc[1]) and out.iloc[2] == pd.Timestamp("2024-02-29T01:00Z")


@pytest.mark.parametrize("fmt", ["%d.%m.%Y %H:%M:%S", "%m/%d/%y %I:%M %p", "%Y-%m-%d %I:%M:%S %p"])
def test_fast_pattern_reader_agrees_with_pandas(fmt):
    from roamstat.io.sheetdates import parse_with_pattern

    rng = np.random.default_rng(16)
    seconds = rng.integers(0, 40 * 365 * 86400, 3000)
    stamps = pd.Timestamp("1990-01-01") + pd.to_timedelta(seconds, unit="s").floor("min")
    text = pd.Series(stamps.strftime(fmt), dtype="string")
    text.iloc[::7] = text.iloc[::7].str.replace(r"^0", "", regex=True)  # unpadded leading fields
    reference = pd.to_datetime(text, format=fmt, errors="coerce")  # pandas' own strptime as reference
    got = parse_with_pattern(text, fmt)
    assert got.notna().all() and (got.to_numpy() == reference.to_numpy()).all()
