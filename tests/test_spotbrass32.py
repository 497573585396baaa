"""A thin brass part under a hard spotlight: its neutral shadow cut by the face's tint (``segment.colourshadow.tint_cut``).

Under one white light the cast shadow keeps the paper's colour at every depth, its dark core and its
blurred rim out to the paper alike, while a brass face is yellow at any level (the diagonal model of a
pixel as light times reflectance per channel: common practice). Two things left the shadow of the
renders' thin brass brackets in the part:

- the tint cut worked on the footprint's mask (the outline mapped to the mat), which on the sides
  facing away from the camera stops the thickness' parallax short of the top face's edge the photo
  shows, so the shadow beyond that edge lay outside it and stayed;
- the shadow's blurred rim (brighter than the dark core, still neutral) stayed unless the grain cut
  had taken it, and with it a strip that the region was found again around.

Synthetic scenes check the rule against their own construction (the edge model: a pixel is the blend
of its two sides by coverage, common practice); the render against its truth file (the outline
Blender extruded; area and centroid by shapely).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from _reallight_truth import REALLIGHT, measured_part
from shapely.geometry import Polygon

from scanmass.segment.colourshadow import tint_cut
from scanmass.segment.shadowlayer import ShadowCut

# The face's colour (blue 0.4 of its green: yellowness 0.6) and levels (0.0205 of the paper white on the face,
# 0.0177 in the shadow) near what the committed render tests/data/reallight/dev-spot-brass5-t24 shows (its
# bracket: yellowness 0.60, face 0.015-0.016, shadow 0.015-0.018); the noise is chosen for these tests.
BRASS = np.array([0.4, 1.0, 1.6])  # blue, green, red (the image's order), mean 1


def _scene(rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray, ShadowCut]:
    """A region (rows 10-49, columns 10-59): face in columns 10-53, the shadow's dark core in 54-57 and its
    blurred rim, neutral, in 58 (0.25 of the paper) and 59 (0.45); beyond the region column 60 still in the rim
    (0.7) and paper from 61. The cut given took 2 columns of the core only (54-55)."""
    img = np.ones((60, 80, 3))
    mask = np.zeros((60, 80), bool)
    mask[10:50, 10:60] = True
    img[10:50, 10:54] = 0.0205 * BRASS * (1.0 + 0.1 * rng.standard_normal((40, 44, 1)))
    img[10:50, 54:58] = 0.0177 * (1.0 + 0.4 * rng.standard_normal((40, 4, 1)))
    img[10:50, 58] = 0.25
    img[10:50, 59] = 0.45
    img[10:50, 60] = 0.7
    img[10:50, 10:61] += rng.normal(0.0, 0.0005, (40, 51, 3))
    old = np.zeros_like(mask)
    old[10:50, 54:56] = True
    return img.astype(np.float32), mask, ShadowCut(old, int(old.sum()), 40.0, 0.1, 0.1, 0.0177, 0.0177)


def test_the_shadows_blurred_rim_goes_with_its_dark_core():
    img, mask, old = _scene(np.random.default_rng(32))
    found = tint_cut(img, mask, np.ones(3, np.float32), old, 8.0)
    assert found is not None
    # truth by construction: the core (54-57) and its neutral rim (58, 59) are shadow; the 0.7 px smoothing blurs
    # the face's yellowness one column into the core, so column 54 may go either way
    assert found.cut[12:48, 55:60].all()
    assert not found.cut[12:48, 10:53].any()  # the face stays
    # the rim beyond the outline, darker than half the paper's level, goes with the cut (painted as paper: no strip
    # of it is left for the region to be found again around); the paper beyond does not
    assert not found.cut[12:48, 61:].any()


def test_a_rim_brighter_than_half_the_paper_beyond_the_outline_is_left():
    img, mask, old = _scene(np.random.default_rng(33))
    found = tint_cut(img, mask, np.ones(3, np.float32), old, 8.0)
    assert found is not None
    assert not found.cut[12:48, 60].any()  # 0.7 of the paper: above half-way, outside the region already


def test_the_rim_is_taken_only_beside_the_dark_core():
    """The face's own blurred rim against the lit paper is as neutral as the paper on its outer half, but lies
    beside no dark neutral pixel: it stays the face's (its bottom row here, half face and half paper)."""
    img, mask, old = _scene(np.random.default_rng(34))
    img[49, 10:54] = 0.5 * (0.0205 * BRASS + 1.0)
    found = tint_cut(img, mask, np.ones(3, np.float32), old, 8.0)
    assert found is not None
    assert not found.cut[49, 10:50].any()


@pytest.mark.slow
@pytest.mark.skipif(not (REALLIGHT / "dev-spot-brass5-t24.json").exists(), reason="dev renders not in this checkout")
def test_thin_brass_bracket_under_a_hard_spot_light():
    """dev-spot-brass5-t24: a brass L bracket 2.2 mm thick, 24 degrees of tilt, one hard spot light. Its shadow
    beyond the top face's edge (the side away from the camera) was left in: +7.10 % in area, centroid 1.31 mm
    (bench_reallight, rl_start32); the cut measurement was set aside, its outline more than 0.5 mm beyond the first
    one's on a tenth of its points. Now +1.80 %, centroid 0.17 mm. Truth: the render's truth file (shapely)."""
    m, part, tp = measured_part("dev-spot-brass5-t24", "l-bracket")
    err = part.area_mm2 - tp["area"]
    assert abs(err) < 0.025 * tp["area"]  # was +7.10 %
    assert math.dist(part.centroid_mm, tp["centroid"]) < 0.5  # was 1.31 mm
    assert len(part.holes) == len(tp["holes"])
    assert abs(err) <= 3 * part.area_u_mm2
    assert all(abs(c - t) <= 3 * u for c, t, u in zip(part.centroid_mm, tp["centroid"], part.centroid_u_mm))
    # issue 11's worst-area target (1 %) on the outer outline alone (the holes, measured as their openings seen
    # through 2.2 mm of brass, read 0.5-0.7 mm small): was +5.9 % (tests/test_reallight_corners.py)
    truth = json.loads((REALLIGHT / "dev-spot-brass5-t24.json").read_text())
    (outer,) = [p["outline_mm"] for p in truth["parts"] if p["shape"] == "l-bracket"]
    measured = Polygon(np.asarray(part.outline_mm)).buffer(0)  # shapely: the measured outer outline's area
    assert math.isclose(measured.area, Polygon(outer).area, rel_tol=0.01)
