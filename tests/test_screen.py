"""Screening: one fixture per rule in tests/fixtures/read/screen/.

Each fixture is a calm track (about 150 m per hour, heading north-east) with the
offending rows inserted at known lines.  The tests check that exactly those lines
are rejected, with the rule's reason code, that the rule stays quiet when it is
off, and that every row read is kept or rejected.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from roamstat.config import Config
from roamstat.errors import RoamstatError
from roamstat.geo import geodesic_inverse
from roamstat.io.read import read_inputs
from roamstat.screen import screen

RULES = Path(__file__).resolve().parent / "fixtures" / "read" / "screen"


def screened(name: str, **options):
    cfg = Config(**options)
    result = read_inputs([RULES / name], cfg)
    fixes, rejected = screen(result.rows, cfg)
    all_rejected = pd.concat([result.rejected, rejected], ignore_index=True)
    assert result.n_read == len(fixes) + len(all_rejected)  # nothing is lost
    return fixes, all_rejected


def rejected_lines(rejected: pd.DataFrame, code: str) -> list[int]:
    return sorted(int(r) for r in rejected.loc[rejected["reason_code"] == code, "source_row"])


@pytest.mark.parametrize("name, code, lines", [
    # Lines are physical line numbers in the fixture (header = line 1).
    ("bad_time.csv", "bad_time", [5, 6, 7]),  # 'not a time', empty, 30 February
    ("bad_coords.csv", "bad_coords", [5, 6, 7, 8]),  # empty, 'abc', 'nan', 'inf'
    ("lat_range.csv", "lat_range", [5, 6]),  # WGS84 latitude is in [-90, 90]
    ("lon_range.csv", "lon_range", [5, 6]),  # WGS84 longitude is in [-180, 180]
    ("null_island.csv", "null_island", [5, 6]),  # (0, 0): a common no-fix placeholder (common practice, no source)
    ("duplicate_row.csv", "duplicate_row", [6]),  # line 6 repeats line 4
])
def test_rules_that_are_on_by_default(name, code, lines):
    fixes, rejected = screened(name)
    assert rejected_lines(rejected, code) == lines
    assert len(rejected) == len(lines)  # nothing else in the calm track is touched
    assert len(fixes) == 8
    assert rejected["reason"].str.len().gt(0).all()


def test_duplicate_time_keeps_the_lower_dop_row_and_says_which():
    fixes, rejected = screened("duplicate_time.csv")
    # Line 5 (HDOP 4.0) and line 6 (HDOP 1.5) share 03:00; the lower DOP is the better fix
    # (DOP scales the position error: common practice, no source).
    assert rejected_lines(rejected, "duplicate_time") == [5]
    reason = rejected.loc[rejected["reason_code"] == "duplicate_time", "reason"].iloc[0]
    assert "6" in reason and "DOP" in reason
    kept = fixes[fixes["time"] == pd.Timestamp("2024-05-01T03:00:00Z")]
    assert list(kept["source_row"]) == [6]
    assert kept["dop"].iloc[0] == 1.5


def test_duplicate_time_without_dop_keeps_the_first(tmp_path):
    text = (RULES / "duplicate_time.csv").read_text().splitlines()
    no_dop = [",".join(line.split(",")[:4]) for line in text]
    path = tmp_path / "no_dop.csv"
    path.write_text("\n".join(no_dop) + "\n")
    cfg = Config()
    result = read_inputs([path], cfg)
    fixes, rejected = screen(result.rows, cfg)
    assert rejected_lines(rejected, "duplicate_time") == [6]
    assert "first" in rejected["reason"].iloc[0]


@pytest.mark.parametrize("name, code, option, lines", [
    ("high_dop.csv", "high_dop", {"max_dop": 5.0}, [4, 6, 9]),  # HDOP 12.5, 30, 5.01 > 5; 5.0 is kept
    ("fix_2d.csv", "fix_2d", {"require_3d": True}, [3, 5, 7]),  # '2D', '2d', '2'
    # Location classes ordered 3 > 2 > 1 > 0 > A > B > Z (common practice, no source): below 1 are 0, A, B, Z.
    ("low_quality.csv", "low_quality", {"min_quality": "1"}, [5, 6, 7, 8]),
    # Last fix is 55 km from the one before, one hour later: 15 m/s.
    ("too_fast.csv", "too_fast", {"max_speed": 5.0}, [10]),
])
def test_rules_switched_on_by_an_option(name, code, option, lines):
    fixes, rejected = screened(name)
    assert rejected_lines(rejected, code) == []  # off until set
    fixes, rejected = screened(name, **option)
    assert rejected_lines(rejected, code) == lines
    assert len(rejected) == len(lines)


def test_too_fast_fixture_speed_is_what_the_test_claims():
    # The speed is the geodesic distance (Karney 2013, via roamstat.geo) over one hour.
    dist, _ = geodesic_inverse(np.array([61.107]), np.array([10.4105]), np.array([61.6]), np.array([10.412]))
    assert 14 < dist[0] / 3600 < 16


def test_too_fast_judges_the_next_fix_against_the_last_kept_fix(tmp_path):
    lines = (RULES / "too_fast.csv").read_text().splitlines()
    # Put the far fix in the middle of the track: it is rejected, the fix after it is kept.
    lines.insert(5, "elk1,2024-05-01T03:30:00Z,61.6000,10.4120")
    path = tmp_path / "middle.csv"
    path.write_text("\n".join(lines[:-1]) + "\n")
    cfg = Config(max_speed=5.0, disabled_rules=("spike",))
    result = read_inputs([path], cfg)
    fixes, rejected = screen(result.rows, cfg)
    assert rejected_lines(rejected, "too_fast") == [6]
    assert len(fixes) == 8


def test_out_and_back_spike():
    # Bjørneraas et al. (2010): a fix reached fast, left fast, with a near-reversal is an error.
    # Line 6 lies 22 km north of a track moving 150 m per hour, visited for 30 min each way.
    fixes, rejected = screened("spike.csv")
    assert rejected_lines(rejected, "spike") == [6]
    assert len(rejected) == 1
    fixes, rejected = screened("spike.csv", disabled_rules=("spike",))
    assert len(rejected) == 0 and len(fixes) == 9


def test_a_one_way_move_is_not_a_spike():
    # The far fix at the end of too_fast.csv has no way back: Bjørneraas et al. (2010) need both legs.
    fixes, rejected = screened("too_fast.csv")
    assert len(rejected) == 0


def test_fixes_are_sorted_by_animal_and_time(tmp_path):
    lines = (RULES / "spike.csv").read_text().splitlines()
    header, body = lines[0], lines[1:]
    body = body[::-1] + [b.replace("elk1", "elk0") for b in body]
    path = tmp_path / "unsorted.csv"
    path.write_text("\n".join([header, *body]) + "\n")
    cfg = Config()
    result = read_inputs([path], cfg)
    fixes, rejected = screen(result.rows, cfg)
    assert list(fixes["animal_id"]) == ["elk0"] * 8 + ["elk1"] * 8
    for _, group in fixes.groupby("animal_id"):
        assert group["time"].is_monotonic_increasing
    assert len(rejected) == 2  # sorting is not a rejection; each animal's spike is


def test_rejected_table_has_the_contract_columns_and_original_values():
    fixes, rejected = screened("lat_range.csv")
    assert list(rejected.columns[:5]) == ["source_file", "source_row", "animal_id", "reason_code", "reason"]
    assert list(rejected["orig_lat"]) == ["91.5", "-90.01"]
    assert set(rejected["source_file"]) == {str(RULES / "lat_range.csv")}


def test_unknown_quality_class_is_a_user_error():
    with pytest.raises(RoamstatError, match="--min-quality"):
        screened("low_quality.csv", min_quality="Q")
