"""CPU of the residency curve fits and the range-model bias refits on the sample, with what they decide.

Run from a worktree with its own venv (``python benchmarks/bench_residency_refit.py``); prints,
per sample animal, the residency class, its delta AIC, every curve's AIC, the range areas, and
the CPU seconds (``time.process_time``, least of ``--repeat`` runs) of ``residency_animal`` and
``debiased_fit`` summed over the animals, so two checkouts can be compared back to back.
"""
from __future__ import annotations

import argparse
import math
import os
import time
from pathlib import Path

# one BLAS thread, as the roamstat command sets (roamstat.entry), before numpy loads
for _name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_name, "1")

ROOT = Path(__file__).resolve().parents[1]


def main() -> None:
    from roamstat import pipeline, ranges, rows
    from roamstat.config import Config
    from roamstat.motion.animal import fit_animal_motion
    from roamstat.ranges.model import debiased_fit, from_motion_fit
    from roamstat.ranges.residency import MODELS
    from roamstat.seeds import animal_rng

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("path", nargs="?", default=str(ROOT / "sample_tracks" / "collars.csv"))
    parser.add_argument("--repeat", type=int, default=3, help="times each stage is run (the least CPU is kept)")
    args = parser.parse_args()
    cfg = Config(workers=1)
    tasks = pipeline.animal_tasks(pipeline.load([args.path], cfg), pipeline.command_stages("run", cfg), cfg)
    cpu = {"residency": 0.0, "bias refit": 0.0}
    print(f"load before {os.getloadavg()[0]:.1f}")
    for task in tasks:
        located = rows.located(task.fixes)
        motion = fit_animal_motion(located, cfg)
        row, _curve = _least_cpu(args.repeat, cpu, "residency", ranges.residency_animal, located, cfg)
        model = _least_cpu(args.repeat, cpu, "bias refit", debiased_fit, motion.best, motion.t_s, motion.error,
                           animal_rng(cfg.seed, task.animal_id, "ranges"))
        area = ranges.ranges_animal(located, cfg, task.origin, from_motion_fit(model))
        table = area[0] if isinstance(area, tuple) else area
        print(f"{task.animal_id}: {row['pattern']} delta_aic {row['delta_aic']:.2f} | "
              + " ".join(f"{m} {row[f'aic_{m}']:.2f}" for m in MODELS if math.isfinite(row[f"aic_{m}"])))
        print(f"  ranges: {_areas(table)}")
    print(f"load after {os.getloadavg()[0]:.1f}")
    print("CPU s over the animals: " + ", ".join(f"{k} {v:.2f}" for k, v in cpu.items()))


def _least_cpu(repeat: int, cpu: dict, stage: str, func, *args):
    """``func(*args)`` run ``repeat`` times; the least CPU time is added to ``cpu[stage]`` (the machine is shared)."""
    times = []
    for _ in range(repeat):
        start = time.process_time()
        out = func(*args)
        times.append(time.process_time() - start)
    cpu[stage] += min(times)
    return out


def _areas(table) -> str:
    """Every ``*_km2`` value of the range row(s), rounded to 4 significant figures."""
    import pandas as pd

    frame = table if isinstance(table, pd.DataFrame) else pd.DataFrame(table if isinstance(table, list) else [table])
    cols = [c for c in frame.columns if c.endswith("_km2") or c in ("estimator", "level", "method")]
    return "; ".join(" ".join(f"{c}={v:.4g}" if isinstance(v, float) else f"{c}={v}" for c, v in r.items())
                     for r in frame[cols].to_dict("records"))


if __name__ == "__main__":
    main()
