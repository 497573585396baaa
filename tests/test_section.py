"""Tests of scanmass.section: exact polygon section properties in mm.

Every expected value names its source beside it: a closed form from the
strength-of-materials handbooks (common practice), a derivation written out
here, a reference library (shapely, sympy, scikit-image), or an invariance
that must hold exactly.
"""

from __future__ import annotations

import doctest
import math

import numpy as np
import pytest
import sympy as sp
from hypothesis import HealthCheck, assume, example, given, settings
from hypothesis import strategies as st
from shapely.geometry import MultiPoint, Polygon

import scanmass.geometry as geometry
import scanmass.section as section
from scanmass.errors import OptionError, ScanmassError
from scanmass.geometry import orient_ring, ring_moments, ring_perimeter, signed_area
from scanmass.section import (
    CircleFit,
    SectionProperties,
    boundary_influence,
    caliper_widths,
    convex_hull,
    fit_circle,
    parallel_axis,
    principal_moments,
    rotate_moments,
    section_properties,
)

# --------------------------------------------------------------------------
# tolerances, stated once

#: exact formulas evaluated in float64 (Green's theorem is exact for polygons)
EXACT = 1e-12
#: reference libraries computing the same exact quantity by another route
LIBRARY = 1e-11


def assert_close(actual, expected, rtol=EXACT, scale=None):
    """Relative comparison; ``scale`` sets the magnitude for values that may be ~0."""
    actual = np.asarray(actual, dtype=float)
    expected = np.asarray(expected, dtype=float)
    ref = np.max(np.abs(expected)) if scale is None else float(scale)
    assert np.all(np.abs(actual - expected) <= rtol * max(ref, 1e-300)), (actual, expected, rtol)


def rectangle(x0, y0, b, h):
    return np.array([[x0, y0], [x0 + b, y0], [x0 + b, y0 + h], [x0, y0 + h]], dtype=float)


def regular_polygon(n, radius, cx=0.0, cy=0.0, phase=0.0):
    t = phase + 2.0 * np.pi * np.arange(n) / n
    return np.column_stack([cx + radius * np.cos(t), cy + radius * np.sin(t)])


def regular_polygon_closed_form(n, radius):
    """Area and centroidal I of a regular n-gon of circumradius R.

    Handbook formula (Roark's Formulas for Stress and Strain, table of
    section properties, regular polygon; from memory): A = n R^2 sin(2 pi/n) / 2,
    I = A (6 R^2 - a^2) / 24 with side a = 2 R sin(pi/n), same about every
    centroidal axis. Cross-checked by splitting into n isosceles triangles:
    polar moment about the apex = A_t (p1^2 + p2^2 + p1.p2) / 6.
    """
    area = 0.5 * n * radius**2 * math.sin(2.0 * math.pi / n)
    side = 2.0 * radius * math.sin(math.pi / n)
    i = area * (6.0 * radius**2 - side**2) / 24.0
    return area, i


# --------------------------------------------------------------------------
# closed forms


@pytest.mark.parametrize("x0, y0", [(0.0, 0.0), (-40.0, 15.0), (300.0, 250.0)])
def test_rectangle_closed_form(x0, y0):
    b, h = 10.0, 20.0
    sp_ = section_properties(rectangle(x0, y0, b, h))
    assert isinstance(sp_, SectionProperties)
    assert_close(sp_.area_mm2, b * h)  # closed form: A = b h
    assert_close(sp_.centroid_mm, (x0 + b / 2, y0 + h / 2))  # closed form: centre of the rectangle
    assert_close(sp_.ixx_mm4, b * h**3 / 12)  # closed form, statics handbook table: Ixx = b h^3/12
    assert_close(sp_.iyy_mm4, h * b**3 / 12)  # closed form, statics handbook table: Iyy = h b^3/12
    assert_close(sp_.ixy_mm4, 0.0, scale=b * h**3 / 12)  # symmetric section: Ixy = 0 (common practice)
    assert_close(sp_.polar_mm4, b * h * (b**2 + h**2) / 12)  # closed form: J = b h (b^2 + h^2)/12
    assert_close((sp_.i1_mm4, sp_.i2_mm4), (b * h**3 / 12, h * b**3 / 12))  # axes of symmetry are principal
    assert sp_.principal_angle_deg == 90.0  # tall rectangle: the long direction is +y
    assert_close(sp_.gyration_x_mm, h / math.sqrt(12))  # closed form: r = h / sqrt(12)
    assert_close(sp_.gyration_y_mm, b / math.sqrt(12))
    assert_close(sp_.gyration_1_mm, h / math.sqrt(12))
    assert_close(sp_.gyration_2_mm, b / math.sqrt(12))
    # closed form, statics handbook table: elastic modulus S = b h^2 / 6 (both fibres)
    assert_close((sp_.modulus_top_mm3, sp_.modulus_bottom_mm3), (b * h**2 / 6,) * 2)
    assert_close((sp_.modulus_right_mm3, sp_.modulus_left_mm3), (h * b**2 / 6,) * 2)
    assert sp_.bbox_mm == (x0, y0, x0 + b, y0 + h)
    assert_close(sp_.perimeter_mm, 2 * (b + h))  # closed form: P = 2 (b + h)
    assert_close(sp_.caliper_max_mm, math.hypot(b, h))  # closed form: the diagonal
    assert_close(sp_.caliper_min_mm, b)  # closed form: the short side
    assert_close(sp_.convex_area_mm2, b * h)  # a convex section is its own hull


def test_regular_polygon_exact_and_circle_limit():
    n, r = 720, 25.0
    ring = regular_polygon(n, r, 120.0, 80.0, phase=0.3)
    sp_ = section_properties(ring)
    area, i = regular_polygon_closed_form(n, r)
    assert_close(sp_.area_mm2, area)  # handbook: regular polygon area
    assert_close((sp_.ixx_mm4, sp_.iyy_mm4), (i, i))  # handbook: regular polygon A (6R^2 - a^2)/24
    assert_close(sp_.ixy_mm4, 0.0, scale=i)  # regular polygon, n >= 3: isotropic tensor
    assert_close(sp_.centroid_mm, (120.0, 80.0))
    assert sp_.principal_angle_deg == 0.0  # documented: isotropic section reports 0
    assert_close(sp_.perimeter_mm, 2 * n * r * math.sin(math.pi / n))  # closed form: n chords
    # circle limit with the discretisation error of n chords: relative -alpha^2/3, alpha = 2 pi/n (~2.5e-5)
    disc = 1e-4
    assert_close(sp_.area_mm2, math.pi * r**2, rtol=disc)  # closed form: circle A = pi r^2
    assert_close(sp_.ixx_mm4, math.pi * r**4 / 4, rtol=disc)  # closed form, statics handbook: circle I = pi r^4/4
    assert_close(sp_.polar_mm4, math.pi * r**4 / 2, rtol=disc)  # closed form: circle J = pi r^4/2
    # even n: opposite vertices give 2R, opposite edges 2 R cos(pi/n) (the apothem twice)
    assert_close(sp_.caliper_max_mm, 2 * r)
    assert_close(sp_.caliper_min_mm, 2 * r * math.cos(math.pi / n))


