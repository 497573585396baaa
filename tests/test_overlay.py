"""The overlay picture: size guard, what is drawn, and the mat case's top view."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from scanmass import measure
from scanmass.load.decode import load_image
from scanmass.outputs.overlay import OVERLAY_MAX_SIDE_PX, encode_png, render_overlay
from scanmass.testing.scans import SynthPart, circle, rectangle, render_scan

SAMPLES = Path(__file__).resolve().parent.parent / "samples"
BLUE = np.array([178, 114, 0])  # outline colour, BGR (Okabe-Ito blue #0072B2)
VERMILLION = np.array([0, 94, 213])  # hole colour, BGR (#D55E00)


def _has_colour(picture: np.ndarray, bgr: np.ndarray, tol: int = 40) -> bool:
    return bool((np.abs(picture.astype(int) - bgr).sum(axis=2) < tol).any())


@pytest.mark.slow
def test_overlay_draws_outline_hole_and_stays_small():
    parts = [SynthPart(rectangle(20, 20, 150, 90), [circle(60, 60, 10)])]
    scan = render_scan(parts, dpi=600, size_mm=(190, 130), blur_px=0.9, noise=0.004, seed=2)  # 4488 x 3071 px
    image = load_image(scan.image, dpi=600)
    m = measure(scan.image, dpi=600)
    picture = render_overlay(image, m)
    assert max(picture.shape[:2]) <= OVERLAY_MAX_SIDE_PX
    assert picture.shape[2] == 3 and picture.dtype == np.uint8
    assert _has_colour(picture, BLUE) and _has_colour(picture, VERMILLION)
    assert encode_png(picture)[:8] == b"\x89PNG\r\n\x1a\n"


def test_overlay_of_a_mat_photo_adds_the_top_view():
    photo = SAMPLES / "wrenfield-chainstay-gusset-on-mat.jpg"
    image = load_image(photo)
    m = measure(photo, printed_x_mm=100.4, printed_y_mm=99.7, thickness_mm=2.5)
    assert m.scale.method == "mat" and m.scale.extra["markers_px"]
    picture = render_overlay(image, m)
    zoom = min(1.0, OVERLAY_MAX_SIDE_PX / max(image.grey.shape))
    assert picture.shape[1] > round(image.grey.shape[1] * zoom)  # photo + top view side by side
