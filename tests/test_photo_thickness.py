"""A part's thickness read from its side wall in a photo (scanmass.pipeline.photo_thickness).

Truth: synthetic photos rendered by scanmass.testing.photos: a prism of known height on the
mat, drawn as its silhouette (the union of bottom face, top face and walls: exact polygon
coverage) in the wall's grey level with its top face, projected through the same pinhole camera
(K [r1 r2 (t + h r3)], Zhang 2000, eq. 2), in the part's level over it. Areas and centroids
from shapely (polygon_truth.truth, reference library). Tolerances: within 3 stated sigma.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from _reallight_truth import REALLIGHT, truth_part
from polygon_truth import truth

from scanmass import measure
from scanmass.pipeline.photo_thickness import (
    MIN_WALL_VERTICES,
    PROFILE_STEP_PX,
    READ_EXCESS_MM,
    SMOOTH_VERTICES,
    THICKNESS_GRID_MM,
    WallThickness,
    _smooth_normals,
    _stretch_reading,
    fused,
)
from scanmass.scale.homography import apply_h
from scanmass.scale.mat import make_mat
from scanmass.testing.photos import PhotoParts, make_camera, render_photo
from scanmass.testing.scans import circle, l_section, rectangle

MAT = make_mat("a4-portrait")
PAPER, WALL, TOP = 0.85, 0.40, 0.06


def _plate() -> PhotoParts:
    outer = rectangle(70.0, 90.0, 80.0, 50.0, angle_deg=17.0)
    return PhotoParts(outer, [circle(100.0, 115.0, 8.0, 256)])


def _walled_photo(part: PhotoParts, height_mm: float, cam, seed: int) -> np.ndarray:
    """The prism's silhouette in the wall's level, its top face in the part's level over it."""
    lift = np.linalg.inv(cam.plane_to_px(0.0)) @ cam.plane_to_px(height_mm)  # top face -> where it looks on the mat

    def up(ring: np.ndarray) -> np.ndarray:
        return apply_h(lift, ring)

    solid = dataclasses.replace(part, level=WALL, height_mm=height_mm)
    # render_photo adds (level - paper) per part: the top face's level over the wall's is TOP
    top = PhotoParts(up(part.outer_mm), [up(h) for h in part.holes_mm], level=TOP - WALL + PAPER)
    return render_photo(MAT, [solid, top], cam, paper=PAPER, seed=seed)


@pytest.mark.slow
def test_thickness_read_from_a_lit_wall():
    """A 5 mm plate seen 25 degrees off its nadir: its thickness within 3 sigma, close enough to matter."""
    part, height = _plate(), 5.0
    t = truth(part.outer_mm, part.holes_mm)
    cam = make_camera(tilt_deg=25.0, tilt_dir_deg=30.0, roll_deg=80.0, distance_mm=360.0)
    img = _walled_photo(part, height, cam, seed=21)
    m = measure(img, printed_x_mm=100.0, printed_y_mm=100.0)
    est = m.settings["thickness_estimate"]["parts"]["1"]
    assert abs(est["thickness_mm"] - height) <= 3 * est["thickness_u_mm"]
    assert est["thickness_u_mm"] < 0.5 * height  # a figure that says something
    p = m.parts[0]
    assert "thickness_unknown" not in p.uncertainty_terms and "thickness_estimate" in p.uncertainty_terms
    assert abs(p.area_mm2 - t["area"]) <= 3 * p.area_u_mm2
    for k in range(2):
        assert abs(p.centroid_mm[k] - t["centroid"][k]) <= 3 * p.centroid_u_mm[k]
    flat = measure(img, printed_x_mm=100.0, printed_y_mm=100.0, thickness_mm=0)  # taken as sheet-thin
    assert abs(p.area_mm2 - t["area"]) < 0.5 * abs(flat.parts[0].area_mm2 - t["area"])
    assert any(w.startswith("thickness estimated from the side walls") for w in m.warnings)


