"""Steel parts under a window's light: where each outline goes wrong, against the renders' truth.

A window is a large soft source low at one side. The wall facing it is lit; the shadow on the far side is
long and soft, and fades out sideways too along the stretches of the outline that run along the light.
The truth is each render's JSON file (the outlines Blender extruded), read with shapely; the side the light
comes from is the render's own light position (the same JSON).
"""

from __future__ import annotations

import json
import math
from functools import cache

import numpy as np
import pytest
import shapely
from _reallight_truth import REALLIGHT, assert_within_3_sigma, measured_part
from shapely.geometry import Polygon

from scanmass.segment.litcut import face_edge_given_back, hard_light
from scanmass.segment.shadowlayer import ShadowCut

slow = pytest.mark.slow
needs_renders = pytest.mark.skipif(
    not (REALLIGHT / "dev-window-steel3-t10.json").exists(), reason="dev renders not in this checkout"
)

#: Steel parts in window light whose area was 1.6-3.1 % off at the start of stop 30 (bench_reallight at main
#: 306d4b6): render, shape.
WINDOW_STEEL = [
    ("window-steel-disc8-t0", "disc"),  # -2.36 %
    ("dev-window-steel2-t15", "disc"),  # -1.66 %
    ("dev-window-steel-t0", "cam"),  # -2.22 %
    ("dev-window-steel3-t10", "plate"),  # -2.82 %
]


@cache
def _measured(name: str, shape: str):
    return measured_part(name, shape)


def _outline_offsets(name: str, shape: str) -> dict[str, float]:
    """Area (mm2) the measured outline has outside and inside the truth's top outline, in the quarter of the
    part facing the window and in the quarter facing away, around the truth's centroid."""
    _, part, tp = _measured(name, shape)
    truth = json.loads((REALLIGHT / f"{name}.json").read_text())
    (p,) = [p for p in truth["parts"] if p["shape"] == shape]
    true_outer = Polygon(p["outline_mm"])
    seen = shapely.make_valid(Polygon(part.outline_mm))
    cx, cy = tp["centroid"]
    lx, ly = (1000.0 * v for v in truth["light"]["lights"][0]["location_m"][:2])  # m -> mm, the mat's frame
    towards = math.atan2(ly - cy, lx - cx)
    out: dict[str, float] = {}
    step = 0.05  # mm: a grid 5x finer than a pixel (about 0.25 mm here)
    for key, geom in (("extra", seen.difference(true_outer)), ("missing", true_outer.difference(seen))):
        x0, y0, x1, y1 = geom.bounds
        xs, ys = np.meshgrid(np.arange(x0, x1, step) + step / 2, np.arange(y0, y1, step) + step / 2)
        inside = shapely.contains_xy(geom, xs.ravel(), ys.ravel())
        ang = np.arctan2(ys.ravel()[inside] - cy, xs.ravel()[inside] - cx) - towards
        rel = np.abs((ang + math.pi) % (2 * math.pi) - math.pi)
        out[f"{key}_lit"] = float(np.count_nonzero(rel <= math.pi / 4)) * step**2
        out[f"{key}_far"] = float(np.count_nonzero(rel >= 3 * math.pi / 4)) * step**2
    return out


#: A paper white (linear RGB) for the synthetic crops.
PAPER = np.array([0.7, 0.72, 0.74])


def _soft_band_beside_face() -> tuple[np.ndarray, np.ndarray, ShadowCut]:
    """By construction: a steel face at 0.05 of the paper (rows 19-49) under a soft light from the right; its
    shadow (0.01-0.03, rough) on its left, cols 10-17, and a sweep 12 px long that took 4 px of the face too
    (cols 18-21); along its top a band of the paper in the light's sideways shade (rows 10-17, at the face's
    level) beyond a dark line at the edge (row 18, 0.008: the shaded wall), which the region holds and the cut
    took (the sweep runs along it). The paper around is dimmed to 0.6 (a soft light's shade)."""
    rng = np.random.default_rng(7)
    img = np.tile(PAPER * 0.6, (60, 80, 1))
    mask = np.zeros((60, 80), bool)
    mask[10:50, 10:70] = True
    img[19:50, 18:70] = PAPER * 0.05  # the face
    img[10:18, 18:70] = PAPER * 0.05  # the sideways shade's band, as dark as the face
    img[18, 18:70] = PAPER * 0.008  # the dark line at the top face's edge
    img[10:50, 10:18] = PAPER * (0.01 + 0.02 * rng.random((40, 8, 1)))  # the cast shadow's core
    c = np.zeros_like(mask)
    c[10:50, 10:22] = True
    c[10:18, 22:70] = True
    return img, mask, ShadowCut(c, int(c.sum()), 60.0, 0.01, 0.3, 0.05, 0.02, direction=(-1.0, 0.0), length_px=12.0)


