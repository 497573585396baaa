"""Plane-to-image homographies: robust fitting, sampled covariance, camera geometry.

Conventions: pixel coordinates ``(x_px, y_px)`` are OpenCV's (column, row from the top,
pixel centres at integers); plane coordinates are millimetres in a right-handed frame
with y up (the mat frame of DESIGN.md). A homography ``G`` maps plane mm to pixels,
its inverse ``H`` pixels to plane mm; both are normalised to ``[2, 2] = 1``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import cv2
import numpy as np
import numpy.typing as npt

__all__ = [
    "HomographyFit",
    "apply_h",
    "fit_homography",
    "sample_homographies",
    "local_scale",
    "focal_from_homography",
    "decompose_plane",
    "elevated_plane_homography",
    "footprint_maps_mm",
    "ElevationHook",
    "raised_outline_mm",
]


def apply_h(matrix: np.ndarray, points: npt.ArrayLike) -> np.ndarray:
    """Apply a 3x3 homography to (N, 2) points."""
    pts = np.asarray(points, dtype=float).reshape(-1, 2)
    h = pts @ matrix[:, :2].T + matrix[:, 2]
    return h[:, :2] / h[:, 2:3]


def _normalised(matrix: np.ndarray) -> np.ndarray:
    return matrix / matrix[2, 2]


@dataclass
class HomographyFit:
    """A fitted plane-to-image homography and its quality.

    Attributes
    ----------
    plane_to_px : (3, 3) ndarray
        ``G``: plane mm -> pixels.
    px_to_plane : (3, 3) ndarray
        ``H = G^-1``: pixels -> plane mm.
    inliers : (N,) bool ndarray
        Points kept by the robust step.
    residuals_px : (N, 2) ndarray
        ``G(X) - x`` for every point (outliers included).
    rms_px, rms_mm : float
        Root-mean-square 2-D reprojection error of the inliers, in the image and on
        the plane.
    sigma_px : float
        Standard deviation of one point coordinate implied by the residuals
        (sum of squares over 2 N - 8 degrees of freedom).
    """

    plane_to_px: np.ndarray
    px_to_plane: np.ndarray
    inliers: np.ndarray
    residuals_px: np.ndarray
    rms_px: float
    rms_mm: float
    sigma_px: float
    samples: list[np.ndarray] = field(default_factory=list)


def fit_homography(points_px: np.ndarray, points_mm: np.ndarray, *, ransac_px: float = 3.0) -> HomographyFit | None:
    """Fit ``G``: plane mm -> px robustly, then by least squares on the inliers.

    The plane coordinates are exact (printed) and the image points noisy, so the
    least-squares step minimises the reprojection error in pixels (OpenCV's
    ``findHomography`` with method 0 refines the direct linear solution with
    Levenberg-Marquardt on that error).

    Returns None when fewer than 4 usable points remain.

    References
    ----------
    .. [1] M. A. Fischler and R. C. Bolles, "Random sample consensus", Comm. ACM
       24(6), 381-395, 1981.
    .. [2] R. Hartley and A. Zisserman, Multiple View Geometry in Computer Vision,
       2nd ed., Cambridge University Press, 2004, sections 4.2-4.7 (normalised DLT,
       geometric error, robust estimation).
    """
    px = np.asarray(points_px, dtype=np.float64).reshape(-1, 2)
    mm = np.asarray(points_mm, dtype=np.float64).reshape(-1, 2)
    if len(px) < 4:
        return None
    g0, mask = cv2.findHomography(
        mm, px, cv2.RANSAC, ransacReprojThreshold=float(ransac_px), maxIters=4000, confidence=0.999
    )
    if g0 is None:
        return None
    inl = mask.ravel().astype(bool)
    if inl.sum() < 4:
        return None
    g, _ = cv2.findHomography(mm[inl], px[inl], 0)
    if g is None:
        return None
    g = _normalised(g)
    # a second pass: points that the least-squares fit explains well rejoin
    res = apply_h(g, mm) - px
    inl = np.hypot(res[:, 0], res[:, 1]) < ransac_px
    if inl.sum() >= 4:
        g = _normalised(cv2.findHomography(mm[inl], px[inl], 0)[0])
    h = _normalised(np.linalg.inv(g))
    res = apply_h(g, mm) - px
    n = int(inl.sum())
    ssr = float(np.sum(res[inl] ** 2))
    rms_px = math.sqrt(ssr / n)
    res_mm = apply_h(h, px[inl]) - mm[inl]
    rms_mm = math.sqrt(float(np.mean(np.sum(res_mm**2, axis=1))))
    sigma = math.sqrt(ssr / max(2 * n - 8, 1))
    return HomographyFit(
        plane_to_px=g, px_to_plane=h, inliers=inl, residuals_px=res, rms_px=rms_px, rms_mm=rms_mm, sigma_px=sigma
    )


def sample_homographies(
    fit: HomographyFit, points_mm: np.ndarray, *, sigma_px: float, count: int = 64, seed: int = 0
) -> list[np.ndarray]:
    """Pixel -> plane homographies refitted to image points perturbed by N(0, sigma_px^2).

    A parametric bootstrap: the inlier points are placed where the fitted model puts
    them, each coordinate is moved by independent Gaussian noise of the observed size,
    and the homography is fitted again; the spread of the ``count`` results is the
    homography's uncertainty as it acts on any figure computed through it.

    References
    ----------
    .. [1] JCGM 101:2008, Evaluation of measurement data -- Supplement 1 to the "Guide
       to the expression of uncertainty in measurement" -- Propagation of
       distributions using a Monte Carlo method.
    """
    mm = np.asarray(points_mm, dtype=np.float64).reshape(-1, 2)[fit.inliers]
    ideal = apply_h(fit.plane_to_px, mm)
    rng = np.random.default_rng(seed)
    out = []
    for _ in range(count):
        noisy = ideal + rng.normal(0.0, sigma_px, size=ideal.shape)
        g, _ = cv2.findHomography(mm, noisy, 0)
        if g is None:
            continue
        out.append(_normalised(np.linalg.inv(g)))
    return out


def local_scale(px_to_plane: np.ndarray, point_px: np.ndarray) -> float:
    """Geometric-mean mm per px of a pixel -> mm homography at one pixel point."""
    p = np.asarray(point_px, dtype=float).reshape(1, 2)
    d = 0.5
    ex = apply_h(px_to_plane, p + [d, 0]) - apply_h(px_to_plane, p - [d, 0])
    ey = apply_h(px_to_plane, p + [0, d]) - apply_h(px_to_plane, p - [0, d])
    return math.sqrt(abs(float(ex[0, 0] * ey[0, 1] - ex[0, 1] * ey[0, 0])))


def focal_from_homography(plane_to_px: np.ndarray, principal_px: tuple[float, float]) -> float | None:
    """Focal length in px from one plane's homography, with square pixels and a known principal point.

    With ``K = [[f, 0, cx], [0, f, cy], [0, 0, 1]]`` and ``G = K [r1 r2 t]``, the columns
    of ``K^-1 G`` are orthogonal and of equal length; each condition is linear in
    ``1 / f^2`` and the two are solved together by least squares. Returns None when
    the view is too close to fronto-parallel (the conditions do not fix f) or the
    solution is not positive.

    References
    ----------
    .. [1] Z. Zhang, "A flexible new technique for camera calibration", IEEE Trans.
       PAMI 22(11), 1330-1334, 2000, section 2.3 (constraints on the intrinsics).
    """
    cx, cy = principal_px
    t = np.array([[1.0, 0.0, -cx], [0.0, 1.0, -cy], [0.0, 0.0, 1.0]])
    g = t @ plane_to_px
    g = g / np.linalg.norm(g[:, :2])
    a1, b1, c1 = g[:, 0]
    a2, b2, c2 = g[:, 1]
    # w (a1 a2 + b1 b2) + c1 c2 = 0 ;  w (a1^2 + b1^2 - a2^2 - b2^2) + (c1^2 - c2^2) = 0
    a = np.array([a1 * a2 + b1 * b2, a1**2 + b1**2 - a2**2 - b2**2])
    b = np.array([c1 * c2, c1**2 - c2**2])
    denom = float(a @ a)
    if denom <= 0:
        return None
    w = -float(a @ b) / denom
    # too close to fronto-parallel: the perspective terms vanish
    if w <= 0 or math.hypot(*b) < 1e-9 * math.hypot(*a):
        return None
    return 1.0 / math.sqrt(w)


def decompose_plane(plane_to_px: np.ndarray, k: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Camera pose of a plane from ``G = K [r1 r2 t]``: returns (r1, r2, r3, t).

    ``r3 = r1 x r2`` is the plane's z axis (y up, x right: z towards the camera for a
    plane seen from its printed side); ``t`` is the plane origin in camera coordinates
    (z > 0 in front of the camera). [r1 r2] is replaced by the nearest pair of
    orthonormal columns.

    References
    ----------
    .. [1] Z. Zhang, "A flexible new technique for camera calibration", IEEE Trans.
       PAMI 22(11), 1330-1334, 2000, appendix C.
    """
    m = np.linalg.solve(k, plane_to_px)
    lam = 2.0 / (np.linalg.norm(m[:, 0]) + np.linalg.norm(m[:, 1]))
    m = m * lam
    if m[2, 2] < 0:
        m = -m
    u, _, vt = np.linalg.svd(m[:, :2], full_matrices=False)
    r12 = u @ vt
    r1, r2 = r12[:, 0], r12[:, 1]
    return r1, r2, np.cross(r1, r2), m[:, 2]


