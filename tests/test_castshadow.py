"""Cast shadows cut from parts in photos (``scanmass.segment.castshadow`` and the photo pipeline).

Truth: the outlines a synthetic mat photo is rendered from (``scanmass.testing.photos``, exact
pixel coverage) and the committed Cycles renders' truth files (``tests/data/reallight/*.json``,
written by ``benchmarks/render_reallight.py`` from the outlines it extruded). Areas, centroids
and hole diameters of the truth outlines come from shapely, not from the code under test.
"""

from __future__ import annotations

import math
from pathlib import Path

import cv2
import numpy as np
import pytest
from _reallight_truth import truth_part
from PIL import Image
from shapely.geometry import Polygon

import scanmass
from scanmass.load.decode import srgb_to_linear
from scanmass.raster import srgb_encode
from scanmass.scale.mat import make_mat
from scanmass.segment.castshadow import shadow_cut
from scanmass.testing.photos import PhotoParts, make_camera, polygon_coverage, render_photo
from scanmass.testing.scans import circle, rectangle

REALLIGHT = Path(__file__).resolve().parent / "data" / "reallight"


def _shadowed_mat_photo(path: Path) -> tuple[float, tuple[float, float], float]:
    """A colour mat photo of a dark plate with a hole and its cast shadow; returns the truth.

    The shadow is the plate swept 3.6 mm across the paper (a prism's shadow from a distant
    light), sharp where it meets the plate and soft (a penumbra) over its far 40 %; it keeps
    the paper's colour at 0.15 of its light, and carries the grain of dim paper (30 %
    multiplicative noise after the lens). The plate is neutral grey, the paper slightly blue.
    """
    outer = rectangle(70.0, 110.0, 70.0, 45.0, angle_deg=12.0)
    hole = circle(105.0, 132.0, 7.0, 256)
    level = 0.05
    cam = make_camera(tilt_deg=0.0, distance_mm=330.0)
    sharp = render_photo(
        make_mat("a4-portrait"), [PhotoParts(outer, [hole], level=level)], cam, blur_px=0.0, noise=0.0, light=(0.0, 0.0)
    )
    lin = srgb_to_linear(sharp.astype(np.float64) / 255.0)

    def cover(shift: np.ndarray) -> np.ndarray:
        return polygon_coverage([(cam.project(outer + shift), [cam.project(hole + shift)])], lin.shape)

    on_part = cover(np.zeros(2))
    sweep = np.array([3.2, -1.6])  # mat mm
    steps = [cover(s * sweep) for s in np.linspace(0.0, 1.0, 17)]
    reach = [np.maximum.reduce(steps[: k + 1]) for k in range(len(steps))]
    shadow = np.mean(reach[10:], axis=0)
    shade = 1.0 - (1.0 - 0.15) * shadow
    paper = np.clip(lin - on_part * level, 0.0, None)
    rgb = np.stack([on_part * level + paper * shade * c for c in (0.97, 1.0, 1.03)], axis=2)
    rgb = cv2.GaussianBlur(rgb, (0, 0), 1.0)
    rng = np.random.default_rng(7)
    dim = cv2.GaussianBlur(shadow * (1.0 - on_part), (0, 0), 1.0)
    rgb *= (1.0 + 0.3 * dim * rng.standard_normal(lin.shape))[..., None]
    rgb = np.clip(rgb + rng.normal(0.0, 0.002, rgb.shape), 0.0, 1.0)
    Image.fromarray(np.rint(srgb_encode(rgb) * 255.0).astype(np.uint8)).save(path)
    poly = Polygon(outer, [hole])  # shapely: the reference area and centroid
    return poly.area, (poly.centroid.x, poly.centroid.y), 14.0


