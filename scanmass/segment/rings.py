"""Find each part's silhouette and holes with sub-pixel boundaries (the "segment" stage).

Works in pixel coordinates only (OpenCV convention: ``x_px`` = column, ``y_px`` = row
from the top, pixel centres at integers). Steps:

1. a coarse detection mask from a low-resolution copy: polarity from the image border,
   a background (illumination) map, and a threshold halfway between background and part
   levels in linear light;
2. connected parts with their holes from the mask (OpenCV contour hierarchy), specks
   removed, parts touching the image edge marked as cut;
3. per part, on a padded crop only: local background and part levels (smooth surfaces fitted
   in linear light), the crop normalised to 0 = background, 1 = part, and marching squares
   at the midpoint level for sub-pixel rings.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from functools import partial

import cv2
import numpy as np

from scanmass.errors import OptionError, PartCutError, SegmentationError
from scanmass.geometry import point_in_ring, signed_area
from scanmass.load.decode import LoadedImage, lookup
from scanmass.numeric import code_median, code_percentiles, nonzero_rc, otsu_threshold, robust_sigma, sample_points
from scanmass.segment.contact import depth_field, edge_shadow_depth, lamp_tinted, part_side_rise, renormalise
from scanmass.segment.contours import level_rings

__all__ = ["PartRings", "Segmentation", "segment"]

_LOW_RES_MAX_PX = 640
#: A found object whose contrast with its background is below this many times the
#: image's pixel noise is noise itself (an empty mat or lid), not a part.
FAINT_SNR = 5.0
#: Most cut objects checked for being noise before "no whole part" is said.
_MAX_CUT_CHECKED = 20
#: Most neighbouring-pixel pairs sampled for the noise estimate.
_NOISE_PAIRS = 200_000
_PAD_PX = 6
#: Scale (px) of the face's local level beside an edge with ``local_face`` (:func:`refine_region`).
LOCAL_FACE_SIGMA_PX = 4.0


#: Holes smaller than this (px2, a 2 x 2 pixel patch) are pixel noise: filled without being counted.
_MIN_COUNTED_HOLE_PX = 4.0


@dataclass
class PartRings:
    """One part in pixel space: its outer ring, hole rings and what the error model needs.

    Rings are (N, 2) float arrays of (x_px, y_px), implicitly closed.
    """

    label: int
    outer_px: np.ndarray
    holes_px: list[np.ndarray]
    cut: bool
    bbox_px: tuple[int, int, int, int]
    area_px: float
    contrast: float
    noise_rel: float
    gradient_px: np.ndarray
    blur_px: float
    level_rel_u: float
    hole_gradients_px: list[np.ndarray] = field(default_factory=list)
    #: holes smaller than the minimum hole area that were filled (counted as material)
    filled_holes: int = 0
    filled_hole_area_px: float = 0.0


@dataclass
class Segmentation:
    """All parts found in one image, plus what was left out and why."""

    parts: list[PartRings]
    cut: list[PartRings]
    polarity: str
    specks: int
    warnings: list[str] = field(default_factory=list)
    speck_max_area_px: float = 0.0  # the largest speck dropped (px), 0 when none
    #: objects dropped because their contrast is within the image noise (counted in specks too)
    faint: int = 0
    #: pixel noise of the image in linear light (the robust spread of neighbour differences / sqrt 2)
    noise_lin: float = 0.0


def _masked_blur(values: np.ndarray, mask: np.ndarray, sigma: float, fallback: float) -> np.ndarray:
    """Normalised convolution: a smooth surface through the masked samples.

    The surface is smooth on the scale of ``sigma``, so it is computed on a copy reduced
    to about 8 px per sigma and interpolated back.
    """
    shrink = max(1, int(sigma // 8))
    m: np.ndarray = mask.astype(np.float32)
    # times the 0/1 mask as float32: the product numpy forms with the bool mask (it casts the mask
    # to the values' type first), without the cast inside the multiplication
    v: np.ndarray = np.multiply(values, m, dtype=np.result_type(values, np.float32)).astype(np.float32, copy=False)
    if shrink > 1:
        size = (max(1, values.shape[1] // shrink), max(1, values.shape[0] // shrink))
        m = cv2.resize(m, size, interpolation=cv2.INTER_AREA)
        v = cv2.resize(v, size, interpolation=cv2.INTER_AREA)
    w = cv2.GaussianBlur(m, (0, 0), sigma / shrink, borderType=cv2.BORDER_REFLECT)
    v = cv2.GaussianBlur(v, (0, 0), sigma / shrink, borderType=cv2.BORDER_REFLECT)
    # the quotient where the weight is not too small (the same float32 division, no gather of both planes)
    ratio: np.ndarray = np.divide(v, w, out=np.full(w.shape, fallback, dtype=np.float32), where=w > 1e-3)
    if shrink > 1:
        ratio = cv2.resize(ratio, (values.shape[1], values.shape[0]), interpolation=cv2.INTER_LINEAR)
    return ratio


def _poly_design(x: np.ndarray, y: np.ndarray, order: int) -> np.ndarray:
    cols = [np.ones_like(x)]
    if order >= 1:
        cols += [x, y]
    if order >= 2:
        cols += [x * x, x * y, y * y]
    return np.stack(cols, axis=1)


def _fit_surface(
    values: np.ndarray, rows: np.ndarray, cols: np.ndarray, scale: float, max_order: int
) -> tuple[np.ndarray, int, float, int]:
    """Robust least-squares polynomial surface; returns (coefficients, order, residual sigma, n).

    References
    ----------
    .. [1] W. F. Sheppard, "On the calculation of the most probable values of
       frequency-constants, for data arranged according to equidistant divisions of a scale",
       Proc. London Math. Soc. 29, 353-380, 1898 (the variance of grouped data exceeds the
       variance of the data by h^2 / 12).
    """
    n = values.size
    order = 0 if n < 30 else (1 if n < 300 or max_order < 2 else 2)
    x, y = cols / scale, rows / scale
    a = _poly_design(x, y, order)
    keep = np.ones(n, dtype=bool)
    coef = np.zeros(a.shape[1])
    sigma = 0.0
    # stored grey levels (far fewer distinct values than samples: 8- and 16-bit files): the
    # spacing of the levels present; 0 for float input
    levels = np.unique(values)
    step = float(np.median(np.diff(levels))) if 1 < levels.size < 0.5 * n else 0.0
    for _ in range(3):  # iteratively reweighted: drop > 3.5 sigma outliers (dust, print, shadows)
        # normal equations of at most 6 unknowns, summed with einsum: multithreaded BLAS on
        # tall thin matrices costs more in idle threads than it saves (batch benchmark)
        ak = a[keep]
        coef = np.linalg.solve(
            np.einsum("ij,ik->jk", ak, ak) + 1e-12 * np.eye(a.shape[1]), np.einsum("ij,i->j", ak, values[keep])
        )
        res = values - np.einsum("ij,j->i", a, coef)
        sigma = _noise_spread(res[keep], step)
        # a sample's residual is its noise plus its rounding (at most half a step) plus the
        # surface's own error (up to half a step where the noise is under one: no dither),
        # and noise under about half a step is not resolved by the grouped data: the cut
        # keeps the neighbouring stored levels. At 3.5 sigma alone it dropped them where one
        # level holds most samples (noise under a step at a bright sRGB level of an 8-bit
        # file), unevenly: the level moved by up to half a step (0.5 % of the contrast)
        new_keep = np.abs(res) < 3.5 * sigma + 2.0 * step + 1e-6
        if new_keep.sum() < max(8, a.shape[1] * 3) or np.array_equal(new_keep, keep):
            break
        keep = new_keep
    return coef, order, sigma, int(keep.sum())


def _noise_spread(residuals: np.ndarray, step: float) -> float:
    """Per-pixel spread of a level fit's residuals; ``step``: the spacing of the stored levels (0: float data).

    The robust spread (1.4826 x the median absolute deviation), where the noise spans a
    few stored levels (at 2 steps the grouping moves it by well under 1 %). Under that the
    median absolute deviation says little (0 where one level holds most samples, 3/4 of a
    step where two share them): there it is the standard deviation of the residuals, the
    noise and the rounding together (``sigma^2 + step^2 / 12`` where the noise dithers the
    rounding, Sheppard's correction read the other way), which is what the edge's own
    pixels carry too; within a few steps of the level the outliers the median resists
    (shading, texture) are already cut.
    """
    if residuals.size == 0:
        return 1e-9
    mad = robust_sigma(residuals)
    if step > 0 and mad < 2.0 * step:
        return float(np.std(residuals)) + 1e-9
    return mad + 1e-9


def pixel_noise(image: LoadedImage, roi_px: np.ndarray | None = None) -> float:
    """Pixel noise of an image in linear light, from differences of horizontal neighbours.

    The robust spread (1.4826 x median absolute value) of ``x[i + 1] - x[i]`` divided by
    sqrt(2): edges are too few to move the median. Inside ``roi_px`` only (a photo's
    outside is painted with one level); a regular sample of at most 200 000 pairs.

    References
    ----------
    .. [1] J. Immerkaer, "Fast noise variance estimation", Computer Vision and Image
       Understanding 64(2), 300-302, 1996 (noise from differences that cancel the signal).
    """
    grey, lut = image.grey, image.to_linear
    height, width = grey.shape
    if width < 2:
        return 0.0
    step = max(1, int(math.sqrt(height * (width - 1) / _NOISE_PAIRS)))
    # the pairs (row, col), (row, col + 1) on a regular grid of rows and columns, as views
    left, right = (slice(0, height, step), slice(0, width - 1, step)), (slice(0, height, step), slice(1, width, step))
    codes_l, codes_r = grey[left], grey[right]
    if roi_px is not None:
        inside = np.zeros((height, width), np.uint8)
        cv2.fillPoly(inside, [np.round(np.asarray(roi_px)).astype(np.int32)], 1)
        keep = inside[left].astype(bool) & inside[right].astype(bool)
        codes_l, codes_r = codes_l[keep], codes_r[keep]
    if codes_l.size < 16:
        return 0.0
    diff = np.abs(lut[codes_r].astype(np.float64) - lut[codes_l].astype(np.float64))
    mad = 1.4826 * float(np.median(diff))
    # noise below one grey level leaves most differences at 0: then the RMS of the
    # differences without the largest 1 % (edges) takes over
    trimmed = diff[diff <= np.quantile(diff, 0.99)]
    rms = float(np.sqrt(np.mean(trimmed**2))) if trimmed.size else 0.0
    return max(mad, rms) / math.sqrt(2.0)


def _roi_box(poly: np.ndarray, width: int, height: int) -> tuple[int, int, int, int]:
    """The box (x0, y0, x1, y1), ends exclusive, that the mask of region ``poly`` (integer px) is traced in.

    The mask is 0 outside the region; a margin of two 0 px on every side within the image
    keeps the contours, their order and hierarchy those of the whole plane (OpenCV's
    tracing scans in raster order and offsets the points back to whole-image px). The
    whole image when the region misses it.
    """
    x0, y0 = max(int(poly[:, 0].min()) - 2, 0), max(int(poly[:, 1].min()) - 2, 0)
    x1, y1 = min(int(poly[:, 0].max()) + 3, width), min(int(poly[:, 1].max()) + 3, height)
    if x1 - x0 < 1 or y1 - y0 < 1:
        return 0, 0, width, height
    return x0, y0, x1, y1


def segment(
    image: LoadedImage,
    *,
    level: float = 0.5,
    threshold: float | None = None,
    min_area_px: float = 50.0,
    min_hole_area_px: float | None = None,
    keep_cut: bool = False,
    roi_px: np.ndarray | None = None,
    paper_at_edge: bool = False,
    colour: np.ndarray | None = None,
) -> Segmentation:
    """Separate parts from the background with sub-pixel boundaries.

    Parameters
    ----------
    image : LoadedImage
        Encoded grey plane and its linearisation table.
    level : float, default 0.5
        Where the boundary sits between the local background (0) and part (1) levels in
        linear light; 0.5 is the edge of a symmetric blur.
    threshold : float, optional
        Manual override of the detection threshold, as a fraction (0-1) of the encoded
        full scale (what an image editor shows as grey/255). The sub-pixel boundary is
        then the contour of the linear image at this grey value.
    min_area_px : float
        Parts smaller than this (in pixels) are specks and dropped.
    min_hole_area_px : float, optional
        Holes smaller than this are treated as dust and filled; default ``min_area_px``.
    keep_cut : bool
        Keep parts that touch the image edge (or the edge of ``roi_px``).
    roi_px : (N, 2) ndarray, optional
        Polygon (x_px, y_px) outside which nothing is a part (e.g. a mat's clear area).
    paper_at_edge : bool
        Photos: where a soft contact shadow darkens the paper beside a dark part, take the
        edge half-way between the part and the paper's level at the edge
        (:mod:`scanmass.segment.contact`) instead of the level further out.
    colour : (H, W, 3) uint8 ndarray, optional
        The photo's colour planes (BGR, encoded with ``image``'s tone curve): with ``paper_at_edge``,
        a shade whose tint leans away from the paper's (a lamp's coloured penumbra) is no contact shade
        (:func:`~scanmass.segment.contact.lamp_tinted`).

    Returns
    -------
    Segmentation

    Raises
    ------
    SegmentationError
        When the image is blank, has no contrast, or no part is found.
    PartCutError
        (a SegmentationError) When every part found touches the image edge or the edge
        of ``roi_px`` and ``keep_cut`` is off.

    References
    ----------
    .. [1] N. Otsu, "A threshold selection method from gray-level histograms",
       IEEE Trans. SMC 9(1), 62-66, 1979 (coarse detection only).
    .. [2] W. E. Lorensen and H. E. Cline, "Marching cubes", SIGGRAPH 1987, in its 2-D
       form as implemented by ``skimage.measure.find_contours``.
    """
    if not (0.0 < level < 1.0):
        raise OptionError(
            f"level {level!r} must lie strictly between 0 (background) and 1 (part), e.g. 0.5", path=image.path
        )
    if threshold is not None and not (0.0 < threshold < 1.0):
        raise OptionError(
            f"threshold {threshold!r} must be a grey fraction strictly between 0 and 1, e.g. 0.5", path=image.path
        )
    if not (math.isfinite(min_area_px) and min_area_px >= 0):
        raise OptionError(f"minimum area {min_area_px!r} must be zero or positive", path=image.path)
    min_hole = min_area_px if min_hole_area_px is None else float(min_hole_area_px)
    grey, lut = image.grey, image.to_linear
    height, width = grey.shape
    full_scale = float(len(lut) - 1)

    # -- 1. coarse analysis on a low-resolution copy ----------------------------------
    factor = max(1, int(math.ceil(max(height, width) / _LOW_RES_MAX_PX)))
    small_shape = (max(1, height // factor), max(1, width // factor))
    small_enc = cv2.resize(grey, (small_shape[1], small_shape[0]), interpolation=cv2.INTER_AREA) if factor > 1 else grey
    lut32 = np.asarray(lut).astype(np.float32)
    small = lookup(lut32, small_enc)  # lut[small_enc] as float32, value for value
    # np.percentile(small, [0.5, 99.5]) and below np.median(small[bg_core]), read from the codes' counts
    p_lo, p_hi = code_percentiles(small_enc, None, lut32, [0.5, 99.5])
    border = np.concatenate([small[0], small[-1], small[:, 0], small[:, -1]])
    if p_hi - p_lo < 0.02 + 1e-9:
        raise SegmentationError(
            "the image has no contrast (blank or uniform); scan the part on a contrasting background", path=image.path
        )

    if threshold is not None:
        t_lin = float(lut[int(round(threshold * full_scale))])
        bright_background = float(np.median(border)) > t_lin
    else:
        t_lin = otsu_threshold(small.ravel())
        bright_background = float(np.mean(border > t_lin)) >= 0.5
    fg_small = (small < t_lin) if bright_background else (small > t_lin)
    if fg_small.mean() > 0.97:
        raise SegmentationError(
            "the whole image looks like one part (no background visible); leave a margin of background around each part",
            path=image.path,
        )
    kernel = np.ones((3, 3), np.uint8)
    bg_core = cv2.erode((~fg_small).astype(np.uint8), kernel, iterations=2).astype(bool)
    if bg_core.sum() < 10:
        bg_core = ~fg_small
    fg_core = cv2.erode(fg_small.astype(np.uint8), kernel, iterations=1).astype(bool)
    if fg_core.sum() < 4:
        fg_core = fg_small
    if not fg_core.any():
        raise SegmentationError(
            "no part found: the image is all background; check the scan or lower --min-area", path=image.path
        )
    bg_median = code_median(small_enc, bg_core, lut32)
    sigma_map = max(small_shape) / 8.0
    background_map = _masked_blur(small, bg_core, sigma_map, bg_median)
    ratio = float(np.median(small[fg_core] / np.maximum(background_map[fg_core], 1e-6)))
    # with a region of interest only its box is thresholded and traced (_roi_box)
    poly = None if roi_px is None else np.round(np.asarray(roi_px)).astype(np.int32)
    box_x0, box_y0, box_x1, box_y1 = (0, 0, width, height) if poly is None else _roi_box(poly, width, height)
    region = grey[box_y0:box_y1, box_x0:box_x1]
    if threshold is None:
        t_map = background_map * (1.0 + ratio) / 2.0
        # first encoded value >= the linear threshold: compare encoded values, never a float copy of the image
        t_enc = np.searchsorted(lut, t_map).clip(0, len(lut) - 1).astype(grey.dtype)
        t_full = cv2.resize(t_enc, (width, height), interpolation=cv2.INTER_LINEAR) if factor > 1 else t_enc
        t_box = t_full[box_y0:box_y1, box_x0:box_x1]
        # the mask overwrites the full-size threshold plane (element-wise: safe in place): one
        # full-size uint8 plane fewer at the peak
        # 255 for part pixels, 0 elsewhere: findContours takes any non-zero pixel as 1 (no pass
        # over the full-size plane to make it 1)
        mask = cv2.compare(region, t_box, cv2.CMP_LT if bright_background else cv2.CMP_GT, dst=t_box)
        del t_full, t_box
    else:
        t_fixed = np.full((1, 1), int(round(threshold * full_scale)), dtype=grey.dtype)
        mask = ((region < t_fixed) if bright_background else (region > t_fixed)).view(np.uint8)
    if poly is not None:
        roi_mask = np.zeros_like(mask)
        cv2.fillPoly(roi_mask, [poly - np.array([box_x0, box_y0], np.int32)], 1)
        np.bitwise_and(mask, roi_mask, out=mask)

    # -- 2. parts and their holes from the mask ---------------------------------------
    # traced in the box of the mask's set pixels only: the same contours, order and hierarchy
    # (zero rows and columns around them hold no contour), and findContours' bordered copy of
    # its input is that box, not the whole plane
    fx, fy, fw, fh = cv2.boundingRect(mask)
    contours, hierarchy = cv2.findContours(
        mask[fy : fy + fh, fx : fx + fw], cv2.RETR_CCOMP, cv2.CHAIN_APPROX_SIMPLE, offset=(box_x0 + fx, box_y0 + fy)
    ) if fw > 0 and fh > 0 else ((), None)  # fmt: skip
    del mask
    if not contours:
        raise SegmentationError(
            "no part found: the image is all background; check the scan or lower --min-area", path=image.path
        )
    assert hierarchy is not None  # contours found: their hierarchy with them
    hier = hierarchy[0]
    noise_lin = pixel_noise(image, roi_px)
    faint = 0
    found: list[PartRings] = []
    cut: list[PartRings] = []
    specks = 0
    speck_max = 0.0
    candidates = []
    for idx, cnt in enumerate(contours):
        if hier[idx][3] != -1:
            continue
        area_outer = cv2.contourArea(cnt)
        if area_outer + len(cnt) / 2.0 < min_area_px:  # contourArea runs through pixel centres
            specks += 1
            speck_max = max(speck_max, area_outer + len(cnt) / 2.0)
            continue
        x0, y0, w, h = cv2.boundingRect(cnt)
        is_cut = x0 <= 0 or y0 <= 0 or x0 + w >= width or y0 + h >= height
        if roi_px is not None and not is_cut:
            is_cut = _touches_roi(cnt, roi_px)
        child = hier[idx][2]
        holes = []
        while child != -1:
            holes.append(contours[child])
            child = hier[child][0]
        candidates.append((area_outer, cnt, holes, (x0, y0, x0 + w, y0 + h), is_cut))
    candidates.sort(key=lambda c: (c[3][1], c[3][0]))  # reading order: top to bottom, left to right
    label = 0
    cut_candidates = []
    for area_outer, cnt, holes, bbox, is_cut in candidates:
        if is_cut and not keep_cut:
            cut_candidates.append((cnt, holes, bbox))
            label_cut = len(cut) + 1
            cut.append(
                PartRings(
                    label=-label_cut,
                    outer_px=cnt[:, 0, :].astype(float),
                    holes_px=[],
                    cut=True,
                    bbox_px=bbox,
                    area_px=float(area_outer),
                    contrast=float("nan"),
                    noise_rel=float("nan"),
                    gradient_px=np.zeros(0),
                    blur_px=float("nan"),
                    level_rel_u=float("nan"),
                )
            )
            continue
        label += 1
        part = _refine_part(
            image,
            cnt,
            holes,
            bbox,
            is_cut,
            label,
            level=level,
            threshold=threshold,
            bright_background=bright_background,
            min_hole_px=min_hole,
            roi_px=roi_px,
            ratio_hint=ratio,
            paper_at_edge=paper_at_edge,
            colour=colour,
        )
        if part is None:
            label -= 1
            specks += 1
            continue
        if part.area_px < min_area_px:
            label -= 1
            specks += 1
            speck_max = max(speck_max, part.area_px)
            continue
        if threshold is None and abs(part.contrast) < FAINT_SNR * noise_lin:
            label -= 1  # noise: an empty mat or lid splits at its own noise
            specks += 1
            faint += 1
            continue
        found.append(part)
    warnings: list[str] = []
    if not found:
        if threshold is None and cut and len(cut) <= _MAX_CUT_CHECKED:
            # before blaming the edge: is a cut object anything but noise (an empty mat's light fall-off)?
            real = []
            for c, (cnt, holes, bbox) in zip(cut, cut_candidates):
                rings = _refine_part(
                    image, cnt, holes, bbox, True, 0, level=level, threshold=None,
                    bright_background=bright_background, min_hole_px=min_hole, roi_px=roi_px, ratio_hint=ratio,
                )  # fmt: skip
                if rings is not None and abs(rings.contrast) < FAINT_SNR * noise_lin:
                    faint += 1
                else:
                    real.append(c)
            cut = real
        if faint and not cut:
            raise SegmentationError(
                f"no part found: nothing stands out from the background by more than {FAINT_SNR:g} times the image "
                f"noise ({faint} faint object(s) ignored); put the part in view (for a photo: inside the mat's clear "
                "area) on a background that contrasts with it",
                path=image.path,
            )
        if cut:
            raise PartCutError(
                f"no whole part found: {len(cut)} part(s) touch the image edge; reposition the part away from the edge or pass --keep-clipped",
                path=image.path,
                count=len(cut),
            )
        if speck_max > 0:
            too_small = SegmentationError(
                f"no part found above the minimum area: the largest object is {speck_max:.0f} px "
                f"(minimum {min_area_px:.0f} px); lower --min-area to measure it",
                path=image.path,
            )
            too_small.largest_area_px = speck_max  # type: ignore[attr-defined]
            raise too_small
        raise SegmentationError(
            "no part found above the minimum area; check the scan or lower --min-area", path=image.path
        )
    if cut:
        warnings.append(
            f"{len(cut)} part(s) touching the image edge were left out (pass --keep-clipped to measure them, flagged as clipped)"
        )
    for part in found:
        if part.cut:
            warnings.append(f"part {part.label} touches the image edge: its figures describe only the visible portion")
    return Segmentation(
        parts=found,
        cut=cut,
        polarity="dark part on light background" if bright_background else "light part on dark background",
        specks=specks,
        warnings=warnings,
        speck_max_area_px=speck_max,
        faint=faint,
        noise_lin=noise_lin,
    )


def _touches_roi(cnt: np.ndarray, roi_px: np.ndarray) -> bool:
    roi = np.asarray(roi_px, dtype=np.float32).reshape(-1, 1, 2)
    pts = cnt[:, 0, :].astype(np.float32)
    dists = np.array(
        [cv2.pointPolygonTest(roi, (float(p[0]), float(p[1])), True) for p in pts[:: max(1, len(pts) // 400)]]
    )
    return bool((dists < 2.0).any())


_MAX_FIT_SAMPLES = 8_000


def _sample(mask: np.ndarray, limit: int = _MAX_FIT_SAMPLES) -> tuple[np.ndarray, np.ndarray]:
    """Row and column indices of the mask's pixels, thinned evenly to at most ``limit``."""
    count = int(np.count_nonzero(mask))
    stride = max(1, int(math.sqrt(count / (4 * limit))))  # thin on a grid first: cheap on big masks
    rows, cols = nonzero_rc(mask[::stride, ::stride])
    rows, cols = rows * stride, cols * stride
    if rows.size < 3 and count >= 3:
        rows, cols = nonzero_rc(mask)
    step = max(1, int(math.ceil(rows.size / limit)))
    return rows[::step], cols[::step]


