"""State-space form of the four continuous-time movement models, discretised exactly.

Each axis of the plane is an independent copy of the same one-dimensional process (the models
are isotropic), with state ``(position, velocity)``. For models without a velocity the second
state is identically zero, so one filter serves every model.

Models and their per-axis parameters (SI units):

- brownian: dx = sqrt(2 D) dW; parameter D (``diffusion_m2_s``).
- ou: dx = -(x - mu)/tau_p dt + sqrt(2 sigma^2/tau_p) dW; ``sigma_m``, ``tau_position_s``
  (and the mean mu per axis).
- ctcrw: dx = v dt, dv = -v/tau_v dt + (sqrt(2 D)/tau_v) dW; ``diffusion_m2_s``,
  ``tau_velocity_s``.
- ou_ctcrw: x'' + (1/tau_p + 1/tau_v) x' + x/(tau_p tau_v) = white noise, scaled so the
  stationary variance is sigma^2; ``sigma_m``, ``tau_position_s``, ``tau_velocity_s`` (and mu).

``diffusion_m2_s`` D is defined so that the per-axis semi-variance grows as D t, i.e. the
two-dimensional mean squared displacement is 4 D t: for brownian at every lag, for ctcrw at long
lags, for ou at short lags (D = sigma^2 / tau_p) and for ou_ctcrw between tau_v and tau_p
(D = sigma^2 / tau_p).

References
----------
Uhlenbeck, G.E. & Ornstein, L.S. (1930) On the theory of the Brownian motion. Phys. Rev. 36, 823.
Dunn, J.E. & Gipson, P.S. (1977) Analysis of radio telemetry data in studies of home range.
Biometrics 33, 85-101.
Blackwell, P.G. (1997) Random diffusion models for animal movement. Ecol. Model. 100, 87-102.
Johnson, D.S., London, J.M., Lea, M.-A. & Durban, J.W. (2008) Continuous-time correlated random
walk model for animal telemetry data. Ecology 89, 1208-1215.
Fleming, C.H., Calabrese, J.M., Mueller, T., Olson, K.A., Leimgruber, P. & Fagan, W.F. (2014)
From fine-scale foraging to home ranges: a semivariance approach to identifying movement modes
across spatiotemporal scales. Am. Nat. 183, E154-E167.
"""
from __future__ import annotations

import numpy as np
from scipy.special import exprel

MOTION_MODELS = ("brownian", "ou", "ctcrw", "ou_ctcrw")
RANGE_RESIDENT = frozenset({"ou", "ou_ctcrw"})
PARAM_KEYS = ("diffusion_m2_s", "sigma_m", "tau_position_s", "tau_velocity_s", "error_sd_m")
MOVEMENT_PARAMS = {
    "brownian": ("diffusion_m2_s",),
    "ou": ("sigma_m", "tau_position_s"),
    "ctcrw": ("diffusion_m2_s", "tau_velocity_s"),
    "ou_ctcrw": ("sigma_m", "tau_position_s", "tau_velocity_s"),
}
# below this dt/tau_v the ctcrw position variances use their Taylor series (the closed form
# loses digits to cancellation there)
_SERIES_X = 1e-3


def check_model(name: str) -> None:
    """Raise ValueError for a name outside the registry."""
    if name not in MOTION_MODELS:
        raise ValueError(f"unknown motion model {name!r}; choose from {', '.join(MOTION_MODELS)}")


def _ouf_propagator(p: dict, dt: np.ndarray) -> np.ndarray:
    """exp(A dt) of the OU-position/OU-velocity drift matrix, shape (n, 2, 2).

    Sylvester's formula with the divided difference written through ``exprel`` so that it
    stays exact when tau_p = tau_v (the critically damped limit).
    """
    tau_long = max(p["tau_position_s"], p["tau_velocity_s"])
    tau_short = min(p["tau_position_s"], p["tau_velocity_s"])
    lam_long, lam_short = -1.0 / tau_long, -1.0 / tau_short
    a0 = 1.0 / (tau_long * tau_short)
    a1 = 1.0 / tau_long + 1.0 / tau_short
    e_long = np.exp(lam_long * dt)
    c1 = dt * e_long * exprel((lam_short - lam_long) * dt)  # (e^{l1 t} - e^{l2 t})/(l1 - l2)
    F = np.empty((dt.size, 2, 2))
    F[:, 0, 0] = e_long - c1 * lam_long
    F[:, 0, 1] = c1
    F[:, 1, 0] = -a0 * c1
    F[:, 1, 1] = e_long + c1 * (-a1 - lam_long)
    return F


def stationary_cov(name: str, p: dict) -> np.ndarray:
    """Per-axis stationary covariance of (position, velocity) for range-resident models."""
    sigma2 = p["sigma_m"] ** 2
    if name == "ou":
        return np.array([[sigma2, 0.0], [0.0, 0.0]])
    if name == "ou_ctcrw":
        return np.array([[sigma2, 0.0], [0.0, sigma2 / (p["tau_position_s"] * p["tau_velocity_s"])]])
    raise ValueError(f"{name} has no stationary distribution")


