"""scanmass.segment.shadow: edge profiles that are not clean steps, dark pits inside parts.

Images here are drawn with closed forms: a straight edge blurred by a Gaussian of sigma s
has the profile 0.5 erfc(x / (s sqrt 2)) (the error function, Abramowitz & Stegun 7.1);
a disc of radius r covers pi r^2 pixels (to within its perimeter's quantisation).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import erfc

from scanmass.segment.shadow import dark_pits, edge_profile_risk, inscribed_width_px, too_wide_for_shadow

H, W = 80, 120
EDGE_X = 60.3  # the part is x < EDGE_X (px, pixel centres at integers)


def _edge_image(part, paper, band_level=None, band_px=0.0, blur=1.0):
    """Linear-light crop: part level left of EDGE_X, paper right, an optional band just outside the edge."""
    x = np.arange(W, dtype=float)
    # blur the 1-D profile exactly: sum of erfc steps between the levels (A&S 7.1)
    levels = [part, band_level if band_level is not None else paper, paper]
    edges = [EDGE_X, EDGE_X + band_px]
    prof = np.full(W, part, float)
    for e, (a, b) in zip(edges, zip(levels[:-1], levels[1:])):
        prof += (b - a) * 0.5 * erfc((e - x) / (blur * math.sqrt(2.0)))
    img = np.tile(prof.astype(np.float32), (H, 1))
    mask = np.zeros((H, W), bool)
    mask[:, : int(math.ceil(EDGE_X))] = True
    ring = np.column_stack([np.full(H - 20, EDGE_X), np.arange(10, H - 10, dtype=float)])
    return img, mask, ring


def test_clean_step_is_not_flagged():
    img, mask, ring = _edge_image(part=0.9, paper=0.7, blur=1.2)
    risk = edge_profile_risk(img, mask, ring, part_level=0.9, paper_level=0.7, blur_px=1.2)
    assert not risk.flagged[1:-1].any()  # the ends of an open line have no normal
    assert np.all(risk.displacement_px[1:-1] == 0)


def test_dark_band_beside_a_bright_part_is_flagged_as_a_dip():
    # a bright part, then a 3 px band darker than the paper (a dark reflection or contact shadow)
    img, mask, ring = _edge_image(part=1.0, paper=0.75, band_level=0.45, band_px=3.0, blur=0.8)
    risk = edge_profile_risk(img, mask, ring, part_level=1.0, paper_level=0.75, blur_px=0.8)
    assert risk.flagged[1:-1].all() and risk.kinds["dip"] >= len(ring) - 2
    # the step down into the band lies between the outline and the band's darkest point (<= 3 px + blur)
    d = risk.displacement_px[1:-1]
    assert np.all((d >= 0.8) & (d <= 3.0 + 0.8 + 1.0))


def test_soft_ramp_outside_a_dark_part_is_flagged():
    # a dark part whose outside fades to the paper over 8 px (a soft shadow of another colour)
    img, mask, ring = _edge_image(part=0.05, paper=0.6, band_level=0.3, band_px=8.0, blur=1.0)
    risk = edge_profile_risk(img, mask, ring, part_level=0.05, paper_level=0.6, blur_px=1.0)
    assert risk.flagged[1:-1].all() and risk.kinds["ramp"] >= len(ring) - 2
    assert np.all(risk.displacement_px[1:-1] >= 1.0)


def test_dark_pit_inside_a_dark_part_is_found_where_it_is():
    rng = np.random.default_rng(7)
    img = np.full((120, 160), 0.6, np.float32)  # paper
    mask = np.zeros(img.shape, bool)
    mask[20:100, 20:140] = True
    img[mask] = 0.03  # a black part's face
    yy, xx = np.mgrid[0:120, 0:160]
    pit = (xx - 70.0) ** 2 + (yy - 60.0) ** 2 <= 10.0**2
    img[pit] = 0.008  # a deep hole's shaded bottom
    img += rng.normal(0, 0.001, img.shape).astype(np.float32)
    pits = dark_pits(img, mask, min_area_px=30)
    assert len(pits) == 1
    x, y, d = pits[0]
    assert math.hypot(x - 70.0, y - 60.0) < 0.5
    assert abs(d - 20.0) < 1.5  # equal-area diameter of a disc of radius 10 px (pi r^2)


def test_dark_region_reaching_the_outline_is_no_pit():
    img = np.full((120, 160), 0.6, np.float32)
    mask = np.zeros(img.shape, bool)
    mask[20:100, 20:140] = True
    img[mask] = 0.03
    img[20:50, 20:45] = 0.008  # a cast shadow the outline took in: it reaches the outline
    assert dark_pits(img, mask, min_area_px=30) == []


def test_inscribed_width_of_a_ring_and_a_strip():
    """The widest disc inside a strip is its width; inside a ring of radii 30 and 18 px, the ring's width
    30 - 18 = 12 px (elementary geometry); the exact distance transform is good to half a pixel."""
    yy, xx = np.mgrid[0:100, 0:100]
    r = np.hypot(xx - 49.5, yy - 49.5)
    ring = (r <= 30.0) & (r > 18.0)
    assert abs(inscribed_width_px(ring) - 12.0) <= 1.0
    strip = np.zeros((60, 200), bool)
    strip[20:31, 10:190] = True  # 11 px wide
    assert abs(inscribed_width_px(strip) - 11.0) <= 1.0


def test_region_wider_than_a_shadow_can_be_is_no_shadow_alone():
    """A cast shadow reaches thickness / tan(elevation) from its caster: 4 mm at 15 degrees of elevation
    is 4 / tan(15 deg) = 14.93 mm (trigonometry). A 20 mm wide region (66.7 px at 0.3 mm/px) is wider, so
    it is no shadow alone of a 4 mm part; a 12 mm one is not; an 8 mm part's shadow (29.9 mm) covers both."""
    for width_mm, thickness_mm, wider in [(20.0, 4.0, True), (12.0, 4.0, False), (20.0, 8.0, False)]:
        n = round(width_mm / 0.3)
        m = np.zeros((n + 20, 400), bool)
        m[10 : 10 + n, 10:390] = True
        assert too_wide_for_shadow(m, thickness_mm, 0.3) is wider, (width_mm, thickness_mm)


