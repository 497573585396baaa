"""A metal face's lit, smooth stretch that a cast-shadow cut took with the shadow, given back to the part.

A cast shadow is the paper in less light: it keeps the paper's grain (rough, as
:func:`~scanmass.segment.castshadow.shadow_cut` tells it) and, under one hard light, its soft part is
only the light's penumbra and the photo's blur next to its core. A brushed metal face mirrors the
room: beside a sector the threshold left to the paper, the sweep that adds the shadow's layer also
adds a layer of the face's lit, smooth sector along that sector's edge (a notch of the found region
facing the shadow's side looks like the outline). Such pixels lie farther from every shadow-like
pixel than a penumbra and a blur reach, are far smoother than the shadow and brighter than its
core: they are given back.
"""

from __future__ import annotations

from dataclasses import replace

import cv2
import numpy as np

from scanmass.segment.castshadow import _COLOUR_FACE_TINT
from scanmass.segment.shadowlayer import (
    _LEVEL_STEP_RATIO,
    _MAX_DEPTH,
    ShadowCut,
    _edge_px,
    _face_interior,
    _tint,
    roughness,
)
from scanmass.segment.softshadow import _FADE_DIM, _swept_on

__all__ = ["lit_face_given_back", "face_edge_given_back", "hard_light"]

#: How far (px) from the shadow's rough, darkened pixels its soft part may reach under a hard light: the
#: outline's blur mixes the paper into about 3 px on either side (as :data:`~scanmass.segment.shadowsweep._RIM_LAYERS`
#: takes it), and a spotlight's penumbra is its radius times the shadow's length over its distance (2 mm x 3 mm
#: / 700 mm on the committed renders: well under a pixel; trigonometry).
SHADOW_SOFT_PX = 3.0
#: A pixel of the cut is shadow-like where its roughness is at least this share of the median over the cut's
#: pixels under :data:`LIT_LEVEL` (the shadow's grain): the half-way at which :func:`~scanmass.segment.shadowsweep._sweep_depth` places the step from a
#: shadow's roughness to a face's. A brushed face's lit sector is smooth (on the committed render
#: tests/data/reallight/dev-spot-steel3-t20, 0.003-0.006 against the shadow's 0.13).
SHADOW_GRAIN_SHARE = 0.5
#: Fewest pixels of a stretch given back (a stretch narrower than that is the blur's own business):
#: :data:`~scanmass.segment.brightface.MIN_AREA_PX`, the smallest lit sector joined to a face.
MIN_BACK_PX = 40
#: Least level (as a share of the paper's) of a pixel given back: brighter than the shadow's core can be
#: under a light that casts it, half-way from black to the paper (the threshold's own half-way; common practice).
LIT_LEVEL = 0.5


