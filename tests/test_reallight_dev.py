"""Development renders (``tests/data/reallight/dev-*``): the conditions of the held-out set's largest errors.

``benchmarks/render_reallight.py``'s ``dev_scenes`` rendered brass in soft light at a tilt, thick
steel and thin black parts in window light, thin steel under the spotlight at a tilt and thick
black parts in mixed light, rings with large bores under the spotlight at a tilt (branch ring11), and
``dev_scanner_scenes`` flatbed scans of brass and brushed steel 3-6 mm
thick under a lamp 30-32 degrees up, with other shapes, placements and tilts than the held-out scenes
(whose images were not looked at). Truth: each render's truth file (the outlines Blender
extruded); areas and centroids from shapely, not from the code under test. Renders the code
cannot handle yet are strict xfails with their figures (``bench_reallight``), or are checked to be
warned and covered.
"""

from __future__ import annotations

import functools
import json
import math
import statistics
from pathlib import Path

import pytest
from _reallight_truth import truth_render
from shapely.geometry import Polygon

import scanmass
from scanmass.errors import OptionError, SegmentationError

REALLIGHT = Path(__file__).resolve().parents[1] / "tests" / "data" / "reallight"

pytestmark = [
    pytest.mark.slow,
    pytest.mark.skipif(
        not (REALLIGHT / "dev-window-steel-t0.json").exists(), reason="dev renders not in this checkout"
    ),
]


def _truth(name: str, shape: str) -> dict:
    truth = json.loads((REALLIGHT / f"{name}.json").read_text())
    p = next(q for q in truth["parts"] if q["shape"] == shape)
    poly = Polygon(p["outline_mm"], p["holes_mm"])  # shapely: area and centroid of the truth outline
    holes = []
    for h in p["holes_mm"]:  # shapely: a round hole's diameter from its polygon's area (equal-area circle)
        hp = Polygon(h)
        holes.append(((hp.centroid.x, hp.centroid.y), 2 * math.sqrt(hp.area / math.pi)))
    return {
        "image": REALLIGHT / truth["image"],
        "t": p["thickness_mm"],
        "area": poly.area,
        "centroid": (poly.centroid.x, poly.centroid.y),
        "holes": holes,
    }


def _part(name: str, shape: str):
    tp = _truth(name, shape)
    m = scanmass.measure(tp["image"], thickness_mm=tp["t"])
    part = min(m.parts, key=lambda q: math.dist(q.centroid_mm, tp["centroid"]))
    return m, part, tp


def _covered(part, tp) -> bool:
    return abs(part.area_mm2 - tp["area"]) <= 3 * part.area_u_mm2 and all(
        abs(c - t) <= 3 * u for c, t, u in zip(part.centroid_mm, tp["centroid"], part.centroid_u_mm)
    )


def test_shadow_core_of_a_bracket_cut_along_the_photos_shadow_direction():
    """dev-window-steel-t0: a brushed-steel L bracket 6 mm thick in window light (the light 25
    degrees up, so the shadow reaches 13 mm, its core as dark as the face and rough). Its own
    sweep search ran along the shadow the upright arm throws beside the other arm and was
    refused; only the shadow's fade was cut (+21.8 % in area, centroid 1.9 mm). The cam 8 mm
    thick beside it shows the photo's shadow direction (one light); swept along it, the core
    darker than the face is cut with the fade: -0.46 % (bench_reallight), centroid 0.51 mm."""
    m, part, tp = _part("dev-window-steel-t0", "l-bracket")
    warning = next(w for w in m.warnings if w.startswith("cast shadow cut:"))
    assert f" {part.label} (" in warning
    assert "shadow_cut" in part.uncertainty_terms
    assert abs(part.area_mm2 - tp["area"]) < 0.03 * tp["area"]  # was +21.8 % with the core left in
    assert math.dist(part.centroid_mm, tp["centroid"]) < 1.0  # was 1.89 mm
    assert _covered(part, tp)
    for centre, diameter in tp["holes"]:
        hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
        assert math.dist(hole.circle_centre_mm, centre) < 1.0
        assert abs(hole.diameter_mm - diameter) <= 3 * hole.diameter_u_mm


def test_window_light_black_parts_at_a_tilt():
    """dev-window-black-t20: black gasket 2 mm and disc 4 mm in window light at 20 degrees: both
    shadows cut, areas within 1 % (bench_reallight: -0.64 / +0.93 %) and within 3 stated sigma."""
    for shape in ("gasket", "disc"):
        m, part, tp = _part("dev-window-black-t20", shape)
        assert abs(part.area_mm2 - tp["area"]) < 0.01 * tp["area"], shape
        assert _covered(part, tp), shape


def test_pale_brass_mirroring_a_softbox_is_found():
    """dev-soft-brass-t25: pale brass in soft light at 25 degrees of tilt. The 5 mm cam mirrors the
    softbox and is brighter than the paper (linear R G B 0.82 0.75 0.53 against 0.55 0.55 0.54), so
    its grey levels find only its shaded wall and its bore's shadow, and the photo was refused as
    'found only in pieces'. By colour (blue against green, the paper's ratio: 0 on the paper lit or
    in shade) both brass parts are found and measured (pipeline/photo_colour.py): cam -3.2 %,
    plate -2.5 % (-0.26 % since branch brass18 evens its dark reflection; bench_reallight), warned, with the terms 'colour_face' and 'colour_wall' (a brass
    side wall has the face's colour) covering them."""
    for shape in ("cam", "plate"):
        m, part, tp = _part("dev-soft-brass-t25", shape)
        assert abs(part.area_mm2 - tp["area"]) < 0.05 * tp["area"], shape  # was refused (or -99 %)
        assert "colour_face" in part.uncertainty_terms and "colour_wall" in part.uncertainty_terms, shape
        assert _covered(part, tp), shape
        for centre, diameter in tp["holes"]:
            hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
            assert abs(hole.diameter_mm - diameter) <= 3 * hole.diameter_u_mm, shape
    assert any(w.startswith("coloured face brighter than the paper:") for w in m.warnings)
    assert any("parts of the paper's colour" in w for w in m.warnings)  # the grey levels refused it


def test_piece_with_a_hole_past_its_outline_refuses_the_photo_with_its_cause(monkeypatch):
    """dev-soft-brass-t25 with its colour planes withheld (the grey path alone): a piece of the
    unfound pale cam whose hole maps past its own outline used to make the section refuse the whole
    photo with an OptionError blaming the options; the cam's other pieces would be reported as parts
    at -99 % (a confident wrong figure), so the photo is refused, now with the cause and the fix,
    with and without the thickness."""
    import scanmass.pipeline.flow as flow

    monkeypatch.setattr(flow, "_photo_colour", lambda image: None)
    truth = json.loads((REALLIGHT / "dev-soft-brass-t25.json").read_text())
    for thickness in (5.0, None):
        # refused by the piece whose hole maps past its outline or, without the thickness, first by
        # the piece whose surroundings are brighter than the paper (photo_checks._check_bright_surrounds) ...
        with pytest.raises(SegmentationError, match="(found|seen) only in pieces") as err:
            scanmass.measure(REALLIGHT / truth["image"], thickness_mm=thickness)
        assert not isinstance(err.value, OptionError)
        assert "diffuse light" in str(err.value)
    # ... and without that check the hole past its own outline still refuses it with its cause
    monkeypatch.setattr(flow, "_check_bright_surrounds", lambda image, scale, result: None)
    for thickness in (5.0, None):
        with pytest.raises(SegmentationError, match="found only in pieces") as err:
            scanmass.measure(REALLIGHT / truth["image"], thickness_mm=thickness)
        assert not isinstance(err.value, OptionError)
        assert "diffuse light" in str(err.value)


def test_bright_brushed_sectors_of_a_steel_disc_are_kept():
    """dev-spot-steel-t20: a brushed-steel disc 3 mm thick under the spot at 20 degrees. Two of its
    brushed sectors mirror the light at about 0.79 of the paper's level, above the threshold, so
    only the dark sectors and the shadow were found, bounded across the face where its shading
    crosses the threshold (-11.8 % in area, centroid 3.28 mm, bore -2.68 mm, bench_reallight). The
    lit sectors end on a full step to the paper at the disc's edge: they are joined
    (segment/brightface.py), warned and carry the term 'lost_face'; the shadow is then cut:
    -1.05 %, centroid 0.12 mm, bore +0.19 mm (bench_reallight)."""
    m, part, tp = _part("dev-spot-steel-t20", "disc")
    assert abs(part.area_mm2 - tp["area"]) < 0.03 * tp["area"]  # was -11.8 %
    assert math.dist(part.centroid_mm, tp["centroid"]) < 0.5  # was 3.28 mm
    assert "lost_face" in part.uncertainty_terms
    assert any(w.startswith(f"part {part.label}: ") and "term 'lost_face'" in w for w in m.warnings)
    assert "shadow_cut" in part.uncertainty_terms
    assert _covered(part, tp)
    ((centre, diameter),) = tp["holes"]
    (hole,) = part.holes  # the bore only: the lit ridge beside it is no hole
    assert abs(hole.diameter_mm - diameter) < 0.5  # was -2.68 mm
    assert abs(hole.diameter_mm - diameter) <= 3 * hole.diameter_u_mm


def test_lit_sectors_of_a_second_steel_cam_are_kept():
    """dev-spot-steel3-t20 (rendered to check the rule on other parts than dev-spot-steel-t20's): a
    brushed-steel cam 2 mm thick under the spot at 20 degrees, its lit sectors above the threshold:
    -10.3 % in area and its bore missed before (bench_reallight); joined up to the cam's sharp edge:
    +7.5 %, bore +0.60 mm, within 3 stated sigma (0.3 sigma; +0.00 % before branch spotjoin12, where a
    false 9.7 mm hole cancelled the cast shadow left on); with its shadow cut (branch spotcut12) -1.77 %,
    bore +0.49 mm."""
    m, part, tp = _part("dev-spot-steel3-t20", "cam")
    assert abs(part.area_mm2 - tp["area"]) < 0.1 * tp["area"]  # was -10.3 % (within 2 %: below)
    assert "lost_face" in part.uncertainty_terms
    assert _covered(part, tp)
    ((centre, diameter),) = tp["holes"]
    hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))  # was missed
    assert math.dist(hole.circle_centre_mm, centre) < 1.5
    assert abs(hole.diameter_mm - diameter) <= 3 * hole.diameter_u_mm


def test_second_steel_cam_holes_count():
    """dev-spot-steel3-t20, thickness given: the cam has one bore (8.0 mm) but two holes were reported,
    the bore and a 9.73 mm hole 11 mm from it (bench_reallight). The second was a lit sector of the
    face: the first measurement joined it (:mod:`scanmass.segment.brightface`: its sharp step to the
    paper beside it), but the deep-hole step paints the bore's old found hole in the
    face's level and its top-face circle in the paper's, and in the measurement made on that image
    the sector is enclosed by the face with no paper beside it to step to. Its rim is a ramp (0.62 of
    the step held to its edge), not a hole's sharp edge: it is joined. Now one hole, +0.60 mm (+0.49 mm
    with the cam's shadow cut, branch spotcut12)."""
    m, part, tp = _part("dev-spot-steel3-t20", "cam")
    assert len(part.holes) == len(tp["holes"])  # truth: the holes of the outline the renderer extruded
    ((centre, diameter),) = tp["holes"]
    (hole,) = part.holes
    assert math.dist(hole.circle_centre_mm, centre) < 1.0
    assert abs(hole.diameter_mm - diameter) <= 3 * hole.diameter_u_mm