def test_lit_white_face_is_told_from_a_clipped_mirror_a_coloured_face_and_a_shadow():
    """A diffuse white face lit more than the paper keeps the paper's colour (channel ratios equal, linear
    light: common practice for one light colour) and lies below the sensor's ceiling; a metal face
    mirroring the light is clipped, brass is another colour, a shadow is darker than the paper."""
    from scanmass.segment.shadow import looks_like_lit_white

    rng = np.random.default_rng(4)
    paper = np.array([0.62, 0.66, 0.68])
    img = np.tile(paper, (60, 60, 1)) * rng.normal(1.0, 0.01, (60, 60, 1))
    mask = np.zeros((60, 60), bool)
    mask[15:45, 15:45] = True
    cases = {
        "lit white": (np.linspace(1.05, 1.4, 30)[None, :, None] * paper, True),
        "clipped mirror": (np.ones(3), False),
        "brass": (np.array([0.80, 0.60, 0.25]), False),
        "shadow": (0.3 * paper, False),
    }
    for name, (value, expected) in cases.items():
        face = img.copy()
        face[15:45, 15:45] = np.broadcast_to(value, (30, 30, 3))
        assert looks_like_lit_white(face, mask, paper) is expected, name


def test_dark_pit_read_against_a_low_share_of_the_face():
    """A brushed face's dark sector (0.025, under half the face's median 0.06) joins a deep hole's dark bottom
    beside it and runs to the outline, so no pit is kept; read against the face's 20th percentile (the sector's
    own level) the bottom (0.003) stands alone (branch steelwin14; synthetic: the 10 px pit is built, its
    equal-area diameter 2 sqrt(100 / pi) = 11.28 px)."""
    lin = np.full((60, 60), 0.6, np.float32)
    mask = np.zeros((60, 60), bool)
    mask[10:50, 10:50] = True
    lin[mask] = 0.06
    lin[30:50, 10:30] = 0.025
    lin[24:34, 24:34] = 0.003
    assert dark_pits(lin, mask, 20) == []
    ((x, y, d),) = dark_pits(lin, mask, 20, quantile=20.0)
    assert math.dist((x, y), (28.5, 28.5)) < 0.01 and abs(d - 2 * math.sqrt(100 / math.pi)) < 0.01
