"""Bytes of a delimited text file -> a table of raw strings with physical line numbers.

What is detected, and how:

* Encoding: UTF-8 (a byte-order mark is removed), UTF-16 with a byte-order
  mark or, without one, from its zero-byte pattern (ASCII text in UTF-16 has
  a zero in every other byte), else Latin-1 (ISO 8859-1) as a reported
  fallback.  A file where more than a tenth of the lines hold NUL bytes is
  refused as not text; a stray NUL rejects only its record (``nul_byte``).
* Size limits, checked on the bytes before any parsing so that a file with no
  line breaks is refused in a second rather than parsed into a huge table:
  a physical line longer than ``MAX_LINE_BYTES`` (1 MiB) or a record with
  more than ``MAX_FIELDS`` fields is refused, naming its line.  Memory while
  reading is then bounded by a small multiple of the file size.
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
MAX_LINE_BYTES = 1 << 20  # no collar export has a 1 MiB line (judgement, no source)
MAX_FIELDS = 5000  # columns per record (judgement, no source)
BINARY_NUL_LINES = 0.1  # more lines with NUL bytes than this fraction: not a text file (judgement, no source)
_UTF16_SAMPLE = 4096


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
    nul_rows: np.ndarray | None = None  # True for records that held a NUL byte (restored in ``values``)


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
            return _from_utf16(data[len(bom):], name, path, "byte-order mark")
    if b"\x00" in data:
        if guessed := _utf16_by_zeros(data):
            return _from_utf16(data, guessed, path, "no byte-order mark, recognised by its zero bytes")
        term, _ending = line_terminator(data)
        with_nul, n_lines = nul_lines(data, term).size, data.count(bytes([term])) + 1
        if with_nul > BINARY_NUL_LINES * n_lines:
            raise RoamstatError(f"{path} holds NUL bytes on {with_nul} of {n_lines} lines, so it is not a text "
                                "(CSV) file; export it from the spreadsheet or collar software as CSV")
    try:
        data.decode("utf-8")
    except UnicodeDecodeError as exc:
        return data, "latin-1", [f"not valid UTF-8 (byte {exc.start}); read as Latin-1 (ISO 8859-1): "
                                 "check accented names, or save the file as UTF-8"]
    return data, "utf-8", []


def _from_utf16(data: bytes, name: str, path: Path, how: str) -> tuple[bytes, str, list[str]]:
    try:
        text = data.decode(name)
    except UnicodeDecodeError as exc:
        raise RoamstatError(f"{path} looks like UTF-16 text but is not valid UTF-16 (byte {exc.start}); "
                            "save it again as UTF-8 CSV") from exc
    return text.encode("utf-8"), "utf-8", [f"{name.upper()} text ({how}) converted to UTF-8"]


def _utf16_by_zeros(data: bytes) -> str | None:
    """'utf-16-le' or 'utf-16-be' when the zeros fall on every other byte, as in mostly-ASCII UTF-16."""
    sample = np.frombuffer(data[: _UTF16_SAMPLE - _UTF16_SAMPLE % 2 if len(data) > _UTF16_SAMPLE else len(data) // 2 * 2],
                           dtype=np.uint8)
    if sample.size < 4:
        return None
    zero_even, zero_odd = (sample[0::2] == 0).mean(), (sample[1::2] == 0).mean()
    if zero_odd > 0.6 and zero_even < 0.05:
        return "utf-16-le"
    if zero_even > 0.6 and zero_odd < 0.05:
        return "utf-16-be"
    return None


def check_sizes(data: bytes, term: int, path: Path) -> None:
    """Refuse a line longer than MAX_LINE_BYTES before anything parses it."""
    ends = np.flatnonzero(np.frombuffer(data, dtype=np.uint8) == term)
    bounds = np.r_[-1, ends, len(data)]
    lengths = np.diff(bounds) - 1
    longest = int(np.argmax(lengths))
    if lengths[longest] > MAX_LINE_BYTES:
        size = lengths[longest] / (1 << 20)
        raise RoamstatError(f"{path} line {longest + 1} is {size:.1f} MiB long (the limit is "
                            f"{MAX_LINE_BYTES >> 20} MiB per line); this is not a table of fixes with one fix per line: "
                            "check the file's line endings or export it again as CSV")


def _hide_nuls(data: bytes, term: int) -> tuple[bytes, np.ndarray, bytes]:
    """NUL bytes replaced by a control byte absent from the file, the lines that held them, that byte."""
    if b"\x00" not in data:
        return data, np.array([], dtype=np.int64), b""
    stand_in = next((bytes([c]) for c in (*range(1, 9), *range(14, 32)) if bytes([c]) not in data), None)
    if stand_in is None:  # every control byte in use as well: binary
        raise ValueError("no free control byte")
    return data.replace(b"\x00", stand_in), nul_lines(data, term), stand_in


def nul_lines(data: bytes, term: int) -> np.ndarray:
    """The 1-based physical lines that hold NUL bytes."""
    arr = np.frombuffer(data, dtype=np.uint8)
    return np.unique(1 + np.searchsorted(np.flatnonzero(arr == term), np.flatnonzero(arr == 0)))


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
    starts: np.ndarray = np.r_[0, ends + 1]
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
    check_sizes(data, term, path)
    try:
        data, nul_at, stand_in = _hide_nuls(data, term)
    except ValueError:
        raise RoamstatError(f"{path} holds NUL bytes and every other control byte, so it is not a text (CSV) file; "
                            "export it from the spreadsheet or collar software as CSV") from None
    delim = sniff_delimiter(data, encoding, term)
    scan = scan_records(data, delim, term)
    width = int(scan.field_counts.max())
    if width > MAX_FIELDS:
        line = int(scan.line_numbers[int(np.argmax(scan.field_counts))])
        raise RoamstatError(f"{path} line {line} has {width} fields (the limit is {MAX_FIELDS}); check the delimiter "
                            "and the line endings, or export the fixes again as CSV")
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
    table = _split_header(frame, counts, line_numbers, encoding, delim, notes, path)
    if nul_at.size:
        _mark_nul_rows(table, nul_at, stand_in.decode("ascii"), path)
    return table


def _mark_nul_rows(table: RawTable, nul_lines: np.ndarray, stand_in: str, path: Path) -> None:
    """Flag the records that held NUL bytes and put the NULs back in their values."""
    if table.line_numbers.size == 0 or nul_lines.min() < table.line_numbers[0]:
        raise RoamstatError(f"{path}: the header line holds a NUL byte; fix or remove it and export the file again")
    record = np.searchsorted(table.line_numbers, nul_lines, side="right") - 1
    table.nul_rows = np.zeros(len(table.values), dtype=bool)
    table.nul_rows[record] = True
    for i in np.flatnonzero(table.nul_rows):
        table.values.iloc[i] = table.values.iloc[i].str.replace(stand_in, "\x00", regex=False)
        table.extra_fields.iloc[i] = table.extra_fields.iloc[i].replace(stand_in, "\x00")
    table.notes.append(f"{int(table.nul_rows.sum())} record(s) with NUL bytes rejected (nul_byte)")


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
