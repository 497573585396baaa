"""Photos on a marker mat or a plain paper sheet: the "scale" stage for camera images.

:func:`mat_scale` finds the mat's ArUco markers, refines every marker corner to a
small fraction of a pixel, identifies the mat layout from the marker ids, and fits
the homography pixel -> mat mm (robust, then least squares). :func:`sheet_scale` does
the same with the four corners of a plain sheet of paper. Both return a
:class:`PhotoScale`: a :class:`~scanmass.scale.planemap.PlaneMap` with sampled homographies
for the uncertainty, the clear area as a pixel polygon, and what was found.
:func:`measure_photo` runs the pipeline with it and checks the result.

Pixel coordinates are OpenCV's (x_px = column, y_px = row from the top, pixel
centres at integers); mm are in the mat frame (origin lower-left, y up) or, for a
sheet, the sheet's own frame (origin at a corner, x along its short side in
portrait).
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import Any

import cv2
import numpy as np

from scanmass.errors import OptionError, ScaleError, SegmentationError
from scanmass.load.decode import LoadedImage
from scanmass.scale.homography import (
    ElevationHook,
    HomographyFit,
    apply_h,
    fit_homography,
    focal_from_homography,
    local_scale,
    sample_homographies,
)
from scanmass.scale.mat import MARKER_CELLS, MatLayout, layout_for_ids, load_layout
from scanmass.scale.planemap import PlaneMap

__all__ = [
    "MarkerDetection",
    "detect_markers",
    "PhotoScale",
    "mat_scale",
    "sheet_scale",
    "measure_photo",
    "scale_method",
    "SHEET_SIZES_MM",
    "PRINTER_REL_U",
    "PRINTED_READING_U_MM",
]

#: Relative standard uncertainty of an unverified print's scale (1 sigma). Common
#: practice: office printers printing "at 100 %" reproduce lengths to a few tenths of a
#: per cent, a "fit to page" setting shrinks them by 3-6 %; 0.5 % is our stated sigma
#: for a print whose bars were not measured.
PRINTER_REL_U = 0.005
#: Standard uncertainty of one caliper reading of a 100 mm printed bar, mm: a 0.02 mm
#: vernier or digital caliper (common practice) set on the ends of a printed bar,
#: whose edges are less crisp than a machined face.
PRINTED_READING_U_MM = 0.05
#: Nominal sheet sizes (width, height) in mm, portrait. ISO 216:2007 table 1 (A4, A3);
#: ANSI/ASME Y14.1-2020 table 1 size A (US Letter, 8.5 x 11 in).
SHEET_SIZES_MM = {"a4": (210.0, 297.0), "a3": (297.0, 420.0), "letter": (215.9, 279.4)}
#: Tolerance (+-) of a trimmed sheet's sides, mm. ISO 216: +-1.5 mm up to 150 mm,
#: +-2 mm from 150 to 600 mm (from memory). US Letter: no tolerance in ANSI/ASME Y14.1
#: that we know of; the ISO value is assumed (from memory).
SHEET_TOLERANCE_MM = 2.0
#: Margin of the clear area inside a plain sheet, mm.
SHEET_MARGIN_MM = 8.0
#: Fewest markers a photo must show.
MIN_MARKERS = 4
#: Matrices sampled for the homography's uncertainty.
SAMPLES = 64
#: A 35 mm film frame's diagonal, mm (36 x 24 mm), for EXIF 35 mm-equivalent focal lengths.
FILM_DIAGONAL_MM = 43.27
#: Assumed 35 mm-equivalent focal length of a phone's main camera and its relative
#: uncertainty, when neither a lens profile, the view's perspective nor EXIF tells it
#: (common practice: 24-28 mm equivalent).
DEFAULT_FOCAL_35MM = 26.0
DEFAULT_FOCAL_REL_U = 0.2


# ---------------------------------------------------------------------------------
# marker detection and corner refinement
# ---------------------------------------------------------------------------------


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


def detect_markers(
    image: LoadedImage,
    *,
    dictionary: str = "DICT_5X5_250",
    undistort: Callable[[np.ndarray], np.ndarray] | None = None,
) -> MarkerDetection:
    """Find ArUco markers and refine their outer corners from fitted side lines.

    Each side of a marker's black border is located at several points along it: the
    profile of linear light across the side is differentiated and the centroid of
    the (clipped) derivative taken as the edge position, which is exact for a
    box-filtered step and unbiased under any symmetric blur. A straight line is
    fitted to each side (outliers dropped) and adjacent lines are intersected. With
    ``undistort`` the edge points are corrected for the lens before the line fits.

    References
    ----------
    .. [1] S. Garrido-Jurado et al., "Automatic generation and detection of highly
       reliable fiducial markers under occlusion", Pattern Recognition 47(6),
       2280-2292, 2014.
    .. [2] OpenCV ``cv::aruco::ArucoDetector`` documentation, "Detection of ArUco
       Markers" tutorial (corner refinement parameters).
    """
    grey8 = _grey8(image)
    corners, ids, _ = _detector(dictionary).detectMarkers(grey8)
    if ids is None or len(ids) == 0:
        return MarkerDetection(
            np.zeros(0, int),
            np.zeros((0, 4, 2)),
            np.zeros((0, 4, 2)),
            float("nan"),
            np.zeros((0, 4)),
            np.zeros((0, 4, 2)),
        )
    ids = ids.ravel().astype(int)
    coarse = np.stack([c.reshape(4, 2) for c in corners]).astype(np.float64)
    # a marker id seen twice is ambiguous: drop both
    uniq, counts = np.unique(ids, return_counts=True)
    keep = np.isin(ids, uniq[counts == 1])
    ids, coarse = ids[keep], coarse[keep]
    refined, noise, blur, normals, ok = _refine_corners(image, coarse, undistort)
    return MarkerDetection(ids[ok], refined[ok], coarse[ok], noise, blur[ok], normals[ok])


def _refine_corners(image: LoadedImage, coarse: np.ndarray, undistort):
    """Corners from straight lines fitted to sub-pixel edge points of each marker side."""
    m = len(coarse)
    refined = coarse.copy()
    blur = np.full((m, 4), np.nan)
    normals = np.zeros((m, 4, 2))
    ok = np.ones(m, dtype=bool)
    residuals: list[np.ndarray] = []
    height, width = image.grey.shape
    for i in range(m):
        quad = coarse[i]
        centre = quad.mean(axis=0)
        side_px = float(np.mean(np.hypot(*(np.roll(quad, -1, axis=0) - quad).T)))
        cell_px = side_px / MARKER_CELLS
        reach = max(2.5, min(0.8 * cell_px, 14.0))
        x0, y0 = np.floor(quad.min(axis=0) - reach - 3).astype(int)
        x1, y1 = np.ceil(quad.max(axis=0) + reach + 3).astype(int)
        if x0 < 0 or y0 < 0 or x1 >= width or y1 >= height:
            ok[i] = False  # too close to the photo's edge to see both sides of every edge
            continue
        crop = image.to_linear[image.grey[y0 : y1 + 1, x0 : x1 + 1]].astype(np.float32)
        lines = []
        for k in range(4):
            a, b = quad[k], quad[(k + 1) % 4]
            d, length, n = _side(a, b, centre)
            normals[i, k] = n
            margin = min(0.3, max(0.12, (reach + 1.5) / length))
            count = int(np.clip(length / 2.5, 8, 60))
            t = np.linspace(margin, 1.0 - margin, count)
            step = 0.25
            offs = np.arange(-reach, reach + step / 2, step)
            base = a[None, :] + t[:, None] * d[None, :]
            pts = base[:, None, :] + offs[None, :, None] * n[None, None, :]
            map_x = (pts[..., 0] - x0).astype(np.float32)
            map_y = (pts[..., 1] - y0).astype(np.float32)
            prof = cv2.remap(crop, map_x, map_y, cv2.INTER_LINEAR, borderMode=cv2.BORDER_REPLICATE).astype(np.float64)
            lo = np.median(prof[:, : max(2, len(offs) // 6)], axis=1)
            hi = np.median(prof[:, -max(2, len(offs) // 6) :], axis=1)
            contrast = hi - lo
            g = np.diff(prof, axis=1)
            mid = 0.5 * (offs[1:] + offs[:-1])
            gmax = g.max(axis=1, keepdims=True)
            w = np.clip(g - 0.15 * gmax, 0.0, None)
            sw = w.sum(axis=1)
            good = (contrast > 0.08) & (sw > 0)
            if good.sum() < 5:
                break
            pos = (w * mid).sum(axis=1) / np.where(sw > 0, sw, 1)
            var = (w * (mid - pos[:, None]) ** 2).sum(axis=1) / np.where(sw > 0, sw, 1)
            pos = _window_centroid(g, mid, pos, var)
            edge_pts = base + pos[:, None] * n
            edge_pts = edge_pts[good]
            if undistort is not None:
                edge_pts = undistort(edge_pts)
            line = _fit_line(edge_pts)
            if line is None:
                break
            p0, direction, res = line
            residuals.append(res)
            # sigma of the blur from the clipped derivative's spread (rough; for checks only)
            blur[i, k] = float(np.sqrt(max(np.median(var[good]) - step**2 / 12, 0.0)) * 1.25)
            lines.append((p0, direction))
        if len(lines) < 4:
            ok[i] = False
            continue
        for k in range(4):
            p = _intersect(lines[(k - 1) % 4], lines[k])
            if p is None:
                ok[i] = False
                break
            refined[i, k] = p
    noise = float(1.4826 * np.median(np.abs(np.concatenate(residuals)))) if residuals else float("nan")
    return refined, noise, blur, normals, ok


def _window_centroid(g: np.ndarray, mid: np.ndarray, pos: np.ndarray, var: np.ndarray) -> np.ndarray:
    """Refine edge positions: centroid of the positive derivative in a window about each estimate.

    The first estimate (a derivative clipped at a fraction of its peak, robust to noise)
    is biased for sharp, asymmetrically sampled edges; the plain centroid in a window of
    a few blur widths is not, and two rounds re-centre the window.
    """
    half = np.maximum(1.5, 3.0 * np.sqrt(np.maximum(var, 0.0)) + 1.0)[:, None]
    gp = np.clip(g, 0.0, None)
    for _ in range(2):
        w = gp * (np.abs(mid[None, :] - pos[:, None]) <= half)
        sw = w.sum(axis=1)
        pos = np.where(sw > 0, (w * mid).sum(axis=1) / np.where(sw > 0, sw, 1), pos)
    return pos


def _fit_line(points: np.ndarray):
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
        scale = 1.4826 * np.median(np.abs(res[keep])) + 1e-4
        new = np.abs(res) < 4 * scale + 0.02
        if np.array_equal(new, keep):
            break
        keep = new
    return c, direction, res[keep]


def _intersect(l1, l2) -> np.ndarray | None:
    (p1, d1), (p2, d2) = l1, l2
    a = np.column_stack([d1, -d2])
    if abs(np.linalg.det(a)) < 1e-9:
        return None
    s = np.linalg.solve(a, p2 - p1)
    return p1 + s[0] * d1


# ---------------------------------------------------------------------------------
# the scale of a photo
# ---------------------------------------------------------------------------------


@dataclass
class PhotoScale:
    """A photo's plane map with its clear area and what went into it."""

    plane_map: PlaneMap
    roi_px: np.ndarray
    support_mm: np.ndarray
    warnings: list[str] = field(default_factory=list)
    fit: HomographyFit | None = None
    detection: MarkerDetection | None = None
    layout: MatLayout | None = None
    camera_matrix: np.ndarray | None = None


