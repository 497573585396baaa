"""Tone curves and sharpening: the edge halo check and the ``tone`` uncertainty term.

Truth: exact-coverage scans (scanmass.testing.scans) measured against shapely (reference
library) through tests/polygon_truth.py. Sharpening is the unsharp mask as image software
defines it, ``s = f + a (f - G_r * f)`` on the stored (encoded) values (common practice),
done here with OpenCV's Gaussian blur; the S-shaped tone curve is a tanh contrast curve on
top of sRGB (an invented stand-in for a phone's rendering, not a check value).
"""

from __future__ import annotations

import math

import cv2
import numpy as np
import pytest
import shapely
from polygon_truth import truth

from scanmass import measure
from scanmass.geometry import offset_ring
from scanmass.load.decode import load_image
from scanmass.scale.mat import make_mat
from scanmass.segment.rings import segment
from scanmass.segment.symmetry import edge_halo
from scanmass.testing.photos import PhotoParts, make_camera, render_photo
from scanmass.testing.scans import SynthPart, circle, rectangle, render_scan, srgb_decode, srgb_encode

DPI = 300.0
PARTS = [
    SynthPart(rectangle(10.0, 10.0, 40.0, 25.0, angle_deg=7.0), [circle(22.0, 22.0, 4.0)]),
    SynthPart(circle(75.0, 25.0, 12.0), [circle(75.0, 25.0, 5.0)]),
]


def _scan(blur_px: float, noise: float = 0.0) -> np.ndarray:
    return render_scan(PARTS, dpi=DPI, size_mm=(100.0, 50.0), blur_px=blur_px, noise=noise, seed=3).image


def _sharpen(img: np.ndarray, amount: float, radius_px: float) -> np.ndarray:
    f = img.astype(np.float64)
    return np.clip(np.round(f + amount * (f - cv2.GaussianBlur(f, (0, 0), radius_px))), 0, 255).astype(np.uint8)


def _pairs(m):
    """(measured part, truth) by x position."""
    found = sorted(m.parts, key=lambda q: q.centroid_mm[0])
    return list(zip(found, [truth(p.outer_mm, p.holes_mm) for p in sorted(PARTS, key=lambda p: p.outer_mm[0, 0])]))


def test_offset_ring_against_shapely_mitre_buffer():
    # shapely's buffer with mitred joins is the reference for a polygon's parallel offset
    square = rectangle(0.0, 0.0, 20.0, 10.0, angle_deg=30.0)
    for d in (0.05, -0.05, 0.4):
        ref = shapely.Polygon(square).buffer(d, join_style="mitre").area
        assert abs(shapely.Polygon(offset_ring(square, d)).area - ref) < 1e-9
        assert abs(shapely.Polygon(offset_ring(square[::-1], d)).area - ref) < 1e-9  # either orientation
    # a circle of radius r offset by d: pi (r + d)^2 (handbook), within the polygon's sag
    ring = circle(0.0, 0.0, 10.0, 2048)
    assert shapely.Polygon(offset_ring(ring, 0.1)).area == pytest.approx(math.pi * 10.1**2, rel=1e-5)


@pytest.mark.parametrize("blur_px", [0.6, 1.0])
def test_halo_found_on_sharpened_edges_only(blur_px):
    for image, sharpened in [(_scan(blur_px, 0.004), False), (_sharpen(_scan(blur_px, 0.004), 1.0, 2.0), True)]:
        loaded = load_image(image, dpi=DPI)
        for rings in segment(loaded, min_area_px=100).parts:
            halo = edge_halo(loaded, rings)
            assert halo.count >= 8
            assert halo.found is sharpened, (blur_px, sharpened, halo)


def test_jpeg_ringing_is_not_a_halo(tmp_path):
    from PIL import Image

    path = tmp_path / "scan.jpg"
    Image.fromarray(_scan(0.8, 0.004)).save(path, quality=75, dpi=(DPI, DPI))
    loaded = load_image(path)
    for rings in segment(loaded, min_area_px=100).parts:
        assert not edge_halo(loaded, rings).found


