"""Photos as they really come: unknown thickness, path-traced renders with shadows and highlights.

Truth: the demo photo's exact outline (``scanmass.cli.demo``, the invented scenario) and
the committed Cycles renders' truth files (``tests/data/reallight/*.json``, written by
``benchmarks/render_reallight.py`` from the outlines it extruded). Areas and centroids of
the truth outlines come from shapely, not from the code under test.
"""

from __future__ import annotations

import csv
import io
import json
import math
from pathlib import Path

import numpy as np
import pytest
from _reallight_truth import truth_render
from shapely.geometry import Point, Polygon

import scanmass
from scanmass.cli.demo import demo_photos
from scanmass.errors import SegmentationError
from scanmass.pipeline import flow, photo_thickness

ROOT = Path(__file__).resolve().parents[1]
DEMO_PHOTO = ROOT / "samples" / "wrenfield-chainstay-gusset-on-mat.jpg"


def _truth(outer, holes):
    poly = Polygon(outer, holes)  # shapely: area and centroid of a polygon with holes
    return poly.area, (poly.centroid.x, poly.centroid.y)


@pytest.fixture(scope="module")
def demo_without_thickness():
    if not DEMO_PHOTO.exists():
        pytest.skip("samples/ not in this checkout")
    # the mat's check-bar readings from samples/demo.toml; no --thickness (the plate is 2.5 mm)
    return scanmass.measure(DEMO_PHOTO, printed_x_mm=100.4, printed_y_mm=99.7)


def test_unknown_thickness_is_covered(monkeypatch):
    """The issue's case: a 2.5 mm plate without --thickness came out 35 sigma off in area. Its thickness is now
    read from its round holes (test_demo_thickness_read_from_its_round_holes); here that reading is switched off,
    as for a part without round rings whose wall band shows nothing, and the covering term must do. The third
    try at the wall's foot (branch wallfoot31, which reads this plate 2.5 mm too) is switched off with it."""
    if not DEMO_PHOTO.exists():
        pytest.skip("samples/ not in this checkout")
    monkeypatch.setattr(flow, "rim_thickness", lambda scale, result: [])
    monkeypatch.setattr(photo_thickness, "SHARP_BLUR_PX", 0.0)  # no third try (its high-pass off)
    m = scanmass.measure(DEMO_PHOTO, printed_x_mm=100.4, printed_y_mm=99.7)
    outer, holes = demo_photos()[0].parts[0]
    area, centroid = _truth(outer, holes)
    part = m.parts[0]
    assert abs(part.area_mm2 - area) > 0.02 * area  # the flat outline is still too large ...
    assert abs(part.area_mm2 - area) <= 3 * part.area_u_mm2  # ... but the stated uncertainty covers it
    for c, t, u in zip(part.centroid_mm, centroid, part.centroid_u_mm):
        assert abs(c - t) <= 3 * u
    assert part.uncertainty_terms["thickness_unknown"]["area_mm2"] > 0
    # the holes: 14 mm window and three 6.5 mm holes (scanmass.cli.demo.chainstay_gusset)
    for hole in part.holes:
        nominal = 14.0 if hole.diameter_mm > 10 else 6.5
        assert abs(hole.diameter_mm - nominal) <= 3 * hole.diameter_u_mm
    assert any(w.startswith("parallax (thickness not given)") and "--thickness 0" in w for w in m.warnings)


def test_demo_thickness_read_from_its_round_holes(demo_without_thickness):
    """The demo's 2.5 mm plate without --thickness (branch wallcue14): its wall band shows nothing, but its three
    6.5 mm holes and 14 mm window are seen as lenses, and the thickness that maps them to circles is read
    (photo_thickness.rim_thickness): 2.49 +- 0.55 mm, fused with the wall foot's reading where they agree. Truth: the demo's exact outline and its 2.5 mm
    (scanmass.cli.demo), area and centroid by shapely. Area +3.7 % (term 'thickness_unknown') -> +0.03 %,
    centroid 0.53 -> 0.002 mm."""
    m = demo_without_thickness
    outer, holes = demo_photos()[0].parts[0]
    area, centroid = _truth(outer, holes)
    part = m.parts[0]
    est = m.settings["thickness_estimate"]["parts"][str(part.label)]
    assert est["cue"] in ("rim", "wall+rim")  # since wallfoot31 its wall's foot is read too, and agrees
    assert abs(est["thickness_mm"] - 2.5) <= 3 * est["thickness_u_mm"] and est["thickness_u_mm"] < 1.25
    assert "thickness_unknown" not in part.uncertainty_terms and "thickness_estimate" in part.uncertainty_terms
    assert abs(part.area_mm2 - area) <= 3 * part.area_u_mm2
    assert abs(part.area_mm2 - area) < 0.005 * area
    for c, t, u in zip(part.centroid_mm, centroid, part.centroid_u_mm):
        assert abs(c - t) <= 3 * u
    for hole in part.holes:
        nominal = 14.0 if hole.diameter_mm > 10 else 6.5
        assert abs(hole.diameter_mm - nominal) <= 3 * hole.diameter_u_mm


