"""A deep through-hole's edge at the top face, where the hole shows dark rather than like paper.

A hole through a thick part, seen from above, shows its far wall and whatever of its floor (the
paper) the near wall leaves in view, both shaded by the walls: the whole opening looks darker
than the part's top face, not like the paper. The opening's border in the photo is the hole's
edge at the top face all round (the near wall hides itself). This module traces that border
(rays from the dark pit's centre, crossing the midpoint between the pit's level and the face's);
the pipeline maps it onto the top face's plane, where a drilled hole is a circle.
Part of the segment stage (:mod:`scanmass.segment`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import cv2
import numpy as np

from scanmass.segment.contours import level_rings

#: Number of rays cast from a pit's centre to trace its border.
RAYS = 180
#: Step (px) along a ray.
RAY_STEP_PX = 0.25
#: Gaussian smoothing (px, after a 3x3 median) against the renderer's and the sensor's speckle in the pit.
SMOOTH_PX = 0.7
#: A ray's crossing is looked for within this distance (px) of the filled dark region's border.
NEAR_PX = 2.5
#: A crossing followed (within twice :data:`NEAR_PX`) by a level this share of the pit-to-face step
#: above the face is the dark region's border with a lit floor or wall inside the opening, not its
#: border with the face: the ray is left out.
BRIGHT_SHARE = 1.0
#: Rays within this angle (degrees) of a lit stretch are left out too.
LIT_MARGIN_DEG = 20.0


@dataclass(frozen=True)
class PitEdge:
    """The traced border of a dark pit (crop px).

    Attributes
    ----------
    points_px : (N, 2) ndarray
        Where each ray crosses the midpoint level (x, y, crop px); rays that found no
        crossing are left out.
    spread_px : (N,) ndarray
        Per point: the distance between the crossings of the levels at 30 % and at 70 % of the
        step from the pit to the face (the edge's width: how far a wrong level would move it).
    face_level, pit_level : float
        The face's and the pit's levels (linear light).
    share : float
        Share of the rays that found a crossing with the face.
    lit_share : float
        Share of the rays whose crossing leads to a lit floor or wall inside the opening (:func:`pit_edge`).
    """

    points_px: np.ndarray
    spread_px: np.ndarray
    face_level: float
    pit_level: float
    share: float
    lit_share: float = 0.0


def _crossing_near(profile: np.ndarray, level: float, at: int) -> float:
    """The upward crossing of ``level`` in ``profile`` (fractional index) nearest to index ``at``; NaN if none."""
    below = profile[:-1] < level
    up = np.flatnonzero(below & (profile[1:] >= level))
    if len(up) == 0:
        return math.nan
    i = int(up[np.argmin(np.abs(up + 0.5 - at))])
    lo, hi = float(profile[i]), float(profile[i + 1])
    return i + (level - lo) / max(hi - lo, 1e-12)


def _dark_region(img: np.ndarray, part_mask: np.ndarray, seed: np.ndarray, level: float) -> np.ndarray | None:
    """The region below ``level`` within the part that holds most of ``seed``, its specks filled."""
    dark = ((img < level) & part_mask).astype(np.uint8)
    count, labels = cv2.connectedComponents(dark, connectivity=8)
    hit = labels[seed & (dark > 0)]
    hit = hit[hit > 0]
    if count < 2 or hit.size == 0:
        return None
    own = (labels == np.bincount(hit).argmax()).astype(np.uint8)
    h, w = img.shape
    filled = np.zeros((h + 2, w + 2), np.uint8)
    filled[1:-1, 1:-1] = own
    cv2.floodFill(filled, None, (0, 0), 2)
    return np.asarray(filled[1:-1, 1:-1] != 2)


def _rays(
    img: np.ndarray, region: np.ndarray, radius: float, cx: float, cy: float, rays: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Profiles along ``rays`` rays from ``(cx, cy)`` out to ``radius`` + two near bands + 1 px.

    Returns the radii, the angles, the image sampled along each ray (one row per ray,
    bilinear) and whether each sample lies in ``region`` (nearest pixel).
    """
    reach = radius + 2 * NEAR_PX + 1.0
    radii = np.arange(0.0, reach, RAY_STEP_PX, dtype=np.float32)
    angles = np.linspace(0.0, 2 * math.pi, rays, endpoint=False)
    map_x = (cx + np.cos(angles)[:, None] * radii[None, :]).astype(np.float32)
    map_y = (cy + np.sin(angles)[:, None] * radii[None, :]).astype(np.float32)
    profiles = cv2.remap(img, map_x, map_y, cv2.INTER_LINEAR, borderMode=cv2.BORDER_REPLICATE)
    inside = cv2.remap(region.astype(np.float32), map_x, map_y, cv2.INTER_NEAREST, borderValue=0.0) > 0.5
    return radii, angles, profiles, inside


def pit_edge(
    lin: np.ndarray,
    part_mask: np.ndarray,
    centre_px: tuple[float, float],
    diameter_px: float,
    *,
    rays: int = RAYS,
) -> PitEdge | None:
    """Trace the border of a dark pit inside a part by rays from its centre.

    The levels: the pit's, the median within half its radius of its centre; the face's, the
    median of the part's pixels 3 to 8 px outside the pit's equal-area circle, then (once the
    dark region around the pit at the midpoint level is known: the pit as found can be a small
    core of the opening) 3 to 8 px outside that region. On each ray
    (3x3 median-filtered image, bilinear samples every :data:`RAY_STEP_PX`) the border is the
    crossing of the midpoint level (the edge of a blurred step in linear light) nearest to the
    border of the dark region (at the midpoint level, within the part, specks filled) around
    the centre. A ray whose crossing leads to something clearly brighter than the face (a lit
    floor or wall seen through the opening, :data:`BRIGHT_SHARE`) is left out.

    Parameters
    ----------
    lin : (H, W) ndarray
        The crop's linear light.
    part_mask : (H, W) bool ndarray
        The part's pixels (found holes cleared).
    centre_px, diameter_px
        The pit's centre (crop px) and equal-area diameter (:func:`~scanmass.segment.shadow.dark_pits`).

    Returns
    -------
    PitEdge or None
        None when the face around the pit is not brighter than the pit.

    Examples
    --------
    >>> yy, xx = np.mgrid[0:80, 0:80]
    >>> lin = np.where(np.hypot(xx - 40.0, yy - 40.0) < 12.0, 0.005, 0.05).astype(np.float32)
    >>> e = pit_edge(lin, np.ones((80, 80), bool), (40.0, 40.0), 24.0)
    >>> r = np.hypot(e.points_px[:, 0] - 40.0, e.points_px[:, 1] - 40.0)
    >>> bool(abs(np.median(r) - 12.0) < 0.6), e.share
    (True, 1.0)
    """
    img = cv2.GaussianBlur(cv2.medianBlur(np.ascontiguousarray(lin, dtype=np.float32), 3), (0, 0), SMOOTH_PX)
    h, w = img.shape
    cx, cy = centre_px
    r_pit = 0.5 * diameter_px
    yy, xx = np.mgrid[0:h, 0:w]
    dist = np.hypot(xx - cx, yy - cy)
    inner = dist < 0.5 * r_pit
    ring = part_mask & (dist > r_pit + 3.0) & (dist < r_pit + 8.0)
    if np.count_nonzero(inner) < 3:
        return None
    pit_level = float(np.median(img[inner]))
    region = None
    for _ in range(2):  # the face's level beside the pit as found, then beside the dark region it leads to
        if np.count_nonzero(ring) < 20:
            return None
        face_level = float(np.median(img[ring]))
        if face_level <= 1.5 * pit_level:
            return None
        region = _dark_region(img, part_mask, inner, pit_level + 0.5 * (face_level - pit_level))
        if region is None:
            return None
        away = cv2.distanceTransform((~region).astype(np.uint8), cv2.DIST_L2, 3)
        ring = part_mask & (away > 3.0) & (away < 8.0)
    step = face_level - pit_level
    if region is None:
        return None
    radii, angles, profiles, inside = _rays(img, region, float(dist[region].max()), cx, cy, rays)
    near = int(NEAR_PX / RAY_STEP_PX)
    pts, spread, index = [], [], []
    lit = np.zeros(rays, bool)
    for k in range(rays):
        out = np.flatnonzero(~inside[k])
        if len(out) == 0 or out[0] == 0:
            continue
        edge = int(out[0])  # the filled region's border on this ray
        if not (edge + near < len(radii)):
            continue
        lo_i, hi_i = max(edge - near, 1), edge + near
        seg = profiles[k, lo_i - 1 : hi_i + 1]
        levels = [_crossing_near(seg, pit_level + f * step, edge - lo_i + 1) for f in (0.5, 0.3, 0.7)]
        if not math.isfinite(levels[0]):
            continue
        r = (lo_i - 1 + levels[0]) * RAY_STEP_PX
        at = int(r / RAY_STEP_PX)
        beyond = profiles[k, at : at + 2 * near + 1]
        if beyond.size and float(beyond.max()) > face_level + BRIGHT_SHARE * step:
            # the dark region ends at something brighter than the face: a lit floor or wall inside the hole
            lit[k] = True
        index.append(k)
        pts.append((cx + math.cos(angles[k]) * r, cy + math.sin(angles[k]) * r))
        lo, hi = levels[1], levels[2]
        spread.append(abs(hi - lo) * RAY_STEP_PX if math.isfinite(lo) and math.isfinite(hi) else 2.0 * NEAR_PX)
    # the rays beside a lit stretch see its soft end: left out as well
    span = int(math.ceil(LIT_MARGIN_DEG / 360.0 * rays))
    near_lit = np.convolve(np.r_[lit[-span:], lit, lit[:span]].astype(float), np.ones(2 * span + 1), "valid") > 0
    good = [i for i, k in enumerate(index) if not near_lit[k]]
    if not good:
        return None
    return PitEdge(
        np.asarray(pts, float)[good],
        np.asarray(spread, float)[good],
        face_level,
        pit_level,
        len(good) / rays,
        float(np.count_nonzero(lit)) / rays,
    )


#: A level within this factor of the face's (either way) is taken as the face's when tracing an opening.
FACE_BAND = 1.6
#: The widest gap (px) between a deep hole's lit floor and the wall's shade on it that :func:`opening_edge`
#: bridges (``shade_below``): a broad light (a window) gives the shade a soft edge, a penumbra that passes
#: the face's level between the two, and the segmentation finds only the lit floor's core. On tests/data/reallight
#: dev-window-steel5-t14's 11 mm hole (the only case looked at) bridges of 3-6 px joined nothing, 8 px joined the
#: shade (the fit 11.31 mm, rms 0.11 px) and 10 px as well (11.19 mm, 0.35 px; truth 11.0): taken at 10 px.
SHADE_BRIDGE_PX = 10.0


def _last_step(rising: np.ndarray, top: float, min_rise: float) -> tuple[float, float]:
    """The last step of a profile that rises to the face's level: (its place, fractional index; the level below it).

    ``rising`` is signed so that the step to the face (level ``top``) rises. The step's place is
    the outermost peak of the slope that rises from a plateau at least ``min_rise`` below
    ``top`` (refined by a parabola through the peak and its neighbours): a blurred step is
    steepest at its edge, whatever its height, so a wall's band between the floor and the face
    is not skipped for the floor's larger step behind it, and the face's own grain (smaller
    rises) is no step. The level below it: walking inwards from the peak, where the slope stops
    falling (the band's plateau), or the profile's first sample.

    Examples
    --------
    >>> steps = np.r_[np.full(8, -8.0), np.full(12, -2.5), np.full(10, -1.0)]  # floor, wall, face
    >>> at, below = _last_step(np.convolve(steps, np.ones(3) / 3, "same")[1:-1], -1.0, 0.6)
    >>> round(at, 2), round(below, 2)
    (18.5, -2.5)
    """
    slope = np.gradient(np.asarray(rising, float))
    for i in range(len(slope) - 2, 0, -1):
        if not (slope[i] > 0 and slope[i] >= slope[i - 1] and slope[i] > slope[i + 1]):
            continue
        j = i
        while j > 0 and slope[j - 1] < slope[j]:
            j -= 1
        below = float(rising[j])
        if top - below < min_rise:
            continue  # the face's grain, no step to it
        a, b, c = float(slope[i - 1]), float(slope[i]), float(slope[i + 1])
        curve = a - 2 * b + c
        return i + (0.5 * (a - c) / curve if curve < 0 else 0.0), below
    return math.nan, math.nan


def _shade_bridged(own: np.ndarray, dark: np.ndarray, solid: np.ndarray, within: np.ndarray) -> np.ndarray:
    """``own`` (uint8 0/1, the opening as found) with the dark regions within :data:`SHADE_BRIDGE_PX` of it, and the gap between.

    A dark region joins when it lies clear (more than 1.5 px) of the edge of ``solid`` (the part with the
    opening: a shade that reaches the outline is the part's cast shadow, not the floor of a hole) and of the
    edge of ``within`` (the reach of the opening: a darker sector of the face runs on beyond it).
    """
    inner = (cv2.distanceTransform(solid.astype(np.uint8), cv2.DIST_L2, 3) > 1.5) & (
        cv2.distanceTransform(within.astype(np.uint8), cv2.DIST_L2, 3) > 1.5
    )
    dark = dark & within
    count, labels = cv2.connectedComponents((dark & ~own.astype(bool)).astype(np.uint8), connectivity=8)
    if count < 2:
        return own
    k = max(int(math.ceil(SHADE_BRIDGE_PX)), 1)
    disk = cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (2 * k + 1, 2 * k + 1))
    reach = cv2.dilate(own, disk).astype(bool)
    touch = np.unique(labels[reach & (labels > 0)])
    if touch.size == 0:
        return own
    clear = np.ones(count, bool)
    clear[np.unique(labels[(labels > 0) & ~inner])] = False  # the components that reach the part's edge
    join = touch[clear[touch]]
    if join.size == 0:
        return own
    union = (own.astype(bool) | np.isin(labels, join)).astype(np.uint8)
    # the penumbra between the lit floor and its shade (at the face's level) closed over
    return np.asarray(cv2.morphologyEx(union, cv2.MORPH_CLOSE, disk), np.uint8)