def elevated_plane_homography(plane_to_px: np.ndarray, k: np.ndarray, height_mm: float) -> np.ndarray:
    """Homography plane mm -> px of the plane ``z = height_mm`` parallel to the fitted one.

    ``G_h = K [r1 r2 (t + h r3)]``: a point (x, y, h) of the frame projects like
    (x, y) of the plane with its origin moved by h along the plane's normal.
    """
    r1, r2, r3, t = decompose_plane(plane_to_px, k)
    g0 = k @ np.column_stack([r1, r2, t])
    gh = k @ np.column_stack([r1, r2, t + height_mm * r3])
    # keep the fitted G for the plane itself: apply the same correction to both
    return _normalised(plane_to_px @ np.linalg.solve(g0, gh))


def footprint_maps_mm(px_to_plane: np.ndarray, k: np.ndarray, heights_mm: np.ndarray) -> list[np.ndarray]:
    """:attr:`ElevationHook.footprint_mm` for each height, the plane's pose decomposed once.

    Each matrix is the one ``ElevationHook(px_to_plane, k, h).footprint_mm`` gives, by the same
    operations in the same order (:func:`elevated_plane_homography` decomposes the plane the
    same way at every height).
    """
    h0 = np.asarray(px_to_plane, dtype=float)
    g0 = _normalised(np.linalg.inv(h0))
    k = np.asarray(k, dtype=float)
    r1, r2, r3, t = decompose_plane(g0, k)
    g_fit = k @ np.column_stack([r1, r2, t])
    out = []
    for height in heights_mm:
        gk = k @ np.column_stack([r1, r2, t + float(height) * r3])
        gh = _normalised(g0 @ np.linalg.solve(g_fit, gk))
        hh = _normalised(np.linalg.inv(gh))
        to_footprint = _normalised(g0 @ hh)
        out.append(_normalised(h0 @ to_footprint @ g0))
    return out