def test_unknown_thickness_warning_reaches_json_and_csv(demo_without_thickness):
    m = demo_without_thickness
    doc = json.loads(m.to_json())
    assert any("thickness not given" in w for w in doc["warnings"])
    rows = list(csv.DictReader(io.StringIO(m.to_csv())))
    assert "thickness not given" in rows[0]["warnings"]


def test_thickness_zero_declares_a_sheet_thin_part():
    if not DEMO_PHOTO.exists():
        pytest.skip("samples/ not in this checkout")
    m = scanmass.measure(DEMO_PHOTO, printed_x_mm=100.4, printed_y_mm=99.7, thickness_mm=0)
    assert "thickness_unknown" not in m.parts[0].uncertainty_terms
    assert not any("thickness not given" in w for w in m.warnings)
    assert m.to_csv().splitlines()[1].endswith(",")  # no warning in the CSV row


def test_given_thickness_measures_within_stated_uncertainty():
    if not DEMO_PHOTO.exists():
        pytest.skip("samples/ not in this checkout")
    m = scanmass.measure(DEMO_PHOTO, printed_x_mm=100.4, printed_y_mm=99.7, thickness_mm=2.5, thickness_u_mm=0.05)
    outer, holes = demo_photos()[0].parts[0]
    area, centroid = _truth(outer, holes)
    part = m.parts[0]
    assert abs(part.area_mm2 - area) <= 3 * part.area_u_mm2
    assert math.dist(part.centroid_mm, centroid) < 0.05


def _disc_scan(centres_px, radius_px=60):
    import numpy as np

    img = np.full((300, 460), 235, np.uint8)
    for cx, cy in centres_px:
        import cv2

        cv2.circle(img, (cx * 16, cy * 16), radius_px * 16, 25, -1, lineType=cv2.LINE_AA, shift=4)
    return img


def test_touching_parts_are_detected():
    """Two discs of 120 px laid touching come out as one part; the neck between them is reported."""
    m = scanmass.measure(_disc_scan([(130, 150), (250, 150)]), dpi=300)
    assert len(m.parts) == 1
    assert any("looks like two parts touching" in w for w in m.warnings)


def test_separate_and_single_parts_are_not_touching():
    m = scanmass.measure(_disc_scan([(100, 150), (300, 150)]), dpi=300)
    assert len(m.parts) == 2 and not any("touching" in w for w in m.warnings)
    import numpy as np

    img = np.full((300, 460), 235, np.uint8)
    img[40:260, 60:160] = 25  # an L bracket: legs 100 px wide, no neck
    img[160:260, 60:400] = 25
    m = scanmass.measure(img, dpi=300)
    assert len(m.parts) == 1 and not any("touching" in w for w in m.warnings)


# ---------------------------------------------------------------------------------
# the committed path-traced renders (benchmarks/render_reallight.py, Blender Cycles)
# ---------------------------------------------------------------------------------

REALLIGHT = ROOT / "tests" / "data" / "reallight"
RENDERS = sorted(p.name for p in REALLIGHT.glob("*.json")) if REALLIGHT.exists() else []


def _render_truth(name):
    """A render's truth file and its parts' shapely truth (``_reallight_truth.truth_render``), each
    part's thickness also under ``thickness_mm``."""
    truth, parts = truth_render(REALLIGHT, name)
    return truth, [dict(p, thickness_mm=p["t"]) for p in parts]


#: Renders where the measurement still fails the issue's requirements (each one warned, never silent):
#: the reason, as the benchmark shows it.
KNOWN_FAILING = {
    "dev-mixed-nylon-t15.json": "white nylon cam and washer in mixed light under the Filmic curve: their top faces "
    "read 0.93-0.94 of the paper (above segment/whiteface.FACE_RATIO_RANGE), too near it for their outlines to be "
    "placed; the small regions found beside them (lit walls, hole bottoms; -96 to -99 % in area) are named as "
    "pieces of white parts and the photo is refused with the fix (was: reported as parts, up to 60 sigma off)",
    "dev-lens-window-steel4-t20.json": "brushed steel in window light through the distorting lens, the camera turned "
    "away from the window: the plate's lit half and the paper beside it both at the sensor's ceiling, its outline not "
    "in the photo; its pieces (unclipped corner, a hole's shade, a wall's strip) named 'clipped light' and loose, the "
    "gasket found (+21.7 %, 0.4 sigma; branch litsteel32)",
    "dev-lens-window-steel7-t18.json": "as dev-lens-window-steel4-t20 with another plate and placement (branch "
    "litsteel32): the plate's lit face clipped with the paper, its pieces named 'clipped light' and loose, the gasket "
    "found",
}
#: The exception a known failure raises instead of a result, where it raises one.
KNOWN_RAISES: dict[str, type[Exception]] = {"dev-mixed-nylon-t15.json": SegmentationError}