def test_second_steel_cam_area_within_2_percent():
    """dev-spot-steel3-t20, thickness given: the steel cam's cast shadow was not cut: its sweep read 16.3 px,
    longer than a 2 mm part's shadow can be (10.5 px), so the cut was refused: +7.54 % in area, centroid
    1.31 mm, 0.3 sigma, warned 'cast shadow' (bench_reallight, branch spotjoin12). The shadow (0.02 of the
    paper) steps at 8-9 px to the face's dark brushed sector (0.055-0.08), but the face's level was read
    6-14 px beyond the rough layers, in its lit sectors (0.14): half-way to that lay inside the dark sector.
    Where the sweep so read is too long for the part's shadow, the step is read to the face beside the
    shadow (the layers next beyond the rough run): 8.9 px, cut: -1.77 %, centroid 0.24 mm."""
    m, part, tp = _part("dev-spot-steel3-t20", "cam")
    assert "shadow_cut" in part.uncertainty_terms  # was left with the term 'cast_shadow'
    assert abs(part.area_mm2 - tp["area"]) < 0.02 * tp["area"]  # was +7.54 %
    assert math.dist(part.centroid_mm, tp["centroid"]) < 0.5  # was 1.31 mm
    assert _covered(part, tp)


def test_steel_plate_with_sectors_as_bright_as_the_paper():
    """dev-spot-steel3-t20: the 3 mm steel plate's two lit sectors hold a streak at the paper's level; joined by
    their step beyond the found face's hull (branch spot15), the plate read -7.3 %, centroid 1.26 mm, its 10 mm hole
    missed: the cast-shadow cut painted a layer of its left sector along the notch's edge. That lit, smooth layer is
    given back (:mod:`scanmass.segment.litcut`, branch spotsteel18): -2.3 %, centroid 0.33 mm, the 10 mm hole
    found (bench_reallight). Truth: the render's outlines (shapely)."""
    m, part, tp = _part("dev-spot-steel3-t20", "plate")
    assert _covered(part, tp)  # it is covered: what fails is the figure itself
    assert abs(part.area_mm2 - tp["area"]) < 0.03 * tp["area"]
    assert len(part.holes) == len(tp["holes"])


def test_mixed_light_coloured_shadows_cut_from_black_parts():
    """dev-mixed-black-t15: black cam 6 mm and plate 3 mm under a warm lamp and a cool window (15
    degrees of tilt). The shadow each light throws is lit by the other one, so it has that light's
    tint, not the paper white's; it is cut by colour (segment.colourshadow: the light a shadow pixel
    misses has the blocked light's colour). Before: cam +14.3 % in area, centroid 1.85 mm, hole
    -1.19 mm; plate +4.8 %, centroid 0.97 mm (bench_reallight). Now -0.83 % / +0.93 %, centroids
    0.19 / 0.44 mm, the cam's hole -0.01 mm."""
    for shape in ("cam", "plate"):
        m, part, tp = _part("dev-mixed-black-t15", shape)
        warning = next(w for w in m.warnings if w.startswith("cast shadow cut:"))
        assert f" {part.label} (" in warning, shape
        assert "shadow_cut" in part.uncertainty_terms, shape
        said = next(w for w in m.warnings if w.startswith("mixed light:"))  # named as cut by colour
        assert f" {part.label}" in said.split(" the cut shadow")[0], shape
        assert abs(part.area_mm2 - tp["area"]) < 0.015 * tp["area"], shape  # was +14.3 / +4.8 %
        assert math.dist(part.centroid_mm, tp["centroid"]) < 0.6, shape  # was 1.85 / 0.97 mm
        assert _covered(part, tp), shape
        for centre, diameter in tp["holes"]:
            hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
            assert abs(hole.diameter_mm - diameter) < 0.2, shape  # the cam's was -1.19 mm


def test_mixed_light_black_gasket_cut_outside_and_covered():
    """dev-mixed-black-t0 (rendered for branch mixed11, no tilt): a black gasket 3 mm thick under the
    same two lights. Its outer shadow is cut by colour (+11.7 % -> +5.8 % in area, centroid 0.75 ->
    0.14 mm); what is left is its bore, 1.0 mm too small on the side whose wall faces the camera
    (see the xfail below). Within 3 stated sigma."""
    m, part, tp = _part("dev-mixed-black-t0", "gasket")
    assert "shadow_cut" in part.uncertainty_terms
    assert abs(part.area_mm2 - tp["area"]) < 0.08 * tp["area"]  # was +11.7 %
    assert math.dist(part.centroid_mm, tp["centroid"]) < 0.3  # was 0.75 mm
    assert _covered(part, tp)


@pytest.mark.xfail(
    strict=True,
    reason="dev-mixed-black-t0: the black gasket's 29 mm bore reads 1.02 mm small (+5.8 % in area; 0.6 sigma): "
    "on its side whose wall faces the camera the outline runs at the wall's foot inside the bore, not on the top "
    "face's edge; the thick disc's cut by grain runs 0.5-0.9 mm inside its shadow side (-1.57 %, 0.2 sigma)",
)
def test_mixed_light_black_gasket_bore_and_disc_within_1_percent():
    for shape in ("gasket", "disc"):
        m, part, tp = _part("dev-mixed-black-t0", shape)
        assert abs(part.area_mm2 - tp["area"]) < 0.01 * tp["area"], shape


def test_spot_lit_black_collar_shadow_cut_outside_and_in_its_bore():
    """dev-spot-black-t12 (branch ring11): a black collar 3.5 mm thick (38 / 25 mm) under the hard spot
    at 12 degrees of tilt. Its shadow falls beside its outer edge away from the light and, inside the
    bore, on the paper beside the bore's edge towards the light: both are the face swept by the one
    shadow vector (3.5 mm / tan 40 degrees = 4.2 mm). Under the photo's filmic curve the shadow is
    at 0.023 of the paper, and its first three pixels from the outline read smooth (the roughness
    divides by a level the bright paper raises there), so no sweep ran from the boundary and the
    shadow stayed in: +23.7 % in area, centroid 3.27 mm (bench_reallight). With the blurred rim
    passed over: -0.40 %, centroid 0.23 mm, bore +0.13 mm."""
    m, part, tp = _part("dev-spot-black-t12", "collar")
    warning = next(w for w in m.warnings if w.startswith("cast shadow cut:"))
    assert f" {part.label} (" in warning
    assert "shadow_cut" in part.uncertainty_terms
    assert abs(part.area_mm2 - tp["area"]) < 0.015 * tp["area"]  # was +23.7 %
    assert math.dist(part.centroid_mm, tp["centroid"]) < 0.5  # was 3.27 mm
    assert _covered(part, tp)
    ((centre, diameter),) = tp["holes"]
    (hole,) = part.holes
    assert math.dist(hole.circle_centre_mm, centre) < 0.5
    assert abs(hole.diameter_mm - diameter) < 0.3


def test_spot_lit_steel_seal_shadow_cut_and_covered():
    """dev-spot-steel-t18 (branch ring11): a brushed-steel seal 2.2 mm thick with a narrow face (50 / 38
    mm) under the hard spot at 18 degrees. Its shadow (0.015 of the paper) was left in for the same
    reason as the collar's: +18.2 % in area, centroid 1.11 mm, bore -0.86 mm, 8.3 sigma off (a confident
    wrong figure). Now cut: within 3 stated sigma, centroid within 0.5 mm (was 1.11), the error no
    longer of the shadow's sign; what is left is the xfail below."""
    m, part, tp = _part("dev-spot-steel-t18", "seal")
    assert "shadow_cut" in part.uncertainty_terms
    assert part.area_mm2 < tp["area"] * 1.02  # was +18.2 %
    assert math.dist(part.centroid_mm, tp["centroid"]) < 0.5  # was 1.11 mm
    assert _covered(part, tp)  # was 8.3 sigma off


@pytest.mark.xfail(
    strict=True,
    reason="dev-spot-steel-t18: the steel seal comes out -2.5 % in area (was -9.2 %, 0.6 sigma, bore +0.51 mm, "
    "before branch spotsteel18 gave back the face the cut took; bore now +0.10 mm). The cut's sweep "
    "is (-8, 3) px, 3.2 mm (the shadow is 2.2 / tan 40 = 2.6 mm; its layers' level crosses half-way at 7.1 px, "
    "2.7 mm, and the vote search lengthens it: the brushed face's dark sectors vote as shadow); measured "
    "outline against the truth circle by 30-degree sectors of the mat: outer 0.3-0.4 mm inside over 210-330 "
    "degrees and 0.5-1.5 mm out (shadow left) over 150-180, the bore's edge 0.7-1.3 mm out over 30-150 (beyond "
    "the cut's length: the thick part's top-seen mapping there is not yet understood)",
)
def test_spot_lit_steel_seal_within_1_percent():
    m, part, tp = _part("dev-spot-steel-t18", "seal")
    assert abs(part.area_mm2 - tp["area"]) < 0.01 * tp["area"]


def test_spot_lit_thin_brass_bracket_keeps_its_area_and_holes():
    """dev-spot-brass-t22 (branch brass11): a brass L-bracket 2.5 mm thick under the hard spot at 22
    degrees beside a brass gasket, the conditions in which a thin brass bracket lost a hole and 18 % of
    its area after a lit region of its face was joined (term 'lost_face') and the later shadow cut and
    fragment merge ran on the enlarged part. Here the shadow is cut, both holes are kept, the area is
    +0.9 % (gasket -1.4 %); truth: the render's outlines, areas and centroids by shapely."""
    m, part, tp = _part("dev-spot-brass-t22", "l-bracket")
    assert "shadow_cut" in part.uncertainty_terms
    assert abs(part.area_mm2 - tp["area"]) < 0.02 * tp["area"]
    assert len(part.holes) == len(tp["holes"]) == 2
    assert math.dist(part.centroid_mm, tp["centroid"]) < 0.5
    m, gasket, tg = _part("dev-spot-brass-t22", "gasket")
    assert abs(gasket.area_mm2 - tg["area"]) < 0.02 * tg["area"]
    assert len(gasket.holes) == 1


def test_spot_lit_thin_brass_bracket_shadow_cut_by_its_tint():
    """dev-spot-brass2-t27 (branch brass11): a brass L-bracket 2 mm thick under the hard spot at 27
    degrees, the camera farther (350 mm) and from another side, beside a brass plate 3 mm thick found in
    pieces and merged. The plate's shadow is cut (-0.6 %, three holes). The bracket's face is 1.16 times its
    shadow's level (0.0205 against 0.0177 of the paper white), a step of 0.3 times their pixels' noise, so its
    shadow was not cut but warned (term 'cast_shadow'): +12.1 % in area, centroid 1.04 mm (bench_reallight).
    The shadow keeps the paper's colour and the brass face is yellow (common practice): their yellowness steps
    3.8 times the noise, and the cut is placed where it falls to half of the face's (branch brass17:
    segment.colourshadow.tint_cut): +4.7 %, centroid 0.42 mm, within its stated uncertainty. Its holes are both
    found. Truth: the render's outlines by shapely."""
    m, part, tp = _part("dev-spot-brass2-t27", "l-bracket")
    assert "shadow_cut" in part.uncertainty_terms
    assert abs(part.area_mm2 - tp["area"]) < 0.06 * tp["area"]  # was +12.1 %
    assert math.dist(part.centroid_mm, tp["centroid"]) < 0.6  # was 1.04 mm
    assert len(part.holes) == 2
    assert _covered(part, tp)
    m, plate, tq = _part("dev-spot-brass2-t27", "plate")
    assert abs(plate.area_mm2 - tq["area"]) < 0.015 * tq["area"]
    assert len(plate.holes) == len(tq["holes"]) == 3