def _lens_tools(lens: Any, image: LoadedImage):
    """(profile, undistort callable, distort callable) for an optional lens profile."""
    if lens is None:
        return None, None, None
    from scanmass.scale.lens import LensProfile, load_lens_profile

    profile = lens if isinstance(lens, LensProfile) else load_lens_profile(lens)
    profile.check_image(image.width_px, image.height_px, path=image.path)
    return profile, profile.undistort_points, profile.distort_points


def _printer(layout: MatLayout, printed_x_mm: float | None, printed_y_mm: float | None, path: str | None):
    """(scale matrix on mat mm, relative term, note) from the caliper readings of the check bars."""
    if (printed_x_mm is None) != (printed_y_mm is None):
        raise OptionError("give both check-bar readings, e.g. --printed-x 100.1 --printed-y 99.9", path=path)
    if printed_x_mm is None:
        return np.eye(3), PRINTER_REL_U, False
    factors = []
    for axis, value in (("x", printed_x_mm), ("y", printed_y_mm)):
        nominal = layout.bar(axis).length_mm
        if not (math.isfinite(value) and 0.9 * nominal <= value <= 1.1 * nominal):
            raise OptionError(
                f"printed {axis} bar reading {value!r} mm is more than 10 % off its {nominal:g} mm; "
                "reprint the mat at 100 % (actual size) and measure the bar end to end",
                path=path,
            )
        factors.append(value / nominal)
    rel = PRINTED_READING_U_MM / layout.bar("x").length_mm
    return np.diag([factors[0], factors[1], 1.0]), rel, True