def test_synthetic_cast_shadow_is_cut_at_the_parts_true_outline(tmp_path):
    """Left in, the shadow makes the plate 8.9 % too large; cut, it measures within 0.3 % (0.11 %)."""
    path = tmp_path / "shadowed.png"
    area, centroid, diameter = _shadowed_mat_photo(path)
    m = scanmass.measure(path)
    assert len(m.parts) == 1
    part = m.parts[0]
    assert "shadow_cut" in part.uncertainty_terms and "cast_shadow" not in part.uncertainty_terms
    assert any(w.startswith("cast shadow cut: from part(s) 1 (") for w in m.warnings)
    assert abs(part.area_mm2 - area) <= 0.003 * area  # the median target
    assert abs(part.area_mm2 - area) <= 3 * part.area_u_mm2
    assert math.dist(part.centroid_mm, centroid) <= 0.05
    for c, t, u in zip(part.centroid_mm, centroid, part.centroid_u_mm):
        assert abs(c - t) <= 3 * u
    (hole,) = part.holes
    assert abs(hole.diameter_mm - diameter) <= 0.25  # 0.17 mm: the hole's shadow is cut too
    assert abs(hole.diameter_mm - diameter) <= 3 * hole.diameter_u_mm


@pytest.mark.parametrize(
    "name,shape,area_tol,centroid_tol,hole_tol",
    [
        # spotlight from 40 degrees: the shadow left in made the area +12.6 %, the holes 2.1-2.5 mm small
        ("spot-steel-t0", "plate", 0.035, 0.5, 0.45),
        # the same light on a 1.5 mm brass ring: +14.0 %, the bore 0.96 mm small; its cut placed by the ring's tint
        # (branch brass17: its face 0.2 noise sigmas above its shadow's level): -2.1 % -> -0.95 %, centroid 0.07 -> 0.28 mm
        ("spot-brass-t10", "gasket", 0.035, 0.3, 0.45),
        # a black disc 8 mm thick, 20 degrees of tilt: +30 % left in; the face and the shadow
        # a few 8-bit codes apart, the cut stops where the layers stay at the face's level
        # (a one-layer blip stopped it 2 px in: +19.5 %). A crescent of the shadow is left
        # (+9.9 %, 1.1 mm): it used to be offset by the wall facing the camera, cut with the
        # shadow but mapped as the bottom edge (-0.7 % then); that side now sits on the truth.
        # Its 8 mm bore, a dark pit, is now opened (photo_holes._open_deep_holes): +6.5 %, and
        # the centroid, no longer pulled towards the bore's side, 1.34 mm (was 1.12)
        ("spot-black-t20", "disc", 0.12, 1.4, None),
        # a steel cam 6 mm thick: the shadow in the lee of its wall is as smooth as the face
        # and at the shadow's level; taken as the face's evidence it turned the sweep away and
        # left a crescent (+7.1 %, 0.87 mm); as nobody's evidence, +3.7 %, 0.30 mm
        ("spot-steel-t0", "cam", 0.05, 0.5, None),
    ],
)
def test_rendered_cast_shadow_is_cut_and_covered(name, shape, area_tol, centroid_tol, hole_tol):
    tp = truth_part(name, shape)
    m = scanmass.measure(REALLIGHT / f"{name}.jpg", thickness_mm=tp["t"])
    part = min(m.parts, key=lambda q: math.dist(q.centroid_mm, tp["centroid"]))
    assert "shadow_cut" in part.uncertainty_terms and "cast_shadow" not in part.uncertainty_terms
    assert abs(part.area_mm2 - tp["area"]) <= area_tol * tp["area"]
    assert abs(part.area_mm2 - tp["area"]) <= 3 * part.area_u_mm2
    assert math.dist(part.centroid_mm, tp["centroid"]) <= centroid_tol
    for c, t, u in zip(part.centroid_mm, tp["centroid"], part.centroid_u_mm):
        assert abs(c - t) <= 3 * u
    for centre, diameter in tp["holes"] if hole_tol is not None else []:
        hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
        assert math.dist(hole.circle_centre_mm, centre) < 1.0
        assert abs(hole.diameter_mm - diameter) <= hole_tol
        assert abs(hole.diameter_mm - diameter) <= 3 * hole.diameter_u_mm


@pytest.mark.parametrize("name,thickness", [("soft-black-t15", 4.0), ("soft-steel-t0", 3.0)])
def test_soft_light_leaves_dark_parts_uncut(name, thickness):
    """Under a large overhead light no shadow is cut: the black parts' edge bands look like
    darkened paper by colour (the 'cast shadow' flag), but no rough layer lies beside them."""
    m = scanmass.measure(REALLIGHT / f"{name}.jpg", thickness_mm=thickness)
    assert all("shadow_cut" not in p.uncertainty_terms for p in m.parts)
    assert not any(w.startswith("cast shadow cut") for w in m.warnings)


