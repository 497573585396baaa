"""ArUco markers of a large photo found through crops, exactly as a whole-image search finds them
(part of the "scale" stage).

OpenCV's detector thresholds the whole image at seven window sizes and traces every
contour of each; on a 12 MP photo that is most of a photo's measuring time, while the
markers cover a few per cent of it. :func:`find_markers` first looks for the markers in a
copy reduced to about :data:`COARSE_PX` pixels across, then runs the detector on a crop
around each marker seen there (and around each marker the caller expects from the mat's
layout), and finally refines the corners on the whole image as the detector itself does.
Every step the detector takes near a marker only reads pixels within its largest
threshold window of the marker, so the crops give the same candidates; their order is
restored from the detector's own rule (larger perimeter first). Where that cannot be
told apart (two markers with perimeters equal to within rounding), where a marker seen
in the reduced copy is not found again, or where one id is found in two places, the
whole image is searched as before. Markers found near a crop's inner edge are left to
their own crop.

Pixel coordinates are OpenCV's (x_px = column, y_px = row from the top, pixel centres
at integers).
"""

from __future__ import annotations

from collections.abc import Callable

import cv2
import numpy as np

__all__ = ["find_markers", "COARSE_PX", "ExpectedQuads"]

#: Longest side (px) of the reduced copy the markers are first looked for in; photos
#: less than twice as large are searched whole.
COARSE_PX = 1000
#: Fewest markers the reduced copy must show before crops are trusted.
MIN_COARSE = 4
#: Smallest marker side (px of the reduced copy) the reduced search must see: a mat's
#: markers all have one printed size, so a smaller one missed there is implausible.
MIN_COARSE_SIDE_PX = 20.0
#: Crop margin around a marker seen in the reduced copy: fixed px plus a share of its side
#: (the largest threshold window is 53 px; the reduced copy places corners to a few px).
MARGIN_PX, MARGIN_SIDE = 40.0, 0.1
#: Crop margin around a marker expected from the layout (its place is only predicted).
EXPECTED_MARGIN_PX, EXPECTED_MARGIN_SIDE = 64.0, 0.5
#: A marker found within this many px of a crop's inner edge sends the search to the whole image.
EDGE_GUARD_PX = 30.0
#: Perimeters (px) closer than this are taken as equal: their order cannot be told from crops.
TIE_PX = 1e-3

#: Given the ids (M,) and corners (M, 4, 2) px seen in the reduced copy (scaled to full
#: size), the corners (K, 4, 2) px of other markers expected in the photo.
ExpectedQuads = Callable[[np.ndarray, np.ndarray], np.ndarray]


def _whole(grey: np.ndarray, detector: cv2.aruco.ArucoDetector) -> tuple[np.ndarray, np.ndarray]:
    corners, ids, _ = detector.detectMarkers(grey)
    if ids is None or len(ids) == 0:
        return np.zeros((0, 4, 2), np.float32), np.zeros(0, int)
    return np.stack([c.reshape(4, 2) for c in corners]).astype(np.float32), ids.ravel().astype(int)


def _side_px(quads: np.ndarray) -> np.ndarray:
    """Mean side length of each quadrilateral (K, 4, 2)."""
    return np.mean(np.hypot(*(np.roll(quads, -1, axis=1) - quads).transpose(2, 0, 1)), axis=1)


def _boxes(quads: np.ndarray, fixed: float, share: float, shape: tuple[int, int]) -> list[tuple[int, int, int, int]]:
    h, w = shape
    out = []
    for q, side in zip(quads, _side_px(quads)):
        m = fixed + share * side
        x0, y0 = np.floor(q.min(axis=0) - m).astype(int)
        x1, y1 = np.ceil(q.max(axis=0) + m).astype(int) + 1
        x0, y0, x1, y1 = max(int(x0), 0), max(int(y0), 0), min(int(x1), w), min(int(y1), h)
        if x1 - x0 >= 16 and y1 - y0 >= 16:
            out.append((x0, y0, x1, y1))
    return out


def _refine_as_detector(
    grey: np.ndarray, quad: np.ndarray, params: cv2.aruco.DetectorParameters, cells: int
) -> np.ndarray:
    """The detector's sub-pixel corner step (CORNER_REFINE_SUBPIX), on the whole image.

    The window is the detector's: ``relativeCornerRefinmentWinSize`` times the mean
    module size (float arithmetic as in OpenCV), at most ``cornerRefinementWinSize``.
    """
    e = (np.roll(quad, -1, axis=0) - quad).astype(np.float32)
    total = np.float32(0.0)
    for k in range(4):
        total = np.float32(total + np.sqrt(np.float32(e[k, 0] * e[k, 0] + e[k, 1] * e[k, 1])))
    module = np.float32(total / np.float32(4 * cells))
    win = max(1, int(np.rint(np.float32(params.relativeCornerRefinmentWinSize) * module)))
    win = min(win, int(params.cornerRefinementWinSize))
    criteria = (
        cv2.TERM_CRITERIA_MAX_ITER | cv2.TERM_CRITERIA_EPS,
        int(params.cornerRefinementMaxIterations),
        float(params.cornerRefinementMinAccuracy),
    )
    pts = np.ascontiguousarray(quad.reshape(4, 1, 2), dtype=np.float32)
    return cv2.cornerSubPix(grey, pts, (win, win), (-1, -1), criteria).reshape(4, 2)


