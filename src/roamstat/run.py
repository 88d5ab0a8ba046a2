"""A command from start to finish, written once for ordinary and ``--low-memory`` runs.

The order is: lock the output folder and open its staging folder
(:mod:`roamstat.outdir`); open the run's one executor
(:class:`roamstat.parallel.AnimalExecutor`); compute and write the tables,
either with every fix in memory (:func:`in_memory`) or a batch of animals
at a time (:func:`roamstat.stream.streamed`); draw the report; write the
manifest; swap the staging folder in.  Both ways draw the run's one hidden origin (masking) right after
reading and hand it to every output that masks.
"""

from __future__ import annotations

import time
from pathlib import Path
from typing import TYPE_CHECKING

from roamstat.config import Config, check_config
from roamstat.errors import NothingKept
from roamstat.io.write import write_json
from roamstat.manifest import MANIFEST, build_manifest, folder_files, outcome_manifest, run_info
from roamstat.memory import give_back
from roamstat.outdir import OutputFolder, system_errors
from roamstat.outputs import all_rejected, masking_origin, report_tables, write_tables
from roamstat.parallel import AnimalExecutor
from roamstat.pipeline import RunResult, StageClock, analyse, command_stages, load
from roamstat.geo import unit_vector_sum
from roamstat.stream import BATCH_ANIMALS, CHUNK_RECORDS, check_streamable, streamed

if TYPE_CHECKING:  # the ranges package loads only when a command needs it
    from roamstat.ranges.mask import HiddenOrigin


def run_command(command: str, paths, out_dir, cfg: Config, argv: list[str] | None = None, *,
                origin: HiddenOrigin | None = None, chunk_records: int = CHUNK_RECORDS,
                batch_animals: int = BATCH_ANIMALS) -> RunResult:
    """Run one command's stages and swap its outputs in as ``out_dir`` (see :mod:`roamstat.outdir`).

    ``origin`` fixes the hidden origin of a masked run (tests only: in
    production it is drawn from fresh entropy); ``chunk_records`` and
    ``batch_animals`` size a ``--low-memory`` run.
    """
    check_config(cfg)
    stages = command_stages(command, cfg)
    if cfg.low_memory:
        check_streamable(cfg)
    with OutputFolder(out_dir, paths, cfg.force) as folder, system_errors(folder.out):
        result = _compute(command, paths, stages, folder, cfg, argv, origin, chunk_records, batch_animals)
        folder.commit()
    result.out_dir = folder.out
    return result


def _compute(command: str, paths, stages: tuple, folder: OutputFolder, cfg: Config, argv, origin,
             chunk_records: int, batch_animals: int) -> RunResult:
    """Every output of the command, written into the staging folder."""
    staging = folder.staging
    clock, started = StageClock(), time.perf_counter()
    with AnimalExecutor(cfg.workers, cfg.scheduler, cfg.quiet) as executor:
        try:
            if cfg.low_memory:
                result = streamed(paths, stages, staging, cfg, clock, executor, origin, chunk_records, batch_animals)
            else:
                result = in_memory(paths, stages, staging, cfg, clock, executor, origin)
        except NothingKept as exc:
            error = all_rejected(exc, staging, folder.out, cfg)
            _write_manifest(outcome_manifest(command, cfg, argv, str(exc)), folder)
            folder.commit()
            raise error from None
        if "report" in stages:  # in the executor's block: figures are drawn by the same workers
            from roamstat.report import write_report

            with clock("report"):
                write_report(staging, report_tables(result.loaded, result.tables, cfg), result.animals,
                             run_info(result.loaded, cfg, argv), cfg, executor)
    _write_manifest(build_manifest(command, result.loaded, cfg, argv, clock.stages, time.perf_counter() - started),
                    folder)
    result.stages = clock.stages
    return result


def _write_manifest(manifest: dict, folder: OutputFolder) -> None:
    """The manifest, listing every file the new folder will hold: this run's and the user's own kept ones."""
    manifest["files"] = folder_files(folder.staging)
    if folder.foreign:
        manifest["kept_files"] = folder_files(folder.out, folder.foreign)
    write_json(manifest, folder.staging / MANIFEST)


def in_memory(paths, stages: tuple, out_dir: Path, cfg: Config, clock: StageClock, executor: AnimalExecutor,
              origin: HiddenOrigin | None) -> RunResult:
    """Load every fix, analyse every animal, write the tables."""
    loaded = load(paths, cfg, clock, with_steps="steps" in stages)
    loaded.origin = masking_origin(cfg, unit_vector_sum(loaded.read.rows["lat"], loaded.read.rows["lon"]), origin)
    give_back()  # reading's scratch, before the analysis allocates on several threads
    tables, animals = analyse(loaded, stages, cfg, clock, executor)
    give_back()
    with clock("write"):
        write_tables(out_dir, loaded, tables, cfg)
    give_back()
    return RunResult(loaded=loaded, tables=tables, animals=animals)
