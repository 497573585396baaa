"""A metal part's lit face lost to the paper's side of the threshold, found again up to its sharp edge.

Part of the segment stage (:mod:`scanmass.segment`). The detection threshold lies half-way
between the paper and the parts' typical level. A brushed or polished face mirrors the light
in sectors: where it mirrors a bright lamp it is far brighter than the rest of the face, and
may lie above that threshold while still darker than the paper (dev-spot-steel-t20: a 3 mm
steel disc's two lit sectors at 0.79 of the paper's level against 0.2-0.4 for the rest of its
face). The segmentation then finds only the dark sectors, bounded across the face by a line
where the face's own smooth shading crosses the threshold: -11.8 % in area.

Physically the two boundaries differ. A face at a height above the paper ends at a sharp edge:
its level holds up to the edge and the step to the paper's level is as short as the blur
(a pixel or two). A cast shadow's fade or a contact shadow ends on a soft ramp. The rule here:
beside a found part, a region darker than the local paper by more than the paper's spread
(:data:`DARKER_SHARE` or :data:`NOISE_SIGMAS` times its noise), joined to the part, wider than
an edge's blur (:data:`CORE_PX`) and ending on a sharp step (the paper's level reached within
:data:`STEP_PX` px of its edge, with at least :data:`SHARP_SHARE` of the step from the region's
level taken within the last :data:`STEP_PX` px) is part of the face. The joined region is traced
again with local levels (:func:`scanmass.segment.rings.refine_region`): its edge half-way
between the face beside it and the paper beside it.

A region the face encloses (paper beside it along fewer than 10 px) has no step to the paper to
read; found by the threshold it is a hole of the part. It is joined when its rim towards the face
is a soft ramp (the face's own shading: less than :data:`RIM_HELD_MAX` of the step between the
two levels held up to the edge), and left a hole when the rim is sharp (a hole's edge is the
part's edge, even where its floor is all in shade).

A lit sector may hold a streak at the paper's own level (the mirrored lamp's line across a brushed
face, dev-spot-steel3-t20's plate): against the streak its edge is the face's soft shading, and its
step to the paper reads as a fade. Its step is then read again only where the paper lies beyond the
found face's hull (:func:`_step_beyond_hull`: there only the part's own edge can be), a sector mostly
beyond the hull is joined where it fades into the found face (:func:`_rim_held` beside the found face), and the
streaks between sectors so joined are closed (:func:`_streaks_joined`).

A face brighter than the paper (pale brass mirroring a softbox) is not found by this rule;
it needs colour and stays a refusal or a warning.

A brushed steel face may mirror the light at the paper's own level and colour, with no step
to the paper at all (mixed-steel-t10: the plate's lit half at 0.77 of the paper). Its grain
stays: :func:`grain_face_regions` finds such a face beside a grainy found face by the energy of
log luma less its 5 px median, and :func:`recover_grain_faces` paints it in the face's level
so that the photo is segmented again with it.
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from dataclasses import dataclass, replace

import cv2
import numpy as np

from scanmass.load.decode import LoadedImage, lookup
from scanmass.numeric import code_median, code_percentile, robust_sigma
from scanmass.segment.rings import PartRings, _masked_blur, refine_region

#: A pixel is darker than the paper when below the local paper level by this share ...
DARKER_SHARE = 0.06
#: ... or by this many times the paper's noise, whichever is more.
NOISE_SIGMAS = 5.0
#: A lost face is wider than an edge's blur: its core lies more than this (px) from the paper.
CORE_PX = 3.0
#: Width (px) of the step at a sharp edge: the paper's level is reached within it.
STEP_PX = 3.0
#: Share of the step from the region's level 6 px inside its edge to the paper 2-3 px outside that
#: is taken within the last :data:`STEP_PX` px (a blurred step: all of it; a shadow's linear fade
#: over 20 px: about half).
SHARP_SHARE = 0.8
#: The paper's level is read 8-24 px outside the found part, smoothed on this scale (px).
PAPER_SIGMA_PX = 12.0
#: A lost region is at most this share of the part's found area and at least this many pixels.
MAX_SHARE = 1.0
MIN_AREA_PX = 40
#: Least share of a lost region within the convex hull of the found region: a face's lit sector
#: between dark ones lies within it but for the strip between a chord and the outline (a 70 degree
#: sector of a disc: 83 % within); a shadow beside the part lies outside it.
HULL_SHARE = 0.6
#: Where a lost region's step to the paper is not sharp all round, it is read again on the paper
#: more than this (px) beyond the found region's convex hull only (:func:`_step_beyond_hull`).
HULL_STEP_PX = 0.5


#: A region enclosed by the face (no paper beside it) is a lit sector of the face when its rim is
#: a soft ramp: of the step between its level and the face's (5-7.5 px either side of its edge),
#: less than this share is held up to 1.5-3.5 px from the edge on both sides. A hole's rim is the
#: part's sharp edge, where both levels hold to within the blur (a share near 1);
#: dev-spot-steel3-t20's cam: its lit sector beside the bore, cut off from the bore's paper by the
#: deep-hole step's paint, holds 0.62 (the face 0.31 -> 0.38 towards it, the sector 0.69 -> 0.62).
RIM_HELD_MAX = 0.8


def _rim_held(
    rel: np.ndarray, region: np.ndarray, found: np.ndarray, beside_found: bool = False
) -> tuple[float, float] | None:
    """Share of the step across an enclosed region's rim held up to its edge (:data:`RIM_HELD_MAX`), and its level.

    ``rel``: the crop's levels as shares of the paper's. The level is the region's 5-7.5 px inside
    its edge. With ``beside_found``, the region's bands are read only along its stretch beside the
    found face (where the rest of its edge meets the paper). None when a band holds fewer than
    10 px or the region is not brighter than the face.

    Examples
    --------
    A sharp rim (a hole in shade) holds all of its step; a ramp over 12 px about a quarter:

    >>> import numpy as np
    >>> rel = np.full((60, 60), 0.3, np.float32); region = np.zeros((60, 60), bool); region[20:40, 20:40] = True
    >>> rel[region] = 0.7
    >>> [round(v, 2) for v in _rim_held(rel, region, ~region)]
    [1.0, 0.7]
    >>> r = np.arange(60.0)
    >>> d = np.minimum(np.minimum(r - 20, 39 - r)[:, None], np.minimum(r - 20, 39 - r)[None, :])  # to the edge
    >>> round(_rim_held(np.clip(0.5 + d / 30, 0.3, 0.7).astype(np.float32), region, ~region)[0], 2)
    0.27
    """
    r8 = region.astype(np.uint8)
    d_in = cv2.distanceTransform(r8, cv2.DIST_L2, 3)
    d_out = cv2.distanceTransform(1 - r8, cv2.DIST_L2, 3)
    deep_band = region & (d_in > 5.0) & (d_in <= 7.5)
    edge_band = region & (d_in > 1.5) & (d_in <= STEP_PX + 0.5)
    if beside_found:
        to_found = cv2.distanceTransform(1 - found.astype(np.uint8), cv2.DIST_L2, 3)
        deep_band &= to_found <= 9.0
        edge_band &= to_found <= STEP_PX + 0.5
    bands = [
        deep_band,
        edge_band,
        found & (d_out > 1.5) & (d_out <= STEP_PX + 0.5),
        found & (d_out > 5.0) & (d_out <= 7.5),
    ]
    if min(np.count_nonzero(b) for b in bands) < 10:
        return None
    deep, edge, near, far = (float(np.median(rel[b])) for b in bands)
    step = deep - far
    if step <= 0:
        return None
    return max(edge - near, 0.0) / step, deep


@dataclass
class LostFace:
    """A region of a part's face recovered beside its found region (``label``), in px.

    ``step_share``: the share of the step to the paper taken within the edge's last px, or for a
    region the face encloses the share of the step to the face held up to its edge (:func:`_rim_held`).
    """

    label: int
    area_px: float
    step_share: float
    darker_share: float


def _crop_box(rings: PartRings, width: int, height: int, pad: int) -> tuple[int, int, int, int]:
    x0, y0, x1, y1 = rings.bbox_px
    return max(0, x0 - pad), max(0, y0 - pad), min(width, x1 + pad), min(height, y1 + pad)


def _filled(rings: PartRings, box: tuple[int, int, int, int], shape: tuple[int, int]) -> np.ndarray:
    x0, y0 = box[0], box[1]
    mask = np.zeros(shape, np.uint8)
    cv2.fillPoly(mask, [np.round(rings.outer_px - [x0, y0]).astype(np.int32)], 1)
    for hole in rings.holes_px:
        cv2.fillPoly(mask, [np.round(hole - [x0, y0]).astype(np.int32)], 0)
    return mask


@dataclass
class _PartCrop:
    """One uncut part's crop of a photo: its box (x0, y0, x1, y1), linear levels, its filled
    region, the other parts' regions and the mat's clear area."""

    rings: PartRings
    box: tuple[int, int, int, int]
    codes: np.ndarray
    lin: np.ndarray
    found: np.ndarray
    others: np.ndarray
    inside: np.ndarray


def _part_crops(image: LoadedImage, parts: list[PartRings], roi_px: np.ndarray, pad: int) -> Iterator[_PartCrop]:
    """The crop of each part not cut by the image edge, ``pad`` px around its box."""
    grey, lut = image.grey, np.asarray(image.to_linear, np.float32)
    height, width = grey.shape
    for rings in parts:
        if rings.cut:
            continue
        box = _crop_box(rings, width, height, pad)
        x0, y0, x1, y1 = box
        shape = (y1 - y0, x1 - x0)
        found = _filled(rings, box, shape).astype(bool)
        others = np.zeros(shape, bool)
        for other in parts:
            if other is not rings:
                others |= _filled(other, box, shape).astype(bool)
        inside = np.zeros(shape, np.uint8)
        cv2.fillPoly(inside, [np.round(np.asarray(roi_px) - [x0, y0]).astype(np.int32)], 1)
        codes = grey[y0:y1, x0:x1]
        yield _PartCrop(rings, box, codes, lookup(lut, codes), found, others, inside.astype(bool))


def _rim_points(mask: np.ndarray) -> np.ndarray:
    """The pixels of ``mask`` (uint8) with a 4-neighbour outside it (the crop's edge counts as outside).

    A pixel with all four neighbours in the mask lies strictly inside their convex hull, so these
    pixels have the same convex hull as the whole mask, at a fraction of its points.
    """
    cross = cv2.getStructuringElement(cv2.MORPH_CROSS, (3, 3))
    inner = cv2.erode(mask, cross, borderType=cv2.BORDER_CONSTANT, borderValue=0)
    return cv2.findNonZero(mask - inner)


def _percentile(lin: np.ndarray, mask: np.ndarray, q: float, levels: tuple[np.ndarray, np.ndarray] | None) -> float:
    """``float(np.percentile(lin[mask], q))``; from the codes' counts when ``levels`` = (codes, table)
    with ``lin`` = table[codes] is given (:func:`~scanmass.numeric.code_percentile`: the same float)."""
    return float(np.percentile(lin[mask], q)) if levels is None else code_percentile(levels[0], mask, levels[1], q)


def _median(lin: np.ndarray, mask: np.ndarray, levels: tuple[np.ndarray, np.ndarray] | None) -> float:
    """``float(np.median(lin[mask]))``; from the codes' counts when ``levels`` is given (as :func:`_percentile`)."""
    return float(np.median(lin[mask])) if levels is None else code_median(levels[0], mask, levels[1])


def _labels_seen(labels: np.ndarray, count: int, near: np.ndarray) -> np.ndarray:
    """Per label 0 .. ``count`` - 1: whether it occurs within ``near`` (the set ``np.unique(labels[near])``,
    counted by ``np.bincount`` instead of sorted or hashed)."""
    return np.bincount(labels[near].ravel(), minlength=count)[:count] > 0


def _labels_near(labels: np.ndarray, count: int, near: np.ndarray) -> np.ndarray:
    """The union of the labelled components (labels 1 to ``count - 1``) with a pixel in ``near``.

    The labels seen within ``near`` are the components that reach it: one pass over the crop,
    not one comparison of the whole crop per component.
    """
    chosen = _labels_seen(labels, count, near)
    chosen[0] = False
    return chosen[labels]


def _grown_near(
    labels: np.ndarray, stats: np.ndarray, near: np.ndarray, within: np.ndarray, grow: int
) -> Iterator[tuple[tuple[int, int, int, int], np.ndarray]]:
    """Each labelled component with a pixel in ``near``, in label order: its dilation by a ``grow``
    square, and ``within``, in a box (x0, y0, x1, y1) of the crop.

    ``stats`` as ``cv2.connectedComponentsWithStats`` gives them. The box is the component's
    bounding box grown by the dilation's reach (clipped to the crop): the dilation is zero farther
    out, in the box as in the whole crop (OpenCV's dilation takes nothing from beyond an edge), so
    the box holds every pixel of the whole crop's answer.
    """
    height, width = labels.shape
    reach = grow // 2
    kernel = np.ones((grow, grow), np.uint8)
    seen = np.flatnonzero(_labels_seen(labels, int(stats.shape[0]), near))
    for k in seen[seen > 0].tolist():
        x, y, w, h = (int(v) for v in stats[k, :4])
        x0, y0 = max(x - reach, 0), max(y - reach, 0)
        x1, y1 = min(x + w + reach, width), min(y + h + reach, height)
        comp = (labels[y0:y1, x0:x1] == k).view(np.uint8)
        yield (x0, y0, x1, y1), cv2.dilate(comp, kernel).astype(bool) & within[y0:y1, x0:x1]


#: A lost region mostly outside the found face's hull is still a lit sector of it where less than
#: this share of the step between the two is held up to the edge between them (:func:`_rim_held` beside the found face;
#: dev-spot-steel3-t20's plate, its lit sector beside a cut shadow's paint: 0.45).
SOFT_RIM_MAX = 0.6
#: ... and at least this share of it lies within the hull: a lit sector is flanked by the face's dark
#: parts (dev-spot-steel3-t20's plate: 0.28); a region almost all beyond the hull is a band along the
#: outline (dev-soft-brass-t25's plate in soft light, 0.15: joined, it read +3.4 % without thickness).
SOFT_RIM_HULL_SHARE = 0.2


def _step_beyond_hull(
    rel: np.ndarray, out_px: np.ndarray, in_edge: np.ndarray, hull: np.ndarray, deep: float
) -> float | None:
    """The share of a lost region's step to the paper taken at its edge, read only where the paper
    lies beyond the found region's convex hull (:data:`HULL_STEP_PX`).

    ``rel``: the crop's levels as shares of the paper's; ``out_px`` and ``in_edge``: the bands
    just outside and inside the region's edge; ``deep``: the region's level further in. A face's lit
    sector may hold a streak at the paper's level (the mirrored lamp's line across a brushed face):
    within the hull the region's edge against it is the face's soft shading, not an edge. Beyond
    the hull lies only paper, so there the step is the part's own edge. None when either band holds
    fewer than 10 px.
    """
    beyond = out_px & (cv2.distanceTransform((1 - hull).astype(np.uint8), cv2.DIST_L2, 3) > HULL_STEP_PX)
    if np.count_nonzero(beyond) < 10:
        return None
    near = cv2.dilate(beyond.astype(np.uint8), np.ones((9, 9), np.uint8)).astype(bool)
    edge = in_edge & near
    if np.count_nonzero(edge) < 10:
        return None
    p_out = float(np.median(rel[beyond]))
    step = p_out - deep
    if step <= 0:
        return None
    return (p_out - float(np.median(rel[edge]))) / step


def lost_face_regions(
    lin: np.ndarray,
    found: np.ndarray,
    others: np.ndarray,
    inside: np.ndarray,
    levels: tuple[np.ndarray, np.ndarray] | None = None,
) -> tuple[np.ndarray, list[LostFace]]:
    """The regions of a crop (linear levels ``lin``) that belong to the part found as ``found``.

    ``others``: pixels of other parts (never paper, never joined); ``inside``: pixels within the
    region of interest. Returns the mask of the accepted regions and one :class:`LostFace` each
    (label 0).

    Examples
    --------
    A dark face (0.2) with a sector at its top edge that mirrors the light at 0.8 of the paper
    (0.5), all of it ending on a sharp step; the threshold found only the dark part. A soft
    shadow's fade beside it (a ramp, no step) is not joined:

    >>> import numpy as np
    >>> lin = np.full((80, 90), 0.5, np.float32)
    >>> lin[20:60, 20:70] = 0.2; lin[20:36, 36:54] = 0.4
    >>> lin[60:75, 20:70] = np.linspace(0.3, 0.5, 15, dtype=np.float32)[:, None]  # the shadow's fade
    >>> found = np.zeros(lin.shape, bool); found[20:60, 20:70] = True; found[20:36, 36:54] = False
    >>> extra, notes = lost_face_regions(lin, found, np.zeros_like(found), np.ones_like(found))
    >>> int(extra.sum()), int(extra[60:].sum()), len(notes), round(notes[0].darker_share, 2)
    (288, 0, 1, 0.2)
    """
    kernel = np.ones((3, 3), np.uint8)
    found_u8 = found.astype(np.uint8)
    dist_out = cv2.distanceTransform((1 - found_u8), cv2.DIST_L2, 3)
    ring = (dist_out > 8) & (dist_out <= 24) & inside & ~others
    if np.count_nonzero(ring) < 50:
        return np.zeros_like(found, bool), []
    top = _percentile(lin, ring, 90, levels)
    paper_px = ring & (lin >= 0.85 * top)  # paper, not a cast shadow in the ring
    if np.count_nonzero(paper_px) < 50:
        return np.zeros_like(found, bool), []
    pv = lin[paper_px]
    paper_level = _median(lin, paper_px, levels)
    paper_map = _masked_blur(lin, paper_px, PAPER_SIGMA_PX, paper_level)
    noise = robust_sigma(pv, paper_map[paper_px])
    share = max(DARKER_SHARE, NOISE_SIGMAS * noise / max(paper_level, 1e-6))
    darker = (lin < paper_map * (1.0 - share)) & ~found & ~others & inside
    paper = ~darker & ~found
    to_paper = cv2.distanceTransform((~paper).astype(np.uint8), cv2.DIST_L2, 3)
    core = darker & (to_paper > CORE_PX)
    count, labels, stats, _ = cv2.connectedComponentsWithStats(core.astype(np.uint8), connectivity=8)
    if count <= 1:
        return np.zeros_like(found, bool), []
    touching = cv2.dilate(found_u8, kernel).astype(bool)
    hull = np.zeros_like(found_u8)
    cv2.fillConvexPoly(hull, cv2.convexHull(_rim_points(found_u8)), 1)
    hull = hull.astype(bool)
    found_area = float(np.count_nonzero(found))
    accepted = np.zeros_like(found, bool)
    by_hull = np.zeros_like(found, bool)  # the regions joined by their step beyond the hull only
    notes: list[LostFace] = []
    for (bx0, by0, bx1, by1), region_box in _grown_near(labels, stats, touching, darker, 2 * int(CORE_PX) + 3):
        area = float(np.count_nonzero(region_box))
        if area < MIN_AREA_PX or area > MAX_SHARE * found_area:
            continue
        relaxed = False  # joined by a rule for a lit sector with a streak (outside the hull, or its step beyond it)
        region = np.zeros_like(found, bool)
        region[by0:by1, bx0:bx1] = region_box
        if region[0].any() or region[-1].any() or region[:, 0].any() or region[:, -1].any():
            continue  # reaches past the part's surroundings: paper in shade, not a piece of its face
        if np.count_nonzero(region & hull) < HULL_SHARE * area:
            # a face's lit sector lies mostly within the hull of the face found around it, or it
            # fades into the found face over a soft ramp (where the found face is concave: a cut
            # shadow's paint took the wall beside it); a shadow beside the part meets it at its edge
            if np.count_nonzero(region & hull) < SOFT_RIM_HULL_SHARE * area:
                continue  # a band along the outline (a lit wall, a soft shadow's rim), not a sector between dark ones
            soft = _rim_held(lin / paper_map, region, found, beside_found=True)
            if soft is None or soft[0] >= SOFT_RIM_MAX:
                continue
            relaxed = True
        whole = (region | found).astype(np.uint8)
        d_in = cv2.distanceTransform(whole, cv2.DIST_L2, 3)
        d_out = cv2.distanceTransform(1 - whole, cv2.DIST_L2, 3)
        near = cv2.dilate(region.astype(np.uint8), np.ones((9, 9), np.uint8)).astype(bool) & ~cv2.dilate(
            found_u8, np.ones((5, 5), np.uint8)
        ).astype(bool)
        out_px = near & paper & (d_out > 1.5) & (d_out <= STEP_PX + 0.5)
        in_edge = region & (d_in > 1.5) & (d_in <= STEP_PX + 0.5)
        in_deep = region & (d_in > 5.0) & (d_in <= 7.5)
        if np.count_nonzero(out_px) < 10:
            # enclosed by the face, no paper beside it to step to: a lit sector of the face fading
            # into the dark face beside it (not a hole, whose rim is the part's sharp edge)
            rim = _rim_held(lin / paper_map, region, found)
            if rim is None or rim[0] >= RIM_HELD_MAX or 1.0 - rim[1] < share:
                continue
            accepted |= region
            notes.append(LostFace(0, area, rim[0], 1.0 - rim[1]))
            continue
        if min(np.count_nonzero(in_edge), np.count_nonzero(in_deep)) < 10:
            continue
        p_out = float(np.median(lin[out_px] / paper_map[out_px]))
        l_edge = float(np.median(lin[in_edge] / paper_map[in_edge]))
        l_deep = float(np.median(lin[in_deep] / paper_map[in_deep]))
        step = p_out - l_deep
        if step < share or p_out < 1.0 - 0.5 * share:
            continue
        taken = (p_out - l_edge) / step
        if taken < SHARP_SHARE:
            beyond = _step_beyond_hull(lin / paper_map, out_px, in_edge, hull, l_deep)
            if beyond is None or beyond < SHARP_SHARE:
                continue
            taken = beyond
            relaxed = True
        if relaxed:
            by_hull |= region
        accepted |= region
        notes.append(LostFace(0, area, taken, 1.0 - l_deep))
    if by_hull.any():
        streaked = _streaks_joined(by_hull, darker & hull & ~accepted, hull & ~found & ~others & inside)
        if streaked.any():
            accepted |= streaked
            notes.append(LostFace(0, float(np.count_nonzero(streaked)), 0.0, 0.0))
    return accepted, notes


#: A lit sector's streak at the paper's level (the mirrored lamp's line) is at most this wide (px):
#: the darker parts of the sector on either side of it are joined across it.
STREAK_PX = 11


def _streaks_joined(joined: np.ndarray, darker: np.ndarray, allowed: np.ndarray) -> np.ndarray:
    """The pixels a lit sector ``joined`` (by its step beyond the hull) adds across its streaks.

    The darker pixels within the found region's hull (``darker``) and ``joined`` are closed by a
    disc of :data:`STREAK_PX` px within ``allowed``; the components of the closing that touch
    ``joined`` are returned, less ``joined`` itself.
    """
    disc = cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (STREAK_PX, STREAK_PX))
    closed = cv2.morphologyEx((joined | darker).astype(np.uint8), cv2.MORPH_CLOSE, disc).astype(bool) & allowed
    count, labels = cv2.connectedComponents(closed.astype(np.uint8), connectivity=8)
    keep = _labels_near(labels, count, joined)
    return keep & ~joined


