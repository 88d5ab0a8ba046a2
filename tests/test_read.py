"""Reading collar exports: dialects, encodings, line endings, columns, times, GPX, projected input.

Each fixture in tests/fixtures/read/ shows one file quirk.  Expected values
are the values written in the fixture, read the way the named standard or
reference library reads them; every fixture also checks that no row is lost
(rows read = rows kept + rows rejected).
"""

from __future__ import annotations

from datetime import datetime, timezone
from pathlib import Path
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from conftest import realdata
from roamstat.config import Config
from roamstat.errors import RoamstatError
from roamstat.io.read import read_inputs
from roamstat.screen import screen

FIXTURES = Path(__file__).resolve().parent / "fixtures" / "read" / "formats"
LAT = [61.1000, 61.1010, 61.1020, 61.1030, 61.1040]
LON = [10.4000, 10.4015, 10.4030, 10.4045, 10.4060]
HOURLY = pd.date_range("2024-05-01T00:00:00Z", periods=5, freq="h")


def read_screened(*names, **options):
    """Read and screen fixtures; check that every row read is kept or rejected."""
    paths = [FIXTURES / n if not Path(n).is_absolute() else Path(n) for n in names]
    result = read_inputs(paths, Config(**options))
    fixes, rejected = screen(result.rows, Config(**options))
    assert result.n_read == len(fixes) + len(rejected) + len(result.rejected)
    assert result.n_read == len(result.rows) + len(result.rejected)
    return result, fixes, rejected


def utc(text: str) -> pd.Timestamp:
    return pd.Timestamp(text).tz_convert("UTC")


# --- dialects ---------------------------------------------------------------------------------

@pytest.mark.parametrize("name, delimiter", [("delim_comma.csv", ","), ("delim_semicolon.csv", ";"),
                                             ("delim_tab.tsv", "\t")])
def test_delimiters_are_detected_and_decimal_commas_read(name, delimiter):
    # delim_semicolon.csv writes 61,1000 (decimal comma), the usual pairing with ';' in
    # locales that use the comma as decimal separator (common practice, no source).
    result, fixes, _ = read_screened(name)
    assert result.files[0]["delimiter"] == delimiter
    np.testing.assert_allclose(result.rows["lat"], LAT)
    np.testing.assert_allclose(result.rows["lon"], LON)
    assert len(fixes) == 5


def test_utf8_byte_order_mark_is_removed():
    # The UTF-8 BOM is EF BB BF (Unicode Standard, ch. 23.8); the first column name must not carry it.
    result, _, _ = read_screened("utf8_bom.csv")
    assert result.files[0]["columns"]["animal_id"] == "animal_id"
    assert list(result.rows["animal_id"].unique()) == ["elk1"]


def test_latin1_fallback_is_reported():
    # 'ø' is byte F8 in ISO 8859-1 and not valid UTF-8 on its own (RFC 3629).
    result, _, _ = read_screened("latin1.csv")
    assert result.files[0]["encoding"].lower().replace("-", "") in ("latin1", "iso88591")
    assert list(result.rows["animal_id"].unique()) == ["Bjørn"]
    assert any("latin" in note.lower() for note in result.files[0]["notes"])


@pytest.mark.parametrize("name", ["endings_lf.csv", "endings_crlf.csv", "endings_cr.csv"])
def test_line_endings_give_the_same_rows_and_line_numbers(name):
    # LF, CRLF (RFC 4180) and bare CR (classic Mac OS exports) are each one line end.
    result, _, _ = read_screened(name)
    assert list(result.rows["source_row"]) == [2, 3, 4, 5, 6]
    assert list(result.rows["time"]) == list(HOURLY)
    np.testing.assert_allclose(result.rows["lat"], LAT)