@pytest.mark.slow
@pytest.mark.parametrize(
    "name",
    [
        pytest.param(n, marks=pytest.mark.xfail(reason=KNOWN_FAILING[n], raises=KNOWN_RAISES.get(n), strict=True))
        if n in KNOWN_FAILING
        else n
        for n in RENDERS
    ],
)
def test_rendered_photo_every_part_found_and_never_confidently_wrong(name):
    """Every part found, no shadow or marker reported as a part, and each part's area and
    centroid within 3 stated sigma -- or a warning that names the problem."""
    truth, parts = _render_truth(name)
    image = REALLIGHT / truth["image"]
    kwargs = (
        {"dpi": 25.4 * max(truth["camera"]["size_px"]) / truth["camera"]["ortho_scale_mm"]}
        if truth["kind"] == "scan"
        else {}
    )
    for thickness in sorted({p["thickness_mm"] for p in parts}):
        m = scanmass.measure(image, thickness_mm=thickness, **kwargs)
        assert len(m.parts) == len(parts), (name, [p.area_mm2 for p in m.parts])
        for tp in parts:
            if tp["thickness_mm"] != thickness:
                continue
            part = min(m.parts, key=lambda q: math.dist(q.centroid_mm, tp["centroid"]))
            assert math.dist(part.centroid_mm, tp["centroid"]) < 8.0, (name, tp["shape"])
            covered = abs(part.area_mm2 - tp["area"]) <= 3 * part.area_u_mm2 and all(
                abs(c - t) <= 3 * u for c, t, u in zip(part.centroid_mm, tp["centroid"], part.centroid_u_mm)
            )
            for centre, diameter in tp["holes"]:
                near = [h for h in part.holes if math.dist(h.circle_centre_mm, centre) < 2.0]
                hole = min(near, key=lambda h: math.dist(h.circle_centre_mm, centre)) if near else None
                covered = covered and hole is not None and abs(hole.diameter_mm - diameter) <= 3 * hole.diameter_u_mm
            warned = any(f" {part.label} (" in w or f"part {part.label} " in w for w in m.warnings)
            assert covered or warned, (name, tp["shape"], part.area_mm2 / tp["area"] - 1, m.warnings)


def test_part_leaving_the_clear_area_is_refused_with_the_fix():
    """Bad input: the only part crosses the clear area's edge (A4 mat: x from 38.5 mm, scanmass.scale.mat)."""
    from scanmass.scale.mat import make_mat
    from scanmass.testing.photos import PhotoParts, make_camera, render_photo
    from scanmass.testing.scans import rectangle

    part = PhotoParts(rectangle(20.0, 120.0, 60.0, 40.0))  # x 20-80 mm: over the clear area's left edge
    img = render_photo(make_mat("a4-portrait"), [part], make_camera(tilt_deg=0.0, distance_mm=420.0), seed=3)
    with pytest.raises(SegmentationError, match="crosses its edge.*move it inside"):
        scanmass.measure(img, printed_x_mm=100.0, printed_y_mm=100.0, thickness_mm=0)


# ---------------------------------------------------------------------------------
# metal that looks like the paper along its outline, deep holes, white on white
# ---------------------------------------------------------------------------------


def _measure_render(name, thickness):
    truth, parts = _render_truth(name)
    m = scanmass.measure(REALLIGHT / truth["image"], thickness_mm=thickness)
    return m, [p for p in parts if p["thickness_mm"] == thickness]


def _nearest(m, tp):
    return min(m.parts, key=lambda q: math.dist(q.centroid_mm, tp["centroid"]))


