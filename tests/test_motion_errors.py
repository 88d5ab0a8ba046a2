"""Resolution order of the location error: DOP x UERE, then quality class, then estimated."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from roamstat.errors import RoamstatError
from roamstat.motion import DEFAULT_CLASS_SD_M, location_error, read_class_table

# DOP x UERE is the usual GPS error model (Langley 1999, GPS World 10(5)); the order of
# preference (measured per-fix error first, class table next, estimate last) is common
# practice, no source.


def _fixes(**cols):
    return pd.DataFrame({"x_m": np.zeros(4), **cols})


def test_dop_times_uere_comes_first():
    err = location_error(_fixes(dop=[1.0, 2.0, 1.5, 4.0], quality=["3", "2", "1", "B"]), 5.0, None)
    assert err.source == "dop_uere"
    np.testing.assert_allclose(err.sd_m, [5.0, 10.0, 7.5, 20.0])


def test_missing_dop_takes_the_class_sd_then_the_median():
    err = location_error(_fixes(dop=[1.0, np.nan, 2.0, 3.0], quality=["3", "2", "1", "B"]), 5.0, None)
    np.testing.assert_allclose(err.sd_m, [5.0, DEFAULT_CLASS_SD_M["2"], 10.0, 15.0])
    err = location_error(_fixes(dop=[1.0, np.nan, 2.0, 3.0]), 5.0, None)
    np.testing.assert_allclose(err.sd_m, [5.0, 10.0, 10.0, 15.0])


def test_dop_without_uere_falls_through_to_classes():
    err = location_error(_fixes(dop=[1.0, 2.0, 1.5, 4.0], quality=["3", "2", None, "b"]), None, None)
    assert err.source == "quality_class"
    worst = max(DEFAULT_CLASS_SD_M.values())  # a fix without a class is taken as the worst class
    np.testing.assert_allclose(err.sd_m, [DEFAULT_CLASS_SD_M["3"], DEFAULT_CLASS_SD_M["2"], worst,
                                          DEFAULT_CLASS_SD_M["B"]])


def test_no_dop_and_no_class_means_estimated():
    for fixes in (_fixes(), _fixes(quality=[None] * 4), _fixes(dop=[np.nan] * 4)):
        err = location_error(fixes, 5.0, None)
        assert err.source == "estimated" and err.sd_m is None


def test_user_class_table_overrides_and_unknown_class_is_an_error(tmp_path):
    path = tmp_path / "classes.csv"
    path.write_text("class,sd_m\n3,100\nb,900\n\n")
    table = read_class_table(path)
    assert table == {"3": 100.0, "B": 900.0}
    err = location_error(_fixes(quality=["3", "B", "3", "B"]), None, table)
    np.testing.assert_allclose(err.sd_m, [100.0, 900.0, 100.0, 900.0])
    with pytest.raises(RoamstatError, match="location class.*2.*not in"):
        location_error(_fixes(quality=["3", "2", "3", "B"]), None, table)


@pytest.mark.parametrize("text, where", [("klass,sd\n3,1\n", "row 1"), ("class,sd_m\n3,abc\n", "row 2"),
                                         ("class,sd_m\n3,10\n2,-1\n", "row 3"), ("class,sd_m\n", "no rows")])
def test_bad_class_table_names_the_row(tmp_path, text, where):
    path = tmp_path / "bad.csv"
    path.write_text(text)
    with pytest.raises(RoamstatError, match=where):
        read_class_table(path)
