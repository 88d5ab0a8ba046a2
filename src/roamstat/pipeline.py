"""The pipeline: input files to screened fixes, per-animal results and deployment tables.

Each step is a plain function of tables.  Which rows a stage sees is decided
in :mod:`roamstat.rows`; where the tables go is :mod:`roamstat.outputs`;
the order of a whole run is :mod:`roamstat.run`.
"""

from __future__ import annotations

import importlib
import time
import threading
from concurrent.futures import Future
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from roamstat import rows
from roamstat.config import Config
from roamstat.errors import NothingKept
from roamstat.io.read import ReadResult, read_inputs
from roamstat.parallel import AnimalExecutor
from roamstat.results import AnimalResult
from roamstat.screen import screen
from roamstat.seeds import animal_rng
from roamstat.track import compute_steps, prepare_fixes, summarise

if TYPE_CHECKING:  # the ranges package loads only when a command needs it
    from roamstat.ranges.mask import HiddenOrigin

#: Which stages each command runs, in pipeline order.
COMMAND_STAGES = {
    "clean": (),
    "steps": ("steps",),
    "fit": ("steps", "motion", "fit"),
    "states": ("steps", "states"),
    "nulltest": ("steps", "motion", "fit", "null"),
    "ranges": ("steps", "motion", "ranges"),
    "run": ("steps", "motion", "fit", "states", "null", "ranges", "report"),
}
PER_ANIMAL_STAGES = ("motion", "fit", "states", "null", "ranges")


def command_stages(command: str, cfg: Config) -> tuple:
    """The stages ``command`` runs (the report only when ``cfg.report``).

    A null test with ``--null states`` also runs the states stage, which fits
    the model that null walks (and writes it, so the tested model is on record).
    """
    stages = [s for s in COMMAND_STAGES[command] if s != "report" or cfg.report]
    if "null" in stages and "states" in cfg.nulls and "states" not in stages:
        stages.insert(stages.index("null"), "states")
    return tuple(stages)


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
    """Screened, projected fixes with their steps and per-animal summary.

    ``origin`` is the run's one hidden origin when locations are masked.
    ``kept`` counts the input rows kept when ``fixes`` does not hold them all
    (streamed runs).
    """

    read: ReadResult
    fixes: pd.DataFrame
    rejected: pd.DataFrame
    projections: dict[str, str]
    steps: pd.DataFrame | None = None
    summary: pd.DataFrame | None = None
    kept: int | None = None
    origin: HiddenOrigin | None = None

    def n_kept(self) -> int:
        return rows.n_observed(self.fixes) if self.kept is None else self.kept


@dataclass
class RunResult:
    """What a command computed (tables are also written to ``out_dir``)."""

    loaded: Loaded
    tables: dict = field(default_factory=dict)
    animals: list[AnimalResult] = field(default_factory=list)
    out_dir: Path | None = None
    stages: list[dict] = field(default_factory=list)


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
    origin: HiddenOrigin | None = None
    projection: str | None = None  # the animal's planar frame (CRS text), for smoothed positions' lat/lon


