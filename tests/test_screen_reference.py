"""Screen checks against outside references: a geographiclib walk for too_fast; switches.

Distances in the reference walk come from geographiclib (Karney 2013), a geodesic library
independent of PROJ, which the screen uses.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from geographiclib.geodesic import Geodesic

from roamstat.config import Config, check_config
from roamstat.errors import RoamstatError
from roamstat.io.read import read_inputs
from roamstat.screen import screen


def screened(path, **options):
    cfg = Config(**options)
    result = read_inputs([path], cfg)
    fixes, rejected = screen(result.rows, cfg)
    assert len(result.rows) == len(fixes) + len(rejected)  # nothing lost
    return result, fixes, rejected


def reference_too_fast(track: pd.DataFrame, max_speed: float) -> list[int]:
    """Plain walk in time order: reject a fix when the speed from the last kept fix exceeds the limit."""
    rejected, last = [], None
    for _, row in track.iterrows():
        if last is not None:
            dist = Geodesic.WGS84.Inverse(last["lat"], last["lon"], row["lat"], row["lon"])["s12"]
            if dist / (row["time"] - last["time"]).total_seconds() > max_speed:
                rejected.append(int(row["source_row"]))
                continue
        last = row
    return rejected


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_too_fast_matches_a_sequential_reference_walk(tmp_path, seed):
    rng = np.random.default_rng(seed)
    text = ["animal_id,timestamp,lat,lon"]
    start = pd.Timestamp("2024-05-01T00:00:00Z")
    for animal in ("a", "b", "c"):
        n = 60
        lat = 61 + np.cumsum(rng.normal(0, 0.002, n))
        lon = 10 + np.cumsum(rng.normal(0, 0.004, n))
        wild = rng.random(n) < 0.15  # outliers, some in runs, tens of km off
        lat[wild] += rng.normal(0, 0.15, wild.sum())
        text += [f"{animal},{(start + pd.Timedelta(hours=i)).isoformat()},{lat[i]:.6f},{lon[i]:.6f}" for i in range(n)]
    path = tmp_path / "walk.csv"
    path.write_text("\n".join(text) + "\n")
    result, _, rejected = screened(path, max_speed=3.0, disabled_rules=("spike",))
    expected = []
    for _, track in result.rows.groupby("animal_id"):
        expected += reference_too_fast(track.sort_values("time"), 3.0)
    assert len(expected) > 3  # the case exercises the rule
    assert sorted(rejected.loc[rejected["reason_code"] == "too_fast", "source_row"]) == sorted(expected)


@pytest.mark.parametrize("code", ["bad_time", "bad_coords", "lat_range"])
def test_validity_rules_cannot_be_switched_off(code):
    # refused at the door (config.check_config), before any file is read
    with pytest.raises(RoamstatError, match=code):
        check_config(Config(disabled_rules=(code,)))


def test_lon_range_switched_off_wraps_0_360_longitudes(tmp_path):
    # 180.1 E in the 0-360 convention is 179.9 W (common practice, no source).
    path = tmp_path / "pacific.csv"
    path.write_text("animal_id,timestamp,lat,lon\na,2024-05-01T00:00:00Z,-20,179.9\n"
                    "a,2024-05-01T01:00:00Z,-20,180.1\n")
    _, _, rejected = screened(path)
    assert list(rejected["reason_code"]) == ["lon_range"]
    _, fixes, rejected = screened(path, disabled_rules=("lon_range",))
    assert len(rejected) == 0
    np.testing.assert_allclose(fixes["lon"], [179.9, -179.9])


def test_duplicate_row_names_the_first_copy(tmp_path):
    path = tmp_path / "dup_row.csv"
    row = "a,2024-05-01T00:00:00Z,61.1000,10.4000,x"
    path.write_text(f"animal_id,timestamp,lat,lon,note\n{row}\na,2024-05-01T01:00:00Z,61.101,10.4015,y\n{row}\n")
    _, _, rejected = screened(path)
    assert list(rejected["reason_code"]) == ["duplicate_row"] and list(rejected["source_row"]) == [4]
    assert "row 2 of" in rejected["reason"].iloc[0]
