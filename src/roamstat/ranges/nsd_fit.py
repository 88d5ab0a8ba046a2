"""Compiled least-squares fits of one NSD curve: the screen of its starts and the bounded polish.

The screen (:func:`screen`) takes a few projected Levenberg-Marquardt steps
from every start (Marquardt 1963; Kanzow, Yamashita & Fukushima 2004) to
rank them.  The polish (:func:`polish`) is the trust-region reflective
method of Branch, Coleman & Li (1999) with the exact (SVD) subproblem solve
of Moré (1978), step by step as ``scipy.optimize.least_squares(method="trf",
tr_solver="exact")`` runs it with an array ``x_scale`` and the default
tolerances, so it stops where scipy's would, after as many evaluations, at
the same optimum (to rounding; tests/test_ranges_nsd_fit.py).  Both are
compiled because a residency fit is many small problems: scipy's
per-iteration Python bookkeeping cost about 0.2 ms, several times the curve
and its Jacobian at ~1,000 points (measured).

The curves (:func:`curve_residuals_jac`) are those of
:func:`roamstat.ranges.residency.predict` in the search variables of
:func:`roamstat.ranges.residency._natural`, one vector at a time.

References
----------
Marquardt, D. W. (1963). An algorithm for least-squares estimation of
nonlinear parameters. J. Soc. Indust. Appl. Math. 11, 431-441.
Kanzow, C., Yamashita, N. & Fukushima, M. (2004). Levenberg-Marquardt
methods with strong local convergence properties for solving nonlinear
equations with convex constraints. J. Comput. Appl. Math. 172, 375-397.
Branch, M. A., Coleman, T. F. & Li, Y. (1999). A subspace, interior, and
conjugate gradient method for large-scale bound-constrained minimization
problems. SIAM J. Sci. Comput. 21, 1-23.
Moré, J. J. (1978). The Levenberg-Marquardt algorithm: implementation and
theory. In Numerical Analysis (ed. Watson), Lecture Notes in Mathematics 630,
Springer, 105-116.
"""

from __future__ import annotations

import math

import numba
import numpy as np

CURVE_CODES = {"resident": 0, "disperser": 1, "migrant": 2, "mixed_migrant": 3}
FAILED = -1  # status of a polish whose start or subproblem was not usable (scipy raises there)
_RUNNING = -99
_EPS = float(np.finfo(float).eps)
_TOL = 1e-8  # scipy's default ftol, xtol and gtol
# Every kernel uses error_model="numpy": a division by zero gives inf/nan, as in scipy's array code.


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _expit(z):
    if z >= 0.0:
        return 1.0 / (1.0 + math.exp(-z))
    e = math.exp(z)
    return e / (1.0 + e)


@numba.njit(cache=True, nogil=True, error_model="numpy")
def curve_residuals_jac(code, q, t, y, span, gap, f, jac):
    """Residuals (curve - ``y``) into ``f`` and their derivatives with respect to ``q`` into ``jac``.

    ``code`` is ``CURVE_CODES[model]``; ``gap`` is ``residency._gap_lo(span, dt_days)``.
    With s = expit((t - theta) / phi) and s' = s (1 - s): d s / d theta = -s' / phi and
    d s / d phi = -s' (t - theta) / phi²; the resident form A (1 - exp(-t / tau)) has
    d / dA = 1 - exp(-t / tau) and d / dtau = -A exp(-t / tau) t / tau².  The migrants
    are searched as (d, theta1, phi1, u, phi2[, r]) with theta2 = theta1 + gap + u
    max(span - theta1 - gap, 0) and d2 = r d (r = 1 for the migrant), hence the chain
    rule through theta2.  Written per point: nothing is stacked, shared terms once.
    """
    if code == 0:
        a, tau = q[0], q[1]
        for i in range(t.size):
            decay = math.exp(-t[i] / tau)
            rise = -math.expm1(-t[i] / tau)
            f[i] = a * rise - y[i]
            jac[i, 0] = rise
            jac[i, 1] = -a * decay * t[i] / (tau * tau)
        return
    if code == 1:
        d, theta, phi = q[0], q[1], q[2]
        for i in range(t.size):
            s = _expit((t[i] - theta) / phi)
            slope = d * s * (1.0 - s) / phi
            f[i] = d * s - y[i]
            jac[i, 0] = s
            jac[i, 1] = -slope
            jac[i, 2] = -slope * (t[i] - theta) / phi
        return
    d, theta1, phi1, u, phi2 = q[0], q[1], q[2], q[3], q[4]
    r = q[5] if code == 3 else 1.0
    room = max(span - theta1 - gap, 0.0)
    theta2 = theta1 + gap + u * room
    dtheta2 = 1.0 - u if span - theta1 - gap > 0.0 else 1.0
    for i in range(t.size):
        s1 = _expit((t[i] - theta1) / phi1)
        s2 = _expit((t[i] - theta2) / phi2)
        slope1 = d * s1 * (1.0 - s1) / phi1
        slope2 = r * d * s2 * (1.0 - s2) / phi2
        f[i] = d * (s1 - r * s2) - y[i]
        jac[i, 0] = s1 - r * s2
        jac[i, 1] = -slope1 + slope2 * dtheta2
        jac[i, 2] = -slope1 * (t[i] - theta1) / phi1
        jac[i, 3] = slope2 * room
        jac[i, 4] = slope2 * (t[i] - theta2) / phi2
        if code == 3:
            jac[i, 5] = -d * s2


