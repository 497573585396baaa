"""Coloured cast shadows of mixed light (``scanmass.segment.colourshadow``).

The synthetic scenes follow the model the module rests on: a pixel of the paper is the sum of
the lights reaching it, each scaled per channel (common practice in illuminant estimation and
shadow removal: a diagonal model of the camera's channels). A warm lamp gives the paper white a
share ``f_w`` per channel, a cool light the rest; the paper in the cool light's shadow, lit by a
share ``t`` of it, reads ``f_w + t (1 - f_w)`` of the white. The values (shares, face levels) are
chosen for these tests, near what the committed render tests/data/reallight/dev-mixed-black-t15
shows (a black face at 0.07-0.10 of the paper, bluish; the warm-lit umbra about 0.15, warm).
"""

from __future__ import annotations

import numpy as np

from scanmass.segment.colourshadow import coloured_shadow_cut, shadow_lines

WARM = np.array([0.6, 0.8, 1.0])  # the lamp's colour, channels in the image's order (blue, green, red)
F_W = 0.3 * WARM / WARM.mean()  # the warm lamp's share of the paper white per channel
FACE = 0.07 * np.array([1.08, 0.97, 0.95])  # a dark bluish face


def _scene(f_w: np.ndarray, face: np.ndarray, rng: np.random.Generator, face_spread: float = 0.0) -> tuple:
    """A 40 x 40 px face whose region holds an 8 px band of the cool light's umbra on the right;
    the cool light's penumbra beyond it, the warm lamp's on the left; a little noise."""
    img = np.ones((90, 90, 3))
    mask = np.zeros((90, 90), bool)
    mask[25:65, 25:65] = True
    # brushed sectors: stripes 4 px wide, every other one 1 + face_spread times as bright
    stripes = (np.arange(32) // 4 % 2).astype(float)[None, :, None]
    img[25:65, 25:57] = face * (1.0 + face_spread * stripes)
    img[25:65, 57:65] = f_w
    t = np.linspace(0.05, 0.95, 14)[None, :, None]
    img[25:65, 65:79] = 1 - (1 - t) * (1 - f_w)
    img[25:65, 11:25] = 1 - (1 - t[:, ::-1]) * f_w
    img += rng.normal(0.0, 0.002, img.shape)
    return img.astype(np.float32), mask


def test_lines_are_the_blocked_lights_colours():
    # each shadow misses the blocked light: the cool light's (1 - f_w) and the warm lamp's (f_w),
    # each over its mean (the model above, worked by hand: (1 - f_w) / mean = (1.2, 1.0, 0.8)
    # for f_w = 0.3 (0.75, 1, 1.25), whose mean is 0.7)
    img, mask = _scene(F_W, FACE, np.random.default_rng(1))
    found = shadow_lines(img, mask, 14.0)
    assert found is not None
    cool_missing, warm_missing = found.lines
    assert np.allclose(cool_missing, (1 - F_W) / (1 - F_W).mean(), atol=0.03)
    assert np.allclose(warm_missing, WARM / WARM.mean(), atol=0.03)


def test_warm_umbra_inside_a_dark_face_is_cut_and_the_face_kept():
    img, mask = _scene(F_W, FACE, np.random.default_rng(2))
    cut = coloured_shadow_cut(img, mask, np.ones(3), 14.0)
    assert cut is not None
    assert cut.cut[25:65, 58:65].all()  # the umbra band (its first column blurs with the face)
    assert not cut.cut[25:65, 25:56].any()  # the face
    assert cut.direction is None  # not found by a sweep


def test_one_light_colour_is_left_to_the_grain_rules():
    # a white lamp and a white fill: both shadows keep the paper's colour, the lines coincide
    img, mask = _scene(np.full(3, 0.3), FACE, np.random.default_rng(3))
    assert coloured_shadow_cut(img, mask, np.ones(3), 14.0) is None


def test_a_face_that_mirrors_the_lights_is_refused():
    # the face's levels 1 and 6 times the darkest (brushed steel mirroring lamps and room)
    img, mask = _scene(F_W, FACE, np.random.default_rng(4), face_spread=5.0)
    assert coloured_shadow_cut(img, mask, np.ones(3), 14.0) is None


def test_a_face_of_the_umbras_colour_is_not_told_apart():
    # a face with the warm lamp's colour at the umbra's colour: it lies on the cool light's shadow line
    img, mask = _scene(F_W, 0.5 * F_W, np.random.default_rng(5))
    cut = coloured_shadow_cut(img, mask, np.ones(3), 14.0)
    assert cut is None or not cut.cut[25:65, 25:56].any()
