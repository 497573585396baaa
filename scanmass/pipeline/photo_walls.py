"""Which edge of a thick part's side wall facing the camera its outline runs on: :func:`wall_sides` (round
rings vote for the top face's edge or the bottom edge) and :func:`with_top_seen` (a plane map taking a mask
as seen on the top edge).
Part of the pipeline stage (:mod:`scanmass.pipeline`).
"""

from __future__ import annotations

import math
from dataclasses import replace

import cv2
import numpy as np

from scanmass.errors import OptionError
from scanmass.geometry import signed_area, vertex_normals
from scanmass.measurement import Measurement
from scanmass.scale.camera import PhotoScale
from scanmass.scale.homography import ElevationHook, apply_h
from scanmass.scale.planemap import PlaneMap
from scanmass.section import fit_circle

#: Largest RMS (px) of a ring's radial residuals about its fitted circle for the ring to count
#: as round in :func:`wall_sides`. On the committed renders (tests/data/reallight) the round
#: holes and discs of the thick parts fit their circle to 0.18-0.27 px when mapped with the
#: right wall side and to 0.31-0.65 px with the wrong one.
ROUND_RMS_PX = 0.35
#: A ring's two mappings must differ at least this much in circle-fit RMS (ratio) for a vote.
ROUND_RATIO = 0.75
#: Smallest median width (px) of the wall facing the camera for a ring to take part.
WALL_SIDE_MIN_PX = 0.5
#: Smallest diameter (px) of a ring, mapped as seen on its top edge, for it to vote. The 5.5 mm holes of a
#: thick brass L bracket in soft light (dev-soft-brass2-t15, 0.36 mm/px) are 15.4 px across and fit their
#: circle to 0.08-0.11 px on the top edge against 0.33-0.42 px on the bottom one; below 16 px they did not
#: vote and the part read 8 % small, its holes 0.8 mm large.
ROUND_MIN_DIAMETER_PX = 12.0


def wall_sides(
    shape: tuple[int, int], scale: PhotoScale, result: Measurement, thickness_mm: float | None
) -> tuple[np.ndarray | None, list[int]]:
    """Parts whose outline runs on the top face's edge all round, and a pixel mask around them.

    A raised part's side wall facing the camera shows between its top face's edge and its
    bottom edge (:class:`~scanmass.scale.homography.ElevationHook`). The plane map takes the
    outline there as the bottom edge: the segmentation counted the wall as part. A wall that
    looks like the paper or like a hole's bottom (brushed steel in soft light) is counted as
    background instead, and the outline runs on the top face's edge all round; taken as the
    bottom edge, such a part measures too small by the wall's band on its near side, and each
    of its holes too large by the band on the hole's far wall.

    Which one it is, the image cannot always tell (a wall one or two px wide looks like the
    soft contact shadow beside it). A round ring can: a drilled hole or a disc is a circle at
    its top face and at its bottom, and only the right choice maps the ring to a circle (the
    other one moves the wall-facing half by the wall's width). Each ring whose wall is at least
    :data:`WALL_SIDE_MIN_PX` wide is mapped both ways and fitted with a circle
    (:func:`~scanmass.section.fit_circle`); it votes for the way that fits within
    :data:`ROUND_RMS_PX` and :data:`ROUND_RATIO` times better than the other. A part with a
    vote for the top face's edge and none against is taken as seen on its top face's edge all
    round (the same material in the same light: its outer wall like its holes' walls).

    Parameters
    ----------
    shape : (int, int)
        The image's (rows, columns).
    scale, result, thickness_mm
        The photo's scale, its measurement with the thickness given, and the thickness.

    Returns
    -------
    (mask or None, labels)
        A boolean mask in photo pixels covering those parts with a margin (for
        :meth:`~scanmass.scale.homography.ElevationHook.with_top_seen`), and their labels.
    """
    hook = scale.plane_map.undistort
    if not thickness_mm or not isinstance(hook, ElevationHook) or not result.parts:
        return None, []
    mm_per_px = scale.plane_map.mm_per_px
    to_foot_mm = hook.footprint_mm
    mask: np.ndarray | None = None
    labels: list[int] = []
    for part in result.parts:
        if part.outline_mm is None or any(h.outline_mm is None for h in part.holes):
            continue
        rings = [np.asarray(part.outline_mm, float)] + [np.asarray(h.outline_mm, float) for h in part.holes]
        votes: set[str] = set()
        widest = 0.0
        for k, ring in enumerate(rings):
            if (signed_area(ring) > 0) != (k == 0):
                ring = ring[::-1]  # outer counter-clockwise, holes clockwise: normals point away from material
            foot = apply_h(to_foot_mm, ring)
            lean = np.sum(vertex_normals(ring) * (ring - foot), axis=1)
            wall = lean < 0  # the wall faces the camera here
            if np.count_nonzero(wall) < 8:
                continue
            width_px = float(np.median(-lean[wall])) / mm_per_px
            widest = max(widest, float(np.max(-lean[wall])) / mm_per_px)
            if width_px < WALL_SIDE_MIN_PX:
                continue
            top = np.where(wall[:, None], foot, ring)
            try:
                as_bottom, as_top = fit_circle(ring), fit_circle(top)
            except OptionError:
                continue
            limit = ROUND_RMS_PX * mm_per_px
            if as_top.diameter_mm < ROUND_MIN_DIAMETER_PX * mm_per_px:
                continue
            if as_top.rms_mm <= limit and as_top.rms_mm < ROUND_RATIO * as_bottom.rms_mm:
                votes.add("top")
            elif as_bottom.rms_mm <= limit and as_bottom.rms_mm < ROUND_RATIO * as_top.rms_mm:
                votes.add("bottom")
        if votes != {"top"}:
            continue
        if mask is None:
            mask = np.zeros(shape, np.uint8)
        one = np.zeros(shape, np.uint8)
        cv2.fillPoly(one, [np.round(hook.photo_px(apply_h(hook.g0, rings[0]))).astype(np.int32)], 1)
        grow = 2 * int(math.ceil(widest)) + 9
        mask |= cv2.dilate(one, cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (grow, grow)))
        labels.append(part.label)
    return (None if mask is None else mask.astype(bool)), labels


def with_top_seen(plane_map: PlaneMap, mask: np.ndarray) -> PlaneMap:
    """A copy of a raised part's plane map whose hooks (main and samples) take ``mask`` as seen on the top edge."""
    hook = plane_map.undistort
    if not isinstance(hook, ElevationHook):
        return plane_map
    samples = tuple(
        replace(s, correction=s.correction.with_top_seen(mask)) if isinstance(s.correction, ElevationHook) else s
        for s in plane_map.samples
    )
    return replace(plane_map, undistort=hook.with_top_seen(mask), samples=samples)
