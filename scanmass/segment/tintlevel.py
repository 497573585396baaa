"""A coloured face's yellowness evened out where the face mirrors something dark.

Part of the segmentation stage (:mod:`scanmass.segment`). Polished brass mirrors its
surroundings: under a softbox its top face mirrors the bright box in some places and the dark
room in others. Its colour (the share of blue it lacks against green) stays the same wherever
it is lit, but the yellowness plane of :func:`~scanmass.segment.brightface.face_colour_plane`
is that share times the pixel's level, so where the face mirrors the dark room it falls towards
the paper's 0 and the face is lost there (dev-soft-brass-t25's plate: its face at 0.25 of the
paper's green along one long side, 0.45 elsewhere, the same chroma 0.6 on both; the plane cut
a band up to 20 px wide along that side).

:func:`evened_colour_plane` divides the yellowness by a smooth surface of the face's own green
level (a normalised convolution through the pixels of the face's colour), scaled to the face's
median level: a factor that is constant across an edge's blur leaves the plane linear in the
share of face in a pixel there, so its half-way level is still the edge. The factor only
raises the yellowness where the face is much darker than its median (a reflection of something
dark, not the shading of a side wall: :data:`DARK_RATIO`), never lowers it, and applies only on
pixels of the face's colour and within an edge's blur of them (not on the paper, where a brass
part throws yellow light).
"""

from __future__ import annotations

import cv2
import numpy as np

from scanmass.segment.brightface import PLANE_PAPER_LEVEL
from scanmass.segment.rings import _masked_blur

#: A pixel is taken as the coloured face's, for its level, where its chroma (yellowness over its
#: own green level, both against the paper's) is at least this: half of the palest brass face of
#: the tuned renders (dev-soft-brass-t25's cam, 0.29; its plate 0.6), far above the paper's noise
#: (0 +- 0.05 at the darkest paper of those renders).
FACE_CHROMA = 0.15
#: ... and its green at least this share of the paper's: below it the chroma is mostly noise (the dark
#: stretch of dev-soft-brass-t25's plate lies at 0.23-0.35; a shadow lit by the warm lamp beside
#: mixed-brass-t30's disc at 0.03-0.11, chroma 0.2-0.24: with 0.08 and regions from 20 px, it was
#: raised into an extra part).
FACE_GREEN_SHARE = 0.15
#: The least region (px) of the face's colour that is evened: a face, not a fragment of colour. The brass
#: faces of the tuned renders hold 1200-15000 such px (0.36 mm/px); the brass collar of dev-window-steel5-t14,
#: nearly neutral in window light, only fragments of 150-250 px, which raised read as five extra parts.
MIN_FACE_PX = 500
#: Width (px, 1 sigma) of the smooth surface of the face's level: several times an edge's blur
#: (1-2 px), so the factor is constant across an edge, and below the 20-30 px over which a
#: mirrored dark patch fades on dev-soft-brass-t25's plate.
LEVEL_SIGMA_PX = 4.0
#: The factor applies where the face's level (its smooth surface) is below 1 / this of its median ...
#: A milder fall-off is shading: dev-soft-brass2-t15's gasket, whose wall in shade (0.78 of the paper's
#: green against the face's 1.35) reads 1.1-1.4 once smoothed with the face beside it; raised from 1.0,
#: its area went +3.5 -> +5.0 %, from 1.3 +3.6 %.
DARK_RATIO = 1.3
#: ... and applies in full where it is at most 1 / this (a ramp between the two, so that the factor
#: has no step within the face): a reflection of something dark (dev-soft-brass-t25's plate, 0.25
#: against 0.45 of the paper's green: 1.8).
FULL_RATIO = 1.6
#: The largest factor by which the yellowness is raised (a face at a third of its median level).
MAX_GAIN = 3.0
#: Side (px) of the box over which a pixel's chroma is read: a JPEG stores colour at half resolution
#: (4:2:0), so a colour sample spans 2 px; over 3 px a dark neutral face's noise (steel in window
#: light, 0.1 of the paper's green) stays below :data:`FACE_CHROMA`.
CHROMA_BOX_PX = 3
#: How far (px) beyond the face's pixels the factor applies: the blur of an edge (1-2 px) on the
#: paper's side.
EDGE_REACH_PX = 2


