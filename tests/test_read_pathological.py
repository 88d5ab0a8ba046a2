"""Pathological files: huge lines refused within a memory bound, UTF-16 without a byte-order
mark, stray NUL bytes rejected by row, and no library warning on the terminal."""

from __future__ import annotations

import subprocess
import sys
import tracemalloc

import pandas as pd
import pytest

from roamstat.cli import main
from roamstat.config import Config
from roamstat.errors import RoamstatError
from roamstat.io.csvsniff import MAX_FIELDS, MAX_LINE_BYTES
from roamstat.io.read import read_inputs

HEADER = "animal_id,timestamp,lat,lon"


def _rows(n=12):
    return [f"a{i % 2},2024-05-01T{i:02d}:00:00Z,61.{i:05d},10.{i:05d}" for i in range(n)]


def test_a_10_mb_file_without_line_breaks_is_refused_within_a_memory_bound(tmp_path):
    path = tmp_path / "oneline.csv"
    path.write_bytes(b"x," * (5 << 20))  # 10 MiB, no line break
    tracemalloc.start()
    with pytest.raises(RoamstatError, match=r"line 1 is 10\.0 MiB long"):
        read_inputs([path], Config())
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    # Bound stated in io/csvsniff.py: a small multiple of the file size (here 10 MiB), not GBs.
    assert peak < 8 * (10 << 20)


def test_a_long_line_after_good_rows_is_named(tmp_path):
    path = tmp_path / "long.csv"
    path.write_text("\n".join([HEADER, *_rows(3), "a0," + "9" * (MAX_LINE_BYTES + 10), *_rows(2)]) + "\n")
    with pytest.raises(RoamstatError, match="line 5 is 1.0 MiB long"):
        read_inputs([path], Config())


def test_too_many_fields_are_refused(tmp_path):
    path = tmp_path / "wide.csv"
    path.write_text("\n".join([HEADER, *_rows(2), ",".join(["1"] * (MAX_FIELDS + 1))]) + "\n")
    with pytest.raises(RoamstatError, match=f"line 4 has {MAX_FIELDS + 1} fields"):
        read_inputs([path], Config())


@pytest.mark.parametrize("codec", ["utf-16-le", "utf-16-be"])
def test_utf16_without_bom_reads_like_utf8(tmp_path, codec):
    text = "\n".join([HEADER, *_rows(), "Åsa,2024-05-02T00:00:00Z,61.5,10.5"]) + "\n"
    (tmp_path / "u8.csv").write_text(text, encoding="utf-8")
    (tmp_path / "u16.csv").write_bytes(text.encode(codec))  # Python's codec writes no BOM for -le/-be
    plain = read_inputs([tmp_path / "u8.csv"], Config())
    wide = read_inputs([tmp_path / "u16.csv"], Config())
    cols = ["animal_id", "time", "lat", "lon", "source_row"]
    pd.testing.assert_frame_equal(plain.rows[cols], wide.rows[cols])
    assert any("zero bytes" in n for n in wide.files[0]["notes"])


def test_a_stray_nul_rejects_its_row_only(tmp_path, capsys):
    rows = _rows(12)
    rows[4] = rows[4].replace("a0", "a\x000")
    path = tmp_path / "nul.csv"
    path.write_bytes(("\n".join([HEADER, *rows]) + "\n").encode())
    result = read_inputs([path], Config())
    assert len(result.rows) == 11 and len(result.rejected) == 1
    bad = result.rejected.iloc[0]
    assert bad["reason_code"] == "nul_byte" and bad["source_row"] == 6 and bad["orig_animal_id"] == "a\x000"
    assert main(["steps", str(path), "--out", str(tmp_path / "o"), "--quiet"]) == 0


def test_many_nul_lines_are_refused_as_binary(tmp_path):
    path = tmp_path / "bin.csv"
    path.write_bytes(("\n".join([HEADER, *[r + "\x00" for r in _rows(12)]]) + "\n").encode())
    with pytest.raises(RoamstatError, match="NUL bytes on 12 of 14 lines"):
        read_inputs([path], Config())


NOISY = """
import logging, sys, warnings
import roamstat.inspect
def noisy(paths, cfg):
    warnings.warn("some library warning", UserWarning)
    logging.getLogger("matplotlib.font_manager").warning("findfont: Font family 'x' not found.")
    return "ok"
roamstat.inspect.inspect_text = noisy
from roamstat.cli import main
sys.exit(main(sys.argv[1:]))
"""


@pytest.mark.parametrize("debug", [False, True])
def test_library_warnings_reach_the_terminal_only_with_debug(tmp_path, debug):
    # A fresh interpreter: pytest itself would capture warnings and log records.
    args = [sys.executable, "-c", NOISY, *(["--debug"] if debug else []), "inspect", str(tmp_path / "any.csv")]
    done = subprocess.run(args, capture_output=True, text=True, check=True)
    assert done.stdout.strip() == "ok"
    assert ("some library warning" in done.stderr and "findfont" in done.stderr) == debug
    if not debug:
        assert done.stderr == ""
