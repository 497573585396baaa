"""The error model (scanmass.uncertainty) against Monte Carlo and exact offset curves.

Edge term: vertices of a densely sampled polygon are moved along their normals by
independent Gaussian noise, as DESIGN.md states the model (independent per boundary
sample); the spread of area, centroid and second moments over the trials must match the
stated sigmas within chi-square bounds on a sample standard deviation (common practice).
The figures of each perturbed polygon are computed here with vectorised vertex sums
(Green's theorem, common practice), checked once against shapely, never with
scanmass.section.

Threshold term: one shared offset d of the whole boundary; the area changes by
perimeter x d. Checked against the exact area of shapely's mitred buffer (reference
library), whose area is A + P d + K d^2 for small d, so a central difference gives P.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import shapely
from polygon_truth import truth
from scipy import stats

from scanmass.testing.scans import circle, l_section
from scanmass.uncertainty import build_edge_model, combine, figure_weights, part_uncertainty

FIGURES = ("area_mm2", "centroid_x_mm", "centroid_y_mm", "ixx_mm4", "iyy_mm4", "ixy_mm4")


def _densify(ring: np.ndarray, step_mm: float) -> np.ndarray:
    """Insert vertices along each edge so that no edge is longer than step_mm."""
    out = []
    for a, b in zip(ring, np.roll(ring, -1, axis=0)):
        n = max(1, math.ceil(math.dist(a, b) / step_mm))
        t = np.arange(n)[:, None] / n
        out.append(a + t * (b - a))
    return np.concatenate(out)


def _oriented(ring: np.ndarray, ccw: bool) -> np.ndarray:
    return ring if shapely.LinearRing(ring).is_ccw == ccw else ring[::-1]


def _section():
    """An unsymmetric part: an L with a round hole in its long leg, densified to ~0.1 mm."""
    outer = _oriented(_densify(l_section(0.0, 0.0, 30.0, 22.0, 7.0, 5.0), 0.1), True)
    hole = _oriented(circle(3.5, 14.0, 2.0, n=126), False)  # chord 0.0997 mm
    return outer, [hole]


def _figures(rings_batch: list[np.ndarray]) -> dict[str, np.ndarray]:
    """Area, centroid, centroidal Ixx, Iyy, Ixy of a batch of polygons (T, N_i, 2) per ring.

    Outer counter-clockwise, holes clockwise, so plain sums over all rings give the part.
    """
    a = qx = qy = sxx = syy = sxy = 0.0
    for r in rings_batch:
        x, y = r[..., 0], r[..., 1]
        xn, yn = np.roll(x, -1, axis=-1), np.roll(y, -1, axis=-1)
        c = x * yn - xn * y
        a = a + c.sum(-1) / 2
        qx = qx + (c * (x + xn)).sum(-1) / 6
        qy = qy + (c * (y + yn)).sum(-1) / 6
        sxx = sxx + (c * (y * y + y * yn + yn * yn)).sum(-1) / 12  # integral y^2 dA
        syy = syy + (c * (x * x + x * xn + xn * xn)).sum(-1) / 12
        sxy = sxy + (c * (x * yn + 2 * x * y + 2 * xn * yn + xn * y)).sum(-1) / 24
    xc, yc = qx / a, qy / a
    return {
        "area_mm2": a,
        "centroid_x_mm": xc,
        "centroid_y_mm": yc,
        "ixx_mm4": sxx - a * yc * yc,
        "iyy_mm4": syy - a * xc * xc,
        "ixy_mm4": sxy - a * xc * yc,
    }


def _vertex_normals_and_lengths(ring: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Unit normals away from the material (on the left) and half the two adjacent edges."""
    nxt, prv = np.roll(ring, -1, axis=0), np.roll(ring, 1, axis=0)
    chord = nxt - prv
    n = np.column_stack([chord[:, 1], -chord[:, 0]])
    n /= np.hypot(n[:, 0], n[:, 1])[:, None]
    lengths = 0.5 * (np.hypot(*(nxt - ring).T) + np.hypot(*(ring - prv).T))
    return n, lengths


