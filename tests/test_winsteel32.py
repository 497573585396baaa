"""The light's side read from the paper's fall-off, and a ring's crescent cut along it (branch winsteel32, issue 11).

Where no part's cut in a photo shows which way the shadows fall, the paper does: a lamp or window lights the mat
more strongly near its foot (the inverse-square and cosine laws of irradiance, Pharr, Jakob and Humphreys,
*Physically Based Rendering*, 3rd ed., sec. 5.5), so the paper's level falls away from the light, the way a
part's shadow is cast. :mod:`scanmass.segment.lightdir` reads that fall-off; the crescent cut
(:func:`scanmass.segment.crescent.consistent_crescent_cut`) erodes a ring's shadow back along it at the light's
height whose sweep the shadow's own grain agrees with. Outside checks: the lamp's position in each render's
truth JSON (written by benchmarks/render_reallight.py from the scene), the rendered outlines (shapely), and
for the synthetic pages the closed form of a point source's irradiance on a plane.
"""

from __future__ import annotations

import json
import math

import cv2
import numpy as np
import pytest
from _reallight_truth import REALLIGHT, measured_part
from test_reallight_gasketshadow31 import DIRECTION, LENGTH, PAPER, _ring_with_shadow

from scanmass.segment.crescent import consistent_crescent_cut, crescent_cut
from scanmass.segment.lightdir import paper_falloff, shadow_direction_mm, shadow_direction_px


def _point_lit_page(foot_mm: tuple[float, float], height_mm: float, px_to_mm: np.ndarray) -> np.ndarray:
    """A 900 x 1200 px page under a point source at ``foot_mm`` (mat mm), ``height_mm`` up: the irradiance of a
    horizontal plane E = I h / (h^2 + r^2)^(3/2) (inverse-square and cosine laws), scaled to 0.8 at the brightest
    pixel, with a dark part (and its rough shadow) and a band of print on it."""
    yy, xx = np.mgrid[0:1200, 0:900].astype(float)
    pts = np.column_stack([xx.ravel(), yy.ravel(), np.ones(xx.size)]) @ px_to_mm.T
    x_mm, y_mm = (pts[:, 0] / pts[:, 2]).reshape(xx.shape), (pts[:, 1] / pts[:, 2]).reshape(xx.shape)
    r2 = (x_mm - foot_mm[0]) ** 2 + (y_mm - foot_mm[1]) ** 2
    level = height_mm / (height_mm**2 + r2) ** 1.5
    level = 0.8 * level / level.max()
    rng = np.random.default_rng(3)
    level *= 1.0 + 0.01 * rng.standard_normal(level.shape)  # the paper's grain and the sensor's noise, 1 %
    level[500:620, 380:520] = 0.03
    level[500:620, 520:545] = 0.01 + 0.02 * rng.random((120, 25))
    level[100:112, 100:800] = 0.05
    return level.astype(np.float32)


#: A mildly tilted view of the mat (px -> mm): 0.25 mm per px and a little perspective.
TILTED = np.array([[0.25, 0.02, -10.0], [-0.01, 0.26, 5.0], [0.0, 0.00008, 1.0]])


@pytest.mark.parametrize("foot_mm", [(-600.0, 150.0), (400.0, 500.0), (100.0, -300.0)])
def test_falloff_points_away_from_a_point_source(foot_mm):
    """The shadow's way (down the fall-off) at a point is the way from the source's foot to it, within 3 degrees
    (the quadratic fit of the log irradiance; the exact field is not quadratic)."""
    level = _point_lit_page(foot_mm, 500.0, TILTED)
    fit = paper_falloff(level, np.ones(level.shape, bool), TILTED)
    assert fit is not None
    for at_px in [(300.0, 300.0), (450.0, 900.0), (700.0, 600.0)]:
        w = TILTED @ np.array([at_px[0], at_px[1], 1.0])
        at_mm = w[:2] / w[2]
        truth = at_mm - np.asarray(foot_mm)
        got = shadow_direction_mm(fit, at_mm)
        assert got is not None
        cos = float(got @ truth) / float(np.linalg.norm(truth))
        assert math.degrees(math.acos(min(1.0, cos))) < 3.0
        # the same way in image px: the mm direction carried through the inverse map
        px = shadow_direction_px(fit, at_px, TILTED)
        ahead = np.linalg.inv(TILTED) @ np.array([*(at_mm + got), 1.0])
        step = ahead[:2] / ahead[2] - np.asarray(at_px)
        assert float(px @ step) / float(np.linalg.norm(step)) > 0.9999


