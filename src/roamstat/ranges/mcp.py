"""Minimum convex polygon (MCP) ranges.

The 100 % MCP is the convex hull of all fixes (Mohr 1947); the 95 % MCP leaves
out the 5 % of fixes farthest from the arithmetic centroid, a common way to
drop excursions (White & Garrott 1990).

References
----------
Mohr, C. O. (1947). Table of equivalent populations of North American small
mammals. American Midland Naturalist 37, 223-249.
White, G. C. & Garrott, R. A. (1990). Analysis of Wildlife Radio-Tracking
Data. Academic Press.
"""

from __future__ import annotations

import math

import numpy as np
from shapely.geometry import MultiPoint, Polygon


def mcp_polygon(x, y, level: float = 100.0):
    """Convex hull of the fixes nearest the centroid.

    Parameters
    ----------
    x, y : array_like
        Planar coordinates in metres (an equal-area frame, for areas).
    level : float
        Percentage of fixes kept, nearest the centroid first (100 keeps all).

    Returns
    -------
    polygon : shapely.geometry.Polygon
        Empty when the kept fixes are fewer than three or collinear.
    n_used : int
        Fixes the hull was built from.
    """
    x, y = np.asarray(x, float), np.asarray(y, float)
    n_used = x.size if level >= 100 else int(math.ceil(x.size * level / 100.0))
    if n_used < x.size:
        d2 = (x - x.mean()) ** 2 + (y - y.mean()) ** 2
        keep = np.argsort(d2, kind="stable")[:n_used]
        x, y = x[keep], y[keep]
    hull = MultiPoint(np.column_stack([x, y])).convex_hull if x.size else Polygon()
    return (hull if hull.geom_type == "Polygon" else Polygon()), n_used
