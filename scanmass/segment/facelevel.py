"""A dark face's cut by grain checked by its level: none under mixed light (:func:`cut_at_face_level`), the face given back beside one light's core (:func:`face_above_core`).

Under two lights of different colours (a warm lamp and a cool fill) each light's cast shadow is
lit by the other light: the paper in it reads ``q = f_B`` or more (the other light's share of the
paper white), far brighter than a black plastic face (a few per cent of the paper white). A cut
found by grain inside a dark face (:func:`~scanmass.segment.castshadow.shadow_cut`) whose pixels,
off the outline's blur, lie at the face's own level, with none darker than it, took the face's
ringing beside its sharp edge for a shadow's grain: there is no step of level between the face and
what was cut, and a shadow in that light cannot be as dark as the face. Such a cut is refused.

Under one light (a window, a spot) the shadow's core is darker than the face (0.4-0.6 of a black
face's level on tests/data/reallight/dev-window-black-t20) and its fade brighter: that cut holds
pixels darker than the face and is left to the grain's rules; the lights' colours (the shadow lines
of :func:`~scanmass.segment.colourshadow.shadow_lines`) tell the two kinds of light apart.

Under one light the face's outline against that core is a step of level: the face's edge is sharp
(the top face ends), the core lies below half-way between the face's level and its own. A sweep's
layer is the outline moved by one vector, so where the outline runs across the light (a side wall
in shade, the shadow beside it) the layer runs a few pixels into the face (the 2.5 mm black plate of
tests/data/reallight/dev-spot-black-t12: 2-3 px along its lower edge, -3.6 % in area). Where the
face's own grain stays above half-way (its 5th percentile), the cut's pixels above half-way reached
from the kept face through such pixels are face (:func:`face_above_core`).

References
----------
The model of a pixel as the sum of the lights reaching it, each scaled by the surface's reflectance
per channel, is the common practice of illuminant estimation and shadow removal (a diagonal model
of the camera's channels); see :mod:`scanmass.segment.colourshadow`.
"""

from __future__ import annotations

from dataclasses import replace

import cv2
import numpy as np

from scanmass.segment.colourshadow import LINES_MIN_SPREAD, shadow_lines
from scanmass.segment.shadowlayer import ShadowCut, _edge_px

__all__ = [
    "cut_at_face_level",
    "face_above_core",
    "FACE_LEVEL_RATIO",
    "FACE_LEVEL_DARK_SHARE",
    "FACE_LEVEL_OFF_EDGE_PX",
    "CORE_FACE_GRAIN_PCT",
]

#: Largest ratio of the cut's level (median of its pixels off the outline's blur) to the face's for
#: the cut to lie at the face's level: the same 1.3 that places a cut by its level step
#: (``shadowlayer._LEVEL_STEP_RATIO``). On the committed mixed-light renders the cuts that held a
#: shadow read 5.8-8.2 times the face (dev-mixed-black-t0, dev-mixed-black3-t17's cam,
#: dev-mixed-black5-t18), the one that held only face 1.03 (dev-mixed-black3-t17's gasket).
FACE_LEVEL_RATIO = 1.3
#: Largest share of the cut's pixels darker than the face (by :data:`FACE_LEVEL_RATIO`): more is a
#: shadow's core, one light's (0.34-0.78 on the spot- and window-light black parts of the tuned set,
#: none on the mixed-light ones); the same 0.05 as ``shadowlayer._GIVE_BACK_DARK_SHARE``.
FACE_LEVEL_DARK_SHARE = 0.05
#: Distance (px) from the kept face and from the outline beyond which a cut's pixels give its level:
#: past the outline's blur (``shadowlayer._GIVE_BACK_SHADOW_PX``).
FACE_LEVEL_OFF_EDGE_PX = 3.0
#: Percentile of the face's levels (off the outline's blur) that must stay above half-way between the
#: face and a darker core for :func:`face_above_core` to place the edge by level: the face's grain
#: then does not cross it (on the black faces of the tuned set whose cut holds a core darker than the
#: face the 5th percentile lies 0.87-0.93 of the face's median; on dev-window-low-black-t10's gasket,
#: whose face reads far darker pixels, 0.45: it is left as it is).
CORE_FACE_GRAIN_PCT = 5.0
#: Fewest such pixels for the cut's level to be read.
_MIN_DEEP_PX = 20
#: Smoothing (px, Gaussian sigma) of the level before it is read: the JPEG's and the render's grain.
_SMOOTH_PX = 0.7


