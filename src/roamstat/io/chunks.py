"""Reading a big delimited file in record chunks, so no whole-file table is ever built.

Each chunk is the header line plus a run of data lines, read by the same
reader as a whole file (``io.read.read_inputs``) with the column mapping of
the first chunk fixed for the rest, and its line numbers shifted back to the
original file's.  Only the raw bytes of the file are held whole (a tenth or
less of the parsed table).  Files the line-by-line split cannot follow —
quoted fields (which may hold line breaks), GPX, Parquet, UTF-16 — are read
whole, as in the ordinary path.
"""

from __future__ import annotations

import hashlib
import tempfile
from collections.abc import Iterator
from pathlib import Path

import numpy as np

from roamstat.config import Config
from roamstat.io.csvsniff import check_sizes, decode_plan, line_terminator, load_bytes
from roamstat.io.read import ReadResult, read_inputs


def read_in_chunks(path: str, cfg: Config, chunk_records: int) -> Iterator[ReadResult]:
    """Yield ReadResults of successive record chunks of one input file."""
    p = Path(path)
    raw = load_bytes(p)
    plan = _splittable(raw, p)
    if plan is None:
        yield read_inputs([path], cfg)
        return
    data, term = plan
    ends = np.flatnonzero(np.frombuffer(data, dtype=np.uint8) == term)
    if len(data) and data[-1] != term:
        ends = np.append(ends, len(data))
    starts = np.concatenate(([0], ends[:-1] + 1))
    nonblank = np.flatnonzero(ends - starts > 0)
    if len(nonblank) < 2:
        yield read_inputs([path], cfg)
        return
    head = nonblank[0]
    header = data[starts[head]:ends[head]] + bytes([term])
    body = np.arange(head + 1, len(starts))
    fixed = cfg
    with tempfile.TemporaryDirectory(prefix="roamstat-chunk-") as tmp:
        chunk_file = Path(tmp) / p.name  # same name: a file without an id column names its animal after it
        for first in range(0, len(body), chunk_records):
            lines = body[first:first + chunk_records]
            chunk_file.write_bytes(header + data[starts[lines[0]]:ends[lines[-1]]])
            part = read_inputs([chunk_file], fixed)
            offset = int(lines[0]) - 1  # chunk line 2 is the original line lines[0] + 1
            yield _as_original(part, path, raw, offset)
            if fixed is cfg:
                fixed = _fix_mapping(cfg, part.files[0]["roles"])


def _splittable(raw: bytes, path: Path):
    """(UTF-8 bytes, line terminator) when the file can be split at line ends, else None."""
    if path.suffix.lower() in (".gpx", ".parquet") or raw.lstrip()[:1] == b"<" or b'"' in raw or b"\x00" in raw:
        return None  # NUL bytes too: their rows are flagged by the whole-file reader
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        return None
    data, encoding, _notes = decode_plan(raw, path)
    if encoding == "latin-1":
        data = data.decode("latin-1").encode("utf-8")
    term, _ending = line_terminator(data)
    check_sizes(data, term, path)  # before any chunk is cut, so the error names the file's own line
    return data, term


def _fix_mapping(cfg: Config, roles: dict) -> Config:
    """The first chunk's column choices, as overrides for the others (detection may look at values)."""
    if cfg.x_col:
        return cfg.replace(id_col=roles.get("animal_id"), time_col=roles.get("time"), date_col=roles.get("date"))
    return cfg.replace(id_col=roles.get("animal_id"), time_col=roles.get("time"), date_col=roles.get("date"),
                       lat_col=roles.get("lat"), lon_col=roles.get("lon"))


def _as_original(part: ReadResult, path: str, raw: bytes, offset: int) -> ReadResult:
    """A chunk's result as if read from the original file: its path, size, hash and line numbers."""
    part.files[0].update(path=path, size_bytes=len(raw), sha256=hashlib.sha256(raw).hexdigest())
    for table in (part.rows, part.rejected):
        if len(table):
            table["source_file"] = np.full(len(table), path, dtype=object)
            table["source_row"] = table["source_row"].astype("int64") + offset
    return part
