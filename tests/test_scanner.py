"""Flatbed scans as they really come: a lid left open on a thick part, thick parts' shadows.

Truth: the exact polygons the scans are rendered from (``scanmass.testing.scans``, exact
pixel coverage): a plate 30 x 20 mm with a hole of 4 mm radius has 600 - 16 pi mm2
(closed forms, statics handbook section table, common practice); areas from shapely.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from cli_helpers import one_line_error
from shapely.geometry import Polygon
from typer.testing import CliRunner

import scanmass
from scanmass.cli.app import app
from scanmass.errors import SegmentationError
from scanmass.segment.lidgap import lid_gap
from scanmass.testing.scans import SynthPart, circle, l_section, rectangle, render_scan, save_scan

HEIGHT_MM = 60.0


def _dark_top_band(depth_mm: float, floor: float):
    """Light falling off towards the top edge (a lid held open there): 1 - (1 - floor) exp(-d / depth)."""

    def field(x_mm, y_mm):
        return 1.0 - (1.0 - floor) * np.exp(-(HEIGHT_MM - y_mm) / depth_mm)

    return field


def _scan(parts, illumination, seed=4):
    return render_scan(
        parts, dpi=300, size_mm=(80.0, HEIGHT_MM), blur_px=0.8, noise=0.004, illumination=illumination, seed=seed
    )


def test_lid_gap_with_measurable_parts_is_warned_and_measured():
    plate = SynthPart(rectangle(20.0, 10.0, 30.0, 20.0), [circle(35.0, 20.0, 4.0)])
    m = scanmass.measure(_scan([plate], _dark_top_band(6.0, 0.2)).image, dpi=300)
    assert m.warnings[0].startswith("lid not closed? the background falls to")
    assert "top edge" in m.warnings[0] and "close the lid, or lay a white sheet over the part(s)" in m.warnings[0]
    assert m.settings["lid_gap"]["side"] == "top"
    area = Polygon(plate.outer_mm, plate.holes_mm).area  # shapely; 600 - 16 pi
    assert area == pytest.approx(600 - 16 * math.pi, rel=1e-4)
    assert abs(m.parts[0].area_mm2 - area) <= 3 * m.parts[0].area_u_mm2


def test_lid_gap_hiding_every_part_is_refused_with_the_fix(tmp_path):
    """The only part lies in the dark band: instead of 'touches the image edge', the lid is named."""
    scan = _scan([SynthPart(rectangle(20.0, 38.0, 30.0, 20.0))], _dark_top_band(10.0, 0.1))
    with pytest.raises(SegmentationError, match=r"lid not closed\?.*top edge.*close the lid, or lay a white sheet"):
        scanmass.measure(scan.image, dpi=300)
    path = save_scan(scan, tmp_path / "open-lid.png")
    result = CliRunner().invoke(app, ["measure", str(path)])
    one_line_error(result, "open-lid.png", "lid not closed?", "close the lid")


@pytest.mark.parametrize(
    "illumination",
    [None, (0.3, 0.2)],  # flat light; a gentle linear fall-off of 30 % and 20 % across the scan
)
def test_closed_lid_is_not_flagged(illumination):
    plate = SynthPart(rectangle(20.0, 10.0, 30.0, 20.0))
    scan = _scan([plate, SynthPart(circle(62.0, 45.0, 9.0))], illumination)
    assert lid_gap(scan.image, np.linspace(0, 1, 256) ** 2.2) is None
    m = scanmass.measure(scan.image, dpi=300)
    assert not any("lid" in w for w in m.warnings) and "lid_gap" not in m.settings


def test_light_parts_on_a_dark_background_are_not_a_lid_gap():
    scan = render_scan(
        [SynthPart(rectangle(20.0, 10.0, 30.0, 20.0))],
        dpi=300,
        size_mm=(80.0, HEIGHT_MM),
        background=0.05,
        foreground=0.8,
        blur_px=0.8,
        noise=0.004,
        seed=5,
    )
    m = scanmass.measure(scan.image, dpi=300)
    assert len(m.parts) == 1 and not any("lid" in w for w in m.warnings)


# ---------------------------------------------------------------------------------
# thick parts: the committed Cycles renders of the scanner group (benchmarks/render_reallight.py)
# ---------------------------------------------------------------------------------

REALLIGHT = Path(__file__).resolve().parent / "data" / "reallight"


def _render(name: str):
    """The render's image and its truth parts (scan-frame mm; areas and centroids from shapely)."""
    truth = json.loads((REALLIGHT / f"{name}.json").read_text())
    parts = []
    for p in truth["parts"]:
        poly = Polygon(p["outline_mm"], p["holes_mm"])
        holes = [2 * math.sqrt(Polygon(h).area / math.pi) for h in p["holes_mm"]]  # equal-area circle
        parts.append(
            {"shape": p["shape"], "area": poly.area, "centroid": (poly.centroid.x, poly.centroid.y), "holes": holes}
        )
    return REALLIGHT / truth["image"], truth, parts


