"""Pieces of a cast shadow's cut that a second measurement finds as holes: holes in the cut's paint reaching
beyond the first outline (:func:`_painted_holes`), and arc-shaped strips closed off by the shadow's rim
(:func:`_open_slivers`); and whether a part found again lies within an outline found before.
Part of the pipeline stage (:mod:`scanmass.pipeline`).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import replace

import cv2
import numpy as np

from scanmass.errors import OptionError, ScaleError, SegmentationError
from scanmass.load.decode import LoadedImage
from scanmass.measurement import Hole, Measurement, Part
from scanmass.pipeline.photo_checks import _image_px
from scanmass.scale.camera import PhotoScale
from scanmass.scale.homography import ElevationHook
from scanmass.scale.planemap import PlaneMap


def _lies_within(part: Part, outline_mm: np.ndarray, by_outline: bool = True) -> bool:
    """Whether a part found again lies within an outline found before (mm, float32).

    Its centroid inside says so, but a bent part's centroid (an L bracket's, near the inner
    corner) can lie outside its own material: then nine in ten of its outline's points inside
    (or within 0.5 mm of) the old outline do, where ``by_outline``.
    """
    if cv2.pointPolygonTest(outline_mm, (float(part.centroid_mm[0]), float(part.centroid_mm[1])), False) >= 0:
        return True
    if not by_outline or part.outline_mm is None:
        return False
    pts = np.asarray(part.outline_mm, float).reshape(-1, 2)
    if len(pts) == 0:
        return False
    near = [cv2.pointPolygonTest(outline_mm, (float(x), float(y)), True) >= -0.5 for x, y in pts]
    return float(np.mean(near)) >= 0.9


#: A hole whose fitted circle is this many times wider than the hole itself (its largest
#: caliper) is no round hole but a strip bent along an arc: only a strip of a curved outline
#: fits a circle wider than itself. On the committed renders (tests/data/reallight, thickness
#: given) every found hole fits within 1.0 of its own width; the strip of a painted cut that the
#: shadow beyond it closed off (lens-spot-brass-t30's cam) fits 8.8 times its width.
SLIVER_FIT_RATIO = 2.0


def _is_sliver(hole: Hole) -> bool:
    """Whether ``hole`` is a strip along an arc: its fitted circle far wider than the hole itself."""
    if hole.outline_mm is None or not math.isfinite(hole.diameter_mm):
        return False
    pts = np.asarray(hole.outline_mm, np.float32).reshape(-1, 2)
    if len(pts) < 3:
        return False
    hull = cv2.convexHull(pts).reshape(-1, 2).astype(float)
    extent_mm = float(np.sqrt(((hull[:, None, :] - hull[None, :, :]) ** 2).sum(axis=2)).max())
    return hole.diameter_mm > SLIVER_FIT_RATIO * extent_mm


def _photo_ring_px(scale: PhotoScale, ring_mm: np.ndarray, hole: bool = False) -> np.ndarray:
    """Where a measured ring (mm) runs in the photo as stored (px).

    :func:`~scanmass.pipeline.photo_checks._image_px` with the lens put back.
    """
    ideal = _image_px(scale, ring_mm, hole=hole)
    hook = scale.plane_map.undistort
    if hook is None:
        return ideal
    if isinstance(hook, ElevationHook):
        return hook.photo_px(ideal)
    return 2.0 * ideal - hook(ideal)  # one fixed-point step of the lens correction, as ElevationHook.photo_px


def _sliver_strips(
    scale: PhotoScale, part: Part, grey: np.ndarray, band_px: float
) -> tuple[np.ndarray, float, float] | None:
    """A cut part's arc-shaped holes (:func:`_is_sliver`) with the material between them and the outside.

    A cast shadow's cut is painted in the paper's level inside the outline the part was first
    found with; where the shadow reaches beyond that outline, its unpainted outer rim (darker
    than the face's half-way level) closes the painted strip off as a hole. Such a strip is
    bent along the outline, so its fitted circle is far wider than the strip itself, and what
    lies between it and the outside is the shadow's rim: the pixels whose nearest strip pixel
    and nearest outside pixel lie on opposite sides (a face pixel inside the strip has both on
    the same side) and nearer the outside than that strip pixel (not the face beside a strip's
    tip), no farther than the shadow's band from either. Returns the photo's pixels
    of the strips and of those rims (full-size mask), the strips' area (mm2) and the paper's
    code (the median 4-16 px outside the outline, as a cut is painted), or None without such a
    hole.
    """
    slivers = [h for h in part.holes if _is_sliver(h)]
    if not slivers or part.outline_mm is None:
        return None
    outer = _photo_ring_px(scale, np.asarray(part.outline_mm, float))
    rings = [_photo_ring_px(scale, np.asarray(h.outline_mm, float), hole=True) for h in slivers]
    shape = grey.shape[:2]
    pad = max(int(math.ceil(band_px)) + 4, 18)
    lo = np.floor(np.vstack([outer, *rings]).min(axis=0)).astype(int) - pad
    hi = np.ceil(np.vstack([outer, *rings]).max(axis=0)).astype(int) + pad
    x0, y0 = max(int(lo[0]), 0), max(int(lo[1]), 0)
    x1, y1 = min(int(hi[0]), shape[1]), min(int(hi[1]), shape[0])
    if x1 - x0 < 8 or y1 - y0 < 8:
        return None
    off = np.array([x0, y0], float)
    inside = np.zeros((y1 - y0, x1 - x0), np.uint8)
    cv2.fillPoly(inside, [np.round(outer - off).astype(np.int32)], 1)
    strips = np.zeros_like(inside)
    for ring in rings:
        cv2.fillPoly(strips, [np.round(ring - off).astype(np.int32)], 1)
    material = inside.astype(bool) & ~strips.astype(bool)
    to_out, out_lab = cv2.distanceTransformWithLabels(inside, cv2.DIST_L2, 5, labelType=cv2.DIST_LABEL_PIXEL)
    to_strip, strip_lab = cv2.distanceTransformWithLabels(1 - strips, cv2.DIST_L2, 5, labelType=cv2.DIST_LABEL_PIXEL)
    rows, cols = np.indices(inside.shape)

    def nearest(zero: np.ndarray, labels: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        # DIST_LABEL_PIXEL numbers the zero pixels in row-major order, from 1
        zr, zc = np.nonzero(zero)
        idx = np.clip(labels - 1, 0, max(len(zr) - 1, 0))
        return zr[idx], zc[idx]

    orow, ocol = nearest(inside == 0, out_lab)
    srow, scol = nearest(strips == 1, strip_lab)
    across = (orow - rows) * (srow - rows) + (ocol - cols) * (scol - cols) < 0
    beyond = to_out < to_out[srow, scol]  # nearer the outside than the strip is (not beside a strip's tip)
    rim = material & across & beyond & (to_out <= band_px) & (to_strip <= band_px)
    outside = cv2.distanceTransform(1 - inside, cv2.DIST_L2, 3)
    paper = grey[y0:y1, x0:x1][(outside > 4) & (outside < 16)]
    if paper.size < 20:
        return None
    full = np.zeros(shape, bool)
    full[y0:y1, x0:x1] = rim | strips.astype(bool)
    return full, float(sum(h.area_mm2 for h in slivers)), float(np.median(paper))


def _open_slivers(
    masked: LoadedImage,
    scale: PhotoScale,
    grey: np.ndarray,
    again: Measurement,
    cuts: list[tuple[Part, float, float, float]],
    band_px: float,
    remeasure: Callable[[LoadedImage, PlaneMap], Measurement],
) -> tuple[Measurement, list[str]]:
    """Open the strips a cut left closed off as holes (:func:`_sliver_strips`) and measure again.

    ``again`` is the measurement of ``grey`` (the cuts painted) on ``scale``'s plane map; each
    part found in a cut part's outline is checked. The strips and the shadow's rim beyond them
    are painted in the paper's level on ``grey`` (in place, when kept). ``remeasure`` is called
    last on the image kept. Returns the measurement kept (the new one only when every part is
    found again) and one note per part opened.
    """
    opened_parts: list[tuple[tuple[float, float], float]] = []  # (centroid mm, strips mm2)
    painted = grey.copy()
    for old, edge_mm, *_ in cuts:
        if edge_mm <= 0 or old.outline_mm is None:
            continue
        outline = np.asarray(old.outline_mm, np.float32)
        for q in again.parts:
            if not _lies_within(q, outline):
                continue
            found = _sliver_strips(scale, q, painted, band_px)
            if found is None:
                continue
            opened, strips_mm2, paper_code = found
            painted[opened] = np.asarray(paper_code, dtype=grey.dtype)
            opened_parts.append((q.centroid_mm, strips_mm2))
    if not opened_parts:
        return again, []
    try:
        opened_again: Measurement | None = remeasure(replace(masked, grey=painted), scale.plane_map)
    except (SegmentationError, ScaleError, OptionError):
        opened_again = None
    # every part found again (a speck of the painted rim may be found too: the cut's pieces are left out later)
    smallest = min(q.area_mm2 for q in again.parts)
    if opened_again is None or sum(q.area_mm2 >= 0.05 * smallest for q in opened_again.parts) != len(again.parts):
        remeasure(replace(masked, grey=grey), scale.plane_map)  # the image kept is the one measured last
        return again, []
    grey[:] = painted
    notes = []
    for centroid, strips_mm2 in opened_parts:
        near = min(opened_again.parts, key=lambda q: math.dist(q.centroid_mm, centroid))
        notes.append(f"{near.label} ({strips_mm2:.3g} mm²)")
    return opened_again, notes


#: Smallest share of a found hole's pixels (rasterised, its rim's pixels included) beyond the
#: first outer outline for a hole touching a cut's paint to be taken as a piece of the cut
#: (:func:`_painted_holes`): the strips on tests/data/reallight/window-steel-t25 (steel bracket,
#: 1.75 mm) and lens-spot-brass-t30 (brass cam, a 100 mm circle fit) have 0.32 and 0.30; a
#: through-hole lies within the part's material, 0-0.05 there (holes the cut ran into included).
PAINTED_HOLE_MIN_BEYOND = 0.2


def _painted_holes(
    result: Measurement, scale: PhotoScale, painted: np.ndarray, first: np.ndarray, face: np.ndarray
) -> tuple[np.ndarray, list[tuple[tuple[float, float], float]]]:
    """Pixels around the holes found in a shadow cut's paint and beyond the first outline: no openings in the part.

    A through-hole opens in the part's material, so it lies within the part's outline as first
    found (``first``; that outline held the cast shadow too). A found hole that touches the cut
    region painted with the paper's level (``painted``) and reaches beyond that outline
    (:data:`PAINTED_HOLE_MIN_BEYOND` of its pixels or more) is a strip of the cut that the darker
    shadow beyond the first outline closed off once the paint raised the local paper level
    (tests/data/reallight/window-steel-t25, the steel bracket: a 1.75 mm 'hole' beside its cut).
    Returned: its pixels and those within 3 px of it off ``face`` (the first outline less the
    cut): the paint and the shadow that closed it off, to be painted as paper; and each such
    hole's part centroid (mm) and area (mm²), for the warning.
    """
    out = np.zeros(painted.shape, bool)
    strips: list[tuple[tuple[float, float], float]] = []
    if not painted.any():
        return out, strips
    for part in result.parts:
        for hole in part.holes:
            if hole.outline_mm is None:
                continue
            ring = np.round(_image_px(scale, np.asarray(hole.outline_mm, float), hole=True)).astype(np.int32)
            # the hole's box with a 4 px margin, clipped to the image
            x0, y0 = np.maximum(ring.min(axis=0) - 4, 0)
            x1, y1 = np.minimum(ring.max(axis=0) + 5, [painted.shape[1], painted.shape[0]])
            if x1 <= x0 or y1 <= y0:
                continue
            box = (slice(int(y0), int(y1)), slice(int(x0), int(x1)))
            one = np.zeros((int(y1 - y0), int(x1 - x0)), np.uint8)
            cv2.fillPoly(one, [ring - np.array([x0, y0], np.int32)], 1)
            inside = one.astype(bool)
            n = np.count_nonzero(inside)
            if not n or not np.any(inside & painted[box]):
                continue
            if np.count_nonzero(inside & ~first[box]) >= PAINTED_HOLE_MIN_BEYOND * n:
                out[box] |= cv2.dilate(one, np.ones((7, 7), np.uint8)).astype(bool) & ~face[box]
                strips.append(((float(part.centroid_mm[0]), float(part.centroid_mm[1])), float(hole.area_mm2)))
    return out, strips