def _perimeter32(quad: np.ndarray) -> np.float32:
    """A candidate's perimeter as the detector sums it (float, side by side in corner order)."""
    total = np.float32(0.0)
    for k in range(4):
        d = (quad[(k + 1) % 4] - quad[k]).astype(np.float32)
        total = np.float32(total + np.sqrt(np.float32(d[0] * d[0] + d[1] * d[1])))
    return total


def _candidates(
    crop: np.ndarray, params: cv2.aruco.DetectorParameters, origin: tuple[int, int], width: int, limits: tuple[int, int]
) -> list[tuple[np.float32, int, int, np.ndarray]]:
    """The detector's square candidates in a crop, each with its place in the detector's order.

    The detector's first step, as OpenCV does it: per threshold window (scale) an adaptive
    mean threshold, the contours (listed by OpenCV from the last start pixel in raster order
    to the first), those of a perimeter within ``limits`` whose polygon has four corners, is
    convex and has no short side, corners made clockwise. Returns (perimeter as float,
    scale index, raster index of the contour's start pixel in the whole image, corners in
    whole-image px); the detector sorts by perimeter (larger first), then by scale, then by
    decreasing raster index.
    """
    x0, y0 = origin
    n_scales = (
        params.adaptiveThreshWinSizeMax - params.adaptiveThreshWinSizeMin
    ) // params.adaptiveThreshWinSizeStep + 1
    out = []
    for s in range(n_scales):
        win = params.adaptiveThreshWinSizeMin + s * params.adaptiveThreshWinSizeStep
        win += 1 - win % 2
        thresh = cv2.adaptiveThreshold(
            crop, 255, cv2.ADAPTIVE_THRESH_MEAN_C, cv2.THRESH_BINARY_INV, win, params.adaptiveThreshConstant
        )
        contours, _ = cv2.findContours(thresh, cv2.RETR_LIST, cv2.CHAIN_APPROX_NONE)
        for c in contours:
            if not limits[0] <= len(c) <= limits[1]:
                continue
            approx = cv2.approxPolyDP(c, float(len(c)) * params.polygonalApproxAccuracyRate, True)
            if len(approx) != 4 or not cv2.isContourConvex(approx):
                continue
            q = approx.reshape(4, 2).astype(np.float64)
            shortest = float(np.min(np.sum((np.roll(q, -1, axis=0) - q) ** 2, axis=1)))
            if shortest < (len(c) * params.minCornerDistanceRate) ** 2:
                continue
            d1, d2 = q[1] - q[0], q[2] - q[0]
            if d1[0] * d2[1] - d1[1] * d2[0] < 0.0:
                q[[1, 3]] = q[[3, 1]]
            start = int(y0 + c[0, 0, 1]) * width + int(x0 + c[0, 0, 0])
            out.append((_perimeter32(q), s, start, q + np.array([x0, y0], float)))
    return out


def _order_key(
    quad: np.ndarray, candidates: list[tuple[np.float32, int, int, np.ndarray]], distance_rate: float
) -> tuple[float, int, int] | None:
    """The detector's sort key (-perimeter, scale, -start) of the candidate that became marker ``quad``.

    That is the first candidate, in the detector's order, with the marker's corners; None
    when an earlier candidate is close enough to be grouped with it (the marker may then
    come from another candidate of its group, and the order is left to the whole search).
    """
    corners = sorted(map(tuple, quad.astype(np.float64)))
    keys = sorted((-float(p), s, -start, i) for i, (p, s, start, _) in enumerate(candidates))
    for rank, (neg_p, s, neg_start, i) in enumerate(keys):
        if sorted(map(tuple, candidates[i][3])) != corners:
            continue
        mine = candidates[i][3]
        for _, _, _, j in keys[:rank]:
            other = candidates[j][3]
            dist = min(np.sqrt(np.mean(np.sum((np.roll(other, -k, axis=0) - mine) ** 2, axis=1))) for k in range(4))
            if dist < float(candidates[i][0]) * distance_rate:
                return None
        return (neg_p, s, neg_start)
    return None