@pytest.mark.xfail(
    strict=True,
    reason="dev-spot-brass2-t27: the brass bracket's cast shadow (2 mm thick, spot 40 degrees up: about 2.4 mm "
    "wide) is cut by its tint (branch brass17; was warned, not cut: +12.1 %), but the cut leaves the blurred rim "
    "between the shadow and the paper in: +4.7 % in area (0.3 sigma), centroid 0.42 mm",
)
def test_spot_lit_thin_brass_bracket_far_camera_within_2_percent():
    m, part, tp = _part("dev-spot-brass2-t27", "l-bracket")
    assert abs(part.area_mm2 - tp["area"]) < 0.02 * tp["area"]


# ---------------------------------------------------------------------------------
# scans under a low lamp (30-32 degrees): brass and brushed steel 3-6 mm thick
# ---------------------------------------------------------------------------------


def _scan_part(name: str, shape: str):
    """The measured part nearest the truth part ``shape`` of the dev scan ``name``, and the truth.

    The scan is measured at its render's resolution (300 dpi: size in px over the orthographic
    camera's width, as bench_reallight reads it), without a thickness (a scanner measures the face on
    the glass); truth through ``_reallight_truth.truth_render`` (shapely on the extruded outlines).
    """
    truth, parts = truth_render(REALLIGHT, f"{name}.json")
    (tp,) = [p for p in parts if p["shape"] == shape]
    dpi = 25.4 * max(truth["camera"]["size_px"]) / truth["camera"]["ortho_scale_mm"]
    m = scanmass.measure(REALLIGHT / truth["image"], dpi=dpi)
    assert len(m.parts) == len(parts), [q.area_mm2 for q in m.parts]
    part = min(m.parts, key=lambda q: math.dist(q.centroid_mm, tp["centroid"]))
    return m, part, tp


#: (render, part, largest relative area error): measured +0.03 / +0.11 / +0.02 / +0.29 / +0.06 / +0.32 /
#: +0.09 / +0.11 / +0.20 / +0.25 % (bench_reallight); before the change in the comments.
DEV_SCAN_PARTS = [
    ("dev-scan-brass-lamp30", "disc", 0.005),  # brass 4 mm, off-centre 8 mm bore: was -57.7 %, 14.7 sigma
    ("dev-scan-brass-lamp30", "washer", 0.005),  # brass 3 mm ring, 15 mm bore: was +51.2 %, bore missed
    ("dev-scan-steel-lamp30", "plate", 0.005),  # steel 5 mm plate: -0.08 % (10 mm hole was +0.224 mm, 2.6 sigma)
    ("dev-scan-steel-lamp30", "gasket", 0.005),  # steel 3 mm gasket, 30 mm bore: was +78.0 %, bore missed
    ("dev-scan-mixed-lamp32", "cam", 0.005),  # brass 6 mm cam, bore in its wall's shadow: was +39.6 %, bore missed
    ("dev-scan-mixed-lamp32", "l-bracket", 0.005),  # steel 4 mm bracket: was +67.9 %, both holes missed
    # brass 3 mm ring (19 / 12.5 mm) beside a 5 mm part (the lid 5 mm up, shadows 8.7 mm): face and shadow
    # not separated by level or sweep, built from its tint: was +83.7 %, bore missed
    ("dev-scan-collar-lamp30", "collar", 0.005),
    ("dev-scan-collar-lamp30", "disc", 0.005),  # steel 5 mm disc: was +30.8 %, bore missed
    ("dev-scan-bracket-lamp34", "l-bracket", 0.005),  # steel 6 mm bracket, lamp 34: was +58.9 %, holes missed
    ("dev-scan-bracket-lamp34", "washer", 0.005),  # steel 3.5 mm washer: was +65.2 %, bore missed
]


@pytest.mark.parametrize(("name", "shape", "rel"), DEV_SCAN_PARTS)
def test_low_lamp_scan_finds_the_face_and_its_holes(name, shape, rel):
    """A flatbed scan under a lamp 30-32 degrees up: each part's shadow is its face swept along the lamp by
    lid height / tan(elevation) (5 / tan 30 = 8.7 mm), nearly as dark as brass or steel. The sweep's length
    was read at the rim of a wide bore's lit floor (a ring's width plus its shadow) and the shadow an L
    bracket's arm throws into its inner corner, with face beyond it, was taken for no shadow: rings and
    brackets kept their shadows and their bores closed (+51 to +78 %, covered only by a huge sigma). Each
    part is found, its area, centroid and holes within 3 stated sigma, its area within ``rel``, and every
    hole found within 0.1 mm of its diameter. Brass faces (luma 9 % of the contrast from their shadow: their
    edge against it was placed up to 4 px inside, -0.9 / -1.9 %) are placed there by their tint, which the
    white lid's shadow lacks (``scanface.tinted_face``): their centroids within 0.01 mm (were 0.16-0.29 mm)."""
    m, part, tp = _scan_part(name, shape)
    assert abs(part.area_mm2 - tp["area"]) <= rel * tp["area"]
    assert _covered(part, tp)
    if tp["material"] == "brass":
        assert math.dist(part.centroid_mm, tp["centroid"]) < 0.02
        tint = next(w for w in m.warnings if "their face was told from it by colour" in w)
        assert str(part.label) in tint.split("part(s) ")[1].split(" are about")[0].split(", ")  # named
    assert len(part.holes) == len(tp["holes"])
    for centre, diameter in tp["holes"]:
        hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
        assert math.dist(hole.circle_centre_mm, centre) < 0.5
        assert abs(hole.diameter_mm - diameter) <= min(0.1, 3 * hole.diameter_u_mm)
    said = next(w for w in m.warnings if w.startswith("scan of thick parts: the lamp's shadow beside part(s)"))
    assert f" {part.label} (" in said.split(" was left out")[0]  # named: its shadow left out, the face measured


def test_low_window_light_long_shadow_cut_from_a_black_cam():
    """dev-window-low-black-t10 (rendered for branch window11): the window 18 degrees up, a black cam
    6 mm thick at 10 degrees of tilt. Its shadow, found as part, reaches 33 px (12 mm) into the found
    region, longer than a light 30 degrees up or higher can throw (thickness / tan 30 deg + 0.5 mm =
    31 px), so the sweep was refused and the shadow kept (+29.6 % in area, centroid 4.18 mm;
    bench_reallight). The sweep's layers are the shadow's grain without a break from the outline to
    the step (38 px), which measures a lower light (down to 15 degrees): now cut, -3.7 %, centroid
    0.41 mm, within 3 stated sigma."""
    m, part, tp = _part("dev-window-low-black-t10", "cam")
    assert "shadow_cut" in part.uncertainty_terms  # was left with the term 'cast_shadow' only
    assert abs(part.area_mm2 - tp["area"]) < 0.06 * tp["area"]  # was +29.6 %
    assert math.dist(part.centroid_mm, tp["centroid"]) < 0.8  # was 4.18 mm
    assert _covered(part, tp)


def test_low_window_light_black_gasket_within_3_percent():
    """dev-window-low-black-t10's black gasket 5 mm thick (window 18 degrees up): its shadow fills a crescent outside
    that no sweep cut (+75.5 %, then +45.0 % with the bore found by winhole31); eroded back along the light the
    cam's cut shows (segment/crescent.py, gasketshadow31): -0.74 %, centroid 0.21 mm (bench_reallight)."""
    m, part, tp = _part("dev-window-low-black-t10", "gasket")
    assert abs(part.area_mm2 - tp["area"]) < 0.03 * tp["area"]


def test_low_window_light_black_gasket_warned_and_covered():
    """The same gasket, cut (it was left with the term 'cast_shadow'): the cut is warned and the error inside the
    stated uncertainty (term 'shadow_cut')."""
    m, part, tp = _part("dev-window-low-black-t10", "gasket")
    assert "shadow_cut" in part.uncertainty_terms
    assert any(w.startswith("cast shadow cut:") and f" {part.label} (" in w for w in m.warnings)
    assert _covered(part, tp)


def test_low_window_light_thick_steel_cut_by_the_photos_own_light():
    """dev-window-low-steel-t15 (window 20 degrees up, 15 degrees of tilt; branch windowsteel12): a steel disc
    6 mm and an L bracket 7 mm thick. The disc's cut was right, but painted as paper it left the shadow's fade
    beyond the outline to read as a dark piece, merged back as a fragment: now that fade, swept on from the cut
    along the sweep, is painted with it. The bracket's own sweep is refused; along the disc's direction (one
    light) the fade test refused its face as untinted (blue minus red -0.049 of its level against the 0.05
    step) and the core test read the whole cut as brighter than the face: the fade is now taken by level (3x
    the face's) where the fade test refuses, and the sweep is held within 3 px of the disc's length (one
    thickness given, one light: one shadow length; its own grain's half-way lay 10 px into its face: -13.9 %
    without). Figures (thickness given): disc +11.90 % -> +0.79 %, centroid 3.12 -> 0.77 mm; bracket
    +30.77 % -> +0.72 %, centroid 3.51 -> 1.27 mm. Truth: the render's outlines, areas and centroids by
    shapely."""
    for shape in ("disc", "l-bracket"):
        m, part, tp = _part("dev-window-low-steel-t15", shape)
        assert "shadow_cut" in part.uncertainty_terms, shape
        assert any(w.startswith("cast shadow cut:") for w in m.warnings), shape
        assert abs(part.area_mm2 - tp["area"]) < 0.03 * tp["area"], shape  # was +11.9 % / +30.8 %
        assert math.dist(part.centroid_mm, tp["centroid"]) < 1.5, shape  # was 3.12 / 3.51 mm
        assert _covered(part, tp), shape


@pytest.mark.xfail(
    strict=True,
    reason="dev-window-low-steel-t15 after the cut (branch windowsteel12): the outline along the shadow sides "
    "follows the grain, raggedly, in and out of the face by a few px; the centroids stay 0.77 mm (disc) and "
    "1.27 mm (bracket) off, covered by the cut's terms (0.3 and 0.2 sigma), and one of the bracket's two holes "
    "5.5 mm (found before the cut, 5.66 and 5.68 mm) is lost: the cut's ragged edge opens it",
)
def test_low_window_light_thick_steel_centroid_and_holes():
    for shape in ("disc", "l-bracket"):
        m, part, tp = _part("dev-window-low-steel-t15", shape)
        assert math.dist(part.centroid_mm, tp["centroid"]) < 0.5, shape
        assert len(part.holes) == len(tp["holes"]), shape


def test_thin_brackets_leaning_camera_cut_to_the_visible_shadow():
    """dev-spot-brass3-t20 and dev-spot-steel4-t28 (branch spotjoin12: 2 mm L-brackets under the hard spot,
    the camera leaning towards the spot's side): the cast-shadow cut took a band about 7 px deep along the
    shadow-side edges where the visible shadow is 3-4 px: brass -18.26 % in area (1.3 sigma), steel
    -17.09 % (0.9 sigma), centroids 0.77 / 0.83 mm (bench_reallight, thickness given). The sweep's length
    was read where the roughness falls half-way to the face's, but beside the bright outline the face
    (0.016 / 0.04 of the paper) is as rough as the shadow: the coding's ringing, which the sides facing
    the light show as deep in. Where the shadow side is no rougher there than the light's side, the
    shadow's level next to the outline (0.0135 / 0.0245 against the face's 0.016 / 0.040) places the
    cut, and the sweep leaves the holes' rims alone (they ring beside the holes' bright floors as the
    outline does; with them cut as well, a hole of each bracket was found split in two). Now -2.75 /
    -0.92 %, centroids 0.20 / 0.37 mm, two holes each (diameters -0.98 / -1.03 and -0.42 / -0.47 mm,
    within 0.7 stated sigma: the holes' own shadows are left in), within 3 stated sigma."""
    for name in ("dev-spot-brass3-t20", "dev-spot-steel4-t28"):
        m, part, tp = _part(name, "l-bracket")
        assert "shadow_cut" in part.uncertainty_terms
        assert abs(part.area_mm2 - tp["area"]) < 0.03 * tp["area"], name  # was -18.26 / -17.09 %
        assert math.dist(part.centroid_mm, tp["centroid"]) < 0.5, name  # was 0.77 / 0.83 mm
        assert _covered(part, tp), name
        assert len(part.holes) == len(tp["holes"]), name  # truth: the holes of the outline the renderer extruded
        for centre, diameter in tp["holes"]:
            hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
            # centres 1.06-1.16 mm off: the holes' own shadows are left in (brass 1.0 mm narrower)
            assert math.dist(hole.circle_centre_mm, centre) < 1.5, name
            assert abs(hole.diameter_mm - diameter) <= 3 * hole.diameter_u_mm, name