def _nearest(m, centroid):
    return min(m.parts, key=lambda q: math.dist(q.centroid_mm, centroid))


@pytest.mark.slow
def test_black_parts_scan_measures_the_face_on_the_glass():
    """Black plastic 3 and 8 mm thick under a lid 8 mm up, lamp at 40 degrees: the shadow on the lid
    (9.5 mm long) is left out; the L bracket is within 3 sigma, its holes too, and the cam's deep bore
    is found."""
    from scanmass.load.decode import load_image
    from scanmass.pipeline import measure_image

    image, truth, parts = _render("scan-black-lamp40")
    dpi = truth["dpi"]
    m = scanmass.measure(image, dpi=dpi, thickness_mm=3.0)
    assert len(m.parts) == 2
    assert m.settings["scan_face"]["measured"].startswith("the face on the glass")
    assert any(w.startswith("scan of thick parts: the lamp's shadow beside part(s)") for w in m.warnings)
    bracket = next(p for p in parts if p["shape"] == "l-bracket")
    part = _nearest(m, bracket["centroid"])
    assert abs(part.area_mm2 - bracket["area"]) <= 3 * part.area_u_mm2
    for c, t, u in zip(part.centroid_mm, bracket["centroid"], part.centroid_u_mm):
        assert abs(c - t) <= 3 * u
    assert "scan_shadow" in part.uncertainty_terms
    assert sorted(h.diameter_mm for h in part.holes) == pytest.approx(sorted(bracket["holes"]), abs=0.15)
    # the cam's bore (8 mm deep, 8 mm across) is as dark as the face (the lid seen through it, in the dark):
    # found by its floor's grain, within 0.15 mm of its diameter (measured -0.11 mm; missed before, which
    # left the cam +5.3 % in area at 3.0 sigma); the cam within 1 % and 3 sigma (measured +0.35 %)
    cam = next(p for p in parts if p["shape"] == "cam")
    found = _nearest(m, cam["centroid"])
    assert [h.diameter_mm for h in found.holes] == pytest.approx(cam["holes"], abs=0.15)
    assert abs(found.holes[0].diameter_mm - cam["holes"][0]) <= 3 * found.holes[0].diameter_u_mm
    assert abs(found.area_mm2 - cam["area"]) <= min(0.01 * cam["area"], 3 * found.area_u_mm2)
    assert any("found by the grain of their floor" in w and "check them" in w for w in m.warnings)
    # without the face check the outlines hold the shadows: 40-60 % too large (the test can fail)
    plain = measure_image(load_image(image, dpi=dpi), scanmass.MeasureOptions(dpi=dpi))
    assert _nearest(plain, bracket["centroid"]).area_mm2 > 1.4 * bracket["area"]