def test_quoted_fields_with_newlines_keep_physical_line_numbers():
    # RFC 4180 section 2.6: fields in double quotes may hold line breaks; "" is a quote.
    result, fixes, _ = read_screened("quoted_newlines.csv")
    # Records start on lines 2, 3, 5 (two lines), 8 (three lines) and 9.
    assert list(result.rows["source_row"]) == [2, 3, 5, 8, 9]
    notes = list(result.rows["orig_note"])
    assert notes[1] == "line one\nline two, with a comma"
    assert notes[2] == "three\nphysical\nlines"
    assert notes[3] == 'a "quoted" word'
    assert len(fixes) == 5


def test_extra_columns_pass_through_as_raw_strings():
    result, _, _ = read_screened("extra_columns.csv")
    rows = result.rows
    assert list(rows["orig_temperature_c"]) == ["-3.50", "0", "+2", "007", ""]
    assert list(rows["orig_activity"]) == ["12", "walk", "=1+1", " x ", "NA"]


# --- column detection ---------------------------------------------------------------------------

def test_case_insensitive_synonyms_and_quality_fields():
    result, _, _ = read_screened("synonyms_mixed_case.csv")
    cols = result.files[0]["columns"]
    assert cols["animal_id"] == "Individual"
    assert cols["lat"] == "LATITUDE" and cols["lon"] == "Longitude"
    assert cols["dop"] == "HDOP" and cols["n_sats"] == "Satellites" and cols["fix_type"] == "Fix Type"
    rows = result.rows
    np.testing.assert_allclose(rows["dop"], [1.2, 2.5, 0.9, 3.1, 1.0])
    np.testing.assert_allclose(rows["n_sats"], [7, 5, 9, 4, 8])
    assert list(rows["fix_type"]) == ["3d", "2d", "3d", "3d", "3d"]


def test_darwin_core_terms():
    # Darwin Core (TDWG, Wieczorek et al. 2012): organismID names the animal; occurrenceID is one
    # per record, so it must not be taken as the animal id.
    result, _, _ = read_screened("darwin_core.csv")
    cols = result.files[0]["columns"]
    assert cols["animal_id"] == "organismID"
    assert cols["lat"] == "decimalLatitude" and cols["lon"] == "decimalLongitude"
    assert "eventDate" in cols["time"]
    assert list(result.rows["animal_id"].unique()) == ["elk1"]
    assert list(result.rows["time"]) == list(HOURLY)


def test_separate_date_and_time_columns_are_combined():
    result, _, _ = read_screened("date_and_time_columns.csv")
    assert list(result.rows["time"]) == [utc(t) for t in ("2024-05-01T00:00:00Z", "2024-05-01T01:05:00Z",
                                                           "2024-05-01T02:10:00Z", "2024-05-01T13:15:00Z",
                                                           "2024-05-01T23:59:00Z")]


def test_no_id_column_is_one_animal_named_after_the_file():
    result, fixes, _ = read_screened("no_id.csv")
    assert list(fixes["animal_id"].unique()) == ["no_id"]


def test_several_files_are_concatenated_each_row_remembering_its_file():
    result, fixes, _ = read_screened("part_a.csv", "part_b.csv")
    assert result.n_read == 8
    by_file = result.rows.groupby("source_file")["animal_id"].agg(lambda s: sorted(set(s)))
    assert by_file[str(FIXTURES / "part_a.csv")] == ["elk1"]
    assert by_file[str(FIXTURES / "part_b.csv")] == ["elk2"]
    # part_b.csv lists its columns in another order; values must land in the right place.
    b = result.rows[result.rows["animal_id"] == "elk2"]
    np.testing.assert_allclose(b["lat"], LAT[:3])
    assert list(b["source_row"]) == [2, 3, 4]


def test_column_overrides():
    result, fixes, _ = read_screened("override_columns.csv", id_col="critter", time_col="when",
                                     lat_col="N", lon_col="E")
    np.testing.assert_allclose(result.rows["lat"], LAT)
    assert list(result.rows["time"]) == list(HOURLY)


