"""A deep hole's dark opening traced against the face (:mod:`scanmass.segment.deephole`).

Truth: discs drawn with their exact pixel coverage (:func:`scanmass.testing.photos.polygon_coverage`),
so the opening's edge is the analytic circle, not anything the code under test computes.
"""

from __future__ import annotations

import math

import cv2
import numpy as np

from scanmass.pipeline.photo_holes import _paint_ring
from scanmass.segment.deephole import opening_edge, pit_edge
from scanmass.testing.photos import polygon_coverage

CENTRE = (40.3, 41.7)
RADIUS = 12.0


def _circle(cx: float, cy: float, r: float) -> np.ndarray:
    t = np.linspace(0.0, 2 * math.pi, 720, endpoint=False)
    return np.column_stack([cx + r * np.cos(t), cy + r * np.sin(t)])


def _opening(lit: bool, specks: bool) -> np.ndarray:
    """A face at 0.05 (linear) with a dark opening at 0.004; optionally a lit floor patch reaching its rim."""
    shape = (84, 84)
    dark = polygon_coverage([(_circle(*CENTRE, RADIUS), [])], shape)
    lin = 0.05 * (1 - dark) + 0.004 * dark
    if lit:  # paper lit through the hole, 0.5 px inside the rim at angle 0 (x increasing)
        patch = polygon_coverage([(_circle(CENTRE[0] + 5.5, CENTRE[1], 6.0), [])], shape)
        lin = lin + (0.5 - 0.004) * patch
    lin = cv2.GaussianBlur(lin.astype(np.float32), (0, 0), 0.8)  # the lens's blur: symmetric, keeps the midpoint
    rng = np.random.default_rng(7)
    lin = lin + rng.normal(0.0, 0.001, lin.shape).astype(np.float32)
    if specks:  # single bright pixels in the pit (a path tracer's fireflies, a sensor's hot pixels)
        for _ in range(12):
            a, r = rng.uniform(0, 2 * math.pi), rng.uniform(0, 8)
            lin[int(round(CENTRE[1] + r * math.sin(a))), int(round(CENTRE[0] + r * math.cos(a)))] = 0.2
    return lin


def _radii(edge) -> tuple[np.ndarray, np.ndarray]:
    dx, dy = edge.points_px[:, 0] - CENTRE[0], edge.points_px[:, 1] - CENTRE[1]
    return np.hypot(dx, dy), np.degrees(np.arctan2(dy, dx))


def test_dark_opening_is_traced_on_its_rim():
    lin = _opening(lit=False, specks=True)
    edge = pit_edge(lin, np.ones(lin.shape, bool), (CENTRE[0] + 1.0, CENTRE[1] - 1.0), 10.0)
    assert edge is not None and edge.share == 1.0
    r, _ = _radii(edge)
    # the midpoint of a blurred step sits on the edge; a curved edge blurred by sigma moves inwards
    # by about sigma^2 / (2 r) = 0.03 px (common practice); the specks do not stop the rays
    assert abs(float(np.median(r)) - RADIUS) < 0.1
    assert float(np.max(np.abs(r - RADIUS))) < 0.35


def test_lit_floor_inside_the_opening_is_left_out():
    lin = _opening(lit=True, specks=False)
    edge = pit_edge(lin, np.ones(lin.shape, bool), (CENTRE[0] - 4.0, CENTRE[1]), 12.0)
    assert edge is not None
    r, angle = _radii(edge)
    assert 0.3 < edge.share < 0.9  # the rays that meet the lit patch (and their neighbours) are left out
    assert np.all(np.abs(angle) > 20)  # none where the patch reaches the rim
    assert float(np.max(np.abs(r - RADIUS))) < 0.35  # the rest lie on the rim


def test_no_edge_where_the_face_is_not_brighter_than_the_pit():
    lin = np.full((60, 60), 0.01, np.float32)
    assert pit_edge(lin, np.ones(lin.shape, bool), (30.0, 30.0), 10.0) is None


def _lit_and_shaded_opening() -> tuple[np.ndarray, np.ndarray]:
    """A face at 0.05 with an opening whose near half shows lit paper (0.5) and far half a shaded wall (0.004).

    Returns the image and the lit half's pixels (what a segmentation finds as the hole).
    """
    shape = (84, 84)
    hole = polygon_coverage([(_circle(*CENTRE, RADIUS), [])], shape)
    t = np.linspace(-math.pi / 2, math.pi / 2, 361)
    half = np.column_stack([CENTRE[0] + RADIUS * np.cos(t), CENTRE[1] + RADIUS * np.sin(t)])  # x >= centre
    lit = polygon_coverage([(half, [])], shape)
    shade = hole - lit
    lin = 0.05 * (1 - hole) + 0.5 * lit + 0.004 * shade
    lin = cv2.GaussianBlur(lin.astype(np.float32), (0, 0), 0.8)
    return lin, lit > 0.5


def test_whole_opening_is_traced_from_its_lit_part():
    lin, seed = _lit_and_shaded_opening()
    part = np.ones(lin.shape, bool) & ~seed
    edge = opening_edge(lin, part, seed, 2 * RADIUS + 6)
    assert edge is not None and edge.share > 0.95
    r, _ = _radii(edge)
    # down from the lit paper and up from the shaded wall, both on the rim (blur shift 0.03 px,
    # common practice); the seed alone (a half disc) would give no round opening at all
    assert abs(float(np.median(r)) - RADIUS) < 0.15
    assert float(np.percentile(np.abs(r - RADIUS), 90)) < 0.4


def test_painted_opening_covers_the_ring_exactly():
    lut = np.linspace(0.0, 1.0, 256)
    grey = np.full((60, 60), 40, np.uint8)
    ring = _circle(30.2, 29.6, 9.3)
    touched = _paint_ring(grey, lut, ring, np.uint8(240))
    share = (lut[grey] - lut[40]) / (lut[240] - lut[40])  # how much of each pixel took the painted level
    # the disc's area (pi r^2, common practice) to within the coverage's 8x8 sampling and the codes' steps
    assert abs(float(share.sum()) - math.pi * 9.3**2) < 0.01 * math.pi * 9.3**2
    assert touched.sum() < math.pi * (9.3 + 1.5) ** 2
    yy, xx = np.mgrid[0:60, 0:60]
    cx, cy = float((share * xx).sum() / share.sum()), float((share * yy).sum() / share.sum())
    assert math.hypot(cx - 30.2, cy - 29.6) < 0.02  # centred where the ring is: pixel centres at integers
