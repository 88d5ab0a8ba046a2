"""Which input column holds what: case-insensitive synonyms and user overrides.

Darwin Core terms (TDWG) are recognised beside the names collar exports
commonly use.  Overrides from the command line always win.
"""

from __future__ import annotations

import re

from roamstat.errors import RoamstatError

# Order matters: the first synonym found wins.  Names are compared after
# lower-casing and removing spaces, dashes, dots and underscores.
SYNONYMS: dict[str, tuple[str, ...]] = {
    "animal_id": ("animalid", "animal", "individual", "individualid", "organismid", "id", "animalname",
                  "collarid", "collar", "tagid", "tag", "deviceid", "device", "eventid", "occurrenceid"),
    "time": ("timestamp", "datetime", "time", "eventdate", "fixtime", "gmttime", "utctime",
             "acquisitiontime", "datetimeutc", "timestamputc", "date"),
    "date": ("date", "fixdate", "utcdate", "gmtdate"),
    "time_of_day": ("time", "fixtime", "utctime", "gmttime", "eventtime"),
    "lat": ("lat", "latitude", "decimallatitude", "latdeg", "latitudedeg", "locationlat"),
    "lon": ("lon", "long", "lng", "longitude", "decimallongitude", "londeg", "longitudedeg",
            "locationlong"),
    "dop": ("dop", "hdop", "pdop", "gdop"),
    "fix_type": ("fixtype", "fix", "navigation", "fixstatus", "gpsfixtype", "dimension"),
    "n_sats": ("satellites", "sats", "nsats", "numsats", "satellitecount", "nsat", "satcount"),
    "quality": ("locationquality", "lc", "quality", "locationclass", "lq", "qualityclass", "argoslc"),
}


def normalise(name: str) -> str:
    return re.sub(r"[\s_\-\.]+", "", str(name).strip().lower())


def detect_columns(columns: list[str], overrides: dict[str, str | None], path: str) -> dict[str, str]:
    """Map standard names (animal_id, time, date, lat, lon, dop, ...) to input column names.

    ``overrides`` maps standard names to user-given column names (or None).
    Time may be one column (``time``) or a ``date`` plus a ``time_of_day``.
    """
    by_norm: dict[str, str] = {}
    for col in columns:
        by_norm.setdefault(normalise(col), col)
    mapping: dict[str, str] = {}
    for key, name in overrides.items():
        if name is None:
            continue
        if name not in columns:
            found = by_norm.get(normalise(name))
            if found is None:
                raise RoamstatError(
                    f"{path}: the column {name!r} given for {key.replace('_', ' ')} is not in the file; "
                    f"its columns are {_listing(columns)}"
                )
            name = found
        mapping[key] = name
    taken = set(mapping.values())

    def find(key: str) -> str | None:
        for synonym in SYNONYMS[key]:
            col = by_norm.get(synonym)
            if col is not None and col not in taken:
                return col
        return None

    for key in ("animal_id", "lat", "lon", "dop", "fix_type", "n_sats", "quality"):
        if key not in mapping and not (key in ("lat", "lon") and "x" in mapping):
            col = find(key)
            if col is not None:
                mapping[key] = col
                taken.add(col)
    if "time" not in mapping and "date" not in mapping:
        _detect_time(by_norm, mapping, taken, find)
    elif "date" in mapping and "time" in mapping:
        mapping["time_of_day"] = mapping.pop("time")
    return mapping


def _detect_time(by_norm, mapping, taken, find) -> None:
    date_col = next((by_norm[s] for s in SYNONYMS["date"] if s in by_norm and by_norm[s] not in taken), None)
    tod_col = next((by_norm[s] for s in SYNONYMS["time_of_day"] if s in by_norm and by_norm[s] not in taken), None)
    for synonym in SYNONYMS["time"]:
        col = by_norm.get(synonym)
        if col is None or col in taken:
            continue
        if synonym in ("date", "time") and date_col and tod_col and date_col != tod_col:
            break  # separate date and time-of-day columns
        mapping["time"] = col
        taken.add(col)
        return
    if date_col and tod_col and date_col != tod_col:
        mapping["date"], mapping["time_of_day"] = date_col, tod_col
        taken.update((date_col, tod_col))


def require_columns(mapping: dict, columns: list[str], path: str, projected: bool) -> None:
    """A clear error when no time or coordinate column was found."""
    if "time" not in mapping and "date" not in mapping:
        raise RoamstatError(
            f"{path}: no time column found among {_listing(columns)}; name it with --time-col "
            "(and --date-col when date and time of day are separate)"
        )
    if projected:
        return
    missing = [k for k in ("lat", "lon") if k not in mapping]
    if missing:
        raise RoamstatError(
            f"{path}: no {' or '.join('latitude' if m == 'lat' else 'longitude' for m in missing)} column "
            f"found among {_listing(columns)}; name them with --lat-col/--lon-col, or give projected "
            "coordinates with --x-col --y-col --crs EPSG:NNNN"
        )


def _listing(columns: list[str]) -> str:
    shown = ", ".join(repr(str(c)[:40]) for c in columns[:15])
    return shown + (f" and {len(columns) - 15} more" if len(columns) > 15 else "")
