"""Control and bidi-override characters from the data are escaped on the terminal and in the
report, and kept as read in the data tables."""

from __future__ import annotations

import pandas as pd

from roamstat.cli import main
from roamstat.report.html import esc
from roamstat.shown import shown

ESC_ID = "a\x1b]0;pwned\x07\x1b[31mred\u202etxt.exe\x9b"  # window title, colour, RLO, C1 CSI


def _file(tmp_path):
    rows = ["animal_id,timestamp,lat,lon"]
    rows += [f"{ESC_ID},2024-05-01T{h:02d}:00:00Z,61.{h:05d},10.{h:05d}" for h in range(12)]
    path = tmp_path / "ctl.csv"
    path.write_text("\n".join(rows) + "\n", encoding="utf-8")
    return path


def test_shown_escapes_controls_and_bidi_but_keeps_layout():
    # Bidi controls as listed in Unicode Standard Annex #9 sec. 2; C0/C1 ranges per ISO 6429.
    assert shown("a\x1b[31mb\x07") == "a\\x1b[31mb\\x07"
    assert shown("x\u202ey\u2066z\u200f") == "x\\u202ey\\u2066z\\u200f"
    assert shown("\x9b\x7f\r") == "\\x9b\\x7f\\x0d"
    assert shown("line 1\n\tline 2 ÅÆ 東") == "line 1\n\tline 2 ÅÆ 東"


def test_report_escape_shows_rlo_and_controls():
    assert esc("<b>\u202e\x1b") == "&lt;b&gt;\\u202e\\x1b"


def test_inspect_prints_no_raw_control_character(tmp_path, capsys):
    assert main(["inspect", str(_file(tmp_path))]) == 0
    out = capsys.readouterr().out
    assert "\x1b" not in out and "\x07" not in out and "\u202e" not in out and "\x9b" not in out
    assert "a\\x1b]0;pwned\\x07" in out


def test_tables_keep_values_as_read(tmp_path, capsys):
    out = tmp_path / "o"
    assert main(["steps", str(_file(tmp_path)), "--out", str(out), "--quiet"]) == 0
    err = capsys.readouterr().err
    assert "\x1b" not in err
    fixes = pd.read_csv(out / "fixes.csv", dtype=str, keep_default_na=False)
    assert set(fixes["animal_id"]) == {ESC_ID}


def test_error_line_escapes_the_file_name(tmp_path, capsys):
    assert main(["steps", str(tmp_path / "no\x1b[2Jfile.csv"), "--out", str(tmp_path / "o")]) == 2
    err = capsys.readouterr().err
    assert err.startswith("roamstat: error:") and "\x1b" not in err and "no\\x1b[2Jfile.csv" in err
