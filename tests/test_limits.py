"""Honest at the limits (issue 12): thin walls, file encodings, conflicting scales, specks.

- The strip model: a strip of width w blurred by any point spread function of unit
  integral keeps the integral w of its normalised profile (the integral of a
  convolution is the product of the integrals; Bracewell, The Fourier Transform and Its
  Applications, ch. 6). Checked in closed form (Gaussian: Phi differences integrated by
  scipy.integrate.quad; box: the trapezoid profile; disc: the line spread function of a
  uniform disc, 2 sqrt(r^2 - x^2) / (pi r^2), convolved numerically by scipy).
- Thin walls on rendered scans with exact coverage: the truth is shapely's area of the
  rendered polygon.
- The encoding check on untagged sRGB and linear renders; the CLI messages.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from cli_helpers import one_line_error
from scipy import integrate, signal, stats
from shapely.geometry import Polygon
from typer.testing import CliRunner

from scanmass import measure
from scanmass.cli.app import app
from scanmass.errors import OptionError, ScaleError, SegmentationError
from scanmass.options import check_encoding
from scanmass.segment.thin import strip_profile_integral
from scanmass.testing.scans import SynthPart, circle, rectangle, render_scan, save_scan

runner = CliRunner()


# ------------------------------------------------------------------------ strip model


@pytest.mark.parametrize("width", [0.5, 1.0, 2.0, 3.0, 6.0])
@pytest.mark.parametrize("sigma", [0.5, 1.0, 1.5])
def test_gaussian_strip_integral_is_its_width(width, sigma):
    # profile of a strip [-w/2, w/2] under a Gaussian: Phi((x + w/2)/s) - Phi((x - w/2)/s)
    def profile(x: float) -> float:
        return float(stats.norm.cdf((x + width / 2) / sigma) - stats.norm.cdf((x - width / 2) / sigma))

    value, _ = integrate.quad(profile, -width - 12 * sigma, width + 12 * sigma, limit=200)
    assert value == pytest.approx(width, rel=1e-9)
    # the peak does not reach the part level below a few sigma: the midpoint rule's failure
    assert profile(0.0) == pytest.approx(math.erf(width / (2 * math.sqrt(2) * sigma)), rel=1e-12)
    # sampled profile through the library's integral, levels b = 0.1, f = 0.7
    x = np.arange(-width - 12 * sigma, width + 12 * sigma, 0.01)
    sampled = 0.1 + 0.6 * np.array([profile(v) for v in x])
    assert strip_profile_integral(sampled, 0.01, 0.1, 0.7) == pytest.approx(width, abs=2e-4)


@pytest.mark.parametrize("kind", ["box", "disc"])
@pytest.mark.parametrize("width", [1.0, 2.0, 3.0])
def test_box_and_disc_blurred_strip_integrals_are_the_width(kind, width):
    step = 0.002
    x = np.arange(-10, 10 + step / 2, step)
    strip = (np.abs(x) <= width / 2).astype(float)
    r = 1.2
    if kind == "box":
        kernel = (np.abs(x) <= r).astype(float)
    else:  # line spread function of a uniform disc of radius r: 2 sqrt(r^2 - x^2) / (pi r^2)
        kernel = 2 * np.sqrt(np.clip(r * r - x * x, 0, None)) / (math.pi * r * r)
    kernel /= kernel.sum()
    blurred = signal.fftconvolve(strip, kernel, mode="same")
    assert blurred.max() < 1.0 or width >= 2 * r  # the profile does not reach the part level
    got = strip_profile_integral(0.2 + 0.5 * blurred, step, 0.2, 0.7)
    assert got == pytest.approx(width, abs=3 * step)


# ------------------------------------------------------------------------ thin walls


def _frame(dpi: float, wall_px: float) -> tuple[SynthPart, float]:
    """A thick plate with a thin fin of ``wall_px`` (a wall) and a slot of the same width."""
    px = 25.4 / dpi
    w = wall_px * px
    # plate 12 x 8 mm with a fin 5 mm long standing out of its top edge, rotated a little
    outer = np.array(
        [[5, 5], [17, 5], [17, 13], [11 + w / 2, 13], [11 + w / 2, 18], [11 - w / 2, 18], [11 - w / 2, 13], [5, 13]],
        float,
    )
    slot = rectangle(7.0, 7.0, w, 4.0)  # a slot (hole) of the same width
    angle = math.radians(7.0)
    rot = np.array([[math.cos(angle), -math.sin(angle)], [math.sin(angle), math.cos(angle)]])
    centre = np.array([11.0, 11.0])
    outer = (outer - centre) @ rot.T + centre
    slot = (slot - centre) @ rot.T + centre
    part = SynthPart(outer, [slot])
    return part, Polygon(outer, [slot]).area


@pytest.mark.parametrize("dpi", [300, 600])
@pytest.mark.parametrize(
    ("wall_px", "target", "blur"),
    [(2, 0.02, 0.6), (2, 0.02, 1.0), (3, 0.005, 0.6), (3, 0.005, 1.4), (4, 0.005, 1.4), (6, 0.005, 1.4)],
)
def test_thin_fin_and_slot_of_a_thick_plate_meet_the_issue_targets(dpi, wall_px, target, blur):
    # issue 12's targets: walls of 3 px and more within 0.5 % of their area, 2 px within 2 %.
    # A linear-light float image (a tagged linear file: no grey-level rounding), so that the
    # walls' own error is judged; the plate's corners and edges are part of the error too.
    # (A 2 px slot under a 1.4 px blur closes: test_closed_narrow_slot_is_warned_and_covered.)
    part, truth = _frame(dpi, wall_px)  # truth: shapely's area of the rendered polygon
    scan = render_scan([part], dpi=dpi, size_mm=(22, 23), blur_px=blur, noise=0.0, seed=3)
    m = measure(scan.linear, dpi=dpi, dpi_rel_u=0.0, min_area_mm2=0.1)  # the slot is 0.17-0.6 mm2
    p = max(m.parts, key=lambda q: q.area_mm2)
    # the fin and slot are a small share of the area: judge the error against their own area
    px = 25.4 / dpi
    thin_area = 2 * (wall_px * px) * 4.5
    rel = (p.area_mm2 - truth) / thin_area
    assert abs(rel) < target, rel
    assert abs(p.area_mm2 - truth) <= 3 * p.area_u_mm2


@pytest.mark.parametrize("polarity", ["dark", "light"])
def test_thin_fin_and_slot_in_an_8bit_srgb_scan(polarity):
    # 8-bit sRGB with a little noise (a real scanner's): the fin and slot add at most the
    # 0.5 % target of their area to the error of the same plate without them (both truths:
    # shapely); the plate's own error is its corners' and edges', not the walls'
    dpi, wall_px = 300, 3
    part, truth = _frame(dpi, wall_px)
    plate = SynthPart(part.outer_mm[[0, 1, 2, 7]], [])  # the same plate without fin and slot
    fg, bg = (0.06, 0.8) if polarity == "dark" else (0.65, 0.04)
    errors = []
    for item, true_area in ((part, truth), (plate, Polygon(plate.outer_mm).area)):
        scan = render_scan(
            [item], dpi=dpi, size_mm=(22, 23), blur_px=1.1, noise=0.004, background=bg, foreground=fg, seed=8
        )
        p = max(measure(scan.image, dpi=dpi, dpi_rel_u=0.0, min_area_mm2=0.1).parts, key=lambda q: q.area_mm2)
        errors.append(p.area_mm2 - true_area)
        assert abs(p.area_mm2 - true_area) <= 3 * p.area_u_mm2
    thin_area = 2 * (wall_px * 25.4 / dpi) * 4.5
    assert abs(errors[0] - errors[1]) / thin_area < 0.005, errors


def test_end_window_that_asks_too_much_is_left_out_and_covered():
    # levels that do not hold under the window (a lamp's shadow on a real scan: the level
    # surfaces 15 % off there) would move the tip by pixels: the window is left out and its
    # vertices carry the largest plausible move as uncertainty instead
    from scanmass.segment.wallends import EndWindow, apply_end_windows

    x0, x1, y_tip = 18.2, 21.2, 8.3
    image = _blurred_fin_tip((48, 40), x0, x1, y_tip, 1.0)
    side = np.linspace(80.0, y_tip, 160)
    ring = np.concatenate(
        [np.column_stack([np.full(len(side), x0), side]), np.column_stack([np.linspace(x0, x1, 7)[1:-1], np.full(5, y_tip)]),
         np.column_stack([np.full(len(side), x1), side[::-1]])]
    )  # fmt: skip
    normals = np.zeros_like(ring)
    normals[: len(side)], normals[len(side) : len(side) + 5], normals[len(side) + 5 :] = [-1, 0], [0, -1], [1, 0]
    tip = np.zeros(len(ring), bool)
    tip[len(side) : len(side) + 5] = True  # the turning boundary takes a window's move
    window = EndWindow(np.array([19.7, 30.0]), np.array([1.0, 0.0]), np.array([0.0, -1.0]), 0.0, 26.7, 6.5)
    moved, by, u = apply_end_windows(
        image, np.zeros(2), [ring], normals, [window], lambda v, r, c: v / 0.85,
        level_rel_u=0.0, noise_rel=0.0, prefer=tip, reach_px=5.0, max_move_px=1.0,
    )  # fmt: skip
    assert np.array_equal(moved[0], ring) and not by.any()
    assert u.max() == pytest.approx(1.0)


def _blurred_fin_tip(shape, x0, x1, y_tip, sigma):
    """Pixel averages of a Gaussian-blurred half-strip x0 < x < x1, y > y_tip (pixel centres at integers).

    Separable closed form: the mean over a pixel of Phi(t / s) is s [G(b / s) - G(a / s)] / (b - a) with
    G(u) = u Phi(u) + phi(u), the antiderivative of Phi (common practice; scipy's normal distribution).
    """

    def g(u):
        return u * stats.norm.cdf(u) + stats.norm.pdf(u)

    def mean_phi(lo, hi):  # mean of Phi(t / sigma) over t in [lo, hi]
        return sigma * (g(hi / sigma) - g(lo / sigma)) / (hi - lo)

    cols = np.arange(shape[1], dtype=float)
    rows = np.arange(shape[0], dtype=float)
    across = mean_phi(cols - 0.5 - x0, cols + 0.5 - x0) - mean_phi(cols - 0.5 - x1, cols + 0.5 - x1)
    along = mean_phi(rows - 0.5 - y_tip, rows + 0.5 - y_tip)
    return along[:, None] * across[None, :]


@pytest.mark.parametrize("sigma", [0.6, 1.0, 1.5])
def test_end_window_restores_a_fin_tip_area_for_any_blur(sigma):
    # The 2-D integral rule at a wall's end (scanmass.segment.wallends): under a window whose
    # ramp crosses the straight part of the wall, the sum of window x normalised image equals
    # the window-weighted area, for any even blur (the convolution is self-adjoint: Bracewell,
    # ch. 6). A closed-form image of a 3 px fin's tip and a polygon whose tip sits 0.4 px short
    # (as the midpoint rule leaves it): moving the tip's vertices by the window's area must
    # restore the area of the true polygon (shapely) to 0.002 px2.
    from scanmass.segment.wallends import EndWindow, apply_end_windows

    x0, x1, y_tip, bottom = 18.2, 21.2, 8.3, 80.0
    image = _blurred_fin_tip((48, 40), x0, x1, y_tip, sigma)
    side = np.linspace(bottom, y_tip + 0.4, 144)  # about 0.5 px apart
    tip_x = np.linspace(x0, x1, 7)
    ring = np.concatenate(
        [np.column_stack([np.full(len(side), x0), side]), np.column_stack([tip_x[1:-1], np.full(5, y_tip + 0.4)]),
         np.column_stack([np.full(len(side), x1), side[::-1]])]
    )  # fmt: skip
    normals = np.zeros_like(ring)
    normals[: len(side)] = [-1.0, 0.0]
    normals[len(side) : len(side) + 5] = [0.0, -1.0]  # the tip: away from the material is up
    normals[len(side) + 5 :] = [1.0, 0.0]
    prefer = np.zeros(len(ring), bool)
    prefer[len(side) : len(side) + 5] = True
    reach = 3 * max(sigma, 1.0) + 2
    centre = 0.5 * (x0 + x1)
    window = EndWindow(
        np.array([centre, 30.0]), np.array([1.0, 0.0]), np.array([0.0, -1.0]), 0.0, 30.0 - y_tip + reach, 1.5 + reach
    )
    moved, _, _ = apply_end_windows(
        image, np.zeros(2), [ring], normals, [window], lambda v, r, c: v,
        level_rel_u=0.0, noise_rel=0.0, prefer=prefer, reach_px=reach,
    )  # fmt: skip
    true = Polygon([(x0, bottom), (x0, y_tip), (x1, y_tip), (x1, bottom)]).area
    assert Polygon(ring).area == pytest.approx(true - 3 * 0.4, abs=1e-9)
    # 0.002 px2: 0.2 % of the 1.2 px2 put back (a window ending 1.5 px past the tip, inside
    # the blur, leaves 0.009 px2 at sigma 1 and 0.07 px2 at sigma 1.5)
    assert Polygon(moved[0]).area == pytest.approx(true, abs=0.002)


def test_thin_ring_without_a_thick_region_is_corrected_and_covered():
    # a 3 px shim ring at 300 dpi: the midpoint rule alone came out 4-16 % off (issue 12).
    # Without a thick region the level comes from the walls' own profiles (about 3 % on the
    # level) where their peaks reach OWN_LEVEL_MIN_REACH (0.75) of it; on this ring under a
    # 1 px blur the median reach is 0.741-0.752 from draw to draw (noise 0.002), so a single
    # draw is resolved or not by chance: over four draws each one is either resolved within
    # 8 % (the midpoint rule alone gave +16 %, observed before the change) and says its level
    # rests on the walls' own profiles, or is reported unresolved and covered within 3 sigma
    dpi, wall = 300, 3 * 25.4 / 300
    r = 8.0
    part = SynthPart(circle(15, 15, r), [circle(15, 15, r - wall)])
    truth = Polygon(part.outer_mm, part.holes_mm).area
    resolved = 0
    for seed in (5, 6, 7, 8):
        scan = render_scan([part], dpi=dpi, size_mm=(30, 30), blur_px=1.0, noise=0.002, seed=seed)
        m = measure(scan.image, dpi=dpi, dpi_rel_u=0.0, min_area_mm2=0.1)
        p = m.parts[0]
        assert abs(p.area_mm2 - truth) <= 3 * p.area_u_mm2
        assert "model" in p.uncertainty_terms
        if any("no thick region" in w and "own profiles" in w for w in m.warnings):
            assert abs(p.area_mm2 / truth - 1) < 0.08
            resolved += 1
        else:
            assert any("cannot be resolved" in w for w in m.warnings), m.warnings
    assert resolved >= 1  # the own-profile path is exercised


def test_unresolvable_wall_warns():
    dpi, wall = 300, 1.2 * 25.4 / 300  # a 1.2 px wall
    part = SynthPart(circle(15, 15, 8.0), [circle(15, 15, 8.0 - wall)])
    scan = render_scan([part], dpi=dpi, size_mm=(30, 30), blur_px=0.7, noise=0.0, seed=5)
    m = measure(scan.image, dpi=dpi, dpi_rel_u=0.0, min_area_mm2=0.1)
    assert any("cannot be resolved" in w for w in m.warnings), m.warnings


def test_closed_narrow_slot_is_warned_and_covered():
    # a 2 px slot under a 1.33 px blur at 600 dpi never reaches the background level (peak
    # depth erf(w / (2 sqrt 2 s)) = 0.53 of the contrast, closed form), so the midpoint
    # rule finds no hole there: before issue 12's follow-up the part came out whole, 42 % of
    # the fin and slot's area off at 20 sigma, silently
    dpi = 600
    part, truth = _frame(dpi, 2)  # truth: shapely's area of the rendered polygon
    scan = render_scan([part], dpi=dpi, size_mm=(22, 23), blur_px=1.33, noise=0.0, seed=3)
    m = measure(scan.image, dpi=dpi, dpi_rel_u=0.0, min_area_mm2=0.5)
    p = max(m.parts, key=lambda q: q.area_mm2)
    assert any("narrow slot" in w for w in m.warnings), m.warnings
    assert abs(p.area_mm2 - truth) <= 3 * p.area_u_mm2, (p.area_mm2 - truth, p.area_u_mm2)
    # the slot's own area is 2 px x 4 mm: the stated uncertainty is of that order, not larger
    slot_mm2 = 2 * 25.4 / dpi * 4.0
    assert p.area_u_mm2 < 2 * slot_mm2


def _closed_case(dpi: float, fin: bool, slot: bool) -> SynthPart:
    """The frame of :func:`_frame` (2 px features) with its fin and slot each kept or left out."""
    w = 2 * 25.4 / dpi
    fin_pts = [[11 + w / 2, 13], [11 + w / 2, 18], [11 - w / 2, 18], [11 - w / 2, 13]] if fin else []
    outer = np.array([[5, 5], [17, 5], [17, 13], *fin_pts, [5, 13]], float)
    angle = math.radians(7.0)
    rot = np.array([[math.cos(angle), -math.sin(angle)], [math.sin(angle), math.cos(angle)]])
    centre = np.array([11.0, 11.0])
    holes = [(rectangle(7.0, 7.0, w, 4.0) - centre) @ rot.T + centre] if slot else []
    return SynthPart((outer - centre) @ rot.T + centre, holes)


@pytest.mark.parametrize("dpi", [300, 600])
@pytest.mark.parametrize("dark", [True, False])
@pytest.mark.parametrize(("fin", "slot"), [(True, False), (False, True), (True, True)])
def test_closed_slot_and_vanished_fin_are_measured(dpi, dark, fin, slot):
    # 2 px features under a 1.6 px blur: a 2 px strip peaks at erf(2 / (2 sqrt 2 1.6)) = 0.47
    # of the contrast (closed form), so the fin has no 0.5 contour and the slot never
    # opens; both are measured by the integral rule (issue 12's 2 px target: 2 % of their
    # area) and their stated uncertainty covers the rest. Truth: shapely's area and
    # centroid of the rendered polygon.
    part = _closed_case(dpi, fin, slot)
    truth = Polygon(part.outer_mm, part.holes_mm)
    thin_mm2 = 2 * 25.4 / dpi * (5.0 * fin + 4.0 * slot)
    levels = {"background": 0.8, "foreground": 0.06} if dark else {"background": 0.04, "foreground": 0.65}
    scan = render_scan([part], dpi=dpi, size_mm=(22, 23), blur_px=1.6, noise=0.002, seed=11, **levels)
    m = measure(scan.image, dpi=dpi, dpi_rel_u=0.0, min_area_mm2=0.5)
    p = max(m.parts, key=lambda q: q.area_mm2)
    for kind, there in (("narrow slot", slot), ("thin wall", fin)):
        assert any(kind in w and "integral rule" in w for w in m.warnings) == there, (kind, m.warnings)
    err = p.area_mm2 - truth.area
    assert abs(err) < 0.02 * thin_mm2, (err / thin_mm2, p.area_u_mm2 / thin_mm2)
    assert abs(err) <= 3 * p.area_u_mm2, (err, p.area_u_mm2)
    # measured, not merely covered: the uncertainty is well under the features' area
    assert p.area_u_mm2 < 0.1 * thin_mm2
    for k, c in enumerate((truth.centroid.x, truth.centroid.y)):
        assert abs(p.centroid_mm[k] - c) <= 3 * p.centroid_u_mm[k], (k, p.centroid_mm[k] - c, p.centroid_u_mm[k])


def test_barely_open_slot_is_measured_through_its_pieces():
    # a 2 px slot under a 1.33 px blur (300 dpi, light part on dark, 8-bit sRGB, no noise)
    # dips to erf(2 / (2 sqrt 2 1.4)) = 0.52 of the contrast (closed form, blur with the
    # pixel box): the 0.5 contour opens it in pieces with closed bridges between them.
    # Before, the pieces alone counted (the slot 6 % of its area short); the slot is
    # measured through them now. Truth: shapely's area of the rendered polygon.
    dpi = 300
    part, truth = _frame(dpi, 2)
    thin_mm2 = 2 * 2 * 25.4 / dpi * 4.5
    scan = render_scan(
        [part], dpi=dpi, size_mm=(22, 23), blur_px=1.3277, noise=0.0, background=0.04, foreground=0.65, seed=1
    )
    m = measure(scan.image, dpi=dpi, dpi_rel_u=0.0, min_area_mm2=0.1)
    p = max(m.parts, key=lambda q: q.area_mm2)
    assert any("narrow slot" in w and "integral rule" in w for w in m.warnings), m.warnings
    err = p.area_mm2 - truth
    assert abs(err) < 0.02 * thin_mm2, err / thin_mm2
    assert abs(err) <= 3 * p.area_u_mm2, (err, p.area_u_mm2)


@pytest.mark.parametrize(
    ("polarity", "bit_depth", "blur", "seed", "old_error", "target"),
    [
        ("dark", 8, 1.3142257405942803, 320502424, 0.023, 0.02),
        ("light", 16, 1.3370927679159852, 666443423, -0.054, 0.027),
    ],
)
def test_barely_open_slot_whose_contour_folds_is_measured(polarity, bit_depth, blur, seed, old_error, target):
    # A 2 px slot under a 1.3 px blur with noise (issue 12's benchmark rows, bench_limits
    # --seed 2 and 4): its dip reaches 0.45-0.47 of the contrast, just past the midpoint, so
    # the 0.5 contour pinches and its two sides touch or cross. A vertex past the fold saw a
    # "wall" of 0.1 px whose profile ran into the material beyond and read 10 px: moved 5 px
    # into the plate (old_error, the share of the fin's and slot's area: +2.3 %). In the
    # second draw the slot is open in one piece and closed beyond it: the open piece's end
    # window took the closed piece's share within its reach, which the closed-slot step took
    # out again (-5.4 %); the window now stops where the closed-slot step begins. Target:
    # issue 12's 2 % of the thin features' area for the first; the second still misses it
    # (-2.3 %: where the closed piece's end is placed against the open piece's tip is left
    # to that step's outline term) and is held to half its old error. Truth: shapely's area
    # of the rendered polygon.
    dpi = 300
    part, truth = _frame(dpi, 2)
    thin_mm2 = 2 * 2 * 25.4 / dpi * 4.5
    fg, bg = (0.06, 0.8) if polarity == "dark" else (0.65, 0.04)
    scan = render_scan(
        [part], dpi=dpi, size_mm=(22, 23), blur_px=blur, noise=0.004, background=bg, foreground=fg,
        bit_depth=bit_depth, seed=seed,
    )  # fmt: skip
    m = measure(scan.image, dpi=dpi, dpi_rel_u=0.0, min_area_mm2=0.1)
    p = max(m.parts, key=lambda q: q.area_mm2)
    err = p.area_mm2 - truth
    assert abs(err) < min(target, 0.5 * abs(old_error)) * thin_mm2, err / thin_mm2
    assert abs(err) <= 3 * p.area_u_mm2, (err, p.area_u_mm2)


@pytest.mark.parametrize(("width", "sigma"), [(2.0, 1.314), (2.0, 0.8), (3.0, 1.4), (6.0, 1.0)])
def test_strip_end_retreat_matches_a_numerically_blurred_strip_end(width, sigma):
    # The closed form of scanmass.segment.wallends.strip_end_retreat_px (a Gaussian-blurred
    # square end: P Phi(-y / sigma) on the centre line, P = erf(w / (2 sqrt 2 sigma))) against
    # the strip's indicator on a 0.02 px grid blurred by scipy.ndimage.gaussian_filter, its
    # centre line's 0.5 crossing found by linear interpolation: within 0.01 px.
    from scipy import ndimage

    from scanmass.segment.wallends import strip_end_retreat_px

    h = 0.02
    x = np.arange(-(width / 2 + 7 * sigma), width / 2 + 7 * sigma + h / 2, h)
    y = np.arange(-9 * sigma, 9 * sigma + h / 2, h)
    strip = ((np.abs(x)[None, :] < width / 2) & (y[:, None] < 0)).astype(float)
    blurred = ndimage.gaussian_filter(strip, sigma / h, mode="constant", truncate=6.0)
    centre = blurred[:, np.argmin(np.abs(x))]
    k = int(np.nonzero((centre[:-1] >= 0.5) & (centre[1:] < 0.5))[0][-1])
    crossing = y[k] + h * (centre[k] - 0.5) / (centre[k] - centre[k + 1])
    assert strip_end_retreat_px(width, sigma) == pytest.approx(-crossing, abs=0.01)


def test_edge_model_residual_grows_with_jpeg_compression():
    # The measured edge-model residual (scanmass.segment.thin.edge_residual_px) holds what
    # the blurred-edge model leaves out; JPEG's coarser quantisation tables (pillow's
    # quality 60 against 95, the IJG scaling of the ITU-T T.81 Annex K tables) must show as
    # a larger residual, and noise alone must not (it is subtracted: the edge term has it).
    import io

    from PIL import Image

    from scanmass.load.decode import load_image
    from scanmass.segment.rings import segment
    from scanmass.segment.thin import edge_residual_px

    def density(img: np.ndarray) -> float:
        image = load_image(img)
        found = segment(image).parts[0]
        independent, _, _ = edge_residual_px(image, found)
        return float(np.mean(independent[0] ** 2))

    part = SynthPart(circle(15.0, 15.0, 8.0))
    clean = render_scan([part], dpi=300, size_mm=(30, 30), blur_px=0.9, noise=0.0, seed=4).image
    noisy = render_scan([part], dpi=300, size_mm=(30, 30), blur_px=0.9, noise=0.006, seed=4).image

    def jpeg(img: np.ndarray, quality: int) -> np.ndarray:
        buf = io.BytesIO()
        Image.fromarray(img).save(buf, format="JPEG", quality=quality)
        return np.asarray(Image.open(io.BytesIO(buf.getvalue())).convert("L"))

    d_clean, d95, d60 = density(clean), density(jpeg(clean, 95)), density(jpeg(clean, 60))
    assert d_clean < d95 < d60, (d_clean, d95, d60)
    assert d60 > 3 * d_clean
    # noise 0.006 of a 0.74 contrast moves an edge by about 0.02 px per pixel: its share is
    # subtracted, so the residual stays within twice the noise-free one
    assert density(noisy) < 2 * d_clean + 1e-5, (density(noisy), d_clean)


# ------------------------------------------------------------------------ encodings


def _plate_scan(encoding: str, polarity: str = "dark"):
    part = SynthPart(rectangle(6.0, 6.0, 20.0, 12.0, angle_deg=11.0), [circle(16.0, 12.0, 2.5)])
    fg, bg = (0.06, 0.8) if polarity == "dark" else (0.65, 0.04)
    scan = render_scan(
        [part], dpi=300, size_mm=(34, 28), blur_px=1.0, noise=0.002, encoding=encoding, background=bg,
        foreground=fg, seed=11,
    )  # fmt: skip
    return scan, Polygon(part.outer_mm, part.holes_mm).area


def test_encoding_option_validation():
    assert check_encoding("gamma:1.8") == ("gamma", 1.8)
    with pytest.raises(OptionError, match="e.g. --encoding gamma:2.2"):
        check_encoding("gamma:9")
    with pytest.raises(OptionError, match="encoding 'rec709'"):
        measure(np.zeros((4, 4), np.uint8), dpi=300, encoding="rec709")


@pytest.mark.parametrize("polarity", ["dark", "light"])
@pytest.mark.parametrize("encoding", ["srgb", "linear"])
def test_untagged_file_states_the_reading_and_warns_when_it_matters(tmp_path, polarity, encoding):
    scan, truth = _plate_scan(encoding, polarity)
    path = save_scan(scan, tmp_path / "plate.png")  # PNG with no colour chunk: untagged
    m = measure(path, dpi_rel_u=0.0)
    assert m.settings["encoding"] == "sRGB (assumed)"
    assert "a linear reading would move the edges" in m.settings["encoding_check"]
    # the move of a 6-80 % edge between the two readings is about 0.5 sigma (1-D closed
    # form, module docstring of scanmass.segment.symmetry): far beyond the stated uncertainty
    assert any("no colour profile" in w and "--encoding linear" in w for w in m.warnings), m.warnings
    if encoding == "srgb":
        assert abs(m.parts[0].area_mm2 / truth - 1) < 1e-3  # truth: shapely
    # given explicitly, the linear reading of the linear file is right (truth: shapely)
    m2 = measure(path, dpi_rel_u=0.0, encoding=encoding)
    assert m2.settings["encoding"] == ("linear (given)" if encoding == "linear" else "sRGB (given)")
    assert abs(m2.parts[0].area_mm2 / truth - 1) < 1e-3
    assert not any("no colour profile" in w for w in m2.warnings)


def test_arrays_are_srgb_by_contract_without_a_warning():
    scan, truth = _plate_scan("srgb")
    m = measure(scan.image, dpi=300, dpi_rel_u=0.0)
    assert m.settings["encoding_check"] is None
    assert not any("colour profile" in w for w in m.warnings)


# ------------------------------------------------------------------------ DPI conflicts and specks


def test_dpi_conflict_is_refused_with_both_values(tmp_path):
    scan, _ = _plate_scan("srgb")
    path = save_scan(scan, tmp_path / "plate.png")  # stores 300 dpi (11811 px/m)
    with pytest.raises(ScaleError, match=r"--dpi 600 differs .* from the 300 dpi stored in the file"):
        measure(path, dpi=600)
    m = measure(path, dpi=600, dpi_override=True)
    assert m.scale.dpi == pytest.approx(600)
    assert measure(path, dpi=301).scale.dpi == pytest.approx(301)  # within 1 %: accepted
    result = runner.invoke(app, ["measure", str(path), "--dpi", "600"])
    one_line_error(result, "--dpi 600", "300 dpi stored", "--dpi-override")
    result = runner.invoke(app, ["measure", str(path), "--dpi", "600", "--dpi-override", "-q"])
    assert result.exit_code == 0, result.output


def test_small_only_part_names_its_size_and_the_option(tmp_path):
    part = SynthPart(circle(3.0, 3.0, 0.5))  # 0.785 mm2, below the default --min-area 2
    scan = render_scan([part], dpi=300, size_mm=(6, 6), blur_px=0.8, seed=1)
    path = save_scan(scan, tmp_path / "washer.png")
    # the size is the detection mask's (pixel-centre contour), within a pixel row of pi r^2
    with pytest.raises(SegmentationError, match=r"at most 0\.[67]\d* mm2, below --min-area 2 mm2"):
        measure(path)
    result = runner.invoke(app, ["measure", str(path)])
    line = one_line_error(result, "below --min-area 2 mm2", "--min-area 0.2")
    assert "washer.png" in line
    m = measure(path, min_area_mm2=0.5)
    p = m.parts[0]
    assert abs(p.area_mm2 - math.pi * 0.25) <= 3 * p.area_u_mm2  # pi r^2


def test_specks_are_counted_with_their_largest_area():
    parts = [SynthPart(rectangle(5, 5, 10, 8)), SynthPart(circle(20, 20, 0.4)), SynthPart(circle(22, 6, 0.6))]
    scan = render_scan(parts, dpi=300, size_mm=(28, 28), blur_px=0.8, seed=2)
    m = measure(scan.image, dpi=300)
    assert m.settings["specks_ignored"] == 2
    assert m.settings["specks_largest_mm2"] == pytest.approx(math.pi * 0.36, rel=0.1)  # pi r^2, pixel count