@pytest.mark.slow
def test_steel_parts_as_dark_as_their_shadow_are_separated_by_the_sweep():
    """Brushed steel reflects the scanner's dark inside: its shadow on the lid runs from lighter than the
    face (far end) to darker (next to it), so no level tells them apart. The shadow is the face swept
    along the lamp: its length is where the sharp step lies behind the soft front, and the face is what
    the sweep leaves. The holes (dark floors in their walls' shadow, the bore partly lit) are found too.

    Truth: the render's outlines (benchmarks/render_reallight.py), areas by shapely. Before the sweep
    the outlines held the shadows: +29 % and +31 % in area, every hole missed."""
    image, truth, parts = _render("scan-steel-lamp35")
    m = scanmass.measure(image, dpi=truth["dpi"])
    assert len(m.parts) == 2
    assert not any("face on the glass cannot be told from it" in w for w in m.warnings)
    assert any(w.startswith("scan of thick parts: the lamp's shadow beside part(s) 1") for w in m.warnings)
    for tp in parts:
        part = _nearest(m, tp["centroid"])
        assert abs(part.area_mm2 - tp["area"]) <= 0.005 * tp["area"]  # measured +0.22 % and +0.11 %
        assert abs(part.area_mm2 - tp["area"]) <= 3 * part.area_u_mm2
        for c, t, u in zip(part.centroid_mm, tp["centroid"], part.centroid_u_mm):
            assert abs(c - t) <= 0.05 and abs(c - t) <= 3 * u  # measured within 0.012 mm
        # every hole found, each within 0.05 mm of its diameter (measured within 0.015 mm)
        assert sorted(h.diameter_mm for h in part.holes) == pytest.approx(sorted(tp["holes"]), abs=0.05)
        assert "scan_shadow" in part.uncertainty_terms


def test_clean_scans_have_no_shadow():
    parts = [
        SynthPart(rectangle(10.0, 10.0, 30.0, 20.0), [circle(20.0, 20.0, 4.0)]),
        SynthPart(circle(60.0, 40.0, 9.0)),
    ]
    for blur, ill in ((0.8, None), (2.0, (0.3, 0.2))):
        scan = render_scan(
            parts, dpi=300, size_mm=(80.0, HEIGHT_MM), blur_px=blur, noise=0.004, illumination=ill, seed=6
        )
        m = scanmass.measure(scan.image, dpi=300)
        face = m.settings["scan_face"]
        assert face["shadow_left_out"] == {} and face["shadow_not_separated"] == {}
        assert not any("scan of" in w for w in m.warnings)


# ---------------------------------------------------------------------------------
# thick parts, exact coverage: a dark part and the lamp's shadow on the lid beside it
# ---------------------------------------------------------------------------------


def _shadow_scan(
    part: SynthPart, shadow_mm: float, *, shadow: float, soft_px: float = 5.0, dpi: float = 300.0, seed: int = 1
):
    """A dark part (0.04) on the lid (0.85) with its shadow (level ``shadow``) cast along +y.

    The shadow is the part's outline swept ``shadow_mm`` along +y (parallel light from a lamp
    travelling with the carriage, the lid resting on the part), its outer end blurred by
    ``soft_px`` (the lamp's size, the lid out of focus); then the optics' 0.8 px blur, noise and
    sRGB encoding. Coverage of each pixel is exact (scanmass.testing.scans.part_coverage).
    """
    import cv2

    from scanmass.testing.scans import part_coverage, srgb_encode

    s = 25.4 / dpi
    shape = (int(round(80.0 / s)), int(round(90.0 / s)))
    cov = part_coverage([part], shape=shape, mm_per_px=s)
    swept = [SynthPart(part.outer_mm + [0.0, t]) for t in np.linspace(0.0, shadow_mm, 41)]
    shade = np.max([part_coverage([p], shape=shape, mm_per_px=s) for p in swept], axis=0)
    shade = cv2.GaussianBlur(shade, (0, 0), soft_px)
    lid = 0.85 - (0.85 - shadow) * shade
    lin = cv2.GaussianBlur(0.04 * cov + lid * (1.0 - cov), (0, 0), 0.8)
    lin = np.clip(lin + np.random.default_rng(seed).normal(0.0, 0.004, lin.shape), 0.0, 1.0)
    return np.round(srgb_encode(lin) * 255).astype(np.uint8)


PLATE = SynthPart(rectangle(20.0, 15.0, 50.0, 30.0))  # 1500 mm2, centroid (45, 30): closed form
DISC = SynthPart(circle(45.0, 30.0, 15.0))


@pytest.mark.parametrize(("part", "shadow_mm"), [(PLATE, 3.0), (PLATE, 6.0), (DISC, 6.0)])
def test_shadow_lighter_than_the_part_is_left_out(part, shadow_mm):
    m = scanmass.measure(_shadow_scan(part, shadow_mm, shadow=0.22), dpi=300)
    (found,) = m.parts
    poly = Polygon(part.outer_mm)  # shapely: the truth
    assert abs(found.area_mm2 - poly.area) <= 3 * found.area_u_mm2
    for c, t, u in zip(found.centroid_mm, (poly.centroid.x, poly.centroid.y), found.centroid_u_mm):
        assert abs(c - t) <= 3 * u
    # the shadow swept along y: its width times its length was inside the first outline
    sweep = poly.bounds[2] - poly.bounds[0]
    assert m.settings["scan_face"]["shadow_left_out"]["1"] == pytest.approx(sweep * shadow_mm, rel=0.15)
    assert "top side" in m.warnings[-1]


