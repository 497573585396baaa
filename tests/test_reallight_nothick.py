"""Photos measured without the thickness (issue 11): a grey steel face of the paper's colour, darkened, is not
taken for a cast shadow alone when it holds holes (``segment/shadow.holed_face``, used by
``pipeline/photo_shadows._shadow_regions``).

Truth: each render's truth file (the outlines Blender extruded, ``tests/data/reallight/*.json``); areas,
centroids and hole areas from shapely (``_reallight_truth.truth_render`` and below), not from the code under test.
"""

from __future__ import annotations

import math

import pytest
from _reallight_truth import REALLIGHT, assert_within_3_sigma, truth_render
from shapely.geometry import Point, Polygon, box

import scanmass
from scanmass.segment.shadow import holed_face

#: The bench's rule for a found part matching a truth part (benchmarks/bench_reallight.py: centroid within 8 mm).
MATCH_MM = 8.0


def _reported(m):
    """The parts a result reports (those it names as a cast shadow alone are not, as bench_reallight counts)."""
    said = " ".join(w for w in m.warnings if w.startswith("shadow only:"))
    return [q for q in m.parts if f"part {q.label} (" not in said]


def test_face_with_a_hole_is_no_shadow():
    """A 40 x 25 mm face with a 6 mm hole (shapely areas) is a face; the same without the hole is not told
    from a shadow by this test; a 2 mm halo round a 20 mm caster (the caster enclosed, most of the outline)
    is not a face; a speck of 1 mm² is no hole."""
    face = box(0, 0, 40, 25)
    hole = Point(20, 12.5).buffer(3.0, 256)
    assert holed_face(face.area - hole.area, [hole.area], 25.0)
    assert not holed_face(face.area, [], 25.0)
    caster = Point(0, 0).buffer(10.0, 256)
    halo = Point(0, 0).buffer(12.0, 256).difference(caster)
    assert not holed_face(halo.area, [caster.area], 2.0)
    assert not holed_face(face.area - 1.0, [1.0], 25.0)
    # a small caster (a 5 mm washer) in a halo only 2 mm wide: its hole is wider than the halo
    washer = Point(0, 0).buffer(2.5, 256)
    ring = Point(0, 0).buffer(4.5, 256).difference(washer)
    assert not holed_face(ring.area, [washer.area], 2.0)
    # the hole's share of the outline is shapely's: a face of 30 % holes or more is not taken
    big = Polygon(Point(0, 0).buffer(20.0, 256).exterior)
    bore = Point(0, 0).buffer(12.0, 256)  # 36 % of the outline
    assert not holed_face(big.area - bore.area, [bore.area], 30.0)


@pytest.mark.slow
@pytest.mark.parametrize("name", ["dev-mixed-steel2-t15", "mixed-steel-t20"])
def test_steel_faces_of_the_papers_colour_are_measured_without_the_thickness(name):
    """dev-mixed-steel2-t15 (l-bracket 3 mm, plate 2.5 mm) and mixed-steel-t20 (cam 4 mm, disc 3 mm): brushed
    steel in mixed light whose faces have the paper's colour, darkened, and fade outwards. Without the thickness
    the shadow-only test's bound is an 8 mm part's shadow (30 mm), wider than these faces, and the photos were
    refused as 'only cast shadows'. Each face holds holes, which no shadow alone does: both parts of each are
    measured (bench_reallight: +5.0 / +6.4 % and +3.8 / +10.4 %), within 3 stated sigma."""
    _, parts = truth_render(REALLIGHT, f"{name}.json")
    m = scanmass.measure(REALLIGHT / f"{name}.jpg")
    reported = _reported(m)
    assert len(reported) == len(parts)
    for tp in parts:
        part = min(reported, key=lambda q: math.dist(q.centroid_mm, tp["centroid"]))
        assert math.dist(part.centroid_mm, tp["centroid"]) < MATCH_MM, tp["shape"]
        assert_within_3_sigma(part, tp)


@pytest.mark.slow
@pytest.mark.parametrize(("name", "shape"), [("dev-mixed-steel3-t22", "gasket"), ("dev-mixed-steel4-t8", "cam")])
def test_steel_part_beside_another_is_not_named_a_shadow(name, shape):
    """dev-mixed-steel3-t22's gasket and dev-mixed-steel4-t8's cam were named 'shadow only' without the
    thickness (so missed); they hold a bore, so are reported, within 3 stated sigma (bench_reallight: +27.6 %,
    0.6 sigma and +12.7 %, 0.4 sigma: their own shadows are not cut without the thickness, and said so)."""
    _, parts = truth_render(REALLIGHT, f"{name}.json")
    tp = next(p for p in parts if p["shape"] == shape)
    m = scanmass.measure(REALLIGHT / f"{name}.jpg")
    reported = _reported(m)
    part = min(reported, key=lambda q: math.dist(q.centroid_mm, tp["centroid"]))
    assert math.dist(part.centroid_mm, tp["centroid"]) < MATCH_MM
    assert_within_3_sigma(part, tp)


@pytest.mark.slow
@pytest.mark.parametrize("name", ["window-nylon-t0", "dev-window-nylon-t10"])
def test_white_parts_shadows_are_still_not_reported_as_parts(name):
    """White nylon in window light without the thickness: the shadows of the white parts (strips with no
    holes) are no parts: every reported part matches a truth part (bench_reallight: 0 extra)."""
    _, parts = truth_render(REALLIGHT, f"{name}.json")
    m = scanmass.measure(REALLIGHT / f"{name}.jpg")
    for q in _reported(m):
        assert min(math.dist(q.centroid_mm, tp["centroid"]) for tp in parts) < MATCH_MM, q.label
