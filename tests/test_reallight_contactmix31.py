"""A contact shade told from a lamp's tinted shade by its colour (issue 11, stop 31).

:mod:`scanmass.segment.contact` reads the soft shade beside a dark part's edge and, where it lies
all round the outline, takes the edge's level half-way between the part and that darkened paper.
A contact shade keeps the paper's tint (every light hidden alike); under two lamps of different
colours the shade of one is lit by the other alone and leans to its colour. Points whose shade leans
so (:func:`~scanmass.segment.contact.tint_shift`) no longer count towards the all-round share.

Truth: closed-form log-chromaticities of painted colours (the paper's and the lamps' RGB), and the
renders' truth files (``tests/data/reallight/*.json``, the outlines Blender extruded; areas from shapely).
"""

from __future__ import annotations

import functools
import json
import math

import numpy as np
import pytest
from _reallight_truth import REALLIGHT, assert_within_3_sigma, measured_part
from shapely.geometry import Polygon

from scanmass.segment.contact import tint_shift

#: The mixed renders' two lamps (benchmarks/render_reallight.py, style "mixed": the scene's own values).
WARM = np.array([1.0, 0.8, 0.6])
COOL = np.array([0.85, 0.92, 1.0])


def _scene(shade_rgb: np.ndarray, paper_rgb: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """A black disc (radius 20 px) on paper, the paper 2-4 px beyond its edge painted ``shade_rgb``.

    Returns the colour crop (linear RGB), its unit image (0 paper, 1 part) and the edge ring (row, col).
    """
    size = 80
    rr, cc = np.mgrid[0:size, 0:size].astype(float)
    r = np.hypot(rr - 40.0, cc - 40.0)
    colour = np.empty((size, size, 3), np.float32)
    colour[:] = paper_rgb
    colour[(r >= 20.0) & (r < 24.0)] = shade_rgb
    colour[r < 20.0] = 0.02
    unit = (r < 20.0).astype(np.float32)
    t = np.linspace(0.0, 2 * math.pi, 200, endpoint=False)
    ring = np.column_stack([40.0 + 20.0 * np.sin(t), 40.0 + 20.0 * np.cos(t)])
    return colour, unit, ring


def _log_chroma(rgb: np.ndarray) -> np.ndarray:
    """Each channel's log less their mean (the closed form the reading is checked against)."""
    lg = np.log(rgb)
    return lg - lg.mean()


def test_a_grey_shade_keeps_the_paper_tint() -> None:
    """A shade that darkens the paper by a third keeps its tint: the shift reads about 0, under the limit."""
    paper = 0.6 * WARM + 0.4 * COOL
    colour, unit, ring = _scene(paper * (2.0 / 3.0), paper)
    shift = tint_shift(colour, unit, ring, 0.6)
    assert np.all(np.isfinite(shift))
    assert np.nanmax(shift) < 0.01  # a pure darkening: log-chromaticity unchanged (closed form 0)


def test_one_lamps_shade_leans_to_the_other_lamp() -> None:
    """Paper lit by both lamps, its shade by the warm lamp alone: the shift per darkening as the closed form gives."""
    paper = WARM + COOL
    colour, unit, ring = _scene(WARM, paper)
    expected = np.linalg.norm(_log_chroma(WARM) - _log_chroma(paper)) / math.log(paper.sum() / WARM.sum())
    shift = tint_shift(colour, unit, ring, 0.6)
    assert np.nanmedian(shift) == pytest.approx(expected, rel=0.02)


#: Mixed-light parts whose outline the contact rule read from the two lamps' shades once black31's
#: exponential deepened it (thickness given): their figures at main after the first wave (rl_mid31 and
#: black31's section of docs/benchmark-history.md), and the bound each now keeps: the issue's worst
#: target (1 %) where the part met it before black31, else its figure before black31.
MOVED = [
    ("dev-mixed-black-t15", "plate", 0.01),  # +0.93 -> +1.19 % with black31
    ("dev-mixed-steel2-t15", "l-bracket", 0.047),  # +4.66 -> +5.68 %: at most its figure before (to 0.05 %)
]
#: Mixed-light parts the rule reads right (the shade all round mostly untinted): the gain is kept.
KEPT = [
    ("dev-mixed-black3-t17", "gasket", 0.01),  # +1.32 -> +0.74 % with black31; +5.69 % without the rule
    ("dev-mixed-black2-t22", "disc", 0.01),  # -1.81 -> -0.33 %
    ("mixed-steel-t10", "gasket", 0.0318),  # +3.18 -> +2.24 %; +8.88 % without the rule
]

pytestmark_renders = pytest.mark.skipif(
    not (REALLIGHT / "dev-mixed-black-t0.json").exists(), reason="reallight renders not in this checkout"
)


@functools.cache
def _measured(name: str, shape: str):
    return measured_part(name, shape)


@pytest.mark.slow
@pytestmark_renders
@pytest.mark.parametrize("name,shape,bound", MOVED + KEPT)
def test_mixed_light_area_bounded_and_covered(name: str, shape: str, bound: float) -> None:
    """Each part's area error within its bound, area and centroid within 3 stated sigma."""
    _m, part, tp = _measured(name, shape)
    assert abs(part.area_mm2 / tp["area"] - 1.0) <= bound, (part.area_mm2, tp["area"])
    assert_within_3_sigma(part, tp)


@pytest.mark.slow
@pytestmark_renders
def test_mixed_black_gasket_outer_outline_on_the_truth() -> None:
    """dev-mixed-black-t0's gasket: its outer outline within a tenth of a pixel of the truth's (mean along it).

    The lamps' shades read as a contact shade moved it 0.13 px outwards (area +5.81 -> +6.67 %); its
    remaining error is its hole's, read small (another cause).
    """
    m, part, _tp = _measured("dev-mixed-black-t0", "gasket")
    truth = json.loads((REALLIGHT / "dev-mixed-black-t0.json").read_text())
    (p,) = [q for q in truth["parts"] if q["shape"] == "gasket"]
    outer_t = Polygon(p["outline_mm"])  # shapely: the truth's outer outline
    outer_m = Polygon(np.asarray(part.outline_mm)).buffer(0)
    offset_px = (outer_m.area - outer_t.area) / outer_t.exterior.length / m.scale.mm_per_px
    assert abs(offset_px) <= 0.1, offset_px  # a tenth of a pixel: a level crossing's accuracy (common practice)
