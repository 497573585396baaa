"""Holes under window light whose shaded floor is darker than the face but not a pit (branch winhole31).

In a window's broad low light the floor of a wide bore is lit on the side away from the window and lies in
the near wall's shade on the other. On an evenly lit black face the shade reads 0.6-0.7 of the face's level:
below the face by far more than the face's own scatter, yet not below a pit's half. The synthetic cases are
drawn here (their levels and scatter are the truth); the render's truth is its JSON file (the outlines
Blender extruded), read with shapely (tests/_reallight_truth.py).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from _reallight_truth import REALLIGHT, measured_part

from scanmass.pipeline.photo_holes import FACE_SHADE_Z, _below_face_level, _shade_level

#: The synthetic face's level (linear light) and its scatter (sigma of the natural logarithm).
FACE = 0.02
SCATTER = 0.05


def _face_with_shade(rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """A part 120 x 120 px: a face lit evenly (log-normal scatter), a crescent of shade at 0.65 of it and a cast
    shadow's band at 0.3 along one side."""
    yy, xx = np.mgrid[0:120, 0:120].astype(float)
    # a smooth scatter: the noise drawn on a coarse grid and enlarged (opening_edge's smoothing keeps it)
    coarse = rng.normal(0.0, SCATTER, (30, 30))
    scatter = np.kron(coarse, np.ones((4, 4)))
    lin = FACE * np.exp(scatter)
    lin[(np.hypot(xx - 60, yy - 60) < 25) & (np.hypot(xx - 70, yy - 60) >= 25)] *= 0.65  # the shade
    lin[:, :15] *= 0.3  # a cast shadow the outline took in
    mask = np.zeros((120, 120), bool)
    mask[2:-2, 2:-2] = True
    return lin.astype(np.float32), mask


def test_shade_level_of_an_evenly_lit_face_lies_three_scatters_below_it():
    """The level follows the drawn scatter (the 3-sigma band: common practice), not the shade or the shadow."""
    lin, mask = _face_with_shade(np.random.default_rng(7))
    level = _below_face_level(lin, mask)
    # within the histogram's bins (2 % each) of FACE * exp(-3 * SCATTER), the drawn face's 3-sigma floor
    assert FACE * math.exp(-(FACE_SHADE_Z + 0.8) * SCATTER) < level < FACE * math.exp(-(FACE_SHADE_Z - 0.8) * SCATTER)
    assert level > 0.65 * FACE * math.exp(2 * SCATTER)  # the shade lies below it
    assert level > _shade_level(lin, mask)  # a pit's level (half the face's low share) misses the shade


@pytest.mark.slow
@pytest.mark.skipif(
    not (REALLIGHT / "dev-window-low-black-t10.json").exists(), reason="dev renders not in this checkout"
)
def test_black_gaskets_bore_opened_from_its_lit_floor_and_faint_shade():
    """dev-window-low-black-t10: a black gasket 5 mm thick, the window 18 degrees up, 10 degrees of tilt. Its
    30 mm bore showed its floor lit on the side away from the window (found as a 23.6 mm hole 5 mm off the
    true centre) and the near wall's shade at 0.65-0.75 of the face's level (0.011-0.012 against
    0.015-0.017, linear), above a pit's half: the bore counted as missed (rl_end30). With the shade taken
    below the face's own scatter the opening is traced round: 30.01 mm at 0.01 mm of the true centre
    (bench_reallight). The part's area stays +45 % (its cast shadow outside, not this branch's), warned."""
    m, part, tp = measured_part("dev-window-low-black-t10", "gasket")  # the render's JSON, shapely
    ((centre, diameter),) = tp["holes"]
    hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
    assert math.dist(hole.circle_centre_mm, centre) < 0.5  # was 5 mm off (the lit floor alone)
    assert abs(hole.diameter_mm - diameter) < 0.5  # was 23.6 mm for 30
    assert abs(hole.diameter_mm - diameter) <= 3 * hole.diameter_u_mm
    assert abs(part.area_mm2 - tp["area"]) <= 3 * part.area_u_mm2  # the cast shadow left in is covered
    said = next(w for w in m.warnings if w.startswith("deep hole:") and f"part {part.label} (" in w)
    assert "partly seen" in said  # put together from the lit floor and the shade
