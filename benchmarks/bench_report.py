"""What the report stage costs, and what a whole run costs against its null simulations.

1. Report stage on the sample deployment's figure set: the sample is analysed once
   (`--no-report`), then the report is written with 1 and 2 workers, twice each (the run's first
   report, then again in the same warm processes, as every later animal of a large deployment);
   prints seconds per animal per worker (goal <= 0.3 s) and the CPU seconds per animal of the
   drawing process (with 1 worker the main process draws).
2. `roamstat run` on the sample with `--workers 1` against `roamstat nulltest` (steps, fits and
   the null simulations alone) on the same input, measured side by side in ``--pairs`` back-to-back
   pairs, the first command alternating (goal: ratio <= 2; wall and CPU time, the CPU time being that
   of the command and its workers; the medians are printed, as a shared machine's speed drifts).
3. A large deployment (default 1,000 animals x 2,000 fixes, simulated correlated random walks)
   run end to end with `--workers 2`, report included; prints the wall time, its stages, the
   peak memory (proportional set size of the run and its workers together, sampled every 0.5 s) and
   checks that every link and image of report.html and the animal pages resolves.
   This may take many minutes: shrink it with --animals/--fixes.

    python benchmarks/bench_report.py [--animals 1000] [--fixes 2000] [--replicates 199] [--pairs 6] [--skip-large | --skip-small]
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import shutil
import statistics
import subprocess
import sys
import threading
import time
from html.parser import HTMLParser
from pathlib import Path
from urllib.parse import unquote, urlsplit

from bench_scale import make_deployment

ROOT = Path(__file__).resolve().parents[1]
WORK = Path(__file__).resolve().parent / "_work"
SAMPLE = ROOT / "sample_tracks" / "collars.csv"
GOAL_PER_ANIMAL_S, GOAL_RUN_RATIO = 0.3, 2.0


def roamstat(*args: str) -> tuple[float, float]:
    """(wall s, CPU s) of one ``roamstat`` command: user and system time of it and its workers."""
    exe = Path(sys.executable).with_name("roamstat")
    before, started = resource.getrusage(resource.RUSAGE_CHILDREN), time.perf_counter()
    subprocess.run([str(exe), *args, "--quiet", "--force"], stdout=subprocess.DEVNULL, check=True)
    wall, after = time.perf_counter() - started, resource.getrusage(resource.RUSAGE_CHILDREN)
    return wall, (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def roamstat_peak(*args: str) -> tuple[float, float]:
    """(wall s, peak MB of the run's process tree) of one ``roamstat`` command."""
    exe = Path(sys.executable).with_name("roamstat")
    started = time.perf_counter()
    process = subprocess.Popen([str(exe), *args, "--quiet", "--force"], stdout=subprocess.DEVNULL)
    peak, done = [0], threading.Event()

    def sample() -> None:
        while not done.wait(0.5):
            peak[0] = max(peak[0], _tree_pss_kb(process.pid))

    sampler = threading.Thread(target=sample, daemon=True)
    sampler.start()
    code = process.wait()
    done.set()
    sampler.join()
    if code:
        raise subprocess.CalledProcessError(code, args)
    return time.perf_counter() - started, peak[0] / 1024


def _tree_pss_kb(root: int) -> int:
    """Memory (kB) of ``root`` and all its descendants, from /proc (Linux; 0 elsewhere).

    Proportional set sizes are summed, not resident sets: forked workers share their parent's pages,
    which a sum of resident sets would count once per worker.
    """
    children: dict[int, list[int]] = {}
    for entry in os.scandir("/proc") if os.path.isdir("/proc") else []:
        if entry.name.isdigit():
            try:
                parent = int(Path(entry.path, "stat").read_text().rsplit(")", 1)[1].split()[1])
            except (OSError, IndexError, ValueError):
                continue  # the process ended while we looked
            children.setdefault(parent, []).append(int(entry.name))
    total, todo = 0, [root]
    while todo:
        pid = todo.pop()
        todo.extend(children.get(pid, []))
        try:
            rollup = Path(f"/proc/{pid}/smaps_rollup").read_text()
        except OSError:
            continue
        total += sum(int(line.split()[1]) for line in rollup.splitlines() if line.startswith("Pss:"))
    return total


class _Links(HTMLParser):
    """Collects the ids and the href/src targets of one HTML page."""

    def __init__(self) -> None:
        super().__init__()
        self.ids: set[str] = set()
        self.targets: list[str] = []

    def handle_starttag(self, tag, attrs) -> None:
        for name, value in attrs:
            if name == "id" and value:
                self.ids.add(value)
            if name in ("href", "src") and value:
                self.targets.append(value)


def broken_links(out: Path) -> tuple[int, int, list[str]]:
    """(pages, links checked, broken ones) over report.html and animals/*.html.

    A relative link is broken when its file is missing or its #fragment names no id of that page.
    """
    pages = [out / "report.html", *sorted((out / "animals").glob("*.html"))]
    parsed = {}
    for page in pages:
        parser = _Links()
        parser.feed(page.read_text(encoding="utf-8"))
        parsed[page.resolve()] = parser
    checked, broken = 0, []
    for page in pages:
        for target in parsed[page.resolve()].targets:
            parts = urlsplit(target)
            if parts.scheme or parts.netloc:
                continue  # references to the web are not ours to check
            checked += 1
            path = (page.parent / unquote(parts.path)).resolve() if parts.path else page.resolve()
            if not path.is_file():
                broken.append(f"{page.name}: {target} (no such file)")
            elif parts.fragment and path.suffix == ".html":
                if path not in parsed:
                    parser = parsed[path] = _Links()
                    parser.feed(path.read_text(encoding="utf-8"))
                if unquote(parts.fragment) not in parsed[path].ids:
                    broken.append(f"{page.name}: {target} (no such anchor)")
    return len(pages), checked, broken


def report_stage(workers: int) -> tuple[list[tuple[float, float]], int]:
    """[(wall s, CPU s of this process)] of two write_report passes on the sample's results, and animals.

    The first pass is the run's (each process builds its figures, fonts and text caches); the
    second, in the same processes, is what every further animal of a large deployment costs.
    """
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
    passes = []
    with AnimalExecutor(workers, None, True) as executor:
        executor.map(abs, [0, 1])  # open the pool first: its start-up is the run's, not the report's
        for _ in range(2):
            cpu, started = time.process_time(), time.perf_counter()
            write_report(result.out_dir, tables, result.animals, info, cfg, executor)
            passes.append((time.perf_counter() - started, time.process_time() - cpu))
    return passes, len(result.animals)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--animals", type=int, default=1000)
    parser.add_argument("--fixes", type=int, default=2000)
    parser.add_argument("--replicates", type=int, default=199)
    parser.add_argument("--pairs", type=int, default=6, help="nulltest/run pairs of part 2 (even: each order as often)")
    parser.add_argument("--skip-large", action="store_true", help="only parts 1 and 2")
    parser.add_argument("--skip-small", action="store_true", help="only part 3")
    args = parser.parse_args()
    WORK.mkdir(exist_ok=True)

    if not args.skip_small:
        print("1. report stage on the sample's figure set")
        for workers in (1, 2):
            passes, n = report_stage(workers)
            for label, (wall, cpu) in zip(("first report", "again, warm"), passes):
                per = wall * workers / n
                print(f"   workers {workers}, {label}: {wall:.2f} s for {n} animals = {per:.3f} s per animal per "
                      f"worker (goal {GOAL_PER_ANIMAL_S}, ratio {per / GOAL_PER_ANIMAL_S:.2f}); main-process CPU "
                      f"{cpu / n:.3f} s per animal (load average {os.getloadavg()[0]:.1f})")

        print(f"2. whole run against its null simulations, sample, --workers 1, {args.pairs} pairs")
        out = WORK / "run-sample"
        walls, cpus = [], []
        for pair in range(args.pairs):
            # each pair back to back, as a shared machine's speed drifts over minutes; which command
            # goes first alternates, so a drift within a pair favours neither
            commands = {"nulltest": ("nulltest", str(SAMPLE), "--out", str(WORK / "nulltest-sample"), "--workers", "1"),
                        "run": ("run", str(SAMPLE), "--out", str(out), "--workers", "1")}
            order = ("nulltest", "run") if pair % 2 == 0 else ("run", "nulltest")
            took = {name: roamstat(*commands[name]) for name in order}
            (null_wall, null_cpu), (run_wall, run_cpu) = took["nulltest"], took["run"]
            walls.append(run_wall / null_wall)
            cpus.append(run_cpu / null_cpu)
            stages = {s["stage"]: s["duration_s"] for s in json.loads((out / "manifest.json").read_text())["stages"]}
            print(f"   {' then '.join(order)}: nulltest {null_wall:.2f} s ({null_cpu:.2f} s CPU), run {run_wall:.2f} s "
                  f"({run_cpu:.2f} s CPU): ratio {walls[-1]:.2f} wall, {cpus[-1]:.2f} CPU (goal <= {GOAL_RUN_RATIO}); "
                  f"report stage {stages.get('report', float('nan')):.2f} s (load average {os.getloadavg()[0]:.1f})")
        print(f"   median ratio over {len(walls)} pairs: {statistics.median(walls):.2f} wall, "
              f"{statistics.median(cpus):.2f} CPU (goal <= {GOAL_RUN_RATIO})")

    if not args.skip_large:
        print(f"3. {args.animals} animals x {args.fixes} fixes, --workers 2, end to end")
        path = make_deployment(args.animals, args.fixes, WORK / f"report_{args.animals}x{args.fixes}.csv")
        out = WORK / "run-large"
        shutil.rmtree(out, ignore_errors=True)
        wall, peak_mb = roamstat_peak("run", str(path), "--out", str(out), "--workers", "2",
                                      "--replicates", str(args.replicates))
        stages = {s["stage"]: s["duration_s"] for s in json.loads((out / "manifest.json").read_text())["stages"]}
        print(f"   {wall:.1f} s end to end ({wall / args.animals:.3f} s per animal); report stage "
              f"{stages.get('report', float('nan')):.1f} s ({stages.get('report', 0) * 2 / args.animals:.3f} s per "
              f"animal per worker); peak memory {peak_mb:.0f} MB (run and workers together)")
        print("   stages: " + ", ".join(f"{k} {v:.1f} s" for k, v in stages.items()))
        pages, checked, broken = broken_links(out)
        print(f"   links: {pages} pages, {checked} links and images checked, {len(broken)} broken"
              + "".join(f"\n     {b}" for b in broken[:20]))
        print(f"   (load average at the end: {os.getloadavg()[0]:.1f})")


if __name__ == "__main__":
    main()
