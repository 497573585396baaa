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


# A through-hole seen at a tilt through a thick part: its lit floor is the overlap of the top opening's image
# and the bottom opening's (pipeline.photo_holes._floor_overlap). Truth: the hole's circle, projected by a
# pinhole camera written out here (x = K (R X + t)), the overlap taken by shapely.
HOLE_CENTRE_MM = np.array([126.0, 171.0])
HOLE_RADIUS_MM = 4.0
THICK_MM = 5.5


def _ring_px(cam, ring_mm: np.ndarray, z_mm: float) -> np.ndarray:
    pts = np.column_stack([ring_mm, np.full(len(ring_mm), z_mm)])
    uvw = (pts @ cam.r.T + cam.t) @ cam.k.T
    return uvw[:, :2] / uvw[:, 2:3]


def _floor_scene(shade: bool):
    from shapely.geometry import Point, Polygon

    from scanmass.scale.homography import ElevationHook
    from scanmass.testing.photos import make_camera

    cam = make_camera(size=(900, 1200), f_px=1100.0, distance_mm=330.0, target_mm=(109.5, 145.0), tilt_deg=18.0)
    hook = ElevationHook(np.linalg.inv(cam.plane_to_px()), cam.k, THICK_MM)
    circle = _circle(*HOLE_CENTRE_MM, HOLE_RADIUS_MM)
    floor = Polygon(_ring_px(cam, circle, THICK_MM)).intersection(Polygon(_ring_px(cam, circle, 0.0)))
    if shade:  # the wall's shade takes a bite out of the lit floor on one side
        c = np.asarray(floor.centroid.coords[0])
        floor = floor.difference(Point(c[0] - 16.0, c[1] + 4.0).buffer(9.0))
    outline = np.asarray(_circle(*HOLE_CENTRE_MM, 30.0), np.float32)
    return cam, hook, floor, outline


def test_top_opening_is_recovered_from_the_lit_floor_overlap():
    from scanmass.pipeline.photo_holes import _floor_overlap

    cam, hook, floor, outline = _floor_scene(shade=True)
    pts = np.asarray(floor.segmentize(0.3).exterior.coords)[:-1]
    mm_per_px = 0.37
    fit = _floor_overlap(pts, hook, mm_per_px, outline, 0.0)
    assert fit is not None
    centre, diameter, rms_px, doubt_px = fit
    assert math.dist(centre, HOLE_CENTRE_MM) < 0.02 and abs(diameter - 2 * HOLE_RADIUS_MM) < 0.02
    assert rms_px < 0.05 and doubt_px == 1.0
    # a doubt in the thickness moves the near arc (0.5 mm of 5.5 moves it by 0.09 of the far wall's band, here
    # 5-6 px): the fit's change is added to the edge's doubt
    u = _floor_overlap(pts, hook, mm_per_px, outline, 0.5)
    assert u is not None and 1.01 < u[3] < 1.2


def test_lit_floor_traced_in_an_image_gives_the_top_opening():
    from scanmass.pipeline.photo_holes import _floor_overlap
    from scanmass.segment.deephole import lit_floor_ring

    cam, hook, floor, outline = _floor_scene(shade=False)
    x0, y0 = np.floor(np.asarray(floor.bounds[:2])).astype(int) - 30
    shape = (90, 90)
    ring = np.asarray(floor.exterior.coords)[:-1] - [x0, y0]
    lit = polygon_coverage([(ring, [])], shape)
    lin = cv2.GaussianBlur((0.03 + (0.5 - 0.03) * lit).astype(np.float32), (0, 0), 0.8)
    seed = lit > 0.5
    traced = lit_floor_ring(lin, ~seed, seed, 6.0)
    assert traced is not None
    fit = _floor_overlap(traced + [x0, y0], hook, 0.37, outline, 0.0)
    assert fit is not None
    # the midpoint of a blurred step is its edge (common practice); a curved edge moves in by about
    # sigma^2 / (2 r) px, here under 0.1 px: within 0.1 mm on the diameter
    assert math.dist(fit[0], HOLE_CENTRE_MM) < 0.1 and abs(fit[1] - 2 * HOLE_RADIUS_MM) < 0.1


def test_a_floor_not_shifted_by_the_parallax_is_not_taken_as_an_overlap():
    from scanmass.pipeline.photo_holes import _floor_overlap

    cam, hook, _, outline = _floor_scene(shade=False)
    bottom_only = _ring_px(cam, _circle(*HOLE_CENTRE_MM, HOLE_RADIUS_MM), 0.0)[::4]  # a hole seen as one circle
    assert _floor_overlap(bottom_only, hook, 0.37, outline, 0.0) is None
