"""Speed of the continuous-time motion models (prints figures and ratios; not a test).

(a) fitting all four models (brownian, ou, ctcrw, ou_ctcrw) to 1,000 irregular fixes with
    estimated location error, one core: seconds per model and in total, as a ratio to the
    2 s goal of issue 13 (goal: ratio <= 1);
(b) cost of one likelihood evaluation at n = 1,000, 10,000 and 100,000 fixes: each tenfold
    step in n should cost at most about tenfold (O(n)). From 10,000 to 100,000 the ratio can
    exceed 10: the per-evaluation arrays (several MB) then come from fresh memory pages whose
    first touch the operating system pays for, a per-fix cost that is larger but still constant
    (one pass over the fixes either way);
(c) exact simulation of 999 replicates at 2,000 times (the ctcrw null's workload).

The track is a simulated correlated random walk with 25 m error (invented data). Numba
compiles on first use; a warm-up call keeps that out of the figures. Run:
``python benchmarks/bench_motion.py``.
"""
from __future__ import annotations

import time
import timeit

import numpy as np

from roamstat.motion import MOTION_MODELS, LocationError, fit_motion_models
from roamstat.motion.likelihood import conditional_loglik, prepare_track

GOAL_S = 2.0
P = {"diffusion_m2_s": 1.5, "tau_velocity_s": 3600.0, "error_sd_m": 25.0}


def _track(n: int, rng: np.random.Generator):
    """Integrated-OU walk sampled at exponential gaps (mean 1 h) on a 60 s grid, plus error."""
    h, tau = 60.0, P["tau_velocity_s"]
    k = np.concatenate([[0], np.cumsum(np.maximum(np.round(rng.exponential(3600.0, n - 1) / h), 1))]).astype(int)
    a = np.exp(-h / tau)
    v = np.zeros((k[-1] + 1, 2))
    z = rng.standard_normal(v.shape) * np.sqrt(P["diffusion_m2_s"] / tau * (1 - a * a))
    for i in range(1, v.shape[0]):
        v[i] = a * v[i - 1] + z[i]
    pos = np.cumsum(v * h, axis=0)[k] + rng.normal(0.0, P["error_sd_m"], (n, 2))
    return k * h, pos[:, 0], pos[:, 1]


def _per_eval(name: str, n: int, rng, reps: int) -> float:
    """Best of five timings of ``reps`` evaluations (the minimum is the least disturbed by
    other work on a shared machine), per evaluation."""
    t, x, y = _track(n, rng)
    track = prepare_track(t, x, y, None)
    p = {"diffusion_m2_s": 1.5, "sigma_m": 3000.0, "tau_position_s": 1e6, "tau_velocity_s": 3600.0,
         "error_sd_m": 25.0}
    return min(timeit.repeat(lambda: conditional_loglik(name, p, track), number=reps, repeat=5)) / reps


def main() -> None:
    rng = np.random.default_rng(13)
    t, x, y = _track(1000, rng)
    error = LocationError(None, "estimated")
    fit_motion_models(t[:50], x[:50], y[:50], error)  # compile
    total = 0.0
    print("(a) fit on 1,000 irregular fixes, error estimated")
    for name in MOTION_MODELS:
        start = time.perf_counter()
        fit_motion_models(t, x, y, error, models=(name,))
        took = time.perf_counter() - start
        total += took
        print(f"    {name:9s} {took:6.3f} s")
    print(f"    total     {total:6.3f} s   ratio to the {GOAL_S:.0f} s goal: {total / GOAL_S:.2f} (goal <= 1)")
    print("(b) one likelihood evaluation")
    for name in MOTION_MODELS:
        small, large, huge = (_per_eval(name, 1000, rng, 200), _per_eval(name, 10000, rng, 20),
                              _per_eval(name, 100000, rng, 5))
        print(f"    {name:9s} n=1k {small * 1e3:7.3f} ms   n=10k {large * 1e3:7.3f} ms   "
              f"n=100k {huge * 1e3:8.3f} ms   ratios {large / small:4.1f}, {huge / large:4.1f} "
              f"(O(n): at most about 10; below 10 while fixed costs still count)")
    fit = fit_motion_models(t, x, y, error, models=("ctcrw",))[0]
    times = np.cumsum(rng.exponential(3600.0, 2000))
    fit.simulate(times[:10], 2, rng, 25.0)
    start = time.perf_counter()
    fit.simulate(times, 999, rng, 25.0)
    print(f"(c) simulate 999 reps x 2,000 times: {time.perf_counter() - start:.3f} s")


if __name__ == "__main__":
    main()
