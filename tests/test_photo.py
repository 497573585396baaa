"""Photos of parts on a marker mat or a plain sheet, rendered through a pinhole camera.

Truth: the parts are exact polygons in mat mm; the photos are rendered by
scanmass.testing.photos (exact pixel coverage of every projected polygon, then light,
blur, noise, sRGB, JPEG). Expected area and centroid come from shapely (reference
library), second moments from the polygon vertex sums (Green's theorem, common
practice), the true homography from the camera (K [r1 r2 t], Zhang 2000, eq. 2), paper
sizes from ISO 216:2007 table 1. Tolerances: the issue's targets (centroid 0.05 mm,
area 0.1 %, second moments 0.3 %) and "within 3 stated sigma".
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from PIL import Image
from polygon_truth import truth
from typer.testing import CliRunner

from scanmass import measure
from scanmass.cli.app import app
from scanmass.errors import OptionError, PartCutError, ScaleError, SegmentationError
from scanmass.load.decode import load_image
from scanmass.scale.homography import apply_h, raised_outline_mm
from scanmass.scale.mat import make_mat
from scanmass.scale.mat_scale import mat_scale
from scanmass.testing.photos import PhotoParts, make_camera, render_photo
from scanmass.testing.scans import circle, l_section, rectangle

MAT = make_mat("a4-portrait")
AREA_RTOL = 1e-3
MOMENT_RTOL = 3e-3
CENTROID_TOL_MM = 0.05


def _plate():
    outer = rectangle(70.0, 90.0, 80.0, 50.0, angle_deg=17.0)
    return PhotoParts(outer, [circle(100.0, 115.0, 8.0, 256), circle(125.0, 118.0, 5.0, 256)])


def _bracket():
    return PhotoParts(l_section(60.0, 160.0, 70.0, 55.0, 12.0), [circle(66.0, 205.0, 3.5, 256)])


def _check(part, t, *, sigma=3.0):
    """Figures against truth: the issue's tolerances and the stated uncertainty."""
    assert part.area_mm2 == pytest.approx(t["area"], rel=AREA_RTOL)
    assert math.dist(part.centroid_mm, t["centroid"]) < CENTROID_TOL_MM
    for name in ("ixx", "iyy"):
        assert getattr(part, f"{name}_mm4") == pytest.approx(t[name], rel=MOMENT_RTOL)
    assert part.ixy_mm4 == pytest.approx(t["ixy"], rel=MOMENT_RTOL, abs=MOMENT_RTOL * t["ixx"])
    assert abs(part.area_mm2 - t["area"]) <= sigma * part.area_u_mm2
    for k in range(2):
        assert abs(part.centroid_mm[k] - t["centroid"][k]) <= sigma * part.centroid_u_mm[k]
    assert abs(part.ixx_mm4 - t["ixx"]) <= sigma * part.ixx_u_mm4


def _match(parts, truths):
    return [(min(parts, key=lambda p: math.dist(p.centroid_mm, t["centroid"])), t) for t in truths]


@pytest.mark.parametrize("tilt,roll", [(0.0, 90.0), (20.0, 63.0), (35.0, 115.0)])
def test_tilted_photo_matches_truth(tilt, roll):
    parts = [_plate(), _bracket()]
    cam = make_camera(tilt_deg=tilt, tilt_dir_deg=40.0, roll_deg=roll, distance_mm=370.0)
    img = render_photo(MAT, parts, cam, seed=int(tilt))
    m = measure(img, printed_x_mm=100.0, printed_y_mm=100.0)
    assert m.scale.method == "mat" and m.scale.extra["layout"] == "a4-portrait"
    assert m.scale.reprojection_rms_px < 0.1
    assert len(m.parts) == 2
    for p, t in _match(m.parts, [truth(q.outer_mm, q.holes_mm) for q in parts]):
        _check(p, t)
    assert set(m.scale.terms) >= {"homography", "printer"}
    # the result document's scale.extra: these keys, in this order (read by the overlay, the report, scripts)
    assert list(m.scale.extra) == [
        "layout", "markers_used", "markers_detected", "markers_on_mat", "corner_noise_px", "printer_check",
        "lens_profile", "markers_px", "clear_area_mm", "misfit_mm", "focal_px", "focal_source", "mm_per_px",
        "px_to_mm", "dpi_xy",
    ]  # fmt: skip
    assert m.scale.extra["mm_per_px"] == m.scale.mm_per_px and m.scale.extra["dpi_xy"] is None
    assert m.scale.extra["clear_area_mm"] == pytest.approx(list(MAT.clear_area_mm))  # printer factors 1.0