def test_semicircle_centroid_and_moments():
    r, n = 30.0, 4000
    t = np.linspace(0.0, np.pi, n)
    ring = np.column_stack([r * np.cos(t), r * np.sin(t)])  # arc from (r, 0) to (-r, 0); the diameter closes it
    sp_ = section_properties(ring)
    disc = 2e-6  # n chords over the arc: relative error ~ (pi/n)^2 / 3 ~ 2e-7
    assert_close(sp_.area_mm2, math.pi * r**2 / 2, rtol=disc)  # closed form: semicircle area
    assert_close(sp_.centroid_mm[1], 4 * r / (3 * math.pi), rtol=disc)  # statics handbook: yc = 4r/(3 pi)
    assert_close(sp_.centroid_mm[0], 0.0, scale=r)  # symmetry
    assert_close(sp_.ixx_mm4, (math.pi / 8 - 8 / (9 * math.pi)) * r**4, rtol=disc)  # statics handbook table
    assert_close(sp_.iyy_mm4, math.pi * r**4 / 8, rtol=disc)  # statics handbook table: Iyy = pi r^4/8
    assert_close(sp_.ixy_mm4, 0.0, scale=r**4, rtol=disc)  # symmetric about x = 0
    assert sp_.principal_angle_deg == 0.0  # wider than tall: the long direction is x
    assert_close(sp_.caliper_max_mm, 2 * r)  # the diameter's end points


@pytest.mark.parametrize("offset", [(0.0, 0.0), (250.0, -180.0)])
def test_right_triangle(offset):
    b, h = 30.0, 12.0
    ox, oy = offset
    ring = np.array([[0, 0], [b, 0], [0, h]], dtype=float) + offset
    sp_ = section_properties(ring)
    assert_close(sp_.area_mm2, b * h / 2)  # closed form
    assert_close(sp_.centroid_mm, (ox + b / 3, oy + h / 3))  # statics handbook: centroid at (b/3, h/3)
    assert_close(sp_.ixx_mm4, b * h**3 / 36)  # statics handbook table: Ixx = b h^3/36
    assert_close(sp_.iyy_mm4, h * b**3 / 36)  # statics handbook table: Iyy = h b^3/36
    # Derived here (and the handbook value, from memory): with the right angle at the origin and legs
    # along +x and +y, integral x y dA = int_0^b x [h (1 - x/b)]^2 / 2 dx = b^2 h^2 / 24, and
    # Ixy = b^2 h^2/24 - A xc yc = b^2 h^2/24 - (b h/2)(b/3)(h/3) = b^2 h^2 (3 - 4)/72 = -b^2 h^2/72.
    # Negative: the material hugs the two legs, i.e. the quadrants (x < xc, y > yc) and (x > xc, y < yc).
    assert_close(sp_.ixy_mm4, -(b**2) * h**2 / 72)
    i1, i2, angle = sp_.i1_mm4, sp_.i2_mm4, sp_.principal_angle_deg
    assert 90.0 < angle < 180.0  # Ixy < 0: the long axis runs from upper left to lower right
    assert_close(i1 + i2, sp_.ixx_mm4 + sp_.iyy_mm4)  # tensor trace is invariant
    assert_close(i1 * i2, sp_.ixx_mm4 * sp_.iyy_mm4 - sp_.ixy_mm4**2)  # tensor determinant is invariant


def test_annulus():
    big, small, n = 40.0, 25.0, 1024
    outer = regular_polygon(n, big, 60.0, 70.0)
    hole = regular_polygon(n, small, 60.0, 70.0, phase=0.1)
    a_out, i_out = regular_polygon_closed_form(n, big)
    a_in, i_in = regular_polygon_closed_form(n, small)
    for hole_ring in (hole, hole[::-1]):  # holes subtract whatever their orientation
        sp_ = section_properties(outer, [hole_ring])
        assert_close(sp_.area_mm2, a_out - a_in)  # handbook regular polygon formulas, difference
        assert_close(sp_.ixx_mm4, i_out - i_in)
        assert_close(sp_.iyy_mm4, i_out - i_in)
        assert_close(sp_.centroid_mm, (60.0, 70.0))
        # closed form, statics handbook: annulus I = pi (R^4 - r^4)/4; chord error ~ (2 pi/n)^2/3 ~ 1.3e-5
        assert_close(sp_.ixx_mm4, math.pi * (big**4 - small**4) / 4, rtol=1e-4)
        assert_close(sp_.area_mm2, math.pi * (big**2 - small**2), rtol=1e-4)
        # perimeter counts both rings; hull and calipers see only the outer ring
        assert_close(sp_.perimeter_mm, ring_perimeter(outer) + ring_perimeter(hole))
        assert_close(sp_.convex_area_mm2, a_out)


# L-section: a vertical leg 8 x 80 and a horizontal leg 60 x 8 meeting at the origin (y up)
L_RING = np.array([[0, 0], [60, 0], [60, 8], [8, 8], [8, 80], [0, 80]], dtype=float)