@pytest.mark.parametrize(("part", "width_mm", "tolerance"), [(PLATE, 50.0, 0.003), (DISC, 30.0, 0.01)])
def test_shadow_as_dark_as_the_part_is_separated(part, width_mm, tolerance):
    """A shadow 0.01 above the part's level (noise 0.004): no level separates them. The plate's straight
    front puts one sharp step the shadow's length behind it, and the sweep finds the face. The disc's
    curved front gives a weaker step there; its far arc (a step of the whole contrast, to the lid)
    outweighed it until the step was read inside the found region only: the disc's outline kept the
    shadow (+25 %, flagged); now the face is found (measured +0.42 %; the plate +0.06 %)."""
    m = scanmass.measure(_shadow_scan(part, 6.0, shadow=0.05), dpi=300)
    (found,) = m.parts
    poly = Polygon(part.outer_mm)  # shapely: the truth (the rectangle, or the circle as its inscribed polygon)
    assert abs(found.area_mm2 - poly.area) <= 3 * found.area_u_mm2
    for c, t, u in zip(found.centroid_mm, (poly.centroid.x, poly.centroid.y), found.centroid_u_mm):
        assert abs(c - t) <= 3 * u
    assert abs(found.area_mm2 - poly.area) <= tolerance * poly.area
    # the shadow's band: the part's width across the lamp times the shadow's 6 mm (a disc's swept band is as large)
    assert m.settings["scan_face"]["shadow_left_out"]["1"] == pytest.approx(width_mm * 6.0, rel=0.15)


BRASS_LINEAR = np.array([0.207, 0.149, 0.057])  # a brass face's linear R G B as the Cycles renders show it


@pytest.mark.parametrize("suffix", [".png", ".jpg"])
def test_brass_face_as_dark_as_its_shadow_is_separated(tmp_path, suffix):
    """A brass disc (yellow; luma 0.155) with the lamp's grey shadow (0.16, 6 mm along +y) on a white lid
    (0.85), exact coverage, stored as PNG and as JPEG (its colour at half resolution): no level separates
    face and shadow, and the disc's far arc outweighed the step the sweep looks for, so its outline kept the
    shadow (+25.4 % in area, flagged 'as dark as the lamp's shadow'). Read inside the found region the
    sweep finds the face, and its edge against the shadow is placed by its tint (the shadow has the lid's
    colour): +0.45 % (PNG and JPEG), centroid 0.05 mm."""
    import cv2

    from scanmass.testing.scans import part_coverage, srgb_encode

    s = 25.4 / 300.0
    shape = (int(round(80.0 / s)), int(round(90.0 / s)))
    cov = part_coverage([DISC], shape=shape, mm_per_px=s)
    swept = [SynthPart(DISC.outer_mm + [0.0, t]) for t in np.linspace(0.0, 6.0, 41)]
    shade = cv2.GaussianBlur(np.max([part_coverage([p], shape=shape, mm_per_px=s) for p in swept], axis=0), (0, 0), 5.0)
    lid = (0.85 - (0.85 - 0.16) * shade)[..., None] * np.ones(3)
    lin = cov[..., None] * BRASS_LINEAR + (1.0 - cov[..., None]) * lid
    lin = cv2.GaussianBlur(lin, (0, 0), 0.8)
    lin = np.clip(lin + np.random.default_rng(3).normal(0.0, 0.003, lin.shape), 0.0, 1.0)
    rgb = np.round(srgb_encode(lin) * 255).astype(np.uint8)
    path = tmp_path / f"brass{suffix}"
    cv2.imwrite(str(path), rgb[..., ::-1])
    m = scanmass.measure(path, dpi=300)
    (found,) = m.parts
    poly = Polygon(DISC.outer_mm)  # shapely: the truth (the circle as its inscribed polygon)
    assert abs(found.area_mm2 - poly.area) <= 0.01 * poly.area  # was +25.4 %
    assert math.dist(found.centroid_mm, (poly.centroid.x, poly.centroid.y)) < 0.1  # was 2.9 mm
    assert abs(found.area_mm2 - poly.area) <= 3 * found.area_u_mm2
    assert any("the lamp's shadow beside part(s) 1 (" in w for w in m.warnings)