def _face_with_shadow_layer(
    width_px: float, shade: float, grain: float
) -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
    """A smooth dark face (0.05 of the paper, 72 px square) with a cast shadow ``width_px`` wide
    along its top and left sides, as the segmentation finds it (one region); returns the
    photo (linear), the found region, the paper white and the shadow's pixels inside it.

    The shadow keeps the paper's colour at ``shade`` of its light with ``grain`` multiplicative
    noise; the photo is blurred by 0.8 px. Exact pixel coverage of the face and of the shadow
    (their rectangles' overlap with each pixel) is the truth.
    """
    rng = np.random.default_rng(3)
    paper = np.array([0.68, 0.7, 0.74])
    n = 120
    x = np.arange(n)[None, :] + 0.5
    y = np.arange(n)[:, None] + 0.5

    def box(x0: float, y0: float, x1: float, y1: float) -> np.ndarray:
        cx = np.clip(np.minimum(x + 0.5, x1) - np.maximum(x - 0.5, x0), 0.0, 1.0)
        cy = np.clip(np.minimum(y + 0.5, y1) - np.maximum(y - 0.5, y0), 0.0, 1.0)
        return cx * cy

    face = box(24.0, 24.0, 96.0, 96.0)
    shadow = np.clip(box(24.0 - width_px, 24.0 - width_px, 96.0, 96.0) - face, 0.0, 1.0)
    lit = paper * (1.0 + 0.02 * rng.standard_normal((n, n, 1)))
    dim = shade * (1.0 + grain * rng.standard_normal((n, n, 1)))
    own = 0.05 * paper * (1.0 + 0.01 * rng.standard_normal((n, n, 1)))
    img = lit * (1.0 - face - shadow)[..., None] + own * face[..., None] + lit * dim * shadow[..., None]
    img = cv2.GaussianBlur(img.astype(np.float32), (0, 0), 0.8)
    found = img.mean(axis=2) / paper.mean() < 0.525  # half-way between the face and the paper
    return img, found, paper, int(np.count_nonzero(found)) - int(round(face.sum()))


@pytest.mark.parametrize("shade,grain", [(0.07, 0.3), (0.15, 0.3), (0.3, 0.3), (0.05, 0.3)])
@pytest.mark.parametrize("width_px", [0.0, 0.5, 1.0, 1.5, 2.0, 3.0, 5.0, 8.0])
def test_hidden_shadow_bounds_what_the_cut_leaves(width_px, shade, grain):
    """Where the cut takes no layer, the open pixels hold every shadow pixel inside the region.

    Shadows 1.4-6 times the face's level, or at its level with the paper's grain (30 %), from
    half a pixel to 8 px wide. The bound is not the whole band either: at most the shadow plus
    2.5 px along the outline (288 px long), against the 12 px band (about 3000 px) colour leaves open.
    """
    from scanmass.segment.hiddenshadow import hidden_shadow

    img, found, paper, shadow_px = _face_with_shadow_layer(width_px, shade, grain)
    bound = hidden_shadow(img, found, paper, reach_px=12)
    assert bound is not None and bound.flagged_px > 2500  # colour alone: the whole band
    cut = shadow_cut(img, found, paper, reach_px=12)
    if cut is not None:
        assert abs(cut.cut_px - shadow_px) <= 0.1 * shadow_px
        return
    assert bound.hidden_px >= shadow_px
    assert bound.hidden_px <= shadow_px + 2.5 * 288


@pytest.mark.parametrize(
    "name,shape,term_share",
    [
        # soft overhead light: the edge bands of black parts are darkened paper by colour all
        # round (a soft contact shadow), so the term held 44-58 % of their area; the face begins
        # one or two pixels inside the outline, which leaves 7-10 % open (errors +1.0 / +2.0 %,
        # through the distorting lens +0.3 to +4.7 %)
        ("soft-black-t15", "l-bracket", 0.10),
        ("soft-black-t15", "gasket", 0.10),
        ("lens-soft-black-t0", "l-bracket", 0.10),
        ("lens-soft-black-t0", "gasket", 0.12),
        ("lens-soft-black-t30", "disc", 0.10),
        ("lens-soft-black-t30", "l-bracket", 0.10),
    ],
)
def test_cast_shadow_term_holds_what_the_edge_layers_leave_open(name, shape, term_share):
    tp = truth_part(name, shape)
    m = scanmass.measure(REALLIGHT / f"{name}.jpg", thickness_mm=tp["t"])
    part = min(m.parts, key=lambda q: math.dist(q.centroid_mm, tp["centroid"]))
    assert "shadow_cut" not in part.uncertainty_terms
    term = part.uncertainty_terms["cast_shadow"]["area_mm2"]
    assert term <= term_share * tp["area"]
    assert abs(part.area_mm2 - tp["area"]) <= 3 * part.area_u_mm2
    for c, t, u in zip(part.centroid_mm, tp["centroid"], part.centroid_u_mm):
        assert abs(c - t) <= 3 * u
    for centre, diameter in tp["holes"]:
        hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
        assert abs(hole.diameter_mm - diameter) <= 3 * hole.diameter_u_mm