def _refine_part(
    image,
    cnt,
    holes,
    bbox,
    is_cut,
    label,
    *,
    level,
    threshold,
    bright_background,
    min_hole_px,
    roi_px,
    ratio_hint,
    paper_at_edge=False,
    local_face=False,
    colour=None,
):
    """Sub-pixel rings of one part from a padded crop around it.

    Only a band a few pixels wide along the part's boundaries is normalised between the
    local background and part levels; inside the part the normalised value is 1 and
    elsewhere 0, so marching squares can only find the part's own edges. With
    ``local_face`` the part's level beside each edge is the face's own level there (a
    normalised convolution of the face 4 px and more inside, :data:`LOCAL_FACE_SIGMA_PX`),
    not a smooth surface over the whole face: a mirroring face in bright and dark sectors.
    """
    grey, lut = image.grey, image.to_linear
    height, width = grey.shape
    x0, y0, x1, y1 = bbox
    pad = _PAD_PX + 6
    c0, r0 = max(0, x0 - pad), max(0, y0 - pad)
    c1, r1 = min(width, x1 + pad), min(height, y1 + pad)
    grey_crop = grey[r0:r1, c0:c1]
    shape = grey_crop.shape
    comp = np.zeros(shape, np.uint8)
    offset = (-c0, -r0)
    cv2.drawContours(comp, [cnt], -1, 1, thickness=cv2.FILLED, offset=offset)
    filled = comp.copy() if holes else comp  # comp is not drawn on again without holes
    if holes:
        cv2.drawContours(comp, holes, -1, 0, thickness=cv2.FILLED, offset=offset)
        # drawContours of a hole clears its boundary pixels too, which belong to the part
        cv2.drawContours(comp, holes, -1, 1, thickness=1, offset=offset)
    kernel = np.ones((3, 3), np.uint8)
    grown4 = cv2.dilate(comp, kernel, iterations=4)
    shrunk4 = cv2.erode(comp, kernel, iterations=4)
    band_rows, band_cols = nonzero_rc(grown4 != shrunk4)  # within ~4 px of any boundary of the part: where edges lie
    # the masks hold 0 and 1 (drawn with 1, dilated, eroded): read as bool in place, not
    # converted; "a and not b" of two of them is a > b, made in place where it can be (no
    # full-size temporaries: the largest crop's peak memory)
    if holes:
        near = cv2.dilate(filled, kernel, iterations=4)
        hole_space = np.greater(filled, grown4).view(bool)
    else:  # no hole drawn: comp is filled, its dilation is grown4 and no hole's space lies outside it
        near, hole_space = grown4, None
    band_out = cv2.dilate(filled, kernel, iterations=_PAD_PX + 3)
    band_out = np.greater(band_out, near, out=band_out).view(bool)
    del grown4, near, filled
    # the part's own level next to its edges: pixels 4 to ~18 px inside; for thin parts the
    # central ridge (at least 3/4 of the largest inside distance), so that the level keeps
    # following the illumination along a thin ring or strip
    interior = cv2.erode(shrunk4, kernel, iterations=_PAD_PX + 8)
    interior = np.greater(shrunk4, interior, out=interior).view(bool)
    del shrunk4
    depth_px = 4.0
    if np.count_nonzero(interior) < 300:  # a thin part: take its central ridge instead
        inside_px = cv2.distanceTransform(comp, cv2.DIST_L2, 3)  # approximate distances suffice here
        depth_px = min(4.0, 0.75 * float(inside_px.max()))
        interior = (inside_px >= depth_px) & (inside_px <= _PAD_PX + 12)
        del inside_px
    band_lin = lut[grey_crop[band_rows, band_cols]].astype(np.float64)
    scale = float(max(shape))
    if threshold is None:
        rb, cb = _sample(band_out if hole_space is None else band_out | hole_space)
        if rb.size < 3:  # no background around the part to set its level against
            return None
        bg_lin = lut[grey_crop[rb, cb]].astype(np.float64)
        med_bg_guess = float(np.median(bg_lin)) if bg_lin.size else float(np.median(band_lin))
        cut_level = med_bg_guess * (1 + ratio_hint) / 2.0
        # pixels of other parts nearby are not background
        other_samples = (bg_lin < cut_level) if bright_background else (bg_lin > cut_level)
        keep = ~other_samples
        if keep.sum() < 8:
            keep = np.ones_like(keep)
        coef_b, ord_b, sig_b, n_b = _fit_surface(bg_lin[keep], rb[keep].astype(float), cb[keep].astype(float), scale, 2)
        # both surfaces at the band's pixels, the design of each order made once
        designs: dict[int, np.ndarray] = {}

        def at_band(coef: np.ndarray, order: int) -> np.ndarray:
            if order not in designs:
                designs[order] = _poly_design(band_cols / scale, band_rows / scale, order)
            return np.einsum("ij,j->i", designs[order], coef)

        bg_band = at_band(coef_b, ord_b)
        if np.count_nonzero(interior) >= 20:
            rf, cf = _sample(interior)
            coef_f, ord_f, sig_f, n_f = _fit_surface(
                lut[grey_crop[rf, cf]].astype(np.float64), rf.astype(float), cf.astype(float), scale, 2
            )
            fg_band = at_band(coef_f, ord_f)
            if local_face:
                crop_lin = lookup(np.asarray(lut).astype(np.float32), grey_crop)  # lut[grey_crop] as float32
                fg_band = _masked_blur(crop_lin, interior, LOCAL_FACE_SIGMA_PX, float(np.median(fg_band)))[
                    band_rows, band_cols
                ].astype(np.float64)
            fg_surface: tuple[np.ndarray, int] | float = (coef_f, ord_f)
        else:  # thin part: no clean interior; take the part level relative to the background
            fg_band = bg_band * ratio_hint
            sig_f, n_f = sig_b, 1
            fg_surface = ratio_hint
        contrast_band = fg_band - bg_band
        contrast = float(np.median(contrast_band))
        if abs(contrast) < 1e-4:
            return None
        safe = np.where(np.abs(contrast_band) < 0.2 * abs(contrast), 0.2 * contrast, contrast_band)
        band_norm = (band_lin - bg_band) / safe
        noise = math.sqrt(0.5 * (sig_b**2 + sig_f**2))
        noise_rel = noise / abs(contrast)
        # uncertainty of the two fitted levels at the edge, relative to the contrast
        level_rel_u = math.sqrt(sig_b**2 * 6 / max(n_b, 1) + sig_f**2 * 6 / max(n_f, 1)) / abs(contrast)
        contour_level = level
    else:
        t_lin = float(lut[int(round(threshold * (len(lut) - 1)))])
        rb, cb = _sample(band_out)
        bg_lin = lut[grey_crop[rb, cb]].astype(np.float64)
        bg = float(np.median(bg_lin)) if bg_lin.size else float(np.median(band_lin))
        rf, cf = _sample(interior)
        fg = float(np.median(lut[grey_crop[rf, cf]])) if rf.size else bg * ratio_hint
        contrast = fg - bg
        if abs(contrast) < 1e-4:
            return None
        band_norm = (band_lin - bg) / contrast
        contour_level = (t_lin - bg) / contrast
        if not (0.0 < contour_level < 1.0):
            return None
        noise = robust_sigma(bg_lin, centre=bg) if bg_lin.size else 0.0
        noise_rel = noise / abs(contrast)
        level_rel_u = 0.0
    del band_out, hole_space, interior
    # normalised crop with a 1 px frame of background, which closes the rings of cut parts
    norm = np.zeros((shape[0] + 2, shape[1] + 2), np.float32)
    norm[1:-1, 1:-1] = comp
    norm[band_rows + 1, band_cols + 1] = band_norm
    if local_face:
        # the region was joined from a face's pieces along their pixel edges: its edge lies within
        # 2 px of them, and what lies deeper is face (a lit ridge beside a hole is no hole)
        deep = cv2.erode(comp, kernel, iterations=2).astype(bool)
        norm[1:-1, 1:-1][deep] = 1.0
    if roi_px is not None:
        roi_mask = np.zeros(norm.shape, np.uint8)
        cv2.fillPoly(roi_mask, [np.round(np.asarray(roi_px) - [c0 - 1, r0 - 1]).astype(np.int32)], 1)
        norm[~roi_mask.astype(bool)] = 0.0
    refined = _level_refined(norm, contour_level)
    contact_move_px = 0.0
    if paper_at_edge and threshold is None and bright_background and refined:
        # lut[grey_crop] as float32: the float32 table looked up (each entry rounded once, the same values)
        unit = _unit_crop(lookup(np.asarray(lut).astype(np.float32), grey_crop), coef_b, ord_b, fg_surface, scale)
        tint = None if colour is None else partial(_colour_crop, colour, lut, (r0, r1, c0, c1))
        moved = _contact_shadow_levels(norm, (band_rows + 1, band_cols + 1), unit, refined, contour_level, tint)
        if moved is not refined:
            contact_move_px = _mean_move_px(refined, moved)
            refined = moved
    closed = []
    for ring, grad, slope in refined:
        xy = np.column_stack([ring[:, 1] + c0 - 1, ring[:, 0] + r0 - 1])
        closed.append((xy, signed_area(xy), grad, slope))
    if not closed:
        return None
    closed.sort(key=lambda t: -abs(t[1]))
    outer, outer_area, gradient, slope = closed[0]
    outer_sign = math.copysign(1.0, outer_area)
    holes_px, hole_grads, slopes = [], [], [slope]
    filled, filled_area = 0, 0.0
    for xy, area, grad, slope in closed[1:]:
        if math.copysign(1.0, area) == outer_sign:
            continue
        if abs(area) < min_hole_px:
            # filled as dust; counted (above pixel noise) so that the result says so
            if abs(area) >= _MIN_COUNTED_HOLE_PX and point_in_ring(xy[0], outer):
                filled += 1
                filled_area += abs(area)
            continue
        if not point_in_ring(xy[0], outer):
            continue
        holes_px.append(xy)
        hole_grads.append(grad)
        slopes.append(slope)
    # blur from the edge profile across each refined point (phase-independent, unlike the
    # gradient at grid-aligned points); pixel integration is part of the blur the boundary sees
    blur_px = _blur_from_gradient(float(np.median(np.abs(np.concatenate(slopes)))))
    if threshold is None:
        level_rel_u = math.hypot(level_rel_u, _tail_share(depth_px, blur_px, thin=depth_px < 4.0))
    if contact_move_px > 0:
        # the contact shadow's levels are an extrapolation: half their move is taken as the
        # doubt of a shared offset, stated as the level error that moves the edge as far
        level_rel_u = math.hypot(
            level_rel_u, 2.0 * CONTACT_DOUBT * contact_move_px / (math.sqrt(2 * math.pi) * blur_px)
        )
    if threshold is None and abs(level - 0.5) < 1e-9:
        outer = correct_curvature(outer, blur_px)
        holes_px = [correct_curvature(h, blur_px) for h in holes_px]
    area_px = abs(outer_area) - sum(abs(signed_area(h)) for h in holes_px)
    return PartRings(
        label=label,
        outer_px=outer,
        holes_px=holes_px,
        cut=is_cut,
        bbox_px=bbox,
        area_px=area_px,
        contrast=contrast,
        noise_rel=noise_rel,
        gradient_px=gradient,
        blur_px=blur_px,
        level_rel_u=level_rel_u,
        hole_gradients_px=hole_grads,
        filled_holes=filled,
        filled_hole_area_px=filled_area,
    )


