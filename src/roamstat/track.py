"""Sorting, fix schedule, segments, resampling, steps and the per-animal summary.

Every function works on whole tables at once (all animals together), with
numpy arrays and shifts; only the choice of a planar frame and the schedule
estimate visit animals one by one, and those cost one small call per animal.

Conventions
-----------
* Headings are geodesic azimuths, clockwise from north, in (-pi, pi].
* A turning angle is measured at the vertex between two steps:
  ``wrap(departure azimuth of the step - arrival azimuth of the step before)``,
  positive = clockwise (a right turn).  On the ellipsoid the direction of a
  geodesic changes along it (meridians converge), so the arrival azimuth, not
  the previous departure azimuth, is the direction the animal came in on; a
  walk along one geodesic then has zero turns, near the poles too.
* Segments split a track where the time between fixes exceeds a gap
  threshold: ``cfg.max_gap`` (a duration such as ``"6h"``) or, by default,
  ``cfg.gap_factor`` (5) times the animal's nominal fix interval.  No step,
  turn or interpolated position ever spans a gap.
* Resampling (``cfg.resample``, e.g. ``"1h"``) puts each segment on a regular
  UTC grid aligned to multiples of the interval since 1970-01-01T00:00Z (so
  ``"1h"`` falls on the hour), from the first to the last fix of the segment.
  Positions between fixes are interpolated linearly in time along the
  geodesic joining them (or along the straight line in the input CRS for
  projected input).  The observed fixes stay in the table (``interpolated``
  False); grid rows have ``interpolated`` True.  Column ``on_grid`` marks the
  analysed track: every fix without resampling; with resampling the grid rows
  plus observed fixes that fall exactly on a grid time (those are used as
  they are and no grid row is added for them).  Steps are computed on
  ``on_grid`` rows only.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
from pyproj.exceptions import CRSError

from roamstat import rows
from roamstat.errors import RoamstatError
from roamstat.geo import (
    animal_projection,
    crs_text,
    geodesic_forward,
    geodesic_inverse,
    geodesic_inverse_full,
    is_metric_projected,
    project_lonlat,
    unproject_xy,
)

#: Fix intervals that collars are commonly programmed with (seconds); common practice, no source.
COMMON_SCHEDULES_S = np.array(
    [1, 2, 3, 4, 5, 10, 15, 20, 30]
    + [60 * m for m in (1, 2, 3, 4, 5, 6, 10, 12, 15, 20, 30, 45)]
    + [3600 * h for h in (1, 1.5, 2, 3, 4, 5, 6, 8, 12, 24, 48, 72, 168)],
    dtype=float,
)
#: An interval within this relative tolerance of the nominal one counts as on schedule.
SCHEDULE_TOLERANCE = 0.10
#: A common schedule must hold this share of the intervals to be taken as the nominal one.
MIN_SCHEDULE_SHARE = 0.25
#: Resampling refuses to create more grid rows than this (a typo such as "1s" for "1h").
MAX_GRID_ROWS = 20_000_000

STEP_COLUMNS = ["animal_id", "segment", "t_start", "t_end", "dt_s", "step_m", "heading_rad", "turn_rad", "speed_m_s",
                "interp_s"]
#: Input columns read as the species (Darwin Core ``scientificName`` first), compared lower-cased.
SPECIES_COLUMNS = ("orig_scientificname", "orig_species", "orig_taxon")
SUMMARY_COLUMNS = [
    "animal_id", "n_fixes", "n_rejected", "first_time", "last_time", "median_dt_s", "nominal_dt_s",
    "regularity", "n_segments", "n_steps", "n_zero_steps", "path_m", "net_m", "straightness", "sinuosity",
]


# --------------------------------------------------------------------------- angles and planar steps


def wrap_angle(a):
    """Wrap angles (radians) to the half-open interval (-pi, pi].

    Parameters
    ----------
    a : array_like or float

    Returns
    -------
    numpy.ndarray or float
        Same shape; NaN stays NaN.
    """
    arr = np.asarray(a, dtype=float)
    w = np.pi - np.mod(np.pi - arr, 2 * np.pi)
    w = np.where(w <= -np.pi, w + 2 * np.pi, w)  # mod can round up to exactly 2*pi
    return w if w.ndim else float(w)


def planar_steps(x, y):
    """Step lengths, headings and turning angles of planar tracks.

    Works along the last axis, so a stack of simulated tracks of shape
    ``(replicates, n)`` is handled in one call.  Headings are clockwise from
    the +y axis (north) towards +x (east), like geodesic azimuths; zero-length
    steps have NaN heading; turns are ``wrap(heading_k - heading_{k-1})``
    (positive = clockwise), NaN for the first step and wherever a heading is
    undefined.

    Parameters
    ----------
    x, y : array_like, shape (..., n)
        Coordinates in metres.

    Returns
    -------
    step_m, heading_rad, turn_rad : numpy.ndarray, shape (..., n - 1)
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    dx = np.diff(x, axis=-1)
    dy = np.diff(y, axis=-1)
    step = np.hypot(dx, dy)
    heading = np.where(step > 0, np.arctan2(dx, dy), np.nan)
    turn = np.full_like(heading, np.nan)
    if heading.shape[-1] > 1:
        turn[..., 1:] = wrap_angle(heading[..., 1:] - heading[..., :-1])
    return step, heading, turn