def test_homography_against_the_camera_and_its_samples():
    cam = make_camera(tilt_deg=28.0, tilt_dir_deg=-60.0, roll_deg=100.0, distance_mm=380.0)
    img = render_photo(MAT, [_plate()], cam, seed=3, noise=0.01)
    scale = mat_scale(load_image(img), printed_x_mm=100.0, printed_y_mm=100.0)
    true_h = np.linalg.inv(cam.plane_to_px())
    x0, y0, x1, y1 = MAT.clear_area_mm
    grid_mm = np.array([[x, y] for x in np.linspace(x0, x1, 7) for y in np.linspace(y0, y1, 9)])
    px = apply_h(np.linalg.inv(true_h), grid_mm)
    err = np.hypot(*(scale.plane_map.to_mm(px) - grid_mm).T)
    assert err.max() < 0.02  # mm, at ~0.25 mm per px
    spread = np.std([apply_h(h, px) for h in [s.matrix for s in scale.plane_map.samples]], axis=0, ddof=1)
    assert np.all(np.abs(scale.plane_map.to_mm(px) - grid_mm) <= 4.0 * spread + 1e-4)
    # the clear area maps into the photo where the camera puts it
    assert np.allclose(apply_h(cam.plane_to_px(), [MAT.clear_area_mm[:2]]), scale.roi_px[0], atol=0.05)


def test_jpeg_uneven_light_blur_noise():
    parts = [_plate()]
    cam = make_camera(tilt_deg=22.0, tilt_dir_deg=150.0, roll_deg=-80.0, distance_mm=360.0)
    img = render_photo(MAT, parts, cam, seed=5, blur_px=1.6, noise=0.012, light=(0.3, -0.25), jpeg_quality=85)
    m = measure(img, printed_x_mm=100.0, printed_y_mm=100.0)
    ((p, t),) = _match(m.parts, [truth(parts[0].outer_mm, parts[0].holes_mm)])
    _check(p, t)


@pytest.mark.slow
def test_printer_check_corrects_x_and_y_scale():
    """A print 1 % too wide and 0.6 % too short: the caliper readings put it right."""
    parts = [_plate()]
    cam = make_camera(tilt_deg=15.0, tilt_dir_deg=10.0, roll_deg=90.0, distance_mm=370.0)
    img = render_photo(MAT, parts, cam, seed=8, print_scale=(1.01, 0.994))
    t = truth(parts[0].outer_mm, parts[0].holes_mm)
    m = measure(img, printed_x_mm=101.0, printed_y_mm=99.4)
    _check(m.parts[0], t)
    assert m.scale.extra["printer_check"] == {
        "done": True,
        "x_factor": pytest.approx(1.01),
        "y_factor": pytest.approx(0.994),
    }
    unchecked = measure(img)
    assert any("print scale unverified" in w for w in unchecked.warnings)
    assert unchecked.scale.terms["printer"] == 0.005
    err = unchecked.parts[0].area_mm2 / t["area"] - 1.0
    assert 0.002 < abs(err) <= 3 * unchecked.parts[0].area_u_mm2 / t["area"]  # off, and the stated u says so