def _combine(*values: float) -> float:
    return float(math.sqrt(sum(v * v for v in values)))


def _side(a: np.ndarray, b: np.ndarray, centre: np.ndarray) -> tuple[np.ndarray, float, np.ndarray]:
    """A quadrilateral's side from ``a`` to ``b``: its vector, length and unit normal
    pointing away from the quadrilateral's ``centre``."""
    d = b - a
    length = float(np.hypot(*d))
    n = np.array([d[1], -d[0]]) / length
    if np.dot(n, 0.5 * (a + b) - centre) < 0:
        n = -n
    return d, length, n


def _principal(image: LoadedImage) -> tuple[float, float]:
    return (0.5 * (image.width_px - 1), 0.5 * (image.height_px - 1))


def _exif_focal_px(image: LoadedImage) -> float | None:
    """Focal length in px from the file's EXIF 35 mm-equivalent focal length, if any."""
    if not image.path:
        return None
    try:
        from PIL import Image

        with Image.open(image.path) as im:
            exif = im.getexif().get_ifd(0x8769)
        f35 = exif.get(0xA405)
        if not f35:
            return None
        diag = math.hypot(image.width_px, image.height_px)
        return float(f35) / FILM_DIAGONAL_MM * diag
    except Exception:  # noqa: BLE001 -- EXIF is optional; any problem means "not known"
        return None


def _camera_matrix(image: LoadedImage, profile, h_samples: list[np.ndarray], rng: np.random.Generator):
    """Camera matrix for the thickness correction and the focal lengths of each sample.

    Returns (K, focal samples (K,), source note).
    """
    cx, cy = _principal(image)
    if profile is not None:
        k = profile.camera_matrix
        f = 0.5 * (k[0, 0] + k[1, 1])
        return k, np.full(len(h_samples), f), "lens profile"
    fs = [focal_from_homography(np.linalg.inv(h), (cx, cy)) for h in h_samples]
    good = np.array([f for f in fs if f is not None and math.isfinite(f)])
    diag = math.hypot(image.width_px, image.height_px)
    if len(good) >= 0.9 * len(fs) and len(good) >= 8:
        f_med = float(np.median(good))
        spread = float(np.std(good, ddof=1)) / f_med
        if 0.2 * diag < f_med < 10 * diag and spread < 0.15:
            # besides the corner noise, the assumed principal point and square pixels: 3 % (1 sigma)
            samples = np.array([f if f is not None else f_med for f in fs], dtype=float)
            samples *= 1.0 + 0.03 * rng.standard_normal(len(samples))
            return (
                np.array([[f_med, 0, cx], [0, f_med, cy], [0, 0, 1.0]]),
                samples,
                f"estimated from the view's perspective ({f_med:.0f} px +- {100 * math.hypot(spread, 0.03):.0f} %)",
            )
    f_exif = _exif_focal_px(image)
    if f_exif is not None:
        f0, rel, note = f_exif, 0.03, f"EXIF 35 mm-equivalent focal length ({f_exif:.0f} px)"
    else:
        f0, rel = DEFAULT_FOCAL_35MM / FILM_DIAGONAL_MM * diag, DEFAULT_FOCAL_REL_U
        note = f"assumed {DEFAULT_FOCAL_35MM:g} mm equivalent (+-{100 * rel:.0f} %): no lens profile, EXIF or usable perspective"
    samples = f0 * (1.0 + rel * rng.standard_normal(len(h_samples)))
    return np.array([[f0, 0, cx], [0, f0, cy], [0, 0, 1.0]]), samples, note


def _roi_from_rect(rect_mm, to_px: Callable[[np.ndarray], np.ndarray], per_side: int = 48) -> np.ndarray:
    x0, y0, x1, y1 = rect_mm
    t = np.linspace(0.0, 1.0, per_side, endpoint=False)[:, None]
    corners = np.array([[x0, y0], [x1, y0], [x1, y1], [x0, y1]], dtype=float)
    pts = np.concatenate([corners[k] + t * (corners[(k + 1) % 4] - corners[k]) for k in range(4)])
    return to_px(pts)


