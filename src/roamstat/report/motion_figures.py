"""The report's motion-model pieces for one animal: table, smoothed track, semi-variogram, areas.

:func:`animal_html` returns the HTML for one animal's section and writes its figures:

- the motion-model table (motion_models.csv rows of the animal);
- the smoothed track (track_smoothed.csv, masked when the run masks) over the raw fixes, with
  95 % error circles where the smoothed position's SE is large against the animal's movement;
- the empirical semi-variance of the observed fixes against time lag with the selected model's
  curve (plus the location-error variance), the usual visual check of range residency
  (Fleming et al. 2014);
- the 95 % areas with their intervals side by side (mcp, kde, kde_autocorr, gaussian) and one
  sentence saying which to cite and why.

References
----------
Fleming, C. H. et al. (2014). From fine-scale foraging to home ranges: a semivariance approach to
identifying movement modes across spatiotemporal scales. Am. Nat. 183, E154-E167.
Fleming, C. H. et al. (2015). Rigorous home range estimation with movement data: a new
autocorrelated kernel density estimator. Ecology 96, 1182-1188.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import math

import numpy as np
import pandas as pd
from matplotlib.patches import Circle

from roamstat.report.figures import (GREY, NORMAL, TRACK_COLOUR, Picture, _coordinate_labels, _png, _take,
                                     distance_scale, dots)
from roamstat.report.html import esc, fmt, table
from roamstat.report.pairs import binned_pairs, lag_range

if TYPE_CHECKING:
    from roamstat.report.sections import Fragment

MOTION_COLUMNS = ["model", "n_params", "aicc", "delta_aicc", "best", "diffusion_m2_s", "sigma_m", "tau_position_s",
                  "tau_velocity_s", "error_sd_m", "error_source"]
AREA_METHODS = ("mcp", "kde", "kde_autocorr", "gaussian")
AREA_LEVEL = 95
AREA_COLUMNS = ("method", "area_km2", "area_low_km2", "area_high_km2", "n_fixes", "n_effective")
#: 95 % radius of an isotropic 2-D Gaussian in per-axis SDs: sqrt(chi-square_2 quantile 0.95).
CIRCLE_95 = math.sqrt(-2.0 * math.log(0.05))
MAX_CIRCLES = 150  # the largest errors only, so the figure stays readable (judgement)
LAG_BINS = 40  # log-spaced lag bins of the empirical semi-variogram
MAX_PAIRS = 2_000_000  # pairs of fixes used at most (offsets thinned geometrically; speed)
CAPTIONS = {
    "smoothed": "Smoothed track (best motion model, Rauch–Tung–Striebel) over the raw fixes (grey); circles: "
                "95 % error of smoothed positions whose SE exceeds the median step between fixes.",
    "semivariance": "Empirical semi-variance of the fixes against time lag (points) and the selected model's "
                    "curve plus the location-error variance (line); a curve that levels off indicates range "
                    "residency (Fleming et al. 2014).",
}


def section(tables: dict, animal) -> "Fragment":
    """Report section builder: motion-model table, areas side by side, smoothed track, semi-variogram.

    ``tables`` holds this animal's rows of every deployment table; ``animal`` is a
    :class:`roamstat.report.sections.AnimalView`.
    """
    from roamstat.report.sections import Fragment

    models = tables.get("motion_models")
    models = models if isinstance(models, pd.DataFrame) else pd.DataFrame()
    parts = []
    if len(models):
        parts.append("<h4>Continuous-time motion models</h4>"
                     + table(models[[c for c in MOTION_COLUMNS if c in models.columns]]))
    areas = tables.get("ranges")
    if isinstance(areas, pd.DataFrame) and len(areas) and "method" in areas:
        parts.append(areas_html(areas, models))
    fragment = Fragment(html="".join(parts))
    smoothed = tables.get("track_smoothed")
    if isinstance(smoothed, pd.DataFrame) and len(smoothed):
        track = animal.track if animal.track is not None else pd.DataFrame({"x_m": [], "y_m": []})
        fragment.figures.append(("smoothed", CAPTIONS["smoothed"],
                                 lambda: smoothed_figure(smoothed, track, animal.masked)))
    motion = getattr(animal.result, "motion", None)
    if motion is not None:
        fragment.figures.append(("semivariance", CAPTIONS["semivariance"], lambda: semivariance_figure(motion)))
    return fragment


def areas_html(ranges_a: pd.DataFrame, models_a: pd.DataFrame) -> str:
    """The 95 % areas of the four methods with their intervals, and which one to cite."""
    rows = ranges_a[(ranges_a["method"].isin(AREA_METHODS)) & (pd.to_numeric(ranges_a["level"]) == AREA_LEVEL)]
    rows = rows.set_index("method").reindex([m for m in AREA_METHODS if m in set(rows["method"])]).reset_index()
    shown = rows[[c for c in AREA_COLUMNS if c in rows.columns]]  # older tables lack the interval columns
    return (f"<h4>Home-range areas ({AREA_LEVEL} %) side by side</h4>" + table(shown)
            + f'<p class="meta">{esc(which_area(rows, models_a))}</p>')


def which_area(rows: pd.DataFrame, models_a: pd.DataFrame) -> str:
    """One sentence: which 95 % area to cite for this animal, and why."""
    best = None
    if len(models_a) and "best" in models_a:
        picked = models_a.loc[models_a["best"].astype(bool), "model"]
        best = str(picked.iloc[0]) if len(picked) else None
    by_method = rows.set_index("method")
    autocorr = by_method.loc["kde_autocorr"] if "kde_autocorr" in by_method.index else None
    if autocorr is not None:
        autocorr = autocorr.reindex(AREA_COLUMNS[1:]).astype(float)
    if best is None:
        return ("No motion model could be fitted, so no area accounts for autocorrelation: the mcp and kde "
                "areas only describe where these fixes fell and are likely too small for the animal's range.")
    if autocorr is None or not np.isfinite(autocorr["area_km2"]):
        return (f"Cite no area as a home range: the best motion model ({best}) is not range-resident over the "
                "tracking period, so there is no stationary home range; mcp and kde only outline the fixes.")
    n_eff = float(autocorr["n_effective"])
    sentence = (f"Cite kde_autocorr, {fmt(float(autocorr['area_km2']))} km² (95 % CI "
                f"{fmt(float(autocorr['area_low_km2']))}–{fmt(float(autocorr['area_high_km2']))}): its bandwidth "
                f"and interval account for the autocorrelation of the fixes (best model {best}, about "
                f"{fmt(n_eff)} effective independent fixes), while mcp and kde treat every fix as independent "
                "and gaussian assumes an elliptical range.")
    if n_eff < 10:
        sentence += " With so few effective fixes the interval is wide; a longer track would narrow it."
    return sentence


def smoothed_figure(smoothed_a: pd.DataFrame, fixes_a: pd.DataFrame, masked: bool) -> Picture | None:
    """The smoothed track (observed times as a line, predicted grid points as dots) over the raw fixes."""
    if not len(smoothed_a) or not {"x_m", "y_m", "se_m", "predicted"} <= set(smoothed_a.columns):
        return None
    at_fix = smoothed_a[~smoothed_a["predicted"].astype(bool)]
    grid = smoothed_a[smoothed_a["predicted"].astype(bool)]
    sx, sy, se = (at_fix[c].to_numpy(float) for c in ("x_m", "y_m", "se_m"))
    rx = fixes_a["x_m"].to_numpy(float) if len(fixes_a) else np.empty(0)
    ry = fixes_a["y_m"].to_numpy(float) if len(fixes_a) else np.empty(0)
    scale, unit = distance_scale(np.concatenate([sx, sy, rx, ry]))
    fig, ax = _take("smoothed", NORMAL)
    dots(ax, rx / scale, ry / scale, 5, GREY, alpha=0.7, label=f"raw fixes ({rx.size})")
    ax.plot(sx / scale, sy / scale, color=TRACK_COLOUR, linewidth=0.8, label="smoothed")
    if len(grid):
        dots(ax, grid["x_m"].to_numpy(float) / scale, grid["y_m"].to_numpy(float) / scale, 3, "#ef6c00",
             label=f"predicted ({len(grid)})")
    step = np.hypot(np.diff(sx), np.diff(sy))
    large = np.flatnonzero(se > np.median(step)) if step.size else np.empty(0, int)
    for i in large[np.argsort(se[large])[::-1][:MAX_CIRCLES]]:
        ax.add_patch(Circle((sx[i] / scale, sy[i] / scale), CIRCLE_95 * se[i] / scale, fill=False,
                            edgecolor=TRACK_COLOUR, alpha=0.35, linewidth=0.6))
    _coordinate_labels(ax, unit, masked)
    return _png(fig, ax)


def empirical_semivariance(t_s, x_m, y_m, n_bins: int = LAG_BINS, max_pairs: int = MAX_PAIRS):
    """Per-axis semi-variance 0.5 E[(r(t + lag) - r(t))^2] / 2 of irregular fixes, in log-spaced lag bins.

    Pairs are taken at fix offsets 1, 2, ... (thinned geometrically once they would exceed
    ``max_pairs``) and binned by their time lag; each bin gives its mean lag and the mean of
    half the squared displacement per axis (Fleming et al. 2014, eq. 1, on unbinned pairs).

    Returns
    -------
    lag_s, gamma_m2, n_pairs : ndarray
        Bins with at least one pair, in increasing lag.
    """
    t, x, y = (np.asarray(v, dtype=float) for v in (t_s, x_m, y_m))
    n = t.size
    if n < 3 or t[-1] <= t[0]:
        return np.empty(0), np.empty(0), np.empty(0, int)
    offsets = np.arange(1, n)
    if n * (n - 1) / 2 > max_pairs:
        offsets = np.unique(np.rint(np.geomspace(1, n - 1, max(2, max_pairs // n))).astype(int))
    lo, hi = lag_range(t, offsets)
    edges = np.geomspace(lo, hi * (1 + 1e-9), n_bins + 1)
    count, lag_sum, half_sum = binned_pairs(t, x, y, offsets, edges)
    used = count > 0
    mean_lag = lag_sum[used] / count[used]
    gamma = half_sum[used] / count[used]
    return mean_lag, gamma, count[used]


def semivariance_figure(motion) -> Picture | None:
    """Empirical semi-variance against lag with the best model's curve (error variance added)."""
    fit = motion.best if motion is not None else None
    if fit is None:
        return None
    lag, gamma, _ = empirical_semivariance(motion.t_s, motion.x_m, motion.y_m)
    if not lag.size:
        return None
    error_var = float(np.mean(motion.error_sd_m(fit) ** 2))
    grid = np.geomspace(lag.min(), lag.max(), 200)
    model = np.asarray(fit.semivariance(grid), dtype=float) + error_var
    fig, ax = _take("semivariance", NORMAL, log="xy")
    dots(ax, lag / 3600.0, gamma, 10, GREY, label="fixes (binned pairs)")
    ax.plot(grid / 3600.0, model, color=TRACK_COLOUR, linewidth=1.2, label=f"{fit.name} + location error")
    ax.set_xlabel("time lag (h)", fontsize=8)
    ax.set_ylabel("semi-variance per axis (m²)", fontsize=8)
    return _png(fig, ax)
