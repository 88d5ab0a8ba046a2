"""Location masking for sensitive species: one hidden origin per run.

With ``cfg.mask_locations`` every coordinate that leaves the program is
given relative to ONE hidden origin per run (:class:`HiddenOrigin`): the
spherical centroid of the positions read, moved by a random offset (uniform
in a disc of ``OFFSET_RADIUS_M``).  The run draws it once and hands it to
every output that masks -- fixes.csv, the report maps, the range outlines and
ranges.geojson -- so masked outputs of one run line up with each other and
animals keep their places relative to each other, while nothing ties them to
the Earth.  A ``--low-memory`` run uses the same single origin for every batch.

The offset is drawn from fresh operating-system entropy, not from the run
seed, because the seed is written to the manifest and a seeded offset could be
recomputed; it is never written anywhere.  With ``cfg.mask_grid`` masked
coordinates are also coarsened to a grid of that many metres.

Masked planar coordinates are metres east and north of the hidden origin in a
Lambert azimuthal equal-area frame centred on it (so areas stay true; Snyder
1987, ch. 24).  Masked GeoJSON must still hold longitudes and latitudes
(RFC 7946), so masked outlines are placed in the same kind of frame centred
on 0° N 0° E: their shape and area are kept, their place on Earth is not.

References
----------
Snyder, J. P. (1987). Map Projections - A Working Manual. USGS Professional
Paper 1395.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd
import shapely

from roamstat.errors import RoamstatError
from roamstat.geo import centroid_of, unit_vector_sum
from roamstat.ranges.frames import EqualAreaFrame

OFFSET_RADIUS_M = 50_000.0  # the hidden origin lies up to 50 km from the centroid (judgement, no source)
MASKED_FRAME = EqualAreaFrame(0.0, 0.0)  # where masked outlines are drawn in lon/lat
MASK_NOTE = "coordinates relative to a hidden origin"


@dataclass(frozen=True)
class HiddenOrigin:
    """The run's hidden origin (degrees, WGS84) and the coarsening grid in metres."""

    lat0: float
    lon0: float
    grid_m: float | None = None

    @property
    def frame(self) -> EqualAreaFrame:
        return EqualAreaFrame(self.lat0, self.lon0)

    def xy(self, lon, lat):
        """Masked coordinates: metres east and north of the origin (cell centres when a grid is set)."""
        mx, my = self.frame.forward(np.asarray(lon, float), np.asarray(lat, float))
        if self.grid_m:
            # Cell centres, so a coarsened fix is never nearer to its true place than half a cell.
            mx = (np.floor(mx / self.grid_m) + 0.5) * self.grid_m
            my = (np.floor(my / self.grid_m) + 0.5) * self.grid_m
        return mx, my

    def geometry(self, geom, frame: EqualAreaFrame):
        """A planar outline drawn in ``frame`` moved to the masked frame (vertices snapped to the grid)."""
        mask_frame = self.frame

        def move(xy):
            lon, lat = frame.inverse(xy[:, 0], xy[:, 1])
            return np.column_stack(mask_frame.forward(lon, lat))

        moved = shapely.transform(geom, move)
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


def hidden_origin(lat, lon, grid_m=None, rng: np.random.Generator | None = None) -> HiddenOrigin:
    """Draw a hidden origin near the spherical centroid of the given positions.

    Parameters
    ----------
    lat, lon : array_like
        Positions in degrees (WGS84); non-finite values are ignored.
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
    return origin_near(unit_vector_sum(lat, lon), grid_m, rng)


def origin_near(vector_sum, grid_m=None, rng: np.random.Generator | None = None) -> HiddenOrigin:
    """A hidden origin near the centroid given by a sum of unit vectors (:func:`unit_vector_sum`)."""
    rng = rng if rng is not None else np.random.default_rng()  # unseeded on purpose: see the module docstring
    radius = OFFSET_RADIUS_M * math.sqrt(rng.uniform())
    angle = rng.uniform(0.0, 2.0 * math.pi)
    centre = EqualAreaFrame(*centroid_of(vector_sum))
    lon0, lat0 = centre.inverse(radius * math.cos(angle), radius * math.sin(angle))
    return HiddenOrigin(float(lat0), float(lon0), check_grid(grid_m))


#: Columns that hold or reveal exact positions, removed from masked fixes.
POSITION_COLUMNS = ("lat", "lon", "x_in", "y_in")


def mask_fixes(fixes: pd.DataFrame, origin: HiddenOrigin) -> pd.DataFrame:
    """The fixes table with masked coordinates, for output.

    ``x_m, y_m`` become metres from the run's hidden origin (the same for every
    animal and every output of the run).  ``lat``, ``lon``, projected input
    coordinates and every ``orig_*`` column (raw input text, which may spell
    out the coordinates) are removed; a ``masked`` column says so.

    Parameters
    ----------
    fixes : pandas.DataFrame
        A table with ``lat, lon`` (degrees).
    origin : HiddenOrigin
        The run's hidden origin.

    Returns
    -------
    pandas.DataFrame
    """
    if not {"lat", "lon"} <= set(fixes.columns):
        raise RoamstatError("table to mask has no lat/lon columns; pass the fixes table from track.prepare_fixes")
    out = fixes.drop(columns=[c for c in fixes.columns if c in POSITION_COLUMNS or str(c).startswith("orig_")])
    x = np.full(len(fixes), np.nan)
    y = np.full(len(fixes), np.nan)
    lat, lon = fixes["lat"].to_numpy(float), fixes["lon"].to_numpy(float)
    good = np.isfinite(lat) & np.isfinite(lon)
    if good.any():
        x[good], y[good] = origin.xy(lon[good], lat[good])
    out["x_m"], out["y_m"] = x, y
    out["masked"] = True
    return out