def test_soft_light_gives_back_the_face_not_the_band_beyond_the_dark_line():
    """Under the soft light the face the sweep took is given back on the face's side of the shadow's core (cols
    20-21: nearer the kept face than the core), the shadow stays cut; the band beyond the dark line, at the
    face's level and reached from the kept face through that line, stays cut (its pixels lie nearer the dark
    line than the face). Truth: the construction."""
    img, mask, cut = _soft_band_beside_face()
    assert not hard_light((img / PAPER).mean(axis=2), mask, cut)
    back = face_edge_given_back(img, mask, PAPER, cut)
    assert back.cut[10:50, 10:18].all()  # the shadow
    assert not back.cut[23:46, 20:22].any()  # the face's pixels nearer the kept face
    assert back.cut[10:18, 22:70].all()  # the band beyond the dark line


@slow
@needs_renders
@pytest.mark.parametrize(("name", "shape"), WINDOW_STEEL)
def test_window_steel_error_within_the_stated_uncertainty(name, shape):
    """Issue 11: where a target is not met, the uncertainty covers the error (never a confident wrong figure).
    Truth: the render's outlines (shapely)."""
    _, part, tp = _measured(name, shape)
    assert_within_3_sigma(part, tp)


@slow
@needs_renders
def test_disc_outline_on_the_window_side_is_the_top_edge():
    """window-steel-disc8-t0 (8 mm steel disc, camera straight down): on the quarter facing the window the wall is
    lit and the paper beside it too; the outline there runs on the top face's edge. Measured at main 306d4b6:
    0.76 mm2 outside and inside the truth over that quarter's ~32 mm of outline (0.02 mm on average); the limit,
    0.05 mm on average (a fifth of a pixel), is issue 11's centroid target. Truth: the render's outline."""
    _, part, tp = _measured("window-steel-disc8-t0", "disc")
    radius = math.sqrt(tp["area"] / math.pi)
    quarter_mm = 0.5 * math.pi * radius
    off = _outline_offsets("window-steel-disc8-t0", "disc")
    assert off["extra_lit"] + off["missing_lit"] <= 0.05 * quarter_mm, off


@slow
@needs_renders
@pytest.mark.xfail(strict=True, reason="the cast-shadow sweep takes a layer of the face on the far side (open)")
def test_disc_in_window_light_within_one_percent():
    """window-steel-disc8-t0: -2.36 % at main 306d4b6 (-1.49 % with the soft light's give-back of
    litcut.face_edge_given_back, branch winsteel30), the missing area on the side away from the window and on
    the stretches along the light (lower right), where one sweep length for the whole outline runs into the
    face: the steel face (0.03-0.05 of the paper) is little brighter than the shadow's core there. Issue 11's
    target: worst area error 1 %. Truth: the render's outline (shapely)."""
    _, part, tp = _measured("window-steel-disc8-t0", "disc")
    assert abs(part.area_mm2 - tp["area"]) <= 0.01 * tp["area"]


@slow
@needs_renders
def test_gasket_bore_in_window_light_found():
    """dev-window-steel3-t10's 2.5 mm steel gasket: its 30 mm bore shows the lit paper, but the soft shadow's
    fade cut (no sweep) ran from the bore's shaded rim across most of the ring, and the thin bridge left was
    lost when the region was measured again: the bore joined the paper outside, missed (-3.1 %, centroid
    2.85 mm; strict xfail until winsteel32). Such a cut is now set aside for the cuts along the plate's light
    (`crescent.severs_a_hole`): +0.90 %, bore -0.06 mm (bench figures at commit). Truth: the render's outlines
    (shapely)."""
    _, part, tp = _measured("dev-window-steel3-t10", "gasket")
    assert len(part.holes) == len(tp["holes"])
    (centre, diameter), hole = tp["holes"][0], part.holes[0]
    assert math.dist(hole.circle_centre_mm, centre) < 1.0
    assert abs(hole.diameter_mm - diameter) < 0.5