@pytest.mark.slow
def test_thick_part_with_and_without_thickness(monkeypatch):
    part = dataclasses.replace(_plate(), height_mm=6.0)
    t = truth(part.outer_mm, part.holes_mm)
    cam = make_camera(tilt_deg=25.0, tilt_dir_deg=30.0, roll_deg=80.0, distance_mm=360.0)
    img = render_photo(MAT, [part], cam, seed=9)
    # without the thickness, its round hole's lens shape gives it (the rim cue): 6 mm is the rendered height
    read = measure(img, printed_x_mm=100.0, printed_y_mm=100.0)
    est = read.settings["thickness_estimate"]["parts"]["1"]
    assert est["cue"] == "rim" and abs(est["thickness_mm"] - 6.0) <= 3 * est["thickness_u_mm"]
    assert abs(read.parts[0].area_mm2 - t["area"]) <= 3 * read.parts[0].area_u_mm2
    # with neither the thickness nor a cue that reads it, the top face looks larger and the parallax is warned
    from scanmass.pipeline import flow

    monkeypatch.setattr(flow, "rim_thickness", lambda scale, result: [])
    flat = measure(img, printed_x_mm=100.0, printed_y_mm=100.0)
    assert "thickness_estimate" not in flat.settings
    assert abs(flat.parts[0].area_mm2 / t["area"] - 1) > 0.03  # the top face looks larger
    assert any(w.startswith("parallax") for w in flat.warnings)
    m = measure(img, printed_x_mm=100.0, printed_y_mm=100.0, thickness_mm=6.0, thickness_u_mm=0.05)
    p = m.parts[0]
    assert p.area_mm2 == pytest.approx(t["area"], rel=2e-3)  # the target for a 6 mm part
    assert math.dist(p.centroid_mm, t["centroid"]) < 0.05
    assert abs(p.area_mm2 - t["area"]) <= 3 * p.area_u_mm2
    assert m.scale.extra["thickness_correction"]["height_mm"] == 6.0 and m.scale.terms["thickness"] > 0
    assert "perspective" in m.scale.extra["focal_source"]
    assert m.scale.extra["focal_px"] == pytest.approx(1500.0, rel=0.05)
    assert not any(w.startswith("parallax") for w in m.warnings)


def test_plain_sheet():
    """A4 on a dark table: the sheet's frame has its own origin, so compare frame-free figures."""
    parts = [_plate()]
    t = truth(parts[0].outer_mm, parts[0].holes_mm)
    cam = make_camera(tilt_deg=20.0, tilt_dir_deg=200.0, roll_deg=90.0, distance_mm=380.0)
    img = render_photo(None, parts, cam, seed=10, sheet_mm=(210.0, 297.0), table=0.15)
    m = measure(img, sheet="a4", thickness_mm=0)  # a flat template: no parallax term
    p = m.parts[0]
    assert m.scale.method == "sheet" and sorted(m.scale.extra["sheet_mm"]) == [210.0, 297.0]
    assert list(m.scale.extra) == [
        "sheet", "sheet_mm", "sheet_tolerance_mm", "corners_px", "lens_profile", "focal_px", "focal_source",
        "mm_per_px", "px_to_mm", "dpi_xy",
    ]  # fmt: skip
    assert p.area_mm2 == pytest.approx(t["area"], rel=AREA_RTOL)
    i1 = 0.5 * (t["ixx"] + t["iyy"]) + math.hypot(0.5 * (t["ixx"] - t["iyy"]), t["ixy"])
    assert p.i1_mm4 == pytest.approx(i1, rel=MOMENT_RTOL)
    # ISO 216 tolerance +-2 mm as a uniform distribution: about 0.55 % on 210 mm, 0.39 % on 297 mm
    assert 0.004 < p.area_u_mm2 / p.area_mm2 < 0.01
    with pytest.raises(OptionError, match="unknown sheet 'a5'"):
        measure(img, sheet="a5")


# -- bad input: one-line errors -----------------------------------------------------------------


def _cam():
    return make_camera(tilt_deg=18.0, tilt_dir_deg=60.0, roll_deg=95.0, distance_mm=370.0)


def test_no_scale_at_all():
    img = np.full((300, 400), 230, np.uint8)
    img[100:200, 150:250] = 20
    with pytest.raises(ScaleError, match=r"no scale: no marker mat found .* 'scanmass mat'.*--sheet a4.*--dpi N"):
        measure(img)


def test_too_few_markers():
    img = render_photo(MAT, [_plate()], _cam(), hide_ids=list(range(3, 24)))
    with pytest.raises(ScaleError, match=r"only 3 marker\(s\) of mat a4-portrait are visible"):
        measure(img)


