"""Regression tier: accuracy of measure() on rendered scans, with limits about three times
today's errors, so that a tenfold loss of accuracy fails.

Scenes are rendered by scanmass.testing.scans (exact per-pixel coverage, tested against
shapely in test_synth.py) with realistic blur and noise, fixed seeds, at 300 and 600 dpi,
both polarities, with thin rings and small parts. The DPI is exact in a render, so every
scene is measured with ``dpi_rel_u=0``.

Truth: area and centroid from shapely (reference library); centroidal second moments from
the polygon vertex sums of Green's theorem (tests/polygon_truth.py, common practice, not
scanmass.section), checked against sympy's exact integrals below.

Errors are expressed without units so one table covers all sizes: area, Ixx, Iyy
relative to the true value; Ixy relative to sqrt(Ixx Iyy); the centroid as a distance in
pixels.
"""

from __future__ import annotations

import math
import statistics

import numpy as np
import pytest
import sympy
from polygon_truth import truth

from scanmass import measure
from scanmass.testing.scans import SynthPart, annulus, circle, l_section, rectangle, regular_polygon, render_scan

DARK = {"background": 0.82, "foreground": 0.06}
LIGHT = {"background": 0.04, "foreground": 0.70}


def _plate() -> SynthPart:
    return SynthPart(
        rectangle(12.3, 14.1, 46.0, 28.0, angle_deg=11.0), [circle(27.0, 26.0, 4.0), circle(44.0, 31.5, 6.5)]
    )


def _small() -> list[SynthPart]:
    # a 3 mm disc, a 2.5 mm square turned 20 deg, an equilateral triangle of circumradius 2 mm
    return [
        SynthPart(circle(8.0, 8.0, 1.5)),
        SynthPart(rectangle(14.0, 6.5, 2.5, 2.5, angle_deg=20.0)),
        SynthPart(regular_polygon(23.0, 8.0, 2.0, 3, 90.0)),
    ]


def _l_turned() -> SynthPart:
    return SynthPart(l_section(10, 8, 50, 38, 8, 6)).transformed(angle_deg=30, about_mm=(35, 30), shift_mm=(8, 6))


#: name -> (parts, render options); seeds fixed
CASES = {
    "plate-300-dark": (
        [_plate()],
        dict(dpi=300, size_mm=(72, 56), blur_px=1.0, noise=0.006, illumination=(0.08, -0.05), seed=101, **DARK),
    ),
    "plate-600-light": (
        [_plate()],
        dict(dpi=600, size_mm=(72, 56), blur_px=1.3, noise=0.008, illumination=(-0.06, 0.04), seed=102, **LIGHT),
    ),
    "l-300-light": ([_l_turned()], dict(dpi=300, size_mm=(80, 76), blur_px=0.9, noise=0.005, seed=103, **LIGHT)),
    "l-600-dark": (
        [SynthPart(l_section(10, 8, 50, 38, 8, 6))],
        dict(dpi=600, size_mm=(70, 56), blur_px=1.2, noise=0.006, seed=104, **DARK),
    ),
    # washers: walls of 0.5 mm (5.9 px), 0.35 mm (4.1 px, about four blur widths) and 0.4 mm at 600 dpi (9.4 px)
    "ring-300-dark": (
        [annulus(15, 15, 8.0, 7.5)],
        dict(dpi=300, size_mm=(30, 30), blur_px=1.0, noise=0.005, seed=105, **DARK),
    ),
    "thin-ring-300-dark": (
        [annulus(15, 15, 8.0, 7.65)],
        dict(dpi=300, size_mm=(30, 30), blur_px=1.0, noise=0.005, seed=109, **DARK),
    ),
    "ring-600-light": (
        [annulus(12, 12, 6.0, 5.6)],
        dict(dpi=600, size_mm=(24, 24), blur_px=1.2, noise=0.006, seed=106, **LIGHT),
    ),
    "small-300-dark": (_small(), dict(dpi=300, size_mm=(30, 16), blur_px=0.9, noise=0.005, seed=107, **DARK)),
    "small-600-light": (_small(), dict(dpi=600, size_mm=(30, 16), blur_px=1.1, noise=0.006, seed=108, **LIGHT)),
}

ERRORS = ("area", "centroid_px", "ixx", "iyy", "ixy")
#: figures compared with their stated image-only uncertainty (names of uncertainty_terms)
Z_FIGURES = ("area_mm2", "centroid_x_mm", "centroid_y_mm", "ixx_mm4", "iyy_mm4", "ixy_mm4")


