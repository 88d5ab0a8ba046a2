"""Quality screening: every row is kept or rejected with a reason code.

Rules run in the order below; a row is rejected by the first rule it fails,
and later rules see only the rows still kept.  Each rule can be switched off
with ``--keep CODE`` (``Config.disabled_rules``), except the four validity
rules (``bad_time``, ``bad_coords``, ``lat_range``, and ``lon_range`` when
longitudes are beyond [-360, 360]): no later stage can place a fix without a
time or a position on the globe.  With ``--keep lon_range`` longitudes in
(180, 360] or [-360, -180) (the 0-360 convention) are wrapped into
[-180, 180) instead of rejected.

=================  ===========================================================  ================
code               rejects                                                      default
=================  ===========================================================  ================
bad_time           missing or unreadable time                                   on
bad_coords         missing, unreadable or non-finite coordinates                on
lat_range          latitude outside [-90, 90]                                   on
lon_range          longitude outside [-180, 180]                                on
null_island        exactly (0, 0), a collar's "no fix" placeholder              on
duplicate_row      a repeat of an earlier row of the same animal (every         on
                   original value equal, in any input file; the first is kept)
duplicate_time     a second fix of one animal at the same time (keeps the       on
                   lower-DOP fix, else the first; the reason names the kept row)
high_dop           DOP above ``--max-dop`` (rows without a DOP value are kept)  off until set
fix_2d             2-D fixes, with ``--require-3d`` (needs a fix-type column)   off until set
low_quality        location class below ``--min-quality`` (rows without a       off until set
                   class, or with a class outside the list, are kept)
too_fast           implied speed from the previous kept fix above               off until set
                   ``--max-speed`` m/s
spike              out-and-back spikes: speed in and out both above the spike   on
                   threshold and a near-reversal at the fix, cos(turn) below
                   ``spike_cos`` (-0.97) (Bjørneraas et al. 2010); threshold
                   ``--spike-speed`` or, by default, 10x the animal's median
                   speed and at least 0.1 m/s
=================  ===========================================================  ================

``too_fast`` walks each track in time order and rejects a fix when the speed
from the last *kept* fix exceeds the limit, so one bad fix does not also
condemn the good fix after it.  It is computed in passes, each vectorised over
all animals: a pass rejects the first offending fix of every animal and
re-checks only the fix after it against the new predecessor.

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
from roamstat.errors import RoamstatError
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
ALWAYS_ON = ("bad_time", "bad_coords", "lat_range")
QUALITY_ORDER = ["Z", "B", "A", "0", "1", "2", "3"]  # worst to best
SPIKE_MEDIAN_FACTOR = 10.0
SPIKE_MIN_SPEED = 0.1  # m/s: 720 m in 2 h, 30 m in 5 min; with the reversal this marks errors, not moves
REJECTED_FRONT = ["source_file", "source_row", "animal_id", "reason_code", "reason", "lat", "lon", "time"]


def screen(rows: pd.DataFrame, cfg: Config) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Split read rows into kept fixes and rejected rows with reasons.

    Parameters
    ----------
    rows : pandas.DataFrame
        ``ReadResult.rows`` (data contract).
    cfg : roamstat.config.Config
        Uses ``max_dop, require_3d, max_speed, spike_speed, spike_cos,
        min_quality, disabled_rules``.

    Returns
    -------
    fixes : pandas.DataFrame
        Kept rows sorted by ``animal_id, time`` (ties keep input order).
    rejected : pandas.DataFrame
        ``source_file, source_row, animal_id, reason_code, reason, lat, lon,
        time`` and the ``orig_*`` columns, in file and line order.
        ``len(fixes) + len(rejected) == len(rows)`` always.
    """
    # ``config.check_config`` has refused codes that do not exist or are in ALWAYS_ON.
    off = set(cfg.disabled_rules)
    rows = rows.reset_index(drop=True)
    n = len(rows)
    reason = np.full(n, None, dtype=object)
    detail = np.full(n, "", dtype=object)

    def reject(code: str, mask, text=None) -> None:
        """Reject open rows in ``mask``; ``text`` is a suffix, an array of them, or a function of row positions."""
        if code in off:
            return
        hit = np.flatnonzero(np.asarray(mask, dtype=bool) & _open(reason))
        reason[hit] = code
        if callable(text):
            detail[hit] = np.asarray(text(hit), dtype=object) if hit.size else detail[hit]
        elif text is not None:
            detail[hit] = text[hit] if isinstance(text, np.ndarray) else text

    lat = rows["lat"].to_numpy(dtype=float)
    lon = rows["lon"].to_numpy(dtype=float)
    reject("bad_time", rows["time"].isna().to_numpy())
    reject("bad_coords", ~(np.isfinite(lat) & np.isfinite(lon)))
    reject("lat_range", np.abs(lat) > 90)
    if "lon_range" in off:
        reject("bad_coords", np.abs(lon) > 360, " (beyond +-360 degrees)")
        wrapped = (lon + 180.0) % 360.0 - 180.0
        rows["lon"] = lon = np.where(np.abs(lon) > 180, wrapped, lon)
    reject("lon_range", np.abs(lon) > 180)
    reject("null_island", (lat == 0) & (lon == 0))
    if "duplicate_row" not in off:
        mask, text = _duplicate_rows(rows, _open(reason))
        reject("duplicate_row", mask, text)
    if "duplicate_time" not in off:
        mask, text = _duplicate_times(rows, _open(reason))
        reject("duplicate_time", mask, text)
    _require_column(rows, cfg)
    if cfg.max_dop is not None:
        dop = rows["dop"].to_numpy(dtype=float)
        reject("high_dop", dop > cfg.max_dop, lambda hit: [f" (DOP {v:.3g})" for v in dop[hit]])
    if cfg.require_3d:
        reject("fix_2d", (rows["fix_type"].astype("string").str.lower() == "2d").fillna(False).to_numpy())
    if cfg.min_quality is not None:
        mask, text = _low_quality(rows, cfg.min_quality)
        reject("low_quality", mask, text)
    order = _time_order(rows)
    if cfg.max_speed is not None and "too_fast" not in off:
        _too_fast(rows, order, reason, detail, float(cfg.max_speed))
    if "spike" not in off:
        _spikes(rows, order, reason, detail, cfg)
    kept = _open(reason)
    fixes = rows.iloc[order[kept[order]]].reset_index(drop=True)
    return fixes, _rejected_table(rows, reason, detail, ~kept)


