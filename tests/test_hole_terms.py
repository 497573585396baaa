"""How far a hole's fitted circle moves with its ring: bounded by the ring's own move.

Check values: shapely's ``hausdorff_distance`` of two point sets (reference library) and a
circle shifted rigidly (its fitted diameter unchanged, its centre moved by the shift: an
invariance of the least-squares fit).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from shapely.geometry import MultiPoint

from scanmass.geometry import nearest_vertex, vertex_spread
from scanmass.pipeline.part_terms import circle_change
from scanmass.section import fit_circle


def test_vertex_spread_is_shapely_hausdorff_of_the_vertices():
    rng = np.random.default_rng(7)
    for _ in range(20):
        a = rng.normal(size=(int(rng.integers(3, 60)), 2)) * 5
        b = rng.normal(size=(int(rng.integers(3, 60)), 2)) * 5 + 1
        # reference library: shapely MultiPoint.hausdorff_distance (discrete, vertex to vertex)
        assert vertex_spread(a, b) == pytest.approx(MultiPoint(a).hausdorff_distance(MultiPoint(b)), rel=1e-12)


def test_nearest_vertex_matches_brute_force_over_chunks():
    rng = np.random.default_rng(3)
    a, b = rng.random((700, 2)), rng.random((300, 2))
    brute = np.argmin(((a[:, None, :] - b[None, :, :]) ** 2).sum(axis=2), axis=1)
    assert np.array_equal(nearest_vertex(a, b, chunk=64), brute)


def test_a_round_hole_shifted_keeps_its_diameter_and_moves_its_centre():
    t = np.linspace(0, 2 * math.pi, 90, endpoint=False)
    ring = np.c_[20 + 5 * np.cos(t), 30 + 5 * np.sin(t)]
    d, cx, cy = circle_change(ring, ring + [0.3, -0.1])
    # invariance: a rigid shift leaves the fitted diameter and moves the centre by the shift
    assert d == pytest.approx(0.0, abs=1e-9)
    assert (cx, cy) == pytest.approx((0.3, 0.1), abs=1e-9)


def test_a_ragged_hole_whose_fit_runs_off_is_bounded_by_its_ring_move():
    # a ring that is nearly a straight zigzag: its least-squares circle is huge and unstable
    x = np.linspace(0.0, 4.0, 41)
    ring = np.c_[x, 1e-4 * (-1.0) ** np.arange(41)]
    moved = ring + np.c_[np.zeros(41), 2e-4 * (x - 2.0) ** 2]  # bent by at most 0.0008 mm
    before, after = fit_circle(ring), fit_circle(moved)
    assert abs(after.diameter_mm - before.diameter_mm) > 100.0  # the fits disagree wildly
    d, cx, cy = circle_change(ring, moved)
    spread = MultiPoint(ring).hausdorff_distance(MultiPoint(moved))  # reference library: shapely
    assert d <= 2 * spread + 1e-15 and cx <= spread + 1e-15 and cy <= spread + 1e-15
    assert math.isfinite(d) and d < 0.01
