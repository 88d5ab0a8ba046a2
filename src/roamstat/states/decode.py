"""Decoded states, local state probabilities and pseudo-residuals of a fitted HMM.

- Global decoding: the most probable state sequence (Viterbi 1967; Zucchini,
  MacDonald & Langrock 2016, §5.4.2).
- Local decoding: Pr(C_t = k | all observations) from the forward and
  backward probabilities (ibid., §5.4.1).
- Ordinary pseudo-residuals (ibid., §6.2.2): for each observed step,
  Phi^-1 of its conditional distribution function given every other
  observation, sum_k Pr(C_t = k | x^(-t)) F_k(l_t); likewise for turns (with
  the distribution function measured from -pi).  The weights condition on
  the same slot's other variable too, so step and turn residuals each use all
  the remaining data.  Under the model they are standard normal.  A zero step
  under a zero mass gets the mid-point of its probability jump.

References
----------
Viterbi, A. J. (1967). Error bounds for convolutional codes and an
asymptotically optimum decoding algorithm. IEEE Transactions on Information
Theory 13: 260-269.
Zucchini, W., MacDonald, I. L. & Langrock, R. (2016). Hidden Markov Models
for Time Series: An Introduction Using R, 2nd ed. CRC Press.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special

from roamstat.states.families import step_model, turn_model
from roamstat.states.likelihood import Observations
from roamstat.states.params import HmmParams
from roamstat.states.recursions import forward_backward, viterbi


@dataclass
class Decoded:
    """Per slot: Viterbi state (0-based), local probabilities (S, K), residuals (NaN if unobserved)."""

    state: np.ndarray
    local: np.ndarray
    step_residual: np.ndarray
    turn_residual: np.ndarray


def decode(obs: Observations, p: HmmParams) -> Decoded:
    """Viterbi path, local state probabilities and pseudo-residuals for one chain."""
    step_lp, turn_lp = obs.log_densities(p)
    logp = step_lp + turn_lp
    restart = obs.chain.restart
    path = viterbi(logp, restart, p.delta, p.gamma)
    _, alpha, prior, beta = forward_backward(logp, restart, p.delta, p.gamma)
    local = alpha * beta
    local /= local.sum(axis=1, keepdims=True)
    rest = prior * beta  # proportional to Pr(C_t = k | all but slot t)

    step_u = np.full(obs.n_slots, np.nan)
    idx = np.concatenate([obs.pos, obs.zeros])
    is_zero = np.arange(idx.size) >= obs.pos.size
    cdf = np.empty((idx.size, p.n_states))
    for k in range(p.n_states):
        cdf[:, k] = step_model(p.step_family, p.shape[k], p.scale[k]).cdf(obs.chain.step_m[idx])
    if p.zero is not None:
        cdf = np.where(is_zero[:, None], 0.5 * p.zero, p.zero + (1.0 - p.zero) * cdf)
    step_u[idx] = _mix(rest[idx], turn_lp[idx], cdf)

    turn_u = np.full(obs.n_slots, np.nan)
    cdf = np.column_stack([turn_model(p.turn_family, p.mu[k], p.conc[k]).cdf(obs.turn_obs)
                           for k in range(p.n_states)])
    turn_u[obs.turns] = _mix(rest[obs.turns], step_lp[obs.turns], cdf)
    return Decoded(path, local, _normal(step_u), _normal(turn_u))


def _mix(rest: np.ndarray, other_lp: np.ndarray, cdf: np.ndarray) -> np.ndarray:
    """sum_k w_k F_k with w proportional to rest_k times the other variable's density."""
    w = rest * np.exp(other_lp - other_lp.max(axis=1, keepdims=True))
    return np.sum(w * cdf, axis=1) / np.sum(w, axis=1)


def _normal(u: np.ndarray) -> np.ndarray:
    # keep residuals finite at u = 0 or 1 (a value at the edge of every state's support)
    return special.ndtri(np.clip(u, 1e-12, 1.0 - 1e-12))