def _measured(part) -> dict[str, float]:
    return {
        "area_mm2": part.area_mm2,
        "centroid_x_mm": part.centroid_mm[0],
        "centroid_y_mm": part.centroid_mm[1],
        "ixx_mm4": part.ixx_mm4,
        "iyy_mm4": part.iyy_mm4,
        "ixy_mm4": part.ixy_mm4,
    }


def _true(t: dict) -> dict[str, float]:
    return {
        "area_mm2": t["area"],
        "centroid_x_mm": t["centroid"][0],
        "centroid_y_mm": t["centroid"][1],
        "ixx_mm4": t["ixx"],
        "iyy_mm4": t["iyy"],
        "ixy_mm4": t["ixy"],
    }


def run_case(name: str) -> list[dict]:
    """Render and measure one scene; per true part: errors, and error / image-only sigma."""
    parts, options = CASES[name]
    scan = render_scan(parts, **options)
    m = measure(scan.image, dpi=options["dpi"], dpi_rel_u=0.0)
    assert len(m.parts) == len(parts), name
    px_mm = 25.4 / options["dpi"]
    rows = []
    for sp in parts:
        t = truth(sp.outer_mm, sp.holes_mm)
        p = min(m.parts, key=lambda q: math.dist(q.centroid_mm, t["centroid"]))
        got, want = _measured(p), _true(t)
        terms = p.uncertainty_terms
        # the render's scale is exact and dpi_rel_u = 0: the scale term must be zero, and
        # the image part is the edge and threshold terms only
        assert all(terms["scale"][k] == 0.0 for k in Z_FIGURES)
        err = {
            "area": abs(got["area_mm2"] / want["area_mm2"] - 1),
            "centroid_px": math.dist(p.centroid_mm, t["centroid"]) / px_mm,
            "ixx": abs(got["ixx_mm4"] / want["ixx_mm4"] - 1),
            "iyy": abs(got["iyy_mm4"] / want["iyy_mm4"] - 1),
            "ixy": abs(got["ixy_mm4"] - want["ixy_mm4"]) / math.sqrt(want["ixx_mm4"] * want["iyy_mm4"]),
        }
        image_terms = [t for name, t in terms.items() if name not in ("scale", "inputs")]  # edge, threshold, model
        u = {k: math.sqrt(sum(t.get(k, 0.0) ** 2 for t in image_terms)) for k in Z_FIGURES}
        z = {k: (got[k] - want[k]) / u[k] for k in Z_FIGURES}
        sigma = {  # the image-only sigma in the units of err
            "area": u["area_mm2"] / want["area_mm2"],
            "centroid_px": math.hypot(u["centroid_x_mm"], u["centroid_y_mm"]) / px_mm,
            "ixx": u["ixx_mm4"] / want["ixx_mm4"],
            "iyy": u["iyy_mm4"] / want["iyy_mm4"],
            "ixy": u["ixy_mm4"] / math.sqrt(want["ixx_mm4"] * want["iyy_mm4"]),
        }
        rows.append({"err": err, "z": z, "sigma": sigma})
    return rows


@pytest.fixture(scope="module")
def results() -> dict[str, list[dict]]:
    return {name: run_case(name) for name in CASES}


