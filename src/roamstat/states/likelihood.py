"""Log densities of a chain's observations and the HMM log-likelihood.

The observation of a slot is the pair (step length, turning angle), taken as
conditionally independent given the state (Morales et al. 2004; Langrock et
al. 2012).  A missing step or turn contributes log density 0 (density 1).
With a zero mass, a zero step has probability z_k under state k and a
positive step density (1 - z_k) f_k(l).

References
----------
Morales, J. M., Haydon, D. T., Frair, J., Holsinger, K. E. & Fryxell, J. M.
(2004). Extracting more out of relocation data: building movement models as
mixtures of random walks. Ecology 85: 2436-2445.
Langrock, R., King, R., Matthiopoulos, J., Thomas, L., Fortin, D. & Morales,
J. M. (2012). Flexible and practical modeling of animal telemetry data:
hidden Markov models and extensions. Ecology 93: 2336-2342.
"""

from __future__ import annotations

import numpy as np

from roamstat.states.chain import Chain
from roamstat.states.densities import MISSING, POSITIVE, ZERO, slot_terms, step_constants, turn_constants
from roamstat.states.params import HmmParams, Layout
from roamstat.states.recursions import forward_loglik, posterior_sums


class Observations:
    """The observed values of a chain, split once for repeated likelihood evaluations."""

    def __init__(self, chain: Chain, zero_step_m: float = 0.0):
        self.chain = chain
        self.zero_step_m = zero_step_m
        obs = np.isfinite(chain.step_m)
        self.pos = np.flatnonzero(obs & (chain.step_m > zero_step_m))
        self.zeros = np.flatnonzero(obs & (chain.step_m <= zero_step_m))
        self.turns = np.flatnonzero(np.isfinite(chain.turn_rad))
        self.step_pos = chain.step_m[self.pos]
        self.turn_obs = chain.turn_rad[self.turns]
        self.n_slots = chain.n_slots
        # per-slot inputs of the compiled pass (densities.slot_terms), computed once
        self._step_kind = np.full(self.n_slots, MISSING, np.int8)
        self._step_kind[self.pos] = POSITIVE
        self._step_kind[self.zeros] = ZERO
        self._x = np.ones(self.n_slots)
        self._x[self.pos] = self.step_pos
        self._log_x = np.log(self._x)
        self._turn_ok = np.isfinite(chain.turn_rad)
        self._turn = np.where(self._turn_ok, chain.turn_rad, 0.0)
        self._cos_t, self._sin_t = np.cos(self._turn), np.sin(self._turn)

    @property
    def n_obs(self) -> int:
        """Slots with an observed step (the sample size in BIC)."""
        return int(self.pos.size + self.zeros.size)

    def log_densities(self, p: HmmParams) -> tuple[np.ndarray, np.ndarray]:
        """Step and turn log densities per slot and state, each shape (S, K), 0 where missing."""
        step_lp, turn_lp, _ = self._terms(p, gradient=False)
        return step_lp, turn_lp

    def _terms(self, p: HmmParams, gradient: bool) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """:func:`~roamstat.states.densities.slot_terms` of this chain under ``p``."""
        step_norm, step_slope = step_constants(p.step_family, p.shape, p.scale)
        turn_norm, turn_slope = turn_constants(p.turn_family, p.conc)
        if p.zero is None:
            log_zero = log_moving = np.zeros(p.n_states)
        else:
            log_zero, log_moving = np.log(p.zero), np.log1p(-p.zero)
        return slot_terms(self._step_kind, self._x, self._log_x, self._turn_ok, self._turn, self._cos_t,
                          self._sin_t, p.step_family == "weibull", p.shape, p.scale, step_norm, step_slope,
                          p.zero is not None, log_zero, log_moving, p.turn_family == "wrapped_cauchy", p.mu, p.conc, turn_norm,
                          turn_slope, gradient)

    def loglik(self, p: HmmParams) -> float:
        """Log-likelihood by the scaled forward algorithm."""
        step_lp, turn_lp = self.log_densities(p)
        with np.errstate(all="ignore"):
            logp = step_lp + turn_lp
        if not np.all(np.isfinite(logp)):
            return -np.inf
        return float(forward_loglik(logp, self.chain.restart, p.delta, p.gamma))

    def loglik_and_gradient(self, layout: Layout, theta: np.ndarray) -> tuple[float, np.ndarray]:
        """Log-likelihood and its exact gradient with respect to the free parameters.

        The HMM part comes from Fisher's identity (:func:`posterior_sums`):
        each state's log-density derivatives (:mod:`roamstat.states.densities`,
        analytic; the zero mass's included) weighted by the local state
        probabilities, and the expected transition counts for the transition matrix.
        """
        p = layout.unpack(theta)
        k = p.n_states
        step_lp, turn_lp, deriv = self._terms(p, gradient=True)
        with np.errstate(all="ignore"):
            logp = step_lp + turn_lp
        if not np.all(np.isfinite(logp)):
            return -np.inf, np.zeros_like(theta)
        delta = p.delta
        ll, sums, counts, first = posterior_sums(logp, self.chain.restart, delta, p.gamma, deriv)
        if not np.isfinite(ll):
            return -np.inf, np.zeros_like(theta)
        grad = np.zeros_like(theta)
        grad[:4 * k] = sums[:4].ravel()  # shape, scale, mu and concentration blocks, in the layout's order
        off = ~np.eye(k, dtype=bool)
        eta_grad = counts - p.gamma * counts.sum(axis=1, keepdims=True)
        eta_grad += _stationary_slope(p.gamma, delta, first / delta)
        grad[4 * k:4 * k + k * (k - 1)] = eta_grad[off]
        if p.zero is not None:
            grad[4 * k + k * (k - 1):] = sums[4]
        return float(ll), grad


def _stationary_slope(gamma: np.ndarray, delta: np.ndarray, weight: np.ndarray) -> np.ndarray:
    """sum_k weight_k d delta_k / d eta_ij for the multinomial-logit rows of gamma.

    delta A = 1' with A = I - Gamma + U, so d delta = delta dGamma A^-1 and
    sum_k w_k d delta_k / d gamma_il = delta_i (A^-1 w)_l; then through the
    softmax, d gamma_il / d eta_ij = gamma_il (1[l = j] - gamma_ij).
    """
    k = gamma.shape[0]
    slope_gamma = np.outer(delta, np.linalg.solve(np.eye(k) - gamma + 1.0, weight))
    return gamma * (slope_gamma - np.sum(slope_gamma * gamma, axis=1, keepdims=True))
