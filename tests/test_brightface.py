"""A metal face's lit sectors joined to its found part (``scanmass.segment.brightface``).

Synthetic crops drawn with exact pixel coverage (:func:`scanmass.testing.photos.polygon_coverage`)
and blurred by a Gaussian of known sigma. Truth: the disc's area pi r^2 (closed form) and, for the
edge, the Gaussian edge model: a step blurred by sigma crosses a level ``c`` of the way from the
paper to the face at ``-Phi^-1(c) sigma`` from the true edge (normal distribution function; common
practice), not the code under test.
"""

from __future__ import annotations

import math
from statistics import NormalDist

import cv2
import numpy as np

from scanmass.segment import brightface
from scanmass.segment.brightface import face_colour_plane, lost_face_regions
from scanmass.testing.photos import polygon_coverage

PAPER = 0.6  # linear paper level of the synthetic crops
SIGMA = 1.0  # the lens blur (px)
CX = CY = 70.0
SHAPE = (140, 140)


def _sector(r: float, a0: float = 0.0, a1: float = 360.0, n: int = 720) -> np.ndarray:
    """A disc (or the sector a0-a1 degrees) of radius r about (CX, CY) as a polygon (px)."""
    if a1 - a0 >= 360.0:
        t = np.radians(np.linspace(0.0, 360.0, n, endpoint=False))
        return np.column_stack([CX + r * np.cos(t), CY + r * np.sin(t)])
    t = np.radians(np.linspace(a0, a1, n))
    return np.vstack([[CX, CY], np.column_stack([CX + r * np.cos(t), CY + r * np.sin(t)])])


def _run(lin: np.ndarray, found: np.ndarray) -> tuple[np.ndarray, list]:
    return lost_face_regions(lin, found, np.zeros_like(found), np.ones_like(found))


