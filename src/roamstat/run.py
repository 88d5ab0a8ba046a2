"""The pipeline: stages in order, from input files to output tables.

Each ``load``/``analyse`` step is a plain function of tables; this module only
orders them, hands per-animal work to :mod:`roamstat.parallel`, times the
stages for the manifest and writes the outputs through :mod:`roamstat.io.write`.
"""

from __future__ import annotations

import platform
import sys
import time
from dataclasses import dataclass, field
from datetime import datetime, timezone
from importlib import metadata
from pathlib import Path

import pandas as pd

from roamstat import __version__
from roamstat.config import Config, check_config
from roamstat.errors import NothingKept, RoamstatError
from roamstat.io.read import ReadResult, read_inputs
from roamstat.io.write import write_csv, write_json
from roamstat.parallel import map_animals
from roamstat.results import AnimalResult
from roamstat.screen import screen
from roamstat.seeds import animal_rng
from roamstat.track import compute_steps, prepare_fixes, summarise

#: Which stages each command runs, in pipeline order.
COMMAND_STAGES = {
    "clean": (),
    "steps": ("steps",),
    "fit": ("steps", "fit"),
    "nulltest": ("steps", "fit", "null"),
    "ranges": ("steps", "ranges"),
    "run": ("steps", "fit", "null", "ranges", "report"),
}

MANIFEST = "manifest.json"


class StageClock:
    """Start time (UTC, ISO 8601) and duration of each stage, for the manifest."""

    def __init__(self) -> None:
        self.stages: list[dict] = []

    def __call__(self, name: str):
        clock = self

        class _Stage:
            def __enter__(self):
                self.start = time.perf_counter()
                self.started = datetime.now(timezone.utc).isoformat(timespec="seconds")

            def __exit__(self, *exc):
                clock.stages.append({"stage": name, "start": self.started,
                                     "duration_s": round(time.perf_counter() - self.start, 3)})

        return _Stage()


@dataclass
class Loaded:
    """Screened, projected fixes with their steps and per-animal summary."""

    read: ReadResult
    fixes: pd.DataFrame
    rejected: pd.DataFrame
    projections: dict
    steps: pd.DataFrame | None = None
    summary: pd.DataFrame | None = None
    kept: int | None = None  # input rows kept, when ``fixes`` does not hold them all (streamed runs)

    def n_kept(self) -> int:
        return n_kept(self.fixes) if self.kept is None else self.kept


@dataclass
class RunResult:
    loaded: Loaded
    tables: dict = field(default_factory=dict)
    animals: list = field(default_factory=list)
    out_dir: Path | None = None
    stages: list = field(default_factory=list)


def load(paths, cfg: Config, clock: StageClock | None = None, with_steps: bool = True) -> Loaded:
    """Read, screen and project the inputs; add steps and the summary."""
    clock = clock or StageClock()
    with clock("read"):
        read = read_inputs(paths, cfg)
    with clock("screen"):
        fixes, rejected = screen(read.rows, cfg)
        rejected = combine_rejected(read.rejected, rejected)
    if len(fixes) == 0:
        raise NothingKept(f"no fix in {_names(paths)} passed screening ({len(rejected)} rows rejected)", rejected)
    with clock("project"):
        fixes, projections = prepare_fixes(fixes, cfg, read.input_crs)
    loaded = Loaded(read=read, fixes=fixes, rejected=rejected, projections=projections)
    if with_steps:
        with clock("steps"):
            loaded.steps = compute_steps(fixes)
            loaded.summary = summarise(fixes, loaded.steps, rejected)
    return loaded


def combine_rejected(read_rejected: pd.DataFrame, screen_rejected: pd.DataFrame) -> pd.DataFrame:
    """Rows rejected while reading, then by the screen; line numbers stay whole numbers."""
    rejected = pd.concat([read_rejected, screen_rejected], ignore_index=True) if len(read_rejected) \
        else screen_rejected.reset_index(drop=True)
    if len(rejected):
        rejected["source_row"] = pd.to_numeric(rejected["source_row"]).astype("Int64")
    return rejected


def _names(paths) -> str:
    names = [str(p) for p in paths]
    return ", ".join(names[:3]) + (f" and {len(names) - 3} more" if len(names) > 3 else "")


@dataclass(frozen=True)
class AnimalTask:
    """The picklable unit of per-animal work."""

    animal_id: str
    fixes: pd.DataFrame
    steps: pd.DataFrame
    nominal_dt_s: float
    stages: tuple
    cfg: Config


