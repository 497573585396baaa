"""White parts on white paper: a white part's top face found by its own level and smoothness.

A diffuse white part (nylon, acetal, white-painted sheet) on white paper has no dark face to
find: the threshold finds only its shadow, the dark side of its walls or its walls lit more than
the paper. Its top face still differs from the paper in two ways: it is a little darker (a white
plastic reflects less than paper with brighteners; the top face and the paper, both horizontal,
take the same light) and it is smooth, where the paper's fibres and the sensor's noise make the
paper grainy. The face is where the level, against the local paper white, lies in a band below
it (:data:`FACE_RATIO_RANGE`) and the local spread of the level is small
(:data:`FACE_MAX_SPREAD`); around it lie the lit and dark walls and the shadow (other levels)
and, on the other sides, the paper (the faint step of the top face's edge).

The face's edge is then placed sub-pixel where the smoothed level crosses half-way between the
face's level and the level just beyond the edge, read per edge pixel (a wall, a shadow or the
paper): :func:`face_cover` gives the face's share per pixel, whose 0.5 level line is the edge.
Where the step to the paper is faint, that level line is poorly located: :func:`faint_share`
gives the share of the outline where the step is below :data:`FAINT_STEP`.

References
----------
R. C. Gonzalez and R. E. Woods, *Digital Image Processing*, 4th ed., Pearson, 2018, ch. 10
(region growing by similarity, thresholds at the mid-level of a step).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import cv2
import numpy as np

__all__ = [
    "WhiteFace",
    "paper_level_map",
    "white_faces",
    "face_cover",
    "FACE_RATIO_RANGE",
    "NEAR_WHITE_MAX",
    "face_planes",
    "FACE_MAX_SPREAD",
    "FAINT_STEP",
]

#: Smoothing (px, Gaussian sigma) of the level before the face is sought: the paper's grain and
#: the sensor's noise fall by about 5x, the step of a face's edge stays (common practice: a
#: sigma of 1-2 px keeps edges further apart than 3 sigma).
SMOOTH_SIGMA_PX = 1.5
#: Levels (smoothed / local paper white) a white top face may have: on the committed renders
#: (tests/data/reallight spot-nylon-t0, window-nylon-t0) the faces read 0.79-0.85 of the paper,
#: their shadows below 0.4 and their lit walls above 1.0; below 0.55 a face is a grey part that
#: the threshold finds. Raised to 0.955 (dev-mixed-nylon-t15's faces under the Filmic curve read
#: 0.935-0.939), smooth patches of paper and of a steel face were taken for faces on three photos of
#: other parts (dev-mixed-black2-t22, dev-spot-brass-t22, dev-spot-steel3-t20): not kept.
FACE_RATIO_RANGE = (0.55, 0.93)
#: Highest level (smoothed / local paper white) of a face sought only to be named, not measured
#: (:func:`white_faces` ``ratio_range``): dev-mixed-nylon-t15's faces read 0.935-0.939 under the
#: Filmic curve, too near the paper for their outline to be placed; sought up to 0.955 (the level
#: the measuring search was tried at), such a face tells that the regions found beside it are its
#: part's walls and hole bottoms, not parts.
NEAR_WHITE_MAX = 0.955
#: Largest local spread of the level (local standard deviation over the paper white, the
#: smoothing's window) of a face pixel: the faces of those renders read 0.004-0.009 (median), the
#: paper around them 0.05-0.10.
FACE_MAX_SPREAD = 0.03
#: Least contrast (|level beyond the edge - face level| / paper white) of an edge stretch whose
#: half-way level line is well placed; below it the stretch is the faint step to the paper.
FAINT_STEP = 0.35
#: Least area (mm2) of a white face: smaller smooth patches are paper.
MIN_FACE_MM2 = 40.0
#: Least area (mm2) of a smooth patch from which a face is grown (a bracket's arms, cut by its
#: holes' rims, are found in pieces).
MIN_SEED_MM2 = 8.0
#: Least solidity (area / convex hull's area, holes filled) of a face: a part's face is compact;
#: the smooth paper left between noisy patches is ragged.
MIN_SOLIDITY = 0.45
#: Distance (px) beyond the face's mask (from its outermost pixels' centres: 2.5 px from the step) at
#: which the level beyond its edge is read: inside a wall's band facing the camera (1-3 px wide on the
#: committed renders), where the smoothed step (sigma 1.5 px) has reached 95 % of its height (the
#: normal distribution's 1.67 sigma). Read 1 px further out, the white faces of the committed renders
#: (spot-nylon-t0, window-nylon-t0, dev-window-nylon-t10) came out 1.5-2.4 % larger in area, 2-4 %
#: above their truth: past a narrow wall, the paper's level is read for the wall's step.
BEYOND_PX = 3.5
#: Largest spread of the face's own level (95th - 5th percentile of the smoothed ratio): a face
#: is of one level; the faces of the committed renders spread 0.02-0.04.
MAX_FACE_SPREAD = 0.08
#: Reach (px) of the face's growth past its smooth pieces (a growth reaching it has leaked into the paper),
#: and the most it may grow (times the strictly found face): a face grown further has leaked into the paper,
#: its outline not closed.
GROW_PX = 12
GROW_MAX = 1.6
#: Largest difference of median level (over the local paper white) between the smooth pieces of one face that
#: the rims of its holes cut apart (a bracket's arm beyond a hole): half the spread a face may have
#: (:data:`MAX_FACE_SPREAD`).
PIECE_LEVEL_DIFF = 0.5 * MAX_FACE_SPREAD
#: Steepest slope (change of the level over the local paper white, per mm) and widest spread about its own plane
#: (95th - 5th percentile of the residuals of a least-squares plane) of a smooth piece joined to a face as one of
#: its pieces (:func:`_same_face`): a piece of a top face lies in one plane of slowly changing light. A soft
#: cast shadow's outer penumbra is a smooth ramp from the shadow's core up to the paper, and where it crosses a
#: white face's level its band was joined to the face (dev-window-nylon5-t22: two bands beside a white bracket,
#: 0.016 per mm and a curved strip spreading 0.065 about its plane, grown into a 420 mm² 'part' of its own).
#: On the committed renders the pieces of white faces rise at most 0.005 per mm (dev-spot-nylon-t20, the spot's
#: fall-off) and spread at most 0.012 about their planes; the penumbra bands beside them rise 0.016-0.032 per mm
#: (dev-window-nylon-t10, dev-window-nylon3-t12, dev-window-nylon5-t22). The limits lie between, the spread's at
#: :data:`PIECE_LEVEL_DIFF` (a piece spread wider holds levels two faces' pieces would not share).
PIECE_MAX_SLOPE_PER_MM = 0.01
PIECE_MAX_PLANE_SPREAD = PIECE_LEVEL_DIFF
#: Reach (mm) within which such pieces are sought: a hole's rim cuts a face's smooth area over the hole's
#: width and a rim each side (the smoothed step, 2 x 4 px, 2.4 mm at 0.3 mm/px), so a hole up to about 10 mm
#: across (the largest in the committed renders' white parts: 11 mm) leaves pieces this far apart.
PIECE_REACH_MM = 12.0
#: Reach (px) of a face's growth beyond the smooth pixels at its level, and half width (px) of the narrowest
#: strip a grown face keeps (holes filled). The smoothed step of a face's edge (sigma :data:`SMOOTH_SIGMA_PX`)
#: spreads 2.5 sigma (common practice for a Gaussian: 99 % of its weight) each side of the half-way line, so
#: the rim the strict test leaves is at most 4 px wide. Further out, a cast shadow's penumbra is a
#: ramp that crosses every level between the paper's and the shadow's, and where it meets the face's outline
#: the growth ran along the band of it at the face's level (on window-nylon-t0 the discs' faces grew up to
#: 5 mm beyond their outlines, in strips 2-10 px wide). The band is a small share of the penumbra's width
#: (the growth's window, +-half the face's step, over a ramp from the paper to the shadow); a white part's
#: face is wider than 9 px (2.7 mm at 0.3 mm/px) everywhere, and an opening by a disc of this radius takes
#: (1 - pi / 4) r**2 (3.4 px) from each convex corner (common practice: the area an opening removes at a
#: right-angled corner).
RIM_PX = 4.0


@dataclass
class WhiteFace:
    """One white top face found in a crop or image (pixel space).

    Attributes
    ----------
    mask : (H, W) bool ndarray
        The face's pixels (holes cleared).
    level : float
        The face's level, linear (median of the smoothed level over the face).
    ratio : float
        The face's level over the local paper white.
    """

    mask: np.ndarray
    level: float
    ratio: float


def paper_level_map(level: np.ndarray, valid: np.ndarray | None = None) -> np.ndarray:
    """The local paper white of a photo's level plane: the 75th percentile over about 250 px.

    Parts take a minority of any such window and paper (bright) the rest, so the upper
    quartile is the paper's level, with the light's fall-off across the page kept.

    Examples
    --------
    >>> img = np.full((200, 200), 0.8, np.float32); img[80:120, 80:120] = 0.6
    >>> round(float(paper_level_map(img)[100, 100]), 3)
    0.8
    """
    lv = np.asarray(level, np.float32)
    if valid is not None:
        lv = np.where(valid, lv, np.float32(np.nan))
        fill = float(np.nanmedian(lv)) if np.any(valid) else 0.0
        lv = np.where(np.isnan(lv), np.float32(fill), lv)
    # on blocks of 8 x 8 px (their means: the paper's grain averaged out), 31 blocks across
    small = cv2.resize(lv, None, fx=0.125, fy=0.125, interpolation=cv2.INTER_AREA)
    small = _upper_quartile(small, 31)
    return cv2.resize(small, (lv.shape[1], lv.shape[0]), interpolation=cv2.INTER_LINEAR)


def _upper_quartile(values: np.ndarray, size: int) -> np.ndarray:
    """The 75th percentile over a ``size`` x ``size`` window about each element (edges repeated).

    The element of rank ``int(0.75 * size**2)`` in each window, as ``scipy.ndimage.percentile_filter``
    with ``mode="nearest"`` picks it, without importing scipy on every photo.
    """
    half = size // 2
    padded = np.pad(np.asarray(values, np.float32), half, mode="edge")
    windows = np.lib.stride_tricks.sliding_window_view(padded, (size, size))
    kth = int(0.75 * size * size)
    out = np.empty(values.shape, np.float32)
    for r0 in range(0, values.shape[0], 16):  # a few rows at a time: each row's windows are copied once
        chunk = windows[r0 : r0 + 16].reshape(*windows[r0 : r0 + 16].shape[:2], -1)
        out[r0 : r0 + 16] = np.partition(chunk, kth, axis=-1)[..., kth]
    return out


def fill_holes(mask: np.ndarray) -> np.ndarray:
    """``mask`` with every region of background not 4-connected to the border filled in.

    Examples
    --------
    >>> ring = np.zeros((7, 7), bool); ring[1:6, 1:6] = True; ring[3, 3] = False
    >>> bool(fill_holes(ring)[3, 3]), bool(fill_holes(ring)[0, 0])
    (True, False)
    """
    m = np.asarray(mask, bool)
    outside = np.pad(~m, 1, constant_values=True).astype(np.uint8)
    ff = np.zeros((outside.shape[0] + 2, outside.shape[1] + 2), np.uint8)
    cv2.floodFill(outside, ff, (0, 0), 2, flags=4)
    return (outside[1:-1, 1:-1] != 2) | m


def _same_face(
    labels: np.ndarray,
    stats: np.ndarray,
    ratio: np.ndarray,
    k: int,
    face_ratio: float,
    taken: np.ndarray,
    reach_px: int,
    mm_per_px: float,
) -> list[int]:
    """Component ``k`` and the smooth pieces at its level within ``reach_px`` of it (transitively): one face
    whose holes' rims cut its smooth area apart (:data:`PIECE_LEVEL_DIFF`); pieces already taken are not, nor
    pieces that are not flat (:func:`_flat_piece`: a penumbra's band)."""
    group, todo = [k], [k]
    disc = cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (2 * reach_px + 1,) * 2)
    while todo:
        j = todo.pop()
        x, y, w, h = (int(stats[j, i]) for i in range(4))
        y0, y1 = max(y - reach_px, 0), min(y + h + reach_px, labels.shape[0])
        x0, x1 = max(x - reach_px, 0), min(x + w + reach_px, labels.shape[1])
        lab = labels[y0:y1, x0:x1]
        reach = cv2.dilate((lab == j).astype(np.uint8), disc).astype(bool)
        for n in np.unique(lab[reach]):
            if n == 0 or n in group:
                continue
            px, py, pw, ph = (int(stats[n, i]) for i in range(4))
            piece = labels[py : py + ph, px : px + pw] == n
            level = float(np.median(ratio[py : py + ph, px : px + pw][piece]))
            if np.any(taken[py : py + ph, px : px + pw] & piece) or abs(level - face_ratio) >= PIECE_LEVEL_DIFF:
                continue
            if not _flat_piece(ratio[py : py + ph, px : px + pw], piece, mm_per_px):
                continue
            group.append(int(n))
            todo.append(int(n))
    return group


