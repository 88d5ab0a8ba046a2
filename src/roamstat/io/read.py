"""Input files to one table of candidate fixes (the ``ReadResult`` of the data contract).

Nothing is dropped silently: rows that cannot be read as records (wrong field
count, a repeated header) come back in ``rejected`` with a reason; every other
row comes back in ``rows`` with its values parsed (NaN / NaT where a value
could not be read, which the screen then rejects with a reason).
"""

from __future__ import annotations

import hashlib
import json
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from roamstat.config import Config
from roamstat.errors import RoamstatError
from roamstat.io.colmap import detect_columns, normalise, require_columns
from roamstat.io.csvtext import read_delimited
from roamstat.io.gpx import read_gpx
from roamstat.io.times import combine_date_time, parse_times

REJECTED_BASE = ["source_file", "source_row", "animal_id", "reason_code", "reason"]
READ_REASONS = {
    "field_count": "the row has a different number of fields than the header",
    "header_repeat": "a repeated header row",
}


@dataclass
class ReadResult:
    rows: pd.DataFrame
    rejected: pd.DataFrame
    files: list = field(default_factory=list)
    n_read: int = 0
    input_crs: str | None = None
    tz_note: str = ""


def read_inputs(paths, cfg: Config) -> ReadResult:
    """Read every input file; concatenate their rows, each remembering its file and line."""
    paths = [str(p) for p in paths]
    if not paths:
        raise RoamstatError("no input file given; name one or more CSV or GPX files")
    tables, rejected, files, notes = [], [], [], []
    for path in paths:
        table, rej, info = _read_one(path, cfg)
        tables.append(table)
        rejected.append(rej)
        files.append(info)
        notes.append(info.pop("tz_note"))
    rows = pd.concat(tables, ignore_index=True) if len(tables) > 1 else tables[0]
    rej = pd.concat(rejected, ignore_index=True) if len(rejected) > 1 else rejected[0]
    n_read = int(sum(f["n_rows"] for f in files))
    if n_read == 0:
        raise RoamstatError(f"{', '.join(paths)}: no data rows (header only?); export the fixes with their data rows")
    input_crs = cfg.crs if cfg.x_col and cfg.y_col else None
    return ReadResult(rows, rej, files, n_read, input_crs, "; ".join(sorted(set(n for n in notes if n))))


def _read_one(path: str, cfg: Config):
    p = Path(path)
    if not p.exists():
        raise RoamstatError(f"{path}: no such file; check the path")
    if p.is_dir():
        raise RoamstatError(f"{path}: is a folder; name the CSV or GPX files inside it")
    try:
        data = p.read_bytes()
    except OSError as exc:
        raise RoamstatError(f"{path}: cannot be read ({exc.strerror}); check its permissions") from None
    info = {"path": path, "size_bytes": len(data), "sha256": hashlib.sha256(data).hexdigest(), "notes": []}
    if not data.strip():
        raise RoamstatError(f"{path}: the file is empty; export the fixes with a header row and data rows")
    if p.suffix.lower() == ".gpx" or data.lstrip()[:5].lower() in (b"<?xml", b"<gpx "):
        from roamstat.io.csvtext import decode

        text, encoding, notes = decode(data, path)
        table = read_gpx(text, path, p.stem)
        table.columns = list(table.columns)
        lines = np.arange(1, len(table) + 1)
        info.update(encoding=encoding, delimiter=None, notes=notes + ["GPX: source_row is the track point's number"])
        bad, repeats = [], []
    elif p.suffix.lower() == ".parquet":
        table, lines, encoding = _read_parquet(path)
        info.update(encoding="parquet", delimiter=None)
        bad, repeats = [], []
    else:
        parsed = read_delimited(data, path)
        table, lines, bad, repeats = parsed.table, parsed.lines, parsed.bad_count, parsed.repeated_header
        info.update(encoding=parsed.encoding, delimiter=parsed.delimiter, notes=parsed.notes)
    header = [str(c) for c in table.columns]
    mapping = detect_columns(header, _overrides(cfg), path)
    projected = bool(cfg.x_col and cfg.y_col)
    require_columns(mapping, header, path, projected)
    info["columns"] = mapping
    info["n_rows"] = int(len(table) + len(bad) + len(repeats))
    default_id = p.stem
    rows, tz_note = _standardise(table, lines, mapping, path, default_id, cfg, info["delimiter"])
    info["tz_note"] = tz_note
    rejected = _read_rejections(path, header, bad, repeats, mapping, default_id)
    return rows, rejected, info