def test_unknown_layout():
    foreign = dataclasses.replace(
        MAT, markers=tuple(dataclasses.replace(m, id=240 + k) for k, m in enumerate(MAT.markers[:10]))
    )
    img = render_photo(foreign, [_plate()], _cam())
    with pytest.raises(ScaleError, match="belong to no scanmass mat"):
        measure(img)


def test_bent_mat():
    img = render_photo(MAT, [_plate()], _cam(), bend_mm=6.0)
    with pytest.raises(ScaleError, match="do not lie on one flat plane"):
        measure(img)


def test_motion_blur():
    img = render_photo(MAT, [_plate()], _cam(), blur_px=0.8, motion_px=9.0)
    with pytest.raises(ScaleError, match="motion blur"):
        measure(img)


def test_part_outside_the_clear_area():
    across = PhotoParts(rectangle(150.0, 120.0, 50.0, 30.0))  # runs over the right-hand markers
    img = render_photo(MAT, [across], _cam())
    with pytest.raises(SegmentationError, match="no whole part inside the mat's clear area"):
        measure(img)


def test_no_part_above_the_minimum_area_is_not_reported_as_a_cut_part():
    img = render_photo(MAT, [_plate()], _cam())
    with pytest.raises(SegmentationError, match="no part found above the minimum area") as info:
        measure(img, printed_x_mm=100.0, printed_y_mm=100.0, min_area_mm2=1e5)
    assert not isinstance(info.value, PartCutError) and "clear area" not in str(info.value)


def test_markers_must_surround_the_part():
    right = [m.id for m in MAT.markers if m.corners_mm[:, 0].min() > 60.0]
    part = PhotoParts(rectangle(140.0, 120.0, 30.0, 40.0))
    img = render_photo(MAT, [part], _cam(), hide_ids=right)
    with pytest.raises(ScaleError, match="outside the region the visible markers surround"):
        measure(img)


def test_printer_reading_checks():
    img = render_photo(MAT, [_plate()], _cam())
    with pytest.raises(OptionError, match="give both check-bar readings"):
        measure(img, printed_x_mm=100.1)
    with pytest.raises(OptionError, match="more than 10 % off"):
        measure(img, printed_x_mm=80.0, printed_y_mm=100.0)


@pytest.mark.slow
def test_cli_measure_photo(tmp_path):
    path = tmp_path / "part.jpg"
    Image.fromarray(render_photo(MAT, [_plate()], _cam(), seed=4)).save(path, quality=92)
    out = tmp_path / "r.json"
    res = CliRunner().invoke(
        app, ["measure", str(path), "--check-bar-x", "100", "--check-bar-y", "100", "--json", str(out), "-q"]
    )
    assert res.exit_code == 0, res.output
    import json

    doc = json.loads(out.read_text())
    assert doc["scale"]["method"] == "mat" and doc["scale"]["extra"]["printer_check"]["done"] is True
    assert "matrix_samples" not in doc["scale"]["extra"]
    res = CliRunner().invoke(app, ["measure", str(path), "--sheet", "a5"])
    assert res.exit_code == 1 and len(res.output.strip().splitlines()) == 1 and "unknown sheet" in res.output


def test_raised_outline_in_mm_against_similar_triangles():
    """Camera straight above the point N at distance D: a point at height h seen at X has its foot at
    N + (X - N) (D - h) / D (similar triangles of the pinhole model). The top edge forms the outline
    where the side faces away from N; the bottom edge (on the mat) where it faces N."""
    d_mm, h_mm, nadir = 400.0, 5.0, np.array([105.0, 148.5])
    cam = make_camera(distance_mm=d_mm, target_mm=tuple(nadir))
    h0 = np.linalg.inv(cam.plane_to_px())
    t = np.linspace(0.0, 1.0, 41)[1:-1, None]
    x0, y0, x1, y1 = 150.0, 140.0, 170.0, 160.0  # right of the nadir
    sides = {
        "bottom": np.column_stack([x0 + (x1 - x0) * t[:, 0], np.full(len(t), y0)]),
        "right": np.column_stack([np.full(len(t), x1), y0 + (y1 - y0) * t[:, 0]]),
        "top": np.column_stack([x1 - (x1 - x0) * t[:, 0], np.full(len(t), y1)]),
        "left": np.column_stack([np.full(len(t), x0), y1 - (y1 - y0) * t[:, 0]]),
    }
    ring = np.concatenate(list(sides.values()))  # counter-clockwise, corners left out
    foot = raised_outline_mm(h0, cam.k, h_mm, ring)
    similar = nadir + (ring - nadir) * (d_mm - h_mm) / d_mm
    n = len(t)
    right = slice(n, 2 * n)
    left = slice(3 * n, 4 * n)
    assert np.allclose(foot[right], similar[right], atol=1e-9)  # faces away from the nadir: the top edge
    assert np.allclose(foot[left], ring[left], atol=1e-12)  # faces the nadir: the bottom edge, on the mat
    # reversing the ring does not change the answer
    assert np.allclose(raised_outline_mm(h0, cam.k, h_mm, ring[::-1]), foot, atol=1e-12)