def _crossing_shadow_scan(
    part: SynthPart, shadow_mm: float, *, soft_px: float = 6.0, dpi: float = 300.0, seed: int = 2
):
    """A steel-like part (0.16) whose shadow crosses its level: 0.09 next to it, 0.25 at the far end.

    The shadow is the part swept along +y up to ``shadow_mm``: each sweep distance t paints
    its level 0.09 + 0.16 t / shadow_mm, nearer ones over farther ones (the lid's scattered
    light, from the open side). A hole's floor is the lid seen through the hole: where the
    swept part covers it, in its wall's shadow and closed in by the walls, 0.05 (the floors'
    level in the Cycles render scan-steel-lamp35); beyond, lit (0.85). The shadow layer is
    blurred by ``soft_px`` (the lamp's size, the lid out of focus), the part's exact coverage
    painted over it, then the optics' 0.8 px blur, noise and sRGB.
    """
    import cv2

    from scanmass.testing.scans import part_coverage, srgb_encode

    s = 25.4 / dpi
    shape = (int(round(80.0 / s)), int(round(90.0 / s)))
    cov = part_coverage([part], shape=shape, mm_per_px=s)
    in_hole = part_coverage([SynthPart(h) for h in part.holes_mm], shape=shape, mm_per_px=s)
    layer = np.full(shape, 0.85)
    shade = np.zeros(shape)
    for t in np.linspace(shadow_mm, 0.0, 61):
        moved = SynthPart(part.outer_mm + [0.0, t], [h + [0.0, t] for h in part.holes_mm])
        c = part_coverage([moved], shape=shape, mm_per_px=s)
        layer = layer * (1.0 - c) + (0.09 + 0.16 * t / shadow_mm) * c
        shade = np.maximum(shade, c)
    floor = 0.05 * shade + 0.85 * (1.0 - shade)
    layer = cv2.GaussianBlur(layer * (1.0 - in_hole) + floor * in_hole, (0, 0), soft_px)
    lin = cv2.GaussianBlur(0.16 * cov + layer * (1.0 - cov), (0, 0), 0.8)
    lin = np.clip(lin + np.random.default_rng(seed).normal(0.0, 0.004, lin.shape), 0.0, 1.0)
    return np.round(srgb_encode(lin) * 255).astype(np.uint8)


def _assert_plate_without_its_shadow(m, plate: SynthPart, shadow_mm: float) -> None:
    """The 40 mm wide plate measured on its face: area within 1 % and 3 sigma, centroid within
    0.06 mm and 3 sigma, holes within 0.15 mm (truth: shapely's area and centroid of the
    exact-coverage outline, the holes' equal-area diameters), and the band left out at least
    0.8 of the plate's width times the shadow's length (and a hole the outline had shut)."""
    (found,) = m.parts
    poly = Polygon(plate.outer_mm, plate.holes_mm)
    assert abs(found.area_mm2 - poly.area) <= 0.01 * poly.area
    assert abs(found.area_mm2 - poly.area) <= 3 * found.area_u_mm2
    for c, t, u in zip(found.centroid_mm, (poly.centroid.x, poly.centroid.y), found.centroid_u_mm):
        assert abs(c - t) <= 0.06 and abs(c - t) <= 3 * u
    holes = [2 * math.sqrt(Polygon(h).area / math.pi) for h in plate.holes_mm]
    assert sorted(h.diameter_mm for h in found.holes) == pytest.approx(sorted(holes), abs=0.15)
    assert m.settings["scan_face"]["shadow_left_out"]["1"] > 0.8 * 40.0 * shadow_mm


