"""The pipeline animal by animal, for deployments too big to hold in memory at once.

``--low-memory`` reads each input in record chunks (:mod:`roamstat.io.chunks`),
spills every animal's rows as pickled parts (exact dtypes) to one anonymous
scratch file in the staging folder (:mod:`roamstat.spill`: no name on disk,
gone with the process, enciphered under ``--mask-locations``), then screens, projects, measures and analyses a batch of
animals at a time, appending to fixes.csv and steps.csv as it goes.  Peak
memory then grows with the largest animal (times the batch size), not with
the file.  The tables are byte-identical to those of an ordinary run: every
per-animal stage sees exactly the rows it would see in a whole-file run.
The run's one executor and one hidden origin (masking) serve every batch.
:mod:`roamstat.run` orders the run; this module does not import it.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from roamstat import rows
from roamstat.config import Config
from roamstat.errors import NothingKept, RoamstatError
from roamstat.geo import unit_vector_sum
from roamstat.io.chunks import read_in_chunks
from roamstat.io.read import REJECTED_BASE, ReadResult
from roamstat.io.write import StreamingCsv
from roamstat.outputs import (fixes_for_output, masking_origin, output_name, rejected_for_output,
                              write_named)
from roamstat.parallel import AnimalExecutor
from roamstat.pipeline import (PER_ANIMAL_STAGES, Loaded, RunResult, StageClock, analyse_animals,
                               combine_rejected, concat_tables, deployment_tables)
from roamstat.screen import screen
from roamstat.spill import SpillFile
from roamstat.track import compute_steps, prepare_fixes, summarise

if TYPE_CHECKING:
    from roamstat.ranges.mask import HiddenOrigin

CHUNK_RECORDS = 200_000  # records read at a time
BATCH_ANIMALS = 16  # animals screened and analysed together


def check_streamable(cfg: Config) -> None:
    """``--low-memory`` writes CSV only."""
    if cfg.output_format != "csv":
        raise RoamstatError("--low-memory writes CSV tables; drop --format parquet or --low-memory")


def streamed(paths, stages: tuple, out_dir: Path, cfg: Config, clock: StageClock, executor: AnimalExecutor,
             origin: HiddenOrigin | None = None, chunk_records: int = CHUNK_RECORDS,
             batch_animals: int = BATCH_ANIMALS) -> RunResult:
    """Compute and write the tables holding a batch of animals at a time (see the module notes).

    The run's hidden origin (masking) is drawn once, after reading, from the
    positions of every row read, and used for every batch.
    """
    scratch = SpillFile(out_dir, encrypt=cfg.mask_locations)
    try:
        with clock("read"):
            spill = _spill(paths, cfg, scratch, chunk_records)
        run_origin = masking_origin(cfg, spill.position_sum, origin)
        return _process(spill, stages, out_dir, cfg, clock, executor, run_origin, batch_animals)
    finally:
        scratch.close()


class _Spill:
    """Where each animal's rows went, plus what reading learnt."""

    def __init__(self, scratch: SpillFile):
        self.scratch = scratch
        self.parts: dict[str, list[tuple[int, int]]] = {}
        self.columns: list[str] = []
        self.read_rejected: list[pd.DataFrame] = []
        self.files: list[dict] = []
        self.n_read = 0
        self.input_crs: str | None = None
        self.tz_notes: set[str] = set()
        self.position_sum = np.zeros(3)  # unit vectors of the positions read, for the hidden origin

    def add(self, chunk: pd.DataFrame) -> None:
        self.columns += [c for c in chunk.columns if c not in self.columns]
        self.position_sum += unit_vector_sum(chunk["lat"], chunk["lon"])
        for aid, group in chunk.groupby("animal_id", sort=False):
            self.parts.setdefault(aid, []).append(self.scratch.put(group))

    def rows_of(self, animals) -> pd.DataFrame:
        frames = [self.scratch.get(p) for aid in animals for p in self.parts[aid]]
        # Rows in file and line order, columns as a whole-file read would lay them out.
        return pd.concat(frames, ignore_index=True).reindex(columns=self.columns)


def _spill(paths, cfg: Config, scratch: SpillFile, chunk_records: int) -> _Spill:
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
        assert file_info is not None, "read_in_chunks yields at least one part per file"
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


def _process(spill: _Spill, stages, out_dir: Path, cfg: Config, clock: StageClock, executor: AnimalExecutor,
             origin: HiddenOrigin | None, batch_animals: int) -> RunResult:
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
                fixes, rejected = screen(spill.rows_of(batch), cfg)
                screened.append(rejected)
                if not len(fixes):
                    continue
                fixes, frames = prepare_fixes(fixes, cfg, spill.input_crs)
                projections.update(frames)
                kept += rows.n_observed(fixes)
                part = Loaded(read=read, fixes=fixes, rejected=_rejected_of(batch, read.rejected, rejected),
                              projections=frames, origin=origin)
                writers["fixes"].append(fixes_for_output(fixes, cfg, read, origin))
                if "steps" in stages:
                    part.steps = compute_steps(fixes)
                    part.summary = summarise(fixes, part.steps, part.rejected)
                    writers["steps"].append(part.steps)
                    summaries.append(part.summary)
            if any(s in stages for s in PER_ANIMAL_STAGES):
                with clock("analyse"):
                    animals += analyse_animals(part, stages, cfg, executor)
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
                    projections=dict(sorted(projections.items())), kept=kept, origin=origin,
                    summary=concat_tables(summaries) if summaries else None)
    with clock("deployment"):
        tables = deployment_tables(animals, stages, cfg, loaded.summary) if animals else {}
    with clock("write"):
        write_named(out_dir, {"rejected": rejected_for_output(rejected, cfg)}, loaded.summary, tables, cfg)
    return RunResult(loaded=loaded, tables=tables, animals=animals)


def _rejected_of(animals, read_rejected: pd.DataFrame, screen_rejected: pd.DataFrame) -> pd.DataFrame:
    """This batch's rejected rows (the summary counts them per animal)."""
    if not len(read_rejected):
        return screen_rejected
    return pd.concat([read_rejected[read_rejected["animal_id"].isin(animals)], screen_rejected], ignore_index=True)