def recover_lost_faces(
    image: LoadedImage, parts: list[PartRings], roi_px: np.ndarray, *, min_hole_px: float
) -> tuple[list[PartRings], list[LostFace]]:
    """Each part with the lost lit regions of its face joined and traced again (photos).

    Returns the parts (a part without a lost region unchanged) and the regions joined.
    """
    replaced: dict[int, PartRings] = {}
    joined: list[LostFace] = []
    lut = np.asarray(image.to_linear, np.float32)  # the crops' levels are lut[codes]
    for crop in _part_crops(image, parts, roi_px, pad=30):
        rings, lin, found, others, inside = crop.rings, crop.lin, crop.found, crop.others, crop.inside
        x0, y0 = crop.box[:2]
        extra, notes = lost_face_regions(lin, found, others, inside, (crop.codes, lut))
        if not notes:
            continue
        merged = (found | extra).astype(np.uint8)
        contours, hierarchy = cv2.findContours(merged, cv2.RETR_CCOMP, cv2.CHAIN_APPROX_SIMPLE, offset=(x0, y0))
        outer_idx = max(
            (i for i in range(len(contours)) if hierarchy[0][i][3] == -1), key=lambda i: cv2.contourArea(contours[i])
        )
        holes = []
        child = hierarchy[0][outer_idx][2]
        while child != -1:
            holes.append(contours[child])
            child = hierarchy[0][child][0]
        bx, by, bw, bh = cv2.boundingRect(contours[outer_idx])
        beyond = ~cv2.dilate(merged, np.ones((17, 17), np.uint8)).astype(bool) & ~others & inside
        paper_level = float(np.percentile(lin[beyond], 75)) if beyond.any() else float(lin.max())
        ratio = float(np.median(lin[merged.astype(bool)])) / max(paper_level, 1e-6)
        again = refine_region(
            image, contours[outer_idx], holes, (bx, by, bx + bw, by + bh), rings.label, roi_px=roi_px,
            min_hole_px=min_hole_px, ratio_hint=ratio,
        )  # fmt: skip
        if again is None or not math.isfinite(again.area_px) or again.area_px <= rings.area_px:
            continue
        replaced[id(rings)] = again
        joined += [LostFace(rings.label, n.area_px, n.step_share, n.darker_share) for n in notes]
    return [replaced.get(id(rings), rings) for rings in parts], joined