def test_shadow_crossing_the_parts_level_is_left_out_by_the_sweep():
    """Exact coverage: a 40 x 25 mm plate with holes of 3 and 4.5 mm radius, its shadow 7 mm long crossing
    its level. Truth: shapely's area, centroid and the holes' equal-area diameters (6 and 9 mm).
    Measured: area +0.85 % (the face's edge against the blurred shadow sits 1.6 px out), centroid
    0.04 mm, holes -0.13 and -0.02 mm; before the sweep the outline held the shadow (+41 %)."""
    plate = SynthPart(rectangle(25.0, 15.0, 40.0, 25.0), [circle(35.0, 27.0, 3.0), circle(53.0, 25.0, 4.5)])
    m = scanmass.measure(_crossing_shadow_scan(plate, 7.0), dpi=300)
    _assert_plate_without_its_shadow(m, plate, 7.0)


def test_the_sweep_finds_the_face_whichever_way_the_lamp_shines():
    """The same scan turned by 90, 180 and 270 degrees (the lamp along +x, -y, -x): the face is found
    as unturned, within 1 % of the area (truth: shapely's area of the rendered plate)."""
    plate = SynthPart(rectangle(25.0, 15.0, 40.0, 25.0), [circle(35.0, 27.0, 3.0), circle(53.0, 25.0, 4.5)])
    scan = _crossing_shadow_scan(plate, 7.0)
    truth = Polygon(plate.outer_mm, plate.holes_mm).area
    for turns in (1, 2, 3):
        m = scanmass.measure(np.ascontiguousarray(np.rot90(scan, turns)), dpi=300)
        (found,) = m.parts
        assert m.settings["scan_face"]["shadow_left_out"], turns
        assert abs(found.area_mm2 - truth) <= 0.01 * truth, turns
        assert len(found.holes) == 2, turns


@pytest.mark.parametrize(
    ("soft_px", "shadow_mm"),
    [
        (0.8, 3.0),
        (0.8, 4.0),
        (0.8, 7.0),
        (1.5, 7.0),
        (1.5, 10.0),
        (3.0, 3.0),
        (3.0, 4.0),
        (3.0, 7.0),
        (5.0, 7.0),
        (6.0, 3.0),
        (6.0, 4.0),
        (6.0, 5.0),
        (6.0, 10.0),
    ],
)
def test_shadow_over_holes_is_left_out_whatever_its_front(soft_px, shadow_mm):
    """A shadow 3-10 mm long whose front is blurred by 0.8-6 px (a small lamp, a low lid; 6 px leaves a soft
    stretch on the outline, below 5 px the old check saw none and kept it: +41 %, no warning). Its geometry
    says it is there: the same sharp step one length behind its whole front. The holes (6 and 9 mm) are
    shorter along the lamp than a 3-4 mm shadow is long in part: each shows a lit floor and, behind it, the
    lid in its wall's shadow; both are one hole (before, the shadowed floor was taken as face where the two
    met the rim: holes 5.4-5.8 and 8.6-8.8 mm, area +1.1 to +1.7 %). Truth: shapely's area and centroid of
    the exact-coverage plate with its two holes, and the holes' equal-area diameters."""
    plate = SynthPart(rectangle(25.0, 15.0, 40.0, 25.0), [circle(35.0, 27.0, 3.0), circle(53.0, 25.0, 4.5)])
    m = scanmass.measure(_crossing_shadow_scan(plate, shadow_mm, soft_px=soft_px), dpi=300)
    # measured +0.48 to +0.87 % in area (the face's edge against the blurred shadow sits 1-1.6 px
    # out), holes within 0.11 mm (a 6 px front, 4 mm: 5.89 mm)
    _assert_plate_without_its_shadow(m, plate, shadow_mm)
    assert any(w.startswith("scan of thick parts: the lamp's shadow beside part(s) 1") for w in m.warnings)


@pytest.mark.parametrize("part", [PLATE, DISC], ids=["plate", "disc"])
@pytest.mark.parametrize("soft_px", [0.8, 2.0])
def test_hard_fronted_shadow_lighter_than_the_part_is_left_out(part, soft_px):
    """A black part's shadow (0.22, lighter than the part) with a hard front: left out by its level once its
    geometry says it is there (the disc's 2 px front is soft in places, not enough to be a front: the
    geometry is asked then too). Truth: shapely's area and centroid of the exact-coverage outline."""
    m = scanmass.measure(_shadow_scan(part, 5.0, shadow=0.22, soft_px=soft_px), dpi=300)
    (found,) = m.parts
    poly = Polygon(part.outer_mm)
    error = found.area_mm2 - poly.area
    assert abs(error) <= 0.01 * poly.area and abs(error) <= 3 * found.area_u_mm2  # measured within 0.3 %
    for c, t, u in zip(found.centroid_mm, (poly.centroid.x, poly.centroid.y), found.centroid_u_mm):
        assert abs(c - t) <= 3 * u
    width = poly.bounds[2] - poly.bounds[0]
    assert m.settings["scan_face"]["shadow_left_out"]["1"] == pytest.approx(width * 5.0, rel=0.2)


