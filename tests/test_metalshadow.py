"""Coloured cast shadows of mixed light swept from metal faces (``scanmass.segment.metalshadow``).

The synthetic scenes follow the model the module rests on: a pixel of the paper is the sum of the
lights reaching it, each scaled per channel (common practice in illuminant estimation and shadow
removal: a diagonal model of the camera's channels). A warm lamp gives the paper white a share
``f_w`` per channel, a cool light the rest; the paper in the cool light's shadow, lit by a share
``t`` of it, reads ``f_w + t (1 - f_w)`` of the white. A brushed face is drawn as stripes of a dark
and a lit sector with a strong speckle (the mirrored room), the paper with a weak grain. The values
are chosen for these tests, near what the committed render tests/data/reallight/dev-mixed-steel4-t8
shows (the face's levels 0.05-0.34 of the paper, bluish; the warm-lit shadow inside the found region
0.15-0.6, warm; the face's roughness about twice the shadow's).
"""

from __future__ import annotations

import numpy as np

from scanmass.segment.colourshadow import colour_sweep, colour_sweep_cut
from scanmass.segment.metalshadow import metal_colour_sweep, metal_like

WARM = np.array([0.6, 0.8, 1.0])  # the lamp's colour, channels in the image's order (blue, green, red)
F_W = 0.4 * WARM / WARM.mean()  # the warm lamp's share of the paper white per channel
STEEL = np.array([1.05, 1.0, 0.95])  # a bluish grey face's colour


def _scene(
    f_w: np.ndarray, face: np.ndarray, rng: np.random.Generator, lit: float = 0.4, speckle: float = 0.3
) -> tuple[np.ndarray, np.ndarray]:
    """A 40 x 40 px face whose region holds a 6 px band of the cool light's umbra on the right; the
    cool light's penumbra beyond it, the warm lamp's on the left. The face: stripes 4 px wide at 0.05
    and ``lit`` of the paper, with a speckle of ``speckle`` of its level; the paper's grain 1 %."""
    img = np.ones((90, 90, 3))
    mask = np.zeros((90, 90), bool)
    mask[25:65, 25:65] = True
    stripes = np.where((np.arange(34) // 4 % 2)[None, :] == 1, lit, 0.05)
    sectors = stripes * (1.0 + speckle * rng.standard_normal((40, 34)))
    img[25:65, 25:59] = np.clip(sectors, 0.01, None)[..., None] * face
    img[25:65, 59:65] = f_w + 0.05 * (1 - f_w)
    t = np.linspace(0.05, 0.95, 14)[None, :, None]
    img[25:65, 65:79] = 1 - (1 - t) * (1 - f_w)
    img[25:65, 11:25] = 1 - (1 - t[:, ::-1]) * f_w
    img *= 1.0 + 0.01 * rng.standard_normal((90, 90, 1))
    return img.astype(np.float32), mask


def test_metal_face_refused_by_the_matte_sweep_is_swept_to_its_shadow():
    """The matte sweep refuses the streaked face (levels 8 times apart); the metal sweep runs to the
    right, as deep as the umbra's 6 px (within a layer: the shadow's blurred edge against the face),
    and the cut takes the umbra and no stripe of the face."""
    img, mask = _scene(F_W, STEEL, np.random.default_rng(3))
    assert colour_sweep(img, mask, np.ones(3), 12.0) is None
    found = metal_colour_sweep(img, mask, np.ones(3), 12.0)
    assert found is not None and found.metal
    assert found.direction[0] > 0.9  # to the right (x), where the umbra lies
    assert abs(found.length_px - 6) <= 1
    cut = colour_sweep_cut(img, mask, np.ones(3), 12.0, found, found.direction)
    assert cut is not None
    assert cut.cut[25:65, 60:65].mean() > 0.95  # the umbra, bar its blurred edge
    assert not cut.cut[25:65, 25:57].any()  # the face


def test_matte_face_left_to_the_matte_sweep():
    """A face of one level (no stripes: levels within the matte spread) is not the metal sweep's."""
    img, mask = _scene(F_W, STEEL, np.random.default_rng(3), lit=0.05, speckle=0.05)
    assert metal_colour_sweep(img, mask, np.ones(3), 12.0) is None


def test_one_light_colour_refused():
    """Two lights of one colour (the warm lamp's share grey): the penumbrae do not lean apart, and
    colour cannot tell a shadow; the sweep is refused."""
    grey = np.full(3, 0.4)
    img, mask = _scene(grey, STEEL, np.random.default_rng(3))
    assert metal_colour_sweep(img, mask, np.ones(3), 12.0) is None


def test_shadow_like_pixels_on_a_line_smooth_and_not_too_dark():
    """Patches beside a rough face (levels 0.3 +- 50 %) with the shadow lines ``q = 1 - s line``: smooth on a line
    at 0.4 of the paper, shadow-like; smooth on a line at 0.1 (a face's dark sector there: darker than the umbra of
    the renders' shadows, :data:`~scanmass.segment.metalshadow.METAL_MIN_LEVEL`), not; smooth at 0.4 but of the
    face's bluish colour, not (off the lines); on a line but as rough as the face (``s`` speckled), mostly not."""
    import cv2

    line = np.array([1.05, 1.0, 0.95])  # over its mean
    rng = np.random.default_rng(5)
    q = np.clip(0.3 * (1 + 0.5 * rng.standard_normal((80, 60, 1))), 0.01, None) * np.ones(3)  # the rough face
    q[2:12, 5:55] = 1 - 0.6 * line  # level 0.4, on the line
    q[68:78, 5:55] = 1 - 0.9 * line  # level 0.1, on the line
    q[5:75, 2:12] = 0.4 * np.array([1.25, 1.0, 0.75])  # level 0.4, the face's colour
    s = np.clip(0.6 * (1 + 0.5 * rng.standard_normal((70, 10, 1))), 0.0, 0.8)
    q[5:75, 48:58] = 1 - s * line  # on the line, speckled
    q = q.astype(np.float32)
    mask = np.ones((80, 60), bool)
    inside = cv2.distanceTransform(np.pad(mask, 1).astype(np.uint8), cv2.DIST_L2, 3)[1:-1, 1:-1]
    interior = inside > 15
    like = metal_like(q, mask, interior, inside, np.array([line, line[::-1]]), 20.0)
    assert like[4:10, 15:45].mean() > 0.95
    assert not like[70:76, 15:45].any()
    assert not like[15:65, 4:10].any()
    assert like[15:65, 50:56].mean() < 0.2
