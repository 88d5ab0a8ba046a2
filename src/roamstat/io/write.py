"""Safe writers: atomic, spreadsheet-safe CSV, JSON and text.

Every output goes through :func:`atomic_write`, which writes a temporary file
in the destination folder and renames it into place, so an interrupted run
never leaves half a table behind.

Text cells that a spreadsheet would read as a formula (starting with ``=``,
``+``, ``-``, ``@``, a tab or a carriage return) are prefixed with a single
quote, following the OWASP guidance on CSV injection.  Only cells a
spreadsheet would evaluate are changed: numeric columns are never touched,
and a text cell that is a plain number (``-3.625001``, ``+12``, ``-1e-5``,
or ``-3,625001`` as decimal-comma locales write it) is a value, not a
formula, so it stays as it is.
"""

from __future__ import annotations

import json
import os
import re
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import BinaryIO, Literal

import numpy as np
import pandas as pd

_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
_UMASK = os.umask(0o022)
os.umask(_UMASK)
_FORMULA_PATTERN = r"^[=+\-@\t\r]"
_PLAIN_NUMBER = r"^[+-]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][+-]?\d+)?$"


def atomic_write(path: str | os.PathLike, data: str | bytes) -> Path:
    """Write ``data`` to ``path`` through a temporary file and a rename."""
    with atomic_file(path) as fh:
        fh.write(data if isinstance(data, bytes) else data.encode("utf-8"))
    return Path(path)