def _open(reason: np.ndarray) -> np.ndarray:
    """Rows not rejected yet."""
    return pd.isna(reason)


def _rejected_table(rows, reason, detail, mask) -> pd.DataFrame:
    out = rows[mask].copy()
    codes = reason[mask]
    out["reason_code"] = codes
    out["reason"] = [REASONS[c] + d for c, d in zip(codes, detail[mask])]
    rest = [c for c in out.columns if str(c).startswith("orig_") or c == "extra_fields"]
    out = out[[c for c in REJECTED_FRONT if c in out.columns] + rest]
    return out.sort_values(["source_file", "source_row"], kind="stable").reset_index(drop=True)


def _time_order(rows: pd.DataFrame) -> np.ndarray:
    """Row positions sorted by animal then time (stable: ties keep input order)."""
    ns = rows["time"].to_numpy(dtype="datetime64[ns]").astype(np.int64)
    return np.lexsort((ns, pd.factorize(rows["animal_id"], sort=True)[0]))


def _duplicate_rows(rows: pd.DataFrame, live: np.ndarray):
    """Repeats of an earlier live row of the same animal, all original values equal."""
    mask = np.zeros(len(rows), dtype=bool)
    text = np.full(len(rows), "", dtype=object)
    originals = [c for c in rows.columns if str(c).startswith("orig_")] or ["time", "lat", "lon"]
    idx = np.flatnonzero(live)
    # Equal originals imply equal parsed values: compare those cheap columns first.
    quick = rows.iloc[idx][["animal_id", "time", "lat", "lon"]].duplicated(keep=False).to_numpy()
    idx = idx[quick]
    if idx.size == 0:
        return mask, text
    subset = rows.iloc[idx][["animal_id", *originals]]
    dup = subset.duplicated(keep="first").to_numpy()
    first = subset.groupby(["animal_id", *originals], dropna=False, sort=False).ngroup().to_numpy()
    first_row = pd.Series(rows["source_row"].to_numpy()[idx]).groupby(first).transform("first").to_numpy()
    first_file = pd.Series(rows["source_file"].to_numpy()[idx]).groupby(first).transform("first").to_numpy()
    mask[idx[dup]] = True
    text[idx[dup]] = [f" (same as row {r} of {f})" for r, f in zip(first_row[dup], first_file[dup])]
    return mask, text


