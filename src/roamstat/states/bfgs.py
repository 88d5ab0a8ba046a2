"""BFGS with a strong-Wolfe line search, for objectives that return their value and gradient together.

The HMM fits (:mod:`roamstat.states.fit`) minimise a likelihood whose value
and exact gradient one compiled pass returns in 50-100 us on a sample
animal; ``scipy.optimize.minimize(method="BFGS")`` added about 100 us of
Python bookkeeping to every evaluation (its function wrappers and its line
search in Python; measured on the sample's 10,020 evaluations), as much as
the likelihood itself.  This is the same method with only the arithmetic it
needs:

* the BFGS update of the inverse Hessian (Nocedal & Wright 2006, eq. 6.17),
  started from the identity or a given matrix;
* a line search for the strong Wolfe conditions with c1 = 1e-4 and
  c2 = 0.9, bracketing then zooming with safeguarded cubic interpolation
  (Nocedal & Wright 2006, Algorithms 3.5 and 3.6, eq. 3.59);
* the first trial step of each search from the last decrease of the
  objective (Nocedal & Wright 2006, eq. 3.60, with scipy's factor 1.01 and
  its first "previous" value f0 + |g0| / 2, so the first step has length
  about one);
* the stopping rules of scipy's BFGS: the largest absolute gradient
  component at most ``gtol``; a callback that raises ``StopIteration``
  ends the run converged; a line search that finds no step ends it
  unconverged (scipy's "precision loss"), except the first time, when the
  search is tried once more along the steepest descent with the inverse
  Hessian reset to the identity (the usual restart, Nocedal & Wright 2006,
  §6.1; scipy instead tries a second line search).

The trial steps differ from those of scipy's line search (the safeguarded
steps of More & Thuente 1994), so on a surface with several optima a start
may end at another optimum than with scipy.  Over 100 simulated two-state
chains fitted with K = 2 and 3 from 10 starts each, the best of the starts
was the same in all K = 2 fits; for K = 3 (a flat, over-parameterised
surface) it was higher than scipy's in 19 fits and lower in 15 (measured
when this was written; ``tests/test_states_bfgs.py`` checks the method
against scipy on reference problems).

References
----------
More, J. J. & Thuente, D. J. (1994). Line search algorithms with guaranteed
sufficient decrease. ACM Transactions on Mathematical Software 20: 286-307.
Nocedal, J. & Wright, S. J. (2006). Numerical Optimization, 2nd ed. Springer.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np
from scipy.optimize import OptimizeResult

#: Sufficient decrease and curvature constants of the strong Wolfe conditions (Nocedal & Wright
#: 2006, p. 142: the usual values for quasi-Newton methods; scipy's BFGS uses the same).
C1, C2 = 1e-4, 0.9

#: Trial steps of one line search before it gives up, bracketing then zooming, and the relative
#: width at which a zoomed bracket is given up (judgement, no source).
MAX_BRACKET, MAX_ZOOM, ZOOM_XTOL = 40, 30, 1e-10

#: A zoom's trial is kept at least this share of the bracket inside its ends (judgement, no source).
SAFEGUARD = 0.01

PRECISION_LOSS = "Desired error not necessarily achieved due to precision loss."

Objective = Callable[[np.ndarray], tuple[float, np.ndarray]]
Step = tuple[float, float, np.ndarray]  # alpha, f and g there


def minimise(fun: Objective, x0, hess_inv0: np.ndarray | None = None, gtol: float = 1e-5, maxiter: int = 1000,
             callback: Callable[[OptimizeResult], None] | None = None) -> OptimizeResult:
    """Minimise ``fun`` (returning value and gradient) from ``x0`` by BFGS.

    Returns a :class:`scipy.optimize.OptimizeResult` with ``x``, ``fun``,
    ``jac``, ``hess_inv``, ``nit``, ``nfev``, ``success`` and ``message``, as
    ``scipy.optimize.minimize`` does.  ``callback`` receives an
    ``OptimizeResult`` with ``x`` and ``fun`` after every iteration.
    """
    counted = _Counted(fun)
    x = np.array(x0, dtype=float)
    f, g = counted(x)
    H = np.eye(x.size) if hess_inv0 is None else np.array(hess_inv0, dtype=float)
    previous_f = f + float(np.linalg.norm(g)) / 2.0
    message, success, nit, restarted = "Optimization terminated successfully.", True, 0, False
    while np.abs(g).max() > gtol:
        if nit >= maxiter:
            message, success = "Maximum number of iterations has been exceeded.", False
            break
        p = -(H @ g)
        found = _line_search(counted, x, f, g, p, previous_f)
        if found is None and not restarted:  # once more along the steepest descent, BFGS restarted
            H, p, restarted = np.eye(x.size), -g, True
            found = _line_search(counted, x, f, g, p, previous_f)
        if found is None:
            message, success = PRECISION_LOSS, False
            break
        alpha, f_new, g_new = found
        s, y = alpha * p, g_new - g
        x = x + s
        previous_f, f, g = f, f_new, g_new
        nit += 1
        if callback is not None:
            try:
                callback(OptimizeResult(x=x, fun=f))
            except StopIteration:
                break
        if not math.isfinite(f):
            message, success = PRECISION_LOSS, False
            break
        H = _updated(H, s, y)
    return OptimizeResult(x=x, fun=f, jac=g, hess_inv=H, nit=nit, nfev=counted.calls, success=success,
                          status=0 if success else 2, message=message)


def _updated(H: np.ndarray, s: np.ndarray, y: np.ndarray) -> np.ndarray:
    """The BFGS inverse-Hessian update (Nocedal & Wright 2006, eq. 6.17), expanded to outer products.

    (I - rho s y') H (I - rho y s') + rho s s' = H - rho (s u' + u s') + rho (1 + rho y'Hy) s s'
    with u = H y (H symmetric) and rho = 1 / y's (positive after a strong-Wolfe step; a zero,
    from rounding, takes rho = 1000 as scipy does).
    """
    sy = float(s @ y)
    rho = 1000.0 if sy == 0.0 else 1.0 / sy
    u = H @ y
    su = np.outer(s, u)  # u s' is its transpose: one outer product fewer
    return H - rho * (su + su.T) + (rho * (1.0 + rho * float(y @ u))) * np.outer(s, s)


class _Counted:
    """The objective, with its number of calls."""

    def __init__(self, fun: Objective) -> None:
        self.fun, self.calls = fun, 0

    def __call__(self, x: np.ndarray) -> tuple[float, np.ndarray]:
        self.calls += 1
        f, g = self.fun(x)
        return float(f), np.asarray(g, dtype=float)


def _line_search(fun: _Counted, x: np.ndarray, f0: float, g0: np.ndarray, p: np.ndarray,
                 previous_f: float) -> Step | None:
    """A step along ``p`` meeting the strong Wolfe conditions, with f and g there; None if none found.

    Nocedal & Wright (2006), Algorithm 3.5: trial steps double until one
    fails sufficient decrease, does not decrease on the last, or has a
    non-negative slope; the bracket is then zoomed (:meth:`_Search.zoom`).
    None also where no such step exists, as at a kink of the objective (the
    HMM's is flat beyond its clipping bounds): the run then ends unconverged,
    as scipy's does.
    """
    search = _Search(fun, x, p, f0, float(g0 @ p))
    if not search.slope0 < 0.0:
        return None  # not a descent direction
    alpha = 1.0
    if math.isfinite(previous_f):
        guess = 1.01 * 2.0 * (f0 - previous_f) / search.slope0  # Nocedal & Wright 2006, eq. 3.60
        if 0.0 < guess:
            alpha = min(1.0, guess)
    last = (0.0, f0, search.slope0)
    for trial in range(MAX_BRACKET):
        f, g, slope = search(alpha)
        if not search.decreases(alpha, f) or (trial > 0 and f >= last[1]):
            return search.zoom(last, (alpha, f, slope))
        if search.curved(slope):
            return alpha, f, g
        if slope >= 0.0:
            return search.zoom((alpha, f, slope), last)
        last = (alpha, f, slope)
        alpha *= 2.0
    return None


class _Search:
    """One line search along ``p`` from ``x``: f, g and the slope at a trial step, and the Wolfe tests."""

    def __init__(self, fun: _Counted, x: np.ndarray, p: np.ndarray, f0: float, slope0: float) -> None:
        self.fun, self.x, self.p, self.f0, self.slope0 = fun, x, p, f0, slope0

    def __call__(self, alpha: float) -> tuple[float, np.ndarray, float]:
        f, g = self.fun(self.x + alpha * self.p)
        return f, g, float(g @ self.p)

    def decreases(self, alpha: float, f: float) -> bool:
        """The sufficient decrease (Armijo) condition."""
        return f <= self.f0 + C1 * alpha * self.slope0

    def curved(self, slope: float) -> bool:
        """The strong curvature condition."""
        return abs(slope) <= -C2 * self.slope0

    def zoom(self, low: tuple, high: tuple) -> Step | None:
        """Nocedal & Wright (2006), Algorithm 3.6: shrink [low, high] to a strong-Wolfe step.

        ``low`` is the end with the lower value that met sufficient decrease;
        each end is (alpha, f, slope).  Trials come from the cubic through
        both ends' values and slopes, kept ``SAFEGUARD`` of the interval
        inside it, else the midpoint.  None when ``MAX_ZOOM`` trials found no such step
        or the bracket shrank to ``ZOOM_XTOL`` of its ends.
        """
        for _ in range(MAX_ZOOM):
            alpha = _cubic_step(low, high)
            f, g, slope = self(alpha)
            if not self.decreases(alpha, f) or f >= low[1]:
                high = (alpha, f, slope)
            else:
                if self.curved(slope):
                    return alpha, f, g
                if slope * (high[0] - low[0]) >= 0.0:
                    high = low
                low = (alpha, f, slope)
            if abs(high[0] - low[0]) <= ZOOM_XTOL * max(abs(high[0]), abs(low[0])):
                return None
        return None


def _cubic_step(low: tuple, high: tuple) -> float:
    """Minimiser of the cubic interpolating both ends (Nocedal & Wright 2006, eq. 3.59), kept inside them."""
    (a0, f0, d0), (a1, f1, d1) = low, high
    width = a1 - a0
    with np.errstate(all="ignore"):
        e1 = d0 + d1 - 3.0 * (f0 - f1) / (a0 - a1)
        disc = e1 * e1 - d0 * d1
        if disc >= 0.0 and math.isfinite(disc):
            e2 = math.copysign(math.sqrt(disc), a1 - a0)
            alpha = a1 - (a1 - a0) * (d1 + e2 - e1) / (d1 - d0 + 2.0 * e2)
            inner_lo, inner_hi = sorted((a0 + SAFEGUARD * width, a1 - SAFEGUARD * width))
            if math.isfinite(alpha) and inner_lo <= alpha <= inner_hi:
                return alpha
    return a0 + 0.5 * width