# --- pieces of the trust-region reflective step (Branch, Coleman & Li 1999) -----------

@numba.njit(cache=True, nogil=True, error_model="numpy")
def _strictly_feasible(x, lb, ub, rstep):
    """``x`` moved off any bound it touches: by ``rstep`` relative, or to the next float when 0."""
    out = x.copy()
    for i in range(x.size):
        if rstep == 0.0:
            lower, upper = x[i] <= lb[i], x[i] >= ub[i]
        else:
            lower_dist, upper_dist = x[i] - lb[i], ub[i] - x[i]
            lower = lower_dist <= min(upper_dist, rstep * max(1.0, abs(lb[i])))
            upper = upper_dist <= min(lower_dist, rstep * max(1.0, abs(ub[i])))
        if upper:
            out[i] = np.nextafter(ub[i], lb[i]) if rstep == 0.0 else ub[i] - rstep * max(1.0, abs(ub[i]))
        elif lower:
            out[i] = np.nextafter(lb[i], ub[i]) if rstep == 0.0 else lb[i] + rstep * max(1.0, abs(lb[i]))
        if out[i] < lb[i] or out[i] > ub[i]:
            out[i] = 0.5 * (lb[i] + ub[i])
    return out


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _scaling_vector(x, g, lb, ub):
    """Coleman-Li scaling: distance to the bound the gradient points to (v) and its sign (dv)."""
    v = np.ones_like(x)
    dv = np.zeros_like(x)
    for i in range(x.size):
        if g[i] > 0.0:
            v[i], dv[i] = x[i] - lb[i], 1.0
        elif g[i] < 0.0:
            v[i], dv[i] = ub[i] - x[i], -1.0
    return v, dv


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _phi(alpha, suf, s, delta):
    denom = s * s + alpha
    p_norm = np.linalg.norm(suf / denom)
    return p_norm - delta, -np.sum(suf * suf / denom**3) / p_norm


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _trust_region_step(n, m, uf, s, v, delta, alpha):
    """Moré's (1978) solution of the regularised subproblem within radius ``delta``: (step, alpha)."""
    suf = s * uf
    full_rank = m >= n and s[-1] > _EPS * m * s[0]
    if full_rank:
        p = -v @ (uf / s)
        if np.linalg.norm(p) <= delta:
            return p, 0.0
    alpha_upper = np.linalg.norm(suf) / delta
    alpha_lower = 0.0
    if full_rank:
        phi, phi_prime = _phi(0.0, suf, s, delta)
        alpha_lower = -phi / phi_prime
    if not full_rank and alpha == 0.0:
        alpha = max(0.001 * alpha_upper, math.sqrt(alpha_lower * alpha_upper))
    for _ in range(10):
        if alpha < alpha_lower or alpha > alpha_upper:
            alpha = max(0.001 * alpha_upper, math.sqrt(alpha_lower * alpha_upper))
        phi, phi_prime = _phi(alpha, suf, s, delta)
        if phi < 0.0:
            alpha_upper = alpha
        ratio = phi / phi_prime
        alpha_lower = max(alpha_lower, alpha - ratio)
        alpha -= (phi + delta) * ratio / delta
        if abs(phi) < 0.01 * delta:
            break
    p = -v @ (suf / (s * s + alpha))
    return p * (delta / np.linalg.norm(p)), alpha


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _to_bound(x, s, lb, ub):
    """Largest multiple of ``s`` that keeps ``x`` in the box, and which components hit (+-1)."""
    steps = np.full(x.size, np.inf)
    for i in range(x.size):
        if s[i] != 0.0:
            steps[i] = max((lb[i] - x[i]) / s[i], (ub[i] - x[i]) / s[i])
    least = steps.min()
    return least, (steps == least) * np.sign(s)


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _quadratic(jac_h, g_h, s, diag_h):
    """Model change 0.5 |J s|² + 0.5 s·diag·s + g·s."""
    js = jac_h @ s
    return 0.5 * (js @ js + (s * diag_h) @ s) + s @ g_h


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _line_min(a, b, lo, hi, c):
    """Minimiser and minimum of a t² + b t + c on [lo, hi] (the ends first, as scipy orders them)."""
    best_t, best = lo, lo * (a * lo + b) + c
    value = hi * (a * hi + b) + c
    if value < best:
        best_t, best = hi, value
    if a != 0.0:
        ext = -0.5 * b / a
        if lo < ext < hi:
            value = ext * (a * ext + b) + c
            if value < best:
                best_t, best = ext, value
    return best_t, best


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _select_step(x, jac_h, diag_h, g_h, p, p_h, d, delta, lb, ub, theta):
    """The best of the trust-region step cut at the bound, its reflection and the scaled gradient step."""
    trial = x + p
    if np.all((trial >= lb) & (trial <= ub)):
        return p, p_h, -_quadratic(jac_h, g_h, p_h, diag_h)
    p_stride, hits = _to_bound(x, p, lb, ub)
    r_h = p_h.copy()
    for i in range(x.size):
        if hits[i] != 0.0:
            r_h[i] = -r_h[i]
    r = d * r_h
    p = p * p_stride
    p_h = p_h * p_stride
    # where the reflected direction leaves the trust region (Numerical Recipes' stable root)
    a = r_h @ r_h
    if a == 0.0:
        raise ValueError("zero reflected step")
    b = p_h @ r_h
    c = p_h @ p_h - delta * delta
    if c > 0.0:
        raise ValueError("step outside the trust region")
    q = -(b + math.copysign(math.sqrt(b * b - a * c), b))
    to_tr = max(q / a, c / q)
    to_bound = _to_bound(x + p, r, lb, ub)[0]
    r_stride = min(to_bound, to_tr)
    if r_stride > 0.0:
        r_lo = (1.0 - theta) * p_stride / r_stride
        r_hi = theta * to_bound if r_stride == to_bound else to_tr
    else:
        r_lo, r_hi = 0.0, -1.0
    r_value = np.inf
    if r_lo <= r_hi:
        jr, jp = jac_h @ r_h, jac_h @ p_h
        qa = 0.5 * (jr @ jr + (r_h * diag_h) @ r_h)
        qb = g_h @ r_h + jp @ jr + (p_h * diag_h) @ r_h
        qc = 0.5 * (jp @ jp) + g_h @ p_h + 0.5 * ((p_h * diag_h) @ p_h)
        stride, r_value = _line_min(qa, qb, r_lo, r_hi, qc)
        r_h = r_h * stride + p_h
        r = r_h * d
    p = p * theta
    p_h = p_h * theta
    p_value = _quadratic(jac_h, g_h, p_h, diag_h)
    ag_h = -g_h
    ag = d * ag_h
    to_tr = delta / np.linalg.norm(ag_h)
    to_bound = _to_bound(x, ag, lb, ub)[0]
    ag_stride = theta * to_bound if to_bound < to_tr else to_tr
    jg = jac_h @ ag_h
    ag_stride, ag_value = _line_min(0.5 * (jg @ jg + (ag_h * diag_h) @ ag_h), g_h @ ag_h, 0.0, ag_stride, 0.0)
    if p_value < r_value and p_value < ag_value:
        return p, p_h, -p_value
    if r_value < p_value and r_value < ag_value:
        return r, r_h, -r_value
    return ag * ag_stride, ag_h * ag_stride, -ag_value


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _termination(reduction, cost, step_norm, x_norm, ratio):
    ftol_met = reduction < _TOL * cost and ratio > 0.25
    xtol_met = step_norm < _TOL * (_TOL + x_norm)
    if ftol_met and xtol_met:
        return 4
    if ftol_met:
        return 2
    if xtol_met:
        return 3
    return _RUNNING


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _finite_rss(res):
    rss = res @ res
    return rss if np.isfinite(rss) else np.inf


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _screen(code, starts, t, y, span, gap, lb, ub, n_steps):
    b, k = starts.shape
    q_out, rss_out = np.empty_like(starts), np.empty(b)
    f, jac = np.empty(t.size), np.empty((t.size, k))
    f_new, jac_new = np.empty(t.size), np.empty((t.size, k))
    for i in range(b):
        q = np.minimum(np.maximum(starts[i], lb), ub)
        curve_residuals_jac(code, q, t, y, span, gap, f, jac)
        rss = _finite_rss(f)
        damping = 1e-3
        for _ in range(n_steps - 1):
            system = jac.T @ jac
            diag = np.diag(system).copy()
            diag = np.maximum(diag, 1e-12 * diag.max() + 1e-300)
            for j in range(k):
                system[j, j] += damping * diag[j]
            grad = jac.T @ f
            step = np.zeros(k)
            if np.all(np.isfinite(system)) and np.all(np.isfinite(grad)):
                step = -np.linalg.solve(system, grad)
            trial = np.minimum(np.maximum(q + step, lb), ub)
            curve_residuals_jac(code, trial, t, y, span, gap, f_new, jac_new)
            rss_new = _finite_rss(f_new)
            if rss_new < rss:
                q, rss = trial, rss_new
                f, f_new = f_new, f
                jac, jac_new = jac_new, jac
                damping /= 3.0
            else:
                damping *= 2.0
        q_out[i], rss_out[i] = q, rss
    return q_out, rss_out