def _build_scale(
    image: LoadedImage,
    *,
    method: str,
    fit: HomographyFit,
    points_mm: np.ndarray,
    printer: np.ndarray,
    terms: dict[str, float],
    extra: dict[str, Any],
    clear_mm,
    lens,
    thickness_mm: float | None,
    thickness_u_mm: float,
    support_mm: np.ndarray,
    warnings: list[str],
    sample_sigma_px: float,
    size_samples: Callable[[np.random.Generator], np.ndarray] | None = None,
) -> PhotoScale:
    """Common tail of mat_scale and sheet_scale: samples, thickness, the PlaneMap, the ROI."""
    profile, undistort, distort = lens
    rng = np.random.default_rng(12345)
    h0 = printer @ fit.px_to_plane
    h0 = h0 / h0[2, 2]
    raw = sample_homographies(fit, points_mm, sigma_px=max(sample_sigma_px, 1e-3), count=SAMPLES, seed=7)
    cx_mm, cy_mm = 0.5 * (clear_mm[0] + clear_mm[2]), 0.5 * (clear_mm[1] + clear_mm[3])
    centre_px = apply_h(np.linalg.inv(h0), [[cx_mm, cy_mm]])[0]
    mm_per_px = local_scale(h0, centre_px)
    scales = np.array([local_scale(h, centre_px) for h in raw])
    terms = {"homography": float(np.std(scales, ddof=1) / np.mean(scales)), **terms}
    if size_samples is not None:  # the target's own size tolerance (a sheet): scale each sample
        raw = [size_samples(rng) @ h for h in raw]
    samples = [printer @ h for h in raw]
    samples = [h / h[2, 2] for h in samples]
    hook = undistort
    hooks = None
    k, f_samples, f_note = _camera_matrix(image, profile, samples, rng)
    extra = {**extra, "focal_px": float(k[0, 0]), "focal_source": f_note}
    if thickness_mm is not None and thickness_mm > 0:
        hook = ElevationHook(h0, k, thickness_mm, undistort)
        hooks = []
        for h, f in zip(samples, f_samples):
            kk = k.copy()
            kk[0, 0] = kk[1, 1] = f
            hk = thickness_mm + thickness_u_mm * rng.standard_normal() if thickness_u_mm > 0 else thickness_mm
            hooks.append(ElevationHook(h, kk, max(hk, 0.0), undistort))
        # relative spread of the raised face's scale (focal length and height uncertain)
        raised = np.array([local_scale(hk.hh, centre_px) for hk in hooks])
        terms["thickness"] = float(np.std(raised, ddof=1) / np.mean(raised))
        shift = _parallax_mm(h0, k, thickness_mm, centre_px)
        extra["thickness_correction"] = {
            "height_mm": thickness_mm,
            "height_u_mm": thickness_u_mm,
            "parallax_at_centre_mm": shift,
        }
    if profile is not None:  # the calibration's residual, as a misfit over a typical part's size
        clear_diag = math.hypot(clear_mm[2] - clear_mm[0], clear_mm[3] - clear_mm[1])
        terms["lens"] = profile.rms_px * mm_per_px / (0.25 * clear_diag)
    rel_u = _combine(*terms.values())
    plane_map = PlaneMap(
        matrix=h0,
        method=method,
        rel_u=rel_u,
        terms=terms,
        note=extra.get("note", ""),
        reprojection_rms_px=fit.rms_px,
        reprojection_rms_mm=fit.rms_mm,
        extra={
            **{k_: v for k_, v in extra.items() if k_ != "note"},
            "mm_per_px": mm_per_px,
            "matrix_samples": np.stack(samples),
            **({"undistort_samples": hooks} if hooks is not None else {}),
        },
        undistort=hook,
    )
    inv = np.linalg.inv(h0)

    def to_px(pts_mm: np.ndarray) -> np.ndarray:
        ideal = apply_h(inv, pts_mm)
        return distort(ideal) if distort is not None else ideal

    roi = _roi_from_rect(clear_mm, to_px)
    return PhotoScale(
        plane_map=plane_map, roi_px=roi, support_mm=support_mm, warnings=warnings, fit=fit, camera_matrix=k
    )


def _parallax_mm(h0: np.ndarray, k: np.ndarray, height_mm: float, centre_px: np.ndarray) -> float:
    """How far (mm on the mat) a point ``height_mm`` above the mat's clear-area centre appears displaced."""
    hook = ElevationHook(h0, k, height_mm)
    foot = apply_h(hook.to_footprint, [centre_px])
    return float(np.hypot(*(apply_h(h0, foot) - apply_h(h0, [centre_px]))[0]))