@pytest.mark.parametrize("offset", [(0.0, 0.0), (300.0, 300.0)])
def test_l_section_by_composite_method(offset):
    ox, oy = offset
    sp_ = section_properties(L_RING + offset)
    # Composite (parallel-axis) method, common practice, written out:
    #   part 1: vertical leg  x 0..8,  y 0..80  -> b1 = 8,  h1 = 80, A1 = 640, c1 = (4, 40)
    #   part 2: horizontal    x 8..60, y 0..8   -> b2 = 52, h2 = 8,  A2 = 416, c2 = (34, 4)
    parts = [(8.0, 80.0, 4.0, 40.0), (52.0, 8.0, 34.0, 4.0)]
    area = sum(b * h for b, h, _, _ in parts)  # 1056
    xc = sum(b * h * x for b, h, x, _ in parts) / area  # 16704 / 1056
    yc = sum(b * h * y for b, h, _, y in parts) / area  # 27264 / 1056
    # Ixx = sum(b h^3/12 + A (y_i - yc)^2), Iyy = sum(h b^3/12 + A (x_i - xc)^2),
    # Ixy = sum(0 + A (x_i - xc)(y_i - yc))  (a rectangle's own centroidal Ixy is 0)
    ixx = sum(b * h**3 / 12 + b * h * (y - yc) ** 2 for b, h, _, y in parts)
    iyy = sum(h * b**3 / 12 + b * h * (x - xc) ** 2 for b, h, x, _ in parts)
    ixy = sum(b * h * (x - xc) * (y - yc) for b, h, x, y in parts)
    assert_close(area, 1056.0)
    assert_close(sp_.area_mm2, area)
    assert_close(sp_.centroid_mm, (ox + xc, oy + yc))
    assert_close(sp_.ixx_mm4, ixx)
    assert_close(sp_.iyy_mm4, iyy)
    assert_close(sp_.ixy_mm4, ixy)
    assert_close(sp_.modulus_top_mm3, ixx / (80 - yc))  # S = I / c, extreme fibre distances (common practice)
    assert_close(sp_.modulus_bottom_mm3, ixx / yc)
    assert_close(sp_.modulus_right_mm3, iyy / (60 - xc))
    assert_close(sp_.modulus_left_mm3, iyy / xc)
    i1, i2, angle = principal_moments(ixx, iyy, ixy)
    assert_close((sp_.i1_mm4, sp_.i2_mm4, sp_.principal_angle_deg), (i1, i2, angle))
    # not convex: the hull adds the triangle (8,8)-(60,8)-(8,80) of area 52 * 72 / 2
    assert_close(sp_.convex_area_mm2, area + 52 * 72 / 2)
    assert_close(sp_.caliper_max_mm, math.hypot(60, 80))  # the two leg tips


def test_l_section_ixy_sign_in_y_up_frame():
    # Both legs' centroids sit in the quadrants x < xc, y > yc and x > xc, y < yc, so
    # integral (x - xc)(y - yc) dA < 0 for an L with its legs along +x and +y (y up).
    sp_ = section_properties(L_RING)
    assert sp_.ixy_mm4 < 0.0
    assert 90.0 < sp_.principal_angle_deg < 180.0  # long direction from upper left to lower right
    mirrored = L_RING * [-1.0, 1.0]  # legs along -x and +y: x -> -x flips the sign of Ixy
    sm = section_properties(mirrored)
    assert sm.ixy_mm4 > 0.0
    assert 0.0 < sm.principal_angle_deg < 90.0
    assert_close(sm.ixy_mm4, -sp_.ixy_mm4)
    assert_close(sm.principal_angle_deg, 180.0 - sp_.principal_angle_deg)
    # flipping y as an image row index does (rows down) also flips the sign (DESIGN.md pitfall)
    flipped = L_RING * [1.0, -1.0]
    assert_close(section_properties(flipped).ixy_mm4, -sp_.ixy_mm4)


def test_channel_by_two_composite_decompositions():
    # Channel opening to +x: depth 100, flange width 50, web 6 thick, flanges 8 thick.
    ring = np.array([[0, 0], [50, 0], [50, 8], [6, 8], [6, 92], [50, 92], [50, 100], [0, 100]], dtype=float)
    sp_ = section_properties(ring)
    # (a) three rectangles, common practice composite method:
    #   web:    x 0..6,  y 0..100 -> A = 600, c = (3, 50)
    #   flange: x 6..50, y 0..8   -> A = 352, c = (28, 4)
    #   flange: x 6..50, y 92..100-> A = 352, c = (28, 96)
    parts = [(6.0, 100.0, 3.0, 50.0), (44.0, 8.0, 28.0, 4.0), (44.0, 8.0, 28.0, 96.0)]
    area = sum(b * h for b, h, _, _ in parts)
    xc = sum(b * h * x for b, h, x, _ in parts) / area
    yc = sum(b * h * y for b, h, _, y in parts) / area
    ixx = sum(b * h**3 / 12 + b * h * (y - yc) ** 2 for b, h, _, y in parts)
    iyy = sum(h * b**3 / 12 + b * h * (x - xc) ** 2 for b, h, x, _ in parts)
    # (b) gross 50 x 100 minus the 44 x 84 cut-out at x 6..50, y 8..92 (negative area, same method)
    area_b = 50 * 100 - 44 * 84
    xc_b = (50 * 100 * 25 - 44 * 84 * 28) / area_b
    ixx_b = 50 * 100**3 / 12 - 44 * 84**3 / 12  # both centred on y = 50
    iyy_b = (100 * 50**3 / 12 + 5000 * (25 - xc_b) ** 2) - (84 * 44**3 / 12 + 3696 * (28 - xc_b) ** 2)
    assert_close((area, xc, yc, ixx, iyy), (area_b, xc_b, 50.0, ixx_b, iyy_b))  # the two hand methods agree
    assert_close(sp_.area_mm2, area)
    assert_close(sp_.centroid_mm, (xc, yc))
    assert_close(sp_.ixx_mm4, ixx)
    assert_close(sp_.iyy_mm4, iyy)
    assert_close(sp_.ixy_mm4, 0.0, scale=ixx)  # symmetric about y = 50
    assert_close(sp_.modulus_top_mm3, ixx / 50)  # S = I / c with c = 50 (common practice)
    assert_close(sp_.modulus_left_mm3, iyy / xc)
    assert_close(sp_.modulus_right_mm3, iyy / (50 - xc))
    assert sp_.principal_angle_deg == 90.0  # deeper than wide


def test_parallel_axis_rectangle_about_corner():
    b, h = 7.0, 3.0
    # statics handbook table: rectangle about its base b h^3/3, about its side h b^3/3,
    # product of area about the corner b^2 h^2/4
    expected = (b * h**3 / 3, h * b**3 / 3, b**2 * h**2 / 4)
    got = parallel_axis(b * h**3 / 12, h * b**3 / 12, 0.0, b * h, b / 2, h / 2)
    assert_close(got, expected)
    m = ring_moments(rectangle(0.0, 0.0, b, h))
    assert_close(m[3:], expected)  # ring_moments about the origin = the corner
    m2 = ring_moments(rectangle(100.0, 40.0, b, h), about=(100.0, 40.0))
    assert_close(m2, [b * h, b * b * h / 2, b * h * h / 2, *expected])


