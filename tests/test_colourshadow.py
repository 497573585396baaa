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

from scanmass.segment import colourshadow
from scanmass.segment.colourshadow import coloured_shadow_cut, shadow_lines, tint_cut
from scanmass.segment.shadowlayer import ShadowCut

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


# --- tint_cut: a brass face as dark as its neutral shadow under one hard white light ---------------------------
# The shadow is the paper in less light and keeps the paper's colour; a brass face is yellow (blue well under
# green) at any level (common practice: the diagonal model above with one white light). The face's colour
# (blue 0.4 of its green, yellowness 0.6) and levels (0.0205 of the paper white on the face, 0.0177 in the shadow:
# 1.16 times) are chosen near what the committed render tests/data/reallight/dev-spot-brass2-t27 shows (its
# bracket: yellowness 0.59, levels 0.0205 and 0.0177); the noise is chosen for these tests.
BRASS = np.array([0.4, 1.0, 1.6])  # blue, green, red (the image's order), mean 1: yellowness 1 - 0.4 = 0.6


def _brass_scene(
    face_level: float, shadow_level: float, grain: float, noise: float, rng: np.random.Generator
) -> tuple[np.ndarray, np.ndarray, ShadowCut]:
    """A found region (rows 10-49, columns 10-59) whose last 6 columns are the neutral cast shadow (truth: columns
    54-59), its bottom row the face's blurred rim against the lit paper (half face, half paper), and the cut a sweep
    would give: the shadow band with 2 columns of face, and a sliver along the bottom row (a stretch of outline
    parallel to the sweep). ``grain``: the share a pixel's level varies by, the face's ``grain``, the shadow's 4 times
    that (the render's shadow is 4.9 times as grainy as its face); ``noise``: each channel's own (absolute)."""
    img = np.ones((60, 80, 3))
    mask = np.zeros((60, 80), bool)
    mask[10:50, 10:60] = True
    img[10:50, 10:54] = face_level * BRASS * (1.0 + grain * rng.standard_normal((40, 44, 1)))
    img[10:50, 54:60] = shadow_level * (1.0 + 4.0 * grain * rng.standard_normal((40, 6, 1)))
    img[49, 10:54] = 0.5 * (face_level * BRASS + 1.0)  # the lit rim: blurred with the paper
    img[10:50, 10:60] += rng.normal(0.0, noise, (40, 50, 3))
    old = np.zeros_like(mask)
    old[10:50, 52:60] = True  # the sweep took 2 columns of face as well
    old[48:50, 10:60] = True  # and the sliver along the bottom
    return img.astype(np.float32), mask, ShadowCut(old, int(old.sum()), 40.0, 0.1, 0.1, shadow_level, shadow_level)


def test_tint_cut_takes_the_neutral_shadow_and_leaves_the_face_and_its_lit_rim():
    img, mask, old = _brass_scene(0.0205, 0.0177, 0.1, 0.0005, np.random.default_rng(11))
    found = tint_cut(img, mask, np.ones(3, np.float32), old, 8.0)
    assert found is not None  # the face 1.16 times the shadow's level: within its pixels' noise
    # truth by construction: the shadow is columns 54-59; the 0.7 px smoothing blurs one column each side
    assert found.cut[10:48, 55:60].all()
    # the face, and the 2 columns of it the sweep took (the top row beside the paper blurs with it at the corner)
    assert not found.cut[11:48, 10:53].any()
    assert not found.cut[49, 10:50].any()  # the lit rim (bright, half the paper's colour) is the face's edge


def test_tint_cut_refused_where_the_face_stands_above_its_shadow_by_more_than_the_noise(monkeypatch):
    # the face twice the shadow's level with little grain: the level step places the edge (the grain rules)
    img, mask, old = _brass_scene(0.035, 0.0177, 0.02, 0.0005, np.random.default_rng(12))
    assert tint_cut(img, mask, np.ones(3, np.float32), old, 8.0) is None
    # the same scene passes with the level rule off: that rule, not another, refuses it
    monkeypatch.setattr(colourshadow, "TINT_CUT_LEVEL_STEP", np.inf)
    assert tint_cut(img, mask, np.ones(3, np.float32), old, 8.0) is not None


def test_tint_cut_refused_where_the_tint_step_is_within_the_noise(monkeypatch):
    # noise of 0.006 per channel at a level of 0.02: the blue-over-green ratio of a pixel is lost in it
    img, mask, old = _brass_scene(0.0205, 0.0177, 0.1, 0.006, np.random.default_rng(13))
    assert tint_cut(img, mask, np.ones(3, np.float32), old, 8.0) is None
    # the same scene passes with the contrast rule off: that rule, not another, refuses it
    monkeypatch.setattr(colourshadow, "TINT_CUT_MIN_CONTRAST", 0.0)
    assert tint_cut(img, mask, np.ones(3, np.float32), old, 8.0) is not None