def analyse_animal(task: AnimalTask) -> AnimalResult:
    """Fit models, run null tests and estimate ranges for one animal."""
    cfg, aid = task.cfg, task.animal_id
    result = AnimalResult(animal_id=aid, fits=pd.DataFrame(), null_tests=pd.DataFrame(),
                          residency={}, ranges=pd.DataFrame())
    if "fit" in task.stages:
        from roamstat import models

        fitted = models.fit_animal(task.steps, cfg, animal_rng(cfg.seed, aid, "fit"))
        result.fitted = fitted
        result.fits = _with_id(fitted.rows, aid)
        if "null" in task.stages:
            from roamstat import compare

            rows, curves = compare.test_animal(analysed_track(task.fixes), task.steps, fitted, task.nominal_dt_s,
                                               cfg, animal_rng(cfg.seed, aid, "null"))
            result.null_tests = _with_id(rows, aid)
            result.null_curves = curves
    if "ranges" in task.stages:
        from roamstat import ranges

        row, curve = ranges.residency_animal(analysed_track(task.fixes), cfg)
        result.residency = {"animal_id": aid, **row}
        result.residency_curve = curve
        range_rows, features, extras = ranges.ranges_animal(task.fixes, cfg)  # keeps observed fixes itself
        result.ranges = _with_id(pd.DataFrame(range_rows), aid)
        result.features = features
        result.range_extras = extras
    return result


def analysed_track(fixes: pd.DataFrame) -> pd.DataFrame:
    """The fixes the steps were computed on (the regular grid when resampling)."""
    return fixes[fixes["on_grid"]].reset_index(drop=True) if "on_grid" in fixes else fixes


def observed_fixes(fixes: pd.DataFrame) -> pd.DataFrame:
    """Real fixes only (home ranges are estimated from observations, not interpolations)."""
    return fixes[~fixes["interpolated"]].reset_index(drop=True) if "interpolated" in fixes else fixes


def n_kept(fixes: pd.DataFrame) -> int:
    """Input rows kept (interpolated grid rows are not input rows)."""
    return int(len(observed_fixes(fixes)))


def _with_id(rows: pd.DataFrame, animal_id: str) -> pd.DataFrame:
    rows = pd.DataFrame(rows).reset_index(drop=True)
    rows.insert(0, "animal_id", animal_id)
    return rows


def animal_tasks(loaded: Loaded, stages: tuple, cfg: Config) -> list[AnimalTask]:
    """One task per animal, in sorted id order (the order of every output table)."""
    nominal = loaded.summary.set_index("animal_id")["nominal_dt_s"]
    steps_by = dict(tuple(loaded.steps.groupby("animal_id", sort=True)))
    tasks = []
    for aid, fixes_a in loaded.fixes.groupby("animal_id", sort=True):
        steps_a = steps_by.get(aid, loaded.steps.iloc[0:0])
        tasks.append(AnimalTask(str(aid), fixes_a.reset_index(drop=True), steps_a.reset_index(drop=True),
                                float(nominal.get(aid, float("nan"))), stages, cfg))
    return tasks


def analyse(loaded: Loaded, stages: tuple, cfg: Config, clock: StageClock) -> tuple[dict, list]:
    """Per-animal stages in parallel, then the deployment-level ones."""
    per_animal = [s for s in stages if s in ("fit", "null", "ranges")]
    if not per_animal:
        return {}, []
    with clock("analyse:" + "+".join(per_animal)):
        animals = analyse_animals(loaded, stages, cfg)
    with clock("deployment"):
        tables = deployment_tables(animals, stages, cfg)
    return tables, animals


def analyse_animals(loaded: Loaded, stages: tuple, cfg: Config) -> list[AnimalResult]:
    """The per-animal stages for every animal of ``loaded``, in sorted id order."""
    _import_stage_modules(stages)
    return map_animals(analyse_animal, animal_tasks(loaded, tuple(stages), cfg),
                       workers=cfg.workers, scheduler=cfg.scheduler, quiet=cfg.quiet)


def deployment_tables(animals: list[AnimalResult], stages: tuple, cfg: Config) -> dict:
    """Tables across animals: fits, null tests with q-values and verdicts, residency, ranges."""
    tables: dict = {}
    if "fit" in stages:
        tables["fits"] = concat_tables([a.fits for a in animals])
    if "null" in stages:
        from roamstat import compare

        tables["null_tests"] = compare.finalise(concat_tables([a.null_tests for a in animals]), cfg)
    if "ranges" in stages:
        from roamstat import ranges

        residency = pd.DataFrame([a.residency for a in animals])
        tables["residency"] = ranges.finalise_residency(residency, tables.get("null_tests"))
        tables["ranges"] = concat_tables([a.ranges for a in animals])
        tables["ranges_geojson"] = ranges.feature_collection([f for a in animals for f in a.features])
    return tables


