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


def test_overlay_legend_lists_what_is_drawn(monkeypatch):
    import scanmass.outputs.overlay as ov

    # a round disc (principal axes undefined: none drawn) and a rectangle clipped by the left edge
    parts = [SynthPart(circle(50, 25, 12)), SynthPart(rectangle(-5, 5, 20, 15))]
    scan = render_scan(parts, dpi=200, size_mm=(80, 50), blur_px=0.8, noise=0.003, seed=4)
    image = load_image(scan.image, dpi=200)
    m = measure(scan.image, dpi=200, keep_cut=True)
    assert any(p.cut for p in m.parts)
    shown: list = []
    real = ov.legend_items
    monkeypatch.setattr(ov, "legend_items", lambda *a, **k: shown.extend(real(*a, **k)) or real(*a, **k))
    picture = render_overlay(image, m)
    names = [name for name, _ in shown]
    assert "clipped by the image edge" in names
    assert any(n.startswith("centroid 1 sigma ellipse") for n in names)
    # the clipped rectangle's axes are defined, the disc's not: both kinds of line in the legend only if drawn
    drawn_axes = any(p.principal_axes_defined for p in m.parts)
    assert ("I2 axis (long direction)" in names) == drawn_axes
    # the ellipse is drawn black, and the legend says black (it said yellow before)
    colours = dict(shown)
    assert colours[next(n for n in names if n.startswith("centroid 1 sigma"))] == (0, 0, 0)
    assert picture.shape[2] == 3


def test_no_axes_drawn_for_a_round_part():
    scan = render_scan([SynthPart(circle(30, 30, 15))], dpi=200, size_mm=(60, 60), blur_px=0.8, noise=0.003, seed=6)
    m = measure(scan.image, dpi=200)
    assert not m.parts[0].principal_axes_defined
    picture = render_overlay(load_image(scan.image, dpi=200), m)
    green = np.array([115, 158, 0])  # the I2 axis colour, BGR (Okabe-Ito bluish green #009E73)
    assert not _has_colour(picture, green, tol=10)


def test_scale_bar_only_where_one_scale_holds():
    from scanmass.outputs.overlay import SCALE_BAR_MAX_VARIATION, _scale_variation

    # a scan: the same mm per px everywhere (affine map, DESIGN.md scan frame)
    s = 25.4 / 300
    scan = np.array([[s, 0, 0], [0, -s, 1000 * s], [0, 0, 1]])
    assert _scale_variation(scan, 2000, 1000) == pytest.approx(0.0, abs=1e-12)
    # a tilted view: a homography whose third row is not (0, 0, 1); here the local scale at
    # x = 2000 px differs by the factor (1 + 1e-4 * 2000)^2 = 1.44 from that at x = 0
    tilted = scan.copy()
    tilted[2] = [1e-4, 0, 1]
    assert _scale_variation(tilted, 2000, 1000) > SCALE_BAR_MAX_VARIATION