@pytest.mark.parametrize("amount,radius_px", [(0.6, 1.0), (1.5, 1.5), (1.0, 3.0)])
def test_sharpened_scan_is_warned_and_covered(amount, radius_px):
    m = measure(_sharpen(_scan(0.8), amount, radius_px), dpi=DPI, dpi_rel_u=0)
    assert len(m.parts) == 2
    beyond = []
    for part, t in _pairs(m):
        assert any(w.startswith(f"part {part.label}: its edges show sharpening halos") for w in m.warnings)
        tone = part.uncertainty_terms["tone"]["area_mm2"]
        err = abs(part.area_mm2 - t["area"])
        beyond.append(err > 3 * math.sqrt(part.area_u_mm2**2 - tone**2))
        assert err <= 3 * part.area_u_mm2  # covered with the term ...
        for k in range(2):
            assert abs(part.centroid_mm[k] - t["centroid"][k]) <= 3 * part.centroid_u_mm[k]
    if amount >= 1.0:  # ... which strong sharpening needs: without it a part lies beyond 3 sigma
        assert any(beyond)


def test_plain_scan_has_no_tone_term():
    m = measure(_scan(0.8, 0.004), dpi=DPI, dpi_rel_u=0)
    assert not any("halo" in w for w in m.warnings)
    assert all("tone" not in p.uncertainty_terms for p in m.parts)
    assert m.settings["tone_check"] is None


def _photo(tone) -> tuple[np.ndarray, list[dict]]:
    plate = PhotoParts(rectangle(70.0, 90.0, 80.0, 50.0, angle_deg=17.0), [circle(100.0, 115.0, 8.0, 256)])
    cam = make_camera(tilt_deg=15.0, tilt_dir_deg=40.0, roll_deg=80.0, distance_mm=370.0)
    img = render_photo(make_mat("a4-portrait"), [plate], cam, seed=5, noise=0.002)
    lin = srgb_decode(img.astype(np.float64) / 255.0)
    return np.clip(np.round(255.0 * tone(lin)), 0, 255).astype(np.uint8), [truth(plate.outer_mm, plate.holes_mm)]


def _s_curve(lin: np.ndarray) -> np.ndarray:
    e = srgb_encode(np.clip(lin, 0.0, 1.0))
    return 0.5 + 0.5 * np.tanh(3.0 * (e - 0.5)) / math.tanh(1.5)


def test_photo_with_an_unknown_tone_curve_is_covered():
    image, truths = _photo(_s_curve)
    taken = measure(
        image, printed_x_mm=100.0, printed_y_mm=100.0, thickness_mm=0, encoding="srgb"
    )  # tone curve taken as exact
    doubted = measure(image, printed_x_mm=100.0, printed_y_mm=100.0, thickness_mm=0)
    assert doubted.settings["tone_check"] and taken.settings["tone_check"] is None
    (p_taken,), (p_doubted,), (t,) = taken.parts, doubted.parts, truths
    assert "tone" not in p_taken.uncertainty_terms and "tone" in p_doubted.uncertainty_terms
    # read as exact sRGB, the S-curve puts the plate beyond 3 sigma (-0.75 %); read with --encoding auto,
    # the mat's printed markers show the curve (their edges 0.2 px into the ink at the half-way level,
    # scale.markertone) and the outline moves to where a power law puts the edge: -0.29 %, covered
    assert doubted.settings["marker_tone"]["applied"] is True
    err_taken, err = abs(p_taken.area_mm2 - t["area"]), abs(p_doubted.area_mm2 - t["area"])
    assert err_taken > 3 * p_taken.area_u_mm2
    assert err < 0.5 * err_taken
    assert err <= 3 * p_doubted.area_u_mm2
    hole, true_d = p_doubted.holes[0], 16.0
    assert abs(hole.diameter_mm - true_d) <= 3 * hole.diameter_u_mm