def test_cut_leaves_no_false_hole_along_the_shadows_far_edge():
    """A rim of the outline one or two pixels wide left between the cut and the paper enclosed
    the cut as a 2.8 mm2 'hole' 62 mm across in the steel cam; it goes with the cut. The cam's
    only true hole is its bore (the truth file), too deep to show paper: no hole is reported."""
    tp = truth_part("spot-steel-t0", "cam")
    assert len(tp["holes"]) == 1
    m = scanmass.measure(REALLIGHT / "spot-steel-t0.jpg", thickness_mm=tp["t"])
    part = min(m.parts, key=lambda q: math.dist(q.centroid_mm, tp["centroid"]))
    for hole in part.holes:
        centre, diameter = tp["holes"][0]
        assert math.dist(hole.circle_centre_mm, centre) < 1.0


def test_low_window_light_shadow_fade_cut_on_steel():
    """Window light from one side, 25 degrees of camera tilt: the light's lower parts sit below
    the 30 degrees the shadow's reach assumes, and the brushed-steel gasket (2.5 mm, its face
    0.02-0.05 of the paper, as grainy as the shadow at that level) is refused by the sweep.
    The soft shadow's inner end (several times the face's level, the paper's tint, the paper
    beyond it still dimmed) is cut by the fade test instead: the area was +13 % with the shadow
    left in and the hole's centre 2 mm off (its -x edge in the wall's shadow); now the part is
    named in the 'cast shadow cut' warning with the 'shadow_cut' term, the area is within 5 %
    and the hole's centre within 1 mm, and area, centroid, hole centre and diameter lie within
    3 stated sigma (truth: the render's outlines, shapely)."""
    tp = truth_part("window-steel-t25", "gasket")
    m = scanmass.measure(REALLIGHT / "window-steel-t25.jpg", thickness_mm=tp["t"])
    part = min(m.parts, key=lambda q: math.dist(q.centroid_mm, tp["centroid"]))
    assert "shadow_cut" in part.uncertainty_terms
    warning = next(w for w in m.warnings if w.startswith("cast shadow cut:"))
    assert f" {part.label} (" in warning
    assert abs(part.area_mm2 - tp["area"]) < 0.05 * tp["area"]  # was +13 % with the shadow left in
    assert abs(part.area_mm2 - tp["area"]) <= 3 * part.area_u_mm2
    for c, t, u in zip(part.centroid_mm, tp["centroid"], part.centroid_u_mm):
        assert abs(c - t) <= 3 * u
    ((centre, diameter),) = tp["holes"]
    hole = min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, centre))
    assert len(part.holes) == 1  # no strip of the cut read as a hole
    assert math.dist(hole.circle_centre_mm, centre) < 1.0  # was 2.03 mm
    for c, t, u in zip(hole.circle_centre_mm, centre, hole.circle_centre_u_mm):
        assert abs(c - t) <= 3 * u
    assert abs(hole.diameter_mm - diameter) <= 3 * hole.diameter_u_mm


