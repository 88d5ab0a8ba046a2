"""What the per-animal analysis hands to the deployment stage and the report."""

from __future__ import annotations

from dataclasses import dataclass, field

import pandas as pd


@dataclass
class AnimalResult:
    """Everything computed for one animal.

    Tables hold rows for this animal only, with an ``animal_id`` column.
    ``null_curves`` maps a null-model name to the curve dict returned by
    ``compare.test_animal``; ``residency_curve`` and ``range_extras`` come from
    ``ranges``.  Any part may be empty when a stage had too little data.
    """

    animal_id: str
    fits: pd.DataFrame
    null_tests: pd.DataFrame
    residency: dict
    ranges: pd.DataFrame
    features: list = field(default_factory=list)
    fitted: object = None  # models.AnimalFits, for the report's density overlays
    null_curves: dict = field(default_factory=dict)
    residency_curve: dict = field(default_factory=dict)
    range_extras: object = None  # ranges.RangeExtras (a plain dict is also read by the report)
