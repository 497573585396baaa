"""Dark and tinted matte faces beside their cast shadow: which pixels are face, and the holes inside a dark face.

On a dark tinted face (black plastic, under :data:`DARK_FACE_LEVEL` of the paper: :func:`dark_tinted_face`,
:func:`_is_dark`) JPEG ringing near the outline is as rough as a shadow's grain; there the pixels at the
face's level and colour are never shadow (:func:`_dark_face_alike`), and the dark walls and bottoms of its
through-holes are found to be opened (:func:`hole_bottoms`). On other tinted matte faces the pixels at the
face's levels and tint are no shadow either (:func:`_tinted_face_alike`). Used by the cut's decision in
:mod:`scanmass.segment.castshadow` (which re-exports the public names) and by
:mod:`~scanmass.segment.softshadow`.
"""

from __future__ import annotations

import cv2
import numpy as np

from scanmass.segment.shadowlayer import _LEVEL_STEP_RATIO, _face_interior, _tint

__all__ = [
    "dark_tinted_face",
    "hole_bottoms",
    "DARK_FACE_LEVEL",
    "BOTTOM_DEPTH",
    "BOTTOM_MIN_PX",
]

#: Largest level (share of the paper white) of a face taken as dark (:func:`_dark_face_alike`).
DARK_FACE_LEVEL = 0.1
#: Smallest chroma difference (blue minus red over the level, smoothed) between a dark face and
#: the paper for :func:`_dark_face_alike` to use it.
_DARK_CHROMA_STEP = 0.05
#: Largest tint of a dark face taken by :func:`_is_dark` (beyond it: a metal's own colour).
_DARK_TINT_MAX = 0.5


def _dark_face_alike(smooth: np.ndarray, interior: np.ndarray) -> np.ndarray:
    """(H, W) bool: pixels as a dark face looks (level and colour), whatever their grain.

    On a dark face (level under :data:`DARK_FACE_LEVEL` of the paper) a JPEG file's ringing
    near the outline is as rough as a shadow's grain: one 8-bit code is several per cent of
    the face's level, and the blocks that hold the edge ripple by a few codes. What the
    ringing keeps is the face's level and colour, smoothed over a few pixels; a cast shadow is
    the paper in less light, at another level (on the committed spotlight render
    tests/data/reallight/spot-black-t20 the black bracket's face is 0.031 of the paper, its
    shadow 0.015) or, where the level is the same, at the paper's colour (that face is 13 %
    redder than the paper against blue, its shadow 4 %). A pixel within
    :data:`_LEVEL_STEP_RATIO` of the face's level and nearer the face's colour than the
    paper's (when the two differ by :data:`_DARK_CHROMA_STEP`) is face-alike. All False on a
    face brighter than that.

    ``smooth`` is the crop's colour over the paper white (per channel), smoothed; ``interior``
    the face's pixels.
    """
    sm = smooth.mean(axis=2)
    face_level = float(np.median(sm[interior]))
    if face_level >= DARK_FACE_LEVEL or face_level <= 0:
        return np.zeros(sm.shape, bool)
    ratio = np.maximum(sm, face_level) / np.maximum(np.minimum(sm, face_level), 1e-6)
    alike = ratio < _LEVEL_STEP_RATIO
    tint = _tint(smooth, sm)
    face_tint = float(np.median(tint[interior]))
    if abs(face_tint) >= _DARK_CHROMA_STEP:
        # the paper's tint is 0 (the colour is taken over its white): nearer the face's
        alike &= np.abs(tint - face_tint) < np.abs(tint)
    return alike


def dark_tinted_face(colour_lin: np.ndarray, part_mask: np.ndarray, paper_rgb: np.ndarray, reach_px: float) -> bool:
    """Whether a region's face (deeper than ``reach_px``) is dark and tinted as a dark plastic's (:func:`_is_dark`).

    Examples
    --------
    >>> paper = np.array([0.7, 0.72, 0.74]); img = np.tile(paper, (60, 60, 1))
    >>> mask = np.zeros((60, 60), bool); mask[10:50, 10:50] = True
    >>> img[mask] = 0.03 * paper * np.array([1.15, 1.0, 1.0])  # redder than the paper
    >>> dark_tinted_face(img, mask, paper, 5.0)
    True
    >>> img[mask] = 0.03 * paper  # neutral: a metal's or the shadow's colour
    >>> dark_tinted_face(img, mask, paper, 5.0)
    False
    """
    mask8 = part_mask.astype(np.uint8)
    if mask8.sum() < 50:
        return False
    q = (colour_lin / np.asarray(paper_rgb)).astype(np.float32)
    inside = cv2.distanceTransform(mask8, cv2.DIST_L2, 3)
    interior = _face_interior(inside, reach_px)
    if np.count_nonzero(interior) < 50:
        return False
    return _is_dark(cv2.GaussianBlur(q, (0, 0), 1.5), interior)


