"""ArUco markers of a mat in a photo: detection and corner refinement (part of the "scale" stage).

The detector finds the markers; every outer corner is then recomputed from straight
lines fitted to sub-pixel edge points of the marker's sides (:mod:`scanmass.scale.edges`).
A lens correction, when there is one, comes in as a plain function on pixel points, so
this module knows nothing of lens profiles (:mod:`scanmass.scale.lens` uses it to
calibrate them).

Pixel coordinates are OpenCV's (x_px = column, y_px = row from the top, pixel centres
at integers).
"""

from __future__ import annotations

from dataclasses import dataclass

import cv2
import numpy as np

from scanmass.errors import ScaleError
from scanmass.load.decode import LoadedImage, lookup
from scanmass.numeric import median_1d, robust_sigma
from scanmass.scale.edges import Line, fit_line, intersect_lines, side_frame, window_centroid
from scanmass.scale.homography import apply_h
from scanmass.scale.markerfind import ExpectedQuads, find_markers
from scanmass.scale.mat import MARKER_CELLS, MatLayout, layout_for_ids
from scanmass.scale.planemap import PixelCorrection

__all__ = [
    "MarkerDetection",
    "MarkerSides",
    "detect_markers",
    "found_markers",
    "marker_sides",
    "expected_quads",
    "MIN_MARKERS",
]

#: Fewest markers a photo must show.
MIN_MARKERS = 4
#: Sample step (px) of the profiles across a marker's side (:func:`marker_sides`).
_PROFILE_STEP_PX = 0.25


@dataclass
class MarkerDetection:
    """Markers found in a photo.

    Attributes
    ----------
    ids : (M,) int ndarray
    corners_px : (M, 4, 2) float ndarray
        Refined corners (ideal pixels when a lens correction was given), in the order
        top-left, top-right, bottom-right, bottom-left of the printed marker.
    corners_coarse_px : (M, 4, 2) float ndarray
        The detector's own corners (distorted pixels).
    edge_noise_px : float
        Robust scatter of the edge points about their fitted lines.
    edge_blur_px : (M, 4) float ndarray
        Gaussian-equivalent blur of each marker side, px.
    side_normals : (M, 4, 2) float ndarray
        Unit outward normal of each side in the image.
    """

    ids: np.ndarray
    corners_px: np.ndarray
    corners_coarse_px: np.ndarray
    edge_noise_px: float
    edge_blur_px: np.ndarray
    side_normals: np.ndarray


#: One side of a marker as sampled: its unit outward normal, and its edge points (K, 2) px
#: (distorted pixels) with the clipped derivative's variance at each (K,), or None when
#: fewer than 5 profiles across the side show an edge.
SideSample = tuple[np.ndarray, tuple[np.ndarray, np.ndarray] | None]


@dataclass
class MarkerSides:
    """What the corner refinement reads from a photo's pixels, before any lens correction.

    The edge points depend on the photo and the detector's corners only; a lens
    correction is applied to them afterwards. A photo refined under several corrections
    (a lens estimated from the mat, a lens calibration's rounds) samples its sides once
    (:func:`marker_sides`) and passes them to :func:`detect_markers` each time: the same
    points as sampling again.

    Attributes
    ----------
    ids : (M,) int ndarray
        The detector's markers, an id seen twice dropped.
    coarse_px : (M, 4, 2) float ndarray
        Their corners as the detector gives them (distorted pixels).
    inside : (M,) bool ndarray
        Whether the marker is far enough from the photo's edge to be sampled.
    sides : list
        Per marker, its four :data:`SideSample` (empty for a marker not inside); arrays
        read-only.
    """

    ids: np.ndarray
    coarse_px: np.ndarray
    inside: np.ndarray
    sides: list[list[SideSample]]


def _grey8(image: LoadedImage) -> np.ndarray:
    grey = image.grey
    if grey.dtype == np.uint8:
        return grey
    return (grey >> 8).astype(np.uint8)


def _detector(dictionary_name: str) -> cv2.aruco.ArucoDetector:
    dictionary = cv2.aruco.getPredefinedDictionary(getattr(cv2.aruco, dictionary_name))
    params = cv2.aruco.DetectorParameters()
    # Corner refinement for measurement: the detector's sub-pixel step with a small
    # window (well under a cell) as a start; the corners are then recomputed from
    # straight lines fitted to each side (_refine_corners).
    params.cornerRefinementMethod = cv2.aruco.CORNER_REFINE_SUBPIX
    params.cornerRefinementWinSize = 3
    params.relativeCornerRefinmentWinSize = 0.1
    params.cornerRefinementMaxIterations = 50
    params.cornerRefinementMinAccuracy = 0.01
    params.minMarkerPerimeterRate = 0.01
    params.adaptiveThreshWinSizeMax = 53
    params.adaptiveThreshWinSizeStep = 8
    return cv2.aruco.ArucoDetector(dictionary, params)


