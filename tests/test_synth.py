"""Tests of the synthetic-scan renderer (scanmass.testing.scans).

The renderer must be far more accurate than the measuring tool: per-pixel
coverage is checked against shapely's exact polygon-box intersection areas
(reference library), totals against shapely's polygon area, and the transfer
function against the formulas of IEC 61966-2-1:1999.
"""

from __future__ import annotations

import io
import math
from pathlib import Path

import cv2
import numpy as np
import pytest
import shapely
from PIL import Image

from scanmass.errors import OptionError, OutputError
from scanmass.raster import coverage, srgb_decode, srgb_encode
from scanmass.testing.scans import (
    SynthPart,
    annulus,
    circle,
    l_section,
    part_coverage,
    rectangle,
    regular_polygon,
    render_scan,
    save_scan,
)

# Tolerances stated once.
EXACT_PX = 1e-9  # per-pixel coverage vs shapely (brief: exact to ~1e-9)
EXACT_REL = 1e-9  # total area, relative
S300 = 25.4 / 300.0  # mm per pixel at 300 dpi (25.4 mm per inch, by definition of the inch)


# ----------------------------------------------------------------------------- helpers


def _star(rng: np.random.Generator, cx: float, cy: float, r_min: float, r_max: float, n: int) -> np.ndarray:
    """Random simple polygon, star-shaped about (cx, cy): jittered angles, random radii."""
    ang = 2 * np.pi * (np.arange(n) + rng.uniform(0.1, 0.9, n)) / n
    r = rng.uniform(r_min, r_max, n)
    return np.column_stack([cx + r * np.cos(ang), cy + r * np.sin(ang)])


