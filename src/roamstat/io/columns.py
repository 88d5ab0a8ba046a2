"""Which original column holds the animal id, the time, the coordinates and the quality fields.

Names are compared case-insensitively with every character that is not a
letter or digit removed (``Animal ID``, ``animal_id`` and ``animal-id`` are
the same name).  Each role has an ordered list of synonyms; the first one
present wins.  The lists are common practice in collar exports and field
spreadsheets (no source), plus the Darwin Core terms (TDWG, Wieczorek et al.
2012) ``decimalLatitude``, ``decimalLongitude``, ``eventDate``,
``eventTime``, ``organismID``, ``eventID`` and ``occurrenceID``.

Animal id: a column naming the animal (``animal``, ``individual``,
``organismID``) is preferred to one naming the device (``tag``, ``collar``),
because one animal may wear several tags in turn.  Weaker candidates
(``id``, ``eventID``, ``occurrenceID``, device ids) are skipped when every
row has its own value: such a column numbers records, not animals
(``occurrenceID`` in Darwin Core is per record by definition).

Time: one column with date and time, or a date column plus a time-of-day
column (combined), or date-only values.

Deployment: when the animal id comes from an animal column and a separate
device column (``tag``, ``collar``, ``device`` ...) gives one animal several
values, each (animal, device) pair is a deployment of its own
(``--deployment-col`` names the column when detection does not; an empty
name switches deployments off).

References
----------
Wieczorek, J. et al. (2012). Darwin Core: an evolving community-developed
biodiversity data standard. PLoS ONE 7(1): e29715.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

import pandas as pd

from roamstat.errors import RoamstatError


def norm(name: str) -> str:
    return re.sub(r"[^0-9a-z]", "", str(name).lower())


ID_STRONG = ["animalid", "animal", "individualid", "individual", "organismid", "animalname", "indid", "individualname"]
DEVICE = ["tagid", "tag", "collarid", "collar", "deviceid", "device", "tagserial", "collarserial", "serialnumber"]
ID_WEAK = ["id", "eventid", "collarid", "collar", "tagid", "tag", "deviceid", "device", "occurrenceid"]
TIME_FULL = ["timestamp", "datetime", "datetimeutc", "utcdatetime", "timestamputc", "dateandtime", "datetimegmt",
             "eventdate", "fixtime", "acquisitiontime", "time", "timeutc", "utctime", "gpstime", "date"]
DATE_PART = ["date", "utcdate", "dateutc", "gpsdate", "fixdate", "eventdate"]
TIME_OF_DAY = ["time", "utctime", "timeutc", "gpstime", "fixtime", "eventtime", "timeofday"]
LAT = ["lat", "latitude", "decimallatitude", "latdeg", "latitudedeg", "latdd", "gpslatitude", "gpslat",
       "latwgs84", "latitudewgs84"]
LON = ["lon", "long", "lng", "longitude", "decimallongitude", "londeg", "longitudedeg", "londd", "gpslongitude",
       "gpslon", "gpslong", "lonwgs84", "longitudewgs84"]
DOP = ["dop", "hdop", "pdop", "gdop", "gpsdop", "gpshdop", "gpspdop"]
FIX_TYPE = ["fixtype", "fix", "gpsfixtype", "fixstatus", "fixmode", "fixdimension"]
N_SATS = ["satellites", "nsats", "numsats", "sats", "satcount", "satellitecount", "nsat", "numsat",
          "satellitesused", "numsatellites", "nsatellites", "gpssatellites", "gpssatcount", "sat"]
QUALITY = ["quality", "locationquality", "locationclass", "lc", "locclass", "qualityclass", "lq", "qualitycode"]
DYNAMIC = ["dynamicproperties"]  # Darwin Core: JSON text of extra measurements
PROJECTED_HINT = ["x", "y", "easting", "northing", "utmx", "utmy", "utmeasting", "utmnorthing", "east", "north"]

_TOD = re.compile(r"^\d{1,2}:\d{2}(:\d{2}(\.\d+)?)?\s*([AaPp][Mm]|[Zz]|[+-]\d{2}(:?\d{2})?)?$")
_DATE_ONLY = re.compile(r"^(\d{4}-\d{1,2}-\d{1,2}|\d{1,2}([/.\-])\d{1,2}\2(\d{4}|\d{2}))$")  # ISO or spreadsheet
_NUMBER = re.compile(r"^[+-]?\d+(\.\d*)?$")


@dataclass
class Mapping:
    """Standard role -> original column name (``time`` may be a date + time-of-day pair)."""

    columns: dict[str, str] = field(default_factory=dict)
    date_col: str | None = None  # set when the time is date + time-of-day
    notes: list[str] = field(default_factory=list)

    def describe(self) -> dict[str, str]:
        out = dict(self.columns)
        if self.date_col:
            out["time"] = f"{self.date_col} + {self.columns['time']}" if "time" in self.columns else self.date_col
        return out


def value_kind(values: pd.Series) -> str:
    """'tod' (time of day), 'date', 'number', 'datetime' or 'empty' for a sample of raw strings."""
    sample = values[values.str.strip() != ""].head(200).str.strip()
    if sample.empty:
        return "empty"
    for kind, pattern in (("tod", _TOD), ("date", _DATE_ONLY), ("number", _NUMBER)):
        if sample.map(lambda v, p=pattern: bool(p.match(v))).all():
            return kind
    return "datetime"


def detect(values: pd.DataFrame, cfg, path) -> Mapping:
    """Find every role's column in one file, honouring the overrides in ``cfg``."""
    names = list(values.columns)
    if len(names) == 1:
        raise RoamstatError(f"{path}: the header {names[0][:80]!r} splits into one column only; roamstat reads "
                            "comma, semicolon or tab delimited files: export the file with one of these")
    by_norm: dict[str, str] = {}
    for name in names:
        by_norm.setdefault(norm(name), name)
    mapping = Mapping()
    cols = mapping.columns

    def pick(synonyms, exclude=()):
        for syn in synonyms:
            name = by_norm.get(syn)
            if name is not None and name not in exclude:
                return name
        return None

    def override(option: str, value):
        if value is None:
            return None
        if value in names:
            return value
        folded = [n for n in names if n.lower() == str(value).lower()]
        if folded:
            return folded[0]
        raise RoamstatError(f"{option} {value!r}: {path} has no such column; its columns are {_listing(names)}")

    id_col = override("--id-col", getattr(cfg, "id_col", None)) or _pick_id(values, by_norm)
    if id_col:
        cols["animal_id"] = id_col
        wanted = getattr(cfg, "deployment_col", None)
        if wanted == "":  # switched off (a chunked read whose first chunk found no deployments)
            deployment = None
        else:
            deployment = override("--deployment-col", wanted) or \
                (pick_deployment(values, by_norm, id_col) if norm(id_col) not in DEVICE else None)
        if deployment and deployment != id_col:
            cols["deployment"] = deployment
    elif getattr(cfg, "deployment_col", None):
        raise RoamstatError(f"--deployment-col needs an animal-id column, and {path} has none detected; "
                            "name it with --id-col")

    x_col, y_col = override("--x-col", getattr(cfg, "x_col", None)), override("--y-col", getattr(cfg, "y_col", None))
    if (x_col is None) != (y_col is None):
        raise RoamstatError("give both --x-col and --y-col (and --crs) for projected coordinates")
    if x_col:
        cols["x_in"], cols["y_in"] = x_col, y_col
    else:
        lat = override("--lat-col", getattr(cfg, "lat_col", None)) or pick(LAT) or _prefixed(names, "latitude")
        lon = override("--lon-col", getattr(cfg, "lon_col", None)) or pick(LON) or _prefixed(names, "longitude")
        if lat is None or lon is None:
            hint = [n for n in names if norm(n) in PROJECTED_HINT]
            extra = f" (for projected columns such as {', '.join(hint)} use --x-col --y-col --crs EPSG:NNNN)" if hint else ""
            raise RoamstatError(
                f"{path}: no {'latitude' if lat is None else 'longitude'} column found among {_listing(names)}; "
                f"name it with --lat-col/--lon-col{extra}"
            )
        cols["lat"], cols["lon"] = lat, lon

    _detect_time(values, cfg, path, names, pick, override, mapping)

    used = set(cols.values()) | {mapping.date_col}
    for role, synonyms in (("dop", DOP), ("fix_type", FIX_TYPE), ("n_sats", N_SATS), ("quality", QUALITY)):
        name = pick(synonyms, exclude=used)
        if name:
            cols[role] = name
            used.add(name)
    if "quality" not in cols:
        dyn = pick(DYNAMIC)
        if dyn and values[dyn].str.contains("location_quality", regex=False).any():
            cols["quality"] = dyn
            mapping.notes.append(f"location quality read from the location_quality entry of {dyn}")
    return mapping


