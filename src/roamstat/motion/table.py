"""Rows of ``motion_models.csv`` (one per fitted model) and the effective sample size for areas."""
from __future__ import annotations

import numpy as np
import pandas as pd
from scipy.integrate import quad

from .fit import best_fit
from .kalman import PARAM_KEYS

TABLE_COLUMNS = ("model", "n_fixes", "n_params", "loglik", "aicc", "delta_aicc", "best",
                 *PARAM_KEYS, "error_source", *(f"{key}_se" for key in PARAM_KEYS), "range_crossings")


def motion_table(fits) -> pd.DataFrame:
    """One row per fit, columns ``TABLE_COLUMNS`` (``animal_id`` is added by the caller).

    Parameters a model does not have are NaN (empty in the CSV). ``error_sd_m`` is the estimated
    SD (with its SE) when ``error_source`` is ``estimated``, else the median of the known
    per-fix SDs (no SE). ``delta_aicc`` is relative to the best model (``best``), which is the
    lowest AICc among eligible fits (see ``fit.best_fit``), so it can be negative for a
    range-resident fit whose range is not resolved (``range_crossings`` below the minimum).
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
        row["range_crossings"] = fit.range_crossings
        rows.append(row)
    return pd.DataFrame(rows, columns=list(TABLE_COLUMNS))


def effective_n_area(fit, duration_s: float) -> float:
    """Effective number of independent fixes for the spread (area) of a range-resident track.

    N = duration / (2 integral_0^inf rho(t)^2 dt), rho the position autocorrelation: the
    variance of the time-averaged squared deviation of a stationary Gaussian process over a
    long duration T is 2 sigma^4 (2 integral rho^2)/T, i.e. that of N independent draws
    (e.g. Priestley 1981, Spectral Analysis and Time Series, sec. 5.3). For ou this is T/tau_p,
    the range-crossing count of Fleming et al. (2015, Ecology 96, 1182-1188). NaN for
    unbounded models, which have no range.
    """
    if not fit.range_resident:
        return float("nan")
    scale = fit.params["tau_position_s"] + fit.params.get("tau_velocity_s", 0.0) * (fit.name == "ou_ctcrw")
    integral, _ = quad(lambda t: fit.position_acf(t) ** 2, 0.0, np.inf, epsabs=1e-10 * scale)
    return float(duration_s / (2.0 * integral))
