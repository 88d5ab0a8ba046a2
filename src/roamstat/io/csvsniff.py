"""Bytes of a delimited text file -> a table of raw strings with physical line numbers.

What is detected, and how:

* Encoding: UTF-8 (a byte-order mark is removed), UTF-16 with a byte-order
  mark, else Latin-1 (ISO 8859-1) as a reported fallback.  A file with NUL
  bytes and no UTF-16 mark is refused as not text.
* Line endings: LF, CRLF or bare CR (the latter when the file has no LF).
* Delimiter: comma, semicolon or tab, whichever splits the header and the
  first lines into the same number (> 1) of fields most consistently.
* Quoted fields (RFC 4180 double quotes, ``""`` inside) may hold delimiters
  and line breaks.

The bulk of the file is parsed by ``pandas.read_csv`` (C engine, every value a
string).  Physical line numbers and field counts come from one vectorised
scan of the bytes: a line break or delimiter separates records or fields only
where an even number of quote characters precede it.  That scan agrees with
the CSV grammar only when every quote opens at the start of a field and closes
at its end; a file with stray quotes (``5'10"``) is read instead by Python's
``csv`` module, row by row, which tracks line numbers itself.
"""

from __future__ import annotations

import csv
import io
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from roamstat.errors import RoamstatError

DELIMITERS = (",", ";", "\t")
DELIMITER_NAMES = {",": "comma", ";": "semicolon", "\t": "tab"}
_QUOTE, _LF, _CR, _SPACE = 34, 10, 13, 32
_SAMPLE_LINES = 50


@dataclass
class RawTable:
    """One file as strings: the header, the records and where each record starts."""

    header: list[str]  # cleaned column names (unique, never empty)
    values: pd.DataFrame  # one column per header field, raw strings
    field_counts: np.ndarray  # fields found in each record
    line_numbers: np.ndarray  # 1-based physical line of each record's first line
    extra_fields: pd.Series  # fields beyond the header's, joined by the delimiter ("" if none)
    encoding: str
    delimiter: str
    notes: list[str] = field(default_factory=list)


def load_bytes(path: Path) -> bytes:
    """The file's bytes, or a one-line user error for a missing or unreadable path."""
    if not path.exists():
        raise RoamstatError(f"input file {path} does not exist; check the path")
    if path.is_dir():
        raise RoamstatError(f"input {path} is a folder, not a file; name the CSV or GPX files inside it")
    try:
        return path.read_bytes()
    except OSError as exc:
        raise RoamstatError(f"cannot read input file {path} ({exc.strerror}); check its permissions") from exc


def decode_plan(data: bytes, path: Path) -> tuple[bytes, str, list[str]]:
    """Bytes ready for parsing (UTF-8 or Latin-1), the encoding's name and notes."""
    if data.startswith(b"\xef\xbb\xbf"):
        return data[3:], "utf-8-sig", ["UTF-8 byte-order mark removed"]
    for bom, name in ((b"\xff\xfe", "utf-16-le"), (b"\xfe\xff", "utf-16-be")):
        if data.startswith(bom):
            try:
                text = data[len(bom):].decode(name)
            except UnicodeDecodeError as exc:
                raise RoamstatError(f"{path} starts like UTF-16 text but is not valid UTF-16 (byte {exc.start}); "
                                    "save it again as UTF-8 CSV") from exc
            return text.encode("utf-8"), "utf-8", [f"{name.upper()} text (byte-order mark) converted to UTF-8"]
    if b"\x00" in data:
        raise RoamstatError(f"{path} holds NUL bytes, so it is not a text (CSV) file; "
                            "export it from the spreadsheet or collar software as CSV")
    try:
        data.decode("utf-8")
    except UnicodeDecodeError as exc:
        return data, "latin-1", [f"not valid UTF-8 (byte {exc.start}); read as Latin-1 (ISO 8859-1): "
                                 "check accented names, or save the file as UTF-8"]
    return data, "utf-8", []


def line_terminator(data: bytes) -> tuple[int, str]:
    """The byte that ends lines and the name of the line-ending style."""
    if b"\n" in data:
        return _LF, "CRLF" if b"\r\n" in data else "LF"
    return (_CR, "CR") if b"\r" in data else (_LF, "LF")