def test_fade_cut_leaves_blur_beside_lit_paper():
    """Synthetic: a steel-tinted dark face whose outline holds a 1 px blur ring beside lit paper
    all round but for one side, where a soft shadow fades over 12 px (the paper beyond it under
    0.8 of the paper further off). Only that side is cut; a neutral face (no tint to tell the
    fade from the face) is not cut at all."""
    from scanmass.segment.castshadow import fade_cut

    paper = np.array([0.7, 0.72, 0.74])
    img = np.tile(paper, (90, 110, 1))
    mask = np.zeros((90, 110), bool)
    mask[20:70, 20:72] = True
    img[21:69, 21:69] = 0.03 * paper * np.array([1.05, 1.0, 0.95])
    img[20:70, 69:81] = paper * np.linspace(0.2, 0.9, 12)[None, :, None]
    img[20, 21:69] = img[69, 21:69] = img[21:69, 20] = 0.5 * paper
    cut = fade_cut(img, mask, paper, 10.0)
    assert cut is not None
    assert (cut.cut & mask)[25:65, 69:72].all()
    assert not (cut.cut & mask)[:, :66].any()
    assert cut.cut_px == int(np.count_nonzero(cut.cut & mask))
    img[21:69, 21:69] = 0.03 * paper
    assert fade_cut(img, mask, paper, 10.0) is None


@pytest.mark.parametrize("open_mm", [0.4, 1.2, 2.4])
def test_one_sided_shadow_moves_a_hole_centre_within_its_term(open_mm):
    """Exact geometry (shapely): a hole whose edge keeps a shadow swept by one vector along one
    side shows the hole intersected with its own translate, a lens symmetric about the middle
    of the sweep, so its centre moves by half the sweep. For a sweep as long as the 2-sigma
    bound of the diameter term (twice the open depth), that shift is 2 sigma of the centre's term."""
    from shapely.affinity import translate

    from scanmass.pipeline.photo_shadows import _one_sided_mm

    hole = Polygon(circle(0.0, 0.0, 6.0, 1024))
    sweep = 2.0 * open_mm
    seen = hole.intersection(translate(hole, xoff=sweep * 0.6, yoff=sweep * 0.8))
    shift = math.hypot(seen.centroid.x, seen.centroid.y)
    assert shift == pytest.approx(0.5 * sweep, rel=1e-6)
    assert shift <= 2.0 * _one_sided_mm(open_mm) * (1 + 1e-6)


@pytest.mark.parametrize(
    "name, shape",
    [("window-steel-t25", "l-bracket"), ("lens-spot-brass-t30", "cam")],
)
def test_strip_of_a_cut_closed_off_by_shadow_is_no_hole(name, shape):
    """A strip of a shadow cut, painted in the paper's level, that the darker shadow beyond the
    first outline closed off was measured as a hole: a 1.75 mm one in the steel bracket under
    window light, a 10 mm2 one (its circle fit 100 mm across) in the brass cam under the spotlight.
    A through-hole opens in the part's material; these reach beyond the first outline, so they are
    painted as paper with the shadow around them (photo_cut_strips._painted_holes). Each part now holds
    exactly its true holes, each found within 1 mm of its centre, and its area lies within 3 stated
    sigma (truth: the render's outlines, shapely)."""
    tp = truth_part(name, shape)
    m = scanmass.measure(REALLIGHT / f"{name}.jpg", thickness_mm=tp["t"])
    part = min(m.parts, key=lambda q: math.dist(q.centroid_mm, tp["centroid"]))
    assert len(part.holes) == len(tp["holes"])  # was one more
    for hole in part.holes:
        assert min(math.dist(hole.circle_centre_mm, centre) for centre, _ in tp["holes"]) < 1.0
    assert abs(part.area_mm2 - tp["area"]) <= 3 * part.area_u_mm2


