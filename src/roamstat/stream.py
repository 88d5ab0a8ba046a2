"""The pipeline animal by animal, for deployments too big to hold in memory at once.

``--low-memory`` reads each input in record chunks (:mod:`roamstat.io.chunks`),
spills every animal's rows to its own pickled parts (exact dtypes) in a scratch folder
inside ``--out``, then screens, projects, measures and analyses a batch of
animals at a time, appending to fixes.csv and steps.csv as it goes.  Peak
memory then grows with the largest animal (times the batch size), not with
the file.  The tables are byte-identical to those of an ordinary run: every
per-animal stage sees exactly the rows it would see in a whole-file run.
"""

from __future__ import annotations

import hashlib
import shutil
import tempfile
import time
from pathlib import Path

import pandas as pd

from roamstat.config import Config
from roamstat.errors import NothingKept, RoamstatError
from roamstat.io.chunks import read_in_chunks
from roamstat.io.read import REJECTED_BASE, ReadResult
from roamstat.io.write import StreamingCsv, write_json
from roamstat.run import (MANIFEST, COMMAND_STAGES, Loaded, RunResult, StageClock, concat_tables,
                          analyse_animals, build_manifest, combine_rejected,
                          deployment_tables, fixes_for_output, n_kept, output_name, prepare_out_dir,
                          rejected_for_output, report_tables, run_info, write_named)
from roamstat.screen import screen
from roamstat.track import compute_steps, prepare_fixes, summarise

CHUNK_RECORDS = 200_000  # records read at a time
BATCH_ANIMALS = 16  # animals screened and analysed together


def run_streamed(command: str, paths, out_dir, cfg: Config, argv=None,
                 chunk_records: int = CHUNK_RECORDS, batch_animals: int = BATCH_ANIMALS) -> RunResult:
    """Like :func:`roamstat.run.run_command`, holding a batch of animals at a time."""
    if cfg.output_format != "csv":
        raise RoamstatError("--low-memory writes CSV tables; drop --format parquet or --low-memory")
    stages = tuple(s for s in COMMAND_STAGES[command] if s != "report" or cfg.report)
    out_dir = prepare_out_dir(Path(out_dir), paths, cfg.force)
    clock, started = StageClock(), time.perf_counter()
    scratch = Path(tempfile.mkdtemp(prefix=".spill-", dir=out_dir))
    try:
        with clock("read"):
            spill = _spill(paths, cfg, scratch, chunk_records)
        result = _process(command, spill, stages, out_dir, cfg, clock, batch_animals)
    finally:
        shutil.rmtree(scratch, ignore_errors=True)
    loaded, tables, animals = result
    if "report" in stages:
        from roamstat.report import write_report

        with clock("report"):
            write_report(out_dir, report_tables(loaded, tables, cfg), animals, run_info(loaded, cfg, argv), cfg)
    write_json(build_manifest(command, loaded, cfg, argv, clock.stages, time.perf_counter() - started),
               out_dir / MANIFEST)
    return RunResult(loaded=loaded, tables=tables, animals=animals, out_dir=out_dir, stages=clock.stages)


class _Spill:
    """Where each animal's rows went, plus what reading learnt."""

    def __init__(self, folder: Path):
        self.folder = folder
        self.parts: dict[str, list[Path]] = {}
        self.columns: list[str] = []
        self.read_rejected: list[pd.DataFrame] = []
        self.files: list[dict] = []
        self.n_read = 0
        self.input_crs = None
        self.tz_notes: set[str] = set()

    def add(self, rows: pd.DataFrame) -> None:
        self.columns += [c for c in rows.columns if c not in self.columns]
        for aid, group in rows.groupby("animal_id", sort=False):
            key = hashlib.sha256(str(aid).encode("utf-8", "surrogatepass")).hexdigest()[:24]
            part = self.folder / f"{key}-{len(self.parts.get(aid, []))}.pkl"
            group.to_pickle(part)
            self.parts.setdefault(aid, []).append(part)

    def rows_of(self, animals) -> pd.DataFrame:
        frames = [pd.read_pickle(p) for aid in animals for p in self.parts[aid]]
        # Rows in file and line order, columns as a whole-file read would lay them out.
        return pd.concat(frames, ignore_index=True).reindex(columns=self.columns)