def test_vertex_sums_agree_with_shapely():
    outer, holes = _section()
    mine = _figures([outer[None], holes[0][None]])
    ref = truth(outer, holes)  # shapely area and centroid, vertex sums for the moments
    assert mine["area_mm2"][0] == pytest.approx(ref["area"], rel=1e-12)
    assert mine["centroid_x_mm"][0] == pytest.approx(ref["centroid"][0], rel=1e-12)
    assert mine["ixy_mm4"][0] == pytest.approx(ref["ixy"], rel=1e-9)


def _nominal_weights(model, rings):
    """The rings' figures (vertex sums, :func:`_figures`) and the figure weights at them."""
    nominal = {k: float(v[0]) for k, v in _figures([r[None] for r in rings]).items()}
    weights = figure_weights(
        model,
        nominal["area_mm2"],
        (nominal["centroid_x_mm"], nominal["centroid_y_mm"]),
        nominal["ixx_mm4"],
        nominal["iyy_mm4"],
        nominal["ixy_mm4"],
    )
    return nominal, weights


def test_edge_term_matches_monte_carlo_of_independent_normal_noise():
    outer, holes = _section()
    rings = [outer, *holes]
    sigma_mm = 0.004  # normal displacement of each vertex, 1 sigma (a noisy 300 dpi scan)
    # The model's noise has a correlation length of one pixel: with one vertex per
    # attributed length l_k, give each vertex a "pixel" of its own length, so that the
    # stated variance sum_k w_k^2 sigma^2 l_k^2 is that of independent vertices.
    per_ring = [_vertex_normals_and_lengths(r) for r in rings]
    scales = [lk for _, lk in per_ring]
    sigma_px = [sigma_mm / lk for lk in scales]
    model = build_edge_model(outer, holes, sigma_px, scales, offset_mm=0.0)
    nominal, weights = _nominal_weights(model, rings)
    edge, thresh = part_uncertainty(model, weights)
    assert all(v == 0.0 for v in thresh.values())

    trials = 4000
    rng = np.random.default_rng(20261202)
    moved = []
    for ring, (n, _) in zip(rings, per_ring):
        dn = rng.normal(0.0, sigma_mm, size=(trials, len(ring)))
        moved.append(ring[None] + dn[..., None] * n[None])
    figs = _figures(moved)
    # a sample variance s^2 from T draws: (T - 1) s^2 / sigma^2 ~ chi2(T - 1); 99.9 %
    # two-sided band for s / sigma: [0.964, 1.037]. The linearisation (weights taken at
    # the vertices, first order in d = 0.004 mm on a 30 mm part) adds < 1 % (the
    # piecewise-linear displacement between vertices differs from point weights by
    # O((l / size)^2)); the band is widened by that 1 %. Observed (seed 20261202): MC / model
    # = 0.995 (area), 1.012, 0.997 (centroid), 0.984, 1.017, 1.001 (Ixx, Iyy, Ixy).
    lo, hi = (math.sqrt(stats.chi2.ppf(q, trials - 1) / (trials - 1)) for q in (0.0005, 0.9995))
    ratios = {}
    for name in FIGURES:
        ratios[name] = float(np.std(figs[name], ddof=1)) / edge[name]
    assert all(lo - 0.01 < r < hi + 0.01 for r in ratios.values()), (ratios, lo, hi)


