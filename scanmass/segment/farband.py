"""The core of a cast shadow a sweep left along an edge facing away from the light, taken with the cut.

A sweep of one length for the whole outline ends where its layers' grain changes; its inner end is
ragged, and between it and the top face's edge a band of the shadow's darkest part (its core, or the
shaded wall in it) can stay with the part: 1-5 px along every edge facing away from the light on the
committed photographed renders (tests/data/reallight). A dark stretch of the face itself (a brushed
or mirror-like face reflecting something dark) can be as dark as that core, so its level alone does
not tell them apart. Its geometry does: the band lies against the cut (on the shadow's side, which the
sweep found), runs along it and reaches no deeper into the part than the photo's blur on either side
of the cut's inner edge; a dark sector of the face is reached from the cut too, but runs on deep into
the face, or is a patch no longer along the cut than it is deep.
"""

from __future__ import annotations

from dataclasses import replace

import cv2
import numpy as np

from scanmass.segment.litcut import CORE_PERCENTILE, MIN_BACK_PX, SHADOW_SOFT_PX
from scanmass.segment.shadowlayer import _LEVEL_STEP_RATIO, STRETCH_PX, ShadowCut, _edge_px

__all__ = ["far_band_taken", "BAND_DEPTH_PX", "FACE_RING_PX", "BAND_ALONG_RATIO"]

#: Deepest (px from the cut) a band of the shadow's core left beside the cut may reach: the outline's blur
#: (:data:`~scanmass.segment.litcut.SHADOW_SOFT_PX`, about 3 px) on either side of the cut's inner edge, which
#: itself lies somewhere in the ramp from the core to the face. On the committed renders the bands left run
#: 1-5 px deep; a dark sector of a brushed face reached from the cut runs 8-10 px deep
#: (tests/data/reallight/dev-spot-steel4-t28).
BAND_DEPTH_PX = 2.0 * SHADOW_SOFT_PX
#: Band of the kept face (px from the cut) whose level is read as the face's beside the band: past the
#: deepest band (:data:`BAND_DEPTH_PX`), short of the brushed face's sectors further in (they change over
#: tens of pixels on the committed renders).
FACE_RING_PX = (BAND_DEPTH_PX, 2.0 * BAND_DEPTH_PX)
#: Least ratio of a band's length along the cut (its pixels next to the cut) to its depth: a band runs along
#: the edge; a patch of the face that only touches the cut (a corner's dark wedge) is about as long as deep.
BAND_ALONG_RATIO = 3.0
#: Least ratio of a band's median level to the cut's beside it (within :data:`NEAR_CUT_PX`): the core continues
#: at the shadow's level on the paper; a line clearly darker than that along the top edge is the part's own
#: (dev-spot-steel3-t20's plate: 0.010-0.014 of the paper against its shadow's 0.019-0.025).
CORE_CONTINUITY = 0.75
#: How far (px) into the cut the shadow's level beside a band is read: 2 px, the blur's half.
NEAR_CUT_PX = 2.0
#: Least cosine between the outline's outward normal along a band and the way its shadow falls (the cut's sweep
#: direction): the band lies on an edge facing away from the light, where the cast shadow is. A dark stretch the
#: sweep's thin rim left on an edge facing the light (spot-brass-t10's gasket) is the face's own.
FACING_COS = 0.3
#: Largest median share of the step from the cut's core to the face (``(level - core) / (face - core)``) of a
#: band's pixels. A band of the core holds pixels at the core's level, plus the lower half of the blurred step
#: to the face (whose pixels below half-way have a median share of 0.25 for a linear ramp); a face's own dark
#: rim or sector, only a little darker than half-way, reads near half-way. On the committed renders the bands
#: the truth outlines show as core (dev-window-low-steel2-t8, dev-window-disc8-t4, dev-spot-brass4-t17's
#: brackets) read -0.24 to 0.28; the face's rims beside cuts already at the edge (dev-window-steel2-t15's disc,
#: dev-spot-steel2-t10's cam and plate) 0.33-0.44.
CORE_SHARE = 0.3
#: Sigma (px) the kept face's mask is blurred by for its edge's normal: over a few pixels' jags of the edge.
NORMAL_SIGMA_PX = 3.0
#: How far (px) from a stretch the outline's points are read for the wall its edge shows: the band's depth.
WALL_NEAR_PX = BAND_DEPTH_PX
#: Least width (px) of the wall facing the camera on a stretch's own edge for the stretch to be taken as wall and
#: core where the part's widest wall is wider than the blur: half the blur (:data:`~scanmass.segment.litcut.SHADOW_SOFT_PX`);
#: a narrower wall is no band of its own, and the stretch is the core alone, which such a part's other walls leave
#: unsure (the reason the whole part is refused without ``walls``). The notch's end of dev-lens-window-steel2-t16's
#: bracket shows 2.4 px (camera model) and left 1.3 mm of wall and core beside its cut.
WALL_SEEN_PX = 0.5 * SHADOW_SOFT_PX
#: Least ratio of the face's level beside such a stretch to the cut's core: the core is paper only the ambient light
#: reaches (1-2 % of the lit paper on the committed renders, tests/data/reallight), a top face the light reaches
#: directly at a fifth of the paper or more stands ten times above it; a face within a few times the core reflects
#: something dark, and its own dark rim cannot be told from the shaded wall by level (faces 2-5 times their cores:
#: on dev-window-steel-t0's cam the band so taken was the face's, its shadow side 0.10 -> 0.24 mm inside; on
#: dev-window-steel5-t14's collar it was wall and core, 0.36 -> 0.10 mm out; the bracket above: 32).
WALLED_FACE_RATIO = 10.0
#: Sigma (px) the levels are smoothed by before the half-way test: the photo's noise, under the blur's reach.
SMOOTH_PX = 1.0


