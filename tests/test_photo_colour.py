"""Coloured faces brighter than the paper, measured in the yellowness plane (``scanmass.pipeline.photo_colour``).

Truth: the outline a synthetic colour mat photo is drawn from (``scanmass.testing.photos``, exact
pixel coverage); its area and centroid by shapely, not by the code under test. The committed
render dev-soft-brass-t25 (its truth file's outlines, ``tests/_reallight_truth.py``).
"""

from __future__ import annotations

import math
from pathlib import Path

import cv2
import numpy as np
import pytest
from _reallight_truth import truth_part
from PIL import Image
from shapely.geometry import Polygon

import scanmass
from scanmass.errors import SegmentationError
from scanmass.load.decode import srgb_to_linear
from scanmass.raster import srgb_encode
from scanmass.scale.mat import make_mat
from scanmass.testing.photos import make_camera, polygon_coverage, render_photo
from scanmass.testing.scans import circle

#: The brass face's red and blue over its green (linear): a yellow that takes half the blue of the green.
BRASS_RB = (1.08, 0.5)
#: Its luma over the paper's (ITU-R BT.709 weights, common practice): a little brighter than the paper, so its
#: grey levels do not tell it from the paper at all.
BRASS_LUMA = 1.03


def _brass_disc_photo(path: Path) -> tuple[float, tuple[float, float]]:
    """A colour mat photo of a brass disc (radius 30 mm) brighter than the paper; returns its area and centroid."""
    outer = circle(100.0, 140.0, 30.0, 512)
    cam = make_camera(tilt_deg=0.0, distance_mm=330.0)
    mat = render_photo(make_mat("a4-portrait"), [], cam, blur_px=0.0, noise=0.0, light=(0.0, 0.0))
    lin = srgb_to_linear(mat.astype(np.float64) / 255.0)
    cover = polygon_coverage([(cam.project(outer), [])], lin.shape)
    paper = float(np.median(lin[cover == 0]))
    green = BRASS_LUMA * paper / (0.2126 * BRASS_RB[0] + 0.7152 + 0.0722 * BRASS_RB[1])
    brass = (BRASS_RB[0] * green, green, BRASS_RB[1] * green)  # R, G, B (PIL's order)
    rgb = np.stack([(1.0 - cover) * lin + cover * c for c in brass], axis=2)
    rgb = cv2.GaussianBlur(rgb, (0, 0), 1.0)
    rgb = np.clip(rgb + np.random.default_rng(3).normal(0.0, 0.002, rgb.shape), 0.0, 1.0)
    Image.fromarray(np.rint(srgb_encode(rgb) * 255.0).astype(np.uint8)).save(path)
    poly = Polygon(outer)  # shapely: the reference area and centroid
    return poly.area, (poly.centroid.x, poly.centroid.y)


def test_brass_disc_brighter_than_the_paper_is_found_by_colour_with_its_area(tmp_path):
    path = tmp_path / "brass.png"
    area, centroid = _brass_disc_photo(path)
    m = scanmass.measure(path, thickness_mm=0.0)
    assert len(m.parts) == 1
    part = m.parts[0]
    assert "colour_face" in part.uncertainty_terms
    assert any(w.startswith("coloured face brighter than the paper") for w in m.warnings)
    assert abs(part.area_mm2 - area) <= 3 * part.area_u_mm2, (part.area_mm2, area, part.area_u_mm2)
    assert abs(part.area_mm2 - area) <= 0.003 * area  # the median target
    assert math.dist(part.centroid_mm, centroid) <= 0.05


REALLIGHT = Path(__file__).resolve().parent / "data" / "reallight"


def test_grey_copy_of_a_pale_brass_photo_is_refused_not_measured_in_pieces(tmp_path):
    """Without colour the pale brass cam (brighter than the paper) is seen only as its bore's dark wall and its shaded side.

    Measured so it read -95 % in area with a stated uncertainty of a few per cent of the truth;
    the region found in the bore lies within the brighter face all round
    (``photo_checks._check_bright_surrounds``), so the photo is refused. Truth: the render's
    outlines (``_reallight_truth.truth_part``, shapely).
    """
    rgb = np.asarray(Image.open(REALLIGHT / "dev-soft-brass-t25.jpg").convert("RGB"), np.float64)
    luma = np.rint(rgb @ np.array([0.299, 0.587, 0.114])).astype(np.uint8)  # ITU-R BT.601 luma, common practice
    path = tmp_path / "grey-brass.png"
    Image.fromarray(np.stack([luma] * 3, axis=2)).save(path)
    for thickness in (None, 0.0):
        with pytest.raises(SegmentationError, match="brighter than the paper was seen only in pieces.*diffuse light"):
            scanmass.measure(path, thickness_mm=thickness)
    # the colour photo itself is measured by its colour, the cam within its stated uncertainty
    cam = truth_part("dev-soft-brass-t25", "cam")
    m = scanmass.measure(REALLIGHT / "dev-soft-brass-t25.jpg", thickness_mm=cam["t"])
    best = min(m.parts, key=lambda p: math.dist(p.centroid_mm, cam["centroid"]))
    assert abs(best.area_mm2 - cam["area"]) <= 3 * best.area_u_mm2
