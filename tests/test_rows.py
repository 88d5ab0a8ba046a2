"""Which rows each stage sees (roamstat.rows) on a resampled track built by hand.

Expectations follow from the definitions in DEVELOPERS.md (grid aligned to the epoch, observed
fixes kept, on-grid = grid rows plus observed fixes exactly on a grid time): common practice,
no source.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from roamstat import rows
from roamstat.config import Config
from roamstat.errors import RoamstatError
from roamstat.track import prepare_fixes

HOUR = pd.Timedelta(hours=1)


def _track() -> pd.DataFrame:
    start = pd.Timestamp("2025-04-01T00:00:00Z")
    # Observed at 00:00 (on the 2 h grid), 01:10, 03:50, 06:00 (on the grid), 08:20.
    times = [start, start + 70 * pd.Timedelta(minutes=1), start + 230 * pd.Timedelta(minutes=1),
             start + 6 * HOUR, start + 500 * pd.Timedelta(minutes=1)]
    return pd.DataFrame({"animal_id": "a", "time": times, "lat": 55.0 + 0.001 * np.arange(5),
                         "lon": -3.0 + 0.001 * np.arange(5), "source_file": "f.csv", "source_row": np.arange(2, 7)})


def test_views_of_a_resampled_track():
    fixes, _ = prepare_fixes(_track(), Config(resample="2h", max_gap="4h"))
    observed = rows.observed(fixes)
    analysed = rows.analysed(fixes)
    assert rows.n_observed(fixes) == 5 and list(observed["source_row"]) == [2, 3, 4, 5, 6]
    # Grid 00:00, 02:00, 04:00, 06:00, 08:00: two observed fixes on it, three interpolated rows.
    on_grid_h = (analysed["time"] - analysed["time"].iloc[0]) / HOUR
    assert list(on_grid_h) == [0, 2, 4, 6, 8]
    assert list(analysed["interpolated"]) == [False, True, True, False, True]
    located = rows.located(fixes)
    assert located.equals(observed.sort_values("time", kind="stable").reset_index(drop=True))


def test_without_flags_every_row_is_both():
    table = _track().assign(x_m=0.0, y_m=0.0)
    assert len(rows.observed(table)) == len(rows.analysed(table)) == len(rows.located(table)) == 5


def test_located_drops_unusable_positions_and_names_missing_columns():
    table = _track().assign(x_m=np.r_[0.0, np.nan, 1.0, 2.0, 3.0], y_m=0.0)
    assert len(rows.located(table)) == 4
    with pytest.raises(RoamstatError, match="x_m"):
        rows.located(_track())
