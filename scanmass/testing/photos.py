"""Synthetic phone photos of flat parts on a marker mat, with known truth (for the demo).

A pinhole camera (square pixels, principal point at the image centre) looks at the mat;
every printed dark area and every part is a polygon in mat mm, projected into the photo
and drawn with its exact pixel coverage (:func:`scanmass.testing.scans.coverage`), so straight
edges stay exact under perspective. A raised plate (thickness h) must be convex with
convex holes: its outline in the photo is then the convex hull of its bottom and top
faces, and each hole's opening the intersection of the hole's two ends.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import cv2
import numpy as np

from scanmass.raster import coverage, srgb_encode
from scanmass.scale.mat import MatLayout, mat_dark_rectangles

__all__ = ["PinholeCamera", "look_at", "render_mat_photo"]


@dataclass(frozen=True)
class PinholeCamera:
    """Camera matrix ``k`` and pose (rotation ``r`` mat -> camera, translation ``t``)."""

    k: np.ndarray
    r: np.ndarray
    t: np.ndarray
    size_px: tuple[int, int]

    def plane_to_px(self, height_mm: float = 0.0) -> np.ndarray:
        """Homography mat mm -> px of the plane z = height_mm: K [r1 r2 (t + h r3)]."""
        g = self.k @ np.column_stack([self.r[:, 0], self.r[:, 1], self.t + height_mm * self.r[:, 2]])
        return g / g[2, 2]

    def project(self, points_mm: np.ndarray, height_mm: float = 0.0) -> np.ndarray:
        g = self.plane_to_px(height_mm)
        p = np.asarray(points_mm, float).reshape(-1, 2) @ g[:, :2].T + g[:, 2]
        return p[:, :2] / p[:, 2:3]


def look_at(
    target_mm: tuple[float, float],
    *,
    distance_mm: float,
    tilt_deg: float,
    tilt_dir_deg: float,
    roll_deg: float,
    f_px: float,
    size_px: tuple[int, int],
) -> PinholeCamera:
    """A camera ``distance_mm`` from ``target_mm``, tilted ``tilt_deg`` from the mat's normal."""
    w, h = size_px
    k = np.array([[f_px, 0, (w - 1) / 2], [0, f_px, (h - 1) / 2], [0, 0, 1.0]])
    a, b = math.radians(tilt_deg), math.radians(tilt_dir_deg)
    target = np.array([target_mm[0], target_mm[1], 0.0])
    centre = target + distance_mm * np.array([math.sin(a) * math.cos(b), math.sin(a) * math.sin(b), math.cos(a)])
    z_c = (target - centre) / distance_mm
    x_c = np.cross(z_c, [0.0, 1.0, 0.0])
    x_c /= np.linalg.norm(x_c)
    y_c = np.cross(z_c, x_c)
    c, s = math.cos(math.radians(roll_deg)), math.sin(math.radians(roll_deg))
    r = np.vstack([c * x_c + s * y_c, -s * x_c + c * y_c, z_c])
    return PinholeCamera(k=k, r=r, t=-r @ centre, size_px=(int(w), int(h)))


def _scan_frame(ring_px: np.ndarray, height_px: int, positive: bool) -> np.ndarray:
    ring = np.column_stack([ring_px[:, 0] + 0.5, height_px - (ring_px[:, 1] + 0.5)])
    area = float(np.dot(ring[:, 0], np.roll(ring[:, 1], -1)) - np.dot(np.roll(ring[:, 0], -1), ring[:, 1]))
    return ring if (area > 0) == positive else ring[::-1]


def _cover(polys: Sequence[tuple[np.ndarray, list[np.ndarray]]], shape: tuple[int, int]) -> np.ndarray:
    rings = []
    for outer, holes in polys:
        rings.append(_scan_frame(outer, shape[0], True))
        rings += [_scan_frame(h, shape[0], False) for h in holes]
    return coverage(rings, shape=shape, mm_per_px=1.0) if rings else np.zeros(shape)


def _raised(cam: PinholeCamera, outer: np.ndarray, holes: list[np.ndarray], height_mm: float):
    """Photo outline of a convex plate with convex holes standing ``height_mm`` high."""
    both = np.concatenate([cam.project(outer), cam.project(outer, height_mm)]).astype(np.float32)
    hull = cv2.convexHull(both).reshape(-1, 2).astype(float)
    openings = []
    for hole in holes:
        a = cv2.convexHull(cam.project(hole).astype(np.float32))
        b = cv2.convexHull(cam.project(hole, height_mm).astype(np.float32))
        area, inter = cv2.intersectConvexConvex(a, b)
        if area > 0 and inter is not None:
            openings.append(inter.reshape(-1, 2).astype(float))
    return hull, openings


def render_mat_photo(
    layout: MatLayout,
    parts: Sequence[tuple[np.ndarray, list[np.ndarray]]],
    cam: PinholeCamera,
    *,
    height_mm: float = 0.0,
    print_scale: tuple[float, float] = (1.0, 1.0),
    paper: float = 0.85,
    ink: float = 0.03,
    table: float = 0.2,
    part_level: float = 0.09,
    blur_px: float = 1.0,
    noise: float = 0.006,
    light: tuple[float, float] = (0.12, -0.1),
    seed: int = 0,
) -> np.ndarray:
    """Render a photo (8-bit sRGB grey) of parts lying on a printed mat.

    ``print_scale`` stretches everything printed (a printer's x and y scale errors);
    parts are given in true mm. With ``height_mm`` > 0, parts must be convex with convex
    holes (see the module docstring).
    """
    w, h = cam.size_px
    shape = (h, w)
    pw, ph = layout.page_mm
    page = np.array([[0, 0], [pw, 0], [pw, ph], [0, ph]], float)
    refl = np.full(shape, table)
    refl += (paper - table) * _cover([(cam.project(page), [])], shape)
    stretch = np.asarray(print_scale, float)
    refl += (ink - paper) * _cover([(cam.project(r * stretch), []) for r in mat_dark_rectangles(layout)], shape)
    polys = []
    for outer, holes in parts:
        if height_mm > 0:
            polys.append(_raised(cam, np.asarray(outer, float), [np.asarray(x, float) for x in holes], height_mm))
        else:
            polys.append((cam.project(outer), [cam.project(x) for x in holes]))
    refl += (part_level - paper) * _cover(polys, shape)
    yy, xx = np.mgrid[0:h, 0:w]
    lin = refl * (1.0 + light[0] * (xx / w - 0.5) + light[1] * (yy / h - 0.5))
    if blur_px > 0:
        lin = cv2.GaussianBlur(lin, (0, 0), blur_px)
    rng = np.random.default_rng(seed)
    lin = np.clip(lin + rng.normal(0.0, noise, shape), 0.0, 1.0)
    return np.rint(srgb_encode(lin) * 255.0).astype(np.uint8)