@pytest.mark.parametrize("option", ["id_col", "time_col", "lat_col", "lon_col"])
def test_override_naming_a_missing_column_is_a_clear_error(option):
    base = dict(id_col="critter", time_col="when", lat_col="N", lon_col="E")
    with pytest.raises(RoamstatError) as err:
        overrides = {**base, option: "no_such_column"}
        read_inputs([FIXTURES / "override_columns.csv"], Config(**overrides))
    message = str(err.value)
    assert "no_such_column" in message and "override_columns.csv" in message
    assert "\n" not in message


# --- times ---------------------------------------------------------------------------------------

def test_iso8601_offsets_are_honoured_row_by_row():
    # ISO 8601 (and RFC 3339): local time minus offset gives UTC; +0530 is the basic format.
    result, _, _ = read_screened("iso_offsets.csv")
    assert list(result.rows["time"]) == [utc("2024-05-01T10:00:00Z"), utc("2024-05-01T11:00:00Z"),
                                         utc("2024-05-01T12:00:00Z"), utc("2024-05-01T13:00:00Z"),
                                         utc("2024-05-01T14:00:00Z")]
    assert str(result.rows["time"].dtype) == "datetime64[ns, UTC]"


def test_hours_without_leading_zero():
    # The RAATD Darwin Core export writes 2005-10-31T0:35:05 (README of ../shared/realdata).
    result, _, _ = read_screened("unpadded_hours.csv")
    assert list(result.rows["time"]) == [utc("2005-10-31T00:35:05Z"), utc("2005-10-31T01:09:12Z"),
                                         utc("2005-10-31T09:59:59Z"), utc("2005-10-31T10:00:00Z"),
                                         utc("2005-11-01T02:03:04Z")]


def test_date_only_values_are_midnight_utc():
    result, _, _ = read_screened("date_only.csv")
    assert list(result.rows["time"]) == list(pd.date_range("2024-05-01", periods=5, freq="D", tz="UTC"))


def test_unix_epoch_seconds():
    result, _, _ = read_screened("epoch_seconds.csv")
    # Reference: the standard library's POSIX-time conversion.
    expected = [pd.Timestamp(datetime.fromtimestamp(1714521600 + 3600 * i, tz=timezone.utc)) for i in range(5)]
    assert list(result.rows["time"]) == expected
    assert expected[0] == utc("2024-05-01T00:00:00Z")


def test_naive_times_take_the_tz_option():
    result, _, _ = read_screened("naive_local.csv", tz="Europe/Oslo")
    # Reference: the IANA time zone database through zoneinfo (CET in January, CEST in July).
    oslo = ZoneInfo("Europe/Oslo")
    local = [datetime(2024, 1, 15, 12), datetime(2024, 1, 15, 13), datetime(2024, 7, 15, 12),
             datetime(2024, 7, 15, 13), datetime(2024, 7, 15, 14)]
    expected = [pd.Timestamp(t.replace(tzinfo=oslo)).tz_convert("UTC") for t in local]
    assert list(result.rows["time"]) == expected
    assert "Europe/Oslo" in result.tz_note


def test_naive_times_default_to_utc_and_say_so():
    result, _, _ = read_screened("naive_local.csv")
    assert result.rows["time"].iloc[0] == utc("2024-01-15T12:00:00Z")
    assert "UTC" in result.tz_note


# --- GPX ---------------------------------------------------------------------------------------

