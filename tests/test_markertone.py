"""The photo's tone curve read off the mat's printed markers (scanmass.scale.markertone).

Truth: photos rendered by scanmass.testing.photos (exact pixel coverage of the projected
polygons, blur, noise, exact sRGB encoding) and then given a known tone curve (a power law on
linear light, the check value); expected areas from shapely (polygon_truth). The committed
path-traced renders (tests/data/reallight) name their tone curve in their truth files
(``view_transform``: Blender's 'Filmic' or 'Standard', the exact sRGB curve).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from polygon_truth import truth

from scanmass import measure
from scanmass.load.decode import load_image
from scanmass.options import resolve_options
from scanmass.pipeline.flow import photo_scale
from scanmass.raster import srgb_encode
from scanmass.scale.markertone import TONE_MIN_OFFSET_PX, MarkerTone, marker_tone
from scanmass.scale.mat import make_mat
from scanmass.testing.photos import PhotoParts, make_camera, render_photo
from scanmass.testing.scans import circle, rectangle

MAT = make_mat("a4-portrait")
REALLIGHT = Path(__file__).resolve().parent / "data" / "reallight"


def _plate():
    outer = rectangle(70.0, 90.0, 80.0, 50.0, angle_deg=17.0)
    return PhotoParts(outer, [circle(100.0, 115.0, 8.0, 256)], level=0.03)


def _photo(gamma: float) -> np.ndarray:
    """A dark plate on the mat (exact sRGB), its linear levels then raised to 1 / gamma (a camera's curve)."""
    cam = make_camera(tilt_deg=15.0, tilt_dir_deg=40.0, roll_deg=90.0, distance_mm=370.0)
    img = render_photo(MAT, [_plate()], cam, seed=2, blur_px=0.8, noise=0.002)
    lut = load_image(np.arange(256, dtype=np.uint8).reshape(16, 16)).to_linear
    return np.rint(srgb_encode(lut[img].astype(np.float64) ** (1.0 / gamma)) * 255.0).astype(np.uint8)


def _tone(img: np.ndarray) -> MarkerTone | None:
    image = load_image(img)
    return marker_tone(image, photo_scale(image, resolve_options(None, {}), "mat"))


def test_exact_srgb_photo_is_left_as_it_is():
    """Exact sRGB: the markers' edges at the half-way level lie on their printed place."""
    tone = _tone(_photo(1.0))
    assert tone is not None and tone.sides >= 40
    assert abs(tone.offset_px) < TONE_MIN_OFFSET_PX and not tone.applies and tone.gamma == 1.0


def test_power_law_tone_curve_is_found_and_the_outline_put_back():
    """A tone curve 1/1.3 on linear light: the markers' edges (and the plate's) read 0.1-0.2 px into
    the dark side; the exponent found is 1.3 within 0.1 (the check value: the curve applied), and
    the plate's area, 0.4 % small when read as exact sRGB, comes within 0.1 % (the photo tests'
    tolerance; truth: shapely)."""
    img = _photo(1.3)
    tone = _tone(img)
    assert tone is not None and tone.applies
    assert -0.2 < tone.offset_px < -0.08
    assert tone.gamma == pytest.approx(1.3, abs=0.1)
    t = truth(_plate().outer_mm, _plate().holes_mm)
    as_srgb = measure(img, printed_x_mm=100.0, printed_y_mm=100.0, encoding="srgb").parts[0]
    read = measure(img, printed_x_mm=100.0, printed_y_mm=100.0)
    assert as_srgb.area_mm2 < t["area"] * (1 - 2e-3)  # the bias the tone curve leaves
    assert read.parts[0].area_mm2 == pytest.approx(t["area"], rel=1e-3)
    assert abs(read.parts[0].area_mm2 - t["area"]) <= 3 * read.parts[0].area_u_mm2
    assert any(w.startswith("tone curve:") for w in read.warnings)
    assert read.settings["marker_tone"]["applied"] is True


@pytest.mark.parametrize("name", ["spot-brass-t10", "mixed-brass-t30", "soft-black-t15", "spot-steel-t0"])
def test_renders_tone_curve_named_by_their_truth_files(name):
    """The path-traced renders: those with Blender's Filmic curve read 0.1-0.25 px into the ink, those
    with the standard (exact sRGB) curve are left as they are (truth files' ``view_transform``)."""
    if not REALLIGHT.exists():
        pytest.skip("tests/data/reallight not in this checkout")
    meta = json.loads((REALLIGHT / f"{name}.json").read_text())
    tone = _tone(np.asarray(load_image(str(REALLIGHT / meta["image"])).grey))
    assert tone is not None
    if meta["view_transform"] == "Filmic":
        assert tone.applies and -0.25 < tone.offset_px < -0.1 and tone.gamma > 1.1
    else:
        assert not tone.applies and abs(tone.offset_px) < TONE_MIN_OFFSET_PX


def test_edge_share_and_move_follow_the_power_law():
    """Half-way in linear light after the power law: (0.5 (a^g + b^g))^(1/g) (closed form)."""
    tone = MarkerTone(offset_px=-0.14, offset_u_px=0.01, gamma=1.3, sides=96, applies=True, ink=0.006, paper=0.51)
    dark, light = 0.156, 0.546
    expected = ((0.5 * (dark**1.3 + light**1.3)) ** (1 / 1.3) - dark) / (light - dark)
    assert tone.edge_share(dark, light) == pytest.approx(expected, rel=1e-12)
    assert tone.edge_share(light, dark) == pytest.approx(1 - expected, rel=1e-12)
    # the markers' own contrast moves by the markers' offset; a paler face by less, none at the paper
    assert tone.edge_move_px(tone.ink) == pytest.approx(0.14, rel=1e-12)
    assert 0 < tone.edge_move_px(0.156) < 0.14
    assert tone.edge_move_px(0.6) == 0.0
    assert math.isclose(MarkerTone(0.02, 0.01, 1.0, 96, False).edge_move_px(0.01), 0.0)