def find_markers(
    grey: np.ndarray, detector: cv2.aruco.ArucoDetector, expected: ExpectedQuads | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """The markers ``detector.detectMarkers(grey)`` finds, in its order, with its corners.

    Parameters
    ----------
    grey : (H, W) uint8 ndarray
    detector : cv2.aruco.ArucoDetector
        Without the Aruco3 options; its corner refinement none or sub-pixel.
    expected : callable, optional
        Where further markers should be (:data:`ExpectedQuads`), e.g. from the mat's
        layout; crops around them are searched too.

    Returns
    -------
    corners : (M, 4, 2) float32 ndarray
    ids : (M,) int ndarray

    References
    ----------
    .. [1] OpenCV ``cv::aruco::ArucoDetector::detectMarkers`` documentation and source
       (candidate search by adaptive thresholds, ordering by perimeter, sub-pixel corners).
    """
    params = detector.getDetectorParameters()
    h, w = grey.shape
    factor = max(h, w) // COARSE_PX
    refine = params.cornerRefinementMethod
    if (
        factor < 2
        or params.useAruco3Detection
        or refine not in (cv2.aruco.CORNER_REFINE_NONE, cv2.aruco.CORNER_REFINE_SUBPIX)
    ):
        return _whole(grey, detector)
    small = cv2.resize(grey, (w // factor, h // factor), interpolation=cv2.INTER_AREA)
    scale = np.array([w / (w // factor), h / (h // factor)])
    coarse, coarse_ids = _whole(small, detector)
    if len(coarse_ids) < MIN_COARSE or _side_px(coarse.astype(float)).min() < MIN_COARSE_SIDE_PX:
        return _whole(grey, detector)
    seen = coarse.astype(float) * scale
    boxes = _boxes(seen, MARGIN_PX, MARGIN_SIDE, (h, w))
    if expected is not None:
        more = np.asarray(expected(coarse_ids, seen), dtype=float).reshape(-1, 4, 2)
        boxes += _boxes(more, EXPECTED_MARGIN_PX, EXPECTED_MARGIN_SIDE, (h, w))
    dictionary = detector.getDictionary()
    crop_params = detector.getDetectorParameters()
    crop_params.cornerRefinementMethod = cv2.aruco.CORNER_REFINE_NONE
    longest = max(h, w)
    # the detector's perimeter limits in px of the whole image (unsigned int of rate x longest side)
    p_min = int(params.minMarkerPerimeterRate * longest)
    p_max = int(params.maxMarkerPerimeterRate * longest)
    found: dict[int, np.ndarray] = {}
    crop_of: dict[int, tuple[int, int, int, int]] = {}
    for x0, y0, x1, y1 in boxes:
        longest_crop = max(x1 - x0, y1 - y0)
        crop_params.minMarkerPerimeterRate = (p_min + 0.5) / longest_crop
        crop_params.maxMarkerPerimeterRate = (p_max + 0.5) / longest_crop
        corners, ids = _whole(grey[y0:y1, x0:x1], cv2.aruco.ArucoDetector(dictionary, crop_params))
        for quad, marker in zip(corners, ids):
            lo, hi = quad.min(axis=0), quad.max(axis=0)
            near = (
                (x0 > 0 and lo[0] < EDGE_GUARD_PX)
                or (y0 > 0 and lo[1] < EDGE_GUARD_PX)
                or (x1 < w and hi[0] > x1 - x0 - 1 - EDGE_GUARD_PX)
                or (y1 < h and hi[1] > y1 - y0 - 1 - EDGE_GUARD_PX)
            )
            if near:
                continue  # perhaps cut by the crop: found whole in its own crop, or not at all
            quad = quad + np.array([x0, y0], np.float32)  # integer corners: exact in float32
            marker = int(marker)
            if marker in found and not np.array_equal(found[marker], quad):
                return _whole(grey, detector)  # one id in two places: the whole search decides
            found[marker] = quad
            crop_of.setdefault(marker, (x0, y0, x1, y1))
    if not set(coarse_ids.tolist()) <= set(found):
        return _whole(grey, detector)
    ids = np.array(sorted(found), dtype=int)
    quads = np.stack([found[i] for i in ids])
    perimeter = np.hypot(*(np.roll(quads, -1, axis=1) - quads).astype(float).transpose(2, 0, 1)).sum(axis=1)
    order = np.argsort(-perimeter, kind="stable")
    tied = np.flatnonzero(np.diff(perimeter[order]) > -TIE_PX)
    if len(tied):
        # equal perimeters: the detector's order follows its scan; take it from the candidates
        members = sorted({int(order[k]) for k in tied} | {int(order[k + 1]) for k in tied})
        cache: dict[tuple[int, int, int, int], list[tuple[np.float32, int, int, np.ndarray]]] = {}
        keys: dict[int, tuple[float, int, int]] = {}
        for m in members:
            box = crop_of[int(ids[m])]
            if box not in cache:
                bx0, by0, bx1, by1 = box
                cache[box] = _candidates(grey[by0:by1, bx0:bx1], params, (bx0, by0), w, (p_min, p_max))
            key = _order_key(quads[m], cache[box], float(params.minMarkerDistanceRate))
            if key is None:
                return _whole(grey, detector)
            keys[m] = key
        # within each run of equal perimeters, the detector's keys decide
        runs: list[list[int]] = []
        for k, m in enumerate(order):
            if k > 0 and k - 1 in set(tied.tolist()):
                runs[-1].append(int(m))
            else:
                runs.append([int(m)])
        order = np.array([m for run in runs for m in (sorted(run, key=keys.__getitem__) if len(run) > 1 else run)])
    ids, quads = ids[order], quads[order]
    if refine == cv2.aruco.CORNER_REFINE_SUBPIX:
        cells = dictionary.markerSize + 2 * params.markerBorderBits
        quads = np.stack([_refine_as_detector(grey, q, params, cells) for q in quads])
    return quads, ids