def test_photo_colour_is_decoded_once(tmp_path, monkeypatch):
    """The colour checks decode the photo's colour once, also when it turns out grey (issue 16).

    A grey picture stored as a three-channel JPEG (equal channels) has no colour to test:
    the first decode finds that out and the cast-shadow check must not decode it again.
    A colour photo is decoded once too, and the same figures come out either way.
    """
    import cv2

    import scanmass.pipeline.photo_checks as photo_checks

    grey = render_photo(MAT, [_plate()], _cam(), seed=4)
    calls: list[str] = []
    real = cv2.imread

    def counting(path, flags=cv2.IMREAD_COLOR):
        calls.append(str(path))
        return real(path, flags)

    monkeypatch.setattr(photo_checks.cv2, "imread", counting)
    figures = []
    for name, rgb in (
        ("grey3.jpg", np.dstack([grey] * 3)),
        ("tinted.jpg", np.dstack([grey, grey, (grey * 0.97).astype(np.uint8)])),
    ):
        path = tmp_path / name
        Image.fromarray(rgb).save(path, quality=92)
        calls.clear()
        m = measure(path, printed_x_mm=100.0, printed_y_mm=100.0)
        assert calls == [str(path)], name
        figures.append(m.parts[0].area_mm2)
    t = truth(_plate().outer_mm, _plate().holes_mm)
    for area in figures:  # shapely's area of the plate (reference library), the 0.1 %
        assert area == pytest.approx(t["area"], rel=AREA_RTOL)


def _projected_ring(cam, ring_mm: np.ndarray, z_mm: float) -> np.ndarray:
    """Ideal pixels of a ring at height z: x = K (R X + t), written out here (pinhole model)."""
    pts = np.column_stack([ring_mm, np.full(len(ring_mm), z_mm)])
    cam_xyz = pts @ cam.r.T + cam.t
    uvw = cam_xyz @ cam.k.T
    return uvw[:, :2] / uvw[:, 2:3]


def _px_oriented(ring_px: np.ndarray, material_left: bool = True, hole: bool = False) -> np.ndarray:
    """A px ring with the material on its left (y down): positive shoelace area outside, negative for a hole."""
    x, y = ring_px[:, 0], ring_px[:, 1]
    area = float(np.dot(x, np.roll(y, -1)) - np.dot(np.roll(x, -1), y))
    return ring_px if (area > 0) != hole else ring_px[::-1]