def opening_edge(
    lin: np.ndarray,
    part_mask: np.ndarray,
    seed: np.ndarray,
    reach_px: float,
    *,
    rays: int = RAYS,
    last_step: bool = False,
    shade_below: float = 0.0,
    lit_reach_px: float = math.inf,
) -> PitEdge | None:
    """Trace the border of a hole's whole opening, from the part of it already found (``seed``).

    A hole in a thick part seen at an angle shows, inside its opening at the top face, the
    paper (lit, or in the wall's shade) and its far wall (lit or shaded): the segmentation
    finds the part of it that looks like the paper, and the rest looks like neither the paper
    nor the face. The opening is the region around ``seed`` whose level is not the face's
    (outside :data:`FACE_BAND` of it), within ``reach_px`` of the seed's centre and its specks
    filled; on each ray from the seed's centre, the border is the crossing, nearest to where
    the ray leaves that region, of the midpoint between the face's level and the level just
    inside (up from a shaded stretch, down from a lit one).

    Parameters
    ----------
    lin : (H, W) ndarray
        The crop's linear light.
    part_mask : (H, W) bool ndarray
        The part's pixels (its found holes cleared).
    seed : (H, W) bool ndarray
        The found part of the opening (a found hole's pixels).
    reach_px : float
        How far from the seed's centre the opening may reach.
    last_step : bool
        Place the border on each ray at the last step to the face's level (:func:`_last_step`)
        instead of the midpoint between the face and the extreme level just inside: where a
        wall's band of its own level (lit less than the floor, more than the face) lies between
        the floor and the face, the midpoint falls inside the band, away from the border, and
        the ray finds no crossing near it.
    shade_below : float
        Where above 0, only what is darker than this counts as the opening's shaded side, and dark
        regions near the seed are joined across the penumbra (:func:`_shade_bridged`).
    lit_reach_px : float
        What is brighter than the face counts as the opening only within this distance (px) of the
        seed: a lit floor's far wall lies beside the floor, while a brushed face's lit sector beyond
        the rim would lead the opening over the face.

    Returns
    -------
    PitEdge or None
        ``pit_level`` is the median level inside the opening; ``share`` the share of rays with
        a crossing. None without a face around the seed.

    Examples
    --------
    >>> yy, xx = np.mgrid[0:80, 0:80]
    >>> r = np.hypot(xx - 40.0, yy - 40.0)
    >>> lin = np.where(r < 12.0, np.where(xx < 40, 0.5, 0.004), 0.05).astype(np.float32)  # lit half, shaded half
    >>> e = opening_edge(lin, r >= 12.0, (r < 12.0) & (xx < 38), 20.0)
    >>> rr = np.hypot(e.points_px[:, 0] - 40.0, e.points_px[:, 1] - 40.0)
    >>> bool(abs(np.median(rr) - 12.0) < 0.6), e.share > 0.9
    (True, True)
    """
    img = cv2.GaussianBlur(cv2.medianBlur(np.ascontiguousarray(lin, dtype=np.float32), 3), (0, 0), SMOOTH_PX)
    h, w = img.shape
    if np.count_nonzero(seed) < 3:
        return None
    ys, xs = np.nonzero(seed)
    cx, cy = float(xs.mean()), float(ys.mean())
    yy, xx = np.mgrid[0:h, 0:w]
    dist = np.hypot(xx - cx, yy - cy)
    away = cv2.distanceTransform((~seed).astype(np.uint8), cv2.DIST_L2, 3)
    ring = part_mask & (away > 3.0) & (away < 8.0)
    lit_near = away <= lit_reach_px
    region: np.ndarray = seed
    face_level = math.nan
    for _ in range(2):  # the face beside the seed, then beside the opening it leads to
        if np.count_nonzero(ring) < 20:
            return None
        face_level = float(np.median(img[ring]))
        if face_level <= 0:
            return None
        # with ``shade_below`` only what is darker than a pit counts as the shaded side (a brushed face's dark
        # sector lies between that and the face's band)
        dark_below = shade_below if shade_below > 0 else face_level / FACE_BAND
        other = ((img < dark_below) | ((img > face_level * FACE_BAND) & lit_near)) & (dist < reach_px)
        # closed: where a lit stretch meets a shaded one, the blurred step between them passes the
        # face's level along a line a pixel wide, which must not cut the opening in two
        joined = cv2.morphologyEx((other | seed).astype(np.uint8), cv2.MORPH_CLOSE, np.ones((3, 3), np.uint8))
        count, labels = cv2.connectedComponents(joined, connectivity=8)
        hit = labels[seed]
        hit = hit[hit > 0]
        if count < 2 or hit.size == 0:
            return None
        own = np.zeros((h + 2, w + 2), np.uint8)
        own[1:-1, 1:-1] = labels == np.bincount(hit).argmax()
        if shade_below > 0:
            own[1:-1, 1:-1] = _shade_bridged(own[1:-1, 1:-1], img < shade_below, part_mask | seed, dist < reach_px)
        cv2.floodFill(own, None, (0, 0), 2)
        region = own[1:-1, 1:-1] != 2
        away = cv2.distanceTransform((~region).astype(np.uint8), cv2.DIST_L2, 3)
        ring = part_mask & (away > 3.0) & (away < 8.0)
    if shade_below > 0:  # the rays from the whole opening's centre: the seed may be a lit crescent at its side
        ys, xs = np.nonzero(region)
        cx, cy = float(xs.mean()), float(ys.mean())
        dist = np.hypot(xx - cx, yy - cy)
    radii, angles, profiles, inside = _rays(img, region, float(dist[region].max()), cx, cy, rays)
    near = int(NEAR_PX / RAY_STEP_PX)
    pts, spread = [], []
    for k in range(rays):
        out = np.flatnonzero(~inside[k])
        if len(out) == 0 or out[0] < near:
            continue
        edge = int(out[0])
        if edge + near >= len(radii):
            continue
        # the level just inside: the stretch (twice NEAR_PX long: a blurred step's half width and
        # more) of the last samples before the
        # ray's exit that lie outside the face's band, at its extreme (a blurred step's plateau)
        prof = profiles[k]
        j0 = edge - 1
        while j0 > 0 and face_level / FACE_BAND <= prof[j0] <= face_level * FACE_BAND:
            j0 -= 1
        plateau = prof[max(j0 - 2 * near, 0) : j0 + 1]
        sign = 1.0 if prof[j0] < face_level else -1.0  # up from a shade, down from a lit stretch
        before = float(plateau.min() if sign > 0 else plateau.max())
        lo_i, hi_i = max(edge - near, 1) - 1, edge + near
        seg = sign * profiles[k, lo_i : hi_i + 1]
        levels = [
            _crossing_near(seg, sign * (before + f * (face_level - before)), edge - lo_i) for f in (0.5, 0.3, 0.7)
        ]
        if last_step:
            # the border is the step from the band just inside to the face (:func:`_last_step`)
            lo_i = max(j0 - 2 * near, 1)
            seg = sign * profiles[k, lo_i : hi_i + 1]
            rise = face_level * (1.0 - 1.0 / FACE_BAND) if sign > 0 else face_level * (FACE_BAND - 1.0)
            at, below = _last_step(seg, sign * face_level, rise)
            if not math.isfinite(at):
                continue
            top = sign * face_level
            levels = [at] + [_crossing_near(seg, below + f * (top - below), int(at)) for f in (0.3, 0.7)]
        elif not math.isfinite(levels[0]):
            continue
        r = (lo_i + levels[0]) * RAY_STEP_PX
        pts.append((cx + math.cos(angles[k]) * r, cy + math.sin(angles[k]) * r))
        lo, hi = levels[1], levels[2]
        spread.append(abs(hi - lo) * RAY_STEP_PX if math.isfinite(lo) and math.isfinite(hi) else 2.0 * NEAR_PX)
    if not pts:
        return None
    pit_level = float(np.median(img[region]))
    return PitEdge(np.asarray(pts, float), np.asarray(spread, float), face_level, pit_level, len(pts) / rays)