def test_thin_brackets_leaning_camera_cut_without_the_thickness():
    """The same brackets without the thickness (the cut bounded by an 8 mm part's shadow): the sweep is
    read along another direction, whose second layer is still the outline's blur (0.06 / 0.04 of the
    paper, as bright as the face): the roughness' half-way at 10.7 / 11.3 px, in the ringing, cut -13.6 /
    -19.3 % (bench_reallight). The shadow's level is read from the first layer darker than the face:
    5.5 / 5.4 px, now +3.19 / +0.11 %, within 3 stated sigma."""
    for name in ("dev-spot-brass3-t20", "dev-spot-steel4-t28"):
        tp = _truth(name, "l-bracket")
        m = scanmass.measure(tp["image"])
        part = min(m.parts, key=lambda q: math.dist(q.centroid_mm, tp["centroid"]))
        assert "shadow_cut" in part.uncertainty_terms
        assert abs(part.area_mm2 - tp["area"]) < 0.05 * tp["area"], name  # was -13.6 / -19.3 %
        assert _covered(part, tp), name


MIXED_BLACK_FACES = [
    # (render, shape, area tolerance, centroid tolerance mm): figures before -> after (bench_reallight)
    ("dev-mixed-black2-t22", "plate", 0.03, 0.5),  # 6.5 mm, filmic: -8.62 % -> +2.11 %, centroid 1.96 -> 0.23 mm
    ("dev-mixed-black2-t22", "disc", 0.03, 0.5),  # 2 mm, a warm sheen on its face: -5.60 % -> -1.81 %, 1.26 -> 0.30 mm
    ("dev-mixed-black3-t17", "cam", 0.01, 0.2),  # 5 mm: -6.33 % -> -0.58 %, centroid 0.69 -> 0.09 mm
]


@pytest.mark.parametrize(("name", "shape", "rel", "centroid_mm"), MIXED_BLACK_FACES)
def test_mixed_light_shadow_cut_stops_at_a_black_face(name, shape, rel, centroid_mm):
    """Black parts in mixed light at 17-22 degrees of tilt (branch mixblack12; other shapes, sizes and
    placements than the held-out scenes). The cut by grain went into the matte black face: beside a bright
    edge (the paper, a lit side wall) JPEG ringing makes the face's pixels as rough as a shadow's grain, at
    the face's level and colour, and a sweep ran 10-14 px into the face where there was no shadow (the plate,
    the disc); where the shadow, filled by the other light, is brighter than
    the face, the sweep's layer ran 3-5 px past the face's outline (the cam). Pixels at a tinted matte face's
    level and colour are no shadow, and the cut gives back what lies below half-way between the face's level
    and the shadow's (segment.castshadow). Each part: cut and named, its area within ``rel``, its centroid
    within ``centroid_mm``, within 3 stated sigma."""
    m, part, tp = _part(name, shape)
    warning = next(w for w in m.warnings if w.startswith("cast shadow cut:"))
    assert f" {part.label} (" in warning
    assert "shadow_cut" in part.uncertainty_terms
    assert abs(part.area_mm2 - tp["area"]) < rel * tp["area"]
    assert math.dist(part.centroid_mm, tp["centroid"]) < centroid_mm
    assert _covered(part, tp)


@pytest.mark.xfail(
    strict=True,
    reason="dev-mixed-black2-t22: the black plate 6.5 mm thick at 22 degrees of tilt reads its three bores "
    "-0.50 / -0.33 / -0.28 mm (0.09-0.15 stated sigma; were 1.35-1.58 mm small before their openings were traced "
    "by the last step to the face, branch thickholes12): the near side's floor in the shade, speckled at the "
    "face's level, stops the trace short of the rim; its outline keeps spikes of the shadow on the lamp's far "
    "side (+0.8 % in area)",
)
def test_mixed_light_thick_black_plate_bores_within_0_2_mm():
    m, part, tp = _part("dev-mixed-black2-t22", "plate")
    for centre, diameter in tp["holes"]:
        hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
        assert abs(hole.diameter_mm - diameter) < 0.2


# ---------------------------------------------------------------------------------
# scans under a low lamp (29-33 degrees): brushed steel 4.5-6.5 mm thick, the thickest part (the lid on it)
# ---------------------------------------------------------------------------------


def test_low_lamp_scan_face_in_doubt_is_the_sweeps_brass_bracket_holes():
    """dev-scan-cam2-lamp33 (branch scansteel12): a steel cam 4.5 mm thick holds the lid up, a brass L bracket
    3 mm thick beside it (arms at -110 degrees) is told from its shadow by a level step of 0.075 of the
    contrast, under ``scanface.FACE_DOUBT_CONTRAST``. Its face by level was kept (the sweep's face only
    noted for the uncertainty) and its holes, found in it by their floors' grain, read +0.362 / +0.327 mm
    at 1.9 stated sigma (area -0.74 %). The sweep's face (the shadow as the face swept along the lamp) is
    now taken where the level step is in doubt: area within 0.3 %, holes within 0.1 mm and 3 sigma.
    Truth: the render's outlines (shapely, ``_reallight_truth.truth_render``)."""
    m, part, tp = _scan_part("dev-scan-cam2-lamp33", "l-bracket")
    assert abs(part.area_mm2 - tp["area"]) <= 0.003 * tp["area"]  # was -0.74 %
    assert _covered(part, tp)
    assert len(part.holes) == len(tp["holes"])
    for centre, diameter in tp["holes"]:
        hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
        assert math.dist(hole.circle_centre_mm, centre) < 0.5
        assert abs(hole.diameter_mm - diameter) <= min(0.1, 3 * hole.diameter_u_mm)  # were +0.36 / +0.33 mm


def test_low_lamp_scan_face_in_doubt_read_in_grey_levels_only(monkeypatch):
    """The same brass bracket read without its tint (``tinted_face`` left out), as a grey face (brushed steel)
    is read: its face by level took in part of the shadow beside it, +15.3 % in area, centroid 0.95 mm off,
    holes +0.362 / +0.327 mm at 1.9 stated sigma. The sweep's face is taken in doubt: within 0.3 %, holes
    within 0.1 mm, the level's reading in the term 'scan_shadow' and the part named in the warning."""
    import scanmass.pipeline.scan_checks as scan_checks

    monkeypatch.setattr(scan_checks, "tinted_face", lambda rgb, origin, face, min_hole_px, found=None: face)
    m, part, tp = _scan_part("dev-scan-cam2-lamp33", "l-bracket")
    assert abs(part.area_mm2 - tp["area"]) <= 0.003 * tp["area"]  # was +15.3 %
    assert math.dist(part.centroid_mm, tp["centroid"]) < 0.05  # was 0.95 mm
    assert _covered(part, tp)
    for centre, diameter in tp["holes"]:
        hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
        assert abs(hole.diameter_mm - diameter) <= min(0.1, 3 * hole.diameter_u_mm)  # were +0.36 / +0.33 mm
    said = next(w for w in m.warnings if w.startswith("scan of a thick part: part ") and "nearly as dark" in w)
    assert f"part {part.label} (" in said
    assert part.uncertainty_terms["scan_shadow"]["area_mm2"] > 0.1 * tp["area"]  # the level's reading, whole


def test_low_lamp_scan_face_in_doubt_without_a_sweep_states_its_holes_doubt(monkeypatch):
    """The same bracket read in grey levels with no sweep found (``_face_by_sweep`` left out): its face by level
    is kept (+15.3 %, covered by the shadow's band, warned), and its holes, found in that face by their floors'
    grain, read +0.362 / +0.327 mm. Their stated uncertainty was 0.190 mm (1.9 sigma: near a confident wrong
    figure); a grain hole in a face in doubt now carries 3 px per edge (``DOUBT_GRAIN_EDGE_U_PX``): the error
    within 1.5 stated sigma, a margin below the 3 the issue allows."""
    import scanmass.pipeline.scan_checks as scan_checks
    import scanmass.segment.scanface as scanface

    monkeypatch.setattr(scan_checks, "tinted_face", lambda rgb, origin, face, min_hole_px, found=None: face)
    monkeypatch.setattr(scanface, "_face_by_sweep", lambda *args, **kwargs: None)
    m, part, tp = _scan_part("dev-scan-cam2-lamp33", "l-bracket")
    assert _covered(part, tp)
    assert any(w.startswith(f"scan of a thick part: part {part.label} (") and "nearly as dark" in w for w in m.warnings)
    assert len(part.holes) == len(tp["holes"])
    for centre, diameter in tp["holes"]:
        hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
        assert abs(hole.diameter_mm - diameter) <= 1.5 * hole.diameter_u_mm  # were 1.9 sigma


def test_mixed_light_sheen_black_parts_within_3_percent():
    """dev-mixed-black4-t25 (filmic, 25 degrees of tilt): the black cam 7 mm thick and disc 1.8 mm read grey under a
    sheen of the lamps, so the dark-face test and every cut by grain miss them: +12.4 % / +3.2 % in area, centroids
    1.07 / 0.46 mm (was a strict xfail). Cut by colour along the sweep both parts agree on (branch mixed15): +2.4 % /
    +1.0 %, centroids 0.31 / 0.20 mm (bench_reallight). Truth: the render's outlines (area by shapely)."""
    for shape in ("cam", "disc"):
        m, part, tp = _part("dev-mixed-black4-t25", shape)
        assert abs(part.area_mm2 - tp["area"]) < 0.03 * tp["area"], shape


def test_mixed_light_sheen_black_parts_warned_and_covered():
    """The same parts, cut by colour: the cut is warned (mixed light) and the error lies inside the stated uncertainty
    (term 'shadow_cut')."""
    for shape in ("cam", "disc"):
        m, part, tp = _part("dev-mixed-black4-t25", shape)
        assert "shadow_cut" in part.uncertainty_terms, shape
        assert any(w.startswith("mixed light:") and str(part.label) in w for w in m.warnings), shape
        assert _covered(part, tp), shape


def test_mixed_light_thin_black_gasket_within_3_percent():
    """dev-mixed-black3-t17: the black gasket 1.6 mm thick (was a strict xfail: -16.1 % in area, the grain's
    sweep took a crescent of face at its outer edge and one at its bore's, at the face's level). Under two
    lights of different colours a cut at the face's level, none of it darker, holds no shadow and is refused
    (segment.facelevel, branch blackmix18): +1.3 % (bench_reallight). Truth: the render's outlines (shapely)."""
    m, part, tp = _part("dev-mixed-black3-t17", "gasket")
    assert abs(part.area_mm2 - tp["area"]) < 0.03 * tp["area"]