#: A brushed face's grain: the energy of log luma less its 5 px median (a level step keeps its
#: median, so a clean edge adds little), smoothed on this scale (px).
GRAIN_SIGMA_PX = 2.0
#: A pixel is grainy where that energy's root is above this (log units) and above
#: :data:`GRAIN_PAPER_TIMES` times the paper's beside the part (mixed-steel-t10: the plate's lit
#: and dark halves 0.18-0.46, its paper 0.00-0.025).
GRAIN_MIN = 0.08
GRAIN_PAPER_TIMES = 5.0
#: A face's grain is dense: the median of the residual's size over the region is at least this
#: (log units) and :data:`GRAIN_PAPER_TIMES` times the paper's (mixed-steel-t10's lit half: 0.125,
#: its paper 0.00; the ragged rim of a painted shadow cut beside a black cam: 0.00-0.04).
GRAIN_DENSE = 0.06
#: The grain beside the part is as strong as the found face's own: at least this share of it.
GRAIN_FOUND_SHARE = 0.5
#: A grainy region is no dark shadow (whose noise is grainy in log units): its median level is at
#: least this share of the paper's.
GRAIN_LEVEL_SHARE = 0.35
#: A grainy region joined is at least this share of the found area, and its core lies further
#: than :data:`GRAIN_CORE_PX` from the found region (wider than an edge's own grain).
GRAIN_MIN_SHARE = 0.05
GRAIN_CORE_PX = 6.0
#: ... and it holds a disc of this radius (px): a lit face, not a band along the outline (a lit
#: wall, the grain of a dark edge's own step: 2-5 px wide on the committed renders; the lit half
#: of mixed-steel-t10's plate is 40 px wide).
GRAIN_WIDE_PX = 8.0
#: The face's grain energy is read on this scale (px) to place the edge where half of it is left.
GRAIN_FACE_SIGMA_PX = 8.0
#: The edge lies where this share of the face's grain energy is left.
GRAIN_EDGE_SHARE = 0.4