def test_ring_moments_far_from_origin_are_exact():
    x0, x1, y0, y1 = 300.0, 310.5, 250.0, 270.25
    m = ring_moments(rectangle(x0, y0, x1 - x0, y1 - y0))
    b, h = x1 - x0, y1 - y0
    # closed-form integrals over [x0, x1] x [y0, y1] (elementary calculus)
    exact = [
        b * h,
        h * (x1**2 - x0**2) / 2,
        b * (y1**2 - y0**2) / 2,
        b * (y1**3 - y0**3) / 3,
        h * (x1**3 - x0**3) / 3,
        (x1**2 - x0**2) * (y1**2 - y0**2) / 4,
    ]
    for got, want in zip(m, exact):
        assert_close(got, want)
    # reversed orientation negates every entry (Green's theorem is signed)
    assert_close(ring_moments(rectangle(x0, y0, b, h)[::-1]), -np.array(exact))


def test_centroidal_moments_keep_precision_far_from_origin():
    rng = np.random.default_rng(7)
    t = np.sort(rng.uniform(0, 2 * np.pi, 200))
    ring = np.column_stack([np.cos(t), np.sin(t)]) * rng.uniform(5, 15, (200, 1))
    near = section_properties(ring)
    far = section_properties(ring + [300.0, 300.0])  # input rounding at 300 mm: ~6e-14 mm
    for name in ("area_mm2", "ixx_mm4", "iyy_mm4", "i1_mm4", "i2_mm4"):
        assert_close(getattr(far, name), getattr(near, name))  # translation invariance
    assert_close(far.ixy_mm4, near.ixy_mm4, scale=near.polar_mm4)
    assert_close(np.subtract(far.centroid_mm, 300.0), near.centroid_mm, scale=15.0)


# --------------------------------------------------------------------------
# reference libraries


def _star(rng, n, r_lo, r_hi, cx, cy):
    t = (np.arange(n) + rng.uniform(-0.25, 0.25, n)) * 2 * np.pi / n
    r = rng.uniform(r_lo, r_hi, n)
    return np.column_stack([cx + r * np.cos(t), cy + r * np.sin(t)])


@pytest.mark.parametrize("seed", range(12))
def test_random_polygons_with_holes_against_shapely(seed):
    rng = np.random.default_rng(seed)
    cx, cy = rng.uniform(0, 400, 2)
    outer = _star(rng, int(rng.integers(12, 60)), 20, 40, cx, cy)  # contains the disc r < 20 cos(22.5 deg)
    holes = []
    for k in range(int(rng.integers(0, 4))):  # hole centres 10 mm out at 120 deg apart: disjoint, inside
        a = 2 * np.pi * k / 3
        holes.append(_star(rng, int(rng.integers(5, 20)), 1, 4, cx + 10 * np.cos(a), cy + 10 * np.sin(a)))
        if rng.random() < 0.5:
            holes[-1] = holes[-1][::-1]
    poly = Polygon(outer, holes)
    assert poly.is_valid  # the generator makes simple rings
    sp_ = section_properties(outer, holes)
    assert_close(sp_.area_mm2, poly.area, rtol=LIBRARY)  # reference library: shapely Polygon.area
    assert_close(sp_.centroid_mm, (poly.centroid.x, poly.centroid.y), rtol=LIBRARY)  # shapely centroid
    assert_close(sp_.perimeter_mm, poly.length, rtol=LIBRARY)  # shapely length (exterior + interiors)
    assert_close(sp_.convex_area_mm2, poly.convex_hull.area, rtol=LIBRARY)  # shapely convex_hull
    assert_close(sp_.bbox_mm, poly.bounds)  # shapely bounds
    hull = convex_hull(outer)
    assert_close(signed_area(hull), poly.convex_hull.area, rtol=LIBRARY)
    assert len(hull) == len(poly.convex_hull.exterior.coords) - 1  # same vertex count (no collinear points)


def test_convex_hull_against_shapely_on_point_clouds():
    rng = np.random.default_rng(11)
    for _ in range(10):
        pts = rng.normal(size=(500, 2)) * [30.0, 10.0] + rng.uniform(-200, 200, 2)
        hull = convex_hull(pts)
        ref = MultiPoint(pts).convex_hull  # reference library: shapely convex_hull
        assert signed_area(hull) > 0.0  # counter-clockwise
        assert_close(signed_area(hull), ref.area, rtol=LIBRARY)
        assert sorted(map(tuple, hull)) == sorted(set(ref.exterior.coords))


def test_convex_hull_against_shapely_on_exact_clouds():
    # points whose turn tests are exact in float64 (small integers, multiples of 1/64): ties in
    # x, collinear runs on the hull's sides, duplicates, and dense rounded circles (thousands of
    # points, most of them hull vertices or just inside) whose chains are pruned over many rounds
    rng = np.random.default_rng(12)
    clouds = [rng.integers(0, 7, size=(n, 2)).astype(float) for n in (5, 40, 300, 3000)]
    for n in (70, 900, 6000):
        t = rng.uniform(0.0, 2.0 * np.pi, n)
        r = rng.uniform(20.0, 400.0)
        clouds.append(np.round((np.c_[np.cos(t), np.sin(t)] * r + rng.uniform(-500, 500, 2)) * 64.0) / 64.0)
    left = clouds[-1][:, 0].min()
    clouds.append(np.r_[clouds[-1], [[left, 0.0], [left, 1e3]]])  # a vertical side at the lowest x
    for pts in clouds:
        hull = convex_hull(pts)
        ref = MultiPoint(pts).convex_hull  # reference library: shapely convex_hull (robust predicates)
        assert signed_area(hull) > 0.0  # counter-clockwise
        assert sorted(map(tuple, hull)) == sorted(set(ref.exterior.coords))  # the same vertices, none collinear
        first = min(map(tuple, hull))
        assert tuple(hull[0]) == first  # starts at the lowest x, then lowest y