def _flat_piece(ratio: np.ndarray, piece: np.ndarray, mm_per_px: float) -> bool:
    """True when a smooth piece's level lies in one plane of slowly changing light, as a piece of a top face does:
    the least-squares plane through its levels rises less than :data:`PIECE_MAX_SLOPE_PER_MM` and its levels
    spread less than :data:`PIECE_MAX_PLANE_SPREAD` about it (95th - 5th percentile). A penumbra's band is a ramp.

    Examples
    --------
    >>> yy, xx = np.mgrid[:20, :30].astype(np.float32)
    >>> piece = np.ones((20, 30), bool)
    >>> _flat_piece(0.85 + 0.0003 * xx, piece, 0.3), _flat_piece(0.85 + 0.006 * xx, piece, 0.3)
    (True, False)
    """
    rows, cols = np.nonzero(piece)
    if rows.size < 3:
        return True
    values = ratio[rows, cols].astype(np.float64)
    design = np.c_[np.ones(rows.size), rows, cols].astype(np.float64)
    coef, *_ = np.linalg.lstsq(design, values, rcond=None)
    p5, p95 = np.percentile(values - design @ coef, [5, 95])
    return bool(math.hypot(coef[1], coef[2]) / mm_per_px < PIECE_MAX_SLOPE_PER_MM and p95 - p5 < PIECE_MAX_PLANE_SPREAD)