def _sectored_disc(radius: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """A disc whose face is at 0.2 of the paper but for two 70 degree sectors at 0.8 (mirroring a lamp).

    Returns the blurred linear crop, the lit sectors' coverage and the found mask (below the
    half-way level between the paper and the dark face, as the detection threshold lies).
    """
    full = polygon_coverage([(_sector(radius), [])], SHAPE)
    lit = polygon_coverage([(_sector(radius, 20.0, 90.0), []), (_sector(radius, 200.0, 270.0), [])], SHAPE)
    refl = PAPER * (1.0 - full) + 0.2 * PAPER * (full - lit) + 0.8 * PAPER * lit
    lin = cv2.GaussianBlur(refl.astype(np.float32), (0, 0), SIGMA)
    return lin, lit, lin < 0.5 * (PAPER + 0.2 * PAPER)


def test_lit_sectors_ending_on_a_sharp_step_are_joined_with_the_discs_area():
    radius = 40.0
    lin, lit, found = _sectored_disc(radius)
    extra, notes = _run(lin, found)
    assert len(notes) == 2  # the two lit sectors
    assert np.count_nonzero(extra & (lit < 0.5)) <= 0.05 * np.count_nonzero(extra)  # joined: the lit sectors
    # The joined sectors' mask ends where the blurred step crosses the 'darker than the paper' level,
    # DARKER_SHARE of the paper below it: c = DARKER_SHARE / 0.2 of the way from the paper to the
    # sector's level, -Phi^-1(c) sigma outside the true edge (Gaussian edge model) along the lit arcs.
    c = brightface.DARKER_SHARE / (1.0 - 0.8)
    offset = -NormalDist().inv_cdf(c) * SIGMA
    lit_arc = 2 * math.radians(70.0) * radius
    expected = math.pi * radius**2 + offset * lit_arc  # closed form pi r^2 plus the edge model's band
    # a binary mask of a smooth outline: within a quarter pixel times the perimeter (mean rounding of an edge)
    tolerance = 0.25 * 2 * math.pi * radius
    area = float(np.count_nonzero(found | extra))
    assert abs(area - expected) <= tolerance, (area, expected, tolerance)
    # without the join the found face alone is 39 % short (the two sectors: 140/360 of the disc)
    assert np.count_nonzero(found) < math.pi * radius**2 - 4 * tolerance


def test_soft_shadow_fading_in_a_bore_is_not_joined():
    """A ring's dark face with a cast shadow in its bore that fades linearly over 20 px: a ramp, no step.

    It lies within the found region's hull and is darker than the paper by far more than its
    spread, so only the sharp-step test tells it from a lit sector of the face.
    """
    ring = polygon_coverage([(_sector(50.0), [_sector(28.0)[::-1]])], SHAPE)
    yy, xx = np.mgrid[0 : SHAPE[0], 0 : SHAPE[1]] + 0.5
    depth = 28.0 - np.hypot(xx - CX, yy - CY)  # px into the bore from its wall
    fade = np.clip(1.0 - depth / 20.0, 0.0, 1.0) * (xx < CX)
    refl = PAPER * (1.0 - 0.5 * fade) * (1.0 - ring) + 0.2 * PAPER * ring
    lin = cv2.GaussianBlur(refl.astype(np.float32), (0, 0), SIGMA)
    found = lin < 0.5 * (PAPER + 0.2 * PAPER)
    extra, notes = _run(lin, found)
    assert notes == [] and not extra.any()


def _enclosed(lit_level: float, ramp_px: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """A disc of radius 46 px, its face at 0.2 of the paper, and inside it (clear of its edge) the
    sector 20-100 degrees between radii 8 and 40 at ``lit_level`` of the paper, reached from the
    face over ``ramp_px`` (0: a sharp rim, as a hole's). Returns the blurred crop, the disc's
    coverage and the found mask (below half-way between the paper and the face)."""
    full = polygon_coverage([(_sector(46.0), [])], SHAPE)
    t = np.radians(np.linspace(20.0, 100.0, 200))
    inner = np.vstack([np.column_stack([CX + 40.0 * np.cos(t), CY + 40.0 * np.sin(t)]),
                       np.column_stack([CX + 8.0 * np.cos(t[::-1]), CY + 8.0 * np.sin(t[::-1])])])  # fmt: skip
    if ramp_px > 0:
        fine = np.zeros((SHAPE[0] * 8, SHAPE[1] * 8), np.uint8)  # the distance to the sector's edge, at 1/8 px
        cv2.fillPoly(fine, [np.round(inner * 8).astype(np.int32)], 1)
        dist = cv2.distanceTransform(fine, cv2.DIST_L2, 5) / 8.0
        weight = cv2.resize(np.clip(dist / ramp_px, 0.0, 1.0), (SHAPE[1], SHAPE[0]), interpolation=cv2.INTER_AREA)
    else:
        weight = polygon_coverage([(inner, [])], SHAPE)
    refl = PAPER * (1.0 - full) + PAPER * full * (0.2 + (lit_level - 0.2) * weight)
    lin = cv2.GaussianBlur(refl.astype(np.float32), (0, 0), SIGMA)
    return lin, full, lin < 0.5 * (PAPER + 0.2 * PAPER)


def test_enclosed_lit_sector_fading_into_the_face_is_joined():
    """A lit sector that the face encloses (no paper beside it to step to), reached from the dark face
    over a 6 px ramp (its shading): found as a hole by the threshold, joined as face. Truth: the
    disc's area pi r^2 (closed form); the join fills the hole, so the found face and the joined
    region together are the disc. Before the join took enclosed regions, the region was refused for
    want of paper beside it (dev-spot-steel3-t20's cam: a 9.7 mm hole that the cam does not have)."""
    lin, full, found = _enclosed(0.75, 6.0)
    count, _ = cv2.connectedComponents((~found).astype(np.uint8), connectivity=4)
    assert count == 3  # the paper around the disc and one hole in it
    extra, notes = _run(lin, found)
    assert len(notes) == 1
    filled = found | extra
    count, _ = cv2.connectedComponents((~filled).astype(np.uint8), connectivity=4)
    assert count == 2  # the hole is filled
    # within a quarter pixel times the perimeter of the exact coverage (mean rounding of an edge)
    assert abs(np.count_nonzero(filled) - math.pi * 46.0**2) <= 0.25 * 2 * math.pi * 46.0


def test_enclosed_hole_in_shade_with_a_sharp_rim_is_not_joined():
    """The same region with a sharp rim: the paper seen through a hole, all of it in the wall's shade
    (0.75 of the paper). A hole's rim is the part's edge: it stays a hole."""
    lin, full, found = _enclosed(0.75, 0.0)
    extra, notes = _run(lin, found)
    assert notes == [] and not extra.any()


def test_yellowness_plane_is_zero_on_paper_lit_and_shaded_and_linear_across_an_edge():
    """Paper of blue-to-green ratio 0.9 (lit at green 0.6, shaded at 0.3 and 0.12), a brass strip, a blended edge.

    Truth by construction: a pixel covering a share ``s`` of brass (G 0.7, B 0.35) has the
    yellowness ``s (0.9 * 0.7 - 0.35) / (0.9 * 0.6)`` against lit paper (a linear mix of linear levels).
    """
    h, w = 40, 100
    green = np.full((h, w), 0.6)
    green[:, 60:70] = 0.3  # a shadow: the paper's colour at half its light
    green[:, 70:75] = 0.12
    share = np.zeros(w)
    share[20:30] = 1.0
    share[30:40] = np.linspace(1.0, 0.0, 10)  # a blended edge: share of brass in each column
    g = (1 - share) * green + share * 0.7
    b = (1 - share) * 0.9 * green + share * 0.35
    out = face_colour_plane(b, g, np.ones((h, w), bool), min_area_px=50)
    assert out is not None
    plane, count = out
    level = brightface.PLANE_PAPER_LEVEL
    np.testing.assert_allclose(plane[:, 45:], level, atol=1e-6)  # paper lit and shaded: no yellowness
    np.testing.assert_allclose(plane[:, :20], level, atol=1e-6)
    yellow = share[30:40] * (0.9 * 0.7 - 0.35) / (0.9 * 0.6)
    np.testing.assert_allclose(plane[0, 30:40], level - yellow, atol=1e-6)
    # counted coloured: the brass columns whose yellowness reaches COLOURED_SHARE
    full_yellow = (0.9 * 0.7 - 0.35) / (0.9 * 0.6)
    assert count == h * np.count_nonzero(share * full_yellow >= brightface.COLOURED_SHARE)


def test_yellowness_plane_without_a_coloured_area_is_none():
    green = np.full((30, 30), 0.6)
    green[:, :10] = 0.2  # a grey (neutral) part: the paper's colour, darker
    assert face_colour_plane(0.95 * green, green, np.ones((30, 30), bool), min_area_px=20) is None


# ---------------------------------------------------------------------------------
# a lit face at the paper's level found by its grain (grain_face_regions)
# ---------------------------------------------------------------------------------


def _speckled(coverage: np.ndarray, low: float, high: float, seed: int) -> np.ndarray:
    """Per-pixel face levels (share of the paper) drawn uniformly in low-high: a brushed face's speckle."""
    rng = np.random.default_rng(seed)
    return coverage * rng.uniform(low, high, coverage.shape)


def _half_lit_disc(radius: float, seed: int = 3) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """A disc whose left half is dark (0.05-0.15 of the paper) and right half at the paper's level
    (0.45-1.0, speckled); the paper is clipped at its level (no grain). Returns the crop, the lit
    half's coverage and the found mask (the dark half, as the threshold finds it)."""
    dark = polygon_coverage([(_sector(radius, 90.0, 270.0), [])], SHAPE)
    lit = polygon_coverage([(_sector(radius, -90.0, 90.0), [])], SHAPE)
    face = _speckled(dark, 0.05, 0.15, seed) + _speckled(lit, 0.45, 1.0, seed + 1)
    lin = (PAPER * (1.0 - dark - lit) + PAPER * face).astype(np.float32)
    return lin, lit, lin < 0.5 * PAPER * (1.0 + 0.1) * (dark > 0.5)


def test_grainy_half_at_the_papers_level_is_joined_with_the_discs_area():
    radius = 40.0
    lin, lit, found = _half_lit_disc(radius)
    none = np.zeros_like(found)
    share, joined, notes = brightface.grain_face_regions(lin, found, none, ~none)
    assert len(notes) == 1
    # the joined region is the lit half (closed form pi r^2 / 2) within the term's band: GRAIN_EDGE_U_PX
    # along its outline against the paper (the half circle's arc, pi r), the band the uncertainty states
    expected = 0.5 * math.pi * radius**2
    band = 2 * brightface_band_px() * math.pi * radius
    assert abs(float(np.count_nonzero(joined)) - expected) <= band, (np.count_nonzero(joined), expected, band)
    assert np.count_nonzero(joined & (lit < 0.5)) <= band  # what is joined is the lit half and its edge


def brightface_band_px() -> float:
    from scanmass.pipeline.part_terms import GRAIN_EDGE_U_PX

    return GRAIN_EDGE_U_PX


def test_smooth_region_at_the_papers_level_is_not_joined():
    """The same disc with its lit half smooth (0.75 of the paper everywhere): no grain, nothing joined
    (the rule for a sharp step, :func:`lost_face_regions`, is the one for such a half)."""
    radius = 40.0
    dark = polygon_coverage([(_sector(radius, 90.0, 270.0), [])], SHAPE)
    lit = polygon_coverage([(_sector(radius, -90.0, 90.0), [])], SHAPE)
    lin = (PAPER * (1.0 - dark - lit) + PAPER * (_speckled(dark, 0.05, 0.15, 3) + 0.75 * lit)).astype(np.float32)
    found = lin < 0.5 * PAPER * 1.1 * (dark > 0.5)
    none = np.zeros_like(found)
    _, joined, notes = brightface.grain_face_regions(lin, found, none, ~none)
    assert notes == [] and not joined.any()


def test_matte_found_face_joins_no_grain():
    """A dark face without grain (black plastic: one level) beside a speckled region: not joined."""
    radius = 40.0
    lin, _, found = _half_lit_disc(radius)
    lin = np.where(found, np.float32(0.1 * PAPER), lin).astype(np.float32)
    none = np.zeros_like(found)
    _, joined, notes = brightface.grain_face_regions(lin, found, none, ~none)
    assert notes == [] and not joined.any()


def test_ring_found_as_a_c_is_closed_by_its_grainy_stretch():
    """A ring (r 28-50 px) whose face is dark and speckled but for a 10 degree stretch at the paper's
    level (5-9 px long: a gap a closing of GRAIN_BRIDGE_PX spans); the found C is open there. The
    stretch's grain closes it: the joined region lies within the stretch (closed form: 10/360 of the
    ring's area) and its edge band."""
    outer, inner = 50.0, 28.0
    ring = polygon_coverage([(_sector(outer), [_sector(inner)[::-1]])], SHAPE)
    stretch = polygon_coverage([(_sector(outer, 85.0, 95.0), [])], SHAPE) - polygon_coverage(
        [(_sector(inner, 85.0, 95.0), [])], SHAPE
    )
    dark = np.clip(ring - stretch, 0.0, 1.0)
    face = _speckled(dark, 0.05, 0.15, 5) + _speckled(stretch, 0.45, 1.0, 6)
    lin = (PAPER * (1.0 - ring) + PAPER * face).astype(np.float32)
    found = (lin < 0.5 * PAPER * 1.1) & (dark > 0.5)
    none = np.zeros_like(found)
    _, joined, notes = brightface.grain_face_regions(lin, found, none, ~none)
    assert len(notes) == 1
    expected = (10.0 / 360.0) * math.pi * (outer**2 - inner**2)
    band = brightface_band_px() * 2 * (outer - inner)  # the stretch's two ends against the paper's edge band
    assert np.count_nonzero(joined & ~found) <= expected + band + brightface_band_px() * math.radians(10) * (
        outer + inner
    )
    # the ring encloses its bore again; a closing leaves the stretch's corners at the outer edge open,
    # where the gap is widest (73 % of the stretch joined here; its band is the term's)
    assert brightface._enclosed(found | joined) == 1
    assert np.count_nonzero(joined & (stretch > 0.5)) >= 0.6 * expected


def _sector_with_a_streak() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """A dark face (0.1) on paper (0.5) with a lit sector at its top edge (rows 20-63, cols 46-73): 0.36 of
    the paper, brightening to the paper's level over 8 px towards a streak along it (cols 58-62) and
    fading into the face over its last 8 rows. The threshold (0.3) leaves the sector to the paper."""
    lin = np.full((100, 120), 0.5, np.float32)
    lin[20:80, 20:100] = 0.1
    cols = np.arange(120)
    d_streak = np.maximum(np.abs(cols - 60) - 2, 0).astype(np.float32)
    row_level = np.where(d_streak < 8, 0.5 - (0.5 - 0.36) * d_streak / 8, 0.36)
    for r in range(20, 64):
        fade = np.clip((64 - r) / 8, 0, 1)
        lin[r, 46:74] = 0.1 + (row_level[46:74] - 0.1) * fade
    face = np.zeros(lin.shape, bool)
    face[20:80, 20:100] = True
    sector = np.zeros(lin.shape, bool)
    sector[20:64, 46:74] = True
    return lin, face & (lin < 0.3), sector & ~(lin < 0.3)


def test_lit_sector_with_a_streak_at_the_papers_level_joined():
    """The sector's edge against the streak is the face's soft shading; its step to the paper beyond the found
    face's hull is the part's sharp edge (the construction's truth: the sector's pixels, 1101)."""
    lin, found, sector = _sector_with_a_streak()
    none = np.zeros_like(found)
    joined, notes = lost_face_regions(lin, found, none, ~none)
    assert notes
    assert np.count_nonzero(joined & sector) >= 0.95 * np.count_nonzero(sector)  # was 0: a fade at the streak
    assert not (joined & ~sector).any()


def test_dark_band_outside_the_hull_meeting_the_face_at_its_edge_not_joined():
    """A cast shadow's core beside the face (0.3 of the paper's 0.5, 10 px wide, sharp on both sides) lies outside
    the found face's hull and meets the face at a step: it is no lit sector fading into the face."""
    lin = np.full((100, 130), 0.5, np.float32)
    lin[20:80, 20:100] = 0.1
    lin[25:85, 100:110] = 0.3
    found = np.zeros(lin.shape, bool)
    found[20:80, 20:100] = True
    none = np.zeros_like(found)
    joined, notes = lost_face_regions(lin, found, none, ~none)
    assert not joined.any() and not notes