def refine_region(
    image: LoadedImage,
    contour: np.ndarray,
    holes: list[np.ndarray],
    bbox: tuple[int, int, int, int],
    label: int,
    *,
    roi_px: np.ndarray | None,
    min_hole_px: float,
    ratio_hint: float,
) -> PartRings | None:
    """Sub-pixel rings of a photo's part given as a pixel contour (OpenCV's), with local face levels.

    The region was joined from pieces of one face (:mod:`scanmass.segment.brightface`); its edges
    lie half-way between the paper and the face's own level beside each edge. None when no ring
    is found.
    """
    return _refine_part(
        image, contour, holes, bbox, False, label, level=0.5, threshold=None, bright_background=True,
        min_hole_px=min_hole_px, roi_px=roi_px, ratio_hint=ratio_hint, paper_at_edge=True, local_face=True,
    )  # fmt: skip


def _level_refined(norm: np.ndarray, level: float) -> list[tuple[np.ndarray, np.ndarray, np.ndarray]]:
    """The closed level rings of ``norm``, refined (:func:`_refine_vertices`): (ring_rc, gradient, rise) each."""
    out = []
    for ring in level_rings(norm, level):  # find_contours(norm, level, fully_connected="high")
        if len(ring) < 4 or np.abs(ring[0] - ring[-1]).max() > 1e-9:
            continue
        out.append(_refine_vertices(norm, ring[:-1], level))
    return out


