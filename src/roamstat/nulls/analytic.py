"""Expected net squared displacement of a correlated random walk.

Steps l_1, l_2, ... are independent with E[l] and E[l^2]; turning angles are
independent of the steps and of each other with c = E[cos(theta)] and
s = E[sin(theta)].  Kareiva & Shigesada (1983) give E[R_n^2] after n steps.
Writing z = c + i s, E[exp(i (Phi_k - Phi_j))] = z^(k - j) for headings Phi,
so

    E[R_n^2] = n E[l^2] + 2 E[l]^2 Re[ z/(1-z) (n - (1 - z^n)/(1 - z)) ],

which is the compact complex form of their result (derived here from the same
assumptions); its real part expands to the expression they print with the mean
sine, also given by Turchin (1998, ch. 5).  With s = 0 it is the symmetric closed form
n E[l^2] + 2 E[l]^2 c/(1-c) (n - (1-c^n)/(1-c)); with uniform turns (c = s = 0)
it is n E[l^2].

References
----------
Kareiva, P. M. & Shigesada, N. (1983). Analyzing insect movement as a
correlated random walk. Oecologia 56: 234-238.
Turchin, P. (1998). Quantitative Analysis of Movement. Sinauer, Sunderland MA.
"""

from __future__ import annotations

import numpy as np

_STRAIGHT = 1e-12  # |1 - z| below this: turns are (numerically) always zero


def expected_nsd(n, mean_step: float, second_moment: float, mean_cos: float, mean_sin: float = 0.0):
    """E[R_n^2] of a correlated random walk, general form with the mean sine.

    Parameters
    ----------
    n : int or array of int
        Number of steps (>= 0).
    mean_step, second_moment : float
        E[l] (m) and E[l^2] (m^2) of the step lengths.
    mean_cos, mean_sin : float
        E[cos(theta)] and E[sin(theta)] of the turning angles.

    Returns
    -------
    float or ndarray
        Expected net squared displacement in m^2 (inf if a moment is infinite).

    References
    ----------
    Kareiva, P. M. & Shigesada, N. (1983). Oecologia 56: 234-238.
    """
    n = np.asarray(n, dtype=float)
    z = complex(mean_cos, mean_sin)
    if abs(1.0 - z) < _STRAIGHT:
        # limit z -> 1: every pair of steps is aligned, sum_{m<n} (n - m) = n (n - 1) / 2
        correlated = n * (n - 1.0) / 2.0
    else:
        correlated = np.real(z / (1.0 - z) * (n - (1.0 - z ** n) / (1.0 - z)))
    out = n * second_moment + 2.0 * mean_step ** 2 * correlated
    return float(out) if out.ndim == 0 else out


def expected_nsd_symmetric(n, mean_step: float, second_moment: float, mean_cos: float):
    """E[R_n^2] for symmetric turns (mean sine 0), the closed form of Kareiva & Shigesada (1983).

    ``n E[l^2] + 2 E[l]^2 c/(1-c) (n - (1 - c^n)/(1 - c))``.

    Parameters
    ----------
    n : int or array of int
        Number of steps.
    mean_step, second_moment : float
        E[l] and E[l^2] of the step lengths.
    mean_cos : float
        c = E[cos(theta)], in [-1, 1).

    Returns
    -------
    float or ndarray
        Expected net squared displacement (m^2).

    References
    ----------
    Kareiva, P. M. & Shigesada, N. (1983). Oecologia 56: 234-238.
    """
    n = np.asarray(n, dtype=float)
    c = float(mean_cos)
    out = n * second_moment + 2.0 * mean_step ** 2 * c / (1.0 - c) * (n - (1.0 - c ** n) / (1.0 - c))
    return float(out) if out.ndim == 0 else out