@pytest.mark.slow
@pytest.mark.parametrize(
    "name, thickness, off",
    [("soft-steel-t0.json", 3.0, False), ("soft-steel-t0.json", 5.0, False), ("mixed-brass-t30.json", 3.0, True)],
)
def test_metal_edge_that_looks_like_paper_is_warned_and_covered(name, thickness, off):
    """Brushed steel under a large soft light (bright, with a dark band beside its edge) and brass
    under warm and cool light (a soft ramp of another colour): the outline may sit 1-4 px off
    the top face's edge. Each such part is named in the 'unclear edge' warning and its area,
    centroid and hole diameters lie within 3 stated sigma (truth: the render's outlines, shapely).
    The steel's dark band is mostly its side wall facing the camera, which the measurement now
    takes as outside the outline (its round holes tell): those parts come out within 0.5 %."""
    if not REALLIGHT.exists():
        pytest.skip("tests/data/reallight not in this checkout")
    m, parts = _measure_render(name, thickness)
    warning = next(w for w in m.warnings if w.startswith("unclear edge:"))
    for tp in parts:
        part = _nearest(m, tp)
        assert f" {part.label} (" in warning
        assert part.uncertainty_terms["unclear_edge"]["area_mm2"] > 0
        err = abs(part.area_mm2 - tp["area"])
        if off:
            assert err > 0.01 * tp["area"]  # the outline really is off: 2.7 % (bench_reallight) ...
        else:
            assert err < 0.005 * tp["area"]  # the wall modelled: 0.1-0.4 % (bench_reallight) ...
        assert err <= 3 * part.area_u_mm2  # ... and the stated uncertainty covers it
        for c, t, u in zip(part.centroid_mm, tp["centroid"], part.centroid_u_mm):
            assert abs(c - t) <= 3 * u
        for centre, diameter in tp["holes"]:
            hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
            assert abs(hole.diameter_mm - diameter) <= 3 * hole.diameter_u_mm


@pytest.mark.slow
@pytest.mark.parametrize(
    "name, thickness, shape",
    [("spot-steel-t0.json", 6.0, "cam"), ("window-steel-t25.json", 5.0, "l-bracket")],
)
def test_deep_hole_that_looks_dark_is_opened_at_its_top_face(name, thickness, shape):
    """Holes 5.5-8 mm wide in parts 4-8 mm thick under a spotlight or window light: their walls and
    bottoms lie in shade and look darker than the part, so the outline did not open them (they were
    only flagged as possible hidden holes). With the thickness given, the dark opening's edge mapped
    onto the top face's plane is a circle: each hole is now measured, named in the 'deep hole'
    warning with the term 'deep_hole', its diameter within 0.6 mm of the true one (bench_reallight:
    -0.35 to -0.25 mm; the term alone states 0.6-0.8 mm at 1 sigma) and within 3 stated sigma, and the part's
    area within 3 stated sigma (truth: the render's outlines, shapely)."""
    if not REALLIGHT.exists():
        pytest.skip("tests/data/reallight not in this checkout")
    m, parts = _measure_render(name, thickness)
    tp = next(p for p in parts if p["shape"] == shape)
    part = _nearest(m, tp)
    warning = next(w for w in m.warnings if w.startswith("deep hole:"))
    assert f"part {part.label} (" in warning
    assert part.uncertainty_terms["deep_hole"]["area_mm2"] > 0
    assert not any(f"part {part.label} (a pit" in w for w in m.warnings if w.startswith("possible hidden hole:"))
    for centre, diameter in tp["holes"]:
        hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
        assert math.dist(hole.circle_centre_mm, centre) < 1.0
        assert abs(hole.diameter_mm - diameter) < 0.6
        assert abs(hole.diameter_mm - diameter) <= 3 * hole.diameter_u_mm
    assert abs(part.area_mm2 - tp["area"]) <= 3 * part.area_u_mm2


@pytest.mark.slow
def test_dark_bore_of_a_black_disc_is_opened():
    """The black disc 8 mm thick under the spotlight: its 8 mm bore shows its far wall and its bottom
    in the disc's shadow, darker than the face (0.2-0.45 of it), and was missed (+9.8 % in
    area, a 'possible hidden hole'). Nothing on a flat dark face in the light is darker than it
    but a hole (darkface.hole_bottoms): the bore is opened at its top edge and named in the
    'deep holes opened' warning; area within 2 % and the bore's diameter within 0.6 mm, both
    within 3 stated sigma (bench_reallight: -0.25 %, -0.03 mm; truth: the render's outlines,
    shapely)."""
    if not REALLIGHT.exists():
        pytest.skip("tests/data/reallight not in this checkout")
    m, parts = _measure_render("spot-black-t20.json", 8.0)
    tp = next(p for p in parts if p["shape"] == "disc")
    part = _nearest(m, tp)
    assert any(w.startswith("deep holes opened:") and f" {part.label} (" in w for w in m.warnings)
    err = abs(part.area_mm2 - tp["area"])
    assert err < 0.02 * tp["area"] and err <= 3 * part.area_u_mm2
    ((centre, diameter),) = tp["holes"]
    hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
    assert math.dist(hole.circle_centre_mm, centre) < 1.0
    assert abs(hole.diameter_mm - diameter) < 0.6 and abs(hole.diameter_mm - diameter) <= 3 * hole.diameter_u_mm


