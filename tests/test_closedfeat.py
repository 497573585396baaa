"""Extra material in the section figures and the polygon clipping of closed features.

Check values come from shapely (a reference library): the intersection and union of
polygons, and the area and centroid of the result; second moments from our
section_properties on shapely's merged outline (itself checked against handbook formulas in
tests/test_section.py), so the extra-material path is held against the plain-polygon path.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from shapely.geometry import Polygon

from scanmass.section import section_properties
from scanmass.segment.closedfeat import clip_convex, is_sliver


def _star(n: int = 7, r_in: float = 3.0, r_out: float = 9.0) -> np.ndarray:
    a = np.arange(2 * n) * math.pi / n
    r = np.where(np.arange(2 * n) % 2 == 0, r_out, r_in)
    return np.column_stack([10 + r * np.cos(a), 10 + r * np.sin(a)])


@pytest.mark.parametrize("angle", [0.0, 17.0, 45.0, 101.0])
def test_clip_of_a_concave_ring_matches_shapely(angle):
    star = _star()
    t = math.radians(angle)
    u, v = np.array([math.cos(t), math.sin(t)]), np.array([-math.sin(t), math.cos(t)])
    c = np.array([12.0, 9.0])
    rect = np.array([c - 6 * u - 1.5 * v, c + 6 * u - 1.5 * v, c + 6 * u + 1.5 * v, c - 6 * u + 1.5 * v])
    clipped = clip_convex(star, rect)
    truth = Polygon(star).intersection(Polygon(rect))  # shapely: the reference
    got = Polygon(clipped)
    x, y = clipped[:, 0], clipped[:, 1]
    area = 0.5 * abs(float(np.sum(x * np.roll(y, -1) - np.roll(x, -1) * y)))
    assert area == pytest.approx(truth.area, rel=1e-9)
    if got.is_valid:  # zero-width bridges leave shapely's validity aside, not the moments
        assert got.centroid.x == pytest.approx(truth.centroid.x, abs=1e-9)


def test_extra_material_matches_the_merged_polygon():
    plate = np.array([[0, 0], [20, 0], [20, 10], [0, 10]], float)
    fin = np.array([[9, 10], [11, 10], [11, 16], [9, 16]], float)  # added: a wall on the top edge
    slot = np.array([[4, 3], [5, 3], [5, 7], [4, 7]], float)  # taken out: a slot inside
    merged = Polygon(plate).union(Polygon(fin)).difference(Polygon(slot))  # shapely: the reference
    outer = np.asarray(merged.exterior.coords)[:-1]
    holes = [np.asarray(h.coords)[:-1] for h in merged.interiors]
    want = section_properties(outer, holes)
    got = section_properties(plate, [], extra=[(fin, 1.0), (slot, -1.0)], extra_perimeter_mm=2 * 6 + 2 * 5)
    assert got.area_mm2 == pytest.approx(merged.area, rel=1e-12)
    assert got.centroid_mm[0] == pytest.approx(merged.centroid.x, abs=1e-12)
    assert got.centroid_mm[1] == pytest.approx(merged.centroid.y, abs=1e-12)
    for name in ("ixx_mm4", "iyy_mm4", "ixy_mm4", "i1_mm4", "i2_mm4"):
        assert getattr(got, name) == pytest.approx(getattr(want, name), rel=1e-9, abs=1e-9), name
    assert got.perimeter_mm == pytest.approx(merged.length, rel=1e-12)
    assert got.bbox_mm == (0.0, 0.0, 20.0, 16.0)  # the added wall reaches above the plate


def test_sliver_is_a_narrow_hole_only():
    assert is_sliver(np.array([[0, 0], [30, 0], [30, 1.2], [0, 1.2]], float))  # mean width 2A/P = 1.15
    assert not is_sliver(np.array([[0, 0], [30, 0], [30, 2.0], [0, 2.0]], float))  # 1.88