# --------------------------------------------------------------------------- schedule


def fix_schedule(times) -> dict:
    """Median and nominal fix interval of one animal, and how regular it is.

    The nominal interval is the common collar schedule (1 s ... 1 week, see
    :data:`COMMON_SCHEDULES_S`) that the most intervals lie within 10 % of
    (ties: the shorter), which stays right when many fixes are missed (the
    median then drifts to a multiple of the schedule).  When no common
    schedule holds at least a quarter of the intervals, the schedule is taken
    as irregular and the nominal interval is the median, rounded to whole
    seconds.  ``regularity`` is the share of intervals within 10 % of the
    nominal one.  Zero intervals (same time twice) are ignored.

    Parameters
    ----------
    times : array_like of datetime
        Fix times of one animal, in any order.

    Returns
    -------
    dict
        ``median_dt_s``, ``nominal_dt_s``, ``regularity`` (NaN with fewer
        than two distinct times).
    """
    ns = as_ns(times)
    return _schedule_from_ns(np.sort(ns[ns != NAT_NS]))


def _schedule_from_ns(ns_sorted: np.ndarray) -> dict:
    return schedule_of_intervals(np.diff(ns_sorted) / 1e9)


def schedule_of_intervals(dt_s) -> dict:
    """:func:`fix_schedule` of the intervals themselves (s; zero and NaN intervals ignored)."""
    dt = np.asarray(dt_s, dtype=float)
    dt = dt[dt > 0]
    if dt.size == 0:
        return {"median_dt_s": np.nan, "nominal_dt_s": np.nan, "regularity": np.nan}
    median = float(np.median(dt))
    # Nearest common schedule of each interval, on a log scale.
    edges = np.sqrt(COMMON_SCHEDULES_S[1:] * COMMON_SCHEDULES_S[:-1])
    nearest = np.searchsorted(edges, dt)
    near_ok = np.abs(dt / COMMON_SCHEDULES_S[nearest] - 1) <= SCHEDULE_TOLERANCE
    counts = np.bincount(nearest[near_ok], minlength=COMMON_SCHEDULES_S.size)
    if counts.max() >= MIN_SCHEDULE_SHARE * dt.size:
        nominal = float(COMMON_SCHEDULES_S[int(np.argmax(counts))])
    else:
        nominal = float(max(round(median), 1.0)) if median >= 1 else median
    regularity = float(np.mean(np.abs(dt / nominal - 1) <= SCHEDULE_TOLERANCE))
    return {"median_dt_s": median, "nominal_dt_s": nominal, "regularity": regularity}