@contextmanager
def atomic_file(path: str | os.PathLike) -> Iterator[BinaryIO]:
    """A binary file handle whose content appears at ``path`` only when the block ends without error."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            yield fh
        os.chmod(tmp, 0o666 & ~_UMASK)  # mkstemp makes 0600; outputs are meant to be shared
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def neutralise_text(value):
    """Prefix a text cell that would start a spreadsheet formula with a quote."""
    if isinstance(value, str) and value.startswith(_FORMULA_START) and not re.match(_PLAIN_NUMBER, value):
        return "'" + value
    return value


def spreadsheet_safe(table: pd.DataFrame) -> pd.DataFrame:
    """A copy of ``table`` whose text cells cannot act as formulas (vectorised)."""
    out = table.copy()
    for name in out.columns:
        column = out[name]
        if pd.api.types.is_numeric_dtype(column) or pd.api.types.is_datetime64_any_dtype(column):
            continue
        text = column.astype("string")
        risky = (text.str.match(_FORMULA_PATTERN, na=False) & ~text.str.match(_PLAIN_NUMBER, na=False)).to_numpy(dtype=bool)
        if risky.any():
            column = column.astype(object)
            column[risky] = "'" + text[risky].astype(str)
            out[name] = column
    out.columns = [neutralise_text(str(c)) for c in out.columns]
    return out


def format_times(table: pd.DataFrame, units: dict | None = None) -> pd.DataFrame:
    """ISO 8601 with offset (+00:00) for every timezone-aware datetime column.

    Vectorised through numpy and Arrow; sub-second digits are written only
    where a column has them (``units``: each column's unit from
    :func:`time_units`, found from ``table`` itself when None).
    """
    import pyarrow as pa
    import pyarrow.compute as pc

    units = time_units(table) if units is None else units
    out = table.copy()
    for name, unit in units.items():
        utc = out[name].to_numpy(dtype="datetime64[ns]")  # tz-aware values convert as UTC
        text = pa.array(np.datetime_as_string(utc, unit=unit), mask=np.isnat(utc))
        out[name] = pd.Series(pd.arrays.ArrowStringArray(pc.binary_join_element_wise(text, "+00:00", "")),
                              index=out.index)
    return out


def time_units(table: pd.DataFrame) -> dict:
    """The unit each timezone-aware datetime column of ``table`` is written in (s, ms or us)."""
    return {name: _time_unit(table[name].to_numpy(dtype="datetime64[ns]"))
            for name in table.columns if isinstance(table[name].dtype, pd.DatetimeTZDtype)}


def _time_unit(values: np.ndarray) -> Literal["s", "ms", "us"]:
    finite = values[~np.isnat(values)].astype("datetime64[us]").astype(np.int64)
    if finite.size == 0 or not (finite % 1_000_000).any():
        return "s"
    return "ms" if not (finite % 1000).any() else "us"


def csv_bytes(table: pd.DataFrame, header: bool = True) -> bytes:
    """A table as UTF-8 CSV bytes, times in ISO 8601, formulas neutralised.

    Arrow's C++ writer does the formatting (several times faster than
    pandas on million-row tables): text is quoted, floats are written in the
    shortest form that reads back to the same number, booleans as
    ``true``/``false``.  The same table always gives the same bytes.
    """
    import pyarrow as pa

    sink = pa.BufferOutputStream()
    _write_arrow_csv(table, sink, header, time_units(table))
    return sink.getvalue().to_pybytes()


def _write_arrow_csv(table: pd.DataFrame, sink, header: bool, units: dict) -> None:
    """``table`` as CSV into ``sink`` (a file or Arrow stream), times in the given ``units``."""
    import pyarrow as pa
    import pyarrow.csv as pa_csv

    ready = spreadsheet_safe(format_times(table, units))
    for name in ready.columns:
        if ready[name].dtype == object:
            ready[name] = ready[name].astype("string")  # mixed Python objects as their text
    arrow = pa.Table.from_pandas(ready, preserve_index=False)
    pa_csv.write_csv(arrow, sink, pa_csv.WriteOptions(quoting_style="needed", include_header=header))


#: Rows formatted at a time by :func:`write_csv`.  Formatting makes several copies of what it formats
#: (times as text, the spreadsheet guard, Arrow's table and its CSV), so a 2,000,000-row table written
#: whole would briefly need about 1 GB more memory; in pieces it needs a tenth of that (judgement, no source).
CSV_CHUNK_ROWS = 200_000


def write_csv(table: pd.DataFrame, path: str | os.PathLike) -> Path:
    """Write a table as CSV (see :func:`csv_bytes`), atomically, ``CSV_CHUNK_ROWS`` rows at a time.

    The bytes are those of :func:`csv_bytes` of the whole table: each time
    column keeps one unit throughout, and only the first piece has the header.
    """
    units = time_units(table)
    with atomic_file(path) as fh:
        for start in range(0, max(len(table), 1), CSV_CHUNK_ROWS):
            _write_arrow_csv(table.iloc[start:start + CSV_CHUNK_ROWS], fh, start == 0, units)
    return Path(path)


class StreamingCsv:
    """A CSV table written in pieces, renamed into place only when complete."""

    def __init__(self, path: str | os.PathLike):
        self.path = Path(path)
        fd, self.tmp = tempfile.mkstemp(prefix=f".{self.path.name}.", suffix=".part", dir=self.path.parent)
        self.handle = os.fdopen(fd, "wb")
        self.columns: list | None = None

    def append(self, table: pd.DataFrame) -> None:
        if self.columns is None:
            self.columns = list(table.columns)
            self.handle.write(csv_bytes(table, header=True))
        elif len(table):
            self.handle.write(csv_bytes(table[self.columns], header=False))

    def close(self) -> Path:
        self.handle.close()
        os.chmod(self.tmp, 0o666 & ~_UMASK)
        os.replace(self.tmp, self.path)
        return self.path

    def abandon(self) -> None:
        self.handle.close()
        Path(self.tmp).unlink(missing_ok=True)


def write_json(obj, path: str | os.PathLike) -> Path:
    """Write JSON (sorted keys, two-space indent), atomically."""
    return atomic_write(path, json.dumps(obj, indent=2, sort_keys=True, default=_json_default) + "\n")


def _json_default(value):
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (np.floating,)):
        return float(value)
    if isinstance(value, (pd.Timestamp,)):
        return value.isoformat()
    if isinstance(value, Path):
        return str(value)
    raise TypeError(f"not JSON serialisable: {type(value).__name__}")