@pytest.mark.parametrize("tilt_deg", [0.0, 20.0])
def test_hole_of_a_raised_plate_seen_on_either_edge_maps_to_its_true_circle(tilt_deg):
    """A through hole (radius 5 mm) in a plate 4 mm thick, camera 310 mm away (pinhole, explicit K [R|t]).

    Its wall facing the camera shows between the top opening and the bottom one. If the
    segmentation counts that wall as part, the outline is the boundary of the intersection of the
    projected top and bottom openings (shapely, in px); if it counts it as background (a wall that
    looks like the hole's bottom), the outline is the projected top opening all round. The first
    maps to the true circle with the default hook, the second with ``top_seen`` set; the second
    mapped as the first is too large by the wall's band (the error seen on brushed steel in soft light).
    """
    from shapely.geometry import Polygon

    from scanmass.scale.homography import ElevationHook
    from scanmass.section import fit_circle

    cam = make_camera(size=(900, 1200), f_px=901.3, distance_mm=310.0, target_mm=(109.5, 145.0), tilt_deg=tilt_deg)
    h0 = np.linalg.inv(cam.plane_to_px())
    phi = np.linspace(0.0, 2 * np.pi, 721)[:-1]
    centre, radius, thick = np.array([70.0, 200.0]), 5.0, 4.0
    circle_mm = centre + radius * np.column_stack([np.cos(phi), np.sin(phi)])
    top_px = _projected_ring(cam, circle_mm, thick)
    bottom_px = _projected_ring(cam, circle_mm, 0.0)
    both = Polygon(top_px).intersection(Polygon(bottom_px))  # what shows of the paper through the hole
    seen_both = _px_oriented(np.asarray(both.exterior.coords)[:-1], hole=True)
    seen_top = _px_oriented(top_px, hole=True)

    plain = ElevationHook(h0, cam.k, thick)
    mask = np.ones((1200, 900), bool)
    on_top = plain.with_top_seen(mask)

    def circle_of(points_px):
        fit = fit_circle(apply_h(h0, points_px))
        return np.array(fit.centre_mm), fit.diameter_mm, fit.rms_mm

    for ring, hook in ((seen_both, plain), (seen_top, on_top)):
        c, d, rms = circle_of(hook(ring))
        assert np.allclose(c, centre, atol=2e-3) and abs(d - 2 * radius) < 4e-3 and rms < 2e-3, (c, d, rms)
    # the top opening taken as the default hook takes it: too large by about the wall's band
    _, d_wrong, rms_wrong = circle_of(plain(seen_top))
    band = np.linalg.norm(apply_h(h0, top_px) - apply_h(h0, bottom_px), axis=1).max()
    assert d_wrong - 2 * radius > 0.4 * band and rms_wrong > 10 * 2e-3
    # an outer ring seen on its top edge all round (a disc whose wall looks like the paper)
    disc = _px_oriented(top_px)
    c, d, rms = circle_of(on_top(disc))
    assert np.allclose(c, centre, atol=2e-3) and abs(d - 2 * radius) < 4e-3


def test_top_seen_mask_is_read_at_the_photo_pixels_of_a_distorting_lens():
    """With a lens correction the mask is read where the outline lies in the photo as stored (the
    grid the segmentation and the shadow cut work on), not at its corrected position; a mask
    only 2 px wide around the photo's ring then acts as a full one."""
    import cv2

    from scanmass.scale.homography import ElevationHook

    cam = make_camera(size=(900, 1200), f_px=901.3, distance_mm=310.0, target_mm=(109.5, 145.0))
    h0 = np.linalg.inv(cam.plane_to_px())
    c, k1 = np.array([449.5, 599.5]), -0.2 / 901.3**2

    def undistort(raw):  # a barrel lens: ideal = c + (raw - c)(1 + k1 r^2), r in px
        d = raw - c
        return c + d * (1.0 + k1 * np.sum(d * d, axis=1))[:, None]

    phi = np.linspace(0.0, 2 * np.pi, 361)[:-1]
    ideal = _px_oriented(_projected_ring(cam, np.array([30.0, 250.0]) + 5.0 * np.c_[np.cos(phi), np.sin(phi)], 4.0))
    raw = ideal.copy()
    for _ in range(20):  # the photo's pixels of the ideal ring: fixed-point inversion of the lens
        raw = raw + (ideal - undistort(raw))
    assert np.abs(raw - ideal).max() > 5.0  # the lens moves this ring by more than the mask's width
    band = np.zeros((1200, 900), np.uint8)
    cv2.polylines(band, [np.round(raw).astype(np.int32)], True, 1, thickness=5)
    hook = ElevationHook(h0, cam.k, 4.0, undistort)
    full = hook.with_top_seen(np.ones((1200, 900), bool))(raw)
    assert np.allclose(hook.with_top_seen(band.astype(bool))(raw), full, atol=1e-12)
    assert not np.allclose(hook(raw), full, atol=1e-3)  # without the mask the wall-facing side stays