@pytest.mark.slow
@pytest.mark.parametrize("thickness, shape", [(8.0, "disc"), (3.0, "l-bracket")])
def test_deep_holes_in_spot_light_measured_on_their_near_rim(thickness, shape):
    """Spotlight, black plastic 3 and 8 mm thick (spot-black-t20): inside each hole's opening the
    wall facing the camera is in shade and, near the rim, as dark as the face, so the traced opening
    stopped short on that (far) side and the found rings lost a stretch of it: the holes read
    0.13-0.41 mm small. On the rim's side towards the camera's nadir the top edge hides the wall and
    the opening's border is the top edge against the floor; the far side may only stop short (the
    wall lies inside the top edge's circle), so far points inside the circle are left out of the
    fit, and an out-of-round found ring gives way to the wider clean fit. Each hole within 0.1 mm of
    the true diameter (the issue's target; bench_reallight: -0.04, -0.06 / -0.05 mm) and within 3
    stated sigma (truth: the render's outlines, shapely; equal-area diameters)."""
    if not REALLIGHT.exists():
        pytest.skip("tests/data/reallight not in this checkout")
    m, parts = _measure_render("spot-black-t20.json", thickness)
    tp = next(p for p in parts if p["shape"] == shape)
    part = _nearest(m, tp)
    for centre, diameter in tp["holes"]:
        hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
        assert math.dist(hole.circle_centre_mm, centre) < 0.5
        assert abs(hole.diameter_mm - diameter) < 0.1
        assert abs(hole.diameter_mm - diameter) <= 3 * hole.diameter_u_mm
    assert abs(part.area_mm2 - tp["area"]) < 0.01 * tp["area"]


@pytest.mark.slow
def test_lit_wall_cut_with_a_shadow_is_not_painted_as_face():
    """Spotlight, black disc 8 mm thick (spot-black-t20): its wall facing the camera is lit (5-7 times
    the face's level) and the shadow cut takes it; the cut's edge was painted with each pixel's share
    of face between face and shadow, so wall pixels (brighter than the face) counted as face and the
    outline ran 0.6 mm outside the true edge along that side (+0.84 % in area). There the step runs
    from the face up to the wall: the area is within 0.5 % (bench_reallight: -0.25 %) and 3 stated
    sigma, the centroid within 0.25 mm (0.19 mm; truth: the render's outlines, shapely)."""
    if not REALLIGHT.exists():
        pytest.skip("tests/data/reallight not in this checkout")
    m, parts = _measure_render("spot-black-t20.json", 8.0)
    tp = next(p for p in parts if p["shape"] == "disc")
    part = _nearest(m, tp)
    err = abs(part.area_mm2 - tp["area"])
    assert err < 0.005 * tp["area"] and err <= 3 * part.area_u_mm2
    assert math.dist(part.centroid_mm, tp["centroid"]) < 0.25


@pytest.mark.slow
def test_black_part_shadow_cut_past_jpeg_ringing():
    """The black plastic bracket (3 mm) under the spotlight: its face (0.031 of the paper) rings
    by a few 8-bit codes near its outline in the JPEG, as rough as its shadow (0.015 of the
    paper, 10 px wide); the sweep found by the rough layers' shares ran 33 degrees askew and
    was refused (+19.9 % in area, holes 2.0-2.3 mm small). Pixels at the face's level and
    colour are no shadow, however rough (darkface._dark_face_alike), and the cut runs on the
    outline where the photo shows it (the top edge, beyond the footprint): the shadow is cut,
    the area within 1 % and 3 stated sigma, the centroid within 0.5 mm and both holes within
    0.8 mm (bench_reallight: +0.005 %, 0.22 mm, -0.06 / -0.05 mm; the cut's edge painted with
    each pixel's share of face, the holes' dark bottoms opened; truth: the render's outlines,
    shapely)."""
    if not REALLIGHT.exists():
        pytest.skip("tests/data/reallight not in this checkout")
    m, parts = _measure_render("spot-black-t20.json", 3.0)
    tp = next(p for p in parts if p["shape"] == "l-bracket")
    part = _nearest(m, tp)
    assert "shadow_cut" in part.uncertainty_terms
    err = abs(part.area_mm2 - tp["area"])
    assert err < 0.01 * tp["area"] and err <= 3 * part.area_u_mm2
    assert math.dist(part.centroid_mm, tp["centroid"]) < 0.5
    for c, t, u in zip(part.centroid_mm, tp["centroid"], part.centroid_u_mm):
        assert abs(c - t) <= 3 * u
    for centre, diameter in tp["holes"]:
        hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
        assert abs(hole.diameter_mm - diameter) < 0.8 and abs(hole.diameter_mm - diameter) <= 3 * hole.diameter_u_mm