def test_threshold_term_is_the_exact_offset_derivative():
    outer, holes = _section()
    offset_mm = 0.01
    ones = [np.ones(len(r)) for r in [outer, *holes]]
    model = build_edge_model(outer, holes, [0 * o for o in ones], ones, offset_mm=offset_mm)
    ref = truth(outer, holes)
    weights = figure_weights(model, ref["area"], ref["centroid"], ref["ixx"], ref["iyy"], ref["ixy"])
    edge, thresh = part_uncertainty(model, weights)
    assert all(v == 0.0 for v in edge.values())

    poly = shapely.Polygon(outer, holes)
    d = 1e-3  # mm: the mitred buffer of this polygon keeps its topology for |d| << 0.1 mm

    def buffered(dd: float) -> dict:
        b = poly.buffer(dd, join_style="mitre", mitre_limit=10.0)
        return truth(np.asarray(b.exterior.coords)[:-1], [np.asarray(r.coords)[:-1] for r in b.interiors])

    plus, minus = buffered(d), buffered(-d)
    # area: A(d) = A + P d + K d^2 exactly (straight edges, mitred corners): the central
    # difference is P, the perimeter of the outline and the hole
    perimeter = poly.length
    assert (plus["area"] - minus["area"]) / (2 * d) == pytest.approx(perimeter, rel=1e-9)
    assert thresh["area_mm2"] == pytest.approx(perimeter * offset_mm, rel=1e-9)
    # centroid and centroidal moments: first derivatives by central difference (error
    # O(d^2) relative, 1e-6 here), times the offset
    deriv = {
        "centroid_x_mm": (plus["centroid"][0] - minus["centroid"][0]) / (2 * d),
        "centroid_y_mm": (plus["centroid"][1] - minus["centroid"][1]) / (2 * d),
        "ixx_mm4": (plus["ixx"] - minus["ixx"]) / (2 * d),
        "iyy_mm4": (plus["iyy"] - minus["iyy"]) / (2 * d),
        "ixy_mm4": (plus["ixy"] - minus["ixy"]) / (2 * d),
    }
    for name, dv in deriv.items():
        # vertex weights on a 0.1 mm sampled boundary are exact only to O(l^2) of the
        # weight's curvature: observed relative differences 7e-7 (centroid), 1.3e-5 (Ixx),
        # 1.0e-5 (Iyy), 3e-9 (Ixy); limit 1e-4
        assert thresh[name] == pytest.approx(abs(dv) * offset_mm, rel=1e-4), name


def test_combine_is_root_sum_square_and_never_drops_an_unknown_term():
    # GUM (JCGM 100:2008) 5.1.2: root-sum-square of independent terms
    assert combine(3.0, 4.0) == pytest.approx(5.0)
    assert math.isnan(combine(3.0, float("nan"), 4.0))  # unknown stays unknown, never 0
    assert combine(3.0, float("inf")) == math.inf
    assert combine() == 0.0


# ----------------------------------------------------------------------- model-error floor (issue 12)


def test_level_field_modes_match_monte_carlo_of_fitted_quadratic_levels():
    # The threshold term treats the level error as the error of a least-squares quadratic
    # surface fitted to n noisy samples (as the segment stage fits the local levels). Here
    # the fits are done independently with numpy's lstsq on samples spread like the
    # boundary (every vertex, with noise s), each fit's value at the vertices moves them
    # along their normals by K times the fitted error. Regression theory (common practice):
    # the fit's error covariance is s^2 (A^T A)^-1, which the orthonormal modes express.
    from scanmass.uncertainty import threshold_uncertainty

    outer, holes = _section()
    rings = [outer, *holes]
    per_ring = [_vertex_normals_and_lengths(r) for r in rings]
    scales = [lk for _, lk in per_ring]
    model = build_edge_model(outer, holes, [0 * s for s in scales], scales, offset_mm=0.0)
    nominal, weights = _nominal_weights(model, rings)
    pts = np.concatenate(rings)
    lengths = np.concatenate(scales)
    n = len(pts)
    # samples weighted by attributed length: draw the fit's samples at the vertices with
    # weights l_k / mean(l), the continuous-boundary version of "samples along the boundary"
    w = lengths / lengths.mean()
    c = pts.mean(axis=0)
    x, y = ((pts - c) / 20.0).T
    a = np.column_stack([np.ones_like(x), x, y, x * x, x * y, y * y])
    s, k_mm = 0.01, 0.05
    trials = 3000
    rng = np.random.default_rng(7)
    noise = rng.normal(0.0, s, size=(trials, n)) / np.sqrt(w)  # weighted least squares == these variances
    coef = np.linalg.lstsq(a * np.sqrt(w)[:, None], (noise * np.sqrt(w)).T, rcond=None)[0]
    field = (a @ coef).T  # (trials, n) fitted level error at each vertex
    moved, start = [], 0
    for ring, (nrm, _) in zip(rings, per_ring):
        d = k_mm * field[:, start : start + len(ring)]
        moved.append(ring[None] + d[..., None] * nrm[None])
        start += len(ring)
    figs = _figures(moved)
    stated = threshold_uncertainty(model, weights, k_mm * s / math.sqrt(n), 0.0)
    lo, hi = (math.sqrt(stats.chi2.ppf(q, trials - 1) / (trials - 1)) for q in (0.0005, 0.9995))
    ratios = {name: float(np.std(figs[name], ddof=1)) / stated[name] for name in FIGURES if stated[name] > 0}
    # 1 % for the linearisation, as in the edge-term test
    assert all(lo - 0.01 < r < hi + 0.01 for r in ratios.values()), (ratios, lo, hi)


