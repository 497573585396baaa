"""End-to-end measuring of synthetic scans with known exact properties.

Truth: every part is an exact polygon (circles are fine polygons); the scans are rendered
by scanmass.testing.scans with exact per-pixel area coverage (tested on its own in
test_synth.py), then blurred, noised and sRGB-encoded. Expected values come from the
polygons via shapely (reference library) and, for simple shapes, closed forms from a
statics handbook section table (rectangle b h^3/12, circle pi r^4/4; common practice).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from polygon_truth import truth

from scanmass import measure
from scanmass.errors import PartCutError, ScaleError, SegmentationError
from scanmass.testing.scans import SynthPart, circle, l_section, rectangle, render_scan, save_scan

#: Relative tolerances of the measured figures on these clean synthetic scans.
AREA_RTOL = 1e-3
MOMENT_RTOL = 2e-3
CENTROID_TOL_PX = 0.05


def _truth(part: SynthPart) -> dict:
    """Area and centroid from shapely; centroidal second moments by Green's vertex sums."""
    return truth(part.outer_mm, part.holes_mm)


def _match(parts, truths):
    out = []
    for t in truths:
        p = min(parts, key=lambda p: math.dist(p.centroid_mm, t["centroid"]))
        out.append((p, t))
    return out


def _plate_with_holes() -> SynthPart:
    return SynthPart(
        rectangle(12.3, 14.1, 46.0, 28.0, angle_deg=11.0), [circle(27.0, 26.0, 4.0), circle(44.0, 31.5, 6.5)]
    )


SCENES = {
    "plate+disc": [_plate_with_holes(), SynthPart(circle(88.0, 40.0, 14.0))],
    "l-section": [SynthPart(l_section(20.0, 15.0, 60.0, 45.0, 8.0))],
}


@pytest.mark.parametrize("dpi", [300, 600])
@pytest.mark.parametrize("polarity", ["dark", "light"])
def test_synthetic_scan_matches_truth(dpi, polarity):
    parts = SCENES["plate+disc"]
    fg, bg = (0.06, 0.82) if polarity == "dark" else (0.7, 0.04)
    scan = render_scan(
        parts,
        dpi=dpi,
        size_mm=(115, 75),
        background=bg,
        foreground=fg,
        blur_px=1.0,
        noise=0.008,
        illumination=(0.08, -0.05),
        seed=dpi,
    )
    m = measure(scan.image, dpi=dpi)
    assert len(m.parts) == 2
    px = 25.4 / dpi
    for p, t in _match(m.parts, [_truth(s) for s in parts]):
        assert p.area_mm2 == pytest.approx(t["area"], rel=AREA_RTOL)
        assert math.dist(p.centroid_mm, t["centroid"]) < CENTROID_TOL_PX * px
        assert p.ixx_mm4 == pytest.approx(t["ixx"], rel=MOMENT_RTOL)
        assert p.iyy_mm4 == pytest.approx(t["iyy"], rel=MOMENT_RTOL)
        assert p.ixy_mm4 == pytest.approx(t["ixy"], rel=MOMENT_RTOL, abs=MOMENT_RTOL * t["ixx"])
        # the stated (image-only) uncertainty covers the error: 3 sigma of edge + threshold
        # terms (the synthetic scale is exact, so the DPI term is left out here)
        terms = p.uncertainty_terms

        def u_image(name: str) -> float:
            return math.hypot(terms["edge"][name], terms["threshold"][name])

        u_area = u_image("area_mm2")
        assert abs(p.area_mm2 - t["area"]) < 3 * u_area + 1e-9
        assert abs(p.centroid_mm[0] - t["centroid"][0]) < 3 * u_image("centroid_x_mm") + 1e-9
        assert abs(p.centroid_mm[1] - t["centroid"][1]) < 3 * u_image("centroid_y_mm") + 1e-9
        assert abs(p.ixx_mm4 - t["ixx"]) < 3 * u_image("ixx_mm4") + 1e-9
        # the total includes the DPI term and is therefore larger
        assert p.area_u_mm2 >= u_area


def test_hole_diameters_match_drawn_circles():
    # truth: the drawn circles' radii (regular polygons with sagitta < 1e-4 mm)
    scan = render_scan([_plate_with_holes()], dpi=600, size_mm=(70, 55), blur_px=1.2, noise=0.005, seed=3)
    m = measure(scan.image, dpi=600)
    diameters = sorted(h.diameter_mm for h in m.parts[0].holes)
    assert diameters == pytest.approx([8.0, 13.0], abs=0.004)
    for hole in m.parts[0].holes:
        assert hole.roundness_mm < 0.02
        assert hole.diameter_u_mm > 0


def test_half_pixel_convention_large_square():
    # DESIGN.md: pixel (i, j) has its centre at ((i + 0.5) s, (H - j - 0.5) s). A square
    # whose exact centroid is known must come back at that point, not half a pixel off.
    dpi = 254  # s = 0.1 mm exactly
    square = SynthPart(rectangle(10.037, 7.263, 20.0, 20.0))
    scan = render_scan([square], dpi=dpi, shape_px=(400, 420), blur_px=0.8, noise=0.0, seed=1)
    m = measure(scan.image, dpi=dpi)
    cx, cy = m.parts[0].centroid_mm
    # truth: the square's centre (closed form), 20.037, 17.263 mm
    assert cx == pytest.approx(20.037, abs=0.002)
    assert cy == pytest.approx(17.263, abs=0.002)