def _unit_crop(
    lin: np.ndarray, coef_b: np.ndarray, ord_b: int, fg_surface: tuple[np.ndarray, int] | float, scale: float
) -> np.ndarray:
    """The whole crop normalised between its fitted levels (0 = background, 1 = part), with the 1 px frame of ``norm``."""
    bg = _eval_grid(coef_b, ord_b, lin.shape, scale)
    fg = bg * np.float32(fg_surface) if isinstance(fg_surface, float) else _eval_grid(*fg_surface, lin.shape, scale)
    contrast = fg - bg
    median = float(np.median(contrast))
    contrast = np.where(np.abs(contrast) < 0.2 * abs(median), np.float32(0.2 * median), contrast)
    unit = np.zeros((lin.shape[0] + 2, lin.shape[1] + 2), np.float32)
    unit[1:-1, 1:-1] = (lin - bg) / contrast
    return unit


def _eval_grid(coef: np.ndarray, order: int, shape: tuple[int, ...], scale: float) -> np.ndarray:
    """A fitted surface (:func:`_fit_surface`) on every pixel of a crop (float32, by broadcasting: no design matrix)."""
    x = (np.arange(shape[1], dtype=np.float32) / np.float32(scale))[None, :]
    y = (np.arange(shape[0], dtype=np.float32) / np.float32(scale))[:, None]
    c = np.asarray(coef, np.float32)
    out = np.full(shape, c[0], np.float32)
    if order >= 1:
        out += c[1] * x + c[2] * y
    if order >= 2:
        out += c[3] * x * x + c[4] * x * y + c[5] * y * y
    return out