def analyse_animal(task: AnimalTask) -> AnimalResult:
    """Models, behavioural states, null tests and ranges of one animal (rows per :mod:`roamstat.rows`)."""
    from roamstat.too_short import is_too_short, short_animal

    if is_too_short(task):  # every stage would only say so: its rows directly
        return short_animal(task)
    cfg, aid = task.cfg, task.animal_id
    result = AnimalResult(animal_id=aid)
    # motion and ranges see the same located fixes: selected and sorted once
    located = rows.located(task.fixes) if {"motion", "ranges"} & set(task.stages) else None
    alongside = Alongside(_runs_alongside(task))
    # states and motion need no other stage: a big animal runs them on threads beside the fits (their
    # compiled kernels release the GIL); each stage draws from its own generator, so the results are
    # those of the serial order
    states = alongside(_states_stage, task) if "states" in task.stages else None
    motion = alongside(_motion_stage, task, located, result) if "motion" in task.stages else None
    if "fit" in task.stages:
        from roamstat import models

        result.fitted = models.fit_animal(task.steps, cfg, animal_rng(cfg.seed, aid, "fit"))
        result.fits = _with_id(result.fitted.rows, aid)
    if motion is not None:
        motion.result()
    if states is not None and "states" in cfg.nulls:
        _with_states(result, states.result())  # the ``states`` null walks this model: wait for it
    if "null" in task.stages:
        from roamstat import compare

        # test_animal picks its rows itself: on-grid for the step-based nulls, observed for ctcrw
        null_rows, curves = compare.test_animal(task.fixes, task.steps, result.fitted, task.nominal_dt_s,
                                                cfg, animal_rng(cfg.seed, aid, "null"), motion=result.motion)
        result.null_tests = _with_id(null_rows, aid)
        result.null_curves = curves
    if "ranges" in task.stages:
        from roamstat import ranges

        assert located is not None  # selected above whenever the ranges stage runs
        row, curve = ranges.residency_animal(located, cfg)
        result.residency = {"animal_id": aid, **row}
        result.residency_curve = curve
        from roamstat.ranges.estimate import MIN_FIXES, too_few_fixes

        if len(located) < MIN_FIXES:  # what ranges_animal returns, without selecting the located fixes again
            range_rows, features, extras = too_few_fixes(len(located), cfg.mask_locations)
        else:
            range_rows, features, extras = ranges.ranges_animal(located, cfg, task.origin,
                                                                model=_range_model(task, result))
        result.ranges = _with_id(range_rows, aid)
        result.features = features
        result.range_extras = extras
    if states is not None and result.states is None:
        _with_states(result, states.result())
    return result


#: Steps above which an animal's independent stages run side by side when ``--workers`` > 1 (judgement, no
#: source: below it the stages take seconds and threads would only add overhead).
ALONGSIDE_STEPS = 50_000


def _runs_alongside(task: AnimalTask) -> bool:
    return task.cfg.workers > 1 and len(task.steps) > ALONGSIDE_STEPS


class Alongside:
    """``alongside(f, *args)``: ``f`` started on a thread (when ``threaded``) or run now; ``.result()`` waits.

    Every started stage is waited for by its ``.result()``; the threads are daemons, so an error or a
    stop in between does not wait for them and Ctrl-C and SIGTERM stay prompt.
    """

    def __init__(self, threaded: bool) -> None:
        self.threaded = threaded

    def __call__(self, func, *args) -> Future:
        future: Future = Future()
        if not self.threaded:
            future.set_result(func(*args))  # an exception propagates here, as in the serial order
            return future

        def work() -> None:
            try:
                future.set_result(func(*args))
            except BaseException as exc:  # handed to whoever waits for the result
                future.set_exception(exc)

        threading.Thread(target=work, name=f"roamstat-{func.__name__}", daemon=True).start()
        return future


def _states_stage(task: AnimalTask):
    """The animal's state models (states.csv and state_models.csv rows, the selected model)."""
    from roamstat import states

    return states.fit_animal_states(task.steps, task.cfg, animal_rng(task.cfg.seed, task.animal_id, "states"))


def _with_states(result: AnimalResult, states) -> None:
    result.states = states
    if result.fitted is not None:
        result.fitted.states = states.best  # the model the ``states`` null walks


def _motion_stage(task: AnimalTask, located: pd.DataFrame, result: AnimalResult) -> None:
    """Fit the motion models once on the observed fixes: motion_models.csv and track_smoothed.csv rows."""
    from roamstat.motion import motion_table
    from roamstat.motion.animal import fit_animal_motion, smoothed_track
    from roamstat.track import duration_s

    cfg = task.cfg
    result.motion = fit_animal_motion(located, cfg)
    if not result.motion.fits and not cfg.mask_locations:  # too few fixes: no rows (concat_tables keeps the columns)
        return
    result.motion_models = _with_id(motion_table(result.motion.fits), task.animal_id)
    predict_s = duration_s(cfg.predict, "--predict") if cfg.predict else None
    smoothed = smoothed_track(result.motion, task.animal_id, predict_s)
    if len(smoothed) and task.projection is not None:
        from roamstat.geo import unproject_xy

        smoothed["lon"], smoothed["lat"] = unproject_xy(smoothed["x_m"].to_numpy(float),
                                                        smoothed["y_m"].to_numpy(float), task.projection)
    if cfg.mask_locations:
        from roamstat.ranges import mask_fixes

        if task.origin is None:
            raise ValueError("masked output without the run's hidden origin (outputs.masking_origin)")
        smoothed = mask_fixes(smoothed, task.origin)  # the run's one origin; lat, lon dropped
    result.smoothed = smoothed