def test_flat_page_shows_no_light():
    """A page lit evenly (a softbox overhead) has no fall-off: no direction."""
    level = np.full((1200, 900), 0.8, np.float32) * (1.0 + 0.01 * np.random.default_rng(4).standard_normal((1200, 900)))
    fit = paper_falloff(level.astype(np.float32), np.ones(level.shape, bool), TILTED)
    assert shadow_direction_mm(fit, (100.0, 150.0)) is None


def test_too_little_paper_gives_no_fit():
    level = np.full((200, 200), 0.8, np.float32)
    assert paper_falloff(level, np.zeros(level.shape, bool), TILTED) is None


def test_ring_shadow_with_a_penumbra_is_cut():
    """A window's soft penumbra (the paper in part of the light: smooth, 0.3 of the paper) on the outer 5 px of a
    ring's shadow is no face: the crescent is still cut (gasketshadow31 refused it as a break before the core)."""
    img, region, ring, shadow = _ring_with_shadow(np.random.default_rng(5))
    yy, xx = np.mgrid[0 : img.shape[0], 0 : img.shape[1]].astype(float)
    inner = np.zeros(region.shape, bool)  # the shadow less its outer 5 px along the light
    for s in np.linspace(0.0, LENGTH - 5, 4 * (LENGTH - 5) + 1):
        inner |= np.hypot(xx - 70 - s * DIRECTION[0], yy - 65 - s * DIRECTION[1]) <= 45
    fringe = shadow & ~inner
    img[fringe] = PAPER * 0.3 * (0.995 + 0.01 * np.random.default_rng(6).random((int(fringe.sum()), 1)))
    cut = crescent_cut(img, region, PAPER, 12.0, DIRECTION)
    assert cut is not None
    assert np.count_nonzero(shadow & ~cut.cut) <= 0.02 * np.count_nonzero(shadow)
    assert np.count_nonzero(cut.cut & ring) <= 1.5 * cut.edge_px


def test_consistent_cut_keeps_the_sweep_its_grain_agrees_with():
    """Of candidate sweeps along one side of the light at several heights (the drawn one, ``LENGTH`` px along
    ``DIRECTION``, among them, the others turned by a parallax shift as the pipeline's are), the cut kept is the
    drawn one's: its length within 2 px, the shadow cut, the ring left."""
    img, region, ring, shadow = _ring_with_shadow(np.random.default_rng(5))
    shift = np.array([0.0, -6.0])  # a top face seen 6 px up from its footprint
    cands = [DIRECTION * n + shift - shift for n in (LENGTH,)]
    cands += [DIRECTION * n - shift for n in (8, 40)]  # shorter and longer shadows: other ways once shifted
    cut = consistent_crescent_cut(img, region, PAPER, 12.0, cands[1:] + cands[:1])
    assert cut is not None
    assert abs(cut.length_px - LENGTH) <= 2.0
    assert float(np.asarray(cut.direction) @ DIRECTION) > math.cos(math.radians(5.0))
    assert np.count_nonzero(shadow & ~cut.cut) <= 0.02 * np.count_nonzero(shadow)


# --- the renders: the lamp's position in the truth JSON is the outside check -------------------------------------

#: Renders of one light (window or spot) and, of two lights or a softbox, none to read.
ONE_LIGHT = [
    "dev-window-steel6-t22",
    "dev-window-low-black-t10",
    "dev-window-steel5-t14",
    "dev-spot-steel-t20",
    "dev-spot-brass-t22",
]
NO_SIDE = ["dev-mixed-steel3-t22", "dev-soft-brass-t25"]


def _render_falloff(name: str):
    from scanmass.load.decode import load_image
    from scanmass.options import MeasureOptions
    from scanmass.pipeline.flow import photo_scale_basis

    path = REALLIGHT / f"{name}.jpg"
    scale = photo_scale_basis(load_image(str(path)), MeasureOptions(), "mat").with_thickness(None)
    codes = cv2.imread(str(path)).astype(np.float64) / 255.0
    lin = np.where(codes <= 0.04045, codes / 12.92, ((codes + 0.055) / 1.055) ** 2.4)  # IEC 61966-2-1 (sRGB)
    valid = np.zeros(lin.shape[:2], np.uint8)
    cv2.fillPoly(valid, [np.round(np.asarray(scale.roi_px)).astype(np.int32)], 1)
    fit = paper_falloff(lin.mean(axis=2), valid.astype(bool), scale.plane_map.matrix)
    return json.loads((REALLIGHT / f"{name}.json").read_text()), fit


