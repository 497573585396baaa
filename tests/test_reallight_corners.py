"""Photographed L brackets (``tests/data/reallight``): where their outline runs against the truth's (issue 11).

An L bracket is the only shape of the set with a concave (re-entrant) corner, and the photographed
brackets read 1-7 % large where plates and discs in the same photos read nearer. Against the truth
outlines the excess is no fillet in the corner: it is a band 0.3-1.1 mm wide along every edge that faces
away from the light (the cast shadow's core left in, convex and concave sides alike), and along the walls
facing the camera; the corner's own share is 0.0-0.4 % of the area (docs/benchmark-history.md, stop 30).
The same band costs an L bracket more than the other shapes: its outline is long for its area (172 mm
around 840 mm², against 197 mm around 2321 mm² for the plate).

Truth: each render's truth file (the outlines Blender extruded, and its lights' places); areas from
shapely, not from the code under test.
"""

from __future__ import annotations

import functools
import json
import math
from pathlib import Path

import numpy as np
import pytest
from _reallight_truth import REALLIGHT, assert_within_3_sigma, measured_part
from shapely.geometry import LineString, Polygon
from shapely.ops import unary_union

pytestmark = [
    pytest.mark.slow,
    pytest.mark.skipif(
        not (REALLIGHT / "dev-spot-brass5-t24.json").exists(), reason="dev renders not in this checkout"
    ),
]

#: An edge faces the light (or away from it) where its outward normal's cosine with the direction to
#: the light (from the edge's middle, on the mat) is below -0.3 (above +0.3); the others run along it.
FACING_COS = 0.3
#: Width (mm) of the band on each side of an edge whose area differences are laid to that edge: wider
#: than the largest offset seen (1.6 mm), narrower than an arm (12 mm).
BAND_MM = 3.0
#: How far (mm, mean over the edges facing the light) the outline may run off the truth's there: half a
#: pixel of these renders (0.25-0.4 mm per pixel; the sub-pixel edge is finer, common practice for a clean
#: step), so a lit edge read wrong by a pixel fails.
LIT_EDGE_MM = 0.15
#: Issue 11's target for the worst area error (1 %), here on the outer outline alone (no holes).
OUTLINE_TARGET = 0.01


def _truth_file(name: str) -> dict:
    return json.loads((REALLIGHT / f"{name}.json").read_text())


@functools.cache
def _bracket(name: str):
    """The render's L bracket measured at its thickness: (part, truth part, truth outline as a polygon)."""
    _m, part, tp = measured_part(name, "l-bracket")
    (p,) = [q for q in _truth_file(name)["parts"] if q["shape"] == "l-bracket"]
    return part, tp, Polygon(p["outline_mm"])  # shapely: the truth's outer outline


def _side_offsets(name: str) -> dict[str, float]:
    """Mean offset (mm, + outwards) of the measured outer outline from the truth's, per side to the light.

    Sides: ``lit`` (edges facing the lights), ``shadow`` (facing away), ``along``. The difference of the
    two outlines (shapely) within :data:`BAND_MM` of a side's edges, excess less missing, over their length.
    """
    part, _tp, truth = _bracket(name)
    measured = Polygon(np.asarray(part.outline_mm)).buffer(0)
    excess, missing = measured.difference(truth), truth.difference(measured)
    ring = np.asarray(truth.exterior.coords)[:-1]
    ccw = truth.exterior.is_ccw
    lights = [np.asarray(light["location_m"][:2]) * 1000.0 for light in _truth_file(name)["light"]["lights"]]
    sides: dict[str, list[LineString]] = {"lit": [], "shadow": [], "along": []}
    for a, b in zip(ring, np.roll(ring, -1, axis=0)):
        d = b - a
        normal = np.array([d[1], -d[0]]) / np.linalg.norm(d) * (1 if ccw else -1)  # outwards
        mid = 0.5 * (a + b)
        away = max(float(-(normal @ (q - mid)) / np.linalg.norm(q - mid)) for q in lights)
        side = "shadow" if away > FACING_COS else ("lit" if away < -FACING_COS else "along")
        sides[side].append(LineString([a, b]))
    out = {}
    for side, edges in sides.items():
        if edges:
            zone = unary_union([e.buffer(BAND_MM, cap_style=2) for e in edges])
            length = sum(e.length for e in edges)
            out[side] = (excess.intersection(zone).area - missing.intersection(zone).area) / length
    return out


# the brackets whose shadow was cut, under one light each (the lit side is defined)
CUT_ONE_LIGHT = ["dev-window-low-steel2-t8", "dev-spot-brass2-t27", "dev-window-disc8-t4", "dev-lens-window-steel2-t16"]
# the brackets whose outer outline reads more than 1 % large (bench_reallight, stop 29)
READ_LARGE = [
    "dev-spot-brass5-t24",
    "dev-window-low-steel2-t8",
    "dev-spot-brass2-t27",
    "dev-mixed-steel2-t15",
    "dev-window-disc8-t4",
]


@pytest.mark.parametrize("name", CUT_ONE_LIGHT)
def test_lit_edges_on_the_truth(name: str) -> None:
    """The edges facing the light run on the truth's (a bracket's excess lies on its shadow's side)."""
    offsets = _side_offsets(name)
    assert abs(offsets["lit"]) <= LIT_EDGE_MM, offsets


@pytest.mark.parametrize("name", sorted(set(READ_LARGE) | set(CUT_ONE_LIGHT)))
def test_bracket_error_within_3_sigma(name: str) -> None:
    """Read large or not, each bracket's area and centroid lie within 3 stated sigma of the truth's."""
    part, tp, _truth = _bracket(name)
    assert_within_3_sigma(part, tp)


@pytest.mark.xfail(
    strict=True,
    reason=(
        "the cast shadow's core is left in along the edges facing away from the light (0.3-1.1 mm; "
        "dev-window-low-steel2-t8 +4.4 %, dev-spot-brass2-t27 +4.2 %, "
        "dev-window-disc8-t4 +4.0 %, dev-mixed-steel2-t15 +3.2 % on the outer outline): not the concave corner"
    ),
)
# dev-window-disc8-t4 within 1 % since farband30, dev-spot-brass5-t24 since spotbrass32 (its tint cut on the region as seen)
@pytest.mark.parametrize("name", [n for n in READ_LARGE if n not in ("dev-window-disc8-t4", "dev-spot-brass5-t24")])
def test_outer_outline_within_target(name: str) -> None:
    """Issue 11's worst-area target (1 %) on the bracket's outer outline alone."""
    part, _tp, truth = _bracket(name)
    measured = Polygon(np.asarray(part.outline_mm)).buffer(0)  # shapely: the measured outline's area
    assert math.isclose(measured.area, truth.area, rel_tol=OUTLINE_TARGET), (measured.area, truth.area)


def test_renders_named_exist() -> None:
    """Every render named above is in the committed set (a renamed file must not leave a test empty)."""
    for name in set(READ_LARGE) | set(CUT_ONE_LIGHT):
        assert Path(REALLIGHT / f"{name}.jpg").exists(), name
