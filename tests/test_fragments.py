"""A part found in pieces (scanmass.segment.fragments) and the term of the merged part.

Truth: the pieces' and their hull's areas from shapely (a reference library), and synthetic images
whose strips between the pieces are drawn here (smooth paper, the face's grain, a painted cut).
"""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pytest
import shapely.geometry as sg

from scanmass.segment.fragments import FRAGMENT_AREA_RATIO, find_fragments
from scanmass.segment.rings import PartRings

LUT = np.linspace(0.0, 1.0, 4097)  # 12-bit codes: linear light in steps of 1/4096


def _find(img: np.ndarray, parts: list[PartRings]):
    return find_fragments(np.round(np.clip(img, 0, 1) * 4096).astype(np.uint16), LUT, parts)


def _square(label: int, x0: int, y0: int, n: int) -> PartRings:
    ring = np.array([[x0, y0], [x0 + n, y0], [x0 + n, y0 + n], [x0, y0 + n]], float)
    return PartRings(label, ring, [], False, (x0, y0, x0 + n, y0 + n), float(n * n), 1.0, 0.0, np.ones(4), 1.0, 0.0)


def _scene(strip: str, seed: int = 0) -> tuple[np.ndarray, list[PartRings]]:
    """A dark 80 px square and a 9 px piece 4 px to its right on paper with a little grain."""
    rng = np.random.default_rng(seed)
    img = 0.9 + 0.01 * rng.standard_normal((140, 200))
    if strip == "grain":  # the face's flecks: dark and bright pixels in the strip
        img[45:64, 100:104] = np.where(rng.random((19, 4)) < 0.5, 0.1, 0.9)
    elif strip == "painted":  # a cut painted in one level around the piece: no grain at all
        img[38:72, 100:125] = 0.9
    img[20:100, 20:100] = 0.1
    img[50:59, 104:113] = 0.1
    return img, [_square(1, 20, 20, 79), _square(2, 104, 50, 8)]


def test_pieces_across_paper_stay_two_parts():
    img, parts = _scene("paper")
    assert _find(img, parts) == []


@pytest.mark.parametrize("strip", ["grain", "painted"])
def test_pieces_across_the_faces_grain_or_a_painted_cut_are_merged(strip):
    img, parts = _scene(strip)
    found = _find(img, parts)
    assert [(f.label, f.into) for f in found] == [(2, 1)]
    # the gap from the larger piece's filled mask to the piece's nearest pixel centre (4 px of paper drawn: 5 px; the
    # distance transform is OpenCV's 5x5 mask, exact to about 2 % on axis-aligned steps)
    assert found[0].gap_px == pytest.approx(5.0, abs=0.2)


def test_a_piece_of_like_size_is_another_part():
    img, parts = _scene("grain")
    big = parts[0]
    like = _square(2, 104, 20, int(np.sqrt(big.area_px / (0.9 * FRAGMENT_AREA_RATIO))))
    assert _find(img, [big, like]) == []


def test_a_piece_beyond_reach_is_another_part():
    rng = np.random.default_rng(1)
    img = 0.9 + 0.01 * rng.standard_normal((140, 260))
    img[20:100, 20:100] = 0.1
    img[50:59, 150:159] = 0.1
    img[45:64, 100:150] = np.where(rng.random((19, 50)) < 0.5, 0.1, 0.9)  # grain, but 50 px away (reach 11 px)
    assert _find(img, [_square(1, 20, 20, 79), _square(2, 150, 50, 8)]) == []


def test_fragment_term_is_the_hull_less_the_pieces():
    """The term's area: the pieces' convex hull less their area, both from shapely."""
    from scanmass.pipeline.part_terms import with_fragment_term
    from scanmass.section import section_properties

    big = np.array([[0.0, 0.0], [20.0, 0.0], [20.0, 20.0], [0.0, 20.0]])
    piece = np.array([[22.0, 8.0], [25.0, 8.0], [25.0, 11.0], [22.0, 11.0]])
    props = section_properties(big, [], extra=[(piece, 1.0)])
    union = sg.Polygon(big).union(sg.Polygon(piece))
    assert props.area_mm2 == pytest.approx(union.area, rel=1e-12)  # shapely: the pieces' area
    hull_gap = union.convex_hull.area - union.area

    class _Part:  # the fields with_fragment_term and its term read
        area_mm2 = props.area_mm2
        caliper_max_mm = props.caliper_max_mm
        perimeter_mm = props.perimeter_mm
        centroid_u_mm = (0.0, 0.0)
        holes: list = []  # no holes: the hull less the found area
        uncertainty_terms: dict = {}

    for name in ("ixx_mm4", "iyy_mm4", "ixy_mm4", "i1_mm4", "i2_mm4", "polar_mm4"):
        setattr(_Part, name, getattr(props, name))
    mapped = SimpleNamespace(outer_mm=big)  # the larger piece's outline: all the term reads of the mapped part
    captured = {}

    def fake_extra(part, name, term, raised):
        captured[name] = term
        return part

    import scanmass.pipeline.part_terms as pt

    old = pt._with_extra_term
    pt._with_extra_term = fake_extra
    try:
        with_fragment_term(_Part(), mapped, [piece])
    finally:
        pt._with_extra_term = old
    assert captured["fragments"]["area_mm2"] == pytest.approx(hull_gap, rel=1e-9)
