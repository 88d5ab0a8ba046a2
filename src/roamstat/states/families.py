"""State-dependent step and turn families of the hidden Markov model.

The densities are the project's own families: step lengths through the scipy
distributions of :data:`roamstat.models.steps.FAMILIES` (gamma, Weibull),
turning angles through the scipy distributions behind
:class:`~roamstat.models.turns.VonMisesTurns` and
:class:`~roamstat.models.turns.WrappedCauchyTurns`.  Inside the likelihood the
density of all K states is evaluated in one broadcast call of the
distribution's standardised log density (scipy's ``_logpdf``, with scipy's
location-scale rule ``log f(x / scale) - log scale``); the public
``logpdf`` re-checks its arguments on every call, which costs more than the
whole forward recursion.  Fitted states are handed on as ordinary fitted
models of :mod:`roamstat.models.base` (``sample``, ``cdf``, ``mean`` ...).

Each family maps its natural parameters to an unconstrained vector and back:
log for shapes, scales and concentrations, logit for the wrapped Cauchy's rho,
the identity for the circular mean mu (Zucchini, MacDonald & Langrock 2016,
§3.3.1).

References
----------
Zucchini, W., MacDonald, I. L. & Langrock, R. (2016). Hidden Markov Models
for Time Series: An Introduction Using R, 2nd ed. CRC Press.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy import special, stats

from roamstat.errors import RoamstatError
from roamstat.models.steps import FAMILIES, ScipyStepModel
from roamstat.models.turns import TWO_PI, VonMisesTurns, WrappedCauchyTurns

#: Step families offered for states (two-parameter, location 0).
STEP_FAMILIES = ("gamma", "weibull")


@dataclass(frozen=True)
class TurnFamily:
    """A turning-angle family: scipy distribution, how angles enter it, its protocol model."""

    name: str
    keys: tuple[str, str]  # (mean direction, concentration)
    dist: stats.rv_continuous
    centre: Callable[[np.ndarray], np.ndarray]  # theta - mu -> the distribution's own argument
    to_free: Callable[[np.ndarray], np.ndarray]  # concentration -> unconstrained
    from_free: Callable[[np.ndarray], np.ndarray]
    model: Callable  # (mu, concentration, n, loglik) -> TurnModel


TURN_FAMILIES = {
    f.name: f
    for f in (
        # scipy's von Mises log density is kappa * (cos(d) - 1) + const: periodic, no wrap needed
        TurnFamily("von_mises", ("mu", "kappa"), stats.vonmises, lambda d: d, np.log, np.exp, VonMisesTurns),
        # scipy's wrapcauchy lives on [0, 2 pi) centred at 0 (see models/turns.py)
        TurnFamily("wrapped_cauchy", ("mu", "rho"), stats.wrapcauchy, lambda d: np.mod(d, TWO_PI),
                   special.logit, special.expit, WrappedCauchyTurns),
    )
}


def check_families(step_family: str, turn_family: str) -> None:
    """Raise a user-facing error for a family the state model does not offer."""
    if step_family not in STEP_FAMILIES:
        raise RoamstatError(f"state step family {step_family!r} is not offered; use one of {', '.join(STEP_FAMILIES)}")
    if turn_family not in TURN_FAMILIES:
        raise RoamstatError(f"state turn family {turn_family!r} is not offered; use one of {', '.join(TURN_FAMILIES)}")


def step_logpdf(family: str, x: np.ndarray, shape: np.ndarray, scale: np.ndarray) -> np.ndarray:
    """Log density of each step under each state, shape ``(len(x), K)``.

    ``x`` must be positive; the caller masks zero and missing steps.
    """
    dist = FAMILIES[family].dist
    return dist._logpdf(x[:, None] / scale, shape) - np.log(scale)


def turn_logpdf(family: str, theta: np.ndarray, mu: np.ndarray, conc: np.ndarray) -> np.ndarray:
    """Log density of each turning angle under each state, shape ``(len(theta), K)``."""
    f = TURN_FAMILIES[family]
    return f.dist._logpdf(f.centre(theta[:, None] - mu), conc)


def step_model(family: str, shape: float, scale: float, n: int = 0) -> ScipyStepModel:
    """The protocol model of one state's step lengths (loglik 0: the HMM carries the fit)."""
    return ScipyStepModel(FAMILIES[family], {"shape": float(shape), "scale": float(scale)}, n, 0.0)


def turn_model(family: str, mu: float, conc: float, n: int = 0):
    """The protocol model of one state's turning angles."""
    return TURN_FAMILIES[family].model(mu, float(conc), n, 0.0)


def start_step(family: str, mean: np.ndarray, cv: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Shape and scale with a given mean and coefficient of variation (for starting values).

    Gamma: shape = 1 / cv^2, scale = mean / shape.  Weibull: shape from the
    common approximation cv ~ shape^-1.086 (Justus et al. 1978, from memory),
    scale = mean / Gamma(1 + 1/shape).
    """
    if family == "gamma":
        shape = 1.0 / cv**2
        return shape, mean / shape
    shape = cv ** (-1.086)
    return shape, mean / np.exp(special.gammaln(1.0 + 1.0 / shape))


def concentration(family: str, r: np.ndarray) -> np.ndarray:
    """Concentration with mean resultant length ``r`` (starting values).

    Von Mises: the approximation to A^-1(r) of Best & Fisher (1981), as given
    by Fisher (1993, eq. 4.40), from memory; wrapped Cauchy: rho = r.
    """
    r = np.clip(r, 1e-3, 0.95)
    if family == "wrapped_cauchy":
        return r
    return np.where(r < 0.53, 2 * r + r**3 + 5 * r**5 / 6,
                    np.where(r < 0.85, -0.4 + 1.39 * r + 0.43 / (1 - r), 1 / (r**3 - 4 * r**2 + 3 * r)))


__all__ = ["STEP_FAMILIES", "TURN_FAMILIES", "TurnFamily", "check_families", "concentration", "start_step",
           "step_logpdf", "step_model", "turn_logpdf", "turn_model"]
