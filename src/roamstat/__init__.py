"""roamstat: collar fixes in, random-walk null-model verdicts and home-range seeds out."""

from roamstat.errors import RoamstatError

__version__ = "0.2.0"

__all__ = ["RoamstatError", "__version__"]