def test_interpolation_residual_matches_opencv_cubic_crossings():
    # The model floor's interpolation residual is computed from a 1-D model of Keys' cubic
    # kernel in numpy; here the same quantity is measured with OpenCV's own INTER_CUBIC
    # remap on a pixel-integrated Gaussian edge written in closed form with scipy
    # (integral of Phi(x / s) = s (z Phi(z) + phi(z)), z = x / s; common practice), at 32
    # sub-pixel phases: Newton steps on the remapped values find the 0.5 crossing.
    import cv2
    from scipy.special import ndtr

    from scanmass.uncertainty import interpolation_residual_px

    for blur_opt in (0.6, 0.9, 1.4):
        n = np.arange(40, dtype=float)

        def step_integral(x: np.ndarray, s: float = blur_opt) -> np.ndarray:
            z = x / s
            return s * (z * ndtr(z) + np.exp(-0.5 * z * z) / math.sqrt(2 * math.pi))

        errors = []
        for phase in np.arange(32) / 32.0:
            edge = 20.0 + phase
            img = np.repeat((step_integral(n + 0.5 - edge) - step_integral(n - 0.5 - edge))[None], 5, axis=0)
            img = img.astype(np.float32)
            x = edge
            for _ in range(30):
                mx = np.array([[x], [x + 1e-3], [x - 1e-3]], np.float32)
                v = cv2.remap(img, mx, np.full((3, 1), 2.0, np.float32), cv2.INTER_CUBIC).ravel().astype(float)
                x -= (v[0] - 0.5) / ((v[1] - v[2]) / 2e-3)
            errors.append(x - edge)
        measured = float(np.sqrt(np.mean(np.square(errors))))
        # the Gaussian-equivalent sigma the segment stage reports includes the pixel box
        model = interpolation_residual_px(math.sqrt(blur_opt**2 + 1.0 / 12.0))
        # the model rounds sigma to 0.01 px; float32 remap: agree within 10 %
        assert measured == pytest.approx(model, rel=0.10), (blur_opt, measured, model)
        assert 0.001 < model < 0.04  # OpenCV's a = -0.75 kernel: about 0.002-0.03 px


# ------------------------------------------------------------------ rendered scans, end to end


