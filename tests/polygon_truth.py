"""Exact properties of a test polygon with holes, computed independently of scanmass.section.

Area and centroid come from shapely (reference library); the centroidal second moments from
the polygon vertex sums of Green's theorem (common practice).
"""

from __future__ import annotations

import numpy as np
import shapely


def truth(outer_mm: np.ndarray, holes_mm: list[np.ndarray]) -> dict:
    """Area and centroid from shapely; centroidal second moments from the polygon vertex sums
    (Green's theorem; common practice)."""
    poly = shapely.geometry.polygon.orient(shapely.Polygon(outer_mm, holes_mm), 1.0)
    xc, yc = poly.centroid.x, poly.centroid.y
    ixx = iyy = ixy = 0.0
    for ring in [np.asarray(poly.exterior.coords)[:-1]] + [np.asarray(r.coords)[:-1] for r in poly.interiors]:
        x, y = ring[:, 0] - xc, ring[:, 1] - yc
        xn, yn = np.roll(x, -1), np.roll(y, -1)
        c = x * yn - xn * y
        ixx += np.sum(c * (y * y + y * yn + yn * yn)) / 12
        iyy += np.sum(c * (x * x + x * xn + xn * xn)) / 12
        ixy += np.sum(c * (x * yn + 2 * x * y + 2 * xn * yn + xn * y)) / 24
    return {"area": poly.area, "centroid": (xc, yc), "ixx": ixx, "iyy": iyy, "ixy": ixy}