def _import_stage_modules(stages) -> None:
    """Import the stage packages before workers start, so forked workers inherit them loaded."""
    import importlib

    for stage, module in (("fit", "roamstat.models"), ("null", "roamstat.compare"), ("ranges", "roamstat.ranges")):
        if stage in stages:
            importlib.import_module(module)


def concat_tables(frames: list[pd.DataFrame], empty_columns=()) -> pd.DataFrame:
    """Non-empty frames stacked, or an empty table with the given columns."""
    frames = [f for f in frames if len(f)]
    return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame(columns=list(empty_columns))


#: Everything a run may leave in its folder; a run interrupted before its manifest leaves only these.
OUTPUT_NAMES = {f"{stem}.{ext}" for stem in ("fixes", "rejected", "steps", "summary", "fits", "null_tests",
                                             "residency", "ranges") for ext in ("csv", "parquet")} | \
    {"ranges.geojson", "report.html", "figures", MANIFEST}


def _earlier_output(out_dir: Path) -> bool:
    """An empty folder, one with a manifest, or one holding only roamstat outputs (an interrupted run)."""
    if (out_dir / MANIFEST).is_file():
        return True
    return all(p.name in OUTPUT_NAMES or (p.name.startswith(".") and p.name.endswith(".part")) for p in out_dir.iterdir())


def prepare_out_dir(out_dir: Path, inputs, force: bool) -> Path:
    """Refuse an output folder that is an input, or holds foreign files (unless --force)."""
    out_dir = Path(out_dir)
    resolved_inputs = {Path(p).resolve() for p in inputs}
    if out_dir.resolve() in resolved_inputs:
        raise RoamstatError(f"--out {out_dir} is one of the input files; choose a new folder for the outputs")
    if out_dir.exists() and not out_dir.is_dir():
        raise RoamstatError(f"--out {out_dir} exists and is not a folder; choose a new folder for the outputs")
    if out_dir.is_dir() and not _earlier_output(out_dir) and not force:
        raise RoamstatError(
            f"--out {out_dir} is a non-empty folder that holds no earlier roamstat output; "
            "choose a new or empty folder, or add --force to write into it"
        )
    out_dir.mkdir(parents=True, exist_ok=True)
    return out_dir


def run_command(command: str, paths, out_dir, cfg: Config, argv: list[str] | None = None) -> RunResult:
    """Run one command's stages and write its outputs into ``out_dir``."""
    check_config(cfg)
    if cfg.low_memory:
        from roamstat.stream import run_streamed

        try:
            return run_streamed(command, paths, out_dir, cfg, argv)
        except NothingKept as exc:
            all_rejected(exc, Path(out_dir), cfg)
    stages = COMMAND_STAGES[command]
    if "report" in stages and not cfg.report:
        stages = tuple(s for s in stages if s != "report")
    out_dir = prepare_out_dir(Path(out_dir), paths, cfg.force)
    clock = StageClock()
    started = time.perf_counter()
    try:
        loaded = load(paths, cfg, clock, with_steps="steps" in stages)
    except NothingKept as exc:
        all_rejected(exc, out_dir, cfg)
    tables, animals = analyse(loaded, stages, cfg, clock)
    result = RunResult(loaded=loaded, tables=tables, animals=animals, out_dir=out_dir, stages=clock.stages)
    with clock("write"):
        write_tables(out_dir, loaded, tables, cfg)
    if "report" in stages:
        from roamstat.report import write_report

        with clock("report"):
            write_report(out_dir, report_tables(loaded, tables, cfg), animals, run_info(loaded, cfg, argv), cfg)
    manifest = build_manifest(command, loaded, cfg, argv, clock.stages, time.perf_counter() - started)
    write_json(manifest, out_dir / MANIFEST)
    return result


def all_rejected(exc: NothingKept, out_dir: Path, cfg: Config) -> None:
    """Write rejected.csv for an input with no usable fix, then say where it is."""
    path = out_dir / output_name("rejected", cfg)
    write_table(rejected_for_output(exc.rejected, cfg), path, cfg)
    raise RoamstatError(f"{exc}; every row's reason is in {path}; relax the screening options "
                        "that rejected them, or switch a rule off with --keep CODE") from None


