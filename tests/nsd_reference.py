"""NSD curves and their search Jacobians in plain numpy, batched over search vectors: the test reference
for the compiled ``roamstat.ranges.nsd_fit.curve_residuals_jac`` (written separately, with array
expressions instead of loops; the curve forms are Bunnefeld et al. 2011, J. Anim. Ecol. 80:466-476,
and Börger & Fryxell 2012)."""

from __future__ import annotations

import numpy as np
from scipy.special import expit

from roamstat.ranges.residency import _gap_lo


def search_fun_jac(model: str, q, t, span: float, dt_days: float):
    """NSD (b, n) and its derivatives (b, n, k) for (b, k) search vectors ``q`` at the days ``t``."""
    t = np.asarray(t, float)[None, :]
    cols = [q[:, i:i + 1] for i in range(q.shape[1])]
    if model == "resident":
        a, tau = cols
        decay, rise = np.exp(-t / tau), -np.expm1(-t / tau)
        return a * rise, np.stack([rise, -a * decay * t / tau**2], axis=-1)
    if model == "disperser":
        d, theta, phi = cols
        s = expit((t - theta) / phi)
        slope = d * s * (1.0 - s) / phi
        return d * s, np.stack([s, -slope, -slope * (t - theta) / phi], axis=-1)
    d, theta1, phi1, u, phi2 = cols[:5]
    r = cols[5] if model == "mixed_migrant" else 1.0
    gap = _gap_lo(span, dt_days)
    room = span - theta1 - gap
    theta2 = theta1 + gap + u * np.maximum(room, 0.0)
    s1, s2 = expit((t - theta1) / phi1), expit((t - theta2) / phi2)
    slope1, slope2 = d * s1 * (1.0 - s1) / phi1, r * d * s2 * (1.0 - s2) / phi2  # d f / d (-theta) per sigmoid
    dtheta2_dtheta1 = np.where(room > 0, 1.0 - u, 1.0)
    jac = [s1 - r * s2, -slope1 + slope2 * dtheta2_dtheta1, -slope1 * (t - theta1) / phi1,
           slope2 * np.maximum(room, 0.0), slope2 * (t - theta2) / phi2]
    if model == "mixed_migrant":
        jac.append(-d * s2)
    return d * (s1 - r * s2), np.stack(jac, axis=-1)


def search_jacobian(model: str, q, t, span: float, dt_days: float) -> np.ndarray:
    """:func:`search_fun_jac`'s derivatives for one search vector, shape (n, k)."""
    return search_fun_jac(model, np.asarray(q, float)[None, :], t, span, dt_days)[1][0]
