"""What the per-animal analysis hands to the deployment stage and the report."""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cache
from typing import TYPE_CHECKING

import pandas as pd

if TYPE_CHECKING:  # the models package is heavy; results only names its type
    from roamstat.models.fit import AnimalFits
    from roamstat.motion.animal import AnimalMotion
    from roamstat.states import StatesResult


@cache
def _empty_layout(columns: tuple) -> pd.DataFrame:
    return pd.DataFrame(columns=list(columns))


def empty_table(columns=()) -> pd.DataFrame:
    """A table with ``columns`` and no rows.

    A copy of a cached one: pandas takes about 0.2 ms to build a table from a column list, which
    dominated runs of many animals too short to analyse.
    """
    return _empty_layout(tuple(columns)).copy()


@dataclass
class AnimalResult:
    """Everything computed for one animal.

    Tables hold rows for this animal only, with an ``animal_id`` column; ``fits``, ``null_tests``
    and ``ranges`` may instead be plain rows (dicts, ``animal_id`` first) for an animal too short
    to analyse (:mod:`roamstat.too_short`).
    ``null_curves`` maps a null-model name to the curve dict returned by
    ``compare.test_animal``; ``residency_curve`` and ``range_extras`` come from
    ``ranges``; ``states`` (rows of states.csv and state_models.csv, the
    selected model) from ``states.fit_animal_states``.  Any part may be empty when a stage had too little data or
    did not run; ``fitted`` is None when the fit stage did not run.
    """

    animal_id: str
    fits: pd.DataFrame | list[dict] = field(default_factory=empty_table)
    null_tests: pd.DataFrame | list[dict] = field(default_factory=empty_table)
    residency: dict = field(default_factory=dict)
    ranges: pd.DataFrame | list[dict] = field(default_factory=empty_table)
    features: list[dict] = field(default_factory=list)
    fitted: AnimalFits | None = None  # for the report's density overlays
    null_curves: dict[str, dict] = field(default_factory=dict)
    residency_curve: dict = field(default_factory=dict)
    range_extras: object = None  # ranges.RangeExtras (a plain dict is also read by the report)
    motion: AnimalMotion | None = None  # the fitted motion models (None when the motion stage did not run)
    motion_models: pd.DataFrame = field(default_factory=empty_table)  # motion_models.csv rows
    smoothed: pd.DataFrame = field(default_factory=empty_table)  # track_smoothed.csv rows (masked when asked)
    states: StatesResult | None = None  # None when the states stage did not run
