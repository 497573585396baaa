"""Segmentation (scanmass.segment.rings.segment) on scans with exact per-pixel coverage.

Truth: the rendered polygons themselves (scanmass.testing.scans renders exact area
coverage, tested against shapely in test_synth.py). Ring areas and centroids in pixels are
computed here with shapely (reference library), not with scanmass.section.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import shapely

from scanmass.load.decode import load_image
from scanmass.segment.rings import segment
from scanmass.testing.scans import SynthPart, circle, rectangle, render_scan

DPI = 254  # one pixel is exactly 0.1 mm
S_MM = 25.4 / DPI


def _loaded(scan):
    return load_image(scan.image, dpi=scan.dpi)


def _mm_to_px(points_mm: np.ndarray, height_px: int, s_mm: float = S_MM) -> np.ndarray:
    """Scan frame (DESIGN.md) to OpenCV pixels: x_px = x / s - 0.5, y_px = H - y / s - 0.5."""
    p = np.asarray(points_mm, float)
    return np.column_stack([p[:, 0] / s_mm - 0.5, height_px - p[:, 1] / s_mm - 0.5])


def _plate() -> SynthPart:
    return SynthPart(rectangle(6.0, 5.0, 30.0, 20.0, angle_deg=7.0), [circle(14.0, 15.0, 3.0), circle(27.0, 14.0, 4.5)])


@pytest.mark.parametrize("polarity", ["dark", "light"])
def test_polarity_detected_and_rings_oriented(polarity):
    fg, bg = (0.07, 0.85) if polarity == "dark" else (0.75, 0.05)
    scan = render_scan([_plate()], dpi=DPI, size_mm=(42, 30), background=bg, foreground=fg, blur_px=0.9, seed=1)
    seg = segment(_loaded(scan))
    expected = "dark part on light background" if polarity == "dark" else "light part on dark background"
    assert seg.polarity == expected
    assert len(seg.parts) == 1 and not seg.cut
    part = seg.parts[0]
    # material on the left in pixel coordinates: outer positive shoelace area, holes negative
    # (counter-clockwise in the ring's own x, y axes, as shapely's is_ccw tests it)
    assert shapely.LinearRing(part.outer_px).is_ccw
    assert not any(shapely.LinearRing(h).is_ccw for h in part.holes_px)
    assert len(part.holes_px) == 2


def _signed_area(ring: np.ndarray) -> float:
    # shoelace formula (common practice), written out here so as not to use scanmass.section
    x, y = ring[:, 0], ring[:, 1]
    return 0.5 * float(np.sum(x * np.roll(y, -1) - np.roll(x, -1) * y))


def test_holes_found_with_their_areas():
    plate = _plate()
    scan = render_scan([plate], dpi=DPI, size_mm=(42, 30), blur_px=0.9, noise=0.003, seed=2)
    part = segment(_loaded(scan)).parts[0]
    assert len(part.holes_px) == 2
    h_px = scan.image.shape[0]
    # truth: each drawn hole polygon, in pixels, area from shapely
    want = sorted(shapely.Polygon(_mm_to_px(h, h_px)).area for h in plate.holes_mm)
    got = sorted(abs(_signed_area(h)) for h in part.holes_px)
    # holes of 30 and 45 px radius: 0.1 % of the area is a 0.015 px mean boundary offset,
    # ten times the edge noise of this clean scan
    assert got == pytest.approx(want, rel=1e-3)
    outer_want = shapely.Polygon(_mm_to_px(plate.outer_mm, h_px)).area
    assert _signed_area(part.outer_px) == pytest.approx(outer_want, rel=5e-4)


def test_specks_below_min_area_dropped_and_counted():
    parts = [SynthPart(circle(10.0, 10.0, 5.0)), SynthPart(rectangle(25.0, 8.0, 0.6, 0.6))]  # a 6 x 6 px speck
    scan = render_scan(parts, dpi=DPI, size_mm=(35, 20), blur_px=0.8, seed=3)
    seg = segment(_loaded(scan), min_area_px=50.0)
    assert len(seg.parts) == 1 and seg.specks == 1
    seg = segment(_loaded(scan), min_area_px=10.0)
    assert len(seg.parts) == 2 and seg.specks == 0


def test_dust_hole_below_min_hole_area_filled():
    part = SynthPart(rectangle(5.0, 5.0, 20.0, 12.0), [circle(10.0, 11.0, 3.0), circle(20.0, 11.0, 0.25)])
    scan = render_scan([part], dpi=DPI, size_mm=(30, 22), blur_px=0.8, seed=4)
    # the small hole covers pi 2.5^2 = 19.6 px
    assert len(segment(_loaded(scan), min_hole_area_px=40.0).parts[0].holes_px) == 1
    assert len(segment(_loaded(scan), min_hole_area_px=5.0).parts[0].holes_px) == 2


def test_cut_part_left_out_or_flagged():
    parts = [SynthPart(rectangle(-3.0, 6.0, 12.0, 8.0)), SynthPart(circle(25.0, 10.0, 5.0))]
    scan = render_scan(parts, dpi=DPI, size_mm=(35, 20), blur_px=0.8, seed=5)
    seg = segment(_loaded(scan))
    assert len(seg.parts) == 1 and len(seg.cut) == 1 and not seg.parts[0].cut
    assert any("edge" in w for w in seg.warnings)
    kept = segment(_loaded(scan), keep_cut=True)
    assert len(kept.parts) == 2 and sum(p.cut for p in kept.parts) == 1


@pytest.mark.parametrize("phase", [(0.37, 0.81), (0.13, 0.62)])
def test_subpixel_position_of_a_large_square(phase):
    # DESIGN.md pitfall: a half-pixel slip moves every centroid by 0.5 px. A 20 mm (200 px)
    # square at a sub-pixel offset, exact coverage, Gaussian blur 0.8 px, no noise, 8 bit.
    x0, y0 = 10.0 + phase[0] * S_MM, 8.0 + phase[1] * S_MM
    square = rectangle(x0, y0, 20.0, 20.0)
    scan = render_scan([SynthPart(square)], dpi=DPI, shape_px=(380, 400), blur_px=0.8, noise=0.0, seed=6)
    part = segment(_loaded(scan)).parts[0]
    want_px = _mm_to_px(square, scan.image.shape[0])
    want = shapely.Polygon(want_px)
    got = shapely.Polygon(part.outer_px)
    # Observed (2026-12, phases (0.37, 0.81), (0.13, 0.62), (0.25, 0.75)): each side's mean
    # position off by 0.001-0.015 px, the centroid by up to 0.011 px, the area by < 1.1e-4
    # relative. The residual is the phase-dependent bias of linear interpolation between
    # pixel centres on a sampled blurred edge (the error model's measured edge residual).
    # Limits: 0.03 px per side and centroid (about twice the observed, 17 times below a
    # half-pixel slip), area 3e-4 (0.015 px mean offset over the 800 px perimeter).
    assert math.dist(got.centroid.coords[0], want.centroid.coords[0]) < 0.03
    assert abs(got.area / want.area - 1.0) < 3e-4
    # mean position of each side, away from the corners the blur rounds (5 px)
    (xa, ya), (xb, yb) = want_px.min(axis=0), want_px.max(axis=0)
    o = part.outer_px
    along_y = (o[:, 1] > ya + 5) & (o[:, 1] < yb - 5)
    along_x = (o[:, 0] > xa + 5) & (o[:, 0] < xb - 5)
    xm, ym = 0.5 * (xa + xb), 0.5 * (ya + yb)
    sides = {
        "left": o[along_y & (o[:, 0] < xm), 0].mean() - xa,
        "right": o[along_y & (o[:, 0] > xm), 0].mean() - xb,
        "top": o[along_x & (o[:, 1] < ym), 1].mean() - ya,
        "bottom": o[along_x & (o[:, 1] > ym), 1].mean() - yb,
    }
    assert all(abs(v) < 0.03 for v in sides.values()), sides


# -- noise is not a part ----------------------------------------------------------------------


@pytest.mark.parametrize("noise", [0.004, 0.02])
def test_pixel_noise_matches_the_rendered_noise(noise):
    # the renderer adds Gaussian noise of this sigma in linear light (its parameter, not a measurement)
    from scanmass.segment.rings import pixel_noise

    synth = render_scan([], dpi=300.0, size_mm=(60.0, 40.0), blur_px=0.0, noise=noise, bit_depth=16, seed=2)
    assert pixel_noise(load_image(synth.image, dpi=300.0)) == pytest.approx(noise, rel=0.08)


@pytest.mark.parametrize("noise", [0.002, 0.006])
def test_empty_mat_photo_is_no_part_found_not_specks(noise):
    from scanmass import measure
    from scanmass.errors import SegmentationError
    from scanmass.scale.mat import make_mat
    from scanmass.testing.photos import make_camera, render_photo

    cam = make_camera(tilt_deg=15.0, tilt_dir_deg=40.0, roll_deg=80.0, distance_mm=370.0)
    image = render_photo(make_mat("a4-portrait"), [], cam, seed=5, noise=noise)
    with pytest.raises(SegmentationError, match="nothing stands out from the background"):
        measure(image, thickness_mm=0)


def test_blank_lid_with_uneven_light_is_no_part_found():
    from scanmass.errors import SegmentationError

    synth = render_scan([], dpi=300.0, size_mm=(80.0, 60.0), noise=0.006, illumination=(0.08, -0.05), seed=4)
    with pytest.raises(SegmentationError, match="nothing stands out"):
        segment(load_image(synth.image, dpi=300.0), min_area_px=50)


def test_low_contrast_part_is_still_found():
    # contrast 0.06 against noise 0.006: ten times the noise, above the faint limit of five
    part = SynthPart(rectangle(10.0, 10.0, 30.0, 20.0, angle_deg=5.0))
    synth = render_scan([part], dpi=300.0, size_mm=(50.0, 40.0), background=0.85, foreground=0.79, noise=0.006, seed=6)
    seg = segment(load_image(synth.image, dpi=300.0), min_area_px=50)
    assert len(seg.parts) == 1 and seg.faint == 0
    assert seg.parts[0].area_px * (25.4 / 300.0) ** 2 == pytest.approx(600.0, rel=0.01)  # 30 x 20 mm


def _srgb_round_trip_8bit(linear: np.ndarray) -> np.ndarray:
    """Linear light through 8-bit sRGB and back: IEC 61966-2-1 encode, round to 255 levels, decode."""
    v = np.clip(linear, 0.0, 1.0)
    enc = np.where(v <= 0.0031308, 12.92 * v, 1.055 * v ** (1 / 2.4) - 0.055)
    code = np.rint(enc * 255.0) / 255.0
    return np.where(code <= 0.04045, code / 12.92, ((code + 0.055) / 1.055) ** 2.4)


@pytest.mark.parametrize("slope", [0.0, 0.002])
@pytest.mark.parametrize("level", [0.62, 0.635, 0.65, 0.665, 0.8])
def test_level_fit_on_8bit_levels_neither_biased_nor_blind_to_noise(level, slope):
    """A bright sRGB level in an 8-bit file with noise under one level step (0.004 against a
    step of ~0.007 in linear light): most samples share one stored level. The level's fit must
    still find the mean: by the quantisation theorem (Widrow and Kollar, Quantization Noise,
    2008, section 4) the mean of the quantised samples is off by at most D / pi exp(-2 pi^2
    s^2 / D^2), here < 1e-5, against a sampling error of s / sqrt(N) ~ 5e-5. Cutting at 3.5
    median absolute residuals dropped the neighbouring levels and moved it by up to half a
    step (3e-3). The spread it reports must be that of the stored values, noise and rounding
    together, sqrt(s^2 + D^2 / 12) (the same theorem; Sheppard 1898), not 0."""
    from scanmass.segment.rings import _fit_surface

    rng = np.random.default_rng(7)
    rows, cols = np.divmod(np.arange(80 * 75), 75)
    rows, cols = rows.astype(float), cols.astype(float)
    true = level + slope * (cols / 75.0)  # flat, or a slight illumination slope
    values = _srgb_round_trip_8bit(true + rng.normal(0.0, 0.004, true.size))
    coef, order, sigma, n = _fit_surface(values, rows, cols, 80.0, 2)
    x, y = cols / 80.0, rows / 80.0
    fitted = coef[0] + coef[1] * x + coef[2] * y + coef[3] * x * x + coef[4] * x * y + coef[5] * y * y
    # mean over the samples: the fit's level (the slope is fitted exactly by the surface)
    assert abs(float(np.mean(fitted - true))) < 4 * 0.004 / math.sqrt(true.size) + 1e-5
    assert n > 0.97 * true.size  # no stored level dropped as an outlier (a 3.5 sigma cut drops 0.05 %)
    # the local step of the stored levels (IEC 61966-2-1 decode of neighbouring 8-bit codes)
    code = np.rint(255.0 * (1.055 * level ** (1 / 2.4) - 0.055))
    step = float(np.diff(_srgb_round_trip_8bit(((np.array([code, code + 1]) / 255.0 + 0.055) / 1.055) ** 2.4))[0])
    assert sigma == pytest.approx(math.sqrt(0.004**2 + step**2 / 12.0), rel=0.06)  # 4 standard errors ~ 4 %


def test_level_fit_noise_stays_robust_where_it_spans_many_levels():
    """Noise of several steps (0.02 in linear light against a step of ~0.003 at 0.3) and 4 %
    of the samples moved by shading (+0.06, inside the outlier cut): the noise is the robust
    spread, as for continuous data (1.4826 x the median absolute deviation of a Gaussian is
    its sigma; common practice), not the variance, which the shading inflates by 17 %."""
    from scanmass.segment.rings import _fit_surface

    rng = np.random.default_rng(11)
    rows, cols = np.divmod(np.arange(80 * 75), 75)
    values = 0.3 + rng.normal(0.0, 0.02, rows.size)
    values[rng.random(rows.size) < 0.04] += 0.06
    values = _srgb_round_trip_8bit(values)
    sigma = _fit_surface(values, rows.astype(float), cols.astype(float), 80.0, 2)[2]
    assert sigma == pytest.approx(0.02, rel=0.08)  # the shading's 4 % move the median absolute deviation ~4 %


@pytest.mark.parametrize(("fg", "seed"), [(0.635, 5), (0.635, 6), (0.65, 6)])
def test_contrast_of_a_bright_part_in_an_8bit_file_is_unbiased(fg, seed):
    """A light part (linear 0.635 or 0.65) on a dark ground (0.04), noise 0.004, 8-bit sRGB:
    at the part's level one stored level holds most of the samples. The contrast the edges
    are placed with must be the rendered one (the renderer's parameters, fg - bg) within its
    sampling error (~1e-4), not half a level step (~3.5e-3, 0.6 % of it) off; the midpoint
    moves by half that error (0.01 px under a 1 px blur)."""
    part = SynthPart(rectangle(5.0, 5.0, 20.0, 12.0, angle_deg=7.0), [])
    scan = render_scan(
        [part], dpi=DPI, size_mm=(30, 22), background=0.04, foreground=fg, blur_px=1.0, noise=0.004, seed=seed
    )
    rings = segment(_loaded(scan)).parts[0]
    assert rings.contrast == pytest.approx(fg - 0.04, abs=6e-4)