def _overrides(cfg: Config) -> dict:
    over = {"animal_id": cfg.id_col, "lat": cfg.lat_col, "lon": cfg.lon_col,
            "time": cfg.time_col, "date": cfg.date_col, "x": cfg.x_col, "y": cfg.y_col}
    if bool(cfg.x_col) != bool(cfg.y_col) or (cfg.x_col and not cfg.crs):
        raise RoamstatError("projected input needs all three of --x-col, --y-col and --crs EPSG:NNNN")
    return over


def _read_parquet(path: str):
    from roamstat.io.parquet import require_pyarrow

    require_pyarrow()
    table = pd.read_parquet(path)
    for col in table.columns:
        if isinstance(table[col].dtype, pd.DatetimeTZDtype):
            table[col] = table[col].dt.tz_convert("UTC").dt.strftime("%Y-%m-%dT%H:%M:%S.%fZ")
    table = table.astype(str).where(table.notna(), "")
    return table, np.arange(2, len(table) + 2), "parquet"


def _number(values: pd.Series, delimiter: str | None) -> pd.Series:
    text = values.astype("string").str.strip()
    if delimiter == ";":
        text = text.str.replace(",", ".", regex=False)  # decimal commas go with semicolon files
    return pd.to_numeric(text, errors="coerce").astype(float)


def _standardise(table, lines, mapping, path, default_id, cfg, delimiter):
    n = len(table)
    out = pd.DataFrame(index=range(n))
    out["animal_id"] = (table[mapping["animal_id"]].astype(str).str.strip().to_numpy()
                        if "animal_id" in mapping else np.full(n, default_id, dtype=object))
    if "time" in mapping:
        time_text = table[mapping["time"]]
    else:
        time_text = combine_date_time(table[mapping["date"]], table[mapping["time_of_day"]])
    times, tz_note = parse_times(time_text.reset_index(drop=True), cfg.tz, f"{path}, column {mapping.get('time', mapping.get('date'))!r}")
    out["time"] = times.to_numpy()
    out["time"] = out["time"].astype("datetime64[ns, UTC]") if n else pd.Series([], dtype="datetime64[ns, UTC]")
    if "x" in mapping:
        out["x_in"] = _number(table[mapping["x"]], delimiter).to_numpy()
        out["y_in"] = _number(table[mapping["y"]], delimiter).to_numpy()
        out["lon"], out["lat"] = _unproject(out["x_in"].to_numpy(), out["y_in"].to_numpy(), cfg.crs)
    else:
        out["lat"] = _number(table[mapping["lat"]], delimiter).to_numpy()
        out["lon"] = _number(table[mapping["lon"]], delimiter).to_numpy()
    out["dop"] = _number(table[mapping["dop"]], delimiter).to_numpy() if "dop" in mapping else np.nan
    out["n_sats"] = _number(table[mapping["n_sats"]], delimiter).to_numpy() if "n_sats" in mapping else np.nan
    out["fix_type"] = _fix_type(table[mapping["fix_type"]]) if "fix_type" in mapping else pd.NA
    out["quality"] = _quality(table, mapping)
    out["source_file"] = path
    out["source_row"] = np.asarray(lines, dtype=np.int64)
    originals = table.copy()
    originals.columns = [f"orig_{c}" for c in table.columns]
    return pd.concat([out, originals.reset_index(drop=True)], axis=1), tz_note


