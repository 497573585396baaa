"""Thin black parts whose cut by grain took face (branch blackmix18; :mod:`scanmass.segment.facelevel`).

Renders of ``tests/data/reallight`` (``benchmarks/render_reallight.py``'s dev scenes). Truth: each
render's truth file (the outlines Blender extruded); areas and centroids by shapely
(``_reallight_truth.truth_part``), not by the code under test. Figures before -> after are
``bench_reallight``'s (thickness given).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from _reallight_truth import REALLIGHT, measured_part, within_3_sigma

import scanmass.pipeline.photo_shadow_cut as photo_shadow_cut
from scanmass.segment.facelevel import cut_at_face_level, face_above_core
from scanmass.segment.shadowlayer import ShadowCut

pytestmark = pytest.mark.skipif(
    not (REALLIGHT / "dev-mixed-black3-t17.json").exists(), reason="dev renders not in this checkout"
)


# --- the rules on drawn regions (no render) --------------------------------------------------------------


def _mixed_scene(cut_level: float) -> tuple[np.ndarray, np.ndarray, ShadowCut]:
    """A black face (0.04 of the paper) cut 8 px deep on its right (the cut at ``cut_level``), a warm lamp's
    penumbra on its left and a cool light's on its right, per channel as the sum of the two lights (the
    diagonal model of colourshadow's docstring)."""
    warm = np.array([0.6, 0.8, 1.0])  # blue, green, red: the image's order
    f_w = 0.4 * warm / warm.mean()
    img = np.ones((80, 80, 3), np.float32)
    mask = np.zeros((80, 80), bool)
    mask[20:60, 20:60] = True
    img[20:60, 20:60] = 0.04
    img[20:60, 52:60] = cut_level
    t = np.linspace(0.05, 0.95, 12)[None, :, None]
    img[20:60, 60:72] = 1 - (1 - t) * (1 - f_w)
    img[20:60, 8:20] = 1 - (1 - t[:, ::-1]) * f_w
    cut = np.zeros_like(mask)
    cut[20:60, 52:60] = True
    return img, mask, ShadowCut(cut, int(cut.sum()), 40.0, 0.0, 0.0, 0.04, cut_level)


def test_cut_at_the_faces_level_under_mixed_light_is_face():
    img, mask, cut = _mixed_scene(0.04)
    assert cut_at_face_level(img, mask, np.ones(3), cut, 12.0)


def test_cut_brighter_than_the_face_is_a_shadow():
    """The cool light's umbra lit by the warm lamp reads its share of the paper (0.4 x its colour): a shadow."""
    img, mask, cut = _mixed_scene(0.3)
    assert not cut_at_face_level(img, mask, np.ones(3), cut, 12.0)


def test_cut_at_the_faces_level_under_one_light_is_not_judged():
    """Both penumbrae of the paper's own colour (one white light): the shadow lines do not lean apart, the
    grain's rules hold (``colourshadow.LINES_MIN_SPREAD``)."""
    img, mask, cut = _mixed_scene(0.04)
    t = np.linspace(0.05, 0.95, 12)[None, :, None]
    img[20:60, 60:72] = 0.6 + 0.4 * t
    img[20:60, 8:20] = 0.6 + 0.4 * t[:, ::-1]
    assert not cut_at_face_level(img, mask, np.ones(3), cut, 12.0)


def test_face_above_a_darker_core_given_back_only_where_its_grain_stays_above_half_way():
    img = np.ones((40, 60, 3), np.float32)
    mask = np.zeros((40, 60), bool)
    mask[5:35, 5:50] = True
    img[5:35, 5:50] = 0.04
    img[5:35, 40:50] = 0.02
    c = np.zeros_like(mask)
    c[5:35, 37:50] = True
    cut = ShadowCut(c, int(c.sum()), 30.0, 0.0, 0.0, 0.04, 0.02)
    back = face_above_core(img, mask, np.ones(3), cut)
    assert not back.cut[10:30, 37:40].any() and back.cut[10:30, 40:50].all()
    # a face speckled below the core's level (2 x 2 px specks at 0.01, a quarter of it): its level cannot place
    # the edge
    yy, xx = np.mgrid[0:30, 0:35]
    img[5:35, 5:40][(yy // 2 % 2 == 0) & (xx // 2 % 2 == 0)] = 0.01
    assert face_above_core(img, mask, np.ones(3), cut) is cut


# --- the renders --------------------------------------------------------------------------------------------


@pytest.mark.slow
def test_mixed_light_thin_black_gasket_cut_at_its_faces_level_refused():
    """dev-mixed-black3-t17: the black gasket 1.6 mm thick (17 degrees of tilt). The grain's sweep took a
    crescent of face along its outer edge and its bore's (its cut at 1.03 times the face's level, none of it
    darker; a shadow lit by the other light reads 5.8-8.2 times the face there): -16.1 % in area, centroid
    2.52 mm, bore +0.55 mm. Refused, the part cut by colour: +1.3 %, centroid 0.27 mm, bore -0.20 mm."""
    m, part, tp = measured_part("dev-mixed-black3-t17", "gasket")
    assert abs(part.area_mm2 - tp["area"]) < 0.02 * tp["area"]  # was -16.1 %
    assert math.dist(part.centroid_mm, tp["centroid"]) < 0.4  # was 2.52 mm
    ((centre, diameter),) = tp["holes"]
    (hole,) = part.holes
    assert abs(hole.diameter_mm - diameter) < 0.3  # was +0.55 mm
    assert within_3_sigma(part, tp)


@pytest.mark.slow
def test_mixed_light_black_cam_beside_it_keeps_its_cut():
    """The cam 5 mm thick of the same photo: its cut holds its warm shadow (7-8 times the face's level) and
    stays (-0.58 % in area, bench_reallight, unchanged)."""
    m, part, tp = measured_part("dev-mixed-black3-t17", "cam")
    assert "shadow_cut" in part.uncertainty_terms
    assert abs(part.area_mm2 - tp["area"]) < 0.01 * tp["area"]
    assert within_3_sigma(part, tp)


@pytest.mark.slow
def test_spot_light_black_plate_face_given_back_beside_its_shadows_core():
    """dev-spot-black-t12: the black plate 2.5 mm thick under the spot (12 degrees of tilt). The sweep's layer ran
    2-3 px into the face along its lower edge, beside the shaded wall and the shadow's core (0.67 of the face's
    level): -3.57 % in area, centroid 0.64 mm. The face above half-way given back: -1.4 %, centroid 0.19 mm."""
    m, part, tp = measured_part("dev-spot-black-t12", "plate")
    assert abs(part.area_mm2 - tp["area"]) < 0.02 * tp["area"]  # was -3.57 %
    assert math.dist(part.centroid_mm, tp["centroid"]) < 0.3  # was 0.64 mm
    assert within_3_sigma(part, tp)


@pytest.mark.slow
def test_spot_light_black_plate_without_the_give_back_reads_small(monkeypatch):
    """The same plate with the give-back left out reads the old figure: the check above can fail."""
    monkeypatch.setattr(photo_shadow_cut, "face_above_core", lambda colour_lin, mask, paper_rgb, cut: cut)
    m, part, tp = measured_part("dev-spot-black-t12", "plate")
    assert part.area_mm2 < 0.98 * tp["area"]