#: The lit floor's level inside a found hole: this percentile of the (smoothed) levels within it; its
#: border is traced where the level passes half-way between it and the face's.
FLOOR_PERCENTILE = 75.0


def lit_floor_ring(lin: np.ndarray, part_mask: np.ndarray, seed: np.ndarray, band_px: float) -> np.ndarray | None:
    """The border (crop px, x y) of the lit floor seen through a deep hole, to a fraction of a pixel.

    The floor's level is the :data:`FLOOR_PERCENTILE` of the smoothed image (as :func:`pit_edge`)
    within ``seed`` (the found hole); the face's, the median of the part's pixels between 4 and
    12 px beyond the seed's equal-area radius plus ``band_px`` (the far wall's width as seen). The
    border is the level line half-way between the two (marching squares,
    :func:`~scanmass.segment.contours.level_rings`), the smallest closed one around the seed's
    centre. None when there is no such line or the floor is not brighter than the face.

    Examples
    --------
    >>> yy, xx = np.mgrid[0:80, 0:80]
    >>> lit = np.hypot(xx - 40.0, yy - 40.0) < 10.0
    >>> ring = lit_floor_ring(np.where(lit, 0.5, 0.03).astype(np.float32), ~lit, lit, 2.0)
    >>> r = np.hypot(ring[:, 0] - 40.0, ring[:, 1] - 40.0)
    >>> bool(abs(np.median(r) - 10.0) < 0.6)
    True
    """
    if np.count_nonzero(seed) < 3:
        return None
    img = cv2.GaussianBlur(cv2.medianBlur(np.ascontiguousarray(lin, dtype=np.float32), 3), (0, 0), SMOOTH_PX)
    ys, xs = np.nonzero(seed)
    cx, cy = float(xs.mean()), float(ys.mean())
    r_seed = math.sqrt(len(xs) / math.pi)
    h, w = img.shape
    yy, xx = np.mgrid[0:h, 0:w]
    dist = np.hypot(xx - cx, yy - cy)
    ring = part_mask & (dist > r_seed + band_px + 4.0) & (dist < r_seed + band_px + 12.0)
    if np.count_nonzero(ring) < 20:
        return None
    face = float(np.median(img[ring]))
    floor = float(np.percentile(img[seed], FLOOR_PERCENTILE))
    if floor <= 2.0 * face:
        return None
    best: tuple[float, np.ndarray] | None = None
    for c in level_rings(img, face + 0.5 * (floor - face)):
        if len(c) < 8 or not np.allclose(c[0], c[-1]):
            continue
        pts = np.ascontiguousarray(c[:, ::-1], dtype=np.float32)
        if cv2.pointPolygonTest(pts, (cx, cy), False) > 0:
            area = abs(float(cv2.contourArea(pts)))
            if best is None or area < best[0]:
                best = (area, pts.astype(float))
    return None if best is None else best[1][:-1]