def output_name(stem: str, cfg: Config) -> str:
    return f"{stem}.parquet" if cfg.output_format == "parquet" else f"{stem}.csv"


def write_table(table: pd.DataFrame, path: Path, cfg: Config) -> None:
    if cfg.output_format == "parquet":
        from roamstat.io.parquet import write_parquet

        write_parquet(table, path)
    else:
        write_csv(table, path)


def write_tables(out_dir: Path, loaded: Loaded, tables: dict, cfg: Config) -> None:
    named = {"fixes": fixes_for_output(loaded.fixes, cfg, loaded.read), "rejected": rejected_for_output(loaded.rejected, cfg)}
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


def fixes_for_output(fixes: pd.DataFrame, cfg: Config, read: ReadResult | None = None) -> pd.DataFrame:
    """fixes.csv: parsed columns plus the input's other columns under their own names.

    Original columns already parsed into a standard column (time, coordinates,
    id, DOP, ...) are not repeated; the rest pass through unchanged.  With
    masking, positions are replaced by coordinates relative to a hidden origin.
    """
    if cfg.mask_locations:
        from roamstat.ranges import mask_fixes

        return mask_fixes(fixes, cfg)  # also drops every original column: raw text can spell positions
    if read is not None:
        parsed = {f"orig_{col}" for info in read.files for col in info.get("parsed_columns", [])}
        fixes = fixes.drop(columns=[c for c in fixes.columns if c in parsed])
        rename = {c: c[5:] for c in fixes.columns if str(c).startswith("orig_") and c[5:] not in fixes.columns}
        fixes = fixes.rename(columns=rename)
    return fixes


def report_tables(loaded: Loaded, tables: dict, cfg: Config) -> dict:
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
    """Kept and rejected fixes in one planar frame per map, masked together when asked."""
    from roamstat.geo import project_lonlat

    fixes = observed_fixes(loaded.fixes)[["animal_id", "lat", "lon", "x_m", "y_m"]].copy()
    rejected = usable_rejected(loaded)
    if cfg.mask_locations:
        from roamstat.ranges import mask_fixes

        both = pd.concat([fixes.assign(kept=True), rejected.assign(kept=False)], ignore_index=True)
        both = mask_fixes(both.drop(columns=["x_m", "y_m"]), cfg)
        kept = both["kept"].astype(bool)
        return both[kept].drop(columns="kept"), both[~kept].drop(columns="kept")
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


def visible_projections(loaded: Loaded, cfg: Config) -> dict:
    """Per-animal frames, or a placeholder when masking (each frame is centred on a real fix)."""
    if cfg.mask_locations:
        return {aid: "hidden (--mask-locations)" for aid in loaded.projections}
    return loaded.projections


def run_info(loaded: Loaded, cfg: Config, argv) -> dict:
    return {
        "version": __version__,
        "command_line": " ".join(argv or []),
        "seed": cfg.seed,
        "n_read": loaded.read.n_read,
        "n_kept": loaded.n_kept(),
        "n_rejected": int(len(loaded.rejected)),
        "projections": visible_projections(loaded, cfg),
        "masked": cfg.mask_locations,
        "inputs": [f["path"] for f in loaded.read.files],
    }


def package_versions() -> dict:
    names = ["numpy", "pandas", "scipy", "pyproj", "matplotlib", "shapely", "tqdm", "pyarrow", "dask", "distributed"]
    versions = {}
    for name in names:
        try:
            versions[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            continue
    return versions


def build_manifest(command, loaded: Loaded, cfg: Config, argv, stages, duration_s) -> dict:
    """Everything needed to reproduce the run."""
    read = loaded.read
    return {
        "roamstat": __version__,
        "command": command,
        "command_line": ["roamstat", *(argv or [])],
        "parameters": cfg.as_dict(),
        "seed": cfg.seed,
        "inputs": [{k: f[k] for k in ("path", "size_bytes", "sha256", "encoding", "delimiter", "columns", "n_rows", "notes") if k in f}
                   for f in read.files],
        "time_zone_of_naive_times": read.tz_note,
        "rows": {"read": read.n_read, "kept": loaded.n_kept(), "rejected": int(len(loaded.rejected))},
        "rejected_by_reason": {str(k): int(v) for k, v in loaded.rejected["reason_code"].value_counts().sort_index().items()}
        if len(loaded.rejected) else {},
        "projections": visible_projections(loaded, cfg),
        "python": platform.python_version(),
        "platform": platform.platform(),
        "packages": package_versions(),
        "stages": stages,
        "duration_s": round(duration_s, 3),
        "executable": sys.executable,
    }
