"""Parameters of a K-state movement HMM and their unconstrained coordinates.

Per state: step shape and scale (log scale), optional zero mass (logit), turn
mean direction mu (free, wrapped on output) and concentration (log kappa or
logit rho).  Transition matrix: each row a multinomial logit with the
diagonal as reference, so row i is exp(eta_ij) / sum_j exp(eta_ij) with
eta_ii = 0.  The chain starts in its stationary distribution delta, solving
delta (I - Gamma + U) = 1 with U all ones (Zucchini, MacDonald & Langrock
2016, §3.3.1 and exercise 2.8), so delta is not estimated.

References
----------
Zucchini, W., MacDonald, I. L. & Langrock, R. (2016). Hidden Markov Models
for Time Series: An Introduction Using R, 2nd ed. CRC Press.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
from scipy import special

from roamstat.models.base import wrap_angle
from roamstat.states.families import TURN_FAMILIES


@dataclass(frozen=True)
class HmmParams:
    """Natural parameters; arrays have one entry per state (``gamma`` is K x K)."""

    step_family: str
    turn_family: str
    shape: np.ndarray
    scale: np.ndarray
    zero: np.ndarray | None  # probability of a zero step per state, or None (no zero mass)
    mu: np.ndarray
    conc: np.ndarray  # kappa (von Mises) or rho (wrapped Cauchy)
    gamma: np.ndarray

    @property
    def n_states(self) -> int:
        return int(self.shape.size)

    @property
    def n_free(self) -> int:
        """Free parameters counted in AIC and BIC."""
        k = self.n_states
        return 4 * k + k * (k - 1) + (k if self.zero is not None else 0)

    @property
    def delta(self) -> np.ndarray:
        """Stationary distribution of the transition matrix."""
        return stationary(self.gamma)

    def permuted(self, order) -> "HmmParams":
        """The same model with states relabelled: new state i is old state ``order[i]``."""
        o = np.asarray(order)
        return replace(self, shape=self.shape[o], scale=self.scale[o], mu=self.mu[o], conc=self.conc[o],
                       zero=None if self.zero is None else self.zero[o], gamma=self.gamma[np.ix_(o, o)])


def stationary(gamma: np.ndarray) -> np.ndarray:
    """delta solving delta (I - Gamma + U) = 1 (Zucchini et al. 2016, exercise 2.8)."""
    k = gamma.shape[0]
    delta = np.linalg.solve((np.eye(k) - gamma + 1.0).T, np.ones(k))
    delta = np.clip(delta, 0.0, None)
    return delta / delta.sum()


@dataclass(frozen=True)
class Layout:
    """Where each parameter sits in the unconstrained vector."""

    n_states: int
    step_family: str
    turn_family: str
    zero_mass: bool

    @property
    def size(self) -> int:
        k = self.n_states
        return 4 * k + k * (k - 1) + (k if self.zero_mass else 0)

    def unpack(self, theta: np.ndarray) -> HmmParams:
        """Natural parameters from the unconstrained vector."""
        k = self.n_states
        turn = TURN_FAMILIES[self.turn_family]
        shape, scale = np.exp(theta[:k]), np.exp(theta[k:2 * k])
        mu, conc = theta[2 * k:3 * k], turn.from_free(theta[3 * k:4 * k])
        eta = np.zeros((k, k))
        eta[~np.eye(k, dtype=bool)] = theta[4 * k:4 * k + k * (k - 1)]
        gamma = np.exp(eta - eta.max(axis=1, keepdims=True))
        gamma /= gamma.sum(axis=1, keepdims=True)
        zero = special.expit(theta[4 * k + k * (k - 1):]) if self.zero_mass else None
        return HmmParams(self.step_family, self.turn_family, shape, scale, zero, mu, conc, gamma)

    def pack(self, p: HmmParams) -> np.ndarray:
        """Unconstrained vector of natural parameters (inverse of :meth:`unpack`)."""
        k = self.n_states
        turn = TURN_FAMILIES[self.turn_family]
        g = np.clip(p.gamma, 1e-300, None)
        eta = np.log(g) - np.log(np.diag(g))[:, None]
        parts = [np.log(p.shape), np.log(p.scale), wrap_angle(p.mu), turn.to_free(p.conc),
                 eta[~np.eye(k, dtype=bool)]]
        if self.zero_mass:
            parts.append(special.logit(p.zero))
        return np.concatenate(parts)