#: Share of a part's outline that a contact shadow must border: the paper at the foot of a
#: raised part is darkened on every side under soft light (weakest where the camera looks
#: over the top edge: 74-100 % of the outline on the soft-light renders), a directional
#: light's shadow lies on one side (6-47 % of the outline on the spot and window renders,
#: whose shadows :mod:`scanmass.segment.castshadow` handles).
CONTACT_ALL_ROUND = 0.6
#: Share of the contact shadow's move of the edge taken as its 1-sigma doubt: a straight
#: line through the paper's profile instead of the parabola moves the edges of the
#: soft-light renders 30-60 % less (tests/data/reallight).
CONTACT_DOUBT = 0.5
#: Contourings with the contact shadow's levels (:mod:`scanmass.segment.contact`): each
#: reads the shadow from the edge the one before found.
_CONTACT_PASSES = 2


def _contact_shadow_levels(
    norm: np.ndarray,
    band_rc: tuple[np.ndarray, np.ndarray],
    unit: np.ndarray,
    refined: list[tuple[np.ndarray, np.ndarray, np.ndarray]],
    level: float,
    tint: Callable[[], np.ndarray] | None = None,
) -> list[tuple[np.ndarray, np.ndarray, np.ndarray]]:
    """The rings contoured again where a soft contact shadow darkens the paper at the edge.

    Unchanged where no boundary point has one (:func:`~scanmass.segment.contact.edge_shadow_depth`).
    ``tint`` makes the crop in linear colour (as ``unit``, with its frame), called only where the share
    could be reached: an outer point whose shade is tinted away from the paper's colour
    (:func:`~scanmass.segment.contact.lamp_tinted`: a lamp's shade lit by another lamp) does not count
    towards the all-round share.
    """
    band = np.zeros(norm.shape, bool)
    band[band_rc] = True
    tint_crop: np.ndarray | None = None
    for _ in range(_CONTACT_PASSES):
        blur = _blur_from_gradient(float(np.median(np.abs(np.concatenate([r[2] for r in refined])))))
        depths = [edge_shadow_depth(unit, ring, blur) for ring, _, _ in refined]
        outer = int(np.argmax([abs(signed_area(ring)) for ring, _, _ in refined]))
        contact = depths[outer] > 0
        if tint is not None and np.mean(contact) >= CONTACT_ALL_ROUND:  # a lamp's tinted penumbra is no contact shade
            tint_crop = tint() if tint_crop is None else tint_crop
            contact &= ~lamp_tinted(tint_crop, unit, refined[outer][0], blur)
        if np.mean(contact) < CONTACT_ALL_ROUND:
            break  # a one-sided (cast) shadow, or none: the levels further out stay
        field = depth_field(norm.shape, [ring for ring, _, _ in refined], depths)
        again = renormalise(norm, band, field)
        found = _level_refined(again, level)
        if not found:
            break
        # the gradients as the image has them (the renormalised crop is steeper by 1 / (1 - s)),
        # the rise from the part's side alone (the blur)
        refined = []
        for ring, grad, _ in found:
            idx = np.clip(np.rint(ring).astype(np.int64), 0, np.array(norm.shape) - 1)
            share = 1.0 - field[idx[:, 0], idx[:, 1]]
            refined.append((ring, grad * share, part_side_rise(again, ring, level)))
    return refined