@dataclass
class GrainFace:
    """A grainy region of a face at the paper's level joined to a found part, in px.

    ``edge_px``: the length of its outline against the paper (where its edge was placed by the
    grain alone); ``centre_px``: a point of it (x, y) in the image.
    """

    area_px: float
    edge_px: float
    centre_px: tuple[float, float]
    grain: float
    level_share: float


def grain_residual(lin: np.ndarray, levels: tuple[np.ndarray, np.ndarray] | None = None) -> np.ndarray:
    """The grain of a crop of linear levels: log luma less its 5 px median.

    ``levels``: (codes, table) with ``lin`` = table[codes], when known. The log is then looked up
    per code, and the 5 px median taken of the codes: a median of 25 values commutes with a
    non-decreasing map, and OpenCV's median filter repeats the edge pixels at every depth, so
    the result is the same floats as from ``lin``, without the log of every pixel and the float
    median filter (tests/test_photo_speed.py checks it against the float path). A table
    that is not non-decreasing, or codes other than 8 or 16 bit, take the float path.

    Examples
    --------
    >>> import numpy as np
    >>> table = np.linspace(0.0, 1.0, 256, dtype=np.float32)
    >>> codes = np.random.default_rng(0).integers(0, 256, (9, 11)).astype(np.uint8)
    >>> bool(np.array_equal(grain_residual(table[codes]), grain_residual(table[codes], (codes, table))))
    True
    """
    if levels is not None:
        codes, table = levels
        log_table = np.log(np.maximum(np.asarray(table), 1e-3)).astype(np.float32)  # as from lin = table[codes]
        if codes.dtype in (np.uint8, np.uint16) and codes.ndim == 2 and bool(np.all(np.diff(log_table) >= 0)):
            median = cv2.medianBlur(codes, 5)
            return np.asarray(lookup(log_table, codes) - lookup(log_table, median), np.float32)
    log = np.log(np.maximum(lin, 1e-3)).astype(np.float32)
    return np.asarray(log - cv2.medianBlur(log, 5), np.float32)