def lit_face_given_back(
    colour_lin: np.ndarray, part_mask: np.ndarray, paper_rgb: np.ndarray, cut: ShadowCut, reach_px: float
) -> ShadowCut:
    """``cut`` less the lit, smooth stretches of the face it holds far from any shadow-like pixel.

    Parameters
    ----------
    colour_lin : (H, W, 3) float ndarray
        A crop of the photo in linear light.
    part_mask : (H, W) bool ndarray
        The found region (holes cleared).
    paper_rgb : (3,) ndarray
        The local paper white (linear).
    cut : ShadowCut
        A cut of ``part_mask`` (:func:`~scanmass.segment.castshadow.shadow_cut` or another cut).
    reach_px : float
        How far (px) inside the region a shadow can reach.

    Returns
    -------
    ShadowCut
        ``cut`` itself when nothing is given back, else a copy with ``cut``, ``cut_px`` and
        ``edge_px`` of what is left. A pixel is given back where it is at least :data:`LIT_LEVEL` of
        the paper, smoother than a shadow (under :data:`SHADOW_GRAIN_SHARE` of the median roughness of the cut's pixels
        under :data:`LIT_LEVEL`) and
        farther than :data:`SHADOW_SOFT_PX` from every pixel of the cut that is shadow-like (rough,
        darkened); only connected stretches of :data:`MIN_BACK_PX` pixels or more that touch the kept
        face are given back.

    Examples
    --------
    A smooth dark face with a rough dark shadow 8 px wide along its left side and, along the
    edge of a notch further in, a lit smooth strip 20 px wide that the cut took too: the strip is
    given back (but for the pixels its own steps make rough), the shadow stays cut.

    >>> rng = np.random.default_rng(0)
    >>> paper = np.array([0.7, 0.72, 0.74])
    >>> img = np.tile(paper * 0.05, (80, 80, 1)); mask = np.zeros((80, 80), bool); mask[10:70, 10:70] = True
    >>> img[10:70, 10:18] = paper * (0.01 + 0.03 * rng.random((60, 8, 1)))
    >>> img[20:50, 40:70] = paper * 0.8
    >>> c = np.zeros_like(mask); c[10:70, 10:18] = True; c[20:40, 40:70] = True
    >>> cut = ShadowCut(c, int(c.sum()), 60.0, 0.01, 0.3, 0.05, 0.02)
    >>> back = lit_face_given_back(img, mask, paper, cut, 10.0)
    >>> bool(back.cut[10:70, 10:18].all()), bool(back.cut[24:36, 44:66].any()), cut.cut_px - back.cut_px > 200
    (True, False, True)
    """
    taken = cut.cut & part_mask
    if np.count_nonzero(taken) < MIN_BACK_PX:
        return cut
    paper = np.asarray(paper_rgb, np.float32)
    level = (colour_lin.astype(np.float32) / paper).mean(axis=2)
    rough = roughness(level)
    inside = cv2.distanceTransform(part_mask.astype(np.uint8), cv2.DIST_L2, 3)
    if np.count_nonzero(_face_interior(inside, reach_px) & ~cut.cut) < MIN_BACK_PX:
        return cut
    core = taken & (level < LIT_LEVEL)  # the shadow's darker part: its grain
    if np.count_nonzero(core) < MIN_BACK_PX:
        return cut
    grain = SHADOW_GRAIN_SHARE * float(np.median(rough[core]))
    shadow_like = taken & (rough >= grain) & (level < _MAX_DEPTH)
    if not shadow_like.any():
        return cut  # no shadow's grain in the cut at all: nothing to tell a lit stretch by
    far = cv2.distanceTransform((~shadow_like).astype(np.uint8), cv2.DIST_L2, 3) > SHADOW_SOFT_PX
    candidate = taken & far & (level >= LIT_LEVEL) & (rough < grain)
    if np.count_nonzero(candidate) < MIN_BACK_PX:
        return cut
    keep = part_mask & ~cut.cut
    near_keep = cv2.dilate(keep.astype(np.uint8), np.ones((3, 3), np.uint8)).astype(bool)
    count, labels, stats, _ = cv2.connectedComponentsWithStats(candidate.astype(np.uint8), connectivity=8)
    touching = np.unique(labels[candidate & near_keep])
    back = np.zeros(part_mask.shape, bool)
    for k in touching:
        if k > 0 and stats[k, cv2.CC_STAT_AREA] >= MIN_BACK_PX:
            back |= labels == k
    if not back.any():
        return cut
    left = cut.cut & ~back
    n_left = int(np.count_nonzero(left & part_mask))
    if n_left == 0:
        return cut
    return replace(cut, cut=left, cut_px=n_left, edge_px=_edge_px(left, part_mask & ~left))


#: Width (px) of the kept face beside a cut whose level is read as the face's there, and the sigma (px) of the
#: window it is averaged over: a few pixels past the outline's blur (about 3 px, as above), short of the
#: brushed face's sectors further in (they change over tens of pixels on the committed renders).
FACE_BESIDE_PX = 6.0
#: Percentile of the cut's levels read as the shadow's core: the lower quartile, the median of the darker half (a
#: sweep a few pixels too long adds the face's brighter pixels to the cut's upper half only).
CORE_PERCENTILE = 25.0


#: Band of the paper past the outline (px from it) beyond a cut along its sweep that tells a hard light's shadow
#: from a soft one's, as :func:`~scanmass.segment.softshadow.tint_bound` reads it: a window's shadow still dims the
#: paper there, a spotlight's ends on the paper lit (at :data:`~scanmass.segment.softshadow._FADE_DIM` of it or more).
PAST_OUTLINE_PX = (4.0, 16.0)