def _sympy_triangle_integrals(p0, p1, p2):
    """Exact integrals of 1, x, y, y^2, x^2, xy over a triangle (sympy, affine map to the unit triangle).

    Signed by orientation like Green's theorem: the Jacobian determinant carries the sign.
    """
    u, v = sp.symbols("u v")
    x = p0[0] + u * (p1[0] - p0[0]) + v * (p2[0] - p0[0])
    y = p0[1] + u * (p1[1] - p0[1]) + v * (p2[1] - p0[1])
    jac = (p1[0] - p0[0]) * (p2[1] - p0[1]) - (p2[0] - p0[0]) * (p1[1] - p0[1])
    out = []
    for f in (sp.Integer(1), x, y, y**2, x**2, x * y):
        out.append(jac * sp.integrate(sp.integrate(sp.expand(f), (v, 0, 1 - u)), (u, 0, 1)))
    return out


def test_moments_against_sympy_exact_integrals():
    R = sp.Rational
    tri = [(R(3, 2), R(-1, 3)), (R(47, 5), R(5, 4)), (R(-7, 8), R(33, 4))]
    exact = _sympy_triangle_integrals(*tri)  # sympy exact double integral
    got = ring_moments(np.array(tri, dtype=float))
    for g, e in zip(got, exact):
        assert_close(g, float(e))
    # a non-convex quadrilateral, split at its reflex vertex q2 into (q0,q1,q2) + (q0,q2,q3)
    quad = [(R(0), R(0)), (R(12), R(1, 2)), (R(9, 2), R(13, 4)), (R(1, 3), R(10))]
    halves = _sympy_triangle_integrals(*quad[:3]), _sympy_triangle_integrals(quad[0], *quad[2:])
    exact_q = [a + b for a, b in zip(*halves)]
    ring = np.array(quad, dtype=float)
    assert_close(ring_moments(ring), [float(e) for e in exact_q])
    # centroidal values, exact in sympy
    a, qx, qy, jxx, jyy, jxy = exact_q
    xc, yc = qx / a, qy / a
    sp_ = section_properties(ring)
    assert_close(sp_.area_mm2, float(a))
    assert_close(sp_.centroid_mm, (float(xc), float(yc)))
    assert_close(sp_.ixx_mm4, float(jxx - a * yc**2))
    assert_close(sp_.iyy_mm4, float(jyy - a * xc**2))
    assert_close(sp_.ixy_mm4, float(jxy - a * xc * yc))


def test_fit_circle_against_scipy_and_scikit_image_on_noisy_points():
    from scipy.optimize import least_squares
    from skimage.measure import CircleModel

    rng = np.random.default_rng(3)
    t = rng.uniform(0, 2 * np.pi, 300)
    pts = np.column_stack([140 + 12 * np.cos(t), 95 + 12 * np.sin(t)]) + rng.normal(0, 0.02, (300, 2))
    fit = fit_circle(pts)

    def residuals(p):
        return np.hypot(pts[:, 0] - p[0], pts[:, 1] - p[1]) - p[2]

    # reference library: scipy.optimize.least_squares on the same geometric residuals
    ref = least_squares(residuals, x0=[139.0, 96.0, 11.0], xtol=1e-15, ftol=1e-15, gtol=1e-15).x
    assert_close(fit.centre_mm, ref[:2], rtol=1e-10)
    assert_close(fit.diameter_mm, 2 * ref[2], rtol=1e-10)
    assert_close(fit.rms_mm, np.sqrt(np.mean(residuals(ref) ** 2)), rtol=1e-8)
    # reference library: scikit-image 0.26 CircleModel is an algebraic (Kasa-type) fit; on a full,
    # lightly noisy circle it agrees to well under the noise, and the geometric fit has the lower cost
    model = CircleModel.from_estimate(pts)
    assert math.dist(fit.centre_mm, model.center) < 0.01 * 0.02  # 1 % of the noise sigma
    assert abs(fit.diameter_mm - 2 * model.radius) < 0.01 * 0.02
    ours = np.sum(residuals([*fit.centre_mm, fit.diameter_mm / 2]) ** 2)
    assert ours <= np.sum(residuals([*model.center, model.radius]) ** 2)


# --------------------------------------------------------------------------
# invariances (hypothesis)


@st.composite
def star_rings(draw, r_lo=1.0, r_hi=10.0):
    """Simple rings star-shaped about the origin (angles increase, gaps < 180 deg)."""
    n = draw(st.integers(4, 24))
    radii = np.array(draw(st.lists(st.floats(r_lo, r_hi), min_size=n, max_size=n)))
    jitter = np.array(draw(st.lists(st.floats(-0.25, 0.25), min_size=n, max_size=n)))
    t = (np.arange(n) + jitter) * 2 * np.pi / n
    return np.column_stack([radii * np.cos(t), radii * np.sin(t)])


# an outer star with radii >= 1 and gaps <= 135 deg contains the disc r < cos(67.5 deg) = 0.38;
# a star scaled by 0.03 (radii <= 0.3) fits inside it
HYP = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def _props(s: SectionProperties):
    return np.array([s.area_mm2, s.ixx_mm4, s.iyy_mm4, s.ixy_mm4, s.i1_mm4, s.i2_mm4, s.perimeter_mm])


@HYP
@given(star_rings(), star_rings(), st.floats(-500, 500), st.floats(-500, 500))
def test_translation_moves_centroid_only(outer, hole, dx, dy):
    hole = 0.03 * hole
    a = section_properties(outer, [hole])
    b = section_properties(outer + [dx, dy], [hole + [dx, dy]])
    assert_close(np.subtract(b.centroid_mm, (dx, dy)), a.centroid_mm, scale=10.0)  # shift of the centroid
    # centroidal moments unchanged; input rounding at 500 mm is ~6e-14 mm on rings >= 1 mm across
    for got, want in zip(_props(b)[[0, 6]], _props(a)[[0, 6]]):
        assert_close(got, want)
    assert_close(_props(b)[1:6], _props(a)[1:6], scale=a.polar_mm4)


