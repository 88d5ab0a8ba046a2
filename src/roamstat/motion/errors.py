"""Location error of each fix: from DOP, from a location-quality class, or estimated.

Order of preference (first that applies):

1. ``dop`` column and a user-equivalent range error (UERE, metres): SD per axis = DOP x UERE
   (the usual GPS error model: positional error scales with the dilution of precision,
   e.g. Langley 1999). Fixes without a DOP take their class SD when a class is known, else the
   median DOP x UERE of the animal.
2. ``quality`` column (satellite Doppler location classes 3, 2, 1, 0, A, B, Z, or any classes of
   the user's own table): SD per axis from a class table.
3. Neither: one error SD per animal, estimated jointly with the movement parameters.

References
----------
Langley, R.B. (1999) Dilution of precision. GPS World 10(5), 52-59.
"""
from __future__ import annotations

import csv
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from ..errors import RoamstatError

# SD per axis (m) by location class. From memory, not from a table checked for this program:
# the satellite service's nominal accuracy for classes 3, 2, 1 is < 250 m, 250-500 m and
# 500-1500 m; classes 0, A, B and Z carry no nominal accuracy, and the values below are rough
# magnitudes of the errors reported for them in field trials. Replace them with a table of
# your own (read_class_table) whenever calibration data for your tags exist.
DEFAULT_CLASS_SD_M: Mapping[str, float] = {
    "3": 250.0,
    "2": 500.0,
    "1": 1500.0,
    "0": 2500.0,
    "A": 2500.0,
    "B": 5000.0,
    "Z": 10000.0,
}
SOURCES = ("dop_uere", "quality_class", "estimated")


@dataclass(frozen=True, eq=False)
class LocationError:
    """Isotropic location error of one animal's fixes.

    Attributes
    ----------
    sd_m : ndarray or None
        Per-fix error SD per axis (m), aligned with the fixes; None = estimate one SD jointly.
    source : str
        ``"dop_uere"``, ``"quality_class"`` or ``"estimated"``.
    """

    sd_m: np.ndarray | None
    source: str


def read_class_table(path) -> dict[str, float]:
    """Read a class-to-SD table: a CSV with header ``class,sd_m`` and one row per class.

    Classes are compared upper-cased and stripped, as the reader stores them.
    """
    path = Path(path)
    try:
        with path.open(newline="", encoding="utf-8-sig") as fh:
            rows = list(csv.reader(fh))
    except OSError as exc:
        raise RoamstatError(f"{path}: cannot read the location-class table ({exc.strerror})") from None
    if not rows or [c.strip().lower() for c in rows[0][:2]] != ["class", "sd_m"]:
        raise RoamstatError(f"{path}: row 1: the location-class table needs the header 'class,sd_m'")
    table = {}
    for line, row in enumerate(rows[1:], start=2):
        if not any(cell.strip() for cell in row):
            continue
        try:
            sd = float(row[1])
        except (IndexError, ValueError):
            sd = float("nan")
        if len(row) < 2 or not row[0].strip() or not np.isfinite(sd) or sd <= 0:
            raise RoamstatError(f"{path}: row {line}: give a class name and a positive SD in metres "
                                f"(column sd_m), e.g. '3,250'")
        table[row[0].strip().upper()] = sd
    if not table:
        raise RoamstatError(f"{path}: the location-class table has no rows; add 'class,sd_m' rows")
    return table


def _class_sd(quality: pd.Series, table: Mapping[str, float]) -> np.ndarray:
    """SD per fix from its class; a fix without a class gets the table's largest SD."""
    known = quality.notna()
    codes = quality[known].astype(str).str.strip().str.upper()
    missing = sorted(set(codes) - set(table))
    if missing:
        raise RoamstatError(f"column quality: location class(es) {', '.join(missing)} are not in the "
                            f"class-to-SD table; add them to a table CSV ('class,sd_m')")
    sd = np.full(len(quality), max(table.values()))
    sd[known.to_numpy()] = codes.map(table).to_numpy(dtype=float)
    return sd


def location_error(fixes_a: pd.DataFrame, uere_m: float | None,
                   class_sd_m: Mapping[str, float] | None) -> LocationError:
    """Resolve the error model for one animal's (observed) fixes.

    Parameters
    ----------
    fixes_a : DataFrame
        The animal's fixes; uses the ``dop`` and ``quality`` columns when present.
    uere_m : float or None
        User-equivalent range error (m); DOP x UERE is used only when it is given.
    class_sd_m : mapping or None
        Class-to-SD table (m); None = ``DEFAULT_CLASS_SD_M``.
    """
    table = DEFAULT_CLASS_SD_M if class_sd_m is None else class_sd_m
    has_quality = "quality" in fixes_a and fixes_a["quality"].notna().any()
    if uere_m is not None and "dop" in fixes_a:
        dop = pd.to_numeric(fixes_a["dop"], errors="coerce").to_numpy(dtype=float)
        finite = np.isfinite(dop) & (dop > 0)
        if finite.any():
            sd = dop * float(uere_m)
            if not finite.all():
                fill = (_class_sd(fixes_a["quality"], table) if has_quality
                        else np.full(dop.size, np.median(sd[finite])))
                sd = np.where(finite, sd, fill)
            return LocationError(sd, "dop_uere")
    if has_quality:
        return LocationError(_class_sd(fixes_a["quality"], table), "quality_class")
    return LocationError(None, "estimated")