def hard_light(level: np.ndarray, part_mask: np.ndarray, cut: ShadowCut) -> bool:
    """Whether a sweep's cut is a hard light's shadow: the paper just past the outline beyond it is lit.

    ``level`` is the crop's level over the paper white. False for a cut without a sweep (nothing to
    look beyond along) or with under 20 pixels of paper in :data:`PAST_OUTLINE_PX` beyond it.

    Examples
    --------
    A shadow 6 px wide cut on the left of a region, the paper beyond it lit (1.0) or dimmed (0.6):

    >>> level = np.ones((40, 60), np.float32); mask = np.zeros((40, 60), bool); mask[5:35, 20:50] = True
    >>> c = np.zeros_like(mask); c[5:35, 20:26] = True
    >>> cut = ShadowCut(c, int(c.sum()), 30.0, 0.01, 0.3, 0.2, 0.02, direction=(-1.0, 0.0), length_px=12.0)
    >>> hard_light(level, mask, cut)
    True
    >>> level[:, :20] = 0.6
    >>> hard_light(level, mask, cut)
    False
    """
    if cut.direction is None or cut.length_px is None:
        return False
    step = float(cut.length_px + PAST_OUTLINE_PX[1]) * np.asarray(cut.direction, float)
    outside = cv2.distanceTransform((~part_mask).astype(np.uint8), cv2.DIST_L2, 3)
    far = (
        _swept_on(cut.cut & part_mask, part_mask, step)
        & (outside > PAST_OUTLINE_PX[0])
        & (outside < PAST_OUTLINE_PX[1])
    )
    return bool(np.count_nonzero(far) >= 20 and float(np.median(level[far])) >= _FADE_DIM)