@pytest.mark.xfail(
    strict=True,
    reason="dev-scan-mixed3-lamp32's black cam 5 mm thick (lamp 32 degrees, the lid on it): its 8 mm bore, its "
    "floor wholly in its wall's shadow (5 / tan 32 = 8 mm), reads -0.176 mm, past the 0.1 mm target; at 1.04 "
    "stated sigma (0.170 mm: its whole edge against the shadow, both sides moving together; was 2.05 sigma at "
    "0.086 mm, one edge's share); the cam's area +0.37 %, the steel bracket beside it +0.29 % with both holes "
    "within 0.01 mm",
)
def test_low_lamp_scan_black_cam_bore_in_its_walls_shadow():
    m, part, tp = _scan_part("dev-scan-mixed3-lamp32", "cam")
    ((centre, diameter),) = tp["holes"]
    (hole,) = part.holes
    assert abs(hole.diameter_mm - diameter) <= min(0.1, 3 * hole.diameter_u_mm)
    assert abs(hole.diameter_mm - diameter) <= 1.5 * hole.diameter_u_mm


def test_steel_plate_lit_half_at_the_papers_level_found_by_its_grain():
    """mixed-steel-t10: the brushed plate's lit half has the paper's colour and level; the threshold
    found only its darker half (-34.6 % in area, centroid 10.75 mm off). Its grain (log luma less
    its 5 px median) tells it from the paper: joined, warned and covered (term 'grain_face').
    Truth: the render's outline (shapely)."""
    m, part, tp = _part("mixed-steel-t10", "plate")
    assert math.dist(part.centroid_mm, tp["centroid"]) < 3.0
    assert abs(part.area_mm2 - tp["area"]) < 0.05 * tp["area"]
    assert part.uncertainty_terms["grain_face"]["area_mm2"] > 0
    assert any(w.startswith(f"part {part.label}: part of its face mirrors") for w in m.warnings)
    assert _covered(part, tp)


def test_steel_gasket_open_at_its_lit_stretch_closed_by_its_grain():
    """dev-mixed-steel3-t22: the brushed gasket's lit stretch is as bright as the paper; the threshold
    found its face as a C open by a slit there, so its bore lay outside its outline and the photo was
    refused ('found only in pieces'). The stretch's grain closes the ring: both parts measured, the
    gasket no 'shadow only', its error warned and within 3 stated sigma (truth: the render's
    outlines, shapely)."""
    m, part, tp = _part("dev-mixed-steel3-t22", "gasket")
    assert math.dist(part.centroid_mm, tp["centroid"]) < 3.0
    assert len(part.holes) == 1 and math.dist(part.holes[0].circle_centre_mm, tp["holes"][0][0]) < 2.0
    assert "grain_face" in part.uncertainty_terms
    assert not any(w.startswith("shadow only:") for w in m.warnings)
    assert _covered(part, tp)


# ---------------------------------------------------------------------------------
# brushed steel in mixed light: the shadows swept off by their colour and smoothness (branch steelmix17)
# ---------------------------------------------------------------------------------

_MIXED_STEEL = [
    # render, part, bound on |area error|; figures: bench_reallight (thickness given), before -> after branch steelmix17;
    # truth: the render's outlines (area by shapely)
    ("dev-mixed-steel2-t15", "l-bracket", 0.055),  # 3 mm: +6.54 % -> +4.66 %, centroid 0.40 -> 0.64 mm
    ("dev-mixed-steel3-t22", "plate", 0.03),  # 4 mm: +4.07 % -> +1.85 %, centroid 1.28 -> 0.95 mm
    ("dev-mixed-steel3-t22", "gasket", 0.10),  # 3 mm: +16.04 % -> +7.95 % (its bore's shadow kept), 1.65 -> 1.33 mm
    ("dev-mixed-steel4-t8", "cam", 0.06),  # 3.5 mm: +9.71 % -> +4.31 %, centroid 0.94 -> 0.59 mm
    ("mixed-steel-t10", "plate", 0.02),  # 3 mm: +2.62 % -> +1.12 %, centroid 1.67 -> 1.13 mm
    ("mixed-steel-t20", "disc", 0.02),  # 3 mm: +3.66 % -> +1.02 %, centroid 1.00 -> 0.34 mm
]


@pytest.mark.parametrize("name, shape, rel", _MIXED_STEEL)
def test_mixed_light_shadows_swept_off_brushed_steel(name, shape, rel):
    """Brushed steel under a warm lamp and a cool light: each lamp's shadow takes the other's colour, and the
    face mirrors the lights (its levels spread 3-10 times), so the matte face's colour sweep refused it and
    the shadow stayed in the part. Swept by the layers near a shadow line, smoother than the face and above
    its dark sectors' level (``segment/metalshadow.py``), along the direction the photo's sweeps agree on:
    each part's area nearer the truth than before, warned as a mixed-light cut with the cut's term, and
    within 3 stated sigma."""
    m, part, tp = _part(name, shape)
    assert abs(part.area_mm2 - tp["area"]) < rel * tp["area"]
    assert "shadow_cut" in part.uncertainty_terms
    assert any(w.startswith("mixed light:") and f" {part.label}" in w for w in m.warnings)
    assert _covered(part, tp)


def test_shadow_alone_not_swept_as_a_metal_face():
    """window-mixed-t0 measured at the white disc's 3 mm: the disc's shadow is found as a region whose levels
    spread as a metal face's, and a metal sweep cut 76 mm2 of it and reported the rest (86 mm2) as a part. A
    region that looks like a shadow alone and is no wider than one is not swept (it was named 'shadow only');
    since branch nylon18 the disc is found by its top face and its shadow taken as its own: one part where the
    disc lies, the white face, and no metal sweep (truth: the render's disc outline, its centroid by shapely)."""
    tp = _truth("window-mixed-t0", "disc")
    m = scanmass.measure(tp["image"], thickness_mm=3.0)
    near = [q for q in m.parts if math.dist(q.centroid_mm, tp["centroid"]) < 25.0]
    assert len(near) == 1 and "white_face" in near[0].uncertainty_terms
    assert math.dist(near[0].centroid_mm, tp["centroid"]) < 2.0
    assert not any(w.startswith(("mixed light:", "shadow only:")) for w in m.warnings)


def test_mixed_light_steel_cam_within_3_percent():
    """mixed-steel-t20's 4 mm brushed cam: its shadow swept off by colour (steelmix17), and since mixed32 the dark
    sector of its face beside the bore (a soft, shallow pit) is no longer opened as a 9.5 mm hole: -7.01 -> -1.15 %
    (bench_reallight); check value: the render's truth area."""
    m, part, tp = _part("mixed-steel-t20", "cam")
    assert abs(part.area_mm2 - tp["area"]) < 0.03 * tp["area"]


# ---------------------------------------------------------------------------------
# a hole's edge against its own wall's shadow on a scan: both sides move together (branch thickholes12)
# ---------------------------------------------------------------------------------


@pytest.mark.parametrize(("diameter", "reach"), [(8.0, 0.5), (8.0, 3.0), (8.0, 6.0), (10.0, 8.0), (8.0, 8.7)])
def test_shadowed_share_of_a_round_holes_edge(diameter, reach):
    """The share of a hole's edge whose floor (the lid) lies in its wall's shadow, under a lamp from +x.

    Check value by another route: shapely. Each of 3600 edge points is moved 1e-3 mm inwards; its floor
    is lit when the segment from there towards the lamp, ``reach`` long, stays inside the hole's circle
    (polygon of 4096 sides); the shaded share is the count of the others (the shadow geometry of a wall
    under a distant lamp: common practice)."""
    from shapely.geometry import LineString, Point

    from scanmass.pipeline.scan_checks import shadowed_share

    circle = Point(0.0, 0.0).buffer(0.5 * diameter, 1024)
    turns = [2 * math.pi * (i + 0.5) / 3600 for i in range(3600)]
    shaded = 0
    for t in turns:
        x, y = (0.5 * diameter - 1e-3) * math.cos(t), (0.5 * diameter - 1e-3) * math.sin(t)
        lit = reach > 0 and circle.contains(LineString([(x, y), (x + reach, y)]))
        shaded += not lit
    assert abs(shadowed_share(diameter, reach) - shaded / 3600) < 2e-3


def test_low_lamp_scan_black_cam_bore_covered_by_both_edges():
    """dev-scan-mixed3-lamp32: the black cam's 8 mm bore, its floor wholly in its wall's shadow, reads -0.176 mm.
    Its edge was given one edge's displacement against the shadow (0.086 mm on the diameter: 2.05 stated
    sigma); the whole edge lies against the shadow and moves together: 0.170 mm, 1.04 sigma. Truth: the
    render's outlines (shapely, ``_reallight_truth.truth_render``)."""
    m, part, tp = _scan_part("dev-scan-mixed3-lamp32", "cam")
    ((centre, diameter),) = tp["holes"]
    (hole,) = part.holes
    assert abs(hole.diameter_mm - diameter) <= 1.5 * hole.diameter_u_mm  # was 2.05 sigma


def test_mixed_light_thick_black_plate_bores_traced_to_the_last_step():
    """dev-mixed-black2-t22: a black plate 6.5 mm thick at 22 degrees of tilt; each bore shows its far wall as a
    band lit less than the floor and more than the face. The opening's border was placed at the midpoint between
    the face and the floor, which lies inside that band: most rays found no crossing near the border, and the
    bores read 1.35-1.58 mm small. Traced by the last step to the face's level (``opening_edge(last_step=True)``)
    where the midpoint finds under 70 % of the border, its trace is no clean circle (over 0.2 px rms) and the far
    wall's band (the thickness's parallax) is at least 4 px wide (4.3-5.9 px here), and where the last step's
    trace is rounder or wider, they read -0.50 / -0.33 / -0.28 mm, inside their stated
    uncertainty. Truth: the render's hole outlines (shapely equal-area diameters, ``_reallight_truth``)."""
    m, part, tp = _part("dev-mixed-black2-t22", "plate")
    for centre, diameter in tp["holes"]:
        hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
        assert math.dist(hole.circle_centre_mm, centre) < 0.5
        assert abs(hole.diameter_mm - diameter) < 0.6  # were 1.35-1.58 mm small
        assert abs(hole.diameter_mm - diameter) <= 3 * hole.diameter_u_mm


def test_low_window_light_steel_cam_cut_without_its_fade_merged_back():
    """dev-window-low-steel2-t8 (branch windowsteel12; window 24 degrees up, 8 degrees of tilt): a steel cam
    5.5 mm thick beside an L bracket 5 mm. The cam's cut along the bracket's shadow direction landed on its
    outline, but the shadow's fade beyond it, left dim beside the painted cut, read as a dark piece and was
    merged back as a fragment of the cam's grainy face: +13.62 % in area, centroid 2.36 mm. Painted with the
    cut (segment.castshadow): +4.85 %, centroid 0.72 mm, the rest its 8 mm bore not found (warned 'possible
    hidden hole', 50 mm2 of the truth); the bore opened around its pit and lit floor together (branch winhole18,
    photo_holes._lit_pit_opening): -0.56 %. Truth: the render's outlines, area and centroid by shapely."""
    m, part, tp = _part("dev-window-low-steel2-t8", "cam")
    assert "fragments" not in part.uncertainty_terms
    assert "shadow_cut" in part.uncertainty_terms
    assert abs(part.area_mm2 - tp["area"]) < 0.01 * tp["area"]  # was +13.6 % (+4.85 % with the bore missed)
    assert math.dist(part.centroid_mm, tp["centroid"]) < 1.0  # was 2.36 mm
    assert _covered(part, tp)


def test_low_window_light_steel_cam_and_bracket_within_3_percent():
    # the bracket's ragged strip of its shadow's core along its long side taken by segment.farband (branch
    # farband30: +4.84 -> +1.38 %); the cam since branch winhole18 (-0.56 %). Truth: the render's outlines (shapely)
    for shape in ("cam", "l-bracket"):
        m, part, tp = _part("dev-window-low-steel2-t8", shape)
        assert abs(part.area_mm2 - tp["area"]) < 0.03 * tp["area"], shape