def sniff_delimiter(data: bytes, encoding: str, term: int) -> str:
    """Comma, semicolon or tab: the one that splits the first lines most consistently."""
    head = data[: 1 << 16].decode(encoding, errors="replace")
    if term == _CR:
        head = head.replace("\r", "\n")
    lines = [line for line in head.splitlines() if line.strip()][:_SAMPLE_LINES]
    if len(lines) > 1 and len(head) == (1 << 16):
        lines = lines[:-1]  # the last sampled line may be cut short
    best, best_score = ",", (-1.0, 0)
    for delim in DELIMITERS:
        try:
            counts = [len(row) for row in csv.reader(lines, delimiter=delim)]
        except csv.Error:
            continue
        if not counts or counts[0] < 2:
            continue
        agree = sum(c == counts[0] for c in counts) / len(counts)
        score = (agree, counts[0])
        if score > best_score:
            best, best_score = delim, score
    return best


@dataclass
class _Scan:
    line_numbers: np.ndarray  # of every non-blank record, header included
    field_counts: np.ndarray
    embedded_breaks: int  # line breaks inside quoted fields
    well_formed: bool  # every quote opens/closes at a field boundary


def scan_records(data: bytes, delim: str, term: int) -> _Scan:
    """Record starts, physical line numbers and field counts from one pass over the bytes."""
    arr = np.frombuffer(data, dtype=np.uint8)
    breaks = np.flatnonzero(arr == term)
    d = ord(delim)
    delims = np.flatnonzero(arr == d)
    well_formed, embedded = True, 0
    if data.find(b'"') >= 0:
        quotes = np.flatnonzero(arr == _QUOTE)
        well_formed = _quotes_at_boundaries(arr, quotes, d)
        outside = (np.searchsorted(quotes, breaks) & 1) == 0
        embedded = int(breaks.size - outside.sum())
        ends = breaks[outside]
        delims = delims[(np.searchsorted(quotes, delims) & 1) == 0]
    else:
        ends = breaks
    starts = np.r_[0, ends + 1]
    ends = np.r_[ends, arr.size]
    if starts.size and starts[-1] >= arr.size:  # file ends with a line break
        starts, ends = starts[:-1], ends[:-1]
    line_numbers = 1 + np.searchsorted(breaks, starts)
    field_counts = 1 + np.searchsorted(delims, ends) - np.searchsorted(delims, starts)
    blank = _blank(arr, starts, ends, delim)
    return _Scan(line_numbers[~blank], field_counts[~blank], embedded, well_formed)


def _quotes_at_boundaries(arr: np.ndarray, quotes: np.ndarray, delim: int) -> bool:
    """True when each opening quote starts a field and each closing quote ends one."""
    boundary = np.array([delim, _LF, _CR, _QUOTE], dtype=np.uint8)
    opening, closing = quotes[0::2], quotes[1::2]
    if opening.size != closing.size:
        return False  # a quote left open at the end of the file
    before = opening - 1
    ok_open = (before < 0) | np.isin(arr[np.maximum(before, 0)], boundary)
    after = closing + 1
    ok_close = (after >= arr.size) | np.isin(arr[np.minimum(after, arr.size - 1)], boundary)
    return bool(ok_open.all() and ok_close.all())


def _blank(arr: np.ndarray, starts: np.ndarray, ends: np.ndarray, delim: str) -> np.ndarray:
    """Records pandas skips: empty, or only spaces (and tabs unless tab delimits)."""
    white = [_SPACE, _CR] + ([9] if delim != "\t" else [])
    length = ends - starts
    blank = length == 0
    lead = np.flatnonzero(~blank)
    lead = lead[np.isin(arr[starts[lead]], white)]
    for i in lead:  # records starting with white space only (rare)
        blank[i] = bool(np.isin(arr[starts[i]:ends[i]], white).all())
    return blank


def read_table(raw: bytes, path: Path) -> RawTable:
    """Parse one delimited text file's bytes into raw strings (see the module notes)."""
    if not raw.strip():
        raise RoamstatError(f"{path} is empty; give a file with a header line and data rows")
    data, encoding, notes = decode_plan(raw, path)
    if not data.strip():  # e.g. a byte-order mark and nothing else
        raise RoamstatError(f"{path} is empty; give a file with a header line and data rows")
    term, ending = line_terminator(data)
    if ending == "CR":
        notes.append("bare-CR line endings")
    delim = sniff_delimiter(data, encoding, term)
    scan = scan_records(data, delim, term)
    width = int(scan.field_counts.max())
    frame = None
    if scan.well_formed:
        frame = _read_fast(data, delim, encoding, width, path, term)
        if frame is not None and not _agrees(frame, scan):
            frame = None
    if frame is None:
        frame, line_numbers, counts = _read_slow(data, delim, encoding, path)
        notes.append("irregular quoting: read row by row")
    else:
        line_numbers, counts = scan.line_numbers, scan.field_counts
    if scan.embedded_breaks and frame is not None:
        notes.append("quoted fields with line breaks")
    return _split_header(frame, counts, line_numbers, encoding, delim, notes, path)


