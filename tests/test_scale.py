"""The scan frame of DESIGN.md (scanmass.scale.planemap.PlaneMap.from_dpi) and how the DPI
uncertainty propagates to the figures.

Truth: the frame formulas of DESIGN.md (x = (i + 0.5) s, y = (H - j - 0.5) s,
s = 25.4 / dpi; 25.4 mm per inch is exact by the 1959 international yard and pound
agreement); the scaling laws of lengths (power 1), areas (power 2) and second moments of
area (power 4) under a uniform scale (dimensional analysis, common practice).
"""

from __future__ import annotations

import numpy as np
import pytest

from scanmass import measure
from scanmass.errors import OptionError
from scanmass.scale.planemap import PlaneMap
from scanmass.testing.scans import SynthPart, circle, l_section, render_scan


def test_pixel_centres_and_corners_in_the_scan_frame():
    dpi, h_px = 300.0, 120
    s = 25.4 / dpi
    m = PlaneMap.from_dpi(dpi, height_px=h_px, rel_u=0.0)
    i = np.array([0, 7, 59, 199])
    j = np.array([0, 13, 119, 64])
    got = m.to_mm(np.column_stack([i, j]))
    assert np.allclose(got[:, 0], (i + 0.5) * s, rtol=0, atol=1e-12)
    assert np.allclose(got[:, 1], (h_px - j - 0.5) * s, rtol=0, atol=1e-12)
    # the image's lower-left corner (pixel edges at -0.5 in OpenCV pixels) is the origin;
    # its upper-left corner is at y = H s
    assert np.allclose(m.to_mm([[-0.5, h_px - 0.5], [-0.5, -0.5]]), [[0.0, 0.0], [0.0, h_px * s]], atol=1e-12)
    assert np.allclose(m.to_px(got), np.column_stack([i, j]), atol=1e-9)
    assert m.mm_per_px == pytest.approx(s, rel=1e-15)
    assert np.allclose(m.local_mm_per_px(np.array([[3.0, 4.0], [150.0, 90.0]])), s, rtol=1e-12)


def test_rectangular_pixels_and_y_flip():
    m = PlaneMap.from_dpi((600.0, 300.0), height_px=50, rel_u=0.0)
    sx, sy = 25.4 / 600, 25.4 / 300
    step = m.to_mm([[1.0, 1.0]]) - m.to_mm([[0.0, 0.0]])
    # one column to the right is +sx; one row down is -sy (y up)
    assert np.allclose(step, [[sx, -sy]], atol=1e-12)
    assert m.mm_per_px == pytest.approx(np.sqrt(sx * sy))


@pytest.mark.parametrize("bad", [0.0, -300.0, float("nan"), "abc", (300.0,)])
def test_bad_dpi_is_an_option_error(bad):
    with pytest.raises(OptionError):
        PlaneMap.from_dpi(bad, height_px=10)


def test_bad_dpi_uncertainty_is_an_option_error():
    with pytest.raises(OptionError):
        PlaneMap.from_dpi(300, height_px=10, rel_u=0.7)


@pytest.fixture(scope="module")
def l_scan():
    part = SynthPart(l_section(8.0, 6.0, 40.0, 30.0, 7.0), [circle(25.0, 12.0, 2.5)])
    return render_scan([part], dpi=300, size_mm=(56, 44), blur_px=0.9, noise=0.004, seed=11)


FIGURES = {  # Part attribute -> power of the length scale
    "area_mm2": 2,
    "perimeter_mm": 1,
    "ixx_mm4": 4,
    "iyy_mm4": 4,
    "ixy_mm4": 4,
    "polar_mm4": 4,
}


def _value(part, name):
    return getattr(part, name)


def test_figures_scale_with_their_power_of_length(l_scan):
    # The same pixels read at a 1 % higher DPI: every length is 1 / 1.01 as long, so a
    # figure of dimension length^p is 1.01^-p as large (dimensional analysis), exactly,
    # since the segmentation in pixels does not depend on the DPI given. Centroids scale
    # about the frame's origin (the image's lower-left corner).
    a = measure(l_scan.image, dpi=300.0, dpi_rel_u=0.0).parts[0]
    b = measure(l_scan.image, dpi=303.0, dpi_rel_u=0.0).parts[0]
    for name, p in FIGURES.items():
        assert _value(b, name) == pytest.approx(_value(a, name) * 1.01**-p, rel=1e-9), name
    assert np.allclose(np.array(b.centroid_mm), np.array(a.centroid_mm) / 1.01, rtol=1e-9)
    # and a second moment is not an area: the test above would fail with power 2
    assert abs(b.ixx_mm4 / a.ixx_mm4 - 1.01**-2) > 1e-3


def test_dpi_rel_u_propagates_with_the_same_powers(l_scan):
    rel = 0.002
    part = measure(l_scan.image, dpi=300.0, dpi_rel_u=rel).parts[0]
    zero = measure(l_scan.image, dpi=300.0, dpi_rel_u=0.0).parts[0]
    scale = part.uncertainty_terms["scale"]
    for name, p in FIGURES.items():
        # first-order: d(ln F) = p d(ln s); a relative scale uncertainty rel gives p rel |F|
        assert scale[name] == pytest.approx(p * rel * abs(_value(part, name)), rel=1e-9), name
        assert zero.uncertainty_terms["scale"][name] == 0.0
    assert scale["centroid_x_mm"] == pytest.approx(rel * part.centroid_mm[0], rel=1e-9)
    assert scale["centroid_y_mm"] == pytest.approx(rel * part.centroid_mm[1], rel=1e-9)
    assert scale["principal_angle_deg"] == 0.0  # a uniform scale turns nothing
    # the totals combine the four terms (edge, threshold, model, scale) in quadrature (GUM 5.1, independent inputs)
    terms = part.uncertainty_terms
    for name, total in [("area_mm2", part.area_u_mm2), ("ixx_mm4", part.ixx_u_mm4)]:
        want = np.sqrt(
            terms["edge"][name] ** 2 + terms["threshold"][name] ** 2 + terms["model"][name] ** 2 + scale[name] ** 2
        )
        assert total == pytest.approx(want, rel=1e-12)
    # without the DPI term only the image terms remain
    image_only = [terms[k]["area_mm2"] for k in ("edge", "threshold", "model")]
    assert zero.area_u_mm2 == pytest.approx(float(np.sqrt(np.sum(np.square(image_only)))))
    # and the stated scale term is what a 1-sigma DPI change actually does to the area
    moved = measure(l_scan.image, dpi=300.0 * (1 + rel), dpi_rel_u=0.0).parts[0]
    assert abs(moved.area_mm2 - zero.area_mm2) == pytest.approx(scale["area_mm2"], rel=5e-3)