#: Per case and per true part (in the order of CASES): today's errors ("observed") and the
#: limits. Each limit is about 3 x max(observed, 0.3 sigma) rounded up to a 1-1.5-2-3-5-7
#: step, where sigma is the part's own image-only standard uncertainty (edge and threshold
#: terms): an error far below its sigma is luck of the seed, and a limit at 3 x that luck
#: would fail on harmless changes. Measured 2026-12-02 on branch tests (numpy, OpenCV
#: and scikit-image as pinned in the environment). For reference, the end-to-end tests in
#: test_measure.py allow 1e-3 (area), 0.05 px (centroid) and 2e-3 (moments).
LIMITS: dict[str, list[dict[str, float]]] = {
    "plate-300-dark": [
        # observed: area 9.8e-07, centroid_px 1.5e-03, ixx 6.1e-06, iyy 1.5e-05, ixy 1.3e-05
        # 0.3 sigma: area 2.5e-05, centroid_px 7.4e-04, ixx 3.7e-05, iyy 3.2e-05, ixy 7.0e-06
        {"area": 0.0001, "centroid_px": 0.005, "ixx": 0.00015, "iyy": 0.0001, "ixy": 5e-05},
    ],
    "plate-600-light": [
        # observed: area 4.0e-06, centroid_px 9.0e-04, ixx 1.1e-05, iyy 4.6e-06, ixy 5.4e-06
        # 0.3 sigma: area 2.9e-05, centroid_px 1.3e-03, ixx 4.3e-05, iyy 3.7e-05, ixy 7.4e-06
        {"area": 0.0001, "centroid_px": 0.005, "ixx": 0.00015, "iyy": 0.00015, "ixy": 3e-05},
    ],
    "l-300-light": [
        # observed: area 5.8e-05, centroid_px 3.5e-03, ixx 7.1e-05, iyy 8.0e-05, ixy 1.7e-05
        # 0.3 sigma: area 4.0e-05, centroid_px 1.1e-03, ixx 5.1e-05, iyy 4.8e-05, ixy 3.2e-06
        {"area": 0.0002, "centroid_px": 0.015, "ixx": 0.0003, "iyy": 0.0003, "ixy": 5e-05},
    ],
    "l-600-dark": [
        # observed: area 7.9e-05, centroid_px 3.6e-03, ixx 6.4e-05, iyy 1.0e-04, ixy 4.8e-05
        # 0.3 sigma: area 2.8e-05, centroid_px 1.9e-03, ixx 3.3e-05, iyy 3.4e-05, ixy 1.8e-05
        {"area": 0.0003, "centroid_px": 0.015, "ixx": 0.0002, "iyy": 0.0005, "ixy": 0.00015},
    ],
    "ring-300-dark": [
        # observed: area 4.3e-03, centroid_px 6.2e-03, ixx 3.9e-03, iyy 4.0e-03, ixy 4.8e-04
        # 0.3 sigma: area 2.8e-03, centroid_px 1.0e-02, ixx 2.8e-03, iyy 2.8e-03, ixy 7.6e-05
        {"area": 0.015, "centroid_px": 0.05, "ixx": 0.015, "iyy": 0.015, "ixy": 0.0015},
    ],
    "thin-ring-300-dark": [
        # observed: area 4.2e-02, centroid_px 3.7e-02, ixx 4.2e-02, iyy 4.3e-02, ixy 2.2e-04
        # 0.3 sigma: area 1.1e-02, centroid_px 7.7e-03, ixx 1.1e-02, iyy 1.1e-02, ixy 6.0e-05
        {"area": 0.15, "centroid_px": 0.15, "ixx": 0.15, "iyy": 0.15, "ixy": 0.0007},
    ],
    "ring-600-light": [
        # observed: area 6.8e-04, centroid_px 7.5e-03, ixx 7.7e-04, iyy 6.1e-04, ixy 5.4e-06
        # 0.3 sigma: area 6.7e-04, centroid_px 9.4e-03, ixx 6.8e-04, iyy 6.8e-04, ixy 4.8e-05
        {"area": 0.003, "centroid_px": 0.03, "ixx": 0.003, "iyy": 0.003, "ixy": 0.00015},
    ],
    "small-300-dark": [
        # observed: area 9.8e-04, centroid_px 5.9e-04, ixx 2.2e-03, iyy 1.7e-03, ixy 3.4e-05
        # 0.3 sigma: area 1.9e-04, centroid_px 8.3e-04, ixx 3.8e-04, iyy 3.8e-04, ixy 6.5e-05
        {"area": 0.003, "centroid_px": 0.003, "ixx": 0.007, "iyy": 0.007, "ixy": 0.0002},
        # observed: area 4.9e-06, centroid_px 1.4e-03, ixx 9.5e-04, iyy 1.1e-03, ixy 1.2e-04
        # 0.3 sigma: area 2.2e-04, centroid_px 8.5e-04, ixx 4.4e-04, iyy 4.4e-04, ixy 7.4e-05
        {"area": 0.0007, "centroid_px": 0.005, "ixx": 0.003, "iyy": 0.005, "ixy": 0.0005},
        # observed: area 6.0e-04, centroid_px 6.5e-03, ixx 3.2e-03, iyy 4.3e-03, ixy 1.3e-04
        # 0.3 sigma: area 2.7e-04, centroid_px 1.0e-03, ixx 5.4e-04, iyy 5.4e-04, ixy 9.7e-05
        {"area": 0.002, "centroid_px": 0.02, "ixx": 0.01, "iyy": 0.015, "ixy": 0.0005},
    ],
    "small-600-light": [
        # observed: area 1.1e-04, centroid_px 5.2e-03, ixx 2.0e-04, iyy 2.3e-04, ixy 3.1e-05
        # 0.3 sigma: area 1.1e-04, centroid_px 1.7e-03, ixx 2.4e-04, iyy 2.4e-04, ixy 6.7e-05
        {"area": 0.0005, "centroid_px": 0.02, "ixx": 0.001, "iyy": 0.001, "ixy": 0.0003},
        # observed: area 1.9e-04, centroid_px 1.6e-03, ixx 7.6e-04, iyy 5.5e-04, ixy 1.7e-04
        # 0.3 sigma: area 1.3e-04, centroid_px 1.9e-03, ixx 2.8e-04, iyy 2.8e-04, ixy 8.3e-05
        {"area": 0.0007, "centroid_px": 0.007, "ixx": 0.003, "iyy": 0.002, "ixy": 0.0007},
        # observed: area 8.3e-04, centroid_px 1.3e-02, ixx 2.8e-03, iyy 2.3e-03, ixy 1.5e-05
        # 0.3 sigma: area 1.7e-04, centroid_px 2.2e-03, ixx 3.5e-04, iyy 3.5e-04, ixy 1.0e-04
        {"area": 0.003, "centroid_px": 0.05, "ixx": 0.01, "iyy": 0.007, "ixy": 0.0005},
    ],
}


