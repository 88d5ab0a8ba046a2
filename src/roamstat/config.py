"""All run parameters in one frozen object, and the one check of them.

The command line builds a :class:`Config`; a Python caller may build one
directly.  No module reads global state: every stage receives the config (or
the few fields it needs) as an argument.  :func:`check_config` validates every
field once, at the door (the command line and ``run.run_command``), so no stage
computes anything with a value it would later refuse.
"""

from __future__ import annotations

import dataclasses
import math
import numbers
from dataclasses import dataclass
from typing import Callable

from roamstat.errors import RoamstatError
from roamstat.registry import NULLS

#: Every registered null, in the order their generators are spawned (see ``compare.test_animal``).
NULL_MODELS = NULLS.names()  # every null, in the order their generators are spawned
DEFAULT_NULLS = NULLS.defaults()  # the nulls run when --null is not given
#: Fewest simulated walks: with 19 the smallest Monte Carlo p-value, 1/(M + 1), reaches 0.05
#: (Davison & Hinkley 1997, §4.2.5).
MIN_REPLICATES = 19


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
    time_format: str | None = None  # strftime pattern of the times, or "serial"; None: detected
    deployment_col: str | None = None  # device column splitting re-collared animals; None: detected
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
    nulls: tuple[str, ...] = DEFAULT_NULLS
    replicates: int = 999
    seed: int = 20261201
    alpha: float = 0.05
    min_steps_test: int = 20  # shorter tracks get verdict "insufficient"
    # --- behavioural states (hidden Markov models) ------------------------------
    state_counts: tuple[int, ...] = (1, 2, 3)  # numbers of states compared by BIC
    state_starts: int = 10  # starting points per model
    state_step_family: str = "gamma"  # or "weibull"
    state_turn_family: str = "von_mises"  # or "wrapped_cauchy"
    # --- location error of the motion models (roamstat.motion) -----------------
    uere_m: float | None = None  # user-equivalent range error (m): location error SD = dop x uere
    error_class_table: str | None = None  # CSV path: location-quality class -> error SD (m)
    predict: str | None = None  # e.g. "1h": smoothed positions also on this regular grid; None: fixes only
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


#: The command-line option of each field, for messages; fields without one are named ``Config.<field>``.
OPTIONS = {
    "id_col": "--id-col", "time_col": "--time-col", "date_col": "--date-col", "lat_col": "--lat-col",
    "lon_col": "--lon-col", "x_col": "--x-col", "y_col": "--y-col", "crs": "--crs", "tz": "--tz",
    "time_format": "--time-format", "deployment_col": "--deployment-col",
    "state_counts": "--states", "state_starts": "--state-starts", "state_step_family": "--state-steps",
    "state_turn_family": "--state-turns",
    "max_dop": "--max-dop", "require_3d": "--require-3d", "max_speed": "--max-speed",
    "spike_speed": "--spike-speed", "min_quality": "--min-quality", "disabled_rules": "--keep",
    "max_gap": "--max-gap", "resample": "--resample", "min_step": "--min-step", "bootstrap": "--bootstrap",
    "nulls": "--null", "replicates": "--replicates", "seed": "--seed", "alpha": "--alpha",
    "uere_m": "--uere", "error_class_table": "--error-classes", "predict": "--predict",
    "kde_bandwidth": "--kde-bandwidth", "mask_grid": "--mask-grid", "mask_locations": "--mask-locations",
    "workers": "--workers", "scheduler": "--scheduler", "report": "--no-report", "quiet": "--quiet",
    "force": "--force", "output_format": "--format", "low_memory": "--low-memory",
}


def option_name(field: str) -> str:
    """How a message names ``field``: its command-line option, else ``Config.<field>``."""
    return OPTIONS.get(field, f"Config.{field}")


def check_config(cfg: Config) -> Config:
    """Validate every field of ``cfg`` before anything is read or computed.

    Parameters
    ----------
    cfg : Config

    Returns
    -------
    Config
        ``cfg`` itself, so a caller can write ``cfg = check_config(cfg)``.

    Raises
    ------
    RoamstatError
        For the first field at fault; the message names the option and what to give instead.
    """
    for f in dataclasses.fields(cfg):
        _CHECKS[f.name](getattr(cfg, f.name), option_name(f.name))
    if cfg.mask_grid is not None and not cfg.mask_locations:
        raise RoamstatError("--mask-grid needs --mask-locations (Config.mask_locations=True)")
    if (cfg.x_col is None) != (cfg.y_col is None):
        raise RoamstatError("give both --x-col and --y-col (and --crs) for projected coordinates")
    return cfg


def _fail(option: str, value, what: str) -> None:
    raise RoamstatError(f"{option} {value!r}: {what}")


def _number(value, option: str, low: float, low_ok: bool, high: float = math.inf, high_ok: bool = False,
            whole: bool = False, hint: str = "") -> None:
    kind = numbers.Integral if whole else numbers.Real
    # typeshed's numbers.Real declares no >= / > and float's comparisons reject Real, so mypy refuses a valid compare
    if isinstance(value, bool) or not isinstance(value, kind) or not (
            (value >= low if low_ok else value > low) and (value <= high if high_ok else value < high)):  # type: ignore[operator]
        _fail(option, value, hint)


