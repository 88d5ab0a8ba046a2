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
from roamstat.states.densities import MISSING, POSITIVE, ZERO, slot_terms, state_table, step_constants, turn_constants
from roamstat.states.evaluate import loglik_gradient
from roamstat.states.families import TURN_FAMILIES
from roamstat.states.params import HmmParams, Layout
from roamstat.states.recursions import forward_loglik


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
        # per-slot inputs of the compiled passes (densities.slot_terms, evaluate.loglik_gradient), computed once
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
        step_norm, step_slope = step_constants(p.step_family, p.shape, p.scale)
        turn_norm, turn_slope = turn_constants(p.turn_family, p.conc)
        tab = state_table(p.shape, p.scale, np.empty(0) if p.zero is None else p.zero, p.mu, p.conc, step_norm,
                          step_slope, turn_norm, turn_slope)
        return slot_terms(self._step_kind, self._x, self._log_x, self._turn_ok, self._turn, self._cos_t,
                          self._sin_t, tab, p.step_family == "weibull", p.turn_family == "wrapped_cauchy")

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

        One compiled pass (:func:`~roamstat.states.evaluate.loglik_gradient`):
        the HMM part comes from Fisher's identity, each state's log-density
        derivatives (:mod:`roamstat.states.densities`, analytic; the zero
        mass's included) weighted by the local state probabilities, and the
        expected transition counts for the transition matrix.  Only the
        per-state special functions are computed here.
        """
        k = layout.n_states
        shape, scale = np.exp(theta[:k]), np.exp(theta[k:2 * k])
        conc = TURN_FAMILIES[layout.turn_family].from_free(theta[3 * k:4 * k])
        step_norm, step_slope = step_constants(layout.step_family, shape, scale)
        turn_norm, turn_slope = turn_constants(layout.turn_family, conc)
        ll, grad = loglik_gradient(theta, shape, scale, conc, step_norm, step_slope, turn_norm, turn_slope,
                                   layout.step_family == "weibull", layout.turn_family == "wrapped_cauchy",
                                   layout.zero_mass, self._step_kind, self._x, self._log_x, self._turn_ok,
                                   self._turn, self._cos_t, self._sin_t, self.chain.restart)
        return float(ll), grad
