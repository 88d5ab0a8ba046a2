"""GPX 1.1 track points (an open standard, topografix.com/GPX/1/1) as a table of raw strings.

``<trk><trkseg><trkpt lat=".." lon=".."><time>..</time></trkpt>`` with the
optional ``ele``, ``hdop``, ``pdop``, ``sat`` and ``fix`` children.  Each
``<trk>`` is one animal, named by its ``<name>`` or, failing that, the file
name.  The document is parsed by expat (the parser behind
``xml.etree.ElementTree``), which reports the line where each ``<trkpt>``
starts: that is the point's ``source_row``.  Documents with a DOCTYPE or an
entity declaration are refused: GPX never needs them, and they are the route
to entity-expansion ("billion laughs") attacks.
"""

from __future__ import annotations

import xml.parsers.expat
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from roamstat.errors import RoamstatError

POINT_FIELDS = ("time", "ele", "hdop", "pdop", "sat", "fix")
#: Standard role -> column of the GPX table.
GPX_COLUMNS = {"animal_id": "track", "time": "time", "lat": "lat", "lon": "lon",
               "dop": "hdop", "n_sats": "sat", "fix_type": "fix"}


class _Refused(Exception):
    pass


@dataclass
class GpxTable:
    values: pd.DataFrame  # track, lat, lon and the point fields, raw strings
    line_numbers: np.ndarray
    columns: dict  # role -> column, for the fields present
    encoding: str


def looks_like_gpx(path: Path, raw: bytes) -> bool:
    head = raw[:512].lstrip(b"\xef\xbb\xbf \t\r\n").lower()
    return path.suffix.lower() == ".gpx" or head.startswith(b"<?xml") or head.startswith(b"<gpx")


def read_gpx(raw: bytes, path: Path) -> GpxTable:
    """Track points of a GPX file, one row per ``<trkpt>``."""
    parser = xml.parsers.expat.ParserCreate(namespace_separator=" ")
    tracks: list[dict] = []
    points: list[dict] = []
    stack: list[str] = []
    text: list[str] = []
    encoding = ["utf-8"]

    def refuse(*_args):
        raise _Refused()

    def xml_decl(_version, enc, _standalone):
        if enc:
            encoding[0] = enc.lower()

    def start(name, attrs):
        local = name.rsplit(" ", 1)[-1]
        stack.append(local)
        text.clear()
        if local == "trk":
            tracks.append({"name": None, "first": len(points)})
        elif local == "trkpt" and tracks:
            points.append({"line": parser.CurrentLineNumber, "lat": attrs.get("lat", ""),
                           "lon": attrs.get("lon", ""), "track": len(tracks) - 1})

    def end(name):
        local = stack.pop()
        value = "".join(text).strip()
        parent = stack[-1] if stack else None
        if parent == "trk" and local == "name" and tracks:
            tracks[-1]["name"] = value
        elif parent == "trkpt" and local in POINT_FIELDS and points:
            points[-1][local] = value
        text.clear()

    parser.XmlDeclHandler = xml_decl
    parser.StartDoctypeDeclHandler = refuse
    parser.EntityDeclHandler = refuse
    parser.StartElementHandler = start
    parser.EndElementHandler = end
    parser.CharacterDataHandler = text.append
    try:
        parser.Parse(raw, True)
    except _Refused:
        raise RoamstatError(f"{path}: GPX with a DOCTYPE or entity declaration is not accepted; "
                            "delete that declaration (GPX does not need it)") from None
    except xml.parsers.expat.ExpatError as exc:
        raise RoamstatError(f"{path} line {exc.lineno}: not well-formed XML ({xml.parsers.expat.errors.messages[exc.code]}); "
                            "check that the file is complete") from None
    if not points:
        raise RoamstatError(f"{path}: no <trkpt> track points found; roamstat reads GPX tracks, not routes or waypoints")
    names = [(t["name"] or path.stem) for t in tracks]
    table = pd.DataFrame({
        "track": [names[p["track"]] for p in points],
        "lat": [p["lat"] for p in points],
        "lon": [p["lon"] for p in points],
        **{f: [p.get(f, "") for p in points] for f in POINT_FIELDS if any(f in p for p in points)},
    }, dtype=str)
    columns = {role: col for role, col in GPX_COLUMNS.items() if col in table.columns}
    if "dop" not in columns and "pdop" in table.columns:
        columns["dop"] = "pdop"
    if "time" not in columns:
        raise RoamstatError(f"{path}: the track points have no <time>; roamstat needs a time for every fix")
    return GpxTable(table, np.array([p["line"] for p in points], dtype=np.int64), columns, encoding[0])
