"""A hole that, mapped onto the mat, lies past its own outer ring: the photo is refused with that
cause (a part found only in pieces), and no OptionError blames the user's options.

In a photo this happens to small fragments whose hole ring, found in pixel space, is moved by
a raised or re-measured plane map (tests/data/reallight/dev-soft-brass-t25.jpg). Here the
mapping is made to do it on a synthetic scan, by shifting one part's mapped hole rings.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
from polygon_truth import truth

import scanmass.pipeline.flow as flow
from scanmass import measure
from scanmass.errors import OptionError, SegmentationError
from scanmass.section import escaping_holes
from scanmass.testing.scans import SynthPart, circle, rectangle, render_scan

PLATE = SynthPart(rectangle(10.0, 10.0, 30.0, 20.0), [circle(25.0, 20.0, 4.0)])
DISC = SynthPart(circle(70.0, 25.0, 12.0), [circle(70.0, 25.0, 3.0)])


def _scan():
    return render_scan([PLATE, DISC], dpi=300, size_mm=(100, 50), blur_px=0.9, noise=0.003, seed=11)


def _pushing_holes_out(monkeypatch, which):
    """Map as usual, then move the hole rings of the parts ``which`` picks 40 mm to the right."""
    real = flow.map_part

    def shifted(rings, plane_map):
        m = real(rings, plane_map)
        if not m.holes_mm or not which(m.outer_mm.mean(axis=0)):
            return m
        move = np.array([40.0, 0.0])
        samples = tuple((o, tuple(h + move for h in hs)) for o, hs in m.sample_rings_mm)
        return replace(m, holes_mm=tuple(h + move for h in m.holes_mm), sample_rings_mm=samples)

    monkeypatch.setattr(flow, "map_part", shifted)


def test_escaping_holes_uses_the_sections_bounding_box_rule():
    # by construction: a 4 mm hole centred in a 30 x 20 mm rectangle lies inside it; moved 40 mm it does not
    outer = rectangle(0.0, 0.0, 30.0, 20.0)
    inside, past = circle(15.0, 10.0, 4.0), circle(55.0, 10.0, 4.0)
    assert escaping_holes(outer, [inside]) == []
    assert escaping_holes(outer, [inside, past]) == [1]


def test_hole_past_its_outline_refuses_with_the_cause(monkeypatch):
    """One region whose hole maps past its own outline: a piece of a part not found whole, whose
    other pieces would be reported as parts of their own, so the photo is refused with the cause
    (a SegmentationError naming the region by its outer ring's size), not the section's OptionError."""
    scan = _scan()
    plain = measure(scan.image, dpi=300)
    assert len(plain.parts) == 2
    _pushing_holes_out(monkeypatch, lambda c: c[0] < 50.0)  # the plate's hole
    with pytest.raises(SegmentationError, match="found only in pieces") as err:
        measure(scan.image, dpi=300)
    assert not isinstance(err.value, OptionError)
    plate_area = truth(PLATE.outer_mm, [])["area"]
    assert f"{plate_area:.3g} mm2" in str(err.value)  # names the region by its outer ring's size (600 mm2)


def test_every_part_past_its_outline_is_a_segmentation_error(monkeypatch):
    scan = _scan()
    _pushing_holes_out(monkeypatch, lambda c: True)
    with pytest.raises(SegmentationError, match="outside its own outline on the mat") as err:
        measure(scan.image, dpi=300)
    assert not isinstance(err.value, OptionError)
    assert "diffuse light" in str(err.value)


def test_hole_raised_past_its_outline_refuses_with_the_cause(monkeypatch):
    """Without a thickness, each part is raised a plausible thickness for the parallax term; a hole
    raised past the raised outline marks a small piece of a part not found whole, so the photo is
    refused with that cause (a SegmentationError naming the part), not the section's OptionError."""
    import types

    import scanmass.pipeline.photo_checks as photo_checks

    m = measure(_scan().image, dpi=300)
    plate = min(range(2), key=lambda i: m.parts[i].centroid_mm[0])

    def raised(
        h0, k, thickness, ring, hole=False, footprint_mm=None
    ):  # the plate's hole goes 40 mm right, all else stays
        ring = np.asarray(ring, float)
        far = hole and ring.mean(axis=0)[0] < 50.0
        return ring + np.array([40.0, 0.0]) if far else ring.copy()

    monkeypatch.setattr(photo_checks, "raised_outline_mm", raised)
    scale = types.SimpleNamespace(plane_map=types.SimpleNamespace(matrix=np.eye(3)), camera_matrix=np.eye(3))
    with pytest.raises(SegmentationError, match="found only in pieces") as err:
        photo_checks._unknown_thickness(scale, m, None)
    assert not isinstance(err.value, OptionError)
    assert f"part {m.parts[plate].label} (" in str(err.value)
