"""Radial lens distortion estimated from the mat's own marker corners (no lens profile).

A photo of the flat mat maps its printed corners X (mm) to ideal pixels by a homography
``G``; a lens then moves each pixel radially about the principal point. With the
principal point at the image centre and OpenCV's radial model
``p = c + f (1 + k1 r^2 + k2 r^4) u``, ``u = (q - c) / f``, ``r = |u|``, the eight
parameters of ``G`` and ``k1``, ``k2`` are fitted to the detected corners by nonlinear
least squares. The focal length only fixes the units of ``k1`` and ``k2`` (any ``f``
gives the same correction once the coefficients are refitted); the assumed one is kept so
that the coefficients read like a calibration's.

The result is a :class:`~scanmass.scale.lens.LensProfile` whose ``rms_px`` is the fit's
residual; a profile from ``scanmass lens`` (many views, free principal point) stays
better and is used whenever given.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import cv2
import numpy as np

from scanmass.scale.lens import LensProfile

__all__ = ["SelfCalibration", "estimate_radial_distortion"]


@dataclass(frozen=True)
class SelfCalibration:
    """A lens profile fitted to one photo's marker corners, with the fit's statistics."""

    profile: LensProfile
    k_u: tuple[float, float]
    rms_before_px: float
    rms_after_px: float
    points: int


def _project(params: np.ndarray, pts_mm: np.ndarray, centre: np.ndarray, f_px: float) -> np.ndarray:
    g = np.append(params[:8], 1.0).reshape(3, 3)
    k1, k2 = params[8], params[9]
    q = np.column_stack([pts_mm, np.ones(len(pts_mm))]) @ g.T
    q = q[:, :2] / q[:, 2:3]
    u = (q - centre) / f_px
    r2 = np.sum(u * u, axis=1)
    return centre + f_px * u * (1.0 + k1 * r2 + k2 * r2 * r2)[:, None]


def estimate_radial_distortion(
    pts_px: np.ndarray,
    pts_mm: np.ndarray,
    image_size: tuple[int, int],
    f_px: float,
    *,
    noise_px: float = 0.1,
) -> SelfCalibration | None:
    """Fit a homography and radial distortion (k1, k2) to one photo's marker corners.

    Parameters
    ----------
    pts_px : (N, 2) ndarray
        Detected corners in the photo (distorted pixels).
    pts_mm : (N, 2) ndarray
        The same corners on the mat, mm.
    image_size : (int, int)
        Width and height of the photo; the principal point is taken at its centre.
    f_px : float
        Assumed focal length in pixels (the units of k1 and k2).
    noise_px : float
        Standard deviation of a corner's position, for the coefficients' uncertainty.

    Returns
    -------
    SelfCalibration or None
        None with fewer than 12 corners or when the fit fails.

    References
    ----------
    .. [1] Z. Zhang, "A flexible new technique for camera calibration", IEEE Trans. PAMI
       22(11), 1330-1334, 2000 (radial model, nonlinear refinement of a homography).
    """
    from scipy.optimize import least_squares

    pts_px = np.asarray(pts_px, dtype=float).reshape(-1, 2)
    pts_mm = np.asarray(pts_mm, dtype=float).reshape(-1, 2)
    if len(pts_px) < 12:
        return None
    w, h = image_size
    centre = np.array([(w - 1) / 2.0, (h - 1) / 2.0])
    g0, _ = cv2.findHomography(pts_mm, pts_px, 0)
    if g0 is None:
        return None
    g0 = g0 / g0[2, 2]
    x0 = np.concatenate([g0.ravel()[:8], [0.0, 0.0]])
    before = _project(x0, pts_mm, centre, f_px) - pts_px
    rms_before = math.sqrt(float(np.mean(np.sum(before**2, axis=1))))

    def residual(p: np.ndarray) -> np.ndarray:
        return (_project(p, pts_mm, centre, f_px) - pts_px).ravel()

    sol = least_squares(residual, x0, method="lm", x_scale="jac")
    if not sol.success:
        return None
    res = sol.fun.reshape(-1, 2)
    rms_after = math.sqrt(float(np.mean(np.sum(res**2, axis=1))))
    dof = max(1, sol.fun.size - len(x0))
    sigma2 = max(float(np.sum(sol.fun**2)) / dof, noise_px**2)
    try:
        cov = np.linalg.inv(sol.jac.T @ sol.jac) * sigma2
        k_u = (math.sqrt(max(cov[8, 8], 0.0)), math.sqrt(max(cov[9, 9], 0.0)))
    except np.linalg.LinAlgError:
        return None
    k1, k2 = float(sol.x[8]), float(sol.x[9])
    camera = np.array([[f_px, 0.0, centre[0]], [0.0, f_px, centre[1]], [0.0, 0.0, 1.0]])
    profile = LensProfile(
        camera_matrix=camera,
        dist_coeffs=np.array([k1, k2, 0.0, 0.0, 0.0]),
        image_size=(int(w), int(h)),
        rms_px=rms_after,
        photos=1,
        points=len(pts_px),
        source=None,
    )
    return SelfCalibration(
        profile=profile, k_u=k_u, rms_before_px=rms_before, rms_after_px=rms_after, points=len(pts_px)
    )