def test_gpx_track_points():
    # GPX 1.1 (topografix.com/GPX/1/1): <trk> with <name>, <trkpt lat lon> and <time>, <hdop>, <sat>, <fix>.
    result, fixes, _ = read_screened("track.gpx")
    rows = result.rows
    assert list(rows["animal_id"]) == ["elk1", "elk1", "elk1", "elk2", "elk2"]
    np.testing.assert_allclose(rows["lat"], [61.1, 61.101, 61.102, -33.5, -33.6])
    assert list(rows["time"][3:]) == [utc("2024-04-30T14:00:00Z"), utc("2024-04-30T15:00:00Z")]
    np.testing.assert_allclose(rows["dop"][:2], [1.2, 3.5])
    np.testing.assert_allclose(rows["n_sats"][:2], [7, 4])
    assert list(rows["fix_type"][:2]) == ["3d", "2d"]
    assert np.isnan(rows["dop"].iloc[2])
    # source_row is the line of each <trkpt> tag in the file.
    lines = (FIXTURES / "track.gpx").read_text().splitlines()
    assert all("<trkpt" in lines[r - 1] for r in rows["source_row"])
    assert len(set(rows["source_row"])) == 5


def test_gpx_with_doctype_is_refused():
    # Entity declarations are the route to entity-expansion attacks (OWASP XXE prevention
    # cheat sheet); GPX 1.1 has no use for a DOCTYPE.
    with pytest.raises(RoamstatError, match="DOCTYPE"):
        read_inputs([FIXTURES / "doctype.gpx"], Config())


# --- projected input ----------------------------------------------------------------------------

def test_projected_input_is_inverse_projected():
    # UTM zone 33N (EPSG:32633): on the central meridian 15°E, easting is the false easting
    # 500 000 m and northing is k0 = 0.9996 times the meridian arc (UTM definition, common
    # practice, no source).  The fixture's second northing is 0.9996 x the WGS84 meridian arc
    # from the equator to 60°N, 6 654 072.819 m, from geographiclib (Karney 2013).
    from geographiclib.geodesic import Geodesic

    arc = Geodesic.WGS84.Inverse(0, 15, 60, 15)["s12"]
    assert 0.9996 * arc == pytest.approx(6651411.190, abs=1e-3)
    result, fixes, _ = read_screened("projected_utm33.csv", x_col="easting", y_col="northing", crs="EPSG:32633")
    rows = result.rows
    np.testing.assert_allclose(rows["lat"], [0.0, 60.0], atol=1e-7)
    np.testing.assert_allclose(rows["lon"], [15.0, 15.0], atol=1e-7)
    np.testing.assert_allclose(rows["x_in"], [500000.0, 500000.0])
    assert result.input_crs == "EPSG:32633"


def test_projected_input_needs_a_crs():
    with pytest.raises(RoamstatError, match="--crs"):
        read_inputs([FIXTURES / "projected_utm33.csv"], Config(x_col="easting", y_col="northing"))


# --- real data (open datasets beside the repository) ----------------------------------------------

def test_antarctic_darwin_core_file_reads_with_no_column_flags():
    path = realdata("antarctic_tracks_dwc.csv")
    result = read_inputs([path], Config())
    fixes, rejected = screen(result.rows, Config())
    assert result.n_read == len(fixes) + len(rejected) + len(result.rejected)
    # README of ../shared/realdata: 11,079 locations of 29 animals.
    assert result.n_read == 11079
    assert result.rows["animal_id"].nunique() == 29
    # README: hours are not zero-padded (2005-10-31T0:35:05); first row of the file.
    first = result.rows.iloc[0]
    assert first["time"] == utc("2005-10-31T00:35:05Z")
    assert result.rows["time"].notna().all()
    # README: location-quality classes inside dynamicProperties; the first rows carry Z, B, A.
    assert list(result.rows["quality"].iloc[:3]) == ["Z", "B", "A"]
    assert result.rows["quality"].notna().mean() > 0.99
    # README: near 66° S.
    assert -70 < result.rows["lat"].median() < -60