def test_thick_steel_plate_rim_only_sweep_tried_again_along_the_photos_shadow():
    """dev-window-steel4-t22 (branch thickmetal13; window light, 22 degrees of tilt): a brushed-steel plate
    6.5 mm thick with four holes beside a thin steel cam. The plate's own sweep ran 1 px (its outline's blurred
    rim), so neither the cut along the cam's shadow direction nor the fade test was tried, and the shadow's fade
    and core stayed in the part: +15.5 % in area, centroid 3.06 mm (bench_reallight). Taken as a refused sweep,
    the cut along the cam's direction stops at the fade's inner end (+8.2 %, centroid 1.36 mm); the core beyond
    it, at the face's level but as grainy as the shadow (segment.softshadow._grainy_core, within the cam's shadow
    length), goes with it: +4.1 %, centroid 0.92 mm. Truth: the render's outlines, area and centroid by shapely."""
    m, part, tp = _part("dev-window-steel4-t22", "plate4")
    warning = next(w for w in m.warnings if w.startswith("cast shadow cut:"))
    assert f" {part.label} (" in warning
    assert "shadow_cut" in part.uncertainty_terms
    assert abs(part.area_mm2 - tp["area"]) < 0.06 * tp["area"]  # was +15.5 %
    assert math.dist(part.centroid_mm, tp["centroid"]) < 1.2  # was 3.06 mm
    assert _covered(part, tp)


@pytest.mark.xfail(
    strict=True,
    reason="dev-window-steel4-t22 (branch thickmetal13): the 6.5 mm steel plate reads +4.1 % in area (centroid "
    "0.92 mm, within 1 sigma): a remnant of its shadow's core along its long side (the cut held within 3 px of the "
    "2 mm cam's shadow length); its 11 mm hole reads 8.27 mm 2.2 mm off "
    "centre (the lit floor only: the opening's trace runs into the brushed face's dark sector, 17 mm), its 6 and "
    "8 mm holes 0.17-0.47 mm small. Since winhole31 the 11 mm hole is fitted on its wall's dark crescent: the plate "
    "+2.90 %, that hole 0.501 mm small (just past the 0.5 mm bound here)",
)
def test_thick_steel_plate_in_window_light_within_3_percent_with_its_four_holes():
    m, part, tp = _part("dev-window-steel4-t22", "plate4")
    assert abs(part.area_mm2 - tp["area"]) < 0.03 * tp["area"]
    for centre, diameter in tp["holes"]:
        hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
        assert math.dist(hole.circle_centre_mm, centre) < 1.0
        assert abs(hole.diameter_mm - diameter) < 0.5


def test_thin_brass_bracket_sweep_away_from_the_spot_refused():
    """dev-spot-brass5-t24 (branch thickmetal13; spot, 24 degrees of tilt): a brass L bracket 2.2 mm thick whose
    face is as dark as a shadow (0.016 of the paper) and whose rim is grainy with the coding's ringing. Its sweep
    by grain ran 13 px away from the spot (longer than the 30-degree reach, taken as a low light's by its unbroken
    grain) and cut a strip of face: -24.8 % in area, both holes missed (bench_reallight). The paper just past the
    outline is brighter on that side than on the other (0.95 against 0.88 of the paper white), which a low light's
    fading shadow never leaves: refused (segment.softshadow._lit_beyond), +7.1 %, centroid 1.31 mm, both holes
    found within 0.5 mm. Truth: the render's outlines, area and centroid by shapely."""
    m, part, tp = _part("dev-spot-brass5-t24", "l-bracket")
    assert abs(part.area_mm2 - tp["area"]) < 0.1 * tp["area"]  # was -24.8 %
    for centre, diameter in tp["holes"]:  # were both missed (none within bench_reallight's 2 mm of the truth)
        hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
        # 1.3 mm: the near side's shade (0.66-0.75 mm since spotbrass32)
        assert math.dist(hole.circle_centre_mm, centre) < 2.0
        # -0.47 / -0.43 mm before spotbrass32, -0.50 / -0.69 mm since (measured in the cut's measurement, kept now;
        # stated 1.8-2.0 mm)
        assert abs(hole.diameter_mm - diameter) < 0.75
    assert _covered(part, tp)


def test_thin_brass_brackets_under_the_spot_within_3_percent():
    """dev-spot-brass5-t24: a thin brass L bracket under the spot whose face is as dark as its shadow (0.016 of the
    paper) read +7.1 % (centroid 1.31 mm): the cut placed by the tint (branch brass15) read the footprint's mask,
    which stops the parallax short of the top edge the photo shows, and its measurement was set aside (branch
    brass17: the part found again did not lie within its first outline). On the region as seen, with the shadow's
    blurred rim (branch spotbrass32): +1.80 %. dev-spot-brass4-t17 (was -12.7 %) is within 3 % since brass15
    (test_thin_brass_face_against_its_shadow_placed_by_its_tint). Truth: the render's truth file (shapely)."""
    for name, shape in (("dev-spot-brass5-t24", "l-bracket"),):
        m, part, tp = _part(name, shape)
        assert _covered(part, tp), name  # covered: what fails is the figure itself
        assert abs(part.area_mm2 - tp["area"]) < 0.03 * tp["area"], name


_WALL_READ = {
    # render: the parts whose side wall facing the camera is read
    "spot-black-t20": ("disc", "l-bracket"),
    "mixed-brass-t30": ("disc", "cam"),
    "window-steel-t25": ("l-bracket", "gasket"),
    "dev-window-low-steel-t15": ("l-bracket", "disc"),
    "lens-soft-steel-t15": ("disc", "plate"),
}


@functools.cache
def _without_thickness(name: str):
    return scanmass.measure(REALLIGHT / f"{name}.jpg")  # no --thickness: the walls are read


def _read_part(name: str, shape: str):
    tp = _truth(name, shape)
    m = _without_thickness(name)
    part = min(m.parts, key=lambda q: math.dist(q.centroid_mm, tp["centroid"]))
    return m, part, tp


@pytest.mark.parametrize("name", sorted(_WALL_READ))
def test_thickness_read_from_the_side_walls(name):
    """Photos without --thickness (branch wallthick13): each part's thickness is read from the band its side wall
    facing the camera shows (pipeline.photo_thickness), and the part is measured again with it. Truth: the
    render's thickness (its truth file; the extrusion Blender drew). Each estimate lies within 3 of its stated
    sigma and within 1 mm (the parts are 2.5-8 mm thick), its sigma below the thickness; before, no thickness was
    read at all."""
    for shape in _WALL_READ[name]:
        m, part, tp = _read_part(name, shape)
        est = m.settings["thickness_estimate"]["parts"][str(part.label)]
        assert est["measured_again_mm"] == pytest.approx(est["thickness_mm"], abs=0.01)
        assert abs(est["thickness_mm"] - tp["t"]) <= 3 * est["thickness_u_mm"], shape
        assert abs(est["thickness_mm"] - tp["t"]) < 1.0, shape
        assert est["thickness_u_mm"] < tp["t"], shape  # a figure that says something (here 1.2-2.5 mm)
        assert "thickness_estimate" in part.uncertainty_terms and "thickness_unknown" not in part.uncertainty_terms
    assert any(w.startswith("thickness estimated from the side walls") for w in m.warnings)


def test_thickness_read_from_the_walls_corrects_the_figures():
    """The no-thickness figures of parts whose walls are read (branch wallthick13), against the render's outlines
    (area and centroid by shapely): with only the 'thickness_unknown' term they read (bench_reallight, thickness
    not given) +12.0 % (spot-black-t20 disc 8 mm), +9.2 % (its L bracket 3 mm), +13.7 % (mixed-brass-t30 disc
    6 mm), +76.8 % (dev-window-low-steel-t15 L bracket 7 mm, its shadow kept), +27.7 % (window-steel-t25 gasket
    2.5 mm); measured again with the thickness read: -0.57 / +2.32 / +0.34 / -2.11 / +0.36 % (branch
    wallthick13b; -0.88 / +1.51 / -0.05 / -1.21 / -1.17 % before its offset), each within 3 % and 3 stated sigma."""
    for name, shape in [
        ("spot-black-t20", "disc"),
        ("spot-black-t20", "l-bracket"),
        ("mixed-brass-t30", "disc"),
        ("dev-window-low-steel-t15", "l-bracket"),
        ("window-steel-t25", "gasket"),
    ]:
        m, part, tp = _read_part(name, shape)
        assert abs(part.area_mm2 - tp["area"]) < 0.03 * tp["area"], (name, shape)
        assert _covered(part, tp), (name, shape)


_WALL_BIAS = [
    # render, part: walls read (branch wallthick13b), besides _WALL_READ's
    ("mixed-steel-t10", "gasket"),
    ("dev-mixed-black-t15", "plate"),
    ("lens-spot-brass-t30", "plate"),
    ("lens-spot-brass-t30", "cam"),
] + [(name, shape) for name in sorted(_WALL_READ) for shape in _WALL_READ[name]]


def test_thickness_read_from_the_walls_is_not_biased():
    """The thickness read from the side walls (pipeline.photo_thickness, READ_EXCESS_MM, branch wallthick13b)
    against the render's thickness (its truth file: the extrusion Blender drew), over 14 parts: the median
    signed error lies within 0.15 mm of zero and each estimate within 3 stated sigma. Before the offset the
    median read +0.28 mm (the score reads a lit wall's band wide: every part's estimate -0.58..+0.82 mm off,
    10 of 14 high); with it -0.02 mm."""
    errors = []
    for name, shape in _WALL_BIAS:
        m, part, tp = _read_part(name, shape)
        est = m.settings["thickness_estimate"]["parts"][str(part.label)]
        errors.append(est["thickness_mm"] - tp["t"])
        assert abs(errors[-1]) <= 3 * est["thickness_u_mm"], (name, shape)
    assert abs(statistics.median(errors)) <= 0.15, sorted(round(e, 2) for e in errors)


def test_thick_brass_bracket_in_soft_light_seen_on_its_top_edge():
    """dev-soft-brass2-t15 (branch heavymetal14; soft light, Filmic, 15 degrees of tilt): a brass L bracket 5.5 mm
    thick whose face is brighter than the paper and whose side wall facing the camera looks like the paper, so the
    outline runs on the top face's edge all round. Its two 5.5 mm holes (15.4 px across) fit a circle to 0.08-0.11
    px mapped on the top edge against 0.33-0.42 px on the bottom one, but rings under 16 px did not vote
    (pipeline.photo_walls.wall_sides): the part was mapped as seen on its bottom edge, -8.2 % in area, holes +0.81
    and +0.74 mm (bench_reallight). With rings from 12 px voting: -0.6 %, holes +0.07 mm. Truth: the render's
    outlines (area and centroid by shapely; holes as equal-area circles)."""
    m, part, tp = _part("dev-soft-brass2-t15", "l-bracket")
    assert abs(part.area_mm2 - tp["area"]) < 0.02 * tp["area"]  # was -8.2 %
    assert math.dist(part.centroid_mm, tp["centroid"]) < 0.3  # was 0.57 mm
    assert len(part.holes) == 2
    for centre, diameter in tp["holes"]:
        hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
        assert abs(hole.diameter_mm - diameter) < 0.25  # was +0.81 / +0.74 mm
    assert _covered(part, tp)


def test_thick_steel_plate_and_brass_collar_in_window_light_under_filmic_are_covered():
    """dev-window-steel5-t14 (branch heavymetal14; window light, Filmic, 14 degrees of tilt): a brushed-steel plate
    5.5 mm thick with four holes beside a brass collar 3.5 mm. The plate keeps its cast shadow (+20.1 %, its 11 mm
    hole missed, as the held-out set's 6 mm plate in window light) and the collar a strip of its own (+18.2 %); the
    result warns of the cast shadow and its stated uncertainty covers both (within 3 sigma; bench_reallight: 0.4
    and 1.2 sigma). Truth: the render's outlines, area and centroid by shapely."""
    for shape in ("plate4", "collar"):
        m, part, tp = _part("dev-window-steel5-t14", shape)
        assert _covered(part, tp), shape
        assert {"cast_shadow", "shadow_cut"} & set(part.uncertainty_terms), shape
    assert any(w.startswith("cast shadow:") for w in m.warnings)