def _positive(hint: str, optional: bool = True) -> Callable:
    """A threshold that must be a positive finite number (None switches it off when ``optional``)."""
    def check(value, option):
        if value is None and optional:
            return
        _number(value, option, 0, False, hint=f"give a positive number, e.g. {option} {hint}")
    return check


def _text(value, option: str) -> None:
    if value is not None and (not isinstance(value, str) or not value.strip()):
        _fail(option, value, "give a column or name as text, or leave the option out")


def _flag(value, option: str) -> None:
    if not isinstance(value, bool):
        _fail(option, value, "give True or False")


def _zone(value, option: str) -> None:
    import pandas as pd

    try:
        pd.Timestamp("2000-01-01").tz_localize(str(value))
    except Exception:  # pandas raises several types for an unknown zone
        _fail(option, value, "not a time zone name; give an IANA name such as UTC, Europe/London or "
              "America/Denver, or a fixed offset such as +02:00")


def _duration(value, option: str) -> None:
    if value is not None:
        from roamstat.track import duration_ns

        duration_ns(value, option)


def _quality(value, option: str) -> None:
    from roamstat.screen import QUALITY_ORDER

    if value is not None and str(value).strip().upper() not in QUALITY_ORDER:
        _fail(option, value, f"choose one of {', '.join(reversed(QUALITY_ORDER))}")


def _rules(value, option: str) -> None:
    from roamstat.screen import ALWAYS_ON, REASONS

    for code in value:
        if code in ALWAYS_ON:
            _fail(option, code, "rows without a usable time or latitude cannot be analysed; correct them in "
                  "the input file instead")
        if code not in REASONS:
            _fail(option, code, f"no screening rule has this code; choose from "
                  f"{', '.join(c for c in REASONS if c not in ALWAYS_ON)}")


def _nulls(value, option: str) -> None:
    unknown = [n for n in value if n not in NULLS]
    if unknown or not value:
        raise RoamstatError(NULLS.unknown_message(unknown or ["(none)"]))
    if len(set(value)) < len(value):
        _fail(option, ",".join(value), "name each null model once")


def _choice(*allowed: str) -> Callable:
    def check(value, option):
        if value not in allowed:
            _fail(option, value, f"choose one of {', '.join(allowed)}")
    return check


def _state_counts(value, option: str) -> None:
    if not value or len(set(value)) < len(value):
        _fail(option, value, "give distinct numbers of states, e.g. 1,2,3")
    for k in value:
        _number(k, option, 1, True, 4, True, whole=True, hint="give numbers of states from 1 to 4, e.g. 1,2,3")


def _class_table(value, option: str) -> None:
    if value is not None:
        from roamstat.motion.errors import read_class_table

        read_class_table(value)  # a missing or malformed table is refused before anything is computed


def _scheduler(value, option: str) -> None:
    if value is not None and (not isinstance(value, str) or "://" not in value):
        _fail(option, value, "give the Dask scheduler's address, e.g. tcp://10.0.0.5:8786")


_CHECKS: dict[str, Callable] = {
    **dict.fromkeys(("id_col", "time_col", "date_col", "lat_col", "lon_col", "x_col", "y_col", "crs",
                      "time_format", "deployment_col"), _text),
    "tz": _zone,
    "state_counts": _state_counts,
    "state_starts": lambda v, o: _number(v, o, 1, True, whole=True, hint="give a whole number of starts >= 1, e.g. 10"),
    "state_step_family": _choice("gamma", "weibull"),
    "state_turn_family": _choice("von_mises", "wrapped_cauchy"),
    "max_dop": _positive("5"),
    "require_3d": _flag,
    "max_speed": _positive("3"),
    "spike_speed": _positive("2"),
    "spike_cos": lambda v, o: _number(v, o, -1, True, 0, False, hint="give the cosine of a near-reversal, "
                                      "between -1 and 0, e.g. -0.97"),
    "min_quality": _quality,
    "disabled_rules": _rules,
    "max_gap": _duration,
    "gap_factor": lambda v, o: _number(v, o, 1, False, hint="give a factor above 1, e.g. 5"),
    "resample": _duration,
    "min_step": lambda v, o: _number(v, o, 0, True, hint=f"give a length in metres >= 0, e.g. {o} 10"),
    "bootstrap": lambda v, o: _number(v, o, 0, True, whole=True, hint=f"give a whole number >= 0, e.g. {o} 200"),
    "nulls": _nulls,
    "replicates": lambda v, o: _number(v, o, MIN_REPLICATES, True, whole=True,
                                       hint=f"use at least {MIN_REPLICATES} (999 is the default)"),
    "seed": lambda v, o: _number(v, o, 0, True, whole=True, hint="give a whole number >= 0"),
    "alpha": lambda v, o: _number(v, o, 0, False, 1, False, hint="give a level between 0 and 1, e.g. 0.05"),
    "min_steps_test": lambda v, o: _number(v, o, 2, True, whole=True, hint="give a whole number >= 2, e.g. 20"),
    "uere_m": _positive("5"),
    "error_class_table": _class_table,
    "predict": _duration,
    "kde_bandwidth": _positive("500"),
    "mask_locations": _flag,
    "mask_grid": _positive("1000"),
    "workers": lambda v, o: _number(v, o, 1, True, whole=True, hint="give a whole number >= 1, or 'auto'"),
    "scheduler": _scheduler,
    "report": _flag,
    "quiet": _flag,
    "force": _flag,
    "output_format": _choice("csv", "parquet"),
    "low_memory": _flag,
}