def expected_quads(layout: MatLayout | None, ids: np.ndarray, quads_px: np.ndarray) -> np.ndarray:
    """Where the layout's markers not among ``ids`` should be (K, 4, 2) px, from those seen.

    A plain homography through the seen corners (a lens bends it a little; the marker
    search pads these places generously). Without a recognisable layout: none.
    """
    if layout is None:
        try:
            layout = layout_for_ids(ids)
        except ScaleError:
            return np.zeros((0, 4, 2))
    mine = np.isin(ids, layout.ids)
    missing = layout.ids[~np.isin(layout.ids, ids)]
    if mine.sum() < MIN_MARKERS or len(missing) == 0:
        return np.zeros((0, 4, 2))
    src = layout.marker_corners(ids[mine]).reshape(-1, 2).astype(np.float64)
    g, _ = cv2.findHomography(src, quads_px[mine].reshape(-1, 2).astype(np.float64), 0)
    if g is None:
        return np.zeros((0, 4, 2))
    return apply_h(g, layout.marker_corners(missing).reshape(-1, 2)).reshape(-1, 4, 2)


def found_markers(
    image: LoadedImage, dictionary: str = "DICT_5X5_250", expected: ExpectedQuads | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """The detector's markers: corners (M, 4, 2) float64 px (distorted pixels) and ids (M,) int.

    The same markers, corners and order as OpenCV's detector on the whole image, found
    through crops on large photos (:func:`~scanmass.scale.markerfind.find_markers`);
    ``expected`` gives where further markers should be.
    """
    corners, ids = find_markers(_grey8(image), _detector(dictionary), expected)
    return corners.astype(np.float64), ids.astype(int)


def detect_markers(
    image: LoadedImage,
    *,
    dictionary: str = "DICT_5X5_250",
    undistort: PixelCorrection | None = None,
    found: tuple[np.ndarray, np.ndarray] | None = None,
    sides: MarkerSides | None = None,
) -> MarkerDetection:
    """Find ArUco markers and refine their outer corners from fitted side lines.

    Each side of a marker's black border is located at several points along it: the
    profile of linear light across the side is differentiated and the centroid of
    the (clipped) derivative taken as the edge position, which is exact for a
    box-filtered step and unbiased under any symmetric blur. A straight line is
    fitted to each side (outliers dropped) and adjacent lines are intersected. With
    ``undistort`` the edge points are corrected for the lens before the line fits.
    ``found``: the detector's markers when already known (:func:`found_markers`);
    ``sides``: their sides when already sampled (:func:`marker_sides`; ``found`` is then not read).

    References
    ----------
    .. [1] S. Garrido-Jurado et al., "Automatic generation and detection of highly
       reliable fiducial markers under occlusion", Pattern Recognition 47(6),
       2280-2292, 2014.
    .. [2] OpenCV ``cv::aruco::ArucoDetector`` documentation, "Detection of ArUco
       Markers" tutorial (corner refinement parameters).
    """
    if sides is None:
        sides = marker_sides(image, found_markers(image, dictionary) if found is None else found)
    if len(sides.ids) == 0:
        return MarkerDetection(
            np.zeros(0, int),
            np.zeros((0, 4, 2)),
            np.zeros((0, 4, 2)),
            float("nan"),
            np.zeros((0, 4)),
            np.zeros((0, 4, 2)),
        )
    refined, noise, blur, normals, ok = _refine_corners(sides, undistort)
    return MarkerDetection(sides.ids[ok], refined[ok], sides.coarse_px[ok], noise, blur[ok], normals[ok])


def marker_sides(image: LoadedImage, found: tuple[np.ndarray, np.ndarray]) -> MarkerSides:
    """The edge points along every side of the detector's markers ``found`` (corners, ids).

    Each side of a marker's black border is located at several points along it: the
    profile of linear light across the side is differentiated and the centroid of the
    (clipped) derivative taken as the edge position. A marker id seen twice is ambiguous:
    both are dropped.
    """
    coarse, ids = found
    if len(ids) == 0:
        return MarkerSides(np.zeros(0, int), np.zeros((0, 4, 2)), np.zeros(0, bool), [])
    uniq, counts = np.unique(ids, return_counts=True)
    keep = np.isin(ids, uniq[counts == 1])
    ids, coarse = ids[keep], coarse[keep]
    inside, sides = _sample_sides(image, coarse)
    return MarkerSides(ids, coarse, inside, sides)


def _sample_sides(image: LoadedImage, coarse: np.ndarray) -> tuple[np.ndarray, list[list[SideSample]]]:
    """The :data:`SideSample` of each marker's four sides, and whether it could be sampled.

    A marker's four sides share one reach across the edge, so their profiles are sampled
    and reduced as the rows of one array (every step works row by row: the same floats
    as side by side).
    """
    m = len(coarse)
    inside = np.ones(m, dtype=bool)
    out: list[list[SideSample]] = []
    height, width = image.grey.shape
    # float32 of each table entry: the same values as looking up in float64 and converting
    table = np.asarray(image.to_linear).astype(np.float32)
    step = _PROFILE_STEP_PX
    for i in range(m):
        quad = coarse[i]
        centre = quad.mean(axis=0)
        side_px = float(np.mean(np.hypot(*(np.roll(quad, -1, axis=0) - quad).T)))
        cell_px = side_px / MARKER_CELLS
        reach = max(2.5, min(0.8 * cell_px, 14.0))
        x0, y0 = np.floor(quad.min(axis=0) - reach - 3).astype(int)
        x1, y1 = np.ceil(quad.max(axis=0) + reach + 3).astype(int)
        if x0 < 0 or y0 < 0 or x1 >= width or y1 >= height:
            inside[i] = False  # too close to the photo's edge to see both sides of every edge
            out.append([])
            continue
        crop = lookup(table, image.grey[y0 : y1 + 1, x0 : x1 + 1])
        offs = np.arange(-reach, reach + step / 2, step)
        normals, bases, maps_x, maps_y = [], [], [], []
        for k in range(4):
            a, b = quad[k], quad[(k + 1) % 4]
            d, length, n = side_frame(a, b, centre)
            margin = min(0.3, max(0.12, (reach + 1.5) / length))
            count = int(np.clip(length / 2.5, 8, 60))
            t = np.linspace(margin, 1.0 - margin, count)
            base = a[None, :] + t[:, None] * d[None, :]
            normals.append(n)
            bases.append(base)
            maps_x.append(base[:, 0, None] + offs[None, :] * n[0] - x0)
            maps_y.append(base[:, 1, None] + offs[None, :] * n[1] - y0)
        map_x = np.concatenate(maps_x).astype(np.float32)
        map_y = np.concatenate(maps_y).astype(np.float32)
        prof = cv2.remap(crop, map_x, map_y, cv2.INTER_LINEAR, borderMode=cv2.BORDER_REPLICATE).astype(np.float64)
        tail = max(2, len(offs) // 6)
        lo = np.median(prof[:, :tail], axis=1)
        hi = np.median(prof[:, -tail:], axis=1)
        contrast = hi - lo
        g = np.diff(prof, axis=1)
        mid = 0.5 * (offs[1:] + offs[:-1])
        gmax = g.max(axis=1, keepdims=True)
        w = np.clip(g - 0.15 * gmax, 0.0, None)
        sw = w.sum(axis=1)
        good_all = (contrast > 0.08) & (sw > 0)
        pos_all = (w * mid).sum(axis=1) / np.where(sw > 0, sw, 1)
        var_all = (w * (mid - pos_all[:, None]) ** 2).sum(axis=1) / np.where(sw > 0, sw, 1)
        pos_all = window_centroid(g, mid, pos_all, var_all)
        marker: list[SideSample] = []
        row = 0
        for k in range(4):
            n, base = normals[k], bases[k]
            rows = slice(row, row + len(base))
            row += len(base)
            good, pos, var = good_all[rows], pos_all[rows], var_all[rows]
            n.flags.writeable = False
            if good.sum() < 5:
                marker.append((n, None))
                continue
            edge_pts = (base + pos[:, None] * n)[good]
            var_good = var[good]
            edge_pts.flags.writeable = False
            var_good.flags.writeable = False
            marker.append((n, (edge_pts, var_good)))
        out.append(marker)
    return inside, out


def _refine_corners(
    sides: MarkerSides, undistort: PixelCorrection | None
) -> tuple[np.ndarray, float, np.ndarray, np.ndarray, np.ndarray]:
    """Corners from straight lines fitted to the sampled edge points of each marker side.

    With ``undistort`` the edge points are corrected for the lens before the line fits.
    Returns refined corners (M, 4, 2), the edge noise, blur (M, 4), normals (M, 4, 2) and
    whether each marker's four lines met (M,).
    """
    m = len(sides.ids)
    refined = sides.coarse_px.copy()
    blur = np.full((m, 4), np.nan)
    normals = np.zeros((m, 4, 2))
    ok = sides.inside.copy()
    residuals: list[np.ndarray] = []
    for i in range(m):
        if not ok[i]:
            continue
        lines: list[Line] = []
        for k, (n, sample) in enumerate(sides.sides[i]):
            normals[i, k] = n
            if sample is None:
                break
            edge_pts, var = sample
            if undistort is not None:
                edge_pts = undistort(edge_pts)
            line = fit_line(edge_pts)
            if line is None:
                break
            p0, direction, res = line
            residuals.append(res)
            # sigma of the blur from the clipped derivative's spread (rough; for checks only)
            blur[i, k] = float(np.sqrt(max(median_1d(var) - _PROFILE_STEP_PX**2 / 12, 0.0)) * 1.25)
            lines.append((p0, direction))
        if len(lines) < 4:
            ok[i] = False
            continue
        for k in range(4):
            p = intersect_lines(lines[(k - 1) % 4], lines[k])
            if p is None:
                ok[i] = False
                break
            refined[i, k] = p
    noise = robust_sigma(np.concatenate(residuals), centre=0.0) if residuals else float("nan")
    return refined, noise, blur, normals, ok