def _range_model(task: AnimalTask, result: AnimalResult):
    """The best motion model for the ranges, its range scale corrected for small-sample bias."""
    from roamstat.ranges.model import debiased_fit, from_motion_fit

    motion = result.motion
    if motion is None:
        return None
    rng = animal_rng(task.cfg.seed, task.animal_id, "ranges")
    return from_motion_fit(debiased_fit(motion.best, motion.t_s, motion.error, rng))


def _with_id(table: pd.DataFrame | list[dict], animal_id: str) -> pd.DataFrame:
    """``table`` (a frame or plain rows) with ``animal_id`` as its first column."""
    if isinstance(table, list) and table:  # plain rows: one construction, cheaper than an insert
        return pd.DataFrame([{"animal_id": animal_id, **row} for row in table])
    table = pd.DataFrame(table).reset_index(drop=True)
    table.insert(0, "animal_id", pd.array([animal_id] * len(table)))  # an array: a scalar is broadcast slowly
    return table


def animal_tasks(loaded: Loaded, stages: tuple, cfg: Config) -> list[AnimalTask]:
    """One task per animal, in sorted id order (the order of every output table)."""
    # every command with a per-animal stage runs the steps stage first, which fills both
    assert loaded.summary is not None and loaded.steps is not None
    nominal = dict(zip(loaded.summary["animal_id"], loaded.summary["nominal_dt_s"]))
    steps_by = dict(_blocks(loaded.steps))
    tasks = []
    for aid, fixes_a in _blocks(loaded.fixes):
        steps_a = steps_by[aid] if aid in steps_by else loaded.steps.iloc[0:0].reset_index(drop=True)
        tasks.append(AnimalTask(str(aid), fixes_a, steps_a,
                                float(nominal.get(aid, float("nan"))), stages, cfg, loaded.origin,
                                loaded.projections.get(aid)))
    return tasks


def _blocks(table: pd.DataFrame):
    """(animal id, its rows with a fresh index) in sorted id order, rows in table order.

    Positional slices of the table sorted by animal (usually it already is): a groupby builds
    each group by fancy indexing, which costs far more per animal.
    """
    codes, ids = pd.factorize(table["animal_id"], sort=True)
    if np.any(codes[1:] < codes[:-1]):
        order = np.argsort(codes, kind="stable")
        table, codes = table.iloc[order], codes[order]
    starts = np.searchsorted(codes, np.arange(len(ids) + 1))
    for code, aid in enumerate(ids):  # missing ids (code -1) are dropped, as groupby does
        block = table.iloc[starts[code]:starts[code + 1]]
        block.index = pd.RangeIndex(len(block))  # a fresh index on the new slice: cheaper than reset_index's copy
        yield aid, block


def analyse(loaded: Loaded, stages: tuple, cfg: Config, clock: StageClock | None = None,
            executor: AnimalExecutor | None = None) -> tuple[dict, list[AnimalResult]]:
    """Per-animal stages on ``executor`` (one opened for this call when None), then the deployment-level ones."""
    per_animal = [s for s in stages if s in PER_ANIMAL_STAGES]
    if not per_animal:
        return {}, []
    clock = clock or StageClock()
    with clock("analyse:" + "+".join(per_animal)):
        if executor is None:
            with AnimalExecutor(cfg.workers, cfg.scheduler, cfg.quiet) as own:
                animals = analyse_animals(loaded, stages, cfg, own)
        else:
            animals = analyse_animals(loaded, stages, cfg, executor)
    with clock("deployment"):
        tables = deployment_tables(animals, stages, cfg, loaded.summary)
    return tables, animals


def analyse_animals(loaded: Loaded, stages: tuple, cfg: Config, executor: AnimalExecutor) -> list[AnimalResult]:
    """The per-animal stages for every animal of ``loaded``, in sorted id order."""
    _import_stage_modules(stages)
    return executor.map(analyse_animal, animal_tasks(loaded, tuple(stages), cfg))