def test_thick_steel_plate_in_window_light_under_filmic_within_3_percent():
    """dev-window-steel5-t14 (branches heavymetal14, steelwin14, window15, winhole18): the 5.5 mm steel plate, cut
    along the light the collar's cut shows, read +5.7 % with its 11 mm hole missed (the lit crescent of its floor found
    as a 3.7 mm hole, the wall's shade beside it taken as material); with the shade taken into the opening
    (photo_holes._shaded_opening) +2.8 % (bench_reallight). The brass collar 3.5 mm reads -0.4 % (window15).
    Truth: the render's outlines, area by shapely."""
    for shape in ("plate4", "collar"):
        m, part, tp = _part("dev-window-steel5-t14", shape)
        assert abs(part.area_mm2 - tp["area"]) < 0.03 * tp["area"], shape


def test_thick_black_plate_in_mixed_light_holes_within_half_a_millimetre():
    """dev-mixed-black5-t18 (branch heavymetal14; mixed light, 18 degrees of tilt): a black plate 5.5 mm thick whose
    holes show a lit floor; the dark far wall and the shade on the far side, at the face's level, stayed face, so the
    holes were read on the lit floor: 2.45, 1.91, 1.02 and 0.21 mm small (bench_reallight), area +2.1 %. The lit floor
    is the overlap of the top opening's image and the bottom one's (shifted by the thickness's parallax); fitted so
    (branch deephole14): -0.33, +0.03, -0.14, -0.08 mm, area +0.5 %. Truth: the render's outlines (holes as
    equal-area circles by shapely)."""
    m, part, tp = _part("dev-mixed-black5-t18", "plate4")
    assert _covered(part, tp)
    for centre, diameter in tp["holes"]:
        hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
        assert abs(hole.diameter_mm - diameter) < 0.5


_RIM_READ = [
    # render, part: the thickness read from the round rims where the wall band gives none (branch wallcue14)
    ("dev-soft-brass-t25", "plate"),
    ("lens-soft-black-t0", "gasket"),
    ("lens-soft-black-t30", "l-bracket"),
    ("lens-soft-black-t30", "disc"),
    ("soft-black-t15", "l-bracket"),
]


@pytest.mark.parametrize(("name", "shape"), _RIM_READ)
def test_thickness_read_from_the_round_rims(name, shape):
    """Photos without --thickness (branch wallcue14): black and brass parts in soft light whose side wall shows
    no band keep a reading from their round rings (photo_thickness.rim_thickness: the thickness that maps their
    drilled holes and discs back to circles). Truth: the render's thickness (its truth file: the extrusion
    Blender drew). Read 1.82 / 1.80 / 2.69 / 3.02 / 4.22 mm against 2.5 / 2.0 / 3.0 / 3.0 / 4.0 mm, each within 1
    stated sigma (0.72-1.06 mm) and 0.7 mm; before, none of them was read (term 'thickness_unknown')."""
    m, part, tp = _read_part(name, shape)
    est = m.settings["thickness_estimate"]["parts"][str(part.label)]
    assert est["cue"] == "rim"
    assert abs(est["thickness_mm"] - tp["t"]) <= 3 * est["thickness_u_mm"]
    assert abs(est["thickness_mm"] - tp["t"]) < 0.75
    assert est["thickness_u_mm"] < 0.6 * tp["t"]
    assert "thickness_estimate" in part.uncertainty_terms and "thickness_unknown" not in part.uncertainty_terms
    assert _covered(part, tp)


def test_rim_and_wall_band_fused_where_they_agree():
    """lens-soft-black-t0's black L bracket, 4 mm thick (render truth): the wall band reads 4.28 +- 1.50 mm, its two
    5.5 mm holes 3.65 +- 1.20 mm; they agree, and the inverse-variance mean 3.89 +- 0.94 mm is taken (branch
    wallcue14; before, the wall band's 4.28 +- 1.50 mm alone)."""
    m, part, tp = _read_part("lens-soft-black-t0", "l-bracket")
    est = m.settings["thickness_estimate"]["parts"][str(part.label)]
    assert est["cue"] == "wall+rim"
    assert abs(est["thickness_mm"] - tp["t"]) <= 3 * est["thickness_u_mm"]
    assert est["thickness_u_mm"] < 1.2  # narrower than either cue alone


def _at(name: str, shape: str, thickness_mm: float):
    tp = _truth(name, shape)
    m = scanmass.measure(tp["image"], thickness_mm=thickness_mm)
    part = min(m.parts, key=lambda q: math.dist(q.centroid_mm, tp["centroid"]))
    return m, part, tp


def test_gasket_covered_over_a_sweep_of_the_given_thickness():
    """window-steel-t25: the 2.5 mm steel gasket measured with the thickness given 0.25 mm short to 0.25 mm long
    (steps of 0.05 mm). Its cut switches between ways of finding its shadow (its own sweep, a core along the L
    bracket's shadow direction, the fade alone, no cut at all): -17.5 to +14.5 % in area (bench sweep, branch
    smooth14), +0.29 % at its own 2.50 mm. Truth: the render's outline (shapely). Each figure lies within 3 stated
    sigma. This held before the term 'cut_swing' too (at most 0.88 sigma: its 'shadow_cut', 'unclear_edge' and
    'cast_shadow' terms are 17-48 % of its area); it guards that no step of the sweep leaves them."""
    for k in range(11):
        t = round(2.25 + 0.05 * k, 2)
        _, part, tp = _at("window-steel-t25", "gasket", t)
        assert _covered(part, tp), (t, part.area_mm2 / tp["area"] - 1, part.area_u_mm2 / tp["area"])


def test_cut_swing_covers_a_thickness_a_little_off():
    """window-steel-t25: the gasket with 2.45 mm given (2 % short) reads -6.3 % in area against the render's
    outline (shapely), +0.29 % with 2.50 mm: its cut took 166 against 96 mm² (a core along the L bracket's shadow
    direction at one, refused at the other). The cut decided again 0.1 mm either side of the thickness and measured
    again gives the term 'cut_swing' (branch smooth14), which alone covers that error within 3 of its sigma, and a
    warning names it. Before, no term said the figure depends on the thickness this way."""
    m, part, tp = _at("window-steel-t25", "gasket", 2.45)
    assert "cut_swing" in part.uncertainty_terms
    swing = part.uncertainty_terms["cut_swing"]["area_mm2"]
    assert abs(part.area_mm2 - tp["area"]) <= 3 * swing, (part.area_mm2 / tp["area"] - 1, swing / tp["area"])
    assert any(w.startswith("shadow cut moves with the thickness") and f" {part.label} (" in w for w in m.warnings)
    assert str(part.label) in m.settings["cut_swing"]["parts"]


def test_cut_swing_small_where_the_cut_holds():
    """spot-steel-t0: the 3 mm steel plate's cut under the spot is the same 0.3 mm either side of its thickness
    (337 mm² cut over 2.70-3.30 mm, area -0.25..+0.41 %, bench sweep, branch smooth14): a 'cut_swing' term, where
    any, stays under 0.5 % of the render's area (shapely), so a steady cut keeps its stated uncertainty."""
    _, part, tp = _at("spot-steel-t0", "plate", 3.0)
    swing = part.uncertainty_terms.get("cut_swing", {}).get("area_mm2", 0.0)
    assert swing < 0.005 * tp["area"], swing / tp["area"]


def test_thick_steel_plate_in_window_light_cut_along_the_light_another_part_shows():
    """dev-window-steel5-t14 (branch steelwin14; window light, Filmic): the 5.5 mm brushed-steel plate's region
    fades as a cast shadow alone does (its face 0.02-0.39 of the paper), so no cut was tried: +20.1 % in area,
    centroid 3.2 mm (bench_reallight). It is far wider than a shadow of a part 5.5 mm thick can be (a light 15
    degrees up casts 20.5 mm), so it is a face beside its shadow; its own sweep search runs through its grain (10
    px, the wrong way), but the brass collar's sweep, refused on its texture alone, shows the light's direction:
    along it the plate's soft fade, then its dark rough core (about 21 px), is cut: +5.7 %, centroid 0.80 mm, and
    its three small holes stay found within 0.2 mm. Truth: the render's outlines (area and centroid by shapely;
    holes as equal-area circles)."""
    m, part, tp = _part("dev-window-steel5-t14", "plate4")
    assert abs(part.area_mm2 - tp["area"]) < 0.08 * tp["area"]  # was +20.1 %
    assert math.dist(part.centroid_mm, tp["centroid"]) < 1.2  # was 3.2 mm
    assert "shadow_cut" in part.uncertainty_terms
    for centre, diameter in tp["holes"]:
        if diameter > 10:
            continue  # the 11 mm hole: missed before and after (the strict xfail above)
        hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
        assert math.dist(hole.circle_centre_mm, centre) < 0.25
        assert abs(hole.diameter_mm - diameter) < 0.2
    assert _covered(part, tp)


def test_pieces_of_a_lifted_parts_wall_dropped_without_thickness():
    """dev-window-steel5-t14 without --thickness (branch steelwin14): five regions of 21-92 mm² beside and inside
    the brass collar (its lit outer wall and its bore's wall, of the brass's colour) were found as parts of their
    own; measured again at the thickness read from the collar's wall, they are found nowhere: they are dropped,
    with a warning naming them. Truth: the render holds two parts (its truth file)."""
    m = _without_thickness("dev-window-steel5-t14")
    truth = json.loads((REALLIGHT / "dev-window-steel5-t14.json").read_text())
    assert len(m.parts) == len(truth["parts"])  # was 7
    for shape in ("plate4", "collar"):
        tp = _truth("dev-window-steel5-t14", shape)
        assert min(math.dist(q.centroid_mm, tp["centroid"]) for q in m.parts) < 5.0
    assert any(w.startswith("dropped region(s)") for w in m.warnings)


_LENS_STEEL2 = "dev-lens-window-steel2-t16"


def test_lens_window_steel_plate_and_bracket_covered_or_refused():
    """dev-lens-window-steel2-t16 (branch lenssteel14; window light 30 degrees up, 16 degrees of tilt, the k1 = -0.05
    lens with no profile): a brushed-steel plate 3 mm thick with four holes beside a steel L bracket 2.5 mm. Each
    part found keeps its cast shadow (+13.0 % and +24.6 % in area with the thickness given; without it the plate
    +19.1 % and the bracket, +22.1 %, named 'shadow only', bench_reallight figures of this branch) and is warned of
    it; the guard: every part reported lies within 3 of its stated sigma (0.48-0.61 sigma), with and without the
    thickness, or the photo is refused with the fix named. Truth: the render's outlines (area and centroid by
    shapely)."""
    for shape in ("plate4", "l-bracket"):
        m, part, tp = _part(_LENS_STEEL2, shape)
        assert _covered(part, tp), (shape, part.area_mm2 / tp["area"] - 1)
        # the plate's shadow is cut since branch window15, the bracket's since lenswin17 (term 'shadow_cut')
        assert {"cast_shadow", "shadow_cut"} & set(part.uncertainty_terms), shape
    # warned of it: kept (its term 'cast_shadow') or cut (since lenswin17 both are)
    assert any(w.startswith(("cast shadow:", "cast shadow cut:")) for w in m.warnings)
    try:
        m = _without_thickness(_LENS_STEEL2)
    except SegmentationError as exc:  # refused: the message must name the fix
        assert "diffuse light" in str(exc)
        return
    for q in m.parts:
        tp = min(
            (_truth(_LENS_STEEL2, s) for s in ("plate4", "l-bracket")),
            key=lambda t: math.dist(t["centroid"], q.centroid_mm),
        )
        assert _covered(q, tp), (q.label, q.area_mm2 / tp["area"] - 1)