def initial_cov(name: str, p: dict, first_error_var: float) -> np.ndarray:
    """Covariance of the state at the first fix, after the first fix has been seen.

    Range-resident models start from the stationary distribution (the first fix is then used
    by the filter like any other). Unbounded models condition on the first fix (a diffuse
    prior on position): position ~ N(first fix, its error variance), velocity stationary.
    """
    if name in RANGE_RESIDENT:
        return stationary_cov(name, p)
    velocity_var = p["diffusion_m2_s"] / p["tau_velocity_s"] if name == "ctcrw" else 0.0
    return np.array([[first_error_var, 0.0], [0.0, velocity_var]])


def _ctcrw_position_var(D: float, tau: float, dt: np.ndarray) -> np.ndarray:
    """2 D [dt - 2 tau (1 - e^-x) + tau (1 - e^-2x)/2], x = dt/tau (Johnson et al. 2008)."""
    x = dt / tau
    bracket = x - 2.0 * -np.expm1(-x) + 0.5 * -np.expm1(-2.0 * x)
    series = x**3 / 3.0 - x**4 / 4.0 + 7.0 * x**5 / 60.0
    return 2.0 * D * tau * np.where(x < _SERIES_X, series, bracket)


def transition(name: str, p: dict, dt: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Exact transition matrix F and innovation covariance Q over each interval dt.

    Parameters
    ----------
    name : str
        One of ``MOTION_MODELS``.
    p : dict
        Natural parameters (see module docstring).
    dt : ndarray
        Intervals in seconds (>= 0; 0 gives F = I, Q = 0).

    Returns
    -------
    F, Q : ndarray, shape (n, 2, 2)
        x(t + dt) = F x(t) + w, w ~ N(0, Q), per axis.
    """
    dt = np.asarray(dt, dtype=float)
    F = np.zeros((dt.size, 2, 2))
    Q = np.zeros((dt.size, 2, 2))
    if name == "brownian":
        F[:, 0, 0] = 1.0
        Q[:, 0, 0] = 2.0 * p["diffusion_m2_s"] * dt
    elif name == "ou":
        F[:, 0, 0] = np.exp(-dt / p["tau_position_s"])
        Q[:, 0, 0] = -p["sigma_m"] ** 2 * np.expm1(-2.0 * dt / p["tau_position_s"])
    elif name == "ctcrw":
        D, tau = p["diffusion_m2_s"], p["tau_velocity_s"]
        velocity_var = D / tau
        one_minus_a = -np.expm1(-dt / tau)
        F[:, 0, 0] = 1.0
        F[:, 0, 1] = tau * one_minus_a
        F[:, 1, 1] = 1.0 - one_minus_a
        Q[:, 0, 0] = _ctcrw_position_var(D, tau, dt)
        Q[:, 0, 1] = Q[:, 1, 0] = velocity_var * tau * one_minus_a**2
        Q[:, 1, 1] = -velocity_var * np.expm1(-2.0 * dt / tau)
    elif name == "ou_ctcrw":
        F = _ouf_propagator(p, dt)
        # stationarity: Q = S - F S F' with S = diag(s0, s1)
        s0, s1 = np.diag(stationary_cov(name, p))
        Q[:, 0, 0] = np.maximum(s0 - (F[:, 0, 0] ** 2 * s0 + F[:, 0, 1] ** 2 * s1), 0.0)
        Q[:, 0, 1] = Q[:, 1, 0] = -(F[:, 0, 0] * F[:, 1, 0] * s0 + F[:, 0, 1] * F[:, 1, 1] * s1)
        Q[:, 1, 1] = np.maximum(s1 - (F[:, 1, 0] ** 2 * s0 + F[:, 1, 1] ** 2 * s1), 0.0)
    else:
        check_model(name)
    return F, Q


def semivariance(name: str, p: dict, lag_s) -> np.ndarray:
    """Per-axis semi-variance 0.5 E[(x(t + lag) - x(t))^2] without location error.

    Fleming et al. (2014) give these curves as the diagnostic of range residency.
    """
    lag = np.abs(np.asarray(lag_s, dtype=float))
    if name == "brownian":
        return p["diffusion_m2_s"] * lag
    if name == "ctcrw":
        # D [lag - tau (1 - e^{-lag/tau})]: velocity started from its stationary law
        tau = p["tau_velocity_s"]
        x = lag / tau
        small = x**2 / 2.0 - x**3 / 6.0 + x**4 / 24.0
        return p["diffusion_m2_s"] * tau * np.where(x < _SERIES_X, small, x + np.expm1(-x))
    return p["sigma_m"] ** 2 * (1.0 - position_acf(name, p, lag))


def position_acf(name: str, p: dict, lag_s) -> np.ndarray:
    """Autocorrelation of position at the given lags; NaN for unbounded models."""
    lag = np.abs(np.asarray(lag_s, dtype=float))
    if name == "ou":
        return np.exp(-lag / p["tau_position_s"])
    if name == "ou_ctcrw":
        # Cov(x(t), x(0)) = [exp(A t) S]_00 = F_00 sigma^2, as S is diagonal
        return _ouf_propagator(p, lag.ravel())[:, 0, 0].reshape(lag.shape)
    check_model(name)
    return np.full(lag.shape, np.nan)
