"""The protocol every fitted distribution follows.

Downstream code (null walks, report) only uses the attributes and methods
defined here, never a family name.  Step models and turn models share
:class:`FittedModel`; step models add :meth:`StepModel.mean` and
:meth:`StepModel.second_moment`, turn models add :meth:`TurnModel.mean_cos`
and :meth:`TurnModel.mean_sin`.

References
----------
Akaike, H. (1974). A new look at the statistical model identification.
IEEE Transactions on Automatic Control 19: 716-723.
Hurvich, C. M. & Tsai, C.-L. (1989). Regression and time series model
selection in small samples. Biometrika 76: 297-307.
"""

from __future__ import annotations

import math
from abc import ABC, abstractmethod

import numpy as np

from roamstat.track import wrap_angle  # noqa: F401  (one wrap for the whole project)


class FittedModel(ABC):
    """A maximum-likelihood fit of one family to one set of observations.

    Attributes (set by subclasses)
    ------------------------------
    name : str
        Family name as written to ``fits.csv`` (for display only).
    params : dict
        Parameter name -> plain float, exactly the keys of the family.
    n : int
        Number of observations the fit used.
    k : int
        Number of free parameters (counted in AIC).
    loglik : float
        Maximised log-likelihood.
    support : tuple of float
        ``(lower, upper)`` of the values the model describes; tail models of
        step length have ``lower = xmin`` (and ``upper = xmax`` when bounded).
    fixed_keys : tuple of str
        Keys of ``params`` the fit conditions on rather than estimates (such
        as a power law's xmin); bootstrap intervals leave them out.
    circular_keys : tuple of str
        Keys that are angles; their intervals may extend past +-pi.
    endpoint_keys : tuple of str
        Keys estimated at a sample extreme (a truncated power law's fitted
        xmax); bootstrap percentiles fail there, so their intervals come from
        :meth:`endpoint_interval` instead.
    """

    fixed_keys: tuple = ()
    circular_keys: tuple = ()  # angle parameters (intervals are taken around the estimate)
    endpoint_keys: tuple = ()

    name: str
    params: dict
    n: int
    k: int
    loglik: float
    support: tuple

    @property
    def aic(self) -> float:
        """Akaike information criterion 2k - 2 log L (Akaike 1974)."""
        return 2.0 * self.k - 2.0 * self.loglik

    @property
    def aicc(self) -> float:
        """Small-sample AIC, AIC + 2k(k+1)/(n-k-1) (Hurvich & Tsai 1989); inf if n <= k+1."""
        denom = self.n - self.k - 1
        return self.aic + 2.0 * self.k * (self.k + 1) / denom if denom > 0 else math.inf

    @abstractmethod
    def logpdf(self, x) -> np.ndarray:
        """Log density at ``x`` (-inf outside the support)."""

    @abstractmethod
    def cdf(self, x) -> np.ndarray:
        """Cumulative distribution function at ``x`` (used for the KS statistic)."""

    @abstractmethod
    def sample(self, n: int, rng: np.random.Generator) -> np.ndarray:
        """``n`` independent draws, using only ``rng`` for randomness."""

    @abstractmethod
    def refit(self, x: np.ndarray) -> "FittedModel":
        """The same family, with the same fixed settings (xmin, ...), fitted to ``x``."""

    def endpoint_interval(self, key: str, level: float) -> list:
        """[lower, upper] for an ``endpoint_keys`` parameter (None = unbounded); see subclasses."""
        raise KeyError(key)

    def __repr__(self) -> str:
        shown = ", ".join(f"{k}={v:.4g}" for k, v in sorted(self.params.items()))
        return f"<{self.name}({shown}) n={self.n} loglik={self.loglik:.2f}>"


class StepModel(FittedModel):
    """A fitted step-length distribution (metres)."""

    @abstractmethod
    def mean(self) -> float:
        """E[l]; ``inf`` where the moment diverges."""

    @abstractmethod
    def second_moment(self) -> float:
        """E[l^2]; ``inf`` where the moment diverges."""


class TurnModel(FittedModel):
    """A fitted turning-angle distribution on (-pi, pi]."""

    support = (-math.pi, math.pi)
    circular_keys = ("mu",)

    @abstractmethod
    def mean_cos(self) -> float:
        """E[cos(theta)]."""

    @abstractmethod
    def mean_sin(self) -> float:
        """E[sin(theta)]."""


def plain_params(**values) -> dict:
    """Parameters as a dict of plain Python floats (JSON-ready, deterministic)."""
    return {key: float(value) for key, value in values.items()}