def mat_scale(
    image: LoadedImage,
    *,
    mat: str | os.PathLike | MatLayout | None = None,
    printed_x_mm: float | None = None,
    printed_y_mm: float | None = None,
    lens: Any = None,
    thickness_mm: float | None = None,
    thickness_u_mm: float = 0.0,
) -> PhotoScale:
    """The plane map of a photo of a part on a scanmass marker mat.

    Parameters
    ----------
    image : LoadedImage
    mat : str, path or MatLayout, optional
        The mat's layout name or JSON file; by default recognised from the marker ids.
    printed_x_mm, printed_y_mm : float, optional
        Caliper readings of the printed 100 mm check bars; they correct the x and y
        scale of the print separately. Without them a printer term of
        :data:`PRINTER_REL_U` enters the uncertainty and a warning says so.
    lens : LensProfile or path, optional
        Camera lens profile from :func:`scanmass.scale.lens.calibrate_lens`.
    thickness_mm, thickness_u_mm : float, optional
        Height of the part's measured face above the mat and its standard uncertainty.

    Returns
    -------
    PhotoScale

    Raises
    ------
    ScaleError
        No or too few markers, unknown layout, markers inconsistent with a flat mat,
        motion blur.
    """
    path = image.path
    lens_tools = _lens_tools(lens, image)
    layout = load_layout(mat) if isinstance(mat, (str, os.PathLike)) else mat
    det = detect_markers(image, dictionary=layout.dictionary if layout else "DICT_5X5_250", undistort=lens_tools[1])
    if len(det.ids) == 0:
        raise ScaleError(
            "no scale: no marker mat found in the photo (and no usable DPI); photograph the part on a mat "
            "printed with 'scanmass mat', or give --sheet a4 for a plain sheet, or --dpi N for a scan",
            path=path,
        )
    if layout is None:
        layout = layout_for_ids(det.ids, path=path)
    known = np.isin(det.ids, layout.ids)
    if not known.all():
        strays = det.ids[~known]
        if known.sum() < MIN_MARKERS:
            raise ScaleError(
                f"the markers in the photo (ids {sorted(strays.tolist())[:6]}) are not those of mat {layout.name}; "
                "use a mat printed by 'scanmass mat' or give its layout file with --mat LAYOUT.json",
                path=path,
            )
    ids = det.ids[known]
    corners_px = det.corners_px[known]
    n = len(ids)
    if n < MIN_MARKERS:
        raise ScaleError(
            f"only {n} marker(s) of mat {layout.name} are visible; at least {MIN_MARKERS} are needed: "
            "keep the whole mat in the photo and the part off the markers",
            path=path,
        )
    _check_blur(det, known, path)
    corners_mm = layout.marker_corners(ids)
    pts_px = corners_px.reshape(-1, 2)
    pts_mm = corners_mm.reshape(-1, 2)
    cell_px = (
        float(np.median(np.hypot(*(np.roll(corners_px, -1, axis=1) - corners_px).reshape(-1, 2).T))) / MARKER_CELLS
    )
    fit = fit_homography(pts_px, pts_mm, ransac_px=max(2.0, 0.25 * cell_px))
    if fit is None:
        raise ScaleError("the markers found do not fit a flat mat; lay the mat flat and photograph it again", path=path)
    warnings = []
    misfit = _check_consistency(fit, n, det.edge_noise_px, pts_px, pts_mm, _principal(image), path, warnings)
    printer, printer_rel, checked = _printer(layout, printed_x_mm, printed_y_mm, path)
    if not checked:
        warnings.append(
            f"print scale unverified: measure the mat's two 100 mm check bars and give --printed-x/--printed-y "
            f"(a {100 * PRINTER_REL_U:.1f} % printer term is included meanwhile)"
        )
    inl_markers = fit.inliers.reshape(-1, 4).all(axis=1)
    support = (printer[:2, :2] @ pts_mm[fit.inliers].T).T
    clear = np.array(layout.clear_area_mm, dtype=float)
    clear_phys = np.concatenate([printer[:2, :2] @ clear[:2], printer[:2, :2] @ clear[2:]])
    extra = {
        "layout": layout.name,
        "markers_used": int(inl_markers.sum()),
        "markers_detected": int(len(det.ids)),
        "markers_on_mat": int(len(layout.markers)),
        "corner_noise_px": det.edge_noise_px,
        "printer_check": {"done": checked, "x_factor": float(printer[0, 0]), "y_factor": float(printer[1, 1])},
        "lens_profile": None if lens_tools[0] is None else lens_tools[0].source,
        # for overlays and reports: where each marker was found, and whether the fit used it
        "markers_px": [
            {"id": int(i), "corners": np.round(c, 2).tolist(), "used": bool(u)}
            for i, c, u in zip(ids, corners_px, inl_markers)
        ],
        "clear_area_mm": [float(v) for v in clear_phys],
        "note": f"marker mat {layout.name}: {int(inl_markers.sum())} of {len(layout.markers)} markers, "
        f"reprojection RMS {fit.rms_px:.3f} px",
    }
    terms = {"printer": printer_rel}
    if misfit > 0:  # what the plane model leaves unexplained, over a typical part's size
        clear_diag = math.hypot(clear[2] - clear[0], clear[3] - clear[1])
        terms["flatness"] = misfit / (0.25 * clear_diag)
    extra["misfit_mm"] = misfit
    scale = _build_scale(
        image,
        method="mat",
        fit=fit,
        points_mm=pts_mm,
        printer=printer,
        terms=terms,
        extra=extra,
        clear_mm=clear_phys,
        lens=lens_tools,
        thickness_mm=thickness_mm,
        thickness_u_mm=thickness_u_mm,
        support_mm=support,
        warnings=warnings,
        sample_sigma_px=fit.sigma_px,
    )
    scale.detection = det
    scale.layout = layout
    return scale


def _check_blur(det: MarkerDetection, known: np.ndarray, path: str | None) -> None:
    """Refuse motion blur: edge widths that differ strongly with the edge's direction."""
    blur = det.edge_blur_px[known]
    normals = det.side_normals[known]
    ok = np.isfinite(blur)
    if ok.sum() < 8:
        return
    b, nrm = blur[ok], normals[ok]
    # edge width along each normal direction: fit b^2 = s0^2 + m^2 (n . v)^2 via a 2x2 tensor
    a = np.column_stack([np.ones(len(b)), nrm[:, 0] ** 2 - nrm[:, 1] ** 2, 2 * nrm[:, 0] * nrm[:, 1]])
    coef, *_ = np.linalg.lstsq(a, b**2, rcond=None)
    aniso = math.hypot(coef[1], coef[2])
    wide = math.sqrt(max(coef[0] + aniso, 0.0))
    narrow = math.sqrt(max(coef[0] - aniso, 0.0))
    if wide > 2.5 and wide > 2.0 * max(narrow, 0.5):
        raise ScaleError(
            f"the photo is smeared in one direction (motion blur: edges {wide:.1f} px wide across it, {narrow:.1f} px "
            "along it); hold the camera still or add light, and take the photo again",
            path=path,
        )
    if narrow > 6.0:
        raise ScaleError(
            f"the photo is out of focus (marker edges about {narrow:.1f} px wide); focus on the mat and take it again",
            path=path,
        )


#: Largest misfit (mm, RMS over the marker corners, beyond their localisation noise) of
#: the homography that is accepted: a flat mat printed by an office printer fits to a few
#: hundredths of a mm; a bend, crease or curl of the paper, or strong lens distortion,
#: shows as more.
MAX_MISFIT_MM = 0.15


def _misfit_mm(fit: HomographyFit, noise_px: float) -> float:
    mm_per_px = fit.rms_mm / fit.rms_px if fit.rms_px > 0 else 0.0
    expected = 3.0 * (noise_px if math.isfinite(noise_px) else 0.0)
    return math.sqrt(max(fit.rms_px**2 - expected**2, 0.0)) * mm_per_px


def _looks_like_distortion(pts_px: np.ndarray, pts_mm: np.ndarray, fit: HomographyFit, centre_px) -> bool:
    """True when one radial term about the image centre explains most of the misfit."""
    sel = fit.inliers
    c = np.asarray(centre_px, dtype=float)
    r2 = np.sum((pts_px - c) ** 2, axis=1)
    scale = float(r2.max()) or 1.0
    best = fit.rms_px
    for lam in np.linspace(-0.3, 0.3, 61):
        corrected = c + (pts_px - c) * (1.0 + lam * r2 / scale)[:, None]
        g, _ = cv2.findHomography(pts_mm[sel], corrected[sel], 0)
        if g is None:
            continue
        res = apply_h(g, pts_mm[sel]) - corrected[sel]
        best = min(best, math.sqrt(float(np.mean(np.sum(res**2, axis=1)))))
    return best < 0.35 * fit.rms_px


