"""Step-length and turning-angle models: maximum-likelihood fits and model selection.

Public entry points: :func:`fit_animal` (one animal -> :class:`AnimalFits`) and
:func:`fits_table`.  Every fitted model follows the protocol of
:mod:`roamstat.models.base`.
"""

from roamstat.models.base import FittedModel, StepModel, TurnModel
from roamstat.models.fit import COLUMNS, AnimalFits, fit_animal, fits_table

__all__ = ["AnimalFits", "COLUMNS", "FittedModel", "StepModel", "TurnModel", "fit_animal", "fits_table"]
