"""Level rings of an image by marching squares, visiting only the squares the level crosses.

:func:`level_rings` returns what ``skimage.measure.find_contours(image, level,
fully_connected="high")`` returns (the same rings, points, order and starting points, bit
for bit), for the common case in :mod:`scanmass.segment.rings`: a crop around a part with
a frame below the level, so that every ring closes. scikit-image visits every square of
the crop and links the segments in Python; here the squares with corners on both sides of
the level are found with whole-array operations, their segments computed for those alone,
and each closed chain of segments followed once. Anything else (a chain that does not
close, a point shared by two chains, a NaN corner) is handed to scikit-image.
"""

from __future__ import annotations

import cv2
import numpy as np
from skimage.measure import find_contours

__all__ = ["level_rings"]

# the segments of each square case (corners above the level: 1 upper left, 2 upper right,
# 4 lower left, 8 lower right), lower values on the left walking from tail to head, the two
# saddles (6, 9) joined through their high corners; edges: 0 top, 1 bottom, 2 left, 3 right
_TOP, _BOTTOM, _LEFT, _RIGHT = 0, 1, 2, 3
_CASES: dict[int, tuple[tuple[int, int], ...]] = {
    1: ((_TOP, _LEFT),),
    2: ((_RIGHT, _TOP),),
    3: ((_RIGHT, _LEFT),),
    4: ((_LEFT, _BOTTOM),),
    5: ((_TOP, _BOTTOM),),
    6: ((_LEFT, _TOP), (_RIGHT, _BOTTOM)),
    7: ((_RIGHT, _BOTTOM),),
    8: ((_BOTTOM, _RIGHT),),
    9: ((_TOP, _RIGHT), (_BOTTOM, _LEFT)),
    10: ((_BOTTOM, _TOP),),
    11: ((_BOTTOM, _LEFT),),
    12: ((_LEFT, _RIGHT),),
    13: ((_TOP, _RIGHT),),
    14: ((_LEFT, _TOP),),
}
#: Rows of the image compared with the level at a time (their masks stay in the cache).
_BAND_ROWS = 128

_TABLE = np.full((16, 2, 2), -1, np.int8)  # per case: up to two (from edge, to edge) pairs
for _case, _pairs in _CASES.items():
    _TABLE[_case, : len(_pairs)] = _pairs


def _fraction(a: np.ndarray, b: np.ndarray, level: float) -> np.ndarray:
    """Where the level lies between two corner values (0 where they are equal), as scikit-image has it."""
    same = a == b
    with np.errstate(divide="ignore", invalid="ignore"):
        out = (level - a) / np.where(same, 1.0, b - a)
    out[same] = 0.0
    return out


def _segments(image: np.ndarray, level: float) -> np.ndarray | None:
    """(S, 2, 2) segments (from, to) x (row, col) of the squares the level crosses, in scan order.

    The squares in row-major order of their upper-left corner and, within a saddle, its two
    segments in scikit-image's order; each point is the corner's integer coordinate plus the
    fraction, in float64, as its marching squares computes it. None when a corner of a
    crossed square is NaN.
    """
    img = np.ascontiguousarray(image, dtype=np.float32) if image.dtype != np.float64 else image
    cut: float | np.float32 = level
    if img.dtype == np.float32:
        # float32 > level in float64, exactly: against the largest float32 not above the level
        cut = np.float32(level)
        if float(cut) > level:
            cut = np.nextafter(cut, np.float32(-np.inf))
    # a square is crossed where its four corners are not all on one side: where its top,
    # bottom or left edge joins corners on both sides; in bands of rows that stay in cache
    found_r, found_c = [], []
    for r0 in range(0, img.shape[0] - 1, _BAND_ROWS):
        above = img[r0 : r0 + _BAND_ROWS + 1] > cut
        across = above[:, 1:] != above[:, :-1]
        crossed = across[:-1] | across[1:]
        crossed |= above[1:, :-1] != above[:-1, :-1]
        found = cv2.findNonZero(crossed.view(np.uint8))  # (x, y) in row-major order
        if found is not None:
            found = found.reshape(-1, 2)
            found_r.append(found[:, 1].astype(np.intp) + r0)
            found_c.append(found[:, 0].astype(np.intp))
    if not found_r:
        return np.zeros((0, 2, 2))
    r, c = np.concatenate(found_r), np.concatenate(found_c)
    ul = img[r, c].astype(np.float64)
    ur = img[r, c + 1].astype(np.float64)
    ll = img[r + 1, c].astype(np.float64)
    lr = img[r + 1, c + 1].astype(np.float64)
    if np.isnan(ul).any() or np.isnan(ur).any() or np.isnan(ll).any() or np.isnan(lr).any():
        return None
    case = (ul > level).astype(np.intp) + 2 * (ur > level) + 4 * (ll > level) + 8 * (lr > level)
    rf, cf = r.astype(np.float64), c.astype(np.float64)
    points = np.empty((r.size, 4, 2))
    points[:, _TOP] = np.column_stack([rf, cf + _fraction(ul, ur, level)])
    points[:, _BOTTOM] = np.column_stack([rf + 1.0, cf + _fraction(ll, lr, level)])
    points[:, _LEFT] = np.column_stack([rf + _fraction(ul, ll, level), cf])
    points[:, _RIGHT] = np.column_stack([rf + _fraction(ur, lr, level), cf + 1.0])
    pairs = _TABLE[case]  # (K, 2, 2)
    used = pairs[:, :, 0] >= 0  # (K, 2): the first always, the second in a saddle
    square, slot = np.nonzero(used)  # row-major: each square's segments in their order
    edges = pairs[square, slot].astype(np.intp)  # (S, 2) from edge, to edge
    return np.stack([points[square, edges[:, 0]], points[square, edges[:, 1]]], axis=1)