# --------------------------------------------------------------------------- preparing fixes


def prepare_fixes(fixes: pd.DataFrame, cfg, input_crs: str | None = None):
    """Sort, segment, optionally resample and project screened fixes.

    Parameters
    ----------
    fixes : pandas.DataFrame
        Screened fixes (data contract: ``animal_id, time, lat, lon`` and, for
        projected input, ``x_in, y_in``).
    cfg : roamstat.config.Config
        Uses ``crs``, ``max_gap``, ``gap_factor`` and ``resample``.
    input_crs : str, optional
        CRS of projected input; its coordinates are kept as ``x_m, y_m``.

    Returns
    -------
    fixes : pandas.DataFrame
        Sorted by ``animal_id, time`` with ``x_m, y_m, segment, interpolated,
        on_grid`` added (see the module notes).
    projections : dict
        animal_id -> CRS text (EPSG code or PROJ string) of its planar frame:
        the input CRS for projected input, ``cfg.crs`` when given, else an
        azimuthal equidistant frame centred on the animal's first fix.
    """
    frame_crs = input_crs or cfg.crs
    if frame_crs is not None:
        _check_metric(frame_crs, "the input CRS" if input_crs else "--crs")
    projected_input = input_crs is not None and {"x_in", "y_in"} <= set(fixes.columns)

    out = _sorted(fixes)
    codes, starts = _animal_blocks(out["animal_id"])
    ns = as_ns(out["time"])
    nominal = np.array([_schedule_from_ns(block)["nominal_dt_s"] for block in np.split(ns, starts[1:])]) if len(out) else np.array([])
    out["segment"] = _segments(ns, codes, starts, _gap_threshold_s(cfg, nominal))
    out["interpolated"] = False
    out["on_grid"] = True
    if cfg.resample and len(out):
        out = _resample(out, duration_ns(cfg.resample, "--resample"), projected_input, input_crs)
        codes, starts = _animal_blocks(out["animal_id"])

    x, y, projections = _project(out, codes, starts, frame_crs, projected_input)
    out["x_m"] = x
    out["y_m"] = y
    return _ordered(out), projections


def _sorted(fixes: pd.DataFrame) -> pd.DataFrame:
    out = fixes.reset_index(drop=True)
    out["animal_id"] = out["animal_id"].astype(str)
    codes = pd.factorize(out["animal_id"], sort=True)[0]
    order = np.lexsort((as_ns(out["time"]), codes))  # stable: equal keys keep input order
    if np.array_equal(order, np.arange(order.size)):
        return out
    return out.iloc[order].reset_index(drop=True)


def _animal_blocks(animal_id: pd.Series):
    """Integer code per row and the first row of each animal (rows sorted by animal)."""
    codes = pd.factorize(animal_id, sort=True)[0]
    starts = np.flatnonzero(np.r_[True, codes[1:] != codes[:-1]]) if len(codes) else np.array([], dtype=int)
    return codes, starts


#: Int64 nanoseconds of NaT (pandas' missing time).
NAT_NS = np.iinfo(np.int64).min


def as_ns(times) -> np.ndarray:
    """Int64 nanoseconds since the epoch (UTC) of a datetime column (NaT as the int64 minimum)."""
    if isinstance(times, np.ndarray) and times.dtype.kind == "M":  # naive numpy times are UTC here
        return times.astype("datetime64[ns]").view(np.int64)
    series = times if isinstance(times, pd.Series) else pd.Series(times)
    if not isinstance(series.dtype, pd.DatetimeTZDtype):
        series = pd.to_datetime(series, utc=True)
    return series.array.as_unit("ns").asi8  # tz-aware values are held in UTC: no conversion needed


def _from_ns(ns: np.ndarray) -> pd.Series:
    return pd.Series(np.asarray(ns, dtype=np.int64).astype("datetime64[ns]")).dt.tz_localize("UTC")