@pytest.mark.slow
def test_wall_as_dark_as_the_top_face_is_not_read():
    """The wall in the part's own level shows no band, and the part has no round ring (a square window): the
    parallax term stays, and the warning says why."""
    square = rectangle(92.0, 107.0, 16.0, 16.0, angle_deg=17.0)[::-1]
    part = dataclasses.replace(_plate(), holes_mm=[square], height_mm=5.0)
    cam = make_camera(tilt_deg=25.0, tilt_dir_deg=30.0, roll_deg=80.0, distance_mm=360.0)
    img = render_photo(MAT, [part], cam, seed=22)
    m = measure(img, printed_x_mm=100.0, printed_y_mm=100.0)
    assert "thickness_estimate" not in m.settings
    assert "thickness_unknown" in m.parts[0].uncertainty_terms
    assert any("could not be read from the side walls" in w for w in m.warnings)


@pytest.mark.slow
def test_thickness_read_from_a_round_hole_where_the_wall_shows_no_band():
    """The wall in the part's own level shows no band, but the 16 mm round hole is seen as a lens (its near
    rim lifted by the parallax): the thickness that maps it back to a circle (rim_thickness) is read. Truth:
    the prism's height (5 mm) and its outline's area and centroid (shapely). Before the round-rim cue
    (branch wallcue14) no thickness was read here and the part kept 'thickness_unknown'."""
    part, height = dataclasses.replace(_plate(), height_mm=5.0), 5.0
    t = truth(part.outer_mm, part.holes_mm)
    cam = make_camera(tilt_deg=25.0, tilt_dir_deg=30.0, roll_deg=80.0, distance_mm=360.0)
    img = render_photo(MAT, [part], cam, seed=22)
    m = measure(img, printed_x_mm=100.0, printed_y_mm=100.0)
    est = m.settings["thickness_estimate"]["parts"]["1"]
    assert est["cue"] == "rim"
    assert abs(est["thickness_mm"] - height) <= 3 * est["thickness_u_mm"]
    assert abs(est["thickness_mm"] - height) < 0.5  # read 5.00 (sigma 0.8)
    assert est["thickness_u_mm"] < 0.5 * height  # a figure that says something
    p = m.parts[0]
    assert "thickness_unknown" not in p.uncertainty_terms and "thickness_estimate" in p.uncertainty_terms
    assert abs(p.area_mm2 - t["area"]) <= 3 * p.area_u_mm2
    for k in range(2):
        assert abs(p.centroid_mm[k] - t["centroid"][k]) <= 3 * p.centroid_u_mm[k]
    assert abs(p.area_mm2 - t["area"]) < 0.005 * t["area"]  # read +0.01 %


def test_rim_reading_fused_with_the_wall_band():
    """fused(): inverse-variance mean where the two cues agree within the root sum of squares of their sigmas
    (the weighted mean of two measurements, common practice); the wall estimate widened to their difference
    where they do not; a rim reading alone where the wall band gave none."""
    wall = [
        WallThickness(1, 4.0, 1.0),
        WallThickness(2, 2.0, 0.5),
        WallThickness(3, None, reason="no band"),
        WallThickness(4, 3.0, 0.6),
    ]
    rims = [
        WallThickness(1, 3.0, 1.0, cue="rim"),
        WallThickness(2, 4.0, 0.5, cue="rim"),
        WallThickness(3, 2.5, 0.7, cue="rim"),
    ]
    out = {w.label: w for w in fused(wall, rims)}
    assert out[1].thickness_mm == pytest.approx(3.5) and out[1].sigma_mm == pytest.approx(math.sqrt(0.5))
    assert out[1].cue == "wall+rim"
    assert out[2].thickness_mm == 2.0 and out[2].sigma_mm == pytest.approx(2.0) and out[2].cue == "wall"
    assert out[3].thickness_mm == 2.5 and out[3].cue == "rim"
    assert out[4] == wall[3]


@pytest.mark.slow
def test_given_thickness_wins():
    """--thickness given: nothing is read from the walls."""
    part, height = _plate(), 5.0
    cam = make_camera(tilt_deg=25.0, tilt_dir_deg=30.0, roll_deg=80.0, distance_mm=360.0)
    img = _walled_photo(part, height, cam, seed=23)
    for given in (0.0, 3.0):
        m = measure(img, printed_x_mm=100.0, printed_y_mm=100.0, thickness_mm=given)
        assert "thickness_estimate" not in m.settings
        assert not any("thickness_estimate" in p.uncertainty_terms for p in m.parts)
        assert not math.isnan(m.parts[0].area_mm2)


