"""Speed and memory of the null-walk engine (prints ratios; not a test).

(a) marginal cost of replicates for the crw null, time(999) - time(9), as a
    ratio to the RNG floor: the same step and turn variates drawn by the same
    fitted models in the same chunks, and nothing else (goal <= 2.0);
(b) speed-up over a per-step pure-Python loop of the same walk (goal >= 10);
(c) peak memory of compare.test_animal with 10,000 replicates of a
    10,000-step track, measured in a fresh subprocess (goal < 600 MB).

The fits come from ``models.fit_animal`` on simulated gamma steps and von Mises
turns (the usual best families for collar data).  Run:
``python benchmarks/bench_null.py``.
"""

from __future__ import annotations

import math
import subprocess
import sys
import time

import numpy as np
import pandas as pd

from roamstat.config import Config
from roamstat.models import fit_animal
from roamstat.nulls import CrwNull
from roamstat.nulls.walk import CHUNK_ELEMENTS, simulate_nsd

N_STEPS = 1000
EVAL = np.unique(np.rint(np.linspace(0, N_STEPS, 200)).astype(int))


def simulated_steps(n: int, seed: int) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    turns = np.r_[np.nan, rng.vonmises(0.0, 1.0, n - 1)]
    return pd.DataFrame({"step_m": rng.gamma(2.0, 50.0, n), "turn_rad": turns, "segment": 0})


def best_of(fn, repeat: int = 3) -> float:
    best = math.inf
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - start)
    return best


def rng_floor(fits, n_reps: int, n_steps: int, rng) -> None:
    chunk = max(1, min(n_reps, CHUNK_ELEMENTS // n_steps))
    for first in range(0, n_reps, chunk):
        c = min(chunk, n_reps - first)
        fits.best_step.sample(c * n_steps, rng)
        fits.best_turn.sample(c * n_steps, rng)


def walk_loop(steps, turns, eval_idx) -> np.ndarray:
    """The walk, one step at a time in pure Python, on given variates (rows = replicates)."""
    wanted = {int(k): j for j, k in enumerate(eval_idx)}
    out = np.zeros((len(steps), len(eval_idx)))
    for r in range(len(steps)):
        x = y = heading = 0.0
        for k in range(len(steps[r])):
            heading += turns[r][k]
            x += steps[r][k] * math.cos(heading)
            y += steps[r][k] * math.sin(heading)
            if k + 1 in wanted:
                out[r, wanted[k + 1]] = x * x + y * y
    return out


def drawing_loop(fits, n_reps: int, n_steps: int, eval_idx, rng) -> np.ndarray:
    """The naive per-step program: draw one step and one turn from the models, move, repeat."""
    wanted = {int(k): j for j, k in enumerate(eval_idx)}
    out = np.zeros((n_reps, len(eval_idx)))
    for r in range(n_reps):
        x = y = heading = 0.0
        for k in range(n_steps):
            step = float(fits.best_step.sample(1, rng)[0])
            heading += float(fits.best_turn.sample(1, rng)[0])
            x += step * math.cos(heading)
            y += step * math.sin(heading)
            if k + 1 in wanted:
                out[r, wanted[k + 1]] = x * x + y * y
    return out


def replay(values: np.ndarray):
    """A variate source that hands out the given values (for the equality check)."""
    return lambda n, rng: values.ravel()[:n].copy()


MEMORY_CHILD = r"""
import resource, sys, tracemalloc
import numpy as np, pandas as pd
sys.path.insert(0, sys.argv[1])
from bench_null import simulated_steps
from roamstat import compare
from roamstat.config import Config
from roamstat.models import fit_animal
n = 10_000
steps = simulated_steps(n, 3)
cfg = Config(nulls=("crw",), replicates=10_000)
fits = fit_animal(steps, cfg, np.random.default_rng(1))
x = np.cumsum(steps["step_m"].to_numpy())
fixes = pd.DataFrame({"time": pd.date_range("2024-01-01", periods=n + 1, freq="h", tz="UTC"),
                      "x_m": np.r_[0.0, x], "y_m": 0.0})
before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
tracemalloc.start()
rows, curves = compare.test_animal(fixes, steps, fits, 3600.0, cfg, np.random.default_rng(2))
peak = tracemalloc.get_traced_memory()[1] / 2**20
after = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
print(f"{before:.0f} {after:.0f} {peak:.0f} {rows['n_steps'].iloc[0]}")
"""


def main() -> None:
    fits = fit_animal(simulated_steps(2000, 1), Config(), np.random.default_rng(0))
    null = CrwNull(fits)
    print(f"crw null from fits: steps {fits.best_step.name}, turns {fits.best_turn.name}; "
          f"{N_STEPS}-step walks, {EVAL.size} curve points")

    t999 = best_of(lambda: null.simulate(N_STEPS, 999, np.random.default_rng(5), EVAL))
    t9 = best_of(lambda: null.simulate(N_STEPS, 9, np.random.default_rng(5), EVAL))
    floor = best_of(lambda: rng_floor(fits, 990, N_STEPS, np.random.default_rng(5)))
    marginal = t999 - t9
    print(f"(a) marginal cost 999-9 reps {marginal * 1e3:.1f} ms; RNG floor {floor * 1e3:.1f} ms; "
          f"ratio {marginal / floor:.2f} (goal <= 2.0)")

    rng = np.random.default_rng(6)
    reps = 50
    steps = fits.best_step.sample(reps * N_STEPS, rng).reshape(reps, N_STEPS)
    turns = fits.best_turn.sample(reps * N_STEPS, rng).reshape(reps, N_STEPS)
    engine = best_of(lambda: simulate_nsd(replay(steps), replay(turns), N_STEPS, reps, rng, EVAL))
    arithmetic = best_of(lambda: walk_loop(steps.tolist(), turns.tolist(), EVAL), repeat=1)
    same = np.allclose(walk_loop(steps.tolist(), turns.tolist(), EVAL),
                       simulate_nsd(replay(steps), replay(turns), N_STEPS, reps, rng, EVAL), rtol=1e-9)
    drawing_reps = 5
    drawing = best_of(lambda: drawing_loop(fits, drawing_reps, N_STEPS, EVAL, rng), repeat=1) * reps / drawing_reps
    vec = best_of(lambda: null.simulate(N_STEPS, reps, np.random.default_rng(6), EVAL))
    print(f"(b) {reps} reps x {N_STEPS} steps: per-step Python program drawing from the models "
          f"{drawing:.2f} s (from {drawing_reps} reps) vs engine {vec * 1e3:.1f} ms: speed-up {drawing / vec:.0f}x "
          f"(goal >= 10)")
    print(f"    walk arithmetic alone on the same pre-drawn variates: Python loop {arithmetic * 1e3:.0f} ms vs "
          f"engine {engine * 1e3:.1f} ms: speed-up {arithmetic / engine:.0f}x; identical NSD: {same}")

    here = str(__import__("pathlib").Path(__file__).resolve().parent)
    done = subprocess.run([sys.executable, "-c", MEMORY_CHILD, here], capture_output=True, text=True, check=True)
    before, after, peak, n_steps = done.stdout.split()
    print(f"(c) test_animal, 10,000 reps x {n_steps} steps: peak RSS {after} MB (process before the test "
          f"{before} MB), traced allocations peak {peak} MB (goal < 600 MB)")


if __name__ == "__main__":
    main()
