"""A table written in pieces is byte for byte the table written whole (issue 18, memory bound)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from roamstat.io import write
from roamstat.io.write import csv_bytes, write_csv


def _mixed_table(n: int) -> pd.DataFrame:
    rng = np.random.default_rng(3)
    times = pd.Timestamp("2025-01-01", tz="UTC") + pd.to_timedelta(np.arange(n) * 3600, unit="s")
    times = times.where(np.arange(n) != n - 2, times[n - 2] + pd.Timedelta(milliseconds=250))  # sub-second only late
    times = times.where(np.arange(n) != 3, pd.NaT)
    text = np.array(["plain", "=SUM(A1)", "-3,625001", None, "é, \"quoted\""], dtype=object)[np.arange(n) % 5]
    return pd.DataFrame({"time": times, "x_m": rng.normal(size=n), "count": pd.array(np.arange(n), dtype="Int64"),
                         "flag": np.arange(n) % 3 == 0, "note": text,
                         "mixed": np.array([1, "a", 2.5, None], dtype=object)[np.arange(n) % 4],
                         "kind": pd.Categorical(np.array(["a", "b"])[np.arange(n) % 2])})


def test_a_table_written_in_pieces_has_the_bytes_of_the_whole(tmp_path, monkeypatch):
    table = _mixed_table(23)
    monkeypatch.setattr(write, "CSV_CHUNK_ROWS", 5)
    path = write_csv(table, tmp_path / "t.csv")
    data = path.read_bytes()
    assert data == csv_bytes(table)
    # one header, every row, and the late sub-second time sets the unit of the whole column
    # (the writer's own rule: sub-second digits where a column has them; common practice, no source)
    lines = data.decode().splitlines()
    assert lines[0].startswith('"time",') and sum(line.startswith('"time",') for line in lines) == 1
    assert len(pd.read_csv(path)) == len(table)
    assert lines[1].startswith("\"2025-01-01T00:00:00.000+00:00\"")


def test_an_empty_table_is_its_header(tmp_path, monkeypatch):
    monkeypatch.setattr(write, "CSV_CHUNK_ROWS", 5)
    table = _mixed_table(6).iloc[0:0]
    assert write_csv(table, tmp_path / "e.csv").read_bytes() == csv_bytes(table)
    assert (tmp_path / "e.csv").read_text().count("\n") == 1


def test_a_failed_piece_leaves_no_file(tmp_path, monkeypatch):
    monkeypatch.setattr(write, "CSV_CHUNK_ROWS", 5)
    calls = []

    def failing(table, sink, header, units):
        calls.append(len(table))
        if len(calls) == 3:
            raise OSError(28, "No space left on device")
        sink.write(b"x\n")

    monkeypatch.setattr(write, "_write_arrow_csv", failing)
    with pytest.raises(OSError, match="No space"):
        write_csv(_mixed_table(23), tmp_path / "t.csv")
    assert calls == [5, 5, 5] and list(tmp_path.iterdir()) == []
