"""A hole's rim at the top face traced in colour, where the face's tint differs from what the hole shows.

Under two lights of different colour (a warm key and a cool fill) a hole through a thick part shows,
inside its top rim, the paper: lit by both lights on its floor, and in each wall's shade lit by the
other light alone, so the shade keeps a light's tint (the paper's chroma under that light). A brushed
metal face mirrors the room and has a tint of its own. In the grey level the shaded stretch of floor
may look like the face, and the hole is found too small; in chroma the whole opening (floor and shade
both) differs from the face, and the face's tint stops at the rim. This module traces that border: rays
from the found hole's centre, crossing the midpoint between the face's chroma and the hole's, projected
onto the line between the two (a one-dimensional level, as :mod:`scanmass.segment.deephole` traces a
grey level). The pipeline maps the points onto the top face's plane and fits a circle.
Part of the segment stage (:mod:`scanmass.segment`).
"""

from __future__ import annotations

import math

import cv2
import numpy as np

from scanmass.numeric import robust_sigma
from scanmass.segment.deephole import RAY_STEP_PX, RAYS, PitEdge

#: Gaussian smoothing (px) of the chroma planes: a JPEG keeps chroma at half the resolution
#: (4:2:0 subsampling, common practice) and a path tracer's speckle is strongest in it.
CHROMA_SMOOTH_PX = 1.0
#: The face's tint is read in a ring this far (px) beyond the farthest the rim may lie, this wide (px).
FACE_RING_GAP_PX = 2.0
#: See :data:`FACE_RING_GAP_PX`.
FACE_RING_WIDTH_PX = 5.0
#: The hole's chroma must differ from the face's by at least this many of the face's own scatter
#: (robust sigma, after smoothing, along the line between the two) for the border to be traced: a
#: separation of 4 sigma leaves a ray's midpoint crossing within the face's noise about once in 40
#: rays (normal tails, common practice).
MIN_SEPARATION = 4.0
#: Largest ratio between the face's level (linear light) and the hole's core's, either way up: a tint ratio
#: leans towards the brighter side of a blurred border (synthetic discs, tests/test_reallight_mixholes.py:
#: +0.12 / -0.18 px at 3.5 times), so beyond this the border is left to the grey level, which tells such a
#: face from the hole by itself.
MAX_LEVEL_RATIO = 3.0
#: A ray's crossing counts where the projected chroma stays below the midpoint for this far (px)
#: beyond it (the face's tint holds outside the rim).
HOLD_PX = 2.0