def test_dark_shadow_of_a_ring_is_cut_past_the_outlines_blurred_rim():
    """A dark ring's found region holds its shadow: the ring (36 / 26 px radii) swept by (9, 3) px,
    outside it away from the light and inside its bore beside the edge towards the light (a prism's
    shadow from a distant light is its face swept by one vector; that holds for the bore's edge too).
    The shadow is dim, grainy paper (0.01-0.04 of the paper white), the face smooth at 0.06, the image
    blurred by 0.7 px. Next to the bright paper the shadow's first pixels read smooth (the roughness
    divides by a level the paper raises), so no sweep ran from the boundary and nothing was cut (branch
    ring11; the rendered black collar and steel seal under the spot kept their shadows, +24 / +18 %).
    Truth: the shadow pixels as constructed (the sweep of the two circles)."""
    from scanmass.segment.castshadow import shadow_cut

    rng = np.random.default_rng(5)
    paper = np.array([0.7, 0.72, 0.74])
    yy, xx = np.mgrid[0:140, 0:140]

    def ring(cx: float, cy: float) -> np.ndarray:
        r = np.hypot(xx - cx, yy - cy)
        return (r <= 36) & (r > 26)

    face = ring(65, 70)
    shadow = np.zeros_like(face)
    for t in np.linspace(0.0, 1.0, 40):
        shadow |= ring(65 + 9 * t, 70 + 3 * t)
    shadow &= ~face
    img = np.tile(paper, (140, 140, 1))
    img[shadow] = paper * (0.01 + 0.03 * rng.random((int(shadow.sum()), 1)))
    img[face] = 0.06 * paper
    img = cv2.GaussianBlur(img.astype(np.float32), (0, 0), 0.7)
    cut = shadow_cut(img, face | shadow, paper, reach_px=12)
    assert cut is not None
    assert np.count_nonzero(cut.cut & shadow) >= 0.98 * np.count_nonzero(shadow)  # measured 1168 of 1174
    assert np.count_nonzero(cut.cut & face) <= 0.02 * np.count_nonzero(face)  # measured 14 of 1932
    assert cut.direction is not None and np.degrees(np.arctan2(cut.direction[1], cut.direction[0])) == pytest.approx(
        np.degrees(np.arctan2(3, 9)), abs=12
    )


def _dark_plastic_face() -> np.ndarray:
    # a black plastic face 0.05-0.06 of the paper, redder than it (channels R, G, B; tint blue minus red
    # -0.17), as the committed renders' black plastic reads (-0.09 to -0.17; darkface._TINTED_FACE_TINT)
    return np.array([1.1, 0.97, 0.93])


def test_jpeg_ringing_on_a_tinted_face_is_no_shadow():
    """A black face beside bright paper, no shadow: along one side its pixels ripple by +-25 % (JPEG
    ringing beside a bright edge), at the face's level and colour. The face reads 0.08 of the paper,
    tint -0.09 (blue minus red over the level), as the black plate of the filmic render
    tests/data/reallight/dev-mixed-black2-t22 does: less tinted than the dark faces' own rules take.
    Taken for a shadow's grain (the 0.01 floor of the paper-colour test takes a dark face of a
    plastic's tint for neutral), the ripple was cut (1204 px); it is the face's level and colour: nothing is cut."""
    rng = np.random.default_rng(3)
    paper = np.array([0.8, 0.8, 0.8])
    face = 0.08 * np.array([1.045, 1.0, 0.955])
    img = np.tile(paper, (120, 140, 1)).astype(np.float32)
    mask = np.zeros((120, 140), bool)
    mask[20:100, 20:120] = True
    img[20:100, 20:120] = face
    img[88:100, 20:120] = face * (1 + 0.25 * np.sign(rng.standard_normal((12, 100))))[..., None]
    assert shadow_cut(img, mask, paper, reach_px=25.0) is None


def test_cut_stops_at_a_dark_face_beside_a_brighter_shadow():
    """Mixed light: a black face (0.05 of the paper) whose shadow another light fills (0.3 of the paper,
    the paper's colour and grain); the found region's far edge runs ragged (8-14 px out), so the sweep's
    layer, the outline moved by one vector, ran into the face (45 face pixels cut). The face's outline is
    where the level crosses half-way between the face's and the shadow's: no face pixel is cut."""
    rng = np.random.default_rng(5)
    paper = np.array([0.8, 0.8, 0.8])
    img = np.tile(paper, (120, 150, 1)).astype(np.float32)
    mask = np.zeros((120, 150), bool)
    img[20:100, 20:100] = 0.05 * _dark_plastic_face()
    mask[20:100, 20:100] = True
    for row, width in zip(range(20, 100), rng.integers(8, 15, size=80)):
        mask[row, 100 : 100 + width] = True
    img[20:100, 100:116] = paper * (0.3 * (1 + 0.3 * rng.standard_normal((80, 16, 1))))
    cut = shadow_cut(img, mask, paper, reach_px=20.0)
    assert cut is not None
    assert not cut.cut[:, :100].any()  # was 45 face pixels
    assert np.count_nonzero(mask[:, 100:] & ~cut.cut[:, 100:]) < 0.15 * np.count_nonzero(mask[:, 100:])


