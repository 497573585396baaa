"""The map stage: pixel rings through a PlaneMap into millimetres.

Check values: the scan frame of DESIGN.md (pixel (i, j) has its centre at
x = (i + 0.5) s, y = (H - j - 0.5) s, s = 25.4 / dpi; 25.4 mm per inch by definition of
the inch), evaluated here by hand, not through PlaneMap; OpenCV's
cv2.perspectiveTransform and cv2.contourArea (reference library); shapely's area and
centroid (reference library); the product moment of an L made of two rectangles by the
parallel-axis theorem, each axis-aligned rectangle having no product moment about its own
centroid (handbook closed form, common practice).
"""

from __future__ import annotations

import math

import cv2
import numpy as np
import pytest
import shapely

from scanmass.load.decode import load_image
from scanmass.mapping import map_cut, map_part, shoelace_area
from scanmass.scale.planemap import PlaneMap, PlaneMapSample
from scanmass.section import section_properties
from scanmass.segment.rings import PartRings, segment
from scanmass.testing.scans import SynthPart, l_section, rectangle, render_scan

DPI = 300.0
S_MM = 25.4 / DPI  # mm per px, by definition of the inch


def _px_from_mm(ring_mm: np.ndarray, height_px: int) -> np.ndarray:
    """DESIGN.md's scan-frame formula, inverted by hand: i = x / s - 0.5, j = H - y / s - 0.5."""
    ring = np.asarray(ring_mm, float)
    return np.column_stack([ring[:, 0] / S_MM - 0.5, height_px - ring[:, 1] / S_MM - 0.5])


def _rings(outer_px: np.ndarray, holes_px: list[np.ndarray] = (), gradients: bool = False) -> PartRings:
    """A PartRings as the segment stage would give it (edge statistics irrelevant here)."""
    grad = np.arange(len(outer_px), dtype=float) if gradients else np.ones(len(outer_px))
    return PartRings(
        label=1,
        outer_px=np.asarray(outer_px, float),
        holes_px=[np.asarray(h, float) for h in holes_px],
        cut=False,
        bbox_px=(0, 0, 1, 1),
        area_px=0.0,
        contrast=1.0,
        noise_rel=0.01,
        gradient_px=grad,
        blur_px=1.0,
        level_rel_u=0.01,
        hole_gradients_px=[np.ones(len(h)) for h in holes_px],
    )


def test_pixel_centres_land_on_the_scan_frame():
    """Single pixel centres, by the formula of DESIGN.md."""
    height = 400
    pts_px = np.array([[0.0, 0.0], [0.0, height - 1.0], [123.0, 45.0], [10.25, 300.75]])
    square = np.array([[0, 0], [1, 0], [1, 1], [0, 1]], float) + pts_px[2]
    m = map_part(_rings(square), PlaneMap.from_dpi(DPI, height_px=height))
    expected = np.column_stack([(square[:, 0] + 0.5) * S_MM, (height - square[:, 1] - 0.5) * S_MM])
    assert {tuple(p) for p in np.round(m.outer_mm, 12)} == {tuple(p) for p in np.round(expected, 12)}
    assert np.allclose(m.mm_per_px[0], S_MM, rtol=1e-12)
    full = PlaneMap.from_dpi(DPI, height_px=height).to_mm(pts_px)
    assert np.allclose(full[:, 0], (pts_px[:, 0] + 0.5) * S_MM, rtol=0, atol=1e-12)
    assert np.allclose(full[:, 1], (height - pts_px[:, 1] - 0.5) * S_MM, rtol=0, atol=1e-12)


def test_square_at_a_sub_pixel_position_through_segment_and_map():
    """A half-pixel slip would move the centroid by 0.5 px = 0.042 mm; allowed: 0.02 px."""
    x0, y0, side = 10.3721, 7.9154, 20.0  # mm, invented sub-pixel position
    scan = render_scan([SynthPart(rectangle(x0, y0, side, side))], dpi=DPI, size_mm=(40.0, 36.0), blur_px=0.8)
    image = load_image(scan.image, dpi=DPI)
    seg = segment(image, min_area_px=50.0)
    (rings,) = seg.parts
    m = map_part(rings, PlaneMap.from_dpi(DPI, height_px=image.height_px))
    props = section_properties(m.outer_mm, list(m.holes_mm))
    tol_mm = 0.02 * S_MM
    assert props.centroid_mm[0] == pytest.approx(x0 + side / 2, abs=tol_mm)
    assert props.centroid_mm[1] == pytest.approx(y0 + side / 2, abs=tol_mm)
    # each side, away from the (blur-rounded) corners, where the square's edge is
    o = m.outer_mm
    along_y = (o[:, 1] > y0 + 2) & (o[:, 1] < y0 + side - 2)
    along_x = (o[:, 0] > x0 + 2) & (o[:, 0] < x0 + side - 2)
    sides = [
        (np.median(o[along_y & (o[:, 0] < x0 + side / 2), 0]), x0),
        (np.median(o[along_y & (o[:, 0] > x0 + side / 2), 0]), x0 + side),
        (np.median(o[along_x & (o[:, 1] < y0 + side / 2), 1]), y0),
        (np.median(o[along_x & (o[:, 1] > y0 + side / 2), 1]), y0 + side),
    ]
    for got, want in sides:
        assert got == pytest.approx(want, abs=0.05 * S_MM)
    assert shoelace_area(m.outer_mm) > 0  # counter-clockwise in mm


