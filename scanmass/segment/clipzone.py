"""Paper at the sensor's ceiling and the found regions that border it: a lit face lost in the clipping.

Where a light mirrored by a metal face drives both the face and the paper beside it to the sensor's
ceiling, the two are one flat patch of the highest code: no level, colour or grain tells the face from the
paper there, so the face's outline is not seen. What is found of such a part is what lies outside the
patch (its face where the light leaves it, its wall, its holes' shade), each piece with an outline that
stops where the patch begins.
Part of the segment stage (:mod:`scanmass.segment`).
"""

from __future__ import annotations

from dataclasses import dataclass

import cv2
import numpy as np

#: Linear level (all channels) taken as the sensor's ceiling: 8-bit 250 and above decoded as sRGB (as
#: :data:`scanmass.segment.shadow._CLIP_LEVEL`).
CLIP_LEVEL = 0.955
#: Least area (px) of a patch of clipped pixels taken as a clipped zone, after an opening by a 3 x 3 square
#: removes single sparkles of a noisy face: some 12 mm² at the photos' 0.34-0.38 mm/px, no speck.
ZONE_MIN_PX = 100
#: The band inside a region's outline (px) read for its face's own pixels at the ceiling: from just within
#: the outline's blur (1 px) to where a 2 px wide rim no longer covers it.
INSIDE_PX = (1, 5)
#: The band beyond a region's outline (px) read for the clipped paper beside it: past a sharpening halo.
OUTSIDE_PX = (3, 9)


@dataclass(frozen=True)
class ClipContact:
    """How one found region meets the clipped zones.

    Attributes
    ----------
    inside_share : float
        Share of the band inside its outline (:data:`INSIDE_PX`) that belongs to a clipped zone: its own
        face at the ceiling, running on into the zone beyond the outline.
    outside_share : float
        Share of the band beyond its outline (:data:`OUTSIDE_PX`) that belongs to a clipped zone.
    zones : frozenset of int
        Labels (in the zone image) of the zones the two bands touch.
    """

    inside_share: float
    outside_share: float
    zones: frozenset[int]


def clipped_zones(colour_lin: np.ndarray, inside: np.ndarray) -> tuple[np.ndarray, int]:
    """The connected patches of pixels at the sensor's ceiling within ``inside``.

    Parameters
    ----------
    colour_lin : (H, W, 3) float ndarray
        The photo in linear light (1.0 = the sensor's ceiling).
    inside : (H, W) bool ndarray
        Where to look (the mat's clear area).

    Returns
    -------
    labels : (H, W) int32 ndarray
        0 off the zones, 1..n on them (8-connected, each at least :data:`ZONE_MIN_PX` px).
    n : int
        The number of zones.

    Examples
    --------
    >>> img = np.full((40, 40, 3), 0.8, np.float32); img[5:20, 5:20] = 1.0; img[30, 30] = 1.0
    >>> labels, n = clipped_zones(img, np.ones((40, 40), bool))
    >>> n, int((labels > 0).sum())
    (1, 225)
    """
    clip = (np.all(colour_lin >= CLIP_LEVEL, axis=-1) & inside).astype(np.uint8)
    clip = cv2.morphologyEx(clip, cv2.MORPH_OPEN, np.ones((3, 3), np.uint8))
    n, labels, stats, _ = cv2.connectedComponentsWithStats(clip, connectivity=8)
    keep = np.zeros(n, np.int32)
    k = 0
    for i in range(1, n):
        if stats[i, cv2.CC_STAT_AREA] >= ZONE_MIN_PX:
            k += 1
            keep[i] = k
    return keep[labels], k


def clip_contact(zones: np.ndarray, region: np.ndarray) -> ClipContact | None:
    """How the found ``region`` (bool mask, holes filled, in the same frame as ``zones``) meets the zones.

    Returns None where either band is empty (a region too thin for an inside band).

    Examples
    --------
    >>> zones = np.zeros((60, 60), np.int32); zones[:, 30:] = 1
    >>> face = np.zeros((60, 60), bool); face[10:50, 10:40] = True  # runs 10 px into the zone
    >>> c = clip_contact(zones, face)
    >>> round(c.inside_share, 2) > 0.2, round(c.outside_share, 2) > 0.2, sorted(c.zones)
    (True, True, [1])
    """
    m = region.astype(np.uint8)
    k_in0 = np.ones((2 * INSIDE_PX[0] + 1,) * 2, np.uint8)
    k_in1 = np.ones((2 * INSIDE_PX[1] + 1,) * 2, np.uint8)
    band_in = cv2.erode(m, k_in0).astype(bool) & ~cv2.erode(m, k_in1).astype(bool)
    near = cv2.dilate(m, np.ones((2 * OUTSIDE_PX[0] + 1,) * 2, np.uint8)).astype(bool)
    far = cv2.dilate(m, np.ones((2 * OUTSIDE_PX[1] + 1,) * 2, np.uint8)).astype(bool)
    band_out = far & ~near
    if not band_in.any() or not band_out.any():
        return None
    z_in, z_out = zones[band_in], zones[band_out]
    touched = frozenset(int(z) for z in np.unique(np.concatenate([z_in, z_out])) if z > 0)
    return ClipContact(float(np.mean(z_in > 0)), float(np.mean(z_out > 0)), touched)