def _duplicate_times(rows: pd.DataFrame, live: np.ndarray):
    """Second and later fixes of one animal at one time; the lowest DOP (else the first) is kept."""
    mask = np.zeros(len(rows), dtype=bool)
    text = np.full(len(rows), "", dtype=object)
    idx = np.flatnonzero(live)
    key = rows.iloc[idx][["animal_id", "time"]]
    idx = idx[key.duplicated(keep=False).to_numpy()]
    if idx.size == 0:
        return mask, text
    group = rows.iloc[idx]
    dop = group["dop"].to_numpy(dtype=float)
    frame = pd.DataFrame({"a": group["animal_id"].to_numpy(), "t": group["time"].to_numpy(),
                          "dop": np.where(np.isnan(dop), np.inf, dop), "pos": idx})
    frame = frame.sort_values(["a", "t", "dop", "pos"], kind="stable")
    loser = frame.duplicated(["a", "t"], keep="first").to_numpy()
    keeper = frame.groupby(["a", "t"], sort=False)["pos"].transform("first").to_numpy()
    with_dop = frame.groupby(["a", "t"], sort=False)["dop"].transform(lambda d: np.isfinite(d).any()).to_numpy()
    pos, keeper, with_dop = frame["pos"].to_numpy()[loser], keeper[loser], with_dop[loser]
    rows_kept = rows["source_row"].to_numpy()[keeper]
    files_kept = rows["source_file"].to_numpy()[keeper]
    mask[pos] = True
    text[pos] = [f" (kept row {r} of {f}: {'lower DOP' if d else 'first row'})"
                 for r, f, d in zip(rows_kept, files_kept, with_dop)]
    return mask, text


#: option -> (its value in cfg, the column it needs, how users name that column)
_NEEDS_COLUMN = {
    "--max-dop": ("max_dop", "dop", "a DOP, HDOP or PDOP column"),
    "--require-3d": ("require_3d", "fix_type", "a fix-type column (fix_type, fix, navigation)"),
    "--min-quality": ("min_quality", "quality", "a location-quality column (quality, lc, location_class)"),
}


def _require_column(rows: pd.DataFrame, cfg: Config) -> None:
    """An option that screens on a column the input lacks would silently do nothing: say so."""
    for option, (field, column, described) in _NEEDS_COLUMN.items():
        value = getattr(cfg, field)
        if value in (None, False) or rows[column].notna().any():
            continue
        files = ", ".join(sorted(set(rows["source_file"].astype(str))))[:200]
        raise RoamstatError(
            f"{option}: {files} has no values in {described}; check what 'roamstat inspect' detects, "
            f"rename the column, or drop {option}"
        )


def _low_quality(rows: pd.DataFrame, min_quality: str):
    wanted = str(min_quality).strip().upper()
    if wanted not in QUALITY_ORDER:
        raise RoamstatError(f"--min-quality {min_quality!r}: choose one of {', '.join(reversed(QUALITY_ORDER))}")
    quality = rows["quality"].astype("string").str.strip().str.upper()
    rank = quality.map({q: i for i, q in enumerate(QUALITY_ORDER)}).astype(float).to_numpy()
    classes = quality.fillna("").to_numpy(dtype=object)
    return rank < QUALITY_ORDER.index(wanted), lambda hit: [f" (class {q})" for q in classes[hit]]


def _track_arrays(rows: pd.DataFrame, order: np.ndarray, reason: np.ndarray):
    """Live rows in animal-time order, with coordinates, times (s) and an animal code."""
    live = order[_open(reason)[order]]
    code = pd.factorize(rows["animal_id"].to_numpy()[live])[0]
    lat = rows["lat"].to_numpy(dtype=float)[live]
    lon = rows["lon"].to_numpy(dtype=float)[live]
    t_s = rows["time"].to_numpy(dtype="datetime64[ns]").astype(np.int64)[live] / 1e9
    return live, code, lat, lon, t_s