def _detect_time(values, cfg, path, names, pick, override, mapping: Mapping) -> None:
    cols = mapping.columns
    time_col = override("--time-col", getattr(cfg, "time_col", None))
    date_col = override("--date-col", getattr(cfg, "date_col", None))
    if date_col and time_col:
        cols["time"], mapping.date_col = time_col, date_col
        return
    if date_col:
        tod = _first_of_kind(values, TIME_OF_DAY, pick, {"tod"}, exclude={date_col})
        if tod:
            cols["time"], mapping.date_col = tod, date_col
        else:
            mapping.date_col = date_col
        return
    if time_col:
        kind = value_kind(values[time_col])
        if kind in ("tod", "date"):
            other = _first_of_kind(values, DATE_PART if kind == "tod" else TIME_OF_DAY, pick,
                                   {"date" if kind == "tod" else "tod"}, exclude={time_col})
            if other:
                if kind == "tod":
                    cols["time"], mapping.date_col = time_col, other
                else:
                    cols["time"], mapping.date_col = other, time_col
                return
        cols["time"] = time_col
        return
    full = _first_of_kind(values, TIME_FULL, pick, {"datetime", "number", "date"})
    if full and value_kind(values[full]) == "date":
        tod = _first_of_kind(values, TIME_OF_DAY, pick, {"tod"}, exclude={full})
        if tod:
            cols["time"], mapping.date_col = tod, full
            return
    if full:
        cols["time"] = full
        return
    date = _first_of_kind(values, DATE_PART, pick, {"date"})
    tod = _first_of_kind(values, TIME_OF_DAY, pick, {"tod"}, exclude={date})
    if date and tod:
        cols["time"], mapping.date_col = tod, date
        return
    named = pick(TIME_FULL)
    if named:  # a time column by name whose values are empty or unusual: the reader says what is wrong
        cols["time"] = named
        return
    raise RoamstatError(
        f"{path}: no time column found among {_listing(names)}; name it with --time-col "
        "(or --date-col and --time-col for separate date and time-of-day columns)"
    )