def deployment_tables(animals: list[AnimalResult], stages: tuple, cfg: Config,
                      summary: pd.DataFrame | None = None) -> dict:
    """Tables across animals: fits, null tests with q-values and verdicts, residency, ranges.

    With ``summary``, also ``summary`` with the power-law-tail decision joined (:func:`with_tail`).
    """
    tables: dict = {}
    if "motion" in stages:
        from roamstat.motion import TABLE_COLUMNS
        from roamstat.motion.animal import SMOOTHED_COLUMNS

        tables["motion_models"] = concat_tables([a.motion_models for a in animals], ("animal_id", *TABLE_COLUMNS))
        tables["track_smoothed"] = concat_tables([a.smoothed for a in animals], SMOOTHED_COLUMNS)
    if "fit" in stages:
        tables["fits"] = concat_tables([a.fits for a in animals])
        if summary is not None:
            tables["summary"] = with_tail(summary, animals)
    if "states" in stages:
        from roamstat.states import decoded_columns, model_columns

        max_k = max(cfg.state_counts)
        tables["states"] = concat_tables([a.states.decoded for a in animals if a.states], decoded_columns(max_k))
        tables["state_models"] = concat_tables([a.states.rows for a in animals if a.states], model_columns(max_k))
    if "null" in stages:
        from roamstat import compare

        tables["null_tests"] = compare.finalise(concat_tables([a.null_tests for a in animals]), cfg)
    if "ranges" in stages:
        from roamstat import ranges

        residency = pd.DataFrame([a.residency for a in animals])
        tables["ranges"] = concat_tables([a.ranges for a in animals])
        tables["residency"] = ranges.finalise_residency(residency, tables.get("null_tests"),
                                                        tables.get("motion_models"), tables["ranges"])
        tables["ranges_geojson"] = ranges.feature_collection([f for a in animals for f in a.features])
    return tables


#: Columns the fit stage adds to summary.csv.
TAIL_COLUMNS = ("tail_supported", "tail_reason")


def with_tail(summary: pd.DataFrame, animals: list[AnimalResult]) -> pd.DataFrame:
    """``summary`` plus ``tail_supported`` (bool) and ``tail_reason`` (why not; "" when supported)."""
    fitted = {a.animal_id: a.fitted for a in animals if a.fitted is not None}
    ids = summary["animal_id"].astype(str)
    out = summary.copy()
    out["tail_supported"] = ids.map(lambda i: bool(fitted[i].tail_supported) if i in fitted else False).astype(bool)
    out["tail_reason"] = ids.map(lambda i: fitted[i].tail_reason if i in fitted else "not fitted")
    return out


def _import_stage_modules(stages) -> None:
    """Import the stage packages before workers start, so forked workers inherit them loaded."""
    for stage, module in (("motion", "roamstat.motion"), ("fit", "roamstat.models"), ("states", "roamstat.states"),
                          ("null", "roamstat.compare"), ("ranges", "roamstat.ranges"), ("report", "roamstat.report")):
        if stage in stages:
            importlib.import_module(module)


def concat_tables(parts: list, empty_columns=()) -> pd.DataFrame:
    """Non-empty parts stacked; else the first part's (empty) layout, or the given columns without one.

    A part is a frame or a list of plain rows (dicts, as :mod:`roamstat.too_short` gives): each run of
    consecutive row lists becomes one frame, so thousands of short animals cost one table construction.
    """
    frames, pending = [], []
    for part in parts:
        if isinstance(part, list):
            pending += part
            continue
        if pending:
            frames.append(pd.DataFrame(pending))
            pending = []
        frames.append(part)
    if pending:
        frames.append(pd.DataFrame(pending))
    filled = [f for f in frames if len(f)]
    if filled:
        return pd.concat(filled, ignore_index=True)
    laid_out = [f for f in frames if len(f.columns)]  # a stage that skipped a short animal leaves no columns
    return laid_out[0].reset_index(drop=True) if laid_out else pd.DataFrame(columns=list(empty_columns))
