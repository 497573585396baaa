"""Truth of one part of a committed path-traced render (``tests/data/reallight``).

Each render's JSON holds the exact outlines it was drawn from; shapely gives the reference area,
centroid and the holes' equal-area diameters.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

from shapely.geometry import Polygon

REALLIGHT = Path(__file__).resolve().parent / "data" / "reallight"


def truth_part(name: str, shape: str) -> dict:
    """Area, centroid, holes ((centre, diameter), ...) and thickness ``t`` of the part ``shape``."""
    truth = json.loads((REALLIGHT / f"{name}.json").read_text())
    (p,) = [p for p in truth["parts"] if p["shape"] == shape]
    poly = Polygon(p["outline_mm"], p["holes_mm"])  # shapely: the reference area and centroid
    holes = []
    for ring in p["holes_mm"]:
        hp = Polygon(ring)  # a round hole's diameter: the equal-area circle of its polygon
        holes.append(((hp.centroid.x, hp.centroid.y), 2 * math.sqrt(hp.area / math.pi)))
    return {"area": poly.area, "centroid": (poly.centroid.x, poly.centroid.y), "holes": holes, "t": p["thickness_mm"]}