def screen(model: str, starts, t, y, span: float, gap: float, bounds, n_steps: int):
    """A few projected Levenberg-Marquardt steps from every start: (search vectors, RSS).

    Each step solves (JᵀJ + lambda diag(JᵀJ)) delta = -Jᵀr (Marquardt 1963),
    projects q + delta onto the box (Kanzow, Yamashita & Fukushima 2004) and
    is kept when it lowers the RSS (lambda / 3), else refused (lambda x 2);
    one curve evaluation per step (references in the module docstring).  A
    start whose curve overflows has RSS inf.
    """
    lo, hi = (np.asarray(b, float) for b in bounds)
    return _screen(CURVE_CODES[model], np.ascontiguousarray(starts, dtype=float), np.ascontiguousarray(t, dtype=float),
                   np.ascontiguousarray(y, dtype=float), float(span), float(gap), lo, hi, int(n_steps))


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _polish(code, x0, t, y, span, gap, lb, ub, scale, max_nfev):
    n, m = x0.size, t.size
    x = _strictly_feasible(x0, lb, ub, 1e-10)
    f, jac = np.empty(m), np.empty((m, n))
    f_new, jac_new = np.empty(m), np.empty((m, n))
    curve_residuals_jac(code, x, t, y, span, gap, f, jac)
    if not np.all(np.isfinite(f)):
        return x, f, 1, FAILED
    nfev = 1
    cost = 0.5 * (f @ f)
    g = jac.T @ f
    scale_inv = 1.0 / scale
    v, dv = _scaling_vector(x, g, lb, ub)
    v = np.where(dv != 0.0, v * scale_inv, v)
    delta = np.linalg.norm(x * scale_inv / np.sqrt(v))
    if delta == 0.0:
        delta = 1.0
    f_aug = np.zeros(m + n)
    jac_aug = np.zeros((m + n, n))
    alpha = 0.0
    status = _RUNNING
    while True:
        v, dv = _scaling_vector(x, g, lb, ub)
        g_norm = np.max(np.abs(g * v))
        if g_norm < _TOL:
            status = 1
        if status != _RUNNING or nfev == max_nfev:
            break
        v = np.where(dv != 0.0, v * scale_inv, v)
        d = np.sqrt(v) * scale
        diag_h = g * dv * scale
        g_h = d * g
        f_aug[:m] = f
        jac_aug[:m] = jac * d
        jac_aug[m:] = np.diag(np.sqrt(diag_h))
        if not np.all(np.isfinite(jac_aug)):
            return x, f, nfev, FAILED
        u_mat, s, vt = np.linalg.svd(jac_aug, full_matrices=False)
        uf = u_mat.T @ f_aug
        v_mat = vt.T.copy()
        jac_h = jac_aug[:m]
        theta = max(0.995, 1.0 - g_norm)
        reduction = -1.0
        while reduction <= 0.0 and nfev < max_nfev:
            p_h, alpha = _trust_region_step(n, m, uf, s, v_mat, delta, alpha)
            step, step_h, predicted = _select_step(x, jac_h, diag_h, g_h, d * p_h, p_h, d, delta, lb, ub, theta)
            x_new = _strictly_feasible(x + step, lb, ub, 0.0)
            curve_residuals_jac(code, x_new, t, y, span, gap, f_new, jac_new)
            nfev += 1
            step_h_norm = np.linalg.norm(step_h)
            if not np.all(np.isfinite(f_new)):
                delta = 0.25 * step_h_norm
                continue
            cost_new = 0.5 * (f_new @ f_new)
            reduction = cost - cost_new
            # the radius update of scipy's update_tr_radius
            if predicted > 0.0:
                ratio = reduction / predicted
            elif predicted == 0.0 and reduction == 0.0:
                ratio = 1.0
            else:
                ratio = 0.0
            delta_new = delta
            if ratio < 0.25:
                delta_new = 0.25 * step_h_norm
            elif ratio > 0.75 and step_h_norm > 0.95 * delta:
                delta_new = 2.0 * delta
            status = _termination(reduction, cost, np.linalg.norm(step), np.linalg.norm(x), ratio)
            if status != _RUNNING:
                break
            alpha *= delta / delta_new
            delta = delta_new
        if reduction > 0.0:
            x = x_new
            f, f_new = f_new, f
            jac, jac_new = jac_new, jac
            cost = cost_new
            g = jac.T @ f
    return x, f, nfev, (0 if status == _RUNNING else status)