def grain_energy(lin: np.ndarray) -> np.ndarray:
    """The grain energy of a crop of linear levels: :func:`grain_residual` squared, smoothed."""
    high = grain_residual(lin)
    return np.asarray(cv2.GaussianBlur(high * high, (0, 0), GRAIN_SIGMA_PX), np.float32)


def grain_face_regions(
    lin: np.ndarray,
    found: np.ndarray,
    others: np.ndarray,
    inside: np.ndarray,
    levels: tuple[np.ndarray, np.ndarray] | None = None,
) -> tuple[np.ndarray, np.ndarray, list[GrainFace]]:
    """A found dark face's lit part at the paper's level, told from the paper by its grain.

    A brushed steel face mirrors the light: where it mirrors the lit paper or a lamp it has the
    paper's colour and level, and the threshold leaves it to the paper. Its grain stays: the
    brushing and the face's speckle vary from pixel to pixel far more than the paper's print
    (log luma less its 5 px median, :func:`grain_energy`). Beside the found region, a grainy
    region (:data:`GRAIN_MIN`, :data:`GRAIN_PAPER_TIMES`) as grainy as the found face itself
    (:data:`GRAIN_FOUND_SHARE`), no dark shadow (:data:`GRAIN_LEVEL_SHARE`), wider than an
    edge (:data:`GRAIN_CORE_PX`), at least :data:`GRAIN_MIN_SHARE` of the found area and within
    the crop, is face. Its edge lies where half the face's grain energy (read beside it,
    :data:`GRAIN_FACE_SIGMA_PX`) is left.

    Returns the face share per pixel (0 paper, 1 face; 0 away from the joined regions), the
    joined regions' mask and one :class:`GrainFace` each (``centre_px`` in crop pixels).

    Examples
    --------
    A dark face (0.1) found; beside it, its lit half at the paper's level (1.0) but speckled:

    >>> import numpy as np
    >>> rng = np.random.default_rng(1)
    >>> lin = np.full((100, 140), 1.0, np.float32)
    >>> lin[30:70, 30:70] = 0.1 * rng.uniform(0.5, 1.5, (40, 40))
    >>> lin[30:70, 70:110] = rng.uniform(0.4, 1.0, (40, 40))
    >>> found = np.zeros(lin.shape, bool); found[30:70, 30:70] = True
    >>> none = np.zeros_like(found)
    >>> share, joined, notes = grain_face_regions(lin, found, none, ~none)
    >>> len(notes), 1600 <= int(joined.sum()) <= 1900, int(joined[:, 112:].sum())  # 40 x 40 px, edge +-2-4 px
    (1, True, 0)
    """
    empty: tuple[np.ndarray, np.ndarray, list[GrainFace]] = (
        np.zeros(found.shape, np.float32),
        np.zeros(found.shape, bool),
        [],
    )
    found_u8 = found.astype(np.uint8)
    if np.count_nonzero(found) < 50:
        return empty
    high = np.abs(grain_residual(lin, levels))
    energy = np.asarray(cv2.GaussianBlur(high * high, (0, 0), GRAIN_SIGMA_PX), np.float32)
    root = np.sqrt(energy)
    # the found face's grain first: every early return gives the same empty answer, so a matte face
    # is told before the paper's statistics are read
    dist_in = cv2.distanceTransform(found_u8, cv2.DIST_L2, 3)
    deep = dist_in > 4
    if np.count_nonzero(deep) < 20:
        return empty
    found_grain = float(np.median(root[deep]))
    if found_grain < GRAIN_MIN:
        return empty  # a matte face (black plastic: 0.03-0.07 on the committed renders) has no grain to follow
    dist_out = cv2.distanceTransform(1 - found_u8, cv2.DIST_L2, 3)
    ring = (dist_out > 8) & inside & ~others
    if np.count_nonzero(ring) < 50:
        return empty
    top = _percentile(lin, ring, 90, levels)
    paper_px = ring & (lin >= 0.85 * top)
    if np.count_nonzero(paper_px) < 50:
        return empty
    paper_grain = float(np.percentile(root[paper_px], 25))
    paper_level = _median(lin, paper_px, levels)
    paper_dense = float(np.median(high[paper_px]))
    least = max(GRAIN_MIN, GRAIN_PAPER_TIMES * paper_grain, GRAIN_FOUND_SHARE * found_grain)
    grainy = (root > least) & ~found & ~others & inside
    found_area = float(np.count_nonzero(found))
    touching = cv2.dilate(found_u8, np.ones((3, 3), np.uint8)).astype(bool)
    floor = paper_grain**2
    dense = max(GRAIN_DENSE, GRAIN_PAPER_TIMES * paper_dense)
    joined = np.zeros(found.shape, bool)
    notes: list[GrainFace] = []

    def note(comp: np.ndarray) -> None:
        rim = comp & ~cv2.erode(comp.astype(np.uint8), np.ones((3, 3), np.uint8)).astype(bool)
        rows, cols = np.nonzero(comp)
        level_share = float(np.median(lin[comp])) / max(paper_level, 1e-6)
        notes.append(
            GrainFace(
                float(np.count_nonzero(comp)), float(np.count_nonzero(rim & ~touching)),
                (float(cols.mean()), float(rows.mean())), float(np.median(root[comp])), level_share,
            )
        )  # fmt: skip

    share = np.zeros(found.shape, np.float32)
    core = grainy & (dist_out > GRAIN_CORE_PX)
    candidates = np.zeros(found.shape, bool)
    if core.any():  # without a grainy core there is no candidate, and nothing is joined but a bridge
        count, labels = cv2.connectedComponents(core.astype(np.uint8), connectivity=8)
        near = cv2.dilate(found_u8, np.ones((2 * int(GRAIN_CORE_PX) + 3,) * 2, np.uint8)).astype(bool)
        # the union of the components with a pixel near the found region: those of the labels seen
        # there (one pass over the crop, not one per component)
        candidates = _labels_near(labels, count, near)
    # the face's own grain energy beside each place, for the edge at half of it
    face_core = candidates
    if candidates.any():
        closed = cv2.morphologyEx(candidates.astype(np.uint8), cv2.MORPH_CLOSE, np.ones((5, 5), np.uint8))
        face_core = candidates & (cv2.distanceTransform(closed, cv2.DIST_L2, 3) > 3)
    if np.count_nonzero(face_core) >= 20:
        face_energy = _masked_blur(energy, face_core, GRAIN_FACE_SIGMA_PX, float(np.median(energy[face_core])))
        share = np.clip((energy - floor) / np.maximum(face_energy - floor, 1e-6), 0.0, 1.0)
        # a found dark face's own edge against the paper is grainy too (its step's residual): only
        # the pixels near the grainy core, or away from that edge, are joined
        reach = cv2.dilate(candidates.astype(np.uint8), np.ones((13, 13), np.uint8)).astype(bool)
        half = (share >= GRAIN_EDGE_SHARE) & ~found & ~others & inside & (reach | (dist_out > 4))
        count, labels = cv2.connectedComponents(half.astype(np.uint8), connectivity=8)
        for k in range(1, count):
            comp = labels == k
            if not (comp & candidates).any() or not (comp & touching).any():
                continue
            if np.count_nonzero(comp) < GRAIN_MIN_SHARE * found_area:
                continue
            if comp[0].any() or comp[-1].any() or comp[:, 0].any() or comp[:, -1].any():
                continue  # reaches past the part's surroundings: not a piece of its face
            comp = _small_gaps_filled(comp)
            if float(cv2.distanceTransform(comp.astype(np.uint8), cv2.DIST_L2, 3).max()) < GRAIN_WIDE_PX:
                continue  # a band along the outline (a wall, an edge's own grain), not a lit face
            if float(np.median(lin[comp])) < GRAIN_LEVEL_SHARE * paper_level:
                continue  # dark and noisy: a shadow's noise, not a lit face
            if float(np.median(high[comp])) < dense:
                continue  # its energy is a few steps (a ragged edge, a painted cut's rim), not a dense grain
            joined |= comp
            note(comp)
    out = np.zeros(found.shape, np.float32)  # nothing joined: no band, a share of 0 everywhere
    if joined.any():
        band = cv2.dilate(joined.astype(np.uint8), np.ones((7, 7), np.uint8)).astype(bool) & ~found & ~others
        out = np.where(band, share, 0.0).astype(np.float32)
    # a ring found as a C: the lit stretch that closes it, grainy and no wider than a closing spans
    bridge = _grain_bridge(found | joined, (root > least) & ~joined & ~others & inside)
    if bridge is not None and np.count_nonzero(bridge & ~found) <= GRAIN_BRIDGE_SHARE * found_area:
        level_ok = float(np.median(lin[bridge])) >= GRAIN_LEVEL_SHARE * paper_level
        if level_ok and float(np.median(high[bridge])) >= dense:
            face = float(np.median(energy[deep]))
            around = cv2.dilate(bridge.astype(np.uint8), np.ones((7, 7), np.uint8)).astype(bool)
            around &= ~found & ~joined & ~others
            out[around] = np.clip((energy[around] - floor) / max(face - floor, 1e-6), 0.0, 1.0)
            out[bridge] = 1.0
            joined |= bridge
            note(bridge)
    if not notes:
        return empty
    return out, joined, notes


