"""What the report stage costs, and what a whole run costs against its null simulations.

1. Report stage on the sample deployment's figure set: the sample is analysed once
   (`--no-report`), then the report is written with 1 and 2 workers; prints seconds per animal
   per worker (goal <= 0.3 s) and the CPU seconds per animal of the drawing process.
2. `roamstat run` on the sample with `--workers 1` against `roamstat nulltest` (steps, fits and
   the null simulations alone) on the same input, measured side by side (goal: ratio <= 2).
3. A large deployment (default 1,000 animals x 2,000 fixes, simulated correlated random walks)
   run end to end with `--workers 2`, report included; prints the wall time and its stages.
   This may take many minutes: shrink it with --animals/--fixes.

    python benchmarks/bench_report.py [--animals 1000] [--fixes 2000] [--replicates 199] [--skip-large]
"""

from __future__ import annotations

import argparse
import json
import shutil
import subprocess
import sys
import time
from pathlib import Path

from bench_scale import make_deployment

ROOT = Path(__file__).resolve().parents[1]
WORK = Path(__file__).resolve().parent / "_work"
SAMPLE = ROOT / "sample_tracks" / "collars.csv"
GOAL_PER_ANIMAL_S, GOAL_RUN_RATIO = 0.3, 2.0


def roamstat(*args: str) -> float:
    exe = Path(sys.executable).with_name("roamstat")
    started = time.perf_counter()
    subprocess.run([str(exe), *args, "--quiet", "--force"], check=True, stdout=subprocess.DEVNULL)
    return time.perf_counter() - started


def report_stage(workers: int) -> tuple[float, float, int]:
    """(wall s, CPU s of this process, animals) of write_report on the sample's results."""
    from roamstat.config import Config
    from roamstat.manifest import run_info
    from roamstat.outputs import report_tables
    from roamstat.parallel import AnimalExecutor
    from roamstat.report import write_report
    from roamstat.run import run_command

    cfg = Config(report=False, quiet=True, force=True, workers=workers)
    result = run_command("run", [SAMPLE], WORK / "report-sample", cfg)
    tables = report_tables(result.loaded, result.tables, cfg)
    info = run_info(result.loaded, cfg, None)
    with AnimalExecutor(workers, None, True) as executor:
        executor.map(abs, [0, 1])  # open the pool first: its start-up is the run's, not the report's
        cpu, started = time.process_time(), time.perf_counter()
        write_report(result.out_dir, tables, result.animals, info, cfg, executor)
        return time.perf_counter() - started, time.process_time() - cpu, len(result.animals)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--animals", type=int, default=1000)
    parser.add_argument("--fixes", type=int, default=2000)
    parser.add_argument("--replicates", type=int, default=199)
    parser.add_argument("--skip-large", action="store_true", help="only parts 1 and 2")
    args = parser.parse_args()
    WORK.mkdir(exist_ok=True)

    print("1. report stage on the sample's figure set")
    for workers in (1, 2):
        wall, cpu, n = report_stage(workers)
        per = wall * workers / n
        print(f"   workers {workers}: {wall:.2f} s for {n} animals = {per:.3f} s per animal per worker "
              f"(goal {GOAL_PER_ANIMAL_S}, ratio {per / GOAL_PER_ANIMAL_S:.2f}); "
              f"main-process CPU {cpu / n:.3f} s per animal")

    print("2. whole run against its null simulations, sample, --workers 1")
    out = WORK / "run-sample"
    nulls = roamstat("nulltest", str(SAMPLE), "--out", str(WORK / "nulltest-sample"), "--workers", "1")
    whole = roamstat("run", str(SAMPLE), "--out", str(out), "--workers", "1")
    stages = {s["stage"]: s["duration_s"] for s in json.loads((out / "manifest.json").read_text())["stages"]}
    print(f"   nulltest {nulls:.2f} s, run {whole:.2f} s: ratio {whole / nulls:.2f} (goal <= {GOAL_RUN_RATIO}); "
          f"report stage {stages.get('report', float('nan')):.2f} s")

    if not args.skip_large:
        print(f"3. {args.animals} animals x {args.fixes} fixes, --workers 2, end to end")
        path = make_deployment(args.animals, args.fixes, WORK / f"report_{args.animals}x{args.fixes}.csv")
        out = WORK / "run-large"
        shutil.rmtree(out, ignore_errors=True)
        wall = roamstat("run", str(path), "--out", str(out), "--workers", "2", "--replicates", str(args.replicates))
        stages = {s["stage"]: s["duration_s"] for s in json.loads((out / "manifest.json").read_text())["stages"]}
        pages = len(list((out / "animals").glob("*.html")))
        print(f"   {wall:.1f} s end to end ({wall / args.animals:.3f} s per animal); report stage "
              f"{stages.get('report', float('nan')):.1f} s ({stages.get('report', 0) * 2 / args.animals:.3f} s per "
              f"animal per worker); {pages} animal pages")
        print("   stages: " + ", ".join(f"{k} {v:.1f} s" for k, v in stages.items()))


if __name__ == "__main__":
    main()