@HYP
@given(star_rings(), st.floats(-360, 360))
def test_rotation_rotates_tensor_and_principal_angle(ring, theta):
    c, s = math.cos(math.radians(theta)), math.sin(math.radians(theta))
    a = section_properties(ring)
    xc, yc = a.centroid_mm
    rotated = (ring - [xc, yc]) @ np.array([[c, s], [-s, c]]) + [xc, yc]  # body turned CCW by theta
    b = section_properties(rotated)
    assert_close(b.centroid_mm, a.centroid_mm, scale=10.0)
    tensor_a = (a.ixx_mm4, a.iyy_mm4, a.ixy_mm4)
    tensor_b = (b.ixx_mm4, b.iyy_mm4, b.ixy_mm4)
    assert_close(tensor_b, rotate_moments(*tensor_a, theta), scale=a.polar_mm4)
    # equivalently: turning back by -theta (the rotated body about axes turned by -theta) restores it
    assert_close(rotate_moments(*tensor_b, -theta), tensor_a, scale=a.polar_mm4)
    assert_close((b.i1_mm4, b.i2_mm4), (a.i1_mm4, a.i2_mm4), scale=a.polar_mm4)  # eigenvalues invariant
    assume(a.i1_mm4 - a.i2_mm4 > 1e-3 * a.i1_mm4)  # the direction is well defined
    diff = (b.principal_angle_deg - a.principal_angle_deg - theta + 90.0) % 180.0 - 90.0
    assert abs(diff) < 1e-6  # degrees; conditioning ~ eps * i1 / (i1 - i2)
    assert 0.0 <= b.principal_angle_deg < 180.0


@HYP
@given(star_rings(), star_rings(), st.floats(-300, 300), st.floats(-300, 300))
def test_hole_subtracts_its_ring_moments(outer, hole, dx, dy):
    outer = outer + [dx, dy]
    hole = 0.03 * hole + [dx, dy]
    s = section_properties(outer, [hole])
    about = (dx, dy)
    expected = ring_moments(orient_ring(outer), about=about) - ring_moments(orient_ring(hole), about=about)
    xc, yc = s.centroid_mm
    got_ixx, got_iyy, got_ixy = parallel_axis(s.ixx_mm4, s.iyy_mm4, s.ixy_mm4, s.area_mm2, xc - dx, yc - dy)
    got = [s.area_mm2, s.area_mm2 * (xc - dx), s.area_mm2 * (yc - dy), got_ixx, got_iyy, got_ixy]
    scale = np.abs(ring_moments(outer, about=about))
    assert_close(got[0], expected[0])
    assert_close(got[1:3], expected[1:3], scale=scale[0] * 10.0)
    assert_close(got[3:], expected[3:], scale=scale[3] + scale[4])
    # a clockwise hole ring carries the negative moments by itself
    assert_close(ring_moments(orient_ring(hole, ccw=False)), -ring_moments(orient_ring(hole, ccw=True)))


@HYP
@given(star_rings(), star_rings(), st.integers(0, 30), st.booleans(), st.booleans())
def test_orientation_and_start_vertex_do_not_matter(outer, hole, roll, flip_outer, flip_hole):
    hole = 0.03 * hole
    a = section_properties(outer, [hole])
    o = np.roll(outer, roll % len(outer), axis=0)
    h = np.roll(hole, roll % len(hole), axis=0)
    b = section_properties(o[::-1] if flip_outer else o, [h[::-1] if flip_hole else h])
    assert_close(_props(b)[[0, 6]], _props(a)[[0, 6]])
    assert_close(_props(b)[1:6], _props(a)[1:6], scale=a.polar_mm4)
    assert_close(b.centroid_mm, a.centroid_mm, scale=10.0)
    extents = ("caliper_max_mm", "caliper_min_mm", "convex_area_mm2")
    assert_close([getattr(b, n) for n in extents], [getattr(a, n) for n in extents])
    # a closing duplicate vertex changes nothing
    c = section_properties(np.vstack([outer, outer[:1]]), [np.vstack([hole, hole[:1]])])
    assert_close(_props(c)[1:6], _props(a)[1:6], scale=a.polar_mm4)


@HYP
@given(star_rings(), st.floats(0.01, 100.0))
def test_scaling(ring, k):
    a = section_properties(ring)
    b = section_properties(k * ring)
    assert_close(b.area_mm2, k**2 * a.area_mm2)  # dimensional analysis: area ~ L^2
    assert_close(b.perimeter_mm, k * a.perimeter_mm)
    assert_close(b.centroid_mm, np.multiply(k, a.centroid_mm), scale=10.0 * k)
    # dimensional analysis: second moments ~ L^4
    assert_close(_props(b)[1:6], k**4 * _props(a)[1:6], scale=k**4 * a.polar_mm4)
    assert_close((b.caliper_max_mm, b.caliper_min_mm), (k * a.caliper_max_mm, k * a.caliper_min_mm))


@HYP
@given(st.lists(st.tuples(st.floats(-50, 50), st.floats(-50, 50)), min_size=3, max_size=60))
# hull edges far shorter than rounding of the others (found by hypothesis; once broke a two-pointer scan)
@example(points=[(0.0, 0.0), (0.0, -1.0), (1.0, 0.0), (-1.175494351e-38, 0.0)])
@example(points=[(0.0, 8.506716395635844e-79), (1.0, 0.0), (1.0, 1.0), (8.189179566780726e-180, 0.0)])
@example(points=[(0.0, 0.0), (0.0, 2.0), (1.0, 0.0), (1.0, 4.62217105670154e-204), (-1.0, 1.0)])
# two neighbouring vertices dropped in one round of the chain (CI, stop 27): the hull lost (0, 0)
@example(points=[(0.0, 0.0), (0.0, 1.0), (0.0, 6.89616954672432e-280), (-1.0, 1.0)])
def test_calipers_against_brute_force(points):
    pts = np.array(points, dtype=float)
    cmax, cmin = caliper_widths(pts)
    # definition: the diameter is the largest pairwise distance (brute force over all pairs)
    diff = pts[:, None, :] - pts[None, :, :]
    assert_close(cmax, np.sqrt((diff**2).sum(-1)).max(), scale=100.0)
    # definition: width(theta) = spread of the projections on direction theta; the minimum
    # width is attained with a caliper flush on a hull edge, so every direction gives >= it,
    # and the hull-edge directions include the minimiser
    hull = convex_hull(pts)
    if len(hull) >= 3:
        e = np.roll(hull, -1, axis=0) - hull
        ang = np.arctan2(e[:, 1], e[:, 0]) + np.pi / 2
        grid = np.concatenate([np.linspace(0, np.pi, 721), ang])
        proj = pts @ np.vstack([np.cos(grid), np.sin(grid)])
        widths = proj.max(axis=0) - proj.min(axis=0)
        assert cmin <= widths.min() + 1e-9
        assert_close(cmin, widths[721:].min(), scale=100.0)
    else:
        assert cmin == 0.0  # all points on a line


# --------------------------------------------------------------------------
# principal axes, hull and caliper specifics