def _pixel_boxes(shape: tuple[int, int], s_mm: float, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
    """shapely boxes of pixels (row j, column i) in the scan frame of DESIGN.md."""
    h_px = shape[0]
    return shapely.box(cols * s_mm, (h_px - rows - 1) * s_mm, (cols + 1) * s_mm, (h_px - rows) * s_mm)


def _shapely_coverage(poly: shapely.Geometry, shape: tuple[int, int], s_mm: float) -> np.ndarray:
    """Reference: exact area of poly inside every pixel / pixel area (shapely/GEOS overlay)."""
    rows, cols = np.mgrid[0 : shape[0], 0 : shape[1]]
    boxes = _pixel_boxes(shape, s_mm, rows.ravel(), cols.ravel())
    return (shapely.area(shapely.intersection(poly, boxes)) / s_mm**2).reshape(shape)


def _random_part(rng: np.random.Generator, cx: float, cy: float, size: float) -> tuple[SynthPart, shapely.Polygon]:
    """A random part with 0-2 holes and its shapely twin (orientation randomised)."""
    outer = _star(rng, cx, cy, 0.6 * size, size, int(rng.integers(5, 14)))
    holes = []
    n_holes = int(rng.integers(0, 3))
    for k in range(n_holes):
        off = (k - 0.5 * (n_holes - 1)) * 0.35 * size
        holes.append(_star(rng, cx + off, cy, 0.05 * size, 0.15 * size, int(rng.integers(3, 9))))
    if rng.random() < 0.5:
        outer = outer[::-1]
    holes = [h[::-1] if rng.random() < 0.5 else h for h in holes]
    poly = shapely.Polygon(outer, holes)
    assert poly.is_valid
    return SynthPart(outer, holes), poly


# ----------------------------------------------------------------------------- by hand


def test_square_at_subpixel_offset_by_hand():
    # Square x in [1.25, 3.5] mm, y in [0.5, 2.75] mm on 1 mm pixels, 4 rows x 5 columns.
    # Columns (x in [i, i+1]): overlaps 0, 0.75, 1, 0.5, 0.
    # Rows (y in [H-j-1, H-j], row 0 at the top): j=0 [3,4] 0; j=1 [2,3] 0.75;
    # j=2 [1,2] 1; j=3 [0,1] 0.5. Each pixel's covered fraction is the product
    # (axis-aligned rectangle, worked by hand).
    sq = rectangle(1.25, 0.5, 2.25, 2.25)
    got = coverage([sq], shape=(4, 5), mm_per_px=1.0)
    col = np.array([0, 0.75, 1, 0.5, 0])
    row = np.array([0, 0.75, 1, 0.5])
    np.testing.assert_allclose(got, np.outer(row, col), rtol=0, atol=1e-14)


def test_rectangular_pixels_by_hand():
    # Pixels 0.5 mm wide and 2 mm tall; rectangle x in [0.25, 1.0], y in [1.0, 3.0]
    # on 2 rows x 3 columns. Columns [0,.5],[.5,1],[1,1.5]: 0.5, 1, 0.
    # Rows: j=0 y in [2,4]: 0.5; j=1 y in [0,2]: 0.5 (by hand).
    rect = rectangle(0.25, 1.0, 0.75, 2.0)
    got = coverage([rect], shape=(2, 3), mm_per_px=(0.5, 2.0))
    np.testing.assert_allclose(got, [[0.25, 0.5, 0], [0.25, 0.5, 0]], rtol=0, atol=1e-14)


def test_pixel_centre_convention_rows_count_from_top():
    # DESIGN.md: pixel (i, j) covers x in [i s, (i+1) s], y in [(H-j-1) s, (H-j) s].
    # A square x in [10 s, 20 s], y in [5 s, 8 s] on H = 30 fills columns 10..19 and
    # rows H-1-7 .. H-1-5 = 22..24 exactly (y up, row 0 at the top).
    h_px, w_px = 30, 40
    sq = rectangle(10 * S300, 5 * S300, 10 * S300, 3 * S300)
    got = coverage([sq], shape=(h_px, w_px), mm_per_px=S300)
    want = np.zeros((h_px, w_px))
    want[22:25, 10:20] = 1.0
    np.testing.assert_allclose(got, want, rtol=0, atol=1e-12)
    # Coverage-weighted pixel centres ((i+0.5) s, (H-j-0.5) s) give the square's centre
    # (15 s, 6.5 s) exactly here: a half-pixel slip would show as 0.5 s.
    rows, cols = np.mgrid[0:h_px, 0:w_px]
    xc = np.sum(got * (cols + 0.5) * S300) / got.sum()
    yc = np.sum(got * (h_px - rows - 0.5) * S300) / got.sum()
    assert xc == pytest.approx(15 * S300, abs=1e-12)
    assert yc == pytest.approx(6.5 * S300, abs=1e-12)
    # One pixel-sized square centred on pixel (i=7, j=3)'s centre covers exactly that pixel.
    i, j = 7, 3
    one = rectangle((i + 0.5) * S300 - S300 / 2, (h_px - j - 0.5) * S300 - S300 / 2, S300, S300)
    got = coverage([one], shape=(h_px, w_px), mm_per_px=S300)
    assert got[j, i] == pytest.approx(1.0, abs=1e-12)
    assert got.sum() == pytest.approx(1.0, abs=1e-12)


# ----------------------------------------------------------------------------- exactness


def test_per_pixel_coverage_matches_shapely_intersections():
    # Reference library: shapely (GEOS) exact intersection area of the polygon with
    # every pixel square. Random parts with holes, random pixel sizes, vertices
    # snapped onto grid lines in some cases, parts hanging over the image border.
    rng = np.random.default_rng(20240611)
    worst = 0.0
    for trial in range(40):
        shape = (int(rng.integers(8, 16)), int(rng.integers(8, 16)))
        s_mm = float(rng.uniform(0.3, 1.2))
        cx, cy = rng.uniform(-0.1, 1.1, 2) * np.array([shape[1], shape[0]]) * s_mm
        part, poly = _random_part(rng, cx, cy, float(rng.uniform(1.0, 7.0)) * s_mm)
        if trial % 4 in (0, 1):  # vertices on (or 1e-13 mm beside) pixel corners and grid lines
            q = s_mm / 2
            outer = np.round(part.outer_mm / q) * q
            if trial % 4 == 1:
                outer = outer + rng.choice([-1e-13, 0.0, 1e-13], outer.shape)
            poly = shapely.Polygon(outer)
            if not poly.is_valid or poly.area == 0:
                continue
            part = SynthPart(outer)
        got = part_coverage([part], shape=shape, mm_per_px=s_mm)
        want = _shapely_coverage(poly, shape, s_mm)
        worst = max(worst, float(np.abs(got - want).max()))
    assert worst < EXACT_PX


def test_per_pixel_exact_far_from_origin():
    # Large raster coordinates (a 2000-gon on a 3000 x 2500 grid at 300 dpi): every
    # pixel the boundary touches matches shapely's intersection area (reference library).
    shape = (3000, 2500)
    ring = circle(150.123, 180.77, 30.3, n=2000)
    poly = shapely.Polygon(ring)
    got = part_coverage([SynthPart(ring)], shape=shape, mm_per_px=S300)
    rows, cols = np.nonzero((got > 1e-6) & (got < 1 - 1e-6))
    rows, cols = rows[::7], cols[::7]  # a spread-out subset keeps the test fast
    want = shapely.area(shapely.intersection(poly, _pixel_boxes(shape, S300, rows, cols))) / S300**2
    assert np.abs(got[rows, cols] - want).max() < EXACT_PX


def test_total_area_equals_polygon_area_several_parts_with_holes():
    # Sum of coverage x pixel area = polygon area (shapely area, the shoelace formula),
    # to 1e-9 relative, for several non-overlapping random parts with holes.
    rng = np.random.default_rng(7)
    s_mm = S300
    parts, polys = [], []
    for gx in range(3):
        for gy in range(2):
            part, poly = _random_part(rng, 8 + 16 * gx, 8 + 16 * gy, 7.0)
            parts.append(part)
            polys.append(poly)
    shape = (int(34 / s_mm), int(50 / s_mm))
    got = part_coverage(parts, shape=shape, mm_per_px=s_mm)
    want = float(sum(p.area for p in polys))
    assert got.sum() * s_mm**2 == pytest.approx(want, rel=EXACT_REL)
    assert got.min() >= 0.0 and got.max() <= 1.0


def test_part_partly_outside_image_counts_only_inside():
    # Reference: shapely area of the part clipped to the image rectangle.
    rng = np.random.default_rng(3)
    part, poly = _random_part(rng, 0.5, 9.5, 6.0)
    shape = (100, 120)
    s_mm = 0.1
    got = part_coverage([part], shape=shape, mm_per_px=s_mm)
    image_box = shapely.box(0, 0, shape[1] * s_mm, shape[0] * s_mm)
    assert got.sum() * s_mm**2 == pytest.approx(poly.intersection(image_box).area, rel=EXACT_REL)


def test_orientation_and_signed_winding_integral():
    # Counter-clockwise ring (y up) counts positive, clockwise negative; part_coverage
    # orients rings itself. Truth: the ring's shoelace area (shapely).
    ring = regular_polygon(5.0, 4.0, 3.0, 7, phase_deg=10)
    area = shapely.Polygon(ring).area
    ccw = coverage([ring], shape=(10, 12), mm_per_px=1.0, clip=False)
    cw = coverage([ring[::-1]], shape=(10, 12), mm_per_px=1.0, clip=False)
    assert ccw.sum() == pytest.approx(area, rel=EXACT_REL)
    np.testing.assert_allclose(cw, -ccw, atol=1e-14)
    np.testing.assert_allclose(
        part_coverage([SynthPart(ring[::-1])], shape=(10, 12), mm_per_px=1.0), np.clip(ccw, 0, 1), atol=1e-14
    )


def test_first_moments_match_centroid_within_pixel_integration_bound():
    # Coverage-weighted pixel centres approximate the centroid (shapely). Error bound:
    # in a pixel with covered fraction c, the covered part's centroid x_in and the
    # uncovered part's x_out average (weights c, 1-c) to the pixel centre, so the
    # first-moment error of that pixel is s^2 c (1-c) (x_in - x_out), and
    # |x_in - x_out| <= s. Hence |x_px - x_true| <= s * sum c(1-c) / sum c (per axis).
    rng = np.random.default_rng(11)
    part, poly = _random_part(rng, 12.3, 9.8, 6.0)
    shape = (250, 300)
    got = part_coverage([part], shape=shape, mm_per_px=S300)
    rows, cols = np.mgrid[0 : shape[0], 0 : shape[1]]
    total = got.sum()
    x_mm = np.sum(got * (cols + 0.5) * S300) / total
    y_mm = np.sum(got * (shape[0] - rows - 0.5) * S300) / total
    bound_mm = S300 * np.sum(got * (1 - got)) / total
    assert abs(x_mm - poly.centroid.x) <= bound_mm
    assert abs(y_mm - poly.centroid.y) <= bound_mm
    assert bound_mm < 1e-3 * S300 * 10  # the bound itself is small (a few 1e-3 px here)


def test_l_section_product_of_area_sign_y_up():
    # L with legs along +x and +y from its corner: Ixy < 0 (y up). Exact value from
    # two rectangles and the parallel-axis theorem (handbook formula):
    # legs A1 = 40x6 at (20, 3), A2 = 6x24 at (3, 6+12), Ixy = sum A_k dx_k dy_k.
    x0, y0 = 5.0, 4.0
    ring = l_section(x0, y0, 40.0, 30.0, 6.0)
    a1, c1 = 240.0, (20.0, 3.0)
    a2, c2 = 144.0, (3.0, 18.0)
    area = a1 + a2
    xc = (a1 * c1[0] + a2 * c2[0]) / area
    yc = (a1 * c1[1] + a2 * c2[1]) / area
    ixy_true = a1 * (c1[0] - xc) * (c1[1] - yc) + a2 * (c2[0] - xc) * (c2[1] - yc)
    assert shapely.Polygon(ring).area == pytest.approx(area)
    shape = (450, 600)
    cov = part_coverage([SynthPart(ring)], shape=shape, mm_per_px=S300)
    rows, cols = np.mgrid[0 : shape[0], 0 : shape[1]]
    x = (cols + 0.5) * S300 - x0
    y = (shape[0] - rows - 0.5) * S300 - y0
    da = cov * S300**2
    xg, yg = np.sum(da * x) / da.sum(), np.sum(da * y) / da.sum()
    ixy = np.sum(da * (x - xg) * (y - yg))
    assert ixy_true < 0
    assert ixy == pytest.approx(ixy_true, rel=1e-3)


# ----------------------------------------------------------------------------- shapes


def test_shape_helpers():
    # Areas by handbook formulas (rectangle w h; L = w t + (h - t) t; regular n-gon
    # n r^2 sin(2 pi / n) / 2), checked with shapely; circles meet the sagitta bound.
    assert shapely.Polygon(rectangle(1, 2, 3, 4, angle_deg=33)).area == pytest.approx(12.0)
    np.testing.assert_allclose(rectangle(1, 2, 3, 4, angle_deg=90).mean(axis=0), [2.5, 4.0])
    assert shapely.Polygon(l_section(0, 0, 10, 8, 2)).area == pytest.approx(10 * 2 + 6 * 2)
    hexagon = regular_polygon(0, 0, 2.0, 6)
    assert shapely.Polygon(hexagon).area == pytest.approx(6 * 4.0 * math.sin(2 * math.pi / 6) / 2)
    ring = circle(0, 0, 50.0)
    n = len(ring)
    assert 50.0 * (1 - math.cos(math.pi / n)) <= 1e-4  # sagitta r (1 - cos(pi/n))
    assert 50.0 * (1 - math.cos(math.pi / (n - 1))) > 1e-4  # and n is the smallest such
    for r in (ring, hexagon, rectangle(0, 0, 1, 1), l_section(0, 0, 3, 3, 1)):
        assert shapely.Polygon(r).exterior.is_ccw
    washer = annulus(10, 10, 5, 2)
    # pi (R^2 - r^2) (handbook), less the inscribed polygons' deficit: each chord
    # cuts a segment of area ~ (2/3) chord x sagitta, so <= (2/3) 2 pi R 1e-4 in all.
    washer_area = shapely.Polygon(washer.outer_mm, washer.holes_mm).area
    assert 0 < math.pi * (25 - 4) - washer_area < (2 / 3) * 2 * math.pi * 5 * 1e-4
    moved = washer.transformed(angle_deg=90, about_mm=(0, 0), shift_mm=(1, 0))
    np.testing.assert_allclose(moved.outer_mm.mean(axis=0), [-9.0, 10.0], atol=1e-9)


# ----------------------------------------------------------------------------- render


def test_render_without_blur_is_exact_coverage_and_encoding():
    parts = [
        SynthPart(rectangle(2.2, 3.1, 7.7, 4.4, angle_deg=21), [circle(6, 5.3, 1.1)]),
        annulus(15, 6, 3, 1, level=0.3),
    ]
    scan = render_scan(parts, dpi=150, size_mm=(20, 12), blur_px=0, bit_depth=16)
    s_mm = 25.4 / 150
    h_px, w_px = round(12 / s_mm), round(20 / s_mm)
    assert scan.image.shape == (h_px, w_px) and scan.image.dtype == np.uint16
    c_dark = part_coverage(parts[:1], shape=(h_px, w_px), mm_per_px=s_mm)
    c_grey = part_coverage(parts[1:], shape=(h_px, w_px), mm_per_px=s_mm)
    want = 0.85 + (0.08 - 0.85) * c_dark + (0.3 - 0.85) * c_grey
    np.testing.assert_allclose(scan.linear, want, atol=1e-12)
    np.testing.assert_array_equal(scan.image, np.rint(srgb_encode(want) * 65535).astype(np.uint16))
    assert scan.mm_per_px == pytest.approx((s_mm, s_mm))
    assert scan.settings["bit_depth"] == 16 and scan.settings["blur_px"] == 0


def test_blur_preserves_total_coverage():
    # A normalised kernel moves light around but keeps its total (part away from the border).
    parts = [SynthPart(regular_polygon(10, 10, 6, 9), [circle(10, 10, 2)])]
    kw = dict(dpi=200, size_mm=(20, 20), encoding="linear", bit_depth=16)
    sharp = render_scan(parts, blur_px=0, **kw).linear
    blurred = render_scan(parts, blur_px=1.7, **kw).linear
    assert np.abs(blurred - sharp).max() > 0.05
    assert (0.85 - blurred).sum() == pytest.approx((0.85 - sharp).sum(), rel=1e-12)


def test_illumination_gradient_and_polarity():
    # Field 1 + gx (x - xm)/W at pixel centres, on the background only (no parts).
    scan = render_scan([], shape_px=(4, 50), dpi=100, blur_px=0, illumination=(0.2, 0.0), encoding="linear")
    s_mm = 0.254
    x_mm = (np.arange(50) + 0.5) * s_mm
    want = 0.85 * (1 + 0.2 * (x_mm - 25 * s_mm) / (50 * s_mm))
    np.testing.assert_allclose(scan.linear, np.broadcast_to(want, (4, 50)), atol=1e-12)
    bright = render_scan([SynthPart(rectangle(1, 1, 3, 3))], size_mm=(5, 5), dpi=100, background=0.08, foreground=0.85)
    assert bright.linear.max() > 0.8 and bright.linear[0, 0] == pytest.approx(0.08)


def test_noise_seed_colour_and_defaults():
    parts = [SynthPart(rectangle(3, 3, 4, 4))]
    a = render_scan(parts, dpi=100, noise=0.01, seed=5, colour=True, encoding="linear", bit_depth=16)
    b = render_scan(parts, dpi=100, noise=0.01, seed=5, colour=True, encoding="linear", bit_depth=16)
    np.testing.assert_array_equal(a.image, b.image)
    assert a.image.shape[2] == 3 and np.array_equal(a.image[..., 0], a.image[..., 2])
    resid = a.image[..., 0] / 65535.0 - a.linear
    assert resid.std() == pytest.approx(0.01, rel=0.1)
    # default size: from the origin to 10 mm beyond the parts
    assert a.image.shape[:2] == (math.ceil(17 / 0.254), math.ceil(17 / 0.254))


def test_bad_options_raise_one_line_errors():
    with pytest.raises(OptionError, match="bit_depth"):
        render_scan([], shape_px=(5, 5), bit_depth=12)
    with pytest.raises(OptionError, match="size_mm or shape_px"):
        render_scan([], shape_px=(5, 5), size_mm=(5, 5))
    with pytest.raises(OptionError, match="N >= 3"):
        coverage([np.zeros((2, 2))], shape=(5, 5), mm_per_px=1.0)
    with pytest.raises(OptionError, match="mm_per_px"):
        coverage([], shape=(5, 5), mm_per_px=-1.0)


# ----------------------------------------------------------------------------- sRGB


def test_srgb_breakpoints_and_round_trip():
    # IEC 61966-2-1:1999: encode 12.92 L for L <= 0.0031308, else 1.055 L^(1/2.4) - 0.055;
    # decode V / 12.92 for V <= 0.04045, else ((V + 0.055) / 1.055)^2.4.
    assert float(srgb_encode(0.0031308)) == pytest.approx(12.92 * 0.0031308, abs=1e-15)
    assert float(srgb_decode(0.04045)) == pytest.approx(0.04045 / 12.92, abs=1e-15)
    # the two branches meet at the breakpoints (to the rounding of the published constants)
    assert 1.055 * 0.0031308 ** (1 / 2.4) - 0.055 == pytest.approx(12.92 * 0.0031308, abs=1e-6)
    assert float(srgb_encode(0.0)) == 0.0 and float(srgb_encode(1.0)) == pytest.approx(1.0, abs=1e-15)
    # 18 % grey encodes to 1.055 * 0.18^(1/2.4) - 0.055 = 0.46135 (standard's formula, by hand)
    assert float(srgb_encode(0.18)) == pytest.approx(0.46135, abs=1e-5)
    v = np.linspace(0, 1, 10001)
    np.testing.assert_allclose(srgb_encode(srgb_decode(v)), v, atol=1e-12)
    np.testing.assert_allclose(srgb_decode(srgb_encode(v)), v, atol=1e-12)


# ----------------------------------------------------------------------------- saving


@pytest.fixture(scope="module")
def small_scans():
    parts = [SynthPart(rectangle(2, 2, 6, 4, angle_deg=10), [circle(5, 4, 1)])]
    grey8 = render_scan(parts, dpi=300, size_mm=(10, 8), noise=0.01, seed=1)
    grey16 = render_scan(parts, dpi=300, size_mm=(10, 8), bit_depth=16)
    colour16 = render_scan(parts, dpi=300, size_mm=(10, 8), bit_depth=16, colour=True, noise=0.01, seed=2)
    return grey8, grey16, colour16


def test_png_dpi_round_trip(tmp_path, small_scans):
    grey8, _, colour16 = small_scans
    out = save_scan(grey8, tmp_path / "a.png")
    with Image.open(out) as im:
        # PNG pHYs holds whole pixels per metre: round(300 / 0.0254) = 11811 px/m, and
        # pillow reports 11811 * 0.0254 = 299.9994 dpi (PNG specification, pHYs chunk).
        assert im.info["dpi"] == pytest.approx((299.9994, 299.9994), abs=1e-4)
        np.testing.assert_array_equal(np.asarray(im), grey8.image)
    # 16-bit colour goes through OpenCV plus our own pHYs chunk
    out = save_scan(colour16, tmp_path / "c.png", dpi=(600, 300))
    with Image.open(out) as im:
        # 600 dpi -> round(600 / 0.0254) = 23622 px/m -> 599.9988 dpi
        assert im.info["dpi"] == pytest.approx((599.9988, 299.9994), abs=1e-4)
    back = cv2.imread(str(out), cv2.IMREAD_UNCHANGED)[:, :, ::-1]
    np.testing.assert_array_equal(back, colour16.image)
    out = save_scan(grey8, tmp_path / "n.png", dpi="omit")
    with Image.open(out) as im:
        assert "dpi" not in im.info
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.png", "c.png", "n.png"]  # no temp files left


def test_tiff_16bit_dpi_round_trip(tmp_path, small_scans):
    _, grey16, colour16 = small_scans
    out = save_scan(grey16, tmp_path / "g.tif", dpi=299.5)
    with Image.open(out) as im:
        assert im.mode == "I;16"
        assert im.info["dpi"] == pytest.approx((299.5, 299.5))  # TIFF stores a rational
        np.testing.assert_array_equal(np.asarray(im), grey16.image)
    out = save_scan(colour16, tmp_path / "c.tiff")
    back = cv2.imread(str(out), cv2.IMREAD_UNCHANGED)
    assert back.dtype == np.uint16
    np.testing.assert_array_equal(back[:, :, ::-1], colour16.image)
    with Image.open(out) as im:
        assert im.info["dpi"] == pytest.approx((300.0, 300.0))


def test_jpeg_dpi_round_trip_and_errors(tmp_path, small_scans):
    grey8, grey16, _ = small_scans
    out = save_scan(grey8, tmp_path / "a.jpg", quality=95)
    with Image.open(out) as im:
        assert im.info["dpi"] == (300, 300)  # JFIF density, whole dots per inch
        assert np.abs(np.asarray(im).astype(int) - grey8.image).mean() < 2.0
    out = save_scan(grey8, tmp_path / "b.jpeg", dpi="omit")
    with Image.open(out) as im:
        assert "dpi" not in im.info and im.info["jfif_unit"] == 0  # JFIF unit 0: aspect ratio only
    with pytest.raises(OptionError, match="8-bit"):
        save_scan(grey16, tmp_path / "c.jpg")
    with pytest.raises(OptionError, match="suffix"):
        save_scan(grey8, tmp_path / "c.bmp")
    with pytest.raises(OutputError, match="does not exist"):
        save_scan(grey8, tmp_path / "missing" / "c.png")
    # the written bytes are what pillow would produce in memory (the atomic write adds nothing)
    bio = io.BytesIO()
    Image.fromarray(grey8.image).save(bio, format="JPEG", quality=95, dpi=(300.0, 300.0))
    assert Path(tmp_path / "a.jpg").read_bytes() == bio.getvalue()
