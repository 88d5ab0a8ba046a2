"""Quality screening: every row is kept or rejected with a reason code.

Rules run in the order below; a row is rejected by the first rule it fails,
and later rules see only the rows still kept.  Each rule can be switched off
with ``--keep CODE`` (``Config.disabled_rules``).

=================  ===========================================================  ================
code               rejects                                                      default
=================  ===========================================================  ================
bad_time           missing or unreadable time                                   on
bad_coords         missing, unreadable or non-finite coordinates                on
lat_range          latitude outside [-90, 90]                                   on
lon_range          longitude outside [-180, 180]                                on
null_island        exactly (0, 0), a collar's "no fix" placeholder              on
duplicate_row      a repeat of an earlier row of the same animal (all values)   on
duplicate_time     a second fix of one animal at the same time (keeps the       on
                   lower-DOP fix, else the first)
high_dop           DOP above ``--max-dop`` (needs a DOP column)                 off until set
fix_2d             2-D fixes, with ``--require-3d`` (needs a fix-type column)   off until set
low_quality        location class below ``--min-quality``                       off until set
too_fast           implied speed from the previous kept fix above               off until set
                   ``--max-speed`` m/s (repeated until no fix exceeds it)
spike              out-and-back spikes: speed in and out both above the spike   on
                   threshold and a near-reversal at the fix (Bjørneraas et al.
                   2010); threshold ``--spike-speed`` or, by default, 10x the
                   animal's median speed and at least 0.1 m/s
=================  ===========================================================  ================

The location-quality order 3 > 2 > 1 > 0 > A > B > Z is the usual ordering of
satellite location classes (common practice, no source).

References
----------
Bjørneraas, K., Van Moorter, B., Rolandsen, C. M. & Herfindal, I. (2010).
Screening Global Positioning System location data for errors using animal
movement characteristics. Journal of Wildlife Management 74, 1361-1366.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from roamstat.config import Config
from roamstat.geo import geodesic_inverse, geodesic_inverse_full

REASONS = {
    "bad_time": "time missing or not readable",
    "bad_coords": "coordinates missing, not readable or not finite",
    "lat_range": "latitude outside [-90, 90]",
    "lon_range": "longitude outside [-180, 180]",
    "null_island": "position exactly (0, 0), a placeholder for no fix",
    "duplicate_row": "exact repeat of an earlier row of this animal",
    "duplicate_time": "second fix of this animal at the same time",
    "high_dop": "DOP above --max-dop",
    "fix_2d": "2-D fix rejected by --require-3d",
    "low_quality": "location class below --min-quality",
    "too_fast": "implied speed from the previous kept fix above --max-speed",
    "spike": "out-and-back spike: fast in, fast out, near-reversal",
}
QUALITY_ORDER = ["Z", "B", "A", "0", "1", "2", "3"]  # worst to best
SPIKE_MEDIAN_FACTOR = 10.0
SPIKE_MIN_SPEED = 0.1  # m/s: 720 m in 2 h, 30 m in 5 min; with the reversal this marks errors, not moves


def screen(rows: pd.DataFrame, cfg: Config) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Split read rows into kept fixes (sorted by animal and time) and rejected rows with reasons."""
    reason = pd.Series(pd.NA, index=rows.index, dtype="object")
    detail = pd.Series("", index=rows.index, dtype="object")
    off = set(cfg.disabled_rules)

    def reject(code: str, mask, text=None):
        if code in off:
            return
        mask = pd.Series(mask, index=rows.index).fillna(False).astype(bool) & reason.isna()
        reason[mask] = code
        if text is not None:
            detail[mask] = text[mask] if isinstance(text, pd.Series) else text

    lat, lon = rows["lat"].astype(float), rows["lon"].astype(float)
    reject("bad_time", rows["time"].isna())
    reject("bad_coords", ~(np.isfinite(lat) & np.isfinite(lon)))
    reject("lat_range", lat.abs() > 90)
    reject("lon_range", lon.abs() > 180)
    reject("null_island", (lat == 0) & (lon == 0))
    originals = [c for c in rows.columns if str(c).startswith("orig_")] or ["lat", "lon", "time"]
    reject("duplicate_row", rows.duplicated(subset=["animal_id", "source_file", *originals], keep="first")
           & rows.duplicated(subset=["animal_id", *originals], keep="first"))
    _duplicate_times(rows, reason, reject)
    if cfg.max_dop is not None:
        reject("high_dop", rows["dop"].astype(float) > cfg.max_dop)
    if cfg.require_3d:
        reject("fix_2d", rows["fix_type"].astype("string").str.lower() == "2d")
    if cfg.min_quality is not None:
        _low_quality(rows, cfg.min_quality, reject)
    order = _time_order(rows)
    if cfg.max_speed is not None and "too_fast" not in off:
        _too_fast(rows, order, reason, cfg.max_speed)
    if "spike" not in off:
        _spikes(rows, order, reason, cfg)
    kept_mask = reason.isna()
    fixes = rows[kept_mask].loc[order[np.isin(order, np.flatnonzero(kept_mask.to_numpy()))]]
    fixes = fixes.reset_index(drop=True)
    rejected = rows[~kept_mask].copy()
    codes = reason[~kept_mask]
    rejected.insert(0, "reason", codes.map(REASONS) + detail[~kept_mask])
    rejected.insert(0, "reason_code", codes)
    keep_cols = ["source_file", "source_row", "animal_id", "reason_code", "reason", "lat", "lon", "time"]
    rest = [c for c in rejected.columns if str(c).startswith("orig_")]
    rejected = rejected[keep_cols + rest].sort_values(["source_file", "source_row"], kind="stable")
    return fixes, rejected.reset_index(drop=True)