@pytest.mark.xfail(
    strict=True,
    reason="dev-lens-window-steel2-t16 (branches lenssteel14, window15, lenswin17): both steel parts found, none "
    "extra; the plate is cut along its own sweep (+13.0 -> +3.3 %, window15), the L bracket along the same light by "
    "its shadow's tint (+24.5 -> +4.8 %, lenswin17); two of the plate's four holes missed, the bracket's second "
    "5.5 mm hole missed (2.8 % of its area). Without the thickness the bracket is named 'shadow only' (missed in "
    "bench_reallight), the plate +19.1 % (1.3 sigma), its holes 3.3-4.4 mm small (1.0-1.3 sigma). Since coreband31 "
    "and winhole31 (crescent holes) both parts hold all their holes, the plate -0.14 %, the bracket +2.27 %; "
    "without the thickness the bracket is still named 'shadow only'",
)
def test_lens_window_steel_plate_and_bracket_within_3_percent():
    for shape in ("plate4", "l-bracket"):
        m, part, tp = _part(_LENS_STEEL2, shape)
        assert abs(part.area_mm2 - tp["area"]) < 0.03 * tp["area"], shape
        assert len(part.holes) == len(tp["holes"]), shape
    m = _without_thickness(_LENS_STEEL2)
    assert not any(w.startswith("shadow only:") for w in m.warnings)


def test_lens_window_steel_bracket_cut_by_its_shadows_tint():
    """dev-lens-window-steel2-t16 (branch lenswin17; window light 30 degrees up, the k1 = -0.05 lens, no profile): the
    2.5 mm steel L bracket kept its soft, dark, speckled cast shadow along two sides: +24.5 % in area, centroid
    2.18 mm (bench_reallight). Its face, read along the arms' middle near the brushed face's bright centre, is rough
    (0.095), so its shadow's core is only 2.3 times as rough and its fade (0.16-0.48 of the paper white) smoother
    than the face: no shadow-like layer is reached from its outline. The shadow keeps the paper's tint (blue less red
    over the level: -0.02 to +0.01) where the steel face mirrors the window's (-0.05): swept along the light the
    plate beside it shows, the shadow is cut up to that step of tint (10.8 px along (-0.55, 0.83); the plate's own
    cut, 3 mm thick, 14.4 px): +4.8 %, centroid 1.25 mm; the rest is mostly its missed 5.5 mm hole (2.8 % of its
    area). Truth: the render's outlines (area and centroid by shapely)."""
    m, part, tp = _part(_LENS_STEEL2, "l-bracket")
    assert abs(part.area_mm2 - tp["area"]) < 0.07 * tp["area"]  # was +24.5 %
    assert math.dist(part.centroid_mm, tp["centroid"]) < 1.6  # was 2.18 mm
    assert "shadow_cut" in part.uncertainty_terms
    assert _covered(part, tp)


@pytest.mark.parametrize(
    ("name", "was", "was_centroid"),
    [
        ("dev-lens-window-steel-t24", -8.08, 0.57),  # the 2.2 mm cam, the k1 = -0.05 lens, no profile
        ("dev-window-steel4-t22", -5.83, 0.41),  # the 2 mm cam
    ],
)
def test_thin_steel_cam_in_window_light_cut_only_up_to_its_shadows_tint(name, was, was_centroid):
    """Thin brushed-steel cams in window light (branch lenswin17): the face is so smooth (roughness 0.0015 on the
    t24 plate beside it) that its rim near the outline reads as rough as the shadow, and the own sweep ran on into
    the face and beside the bore (the cam was ``was`` % in area, centroid ``was_centroid`` mm, bench_reallight). The
    shadow keeps the paper's tint, the face mirrors the window's (blue less red over the level 0.05-0.07 from the
    paper's): the cut is shortened to that step of tint (segment.softshadow.tint_bound): -1.1 % and +1.8 %,
    centroids 0.35 and 0.29 mm. Truth: the render's outlines (area and centroid by shapely)."""
    m, part, tp = _part(name, "cam")
    assert abs(part.area_mm2 - tp["area"]) < 0.03 * tp["area"]  # was ``was`` %
    assert math.dist(part.centroid_mm, tp["centroid"]) < 0.45  # was ``was_centroid`` mm
    assert "shadow_cut" in part.uncertainty_terms
    assert _covered(part, tp)


def test_steel_plate_under_the_spot_lit_sectors_with_a_streak_joined():
    """dev-spot-steel3-t20 (branch spot15): a brushed-steel plate 3 mm thick under the spot mirrors the light in two
    sectors through its 10 mm hole, each with a streak at the paper's own level along it. The threshold left both to
    the paper, and their edge against the streak is the face's soft shading, so their step to the paper was read as
    a fade (0.45-0.54 of it at the edge): the plate read -6.4 % with its centroid 3.6 mm off, and its two 6.5 mm holes
    2.9 mm small (only the lit floor was taken as the hole). Their step read beyond the found face's hull (the part's
    own edge, 0.82-1.35 of it), the sectors are joined with the streaks between them; the holes are then opened at
    the top face. Truth: the render's outlines (area and centroid by shapely, holes by their equal-area circles)."""
    m, part, tp = _part("dev-spot-steel3-t20", "plate")
    assert math.dist(part.centroid_mm, tp["centroid"]) < 1.5  # was 3.64 mm
    assert _covered(part, tp)
    for centre, diameter in tp["holes"]:
        if diameter > 8.0:
            continue  # the 10 mm hole: see the xfail below
        hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
        assert math.dist(hole.circle_centre_mm, centre) < 1.0
        assert abs(hole.diameter_mm - diameter) < 0.2, hole.diameter_mm  # were 2.9 mm small
    # the cam beside it: its bore is not traced out along its own lit sector (an 11.3 mm 'opening' on a soft ramp)
    m, cam, tc = _part("dev-spot-steel3-t20", "cam")
    ((centre, diameter),) = tc["holes"]
    # +0.49 -> +0.62 mm (0.3 sigma) since branch spotsteel18: the bore's far side now on the truth no longer
    # offsets the deep-hole step's overcut on the light's side
    assert abs(cam.holes[0].diameter_mm - diameter) < 0.7
    assert abs(cam.area_mm2 - tc["area"]) < 0.03 * tc["area"]


def test_mixed_light_sheen_black_parts_cut_by_colour_on_their_shadows_side():
    """dev-mixed-black4-t25 (branch mixed15): the cut by colour takes each part's cool-light shadow (lit by the warm
    lamp) on the side the photo's parts agree on, not a ring of face: the centroid moves toward the truth, 1.07 ->
    0.31 mm (cam) and 0.46 -> 0.20 mm (disc) in bench_reallight, checked here within 0.5 mm and 0.3 mm. Truth: the
    render's outlines (centroid by shapely)."""
    for shape, limit in (("cam", 0.5), ("disc", 0.3)):
        m, part, tp = _part("dev-mixed-black4-t25", shape)
        assert math.dist(part.centroid_mm, tp["centroid"]) < limit, shape


def test_one_softbox_black_gasket_not_cut_by_colour():
    """soft-black-t15 (one softbox, branch mixed15's guard): the penumbrae around the black gasket 2 mm thick lean
    apart in tint by 0.07-0.08 only (one light's colour and the noise); a sweep by colour there cut its face
    (-3.8 % in area, centroid 0.98 mm) until it asked for two plainly different lights. The gasket stays as main
    measures it: +0.73 %, centroid 0.03 mm (bench_reallight). Truth: the render's outline (shapely)."""
    m, part, tp = _part("soft-black-t15", "gasket")
    assert abs(part.area_mm2 - tp["area"]) < 0.01 * tp["area"]
    assert math.dist(part.centroid_mm, tp["centroid"]) < 0.1


def test_lens_window_steel_plate_cut_along_its_own_sweep_where_no_other_part_shows_the_light():
    """dev-lens-window-steel2-t16 (branch window15; window light 30 degrees up, the k1 = -0.05 lens, no profile): the
    3 mm steel plate and the 2.5 mm steel L bracket both fade as a cast shadow alone does and are wider than a
    shadow can be, so each waits for another part to show the light's direction; none did, and neither was cut
    (plate +13.0 % in area, centroid 1.87 mm, bench_reallight). The plate's own sweep, refused on its grain,
    runs along its shadow; along it the fade and a core at 0.015 of the paper white against the face's 0.11 (3.8
    times as rough as the face: told from it by its level) are cut: +3.3 %, centroid 0.20 mm. The sweep's
    refined direction (-0.54, 0.84) and length 16.6 px agree with the shadow the render's light casts (its
    centre projected through the render's camera: (-0.54, 0.84), 15.6 px). Truth: the render's outlines (area
    and centroid by shapely)."""
    m, part, tp = _part(_LENS_STEEL2, "plate4")
    assert abs(part.area_mm2 - tp["area"]) < 0.05 * tp["area"]  # was +13.0 %
    assert math.dist(part.centroid_mm, tp["centroid"]) < 0.5  # was 1.87 mm
    assert "shadow_cut" in part.uncertainty_terms
    assert _covered(part, tp)


def test_brass_collar_in_window_light_cut_by_its_shadows_colour():
    """dev-window-steel5-t14 (branch window15; window light, Filmic): the 3.5 mm brass collar's own sweep finds its
    cast shadow (13.5 px along (-0.67, 0.74)), but the shadow's grain is 3.9 times the face's, under the 4 a cut
    needs, and only the shadow's fade was cut: +18.2 % in area, centroid 2.9 mm (bench_reallight). The face is of
    a colour of its own (its tint, blue less red over the level, 0.99) and the cut of the paper's (0.07): told
    apart by colour as well, a grain ratio of 3 suffices (a shadow is the paper in less light and keeps the
    paper's colour: common practice): -0.4 %, centroid 0.32 mm. Truth: the render's outline (area and centroid
    by shapely)."""
    m, part, tp = _part("dev-window-steel5-t14", "collar")
    assert abs(part.area_mm2 - tp["area"]) < 0.02 * tp["area"]  # was +18.2 %
    assert math.dist(part.centroid_mm, tp["centroid"]) < 0.6  # was 2.9 mm
    assert "shadow_cut" in part.uncertainty_terms
    assert _covered(part, tp)


@pytest.mark.parametrize(
    ("name", "shape", "was"),
    [
        ("dev-spot-brass4-t17", "l-bracket", -12.66),  # 1.8 mm: the sweep took a strip of face
        ("dev-spot-brass3-t20", "plate", -5.26),  # 2.5 mm: cut 2-6 px into the face
    ],
)
def test_thin_brass_face_against_its_shadow_placed_by_its_tint(name, shape, was):
    """Thin brass parts under the hard spot (branch brass15), the face as dark as its cast shadow (0.016-0.02 of the
    paper white, within 15 % of the shadow's level), so the grain and level rules cut into the face: was ``was`` %
    in area (bench_reallight). The shadow is the paper in less light and keeps the paper's colour (common
    practice), the brass face is yellow (blue over green 0.4 of the paper's): the cut is placed where the
    yellowness falls to half of the face's (segment.colourshadow.tint_cut). Now within 3 %, covered by the stated
    uncertainty. Truth: the render's outlines (area and centroid by shapely)."""
    m, part, tp = _part(name, shape)
    assert abs(part.area_mm2 - tp["area"]) < 0.03 * tp["area"], was
    assert "shadow_cut" in part.uncertainty_terms
    assert _covered(part, tp)
