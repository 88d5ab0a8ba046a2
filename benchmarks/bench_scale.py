"""How `roamstat run` scales with the number of animals and with worker processes.

Builds deployments of 10, 100 and 1,000 simulated correlated-random-walk animals (200 fixes
each, hourly) in benchmarks/_work/, runs `roamstat run --no-report` with 1 and 2 workers, and
prints wall time, the time per animal (near-constant means near-linear growth), the two-worker
speed-up and the peak resident memory of the largest child process.

Goals: near-linear growth in animals; speed-up >= 1.7 on two cores.

    python benchmarks/bench_scale.py [--animals 10,100,1000] [--replicates 199]
"""

from __future__ import annotations

import argparse
import resource
import shutil
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

WORK = Path(__file__).resolve().parent / "_work"


def make_deployment(n_animals: int, n_fixes: int, path: Path, seed: int = 1) -> Path:
    rng = np.random.default_rng(seed)
    frames = []
    start = pd.Timestamp("2025-03-01", tz="UTC")
    times = start + pd.to_timedelta(np.arange(n_fixes), unit="h")
    for i in range(n_animals):
        heading = np.cumsum(rng.vonmises(0.0, 2.0, n_fixes))
        step = rng.gamma(2.0, 150.0, n_fixes)
        x = np.cumsum(step * np.sin(heading))
        y = np.cumsum(step * np.cos(heading))
        lat0, lon0 = 61.0 + rng.uniform(-0.5, 0.5), 24.0 + rng.uniform(-1, 1)
        frames.append(pd.DataFrame({
            "animal": f"A{i:04d}",
            "timestamp": times.strftime("%Y-%m-%dT%H:%M:%SZ"),
            "lat": lat0 + y / 111_320.0,
            "lon": lon0 + x / (111_320.0 * np.cos(np.deg2rad(lat0))),
        }))
    pd.concat(frames).to_csv(path, index=False)
    return path


def run(path: Path, workers: int, replicates: int) -> tuple[float, float]:
    out = WORK / f"out-{path.stem}-{workers}"
    shutil.rmtree(out, ignore_errors=True)
    exe = Path(sys.executable).with_name("roamstat")
    command = [str(exe), "run", str(path), "--out", str(out), "--no-report", "--quiet",
               "--replicates", str(replicates), "--workers", str(workers)]
    before = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    started = time.perf_counter()
    subprocess.run(command, check=True)
    elapsed = time.perf_counter() - started
    peak_mb = max(before, resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss) / 1024
    return elapsed, peak_mb


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--animals", default="10,100,1000")
    parser.add_argument("--fixes", type=int, default=200)
    parser.add_argument("--replicates", type=int, default=199)
    args = parser.parse_args()
    WORK.mkdir(exist_ok=True)
    print(f"{'animals':>8} {'1 worker s':>11} {'s/animal':>9} {'2 workers s':>12} {'speed-up':>9} {'peak MB':>8}")
    for n in (int(a) for a in args.animals.split(",")):
        path = make_deployment(n, args.fixes, WORK / f"scale_{n}.csv")
        t1, m1 = run(path, 1, args.replicates)
        t2, m2 = run(path, 2, args.replicates)
        print(f"{n:>8} {t1:>11.2f} {t1 / n:>9.3f} {t2:>12.2f} {t1 / t2:>9.2f} {max(m1, m2):>8.0f}")
    print("peak MB is ru_maxrss of the largest process (parent or one worker), a per-worker figure")


if __name__ == "__main__":
    main()