def polish(model: str, start, t, y, span: float, gap: float, bounds, scale, max_nfev: int = 400):
    """Least-squares polish of one NSD curve from ``start`` inside ``bounds``.

    Parameters
    ----------
    model : str
        resident, disperser, migrant or mixed_migrant (in the search
        variables of ``residency._natural``).
    start : numpy.ndarray
        Search vector inside ``bounds`` (``lo, hi``).
    t, y : numpy.ndarray
        Days and observed NSD (km²).
    span, gap : float
        Last day and the migrants' least stay (``residency._gap_lo``).
    scale : numpy.ndarray
        Characteristic size of each variable (scipy's ``x_scale``).
    max_nfev : int
        Curve evaluations allowed.

    Returns
    -------
    (numpy.ndarray, numpy.ndarray, int, int)
        Search vector, residuals, evaluations and status as scipy numbers it
        (0: evaluations exhausted, 1: gradient, 2: RSS change, 3: step size,
        4: both 2 and 3 below 1e-8; ``FAILED``: a start outside the bounds
        or with a curve that is not finite, or a degenerate subproblem,
        where scipy raises).
    """
    lo, hi = (np.asarray(b, float) for b in bounds)
    x0 = np.asarray(start, float)
    if not np.all((x0 >= lo) & (x0 <= hi)):
        return x0, np.full(len(t), np.nan), 0, FAILED  # scipy refuses such a start
    try:
        return _polish(CURVE_CODES[model], x0, np.ascontiguousarray(t, dtype=float),
                       np.ascontiguousarray(y, dtype=float), float(span), float(gap), lo, hi,
                       np.asarray(scale, float), int(max_nfev))
    except (ValueError, np.linalg.LinAlgError):
        return x0, np.full(len(t), np.nan), 0, FAILED
