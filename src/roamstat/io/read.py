"""Input files to one table of candidate fixes (the ``ReadResult`` of the data contract).

Nothing is dropped silently: records that cannot be read as rows (a field
count that differs from the header's, a repeated header line) come back in
``rejected`` with a reason code; every other record comes back in ``rows``,
its values parsed (NaN / NaT where a value could not be read, which the screen
then rejects with a reason).  ``n_read`` counts both, so
``n_read == len(rows) + len(rejected)`` for every input.

Conventions
-----------
* Deployments: with an animal column and a device column (``tag``,
  ``collar`` ...; ``--deployment-col``) that gives some animal several
  values, ``animal_id`` becomes ``animal/device`` on every row whose device
  differs from the animal id, so no track joins fixes across a tag change;
  the device value is kept in the ``tag`` column.
* A file without an animal-id column is one animal, named after the file
  (its name without the extension).  Rows whose id cell is empty get the same
  name, with a note in the file's ``notes``.
* Decimal commas are read in semicolon- and tab-delimited files (``61,5``).
* Projected input (``--x-col --y-col --crs``) is inverse-projected to WGS84
  latitude and longitude with PROJ; ``x_in, y_in`` keep the input values.
* ``source_row`` is the 1-based physical line where the record starts in the
  file (the header is line 1; a quoted field with line breaks spans several
  lines); for GPX, the line of the ``<trkpt>`` tag.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from roamstat.errors import RoamstatError
from roamstat.io.columns import Mapping, detect
from roamstat.io.csvsniff import DELIMITER_NAMES, load_bytes, read_table
from roamstat.io.gpx import looks_like_gpx, read_gpx
from roamstat.io.times import combine_date_time, parse_times

REJECTED_BASE = ["source_file", "source_row", "animal_id", "reason_code", "reason"]
STANDARD = ["animal_id", "time", "lat", "lon", "dop", "n_sats", "fix_type", "quality", "source_file", "source_row"]
_QUALITY_IN_JSON = r'"?location_quality"?\s*:\s*"?([0-9A-Za-z]+)"?'


@dataclass
class ReadResult:
    """Everything read from the inputs (see DEVELOPERS.md, data contract)."""

    rows: pd.DataFrame
    rejected: pd.DataFrame
    files: list = field(default_factory=list)
    n_read: int = 0
    input_crs: str | None = None
    tz_note: str = ""


@dataclass
class _FileRead:
    rows: pd.DataFrame
    rejected: pd.DataFrame
    info: dict
    tz_note: str


def read_inputs(paths, cfg) -> ReadResult:
    """Read every input file and concatenate their rows, each remembering its file and line.

    Parameters
    ----------
    paths : list of str or Path
        CSV (comma, semicolon or tab delimited) or GPX files.
    cfg : roamstat.config.Config
        Uses ``id_col, time_col, date_col, lat_col, lon_col, x_col, y_col, crs, tz``.

    Returns
    -------
    ReadResult
    """
    paths = [str(p) for p in paths]
    if not paths:
        raise RoamstatError("no input file given; name one or more CSV or GPX files")
    if getattr(cfg, "x_col", None) and not getattr(cfg, "crs", None):
        raise RoamstatError("--x-col/--y-col need --crs (the input's coordinate system, e.g. EPSG:32633)")
    parts = [_read_file(path, cfg) for path in paths]
    rows = _concat([p.rows for p in parts])
    rejected = _concat([p.rejected for p in parts]) if any(len(p.rejected) for p in parts) else \
        pd.DataFrame(columns=REJECTED_BASE)
    files = [p.info for p in parts]
    n_read = int(sum(f["n_rows"] for f in files))
    if len(rows) == 0:
        raise RoamstatError(f"{', '.join(paths)}: no data row could be read ({len(rejected)} rejected while reading); "
                            "check the header and the delimiter with 'roamstat inspect'")
    notes = sorted({p.tz_note for p in parts if p.tz_note})
    input_crs = str(cfg.crs) if getattr(cfg, "x_col", None) else None
    return ReadResult(rows, rejected, files, n_read, input_crs, "; ".join(notes))


def _parquet_values(raw: bytes, path: str) -> pd.DataFrame:
    """A Parquet table as the same all-text table the CSV reader gives (times as ISO 8601)."""
    import io

    import pyarrow as pa

    try:
        frame = pd.read_parquet(io.BytesIO(raw))
    except (pa.ArrowInvalid, OSError) as exc:
        raise RoamstatError(f"{path}: not a readable Parquet file ({exc}); check it was written completely") from None
    if len(frame) == 0:
        raise RoamstatError(f"{path}: the Parquet file has no rows; export the fixes with their data rows")
    text = pd.DataFrame(index=frame.index)
    for name in frame.columns:
        column = frame[name]
        if pd.api.types.is_datetime64_any_dtype(column):
            utc = column.dt.tz_localize("UTC") if column.dt.tz is None else column.dt.tz_convert("UTC")
            column = utc.dt.strftime("%Y-%m-%dT%H:%M:%S.%fZ")
        text[str(name)] = column.astype("string").fillna("").astype(object)
    return text.reset_index(drop=True)


def _concat(frames: list[pd.DataFrame]) -> pd.DataFrame:
    return frames[0] if len(frames) == 1 else pd.concat(frames, ignore_index=True)


def _read_file(path: str, cfg) -> _FileRead:
    p = Path(path)
    raw = load_bytes(p)
    info: dict[str, Any] = {"path": path, "size_bytes": len(raw), "sha256": hashlib.sha256(raw).hexdigest()}
    if looks_like_gpx(p, raw):
        gpx = read_gpx(raw, p)
        values, lines = gpx.values, gpx.line_numbers
        mapping = Mapping(columns=dict(gpx.columns))
        info.update(encoding=gpx.encoding, delimiter=None, notes=["GPX track points; source_row is the <trkpt> line"])
        delimiter, bad = None, None
    elif p.suffix.lower() == ".parquet":
        values = _parquet_values(raw, path)
        lines = np.arange(1, len(values) + 1)
        mapping = detect(values, cfg, p)
        info.update(encoding="parquet", delimiter=None,
                    notes=["Parquet: source_row is the record's position"] + mapping.notes)
        delimiter, bad = None, None
    else:
        table = read_table(raw, p)
        info.update(encoding=table.encoding, delimiter=table.delimiter, notes=list(table.notes))
        values, lines, delimiter = table.values, table.line_numbers, table.delimiter
        bad = _read_rejections(table)
        if len(values) == 0:
            raise RoamstatError(f"{path}: a header line but no data rows; export the fixes with their data rows")
        if (bad == "field_count").all():
            raise RoamstatError(
                f"{path}: no data row has the header's {len(table.header)} fields (first data row, line "
                f"{int(lines[0])}, has {int(table.field_counts[0])}); check the delimiter and the header line"
            )
        mapping = detect(values, cfg, p)
        info["notes"] += mapping.notes
    info["columns"] = mapping.describe()
    info["parsed_columns"] = [*mapping.columns.values(), *([mapping.date_col] if mapping.date_col else [])]
    info["roles"] = {**mapping.columns, **({"date": mapping.date_col} if mapping.date_col else {})}
    info["n_rows"] = int(len(values))
    if bad is not None and (bad != "").any():
        drop = bad != ""
        rejected = _rejected_rows(values[drop], lines[drop], bad[drop], mapping, path, p.stem,
                                  table.extra_fields[drop])
        values, lines = values[~drop].reset_index(drop=True), lines[~drop]
    else:
        rejected = pd.DataFrame(columns=REJECTED_BASE)
    rows, tz_note, read_as = _standardise(values, lines, mapping, path, p.stem, cfg, delimiter, info["notes"])
    info["time_format"] = read_as.pattern  # a chunked read keeps the first chunk's format
    return _FileRead(rows, rejected, info, tz_note)


#: Reason codes of rows the reader drops (the screen's are ``screen.REASONS``).
READ_REASONS = {
    "field_count": "the row has a different number of fields than the header line",
    "header_repeat": "a repeated header line",
    "nul_byte": "the row holds a NUL byte (binary data inside a text file)",
}


def _read_rejections(table) -> np.ndarray:
    """Reason code per data record: 'nul_byte', 'field_count', 'header_repeat' or '' (readable)."""
    codes = np.where(table.field_counts != len(table.header), "field_count", "").astype(object)
    if table.nul_rows is not None:
        codes[table.nul_rows] = "nul_byte"
    codes_first, uniques = pd.factorize(table.values.iloc[:, 0])
    same = [i for i, u in enumerate(uniques) if str(u).strip().lower() == table.header[0].lower()]
    header = [h.lower() for h in table.header]
    for i in np.flatnonzero(np.isin(codes_first, same) & (codes == "")):  # first cell repeats the header's
        if [str(v).strip().lower() for v in table.values.iloc[i].tolist()] == header:
            codes[i] = "header_repeat"
    return codes


def _rejected_rows(values, lines, codes, mapping, path, stem, extra) -> pd.DataFrame:
    n = len(values)
    id_col = mapping.columns.get("animal_id")
    animal = values[id_col].str.strip().to_numpy(dtype=object) if id_col else np.full(n, stem, dtype=object)
    reason = np.array([READ_REASONS[c] for c in codes], dtype=object)
    out = pd.DataFrame({"source_file": path, "source_row": np.asarray(lines, dtype=np.int64), "animal_id": animal,
                        "reason_code": codes, "reason": reason})
    for name in values.columns:
        out[f"orig_{name}"] = values[name].to_numpy(dtype=object)
    extra = extra.to_numpy(dtype=object)
    if (extra != "").any():
        out["extra_fields"] = extra  # fields beyond the header's, joined by the delimiter
    return out


def _standardise(values, lines, mapping: Mapping, path, stem, cfg, delimiter, notes):
    cols = mapping.columns
    n = len(values)
    out = {}
    if "animal_id" in cols:
        ids = _by_unique(values[cols["animal_id"]], lambda u: u.str.strip())
        empty = ids == ""
        if empty.any():
            notes.append(f"{int(empty.sum())} rows without an animal id were given the file's name {stem!r}")
            ids = ids.where(~empty, stem)
        if "deployment" in cols:
            ids = _deployments(ids, values[cols["deployment"]], cols, notes)
            out["tag"] = _by_unique(values[cols["deployment"]], lambda u: u.str.strip().replace("", None))
        out["animal_id"] = ids
    else:
        out["animal_id"] = pd.Series(stem, index=values.index, dtype=values.dtypes.iloc[0])
        notes.append(f"no animal-id column: one animal named {stem!r}")
    time_text = values[cols["time"]] if "time" in cols else None
    if mapping.date_col:
        time_text = combine_date_time(values[mapping.date_col], time_text) if time_text is not None \
            else values[mapping.date_col]
    if mapping.date_col and "time" in cols:
        notes.append(f"date and time of day are separate columns: paired {mapping.date_col!r} with {cols['time']!r}")
    where = f"{path}, column {mapping.describe()['time']!r}"
    time_format = getattr(cfg, "time_format", None)
    assert time_text is not None, "detect() and the GPX reader always map a time or date column"
    times, tz_note, read_as = parse_times(time_text, cfg.tz, where, mapping.date_col or cols.get("time", ""),
                                              time_format)
    notes.append(f"times read as {read_as.description}")
    if n and times.isna().all():
        example = time_text[time_text.str.strip() != ""].head(1).tolist()
        raise RoamstatError(
            f"{where}: no value could be read as a time (e.g. {example[0]!r}) with {read_as.description}; give the "
            "pattern with --time-format (e.g. '%d.%m.%Y %H:%M:%S') or name another column with --time-col"
            if example else f"{where}: the time column is empty; name the column holding the times with --time-col"
        )
    out["time"] = times.astype("datetime64[ns, UTC]").set_axis(values.index)
    decimal_comma = delimiter in (";", "\t")
    if "x_in" in cols:
        x = _number(values[cols["x_in"]], decimal_comma)
        y = _number(values[cols["y_in"]], decimal_comma)
        lon, lat = _unproject(x, y, cfg.crs)
        out.update(lat=lat, lon=lon, x_in=x, y_in=y)
    else:
        out["lat"] = _number(values[cols["lat"]], decimal_comma)
        out["lon"] = _number(values[cols["lon"]], decimal_comma)
    nan = np.full(n, np.nan)
    none = pd.Series(None, index=values.index, dtype=object)
    out["dop"] = _number(values[cols["dop"]], decimal_comma) if "dop" in cols else nan
    out["n_sats"] = _number(values[cols["n_sats"]], decimal_comma) if "n_sats" in cols else nan
    out["fix_type"] = _by_unique(values[cols["fix_type"]], _fix_type) if "fix_type" in cols else none
    out["quality"] = _by_unique(values[cols["quality"]], _quality) if "quality" in cols else none
    out["source_file"] = pd.Series(path, index=values.index, dtype=object)
    out["source_row"] = np.asarray(lines, dtype=np.int64)
    for c in values.columns:
        out[f"orig_{c}"] = values[c]
    return pd.DataFrame(out, index=values.index, copy=False), tz_note, read_as


def _deployments(ids: pd.Series, device: pd.Series, cols: dict, notes: list) -> pd.Series:
    """``animal/device`` ids wherever the device differs from the animal id; a note on re-collared animals."""
    tags = _by_unique(device, lambda u: u.str.strip()).fillna("")
    split = (tags != "") & (tags != ids)
    out = ids.where(~split, ids.astype(object) + "/" + tags)
    per_animal = pd.DataFrame({"a": ids, "t": tags})[split].drop_duplicates().groupby("a")["t"]
    several = per_animal.nunique()
    several = several[several > 1]
    for animal in several.index[:20]:
        listed = ", ".join(sorted(per_animal.get_group(animal).astype(str))[:5])
        notes.append(f"animal {animal!r} carries {int(several[animal])} tags in {cols['deployment']!r} ({listed}): "
                     f"each is analysed as its own deployment {animal}/<tag>")
    if len(several) > 20:
        notes.append(f"... and {len(several) - 20} more re-collared animals")
    if not len(several):
        notes.append(f"deployments from {cols['deployment']!r}: ids are animal/tag where the tag differs")
    return out


def _by_unique(values: pd.Series, transform) -> pd.Series:
    """Apply a string transform to the distinct values only (collar columns repeat a few values)."""
    codes, uniques = pd.factorize(values, use_na_sentinel=True)
    done = transform(pd.Series(uniques, dtype=object)).to_numpy(dtype=object)
    out = np.where(codes >= 0, done[np.maximum(codes, 0)], None) if len(done) else np.full(len(values), None)
    return pd.Series(out, index=values.index, dtype=object)


def _number(text: pd.Series, decimal_comma: bool) -> np.ndarray:
    """Floats from raw strings; NaN where a value is not a number."""
    try:
        return _clean_floats(text)
    except (ValueError, TypeError):
        pass  # some cells need care: blanks, spaces, decimal commas, junk
    text = text.str.strip()
    if decimal_comma:
        text = text.str.replace(",", ".", regex=False)
    return pd.to_numeric(text, errors="coerce").to_numpy(dtype=float)


def _clean_floats(text: pd.Series) -> np.ndarray:
    """Strict conversion of a column where every cell is a number (the common case, kept fast)."""
    if hasattr(text.array, "__arrow_array__"):
        import pyarrow as pa
        import pyarrow.compute as pc

        try:
            return pc.cast(pa.array(text.array), pa.float64()).to_numpy(zero_copy_only=False)
        except pa.ArrowInvalid as exc:
            raise ValueError(str(exc)) from None
    return text.astype(float).to_numpy()


def _unproject(x, y, crs):
    from pyproj import CRS, Transformer
    from pyproj.exceptions import CRSError

    try:
        source = CRS.from_user_input(crs)
    except CRSError:
        raise RoamstatError(f"--crs {crs!r} is not a coordinate system PROJ knows; give one such as EPSG:32633") from None
    if not source.is_projected:
        raise RoamstatError(f"--crs {crs!r} is not a projected (metric) system; with latitude and longitude "
                            "use --lat-col/--lon-col instead of --x-col/--y-col")
    lon, lat = Transformer.from_crs(source, "EPSG:4326", always_xy=True).transform(x, y)
    return np.asarray(lon, dtype=float), np.asarray(lat, dtype=float)


def _fix_type(values: pd.Series) -> pd.Series:
    """'2d' / '3d' from the spellings collars use (2, 3, 2D, 3-D, GPS 3D, 3D validated); others lower-cased."""
    text = values.astype(str).str.strip().str.lower()
    text = text.str.replace(r"^(?:gps[\s_-]*)?([23])(?:[\s_-]*d(?:im(?:ensional)?)?)?\b.*$", r"\1d", regex=True)
    return text.where(text != "", None)


def _quality(values: pd.Series) -> pd.Series:
    """Location-quality class, upper-cased; from a Darwin Core dynamicProperties JSON text when needed."""
    values = values.astype(str)
    if values.str.contains("location_quality", regex=False).any():
        values = values.str.extract(_QUALITY_IN_JSON, expand=False).fillna("")
    text = values.str.strip().str.upper()
    return text.where(text != "", None)


def describe_inputs(result: ReadResult) -> str:
    """What ``roamstat inspect`` prints about the inputs: mapping, dialect, animals, dates, intervals."""
    lines = []
    for info in result.files:
        delim = DELIMITER_NAMES.get(info.get("delimiter"), "none (GPX)") if info.get("delimiter") else "none (GPX)"
        lines.append(f"{info['path']}: {info['n_rows']} records, encoding {info['encoding']}, delimiter {delim}")
        for role, col in info.get("columns", {}).items():
            lines.append(f"  {role:<10} <- {col}")
        for note in info.get("notes", []):
            lines.append(f"  note: {note}")
    lines.append(f"times: {result.tz_note or 'n/a'}; inside roamstat all times are UTC")
    if result.input_crs:
        lines.append(f"projected input in {result.input_crs}")
    rows = result.rows
    lines.append(f"rows read {result.n_read}, rejected while reading {len(result.rejected)}; "
                 f"animals: {rows['animal_id'].nunique()}")
    ns = rows["time"].to_numpy(dtype="datetime64[ns]")
    frame = pd.DataFrame({"a": rows["animal_id"].to_numpy(), "t": ns}).dropna().sort_values(["a", "t"], kind="stable")
    gap = frame.groupby("a", sort=False)["t"].diff().dt.total_seconds()
    stats = pd.DataFrame({"n": rows.groupby("animal_id").size()})
    stats["first"] = frame.groupby("a")["t"].min()
    stats["last"] = frame.groupby("a")["t"].max()
    stats["median_s"] = gap.groupby(frame["a"]).median()
    for aid, row in stats.sort_index().iterrows():
        span = "no readable times" if pd.isna(row["first"]) else \
            f"{row['first']:%Y-%m-%d %H:%M} to {row['last']:%Y-%m-%d %H:%M} UTC"
        lines.append(f"  {str(aid)[:60]}: {int(row['n'])} rows, {span}, median interval {_duration(row['median_s'])}")
    return "\n".join(lines)


def _duration(seconds) -> str:
    if seconds is None or pd.isna(seconds):
        return "n/a"
    for unit, size in (("d", 86400), ("h", 3600), ("min", 60)):
        if seconds >= size:
            return f"{seconds / size:.3g} {unit}"
    return f"{seconds:.3g} s"