def _without_strips(grown: np.ndarray, seed: np.ndarray) -> np.ndarray:
    """A grown face without the strips narrower than ``2 * RIM_PX + 1`` px it grew along (holes filled for the
    test, so a narrow web between a hole and the edge stays), kept where connected to its ``seed``."""
    disc = cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (2 * int(RIM_PX) + 1,) * 2)
    wide = cv2.morphologyEx(fill_holes(grown).astype(np.uint8), cv2.MORPH_OPEN, disc).astype(bool) & grown
    n, lab = cv2.connectedComponents(wide.astype(np.uint8), connectivity=4)
    if n <= 1:
        return grown
    keep = np.unique(lab[seed & wide])
    return np.isin(lab, keep[keep > 0])


def _smoothed(level: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The smoothed level and its local standard deviation (same Gaussian window)."""
    lv = np.asarray(level, np.float32)
    mean = cv2.GaussianBlur(lv, (0, 0), SMOOTH_SIGMA_PX)
    sq = cv2.GaussianBlur(lv * lv, (0, 0), SMOOTH_SIGMA_PX)
    return mean, np.sqrt(np.maximum(sq - mean * mean, 0.0))


def face_planes(level: np.ndarray, valid: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The smoothed level, its local spread and the local paper white (:func:`paper_level_map` of the
    smoothed level) that :func:`white_faces` reads: computed once for searches over several ranges."""
    smooth, spread = _smoothed(np.asarray(level, np.float32))
    return smooth, spread, paper_level_map(smooth, valid)


def white_faces(
    level: np.ndarray,
    valid: np.ndarray,
    mm_per_px: float,
    paper: np.ndarray | None = None,
    *,
    planes: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None,
    ratio_range: tuple[float, float] = FACE_RATIO_RANGE,
) -> list[WhiteFace]:
    """The white top faces in a photo's linear level plane (channel mean).

    Parameters
    ----------
    level : (H, W) float ndarray
        Linear level (1.0 = the sensor's ceiling).
    valid : (H, W) bool ndarray
        Where faces may lie (the mat's clear area); a face touching its border is not kept.
    mm_per_px : float
        The plane's scale (for :data:`MIN_FACE_MM2`).
    paper : (H, W) float ndarray, optional
        The local paper white (default :func:`paper_level_map`).
    planes : tuple of three (H, W) ndarrays, optional
        :func:`face_planes` of ``level`` already computed (then ``paper`` is not read).
    ratio_range : (float, float)
        The levels over the paper white a face may have (default :data:`FACE_RATIO_RANGE`).

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> img = (0.8 + 0.08 * rng.standard_normal((160, 160))).astype(np.float32)  # grainy paper
    >>> yy, xx = np.mgrid[:160, :160]
    >>> disc = (yy - 80) ** 2 + (xx - 80) ** 2 < 40**2
    >>> img[disc] = 0.64  # a smooth face, 0.8 of the paper
    >>> faces = white_faces(img, np.ones_like(disc), 0.3)
    >>> len(faces), round(faces[0].ratio, 2)
    (1, 0.8)
    """
    lv = np.asarray(level, np.float32)
    if planes is not None:
        smooth, spread, paper_map = planes
    else:
        smooth, spread = _smoothed(lv)
        paper_map = paper_level_map(smooth, valid) if paper is None else np.asarray(paper, np.float32)
    paper_map = np.maximum(paper_map, 1e-4)
    ratio = smooth / paper_map
    lo, hi = ratio_range
    cand = valid & (ratio > lo) & (ratio < hi) & (spread / paper_map < FACE_MAX_SPREAD)
    # thin links (a penumbra's smooth ramp touching the face at a point) cut by an opening
    smooth_at_level = cand
    cand = cv2.morphologyEx(cand.astype(np.uint8), cv2.MORPH_OPEN, cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (5, 5)))
    n, labels, stats, _ = cv2.connectedComponentsWithStats(cand, connectivity=8)
    # a face grows only across its edge's rim: within RIM_PX of a smooth pixel at a face's level
    rim_reach = cv2.distanceTransform((~smooth_at_level).astype(np.uint8), cv2.DIST_L2, 5) <= RIM_PX
    raw_ratio = lv / paper_map
    border = ~cv2.erode(valid.astype(np.uint8), np.ones((3, 3), np.uint8)).astype(bool)
    min_px = MIN_FACE_MM2 / mm_per_px**2
    seed_px = MIN_SEED_MM2 / mm_per_px**2
    piece_px = int(np.ceil(PIECE_REACH_MM / mm_per_px))
    bridge = cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (piece_px | 1,) * 2)  # closes gaps up to piece_px
    taken = np.zeros(lv.shape, bool)
    # a smooth patch reaching the clear area's border is paper or the mat (a face touching it is not kept): never
    # joined to a face as one of its pieces (dev-window-nylon2-t20: a smooth patch of paper beside the mat's
    # printed edge, at 0.91 of the paper under the Filmic curve, lay within PIECE_REACH_MM of a disc's face at 0.87
    # and took the disc's growth to the border, so the disc was not kept)
    on_border = np.unique(labels[border & (labels > 0)])
    paper_patch = np.isin(labels, on_border[on_border > 0])
    out: list[WhiteFace] = []
    for k in np.argsort(-stats[1:, cv2.CC_STAT_AREA]) + 1:  # largest first
        if stats[k, cv2.CC_STAT_AREA] < seed_px:
            break
        x, y, w, h = (int(stats[k, i]) for i in range(4))
        sub = labels[y : y + h, x : x + w] == k
        if np.any(taken[y : y + h, x : x + w] & sub) or np.any(border[y : y + h, x : x + w] & sub):
            continue
        r = ratio[y : y + h, x : x + w][sub]
        p5, p95 = np.percentile(r, [5, 95])
        if p95 - p5 > MAX_FACE_SPREAD:
            continue
        face_ratio = float(np.median(r))
        # grown into its edge's rim: the pixels whose own level is nearer its level than half-way to the paper's
        # (or as far below it), within RIM_PX of a smooth pixel at a face's level, connected to it (the strict
        # test leaves a rim near every edge). The level unsmoothed: the smoothing blends a hole's dark into the
        # narrow web between the hole and the edge, and cut a bracket's arm there. Grown from the pieces a hole's
        # rims cut apart together; a growth reaching GROW_PX past them has leaked into the paper.
        half = 0.5 * (1.0 - face_ratio)
        group = _same_face(labels, stats, ratio, k, face_ratio, taken | paper_patch, piece_px, mm_per_px)
        first = np.isin(labels, group)
        rows, cols = np.nonzero(first.any(axis=1))[0], np.nonzero(first.any(axis=0))[0]
        y0g, y1g = max(int(rows[0]) - GROW_PX, 0), min(int(rows[-1]) + 1 + GROW_PX, lv.shape[0])
        x0g, x1g = max(int(cols[0]) - GROW_PX, 0), min(int(cols[-1]) + 1 + GROW_PX, lv.shape[1])
        seed = first[y0g:y1g, x0g:x1g]
        near = valid[y0g:y1g, x0g:x1g] & (np.abs(raw_ratio[y0g:y1g, x0g:x1g] - face_ratio) < half)
        pad = piece_px // 2 + 1  # the closing's reach past the box: its sides not taken as face
        between = cv2.morphologyEx(np.pad(seed, pad).astype(np.uint8), cv2.MORPH_CLOSE, bridge)[pad:-pad, pad:-pad] > 0
        # the webs beside its holes lie between its pieces, their rims within RIM_PX of the gaps it closes
        gaps = between & ~seed
        near &= rim_reach[y0g:y1g, x0g:x1g] | (
            cv2.distanceTransform((~gaps).astype(np.uint8), cv2.DIST_L2, 5) <= RIM_PX
        )
        _, lab_near = cv2.connectedComponents((near | seed).astype(np.uint8), connectivity=4)
        keep = np.unique(lab_near[seed])
        sub = np.isin(lab_near, keep[keep > 0])
        side = np.zeros(sub.shape, bool)  # the box's sides, where the image's are not
        side[0, :], side[-1, :] = y0g > 0, y1g < lv.shape[0]
        side[:, 0] |= x0g > 0
        side[:, -1] |= x1g < lv.shape[1]
        if np.any(sub & side):
            continue  # grown GROW_PX past its smooth pieces: leaked into the paper, no closed step all round
        grown = _without_strips(sub, seed)
        strict = np.isin(labels[y0g:y1g, x0g:x1g], np.unique(labels[y0g:y1g, x0g:x1g][grown]))
        strict &= labels[y0g:y1g, x0g:x1g] > 0
        if np.count_nonzero(grown) > GROW_MAX * np.count_nonzero((strict | between) & grown):
            continue  # leaked into the paper: no closed step all round
        if np.any(border[y0g:y1g, x0g:x1g] & grown) or np.count_nonzero(grown) < min_px:
            continue
        y, x, h, w = y0g, x0g, y1g - y0g, x1g - x0g
        sub = grown
        taken[y : y + h, x : x + w] |= sub
        filled = fill_holes(sub)
        cnts, _ = cv2.findContours(filled.astype(np.uint8), cv2.RETR_EXTERNAL, cv2.CHAIN_APPROX_SIMPLE)
        hull = cv2.convexHull(max(cnts, key=cv2.contourArea))
        if np.count_nonzero(filled) < MIN_SOLIDITY * max(cv2.contourArea(hull), 1.0):
            continue
        r = ratio[y : y + h, x : x + w][sub]
        # specks of noise inside the face are face; a hole is larger than the paper's grain
        holes = filled & ~sub
        nh, lab = cv2.connectedComponents(holes.astype(np.uint8), connectivity=4)
        if nh > 1:
            sizes = np.bincount(lab.ravel(), minlength=nh)
            sizes[0] = lab.size  # the background: never a speck
            sub = sub | (sizes < max(12.0, 1.0 / mm_per_px**2))[lab]
        mask = np.zeros(lv.shape, bool)
        mask[y : y + h, x : x + w] = sub
        out.append(WhiteFace(mask=mask, level=float(np.median(smooth[mask])), ratio=float(np.median(r))))
    return out