def duration_ns(text: str, option: str) -> int:
    """A positive duration such as ``30min``, ``6h`` or ``1d`` in nanoseconds (``option`` names it in errors)."""
    # "1d" and "6H" as people write them; pandas wants "1D" and "6h".
    spelled = re.sub(r"(\d)\s*d(?![a-z])", r"\1D", str(text).strip().lower())
    try:
        value = pd.Timedelta(spelled)
    except ValueError:
        value = None
    if value is None or value is pd.NaT or value <= pd.Timedelta(0):
        raise RoamstatError(f"{option} {text!r} is not a positive duration; give one such as 30min, 6h or 1d")
    return int(value.value)


def duration_s(text: str, option: str) -> float:
    """A duration such as ``"1h"`` or ``"1d"`` in seconds; ``option`` names the flag in the error message."""
    return duration_ns(text, option) / 1e9


def _gap_threshold_s(cfg, nominal_dt_s: np.ndarray) -> np.ndarray:
    """Longest time between fixes that stays within a segment, per animal."""
    if cfg.max_gap:
        return np.full(nominal_dt_s.shape, duration_ns(cfg.max_gap, "--max-gap") / 1e9)
    threshold = cfg.gap_factor * nominal_dt_s
    return np.where(np.isfinite(threshold), threshold, np.inf)


def _segments(ns: np.ndarray, codes: np.ndarray, starts: np.ndarray, threshold_s: np.ndarray) -> np.ndarray:
    """Segment number from 0 per animal, a new one after every gap above the threshold."""
    if ns.size == 0:
        return np.zeros(0, dtype=np.int64)
    dt_s = np.r_[0.0, np.diff(ns) / 1e9]
    new = dt_s > threshold_s[codes]
    new[starts] = False
    count = np.cumsum(new)
    return (count - count[starts][codes]).astype(np.int64)