def test_white_parts_on_white_paper_are_measured_by_their_top_faces_and_warned():
    """White nylon on the white mat (window light; the hard spot): what the threshold finds is the parts'
    shadows, lit walls and hole bottoms, which were refused (branch nylon10); now each part is found by its
    top face (segment/whiteface.py), a little darker and smoother than the paper, for each thickness and
    without one, named 'white on white' with the fix (a dark backing sheet), its figures within 3 stated
    sigma of the render's truth (shapely). The refusal stays where no face is found."""
    if not (REALLIGHT / "spot-nylon-t0.jpg").exists():
        pytest.skip("tests/data/reallight not in this checkout")
    for name, thicknesses in (("window-nylon-t0.json", (3.0, 5.0, None)), ("spot-nylon-t0.json", (3.0, 4.0, None))):
        truth, parts = _render_truth(name)
        for thickness in thicknesses:
            m = scanmass.measure(REALLIGHT / truth["image"], thickness_mm=thickness)
            assert len(m.parts) == len(parts)
            note = next(w for w in m.warnings if w.startswith("white on white:"))
            assert "dark backing sheet" in note and "backlight" in note
            for tp in parts:
                if thickness is not None and tp["thickness_mm"] != thickness:
                    continue
                part = _nearest(m, tp)
                assert "white_face" in part.uncertainty_terms
                assert abs(part.area_mm2 - tp["area"]) <= 3 * part.area_u_mm2
                for c, t, u in zip(part.centroid_mm, tp["centroid"], part.centroid_u_mm):
                    assert abs(c - t) <= 3 * u


def test_steel_mirroring_a_softbox_is_not_taken_for_white_on_white():
    """Brushed steel in soft light (soft-steel-t0, path-traced) is as neutral as the paper and brighter,
    but clipped at the sensor's ceiling nearly throughout: measured (both parts), not named white on white."""
    if not (REALLIGHT / "soft-steel-t0.jpg").exists():
        pytest.skip("tests/data/reallight not in this checkout")
    m = scanmass.measure(REALLIGHT / "soft-steel-t0.jpg", thickness_mm=3.0)
    assert len(m.parts) == 2
    assert not any(w.startswith("white on white") for w in m.warnings)


def test_grey_metal_face_too_wide_for_a_shadow_is_measured():
    """Brushed steel in mixed light (mixed-steel-t20, path-traced truth): its faces have the paper's
    tint and fade like a shadow, but each is wider than the cast shadow of a part that thick can be
    (4 mm / tan 15 degrees = 14.9 mm; they are 19-22 mm across): both parts are found, each area and
    centroid within 3 stated sigma of the render's exact outline (shapely), and warned. Without the
    thickness an 8 mm white part's shadow could be as wide, but each face holds a hole, which a shadow
    alone does not (segment.shadow.holed_face; branch nothick19, was refused): both parts are measured
    and within 3 stated sigma (tests/test_reallight_nothick.py checks the figures)."""
    if not (REALLIGHT / "mixed-steel-t20.jpg").exists():
        pytest.skip("tests/data/reallight not in this checkout")
    _, parts = _render_truth("mixed-steel-t20.json")
    for thickness in (3.0, 4.0):
        m = scanmass.measure(REALLIGHT / "mixed-steel-t20.jpg", thickness_mm=thickness)
        assert len(m.parts) == 2
        assert not any(w.startswith("shadow only") for w in m.warnings)
        for tp in parts:
            part = min(m.parts, key=lambda q: math.dist(q.centroid_mm, tp["centroid"]))
            assert math.dist(part.centroid_mm, tp["centroid"]) < 2.0, tp["shape"]
            assert abs(part.area_mm2 - tp["area"]) <= 3 * part.area_u_mm2, tp["shape"]
            for c, t, u in zip(part.centroid_mm, tp["centroid"], part.centroid_u_mm):
                assert abs(c - t) <= 3 * u, tp["shape"]
            assert any(f" {part.label} (" in w for w in m.warnings if w.startswith("cast shadow"))
    m = scanmass.measure(REALLIGHT / "mixed-steel-t20.jpg")
    assert len(m.parts) == 2
    assert not any(w.startswith("shadow only") for w in m.warnings)


