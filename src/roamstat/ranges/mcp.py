"""Minimum convex polygon (MCP) ranges.

The 100 % MCP is the convex hull of all fixes (Mohr 1947); the 95 % MCP leaves
out the 5 % of fixes farthest from the arithmetic centroid, a common way to
drop excursions (White & Garrott 1990).

Before the hull is built, fixes strictly inside the octagon of the extreme fixes in eight
directions are set aside: none of them can be a hull vertex (the Akl & Toussaint 1978
heuristic), and a 2,000,000-fix track then hands GEOS a few hundred points instead of one
geometry per fix (~0.5 GB).

References
----------
Mohr, C. O. (1947). Table of equivalent populations of North American small
mammals. American Midland Naturalist 37, 223-249.
Akl, S. G. & Toussaint, G. T. (1978). A fast convex hull algorithm.
Information Processing Letters 7, 219-222.
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
    kept = hull_candidates(x, y)
    hull = MultiPoint(np.column_stack([x[kept], y[kept]])).convex_hull if x.size else Polygon()
    return (hull if hull.geom_type == "Polygon" else Polygon()), n_used


#: Directions whose extreme fixes make the octagon, counter-clockwise: +x, +x+y, +y, -x+y, -x, -x-y,
#: -y, +x-y.  The extreme points of directions taken in angular order are in that order on the hull.
_DIRECTIONS = np.array([[1, 0], [1, 1], [0, 1], [-1, 1], [-1, 0], [-1, -1], [0, -1], [1, -1]], float)

#: Fixes fewer than this go to the hull whole (the culling would not pay).
CULL_ABOVE = 64


def hull_candidates(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Boolean mask of the fixes that may be convex-hull vertices (Akl & Toussaint 1978).

    A fix strictly inside the convex polygon of the extreme fixes in eight directions
    lies inside the hull, so it cannot be a vertex.  "Strictly" keeps a margin of
    1e-9 of the extent, so rounding never sets aside a fix on the polygon's edge.
    """
    keep = np.ones(x.size, bool)
    if x.size < CULL_ABOVE:
        return keep
    extreme = [int(np.argmax(x * dx + y * dy)) for dx, dy in _DIRECTIONS]
    corners = [i for k, i in enumerate(extreme) if i != extreme[k - 1]]  # repeats as neighbours only
    if len(set(corners)) < 3:
        return keep
    margin = 1e-9 * max(float(np.ptp(x)), float(np.ptp(y)))
    inside = np.ones(x.size, bool)
    for a, b in zip(corners, corners[1:] + corners[:1]):
        ex, ey = x[b] - x[a], y[b] - y[a]
        # left of the edge a -> b, by more than the margin times the edge's length
        inside &= ex * (y - y[a]) - ey * (x - x[a]) > margin * math.hypot(ex, ey)
    return ~inside