def test_sweep_along_a_given_direction_passes_the_soft_fade_to_the_dark_core():
    """A window's soft shadow found as part of a dark face (branch steelwin14): next to the outline its fade
    (0.15-0.45 of the paper, brighter than the face at 0.05), then its core (0.005-0.045, rough), then the face.
    Along the given direction, with ``past_fade``, the step to the face lies past the core: the fade lies on the
    face's side of half-way by its level, read as the step it leaves fade and core in and the cut is refused (on
    the committed render dev-window-steel5-t14 the 5.5 mm plate's cut). The synthetic truth: the core and fade span 25 px (built)."""
    rng = np.random.default_rng(5)
    paper = np.array([0.7, 0.72, 0.74])
    img = np.tile(paper, (120, 170, 1))
    mask = np.zeros((120, 170), bool)
    mask[10:110, 10:140] = True
    img[10:110, 10:115] = 0.05 * paper * (0.97 + 0.06 * rng.random((100, 105, 1)))
    img[10:110, 115:133] = paper * (0.005 + 0.04 * rng.random((100, 18, 1)))
    img[10:110, 133:140] = paper * (np.linspace(0.15, 0.45, 7)[None, :, None] * (0.8 + 0.4 * rng.random((100, 7, 1))))
    img[10:110, 140:150] = paper * np.linspace(0.5, 0.9, 10)[None, :, None]
    assert shadow_cut(img, mask, paper, 30.0, direction=np.array([1.0, 0.0])) is None  # the length read in the fade
    cut = shadow_cut(img, mask, paper, 30.0, direction=np.array([1.0, 0.0]), past_fade=True)
    assert cut is not None
    assert abs(cut.length_px - 25.0) <= 1.0
    assert cut.cut[15:105, 116:140].all() and not cut.cut[:, :112].any()


def test_paper_beyond_a_cut_lit_or_dimmed():
    """castshadow.lit_beyond (branch steelwin14): a cut swept along +x whose paper beyond it is dimmed (a soft,
    low light's shadow fading on: 0.6 of the paper) against the paper (1.0) round the rest of the outline, then
    the paper beyond it lit (1.0) against 0.85 round the rest (a hard light's). Synthetic: the levels are built."""
    from scanmass.segment.castshadow import ShadowCut, lit_beyond

    paper = np.array([0.7, 0.72, 0.74])
    img = np.tile(paper, (80, 120, 1))
    mask = np.zeros((80, 120), bool)
    mask[20:60, 20:90] = True
    cut = np.zeros_like(mask)
    cut[20:60, 78:90] = True
    found = ShadowCut(cut, int(cut.sum()), 40.0, 0.01, 0.1, 0.05, 0.02, (1.0, 0.0), 12.0)
    img[20:60, 90:100] = 0.6 * paper
    assert not lit_beyond(img, mask, paper, found)
    img = np.tile(0.85 * paper, (80, 120, 1))  # the paper round the rest of the outline dimmer than beyond the cut
    img[20:60, 90:100] = paper
    assert lit_beyond(img, mask, paper, found)


