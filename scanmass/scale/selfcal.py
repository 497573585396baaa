"""Radial lens distortion estimated from the mat's own marker corners (no lens profile).

A photo of the flat mat maps its printed corners X (mm) to ideal pixels by a homography
``G``; a lens then moves each pixel radially about the principal point. With the
principal point at the image centre and OpenCV's radial model
``p = c + f (1 + k1 r^2 + k2 r^4) u``, ``u = (q - c) / f``, ``r = |u|``, the eight
parameters of ``G`` and ``k1``, ``k2`` are fitted to the detected corners by nonlinear
least squares. The focal length only fixes the units of ``k1`` and ``k2`` (any ``f``
gives the same correction once the coefficients are refitted); the assumed one is kept so
that the coefficients read like a calibration's.

When the corners come four to a marker, one more parameter is fitted: a common offset
``d`` (px) of every corner along its marker's diagonal, outward. An edge threshold that
is off (a tone curve that is not sRGB, blur) makes every printed square look larger or
smaller by the same amount in pixels, which is more millimetres where the lens compresses
the view; left out, that pattern is read as distortion (k1 off by a few of its stated
sigmas on path-traced photos with a non-sRGB tone curve).

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
    corner_offset_px: float = 0.0


def _project(
    params: np.ndarray, pts_mm: np.ndarray, centre: np.ndarray, f_px: float, outward: np.ndarray | None = None
) -> np.ndarray:
    g = np.append(params[:8], 1.0).reshape(3, 3)
    k1, k2 = params[8], params[9]
    q = np.column_stack([pts_mm, np.ones(len(pts_mm))]) @ g.T
    q = q[:, :2] / q[:, 2:3]
    u = (q - centre) / f_px
    r2 = np.sum(u * u, axis=1)
    p = centre + f_px * u * (1.0 + k1 * r2 + k2 * r2 * r2)[:, None]
    if outward is not None:  # every corner moved along its marker's diagonal by one common offset
        p = p + params[10] * outward
    return p


def _outward(pts_px: np.ndarray, per_marker: int) -> np.ndarray:
    """Unit vectors from each marker's centre to its corners (image pixels)."""
    groups = pts_px.reshape(-1, per_marker, 2)
    d = groups - groups.mean(axis=1, keepdims=True)
    d /= np.maximum(np.linalg.norm(d, axis=2, keepdims=True), 1e-12)
    return d.reshape(-1, 2)


def estimate_radial_distortion(
    pts_px: np.ndarray,
    pts_mm: np.ndarray,
    image_size: tuple[int, int],
    f_px: float,
    *,
    noise_px: float = 0.1,
    corners_per_marker: int | None = None,
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
    corners_per_marker : int, optional
        When the points come in consecutive groups of this many corners of one square
        marker, a common outward offset of the corners (px) is fitted too.

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
    outward = None
    if corners_per_marker and len(pts_px) % corners_per_marker == 0 and len(pts_px) >= 4 * corners_per_marker:
        outward = _outward(pts_px, corners_per_marker)
    x0 = np.concatenate([g0.ravel()[:8], [0.0, 0.0], [0.0] if outward is not None else []])
    before = _project(x0[:10], pts_mm, centre, f_px) - pts_px
    rms_before = math.sqrt(float(np.mean(np.sum(before**2, axis=1))))

    def residual(p: np.ndarray) -> np.ndarray:
        return (_project(p, pts_mm, centre, f_px, outward) - pts_px).ravel()

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
        profile=profile,
        k_u=k_u,
        rms_before_px=rms_before,
        rms_after_px=rms_after,
        points=len(pts_px),
        corner_offset_px=float(sol.x[10]) if outward is not None else 0.0,
    )
