"""Plane-to-image homography fitting and its sampled uncertainty (scanmass.scale.homography).

References: OpenCV's cv2.perspectiveTransform and cv2.findHomography (reference library)
for mapping points and for the fit on exact correspondences; the 1/sqrt(N) law of the
standard error of a least-squares estimate from N independent observations (common
practice; first-order, e.g. Hartley and Zisserman, Multiple View Geometry, 2nd ed.,
section 5.2, from memory).
"""

from __future__ import annotations

import cv2
import numpy as np
from scipy import stats

from scanmass.scale.homography import apply_h, fit_homography, sample_homographies

#: A plane (mm) -> image (px) homography of a tilted phone view: a 10 px/mm scale, a
#: rotation, a y flip (image rows down) and perspective terms of a ~20 deg tilt.
G_TRUE = np.array(
    [
        [9.6, 1.3, 410.0],
        [0.9, -10.2, 1900.0],
        [4.0e-4, -2.5e-4, 1.0],
    ]
)


def _grid(n: int, size_mm: float = 150.0) -> np.ndarray:
    u = np.linspace(0.0, size_mm, n)
    return np.array([[x, y] for y in u for x in u], float)


def _cv_map(matrix: np.ndarray, pts: np.ndarray) -> np.ndarray:
    return cv2.perspectiveTransform(np.asarray(pts, np.float64).reshape(-1, 1, 2), matrix).reshape(-1, 2)


def test_apply_h_matches_opencv_perspective_transform():
    pts = np.random.default_rng(0).uniform(-50.0, 200.0, size=(50, 2))
    assert np.allclose(apply_h(G_TRUE, pts), _cv_map(G_TRUE, pts), rtol=0, atol=1e-9)


def test_fit_recovers_a_known_homography_from_exact_points():
    mm = _grid(7)
    px = _cv_map(G_TRUE, mm)
    fit = fit_homography(px, mm)
    assert fit is not None and fit.inliers.all()
    # the same matrix up to scale (both normalised to [2, 2] = 1). OpenCV's refinement
    # stops at about 1e-5 px reprojection error (observed 1.1e-5 px rms), i.e. ~1e-6
    # relative in the matrix: the limits are 1e-4 px and 1e-5 relative.
    assert np.allclose(fit.plane_to_px, G_TRUE, rtol=1e-5, atol=1e-9)
    product = fit.plane_to_px @ fit.px_to_plane  # the identity up to scale
    assert np.allclose(product / product[2, 2], np.eye(3), atol=1e-9)
    # and the same as OpenCV's own least-squares fit of these points
    g_cv, _ = cv2.findHomography(mm, px, 0)
    probe = np.random.default_rng(1).uniform(0.0, 150.0, size=(40, 2))
    assert np.allclose(apply_h(fit.plane_to_px, probe), _cv_map(g_cv, probe), atol=1e-4)
    assert np.allclose(apply_h(fit.plane_to_px, probe), _cv_map(G_TRUE, probe), atol=1e-4)
    assert np.allclose(apply_h(fit.px_to_plane, _cv_map(G_TRUE, probe)), probe, atol=1e-5)  # 10 px/mm
    assert fit.rms_px < 1e-4 and fit.rms_mm < 1e-5


def test_fit_rejects_a_gross_outlier():
    mm = _grid(6)
    px = _cv_map(G_TRUE, mm)
    px[7] += [25.0, -18.0]  # a wrongly detected corner
    fit = fit_homography(px, mm)
    assert fit is not None
    assert not fit.inliers[7] and fit.inliers.sum() == len(mm) - 1
    assert np.allclose(fit.plane_to_px, G_TRUE, rtol=1e-5, atol=1e-9)


def _spread_at(samples: list[np.ndarray], point_px: np.ndarray) -> float:
    """RMS over samples of the 2-D scatter of one pixel point mapped to mm."""
    mapped = np.array([apply_h(h, point_px)[0] for h in samples])
    return float(np.sqrt(np.sum(np.var(mapped, axis=0, ddof=1))))