@pytest.mark.parametrize("part", [PLATE, DISC], ids=["plate", "disc"])
def test_hard_fronted_shadow_as_dark_as_the_part_is_left_out(part):
    """A shadow 0.01 above the part's level (noise 0.004) with a front blurred by 0.8 px: the step averaged
    along the front stands out (the disc's too: its step is read inside the part only, so the disc's far arc
    does not outweigh it, and summed over the whole arc), and the sweep finds the face. Truth: shapely's area."""
    m = scanmass.measure(_shadow_scan(part, 6.0, shadow=0.05, soft_px=0.8), dpi=300)
    (found,) = m.parts
    poly = Polygon(part.outer_mm)
    error = found.area_mm2 - poly.area
    assert abs(error) <= 0.01 * poly.area and abs(error) <= 3 * found.area_u_mm2  # measured -0.05 % / +0.16 %


@pytest.mark.parametrize("length_mm", [3.0, 4.0, 8.0])
@pytest.mark.parametrize("above", [0.005, 0.01, 0.02, 0.03])
@pytest.mark.parametrize("part", [PLATE, DISC], ids=["plate", "disc"])
def test_faint_hard_fronted_shadows_over_levels_and_lengths(part, above, length_mm):
    """Hard-fronted shadows (0.8 px) 0.005-0.03 above the part's level (0.04; noise 0.004, 8-bit sRGB: the
    faintest is 3 codes) and 3-8 mm long, behind a straight and a curved front: never a confident wrong
    figure. The shadow is left out (area within 1 %, 2 % at 0.005 above: measured -1.1 to -1.6 %, the step
    three codes high) and within 3 sigma. The 3 mm shadow behind the plate, up to 0.02 above, was found but not
    separated (+10.2 %, warned and covered): the face's seed stops 4 px short of the plate's back edges, a strip the
    check of what was left out (beyond the face along the lamp?) counted against the short shadow's band; now
    measured -1.16 % (0.005 above), -0.11 % and +0.19 %. Truth: shapely's area of the exact-coverage outline."""
    m = scanmass.measure(_shadow_scan(part, length_mm, shadow=0.04 + above, soft_px=0.8), dpi=300)
    (found,) = m.parts
    poly = Polygon(part.outer_mm)
    error = found.area_mm2 - poly.area
    assert abs(error) <= 3 * found.area_u_mm2
    assert any(w.startswith("scan of") and "shadow" in w for w in m.warnings)
    assert not m.settings["scan_face"]["shadow_not_separated"]
    assert abs(error) <= (0.02 if above < 0.01 else 0.01) * poly.area
    width = poly.bounds[2] - poly.bounds[0]
    # the band left out: the part's width times the shadow's length (a disc's sweep: the same, 2 r L)
    assert m.settings["scan_face"]["shadow_left_out"]["1"] == pytest.approx(width * length_mm, rel=0.15)


@pytest.mark.parametrize(
    "parts",
    [
        # two plates laid edge to edge (a 0.2 mm gap, under the blur at 100 dpi): the seam lies one length
        # behind the front along its whole width, but it is a line, not a step
        [
            SynthPart(rectangle(10.0, 10.0, 40.0, 30.0), [circle(28.0, 25.0, 6.0)]),
            SynthPart(rectangle(50.2, 10.0, 30.0, 30.0)),
        ],
        # a row of holes across a plate, at one distance behind its edge
        [SynthPart(rectangle(10.0, 10.0, 60.0, 30.0), [circle(x, 30.0, 3.0) for x in (18.0, 30.0, 42.0, 54.0, 62.0)])],
        # an L: the short arm's far edge lies at one distance behind its front
        [SynthPart(l_section(10.0, 10.0, 60.0, 30.0, 8.0, 8.0))],
    ],
    ids=["seam", "hole-row", "l-section"],
)
@pytest.mark.parametrize("dpi", [100, 300])
def test_no_hard_front_shadow_on_flat_parts(parts, dpi):
    """Flat parts with straight features at one distance behind an edge: no shadow is found."""
    scan = render_scan(parts, dpi=dpi, size_mm=(92.0, 50.0), blur_px=0.8, noise=0.003, seed=1)
    m = scanmass.measure(scan.image, dpi=dpi)
    face = m.settings["scan_face"]
    assert face["shadow_left_out"] == {} and face["shadow_not_separated"] == {}
    assert not any("scan" in w and "shadow" in w for w in m.warnings)