@pytest.mark.parametrize("reverse", [False, True])
def test_y_flip_orients_rings_and_keeps_the_sign_of_ixy(reverse):
    """An L (vertical leg on the left, foot at the bottom) has a negative product moment."""
    height = 1000
    outer_mm = l_section(20.0, 15.0, 60.0, 45.0, 8.0)
    hole_mm = rectangle(50.0, 17.0, 6.0, 4.0)  # in the foot
    outer_px, hole_px = _px_from_mm(outer_mm, height), _px_from_mm(hole_mm, height)
    if reverse:
        outer_px, hole_px = outer_px[::-1], hole_px[::-1]
    m = map_part(_rings(outer_px, [hole_px], gradients=True), PlaneMap.from_dpi(DPI, height_px=height))
    assert shoelace_area(m.outer_mm) > 0 and shoelace_area(m.holes_mm[0]) < 0  # outer CCW, hole CW
    # per-vertex values travel with their vertex
    plane = PlaneMap.from_dpi(DPI, height_px=height)
    for k, g in enumerate(m.gradients_px[0]):
        assert np.allclose(plane.to_mm(outer_px[int(g)]), m.outer_mm[k], atol=1e-12)
    props = section_properties(m.outer_mm, list(m.holes_mm))
    # closed form: two rectangles (leg 8 x 45 at the corner, foot 52 x 8 beside it) minus the hole
    rects = [(20.0, 15.0, 8.0, 45.0), (28.0, 15.0, 52.0, 8.0), (50.0, 17.0, 6.0, 4.0)]
    signs = [1.0, 1.0, -1.0]
    poly = shapely.Polygon(outer_mm, [hole_mm])
    xc, yc = poly.centroid.x, poly.centroid.y
    ixy = sum(s * w * h * (x + w / 2 - xc) * (y + h / 2 - yc) for s, (x, y, w, h) in zip(signs, rects))
    assert ixy < 0
    assert props.ixy_mm4 == pytest.approx(ixy, rel=1e-9)
    assert props.area_mm2 == pytest.approx(poly.area, rel=1e-12)
    assert props.centroid_mm == pytest.approx((xc, yc), rel=1e-12)


def test_homography_map_equals_opencv_perspective_transform():
    h = np.array([[0.21, 0.013, -12.0], [-0.009, -0.205, 240.0], [1.1e-5, -2.3e-5, 1.0]])
    h_sample = h @ np.diag([1.001, 0.999, 1.0])
    square_px = np.array([[300.0, 200.0], [700.0, 200.0], [700.0, 600.0], [300.0, 600.0]])
    plane = PlaneMap(matrix=h, method="mat", rel_u=0.0, samples=(PlaneMapSample(h_sample),))
    m = map_part(_rings(square_px), plane)
    for got, matrix in ((m.outer_mm, h), (m.sample_rings_mm[0][0], h_sample)):
        ref = cv2.perspectiveTransform(square_px.reshape(-1, 1, 2), matrix).reshape(-1, 2)
        if shoelace_area(ref) < 0:  # the map stage puts the ring counter-clockwise
            ref = ref[::-1]
        assert np.allclose(got, ref, rtol=1e-12, atol=1e-12)
    # the local pixel size: sqrt |det J| of the homography's Jacobian, by central differences
    centre = np.array([[500.0, 400.0]])
    d = 1e-3
    jx = (
        cv2.perspectiveTransform((centre + [d, 0]).reshape(-1, 1, 2), h)
        - cv2.perspectiveTransform((centre - [d, 0]).reshape(-1, 1, 2), h)
    ).ravel() / (2 * d)
    jy = (
        cv2.perspectiveTransform((centre + [0, d]).reshape(-1, 1, 2), h)
        - cv2.perspectiveTransform((centre - [0, d]).reshape(-1, 1, 2), h)
    ).ravel() / (2 * d)
    assert plane.local_mm_per_px(centre)[0] == pytest.approx(math.sqrt(abs(jx[0] * jy[1] - jx[1] * jy[0])), rel=1e-6)


def test_cut_part_area_in_px_and_box_in_mm():
    contour = np.array([[0, 40], [37, 40], [37, 90], [12, 90], [0, 71]], dtype=np.int32)
    rings = _rings(contour.astype(float))
    cut = map_cut(rings, PlaneMap.from_dpi(DPI, height_px=100))
    assert cut.area_px == cv2.contourArea(contour.reshape(-1, 1, 2))  # exact for integer vertices
    assert cut.bbox_mm == pytest.approx((0.5 * S_MM, (100 - 90 - 0.5) * S_MM, 37.5 * S_MM, (100 - 40 - 0.5) * S_MM))