def cut_at_face_level(
    colour_lin: np.ndarray, part_mask: np.ndarray, paper_rgb: np.ndarray, cut: ShadowCut, reach_px: float
) -> bool:
    """Whether a dark face's cut lies at the face's level under two lights of different colours.

    Parameters
    ----------
    colour_lin : (H, W, 3) float ndarray
        A crop of the photo in linear light, with paper all around the region.
    part_mask : (H, W) bool ndarray
        The found region (holes cleared).
    paper_rgb : (3,) ndarray
        The local paper white (linear).
    cut : ShadowCut
        The cut found in the region.
    reach_px : float
        How far (px) a shadow reaches (the ring read for the shadow lines).

    Returns
    -------
    bool
        True where the lights' shadow lines lean apart by at least
        :data:`~scanmass.segment.colourshadow.LINES_MIN_SPREAD` (mixed light), the cut's pixels off
        the blur read within :data:`FACE_LEVEL_RATIO` of the face's level, and under
        :data:`FACE_LEVEL_DARK_SHARE` of the cut is darker than the face: the cut is face.

    Examples
    --------
    A black face (0.04 of the paper) cut 8 px deep on its right, at its own level; a warm lamp's
    cool penumbra on the left of the region, the cool light's warm one on its right:

    >>> warm = np.array([0.6, 0.8, 1.0]); f_w = 0.4 * warm / warm.mean(); f_c = 1 - f_w
    >>> img = np.ones((80, 80, 3), np.float32); mask = np.zeros((80, 80), bool); mask[20:60, 20:60] = True
    >>> img[20:60, 20:60] = 0.04
    >>> t = np.linspace(0.05, 0.95, 12)[None, :, None]
    >>> img[20:60, 60:72] = 1 - (1 - t) * f_c
    >>> img[20:60, 8:20] = 1 - (1 - t[:, ::-1]) * f_w
    >>> c = np.zeros_like(mask); c[20:60, 52:60] = True
    >>> found = ShadowCut(c, int(c.sum()), 40.0, 0.0, 0.0, 0.04, 0.04)
    >>> cut_at_face_level(img, mask, np.ones(3), found, 12.0)
    True
    >>> img[20:60, 52:60] = f_w  # the cool light's umbra, lit by the warm lamp: a shadow
    >>> cut_at_face_level(img, mask, np.ones(3), found, 12.0)
    False
    """
    if np.count_nonzero(part_mask & ~cut.cut) < 50:
        return False
    q, level, _, face, deep = _levels(colour_lin, part_mask, paper_rgb, cut.cut)
    if np.count_nonzero(deep) < _MIN_DEEP_PX or np.count_nonzero(face) < 50:
        return False
    face_level = float(np.median(level[face]))
    if float(np.median(level[deep])) > FACE_LEVEL_RATIO * face_level:
        return False  # a step of level: the cut is brighter than the face
    if np.count_nonzero(cut.cut & (level * FACE_LEVEL_RATIO < face_level)) > FACE_LEVEL_DARK_SHARE * cut.cut_px:
        return False  # a core darker than the face: one light's shadow
    lines = shadow_lines(cv2.GaussianBlur(q, (0, 0), 1.0), part_mask, reach_px)
    return lines is not None and lines.spread >= LINES_MIN_SPREAD