def _first_of_kind(values, synonyms, pick, kinds, exclude=()):
    """The first synonym column (not excluded) whose values look like one of ``kinds``."""
    tried = set(exclude)
    while True:
        name = pick(synonyms, exclude=tried)
        if name is None:
            return None
        if value_kind(values[name]) in kinds:
            return name
        tried.add(name)


def _pick_id(values: pd.DataFrame, by_norm: dict) -> str | None:
    for syn in ID_STRONG:
        if syn in by_norm:
            return by_norm[syn]
    for syn in ID_WEAK:
        name = by_norm.get(syn)
        if name is None:
            continue
        column = values[name]
        if len(column) >= 3 and column.nunique() == len(column):
            continue  # one value per row numbers records, not animals
        return name
    return None


def pick_deployment(values: pd.DataFrame, by_norm: dict, id_col: str) -> str | None:
    """A device column giving some animal more than one value (re-collared animals), else None."""
    for syn in DEVICE:
        name = by_norm.get(syn)
        if name is None or name == id_col:
            continue
        pairs = values[[id_col, name]].drop_duplicates()
        pairs = pairs[pairs[name].str.strip() != ""]
        if pairs[id_col].duplicated().any():
            return name
    return None


def _prefixed(names, prefix):
    hits = [n for n in names if norm(n).startswith(prefix)]
    return hits[0] if len(hits) == 1 else None


def _listing(names) -> str:
    shown = ", ".join(repr(n) for n in names[:25])
    return shown + (f" and {len(names) - 25} more" if len(names) > 25 else "")
