"""A command from start to finish, written once for ordinary and ``--low-memory`` runs.

The order is: check the output folder; open the run's one executor
(:class:`roamstat.parallel.AnimalExecutor`); compute and write the tables,
either with every fix in memory (:func:`in_memory`) or a batch of animals
at a time (:func:`roamstat.stream.streamed`); draw the report; write the
manifest.  Both ways draw the run's one hidden origin (masking) right after
reading and hand it to every output that masks.
"""

from __future__ import annotations

import time
from pathlib import Path
from typing import TYPE_CHECKING

from roamstat.config import Config, check_config
from roamstat.errors import NothingKept
from roamstat.io.write import write_json
from roamstat.manifest import MANIFEST, build_manifest, run_info
from roamstat.outputs import all_rejected, masking_origin, prepare_out_dir, report_tables, write_tables
from roamstat.parallel import AnimalExecutor
from roamstat.pipeline import RunResult, StageClock, analyse, command_stages, load
from roamstat.geo import unit_vector_sum
from roamstat.stream import BATCH_ANIMALS, CHUNK_RECORDS, check_streamable, streamed

if TYPE_CHECKING:  # the ranges package loads only when a command needs it
    from roamstat.ranges.mask import HiddenOrigin


def run_command(command: str, paths, out_dir, cfg: Config, argv: list[str] | None = None, *,
                origin: HiddenOrigin | None = None, chunk_records: int = CHUNK_RECORDS,
                batch_animals: int = BATCH_ANIMALS) -> RunResult:
    """Run one command's stages and write its outputs into ``out_dir``.

    ``origin`` fixes the hidden origin of a masked run (tests only: in
    production it is drawn from fresh entropy); ``chunk_records`` and
    ``batch_animals`` size a ``--low-memory`` run.
    """
    check_config(cfg)
    stages = command_stages(command, cfg)
    if cfg.low_memory:
        check_streamable(cfg)
    out_dir = prepare_out_dir(Path(out_dir), paths, cfg.force)
    clock, started = StageClock(), time.perf_counter()
    with AnimalExecutor(cfg.workers, cfg.scheduler, cfg.quiet) as executor:
        try:
            if cfg.low_memory:
                result = streamed(paths, stages, out_dir, cfg, clock, executor, origin, chunk_records, batch_animals)
            else:
                result = in_memory(paths, stages, out_dir, cfg, clock, executor, origin)
        except NothingKept as exc:
            all_rejected(exc, out_dir, cfg)
        if "report" in stages:  # in the executor's block: figures are drawn by the same workers
            from roamstat.report import write_report

            with clock("report"):
                write_report(out_dir, report_tables(result.loaded, result.tables, cfg), result.animals,
                             run_info(result.loaded, cfg, argv), cfg, executor)
    write_json(build_manifest(command, result.loaded, cfg, argv, clock.stages, time.perf_counter() - started),
               out_dir / MANIFEST)
    result.out_dir, result.stages = out_dir, clock.stages
    return result


def in_memory(paths, stages: tuple, out_dir: Path, cfg: Config, clock: StageClock, executor: AnimalExecutor,
              origin: HiddenOrigin | None) -> RunResult:
    """Load every fix, analyse every animal, write the tables."""
    loaded = load(paths, cfg, clock, with_steps="steps" in stages)
    loaded.origin = masking_origin(cfg, unit_vector_sum(loaded.read.rows["lat"], loaded.read.rows["lon"]), origin)
    tables, animals = analyse(loaded, stages, cfg, clock, executor)
    with clock("write"):
        write_tables(out_dir, loaded, tables, cfg)
    return RunResult(loaded=loaded, tables=tables, animals=animals)