def test_matte_parts_on_a_clean_photo_get_no_unclear_edge_or_hidden_hole_term():
    """A matte dark plate with holes on the mat (scanmass.testing.photos, flat light, Gaussian blur):
    its edges are clean steps and its holes show the paper, so neither check adds a term."""
    from scanmass.scale.mat import make_mat
    from scanmass.testing.photos import PhotoParts, make_camera, render_photo
    from scanmass.testing.scans import circle, rectangle

    plate = PhotoParts(rectangle(70.0, 110.0, 70.0, 45.0), [circle(90.0, 132.0, 5.0), circle(120.0, 132.0, 3.25)])
    for tilt in (0.0, 20.0):
        cam = make_camera(tilt_deg=tilt, distance_mm=420.0)
        img = render_photo(make_mat("a4-portrait"), [plate], cam, seed=5, jpeg_quality=92)
        m = scanmass.measure(img, printed_x_mm=100.0, printed_y_mm=100.0, thickness_mm=0)
        assert len(m.parts) == 1 and len(m.parts[0].holes) == 2
        assert "unclear_edge" not in m.parts[0].uncertainty_terms
        assert "hidden_hole" not in m.parts[0].uncertainty_terms
        assert not any(w.startswith(("unclear edge", "possible hidden hole")) for w in m.warnings)


def test_white_part_beside_a_black_one_is_found_by_its_top_face():
    """Window light, a white nylon disc (3 mm) beside a black L bracket (4 mm, two 5.5 mm holes):
    the bracket is measured within 3 stated sigma with both deep holes opened at their top edges
    (their dark walls and bottoms inside the dark face: darkface.hole_bottoms; before, they were
    named as pits and missed), each within 1 mm and 3 stated sigma (bench_reallight: -0.10 /
    +0.03 mm); the regions found where the disc is (its shadow, its hole's bottom), once named as
    shadows alone, give way to the disc found by its top face, warned as white on white (truth: the
    render's outlines, shapely)."""
    if not REALLIGHT.exists():
        pytest.skip("tests/data/reallight not in this checkout")
    m, parts = _measure_render("window-mixed-t0.json", 4.0)
    bracket = parts[0]
    part = _nearest(m, bracket)
    assert abs(part.area_mm2 - bracket["area"]) <= 3 * part.area_u_mm2
    for c, t, u in zip(part.centroid_mm, bracket["centroid"], part.centroid_u_mm):
        assert abs(c - t) <= 3 * u
    assert any(w.startswith("deep holes opened:") and f" {part.label} (" in w for w in m.warnings)
    for centre, diameter in bracket["holes"]:
        hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
        assert math.dist(hole.circle_centre_mm, centre) < diameter / 2
        assert abs(hole.diameter_mm - diameter) < 1.0 and abs(hole.diameter_mm - diameter) <= 3 * hole.diameter_u_mm
    _, all_parts = _render_truth("window-mixed-t0.json")
    disc = next(p for p in all_parts if p["shape"] == "disc")
    # the regions found where the disc is (its shadow, its hole's bottom) give way to the disc found by its top face
    assert len(m.parts) == 2
    (white,) = [q for q in m.parts if q.label != part.label]
    assert math.dist(white.centroid_mm, disc["centroid"]) < 2.0 and "white_face" in white.uncertainty_terms
    assert any(w.startswith("white on white:") and f"part {white.label} " in w for w in m.warnings)
    assert not any(w.startswith("shadow only:") for w in m.warnings)


@pytest.mark.slow
@pytest.mark.parametrize(
    ("name", "shape", "thickness", "area_pct", "centroid_mm", "hole_mm", "top_edge"),
    [
        # brushed steel in soft light: its walls look like the paper and like the holes' bottoms
        ("soft-steel-t0.json", "plate", 3.0, 0.4, 0.08, 0.08, True),
        ("soft-steel-t0.json", "disc", 5.0, 0.6, 0.08, 0.1, True),
        # under a spotlight the shadow cut takes the shaded wall facing the camera with the shadow; since
        # branch spotsteel18 gives back the face beside the shadow (segment/litcut) about 180 px of the shaded
        # wall come back with 55 px of face: -0.01 -> +0.85 % (0.1 sigma), centroid 0.02 -> 0.22 mm, a hole
        # -0.09 -> -0.16 mm; the price of the seal -9.2 -> -2.5 % and the dev-spot-steel3-t20 plate -7.3 -> -2.3 %
        ("spot-steel-t0.json", "plate", 3.0, 1.0, 0.25, 0.2, False),
    ],
)
def test_thick_part_whose_wall_faces_the_camera_is_measured_on_its_top_edge(
    name, shape, thickness, area_pct, centroid_mm, hole_mm, top_edge
):
    """Issue 11: with the thickness given these parts came out 1.6-2.6 % too small and their holes
    0.3-0.6 mm too large (the outline ran on the top face's edge, taken as the bottom edge where
    the wall faces the camera). Truth: the render's extruded outlines (shapely); tolerances are
    about the measured error plus the edge's pixel (0.34 mm) share, far inside the stated sigma."""
    truth, parts = _render_truth(name)
    tp = next(p for p in parts if p["shape"] == shape)
    m = scanmass.measure(REALLIGHT / truth["image"], thickness_mm=thickness)
    part = min(m.parts, key=lambda q: math.dist(q.centroid_mm, tp["centroid"]))
    assert abs(part.area_mm2 / tp["area"] - 1) < area_pct / 100, part.area_mm2 / tp["area"] - 1
    assert math.dist(part.centroid_mm, tp["centroid"]) < centroid_mm
    assert abs(part.area_mm2 - tp["area"]) <= 3 * part.area_u_mm2
    for centre, diameter in tp["holes"]:
        hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
        assert abs(hole.diameter_mm - diameter) < hole_mm, (hole.diameter_mm, diameter)
        assert abs(hole.diameter_mm - diameter) <= 3 * hole.diameter_u_mm
    said = m.settings.get("top_face_edge", {}).get("parts", [])
    assert (part.label in said) == top_edge