def _chroma(colour: np.ndarray, lut: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Chroma of encoded B, G, R codes: the ratios (R - B) / S and (2 G - R - B) / S of the linear light
    (S = R + G + B), smoothed (a tint at any brightness), and S."""
    lin = lut[colour].astype(np.float32)
    s = lin.sum(axis=-1)
    ratio = np.stack([lin[..., 2] - lin[..., 0], 2 * lin[..., 1] - lin[..., 2] - lin[..., 0]], axis=-1)
    ratio /= np.maximum(s, 1e-4)[..., None]
    return np.asarray(cv2.GaussianBlur(ratio, (0, 0), CHROMA_SMOOTH_PX)), s


def _levels(
    chroma: np.ndarray, total: np.ndarray, part_mask: np.ndarray, seed: np.ndarray, reach_px: float
) -> tuple[np.ndarray, float, float, float, float, float] | None:
    """The level along the line from the face's tint to the seed's core's: (level image, separation, the
    face's scatter, centre x, centre y, the seed's equal-area radius); None without enough face or core, or
    where their levels differ by more than :data:`MAX_LEVEL_RATIO`."""
    n_seed = int(np.count_nonzero(seed))
    if n_seed < 5:
        return None
    ys, xs = np.nonzero(seed)
    cx, cy = float(xs.mean()), float(ys.mean())
    r_seed = math.sqrt(n_seed / math.pi)
    h, w = part_mask.shape
    yy, xx = np.mgrid[0:h, 0:w]
    dist = np.hypot(xx - cx, yy - cy)
    outer = r_seed + reach_px + FACE_RING_GAP_PX
    face = part_mask & ~seed & (dist > outer) & (dist <= outer + FACE_RING_WIDTH_PX)
    core = seed & (dist <= max(0.7 * r_seed, 1.0))
    if np.count_nonzero(face) < 30 or np.count_nonzero(core) < 3:
        return None
    lit = float(np.median(total[face])), float(np.median(total[core]))
    if max(lit) > MAX_LEVEL_RATIO * max(min(lit), 1e-6):
        return None
    face_c = np.median(chroma[face], axis=0)
    step = np.median(chroma[core], axis=0) - face_c
    sep = float(np.hypot(*step))
    if sep <= 0:
        return None
    level = (chroma - face_c) @ (step / sep)  # 0 on the face, sep in the hole
    scatter = robust_sigma(level[face])
    return level, sep, max(scatter, 1e-6), cx, cy, r_seed


def tint_rim(
    colour: np.ndarray, lut: np.ndarray, part_mask: np.ndarray, seed: np.ndarray, reach_px: float, *, rays: int = RAYS
) -> PitEdge | None:
    """Trace a hole's rim at the top face by the face's tint, outwards from the found hole ``seed``.

    Parameters
    ----------
    colour : (H, W, 3) ndarray
        The crop's encoded B, G, R codes.
    lut : ndarray
        Code to linear light.
    part_mask : (H, W) bool ndarray
        The part's pixels (its found holes cleared).
    seed : (H, W) bool ndarray
        The found hole's pixels (the floor seen like paper).
    reach_px : float
        How far beyond the seed's equal-area radius the rim may lie (px): the far wall's band and
        the shade's width.

    Returns
    -------
    PitEdge or None
        The crossings (crop px), their edge widths (between the 30 % and 70 % levels), the face's and
        the hole's projected levels (0 and the separation) and the share of rays with a crossing. None
        where the hole's chroma is not told from the face's (:data:`MIN_SEPARATION`), their levels differ by
        more than :data:`MAX_LEVEL_RATIO` or nothing is traced.
    """
    got = _levels(*_chroma(colour, lut), part_mask, seed, reach_px)
    if got is None:
        return None
    level, sep, scatter, cx, cy, r_seed = got
    if sep < MIN_SEPARATION * scatter:
        return None
    radii = np.arange(0.0, r_seed + reach_px + FACE_RING_GAP_PX, RAY_STEP_PX, dtype=np.float32)
    angles = np.linspace(0.0, 2 * math.pi, rays, endpoint=False)
    map_x = (cx + np.cos(angles)[:, None] * radii[None, :]).astype(np.float32)
    map_y = (cy + np.sin(angles)[:, None] * radii[None, :]).astype(np.float32)
    prof = cv2.remap(level.astype(np.float32), map_x, map_y, cv2.INTER_LINEAR, borderMode=cv2.BORDER_REPLICATE)
    on_part = cv2.remap((part_mask | seed).astype(np.float32), map_x, map_y, cv2.INTER_NEAREST, borderValue=0.0) > 0.5
    hold = int(round(HOLD_PX / RAY_STEP_PX))
    start = int(0.5 * r_seed / RAY_STEP_PX)
    pts, spread = [], []
    for k in range(rays):
        p = prof[k]
        low = p < 0.5 * sep
        # the first stretch beyond the seed's middle where the level stays below the midpoint for HOLD_PX
        run = np.convolve(low[start:].astype(np.int32), np.ones(hold, np.int32), mode="valid")
        full = np.flatnonzero(run == hold)
        if len(full) == 0:
            continue
        i = start + int(full[0])
        if i < 1 or i + 2 * hold >= len(p) or not on_part[k, i : i + 2 * hold].all():
            continue  # no crossing, or it leaves the part (the outline, not a rim)
        # the levels on either side of this border, read on the ray itself: the hole's just inside (a wall's
        # shade may keep more of a light's tint than the floor) and the face's just outside; the border is
        # their midpoint's crossing
        inner = float(p[max(i - 2 * hold, 0) : i].max())
        outer_level = float(np.median(p[i + hold : i + 2 * hold]))
        step_k = inner - outer_level
        if step_k < 0.5 * sep:
            continue
        mid = outer_level + 0.5 * step_k
        base = max(i - 2 * hold, 0)
        seg = p[base : i + hold]
        down = np.flatnonzero((seg[:-1] >= mid) & (seg[1:] < mid))
        if len(down) == 0:
            continue
        j = base + int(down[-1])
        lo, hi = float(p[j + 1]), float(p[j])
        r_mid = radii[j] + RAY_STEP_PX * (hi - mid) / max(hi - lo, 1e-12)
        # the edge's width: where the level crosses 70 % and 30 % of the local step nearest this crossing
        c70 = np.flatnonzero((seg[:-1] >= outer_level + 0.7 * step_k) & (seg[1:] < outer_level + 0.7 * step_k))
        c30 = np.flatnonzero((seg[:-1] >= outer_level + 0.3 * step_k) & (seg[1:] < outer_level + 0.3 * step_k))
        width = abs(float(radii[base + c30[-1]] - radii[base + c70[-1]])) if len(c70) and len(c30) else 4 * HOLD_PX
        pts.append((cx + math.cos(angles[k]) * r_mid, cy + math.sin(angles[k]) * r_mid))
        spread.append(width)
    if len(pts) < 12:
        return None
    return PitEdge(
        points_px=np.asarray(pts, float),
        spread_px=np.asarray(spread, float),
        face_level=0.0,
        pit_level=sep,
        share=len(pts) / rays,
    )