def _two_edge_gradients(band_px: np.ndarray, s_px: np.ndarray) -> np.ndarray:
    """Gradient shares of profiles crossing a wall band: a blurred edge at the outline (s = 0) and one ``band_px``
    inward, each a Gaussian of 0.5 px (a step blurred by a Gaussian point spread has a Gaussian gradient)."""
    g = np.exp(-0.5 * (s_px[None, :] / 0.5) ** 2) + np.exp(-0.5 * ((s_px[None, :] - band_px[:, None]) / 0.5) ** 2)
    return g / g.max(axis=1, keepdims=True)


def test_stretches_of_a_wall_read_alone_agree_or_refuse():
    """_stretch_reading on constructed profiles, 2 px of band per mm of thickness: three stretches show the band of
    a 3 mm wall, the rest none (flat gradient: a wall as dark as the face) -> 3 mm less READ_EXCESS_MM (what the
    score reads above a wall, taken off every reading), to the score's step (0.25 px = 0.125 mm); stretches that
    show 2 and 5 mm walls disagree far beyond STRETCH_MAX_SPREAD -> no reading. Truth: the band width the
    profiles were built with."""
    s_px = np.arange(-30.0, 30.0 + 1e-9, PROFILE_STEP_PX)
    n = 6 * MIN_WALL_VERTICES
    bands = np.repeat(2.0 * THICKNESS_GRID_MM[:, None], n, axis=1)
    vertex, ring = np.arange(n), np.zeros(n, int)

    def profiles(walls_mm: list[float | None]) -> np.ndarray:
        out = []
        for t in walls_mm:
            if t is None:
                out.append(np.full((MIN_WALL_VERTICES, len(s_px)), 0.5))
            else:
                out.append(_two_edge_gradients(np.full(MIN_WALL_VERTICES, 2.0 * t), s_px))
        return np.vstack(out)

    read = _stretch_reading(profiles([3.0, None, 3.0, None, None, 3.0]), s_px, bands, vertex, ring)
    assert read is not None and read.cue == "wall stretches"
    assert abs(read.thickness_mm - (3.0 - READ_EXCESS_MM)) <= 0.15
    assert read.sigma_mm < 1.0
    assert _stretch_reading(profiles([2.0, None, 5.0, None, None, None]), s_px, bands, vertex, ring) is None
    assert _stretch_reading(profiles([3.0, None, None, None, None, None]), s_px, bands, vertex, ring) is None  # one


@pytest.mark.slow
@pytest.mark.parametrize(("name", "shape"), [("dev-spot-steel-t18", "seal"), ("dev-spot-steel4-t28", "l-bracket")])
def test_thickness_read_from_stretches_of_the_wall_in_a_render(name, shape):
    """Path-traced renders under a spot light (tests/data/reallight), no --thickness: a 2.2 mm steel seal and a
    2.0 mm steel L bracket (their truth files: the extrusion the renderer drew) whose whole wall band shows no
    clear peak (lit along part of the outline, dark beside the highlight elsewhere) were read nowhere (term
    'thickness_unknown'); stretches of the wall read alone agree on 2.17 +- 0.68 and 2.02 +- 0.52 mm (branch
    thick17). Each reading within 3 stated sigma and 0.3 mm of the truth, its sigma under half the thickness."""
    tp = truth_part(name, shape)
    m = measure(REALLIGHT / f"{name}.jpg")
    part = min(m.parts, key=lambda q: math.dist(q.centroid_mm, tp["centroid"]))
    est = m.settings["thickness_estimate"]["parts"][str(part.label)]
    assert est["cue"] == "wall stretches"
    assert abs(est["thickness_mm"] - tp["t"]) <= 3 * est["thickness_u_mm"]
    assert abs(est["thickness_mm"] - tp["t"]) < 0.3
    assert est["thickness_u_mm"] < 0.5 * tp["t"]
    assert "thickness_estimate" in part.uncertainty_terms and "thickness_unknown" not in part.uncertainty_terms


