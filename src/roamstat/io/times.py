"""Fix times to timezone-aware UTC.

Accepted: ISO 8601 with or without an offset (offsets honoured, and they may
differ from row to row), a space instead of ``T``, hours without a leading
zero (``2005-10-31T0:35:05``), date-only values, Unix epoch seconds or
milliseconds, and what spreadsheets write (:mod:`roamstat.io.sheetdates`):
day-first or month-first dates with ``/``, ``.`` or ``-``, 12-hour clocks
with AM/PM, and serial day numbers in a column named like a date.  A
``--time-format`` strftime pattern overrides the detection.  Times without
an offset are read in the ``--tz`` zone.  Values that cannot be read become
NaT, and the screen rejects their rows with reason ``bad_time``.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
import pandas as pd

from roamstat.errors import RoamstatError
from roamstat.io.sheetdates import SERIAL, from_serial_days, is_date_name, looks_serial, parse_with_pattern, sheet_formats

_OFFSET = r"\d:\d{2}(?::\d{2}(?:[.,]\d+)?)?\s*(?:[Zz]|UTC|[+-]\d{2}(?::?\d{2})?)$"
# Epoch seconds between 1973 and 2096, or milliseconds over the same span.
_EPOCH_S = (1e8, 4e9)
_EPOCH_MS = (1e11, 4e12)


class TimeFormat(NamedTuple):
    """How a time column was read: words for ``inspect``, and the pattern (None for ISO 8601 and epoch)."""

    description: str
    pattern: str | None


def parse_times(values: pd.Series, tz: str, where: str, column: str = "",
                time_format: str | None = None) -> tuple[pd.Series, str, TimeFormat]:
    """Parse a column of time strings.

    Parameters
    ----------
    values : pandas.Series
        Raw time text (or a date + time-of-day text made by :func:`combine_date_time`).
    tz : str
        Zone of times without an offset.
    where : str
        File and column, for error messages.
    column : str
        Original column name: numbers are spreadsheet serial days only in a column named like a date.
    time_format : str, optional
        A strftime pattern, or ``"serial"`` for spreadsheet serial day numbers.

    Returns
    -------
    times : pandas.Series
        Timezone-aware UTC times, NaT where a value could not be read.
    tz_note : str
        How times without an offset were placed in time.
    time_format : TimeFormat
        Which format was read (printed by ``inspect``; the pattern lets a chunked read keep it).
    """
    text = values.astype("string").str.strip()
    present = text.notna() & (text != "")
    numeric = time_format is None and present.any() and _looks_numeric(text[present])
    numbers = pd.to_numeric(text, errors="coerce") if numeric or time_format == SERIAL else None
    if time_format == SERIAL or (numeric and is_date_name(column) and looks_serial(numbers)):
        naive = from_serial_days(numbers, where)
        return _localise(naive, tz), _naive_note(tz), TimeFormat("spreadsheet serial day numbers (1900 date system)", SERIAL)
    if numeric:
        return _epoch(text, present, where), "Unix epoch", TimeFormat("Unix epoch", None)
    if time_format is not None:
        return _with_formats(text, present, [time_format], tz), _naive_note(tz), TimeFormat(f"--time-format {time_format!r}", time_format)
    found = sheet_formats(text[present], where)
    if found is not None:
        described, formats = found
        return _with_formats(text, present, formats, tz), _naive_note(tz), TimeFormat(f"{described} ({formats[0]})", formats[0])
    out = pd.Series(pd.NaT, index=values.index, dtype="datetime64[ns, UTC]")
    naive_zone = str(tz).upper() not in ("UTC", "Z", "GMT", "ETC/UTC")
    has_offset = text.str.contains(_OFFSET, regex=True, na=False) if naive_zone else present
    if has_offset.any():
        # With --tz UTC a time without offset is UTC too, so one pass reads everything.
        out[has_offset] = _iso(text[has_offset], utc=True)
    naive = present & ~has_offset
    if naive.any():
        out[naive] = _localise(_iso(text[naive], utc=False), tz)
    if not naive_zone:
        # Most exports end every time with Z: a cheap test first, the full pattern only otherwise.
        zulu = bool(text[present].str.endswith("Z").all())
        naive_present = not zulu and bool((present & ~text.str.contains(_OFFSET, regex=True, na=False)).any())
        note = "times without offset read as UTC" if naive_present else "offsets in the data"
    else:
        note = "offsets in the data" if not naive.any() else f"times without offset read as {tz}"
    return out, note, TimeFormat("ISO 8601", None)


def _naive_note(tz: str) -> str:
    return f"times without offset read as {'UTC' if str(tz).upper() in ('UTC', 'Z', 'GMT', 'ETC/UTC') else tz}"


def _localise(naive: pd.Series, tz: str) -> pd.Series:
    """Naive wall-clock times in zone ``tz`` as UTC (times skipped or repeated by a clock change: NaT)."""
    try:
        return naive.dt.tz_localize(tz, ambiguous="NaT", nonexistent="NaT").dt.tz_convert("UTC")
    except Exception as exc:  # unknown zone name
        raise RoamstatError(f"--tz {tz!r} is not a time zone name (e.g. UTC, Europe/Oslo): {exc}") from None


def _with_formats(text: pd.Series, present: pd.Series, formats: list[str], tz: str) -> pd.Series:
    """Parse with explicit strftime patterns; rows the first misses are tried with the next (vectorised)."""
    out = pd.Series(pd.NaT, index=text.index, dtype="datetime64[ns, UTC]")
    todo = present.copy()
    for fmt in formats:
        if not todo.any():
            break
        parsed = parse_with_pattern(text[todo], fmt)
        if parsed.dt.tz is None:
            parsed = _localise(parsed.astype("datetime64[ns]"), tz)
        parsed = parsed.astype("datetime64[ns, UTC]")
        hit = parsed.notna()
        out[hit[hit].index] = parsed[hit]
        todo[hit[hit].index] = False
    return out


def combine_date_time(date: pd.Series, time_of_day: pd.Series) -> pd.Series:
    """Separate date and time-of-day columns as one ISO-like string column."""
    d = date.astype("string").str.strip()
    t = time_of_day.astype("string").str.strip().fillna("")
    return (d + "T" + t).where(t != "", d)


def _normalise(text: pd.Series) -> pd.Series:
    text = text.str.replace(r"^(\d{4}-\d{1,2}-\d{1,2})[ T](\d)(?=:)", r"\1T0\2", regex=True)
    text = text.str.replace(r"^(\d{4}-\d{1,2}-\d{1,2}) (?=\d)", r"\1T", regex=True)
    text = text.str.replace(r"^(\d{4})-(\d)(?=-)", r"\1-0\2", regex=True)
    text = text.str.replace(r"^(\d{4}-\d{2})-(\d)(?=\D|$)", r"\1-0\2", regex=True)
    text = text.str.replace(r"\s*UTC$", "Z", regex=True)
    return text.str.replace(r"\s+(?=[+-]\d{2}:?\d{2}$)", "", regex=True)


def _iso(text: pd.Series, utc: bool) -> pd.Series:
    parsed = pd.to_datetime(text, format="ISO8601", utc=utc, errors="coerce")
    failed = parsed.isna() & text.notna() & (text != "")
    if failed.any():
        # Irregular rows only (unpadded hours, a space before the offset, ...): normalise and retry.
        retry = pd.to_datetime(_normalise(text[failed]), format="ISO8601", utc=utc, errors="coerce")
        parsed = parsed.astype(retry.dtype) if len(parsed) and parsed.isna().all() else parsed
        parsed[failed] = retry
    # Years the nanosecond clock cannot hold (e.g. '-33.5' read as year -33) become NaT: bad_time.
    parsed = parsed.where((parsed.dt.year >= 1678) & (parsed.dt.year <= 2261))
    return parsed.astype("datetime64[ns, UTC]" if utc else "datetime64[ns]")


def _looks_numeric(text: pd.Series) -> bool:
    sample = text.head(2000)
    return bool(pd.to_numeric(sample, errors="coerce").notna().mean() > 0.95)


def _epoch(text: pd.Series, present: pd.Series, where: str) -> pd.Series:
    numbers = pd.to_numeric(text, errors="coerce")
    finite = numbers[present & numbers.notna()]
    lo, hi = float(finite.min()), float(finite.max())
    if _EPOCH_S[0] <= lo and hi <= _EPOCH_S[1]:
        unit = "s"
    elif _EPOCH_MS[0] <= lo and hi <= _EPOCH_MS[1]:
        unit = "ms"
    else:
        raise RoamstatError(
            f"{where}: times are plain numbers from {lo:g} to {hi:g}, which are neither Unix epoch seconds "
            "nor milliseconds of a plausible date; convert them to ISO 8601 (e.g. 2024-05-01T06:00:00Z)"
        )
    out = pd.to_datetime(numbers.where(np.isfinite(numbers)), unit=unit, utc=True, errors="coerce")
    return out.astype("datetime64[ns, UTC]")


_ZONE_FREE = {"offsets in the data", "Unix epoch"}  # ways of reading in which --tz plays no part


def unused_zone_note(tz: str, how_read: str) -> str:
    """A note when ``--tz`` names a zone that no time needed, else "".

    Parameters
    ----------
    tz : str
        The ``--tz`` option.
    how_read : str
        ``ReadResult.tz_note``: how the times were read ("; "-joined over files).
    """
    if str(tz).upper() in ("UTC", "Z", "GMT", "ETC/UTC") or not how_read or not set(how_read.split("; ")) <= _ZONE_FREE:
        return ""
    return (f"note: --tz {tz} changed nothing: every time in the input carries its own UTC offset "
            "(or is a Unix epoch time), and roamstat keeps those")