def _speed(lat, lon, t_s, a, b) -> np.ndarray:
    """Speed (m/s) from fix ``a`` to fix ``b``; infinite for a move in no time."""
    dist, _ = geodesic_inverse(lat[a], lon[a], lat[b], lon[b])
    dt = t_s[b] - t_s[a]
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(dt > 0, dist / dt, np.where(dist > 0, np.inf, 0.0))


def _too_fast(rows, order, reason, detail, max_speed: float) -> None:
    """Sequential rule (see the module notes), one vectorised pass per rejected fix of an animal."""
    live, code, lat, lon, t_s = _track_arrays(rows, order, reason)
    m = live.size
    if m < 2:
        return
    same = np.r_[False, code[1:] == code[:-1]]
    prev = np.where(same, np.arange(m) - 1, -1)
    nxt = np.r_[np.where(same[1:], np.arange(1, m), -1), -1]
    speed = np.zeros(m)
    has = prev >= 0
    speed[has] = _speed(lat, lon, t_s, prev[has], np.flatnonzero(has))
    alive = np.ones(m, dtype=bool)
    flagged = np.flatnonzero(speed > max_speed)
    while flagged.size:
        first = flagged[np.r_[True, code[flagged[1:]] != code[flagged[:-1]]]]  # earliest offender per animal
        alive[first] = False
        reason[live[first]] = "too_fast"
        detail[live[first]] = [f" ({v:.3g} m/s from row {r})" for v, r in
                               zip(speed[first], rows["source_row"].to_numpy()[live[prev[first]]])]
        p, s = prev[first], nxt[first]
        nxt[p] = s
        has_next = s >= 0
        s, p = s[has_next], p[has_next]
        prev[s] = p
        speed[s] = _speed(lat, lon, t_s, p, s)
        # Later offenders keep their flags (their predecessors did not change); re-checked fixes update theirs.
        rest = flagged[~np.isin(flagged, first)]
        flagged = np.union1d(rest[~np.isin(rest, s)], s[speed[s] > max_speed])


def _spikes(rows, order, reason, detail, cfg: Config) -> None:
    live, code, lat, lon, t_s = _track_arrays(rows, order, reason)
    if live.size < 3:
        return
    same = np.r_[False, code[1:] == code[:-1]]
    prev, nxt = np.arange(live.size - 1), np.arange(1, live.size)
    dist, depart, arrive = geodesic_inverse_full(lat[prev], lon[prev], lat[nxt], lon[nxt])
    dt = t_s[nxt] - t_s[prev]
    with np.errstate(divide="ignore", invalid="ignore"):
        speed = np.where(same[1:], np.where(dt > 0, dist / dt, np.inf), np.nan)
    v_in, v_out = speed[:-1], speed[1:]
    valid = same[1:-1] & same[2:]
    # The turn at the middle fix: arrival direction of the move in, departure of the move out.
    cos_turn = np.cos(depart[1:] - arrive[:-1])
    threshold = _spike_thresholds(code[nxt], speed, cfg)[:-1]
    spike = valid & (v_in > threshold) & (v_out > threshold) & (cos_turn < cfg.spike_cos)
    mid = live[1:-1][spike]
    reason[mid] = "spike"
    detail[mid] = [f" ({a:.3g} m/s in, {b:.3g} m/s out, cos(turn) {c:.3f})"
                   for a, b, c in zip(v_in[spike], v_out[spike], cos_turn[spike])]


def _spike_thresholds(animal_of_step, speed, cfg: Config) -> np.ndarray:
    """``--spike-speed``, or max(10 x the animal's median speed, 0.1 m/s) per step."""
    if cfg.spike_speed is not None:
        return np.full(len(speed), float(cfg.spike_speed))
    frame = pd.DataFrame({"a": animal_of_step, "v": np.where(np.isfinite(speed), speed, np.nan)})
    median = frame.groupby("a")["v"].transform("median").to_numpy()
    return np.maximum(SPIKE_MEDIAN_FACTOR * np.nan_to_num(median, nan=0.0), SPIKE_MIN_SPEED)