def test_principal_moments_directions():
    # wide along x, tall along y, and the two diagonals (Mohr's circle, common practice)
    assert principal_moments(1.0, 4.0, 0.0) == (4.0, 1.0, 0.0)
    assert principal_moments(4.0, 1.0, 0.0) == (4.0, 1.0, 90.0)
    i1, i2, ang = principal_moments(2.0, 2.0, 1.0)  # spread along y = x: integral xy > 0
    assert_close((i1, i2, ang), (3.0, 1.0, 45.0))
    i1, i2, ang = principal_moments(2.0, 2.0, -1.0)  # spread along y = -x
    assert_close((i1, i2, ang), (3.0, 1.0, 135.0))
    assert principal_moments(5.0, 5.0, 0.0)[2] == 0.0  # isotropic: documented 0.0
    assert principal_moments(5.0, 5.0 * (1 + 1e-14), 0.0)[2] == 0.0  # within 1e-12 relative


def test_rotate_moments_of_rotated_rectangle_polygon():
    b, h, theta = 40.0, 10.0, 30.0
    ring = rectangle(-b / 2, -h / 2, b, h)
    c, s = math.cos(math.radians(theta)), math.sin(math.radians(theta))
    turned = ring @ np.array([[c, s], [-s, c]])  # rows (x, y) -> (c x - s y, s x + c y): CCW by theta
    sp_ = section_properties(turned + [200.0, 100.0])
    expected = rotate_moments(b * h**3 / 12, h * b**3 / 12, 0.0, theta)
    # Mohr's circle transformation of the handbook rectangle values (common practice)
    assert_close((sp_.ixx_mm4, sp_.iyy_mm4, sp_.ixy_mm4), expected, scale=h * b**3 / 12)
    assert_close(sp_.principal_angle_deg, theta)  # the long side now points at 30 degrees
    assert_close((sp_.caliper_max_mm, sp_.caliper_min_mm), (math.hypot(b, h), h))  # diagonal, short side


def test_convex_hull_shapes():
    square_with_inner = [[0, 0], [1, 1], [2, 0], [2, 2], [0, 2], [1, 0], [2, 1]]
    hull = convex_hull(square_with_inner)
    assert hull.tolist() == [[0, 0], [2, 0], [2, 2], [0, 2]]  # collinear (1,0), (2,1) and interior (1,1) dropped
    assert convex_hull([[0, 0], [1, 1], [2, 2]]).tolist() == [[0, 0], [2, 2]]  # collinear set: a segment
    assert convex_hull([[3, 4], [3, 4]]).tolist() == [[3, 4]]
    assert caliper_widths([[0, 0], [1, 1], [2, 2]]) == (math.sqrt(8), 0.0)
    assert caliper_widths([[3, 4]]) == (0.0, 0.0)


# --------------------------------------------------------------------------
# circles


def test_fit_circle_exact_points():
    for t0, t1 in ((0.0, 2 * np.pi), (0.3, 0.3 + np.pi / 3)):  # full circle and a 60 degree arc
        t = np.linspace(t0, t1, 50, endpoint=(t1 - t0) < 2 * np.pi)
        pts = np.column_stack([310.0 + 7.5 * np.cos(t), 220.0 + 7.5 * np.sin(t)])
        fit = fit_circle(pts)
        assert isinstance(fit, CircleFit)
        assert_close(fit.centre_mm, (310.0, 220.0), rtol=1e-12)  # exact points, truth by construction
        assert_close(fit.diameter_mm, 15.0, rtol=1e-10)
        assert fit.rms_mm < 1e-10 and fit.roundness_mm < 1e-10


def test_fit_circle_noisy_points_recover_truth():
    rng = np.random.default_rng(5)
    n, r, sigma = 400, 12.0, 0.01
    t = rng.uniform(0, 2 * np.pi, n)
    pts = np.column_stack([50 + r * np.cos(t), -20 + r * np.sin(t)]) + rng.normal(0, sigma, (n, 2))
    fit = fit_circle(pts)
    # geometric fit, full circle: centre and radius standard errors ~ sigma sqrt(2/n) and sigma/sqrt(n)
    # (Chernov 2010, ch. 6, first-order theory; from memory); allow 5 standard errors
    assert math.dist(fit.centre_mm, (50, -20)) < 5 * sigma * math.sqrt(2 / n)
    assert abs(fit.diameter_mm / 2 - r) < 5 * sigma / math.sqrt(n)
    assert 0.85 * sigma < fit.rms_mm < 1.15 * sigma  # radial residual ~ N(0, sigma)
    assert fit.roundness_mm > 4 * sigma  # peak-to-valley of 400 normal residuals


def test_roundness_of_an_ellipse():
    a, b, n = 10.0, 9.9, 400  # n divisible by 4: samples include both axis ends
    t = 2 * np.pi * np.arange(n) / n
    pts = np.column_stack([a * np.cos(t) + 25.0, b * np.sin(t) + 30.0])
    fit = fit_circle(pts)
    # closed form: the distance from the centre ranges over [b, a]; by symmetry the least-squares
    # circle is centred on the ellipse centre, so the peak-to-valley deviation is exactly a - b
    assert_close(fit.centre_mm, (25.0, 30.0), rtol=1e-12)
    assert_close(fit.roundness_mm, a - b, rtol=1e-9)
    assert b < fit.diameter_mm / 2 < a


# --------------------------------------------------------------------------
# boundary influence (for the error model)


def test_boundary_influence_square_with_hole():
    outer = rectangle(0, 0, 10, 10)[::-1]  # given clockwise on purpose
    hole = np.array([[4, 4], [6, 4], [6, 6], [4, 6]], dtype=float)  # given counter-clockwise
    bi = boundary_influence(outer, [hole])
    assert bi["points"].shape == (8, 2) and bi["normals"].shape == (8, 2)
    assert bi["ring"].tolist() == [0] * 4 + [1] * 4
    assert_close(np.hypot(*bi["normals"].T), np.ones(8))  # unit normals
    assert_close(bi["lengths"].sum(), 40 + 8)  # half-edge lengths add up to the perimeter
    # outward = away from the material: out of the outline, into the hole (towards (5, 5))
    centre = np.array([5.0, 5.0])
    away = bi["points"] - centre
    dots = (bi["normals"] * away).sum(axis=1)
    assert np.all(dots[:4] > 0) and np.all(dots[4:] < 0)
    assert signed_area(bi["points"][:4]) > 0 and signed_area(bi["points"][4:]) < 0