@pytest.mark.parametrize("case", list(CASES))
def test_accuracy_within_regression_limits(results, case):
    rows = results[case]
    assert len(rows) == len(LIMITS[case])
    for k, (row, limit) in enumerate(zip(rows, LIMITS[case])):
        over = {name: (row["err"][name], limit[name]) for name in ERRORS if not row["err"][name] <= limit[name]}
        assert not over, f"{case} part {k}: error above limit {over}"


#: Observed over the 13 parts x 6 figures (area, centroid x and y, Ixx, Iyy, Ixy), each
#: error divided by its image-only sigma hypot(edge, threshold) (the DPI term is zero
#: here): 78 of 78 within 3 sigma (largest |z| 2.69, the triangle's centroid y at 300 dpi),
#: median |z| 0.47. DESIGN.md asks for 95-99 % within 3 sigma and a median |z| between
#: about 0.4 and 1.2. With 78 values, 95 % allows 3 outside; for standard normal z the
#: median |z| is 0.67 with a standard error of about 0.09 here, so a median below 0.25
#: means sigmas inflated about threefold, above 1.2 sigmas understated about twofold.
COVERAGE_MIN = 0.95
MEDIAN_Z_RANGE = (0.25, 1.2)


def test_image_uncertainty_covers_the_errors(results):
    z = np.array([abs(v) for rows in results.values() for row in rows for v in row["z"].values()])
    assert z.size == 78
    assert np.mean(z <= 3.0) >= COVERAGE_MIN, sorted(z)[-5:]
    assert MEDIAN_Z_RANGE[0] <= float(np.median(z)) <= MEDIAN_Z_RANGE[1], float(np.median(z))


def test_aggregate_errors_within_three_times_today(results):
    """Root-mean-square over all parts of each error, a steadier figure than any one part."""
    # observed RMS (2026-12-02): area 1.18e-2, centroid 1.15e-2 px, Ixx 1.18e-2, Iyy 1.20e-2,
    # Ixy 1.63e-4 (area, centroid and Ixx/Iyy dominated by the 4 % error of the 4 px wall
    # of thin-ring-300-dark, Ixy by ring-300-dark); limits 3x
    limits = {"area": 0.035, "centroid_px": 0.035, "ixx": 0.035, "iyy": 0.036, "ixy": 5e-4}
    rows = [row for case_rows in results.values() for row in case_rows]
    for name, limit in limits.items():
        rms = math.sqrt(statistics.fmean(row["err"][name] ** 2 for row in rows))
        assert rms <= limit, (name, rms, limit)


def test_moment_truth_matches_sympy_integrals():
    # The truth helper's vertex sums against sympy's exact integrals over the L of the
    # l-600-dark case, split into two rectangles (legs 8 wide and 6 high).
    x, y = sympy.symbols("x y")
    pieces = [(10, 18, 8, 46), (18, 60, 8, 14)]  # x0, x1, y0, y1 (mm)

    def integral(f):
        return sum(sympy.integrate(f, (x, a, b), (y, c, d)) for a, b, c, d in pieces)

    area = integral(sympy.Integer(1))
    xc, yc = integral(x) / area, integral(y) / area
    exact = {
        "ixx": integral((y - yc) ** 2),
        "iyy": integral((x - xc) ** 2),
        "ixy": integral((x - xc) * (y - yc)),
    }
    t = truth(l_section(10, 8, 50, 38, 8, 6), [])
    assert t["area"] == pytest.approx(float(area), rel=1e-14)
    assert t["centroid"] == pytest.approx((float(xc), float(yc)), rel=1e-14)
    for name, value in exact.items():
        assert t[name] == pytest.approx(float(value), rel=1e-12), name
