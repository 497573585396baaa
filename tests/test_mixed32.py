"""Brushed steel and black plastic under two lamps of different colours (mixed light), stop 32.

A brushed face mirrors the room, and a darker part of the room shows on it as a sector of lower level: a
deep-hole search (``pipeline/photo_holes.py``) that takes every dark round region for a hole's opening at
the top face opened such a sector as a 9.2 mm through-hole. ``_face_shading`` tells the two apart by the
border's width and the pit's depth; checked on synthetic pits whose level and blur are drawn (exact), and
on the committed render where it was seen, against its truth file (the outlines Blender extruded; area
from shapely, ``tests/_reallight_truth.py``).
"""

from __future__ import annotations

import math

import cv2
import numpy as np
import pytest
from _reallight_truth import measured_part

from scanmass.pipeline.photo_holes import _face_shading
from scanmass.segment.deephole import pit_edge


def _pit(level: float, blur_px: float) -> tuple[np.ndarray, np.ndarray]:
    """A 96 x 96 face at 0.1 (linear) with a disc of radius 12 px at ``level``, blurred (Gaussian sigma ``blur_px``)."""
    n, c = 96, 47.5
    yy, xx = np.mgrid[0:n, 0:n]
    disc = np.hypot(xx - c, yy - c) < 12.0
    lin = np.where(disc, level, 0.1).astype(np.float32)
    lin = cv2.GaussianBlur(lin, (0, 0), blur_px)
    mask = np.hypot(xx - c, yy - c) < 40.0
    return lin, mask


def test_a_sharp_deep_pit_is_an_opening():
    """A hole's dark floor: 20 times darker than the face, blurred as an edge in focus (sigma 0.6 px; its 30-70 %
    width read 1.0 px): not the face's shading."""
    lin, mask = _pit(0.005, 0.6)
    edge = pit_edge(lin, mask, (47.5, 47.5), 24.0)
    assert edge is not None
    assert not _face_shading(edge)


def test_a_soft_shallow_sector_is_the_faces_shading():
    """A mirrored darker sector: 2.2 times darker than the face (as mixed-steel-t20's cam, the start of stop 32),
    its level falling over a few px (sigma 3 px; read 3.1 px): the face's shading."""
    lin, mask = _pit(0.045, 3.0)
    edge = pit_edge(lin, mask, (47.5, 47.5), 24.0)
    assert edge is not None
    assert _face_shading(edge)


@pytest.mark.parametrize(("level", "blur_px"), [(0.045, 0.6), (0.005, 3.0)])
def test_soft_or_shallow_alone_is_still_an_opening(level, blur_px):
    """A shallow pit with a sharp border (a small hole's lit floor) or a deep one with a soft border (a blurred
    photo): either alone does not make a pit the face's shading."""
    lin, mask = _pit(level, blur_px)
    edge = pit_edge(lin, mask, (47.5, 47.5), 24.0)
    assert edge is not None
    assert not _face_shading(edge)


@pytest.mark.slow
def test_mixed_light_steel_cam_face_sector_not_opened():
    """mixed-steel-t20: the brushed cam's dark face sector (soft border, 2.2 times darker than the face) was
    opened as a 9.2 mm through-hole and the part read -7.01 % at the start of stop 32
    (/work/notes/rl_start32.txt); now one hole, at the truth's bore, and the area within 2 % and 3 sigma."""
    m, part, tp = measured_part("mixed-steel-t20", "cam")
    (((cx, cy), d),) = tp["holes"]
    assert len(part.holes) == 1
    assert math.dist(part.holes[0].circle_centre_mm, (cx, cy)) < 0.5 * d
    err = part.area_mm2 - tp["area"]
    assert abs(err) / tp["area"] < 0.02, err / tp["area"]
    assert abs(err) <= 3 * part.area_u_mm2


@pytest.mark.slow
@pytest.mark.xfail(
    strict=True,
    reason="dev-mixed-black-t0: the black gasket's 30 mm bore reads -1.02 mm (+5.81 %): inside its rim, on one side, "
    "the paper in the wall's shade from the cool lamp is lit by the warm one (tint +0.10 in (R-B)/S against the "
    "face's -0.05, level 0.14 of the paper's) and taken for the face. A trace through that shade (each ray's border "
    "half-way in linear light between the inside's colour and the face's; branch mixed32, commit e9bbfb6) read the "
    "bore -0.48 mm (+2.64 %) but also acted under one light and, at another part's thickness, painted an opening "
    "the re-measure did not find again, so dev-mixed-steel3-t22's plate lost its openings (+1.85 -> +4.32 %)",
)
def test_mixed_light_black_gasket_bore_through_its_shade():
    """The black gasket's bore within 0.6 mm of the truth's and the part within 3 %."""
    m, part, tp = measured_part("dev-mixed-black-t0", "gasket")
    (_, d) = tp["holes"][0]
    (hole,) = part.holes
    assert abs(hole.diameter_mm - d) < 0.6, hole.diameter_mm - d
    assert abs(part.area_mm2 - tp["area"]) / tp["area"] < 0.03
