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
            if fixed is cfg:
                fixed = _fix_mapping(cfg, part.files[0])
                if fixed.deployment_col == "" and cfg.deployment_col is None:
                    fixed = fixed.replace(deployment_col=_deployment_in_whole_file(data, header, part.files[0],
                                                                                  chunk_records))
                    if fixed.deployment_col:  # a re-collared animal outside the first chunk
                        part = read_inputs([chunk_file], fixed)
            offset = int(lines[0]) - 1  # chunk line 2 is the original line lines[0] + 1
            yield _as_original(part, path, raw, offset)


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


def _fix_mapping(cfg: Config, info: dict) -> Config:
    """The first chunk's column choices, deployment column and time pattern, as overrides for the others.

    Detection looks at values, and a later chunk alone might decide otherwise (no day above 12 in it,
    no re-collared animal in it).
    """
    roles = info["roles"]
    fixed = cfg.replace(id_col=roles.get("animal_id"), time_col=roles.get("time"), date_col=roles.get("date"),
                        deployment_col=roles.get("deployment", ""), time_format=info.get("time_format"))
    return fixed if cfg.x_col else fixed.replace(lat_col=roles.get("lat"), lon_col=roles.get("lon"))


def _deployment_in_whole_file(data: bytes, header: bytes, info: dict, chunk_records: int) -> str:
    """The device column if any animal of the whole file carries several tags, else "" (none).

    The first chunk may hold only one tag of a re-collared animal; the id and device columns of
    every record are read in pieces, keeping distinct pairs only.
    """
    import io

    import pandas as pd

    from roamstat.io.columns import DEVICE, norm, pick_deployment

    id_col, delimiter = info["roles"].get("animal_id"), info.get("delimiter")
    names = header.decode("utf-8").strip().split(delimiter) if delimiter else []
    devices = [n for n in names if norm(n) in DEVICE and n != id_col]
    if id_col is None or not devices or norm(id_col) in DEVICE:
        return ""
    reader = pd.read_csv(io.BytesIO(data), sep=delimiter, usecols=[id_col, *devices], dtype=str,
                         keep_default_na=False, chunksize=chunk_records, on_bad_lines="skip")
    pairs = pd.concat([piece.drop_duplicates() for piece in reader], ignore_index=True).drop_duplicates()
    pairs = pairs.apply(lambda c: c.str.strip())
    return pick_deployment(pairs, {norm(n): n for n in pairs.columns}, id_col) or ""


def _as_original(part: ReadResult, path: str, raw: bytes, offset: int) -> ReadResult:
    """A chunk's result as if read from the original file: its path, size, hash and line numbers."""
    part.files[0].update(path=path, size_bytes=len(raw), sha256=hashlib.sha256(raw).hexdigest())
    for table in (part.rows, part.rejected):
        if len(table):
            table["source_file"] = np.full(len(table), path, dtype=object)
            table["source_row"] = table["source_row"].astype("int64") + offset
    return part