def test_a_deep_hole_as_dark_as_the_face_is_found_by_its_grain():
    """A black plate (0.04) whose 10 mm bore shows the lid in the dark (0.05, grainy: sigma 0.012 against
    the face's 0.002, as a path tracer renders a dim floor) and its shadow on the lid (0.22): the bore
    does not open by level, its grain finds it. Truth: shapely's area of the exact-coverage outline and the bore's
    equal-area diameter."""
    import cv2

    from scanmass.testing.scans import part_coverage, srgb_encode

    plate = SynthPart(rectangle(20.0, 15.0, 50.0, 30.0), [circle(45.0, 30.0, 5.0)])
    s = 25.4 / 300
    shape = (int(round(80.0 / s)), int(round(90.0 / s)))
    rng = np.random.default_rng(3)
    cov = part_coverage([SynthPart(plate.outer_mm)], shape=shape, mm_per_px=s)
    bore = part_coverage([SynthPart(plate.holes_mm[0])], shape=shape, mm_per_px=s)
    swept = [SynthPart(plate.outer_mm + [0.0, t]) for t in np.linspace(0.0, 4.0, 31)]
    shade = cv2.GaussianBlur(np.max([part_coverage([p], shape=shape, mm_per_px=s) for p in swept], axis=0), (0, 0), 4)
    lid = 0.85 - (0.85 - 0.22) * shade
    lin = cv2.GaussianBlur(0.04 * (cov - bore) + 0.05 * bore + lid * (1.0 - cov), (0, 0), 0.8)
    # the floor's grain per pixel (a path tracer's sampling noise; a dim, out-of-focus lid), then the sensor's
    lin += 0.012 * bore * rng.standard_normal(shape) + rng.normal(0.0, 0.002, shape)
    image = np.round(srgb_encode(np.clip(lin, 0.0, 1.0)) * 255).astype(np.uint8)
    m = scanmass.measure(image, dpi=300)
    (found,) = m.parts
    poly = Polygon(plate.outer_mm, plate.holes_mm)
    assert len(found.holes) == 1
    d = 2 * math.sqrt(Polygon(plate.holes_mm[0]).area / math.pi)
    assert (
        abs(found.holes[0].diameter_mm - d) <= 0.1
        and abs(found.holes[0].diameter_mm - d) <= 3 * found.holes[0].diameter_u_mm
    )
    assert abs(found.area_mm2 - poly.area) <= 3 * found.area_u_mm2
    assert any("found by the grain of their floor" in w for w in m.warnings)


@pytest.mark.parametrize("part", [PLATE, DISC], ids=["plate", "disc"])
def test_shadow_nearly_as_dark_as_the_part_is_warned_and_covered(part):
    """A shadow 0.045 above the part's level (read 0.115-0.12 above beside its soft front: 14-15 % of the
    lid-to-part contrast): told from the face by level, but a step that small is no sure edge
    (FACE_DOUBT_CONTRAST): the part is named, the sweep's face is measured and the term 'scan_shadow' holds
    the level's reading, and the figures stay within 3 sigma of the truth (the two readings agree here)."""
    m = scanmass.measure(_shadow_scan(part, 6.0, shadow=0.085), dpi=300)
    (found,) = m.parts
    poly = Polygon(part.outer_mm)  # shapely: the truth
    assert abs(found.area_mm2 - poly.area) <= 3 * found.area_u_mm2
    for c, t, u in zip(found.centroid_mm, (poly.centroid.x, poly.centroid.y), found.centroid_u_mm):
        assert abs(c - t) <= 3 * u
    assert any(w.startswith("scan of a thick part: part 1 (") and "nearly as dark" in w for w in m.warnings)
    assert found.uncertainty_terms["scan_shadow"]["area_mm2"] > 0.0
