"""Dates as spreadsheets write them: which strftime pattern reads a column.

Spreadsheet programs save dates in the order of the user's locale: day first
(``01.04.2025 00:00:50``, ``01/04/2025 00:00``), month first
(``4/1/2025 1:05:00 PM``), with ``/``, ``.`` or ``-`` between the parts, two-
or four-digit years, 24-hour or 12-hour clocks.  Which of day or month comes
first is decided by the data: a first field above 12 somewhere means day
first, a second field above 12 means month first.  When neither happens the
column is ambiguous and the reader stops with both readings of two example
values, and the ``--time-format`` patterns that settle it.

Serial day numbers (the 1900 date system of spreadsheets, common practice, no
source): day 1 is 1900-01-01, and day 60 is 29 February 1900, a date that
never existed, kept for compatibility with early spreadsheets; so from day 61
on, day ``n`` is ``n`` days after 1899-12-30, and before it ``n`` days after
1899-12-31.  Day 60 itself has no real date and becomes NaT (``bad_time``).
The fraction is the time of day.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd

from roamstat.errors import RoamstatError

SERIAL = "serial"  # --time-format value for serial day numbers
_SERIAL_RANGE = (1.0, 2958466.0)  # 1900-01-01 to 9999-12-31 inclusive
_SHEET = re.compile(
    r"^(?P<a>\d{1,4})(?P<sep>[/.\-])(?P<b>\d{1,2})(?P=sep)(?P<c>\d{1,4})"
    r"(?:(?P<join>[ T]+)\d{1,2}:\d{2}(?P<sec>:\d{2})?(?P<frac>\.\d+)?(?P<ampm>\s*[AaPp][Mm])?)?$"
)
_LEAD = r"^(\d{1,2})[/.\-](\d{1,2})[/.\-]"


def is_date_name(column: str) -> bool:
    """Whether a column name says it holds dates or times (so numbers in it may be serial days)."""
    name = re.sub(r"[^0-9a-z]", "", str(column).lower())
    return any(word in name for word in ("date", "time", "day"))


def looks_serial(numbers: pd.Series) -> bool:
    """Whether every number could be a serial day (epoch seconds and milliseconds are far larger)."""
    finite = numbers[np.isfinite(numbers)]
    return bool(len(finite)) and finite.min() >= _SERIAL_RANGE[0] and finite.max() < _SERIAL_RANGE[1]


def from_serial_days(days: pd.Series, where: str) -> pd.Series:
    """Naive times from spreadsheet serial day numbers of the 1900 date system (see module notes)."""
    finite = days[np.isfinite(days)]
    if len(finite) and (finite.min() < _SERIAL_RANGE[0] or finite.max() >= _SERIAL_RANGE[1]):
        raise RoamstatError(
            f"{where}: numbers from {finite.min():g} to {finite.max():g} are not spreadsheet serial days "
            "(1 = 1900-01-01); save the column as dates or give --time-format"
        )
    value = days.to_numpy(dtype=float)
    origin = np.where(value >= 61, np.datetime64("1899-12-30", "ms"), np.datetime64("1899-12-31", "ms"))
    with np.errstate(invalid="ignore"):
        ms = np.round(value * 86_400_000.0)  # spreadsheets keep times to the millisecond
        bad = ~np.isfinite(value) | ((value >= 60) & (value < 61))
        out = origin + np.where(bad, 0, ms).astype(np.int64).astype("timedelta64[ms]")
    out = out.astype("datetime64[ns]")
    out[bad] = np.datetime64("NaT")
    return pd.Series(out, index=days.index)


def sheet_formats(text: pd.Series, where: str) -> tuple[str, list[str]] | None:
    """How to read a column of spreadsheet dates, or None when it is not one (ISO 8601 is read elsewhere).

    Returns a description (``"day-first dates"`` ...) and the strftime patterns to try in turn: the
    one the first value has, then its siblings (other separators, with or without seconds), for rows
    saved differently.
    """
    first = text.head(2000)
    shape = first.str.extract(_SHEET.pattern).dropna(subset=["a"])
    if shape.empty:
        return None
    row = shape.iloc[0]
    if len(row["a"]) == 4:  # year first: ISO 8601 unless the clock is 12-hour
        if pd.isna(row["ampm"]):
            return None
        return "year-first dates with a 12-hour clock", _variants("%Y{s}%m{s}%d", row)
    if len(row["c"]) not in (2, 4):
        return None
    year = "%Y" if len(row["c"]) == 4 else "%y"
    readings = {order: _variants(f"{order_fmt}{year}", row) for order, order_fmt in
                (("day", "%d{s}%m{s}"), ("month", "%m{s}%d{s}"))}
    order = _day_or_month(text, where, readings["day"][0], readings["month"][0])
    clock = "" if pd.isna(row["join"]) else (" with a 12-hour clock" if not pd.isna(row["ampm"]) else "")
    return f"{order}-first dates{clock}", readings[order]


def parse_with_pattern(text: pd.Series, fmt: str) -> pd.Series:
    """Naive times read with one strftime pattern (tz-aware UTC when it has ``%z``); NaT where it fails.

    Patterns that start with a separated date (``%d.%m.%Y ...``) go through Arrow's C parser, about
    30 times faster than pandas on a million rows.  That parser rolls impossible dates over
    (31.02 becomes 3 March), so each result's month is checked against the month written in the
    text, and rows that fail either way are read again by pandas, which refuses such dates.
    """
    month_field = _month_field(fmt)
    if month_field is None or not len(text):
        return _strict(text, fmt)
    import pyarrow as pa
    import pyarrow.compute as pc

    arrow = pa.array(text.astype("string[pyarrow]").array)
    fast = pc.strptime(arrow, format=fmt, unit="s", error_is_null=True)
    written = pc.extract_regex(arrow, r"^(?:\d{1,4}[/.\-]){%d}(?P<m>\d{1,2})" % month_field).field("m")
    good = pc.equal(pc.month(fast), pc.cast(written, pa.int64())).fill_null(False).to_numpy(zero_copy_only=False)
    out = pd.Series(fast.to_numpy(zero_copy_only=False).astype("datetime64[ns]"), index=text.index)
    if not good.all():
        out[~good] = _strict(text[~good], fmt).to_numpy()
    return out


def _strict(text: pd.Series, fmt: str) -> pd.Series:
    return pd.to_datetime(text, format=fmt, errors="coerce", utc="%z" in fmt or "%Z" in fmt)


def _month_field(fmt: str) -> int | None:
    """Position (0-2) of the month among separated date fields at the start of ``fmt``; None otherwise."""
    match = re.match(r"^(%[dmYy])([/.\-])(%[dmYy])\2(%[dmYy])(?=$|[ T])", fmt)
    if match is None or any(d in fmt for d in ("%z", "%Z", "%f")):
        return None
    fields = [match.group(1), match.group(3), match.group(4)]
    return fields.index("%m") if "%m" in fields else None


def _variants(date: str, row) -> list[str]:
    """The pattern of ``row`` first, then the same date with the other clock layouts."""
    sep = row["sep"]
    date = date.format(s=sep)
    twelve = not pd.isna(row["ampm"])
    hour = "%I" if twelve else "%H"
    suffixes = [" %p", "%p"] if twelve else [""]
    joins = [" ", "T"]
    clocks = [f"{hour}:%M", f"{hour}:%M:%S", f"{hour}:%M:%S.%f"]
    first_join = "T" if isinstance(row["join"], str) and "T" in row["join"] else " "
    first_clock = clocks[1 if isinstance(row["sec"], str) else 0] if pd.isna(row["frac"]) else clocks[2]
    first_suffix = (" %p" if row["ampm"][:1].isspace() else "%p") if twelve else ""
    primary = date if pd.isna(row["join"]) else f"{date}{first_join}{first_clock}{first_suffix}"
    others = [f"{date}{j}{c}{s}" for j in joins for c in clocks for s in suffixes] + [date]
    return [primary] + [f for f in others if f != primary]


def _day_or_month(text: pd.Series, where: str, day_pattern: str, month_pattern: str) -> str:
    """'day' or 'month': which comes first, decided by a field above 12 (distinct leading parts only)."""
    lead = pd.Series(text.str.slice(0, 6).unique()).str.extract(_LEAD).dropna().astype(int)
    day_first = bool((lead[0] > 12).any())
    month_first = bool((lead[1] > 12).any())
    if day_first and month_first:
        raise RoamstatError(f"{where}: some dates have a first part above 12 and others a second part above 12, "
                            "so neither day-first nor month-first reads them all; save the column in one date "
                            "order or give --time-format")
    if day_first or (not month_first and (lead[0] == lead[1]).all()):
        return "day"  # all equal: both readings agree
    if month_first:
        return "month"
    examples = text[text.str.match(_LEAD, na=False)]
    examples = examples[examples.str.extract(_LEAD).astype(int).pipe(lambda d: d[0] != d[1])].head(2).tolist()
    readings = "; ".join(f"{v!r} is {_reading(v, 'day')} read day-first, {_reading(v, 'month')} month-first"
                         for v in examples)
    raise RoamstatError(
        f"{where}: no day or month above 12 settles the date order: {readings}; give "
        f"--time-format '{day_pattern}' (day first) or --time-format '{month_pattern}' (month first)"
    )


def _reading(value: str, order: str) -> str:
    found = re.match(r"^(\d{1,2})[/.\-](\d{1,2})[/.\-](\d{2,4})?", value)
    assert found is not None, "callers pass only values matching _LEAD"
    a, b, year = found.groups()
    day, month = (int(a), int(b)) if order == "day" else (int(b), int(a))
    months = ["January", "February", "March", "April", "May", "June", "July", "August", "September", "October",
              "November", "December"]
    return f"{day} {months[month - 1]} {year}" if year else f"{day} {months[month - 1]}"