#: A hole's bottom is darker than this share of a dark face's level (as :data:`~scanmass.segment.shadow.PIT_DEPTH`).
BOTTOM_DEPTH = 0.5
#: Smallest area (px) of a hole's bottom that :func:`hole_bottoms` opens.
BOTTOM_MIN_PX = 12


def hole_bottoms(colour_lin: np.ndarray, part_mask: np.ndarray, paper_rgb: np.ndarray) -> np.ndarray:
    """(H, W) bool: the dark bottoms and walls of through-holes inside a dark tinted face, to open as holes.

    A through-hole in a thick part shows, inside its top edge, its far wall and its bottom:
    paper in the wall's shadow, or lit where the light reaches it. A dark plastic face is
    flat and lies in the light: nothing on it is darker than it but a hole (a cast shadow
    falls on the paper beside it, not on its top face). So a region inside the face, clear of
    its outer outline (2 px: the outline's blur), whose median level is under
    :data:`BOTTOM_DEPTH` of the face's is a hole; its pixels are those (smoothed over 1 px)
    below half-way between the face's level and the region's, so that painted as paper the hole
    opens to its top edge. On the committed render tests/data/reallight/spot-black-t20 the
    black disc's 8 mm deep bore (its bottom in the disc's shadow, 0.45 of the face's level, its
    wall 0.2) and the bracket's holes (a lit crescent of the bottom, found as a hole, and the
    rest dark) are such regions. All False for a face that is not dark and tinted
    (:func:`dark_tinted_face`).

    Examples
    --------
    >>> paper = np.array([0.7, 0.72, 0.74]); img = np.tile(paper, (60, 60, 1))
    >>> mask = np.zeros((60, 60), bool); mask[10:50, 10:50] = True
    >>> img[mask] = 0.03 * paper * np.array([1.15, 1.0, 1.0])
    >>> img[25:33, 25:33] = 0.008 * paper  # a hole's dark bottom, 8 px across
    >>> bottoms = hole_bottoms(img, mask, paper)
    >>> int(bottoms.sum()), bool(bottoms[25:33, 25:33].all())
    (64, True)
    """
    mask8 = part_mask.astype(np.uint8)
    none = np.zeros(part_mask.shape, bool)
    if mask8.sum() < 50:
        return none
    q = (colour_lin / np.asarray(paper_rgb)).astype(np.float32)
    filled = np.zeros_like(mask8)
    contours, _ = cv2.findContours(mask8, cv2.RETR_EXTERNAL, cv2.CHAIN_APPROX_NONE)
    cv2.drawContours(filled, contours, -1, 1, thickness=-1)
    from_outline = cv2.distanceTransform(filled, cv2.DIST_L2, 3)
    inside = cv2.distanceTransform(mask8, cv2.DIST_L2, 3)
    interior = inside > min(4.0, 0.75 * float(inside.max()))
    if np.count_nonzero(interior) < 50:
        return none
    smooth = cv2.GaussianBlur(q, (0, 0), 1.5)
    if not _is_dark(smooth, interior):
        return none
    level = cv2.GaussianBlur(q.mean(axis=2), (0, 0), 1.0)
    face = float(np.median(level[interior]))
    dark = (level < BOTTOM_DEPTH * face) & (from_outline > 2.0) & (filled > 0)
    count, labels = cv2.connectedComponents(dark.astype(np.uint8), connectivity=8)
    out = none.copy()
    for k in range(1, count):
        seed = labels == k
        if np.count_nonzero(seed) < BOTTOM_MIN_PX:
            continue
        own = float(np.median(level[seed]))
        grown = (level < 0.5 * (face + own)) & (from_outline > 2.0) & (filled > 0)
        n, lab = cv2.connectedComponents(grown.astype(np.uint8), connectivity=8)
        ids = np.unique(lab[seed])
        region = np.isin(lab, ids[ids > 0]) & part_mask
        if np.count_nonzero(region) >= BOTTOM_MIN_PX:
            out |= region
    return out