def _check_consistency(
    fit: HomographyFit, n_markers: int, noise_px: float, pts_px, pts_mm, centre_px, path, warnings
) -> float:
    """Refuse a bent or creased mat (or strong lens distortion): corners that no homography explains.

    Returns the misfit in mm (RMS beyond the corners' localisation noise).
    """
    outlier_markers = int((~fit.inliers.reshape(-1, 4)).any(axis=1).sum())
    misfit = _misfit_mm(fit, noise_px)
    if outlier_markers > max(1, 0.2 * n_markers) or misfit > MAX_MISFIT_MM:
        what = (
            f"reprojection RMS {fit.rms_px:.2f} px = {fit.rms_mm:.2f} mm, {outlier_markers} of {n_markers} markers off"
        )
        if _looks_like_distortion(pts_px, pts_mm, fit, centre_px):
            raise ScaleError(
                f"the markers bow like a distorting lens ({what}); calibrate the camera with 'scanmass lens PHOTOS...' "
                "and pass --lens PROFILE",
                path=path,
            )
        raise ScaleError(
            f"the markers do not lie on one flat plane ({what}): flatten the mat (no bends, creases or curl) and "
            "take the photo again",
            path=path,
        )
    if outlier_markers:
        warnings.append(
            f"{outlier_markers} marker(s) did not fit the others and were left out (a crease or a dirty marker?)"
        )
    return misfit


# ---------------------------------------------------------------------------------
# plain paper sheet
# ---------------------------------------------------------------------------------


def sheet_scale(
    image: LoadedImage,
    sheet: str,
    *,
    lens: Any = None,
    thickness_mm: float | None = None,
    thickness_u_mm: float = 0.0,
) -> PhotoScale:
    """The plane map of a photo of a part on a plain sheet of paper (A4, A3 or Letter).

    The sheet must lie on a darker, contrasting table and show all four corners. Its
    edges are located to sub-pixel precision and fitted with straight lines; their
    intersections are the corners, mapped to the sheet's nominal size. The trimming
    tolerance of the paper standard (:data:`SHEET_TOLERANCE_MM`, taken as a uniform
    distribution, 1 sigma = tolerance / sqrt 3, GUM 4.3.7) enters the uncertainty.

    References
    ----------
    .. [1] ISO 216:2007, Writing paper and certain classes of printed matter --
       Trimmed sizes -- A and B series.
    .. [2] ANSI/ASME Y14.1-2020, Decimal inch drawing sheet size and format.
    .. [3] JCGM 100:2008 (GUM), section 4.3.7 (rectangular distribution).
    """
    path = image.path
    key = str(sheet).strip().lower()
    if key not in SHEET_SIZES_MM:
        raise OptionError(f"unknown sheet {sheet!r}; choose one of {', '.join(SHEET_SIZES_MM)}", path=path)
    lens_tools = _lens_tools(lens, image)
    corners_px, noise_px = _find_sheet(image, lens_tools[1])
    w_mm, h_mm = SHEET_SIZES_MM[key]
    # which pair of sides is the long one: the longer pair in the image (valid for tilts
    # below about 40 degrees, where foreshortening cannot swap them)
    side = np.hypot(*(np.roll(corners_px, -1, axis=0) - corners_px).T)
    if side[0] + side[2] > side[1] + side[3]:  # sides 0 and 2 run along the sheet's long edge
        w_mm, h_mm = h_mm, w_mm
    # corners in order: image-lower-left first, then counter-clockwise as seen (y up)
    target = np.array([[0, 0], [w_mm, 0], [w_mm, h_mm], [0, h_mm]], dtype=float)
    fit = fit_homography(corners_px, target, ransac_px=1e9)
    if fit is None:
        raise ScaleError(
            "the sheet's corners do not form a quadrilateral; show the whole sheet flat on a plain table", path=path
        )
    fit.sigma_px = max(noise_px, 0.02)
    rel_tol = SHEET_TOLERANCE_MM / math.sqrt(3.0)

    def size_samples(rng: np.random.Generator) -> np.ndarray:
        sx = 1.0 + rel_tol / w_mm * rng.uniform(-math.sqrt(3), math.sqrt(3))
        sy = 1.0 + rel_tol / h_mm * rng.uniform(-math.sqrt(3), math.sqrt(3))
        return np.diag([sx, sy, 1.0])

    m = SHEET_MARGIN_MM
    clear = (m, m, w_mm - m, h_mm - m)
    extra = {
        "sheet": key,
        "sheet_mm": [w_mm, h_mm],
        "sheet_tolerance_mm": SHEET_TOLERANCE_MM,
        "corners_px": corners_px.tolist(),
        "lens_profile": None if lens_tools[0] is None else lens_tools[0].source,
        "note": f"plain {key} sheet, {w_mm:g} x {h_mm:g} mm nominal (+-{SHEET_TOLERANCE_MM:g} mm)",
    }
    terms = {"sheet": _combine(rel_tol / w_mm, rel_tol / h_mm) / math.sqrt(2)}
    warnings = [
        f"scale from a plain {key} sheet: its trimming tolerance (+-{SHEET_TOLERANCE_MM:g} mm) limits the "
        "accuracy; a printed marker mat ('scanmass mat') does better"
    ]
    return _build_scale(
        image,
        method="sheet",
        fit=fit,
        points_mm=target,
        printer=np.eye(3),
        terms=terms,
        extra=extra,
        clear_mm=clear,
        lens=lens_tools,
        thickness_mm=thickness_mm,
        thickness_u_mm=thickness_u_mm,
        support_mm=target,
        warnings=warnings,
        sample_sigma_px=fit.sigma_px,
        size_samples=size_samples,
    )