@pytest.mark.slow
@pytest.mark.parametrize(
    "name, thickness, shape",
    [
        ("spot-brass-t10.json", 1.5, "gasket"),
        ("lens-soft-black-t30.json", 3.0, "l-bracket"),
        ("soft-black-t15.json", 4.0, "l-bracket"),
    ],
)
def test_filmic_tone_curve_read_off_the_markers(name, thickness, shape):
    """Renders with Blender's Filmic tone curve (truth files' ``view_transform``) decoded as sRGB:
    the half-way level of every dark edge, the mat's printed markers' included, lies 0.13-0.21 px
    inside the dark side, so dark parts came out small all round: the median signed distance of
    the outline's vertices from the truth outline was -0.054 / -0.048 / -0.042 mm (shapely;
    areas -3.13 / -1.04 / -0.70 %, bench_reallight). The markers' offset from their printed place
    sets a power-law correction and each dark part's rings move out by what it gives for the
    part's own level: the median offset within 0.025 mm (now -0.014 / +0.007 / -0.003 mm), the
    area within 3 stated sigma, and the correction is said (truth: the render's outlines)."""
    if not REALLIGHT.exists():
        pytest.skip("tests/data/reallight not in this checkout")
    m, parts = _measure_render(name, thickness)
    tp = next(p for p in parts if p["shape"] == shape)
    part = _nearest(m, tp)
    assert any(w.startswith("tone curve:") for w in m.warnings)
    assert m.settings["marker_tone"]["applied"] is True
    raw = next(p for p in json.loads((REALLIGHT / name).read_text())["parts"] if p["shape"] == shape)
    outline = Polygon(raw["outline_mm"])  # shapely: each vertex's distance from the truth outline, signed
    offsets = [outline.exterior.distance(Point(v)) * (-1 if outline.contains(Point(v)) else 1) for v in part.outline_mm]
    assert abs(float(np.median(offsets))) < 0.025
    assert abs(part.area_mm2 - tp["area"]) <= 3 * part.area_u_mm2
    for c, t, u in zip(part.centroid_mm, tp["centroid"], part.centroid_u_mm):
        assert abs(c - t) <= 3 * u


@pytest.mark.slow
def test_cut_strip_closed_off_as_a_hole_is_opened():
    """The brass cam (3 mm) through the distorting lens, read as exact sRGB: the shadow cut painted a
    strip inside the outline first found, and the shadow's darker rim beyond that outline closed it
    off as a 'hole' 10 mm² in area whose fitted circle was 100 mm across (bench_reallight's
    h.xtra). A hole whose circle is more than twice as wide as the hole itself is a strip bent
    along an arc; beside a cut, it and the rim beyond it are left out with the shadow: every hole
    the cam reports is its bore (within 1 mm of its centre and 0.3 mm of its diameter), the
    warning names the strip, and the area lies within 3 stated sigma (truth: the render's
    outlines, shapely)."""
    if not REALLIGHT.exists():
        pytest.skip("tests/data/reallight not in this checkout")
    truth, parts = _render_truth("lens-spot-brass-t30.json")
    m = scanmass.measure(REALLIGHT / truth["image"], thickness_mm=3.0, encoding="srgb")
    tp = next(p for p in parts if p["shape"] == "cam" and p["thickness_mm"] == 3.0)
    part = _nearest(m, tp)
    ((centre, diameter),) = tp["holes"]
    assert len(part.holes) == 1
    assert math.dist(part.holes[0].circle_centre_mm, centre) < 1.0
    assert abs(part.holes[0].diameter_mm - diameter) < 0.3
    assert any("a strip of the cut" in w and f"part(s) {part.label} (" in w for w in m.warnings)
    assert abs(part.area_mm2 - tp["area"]) <= 3 * part.area_u_mm2
