"""Parametric-bootstrap confidence intervals for fitted parameters.

Each replicate draws ``n`` values from the fitted model and refits the same
family with the same fixed settings (for the tail models xmin, and xmax when
given, are held fixed: the intervals are conditional on xmin).  The 2.5 and
97.5 % percentiles of the refitted values form the interval (angles such as
mu are measured from the estimate, so an interval may run past +-pi) (Efron &
Tibshirani 1993, ch. 6 and 13).  A parameter estimated at a sample extreme
(the truncated power law's xmax, the largest step) is not resampled: every
replicate's maximum lies below the estimate, so percentiles would give an
interval entirely below it.  Its interval comes from the model's
``endpoint_interval`` instead (an exact one-sided interval from the
distribution of the maximum; upper bound None when unbounded).  Cost: replicates x one fit per model, so a
few hundred replicates are plenty for a 95 % interval.

References
----------
Efron, B. & Tibshirani, R. J. (1993). An Introduction to the Bootstrap.
Chapman & Hall.
"""

from __future__ import annotations

import json
import warnings

import numpy as np

from roamstat.models.base import FittedModel, wrap_angle

LEVEL = 0.95  # coverage of every interval


def bootstrap_ci(model: FittedModel, replicates: int, rng: np.random.Generator) -> tuple[dict, int]:
    """Percentile intervals for every estimated parameter of ``model``.

    Parameters
    ----------
    model : FittedModel
        A fitted model; its ``refit`` reproduces the fit on new data.
    replicates : int
        Number of bootstrap samples.
    rng : numpy.random.Generator
        Source of all randomness.

    Returns
    -------
    ci : dict
        Parameter name -> [lower, upper] (plain floats; an endpoint parameter's upper
        bound may be None = unbounded); empty without estimated parameters.
    n_failed : int
        Replicates whose refit failed (left out of the intervals).
    """
    if replicates <= 0:
        return {}, 0
    endpoint = {k: model.endpoint_interval(k, LEVEL) for k in model.endpoint_keys}
    keys = [k for k in sorted(model.params) if k not in model.fixed_keys and k not in endpoint]
    if not keys:
        return endpoint, 0
    rows: list[list[float]] = []
    failed = 0
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore", RuntimeWarning)
        for _ in range(replicates):
            try:
                refit = model.refit(model.sample(model.n, rng))
            except (FloatingPointError, ValueError):
                refit = None
            if refit is None:
                failed += 1
                continue
            rows.append([refit.params[k] for k in keys])
    if not rows:
        return endpoint, failed
    draws = np.asarray(rows)
    for j, key in enumerate(keys):
        if key in model.circular_keys:
            # measure angles from the estimate so an interval across +-pi stays one interval
            est = model.params[key]
            draws[:, j] = est + wrap_angle(draws[:, j] - est)
    lo, hi = np.percentile(draws, [50.0 * (1.0 - LEVEL), 50.0 * (1.0 + LEVEL)], axis=0)
    return {**endpoint, **{k: [float(a), float(b)] for k, a, b in zip(keys, lo, hi)}}, failed


def ci_json(ci: dict) -> str:
    """Deterministic JSON text of an interval dict."""
    return json.dumps(ci, sort_keys=True)