def _colour_crop(colour: np.ndarray, lut: np.ndarray, box: tuple[int, int, int, int]) -> np.ndarray:
    """A crop ``(r0, r1, c0, c1)`` of the encoded colour planes in linear light (float32), with ``norm``'s 1 px frame."""
    r0, r1, c0, c1 = box
    out = np.zeros((r1 - r0 + 2, c1 - c0 + 2, 3), np.float32)
    out[1:-1, 1:-1] = np.asarray(lut, np.float32)[colour[r0:r1, c0:c1]]
    return out


def _mean_move_px(before: list, after: list) -> float:
    """How far the rings moved, on average along their length: the change of the net area over the perimeter (px)."""

    def net(rings: list) -> tuple[float, float]:
        area = sum(signed_area(r[:, ::-1]) for r, _, _ in rings)
        length = sum(float(np.hypot(*(np.roll(r, -1, axis=0) - r).T).sum()) for r, _, _ in rings)
        return area, length

    a0, length = net(before)
    a1, _ = net(after)
    return abs(a1 - a0) / max(length, 1.0)


def _tail_share(depth_px: float, blur_px: float, *, thin: bool) -> float:
    """Share of the contrast by which the blur tails of the edges bias the level samples.

    A thin part's ridge samples lie ``depth_px`` from edges on both sides: up to
    ``erfc(d / (sigma sqrt 2))``. A thick part's level samples (and the background's)
    spread evenly over depths ``d`` from ``depth_px`` to ``depth_px + W`` (W = the
    sampled band's width); the mean of the tail ``Q(d / sigma)`` over that range is
    ``sigma (phi(z) - z Q(z)) / W`` with ``z = depth_px / sigma`` (the integral of the
    normal tail, ``int_z^inf Q = phi(z) - z Q(z)``), for each of the two levels.
    """
    if thin:
        return math.erfc(depth_px / (blur_px * math.sqrt(2.0)))
    z = depth_px / blur_px
    q = 0.5 * math.erfc(z / math.sqrt(2.0))
    phi = math.exp(-0.5 * z * z) / math.sqrt(2.0 * math.pi)
    part_band, bg_band = _PAD_PX + 8.0, _PAD_PX + 3.0 - depth_px
    mean_tail = blur_px * max(phi - z * q, 0.0)
    return math.hypot(mean_tail / part_band, mean_tail / max(bg_band, 1.0))


