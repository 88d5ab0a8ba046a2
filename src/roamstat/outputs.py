"""Where a run's tables go: the output folder, the table writers and the masked points.

With ``--mask-locations`` every writer here masks with the run's one hidden
origin (:func:`masking_origin`, drawn once per run and kept in
``Loaded.origin``), so fixes.csv, the report maps and the range outlines
share it.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from roamstat import rows
from roamstat.config import Config
from roamstat.errors import NothingKept, RoamstatError
from roamstat.io.read import ReadResult
from roamstat.io.write import write_csv, write_json
from roamstat.pipeline import Loaded

if TYPE_CHECKING:
    from roamstat.ranges.mask import HiddenOrigin

def masking_origin(cfg: Config, vector_sum: np.ndarray, given: HiddenOrigin | None = None) -> HiddenOrigin | None:
    """The run's one hidden origin: None unless masking; ``given`` (tests) or a fresh draw.

    ``vector_sum`` is :func:`roamstat.ranges.mask.unit_vector_sum` of the
    positions read (every row with a valid position, kept or rejected), so an
    ordinary and a streamed run centre the draw on the same point.
    """
    if not cfg.mask_locations:
        return None
    if given is not None:
        return given
    from roamstat.ranges.mask import origin_near

    return origin_near(vector_sum, cfg.mask_grid)


def output_name(stem: str, cfg: Config) -> str:
    return f"{stem}.parquet" if cfg.output_format == "parquet" else f"{stem}.csv"


def write_table(table: pd.DataFrame, path: Path, cfg: Config) -> None:
    if cfg.output_format == "parquet":
        from roamstat.io.parquet import write_parquet

        write_parquet(table, path)
    else:
        write_csv(table, path)


def all_rejected(exc: NothingKept, staging: Path, out_dir: Path, cfg: Config) -> RoamstatError:
    """Write rejected.csv (into ``staging``) for an input with no usable fix; the error to raise names it in ``out_dir``."""
    name = output_name("rejected", cfg)
    write_table(rejected_for_output(exc.rejected, cfg), staging / name, cfg)
    return RoamstatError(f"{exc}; every row's reason is in {out_dir / name}; relax the screening options "
                         "that rejected them, or switch a rule off with --keep CODE")


def write_tables(out_dir: Path, loaded: Loaded, tables: dict, cfg: Config) -> None:
    """Every table of an in-memory run."""
    named = {"fixes": fixes_for_output(loaded.fixes, cfg, loaded.read, loaded.origin),
             "rejected": rejected_for_output(loaded.rejected, cfg)}
    if loaded.steps is not None:
        named["steps"] = loaded.steps
    write_named(out_dir, named, loaded.summary, tables, cfg)


def write_named(out_dir: Path, named: dict, summary: pd.DataFrame | None, tables: dict, cfg: Config) -> None:
    """Write the given tables, the summary (when computed) and the analysis tables with the GeoJSON."""
    if summary is not None:
        named = {**named, "summary": summary}
    named.update({k: v for k, v in tables.items() if k != "ranges_geojson"})
    for stem, table in named.items():
        write_table(table, out_dir / output_name(stem, cfg), cfg)
    if "ranges_geojson" in tables:
        write_json(tables["ranges_geojson"], out_dir / "ranges.geojson")


def fixes_for_output(fixes: pd.DataFrame, cfg: Config, read: ReadResult | None = None,
                     origin: HiddenOrigin | None = None) -> pd.DataFrame:
    """fixes.csv: parsed columns plus the input's other columns under their own names.

    Original columns already parsed into a standard column (time, coordinates,
    id, DOP, ...) are not repeated; the rest pass through unchanged.  With
    masking, positions are replaced by coordinates relative to the run's
    hidden ``origin``.
    """
    if cfg.mask_locations:
        from roamstat.ranges import mask_fixes

        return mask_fixes(fixes, _required(origin))  # also drops every original column: raw text can spell positions
    if read is not None:
        parsed = {f"orig_{col}" for info in read.files for col in info.get("parsed_columns", [])}
        fixes = fixes.drop(columns=[c for c in fixes.columns if c in parsed])
        rename = {c: c[5:] for c in fixes.columns if str(c).startswith("orig_") and c[5:] not in fixes.columns}
        fixes = fixes.rename(columns=rename)
    return fixes


def _required(origin: HiddenOrigin | None) -> HiddenOrigin:
    if origin is None:
        raise ValueError("masked output without the run's hidden origin (outputs.masking_origin)")
    return origin


def report_tables(loaded: Loaded, tables: dict, cfg: Config) -> dict:
    """The tables the report draws from, masked points included."""
    fixes_xy, rejected_xy = map_points(loaded, cfg)
    out = {"summary": loaded.summary, "rejected": rejected_for_output(loaded.rejected, cfg),
           "fixes": fixes_xy, "rejected_xy": rejected_xy}
    out.update({k: v for k, v in tables.items() if isinstance(v, pd.DataFrame)})
    return out


def usable_rejected(loaded: Loaded) -> pd.DataFrame:
    """Rejected rows whose coordinates are valid numbers, for drawing them faintly on the maps."""
    rejected = loaded.rejected
    if not {"lat", "lon", "animal_id"} <= set(rejected.columns):
        return rejected.iloc[0:0]
    lat = pd.to_numeric(rejected["lat"], errors="coerce")
    lon = pd.to_numeric(rejected["lon"], errors="coerce")
    keep = lat.between(-90, 90) & lon.between(-180, 180) & rejected["animal_id"].isin(list(loaded.projections))
    out = rejected.loc[keep, ["animal_id", "reason_code"]].copy()
    out["lat"], out["lon"] = lat[keep].astype(float), lon[keep].astype(float)
    return out.reset_index(drop=True)


def map_points(loaded: Loaded, cfg: Config) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Observed and rejected fixes in one planar frame per map (the run's masked frame when masking)."""
    from roamstat.geo import project_lonlat

    fixes = rows.observed(loaded.fixes, ["animal_id", "lat", "lon", "x_m", "y_m"])
    rejected = usable_rejected(loaded)
    if cfg.mask_locations:
        from roamstat.ranges import mask_fixes

        origin = _required(loaded.origin)
        return mask_fixes(fixes.drop(columns=["x_m", "y_m"]), origin), mask_fixes(rejected, origin)
    parts = []
    for aid, group in rejected.groupby("animal_id", sort=True):
        x, y = project_lonlat(group["lon"].to_numpy(), group["lat"].to_numpy(), loaded.projections[aid])
        parts.append(group.assign(x_m=x, y_m=y))
    rejected_xy = pd.concat(parts, ignore_index=True) if parts else rejected.assign(x_m=[], y_m=[])
    return fixes, rejected_xy


def rejected_for_output(rejected: pd.DataFrame, cfg: Config) -> pd.DataFrame:
    """rejected.csv: every original value, unless masking hides the positions."""
    if not cfg.mask_locations:
        return rejected
    from roamstat.ranges.mask import POSITION_COLUMNS

    hidden = [c for c in rejected.columns if c in POSITION_COLUMNS or str(c).startswith("orig_")]
    return rejected.drop(columns=hidden).assign(masked=True)