def test_carnivore_file_with_bare_cr_endings_reads_with_no_column_flags():
    path = realdata("carnivore_gps_cr_endings.csv")
    raw = path.read_bytes()
    assert b"\r" in raw and b"\n" not in raw  # README: bare carriage returns
    result = read_inputs([path], Config())
    fixes, rejected = screen(result.rows, Config())
    assert result.n_read == len(fixes) + len(rejected) + len(result.rejected)
    # README: 30 GPS fixes, with fix type and satellite count columns.
    assert result.n_read == 30
    cols = result.files[0]["columns"]
    assert cols["fix_type"] == "fix_type" and cols["n_sats"] == "satellites"
    # The cougar's rows carry fix type 3 and satellites 6, 4, 9, ...; the coyote rows leave both empty.
    cougar = result.rows[result.rows["animal_id"] == "F53"]
    assert len(cougar) == 10
    np.testing.assert_allclose(cougar["n_sats"].iloc[:3], [6, 4, 9])
    assert set(cougar["fix_type"]) == {"3d"}
    coyote = result.rows[result.rows["animal_id"] != "F53"]
    assert coyote["n_sats"].isna().all() and coyote["fix_type"].isna().all()
    # README: one cougar and coyote collars of which two tags share one coyote id: two deployments.
    assert sorted(result.rows["animal_id"].unique()) == ["F53", "IdCoy_P3_1/166560", "IdCoy_P3_1/166760"]
    assert list(result.rows["source_row"]) == list(range(2, 32))


# --- property: no row is ever lost --------------------------------------------------------------

GOOD_CELLS = {
    "id": st.sampled_from(["a", "b", "elk 7", "Bjørn", "=x", ""]),
    "time": st.sampled_from(["2024-05-01T00:00:00Z", "2024-05-01T0:30:00", "2024-05-01 01:00:00+02:00",
                             "2024-05-02", "not a time", "", "2024-13-01T00:00:00Z"]),
    "lat": st.sampled_from(["61.1", "61.2", "-33.5", "91", "0", "", "abc", "nan", "inf", "1e400"]),
    "lon": st.sampled_from(["10.4", "10.5", "151.2", "181", "0", "", "x", "-inf"]),
}


@st.composite
def messy_files(draw):
    """A messy CSV-like file and the number of records (non-blank lines or quoted spans) it holds."""
    delimiter = draw(st.sampled_from([",", ";", "\t"]))
    newline = draw(st.sampled_from(["\n", "\r\n", "\r"]))
    header = ["animal_id", "timestamp", "lat", "lon", "note"]
    lines, n_records = [delimiter.join(header)], 0
    for _ in range(draw(st.integers(1, 25))):
        kind = draw(st.sampled_from(["row", "row", "row", "short", "long", "header", "blank", "quoted"]))
        cells = [draw(GOOD_CELLS[k]) for k in ("id", "time", "lat", "lon")] + ["n"]
        if delimiter != ",":
            cells[2] = cells[2].replace(".", ",") if draw(st.booleans()) else cells[2]
        if kind == "blank":
            lines.append("")
            continue
        n_records += 1
        if kind == "short":
            cells = cells[:3]
        elif kind == "long":
            cells = cells + ["x", "y"]
        elif kind == "header":
            cells = header
        elif kind == "quoted":
            cells[4] = '"two' + newline + 'lines, ""quoted"""'
        lines.append(delimiter.join(cells))
    text = newline.join(lines) + newline
    prefix = draw(st.sampled_from([b"", b"\xef\xbb\xbf"]))
    encoding = draw(st.sampled_from(["utf-8", "latin-1"]))
    return prefix + text.encode(encoding), n_records


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(messy_files())
def test_messy_files_keep_every_row(tmp_path, case):
    data, n_records = case
    path = tmp_path / "messy.csv"
    path.write_bytes(data)
    try:
        result = read_inputs([path], Config())
    except RoamstatError as exc:
        assert str(path) in str(exc) and "\n" not in str(exc)
        return
    fixes, rejected = screen(result.rows, Config())
    assert result.n_read == n_records
    assert result.n_read == len(fixes) + len(rejected) + len(result.rejected)
    lines_seen = sorted([*result.rows["source_row"], *result.rejected["source_row"]])
    assert len(set(lines_seen)) == n_records