def far_band_taken(
    colour_lin: np.ndarray,
    part_mask: np.ndarray,
    paper_rgb: np.ndarray,
    cut: ShadowCut,
    wall_px: float = 0.0,
    walls: tuple[np.ndarray, np.ndarray] | None = None,
) -> ShadowCut:
    """``cut`` with the band of the shadow's core it left beside the face taken too.

    Parameters
    ----------
    colour_lin : (H, W, 3) float ndarray
        A crop of the photo in linear light.
    part_mask : (H, W) bool ndarray
        The found region (holes cleared).
    paper_rgb : (3,) ndarray
        The local paper white (linear).
    cut : ShadowCut
        A sweep's cut of ``part_mask`` (with its direction); a cut without one is returned as it is.
    wall_px : float, optional
        The widest the side wall facing the camera can show (px: the parallax of the part's thickness).
        Wider than :data:`~scanmass.segment.litcut.SHADOW_SOFT_PX` (the outline's blur), a shaded wall
        between the face and the cut is a band of its own at about the half-way level, which the band's
        test cannot tell from the core (as :func:`~scanmass.segment.litcut.face_edge_given_back` takes it):
        nothing is taken, but for the stretches ``walls`` shows beside a wall of their own (below).
    walls : tuple of two (N, 2) ndarrays, optional
        Points of the part's outline (crop px) and the parallax of its thickness there (px, x then y: where the
        top edge is seen from its foot). Where ``wall_px`` is wider than the blur, a stretch is still taken
        where its own edge shows the wall facing the camera (the parallax against the stretch's mean outward
        normal, the median over the outline's points within :data:`WALL_NEAR_PX`) wider than
        :data:`WALL_SEEN_PX`, beside a face :data:`WALLED_FACE_RATIO` times the core or brighter, down to that
        wall's width deeper than :data:`BAND_DEPTH_PX`, and without the test against the cut's level beside it
        (the shaded wall is darker than the paper's core: it faces away from the light and sees half the sky).
        On such an edge the outline the cut leaves is taken for the top face's edge (the cut is taken to hold
        the shaded wall), so a band of wall and core left beside the cut would be counted twice: once as
        itself and once as the wall's width the top edge is moved out by.

    Returns
    -------
    ShadowCut
        ``cut`` itself when nothing is taken, else a copy with ``cut``, ``cut_px`` and ``edge_px`` of the
        cut with the band. A kept pixel is taken where its level (smoothed over :data:`SMOOTH_PX`) is below
        half-way between the cut's core (its :data:`~scanmass.segment.litcut.CORE_PERCENTILE` th percentile)
        and the face beside it (the kept pixels :data:`FACE_RING_PX` from the cut, averaged locally), the face
        there being :data:`~scanmass.segment.shadowlayer._LEVEL_STEP_RATIO` times the core or brighter (a step
        clear of the noise; the 50 % point of a blurred step, common practice), and it belongs to a connected
        stretch of such pixels reached from the cut that lies wholly within :data:`BAND_DEPTH_PX` of the cut and
        runs along it for :data:`BAND_ALONG_RATIO` times its depth or more.

    Examples
    --------
    A face at 0.2 of the paper, its shadow cut along the left side, a core band at the shadow's level left 3 px wide
    beside the cut, and a dark sector of the face (0.03) reached from the cut running 15 px deep: the band
    is taken, the sector is not.

    >>> paper = np.array([0.7, 0.72, 0.74])
    >>> img = np.tile(paper * 0.2, (60, 60, 1)); mask = np.zeros((60, 60), bool); mask[5:55, 5:55] = True
    >>> img[5:55, 5:12] = paper * 0.02; img[5:30, 12:15] = paper * 0.02; img[35:45, 12:27] = paper * 0.03
    >>> c = np.zeros_like(mask); c[5:55, 5:12] = True
    >>> cut = ShadowCut(c, int(c.sum()), 50.0, 0.01, 0.3, 0.2, 0.05, direction=(-1.0, 0.0), length_px=7.0)
    >>> out = far_band_taken(img, mask, paper, cut)
    >>> bool(out.cut[8:27, 12:15].all()), bool(out.cut[37:43, 14:27].any())
    (True, False)
    """
    keep = part_mask & ~cut.cut
    taken = _outer_cut(cut.cut & part_mask, part_mask)
    if (
        cut.direction is None
        or (wall_px > SHADOW_SOFT_PX and walls is None)
        or np.count_nonzero(taken) < MIN_BACK_PX
        or np.count_nonzero(keep) < MIN_BACK_PX
    ):
        return cut
    level = (colour_lin.astype(np.float32) / np.asarray(paper_rgb, np.float32)).mean(axis=2)
    core = float(np.percentile(level[taken], CORE_PERCENTILE))
    from_cut = cv2.distanceTransform((~taken).astype(np.uint8), cv2.DIST_L2, 3)
    ring = (keep & (from_cut > FACE_RING_PX[0]) & (from_cut <= FACE_RING_PX[1])).astype(np.float32)
    weight = cv2.GaussianBlur(ring, (0, 0), FACE_RING_PX[1])
    face = cv2.GaussianBlur(level * ring, (0, 0), FACE_RING_PX[1]) / np.maximum(weight, 1e-6)
    smooth = cv2.GaussianBlur(level, (0, 0), SMOOTH_PX)
    dark = keep & (weight > 0.05) & (face >= _LEVEL_STEP_RATIO * core) & (smooth < 0.5 * (core + face))
    if not dark.any():
        return cut
    # the stretches of such pixels reached from the cut; each wholly within the band's depth and running along
    count, labels = cv2.connectedComponents((dark | taken).astype(np.uint8), connectivity=4)
    reached = np.unique(labels[taken])
    dark &= np.isin(labels, reached[reached > 0])
    count, labels = cv2.connectedComponents(dark.astype(np.uint8), connectivity=8)
    if count <= 1:
        return cut
    idx = labels.ravel()
    depth = np.zeros(count, np.float32)
    np.maximum.at(depth, idx, from_cut.ravel())
    along = np.bincount(idx, weights=(from_cut.ravel() <= 1.5).astype(np.float64), minlength=count)
    size = np.bincount(idx, minlength=count)
    seen = np.zeros(count, np.float64)  # the wall facing the camera each stretch's edge shows (px)
    soft = cv2.GaussianBlur(keep.astype(np.float32), (0, 0), NORMAL_SIGMA_PX)
    gy, gx = np.gradient(soft)
    norm = np.maximum(np.hypot(gx, gy), 1e-9)
    reach = np.full(count, BAND_DEPTH_PX)
    if wall_px > SHADOW_SOFT_PX and walls is not None:
        seen = _seen_walls(labels, count, gx / norm, gy / norm, walls)
        reach = BAND_DEPTH_PX + seen
    good = (depth <= reach) & (along >= np.maximum(BAND_ALONG_RATIO * depth, STRETCH_PX)) & (size >= 2)
    good[0] = False
    # on the edges facing away from the light: the kept face's outward normal (across its blurred mask: the band
    # lies on its edge against the cut) within FACING_COS of the way the shadow falls
    walled = np.zeros(count, bool)
    if wall_px > SHADOW_SOFT_PX:
        # the wall on the stretch's own edge, beside a face the light reaches (not one reflecting something dark)
        walled = seen > WALL_SEEN_PX
        for k in np.flatnonzero(walled):
            walled[k] = float(np.median(face[labels == k])) >= WALLED_FACE_RATIO * core
        good &= walled
    facing = -(gx * float(cut.direction[0]) + gy * float(cut.direction[1])) / norm
    for k in np.flatnonzero(good):
        good[k] = float(np.median(facing[labels == k])) >= FACING_COS
    # of the shadow's level: a stretch clearly darker than the cut's core beside it is the part's own (a dark
    # line along the top edge, a wall's shaded rim), no shadow on the paper
    near_cut = taken & (cv2.distanceTransform((~dark).astype(np.uint8), cv2.DIST_L2, 3) <= NEAR_CUT_PX)
    for k in np.flatnonzero(good & ~walled):
        piece = labels == k
        beside = near_cut & (cv2.dilate(piece.astype(np.uint8), np.ones((5, 5), np.uint8)).astype(bool))
        if np.count_nonzero(beside) >= STRETCH_PX:
            good[k] = float(np.median(level[piece])) >= CORE_CONTINUITY * float(np.median(level[beside]))
    # at the core's level: the band's median in the lower part of the step from the core to the face
    share = (smooth - core) / np.maximum(face - core, 1e-9)
    for k in np.flatnonzero(good):
        good[k] = float(np.median(share[labels == k])) <= CORE_SHARE
    band = dark & good[labels]
    if not band.any():
        return cut
    new = cut.cut | band
    n_new = int(np.count_nonzero(new & part_mask))
    return replace(cut, cut=new, cut_px=n_new, edge_px=_edge_px(new, part_mask & ~new))