#: A found ring open in a C is closed by its grainy lit stretch where a closing of this radius (px)
#: spans the gap; the stretch is at most :data:`GRAIN_BRIDGE_SHARE` of the found area.
GRAIN_BRIDGE_PX = 8
GRAIN_BRIDGE_SHARE = 0.3
#: Least area (px) of an enclosed opening (a bore) that the bridge must close.
GRAIN_BRIDGE_HOLE_PX = 50


def _border_labels(labels: np.ndarray) -> set[int]:
    """The labels of the components that touch the crop's border (not enclosed)."""
    return set(np.unique(np.concatenate([labels[0], labels[-1], labels[:, 0], labels[:, -1]])).tolist())


def _enclosed(mask: np.ndarray) -> int:
    """The count of openings of at least :data:`GRAIN_BRIDGE_HOLE_PX` px that ``mask`` encloses."""
    count, labels, stats, _ = cv2.connectedComponentsWithStats((~mask).astype(np.uint8), connectivity=4)
    edge = _border_labels(labels)
    return sum(1 for k in range(1, count) if k not in edge and stats[k, cv2.CC_STAT_AREA] >= GRAIN_BRIDGE_HOLE_PX)


def _grain_bridge(found: np.ndarray, grainy: np.ndarray) -> np.ndarray | None:
    """The grainy pixels a closing of ``found`` adds, when they enclose an opening ``found`` left open.

    ``found`` is eroded by a pixel first: a ring open by a slit of a pixel or two is filled as closed.
    The pixels returned may include found ones (the slit's rim).
    """
    base = cv2.erode(found.astype(np.uint8), np.ones((3, 3), np.uint8))
    size = 2 * GRAIN_BRIDGE_PX + 1
    disc = cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (size, size))
    closed = cv2.morphologyEx(base, cv2.MORPH_CLOSE, disc).astype(bool)
    add = closed & ~base.astype(bool) & grainy
    if not (add & ~found).any() or _enclosed(base.astype(bool) | add) <= _enclosed(base.astype(bool)):
        return None
    return add