def _tinted_face_with_soft_shadow(
    face_tint: float = 0.06, core_level: float = 0.015, lit_rim_px: int = 0, far_lit: bool = False, seed: int = 5
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """A crop of a brushed-steel-like face 40 px wide, tinted as window light tints it, with its cast shadow on its
    right found as part: a core 6 px wide (columns 55-60) and a fade 5 px wide (61-65) inside the outline, the fade
    going on over 14 px of paper (a window's soft shadow). The shadow is the paper in less light (the paper's colour). The face has a
    brushed grain as rough as the core's noise (relative), so the grain alone cannot tell them. ``lit_rim_px``
    columns of the same shadow colours on the face's left (the side facing the light) model a symmetric rim;
    ``far_lit`` ends the shadow at the outline on lit paper (a hard light's)."""
    rng = np.random.default_rng(seed)
    paper = np.array([0.7, 0.72, 0.74])
    img = np.tile(paper, (80, 110, 1))
    mask = np.zeros((80, 110), bool)
    mask[15:65, 15 - lit_rim_px : 66] = True
    tint = np.array([1.0 + face_tint, 1.0, 1.0 - face_tint])  # the channels as stored (blue, green, red)
    face = 0.12 * (1.0 + 0.25 * (rng.random((50, 40, 1)) - 0.5))
    img[15:65, 15:55] = paper * tint * face
    img[15:65, 55:61] = paper * core_level * (1.0 + 0.5 * (rng.random((50, 6, 1)) - 0.5))
    img[15:65, 61:66] = paper * np.linspace(0.15, 0.45, 5)[None, :, None]
    if not far_lit:
        img[15:65, 66:80] = paper * np.linspace(0.55, 0.85, 14)[None, :, None]  # a window's soft shadow fades on
    if lit_rim_px:
        img[15:65, 15 - lit_rim_px : 15] = paper * core_level
    return cv2.GaussianBlur(img, (0, 0), 0.7), mask, paper


def test_tint_step_cut_takes_a_soft_shadow_of_the_papers_tint_beside_a_tinted_face():
    """segment.softshadow.tint_step_cut: the shadow (core and fade, columns 55-65 by construction) is cut along the
    light's direction up to the face's tint; the face is kept. Truth: the synthetic crop's construction."""
    from scanmass.segment.softshadow import tint_step_cut

    img, mask, paper = _tinted_face_with_soft_shadow()
    cut = tint_step_cut(img, mask, paper, 12.0, np.array([1.0, 0.0]))
    assert cut is not None
    rows = slice(20, 60)  # off the top and bottom rims
    assert cut.cut[rows, 56:66].all()  # the shadow, less the blurred column at its step
    assert not cut.cut[rows, :54].any()  # the face
    assert cut.length_px == pytest.approx(11.0, abs=1.0)  # 66 - 55 columns
    # the same cut along the light's direction a little askew (another part's sweep, 8 degrees off) is refined
    askew = tint_step_cut(img, mask, paper, 12.0, np.array([math.cos(0.14), math.sin(0.14)]))
    assert askew is not None and not askew.cut[rows, :54].any()


@pytest.mark.parametrize(
    ("case", "kwargs"),
    [
        ("face almost of the paper's tint", {"face_tint": 0.02}),  # too little to tell the face from the shadow by
        ("the same on the side facing the light", {"lit_rim_px": 11}),  # no shadow lies on one side only
        ("no core darker than the face", {"core_level": 0.3}),  # one light's shadow has a core it misses
    ],
)
def test_tint_step_cut_refused(case, kwargs):
    """Each refusal of tint_step_cut on its own: the crop of the test above with one thing changed (``case``)."""
    from scanmass.segment.softshadow import tint_step_cut

    img, mask, paper = _tinted_face_with_soft_shadow(**kwargs)
    assert tint_step_cut(img, mask, paper, 12.0, np.array([1.0, 0.0])) is None, case


def test_tint_bound_shortens_a_sweep_that_ran_into_the_tinted_face():
    """segment.softshadow.tint_bound: a sweep's cut 16 px long along +x over the crop above (its shadow, columns
    55-65 by construction, 11 px) took 5 columns of the tinted face; it is shortened to the step of tint, the face
    given back. On a face of almost the paper's tint there is no step to read, and a hard light's shadow (the paper
    lit past the outline) is left to its level's step: None. Truth: the crop's construction."""
    from scanmass.segment.shadowlayer import ShadowCut, _sweep_layer
    from scanmass.segment.softshadow import tint_bound

    img, mask, paper = _tinted_face_with_soft_shadow()
    over = _sweep_layer(mask.astype(np.uint8), np.array([16.0, 0.0]))
    long_cut = ShadowCut(over, int(over.sum()), 50.0, 0.01, 0.1, 0.12, 0.02, direction=(1.0, 0.0), length_px=16.0)
    cut = tint_bound(img, mask, paper, long_cut, 12.0)
    assert cut is not None
    rows = slice(20, 60)
    assert not cut.cut[rows, :54].any()  # the face's columns 50-53 given back
    assert cut.cut[rows, 56:66].all()
    assert cut.length_px == pytest.approx(11.0, abs=1.0)
    img, mask, paper = _tinted_face_with_soft_shadow(face_tint=0.02)
    assert tint_bound(img, mask, paper, long_cut, 12.0) is None
    # a hard light's shadow, ended on lit paper: its level's step places the end, the cut stands
    img, mask, paper = _tinted_face_with_soft_shadow(far_lit=True)
    assert tint_bound(img, mask, paper, long_cut, 12.0) is None
