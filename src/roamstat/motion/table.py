"""Rows of ``motion_models.csv`` (one per fitted model) and the effective sample size for areas."""
from __future__ import annotations

import numpy as np
import pandas as pd

from .fit import best_fit
from .kalman import PARAM_KEYS

TABLE_COLUMNS = ("model", "n_fixes", "n_params", "loglik", "aicc", "delta_aicc", "best",
                 *PARAM_KEYS, "error_source", *(f"{key}_se" for key in PARAM_KEYS))


def motion_table(fits) -> pd.DataFrame:
    """One row per fit, columns ``TABLE_COLUMNS`` (``animal_id`` is added by the caller).

    Parameters a model does not have are NaN (empty in the CSV). ``error_sd_m`` is the estimated
    SD (with its SE) when ``error_source`` is ``estimated``, else the median of the known
    per-fix SDs (no SE).
    """
    best = best_fit(fits)
    rows = []
    for fit in fits:
        row = {"model": fit.name, "n_fixes": fit.n_fixes, "n_params": fit.n_params,
               "loglik": fit.loglik, "aicc": fit.aicc,
               "delta_aicc": fit.aicc - best.aicc if best is not None else np.nan,
               "best": fit is best, **{key: fit.params[key] for key in PARAM_KEYS},
               "error_source": fit.error_source}
        row.update({f"{key}_se": fit.se[key] for key in PARAM_KEYS})
        rows.append(row)
    return pd.DataFrame(rows, columns=list(TABLE_COLUMNS))


def effective_n_area(fit, duration_s: float) -> float:
    """Effective number of independent fixes for a range estimate over ``duration_s``.

    For a range-resident model, the duration divided by the position autocorrelation time
    (tau_p for ou; tau_p + tau_v for ou_ctcrw, the integral of its ACF); NaN for unbounded
    models, which have no range (Fleming et al. 2015, Ecology 96, 1182-1188).
    """
    if not fit.range_resident:
        return float("nan")
    tau = fit.params["tau_position_s"]
    if fit.name == "ou_ctcrw":
        tau = tau + fit.params["tau_velocity_s"]
    return float(duration_s / tau)