def _blur_from_gradient(g_peak: float) -> float:
    """Gaussian edge sigma (px) from the peak central-difference gradient of a unit step.

    For a unit step blurred by a Gaussian of sigma s and sampled at pixel centres, the
    central difference at the edge is ``erf(1 / (s sqrt 2)) / 2``; invert it.
    """
    g = min(max(2.0 * g_peak, 1e-6), 0.999999)
    x = 1.0  # solve erf(x) = g by Newton's method (erf is increasing and concave for x > 0)
    for _ in range(60):
        step = (math.erf(x) - g) / (2.0 / math.sqrt(math.pi) * math.exp(-x * x))
        x = max(x - step, 1e-6)
        if abs(step) < 1e-12:
            break
    return float(1.0 / (math.sqrt(2.0) * x))


def correct_curvature(ring: np.ndarray, blur_px: float) -> np.ndarray:
    """Undo the pull of a blurred curved edge towards its centre of curvature.

    The midpoint contour of a Gaussian-blurred edge of curvature ``k`` lies about
    ``sigma^2 k / 2`` from the true edge, towards the centre of curvature, and the chords of
    the polygon through points on the curve cut a further ``h^2 k / 12`` (chord length h)
    inside it; each vertex is moved back by the sum along the normal, with the curvature
    smoothed over the blur length (turning angle over arc length).

    References
    ----------
    .. [1] C. Steger, "An unbiased detector of curvilinear structures", IEEE Trans.
       PAMI 20(2), 113-125, 1998 (bias of edge positions at curved edges).
    """
    n = len(ring)
    if n < 8 or not (blur_px > 0):
        return ring
    nxt = np.roll(ring, -1, axis=0)
    edge = nxt - ring
    seg_len = np.hypot(edge[:, 0], edge[:, 1])
    heading = np.arctan2(edge[:, 1], edge[:, 0])
    turn = np.angle(np.exp(1j * (heading - np.roll(heading, 1))))  # signed turn at each vertex, left positive
    attributed = 0.5 * (seg_len + np.roll(seg_len, 1))
    spacing = float(seg_len.mean()) or 1.0
    width = max(1.0, blur_px) / spacing  # smoothing sigma in vertices
    half = int(min(n // 2 - 1, math.ceil(3 * width)))
    if half >= 1:
        k = np.exp(-0.5 * (np.arange(-half, half + 1) / width) ** 2)
        pad_t = np.concatenate([turn[-half:], turn, turn[:half]])
        pad_l = np.concatenate([attributed[-half:], attributed, attributed[:half]])
        curvature = np.convolve(pad_t, k, mode="valid") / np.convolve(pad_l, k, mode="valid")
    else:
        curvature = turn / np.maximum(attributed, 1e-9)
    tangent = np.roll(ring, -1, axis=0) - np.roll(ring, 1, axis=0)
    tn = np.hypot(tangent[:, 0], tangent[:, 1])
    tn[tn == 0] = 1.0
    left = np.column_stack([-tangent[:, 1], tangent[:, 0]]) / tn[:, None]
    # chords between vertices on a curve cut inside it: a polygon inscribed with chord h
    # lacks the area of a uniform offset h^2 k / 12 (regular polygon in a circle), so the
    # vertices move out by that much as well
    chord_sq = (
        np.convolve(np.concatenate([attributed[-half:], attributed, attributed[:half]]) ** 2, k, mode="valid") / k.sum()
        if half >= 1
        else attributed**2
    )
    shift = (0.5 * blur_px**2 + chord_sq / 12.0) * curvature
    return ring - left * shift[:, None]


def _remap(img: np.ndarray, pts_rc: np.ndarray, interpolation: int) -> np.ndarray:
    return sample_points(img, pts_rc[:, 1], pts_rc[:, 0], interpolation).astype(np.float64)


def _refine_vertices(norm: np.ndarray, ring_rc: np.ndarray, level: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Move marching-squares vertices onto the level of the bicubic interpolant.

    Linear interpolation between pixel centres places a blurred straight edge with a bias
    that depends on its sub-pixel phase (several hundredths of a pixel for sharp edges).
    Each vertex is moved along the local gradient to where the bicubic interpolant of the
    image equals the level (a few Newton steps), which shrinks that bias by an order of
    magnitude while keeping the ring's topology from marching squares.

    Returns the refined (row, col) points, the gradient magnitude (per px, central
    differences of the bilinear interpolant) at the original points, and half the rise of
    the bicubic interpolant from 1 px before to 1 px after each refined point.

    References
    ----------
    .. [1] R. Keys, "Cubic convolution interpolation for digital image processing",
       IEEE Trans. ASSP 29(6), 1153-1160, 1981.
    """
    img = norm if norm.dtype == np.float32 else norm.astype(np.float32)
    e_r, e_c = np.array([1.0, 0.0]), np.array([0.0, 1.0])
    g_r = 0.5 * (_remap(img, ring_rc + e_r, cv2.INTER_LINEAR) - _remap(img, ring_rc - e_r, cv2.INTER_LINEAR))
    g_c = 0.5 * (_remap(img, ring_rc + e_c, cv2.INTER_LINEAR) - _remap(img, ring_rc - e_c, cv2.INTER_LINEAR))
    gn = np.hypot(g_r, g_c)
    ok = gn > 1e-3
    direction = np.zeros((len(ring_rc), 2))
    direction[ok] = np.column_stack([g_r, g_c])[ok] / gn[ok, None]
    t = np.zeros(len(ring_rc))
    h = 0.05
    for _ in range(3):
        p = ring_rc + t[:, None] * direction
        v = _remap(img, p, cv2.INTER_CUBIC) - level
        dv = (_remap(img, p + h * direction, cv2.INTER_CUBIC) - _remap(img, p - h * direction, cv2.INTER_CUBIC)) / (
            2 * h
        )
        good = ok & (dv > 1e-3)
        step = np.zeros_like(t)
        step[good] = -v[good] / dv[good]
        t = np.clip(t + np.clip(step, -0.25, 0.25), -0.5, 0.5)
    p = ring_rc + t[:, None] * direction
    # half the rise of the interpolant from 1 px before to 1 px after the edge point
    rise = 0.5 * (_remap(img, p + direction, cv2.INTER_CUBIC) - _remap(img, p - direction, cv2.INTER_CUBIC))
    return p, gn, rise
