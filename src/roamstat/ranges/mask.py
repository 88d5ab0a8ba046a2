"""Location masking for sensitive species.

With ``cfg.mask_locations`` every coordinate that leaves the program is
given relative to a hidden origin: the centroid of the fixes shifted by a
random offset (uniform in a disc of ``OFFSET_RADIUS_M``).  The offset is drawn
from fresh operating-system entropy, not from the run seed, because the seed
is written to the manifest and a seeded offset could be recomputed; it is
never written anywhere.  With ``cfg.mask_grid`` the relative coordinates are
also coarsened to a grid of that many metres.

Masked planar coordinates are metres east and north of the hidden origin in a
Lambert azimuthal equal-area frame (so areas stay true).  Masked GeoJSON must
still hold longitudes and latitudes (RFC 7946), so masked outlines are placed
in the same kind of frame centred on 0° N 0° E: their shape and area are kept,
their place on Earth is not.

Each call draws a new offset: masked outputs of different animals, stages or
runs share no origin and cannot be aligned with each other by their
coordinates.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd
import shapely
from shapely.affinity import translate

from roamstat.errors import RoamstatError
from roamstat.ranges.frames import EqualAreaFrame

OFFSET_RADIUS_M = 50_000.0  # the hidden origin lies up to 50 km from the centroid (judgement, no source)
MASKED_FRAME = EqualAreaFrame(0.0, 0.0)  # where masked outlines are drawn in lon/lat
MASK_NOTE = "coordinates relative to a hidden origin"


@dataclass(frozen=True)
class HiddenOrigin:
    """A hidden origin at (``x0_m``, ``y0_m``) in some planar frame, and the coarsening grid."""

    x0_m: float
    y0_m: float
    grid_m: float | None = None

    def xy(self, x, y):
        """Masked coordinates (metres from the hidden origin, coarsened when a grid is set)."""
        mx = np.asarray(x, float) - self.x0_m
        my = np.asarray(y, float) - self.y0_m
        if self.grid_m:
            # Cell centres, so a coarsened fix is never nearer to its true place than half a cell.
            mx = (np.floor(mx / self.grid_m) + 0.5) * self.grid_m
            my = (np.floor(my / self.grid_m) + 0.5) * self.grid_m
        return mx, my

    def geometry(self, geom):
        """A planar outline moved to the masked frame (vertices snapped to the grid when set)."""
        moved = translate(geom, xoff=-self.x0_m, yoff=-self.y0_m)
        return shapely.set_precision(moved, self.grid_m) if self.grid_m else moved


def positive_metres(value, option: str, example: str) -> float | None:
    """An optional distance option in metres, or None; a user error for anything but a positive number."""
    if value is None:
        return None
    metres = float(value)
    if not math.isfinite(metres) or metres <= 0:
        raise RoamstatError(f"{option} {value!r} is not a positive number of metres; give e.g. {option} {example}")
    return metres


def check_grid(grid_m) -> float | None:
    """The mask grid in metres, or None."""
    return positive_metres(grid_m, "--mask-grid", "1000")


def hidden_origin(x, y, grid_m=None, rng: np.random.Generator | None = None) -> HiddenOrigin:
    """Draw a hidden origin near the centroid of planar fixes.

    Parameters
    ----------
    x, y : array_like
        Planar coordinates in metres.
    grid_m : float or None
        Coarsening grid in metres.
    rng : numpy.random.Generator, optional
        Source of the offset.  Leave it out in production: a generator from
        fresh OS entropy is made, so the offset cannot be recomputed.  Tests
        pass a seeded one.

    Returns
    -------
    HiddenOrigin
    """
    rng = rng if rng is not None else np.random.default_rng()  # unseeded on purpose: see the module docstring
    radius = OFFSET_RADIUS_M * math.sqrt(rng.uniform())
    angle = rng.uniform(0.0, 2.0 * math.pi)
    cx, cy = float(np.mean(x)), float(np.mean(y))
    return HiddenOrigin(cx + radius * math.cos(angle), cy + radius * math.sin(angle), check_grid(grid_m))


def spherical_centroid(lat, lon):
    """Latitude and longitude of the mean unit vector (right across the antimeridian)."""
    la, lo = np.deg2rad(np.asarray(lat, float)), np.deg2rad(np.asarray(lon, float))
    v = np.array([np.mean(np.cos(la) * np.cos(lo)), np.mean(np.cos(la) * np.sin(lo)), np.mean(np.sin(la))])
    return math.degrees(math.atan2(v[2], math.hypot(v[0], v[1]))), math.degrees(math.atan2(v[1], v[0]))


#: Columns that hold or reveal exact positions, removed from masked fixes.
POSITION_COLUMNS = ("lat", "lon", "x_in", "y_in")


def mask_fixes(fixes: pd.DataFrame, cfg, rng: np.random.Generator | None = None) -> pd.DataFrame:
    """The fixes table with masked coordinates, for output.

    ``x_m, y_m`` become metres from one hidden origin for the whole deployment
    (so animals keep their positions relative to each other), in an
    equal-area frame centred on the deployment's centroid.  A table with only
    planar ``animal_id, x_m, y_m`` (each animal in its own frame) gets one
    hidden origin per animal instead.  ``lat``, ``lon``,
    projected input coordinates and every ``orig_*`` column (raw input text,
    which may spell out the coordinates) are removed; a ``masked`` column says
    so.

    Parameters
    ----------
    fixes : pandas.DataFrame
        Contract fixes table.
    cfg : roamstat.config.Config
        ``mask_grid`` is used.
    rng : numpy.random.Generator, optional
        See :func:`hidden_origin`.

    Returns
    -------
    pandas.DataFrame
    """
    out = fixes.drop(columns=[c for c in fixes.columns if c in POSITION_COLUMNS or str(c).startswith("orig_")])
    grid_m = getattr(cfg, "mask_grid", None)
    x = np.full(len(fixes), np.nan)
    y = np.full(len(fixes), np.nan)
    if not {"lat", "lon"} <= set(fixes.columns):
        # Planar coordinates only (each animal in its own frame): one hidden origin per animal.
        if not {"animal_id", "x_m", "y_m"} <= set(fixes.columns):
            raise RoamstatError("table to mask has neither lat/lon nor animal_id, x_m, y_m columns; "
                                "pass the fixes table from track.prepare_fixes")
        px, py = fixes["x_m"].to_numpy(float), fixes["y_m"].to_numpy(float)
        for _, rows in fixes.groupby(fixes["animal_id"].astype(str), sort=True).indices.items():
            good = rows[np.isfinite(px[rows]) & np.isfinite(py[rows])]
            if len(good):
                x[good], y[good] = hidden_origin(px[good], py[good], grid_m, rng).xy(px[good], py[good])
    else:
        good = np.isfinite(fixes["lat"].to_numpy(float)) & np.isfinite(fixes["lon"].to_numpy(float))
        if good.any():
            lat, lon = fixes["lat"].to_numpy(float)[good], fixes["lon"].to_numpy(float)[good]
            frame = EqualAreaFrame(*spherical_centroid(lat, lon))
            px, py = frame.forward(lon, lat)
            x[good], y[good] = hidden_origin(px, py, grid_m, rng).xy(px, py)
    out["x_m"], out["y_m"] = x, y
    out["masked"] = True
    return out
