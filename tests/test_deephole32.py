"""Deep holes opened once each, and never around another hole (:func:`scanmass.pipeline.photo_holes._apart`).

Truth: the renders' own truth files (tests/data/reallight/*.json, written by the renderer from the scene
definition; shapely gives the part's area and the holes' equal-area diameters, tests/_reallight_truth.py),
and for the unit checks plane geometry (two discs overlap where their centres lie closer than the sum of
their radii).
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
from _reallight_truth import REALLIGHT, truth_part

from scanmass.pipeline.photo_holes import _apart


def _entry(x: float, y: float, d: float, doubt: float = 1.0, partly: bool = False, ring: bool = False):
    return (np.array([x, y]), d, doubt, partly, np.zeros((4, 2)) if ring else None, False)


def test_grown_opening_that_takes_in_another_hole_is_left_out():
    small = _entry(0.0, 0.0, 6.5)
    grown = _entry(5.0, 9.0, 23.6, partly=True, ring=True)  # centres 10.3 mm apart < 3.25 + 11.8: overlapping
    kept = _apart([small, grown])
    assert len(kept) == 1 and kept[0][1] == 6.5


def test_grown_opening_clear_of_the_other_holes_is_kept():
    small = _entry(0.0, 0.0, 6.5)
    grown = _entry(30.0, 0.0, 23.6, partly=True, ring=True)  # 30 mm apart > 3.25 + 11.8: no overlap
    assert len(_apart([small, grown])) == 2


def test_one_opening_found_twice_is_opened_once_as_the_found_hole():
    by_pit = _entry(100.53, 112.85, 7.00, doubt=1.2)
    by_ring = _entry(100.39, 112.94, 6.32, doubt=1.0, ring=True)  # 0.17 mm apart: the same opening
    kept = _apart([by_pit, by_ring])
    assert len(kept) == 1
    assert kept[0][4] is not None and kept[0][1] == 6.32  # the found hole's own opening (its ring is replaced)
    assert kept[0][2] == 1.2  # with the larger of the two edge doubts


def _deep_warning_holes(warnings: list[str]) -> list[tuple[float, float]]:
    said = " ".join(w for w in warnings if w.startswith("deep hole:"))
    return [(float(x), float(y)) for x, y in re.findall(r"mm at \(([-\d.]+), ([-\d.]+)\) mm", said)]


@pytest.mark.slow
def test_no_opening_around_a_hole_of_a_plate_read_too_thick():
    import scanmass

    # dev-window-nylon8-t24 without a thickness: the steel plate's thickness read from its wall as ~5.3 mm
    # (truth 4); its 10 mm hole's lit floor grew a 23.6 mm 'opening' over a 6.5 mm hole (area -14.3 %)
    truth = truth_part("dev-window-nylon8-t24", "plate")
    m = scanmass.measure(REALLIGHT / "dev-window-nylon8-t24.jpg")
    plate = min(m.parts, key=lambda p: math.dist(p.centroid_mm, truth["centroid"]))
    largest = max(d for _, d in truth["holes"])
    assert max(h.diameter_mm for h in plate.holes) < largest + 1.0
    # merged with mixed32 (a soft, shallow pit is a shaded sector of the face, not a hole's edge), the false 10-12 mm
    # opening traced from a dark pit where the truth has no hole is gone too, and the real 10 mm hole still reads as
    # its 5 mm lit floor: the plate reads +6.1 % (the branch alone: +2.4 %), no longer -14 %, and within its sigma
    assert abs(plate.area_mm2 - truth["area"]) < 3 * plate.area_u_mm2
    assert plate.area_mm2 > truth["area"]  # no opening takes material away beyond the holes the truth has
