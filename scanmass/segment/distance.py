"""The exact Euclidean distance transform of a mask, the same in every process state.

OpenCV's precise Euclidean transform (``cv2.distanceTransform(mask, cv2.DIST_L2,
cv2.DIST_MASK_PRECISE)``, opencv-python-headless 5.1) leaves some pixels one unit in the
last place (float32) off the correctly rounded distance, and which pixels depends on the
output buffer's address modulo 32 bytes (its vector loop's alignment): the same mask gave
553 such pixels in one buffer and 536 in another (tests/test_distance.py). A watershed of
the negated transform breaks its ties on those last bits, so a part's neck test could
change its answer with the heap's state. The squared distance of a pixel to the nearest
zero pixel is a whole number, so rounding the square of OpenCV's value recovers it
exactly, and its square root (rounded once, to float32) no longer depends on the buffer.

:func:`near_distance` gives OpenCV's 5 x 5 chamfer transform where it is at most a limit,
computed only in tiles near both kinds of pixel (the same float32 values as on the whole
mask, tests/test_distance.py).
"""

from __future__ import annotations

import cv2
import numpy as np

__all__ = ["NEAR_TILE_PX", "exact_distance", "near_distance"]

#: Rows and columns of the tiles :func:`near_distance` sorts by the pixels they hold, px.
NEAR_TILE_PX = (32, 16)


def exact_distance(mask: np.ndarray) -> np.ndarray:
    """Euclidean distance (px, float32) of each nonzero pixel of a uint8 mask to the nearest zero pixel.

    ``sqrt(n)`` rounded once to float32, where ``n`` is the exact squared distance (a whole
    number): the value of ``scipy.ndimage.distance_transform_edt(mask)`` [1]_ rounded to
    float32, without importing scipy. OpenCV's precise transform is within a unit in the
    last place of it, so rounding its square to the nearest whole number gives ``n``
    (distances below 2**10 px leave the square within 0.01 of ``n``).

    References
    ----------
    .. [1] P. F. Felzenszwalb and D. P. Huttenlocher, "Distance transforms of sampled
       functions", Theory of Computing 8, 415-428, 2012.
    """
    dist = cv2.distanceTransform(mask, cv2.DIST_L2, cv2.DIST_MASK_PRECISE)
    return np.sqrt(np.rint(np.square(dist, dtype=np.float64))).astype(np.float32)


def near_distance(
    mask: np.ndarray, limit: float, *, invert: bool = False, tile: tuple[int, int] = NEAR_TILE_PX
) -> np.ndarray:
    """``cv2.distanceTransform(mask, cv2.DIST_L2, 5)`` where it is at most ``limit``, ``inf`` elsewhere.

    The same float32 values, bit for bit, as OpenCV's 5 x 5 chamfer transform [1]_ of the
    whole uint8 ``mask`` (of ``mask == 0`` with ``invert``) wherever that is at most
    ``limit`` (compared in float32, as ``dist <= limit`` is), and ``inf`` wherever it is
    above: every threshold at or below ``limit`` reads the same from either. Why it is
    exact: OpenCV's two raster passes give each pixel the least float32 sum of step weights
    (1, 1.4, 2.1969; each at least the step's Chebyshev length) along a path from a zero
    pixel inside the image, so a value at most ``limit`` depends only on the pixels within
    a Chebyshev distance ``limit`` of it. The transform is therefore run only on the tiles
    that hold foreground pixels within that reach of a tile holding zeros, each row of
    such tiles in one window padded by ``ceil(limit) + 2`` px; zero pixels are 0 and the
    other tiles are beyond the limit.

    References
    ----------
    .. [1] G. Borgefors, "Distance transformations in digital images", Computer Vision,
       Graphics, and Image Processing 34, 344-371, 1986.
    """
    h, w = mask.shape
    lim = np.float32(limit)
    pad = int(np.ceil(float(limit))) + 2
    th, tw = tile
    rows = -(-h // th)
    cols = -(-w // tw)
    # each tile's least and greatest pixel: full tile rows as a (rows, th, w) view, then columns
    full = h // th
    lo = np.empty((rows, w), mask.dtype)
    hi = np.empty((rows, w), mask.dtype)
    if full:
        block = mask[: full * th].reshape(full, th, w)
        block.min(axis=1, out=lo[:full])
        block.max(axis=1, out=hi[:full])
    if rows > full:
        mask[full * th :].min(axis=0, out=lo[full])
        mask[full * th :].max(axis=0, out=hi[full])
    extra = cols * tw - w  # repeat the last column: the least and greatest stay
    lo = np.pad(lo, ((0, 0), (0, extra)), mode="edge").reshape(rows, cols, tw).min(axis=2)
    hi = np.pad(hi, ((0, 0), (0, extra)), mode="edge").reshape(rows, cols, tw).max(axis=2)
    has_zero, has_one = (lo == 0), (hi > 0)  # of the mask itself
    if invert:
        has_zero, has_one = has_one, has_zero
    reach_r, reach_c = -(-pad // th), -(-pad // tw)
    near = cv2.dilate(has_zero.astype(np.uint8), np.ones((2 * reach_r + 1, 2 * reach_c + 1), np.uint8)) > 0
    needed = has_one & near
    table = np.full(256, np.inf, np.float32)  # zeros of the transformed mask 0, the rest beyond reach
    table[1:] = 0.0 if invert else np.inf
    table[0] = np.inf if invert else 0.0
    out = cv2.LUT(mask, table)
    for i in range(rows):
        run = np.flatnonzero(needed[i])
        if run.size == 0:
            continue
        breaks = np.flatnonzero(np.diff(run) > 1)
        for j0, j1 in zip(run[np.r_[0, breaks + 1]], run[np.r_[breaks, run.size - 1]] + 1, strict=True):
            y0, y1 = i * th, min((i + 1) * th, h)
            x0, x1 = j0 * tw, min(j1 * tw, w)
            wy0, wy1, wx0, wx1 = max(0, y0 - pad), min(h, y1 + pad), max(0, x0 - pad), min(w, x1 + pad)
            sub = mask[wy0:wy1, wx0:wx1]
            if invert:
                sub = (sub == 0).astype(np.uint8)
            dist = cv2.distanceTransform(sub, cv2.DIST_L2, 5)[y0 - wy0 : y1 - wy0, x0 - wx0 : x1 - wx0]
            dist[dist > lim] = np.inf
            out[y0:y1, x0:x1] = dist
    return out