class ElevationHook:
    """Moves boundary points of a raised part to where their footprint appears on the plane.

    A plate of thickness h lying on the mat shows, in a photo, the outline of the
    solid: where the boundary's outward normal points along the parallax (away from
    the camera's nadir) the top edge forms the outline, elsewhere the bottom edge
    does. For each boundary point this hook decides which, and replaces a top-edge
    pixel by the pixel of its footprint on the mat (``G0(H_h(p))``), so the plane map
    ``H0`` then returns the true (x, y) of every boundary point.

    Rings must follow :func:`scanmass.segment.rings.segment`'s orientation: material on the
    left in pixel coordinates (outer rings positive shoelace area, holes negative).
    Calls with fewer than 3 points map them as points of the top face.

    Parameters
    ----------
    px_to_plane : (3, 3) ndarray
        ``H0`` (ideal pixels -> mm on the mat).
    k : (3, 3) ndarray
        Camera matrix of the ideal (undistorted) image.
    height_mm : float
        Height of the measured face above the mat.
    undistort : callable, optional
        Lens correction applied first (distorted -> ideal pixels).
    top_seen : (H, W) bool ndarray, optional
        Photo pixels (as stored, before the lens correction) where the outline was found on the
        top face's edge all round: the side
        wall facing the camera was taken for background there (a wall that looks like the
        paper, or like the bottom of a hole), so every boundary point inside it is a top-face
        point. Elsewhere the wall facing the camera is taken as part of the part, as above.
    """

    def __init__(
        self,
        px_to_plane: np.ndarray,
        k: np.ndarray,
        height_mm: float,
        undistort=None,
        top_seen: np.ndarray | None = None,
    ) -> None:
        self.h0 = np.asarray(px_to_plane, dtype=float)
        self.g0 = _normalised(np.linalg.inv(self.h0))
        self.k = np.asarray(k, dtype=float)
        self.gh = elevated_plane_homography(self.g0, k, height_mm)
        self.hh = _normalised(np.linalg.inv(self.gh))
        self.to_footprint = _normalised(self.g0 @ self.hh)  # px of a top-face point -> px of its footprint
        self.height_mm = float(height_mm)
        self.undistort = undistort
        self.top_seen = top_seen

    def photo_px(self, ideal_px: np.ndarray) -> np.ndarray:
        """Photo pixels of ideal ones, to about a pixel (one fixed-point step of the lens correction)."""
        ideal = np.asarray(ideal_px, dtype=float).reshape(-1, 2)
        return ideal if self.undistort is None else 2.0 * ideal - self.undistort(ideal)

    @property
    def footprint_mm(self) -> np.ndarray:
        """``E = H0 G0 Hh G0``: a top-face point seen at ``X`` (mm, as if on the plane) -> its footprint (mm)."""
        return _normalised(self.h0 @ self.to_footprint @ self.g0)

    def seen_on_top(self, photo_px: np.ndarray) -> np.ndarray:
        """Per point (photo pixels, as stored): inside the :attr:`top_seen` mask; all False without one."""
        pts = np.asarray(photo_px, dtype=float).reshape(-1, 2)
        if self.top_seen is None:
            return np.zeros(len(pts), dtype=bool)
        h, w = self.top_seen.shape
        col = np.clip(np.rint(pts[:, 0]), 0, w - 1).astype(np.intp)
        row = np.clip(np.rint(pts[:, 1]), 0, h - 1).astype(np.intp)
        return np.asarray(self.top_seen[row, col], dtype=bool)

    def with_top_seen(self, top_seen: np.ndarray | None) -> ElevationHook:
        """The same hook with another :attr:`top_seen` mask."""
        return ElevationHook(self.h0, self.k, self.height_mm, self.undistort, top_seen)

    def __call__(self, points_px: np.ndarray) -> np.ndarray:
        raw = np.asarray(points_px, dtype=float).reshape(-1, 2)
        pts = self.undistort(raw) if self.undistort is not None else raw
        foot = apply_h(self.to_footprint, pts)
        if len(pts) < 3:
            return foot
        tangent = np.roll(pts, -1, axis=0) - np.roll(pts, 1, axis=0)
        outward = np.column_stack([tangent[:, 1], -tangent[:, 0]])  # material on the left
        parallax = pts - foot
        top = np.sum(outward * parallax, axis=1) > 0
        if self.top_seen is not None:
            top |= self.seen_on_top(raw)
        return np.where(top[:, None], foot, pts)