#: A gap within a grainy region no wider than this radius (px) is a sparse patch of its grain, not a
#: hole (a hole shows the paper over a wider disc: a 6.5 mm hole on the renders is 8 px in radius).
GRAIN_GAP_RADIUS_PX = 4.0


def _small_gaps_filled(comp: np.ndarray) -> np.ndarray:
    """``comp`` with its enclosed gaps filled where no disc wider than :data:`GRAIN_GAP_RADIUS_PX` fits."""
    outside = (~comp).astype(np.uint8)
    count, labels = cv2.connectedComponents(outside, connectivity=4)
    if count <= 2:
        return comp
    dist = cv2.distanceTransform(outside, cv2.DIST_L2, 3)
    edge = _border_labels(labels)
    out = comp.copy()
    for k in range(1, count):
        if k in edge:
            continue
        gap = labels == k
        if float(dist[gap].max()) <= GRAIN_GAP_RADIUS_PX:
            out |= gap
    return out


def recover_grain_faces(
    image: LoadedImage, parts: list[PartRings], roi_px: np.ndarray
) -> tuple[LoadedImage, list[GrainFace]]:
    """The photo with each dark part's lit, grainy face at the paper's level painted in its found face's level.

    Around each joined region (:func:`grain_face_regions`) the painted level runs from the
    paper's to the face's with the face share, so the segmentation of the painted image puts
    the edge where half the grain is left. Returns the image (unchanged when nothing is joined)
    and the regions joined (``centre_px`` in image pixels).
    """
    grey, lut = image.grey, np.asarray(image.to_linear, np.float32)
    painted: np.ndarray | None = None
    joined: list[GrainFace] = []
    for crop in _part_crops(image, parts, roi_px, pad=40):
        lin, found, others, inside = crop.lin, crop.found, crop.others, crop.inside
        x0, y0, x1, y1 = crop.box
        share, region, notes = grain_face_regions(lin, found, others, inside, (crop.codes, lut))
        if not notes:
            continue
        face = lin[cv2.erode(found.astype(np.uint8), np.ones((5, 5), np.uint8)).astype(bool)]
        if face.size < 20:
            continue
        face_level = float(np.median(face))
        beyond = ~cv2.dilate((found | region).astype(np.uint8), np.ones((9, 9), np.uint8)).astype(bool)
        beyond &= ~others & inside
        paper_level = float(np.percentile(lin[beyond], 75)) if beyond.any() else float(lin.max())
        band = share > 0
        paint = paper_level + (face_level - paper_level) * share
        if painted is None:
            painted = grey.copy()
        codes = np.clip(np.searchsorted(lut, paint[band]), 0, len(lut) - 1).astype(grey.dtype)
        window = painted[y0:y1, x0:x1]
        window[band] = codes
        window[region] = np.asarray(np.clip(np.searchsorted(lut, face_level), 0, len(lut) - 1), grey.dtype)
        joined += [replace(n, centre_px=(n.centre_px[0] + x0, n.centre_px[1] + y0)) for n in notes]
    if painted is None:
        return image, []
    return replace(image, grey=painted), joined


