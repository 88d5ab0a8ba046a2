"""Delimited text in any common dialect, with the line number of every record.

Handles UTF-8 with or without a byte-order mark, a Latin-1 fallback (reported),
LF, CRLF and bare-CR line endings, comma / semicolon / tab delimiters, and
quoted fields with embedded newlines.  Records whose field count differs from
the header's, and repeated header rows, are returned separately so the caller
can reject them with a reason instead of losing them.
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from roamstat.errors import RoamstatError

DELIMITERS = (",", ";", "\t")


@dataclass
class DelimitedText:
    header: list[str]
    table: pd.DataFrame  # records with the header's field count, every value a string
    lines: np.ndarray  # 1-based physical line where each record starts
    bad_count: list[tuple[int, list[str]]] = field(default_factory=list)  # (line, fields)
    repeated_header: list[tuple[int, list[str]]] = field(default_factory=list)
    encoding: str = "utf-8"
    delimiter: str = ","
    notes: list[str] = field(default_factory=list)


def decode(data: bytes, path: str) -> tuple[str, str, list[str]]:
    """Bytes to text: UTF-8 (BOM stripped) or, failing that, Latin-1 with a note."""
    if b"\x00" in data[:65536]:
        raise RoamstatError(f"{path}: this is a binary file, not delimited text; export the fixes as CSV or GPX")
    if data.startswith(b"\xef\xbb\xbf"):
        data = data[3:]
    try:
        return data.decode("utf-8"), "utf-8", []
    except UnicodeDecodeError as exc:
        at = exc.start
    text = data.decode("latin-1")
    printable = sum(ch.isprintable() or ch in "\r\n\t" for ch in text[:65536]) / max(1, min(len(text), 65536))
    if printable < 0.95:
        raise RoamstatError(f"{path}: cannot decode the file as text (not UTF-8 at byte {at}, and not Latin-1 text); "
                            "save it as UTF-8 CSV")
    return text, "latin-1", [f"not valid UTF-8 (byte {at}); read as Latin-1 — check accented names"]


def sniff_delimiter(first_line: str) -> str:
    """The delimiter that splits the header into the most fields, ignoring quoted text."""
    counts = {}
    for delim in DELIMITERS:
        try:
            counts[delim] = len(next(csv.reader([first_line], delimiter=delim)))
        except (StopIteration, csv.Error):
            counts[delim] = 1
    return max(DELIMITERS, key=lambda d: (counts[d], -DELIMITERS.index(d)))


def read_delimited(data: bytes, path: str) -> DelimitedText:
    """Parse delimited bytes: pandas' C parser for plain files, the csv module when fields are quoted."""
    text, encoding, notes = decode(data, path)
    if "\r" in text:
        text = text.replace("\r\n", "\n").replace("\r", "\n")  # CRLF and bare CR count as one line end
    first = next((line for line in text.split("\n", 50) if line.strip()), "")
    if not first.strip():
        raise RoamstatError(f"{path}: the file is empty; export the fixes with a header row and data rows")
    delimiter = sniff_delimiter(first)
    parsed = (_read_plain(text, delimiter) if '"' not in text else None) or _read_quoted(text, delimiter, path)
    header, table, lines, bad, repeats = parsed
    if len(set(header)) != len(header):
        header = _unique(header)
        notes.append("repeated column names were numbered")
    table.columns = header
    return DelimitedText(header, table, lines, bad, repeats, encoding, delimiter, notes)


def _read_plain(text: str, delimiter: str):
    """Fast path for unquoted text: one record per line, field counts checked with numpy."""
    raw = np.frombuffer(text.encode("utf-8"), dtype=np.uint8)
    ends = np.flatnonzero(raw == 10)
    if len(raw) and raw[-1] != 10:
        ends = np.append(ends, len(raw))
    starts = np.concatenate(([0], ends[:-1] + 1))
    delims = np.flatnonzero(raw == ord(delimiter))
    fields = np.searchsorted(delims, ends) - np.searchsorted(delims, starts) + 1
    blank = (ends - starts) == 0
    nonblank = np.flatnonzero(~blank)
    head = nonblank[0]
    header = [h.strip() for h in text[starts[head]:ends[head]].split(delimiter)]
    body = nonblank[1:]
    mismatch = body[fields[body] != len(header)]
    bad, fixable = [], False
    for i in mismatch:
        line = text[starts[i]:ends[i]]
        values = line.split(delimiter)
        if not line.strip():
            blank[i] = True
        elif len(values) > len(header) and not any(v.strip() for v in values[len(header):]):
            fixable = True
        else:
            bad.append((int(i) + 1, values))
    if fixable:
        return None  # trailing empty fields: let the general reader trim them
    good = body[~np.isin(body, [b[0] - 1 for b in bad]) & ~blank[body]]
    source = text if len(good) == len(body) else "\n".join(text[starts[i]:ends[i]] for i in good)
    if len(good) != len(body):
        source = text[starts[head]:ends[head]] + "\n" + source
    elif head:
        source = text[starts[head]:]
    table = pd.read_csv(io.StringIO(source), sep=delimiter, dtype=str, keep_default_na=False, na_filter=False,
                        quoting=csv.QUOTE_NONE, engine="c", header=0, skip_blank_lines=True)
    if len(table) != len(good):
        return None
    table.columns = range(len(header))
    lines = good + 1
    repeat = _header_rows(table, header)
    repeats = [(int(lines[i]), table.iloc[i].tolist()) for i in np.flatnonzero(repeat)]
    return header, table[~repeat].reset_index(drop=True), lines[~repeat], bad, repeats


def _read_quoted(text: str, delimiter: str, path: str):
    """General path: the csv module, which follows quoted fields across lines."""
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter, strict=False)
    header: list[str] | None = None
    records, lines, bad = [], [], []
    last_line = 0
    try:
        for row in reader:
            start, last_line = last_line + 1, reader.line_num
            if not row or (len(row) == 1 and not row[0].strip()):
                continue  # blank line: not a record
            if header is None:
                header = [h.strip() for h in row]
                continue
            if len(row) > len(header) and not any(v.strip() for v in row[len(header):]):
                row = row[: len(header)]  # trailing empty fields, a common export quirk
            if len(row) != len(header):
                bad.append((start, row))
                continue
            records.append(row)
            lines.append(start)
    except csv.Error as exc:
        raise RoamstatError(f"{path}: line {reader.line_num}: {exc}; check the quoting in that line") from None
    table = pd.DataFrame(records, columns=range(len(header)), dtype=object) if records else \
        pd.DataFrame(columns=range(len(header)), dtype=object)
    lines = np.asarray(lines, dtype=np.int64)
    repeat = _header_rows(table, header)
    repeats = [(int(lines[i]), table.iloc[i].tolist()) for i in np.flatnonzero(repeat)]
    return header, table[~repeat].reset_index(drop=True), lines[~repeat], bad, repeats


def _header_rows(table: pd.DataFrame, header: list[str]) -> np.ndarray:
    """Rows that repeat the header (files concatenated with their headers)."""
    if not len(table):
        return np.zeros(0, dtype=bool)
    first = table[0].to_numpy(dtype=object)
    candidate = np.fromiter((isinstance(v, str) and v.strip() == header[0] for v in first), bool, len(first)) \
        if len(first) < 1000 else (first == header[0]) | np.char.startswith(first.astype(str), " ")
    rows = np.flatnonzero(candidate)
    confirmed = np.zeros(len(table), dtype=bool)
    for i in rows:
        confirmed[i] = [str(v).strip() for v in table.iloc[i].tolist()] == header
    return confirmed