def evened_colour_plane(plane: np.ndarray, blue: np.ndarray, green: np.ndarray, inside: np.ndarray) -> np.ndarray:
    """The colour plane with each coloured face's yellowness raised where the face is darker than its median.

    Parameters
    ----------
    plane : (H, W) float32 ndarray
        :func:`~scanmass.segment.brightface.face_colour_plane`'s plane (the paper at
        :data:`~scanmass.segment.brightface.PLANE_PAPER_LEVEL`, a yellow face lower).
    blue, green : (H, W) float ndarrays
        The photo's blue and green planes in linear light.
    inside : (H, W) bool ndarray
        The mat's clear area.

    Returns
    -------
    (H, W) float32 ndarray
        The plane with ``PLANE_PAPER_LEVEL - yellowness * gain``, clipped to 0-1, where ``gain``
        (1 to :data:`MAX_GAIN`) is the faces' median green over a smooth surface of its green,
        ramped from 1 between :data:`DARK_RATIO` and :data:`FULL_RATIO`, and 1 farther than
        :data:`EDGE_REACH_PX` from the face's pixels.

    Examples
    --------
    >>> import numpy as np
    >>> from scanmass.segment.brightface import face_colour_plane
    >>> green = np.full((60, 60), 0.55, np.float32); blue = 0.98 * green
    >>> green[10:50, 10:50], blue[10:50, 10:50] = 0.30, 0.12  # a brass square, chroma 0.6 ...
    >>> green[10:50, 10:22], blue[10:50, 10:22] = 0.15, 0.06  # ... a strip of it mirroring a dark room
    >>> plane, _ = face_colour_plane(blue, green, np.ones((60, 60), bool), min_area_px=50)
    >>> round(float(plane[30, 13]), 3), round(float(plane[30, 40]), 3)  # the strip near the paper's 0.8
    (0.639, 0.477)
    >>> even = evened_colour_plane(plane, blue, green, np.ones((60, 60), bool))
    >>> round(float(even[30, 13]), 3), round(float(even[30, 40]), 3), round(float(even[0, 0]), 3)
    (0.484, 0.477, 0.8)
    """
    sel = inside & (green >= np.percentile(green[inside], 50))
    level = float(np.median(green[sel])) if sel.any() else 0.0
    if level <= 0:
        return plane
    g = np.asarray(green, np.float32) / level
    yellow = PLANE_PAPER_LEVEL - np.asarray(plane, np.float32)
    # the chroma read on planes smoothed over a JPEG's colour sample (2 px), so that a dark neutral
    # face's noise does not pass for colour
    box = (CHROMA_BOX_PX, CHROMA_BOX_PX)
    g_s, y_s = cv2.blur(g, box), cv2.blur(yellow, box)
    chroma = y_s / np.maximum(g_s, 1e-6)
    coloured = (inside & (g_s >= FACE_GREEN_SHARE) & (chroma >= FACE_CHROMA)).astype(np.uint8)
    count, labels = cv2.connectedComponents(coloured, connectivity=8)
    sizes = np.bincount(labels.ravel(), minlength=count)
    keep = sizes >= MIN_FACE_PX
    keep[0] = False  # the background
    face = keep[labels]
    if not face.any():
        return plane
    median = float(np.median(g[face]))
    surface = _masked_blur(g, face, LEVEL_SIGMA_PX, median)
    gain = np.clip(median / np.maximum(surface, 1e-6), 1.0, MAX_GAIN)
    # shading (a wall, a soft fall-off) is left as it was, a reflection of something dark raised to the
    # face's median; between the two a ramp, so that the factor has no step within the face
    ramp = np.clip((gain - DARK_RATIO) / (FULL_RATIO - DARK_RATIO), 0.0, 1.0)
    gain = 1.0 + (gain - 1.0) * ramp
    # raised on the face and across its edge's blur only: never on the paper (a brass part's yellow
    # light thrown on the paper beside it is no face)
    reach = cv2.dilate(face.astype(np.uint8), np.ones((2 * EDGE_REACH_PX + 1,) * 2, np.uint8)).astype(bool)
    gain[~reach] = 1.0
    return np.asarray(np.clip(PLANE_PAPER_LEVEL - yellow * gain, 0.0, 1.0), np.float32)