def _unproject(x, y, crs):
    from pyproj import CRS, Transformer
    from pyproj.exceptions import CRSError

    try:
        source = CRS.from_user_input(crs)
    except CRSError:
        raise RoamstatError(f"--crs {crs!r} is not a coordinate reference system pyproj knows; give e.g. EPSG:32633") from None
    lon, lat = Transformer.from_crs(source, "EPSG:4326", always_xy=True).transform(x, y)
    return np.asarray(lon, float), np.asarray(lat, float)


def _fix_type(values: pd.Series) -> pd.Series:
    """'2d' / '3d' from the many spellings collars use; other values kept lower-cased."""
    text = values.astype("string").str.strip().str.lower()
    text = text.str.replace(r"^(?:gps[\s_-]*)?([23])(?:[\s_-]*d(?:im(?:ensional)?)?)?$", r"\1d", regex=True)
    return text.replace({"": pd.NA}).to_numpy(dtype=object)


_QUALITY_IN_JSON = re.compile(r'"?location_quality"?\s*:\s*"?([0-9A-Za-z]+)"?')


def _quality(table: pd.DataFrame, mapping: dict):
    """Location-quality class: a column of its own, or inside a Darwin Core dynamicProperties field."""
    if "quality" in mapping:
        return table[mapping["quality"]].astype("string").str.strip().str.upper().replace({"": pd.NA}).to_numpy(dtype=object)
    props = next((c for c in table.columns if normalise(c) == "dynamicproperties"), None)
    if props is None:
        return pd.NA
    found = table[props].astype("string").str.extract(_QUALITY_IN_JSON, expand=False)
    return found.str.upper().to_numpy(dtype=object)


def _read_rejections(path, header, bad, repeats, mapping, default_id) -> pd.DataFrame:
    records = []
    id_index = header.index(mapping["animal_id"]) if "animal_id" in mapping else None
    for code, items in (("field_count", bad), ("header_repeat", repeats)):
        for line, values in items:
            row = {"source_file": path, "source_row": int(line),
                   "animal_id": (values[id_index].strip() if id_index is not None and id_index < len(values) else default_id),
                   "reason_code": code,
                   "reason": READ_REASONS[code] + (f" ({len(values)} fields, header has {len(header)})" if code == "field_count" else "")}
            for j, name in enumerate(header):
                row[f"orig_{name}"] = values[j] if j < len(values) else ""
            if len(values) > len(header):
                row["orig_extra_fields"] = json.dumps(values[len(header):])
            records.append(row)
    return pd.DataFrame(records, columns=None if records else REJECTED_BASE)


def describe_inputs(result: ReadResult) -> str:
    """What was detected in each file and for each animal (``roamstat inspect``)."""
    lines = []
    for info in result.files:
        delim = {",": "comma", ";": "semicolon", "\t": "tab"}.get(info.get("delimiter"), info.get("delimiter") or "-")
        lines.append(f"{info['path']}: {info['n_rows']} rows, {info['encoding']}, delimiter {delim}")
        for key, col in info.get("columns", {}).items():
            lines.append(f"  {key:<12} <- {col!r}")
        for note in info.get("notes", []):
            lines.append(f"  note: {note}")
    if result.tz_note:
        lines.append(f"times: {result.tz_note}; everything inside roamstat is UTC")
    rows = result.rows
    lines.append(f"animals: {rows['animal_id'].nunique()}")
    for aid, group in rows.groupby("animal_id", sort=True):
        t = group["time"].dropna().sort_values()
        dt = t.diff().dt.total_seconds().median() if len(t) > 1 else float("nan")
        span = f"{t.iloc[0]:%Y-%m-%d} to {t.iloc[-1]:%Y-%m-%d}" if len(t) else "no readable times"
        lines.append(f"  {str(aid)[:60]}: {len(group)} rows, {span}, median interval "
                     f"{'n/a' if dt != dt else f'{dt / 3600:.3g} h'}")
    return "\n".join(lines)