def _time_order(rows: pd.DataFrame) -> np.ndarray:
    """Row positions sorted by animal then time (stable: ties keep input order)."""
    return np.lexsort((rows["time"].to_numpy(dtype="datetime64[ns]").astype(np.int64),
                       pd.factorize(rows["animal_id"], sort=True)[0]))


def _duplicate_times(rows, reason, reject) -> None:
    live = reason.isna() & rows["time"].notna()
    key = rows.loc[live, ["animal_id", "time"]]
    dup = key.duplicated(keep=False)
    if not dup.any():
        return
    group = rows.loc[dup[dup].index]
    dop = group["dop"].astype(float).fillna(np.inf)
    best = (group.assign(_dop=dop, _pos=np.arange(len(group)))
            .sort_values(["_dop", "_pos"]).drop_duplicates(["animal_id", "time"], keep="first"))
    losers = group.index.difference(best.index)
    kept_line = best.set_index(["animal_id", "time"])["source_row"]
    basis = "lower DOP" if group["dop"].notna().any() else "first row"
    text = pd.Series("", index=rows.index, dtype=object)
    for idx in losers:
        row = rows.loc[idx]
        text[idx] = f" (kept row {kept_line.loc[(row['animal_id'], row['time'])]}: {basis})"
    mask = pd.Series(False, index=rows.index)
    mask[losers] = True
    reject("duplicate_time", mask, text)


def _low_quality(rows, min_quality: str, reject) -> None:
    wanted = str(min_quality).strip().upper()
    if wanted not in QUALITY_ORDER:
        from roamstat.errors import RoamstatError

        raise RoamstatError(f"--min-quality {min_quality!r}: choose one of {', '.join(reversed(QUALITY_ORDER))}")
    rank = rows["quality"].astype("string").str.upper().map({q: i for i, q in enumerate(QUALITY_ORDER)})
    reject("low_quality", rank.astype(float) < QUALITY_ORDER.index(wanted))


def _pair_speeds(lat, lon, t_s, prev, nxt):
    dist, _ = geodesic_inverse(lat[prev], lon[prev], lat[nxt], lon[nxt])
    dt = t_s[nxt] - t_s[prev]
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(dt > 0, dist / dt, np.inf), dist


def _live_sequence(rows, order, reason):
    live = order[reason.iloc[order].isna().to_numpy()]
    animal = rows["animal_id"].to_numpy()[live]
    same = np.concatenate(([False], animal[1:] == animal[:-1]))
    lat = rows["lat"].to_numpy(float)
    lon = rows["lon"].to_numpy(float)
    t_s = rows["time"].to_numpy(dtype="datetime64[ns]").astype(np.int64) / 1e9
    return live, same, lat, lon, t_s


def _too_fast(rows, order, reason, max_speed: float) -> None:
    """Reject the fix after each too-fast move, then re-check against the new predecessor."""
    for _ in range(1000):
        live, same, lat, lon, t_s = _live_sequence(rows, order, reason)
        if len(live) < 2:
            return
        speed, _ = _pair_speeds(lat, lon, t_s, live[:-1], live[1:])
        bad = same[1:] & (speed > max_speed)
        # Only the first offender in a run: the next fix is judged against the fix before it.
        first = bad & ~np.concatenate(([False], bad[:-1]))
        if not first.any():
            return
        reason.iloc[live[1:][first]] = "too_fast"


def _spikes(rows, order, reason, cfg: Config) -> None:
    live, same, lat, lon, t_s = _live_sequence(rows, order, reason)
    if len(live) < 3:
        return
    prev, nxt = live[:-1], live[1:]
    dist, depart, arrive = geodesic_inverse_full(lat[prev], lon[prev], lat[nxt], lon[nxt])
    dt = t_s[nxt] - t_s[prev]
    with np.errstate(divide="ignore", invalid="ignore"):
        speed = np.where(same[1:], np.where(dt > 0, dist / dt, np.inf), np.nan)
    v_in, v_out = speed[:-1], speed[1:]
    mid = live[1:-1]
    valid = same[1:-1] & same[2:]
    # The turn at the middle fix: arrival direction of the move in, departure of the move out.
    cos_turn = np.cos(depart[1:] - arrive[:-1])
    threshold = _spike_thresholds(rows["animal_id"].to_numpy()[nxt], speed, cfg)[:-1]
    spike = valid & (v_in > threshold) & (v_out > threshold) & (cos_turn < cfg.spike_cos)
    reason.iloc[mid[spike]] = "spike"


def _spike_thresholds(animal_of_step, speed, cfg: Config) -> np.ndarray:
    if cfg.spike_speed is not None:
        return np.full(len(speed), float(cfg.spike_speed))
    frame = pd.DataFrame({"a": animal_of_step, "v": np.where(np.isfinite(speed), speed, np.nan)})
    median = frame.groupby("a")["v"].transform("median").to_numpy()
    return np.maximum(SPIKE_MEDIAN_FACTOR * np.nan_to_num(median, nan=0.0), SPIKE_MIN_SPEED)