def _find_sheet(image: LoadedImage, undistort) -> tuple[np.ndarray, float]:
    """Four sub-pixel corners of the brightest large quadrilateral (the sheet), ordered for the sheet frame."""
    path = image.path
    grey = image.grey
    height, width = grey.shape
    factor = max(1, int(math.ceil(max(height, width) / 800)))
    small = cv2.resize(grey, (width // factor, height // factor), interpolation=cv2.INTER_AREA) if factor > 1 else grey
    lin = image.to_linear[small].astype(np.float32)
    t = _otsu_threshold(lin)
    mask = (lin > t).astype(np.uint8)
    mask = cv2.morphologyEx(mask, cv2.MORPH_OPEN, np.ones((3, 3), np.uint8))
    contours, _ = cv2.findContours(mask, cv2.RETR_EXTERNAL, cv2.CHAIN_APPROX_SIMPLE)
    if not contours:
        raise ScaleError("no sheet of paper found; lay the sheet on a darker plain table and show all of it", path=path)
    biggest = max(contours, key=cv2.contourArea)
    if cv2.contourArea(biggest) < 0.05 * mask.size:
        raise ScaleError(
            "no sheet of paper found (nothing bright and large enough); lay the sheet on a darker plain table",
            path=path,
        )
    hull = cv2.convexHull(biggest)
    quad = None
    peri = cv2.arcLength(hull, True)
    for eps in (0.01, 0.02, 0.03, 0.05):
        approx = cv2.approxPolyDP(hull, eps * peri, True)
        if len(approx) == 4:
            quad = approx.reshape(4, 2).astype(np.float64)
            break
    if quad is None:
        raise ScaleError(
            "the sheet's outline is not a four-cornered shape; show all four corners of the sheet, flat", path=path
        )
    x_touch = (
        (quad[:, 0] <= 1) | (quad[:, 0] >= mask.shape[1] - 2) | (quad[:, 1] <= 1) | (quad[:, 1] >= mask.shape[0] - 2)
    )
    if x_touch.any():
        raise ScaleError("the sheet runs off the photo's edge; show all four corners of the sheet", path=path)
    quad = (quad + 0.5) * factor - 0.5  # low-res pixel centres -> full-res
    # refine each side with sub-pixel edge points, then intersect
    lin_full = image.to_linear
    lines, residuals = [], []
    centre = quad.mean(axis=0)
    for k in range(4):
        a, b = quad[k], quad[(k + 1) % 4]
        d, length, n = _side(a, b, centre)
        reach = max(4.0, 2.0 * factor + 3.0)
        t_s = np.linspace(0.1, 0.9, int(np.clip(length / 4, 16, 200)))
        offs = np.arange(-reach, reach + 0.125, 0.25)
        base = a[None, :] + t_s[:, None] * d[None, :]
        pts = base[:, None, :] + offs[None, :, None] * n[None, None, :]
        x0, y0 = np.floor(pts.reshape(-1, 2).min(axis=0)).astype(int) - 2
        x1, y1 = np.ceil(pts.reshape(-1, 2).max(axis=0)).astype(int) + 2
        x0, y0 = max(x0, 0), max(y0, 0)
        x1, y1 = min(x1, width - 1), min(y1, height - 1)
        crop = lin_full[grey[y0 : y1 + 1, x0 : x1 + 1]].astype(np.float32)
        prof = cv2.remap(
            crop,
            (pts[..., 0] - x0).astype(np.float32),
            (pts[..., 1] - y0).astype(np.float32),
            cv2.INTER_LINEAR,
            borderMode=cv2.BORDER_REPLICATE,
        ).astype(np.float64)
        g = -np.diff(prof, axis=1)  # bright sheet inside, darker table outside: falls outwards
        mid = 0.5 * (offs[1:] + offs[:-1])
        w = np.clip(g - 0.15 * g.max(axis=1, keepdims=True), 0, None)
        sw = w.sum(axis=1)
        good = sw > 1e-6
        pos = (w * mid).sum(axis=1) / np.where(good, sw, 1)
        edge = (base + pos[:, None] * n)[good]
        if undistort is not None:
            edge = undistort(edge)
        line = _fit_line(edge)
        if line is None:
            raise ScaleError(
                "cannot trace the sheet's edges; use a plain table that contrasts with the paper", path=path
            )
        lines.append(line[:2])
        residuals.append(line[2])
    corners = np.array([_intersect(lines[(k - 1) % 4], lines[k]) for k in range(4)])
    if any(c is None for c in corners):
        raise ScaleError("the sheet's edges do not meet at four corners; show the whole sheet flat", path=path)
    corners = np.asarray(corners, dtype=float)
    res = np.concatenate(residuals)
    # corner localisation: a line fitted to m points with scatter s has its end positions known to about 2 s / sqrt(m)
    noise = float(1.4826 * np.median(np.abs(res))) * 2.0 / math.sqrt(max(len(res) / 4, 1))
    # order: start at the corner lowest-left in the image (largest y - x), go counter-clockwise as seen
    area = 0.5 * np.sum(corners[:, 0] * np.roll(corners[:, 1], -1) - np.roll(corners[:, 0], -1) * corners[:, 1])
    if area > 0:  # positive in y-down pixels = clockwise as seen; reverse to counter-clockwise
        corners = corners[::-1]
    start = int(np.argmax(corners[:, 1] - corners[:, 0]))
    corners = np.roll(corners, -start, axis=0)
    return corners, noise


def _otsu_threshold(values: np.ndarray) -> float:
    v = values.ravel()
    hist, edges = np.histogram(v, bins=256, range=(float(v.min()), float(v.max()) + 1e-9))
    centres = 0.5 * (edges[:-1] + edges[1:])
    w0 = np.cumsum(hist).astype(float)
    w1 = w0[-1] - w0
    m0 = np.cumsum(hist * centres)
    between = w0 * w1 * (m0 / np.maximum(w0, 1e-12) - (m0[-1] - m0) / np.maximum(w1, 1e-12)) ** 2
    return float(centres[int(np.argmax(between))])


# ---------------------------------------------------------------------------------
# the pipeline step
# ---------------------------------------------------------------------------------


def scale_method(image: LoadedImage, options) -> str:
    """Which scale source to use: ``"dpi"``, ``"mat"`` or ``"sheet"``.

    An explicit ``dpi`` means a scan; a ``sheet`` means a plain sheet; ``scale="mat"``
    or a given ``mat`` layout means the mat; otherwise (``scale="auto"``) a file with
    a trustworthy DPI is a scan and anything else is looked for on a mat.
    """
    scale = getattr(options, "scale", "auto")
    if scale not in ("auto", "dpi", "mat", "sheet"):
        raise OptionError(f"scale {scale!r} must be one of auto, dpi, mat, sheet", path=image.path)
    if scale != "auto":
        if scale == "sheet" and getattr(options, "sheet", None) is None:
            raise OptionError("--scale sheet needs the paper size, e.g. --sheet a4", path=image.path)
        return scale
    if options.dpi is not None:
        return "dpi"
    if getattr(options, "sheet", None) is not None:
        return "sheet"
    if getattr(options, "mat", None) is not None:
        return "mat"
    return "dpi" if image.dpi is not None else "mat"


def photo_scale(
    image: LoadedImage, options, *, thickness_mm: float | None = None, thickness_u_mm: float = 0.0
) -> PhotoScale:
    """The :class:`PhotoScale` of a photo for the options of :func:`scanmass.measure`."""
    method = scale_method(image, options)
    lens = getattr(options, "lens", None)
    if method == "sheet":
        return sheet_scale(image, options.sheet, lens=lens, thickness_mm=thickness_mm, thickness_u_mm=thickness_u_mm)
    return mat_scale(
        image,
        mat=getattr(options, "mat", None),
        printed_x_mm=getattr(options, "printed_x_mm", None),
        printed_y_mm=getattr(options, "printed_y_mm", None),
        lens=lens,
        thickness_mm=thickness_mm,
        thickness_u_mm=thickness_u_mm,
    )


def measure_photo(image: LoadedImage, options, *, thickness_mm: float | None = None, thickness_u_mm: float = 0.0):
    """Measure a photo on a mat or sheet: plane map, segmentation inside the clear area, checks.

    Raises
    ------
    ScaleError
        See :func:`mat_scale` and :func:`sheet_scale`; also when a part lies outside
        the region the detected markers surround.
    SegmentationError
        No whole part inside the clear area.
    """
    from scanmass.pipeline import measure_image

    if thickness_mm is not None and not (math.isfinite(thickness_mm) and thickness_mm >= 0):
        raise OptionError(f"thickness {thickness_mm!r} mm must be zero or positive", path=image.path)
    scale = photo_scale(image, options, thickness_mm=thickness_mm, thickness_u_mm=thickness_u_mm)
    masked = _mask_outside(image, scale.roi_px)
    try:
        result = measure_image(masked, options, plane_map=scale.plane_map, roi_px=scale.roi_px)
    except SegmentationError as exc:
        if "touch" in str(exc):
            where = "mat's clear area" if scale.plane_map.method == "mat" else "sheet's margin"
            raise SegmentationError(
                f"no whole part inside the {where}: the part crosses its edge or the photo's edge; move it inside "
                "the corner marks, away from markers and the photo's edge",
                path=image.path,
            ) from None
        raise
    hull = cv2.convexHull(scale.support_mm.astype(np.float32))
    for part in result.parts:
        outline = np.asarray(part.outline_mm, dtype=np.float32)[:: max(1, len(part.outline_mm) // 200)]
        inside = [cv2.pointPolygonTest(hull, (float(x), float(y)), True) for x, y in outline]
        if min(inside) < -1.0:
            raise ScaleError(
                f"part {part.label} lies outside the region the visible markers surround; keep the markers on every "
                "side of the part in the photo",
                path=image.path,
            )
    warnings = list(scale.warnings)
    warnings += _parallax_warning(scale, result, thickness_mm)
    result.warnings = warnings + list(result.warnings)
    result.settings.update({"scale": scale_method(image, options)})
    return result


def _mask_outside(image: LoadedImage, roi_px: np.ndarray) -> LoadedImage:
    """A copy of the image whose pixels outside the clear area show the paper's level.

    The segmenter reads the part's polarity and the background from the whole image;
    markers, print and the table around the mat would mislead it.
    """
    mask = np.zeros(image.grey.shape, np.uint8)
    cv2.fillPoly(mask, [np.round(roi_px).astype(np.int32)], 1)
    inner = cv2.erode(mask, np.ones((3, 3), np.uint8), iterations=2).astype(bool)
    band = inner & ~cv2.erode(mask, np.ones((3, 3), np.uint8), iterations=8).astype(bool)
    values = image.grey[band]
    level = np.median(values) if values.size else np.median(image.grey[inner])
    grey = image.grey.copy()
    grey[~mask.astype(bool)] = np.asarray(level, dtype=grey.dtype)
    return replace(image, grey=grey)


def _parallax_warning(scale: PhotoScale, result, thickness_mm: float | None) -> list[str]:
    """Without a thickness: the thickness from which parallax exceeds the stated uncertainty."""
    if thickness_mm is not None or scale.camera_matrix is None or not result.parts:
        return []
    from scanmass.section import section_properties

    h0 = scale.plane_map.matrix
    hook = ElevationHook(h0, scale.camera_matrix, 1.0)
    inv = np.linalg.inv(h0)
    limit = math.inf
    for part in result.parts:
        ring_px = apply_h(inv, part.outline_mm)
        x, y = ring_px[:, 0], ring_px[:, 1]
        if np.dot(x, np.roll(y, -1)) - np.dot(np.roll(x, -1), y) < 0:
            ring_px = ring_px[::-1]
        raised = section_properties(apply_h(h0, hook(ring_px)))
        flat = section_properties(apply_h(h0, ring_px))
        d_area = abs(raised.area_mm2 - flat.area_mm2)
        d_cen = math.dist(raised.centroid_mm, flat.centroid_mm)
        if d_area > 0:
            limit = min(limit, part.area_u_mm2 / d_area)
        if d_cen > 0:
            limit = min(limit, math.hypot(*part.centroid_u_mm) / d_cen)
    if limit < 25.0:
        return [
            f"parallax: a part thicker than about {limit:.2g} mm looks larger or shifted by more than the stated "
            "uncertainty; give its thickness with --thickness MM"
        ]
    return []