def test_ixy_sign_of_l_section_in_y_up_frame():
    # An L with legs along +x and +y from its corner: the material lies mostly where
    # (x - xc)(y - yc) < 0, so Ixy < 0 (statics handbook sign convention, product of area).
    parts = SCENES["l-section"]
    scan = render_scan(parts, dpi=300, size_mm=(100, 80), blur_px=0.9, noise=0.004, seed=5)
    m = measure(scan.image, dpi=300)
    t = _truth(parts[0])
    assert t["ixy"] < 0
    assert m.parts[0].ixy_mm4 == pytest.approx(t["ixy"], rel=MOMENT_RTOL)
    # principal I2 axis direction of an equal-leg L lies along its symmetry line (135 deg or 45 deg)
    assert m.parts[0].i1_mm4 >= m.parts[0].i2_mm4


def test_file_round_trip_png_jpeg(tmp_path):
    parts = [_plate_with_holes()]
    scan = render_scan(parts, dpi=300, size_mm=(70, 55), blur_px=1.0, noise=0.006, seed=9)
    t = _truth(parts[0])
    for name in ("scan.png", "scan.jpg", "scan.tif"):
        path = save_scan(scan, tmp_path / name, quality=95)
        m = measure(path)  # DPI from the file
        assert m.scale.dpi == pytest.approx(300.0)
        assert m.parts[0].area_mm2 == pytest.approx(t["area"], rel=2e-3)
        assert m.source.sha256 and len(m.source.sha256) == 64


def test_missing_dpi_is_a_scale_error(tmp_path):
    scan = render_scan([_plate_with_holes()], dpi=300, size_mm=(70, 55), seed=2)
    path = save_scan(scan, tmp_path / "nodpi.png", dpi="omit")
    with pytest.raises(ScaleError, match=r"--dpi"):
        measure(path)


def test_blank_image_has_no_part():
    with pytest.raises(SegmentationError, match="no contrast"):
        measure(np.full((100, 120), 200, np.uint8), dpi=300)


def test_cut_part_left_out_and_kept_on_request():
    parts = [SynthPart(rectangle(-5.0, 10.0, 30.0, 20.0)), SynthPart(circle(60.0, 30.0, 10.0))]
    scan = render_scan(parts, dpi=300, size_mm=(90, 60), blur_px=0.9, noise=0.004, seed=4)
    m = measure(scan.image, dpi=300)
    assert len(m.parts) == 1 and len(m.cut_parts) == 1
    assert any("edge" in w for w in m.warnings)
    # the visible 25 x 20 mm of the cut rectangle (closed form), in px and in mm (within 2 px)
    s_mm = 25.4 / 300
    assert m.cut_parts[0]["area_px"] == pytest.approx(25.0 * 20.0 / s_mm**2, rel=0.01)
    assert m.cut_parts[0]["bbox_mm"] == pytest.approx([0.0, 10.0, 25.0, 30.0], abs=2 * s_mm)
    m2 = measure(scan.image, dpi=300, keep_cut=True)
    assert len(m2.parts) == 2 and any(p.cut for p in m2.parts)


def test_only_cut_parts_is_a_part_cut_error():
    scan = render_scan([SynthPart(rectangle(-5.0, 10.0, 30.0, 20.0))], dpi=300, size_mm=(60, 40), seed=5)
    with pytest.raises(PartCutError, match="1 part\\(s\\) touch the image edge.*--keep-clipped") as info:
        measure(scan.image, dpi=300)
    assert isinstance(info.value, SegmentationError) and info.value.count == 1
    assert len(measure(scan.image, dpi=300, keep_cut=True).parts) == 1
    with pytest.raises(SegmentationError) as blank:
        measure(np.full((100, 120), 200, np.uint8), dpi=300)
    assert not isinstance(blank.value, PartCutError)


def test_specks_below_min_area_ignored():
    parts = [SynthPart(circle(30.0, 30.0, 12.0)), SynthPart(circle(70.0, 30.0, 0.4))]
    scan = render_scan(parts, dpi=300, size_mm=(100, 60), blur_px=0.9, noise=0.004, seed=6)
    assert len(measure(scan.image, dpi=300, min_area_mm2=2.0).parts) == 1
    assert len(measure(scan.image, dpi=300, min_area_mm2=0.1).parts) == 2


def test_manual_threshold_override():
    parts = [SynthPart(circle(30.0, 30.0, 12.0))]
    scan = render_scan(parts, dpi=300, size_mm=(60, 60), blur_px=1.0, noise=0.003, seed=7)
    auto = measure(scan.image, dpi=300).parts[0].area_mm2
    # a darker manual threshold on a dark part shrinks the outline
    manual = measure(scan.image, dpi=300, threshold=0.45).parts[0].area_mm2
    assert manual < auto
    assert auto == pytest.approx(math.pi * 144, rel=AREA_RTOL)  # disc area, closed form


def test_result_document_keys_and_round_trip():
    from scanmass.measurement import Measurement

    scan = render_scan([_plate_with_holes()], dpi=300, size_mm=(70, 55), seed=8, noise=0.004)
    m = measure(scan.image, dpi=300)
    doc = m.to_dict()
    for key in ("schema", "source", "scale", "parts", "warnings"):
        assert key in doc
    part = doc["parts"][0]
    for key in (
        "label",
        "area_mm2",
        "area_u_mm2",
        "centroid_mm",
        "centroid_u_mm",
        "perimeter_mm",
        "ixx_mm4",
        "iyy_mm4",
        "ixy_mm4",
        "i1_mm4",
        "i2_mm4",
        "principal_angle_deg",
        "holes",
        "bbox_mm",
    ):
        assert key in part
    assert {"edge", "threshold", "scale"} <= set(part["uncertainty_terms"])
    for key in ("method", "mm_per_px", "mm_per_px_rel_u"):
        assert key in doc["scale"]
    again = Measurement.from_json(m.to_json())
    assert again.parts[0].area_mm2 == m.parts[0].area_mm2
    assert np.allclose(again.parts[0].outline_mm, m.parts[0].outline_mm, atol=1e-5)