@pytest.mark.slow
@pytest.mark.parametrize("name", ONE_LIGHT)
def test_render_falloff_gives_the_lamps_side(name):
    """At each part the fall-off's way lies within 6 degrees of the way from the lamp's foot to the part (the lamp's
    centre, truth JSON; a window is an area light, so its shadows fall within a spread of that way). Measured over
    the tuned window and spot renders: at most 4.0 degrees off (all 40 tuned window and spot photos)."""
    if not (REALLIGHT / f"{name}.json").exists():
        pytest.skip("dev renders not in this checkout")
    truth, fit = _render_falloff(name)
    (lamp,) = truth["light"]["lights"]
    foot = np.asarray(lamp["location_m"][:2]) * 1000.0  # the scene's metres on the mat's mm frame
    for part in truth["parts"]:
        at = np.array([part["placement"]["x_mm"], part["placement"]["y_mm"]])
        got = shadow_direction_mm(fit, at)
        assert got is not None
        way = (at - foot) / np.linalg.norm(at - foot)
        assert math.degrees(math.acos(min(1.0, float(got @ way)))) < 6.0


@pytest.mark.slow
@pytest.mark.parametrize("name", NO_SIDE)
def test_render_falloff_refused_under_two_lights_or_a_softbox(name):
    """Two lights from opposite sides (their fall-offs mostly cancel) and a softbox overhead show no one side."""
    if not (REALLIGHT / f"{name}.json").exists():
        pytest.skip("dev renders not in this checkout")
    truth, fit = _render_falloff(name)
    at = (truth["parts"][0]["placement"]["x_mm"], truth["parts"][0]["placement"]["y_mm"])
    assert shadow_direction_mm(fit, at) is None


@pytest.mark.slow
@pytest.mark.skipif(not (REALLIGHT / "dev-window-steel6-t22.json").exists(), reason="dev renders not in this checkout")
def test_window_steel_gasket_crescent_cut_along_the_paper_falloff():
    """dev-window-steel6-t22: a 4.5 mm brushed-steel gasket under a window 36 degrees up, no other part's cut to show
    the light; at the start of the stop it kept its crescent (+18.0 % in area, centroid 3.28 mm, rl_start32).
    Eroded along the paper's fall-off at the height the grain agrees with: -0.80 % (bench figure at commit);
    truth: the render's outlines by shapely. The bore stays found; within 3 stated sigma."""
    _, part, tp = measured_part("dev-window-steel6-t22", "gasket", 4.5)
    assert "shadow_cut" in part.uncertainty_terms and "cast_shadow" not in part.uncertainty_terms
    assert abs(part.area_mm2 - tp["area"]) < 0.02 * tp["area"]  # was +18.0 %
    assert math.dist(part.centroid_mm, tp["centroid"]) < 0.6  # was 3.28 mm
    assert len(part.holes) == 1
    assert abs(part.area_mm2 - tp["area"]) <= 3 * part.area_u_mm2
    assert all(abs(c - t) <= 3 * u for c, t, u in zip(part.centroid_mm, tp["centroid"], part.centroid_u_mm))


@pytest.mark.slow
@pytest.mark.skipif(not (REALLIGHT / "dev-window-steel3-t10.json").exists(), reason="dev renders not in this checkout")
def test_window_steel_gasket_fade_cut_that_severs_the_ring_set_aside():
    """dev-window-steel3-t10: the 2.5 mm steel gasket's fade cut ran from its bore's shaded rim nearly across the
    ring, which was found again open (-3.1 % in area, centroid 2.85 mm, bore missed; rl_start32). Set aside for the
    cut along the plate's light: +0.90 %, centroid 0.38 mm, bore -0.06 mm (bench figures at commit). Truth: the
    render's outlines by shapely; within 3 stated sigma."""
    _, part, tp = measured_part("dev-window-steel3-t10", "gasket")
    assert abs(part.area_mm2 - tp["area"]) < 0.02 * tp["area"]  # was -3.1 %
    assert math.dist(part.centroid_mm, tp["centroid"]) < 0.6  # was 2.85 mm
    assert len(part.holes) == 1
    assert abs(part.area_mm2 - tp["area"]) <= 3 * part.area_u_mm2
    assert all(abs(c - t) <= 3 * u for c, t, u in zip(part.centroid_mm, tp["centroid"], part.centroid_u_mm))
