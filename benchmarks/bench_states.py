"""Speed of a 2-state movement HMM fit (prints the ratio to the goal; not a test).

Goal (issue 15): a 2-state fit on 1,000 hourly steps in under 1 s on one
core, with the default number of starting points (``Config.state_starts``).
Also prints the time per start, per likelihood-and-gradient evaluation, and
for the whole per-animal stage (K = 1, 2, 3 and decoding).  The first fit of
the process compiles the numba recursions (cached on disk afterwards) and is
left out.  Run on a quiet machine: ``python benchmarks/bench_states.py``.
"""

from __future__ import annotations

import os
import time

os.environ.setdefault("OMP_NUM_THREADS", "1")  # one core
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402

from roamstat.config import Config  # noqa: E402
from roamstat.states import fit_animal_states, fit_hmm  # noqa: E402
from roamstat.states.chain import build_chain  # noqa: E402
from roamstat.states.likelihood import Observations  # noqa: E402
from roamstat.states.params import Layout  # noqa: E402

N_STEPS = 1000
GOAL_S = 1.0


def two_state_steps(n: int, seed: int) -> pd.DataFrame:
    """Hourly steps switching between short, turning and long, straight moves."""
    rng = np.random.default_rng(seed)
    state = np.zeros(n, int)
    for t in range(1, n):
        state[t] = state[t - 1] if rng.random() < 0.9 else 1 - state[t - 1]
    step = np.where(state == 0, rng.gamma(1.5, 30.0, n), rng.gamma(3.0, 150.0, n))
    turn = np.where(state == 0, rng.vonmises(np.pi, 1.0, n), rng.vonmises(0.0, 4.0, n))
    t = pd.Series(pd.date_range("2025-01-01", periods=n + 1, freq="h", tz="UTC"))
    return pd.DataFrame({"animal_id": "b", "segment": 0, "t_start": t[:-1].to_numpy(), "t_end": t[1:].to_numpy(),
                         "dt_s": 3600.0, "step_m": step, "turn_rad": np.r_[np.nan, turn[1:]]})


def best_of(fn, repeat: int = 3) -> tuple[float, float]:
    """Shortest wall time and shortest CPU time of ``repeat`` calls (CPU time = one core's
    work, the fair figure on a shared machine)."""
    wall, cpu = [], []
    for _ in range(repeat):
        t0, c0 = time.perf_counter(), time.process_time()
        fn()
        wall.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
    return min(wall), min(cpu)


def main() -> None:
    cfg = Config()
    steps = two_state_steps(N_STEPS, 1)
    obs = Observations(build_chain(steps))
    fit_hmm(obs, 2, "gamma", "von_mises", 1, np.random.default_rng(0))  # compile / load the numba cache
    fit_wall, fit_s = best_of(lambda: fit_hmm(obs, 2, cfg.state_step_family, cfg.state_turn_family, cfg.state_starts,
                                    np.random.default_rng(2)))
    layout = Layout(2, "gamma", "von_mises", False)
    theta = layout.pack(fit_hmm(obs, 2, "gamma", "von_mises", 1, np.random.default_rng(2)).params)
    n_eval = 200
    eval_s = best_of(lambda: [obs.loglik_and_gradient(layout, theta) for _ in range(n_eval)])[1] / n_eval
    stage_wall, stage_s = best_of(lambda: fit_animal_states(steps, cfg, np.random.default_rng(3)), repeat=1)
    print(f"2-state fit, {N_STEPS} steps, {cfg.state_starts} starts: CPU {fit_s:.3f} s (wall {fit_wall:.3f} s; "
          f"{fit_s / cfg.state_starts * 1e3:.0f} ms CPU per start); ratio to the {GOAL_S:.0f} s goal: {fit_s / GOAL_S:.2f}")
    print(f"one log-likelihood + gradient evaluation: {eval_s * 1e6:.0f} us CPU")
    print(f"whole per-animal stage (K = {', '.join(map(str, cfg.state_counts))}, decoding): "
          f"CPU {stage_s:.2f} s (wall {stage_wall:.2f} s)")


if __name__ == "__main__":
    main()