def _chains(segments: np.ndarray) -> list[np.ndarray] | None:
    """The closed rings the segments make, as scikit-image's assembly returns them; None if not all close.

    Each point must be the head of exactly one segment and the tail of exactly one (no
    point shared between rings, no segment of zero length), so that the segments fall
    into cycles. scikit-image links them in scan order: a ring is numbered by its first
    segment, and it closes with its last one, so it starts at that segment's head and
    follows the segments' direction back to it.
    """
    n = len(segments)
    tails, heads = segments[:, 0], segments[:, 1]
    by_tail = np.lexsort((tails[:, 1], tails[:, 0]))
    by_head = np.lexsort((heads[:, 1], heads[:, 0]))
    st, sh = tails[by_tail], heads[by_head]
    if not np.array_equal(st, sh):
        return None  # a head that is no segment's tail: an open chain (or a NaN)
    if n > 1 and np.any(np.all(st[1:] == st[:-1], axis=1)):
        return None  # a point where two chains meet
    if np.any(np.all(tails == heads, axis=1)):
        return None  # a segment of zero length (skipped by scikit-image)
    following = np.empty(n, np.intp)
    following[by_head] = by_tail  # the segment whose tail is this one's head
    # each cycle's first and last segment in scan order, by doubling the reach of a walk
    first, last, reach = np.arange(n), np.arange(n), following.copy()
    for _ in range(max(1, int(n).bit_length())):
        first = np.minimum(first, first[reach])
        last = np.maximum(last, last[reach])
        reach = reach[reach]
    # steps from each segment to its cycle's last one (list ranking, the cycle cut after it)
    index = np.arange(n)
    stop = index == last
    ahead = np.where(stop, index, following)
    steps = (~stop).astype(np.intp)
    for _ in range(max(1, int(n).bit_length())):
        steps = steps + steps[ahead]
        ahead = ahead[ahead]
    # ring by ring in the order of their first segments; each from its last segment round
    # to it again: the last, then the others by falling steps (the last has none)
    order = np.lexsort((-steps, first))
    ends = np.flatnonzero(np.diff(first[order])) + 1
    rings = []
    for group in np.split(order, ends):
        rings.append(heads[np.concatenate(([group[-1]], group))])
    return rings


def level_rings(image: np.ndarray, level: float) -> list[np.ndarray]:
    """``skimage.measure.find_contours(image, level, fully_connected="high")``, the same list.

    Parameters
    ----------
    image : (H, W) ndarray of float32 or float64
        The image; H and W at least 2.
    level : float
        The level; a corner counts as above it when its value is greater.

    Returns
    -------
    list of (N, 2) ndarray of float64
        The rings (row, col), each closed (its first point repeated at the end) when the
        fast path applies; otherwise scikit-image's own result.

    References
    ----------
    .. [1] W. E. Lorensen and H. E. Cline, "Marching cubes: a high resolution 3D surface
       construction algorithm", SIGGRAPH 1987, 163-170, in its 2-D form as implemented by
       ``skimage.measure.find_contours`` (scikit-image 0.26).
    """
    level = float(level)
    segments = _segments(image, level) if image.ndim == 2 and min(image.shape) >= 2 else None
    rings = _chains(segments) if segments is not None and len(segments) else None
    if rings is None:
        return find_contours(image, level, fully_connected="high")
    return rings