def _outer_cut(taken: np.ndarray, part_mask: np.ndarray) -> np.ndarray:
    """The pieces of a cut (8-connected) that touch the paper around the region.

    The shadow beyond the outer outline, not a hole's wall or floor a sweep took (a band beside a hole's cut
    is the hole's own wall). The paper around the region: what is outside it and reached from the crop's border.
    """
    count, labels = cv2.connectedComponents((~part_mask).astype(np.uint8), connectivity=4)
    border = np.unique(np.concatenate([labels[0], labels[-1], labels[:, 0], labels[:, -1]]))
    outside = np.isin(labels, border[border > 0]) & ~part_mask
    near = cv2.dilate(outside.astype(np.uint8), np.ones((3, 3), np.uint8)).astype(bool)
    count, pieces = cv2.connectedComponents(taken.astype(np.uint8), connectivity=8)
    touching = np.unique(pieces[taken & near])
    return taken & np.isin(pieces, touching[touching > 0])


def _seen_walls(
    labels: np.ndarray, count: int, ux: np.ndarray, uy: np.ndarray, walls: tuple[np.ndarray, np.ndarray]
) -> np.ndarray:
    """Width (px) of the wall facing the camera beside each labelled stretch: the parallax against its outward normal.

    ``ux``, ``uy``: the kept face's unit inward normal (its blurred mask's gradient); ``walls``: points on the
    outline (crop px) and the parallax there (px). Per stretch: its mean outward normal, and the median over the
    outline points within :data:`WALL_NEAR_PX` of it (else the nearest) of the parallax's component against it.
    """
    points, steps = (np.asarray(a, np.float64).reshape(-1, 2) for a in walls)
    out = np.zeros(count, np.float64)
    if not len(points):
        return out
    for k in range(1, count):
        ys, xs = np.nonzero(labels == k)
        if not len(ys):
            continue
        normal = -np.array([float(ux[ys, xs].sum()), float(uy[ys, xs].sum())])
        normal /= max(float(np.hypot(*normal)), 1e-9)
        d = np.hypot(points[:, 0, None] - xs[None, :], points[:, 1, None] - ys[None, :]).min(axis=1)
        near = d <= WALL_NEAR_PX if np.any(d <= WALL_NEAR_PX) else d <= d.min()
        out[k] = max(0.0, float(np.median(-(steps[near] @ normal))))
    return out