#: A pixel is of a coloured part's face where its yellowness (:func:`face_colour_plane`) is at least
#: this share of the paper's green level: the paper, lit or in shade, has 0 (its noise about 0.01 on
#: the committed renders); brass faces 0.2-0.4 (dev-soft-brass-t25: 0.33 in its 99th percentile).
COLOURED_SHARE = 0.12
#: Level of the paper in the colour plane (linear); a face's yellowness lowers it.
PLANE_PAPER_LEVEL = 0.8


def face_colour_plane(
    blue: np.ndarray, green: np.ndarray, inside: np.ndarray, *, min_area_px: float
) -> tuple[np.ndarray, float] | None:
    """A plane (linear, 0-1) in which a coloured (yellow) face is dark and the paper, lit or shaded, is not.

    With ``k`` the paper's blue-to-green ratio and ``g`` its green level (the brighter half of
    the pixels within ``inside``), the yellowness ``(k G - B) / (k g)`` is a linear combination
    of the linear channels: 0 on the paper at any level (a cast shadow keeps the paper's colour,
    so it is 0 there too), positive on a face that takes less blue than green (brass), and
    across a blurred edge linear in the share of face in a pixel, so its half-way level is the
    edge as in a grey plane. The plane is :data:`PLANE_PAPER_LEVEL` less the yellowness, clipped
    to 0-1. Returns the plane and its count of coloured pixels, or None when fewer than
    ``min_area_px`` pixels within ``inside`` are coloured (:data:`COLOURED_SHARE`).

    Parameters
    ----------
    blue, green : (H, W) float ndarrays
        The photo's blue and green planes in linear light.
    inside : (H, W) bool ndarray
        The mat's clear area.
    min_area_px : float
        The least coloured area (px) worth a plane.

    Examples
    --------
    >>> import numpy as np
    >>> green = np.full((20, 20), 0.55, np.float32); blue = 0.98 * green
    >>> green[5:15, 5:15], blue[5:15, 5:15] = 0.75, 0.53  # a brass square, brighter than the paper
    >>> blue[:, :3] *= 0.5; green[:, :3] *= 0.5  # a shadow on the paper
    >>> plane, count = face_colour_plane(blue, green, np.ones((20, 20), bool), min_area_px=50)
    >>> count, round(float(plane[0, 10]), 3), round(float(plane[0, 0]), 3), round(float(plane[10, 10]), 3)
    (100.0, 0.8, 0.8, 0.42)
    """
    sel = inside & (green >= np.percentile(green[inside], 50))
    if np.count_nonzero(sel) < 100:
        return None
    ratio = float(np.median(blue[sel] / np.maximum(green[sel], 1e-6)))
    level = float(np.median(green[sel]))
    if level <= 0 or ratio <= 0:
        return None
    yellow = (ratio * green - blue) / (ratio * level)
    count = float(np.count_nonzero(inside & (yellow >= COLOURED_SHARE)))
    if count < min_area_px:
        return None
    return np.clip(PLANE_PAPER_LEVEL - yellow, 0.0, 1.0).astype(np.float32), count
