"""Sub-pixel straight edges in photos: profiles across a side, line fits, corners.

Shared by the marker detector (:mod:`scanmass.scale.markers`) and the paper sheet
(:mod:`scanmass.scale.sheet`). Pixel coordinates are OpenCV's (x_px = column, y_px =
row from the top, pixel centres at integers).
"""

from __future__ import annotations

import numpy as np

from scanmass.numeric import median_1d

__all__ = ["side_frame", "fit_line", "intersect_lines", "window_centroid", "Line"]

#: A straight line: a point on it and its unit direction.
Line = tuple[np.ndarray, np.ndarray]


def side_frame(a: np.ndarray, b: np.ndarray, centre: np.ndarray) -> tuple[np.ndarray, float, np.ndarray]:
    """A quadrilateral's side from ``a`` to ``b``: its vector, length and unit normal
    pointing away from the quadrilateral's ``centre``."""
    d = b - a
    length = float(np.hypot(*d))
    n = np.array([d[1], -d[0]]) / length
    if np.dot(n, 0.5 * (a + b) - centre) < 0:
        n = -n
    return d, length, n


def window_centroid(g: np.ndarray, mid: np.ndarray, pos: np.ndarray, var: np.ndarray) -> np.ndarray:
    """Refine edge positions: centroid of the positive derivative in a window about each estimate.

    The first estimate (a derivative clipped at a fraction of its peak, robust to noise)
    is biased for sharp, asymmetrically sampled edges; the plain centroid in a window of
    a few blur widths is not, and two rounds re-centre the window.
    """
    half = np.maximum(1.5, 3.0 * np.sqrt(np.maximum(var, 0.0)) + 1.0)[:, None]
    gp = np.clip(g, 0.0, None)
    # the same ufuncs on the same dtypes as gp * (|mid - pos| <= half), into buffers made once
    dist, inside, w = np.empty(gp.shape), np.empty(gp.shape, bool), np.empty(gp.shape)
    for _ in range(2):
        np.subtract(mid[None, :], pos[:, None], out=dist)
        np.abs(dist, out=dist)
        np.less_equal(dist, half, out=inside)
        np.multiply(gp, inside, out=w)
        sw = w.sum(axis=1)
        moment = np.multiply(w, mid, out=dist).sum(axis=1)
        pos = np.where(sw > 0, moment / np.where(sw > 0, sw, 1), pos)
    return pos


def fit_line(points: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
    """Total least-squares line with two rounds of outlier rejection; (point, direction, residuals)."""
    pts = np.asarray(points, dtype=float)
    keep = np.ones(len(pts), dtype=bool)
    for _ in range(3):
        if keep.sum() < 4:
            return None
        c = pts[keep].mean(axis=0)
        _, _, vt = np.linalg.svd(pts[keep] - c, full_matrices=False)
        direction = vt[0]
        normal = np.array([-direction[1], direction[0]])
        res = (pts - c) @ normal
        scale = 1.4826 * median_1d(np.abs(res[keep])) + 1e-4
        new = np.abs(res) < 4 * scale + 0.02
        if np.array_equal(new, keep):
            break
        keep = new
    return c, direction, res[keep]


def intersect_lines(l1: Line, l2: Line) -> np.ndarray | None:
    """The crossing point of two lines, or None when they are (nearly) parallel."""
    (p1, d1), (p2, d2) = l1, l2
    a = np.column_stack([d1, -d2])
    if abs(np.linalg.det(a)) < 1e-9:
        return None
    s = np.linalg.solve(a, p2 - p1)
    return p1 + s[0] * d1