def test_boundary_influence_predicts_area_change():
    # a vertex in the middle of a straight side: moving it by d along its normal adds a
    # triangle of area d * (half of both edges) exactly (elementary geometry)
    ring = np.array([[0, 0], [4, 0], [8, 0], [8, 3], [0, 3]], dtype=float)
    bi = boundary_influence(ring)
    k = 1
    assert_close(bi["normals"][k], (0.0, -1.0), scale=1.0)
    d = 0.01
    moved = ring.copy()
    moved[k] += d * bi["normals"][k]
    assert_close(signed_area(moved) - signed_area(ring), d * bi["lengths"][k])
    # a uniform offset d of a regular polygon grows the area by ~ perimeter * d (first order)
    poly = regular_polygon(256, 10.0)
    bi = boundary_influence(poly)
    grown = bi["points"] + 1e-6 * bi["normals"]
    assert_close((signed_area(grown) - signed_area(poly)) / 1e-6, bi["lengths"].sum(), rtol=1e-4)


# --------------------------------------------------------------------------
# bad input


@pytest.mark.parametrize(
    "outer, holes, match",
    [
        (np.zeros((4, 3)), (), r"outer has shape \(4, 3\)"),
        ([[0, 0], [1, 0]], (), "outer has 2 distinct vertices; a ring needs at least 3"),
        ([[0, 0], [1, 0], [0, 0]], (), "outer has 2 distinct vertices"),
        ([[0, 0], [1, np.nan], [0, 1]], (), "outer contains NaN or infinite"),
        ([[0, 0], [1, 1], [2, 2]], (), "outer ring has zero area"),
        ("abc", (), "outer is not an array of numbers"),
        (rectangle(0, 0, 10, 10), [[[1, 1], [2, 1]]], r"holes\[0\] has 2 distinct vertices"),
        (rectangle(0, 0, 10, 10), [rectangle(20, 20, 1, 1)], r"holes\[0\] reaches outside"),
        (rectangle(0, 0, 10, 10), [[[1, 1], [2, 2], [3, 3]]], r"holes\[0\] has zero area"),
        (rectangle(0, 0, 10, 10), [rectangle(0, 0, 10, 10)], "the holes cover the whole outline"),
        (rectangle(0, 0, 10, 10), rectangle(1, 1, 2, 2), "holes must be a sequence"),
    ],
)
def test_bad_section_input_raises_one_line_option_error(outer, holes, match):
    with pytest.raises(OptionError, match=match) as info:
        section_properties(outer, holes)
    assert isinstance(info.value, ScanmassError)
    assert "\n" not in str(info.value)


@pytest.mark.parametrize(
    "points, match",
    [
        ([[0, 0], [1, 1]], "points has 2 points; at least 3 are needed"),
        ([[0, 0], [1, 1], [2, 2], [3, 3]], "the points lie on a line"),
        ([[1, 1], [1, 1], [1, 1]], "all points coincide"),
        ([[0, 0], [1, np.inf], [2, 0]], "points contains NaN or infinite"),
    ],
)
def test_bad_circle_input_raises(points, match):
    with pytest.raises(OptionError, match=match):
        fit_circle(points)


def test_ring_helpers_validate():
    with pytest.raises(OptionError, match="ring has 2 distinct vertices"):
        signed_area([[0, 0], [1, 1]])
    with pytest.raises(OptionError, match=r"ring has shape \(3,\)"):
        ring_moments([1.0, 2.0, 3.0])
    with pytest.raises(OptionError, match=r"points has shape \(0,\)"):
        convex_hull([])


# --------------------------------------------------------------------------
# module hygiene


def test_public_api_and_doctests():
    assert set(section.__all__) == {
        "SectionProperties", "CircleFit", "signed_area", "orient_ring", "ring_moments",
        "ring_perimeter", "section_properties", "principal_moments", "rotate_moments",
        "parallel_axis", "convex_hull", "caliper_widths", "fit_circle", "boundary_influence",
    }  # fmt: skip
    assert all(
        getattr(section, name) is getattr(geometry, name) for name in geometry.__all__ if name in section.__all__
    )
    flags = doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE
    results = [doctest.testmod(m, optionflags=flags) for m in (section, geometry)]
    assert all(r.failed == 0 for r in results) and sum(r.attempted for r in results) > 10


def test_results_are_plain_python_floats():
    sp_ = section_properties(rectangle(0, 0, 3, 4))
    for name, value in vars(sp_).items():
        values = value if isinstance(value, tuple) else (value,)
        assert all(type(v) is float for v in values), name


def test_orienting_with_one_area_is_the_old_two_calls():
    """``_flat_and_oriented`` (one signed area per ring, issue 16) equals ``_is_flat`` then ``orient_ring``.

    Rings of either orientation, large offsets, near-flat ones and rings whose first
    vertex repeats at the end once or twice (those take the old calls): the flag and
    every coordinate must be the same, bit for bit. A flat ring must still be caught.
    """
    rng = np.random.default_rng(16)
    cases = []
    for k in range(300):
        n = int(rng.integers(3, 400))
        t = np.sort(rng.uniform(0.0, 2 * np.pi, n))
        ring = np.column_stack([np.cos(t), rng.uniform(0.01, 2.0) * np.sin(t)]) * rng.uniform(1e-3, 1e3)
        ring += rng.uniform(-1e5, 1e5, 2)
        if k % 2:
            ring = ring[::-1]
        if k % 7 == 0:
            ring[:, 1] = ring[0, 1] + 1e-13 * (ring[:, 0] - ring[0, 0])  # (nearly) on one line
        if k % 5 == 0:
            ring = np.vstack([ring, ring[:1]] + [ring[:1]] * int(k % 2))
        cases.append(geometry._as_ring(ring))
    for ring in cases:
        for ccw in (True, False):
            try:
                old = (section._is_flat(ring), orient_ring(ring, ccw=ccw))
            except OptionError:
                with pytest.raises(OptionError):
                    section._flat_and_oriented(ring, ccw=ccw)
                continue
            flat, new = section._flat_and_oriented(ring, ccw=ccw)
            assert flat == old[0] and new.dtype == old[1].dtype and np.array_equal(new, old[1])
    line = geometry._as_ring([[0.0, 0.0], [1.0, 1.0], [2.0, 2.0], [3.0, 3.0], [5.0, 5.0]])
    assert section._flat_and_oriented(line, ccw=True)[0]  # all on y = x: zero area (common practice)
    with pytest.raises(OptionError, match="zero area"):
        section.section_properties(line)