def face_cover(level: np.ndarray, face: WhiteFace) -> tuple[np.ndarray, np.ndarray]:
    """The face's share per pixel (1 inside, 0 beyond) and the step's contrast per pixel.

    The share is ``(beyond - smoothed) / (beyond - inside)``, clipped to [0, 1], where
    ``beyond`` is the smoothed level :data:`BEYOND_PX` outside the face's mask nearest to the
    pixel and ``inside`` the smoothed level as far inside it (the face's own level there, lit
    unevenly across the face; the face's median level where the mask has no such band): its 0.5
    level line is where the level crosses half-way between the face and what lies beyond its edge
    there (a wall, a shadow or the paper), whichever it is. Pixels more than 2 px inside the mask
    are 1, more than :data:`BEYOND_PX` beyond it 0.

    Returns
    -------
    cover : (H, W) float32 ndarray
    contrast : (H, W) float32 ndarray
        ``|beyond - face level|`` over the face's level, per pixel (the step's size there).

    Examples
    --------
    >>> img = np.full((40, 40), 1.0, np.float32); img[10:30, 10:30] = 0.8
    >>> f = WhiteFace(mask=img < 0.9, level=0.8, ratio=0.8)
    >>> c, k = face_cover(img, f)
    >>> float(c[20, 20]), float(c[2, 2]), round(float(c[20, 9:11].mean()), 2)
    (1.0, 0.0, 0.5)
    """
    smooth, _ = _smoothed(level)
    m = face.mask.astype(np.uint8)
    outside = 1 - m
    d_out = cv2.distanceTransform(outside, cv2.DIST_L2, 5)  # distance of outside pixels from the face
    d_in = cv2.distanceTransform(m, cv2.DIST_L2, 5)
    band = (d_out >= BEYOND_PX - 0.5) & (d_out <= BEYOND_PX + 0.5)
    if not np.any(band):
        return face.mask.astype(np.float32), np.zeros(face.mask.shape, np.float32)
    from scipy import ndimage  # noqa: PLC0415 - only a found face needs it (scipy's import costs ~0.3 s)

    def nearest(where: np.ndarray) -> np.ndarray:
        """The smoothed level of the pixel of ``where`` nearest to each pixel."""
        _, idx = ndimage.distance_transform_edt(~where, return_indices=True)
        return smooth[idx[0], idx[1]]

    beyond = nearest(band)
    # the face's own level near each pixel, read as far inside its mask as beyond is read outside: the face is
    # lit unevenly (a spot's fall-off, a lit side), and its median pulled the half-way level toward what lies
    # beyond (on spot-nylon-t0's disc the face read 0.94-1.06 of its median near its edge, and its 0.5 line lay
    # 1-1.5 px inside the step the unsmoothed level crosses half-way)
    inner = (d_in >= BEYOND_PX - 0.5) & (d_in <= BEYOND_PX + 0.5)
    inside = nearest(inner) if np.any(inner) else np.full(smooth.shape, face.level, np.float32)
    denom = beyond - inside
    safe = np.where(np.abs(denom) < 1e-4, np.float32(1e-4), denom)
    cover = np.clip((beyond - smooth) / safe, 0.0, 1.0).astype(np.float32)
    cover[d_in > 2.0] = 1.0
    cover[d_out > BEYOND_PX] = 0.0
    contrast = (np.abs(beyond - np.float32(face.level)) / max(face.level, 1e-4)).astype(np.float32)
    return cover, contrast