def test_a_flat_brackets_arm_is_not_read_as_a_wall():
    """A flat L bracket (no side wall: rendered as its outline alone) 35 degrees off its nadir: two stretches of one
    straight edge of its 12 mm arm show two edges the arm's width apart, which, scored as a wall, read 5.0 mm;
    past the band's inner edge lies the paper, not the part's top face (_face_test), so nothing is read and the
    figures are the outline's; the second try (normals averaged over SMOOTH_VERTICES, the foot looked for inside
    the outline too) reads nothing either. Truth: the polygon's area (shapely, polygon_truth)."""
    bracket = PhotoParts(l_section(60.0, 160.0, 70.0, 55.0, 12.0), [circle(66.0, 205.0, 3.5, 256)])
    t = truth(bracket.outer_mm, bracket.holes_mm)
    cam = make_camera(tilt_deg=35.0, tilt_dir_deg=40.0, roll_deg=115.0, distance_mm=370.0)
    m = measure(render_photo(MAT, [_plate(), bracket], cam, seed=35), printed_x_mm=100.0, printed_y_mm=100.0)
    assert "thickness_estimate" not in m.settings
    part = min(m.parts, key=lambda q: math.dist(q.centroid_mm, t["centroid"]))
    assert part.area_mm2 == pytest.approx(t["area"], rel=1e-3)  # the photo tests' area tolerance (0.1 %)


def test_smoothed_normals_of_a_jagged_edge_point_across_it():
    """_smooth_normals: a straight edge cut into teeth (x steps of 0.5 px, y 0, -0.5, -0.5, 0 repeated: an outline
    traced through a shadow's grain) has vertex normals (geometry.vertex_normals: the chord between the neighbours)
    leaning +theta, +theta, -theta, -theta in turn (theta = atan(0.5)); the mean of an odd number k of them, at most
    one more of one sign, leans at most atan(tan(theta) / k) (closed form), so the edge's own normal (0, -1), the lower
    side of a counter-clockwise ring, is recovered to that; a circle's averaged normals stay radial (the window is
    symmetric about each vertex). k = 1 keeps each one."""
    n = 400
    x = 0.5 * np.arange(n)
    lower = np.c_[x, np.array([0.0, -0.5, -0.5, 0.0])[np.arange(n) % 4]]
    ring = np.vstack([lower, [[x[-1], 50.0], [0.0, 50.0]]])  # counter-clockwise: the lower side's outside is -y
    mid = slice(SMOOTH_VERTICES, n - SMOOTH_VERTICES)
    raw = _smooth_normals(ring, 1)
    theta = np.arctan2(np.abs(raw[mid, 0]), -raw[mid, 1])
    assert np.allclose(theta, np.arctan(0.5))  # each vertex's own normal leans
    smooth = _smooth_normals(ring, SMOOTH_VERTICES)
    lean = np.arctan2(np.abs(smooth[mid, 0]), -smooth[mid, 1])
    assert np.all(lean <= np.arctan(0.5 / SMOOTH_VERTICES) + 1e-9)
    angle = np.linspace(0, 2 * np.pi, 720, endpoint=False)
    circle_ring = np.c_[np.cos(angle), np.sin(angle)] * 30.0
    radial = _smooth_normals(circle_ring, SMOOTH_VERTICES)
    assert np.allclose(radial, np.c_[np.cos(angle), np.sin(angle)], atol=1e-9)


@pytest.mark.slow
@pytest.mark.parametrize(("name", "shape"), [("dev-mixed-black4-t25", "cam"), ("dev-spot-steel2-t10", "cam")])
def test_thickness_read_along_a_jagged_outline(name, shape):
    """Path-traced renders (tests/data/reallight), no --thickness: a 7 mm black cam whose outline ran out over its
    coloured shadow (jagged, 7 px beyond the wall's foot) and a 3 mm steel cam under a spot light (their truth files:
    the extrusion the renderer drew) were read nowhere (term 'thickness_unknown'); along the outline's mean direction,
    the foot looked for inside the outline too, the whole wall and its stretches agree (cue 'wall smoothed', branch
    wall17: 9.20 +- 1.56 and 4.17 +- 1.80 mm). Each reading within 3 stated sigma of the truth."""
    tp = truth_part(name, shape)
    m = measure(REALLIGHT / f"{name}.jpg")
    part = min(m.parts, key=lambda q: math.dist(q.centroid_mm, tp["centroid"]))
    est = m.settings["thickness_estimate"]["parts"][str(part.label)]
    assert est["cue"] == "wall smoothed"
    assert abs(est["thickness_mm"] - tp["t"]) <= 3 * est["thickness_u_mm"]
    assert "thickness_estimate" in part.uncertainty_terms and "thickness_unknown" not in part.uncertainty_terms
