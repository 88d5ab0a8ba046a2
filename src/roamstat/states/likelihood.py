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
from roamstat.states.families import TURN_FAMILIES, step_logpdf, turn_logpdf
from roamstat.states.params import HmmParams, Layout
from roamstat.states.recursions import forward_loglik, posterior_counts

#: Forward-difference step for derivatives of log densities on the free scale (relative error
#: of the gradient ~1e-6, ample for the optimiser's stopping rule).
DIFF_STEP = 1e-6


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

    @property
    def n_obs(self) -> int:
        """Slots with an observed step (the sample size in BIC)."""
        return int(self.pos.size + self.zeros.size)

    def log_densities(self, p: HmmParams) -> tuple[np.ndarray, np.ndarray]:
        """Step and turn log densities per slot and state, each shape (S, K), 0 where missing."""
        return self._assemble(p, step_logpdf(p.step_family, self.step_pos, p.shape, p.scale),
                              turn_logpdf(p.turn_family, self.turn_obs, p.mu, p.conc))

    def _assemble(self, p: HmmParams, pos_lp: np.ndarray, turn_obs_lp: np.ndarray):
        """Full (S, K) step and turn log densities from those at the observed values."""
        k = p.n_states
        step_lp = np.zeros((self.n_slots, k))
        turn_lp = np.zeros((self.n_slots, k))
        if p.zero is not None:
            pos_lp = pos_lp + np.log1p(-p.zero)
            step_lp[self.zeros] = np.log(p.zero)
        step_lp[self.pos] = pos_lp
        turn_lp[self.turns] = turn_obs_lp
        return step_lp, turn_lp

    def loglik(self, p: HmmParams) -> float:
        """Log-likelihood by the scaled forward algorithm."""
        step_lp, turn_lp = self.log_densities(p)
        with np.errstate(all="ignore"):
            logp = step_lp + turn_lp
        if not np.all(np.isfinite(logp)):
            return -np.inf
        return float(forward_loglik(logp, self.chain.restart, p.delta, p.gamma))

    def loglik_and_gradient(self, layout: Layout, theta: np.ndarray) -> tuple[float, np.ndarray]:
        """Log-likelihood and its gradient with respect to the free parameters.

        The HMM part is exact (Fisher's identity, :func:`posterior_counts`);
        the derivative of each state's log density with respect to its own
        free parameters is a forward difference of the family's density
        (the density and both perturbations in one broadcast call per family).
        """
        p = layout.unpack(theta)
        k = p.n_states
        # one broadcast call per family: the density and its two one-sided perturbations
        up = np.exp(DIFF_STEP)
        shape = np.concatenate([p.shape, p.shape * up, p.shape])
        scale = np.concatenate([p.scale, p.scale, p.scale * up])
        lp = step_logpdf(p.step_family, self.step_pos, shape, scale)
        d_shape, d_scale = (lp[:, k:2 * k] - lp[:, :k]) / DIFF_STEP, (lp[:, 2 * k:] - lp[:, :k]) / DIFF_STEP
        conc_free = theta[3 * k:4 * k]
        conc = np.concatenate([p.conc, p.conc, TURN_FAMILIES[layout.turn_family].from_free(conc_free + DIFF_STEP)])
        tl = turn_logpdf(p.turn_family, self.turn_obs, np.concatenate([p.mu, p.mu + DIFF_STEP, p.mu]), conc)
        d_mu, d_conc = (tl[:, k:2 * k] - tl[:, :k]) / DIFF_STEP, (tl[:, 2 * k:] - tl[:, :k]) / DIFF_STEP
        step_lp, turn_lp = self._assemble(p, lp[:, :k], tl[:, :k])
        with np.errstate(all="ignore"):
            logp = step_lp + turn_lp
        if not np.all(np.isfinite(logp)):
            return -np.inf, np.zeros_like(theta)
        delta = p.delta
        ll, local, counts = posterior_counts(logp, self.chain.restart, delta, p.gamma)
        if not np.isfinite(ll):
            return -np.inf, np.zeros_like(theta)
        grad = np.zeros_like(theta)
        w = local[self.pos]
        grad[:k] = np.sum(w * d_shape, axis=0)
        grad[k:2 * k] = np.sum(w * d_scale, axis=0)
        wt = local[self.turns]
        grad[2 * k:3 * k] = np.sum(wt * d_mu, axis=0)
        grad[3 * k:4 * k] = np.sum(wt * d_conc, axis=0)
        off = ~np.eye(k, dtype=bool)
        eta_grad = counts - p.gamma * counts.sum(axis=1, keepdims=True)
        eta_grad += _stationary_slope(p.gamma, delta, local[self.chain.restart].sum(axis=0) / delta)
        grad[4 * k:4 * k + k * (k - 1)] = eta_grad[off]
        if p.zero is not None:
            grad[4 * k + k * (k - 1):] = (np.sum(local[self.zeros], axis=0) * (1.0 - p.zero)
                                         - np.sum(w, axis=0) * p.zero)
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