def _spill(paths, cfg: Config, scratch: Path, chunk_records: int) -> _Spill:
    spill = _Spill(scratch)
    for path in paths:
        file_info = None
        for part in read_in_chunks(str(path), cfg, chunk_records):
            spill.add(part.rows)
            if len(part.rejected):
                spill.read_rejected.append(part.rejected)
            spill.n_read += part.n_read
            spill.input_crs = part.input_crs
            if part.tz_note:
                spill.tz_notes.add(part.tz_note)
            file_info = _merge_info(file_info, part.files[0])
        spill.files.append(file_info)
    if spill.n_read == 0 or not spill.parts:
        raise RoamstatError(f"{', '.join(map(str, paths))}: no data row could be read; check with 'roamstat inspect'")
    return spill


def _merge_info(total: dict | None, chunk: dict) -> dict:
    """One file's description from its chunks' (path, size and hash are the file's already)."""
    if total is None:
        return dict(chunk)
    total["n_rows"] += chunk["n_rows"]
    total["notes"] = list(dict.fromkeys([*total.get("notes", []), *chunk.get("notes", [])]))
    return total


def _process(command, spill: _Spill, stages, out_dir: Path, cfg: Config, clock: StageClock, batch_animals: int):
    read = ReadResult(rows=pd.DataFrame(), rejected=concat_tables(spill.read_rejected, REJECTED_BASE), files=spill.files,
                      n_read=spill.n_read, input_crs=spill.input_crs, tz_note="; ".join(sorted(spill.tz_notes)))
    writers = {"fixes": StreamingCsv(out_dir / output_name("fixes", cfg))}
    if "steps" in stages:
        writers["steps"] = StreamingCsv(out_dir / output_name("steps", cfg))
    screened, summaries, animals, projections, kept = [], [], [], {}, 0
    ids = sorted(spill.parts)
    try:
        for first in range(0, len(ids), batch_animals):
            batch = ids[first:first + batch_animals]
            with clock("screen+project+steps"):
                rows = spill.rows_of(batch)
                fixes, rejected = screen(rows, cfg)
                screened.append(rejected)
                if not len(fixes):
                    continue
                fixes, frames = prepare_fixes(fixes, cfg, spill.input_crs)
                projections.update(frames)
                kept += n_kept(fixes)
                part = Loaded(read=read, fixes=fixes, rejected=_rejected_of(batch, read.rejected, rejected),
                              projections=frames)
                writers["fixes"].append(fixes_for_output(fixes, cfg, read))
                if "steps" in stages:
                    part.steps = compute_steps(fixes)
                    part.summary = summarise(fixes, part.steps, part.rejected)
                    writers["steps"].append(part.steps)
                    summaries.append(part.summary)
            if any(s in stages for s in ("fit", "null", "ranges")):
                with clock("analyse"):
                    animals += analyse_animals(part, stages, cfg)
        if not kept:
            raise NothingKept(f"no fix passed screening ({read.n_read} rows rejected)",
                              combine_rejected(read.rejected, concat_tables(screened, REJECTED_BASE)))
        for writer in writers.values():
            writer.close()
    except BaseException:
        for writer in writers.values():
            writer.abandon()
        raise
    screen_rejected = concat_tables(screened, REJECTED_BASE)
    if len(screen_rejected):
        screen_rejected = screen_rejected.sort_values(["source_file", "source_row"], kind="stable")
    rejected = combine_rejected(read.rejected, screen_rejected)
    # Track maps fall back to the ranges stage's own points: the fixes are on disk, not in memory.
    loaded = Loaded(read=read, fixes=pd.DataFrame(columns=["animal_id", "lat", "lon", "x_m", "y_m"]), rejected=rejected,
                    projections=dict(sorted(projections.items())), kept=kept,
                    summary=concat_tables(summaries) if summaries else None)
    with clock("deployment"):
        tables = deployment_tables(animals, stages, cfg) if animals else {}
    with clock("write"):
        write_named(out_dir, {"rejected": rejected_for_output(rejected, cfg)}, loaded.summary, tables, cfg)
    return loaded, tables, animals


def _rejected_of(animals, read_rejected: pd.DataFrame, screen_rejected: pd.DataFrame) -> pd.DataFrame:
    """This batch's rejected rows (the summary counts them per animal)."""
    if not len(read_rejected):
        return screen_rejected
    return pd.concat([read_rejected[read_rejected["animal_id"].isin(animals)], screen_rejected], ignore_index=True)