def test_sampled_spread_shrinks_as_one_over_sqrt_n():
    # The same 4 x 4 layout of marker corners, each seen m times (m = 1, 4, 16): the
    # least-squares fit on m N points equals the fit on their means, whose noise is
    # sigma / sqrt(m), so the spread of any mapped point scales as 1 / sqrt(m) (first
    # order; exactly so for a linear model). Sample spreads from K = 400 refits each.
    sigma_px, count = 0.3, 400
    base = _grid(4)
    probes = _cv_map(G_TRUE, np.array([[75.0, 75.0], [140.0, 10.0]]))
    spreads = {}
    for m in (1, 4, 16):
        mm = np.tile(base, (m, 1))
        fit = fit_homography(_cv_map(G_TRUE, mm), mm)
        samples = sample_homographies(fit, mm, sigma_px=sigma_px, count=count, seed=10 + m)
        assert len(samples) == count
        spreads[m] = [_spread_at(samples, p[None, :]) for p in probes]
    # each spread is the root of the trace of a 2-D sample covariance from K = 400 draws,
    # with between K - 1 (one dominant axis) and 2 (K - 1) degrees of freedom; the ratio
    # of two independent ones gets a 99.9 % two-sided band from the F distribution on the
    # conservative K - 1 each: [0.85, 1.18]. Observed (seeds 11, 14, 26): 0.93-0.97.
    dof = count - 1
    lo, hi = (float(np.sqrt(stats.f.ppf(q, dof, dof))) for q in (0.0005, 0.9995))
    for k in range(len(probes)):
        for m in (4, 16):
            ratio = spreads[1][k] / spreads[m][k] / np.sqrt(m)
            assert lo < ratio < hi, (k, m, ratio, lo, hi)


def test_sampled_spread_matches_first_order_covariance():
    # Independent check of the absolute size: the first-order (Gauss-Newton) covariance of
    # the 8 homography parameters, sigma^2 (J^T J)^-1 with J the Jacobian of the projected
    # points, pushed through to one mapped pixel point by finite differences.
    sigma_px, count = 0.3, 600
    mm = _grid(5)
    fit = fit_homography(_cv_map(G_TRUE, mm), mm)
    samples = sample_homographies(fit, mm, sigma_px=sigma_px, count=count, seed=3)
    theta0 = G_TRUE.ravel()[:8]

    def project(theta):
        return apply_h(np.append(theta, 1.0).reshape(3, 3), mm).ravel()

    def jac(f, x, h=1e-7):
        cols = []
        for i in range(len(x)):
            d = np.zeros_like(x)
            d[i] = h * max(abs(x[i]), 1e-3)
            cols.append((f(x + d) - f(x - d)) / (2 * d[i]))
        return np.column_stack(cols)

    cov_theta = sigma_px**2 * np.linalg.inv(jac(project, theta0).T @ jac(project, theta0))
    probe_px = _cv_map(G_TRUE, np.array([[120.0, 30.0]]))

    def to_mm(theta):
        return apply_h(np.linalg.inv(np.append(theta, 1.0).reshape(3, 3)), probe_px)[0]

    jp = jac(to_mm, theta0)
    cov_point = jp @ cov_theta @ jp.T
    predicted = float(np.sqrt(np.trace(cov_point)))
    observed = _spread_at(samples, probe_px)
    # chi-square band (99.9 %, two-sided) of a sample variance on the conservative K - 1
    # degrees of freedom (see above): [0.905, 1.099]. Observed ratio 0.952 with seed 3
    # (0.959, 1.054, 0.984, 0.964 with seeds 1, 2, 4, 5).
    dof = count - 1
    lo, hi = (float(np.sqrt(stats.chi2.ppf(q, dof) / dof)) for q in (0.0005, 0.9995))
    assert lo < observed / predicted < hi, (observed, predicted, lo, hi)
