"""Home-range seeds: residency from NSD, MCP and KDE ranges, GeoJSON, location masking.

Public functions (see docs/ranges.md):

- :func:`residency_animal` and :func:`finalise_residency` — NSD-through-time
  patterns (Bunnefeld et al. 2011) and the range-study candidates;
- :func:`ranges_animal` — MCP, KDE, autocorrelation-aware KDE and Gaussian
  areas with intervals, outlines, area curve and Schoener's ratio for one
  animal (:class:`RangeModel` carries its best motion model);
- :func:`feature_collection` — the GeoJSON of all animals' outlines;
- :func:`mask_fixes`, :func:`hidden_origin` — location masking.
"""

from roamstat.ranges.estimate import RangeExtras, area_curve, ranges_animal
from roamstat.ranges.geojson import feature_collection
from roamstat.ranges.kde import density_grid, isopleth, reference_bandwidth
from roamstat.ranges.mask import hidden_origin, mask_fixes
from roamstat.ranges.mcp import mcp_polygon
from roamstat.ranges.model import RangeModel, from_motion_fit
from roamstat.ranges.residency import finalise_residency, residency_animal
from roamstat.ranges.schoener import schoener_ratio

__all__ = [
    "RangeExtras", "RangeModel", "area_curve", "from_motion_fit", "density_grid", "feature_collection", "finalise_residency", "hidden_origin", "isopleth",
    "mask_fixes", "mcp_polygon", "ranges_animal", "reference_bandwidth", "residency_animal", "schoener_ratio",
]