def _levels(
    colour_lin: np.ndarray, part_mask: np.ndarray, paper_rgb: np.ndarray, cut: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """The smoothed level (share of the paper white), the kept face off the blur, the cut's pixels off the blur."""
    keep = part_mask & ~cut
    to_keep = cv2.distanceTransform((~keep).astype(np.uint8), cv2.DIST_L2, 3)
    inside = cv2.distanceTransform(part_mask.astype(np.uint8), cv2.DIST_L2, 3)
    deep = cut & (to_keep >= FACE_LEVEL_OFF_EDGE_PX) & (inside >= 2.0)
    face = keep & (inside > 2.0 * FACE_LEVEL_OFF_EDGE_PX)
    q = (colour_lin / np.asarray(paper_rgb, np.float32)).astype(np.float32)
    level = cv2.GaussianBlur(q.mean(axis=2), (0, 0), _SMOOTH_PX)
    return q, level, keep, face, deep


def face_above_core(colour_lin: np.ndarray, part_mask: np.ndarray, paper_rgb: np.ndarray, cut: ShadowCut) -> ShadowCut:
    """A dark face's cut less the face it took beside one light's core darker than the face.

    Parameters
    ----------
    colour_lin : (H, W, 3) float ndarray
        A crop of the photo in linear light, with paper all around the region.
    part_mask : (H, W) bool ndarray
        The found region (holes cleared).
    paper_rgb : (3,) ndarray
        The local paper white (linear).
    cut : ShadowCut
        The cut found in the region.

    Returns
    -------
    ShadowCut
        The cut less its pixels above half-way between the face's level and the core's (the median of
        the cut off the blur, under the face's over :data:`FACE_LEVEL_RATIO`) and below as far above the
        face, reached from the kept face through such pixels; the cut as it is where the core is not
        that dark, where the face's :data:`CORE_FACE_GRAIN_PCT` th percentile reaches half-way, or where
        nothing is given back.

    Examples
    --------
    A black face (0.04 of the paper) with a core at 0.02 on its right, cut 3 px into the face: the
    3 px are given back (off the rows the paper's blur reaches):

    >>> img = np.ones((40, 60, 3), np.float32); mask = np.zeros((40, 60), bool); mask[5:35, 5:50] = True
    >>> img[5:35, 5:50] = 0.04; img[5:35, 40:50] = 0.02
    >>> c = np.zeros_like(mask); c[5:35, 37:50] = True
    >>> found = face_above_core(img, mask, np.ones(3), ShadowCut(c, int(c.sum()), 30.0, 0.0, 0.0, 0.04, 0.02))
    >>> int(found.cut[10:30, 37:40].sum()), int(found.cut[10:30, 40:50].sum())
    (0, 200)
    """
    _, level, keep, face, deep = _levels(colour_lin, part_mask, paper_rgb, cut.cut)
    if np.count_nonzero(deep) < _MIN_DEEP_PX or np.count_nonzero(face) < 50:
        return cut
    face_level = float(np.median(level[face]))
    core = float(np.median(level[deep]))
    if core * FACE_LEVEL_RATIO >= face_level:
        return cut  # no core clearly darker than the face
    half = 0.5 * (face_level + core)
    if float(np.percentile(level[face], CORE_FACE_GRAIN_PCT)) <= half:
        return cut  # the face's own grain reaches half-way: its level cannot place the edge
    band = cut.cut & (level > half) & (level < 2.0 * face_level - half)
    _, labels = cv2.connectedComponents((keep | band).astype(np.uint8), connectivity=8)
    ids = np.unique(labels[keep])
    back = band & np.isin(labels, ids[ids > 0])
    if not back.any():
        return cut
    new = cut.cut & ~back
    kept = part_mask & ~new
    return replace(cut, cut=new, cut_px=int(np.count_nonzero(new)), edge_px=_edge_px(new, kept))
