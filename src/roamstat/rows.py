"""Which rows of the fixes table each stage sees: the one place that decides.

After :func:`roamstat.track.prepare_fixes` the fixes table holds observed
fixes and, with ``--resample``, interpolated grid rows (``interpolated``
True).  ``on_grid`` marks the analysed track: every row without resampling;
with it the grid rows and the observed fixes that fall exactly on a grid time.

========================  ==========  =====================================================
stage / output            view        why
========================  ==========  =====================================================
steps, summary path/net   analysed    movement metrics need one regular schedule
null tests                analysed    the observed curve must match the steps' schedule
summary counts, schedule  observed    only reported fixes describe the collar
row accounting (kept)     observed    grid rows are not input rows: read = kept + rejected
residency, ranges         located     estimates use reported locations, never
                                      interpolations (Fieberg 2007); time-ordered
report maps               observed    the maps show what the collar reported
fixes.csv                 every row   the table of record, with both flags
========================  ==========  =====================================================

``located`` is ``observed`` restricted to rows with finite ``lat, lon,
x_m, y_m`` and time, sorted by time.

References
----------
Fieberg, J. (2007). Kernel density estimators of home range: smoothing and
the autocorrelation red herring. Ecology 88, 1059-1066.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from roamstat.errors import RoamstatError


def observed_mask(fixes: pd.DataFrame) -> np.ndarray:
    """True for fixes the collar reported (all rows when nothing was interpolated)."""
    if "interpolated" not in fixes:
        return np.ones(len(fixes), dtype=bool)
    return ~fixes["interpolated"].fillna(False).to_numpy(bool)


def analysed_mask(fixes: pd.DataFrame) -> np.ndarray:
    """True for the rows of the analysed track (``on_grid``; all rows without the column)."""
    if "on_grid" not in fixes:
        return np.ones(len(fixes), dtype=bool)
    return fixes["on_grid"].fillna(False).to_numpy(bool)


def _select(fixes: pd.DataFrame, mask: np.ndarray, columns) -> pd.DataFrame:
    table = fixes if columns is None else fixes[list(columns)]
    return table.reset_index(drop=True) if mask.all() else table[mask].reset_index(drop=True)


def observed(fixes: pd.DataFrame, columns=None) -> pd.DataFrame:
    """The observed fixes (optionally only ``columns``), in table order."""
    return _select(fixes, observed_mask(fixes), columns)


def analysed(fixes: pd.DataFrame, columns=None) -> pd.DataFrame:
    """The analysed track (optionally only ``columns``), in table order."""
    return _select(fixes, analysed_mask(fixes), columns)


def n_observed(fixes: pd.DataFrame) -> int:
    """Input rows kept: observed fixes (interpolated grid rows are not input rows)."""
    return int(observed_mask(fixes).sum())


def located_mask(fixes_a: pd.DataFrame) -> np.ndarray:
    """True for observed fixes with finite position and time (the rows :func:`located` keeps)."""
    missing = [c for c in ("animal_id", "time", "lat", "lon", "x_m", "y_m") if c not in fixes_a.columns]
    if missing:
        raise RoamstatError(f"fixes table lacks column(s) {', '.join(missing)}; prepare fixes with track.prepare_fixes first")
    keep = observed_mask(fixes_a) & fixes_a["time"].notna().to_numpy()
    for column in ("lat", "lon", "x_m", "y_m"):
        keep &= np.isfinite(fixes_a[column].to_numpy(float))
    return keep


def located(fixes_a: pd.DataFrame) -> pd.DataFrame:
    """Observed fixes with finite position and time, in time order (residency and ranges)."""
    keep = located_mask(fixes_a)
    kept = fixes_a if keep.all() else fixes_a[keep]
    if not kept["time"].is_monotonic_increasing:  # sorting is the costly part for short tracks
        kept = kept.sort_values("time", kind="stable")
    return kept.reset_index(drop=True)