def face_edge_given_back(
    colour_lin: np.ndarray,
    part_mask: np.ndarray,
    paper_rgb: np.ndarray,
    cut: ShadowCut,
    wall_px: float = 0.0,
) -> ShadowCut:
    """``cut`` with the face's pixels it took beside the kept face given back: the edge at the half-way level.

    A sweep of one length for the whole outline runs a few pixels into the face where the face's
    edge lies nearer than the shadow's length. Between the shadow's core and the face beside it the
    photo's blur makes a ramp; the edge lies where the ramp crosses half-way between the two levels
    in linear light (common practice: the 50 % point of a blurred step). Pixels of the cut at or
    above that level, where the face beside is :data:`~scanmass.segment.shadowlayer._LEVEL_STEP_RATIO`
    times brighter than the core or more (a step clear of the noise), farther than :data:`SHADOW_SOFT_PX`
    from the region's outline and holes (a face the sweep took has the shadow between it and the paper; a
    lit side wall facing the camera, which the cut took with the shadow, has not), reached from the kept
    face through such pixels, are given back.

    Under a soft light (a window's: the paper beyond the cut along its sweep still dimmed, not
    :func:`hard_light`) the shadow also fades out sideways where the sweep runs along the outline, and the
    ramp from that dimmed paper down to the dark line at the edge (the shadow's core or the shaded wall) is
    above half-way too; it lies beyond the dark line and is brighter than the face. There a pixel is given
    back only where it is no brighter than the face beside by more than the half-step (the face's own ramp
    lies between the core and the face) and no farther from the kept face at or above half-way than from the
    nearest pixel of the region under half-way (the face's side of the dark line). A soft light's cut without
    a sweep (:func:`~scanmass.segment.softshadow.fade_cut`) is returned as it is.

    Parameters
    ----------
    colour_lin, part_mask, paper_rgb, cut
        As :func:`lit_face_given_back`.
    wall_px : float, optional
        The widest the side wall facing the camera can show (px: the parallax of the part's thickness).
        Wider than :data:`SHADOW_SOFT_PX` (the outline's blur), a shaded wall between the face and the
        shadow is a band of its own at about the half-way level, no part of the edge's ramp, and nothing is
        given back (spot-steel-t0's 6 mm cam, 4.3 px; window-steel-t25's 5 mm bracket, 6.2 px).

    Returns
    -------
    ShadowCut
        ``cut`` itself when nothing is given back, else a copy with ``cut``, ``cut_px`` and ``edge_px``
        of what is left.

    Examples
    --------
    A face at 0.2 of the paper with a shadow at 0.02 along its left side, 8 px wide, that a sweep 11 px
    long took with 3 px of face: the face's 3 px are given back, but for their ends within the blur of
    the outline.

    >>> paper = np.array([0.7, 0.72, 0.74])
    >>> img = np.tile(paper * 0.2, (40, 60, 1)); mask = np.zeros((40, 60), bool); mask[5:35, 5:55] = True
    >>> img[5:35, 5:13] = paper * 0.02; img[~mask] = paper  # the paper around it lit (a hard light)
    >>> c = np.zeros_like(mask); c[5:35, 5:16] = True
    >>> cut = ShadowCut(c, int(c.sum()), 30.0, 0.01, 0.3, 0.2, 0.05, direction=(-1.0, 0.0), length_px=11.0)
    >>> back = face_edge_given_back(img, mask, paper, cut)
    >>> back.cut_px, bool(back.cut[5:35, 5:13].all()), bool(back.cut[9:31, 13:].any())
    (258, True, False)
    """
    taken = cut.cut & part_mask
    keep = part_mask & ~cut.cut
    if wall_px > SHADOW_SOFT_PX or np.count_nonzero(taken) < MIN_BACK_PX or np.count_nonzero(keep) < MIN_BACK_PX:
        return cut
    q = colour_lin.astype(np.float32) / np.asarray(paper_rgb, np.float32)
    level = q.mean(axis=2)
    hard = hard_light(level, part_mask, cut)
    if not hard and (cut.direction is None or cut.length_px is None):
        return cut  # a soft light's fade cut (no sweep): its inner end was placed by its own level and tint
    if abs(float(np.median(_tint(q[keep], level[keep])))) >= _COLOUR_FACE_TINT:
        return cut  # a face of a colour of its own (brass): its edge against the shadow is placed by its tint
    core = float(np.percentile(level[taken], CORE_PERCENTILE))
    # the face's level beside the cut: the kept pixels within FACE_BESIDE_PX of it, averaged locally
    from_cut = cv2.distanceTransform((~taken).astype(np.uint8), cv2.DIST_L2, 3)
    beside = (keep & (from_cut <= FACE_BESIDE_PX)).astype(np.float32)
    weight = cv2.GaussianBlur(beside, (0, 0), FACE_BESIDE_PX)
    face = cv2.GaussianBlur(level * beside, (0, 0), FACE_BESIDE_PX) / np.maximum(weight, 1e-6)
    mid = 0.5 * (core + face)
    # at or above half-way, with the shadow between it and the paper: farther from the region's outline (and
    # its holes) than the blur reaches (the outline's own rim, or a lit side wall facing the camera, is no face)
    lit = taken & (weight > 0.05) & (face >= _LEVEL_STEP_RATIO * core) & (level >= mid)
    lit &= cv2.distanceTransform(part_mask.astype(np.uint8), cv2.DIST_L2, 3) > SHADOW_SOFT_PX
    if not hard:
        # a soft light dims the paper beside the part too: its shade fades out sideways where the sweep runs
        # along the outline, and the ramp from that paper down to the dark line at the edge (the shadow's core
        # or the shaded wall) is above half-way as well. Such a ramp is brighter than the face and lies beyond
        # the dark line; the face's own ramp lies between the face and the line: a pixel given back is no
        # brighter than the face by more than the half-step, and no farther from the face (kept, at or above
        # half-way) than from the nearest pixel under half-way
        lit &= level <= 2.0 * face - mid
        d_face = cv2.distanceTransform((~(keep & (level >= mid))).astype(np.uint8), cv2.DIST_L2, 3)
        d_dark = cv2.distanceTransform((~(part_mask & (level < mid))).astype(np.uint8), cv2.DIST_L2, 3)
        lit &= d_face <= d_dark
    if not lit.any():
        return cut
    # reached from the kept face through such pixels (4-neighbours)
    count, labels = cv2.connectedComponents((lit | keep).astype(np.uint8), connectivity=4)
    kept_labels = np.unique(labels[keep])
    back = lit & np.isin(labels, kept_labels[kept_labels > 0])
    if not back.any():
        return cut
    left = cut.cut & ~back
    n_left = int(np.count_nonzero(left & part_mask))
    if n_left < MIN_BACK_PX:
        return cut
    return replace(cut, cut=left, cut_px=n_left, edge_px=_edge_px(left, part_mask & ~left))