def _read_fast(data: bytes, delim: str, encoding: str, width: int, path: Path, term: int) -> pd.DataFrame | None:
    # Bare-CR files name their terminator: left to guess, the C parser drops the empty first
    # field of a record that follows a blank line (pandas 3.1).
    try:
        return pd.read_csv(
            io.BytesIO(data), sep=delim, header=None, names=range(width), dtype=str,
            keep_default_na=False, na_filter=False, engine="c", encoding=encoding,
            quotechar='"', doublequote=True, skip_blank_lines=True,
            lineterminator="\r" if term == _CR else None,
        )
    except pd.errors.ParserError:
        return None  # the scan and the parser disagree: take the careful path
    except UnicodeDecodeError as exc:
        raise RoamstatError(f"{path} cannot be decoded as {encoding} ({exc.reason}); save it as UTF-8 CSV") from exc


def _agrees(frame: pd.DataFrame, scan: _Scan) -> bool:
    if len(frame) != scan.line_numbers.size:
        return False
    if scan.embedded_breaks:
        found = sum(int(frame[c].str.count("\n|\r(?!\n)").sum()) for c in frame.columns)
        return found == scan.embedded_breaks
    return True


def _read_slow(data: bytes, delim: str, encoding: str, path: Path):
    text = data.decode(encoding)
    csv.field_size_limit(1 << 30)
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delim, quotechar='"', doublequote=True)
    rows, lines = [], []
    previous = 0
    try:
        for row in reader:
            first_line = previous + 1
            previous = reader.line_num
            if not row or (len(row) == 1 and not row[0].strip()):
                continue
            rows.append(row)
            lines.append(first_line)
    except csv.Error as exc:
        raise RoamstatError(f"{path} line {previous + 1}: {exc}; fix the quoting there") from exc
    if lines and text.count('"') % 2:
        _refuse_open_quote(text, lines[-1], delim, path)
    counts = np.array([len(r) for r in rows], dtype=np.int64)
    width = int(counts.max()) if counts.size else 1
    frame = pd.DataFrame([r + [""] * (width - len(r)) for r in rows], columns=range(width), dtype=str)
    return frame, np.array(lines, dtype=np.int64), counts


def _refuse_open_quote(text: str, last_start: int, delim: str, path: Path) -> None:
    """A quote never closed makes the lenient reader swallow the rest of the file into one value: refuse it."""
    tail = "\n".join(re.split(r"\r\n|\r|\n", text)[last_start - 1:])  # the line ends csv counts
    try:
        for _ in csv.reader(io.StringIO(tail, newline=""), delimiter=delim, quotechar='"', strict=True):
            pass
    except csv.Error as exc:
        if "unexpected end of data" in str(exc):
            raise RoamstatError(f"{path} line {last_start}: a quoted field opened in this record is never closed, "
                                "so the rest of the file would be read as one value; fix the quoting there") from None


def _split_header(frame, counts, line_numbers, encoding, delim, notes, path) -> RawTable:
    if len(frame) == 0:
        raise RoamstatError(f"{path} is empty; give a file with a header line and data rows")
    width_h = int(counts[0])
    header = clean_names([str(v) for v in frame.iloc[0, :width_h].tolist()])
    body = frame.iloc[1:].reset_index(drop=True)
    values = body.iloc[:, :width_h].copy()
    values.columns = header
    counts_b = np.asarray(counts[1:])
    extra = np.full(len(body), "", dtype=object)
    for i in np.flatnonzero(counts_b > width_h):  # rare malformed rows: keep what lies past the header
        extra[i] = delim.join(body.iloc[i, width_h:counts_b[i]].tolist())
    return RawTable(header=header, values=values, field_counts=counts_b,
                    line_numbers=np.asarray(line_numbers[1:]), extra_fields=pd.Series(extra, dtype=object),
                    encoding=encoding, delimiter=delim, notes=notes)


def clean_names(names: list[str]) -> list[str]:
    """Header names stripped, empty ones named by position, repeats numbered (``name_2``)."""
    out, seen = [], set()
    for i, name in enumerate(names):
        name = name.strip() or f"column_{i + 1}"
        candidate, n = name, 2
        while candidate.lower() in seen:
            candidate, n = f"{name}_{n}", n + 1
        seen.add(candidate.lower())
        out.append(candidate)
    return out
