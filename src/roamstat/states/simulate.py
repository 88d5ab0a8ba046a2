"""Simulation of a fitted movement HMM, vectorised over replicates.

First the Markov chain (the first state from the stationary distribution,
then each row of the transition matrix by inversion of its cumulative sums),
then each state's steps and turns from its own fitted model's ``sample``
(Zucchini, MacDonald & Langrock 2016, §2.1 and §5.5).

References
----------
Zucchini, W., MacDonald, I. L. & Langrock, R. (2016). Hidden Markov Models
for Time Series: An Introduction Using R, 2nd ed. CRC Press.
"""

from __future__ import annotations

import numpy as np

from roamstat.states.families import step_model, turn_model
from roamstat.states.params import HmmParams


def simulate_states(p: HmmParams, n_steps: int, n_reps: int, rng: np.random.Generator) -> np.ndarray:
    """State sequences (0-based), shape ``(n_reps, n_steps)``, each started in the stationary law."""
    k = p.n_states
    u = rng.random((n_reps, n_steps))
    out = np.empty((n_reps, n_steps), dtype=np.int64)
    if n_steps == 0:
        return out
    cum = np.cumsum(p.gamma, axis=1)
    out[:, 0] = np.minimum(np.searchsorted(np.cumsum(p.delta), u[:, 0], side="right"), k - 1)
    for t in range(1, n_steps):
        out[:, t] = np.minimum(np.sum(u[:, t, None] >= cum[out[:, t - 1]], axis=1), k - 1)
    return out


def simulate_moves(p: HmmParams, states: np.ndarray, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """Step lengths (m) and turning angles (rad) for given state sequences (same shape)."""
    steps = np.empty(states.shape)
    turns = np.empty(states.shape)
    for k in range(p.n_states):
        where = states == k
        n = int(np.count_nonzero(where))
        drawn = step_model(p.step_family, p.shape[k], p.scale[k]).sample(n, rng)
        if p.zero is not None:
            drawn[rng.random(n) < p.zero[k]] = 0.0
        steps[where] = drawn
        turns[where] = turn_model(p.turn_family, p.mu[k], p.conc[k]).sample(n, rng)
    return steps, turns


def simulate_hmm(p: HmmParams, n_steps: int, n_reps: int, rng: np.random.Generator):
    """States, steps and turns of ``n_reps`` simulated tracks of ``n_steps`` steps."""
    states = simulate_states(p, n_steps, n_reps, rng)
    steps, turns = simulate_moves(p, states, rng)
    return states, steps, turns
