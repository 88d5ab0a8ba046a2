"""GPX 1.1 track points (an open standard) as fixes.

Each ``<trk>`` is one animal, named by its ``<name>`` or, failing that, the
file name.  Documents with a DOCTYPE are refused: entity declarations are the
route to entity-expansion attacks and GPX has no use for them.
"""

from __future__ import annotations

import xml.etree.ElementTree as ET

import pandas as pd

from roamstat.errors import RoamstatError


def _local(tag: str) -> str:
    return tag.rsplit("}", 1)[-1]


def read_gpx(text: str, path: str, default_id: str) -> pd.DataFrame:
    """Track points as a string table: animal, time, lat, lon, ele, hdop, sat, fix, line."""
    if "<!DOCTYPE" in text[:4096].upper() or "<!ENTITY" in text.upper():
        raise RoamstatError(f"{path}: GPX with a DOCTYPE or entity declarations is not accepted; remove them")
    try:
        root = ET.fromstring(text)
    except ET.ParseError as exc:
        raise RoamstatError(f"{path}: not well-formed GPX ({exc}); check the file is complete") from None
    rows = []
    for trk_index, trk in enumerate(el for el in root if _local(el.tag) == "trk"):
        name = next((c.text for c in trk if _local(c.tag) == "name" and c.text), None)
        animal = (name or default_id if trk_index == 0 else name or f"{default_id}-{trk_index + 1}").strip()
        for point in trk.iter():
            if _local(point.tag) != "trkpt":
                continue
            values = {_local(c.tag): (c.text or "").strip() for c in point}
            rows.append({"animal": animal, "time": values.get("time", ""), "lat": point.get("lat", ""),
                         "lon": point.get("lon", ""), "ele": values.get("ele", ""),
                         "hdop": values.get("hdop", ""), "sat": values.get("sat", ""),
                         "fix": values.get("fix", "")})
    if not rows:
        raise RoamstatError(f"{path}: no <trkpt> track points found; roamstat reads GPX tracks, not routes or waypoints")
    return pd.DataFrame(rows, dtype=object)