def _resample(fixes: pd.DataFrame, step_ns: int, projected_input: bool, input_crs) -> pd.DataFrame:
    """Add interpolated rows on a regular UTC grid within each segment."""
    ns = as_ns(fixes["time"])
    codes = pd.factorize(fixes["animal_id"], sort=True)[0]
    seg = fixes["segment"].to_numpy()
    first = np.flatnonzero(np.r_[True, (codes[1:] != codes[:-1]) | (seg[1:] != seg[:-1])])
    last = np.r_[first[1:] - 1, len(fixes) - 1]
    grid_start = -((-ns[first]) // step_ns) * step_ns  # ceil to the grid
    grid_end = (ns[last] // step_ns) * step_ns
    n_grid = np.maximum((grid_end - grid_start) // step_ns + 1, 0)
    total = int(n_grid.sum())
    if total > MAX_GRID_ROWS:
        raise RoamstatError(
            f"--resample {pd.Timedelta(step_ns)} would create {total:,} grid rows; choose a longer interval"
        )
    seg_of_grid = np.repeat(np.arange(first.size), n_grid)
    offset = np.arange(total) - np.repeat(np.cumsum(n_grid) - n_grid, n_grid)
    grid_ns = grid_start[seg_of_grid] + offset * step_ns

    # Left bracketing fix of each grid time: merge fixes and grid times in (segment, time) order.
    seg_id = np.repeat(np.arange(first.size), last - first + 1)
    keys_seg = np.r_[seg_id, seg_of_grid]
    keys_t = np.r_[ns, grid_ns]
    kind = np.r_[np.zeros(ns.size, dtype=np.int8), np.ones(total, dtype=np.int8)]  # fixes first on ties
    order = np.lexsort((kind, keys_t, keys_seg))
    row = np.where(kind[order] == 0, order, -1)
    left_sorted = np.maximum.accumulate(row)
    left = np.empty(total, dtype=np.int64)
    left[order[kind[order] == 1] - ns.size] = left_sorted[kind[order] == 1]

    exact = ns[left] == grid_ns
    on_grid = np.zeros(len(fixes), dtype=bool)
    on_grid[left[exact]] = True
    left, grid_ns = left[~exact], grid_ns[~exact]
    right = left + 1
    frac = (grid_ns - ns[left]) / (ns[right] - ns[left])

    new = {"animal_id": fixes["animal_id"].to_numpy()[left], "time": _from_ns(grid_ns)}
    if projected_input:
        x_in = fixes["x_in"].to_numpy(float)
        y_in = fixes["y_in"].to_numpy(float)
        new["x_in"] = x_in[left] + frac * (x_in[right] - x_in[left])
        new["y_in"] = y_in[left] + frac * (y_in[right] - y_in[left])
        new["lon"], new["lat"] = unproject_xy(new["x_in"], new["y_in"], input_crs)
    else:
        lat = fixes["lat"].to_numpy(float)
        lon = fixes["lon"].to_numpy(float)
        dist, azimuth = geodesic_inverse(lat[left], lon[left], lat[right], lon[right])
        new["lat"], new["lon"] = geodesic_forward(lat[left], lon[left], azimuth, frac * dist)
    new["segment"] = seg[left]
    grid = pd.DataFrame(new)
    grid["interpolated"] = True
    grid["on_grid"] = True

    observed = fixes.copy()
    observed["on_grid"] = on_grid
    if "source_row" in observed:
        observed["source_row"] = observed["source_row"].astype("Int64")  # grid rows have none
    merged = pd.concat([observed, grid], ignore_index=True)
    return _sorted(merged)


def _check_metric(crs, what: str) -> None:
    try:
        metric = is_metric_projected(crs)
    except CRSError as exc:
        raise RoamstatError(f"{what} {crs!r} is not a CRS PROJ recognises ({exc}); give one such as EPSG:32633") from None
    if not metric:
        raise RoamstatError(
            f"{what} {crs!r} is not a projected CRS in metres; give a projected EPSG code such as a UTM zone "
            "(EPSG:326NN north, EPSG:327NN south), or leave --crs out to get a frame centred on each animal"
        )


def _project(fixes, codes, starts, frame_crs, projected_input):
    """Planar coordinates in metres and the frame of each animal."""
    ids = fixes["animal_id"].to_numpy()[starts] if len(fixes) else []
    if projected_input:
        text = crs_text(frame_crs)
        return fixes["x_in"].to_numpy(float), fixes["y_in"].to_numpy(float), {str(a): text for a in ids}
    lon = fixes["lon"].to_numpy(float)
    lat = fixes["lat"].to_numpy(float)
    if frame_crs is not None:
        text = crs_text(frame_crs)
        x, y = project_lonlat(lon, lat, text)
        return x, y, {str(a): text for a in ids}
    x = np.empty(len(fixes))
    y = np.empty(len(fixes))
    projections = {}
    observed = ~fixes["interpolated"].to_numpy(bool)
    bounds = np.r_[starts, len(fixes)]
    for k, aid in enumerate(ids):
        block = slice(bounds[k], bounds[k + 1])
        centre = bounds[k] + int(np.argmax(observed[block]))  # the first observed fix
        text = crs_text(animal_projection(lat[centre], lon[centre]))
        x[block], y[block] = project_lonlat(lon[block], lat[block], text)
        projections[str(aid)] = text
    return x, y, projections


def _ordered(fixes: pd.DataFrame) -> pd.DataFrame:
    """Put the added columns just before the pass-through ``orig_*`` columns."""
    added = ["x_m", "y_m", "segment", "interpolated", "on_grid"]
    rest = [c for c in fixes.columns if c not in added]
    cut = next((i for i, c in enumerate(rest) if str(c).startswith("orig_")), len(rest))
    return fixes[rest[:cut] + added + rest[cut:]]


# --------------------------------------------------------------------------- steps


def compute_steps(fixes: pd.DataFrame) -> pd.DataFrame:
    """One row per consecutive pair of analysed fixes within a segment.

    Step length and heading are geodesic on WGS84 (Karney 2013), from
    ``lat, lon`` (for projected input the inverse-projected values).  Turning
    angles are taken at the shared vertex (see the module notes), wrapped to
    (-pi, pi], positive = clockwise; zero-length steps have NaN heading and
    the turns on either side of them are NaN; the first step of a segment
    has NaN turn.  Only ``on_grid`` rows are used when that column exists.
    ``interp_s`` is, for the end of the step farther from an observation, the
    time (s) to the nearest observed fix: 0 when both ends are observed fixes
    (always without ``--resample``).  The step models use it to keep
    interpolated positions out of their fits (``models/fit.py``).

    Parameters
    ----------
    fixes : pandas.DataFrame
        Output of :func:`prepare_fixes` (sorted by animal and time).

    Returns
    -------
    pandas.DataFrame
        Columns ``animal_id, segment, t_start, t_end, dt_s, step_m,
        heading_rad, turn_rad, speed_m_s, interp_s``.

    References
    ----------
    Karney, C. F. F. (2013). Algorithms for geodesics. J. Geodesy 87, 43-55.
    """
    track = rows.analysed(fixes, ["animal_id", "segment", "time", "lat", "lon"])
    from_fix_s = _time_to_observed_s(fixes)[rows.analysed_mask(fixes)]
    codes = pd.factorize(track["animal_id"], sort=True)[0]
    seg = track["segment"].to_numpy()
    pair = np.flatnonzero((codes[1:] == codes[:-1]) & (seg[1:] == seg[:-1]))
    nxt = pair + 1
    lat = track["lat"].to_numpy(float)
    lon = track["lon"].to_numpy(float)
    ns = as_ns(track["time"])
    dist, depart, arrive = geodesic_inverse_full(lat[pair], lon[pair], lat[nxt], lon[nxt])
    zero = dist == 0
    depart[zero] = np.nan
    arrive[zero] = np.nan
    follows = np.r_[False, pair[1:] == nxt[:-1]] if pair.size else np.zeros(0, dtype=bool)
    turn = np.full(pair.size, np.nan)
    turn[follows] = wrap_angle(depart[follows] - arrive[np.flatnonzero(follows) - 1])
    dt_s = (ns[nxt] - ns[pair]) / 1e9
    with np.errstate(divide="ignore", invalid="ignore"):
        speed = np.where(dt_s > 0, dist / dt_s, np.nan)
    return pd.DataFrame({
        "animal_id": track["animal_id"].astype(str).array.take(pair),
        "segment": seg[pair].astype(np.int64),
        "t_start": _from_ns(ns[pair]),
        "t_end": _from_ns(ns[nxt]),
        "dt_s": dt_s,
        "step_m": dist,
        "heading_rad": depart,
        "turn_rad": turn,
        "speed_m_s": speed,
        "interp_s": np.maximum(from_fix_s[pair], from_fix_s[nxt]),
    }, columns=STEP_COLUMNS)


def _time_to_observed_s(fixes: pd.DataFrame) -> np.ndarray:
    """Per row, seconds to the nearest observed fix of the same animal (0 on observed fixes).

    Grid rows always lie between two observed fixes of their own segment, so
    the neighbouring observed rows in the sorted table are the right ones.
    """
    if "interpolated" not in fixes or not fixes["interpolated"].to_numpy(bool).any():
        return np.zeros(len(fixes))
    observed = ~fixes["interpolated"].to_numpy(bool)
    ns = as_ns(fixes["time"])
    rows = np.arange(len(fixes))
    before = np.maximum.accumulate(np.where(observed, rows, 0))
    after = np.minimum.accumulate(np.where(observed, rows, len(fixes) - 1)[::-1])[::-1]
    return np.minimum(ns - ns[before], ns[after] - ns) / 1e9


# --------------------------------------------------------------------------- summary


def summarise(fixes: pd.DataFrame, steps: pd.DataFrame, rejected: pd.DataFrame) -> pd.DataFrame:
    """One row per animal: counts, schedule, path, displacement and tortuosity.

    * ``tag``: only when the input had a deployment column (re-collared
      animals): the device of this deployment, so the table says which
      ``animal/tag`` rows are one animal's separate deployments.
    * ``species``: only when the input had a species column (Darwin Core
      ``scientificName``, or ``species``), its first non-empty value per animal.
    * ``n_fixes``: observed fixes kept (interpolated rows not counted);
      ``n_rejected``: rows of this animal in ``rejected``.
    * ``first_time, last_time, median_dt_s, nominal_dt_s, regularity``: from
      the observed fixes (:func:`fix_schedule`).
    * ``path_m``: sum of step lengths (within segments); ``net_m``: geodesic
      distance from the first to the last fix of the analysed track.
    * ``straightness``: ``net_m`` divided by the path length with the straight
      (geodesic) distances across the gaps between segments added, so it
      stays within [0, 1]; Batschelet (1981).
    * ``sinuosity``: the sinuosity index of Benhamou (2004, eq. 8),
      ``S = 2 [p ((1 + c) / (1 - c) + b^2)]^(-1/2)`` in m^(-1/2), with ``p``
      the mean step length, ``c`` the mean cosine of the turning angles and
      ``b`` the coefficient of variation of step length (population form,
      ``b^2 = mean(l^2) / p^2 - 1``).  It assumes a random search path with
      symmetric turns; 0 for a straight path, NaN without a turn.

    References
    ----------
    Batschelet, E. (1981). Circular Statistics in Biology. Academic Press.
    Benhamou, S. (2004). How to reliably estimate the tortuosity of an
    animal's path: straightness, sinuosity, or fractal dimension? Journal of
    Theoretical Biology 229, 209-220.
    """
    observed = rows.observed(fixes, ["animal_id", "segment", "time"])
    track = rows.analysed(fixes, ["animal_id", "segment", "lat", "lon"])
    if len(observed) == 0:
        return pd.DataFrame({c: [] for c in SUMMARY_COLUMNS})
    obs_codes, obs_starts = _animal_blocks(observed["animal_id"].astype(str))
    ids = observed["animal_id"].astype(str).to_numpy()[obs_starts]
    obs_ends = np.r_[obs_starts[1:] - 1, len(observed) - 1]
    obs_ns = as_ns(observed["time"])
    schedules = pd.DataFrame([_schedule_from_ns(b) for b in np.split(obs_ns, obs_starts[1:])])

    out = pd.DataFrame({"animal_id": ids})
    if "tag" in fixes.columns:
        out["tag"] = out["animal_id"].map(fixes.groupby(fixes["animal_id"].astype(str))["tag"].first())
    lowered = {str(c).lower(): c for c in fixes.columns}
    species = next((lowered[n] for n in SPECIES_COLUMNS if n in lowered), None)
    if species is not None:
        named = fixes[species].astype("string").str.strip().replace("", pd.NA)
        out["species"] = out["animal_id"].map(named.groupby(fixes["animal_id"].astype(str)).first())
    out["n_fixes"] = np.bincount(obs_codes, minlength=ids.size)
    out["n_rejected"] = _count_by(rejected["animal_id"], ids) if "animal_id" in rejected else 0
    out["first_time"] = _from_ns(obs_ns[obs_starts])
    out["last_time"] = _from_ns(obs_ns[obs_ends])
    for name in ("median_dt_s", "nominal_dt_s", "regularity"):
        out[name] = schedules[name].to_numpy()
    out["n_segments"] = observed["segment"].to_numpy()[obs_ends].astype(np.int64) + 1  # numbered 0, 1, ...

    code = _codes_in(steps["animal_id"], ids)
    if (code < 0).any():
        raise ValueError("steps of an animal without fixes: steps and fixes do not belong together")
    step = steps["step_m"].to_numpy(float)
    cos_turn = np.cos(steps["turn_rad"].to_numpy(float))
    has_turn = np.isfinite(cos_turn)
    n_steps = np.bincount(code, minlength=ids.size)
    n_turns = np.bincount(code[has_turn], minlength=ids.size)
    path = np.bincount(code, weights=step, minlength=ids.size)
    with np.errstate(divide="ignore", invalid="ignore"):
        mean = path / n_steps
        mean_sq = np.bincount(code, weights=step * step, minlength=ids.size) / n_steps
        mean_cos = np.bincount(code[has_turn], weights=cos_turn[has_turn], minlength=ids.size) / n_turns
    out["n_steps"] = n_steps
    out["n_zero_steps"] = np.bincount(code[step == 0], minlength=ids.size)
    out["path_m"] = path

    net, chord = _net_and_gaps(track, ids)
    out["net_m"] = net
    denominator = path + chord
    with np.errstate(divide="ignore", invalid="ignore"):
        out["straightness"] = np.where(denominator > 0, net / denominator, np.nan)
    out["sinuosity"] = _sinuosity(mean, mean_sq, mean_cos)
    optional = [c for c in ("tag", "species") if c in out]
    return out[SUMMARY_COLUMNS[:1] + optional + SUMMARY_COLUMNS[1:]]


def _codes_in(animal_id: pd.Series, ids: np.ndarray) -> np.ndarray:
    """Position of each row's animal in ``ids``; -1 for an animal not in it, or a missing id."""
    codes, uniques = pd.factorize(animal_id)
    where = pd.Index(ids).get_indexer(pd.Index(uniques).astype(str))
    return np.where(codes >= 0, where[codes] if where.size else -1, -1).astype(np.int64)


def _count_by(animal_id: pd.Series, ids: np.ndarray) -> np.ndarray:
    codes = _codes_in(animal_id, ids)
    return np.bincount(codes[codes >= 0], minlength=ids.size)


def _net_and_gaps(track: pd.DataFrame, ids: np.ndarray):
    """Net displacement (first to last analysed fix) and total distance across segment gaps, per animal."""
    codes = _codes_in(track["animal_id"], ids)
    starts = np.flatnonzero(np.r_[True, codes[1:] != codes[:-1]]) if len(track) else np.array([], dtype=int)
    ends = np.r_[starts[1:] - 1, len(track) - 1] if len(track) else starts
    lat = track["lat"].to_numpy(float)
    lon = track["lon"].to_numpy(float)
    seg = track["segment"].to_numpy()
    net = np.full(ids.size, np.nan)
    net[codes[starts]] = geodesic_inverse(lat[starts], lon[starts], lat[ends], lon[ends])[0]
    jump = np.flatnonzero((codes[1:] == codes[:-1]) & (seg[1:] != seg[:-1]))
    gap_m = geodesic_inverse(lat[jump], lon[jump], lat[jump + 1], lon[jump + 1])[0]
    return net, np.bincount(codes[jump], weights=gap_m, minlength=ids.size)


def _sinuosity(p: np.ndarray, mean_sq: np.ndarray, c: np.ndarray) -> np.ndarray:
    """Benhamou (2004) sinuosity index from mean step, mean squared step and mean cosine."""
    with np.errstate(divide="ignore", invalid="ignore"):
        b2 = np.maximum(mean_sq / (p * p) - 1.0, 0.0)
        ratio = (1.0 + c) / (1.0 - c)
        s = 2.0 / np.sqrt(p * (ratio + b2))
    s = np.where(c >= 1.0, 0.0, s)  # straight path: the index tends to zero
    return np.where(np.isfinite(p) & (p > 0) & np.isfinite(c), s, np.nan)
