"""All run parameters in one frozen object.

The command line builds a :class:`Config`; a Python caller may build one
directly.  No module reads global state: every stage receives the config (or
the few fields it needs) as an argument.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

NULL_MODELS = ("crw", "shuffle", "levy", "ctcrw")


@dataclass(frozen=True)
class Config:
    # --- reading -------------------------------------------------------------
    id_col: str | None = None
    time_col: str | None = None
    date_col: str | None = None
    lat_col: str | None = None
    lon_col: str | None = None
    x_col: str | None = None
    y_col: str | None = None
    crs: str | None = None  # input CRS for --x-col/--y-col, or the planar CRS to use
    tz: str = "UTC"  # time zone of naive timestamps
    # --- screening -----------------------------------------------------------
    max_dop: float | None = None  # None: rule off
    require_3d: bool = False
    max_speed: float | None = None  # m/s; None: rule off
    spike_speed: float | None = None  # m/s for the out-and-back rule; None: derived
    spike_cos: float = -0.97  # cosine of the turn at the spike vertex (near-reversal)
    min_quality: str | None = None  # lowest accepted location-quality class
    disabled_rules: tuple[str, ...] = ()  # reason codes switched off
    # --- schedule, segments, resampling ---------------------------------------
    max_gap: str | None = None  # e.g. "6h"; None: gap_factor x nominal interval
    gap_factor: float = 5.0
    resample: str | None = None  # e.g. "1h"; None: no resampling
    # --- models --------------------------------------------------------------
    min_step: float = 0.0  # metres; steps <= this are left out of step fits
    bootstrap: int = 0  # parametric-bootstrap replicates for parameter CIs
    # --- nulls ---------------------------------------------------------------
    nulls: tuple[str, ...] = NULL_MODELS
    replicates: int = 999
    seed: int = 20261201
    alpha: float = 0.05
    min_steps_test: int = 20  # shorter tracks get verdict "insufficient"
    uere_m: float | None = None  # user-equivalent range error (m): location error SD = dop x uere
    error_class_table: str | None = None  # CSV path: location-quality class -> error SD (m)
    # --- ranges --------------------------------------------------------------
    kde_bandwidth: float | None = None  # metres; None: reference bandwidth h_ref
    mask_locations: bool = False
    mask_grid: float | None = None  # metres; with mask_locations, coarsen to this grid
    # --- execution and output -------------------------------------------------
    workers: int = 1
    scheduler: str | None = None  # tcp://HOST:PORT of a Dask cluster
    report: bool = True
    quiet: bool = False
    force: bool = False
    output_format: str = "csv"  # csv or parquet
    low_memory: bool = False  # read in chunks and work a batch of animals at a time

    def replace(self, **changes) -> "Config":
        """A copy with some fields changed (the object itself is frozen)."""
        return dataclasses.replace(self, **changes)

    def as_dict(self) -> dict:
        """Plain dict of every parameter, for the manifest."""
        return {f.name: _plain(getattr(self, f.name)) for f in dataclasses.fields(self)}


def _plain(value):
    return list(value) if isinstance(value, tuple) else value
