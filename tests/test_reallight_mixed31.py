"""Brushed steel in mixed light: the re-measure's join of a face's lit sector by its grain, under a moved rim.

The tint peel of a metal face's outer fringe (``segment/tintfringe.py``, branch mixsteel30) moves the
found face's rim by a pixel or two, and the re-measure's decisions flip on it (docs/benchmark-history.md,
mixsteel30 and mixed31). These checks hold the join of a lit sector (:func:`grain_face_regions`) to the
drawn geometry of synthetic scenes as the found face's rim moves by 0, 1 and 2 px, and name the render
the flip was seen on. Truth: the drawn rectangles (exact), and the render's truth file (the outlines
the path tracer extruded; area from shapely, not from the code under test).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from scanmass.segment.brightface import grain_face_regions

REALLIGHT = Path(__file__).resolve().parent / "data" / "reallight"

#: The synthetic scene: a dark found face (rows 30-79, columns 30-69) and beside it a lit sector of the
#: same face at the paper's level, speckled (its grain), ``width`` px wide; the paper 1.0 elsewhere.
FACE_ROWS, FACE_COLS = (30, 80), (30, 70)
#: The rim moves tried (px): the found face grown into the lit sector by this many columns.
RIM_MOVES = (0, 1, 2)
#: The joined sector's free edge (against the paper) is placed where 0.4 of the face's grain energy is
#: left (GRAIN_EDGE_SHARE), within about 2-4 px on the module's own example (a 40 x 40 px sector joined
#: as 1600-1900 px): this many px along each free edge.
EDGE_PX = 3.0


def _joined_area(width: int, rim_move: int) -> tuple[int, int]:
    """The found face plus what the join adds (px), and the drawn face's area (found and lit sector, px)."""
    rng = np.random.default_rng(1)
    (r0, r1), (c0, c1) = FACE_ROWS, FACE_COLS
    lin = np.full((110, 150), 1.0, np.float32)
    lin[r0:r1, c0:c1] = 0.1 * rng.uniform(0.5, 1.5, (r1 - r0, c1 - c0))
    lin[r0:r1, c1 : c1 + width] = rng.uniform(0.4, 1.0, (r1 - r0, width))
    found = np.zeros(lin.shape, bool)
    found[r0:r1, c0 : c1 + rim_move] = True
    none = np.zeros_like(found)
    _, joined, _ = grain_face_regions(lin, found, none, ~none)
    return int(np.count_nonzero(joined | found)), (r1 - r0) * (c1 - c0 + width)


def _check_steady(width: int) -> None:
    free_edge = (FACE_ROWS[1] - FACE_ROWS[0]) + 2 * width  # the sector's right side, top and bottom (px)
    areas = []
    for move in RIM_MOVES:
        area, drawn = _joined_area(width, move)
        # the drawn geometry: the face and its lit sector, edge within EDGE_PX all along the free edge
        assert abs(area - drawn) <= EDGE_PX * free_edge, (move, area, drawn)
        areas.append(area)
    # a pixel moved between the found face and the sector leaves the union as it was: at most a pixel's
    # width of the free edge may change with it
    assert max(areas) - min(areas) <= free_edge, areas


def test_wide_lit_sector_joined_whatever_the_rim():
    """A lit sector 22 px wide (radius 11 px, past the join's width gate of 8 px): joined to the drawn
    face within the edge's placement, the same with the found rim moved by 1 or 2 px."""
    _check_steady(22)


@pytest.mark.xfail(
    strict=True,
    reason="the join's width gate (GRAIN_WIDE_PX, 8 px) reads the lit sector's own inscribed radius: a sector "
    "15-16 px wide is joined with the rim as drawn and dropped whole (820-840 px) when the found face's rim moves "
    "1-2 px into it (2837 -> 2050 px at 15 px, 2922 -> 2100 px at 16 px); read through the found face "
    "(branch mixed31-tried, _depth_from_paper) the gate is steady but joins sectors 8-16 px wide that main leaves, "
    "and dev-mixed-steel3-t22's gasket reads +13.9 % (main +7.95 %)",
)
@pytest.mark.parametrize("width", [15, 16])
def test_lit_sector_near_the_width_gate_joined_whatever_the_rim(width: int):
    _check_steady(width)


@pytest.mark.slow
@pytest.mark.skipif(not (REALLIGHT / "dev-mixed-steel3-t22.json").exists(), reason="dev renders not in this checkout")
@pytest.mark.xfail(
    strict=True,
    reason="dev-mixed-steel3-t22: the brushed gasket (3 mm, 22 degrees of tilt) reads +7.95 % (0.7 sigma): its outer "
    "outline runs 1-2 px outside the top face beside each light's penumbra (the other light's tint); peeled by "
    "tint (tintfringe) it reads -6.45 % with 2 extra holes (a lit sector of 7.9 px radius, under the join's 8 px "
    "gate, left as a bite), and with that sector joined +0.8 % with 5 extra holes (the seam between the joined "
    "sector and the found face left open); docs/benchmark-history.md (mixed31)",
)
def test_mixed_light_steel_gasket_within_3_percent_and_one_bore():
    from _reallight_truth import measured_part

    _, part, tp = measured_part("dev-mixed-steel3-t22", "gasket")
    assert abs(part.area_mm2 - tp["area"]) < 0.03 * tp["area"]  # truth: shapely on the render's outline
    assert len(part.holes) == len(tp["holes"]) == 1
