"""A yellow (brass) face's rim against one light's shadow lit by another light (:func:`other_light_rim`).

Under two lights of different colours (a warm lamp and a cool broad light) the cast shadow of one
light is lit by the other alone: the paper there takes that light's colour, so a warm lamp's light
in the cool light's shadow reads yellowish, not the paper's grey. The grey threshold and the tests
for darkened paper (:func:`scanmass.segment.shadow.shadow_risk`) then take that band for the part
(it is dark and not of the paper's colour), and the outline of a brass face runs 1-4 px out in it.
The face's own tint stays stronger: brass reflects the warm light's yellow and adds its own. So
where the face's yellowness stands clearly above that of the dark paper just beyond the outline
(a shadow of another colour than the paper's grey, less yellow than the face), the rim is placed
again by colour: a pixel on the face's edge is a blend of the face's colour and the shadow's by
its coverage, linear in linear light, so the edge lies where a pixel is half-way from the face's
colour to the shadow's (both taken beside it: a mirrored face's sectors and the shadow's depth vary
along the outline). A band of the shadow as dark as the face and as yellow stays (nothing tells
it), as does a wall of the face's own colour.

References
----------
The model of a pixel as the sum of the lights reaching it, each scaled per channel by the surface's
reflectance (the diagonal model of illuminant estimation and shadow removal), as in
:mod:`scanmass.segment.colourshadow`; the half-way crossing of a blurred step is common practice of
edge location.
"""

from __future__ import annotations

import cv2
import numpy as np

from scanmass.numeric import robust_sigma
from scanmass.segment.shadowlayer import ShadowCut

__all__ = ["other_light_rim"]

#: Smallest median yellowness (one less blue over green, over the paper white) of the face: the brass faces of the
#: committed renders (tests/data/reallight) read 0.32-0.49, steel and black plastic under 0.1 (as
#: :data:`scanmass.segment.colourshadow.TINT_CUT_FACE`).
FACE_YELLOW = 0.2
#: Range of the shadow's yellowness, a share of the face's: a shadow lit by another light of another colour is
#: tinted (above 0.15: a grey shadow keeps the paper's 0 and is the cuts' of one light) but less than the face
#: (below 0.7: above, the face's tint cannot be told from it).
SHADOW_TINT_RANGE = (0.15, 0.7)
#: Largest level (over the paper white) of what lies beyond the outline taken as that shadow: the paper lit by
#: both lights reads about 1; a shadow of one of them at most the other's share.
SHADOW_LEVEL = 0.8
#: Smallest step of yellowness from the shadow up to the face, in units of their pixels' noise (robust sigmas in
#: quadrature): two, so that the half-way threshold lies a sigma or more from either side and each rim pixel falls
#: on its own side in most cases (a normal variable beyond one sigma 16 % of the time). The brass cam of
#: mixed-brass-t30 reads 2.5; tintcut's three sigma (:data:`scanmass.segment.colourshadow.TINT_CUT_MIN_CONTRAST`)
#: refused it.
MIN_CONTRAST = 2.0
#: Depth (px) inside the outline searched: an edge's blur and the band the threshold took (the renders: 1-4 px).
DEPTH_PX = 5.0
#: Fewest shadow pixels beyond the outline, and fewest pixels cut, for a cut to be made.
MIN_PX = 30
#: Gaussian sigma (px) over which the face's and the shadow's colours are taken beside each rim pixel.
LOCAL_SIGMA_PX = 4.0