def _tinted_face_alike(smooth: np.ndarray, interior: np.ndarray) -> np.ndarray:
    """(H, W) bool: pixels at a tinted matte face's levels and colour, whatever their grain.

    Beside a bright edge (the paper, a lit side wall) JPEG coding rings into a dark face: its
    pixels there are as rough as a shadow's grain, and the 0.01 floor of the paper-colour test
    takes a dark face of a plastic's tint for neutral. What the ringing keeps is the face's
    level and colour. :func:`_dark_face_alike` covers faces under :data:`DARK_FACE_LEVEL` and
    tinted by twice :data:`_DARK_CHROMA_STEP` (:func:`_is_dark`, whose rules stay as they are: on
    the committed render tests/data/reallight/spot-black-t20 these pixels left out of its general
    sweep moved the black bracket by 0.3 %); this covers the other matte faces of one colour up to
    :data:`_TINTED_FACE_LEVEL` tinted by :data:`_TINTED_FACE_TINT` to :data:`_DARK_TINT_MAX`
    (not steel, -0.05 to -0.06, nor brass, +1.07), whose levels spread at most
    :data:`_TINTED_FACE_SPREAD` times (90th over 10th percentile: a metal mirroring the lights
    spreads more). A pixel between the face's 10th percentile over :data:`_LEVEL_STEP_RATIO` and
    its 90th times it, nearer the face's tint than the paper's (0), is face-alike. On the render
    tests/data/reallight/dev-mixed-black2-t22 (filmic curve) the black plate's face reads 0.078 of
    the paper, tint -0.09, and the ringing beside its lit wall ran 10-14 px into the face (-8.6 %
    in area); the thin disc's face 0.12-0.20 with a warm sheen, tint +0.22 (-5.6 %).
    All False for other faces.

    ``smooth`` is the crop's colour over the paper white (per channel), smoothed; ``interior``
    the face's pixels.

    Examples
    --------
    >>> smooth = np.ones((30, 30, 3), np.float32); interior = np.zeros((30, 30), bool)
    >>> smooth[5:25, 5:25] = 0.08 * np.array([1.05, 1.0, 0.95]); interior[10:20, 10:20] = True
    >>> alike = _tinted_face_alike(smooth, interior)
    >>> bool(alike[5:25, 5:25].all()), bool(alike[:5].any())
    (True, False)
    >>> smooth[5:25, 5:25] = 0.08  # neutral: a shadow's or a metal's colour
    >>> bool(_tinted_face_alike(smooth, interior).any())
    False
    """
    sm = smooth.mean(axis=2)
    none = np.zeros(sm.shape, bool)
    face_level = float(np.median(sm[interior]))
    if not 0 < face_level < _TINTED_FACE_LEVEL:
        return none
    lo, hi = np.quantile(sm[interior], [0.1, 0.9])
    if hi > _TINTED_FACE_SPREAD * max(float(lo), 1e-6):
        return none
    tint = _tint(smooth, sm)
    face_tint = float(np.median(tint[interior]))
    if not _TINTED_FACE_TINT <= abs(face_tint) <= _DARK_TINT_MAX:
        return none
    within = (sm * _LEVEL_STEP_RATIO > lo) & (sm < _LEVEL_STEP_RATIO * hi)
    return within & (np.abs(tint - face_tint) < np.abs(tint))


#: Largest level (share of the paper white) of a face for :func:`_tinted_face_alike`.
_TINTED_FACE_LEVEL = 0.3
#: Largest ratio of a face's levels (90th to 10th percentile) for :func:`_tinted_face_alike`; as
#: :data:`scanmass.segment.colourshadow._FACE_LEVEL_SPREAD` (black plastic 1.1-1.7, brushed steel 6).
_TINTED_FACE_SPREAD = 2.5
#: Smallest tint (blue minus red over the level, the paper's 0) of a face for :func:`_tinted_face_alike`:
#: the black plastic of the committed renders reads -0.09 to -0.17 (+0.22 under a warm sheen),
#: brushed steel -0.05 to -0.06.
_TINTED_FACE_TINT = 0.08


def _is_dark(smooth: np.ndarray, interior: np.ndarray) -> bool:
    """Whether the face (``interior``) is a dark tinted face that :func:`_dark_face_alike` can tell apart.

    Dark: under :data:`DARK_FACE_LEVEL` of the paper. Tinted: its tint (blue minus red over
    the level, the paper's being 0) at least :data:`_DARK_CHROMA_STEP` from the paper's and
    at most :data:`_DARK_TINT_MAX` (a dark plastic; a metal's own colour, brass's, lies
    far beyond it, and a metal under a spotlight is dark too: the steel and brass parts of the
    committed renders are 0.02-0.06 of the paper, steel at a tint of -0.05 to -0.06, brass
    +1.07 to +1.09, the black plastic -0.13 to -0.16; on the metals the cut of
    :func:`~scanmass.segment.shadowsweep._sweep_depth` stays).
    """
    sm = smooth.mean(axis=2)
    face_level = float(np.median(sm[interior]))
    if not 0 < face_level < DARK_FACE_LEVEL:
        return False
    tint = abs(float(np.median(_tint(smooth, sm)[interior])))
    return 2 * _DARK_CHROMA_STEP <= tint <= _DARK_TINT_MAX
