"""Scale targets of issue 18: many tiny animals, and one very long track.

1. ``--tiny N`` animals of 3 hourly fixes each (too short for any test): `roamstat run
   --no-report` wall time, the fixed overhead per animal beyond a 1-animal run, and its ratio
   to the 5 ms target (50,000 animals in about a minute).
2. One animal of ``--big N`` fixes (a correlated random walk, 10-min schedule): `roamstat run`
   with the defaults on 2 workers, wall time and peak memory (ru_maxrss of the largest process),
   and their ratios to the targets (10 min, 3 GB for 2,000,000 fixes).  With ``--big`` below
   2,000,000 the time is also extrapolated linearly to 2,000,000 fixes (a lower bound when a
   stage grows faster than linearly).

3. ``--stage-cpu N``: the big animal's analyse sub-stages one after another in this process, one
   thread, with the CPU seconds of each (motion fits, smoothing, step/turn fits, states, each null,
   residency, the range model's bias refits, ranges), so a change's effect is seen stage by stage.

Ratios below 1 meet the target.  Simulated data (a generator written here), not real tracks.

    python benchmarks/bench_extremes.py [--tiny 50000] [--big 2000000] [--workers 2] [--stage-cpu 200000]
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import shutil
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

WORK = Path(__file__).resolve().parent / "_work"
TINY_TARGET_S = 0.005
BIG_TARGET_S, BIG_TARGET_MB, BIG_TARGET_FIXES = 600.0, 3072.0, 2_000_000


def tiny_deployment(n_animals: int, path: Path, seed: int = 1) -> Path:
    rng = np.random.default_rng(seed)
    start = pd.Timestamp("2025-03-01", tz="UTC")
    times = start + pd.to_timedelta(np.tile(np.arange(3), n_animals), unit="h")
    pd.DataFrame({"animal": np.repeat([f"T{i:06d}" for i in range(n_animals)], 3),
                  "timestamp": times.strftime("%Y-%m-%dT%H:%M:%SZ"),
                  "lat": 61.0 + rng.normal(0, 0.01, 3 * n_animals),
                  "lon": 24.0 + rng.normal(0, 0.01, 3 * n_animals)}).to_csv(path, index=False)
    return path


def big_track(n_fixes: int, path: Path, seed: int = 2) -> Path:
    rng = np.random.default_rng(seed)
    heading = np.cumsum(rng.vonmises(0.0, 2.0, n_fixes))
    step = rng.gamma(2.0, 40.0, n_fixes)
    x, y = np.cumsum(step * np.sin(heading)), np.cumsum(step * np.cos(heading))
    times = pd.Timestamp("2020-01-01", tz="UTC") + pd.to_timedelta(np.arange(n_fixes) * 600, unit="s")
    pd.DataFrame({"animal": "BIG", "timestamp": times.strftime("%Y-%m-%dT%H:%M:%SZ"),
                  "lat": 61.0 + y / 111_320.0, "lon": 24.0 + x / (111_320.0 * np.cos(np.deg2rad(61.0)))}
                 ).to_csv(path, index=False)
    return path


def run(path: Path, *options: str) -> tuple[float, float, float]:
    """Wall seconds, CPU seconds (all processes; steadier than wall on a shared machine), peak MB."""
    out = WORK / f"out-{path.stem}"
    shutil.rmtree(out, ignore_errors=True)
    exe = Path(sys.executable).with_name("roamstat")
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    started = time.perf_counter()
    subprocess.run([str(exe), "run", str(path), "--out", str(out), "--quiet", *options], check=True)
    elapsed = time.perf_counter() - started
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime + after.ru_stime) - (before.ru_utime + before.ru_stime)
    return elapsed, cpu, max(before.ru_maxrss, after.ru_maxrss) / 1024


def stage_cpu(path: Path) -> None:
    """CPU and wall seconds of each analyse sub-stage of the one animal in ``path``, serially."""
    from roamstat import compare, models, pipeline, ranges, rows, states
    from roamstat.config import Config
    from roamstat.motion.animal import fit_animal_motion, smoothed_track
    from roamstat.ranges.model import debiased_fit, from_motion_fit
    from roamstat.seeds import animal_rng

    cfg = Config(workers=1)
    task = pipeline.animal_tasks(pipeline.load([str(path)], cfg), pipeline.command_stages("run", cfg), cfg)[0]
    located = rows.located(task.fixes)
    aid, done = task.animal_id, {}

    def timed(name, func, *args):
        cpu, wall = time.process_time(), time.perf_counter()
        done[name] = func(*args)
        print(f"stage-cpu: {name:16s} {time.process_time() - cpu:7.1f} s CPU {time.perf_counter() - wall:7.1f} s wall",
              flush=True)
        return done[name]

    motion = timed("motion fits", fit_animal_motion, located, cfg)
    timed("smoothing", smoothed_track, motion, aid, None)
    fitted = timed("step/turn fits", models.fit_animal, task.steps, cfg, animal_rng(cfg.seed, aid, "fit"))
    timed("states", states.fit_animal_states, task.steps, cfg, animal_rng(cfg.seed, aid, "states"))
    for name in cfg.nulls:
        timed(f"null {name}", compare.test_animal, task.fixes, task.steps, fitted, task.nominal_dt_s,
              Config(workers=1, nulls=(name,)), animal_rng(cfg.seed, aid, "null"), motion)
    timed("residency", ranges.residency_animal, located, cfg)
    model = timed("range bias refit", debiased_fit, motion.best, motion.t_s, motion.error,
                  animal_rng(cfg.seed, aid, "ranges"))
    timed("ranges", ranges.ranges_animal, located, cfg, task.origin, from_motion_fit(model))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--tiny", type=int, default=50_000, help="tiny animals (0 skips)")
    parser.add_argument("--big", type=int, default=BIG_TARGET_FIXES, help="fixes of the big animal (0 skips)")
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--stage-cpu", type=int, default=0, help="fixes of a big animal timed stage by stage")
    args = parser.parse_args()
    WORK.mkdir(exist_ok=True)
    if args.stage_cpu:
        stage_cpu(big_track(args.stage_cpu, WORK / f"big_{args.stage_cpu}.csv"))
    if args.tiny:
        one, one_cpu, _ = run(tiny_deployment(1, WORK / "tiny_1.csv"), "--no-report")
        many, many_cpu, _ = run(tiny_deployment(args.tiny, WORK / f"tiny_{args.tiny}.csv"), "--no-report")
        per, per_cpu = ((b - a) / max(args.tiny - 1, 1) for a, b in ((one, many), (one_cpu, many_cpu)))
        print(f"tiny: {args.tiny} animals in {many:.1f} s (1 animal {one:.1f} s): {1000 * per:.2f} ms wall, "
              f"{1000 * per_cpu:.2f} ms CPU per animal; ratio to the 5 ms target {per / TINY_TARGET_S:.2f} wall, "
              f"{per_cpu / TINY_TARGET_S:.2f} CPU; 50,000 animals would take about {one + 50_000 * per:.0f} s")
    if args.big:
        load_before = os.getloadavg()[0]
        elapsed, cpu, peak = run(big_track(args.big, WORK / f"big_{args.big}.csv"), "--workers", str(args.workers))
        scaled = elapsed * BIG_TARGET_FIXES / args.big
        print(f"big: {args.big} fixes in {elapsed:.1f} s ({cpu:.1f} s CPU), peak {peak:.0f} MB; "
              "time ratio to 10 min at 2,000,000 fixes "
              f"{scaled / BIG_TARGET_S:.2f} (linear extrapolation), memory ratio to 3 GB {peak / BIG_TARGET_MB:.2f}"
              + ("" if args.big == BIG_TARGET_FIXES else " (memory not extrapolated)")
              + f"; machine load (1-min average) {load_before:.1f} before, {os.getloadavg()[0]:.1f} after")
        print("big: stages (wall s) " + ", ".join(f"{s['stage'].split(':')[0]} {s['duration_s']:.0f}"
                                                 for s in stage_times(WORK / f"out-big_{args.big}")))


def stage_times(out: Path) -> list[dict]:
    """The manifest's stage records (name, wall seconds) of a finished run."""
    return json.loads((out / "manifest.json").read_text()).get("stages", [])


if __name__ == "__main__":
    main()