def raised_outline_mm(
    px_to_plane: np.ndarray,
    k: np.ndarray,
    height_mm: float,
    ring_mm: np.ndarray,
    *,
    hole: bool = False,
    footprint_mm: np.ndarray | None = None,
) -> np.ndarray:
    """The true outline on the plane of a part ``height_mm`` thick whose photo outline maps to ``ring_mm``.

    The mm counterpart of :class:`ElevationHook`: a top-face point seen at ``X`` (mm, as if
    on the plane) has its footprint at ``E X`` with ``E = H0 G0 Hh G0`` (the hook's
    pixel footprint map taken to the plane), and a boundary point belongs to the top face
    where its outward normal points along the parallax ``X - E X``. The ring is put
    counter-clockwise first (mm, y up: outward is to the right of the direction of travel).

    Parameters
    ----------
    px_to_plane : (3, 3) ndarray
        ``H0`` (ideal pixels -> mm on the plane).
    k : (3, 3) ndarray
        Camera matrix of the ideal image.
    height_mm : float
        Height of the face above the plane.
    ring_mm : (N, 2) ndarray
        The outline as measured on the plane, either orientation.
    hole : bool
        The ring bounds a hole (material outside it): its outward normal, away from the
        material, points into the ring.
    footprint_mm : (3, 3) ndarray, optional
        ``E`` for this height when already made (one of :func:`footprint_maps_mm`'s, the same to the
        bit): ``px_to_plane``, ``k`` and ``height_mm`` are then not used.
    """
    e = ElevationHook(px_to_plane, k, height_mm).footprint_mm if footprint_mm is None else footprint_mm
    ring = np.asarray(ring_mm, dtype=float).reshape(-1, 2)
    x, y = ring[:, 0], ring[:, 1]
    if np.dot(x, np.roll(y, -1)) - np.dot(np.roll(x, -1), y) < 0:
        ring = ring[::-1]
    foot = apply_h(e, ring)
    if len(ring) < 3:
        return foot
    tangent = np.roll(ring, -1, axis=0) - np.roll(ring, 1, axis=0)
    outward = np.column_stack([tangent[:, 1], -tangent[:, 0]])
    if hole:
        outward = -outward
    top = np.sum(outward * (ring - foot), axis=1) > 0
    return np.where(top[:, None], foot, ring)
