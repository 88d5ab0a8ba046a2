"""An independent simulator of state-switching tracks, for the tests of roamstat.states.

Written from the model's definition (Morales et al. 2004; Zucchini, MacDonald
& Langrock 2016, §2.1), with numpy's own generators and a plain loop for the
Markov chain; it shares no code with the fitting package.  Tracks are laid
out as planar fixes every hour, then turned into the steps table the program
uses (step length, turning angle as the change of heading), so missed fixes
give the longer steps and missing turns a real deployment has.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

HOUR_S = 3600.0

# Two behaviours in the range of collared ungulates at hourly fixes (illustrative values):
# state 1 short steps with frequent reversals, state 2 long, straight steps.
TWO_STATES = {
    "shape": np.array([1.5, 3.0]), "scale": np.array([30.0, 150.0]),
    "mu": np.array([np.pi, 0.0]), "kappa": np.array([1.0, 4.0]),
    "gamma": np.array([[0.9, 0.1], [0.15, 0.85]]),
}


def markov_chain(gamma: np.ndarray, n: int, rng: np.random.Generator) -> np.ndarray:
    """States 0..K-1 of a chain started in its stationary law (eigenvector of gamma')."""
    w, v = np.linalg.eig(gamma.T)
    delta = np.real(v[:, np.argmin(np.abs(w - 1.0))])
    delta /= delta.sum()
    # inversion: the next state is the first whose cumulative row probability exceeds a uniform
    cum = np.cumsum(gamma, axis=1).tolist()
    u = rng.random(n).tolist()
    s = [int(np.searchsorted(np.cumsum(delta), u[0], side="right"))]
    for t in range(1, n):
        row = cum[s[-1]]
        s.append(next((j for j, c in enumerate(row) if u[t] < c), len(row) - 1))
    return np.array(s)


def track(truth: dict, n_steps: int, rng: np.random.Generator, animal: str = "a"):
    """Fixes of one animal: returns (times, x, y, states) with states[t] the state of step t."""
    states = markov_chain(truth["gamma"], n_steps, rng) if truth["gamma"].shape[0] > 1 else np.zeros(n_steps, int)
    if truth.get("step") == "weibull":
        step = truth["scale"][states] * rng.weibull(truth["shape"][states])
    else:
        step = rng.gamma(truth["shape"][states], truth["scale"][states])
    if truth.get("turn") == "wrapped_cauchy":
        # a Cauchy angle of scale -ln(rho) wrapped onto the circle (Mardia & Jupp 2000, §3.5.7)
        turn = truth["mu"][states] - np.log(truth["rho"][states]) * rng.standard_cauchy(states.size)
    else:
        turn = rng.vonmises(truth["mu"][states], truth["kappa"][states])
    heading = rng.uniform(-np.pi, np.pi) + np.cumsum(turn)
    x = np.concatenate([[0.0], np.cumsum(step * np.cos(heading))])
    y = np.concatenate([[0.0], np.cumsum(step * np.sin(heading))])
    times = pd.Timestamp("2025-05-01", tz="UTC") + pd.to_timedelta(np.arange(n_steps + 1) * HOUR_S, unit="s")
    return times, x, y, states


def steps_table(times, x, y, animal: str = "a") -> pd.DataFrame:
    """The steps between consecutive fixes (planar), in the columns of the program's steps table."""
    dx, dy = np.diff(x), np.diff(y)
    heading = np.arctan2(dy, dx)
    turn = np.angle(np.exp(1j * np.diff(heading)))  # change of heading, wrapped to (-pi, pi]
    t = pd.Series(times)
    return pd.DataFrame({
        "animal_id": animal, "segment": 0, "t_start": t.iloc[:-1].reset_index(drop=True),
        "t_end": t.iloc[1:].reset_index(drop=True), "dt_s": t.diff().dt.total_seconds().to_numpy()[1:],
        "step_m": np.hypot(dx, dy), "heading_rad": heading,
        "turn_rad": np.concatenate([[np.nan], turn]), "speed_m_s": np.nan,
    })


def observed_steps(truth: dict, n_steps: int, rng: np.random.Generator, missed: float = 0.0):
    """Steps table after missing a share ``missed`` of the fixes, and the true state of each row
    (the state of the hour in which the step starts)."""
    times, x, y, states = track(truth, n_steps, rng)
    keep = np.ones(n_steps + 1, bool)
    keep[1:-1] = rng.random(n_steps - 1) >= missed
    kept = np.flatnonzero(keep)
    table = steps_table(times[kept], x[kept], y[kept])
    return table, states[kept[:-1]]