def other_light_rim(colour_lin: np.ndarray, part_mask: np.ndarray, paper_rgb: np.ndarray) -> ShadowCut | None:
    """The rim of a region beyond a yellow face's edge, where one light's shadow lit by the other was taken in.

    Parameters
    ----------
    colour_lin : (H, W, 3) float ndarray
        A crop of the photo in linear light, channels as stored (blue, green, red).
    part_mask : (H, W) bool ndarray
        The region as found (holes cleared), paper all around it.
    paper_rgb : (3,) ndarray
        The paper white near the region.

    Returns
    -------
    ShadowCut or None
        The rim pixels (within :data:`DEPTH_PX` of the outer outline) whose colour lies past half-way from the
        face's to the tinted shadow's just beyond the outline, reached from the outline; None where the face
        is not yellow, no tinted shadow lies beyond the outline, its tint is not told from the face's, or fewer
        than :data:`MIN_PX` pixels would be cut.

    Examples
    --------
    A yellow face (0.006, 0.015, 0.02 of the paper, as B, G, R) whose outline took 3 px of a warm-lit shadow
    (0.2, 0.3, 0.4) on its right, beyond which 5 px more of that shadow lie on the paper:

    >>> img = np.ones((40, 70, 3), np.float32)
    >>> img[5:35, 10:40] = (0.006, 0.015, 0.02)
    >>> img[5:35, 40:48] = (0.2, 0.3, 0.4)
    >>> mask = np.zeros((40, 70), bool); mask[5:35, 10:43] = True
    >>> c = other_light_rim(img, mask, np.ones(3, np.float32))
    >>> int(c.cut[20].sum()), bool(c.cut[20, 40:43].all())
    (3, True)
    """
    paper = np.maximum(np.asarray(paper_rgb, np.float64), 1e-9)
    q = cv2.GaussianBlur((colour_lin / paper).astype(np.float32), (0, 0), 0.7)
    level = q.mean(axis=2)
    yellow = 1.0 - q[..., 0] / np.maximum(q[..., 1], 1e-6)
    mask8 = part_mask.astype(np.uint8)
    count, comp = cv2.connectedComponents(1 - mask8, connectivity=4)
    rim = np.unique(np.concatenate([comp[0], comp[-1], comp[:, 0], comp[:, -1]]))
    outside = np.isin(comp, rim[rim > 0]) if count > 1 else ~part_mask
    depth = cv2.distanceTransform((~outside).astype(np.uint8), cv2.DIST_L2, 3)
    interior = (depth > DEPTH_PX + 2.0) & part_mask
    if np.count_nonzero(interior) < MIN_PX:
        return None
    face_yellow = float(np.median(yellow[interior]))
    if face_yellow < FACE_YELLOW:
        return None
    away = cv2.distanceTransform((~outside).astype(np.uint8) ^ 1, cv2.DIST_L2, 3)
    beyond = outside & (away > 1.0) & (away <= 4.0) & (level < SHADOW_LEVEL)
    if np.count_nonzero(beyond) < MIN_PX:
        return None
    face_level = float(np.median(level[interior]))
    shadow_level = float(np.median(level[beyond]))
    if face_level >= shadow_level:
        return None  # a face brighter than the dark paper beside it was not found by its darkness (a mirrored softbox)
    tint = yellow / face_yellow
    shadow_tint = float(np.median(tint[beyond]))
    if not SHADOW_TINT_RANGE[0] <= shadow_tint <= SHADOW_TINT_RANGE[1]:
        return None
    noise = float(np.hypot(robust_sigma(yellow[interior]), robust_sigma(yellow[beyond])))
    if (face_yellow - float(np.median(yellow[beyond]))) < MIN_CONTRAST * max(noise, 1e-9):
        return None
    # each rim pixel's place on the line from the face's colour to the shadow's beside it (both taken locally by
    # normalised convolution: a mirrored face's sectors and a shadow's depth vary along the outline); a pixel is
    # a blend of the two by its coverage, linear in linear light, so the edge lies where it is half-way
    face_ring = interior & (depth <= DEPTH_PX + 8.0)
    w_face = cv2.GaussianBlur(face_ring.astype(np.float32), (0, 0), LOCAL_SIGMA_PX)
    w_sh = cv2.GaussianBlur(beyond.astype(np.float32), (0, 0), LOCAL_SIGMA_PX)
    near = (w_face > 0.02) & (w_sh > 0.02)
    face_c = cv2.GaussianBlur(np.where(face_ring[..., None], q, 0).astype(np.float32), (0, 0), LOCAL_SIGMA_PX)
    sh_c = cv2.GaussianBlur(np.where(beyond[..., None], q, 0).astype(np.float32), (0, 0), LOCAL_SIGMA_PX)
    face_c = face_c / np.maximum(w_face, 1e-6)[..., None]
    sh_c = sh_c / np.maximum(w_sh, 1e-6)[..., None]
    step = sh_c - face_c
    along = ((q - face_c) * step).sum(axis=2) / np.maximum((step * step).sum(axis=2), 1e-12)
    under = part_mask & (depth <= DEPTH_PX) & near & (along > 0.5)
    k4 = np.array([[0, 1, 0], [1, 1, 1], [0, 1, 0]], np.uint8)
    first = outside & cv2.dilate(part_mask.astype(np.uint8), k4).astype(bool)
    seeds = cv2.dilate(first.astype(np.uint8), k4).astype(bool) & under
    _, lab = cv2.connectedComponents(under.astype(np.uint8), connectivity=4)
    hit = np.unique(lab[seeds])
    cut = np.isin(lab, hit[hit > 0])
    if np.count_nonzero(cut) < MIN_PX:
        return None
    keep = part_mask & ~cut
    border = keep & cv2.dilate(cut.astype(np.uint8), k4).astype(bool)
    return ShadowCut(
        cut=cut,
        cut_px=int(np.count_nonzero(cut)),
        edge_px=float(np.count_nonzero(border)),
        texture_face=float("nan"),
        texture_shadow=float("nan"),
        level_face=face_level,
        level_shadow=shadow_level,
    )
