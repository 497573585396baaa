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
#: The held-out renders (``render_reallight.py --holdout``): the same kind of scenes, never used to tune the rules.
REALLIGHT_HOLDOUT = Path(__file__).resolve().parent / "data" / "reallight-holdout"


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


def truth_render(folder: Path, name: str) -> tuple[dict, list[dict]]:
    """A render's truth file and, per part, its area, centroid, holes, thickness ``t`` and shape.

    A scan's outlines are stored in the scan frame (``render_reallight._scan_spec``); the shift from
    the camera's centre is applied as ``tests/test_reallight.py`` applies it (zero for these files).
    """
    truth = json.loads((folder / name).read_text())
    parts = []
    for p in truth["parts"]:
        outer, holes = p["outline_mm"], p["holes_mm"]
        if truth["kind"] == "scan":
            cam = truth["camera"]
            s = cam["ortho_scale_mm"] / max(cam["size_px"])
            dx = 0.5 * cam["size_px"][0] * s - cam["centre_mm"][0]
            dy = 0.5 * cam["size_px"][1] * s - cam["centre_mm"][1]
            outer = [(x + dx, y + dy) for x, y in outer]
            holes = [[(x + dx, y + dy) for x, y in h] for h in holes]
        poly = Polygon(outer, holes)  # shapely: the reference area and centroid
        hole_truth = []
        for ring in holes:
            hp = Polygon(ring)  # a round hole's diameter: the equal-area circle of its polygon
            hole_truth.append(((hp.centroid.x, hp.centroid.y), 2 * math.sqrt(hp.area / math.pi)))
        parts.append(
            {
                "shape": p["shape"],
                "material": p["material"],
                "area": poly.area,
                "centroid": (poly.centroid.x, poly.centroid.y),
                "holes": hole_truth,
                "t": p["thickness_mm"],
            }
        )
    return truth, parts


def nearest_part(m, tp: dict):
    """The measured part whose centroid lies nearest the truth's (how a render's part is matched)."""
    return min(m.parts, key=lambda q: math.dist(q.centroid_mm, tp["centroid"]))


def measured_part(name: str, shape: str, thickness_mm: float | None = None):
    """The render ``name`` measured at its part's thickness (or ``thickness_mm``): (measurement, part, truth)."""
    import scanmass

    tp = truth_part(name, shape)
    m = scanmass.measure(REALLIGHT / f"{name}.jpg", thickness_mm=tp["t"] if thickness_mm is None else thickness_mm)
    return m, nearest_part(m, tp), tp


def within_3_sigma(part, tp: dict) -> bool:
    """The part's area and both centroid coordinates within 3 stated sigma of the truth."""
    return abs(part.area_mm2 - tp["area"]) <= 3 * part.area_u_mm2 and all(
        abs(c - t) <= 3 * u for c, t, u in zip(part.centroid_mm, tp["centroid"], part.centroid_u_mm)
    )


def assert_within_3_sigma(part, tp: dict) -> None:
    """:func:`within_3_sigma` as assertions that show the figures."""
    assert abs(part.area_mm2 - tp["area"]) <= 3 * part.area_u_mm2, (part.area_mm2, tp["area"], part.area_u_mm2)
    for c, t, u in zip(part.centroid_mm, tp["centroid"], part.centroid_u_mm):
        assert abs(c - t) <= 3 * u, (part.centroid_mm, tp["centroid"], part.centroid_u_mm)
