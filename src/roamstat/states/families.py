"""State-dependent step and turn families of the hidden Markov model.

The densities are the project's own families: step lengths as in
:data:`roamstat.models.steps.FAMILIES` (gamma, Weibull), turning angles as in
:class:`~roamstat.models.turns.VonMisesTurns` and
:class:`~roamstat.models.turns.WrappedCauchyTurns`.  Inside the likelihood
they are evaluated, with their derivatives, by the compiled pass of
:mod:`roamstat.states.densities`.  Fitted states are handed on as ordinary
fitted models of :mod:`roamstat.models.base` (``sample``, ``cdf``, ``mean`` ...).

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
from scipy import special

from roamstat.errors import RoamstatError
from roamstat.models.steps import FAMILIES, ScipyStepModel
from roamstat.models.turns import VonMisesTurns, WrappedCauchyTurns

#: Step families offered for states (two-parameter, location 0).
STEP_FAMILIES = ("gamma", "weibull")


@dataclass(frozen=True)
class TurnFamily:
    """A turning-angle family: parameter names, free coordinates of the concentration, protocol model."""

    name: str
    keys: tuple[str, str]  # (mean direction, concentration)
    to_free: Callable[[np.ndarray], np.ndarray]  # concentration -> unconstrained
    from_free: Callable[[np.ndarray], np.ndarray]
    model: Callable  # (mu, concentration, n, loglik) -> TurnModel


TURN_FAMILIES = {
    f.name: f
    for f in (
        TurnFamily("von_mises", ("mu", "kappa"), np.log, np.exp, VonMisesTurns),
        TurnFamily("wrapped_cauchy", ("mu", "rho"), special.logit, special.expit, WrappedCauchyTurns),
    )
}


def check_families(step_family: str, turn_family: str) -> None:
    """Raise a user-facing error for a family the state model does not offer."""
    if step_family not in STEP_FAMILIES:
        raise RoamstatError(f"state step family {step_family!r} is not offered; use one of {', '.join(STEP_FAMILIES)}")
    if turn_family not in TURN_FAMILIES:
        raise RoamstatError(f"state turn family {turn_family!r} is not offered; use one of {', '.join(TURN_FAMILIES)}")


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
           "step_model", "turn_model"]
