"""Black plastic under a soft light: its edges on the truth's, the contact shade read to the edge (issue 11).

Under a large soft light the paper at a raised part's foot is darkened (the part hides part of the light
from it) and fades back over a pixel or two. :mod:`scanmass.segment.contact` reads that shade beyond the
edge and takes the edge's level half-way between the part and the paper's share half a pixel out. At
the start of stop 31 the black parts of the soft-light renders still read large all round (outline +0.01
to +0.12 px, holes 0.03-0.16 px small in radius; area +0.09 to +1.28 %, median +0.37 %): the parabola
read the shade's depth short. The shades fade exponentially (a near-constant ratio per step), and the
exponential trend reads them (stop 31).

Truth: the renders' truth files (``tests/data/reallight/*.json``, the outlines Blender extruded; areas and
offsets from shapely, not from the code under test).
"""

from __future__ import annotations

import functools
import json
import math
import statistics

import numpy as np
import pytest
from _reallight_truth import REALLIGHT, assert_within_3_sigma, measured_part
from shapely.geometry import Polygon

#: The soft-light renders' black parts (every one in the tuned set).
SOFT_BLACK = [
    ("soft-black-t15", "l-bracket"),
    ("soft-black-t15", "gasket"),
    ("lens-soft-black-t0", "l-bracket"),
    ("lens-soft-black-t0", "gasket"),
    ("lens-soft-black-t30", "disc"),
    ("lens-soft-black-t30", "l-bracket"),
]
#: How far (px, mean along the outline) the outer outline may lie off the truth's: a tenth of a pixel,
#: the sub-pixel accuracy of a level crossing on a clean blurred step (common practice), under the
#: +0.12 px the parabola's reading left (lens-soft-black-t0's gasket).
EDGE_PX = 0.1
#: Issue 11's targets: holes' diameters within 0.1 mm, worst area error 1 %, median 0.3 %.
HOLE_MM = 0.1
WORST_AREA = 0.01
MEDIAN_AREA = 0.003

pytestmark = pytest.mark.skipif(
    not (REALLIGHT / "lens-soft-black-t0.json").exists(), reason="reallight renders not in this checkout"
)


@functools.cache
def _measured(name: str, shape: str):
    """(measurement, part, truth dict, truth polygon with holes) of one render's part at its thickness."""
    m, part, tp = measured_part(name, shape)
    truth = json.loads((REALLIGHT / f"{name}.json").read_text())
    (p,) = [q for q in truth["parts"] if q["shape"] == shape]
    return m, part, tp, Polygon(p["outline_mm"], p["holes_mm"])  # shapely: the truth outline


def _edge_offsets(name: str, shape: str) -> tuple[float, list[float]]:
    """Mean offset (px, + outwards) of the outer outline, and each hole's diameter error (mm).

    The outer: the measured outline's area less the truth's over the truth's perimeter; a hole: the
    measured diameter less the truth hole's equal-area diameter.
    """
    m, part, _tp, truth = _measured(name, shape)
    mm_px = m.scale.mm_per_px
    outer_t = Polygon(truth.exterior.coords)
    outer_m = Polygon(np.asarray(part.outline_mm)).buffer(0)
    outer = (outer_m.area - outer_t.area) / outer_t.exterior.length / mm_px
    holes = []
    for ring in truth.interiors:
        hp = Polygon(ring.coords)
        r_true = math.sqrt(hp.area / math.pi)
        centre = (hp.centroid.x, hp.centroid.y)
        mh = min(part.holes, key=lambda h: math.dist(h.centroid_mm, centre))
        holes.append(mh.diameter_mm - 2.0 * r_true)
    return outer, holes


@pytest.mark.slow
@pytest.mark.parametrize("name,shape", SOFT_BLACK)
def test_soft_black_edges_on_the_truth(name: str, shape: str) -> None:
    """The outer outline within a tenth of a pixel of the truth's (on average along it), the holes within 0.1 mm."""
    outer, holes = _edge_offsets(name, shape)
    assert abs(outer) <= EDGE_PX, outer
    assert all(abs(h) <= HOLE_MM for h in holes), holes


@pytest.mark.slow
@pytest.mark.parametrize("name,shape", SOFT_BLACK)
def test_soft_black_area_within_target_and_covered(name: str, shape: str) -> None:
    """Each part's area within the issue's worst target (1 %), and area and centroid within 3 stated sigma."""
    _m, part, tp, _truth = _measured(name, shape)
    assert abs(part.area_mm2 - tp["area"]) <= WORST_AREA * tp["area"], (part.area_mm2, tp["area"])
    assert_within_3_sigma(part, tp)


@pytest.mark.slow
def test_soft_black_median_area_within_target() -> None:
    """The median area error of the soft-light black parts within the issue's median target (0.3 %)."""
    errors = []
    for name, shape in SOFT_BLACK:
        _m, part, tp, _truth = _measured(name, shape)
        errors.append(abs(part.area_mm2 / tp["area"] - 1.0))
    assert statistics.median(errors) <= MEDIAN_AREA, errors
