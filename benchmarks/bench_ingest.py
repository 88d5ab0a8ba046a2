"""Ingest speed: `roamstat steps` on 1,000,000 fixes against a floor measured in the same run.

Builds benchmarks/_work/ingest_<animals>x<fixes>.csv (100 simulated animals x 10,000 fixes,
2-hourly, with DOP, satellites and fix type) unless it exists, then times, each in a fresh
process and best of --repeat runs:

* the floor: ``pandas.read_csv`` of the file plus one pyproj transform of every point
  (WGS84 -> an azimuthal equidistant frame);
* ``roamstat steps FILE --out DIR`` (the console script of this venv), and the same with
  ``--low-memory``.

Prints both wall times (process start to exit), their ratio and each process's peak resident
memory (ru_maxrss from wait4).  Goals: ratio <= 2.0, peak < 1.5 GB.  The file is built in a
child process too: Linux carries a parent's peak memory into its children's ru_maxrss, so
this process stays small (standard library only).

    python benchmarks/bench_ingest.py [--animals 100] [--fixes 10000] [--repeat 2]
"""

from __future__ import annotations

import argparse
import os
import shutil
import subprocess
import sys
import time
from pathlib import Path

WORK = Path(__file__).resolve().parent / "_work"

FLOOR = """
import sys
import pandas as pd
from pyproj import Transformer
table = pd.read_csv(sys.argv[1])
to_plane = Transformer.from_crs("EPSG:4326", "+proj=aeqd +lat_0=61 +lon_0=24 +datum=WGS84 +units=m", always_xy=True)
x, y = to_plane.transform(table["longitude"].to_numpy(), table["latitude"].to_numpy())
print(len(x))
"""

def make_file(n_animals: int, n_fixes: int, path: Path, seed: int = 1) -> Path:
    """Correlated random walks near 61 N 24 E, 2-hourly with a few seconds of jitter."""
    import numpy as np
    import pandas as pd

    rng = np.random.default_rng(seed)
    shape = (n_animals, n_fixes)
    heading = np.cumsum(rng.vonmises(0.0, 2.0, shape), axis=1)
    step = rng.gamma(2.0, 150.0, shape)
    lat0 = 61.0 + rng.uniform(-0.5, 0.5, (n_animals, 1))
    lon0 = 24.0 + rng.uniform(-1.0, 1.0, (n_animals, 1))
    lat = lat0 + np.cumsum(step * np.cos(heading), axis=1) / 111_320.0
    lon = lon0 + np.cumsum(step * np.sin(heading), axis=1) / (111_320.0 * np.cos(np.deg2rad(lat0)))
    start = np.datetime64("2025-03-01T00:00:00", "s")
    seconds = np.arange(n_fixes) * 7200 + rng.integers(5, 90, shape)
    times = np.datetime_as_string(start + seconds.astype("timedelta64[s]"), unit="s")
    dop = np.round(np.clip(1.5 * np.exp(rng.normal(0, 0.4, shape)), 0.7, 20), 1)
    table = pd.DataFrame({
        "animal_id": np.repeat([f"B{i:03d}" for i in range(n_animals)], n_fixes),
        "timestamp": np.char.add(times.ravel(), "Z"),
        "latitude": np.round(lat.ravel(), 6),
        "longitude": np.round(lon.ravel(), 6),
        "dop": dop.ravel(),
        "satellites": np.clip(np.round(12 - 1.5 * dop.ravel()), 4, 12).astype(int),
        "fix_type": "3D",
    })
    table.to_csv(path, index=False)
    return path


def timed_child(command: list[str]) -> tuple[float, float]:
    """Wall time (s) and peak resident memory (MB, the child's own, through wait4) of one process."""
    started = time.perf_counter()
    child = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    _pid, status, usage = os.wait4(child.pid, 0)
    elapsed = time.perf_counter() - started
    err = child.stderr.read().decode(errors="replace")
    child.stderr.close()
    if os.waitstatus_to_exitcode(status):
        raise SystemExit(f"{' '.join(command[:3])} failed:\n{err[-3000:]}")
    return elapsed, usage.ru_maxrss / 1024


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--animals", type=int, default=100)
    parser.add_argument("--fixes", type=int, default=10_000)
    parser.add_argument("--repeat", type=int, default=2)
    parser.add_argument("--build", metavar="PATH", help=argparse.SUPPRESS)  # child: write the file only
    args = parser.parse_args()
    if args.build:
        make_file(args.animals, args.fixes, Path(args.build))
        return
    WORK.mkdir(exist_ok=True)
    path = WORK / f"ingest_{args.animals}x{args.fixes}.csv"
    if not path.exists():
        started = time.perf_counter()
        subprocess.run([sys.executable, __file__, "--animals", str(args.animals), "--fixes", str(args.fixes),
                        "--build", str(path)], check=True)
        print(f"built {path} in {time.perf_counter() - started:.1f} s")
    print(f"input: {path.name}, {args.animals * args.fixes:,} fixes, {path.stat().st_size / 1e6:.0f} MB")

    floor_cmd = [sys.executable, "-c", FLOOR, str(path)]
    out = WORK / "ingest_out"
    roamstat = Path(sys.executable).with_name("roamstat")
    job_cmd = [str(roamstat), "steps", str(path), "--out", str(out), "--quiet", "--force"]

    floors, jobs = [], []
    for _ in range(args.repeat):
        floors.append(timed_child(floor_cmd))
        shutil.rmtree(out, ignore_errors=True)
        jobs.append(timed_child(job_cmd))
    floor_s, floor_mb = min(floors)
    job_s, job_mb = min(jobs)
    print(f"floor (read_csv + one pyproj transform): {floor_s:6.2f} s  peak {floor_mb:6.0f} MB")
    print(f"roamstat steps: {job_s:6.2f} s  peak {job_mb:6.0f} MB")
    print(f"ratio {job_s / floor_s:.2f} (goal <= 2.0); peak {job_mb / 1024:.2f} GB (goal < 1.5 GB)")
    shutil.rmtree(out, ignore_errors=True)
    low_s, low_mb = timed_child(job_cmd + ["--low-memory"])
    print(f"roamstat steps --low-memory: {low_s:6.2f} s  peak {low_mb:6.0f} MB "
          f"(ratio {low_s / floor_s:.2f}; memory grows with the largest animal, not the file)")
    print("times are whole processes (interpreter start-up and imports included), best of", args.repeat)


if __name__ == "__main__":
    main()
