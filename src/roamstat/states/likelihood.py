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

#: Central-difference step for derivatives of log densities on the free scale.
DIFF_STEP = 1e-5


class Observations:
    """The observed values of a chain, split once for repeated likelihood evaluations."""

    def __init__(self, chain: Chain, zero_step_m: float = 0.0):
        self.chain = chain
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
        k = p.n_states
        step_lp = np.zeros((self.n_slots, k))
        turn_lp = np.zeros((self.n_slots, k))
        lp = step_logpdf(p.step_family, self.step_pos, p.shape, p.scale)
        if p.zero is not None:
            lp = lp + np.log1p(-p.zero)
            step_lp[self.zeros] = np.log(p.zero)
        step_lp[self.pos] = lp
        turn_lp[self.turns] = turn_logpdf(p.turn_family, self.turn_obs, p.mu, p.conc)
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
        free parameters is a central difference of the family's density
        (all perturbations in one broadcast call per family).
        """
        p = layout.unpack(theta)
        k = p.n_states
        step_lp, turn_lp = self.log_densities(p)
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
        d_shape, d_scale = self._step_slopes(p)
        grad[:k] = np.sum(w * d_shape, axis=0)
        grad[k:2 * k] = np.sum(w * d_scale, axis=0)
        d_mu, d_conc = self._turn_slopes(layout, p, theta[3 * k:4 * k])
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

    def _step_slopes(self, p: HmmParams) -> tuple[np.ndarray, np.ndarray]:
        """d log f_k(x_t) / d log shape and / d log scale at each positive step."""
        e = np.exp([DIFF_STEP, -DIFF_STEP, 0.0, 0.0])
        shape = np.concatenate([p.shape[None, :] * e[:2, None], np.repeat(p.shape[None, :], 2, axis=0)])
        scale = np.concatenate([np.repeat(p.scale[None, :], 2, axis=0), p.scale[None, :] * e[:2, None]])
        lp = step_logpdf(p.step_family, self.step_pos, shape.ravel(), scale.ravel()).reshape(-1, 4, p.n_states)
        return (lp[:, 0] - lp[:, 1]) / (2 * DIFF_STEP), (lp[:, 2] - lp[:, 3]) / (2 * DIFF_STEP)

    def _turn_slopes(self, layout: Layout, p: HmmParams, conc_free: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """d log g_k(theta_t) / d mu and / d (free concentration) at each observed turn."""
        from_free = TURN_FAMILIES[layout.turn_family].from_free
        h = np.array([DIFF_STEP, -DIFF_STEP, 0.0, 0.0])
        mu = (p.mu[None, :] + h[:, None]).ravel()
        conc = np.concatenate([np.repeat(p.conc[None, :], 2, axis=0),
                               from_free(conc_free[None, :] + h[:2, None])]).ravel()
        lp = turn_logpdf(p.turn_family, self.turn_obs, mu, conc).reshape(-1, 4, p.n_states)
        return (lp[:, 0] - lp[:, 1]) / (2 * DIFF_STEP), (lp[:, 2] - lp[:, 3]) / (2 * DIFF_STEP)


def _stationary_slope(gamma: np.ndarray, delta: np.ndarray, weight: np.ndarray) -> np.ndarray:
    """sum_k weight_k d delta_k / d eta_ij for the multinomial-logit rows of gamma.

    delta A = 1' with A = I - Gamma + U, so d delta = delta dGamma A^-1 and
    sum_k w_k d delta_k / d gamma_il = delta_i (A^-1 w)_l; then through the
    softmax, d gamma_il / d eta_ij = gamma_il (1[l = j] - gamma_ij).
    """
    k = gamma.shape[0]
    slope_gamma = np.outer(delta, np.linalg.solve(np.eye(k) - gamma + 1.0, weight))
    return gamma * (slope_gamma - np.sum(slope_gamma * gamma, axis=1, keepdims=True))