def _rendered_z(mode: str, n: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """|error| / sigma over n rendered one-part scans (6 figures each), image terms only.

    Parts at random sub-pixel positions and angles (a disc, a turned rectangle, a plate
    with a hole), 300 dpi, blur 0.6-1.4 px, both polarities; ``mode`` is ``clean`` (no
    noise), ``noisy`` (0.002-0.008) or ``jpeg`` (noisy, then a JPEG round trip at quality
    85-95 with pillow). Truth: shapely's area and centroid, the vertex sums for the
    moments (tests/polygon_truth.py). Returns z with all image terms (edge, threshold,
    model) and z with the edge and threshold terms only.
    """
    import io

    from PIL import Image

    from scanmass import measure
    from scanmass.testing.scans import SynthPart, rectangle, render_scan

    rng = np.random.default_rng(seed)
    z_all, z_no_model = [], []
    for k in range(n):
        cx, cy = 12 + rng.uniform(0, 1), 12 + rng.uniform(0, 1)
        if k % 3 == 0:
            part = SynthPart(circle(cx, cy, rng.uniform(4, 8)))
        elif k % 3 == 1:
            part = SynthPart(rectangle(cx - 6, cy - 4, 12, 8, angle_deg=rng.uniform(0, 90)))
        else:
            hole = circle(cx + rng.uniform(-1, 1), cy, rng.uniform(1.5, 3))
            part = SynthPart(rectangle(cx - 7, cy - 5, 14, 10, angle_deg=rng.uniform(0, 90)), [hole])
        bg, fg = (0.8, 0.06) if k % 2 == 0 else (0.04, 0.65)
        noise = 0.0 if mode == "clean" else float(rng.uniform(0.002, 0.008))
        scan = render_scan(
            [part], dpi=300, size_mm=(25, 25), blur_px=float(rng.uniform(0.6, 1.4)), noise=noise,
            background=bg, foreground=fg, seed=int(rng.integers(1 << 30)),
        )  # fmt: skip
        img = scan.image
        if mode == "jpeg":
            buf = io.BytesIO()
            Image.fromarray(img).save(buf, format="JPEG", quality=int(rng.integers(85, 96)))
            img = np.asarray(Image.open(io.BytesIO(buf.getvalue())).convert("L"))
        p = measure(img, dpi=300, dpi_rel_u=0.0).parts[0]
        t = truth(part.outer_mm, list(part.holes_mm))
        err = {
            "area_mm2": p.area_mm2 - t["area"],
            "centroid_x_mm": p.centroid_mm[0] - t["centroid"][0],
            "centroid_y_mm": p.centroid_mm[1] - t["centroid"][1],
            "ixx_mm4": p.ixx_mm4 - t["ixx"],
            "iyy_mm4": p.iyy_mm4 - t["iyy"],
            "ixy_mm4": p.ixy_mm4 - t["ixy"],
        }
        terms = p.uncertainty_terms
        for f in FIGURES:
            z_all.append(abs(err[f]) / combine(terms["edge"][f], terms["threshold"][f], terms["model"][f]))
            z_no_model.append(abs(err[f]) / combine(terms["edge"][f], terms["threshold"][f]))
    return np.array(z_all), np.array(z_no_model)


def test_model_floor_covers_noise_free_renders_monte_carlo():
    # Monte Carlo over sub-pixel placements of noise-free scans: what is left is the model
    # error (interpolation against the pixel phase, corners, quantisation), which the
    # model-error floor must cover without inflating: DESIGN.md asks for 95-99 % within
    # 3 sigma and a median |error| / sigma of about 0.4-1.2 (0.67 for an honest Gaussian).
    # Observed (seed 7, 12 parts x 6 figures): 100 % within 3 sigma, median 0.44, largest
    # 1.2; without the model term 69 % within 3 sigma. With 72 values the median of |z|
    # has a standard error of about 0.1: the band [0.25, 1.2] fails a floor inflated about
    # threefold or one too small by half.
    z, z_without = _rendered_z("clean", 12, seed=7)
    assert np.mean(z <= 3.0) >= 0.95, sorted(z)[-5:]
    assert 0.25 <= float(np.median(z)) <= 1.2, float(np.median(z))
    # the set is one where the floor matters: without it noise-free errors are not covered
    assert np.mean(z_without <= 3.0) < 0.9, np.mean(z_without <= 3.0)


@pytest.mark.slow
def test_image_uncertainty_covers_noisy_and_jpeg_renders():
    # The coverage target (DESIGN.md "Error model") on a small fixed set beside the
    # regression tier: noisy scans and the same after a JPEG round trip (the edge-model
    # residual and the profile asymmetry are what cover JPEG's block quantisation).
    # Observed (seed 7, 12 + 12 parts x 6 figures): noisy 100 % within 3 sigma, median
    # 0.28; JPEG 100 %, median 0.45, largest 2.3. No error may lie beyond 5 sigma (the
    # issue's "no case beyond 5 sigma without a warning"; these files give no warning).
    for mode in ("noisy", "jpeg"):
        z, _ = _rendered_z(mode, 12, seed=7)
        assert np.mean(z <= 3.0) >= 0.95, (mode, sorted(z)[-5:])
        assert float(z.max()) <= 5.0, (mode, float(z.max()))
        assert 0.2 <= float(np.median(z)) <= 1.2, (mode, float(np.median(z)))
