"""Deep through-holes of a thick part that show dark at their top face: their openings traced and fitted with
circles on the top face's plane (near side, trimmed fit), painted as paper with exact coverage, and the photo
measured again (term ``deep_hole``); the constants that bound them.
Part of the pipeline stage (:mod:`scanmass.pipeline`).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import replace

import cv2
import numpy as np

from scanmass.errors import OptionError, ScaleError, SegmentationError
from scanmass.geometry import signed_area
from scanmass.load.decode import LoadedImage
from scanmass.measurement import Hole, Measurement, Part
from scanmass.numeric import robust_sigma
from scanmass.pipeline.part_terms import _with_extra_term, area_share_term
from scanmass.pipeline.photo_checks import HIDDEN_HOLE_MIN_AREA_MM2, _part_crop
from scanmass.pipeline.photo_walls import with_top_seen
from scanmass.raster import coverage
from scanmass.scale.camera import PhotoScale
from scanmass.scale.homography import ElevationHook, apply_h
from scanmass.scale.planemap import PlaneMap
from scanmass.section import fit_circle
from scanmass.segment.deephole import NEAR_PX, SMOOTH_PX, PitEdge, lit_floor_ring, opening_edge, pit_edge
from scanmass.segment.shadow import PIT_DEPTH, dark_pits
from scanmass.segment.tintrim import tint_rim
from scanmass.uncertainty import combine

#: Smallest share of a dark pit's rays that must meet the face (not a lit floor) for its opening to be traced.
DEEP_HOLE_MIN_SHARE = 0.3
#: Percentile of a part's interior level at which :func:`_deep_hole_circles` looks for dark pits a third
#: time (the first two: the median, on the image as it is and with its specks taken out).
DEEP_HOLE_LOW_QUANTILE = 20.0
#: Largest rms (px) of the traced opening about its circle on the top face's plane.
DEEP_HOLE_RMS_PX = 1.0
#: The stated doubt (1 sigma, px) of where a deep hole's traced opening runs, at least; a wider
#: edge (half the distance between its 30 % and 70 % crossings) counts instead. On the committed
#: renders (tests/data/reallight, thickness given; steel bracket and cam, black plastic bracket
#: and disc, brass plate and disc: 8 holes opened) the measured diameters lay -1.55 to -0.20 px
#: (-0.63 to -0.07 mm) off and the centres 0.23-1.29 px: the opening's rim catches light, or its
#: shade ends a little inside the top face's edge (on the far side, where the wall facing the
#: camera shows; since that side may only widen the fit, :func:`_top_circle`, the spot-lit black
#: holes read -0.06 to -0.04 mm). Taken at 1 px on the radius (2 px on the diameter, 1 px on each
#: coordinate of the centre).
DEEP_HOLE_EDGE_PX = 1.0
#: A found hole of a thick part is replaced by its traced opening where the opening is wider by more
#: than this (px): the found ring then ran on the paper seen through the hole, not on its top edge.
#: A narrower opening only replaces a found ring less round than :data:`DEEP_HOLE_UNROUND_PX` (the
#: largest distance from its circle) with a fit within :data:`DEEP_HOLE_CLEAN_RMS_PX`: where the
#: far wall looks like the face (black plastic), the trace stops at the wall's foot, which the found
#: ring (0.7-3.7 px out of round on the renders) already reads as the bottom edge; a lit brass wall
#: taken in with the paper makes the found ring 7-17 px out of round (tests/data/reallight; a found
#: ring whose stretches switch between the top and the bottom edge is 7-8 px out of round too, and
#: its opening then reads within 0.2 mm of it).
DEEP_HOLE_REPLACE_PX = 2.0
#: See :data:`DEEP_HOLE_REPLACE_PX` (px).
DEEP_HOLE_UNROUND_PX = 5.0
#: A found hole is not replaced by a wider opening whose traced edge is wider than this (px, the edge
#: doubt of :data:`DEEP_HOLE_EDGE_PX`) unless its fit is clean (:data:`DEEP_HOLE_CLEAN_RMS_PX`): a top
#: edge is a step within the blur, a soft ramp is a mirroring face's shading beside the hole
#: (tests/data/reallight dev-spot-steel3-t20: the 2 mm steel cam's 8 mm bore traced out to 11.3 mm along
#: its lit sector, edge 2.5 px, rms 0.58 px; the 3 mm plate's 6.5 mm holes 1.0 px, rms 0.09 px).
DEEP_HOLE_SOFT_EDGE_PX = 2.0
#: A dark pit is a brushed face's shading, not an opening, where its traced border is wider than this (px, the
#: median distance between the 30 % and 70 % crossings) and the face is less than :data:`PIT_SHALLOW_RATIO` times
#: as bright as the pit (:func:`_face_shading`). The pits fitted on the tuned renders (tests/data/reallight,
#: thickness given, 65 fits logged, 61 on a true hole): borders 0.9-1.1 px where the face is under 3.2 times the
#: pit (a small hole's dark floor: dev-window-steel3-t10 2.6 times, dev-spot-brass5-t24 2.8, window-mixed-t0),
#: and faces 3.25-8 times the pit where the border is wider (dev-window-disc8-t4, lens-spot-brass-t30,
#: spot-steel-t0: up to 5 px); the face's dark sector taken for a 9.2 mm hole on mixed-steel-t20's steel cam
#: (the part -7.0 %): 2.8 px and 2.2 times. Two other false pits (dev-window-steel4-t22, window-steel-t25) are
#: sharp or deep and stay.
PIT_SOFT_SPREAD_PX = 2.0
#: See :data:`PIT_SOFT_SPREAD_PX`.
PIT_SHALLOW_RATIO = 3.0
#: See :data:`DEEP_HOLE_REPLACE_PX` (px, rms of the opening's circle fit).
DEEP_HOLE_CLEAN_RMS_PX = 0.5
#: A found hole's opening traced with the midpoint rule on fewer than this share of its rays is traced
#: again by the last step to the face's level (:func:`~scanmass.segment.deephole.opening_edge`,
#: ``last_step``): a far wall lit less than the floor and more than the face (black plastic 6.5 mm
#: thick at 22 degrees of tilt, tests/data/reallight dev-mixed-black2-t22: 34-62 % of the rays, the
#: bores read 1.35-1.58 mm small). Where the midpoint rule finds most of the border (81-98 % on the
#: other renders' openings) it stands: there the last step also takes a floor's shaded stretch for the
#: border and reads smaller (dev-mixed-black-t15's plate: -0.45 to -1.6 mm).
DEEP_HOLE_STEP_SHARE = 0.7
#: ... and only where the far wall's band (the parallax of the part's thickness at the hole) is at least
#: this wide (px): a narrower band shows no level of its own between the blurred steps at its sides, and
#: there the last step is a lit rim's or a reflection's (tests/data/reallight: brass and steel 2-3 mm
#: thick in spot light, dev-spot-*, bands 1.0-2.9 px, holes read 0.5-2.2 mm off by the last step; black
#: plastic 1.6-3 mm, bands 1.2-3.4 px; dev-mixed-black2-t22's 6.5 mm plate 4.3-5.9 px).
DEEP_HOLE_STEP_BAND_PX = 4.0
#: ... and only where the midpoint's trace fits its circle worse than this (px rms): a trace on the rim is
#: round (brass and steel openings of tests/data/reallight lens-spot-brass-t30, dev-spot-steel4-t28 with
#: 39-69 % of the rays: 0.07-0.09 px); dev-mixed-black2-t22's bores 0.33-0.97 px. The last step's trace
#: is then taken where it is rounder, or wider by more than :data:`DEEP_HOLE_REPLACE_PX` (the midpoint
#: stopped inside the wall's band): spot-brass-t10's and lens-spot-brass-t30's plates (0.30-0.34 px, the
#: last step's 0.44 px, as wide) keep their midpoint's.
DEEP_HOLE_STEP_RMS_PX = 0.2
#: A found ring this far out of round (px, the largest distance from its circle) is replaced by a
#: clean opening's fit (:data:`DEEP_HOLE_CLEAN_RMS_PX`) that is wider by any amount: the ring lost
#: part of the opening to the shade (tests/data/reallight spot-black-t20: rings 3.3-4.8 px out of
#: round read 0.36-0.41 mm small, their openings within 0.06 mm). Round rings (soft light, black
#: plastic and steel: 0.6-1.8 px) keep the :data:`DEEP_HOLE_REPLACE_PX` rule.
DEEP_HOLE_UNROUND_WIDER_PX = 3.0

#: Said in the deep-hole warning after a hole whose opening was put together from its lit floor and the wall's shade.
PARTLY_SEEN = (
    ", partly seen: its floor lit on one side, in its wall's shade on the other, the opening traced around both"
)

#: A deep hole's lit floor (:func:`~scanmass.segment.deephole.lit_floor_ring`) is the overlap of its top
#: opening's image and its bottom opening's, shifted by the thickness's parallax (:func:`_floor_overlap`).
#: The overlap's fit is taken only where it explains the floor's border: where the traced floor's points
#: (those its trimmed fit keeps) lie within this share of the best single circle's median distance from them
#: (on the top face's plane or on the paper's) from the overlap's border ...
FLOOR_OVERLAP_GAIN = 0.5
#: ... where at least this share of the kept points lies on each of the two openings' arcs (the shift
#: seen on both sides) ...
FLOOR_ARC_SHARE = 0.25
#: ... where the traced floor covers at least this share of the overlap the fit predicts (the walls' shade takes a
#: bite of it; a fit that explains a shade's edge as an arc predicts floor where none is seen: mixed-brass-t30's
#: 6 mm brass disc, 0.45; the thick plates of dev-mixed-black5-t18, -black2-t22, -steel3-t22: 0.75-0.94) ...
FLOOR_COVER_SHARE = 0.67
#: ... and where the kept points fit within this rms (px). The far wall's band must be at least
#: :data:`DEEP_HOLE_STEP_BAND_PX` wide (a narrower shift is not told from the edges' blur).
FLOOR_OVERLAP_RMS_PX = 0.5
#: A found hole's rim traced by the face's tint (:func:`~scanmass.segment.tintrim.tint_rim`) is looked for within
#: this many times the far wall's band plus :data:`TINT_REACH_PX` beyond the found hole: the band, and a wall's
#: shade on the floor as long as the band again (a light about as high as the camera's line of sight).
TINT_REACH_BANDS = 2.0
#: See :data:`TINT_REACH_BANDS` (px: the edges' blur and the chroma's half resolution).
TINT_REACH_PX = 4.0
#: Largest rms (px) of a tint-traced rim about its circle on the top face's plane: as a grey trace's
#: (:data:`DEEP_HOLE_CLEAN_RMS_PX`). On the mixed-light steel renders (tests/data/reallight) the traced rims fit
#: within 0.14-0.37 px where they lay within 0.3 mm of the truth's top edge; dev-mixed-steel3-t22's 30 mm gasket
#: bore, its trace broken by a lit stretch, 0.68 px (-0.29 mm), and opened so it made the part's second
#: measurement fail.
TINT_CLEAN_RMS_PX = DEEP_HOLE_CLEAN_RMS_PX
#: A found hole's floor in its wall's shade is darker than the part's face by more than this many times the
#: face's own scatter (:func:`_below_face_level`): a band of 3 sigma about a level is common practice for
#: what noise alone reaches.
FACE_SHADE_Z = 3.0
#: The least arc (degrees) of a dark crescent's outer border (its convex hull's arc, :func:`_crescent_opening`)
#: taken as the rim's: a third of the round bounds a circle's radius and centre well against its own scatter.
CRESCENT_MIN_ARC_DEG = 120.0
#: The width of the bins (natural logarithm of the level: 2 %) of the histogram whose peak is a face's most
#: common level (:func:`_below_face_level`); finer than a face's scatter in a photo (5-10 %).
FACE_LOG_BIN = 0.02


def _near_side(ideal_px: np.ndarray, hook: ElevationHook, centre_top_mm: np.ndarray) -> np.ndarray:
    """Per point of a hole's traced opening (ideal px): True on the rim's side towards the camera's nadir.

    There the top face's edge hides the hole's wall below it, and the line of sight over the rim
    falls on the hole's floor: the opening's border is the top edge, against the floor. On the far
    side the wall facing the camera shows between the rim and the floor.
    """
    centre_px = apply_h(hook.gh, np.asarray(centre_top_mm, float).reshape(1, 2))[0]
    parallax = ideal_px - apply_h(hook.to_footprint, ideal_px)  # away from the nadir
    return np.asarray(np.sum((ideal_px - centre_px) * parallax, axis=1) < 0)


def _face_shading(edge: PitEdge) -> bool:
    """Whether a dark pit's traced border is a brushed face's shading rather than a hole's top edge.

    A through-hole's top edge is a step from the lit face to the hole's depth in shade: sharp (the optics'
    blur) and deep. A brushed face mirrors the room, and a darker part of it shows as a sector whose level
    falls gradually and not far: its border is soft and the pit is shallow. Both together: the median
    30-70 % width of the border above :data:`PIT_SOFT_SPREAD_PX` and the pit's level above
    1 / :data:`PIT_SHALLOW_RATIO` of the face's.
    """
    spread = float(np.median(edge.spread_px)) if len(edge.spread_px) else 0.0
    return spread > PIT_SOFT_SPREAD_PX and edge.face_level < PIT_SHALLOW_RATIO * edge.pit_level


def _top_circle(
    edge: PitEdge, origin: tuple[int, int], hook: ElevationHook, mm_per_px: float, outline: np.ndarray
) -> tuple[np.ndarray, float, float, float] | None:
    """A traced opening on the top face's plane fitted with a trimmed circle: (centre mm, diameter mm, rms px, doubt px).

    The trace is trusted on the rim's side towards the camera's nadir (:func:`_near_side`: the
    top edge against the floor). On the far side the wall facing the camera shows inside the top
    edge's circle, and where it looks like the face the trace stops short of the rim: there,
    points further inside the circle than the near side's scatter are left out (outside it they
    are kept), so a far wall in shade cannot pull the circle in.

    None when the fit fails, is not round (:data:`DEEP_HOLE_RMS_PX`) or the circle does not lie
    inside the part's ``outline`` (mm) with a margin.
    """
    if edge.share < DEEP_HOLE_MIN_SHARE or len(edge.points_px) < 12:
        return None
    photo = edge.points_px + np.asarray(origin, float)
    ideal = hook.undistort(photo) if hook.undistort is not None else photo
    top = apply_h(hook.hh, ideal)  # on the top face's plane: a drilled hole is a circle there
    keep = np.ones(len(top), bool)
    try:
        fit = fit_circle(top)
        for _ in range(3):  # a trimmed fit: a stretch of lit wall or rim is not the opening's edge
            off = np.abs(np.hypot(top[:, 0] - fit.centre_mm[0], top[:, 1] - fit.centre_mm[1]) - 0.5 * fit.diameter_mm)
            keep = off <= max(2.5 * robust_sigma(off, 0.0), 0.3 * mm_per_px)
            fit = fit_circle(top[keep])
        # On the far side the wall facing the camera lies inside the top edge's circle; where it looks
        # like the face (dark plastic in shade) the trace stops short, inside the rim, never outside it.
        # Far points more than the near side's own scatter inside the circle are left out.
        near = _near_side(ideal, hook, np.asarray(fit.centre_mm, float))
        for _ in range(3):
            res = np.hypot(top[:, 0] - fit.centre_mm[0], top[:, 1] - fit.centre_mm[1]) - 0.5 * fit.diameter_mm
            on_near = near & keep
            scatter = robust_sigma(res[on_near], 0.0) if np.count_nonzero(on_near) >= 6 else math.inf
            if not math.isfinite(scatter):
                break  # too little of the near side traced to judge the far side by
            tol = max(2.5 * scatter, 0.3 * mm_per_px)
            keep = (np.abs(res) <= tol) & (near | (res >= -max(scatter, 0.1 * mm_per_px)))
            fit = fit_circle(top[keep])
    except OptionError:
        return None
    if fit.rms_mm > DEEP_HOLE_RMS_PX * mm_per_px:
        return None
    turn = np.linspace(0, 2 * math.pi, 32, endpoint=False)
    circle = np.asarray(fit.centre_mm) + 0.5 * fit.diameter_mm * np.column_stack([np.cos(turn), np.sin(turn)])
    if min(cv2.pointPolygonTest(outline, (float(a), float(b)), True) for a, b in circle) < 2 * mm_per_px:
        return None  # not inside the part's outline with a margin: no hole of this part
    doubt_px = max(DEEP_HOLE_EDGE_PX, 0.5 * float(np.median(edge.spread_px[keep])))
    return np.asarray(fit.centre_mm, float), float(fit.diameter_mm), fit.rms_mm / mm_per_px, doubt_px


def _overlap_fit(top: np.ndarray, bottom: np.ndarray, start: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(centre x, y, radius) of the circle whose top and bottom openings' overlap best bounds the points; the kept ones.

    ``top`` and ``bottom`` are the same traced points mapped onto the top face's plane and onto the
    paper's (mm). A point on the overlap's border lies on one circle and inside the other: its
    distance from the overlap is the larger of its two distances from the circle. The fit is
    trimmed one-sidedly: the wall's shade on the floor only takes from the lit overlap, so points
    further inside it than the rest's scatter are left out (outside it, beyond 2.5 times).
    """

    from scipy.optimize import least_squares  # only for a deep hole's lit floor (scipy costs ~0.2 s to import)

    def residual(q: np.ndarray) -> np.ndarray:
        d_top = np.hypot(top[:, 0] - q[0], top[:, 1] - q[1]) - q[2]
        d_bottom = np.hypot(bottom[:, 0] - q[0], bottom[:, 1] - q[1]) - q[2]
        return np.asarray(np.maximum(d_top, d_bottom))

    q = least_squares(residual, start, loss="soft_l1", f_scale=0.05).x
    keep = np.ones(len(top), bool)
    for _ in range(4):
        res = residual(q)
        scatter = robust_sigma(res[keep], 0.0)
        keep = (np.abs(res) <= max(2.5 * scatter, 0.04)) & (res >= -max(scatter, 0.04))
        if np.count_nonzero(keep) < 8:
            break
        q = least_squares(lambda x: residual(x)[keep], q).x
    return np.asarray(q, float), keep


def _floor_cover(ideal: np.ndarray, hook: ElevationHook, q: np.ndarray) -> float:
    """The share of the overlap of circle ``q`` (x, y, radius mm)'s top and bottom images that the ring ``ideal`` (px) covers.

    Both drawn at 4 times the pixel's resolution in the ring's box (polygons of 180 points).
    """
    turn = np.linspace(0, 2 * math.pi, 180, endpoint=False)
    circle = q[:2] + q[2] * np.column_stack([np.cos(turn), np.sin(turn)])
    rings = [ideal, apply_h(hook.gh, circle), apply_h(hook.g0, circle)]
    lo = np.floor(np.min([r.min(axis=0) for r in rings], axis=0)) - 2
    hi = np.ceil(np.max([r.max(axis=0) for r in rings], axis=0)) + 2
    size = np.round((hi - lo) * 4).astype(int)
    masks = []
    for r in rings:
        m = np.zeros((size[1], size[0]), np.uint8)
        cv2.fillPoly(m, [np.round((r - lo) * 4).astype(np.int32)], 1)
        masks.append(m.astype(bool))
    lens = masks[1] & masks[2]
    return float(np.count_nonzero(lens & masks[0])) / max(float(np.count_nonzero(lens)), 1.0)


def _floor_overlap(
    ring_px: np.ndarray, hook: ElevationHook, mm_per_px: float, outline: np.ndarray, thickness_u_mm: float
) -> tuple[np.ndarray, float, float, float] | None:
    """A deep hole's top opening from its lit floor's border (photo px): (centre mm, diameter mm, rms px, doubt px).

    Seen at a tilt through a part of thickness t, a through-hole's top opening (at height t) and its
    bottom opening (on the paper) are one circle mapped by two plane maps; the lit floor the photo shows
    through it is the overlap of the two images (less the walls' shade). The circle is fitted to that
    (:func:`_overlap_fit`) and taken only where the floor is seen shifted as predicted: the overlap's border
    explains the points better than any single circle (:data:`FLOOR_OVERLAP_GAIN`), both arcs are seen
    (:data:`FLOOR_ARC_SHARE`), the fit is tight (:data:`FLOOR_OVERLAP_RMS_PX`) and the floor is seen over most of the
    overlap it predicts (:data:`FLOOR_COVER_SHARE`). The doubt: the edge's
    (:data:`DEEP_HOLE_EDGE_PX`), with the change of the fit at the thickness plus its 1-sigma.
    """
    ideal = hook.undistort(ring_px) if hook.undistort is not None else ring_px
    top, bottom = apply_h(hook.hh, ideal), apply_h(hook.h0, ideal)
    start = np.r_[0.5 * (top.mean(axis=0) + bottom.mean(axis=0)), np.median(np.hypot(*(top - top.mean(axis=0)).T))]
    q, keep = _overlap_fit(top, bottom, start)
    if np.count_nonzero(keep) < 12:
        return None
    try:  # the best single circle through the same points, on either plane
        single = min(
            float(np.median(np.abs(np.hypot(*(pts - f.centre_mm).T) - 0.5 * f.diameter_mm)))
            for pts in (top[keep], bottom[keep])
            for f in [fit_circle(pts)]
        )
    except OptionError:
        return None
    d_top = np.hypot(top[:, 0] - q[0], top[:, 1] - q[1]) - q[2]
    d_bottom = np.hypot(bottom[:, 0] - q[0], bottom[:, 1] - q[1]) - q[2]
    res = np.maximum(d_top, d_bottom)
    on_top = (d_top >= d_bottom)[keep]
    rms_px = float(np.sqrt(np.mean(res[keep] ** 2))) / mm_per_px
    if (
        float(np.median(np.abs(res[keep]))) > FLOOR_OVERLAP_GAIN * single
        or min(np.mean(on_top), 1.0 - np.mean(on_top)) < FLOOR_ARC_SHARE
        or rms_px > FLOOR_OVERLAP_RMS_PX
        or _floor_cover(ideal, hook, q) < FLOOR_COVER_SHARE
    ):
        return None
    turn = np.linspace(0, 2 * math.pi, 32, endpoint=False)
    circle = q[:2] + q[2] * np.column_stack([np.cos(turn), np.sin(turn)])
    if min(cv2.pointPolygonTest(outline, (float(a), float(b)), True) for a, b in circle) < 2 * mm_per_px:
        return None
    doubt_px = DEEP_HOLE_EDGE_PX
    if thickness_u_mm > 0:  # the near arc is mapped at the thickness: fitted again at its 1-sigma
        other = ElevationHook(hook.h0, hook.k, hook.height_mm + thickness_u_mm, hook.undistort)
        q_u, _ = _overlap_fit(apply_h(other.hh, ideal)[keep], bottom[keep], q)
        doubt_px = combine(doubt_px, abs(q_u[2] - q[2]) / mm_per_px, math.dist(q_u[:2], q[:2]) / mm_per_px)
    return np.asarray(q[:2], float), 2.0 * float(q[2]), rms_px, doubt_px


def _wall_band_px(seed: np.ndarray, origin: tuple[int, int], hook: ElevationHook) -> float:
    """The width (px) of a hole's far wall as the photo sees it: the parallax of the part's thickness at the seed's centre."""
    ys, xs = np.nonzero(seed)
    at_px = np.array([[xs.mean() + origin[0], ys.mean() + origin[1]]], float)
    ideal = hook.undistort(at_px) if hook.undistort is not None else at_px
    return float(np.hypot(*(ideal - apply_h(hook.to_footprint, ideal))[0]))


def _found_opening(
    hole: Hole,
    seed: np.ndarray,
    seen_lin: np.ndarray,
    seen_mask: np.ndarray,
    origin: tuple[int, int],
    hook: ElevationHook,
    mm_per_px: float,
    outline: np.ndarray,
    thick_u: float,
) -> tuple[np.ndarray, float, float] | None:
    """A found hole's whole opening at the top face where it replaces the found one: (centre mm, diameter mm, doubt px).

    See :func:`_deep_hole_circles`; ``seed`` is the found hole's pixels in the crop (as seen) at ``origin``.
    """
    r_seed = math.sqrt(np.count_nonzero(seed) / math.pi)
    thick_px = hook.height_mm / mm_per_px
    band_px = _wall_band_px(seed, origin, hook)
    edge = opening_edge(seen_lin, seen_mask, seed, 1.5 * r_seed + thick_px + 6.0)
    fit = None if edge is None else _top_circle(edge, origin, hook, mm_per_px, outline)
    if (
        (edge is None or edge.share < DEEP_HOLE_STEP_SHARE)
        and (fit is None or fit[2] > DEEP_HOLE_STEP_RMS_PX)
        and band_px >= DEEP_HOLE_STEP_BAND_PX
    ):
        # most rays found no midpoint near the opening's border, and what they found is no clean circle:
        # a wall's band of its own level lies between the floor and the face; the border is the last
        # step to the face's level, taken where it is rounder or wider than the midpoint's trace
        steps = opening_edge(seen_lin, seen_mask, seed, 1.5 * r_seed + thick_px + 6.0, last_step=True)
        by_step = None if steps is None else _top_circle(steps, origin, hook, mm_per_px, outline)
        if by_step is not None and (
            fit is None or by_step[2] < fit[2] or by_step[1] - fit[1] > DEEP_HOLE_REPLACE_PX * mm_per_px
        ):
            fit = by_step
    floor = None if band_px < DEEP_HOLE_STEP_BAND_PX else lit_floor_ring(seen_lin, seen_mask, seed, band_px)
    by_floor = (
        None if floor is None else _floor_overlap(floor + np.asarray(origin, float), hook, mm_per_px, outline, thick_u)
    )
    if (
        by_floor is not None
        and by_floor[1] - max(hole.diameter_mm, 0.0 if fit is None else fit[1]) > DEEP_HOLE_REPLACE_PX * mm_per_px
        and math.dist(by_floor[0], hole.circle_centre_mm) <= 0.5 * hole.diameter_mm
    ):
        # the found hole and its traced opening stop at the lit floor (the far wall and the shade look like
        # the face): the top opening from the floor's overlap, shifted as the thickness predicts
        return by_floor[0], by_floor[1], by_floor[3]
    if fit is None:
        return None
    clean = fit[2] <= DEEP_HOLE_CLEAN_RMS_PX
    if fit[1] > hole.diameter_mm and fit[3] > DEEP_HOLE_SOFT_EDGE_PX and not clean:
        return None  # a wider trace along a soft ramp (a mirroring face's shading beside the hole), no clean circle
    wider = fit[1] - hole.diameter_mm > DEEP_HOLE_REPLACE_PX * mm_per_px or (
        fit[1] > hole.diameter_mm and hole.roundness_mm > DEEP_HOLE_UNROUND_WIDER_PX * mm_per_px and clean
    )
    # a narrower opening only in place of a found ring that is no circle (a lit wall taken in with
    # the paper) and from a clean fit: where a far wall looks like the face (black plastic), the
    # trace stops at its foot, which a round found ring already reads as the bottom edge
    narrower = fit[1] < hole.diameter_mm and hole.roundness_mm > DEEP_HOLE_UNROUND_PX * mm_per_px and clean
    if not (wider or narrower):
        return None
    if math.dist(fit[0], hole.circle_centre_mm) > 0.5 * hole.diameter_mm:
        return None  # another opening than this hole's
    return fit[0], fit[1], fit[3]


def _tinted_opening(
    hole: Hole,
    seed: np.ndarray,
    seen_colour: np.ndarray,
    lut: np.ndarray,
    seen_mask: np.ndarray,
    origin: tuple[int, int],
    hook: ElevationHook,
    mm_per_px: float,
    outline: np.ndarray,
    wide_mm: float,
) -> tuple[np.ndarray, float, float] | None:
    """A found hole's opening traced by the face's tint where it is wider than ``wide_mm``: (centre mm, diameter mm, doubt px).

    Under lights of two colours the hole's floor and its walls' shade keep the paper's chroma under one
    light or both, and the brushed face has its own (:mod:`scanmass.segment.tintrim`): the rim is where the
    face's tint begins. Taken where the trace fits a clean circle on the top face's plane
    (:data:`TINT_CLEAN_RMS_PX`, :func:`_top_circle`), wider than ``wide_mm`` (the found hole, or its opening
    traced in grey) by more than :data:`DEEP_HOLE_REPLACE_PX`, centred within the found hole's radius.
    """
    band_px = _wall_band_px(seed, origin, hook)
    edge = tint_rim(seen_colour, lut, seen_mask, seed, TINT_REACH_BANDS * band_px + TINT_REACH_PX)
    fit = None if edge is None else _top_circle(edge, origin, hook, mm_per_px, outline)
    if fit is None or fit[2] > TINT_CLEAN_RMS_PX or fit[1] - wide_mm <= DEEP_HOLE_REPLACE_PX * mm_per_px:
        return None
    if math.dist(fit[0], hole.circle_centre_mm) > 0.5 * hole.diameter_mm:
        return None
    return fit[0], fit[1], fit[3]


def _shade_level(lin: np.ndarray, mask: np.ndarray) -> float:
    """The level a hole's floor in its wall's shade lies below: a pit's, half the part's level read low in its face.

    :data:`~scanmass.segment.shadow.PIT_DEPTH` of the part's :data:`DEEP_HOLE_LOW_QUANTILE` percentile (its
    pixels more than 3 px inside); 0 when it has none.
    """
    deep = cv2.distanceTransform(mask.astype(np.uint8), cv2.DIST_L2, 3) > 3
    return PIT_DEPTH * float(np.percentile(lin[deep], DEEP_HOLE_LOW_QUANTILE)) if deep.any() else 0.0


def _below_face_level(lin: np.ndarray, mask: np.ndarray) -> float:
    """The level below which a pixel beside a found hole is darker than the part's face by more than its scatter.

    The face's level is the part's most common level: the peak of a histogram of the logarithms of its pixels
    more than 3 px inside (smoothed as :func:`~scanmass.segment.deephole.opening_edge` smooths), in bins
    :data:`FACE_LOG_BIN` wide, smoothed by (1, 2, 1) / 4. Its scatter is read from the peak's upper side
    only, as the half width at half its height (over 1.1774: a normal peak's, common practice): a hole's
    shade, a cast shadow the outline took in, the shaded walls and the paper's penumbra all lie off the
    peak and do not widen it. The level: the face's less :data:`FACE_SHADE_Z` times its scatter (in the
    logarithm); 0 when the part has too few pixels. A face lit evenly (black plastic in a window's broad
    light) has a narrow peak, and a hole's floor in its wall's shade at 0.6-0.7 of its level lies clearly
    below it although not below a pit's :data:`~scanmass.segment.shadow.PIT_DEPTH`. A brushed face's dark
    sector can lie below it too: the level is used only where the pit's (:func:`_shade_level`) gave the
    found hole no opening, and the opening is taken only where its trace is a clean circle that holds the
    found hole (:func:`_shaded_opening`).
    """
    deep = cv2.distanceTransform(mask.astype(np.uint8), cv2.DIST_L2, 3) > 3
    if np.count_nonzero(deep) < 50:
        return 0.0
    img = cv2.GaussianBlur(cv2.medianBlur(np.ascontiguousarray(lin, dtype=np.float32), 3), (0, 0), SMOOTH_PX)
    values = img[deep].astype(float)
    values = np.log(values[values > 0])
    if values.size < 50:
        return 0.0
    n = max(int(math.ceil((values.max() - values.min()) / FACE_LOG_BIN)), 1)
    counts, edges = np.histogram(values, bins=n, range=(float(values.min()), float(values.min() + n * FACE_LOG_BIN)))
    counts = np.convolve(np.r_[0.0, counts, 0.0], [0.25, 0.5, 0.25], "valid")
    peak = int(np.argmax(counts))
    upper = np.flatnonzero(counts[peak:] < 0.5 * counts[peak])
    if upper.size == 0:
        return 0.0
    half_width = (float(upper[0]) - 0.5) * FACE_LOG_BIN  # from the peak's bin to where its height is halved
    sigma = max(half_width, 0.5 * FACE_LOG_BIN) / 1.1774
    mode = 0.5 * float(edges[peak] + edges[peak + 1])
    return float(math.exp(mode - FACE_SHADE_Z * sigma))


def _crescent_opening(
    edge: PitEdge, origin: tuple[int, int], hook: ElevationHook, mm_per_px: float, outline: np.ndarray
) -> tuple[np.ndarray, float, float, float] | None:
    """A dark pit that is a crescent: the rim's circle from its outer border (centre mm, diameter mm, rms px, doubt px).

    Under a window's light a hole's wall on the window's side is in shade and throws its shade on the floor:
    seen from above, the dark part of the opening is the top circle less the lit floor, a disc shifted away
    from the light. Where the face is lit about as the floor (brushed steel facing the window), the floor
    does not show and the pit is that crescent: its outer border is an arc of the rim, its inner border an
    arc of the shifted disc, concave, inside the crescent's convex hull. The points of the trace on the hull
    (within 0.3 px, on the top face's plane) are fitted with a circle, taken where the fit is clean
    (:data:`DEEP_HOLE_CLEAN_RMS_PX`), the arc spans :data:`CRESCENT_MIN_ARC_DEG`, every traced point lies within
    the circle (a crescent lies in its disc) and the circle inside the part's ``outline`` with a margin. The
    doubt: the edge's, times 360 degrees over the arc seen (a partial arc bounds the circle less).
    """
    photo = edge.points_px + np.asarray(origin, float)
    ideal = hook.undistort(photo) if hook.undistort is not None else photo
    top = apply_h(hook.hh, ideal)
    if len(top) < 12:
        return None
    hull = top[np.sort(cv2.convexHull(top.astype(np.float32), returnPoints=False).ravel())].astype(np.float32)
    if len(hull) < 3:
        return None
    gap = np.array([abs(cv2.pointPolygonTest(hull, (float(a), float(b)), True)) for a, b in top])
    on = gap < 0.3 * mm_per_px
    if np.count_nonzero(on) < 12:
        return None
    try:
        fit = fit_circle(top[on])
    except OptionError:
        return None
    if fit.rms_mm > DEEP_HOLE_CLEAN_RMS_PX * mm_per_px:
        return None
    centre = np.asarray(fit.centre_mm, float)
    turn = np.sort(np.degrees(np.arctan2(top[on, 1] - centre[1], top[on, 0] - centre[0])))
    arc = 360.0 - float(np.max(np.diff(np.r_[turn, turn[0] + 360.0])))
    if arc < CRESCENT_MIN_ARC_DEG:
        return None
    if np.max(np.hypot(*(top - centre).T)) > 0.5 * fit.diameter_mm + max(3 * fit.rms_mm, 0.5 * mm_per_px):
        return None  # a trace that leaves the circle: no crescent of it
    ring = centre + 0.5 * fit.diameter_mm * np.column_stack(
        [
            np.cos(np.linspace(0, 2 * math.pi, 32, endpoint=False)),
            np.sin(np.linspace(0, 2 * math.pi, 32, endpoint=False)),
        ]
    )
    if min(cv2.pointPolygonTest(outline, (float(a), float(b)), True) for a, b in ring) < 2 * mm_per_px:
        return None
    doubt_px = max(DEEP_HOLE_EDGE_PX, 0.5 * float(np.median(edge.spread_px[on]))) * 360.0 / arc
    return centre, float(fit.diameter_mm), fit.rms_mm / mm_per_px, doubt_px


def _lit_pit_opening(
    lin: np.ndarray,
    mask: np.ndarray,
    centre_px: tuple[float, float],
    diameter_px: float,
    origin: tuple[int, int],
    hook: ElevationHook,
    mm_per_px: float,
    outline: np.ndarray,
    shade_below: float,
    holes: list[Hole],
) -> tuple[np.ndarray, float, float, float] | None:
    """A dark pit whose border meets a lit stretch of floor or wall: the whole opening's circle, or None.

    :func:`~scanmass.segment.deephole.pit_edge` leaves out the rays that lead from the pit into something
    brighter than the face (the floor lit by a light from one side); where too few are left for a fit, the
    opening is traced around the pit and the lit stretch together
    (:func:`~scanmass.segment.deephole.opening_edge` with the pit as its seed, the shade darker than
    ``shade_below``) and fitted on the top face's plane (:func:`_top_circle`). Taken only where the fit is
    clean (:data:`DEEP_HOLE_CLEAN_RMS_PX`), holds the pit's centre and none of the part's found ``holes``.
    """
    if shade_below <= 0:
        return None
    h, w = lin.shape
    yy, xx = np.mgrid[0:h, 0:w]
    seed = mask & (np.hypot(xx - centre_px[0], yy - centre_px[1]) < 0.5 * diameter_px) & (lin < shade_below)
    if np.count_nonzero(seed) < 3:
        return None
    # as far as a found hole's opening is looked for (a lit stretch of a brushed face beyond leads the trace astray)
    reach = 0.75 * diameter_px + hook.height_mm / mm_per_px + 6.0
    edge = opening_edge(lin, mask & ~seed, seed, reach, shade_below=shade_below)
    fit = None if edge is None else _top_circle(edge, origin, hook, mm_per_px, outline)
    if fit is None or fit[2] > DEEP_HOLE_CLEAN_RMS_PX:
        return None
    centre_top = apply_h(hook.hh, np.asarray([[centre_px[0] + origin[0], centre_px[1] + origin[1]]], float))[0]
    if math.dist(fit[0], centre_top) > 0.5 * fit[1]:
        return None
    if any(math.dist(fit[0], h.circle_centre_mm) <= 0.5 * fit[1] for h in holes):
        return None  # a found hole lies in this opening: its own opening is traced from it (:func:`_shaded_opening`)
    return fit


def _shaded_opening(
    hole: Hole,
    seed: np.ndarray,
    seen_lin: np.ndarray,
    seen_mask: np.ndarray,
    origin: tuple[int, int],
    hook: ElevationHook,
    mm_per_px: float,
    outline: np.ndarray,
    shade_below: float,
    lit_reach_px: float = math.inf,
) -> tuple[np.ndarray, float, float] | None:
    """A found hole that is only the lit part of its floor, with the wall's shade beside it: (centre mm, diameter mm, doubt px).

    Under a broad light from one side (a window) the floor of a deep hole is lit on the side away from the
    light and lies in its near wall's shade on the other: the segmentation finds the lit floor as a small hole
    at the opening's side, and the shade (darker than a pit, ``shade_below``) as material. Their union, the
    penumbra between them bridged (:data:`~scanmass.segment.deephole.SHADE_BRIDGE_PX`), is the opening;
    its border against the face is traced (:func:`~scanmass.segment.deephole.opening_edge`) and fitted on
    the top face's plane (:func:`_top_circle`). Taken where the fit is clean
    (:data:`DEEP_HOLE_CLEAN_RMS_PX`), wider than the found hole by more than :data:`DEEP_HOLE_REPLACE_PX`
    and holds the found hole's centre; else None.
    """
    if shade_below <= 0:
        return None
    r_seed = math.sqrt(np.count_nonzero(seed) / math.pi)
    # the found lit floor lies at the opening's side: the opening reaches up to twice as far from it
    reach = 2.0 * (1.5 * r_seed + hook.height_mm / mm_per_px + 6.0)
    edge = opening_edge(seen_lin, seen_mask, seed, reach, shade_below=shade_below, lit_reach_px=lit_reach_px)
    fit = None if edge is None else _top_circle(edge, origin, hook, mm_per_px, outline)
    # with the lit stretch held beside the floor, a trace on the rim is round (:data:`DEEP_HOLE_STEP_RMS_PX`:
    # dev-window-steel6-t22's bore 0.10 px, dev-window-steel4-t22's 11 mm hole 0.15 px); dev-spot-steel-t20's
    # 10 mm hole, found whole, gave a trace 1 mm outside its rim at 0.44 px
    clean = DEEP_HOLE_CLEAN_RMS_PX if math.isinf(lit_reach_px) else DEEP_HOLE_STEP_RMS_PX
    if fit is None or fit[2] > clean or fit[1] - hole.diameter_mm <= DEEP_HOLE_REPLACE_PX * mm_per_px:
        return None
    if math.dist(fit[0], hole.circle_centre_mm) > 0.5 * fit[1]:
        return None  # the found hole is not inside this opening
    return fit[0], fit[1], fit[3]


def _deep_hole_circles(
    image: LoadedImage,
    scale: PhotoScale,
    part: Part,
    hook: ElevationHook,
    lut: np.ndarray,
    colour: np.ndarray | None = None,
) -> list[tuple[np.ndarray, float, float, bool, np.ndarray | None, bool]]:
    """The through-holes at a part's top face that its dark pits open, or that its found holes only partly show.

    Each as (centre mm, diameter mm, edge doubt px, whether it was put together from a lit floor and its
    shade (:func:`_shaded_opening`, :func:`_lit_pit_opening`), the found hole's ring as seen (photo px) or None).
    A found hole is replaced where its whole opening (:func:`~scanmass.segment.deephole.opening_edge`)
    fits a circle within :data:`DEEP_HOLE_RMS_PX` wider than the found one by more than
    :data:`DEEP_HOLE_REPLACE_PX`, or narrower than a found ring that is no circle.
    """
    mm_per_px = scale.plane_map.mm_per_px
    crop = _part_crop(image, scale, part, 4)
    seen = _part_crop(image, scale, part, 4, as_seen=True)
    if crop is None or seen is None or part.outline_mm is None:
        return []
    (x0, y0, x1, y1), mask, _ = crop
    lin = lut[image.grey[y0:y1, x0:x1]]
    outline = np.asarray(part.outline_mm, np.float32)
    out: list[tuple[np.ndarray, float, float, bool, np.ndarray | None, bool]] = []
    # also looked for on the image with its specks taken out (a path tracer's fireflies, a sensor's
    # noise in the shade break a deep hole's dark bottom into pieces too small to be a pit), where
    # the image as it is shows none
    min_px = HIDDEN_HOLE_MIN_AREA_MM2 / mm_per_px**2
    # the level a hole's floor in its wall's shade lies below: a pit's (half the part's level read low in its face)
    shade_below = _shade_level(lin, mask)
    pits = dark_pits(lin, mask, min_px)
    calm = cv2.GaussianBlur(cv2.medianBlur(np.ascontiguousarray(lin, dtype=np.float32), 3), (0, 0), 1.0)
    pits += [
        p for p in dark_pits(calm, mask, min_px) if all(math.dist(p[:2], q[:2]) > 0.5 * (p[2] + q[2]) for q in pits)
    ]
    # and with the part's level read low in its face: a brushed face's dark sector below half its median joins
    # a pit beside it and runs to the outline (dev-window-steel5-t14's 5.5 mm plate once its shadow is cut)
    pits += [
        p
        for p in dark_pits(calm, mask, min_px, quantile=DEEP_HOLE_LOW_QUANTILE)
        if all(math.dist(p[:2], q[:2]) > 0.5 * (p[2] + q[2]) for q in pits)
    ]
    for x, y, d in pits:
        edge = pit_edge(lin, mask, (x, y), d)
        fit = None if edge is None else _top_circle(edge, (x0, y0), hook, mm_per_px, outline)
        if fit is not None and edge is not None and _face_shading(edge):
            continue  # a brushed face's dark sector, not an opening
        partly = False
        if fit is None and edge is not None and edge.lit_share > 0:
            fit = _lit_pit_opening(lin, mask, (x, y), d, (x0, y0), hook, mm_per_px, outline, shade_below, part.holes)
            partly = fit is not None
        elif fit is None and edge is not None and edge.share >= DEEP_HOLE_MIN_SHARE:
            # traced all round but no circle: the wall's shade alone, a crescent whose floor looks like the face
            fit = _crescent_opening(edge, (x0, y0), hook, mm_per_px, outline)
            partly = fit is not None
        if fit is not None and 0.5 * d <= fit[1] / mm_per_px <= 4 * d:
            out.append((fit[0], fit[1], fit[3], partly, None, False))
    (sx0, sy0, sx1, sy1), seen_mask, rings = seen
    seen_lin = lut[image.grey[sy0:sy1, sx0:sx1]]
    info = scale.plane_map.photo
    thick_u = 0.0 if info is None or info.thickness is None else float(info.thickness.height_u_mm)
    shade_below = _shade_level(seen_lin, seen_mask)
    # a found hole's shade where none darker than a pit gives its opening: darker than the face by more than its
    # own scatter (a face lit evenly; a brushed face's dark sectors would join a pit's shade at that level); read
    # at the first hole that needs it
    levels: list[float] | None = None
    for hole, ring in zip(part.holes, rings[1:]):
        seed8 = np.zeros(seen_mask.shape, np.uint8)
        cv2.fillPoly(seed8, [np.round(ring).astype(np.int32)], 1)
        seed = seed8.astype(bool)
        entry = _found_opening(hole, seed, seen_lin, seen_mask, (sx0, sy0), hook, mm_per_px, outline, thick_u)
        partly = False
        if entry is None:
            # the pit's level first, then the face's scatter; each with a lit stretch anywhere in reach, then
            # only within the far wall's band beside the found floor (a brushed face's lit sector beyond the
            # rim joins the floor otherwise, and the opening runs over the face)
            if levels is None:
                shade_faint = _below_face_level(seen_lin, seen_mask)
                levels = [level for level in (shade_below,) if level > 0]
                levels += [shade_faint] if shade_faint > max(shade_below, 0.0) else []
            wall_px = _wall_band_px(seed, (sx0, sy0), hook) + NEAR_PX
            tries = [(level, lit_px) for lit_px in (math.inf, wall_px) for level in levels]
            for level, lit_px in tries:
                entry = _shaded_opening(
                    hole, seed, seen_lin, seen_mask, (sx0, sy0), hook, mm_per_px, outline, level, lit_px
                )
                if entry is not None:
                    break
            partly = entry is not None
        tinted = None
        if colour is not None and colour.shape[:2] == image.grey.shape[:2]:
            tinted = _tinted_opening(
                hole,
                seed,
                colour[sy0:sy1, sx0:sx1],
                lut,
                seen_mask,
                (sx0, sy0),
                hook,
                mm_per_px,
                outline,
                max(hole.diameter_mm, 0.0 if entry is None else entry[1]),
            )
            if tinted is not None:
                entry, partly = tinted, False
        if entry is not None:
            out.append((entry[0], entry[1], entry[2], partly, ring + np.array([sx0, sy0], float), entry is tinted))
    return _apart(out)


def _apart(
    entries: list[tuple[np.ndarray, float, float, bool, np.ndarray | None, bool]],
) -> list[tuple[np.ndarray, float, float, bool, np.ndarray | None, bool]]:
    """The openings of one part without those put together from a lit floor and shade that overlap another.

    Two through-holes of one part do not overlap (the web between them would be gone). An opening traced
    around a lit floor and the shade beside it (``partly``: :func:`_shaded_opening`, :func:`_lit_pit_opening`)
    that takes in a smaller opening traced whole (a pit's or a found hole's, not ``partly``), other than its
    own (centres more than a quarter of the smaller's diameter apart, as :func:`_open_deep_holes` tells one
    opening from another), ran over the face around that hole: it is left out (tests/data/reallight
    dev-window-nylon8-t24, no thickness given: a 23.6 mm 'opening' grown from the lit floor of the steel
    plate's 10 mm hole over its 6.5 mm hole).
    """
    apart = []
    for e in entries:
        clash = e[3] and any(
            not f[3]
            and f[1] < e[1]
            and math.dist(e[0], f[0]) > 0.25 * f[1]
            and math.dist(e[0], f[0]) < 0.5 * (e[1] + f[1])
            for f in entries
        )
        if not clash:
            apart.append(e)
    # one opening found twice (a pit's trace and the found hole's, or two pits' levels) is opened once, as
    # the found hole's (its ring is replaced), with the larger of their edge doubts: both discs painted read
    # as their union, wider than either (a 6.5 mm hole of a window render since removed from the tuned set: 7.00 and 6.32 mm, read 7.05)
    keep: list[tuple[np.ndarray, float, float, bool, np.ndarray | None, bool]] = []
    for e in sorted(apart, key=lambda e: e[4] is None):
        same = [i for i, f in enumerate(keep) if math.dist(e[0], f[0]) <= 0.25 * min(e[1], f[1])]
        if same:
            f = keep[same[0]]
            keep[same[0]] = (f[0], f[1], max(f[2], e[2]), f[3], f[4], f[5])
        else:
            keep.append(e)
    return keep


def _paint_ring(grey: np.ndarray, lut: np.ndarray, ring_px: np.ndarray, level: np.ndarray) -> np.ndarray:
    """Paint the inside of a ring (photo px, pixel centres at integers) in ``level`` (a code), in place.

    Each pixel takes the level in proportion to the share of it the ring covers (exact coverage,
    :func:`scanmass.raster.coverage`), mixed in linear light, so the painted edge sits where the
    ring runs (filling whole pixels would move it out by about half a pixel). Returns the pixels
    touched.
    """
    x0, y0 = np.maximum(np.floor(ring_px.min(axis=0)).astype(int) - 2, 0)
    x1 = min(int(np.ceil(ring_px[:, 0].max())) + 3, grey.shape[1])
    y1 = min(int(np.ceil(ring_px[:, 1].max())) + 3, grey.shape[0])
    touched = np.zeros(grey.shape[:2], bool)
    if x1 <= x0 or y1 <= y0:
        return touched
    # the raster's frame: pixel (r, c) spans x in [c, c + 1], y up from the window's bottom
    ring = np.column_stack([ring_px[:, 0] - x0 + 0.5, (y1 - y0) - (ring_px[:, 1] - y0 + 0.5)])
    cover = coverage([ring if signed_area(ring) > 0 else ring[::-1]], shape=(y1 - y0, x1 - x0), mm_per_px=1.0)
    old = lut[grey[y0:y1, x0:x1]]
    mixed = cover * float(lut[level]) + (1.0 - cover) * old
    codes = np.clip(np.searchsorted(lut, mixed), 0, len(lut) - 1)
    lower = np.maximum(codes - 1, 0)
    codes = np.where(np.abs(lut[lower] - mixed) < np.abs(lut[codes] - mixed), lower, codes)
    window = grey[y0:y1, x0:x1]
    window[cover > 0] = codes[cover > 0].astype(grey.dtype)
    touched[y0:y1, x0:x1] = cover > 0
    return touched


def _open_deep_holes(
    image: LoadedImage,
    masked: LoadedImage,
    scale: PhotoScale,
    result: Measurement,
    thickness_mm: float | None,
    remeasure: Callable[[LoadedImage, PlaneMap], Measurement],
    colour: np.ndarray | None = None,
    dropped: frozenset[tuple[int, int]] = frozenset(),
) -> tuple[LoadedImage, PhotoScale, Measurement, list[str]]:
    """Open the deep through-holes that show dark at their top face, and measure again.

    A hole through a thick part shows, inside its opening, its far wall and what of the paper
    below its near wall leaves in view, both shaded: darker than the part's face, so the
    segmentation takes it for material (:func:`~scanmass.pipeline.photo_checks._hidden_holes`
    would flag it as a dark pit).
    With the thickness given, the plane of the top face is known (the camera's pose from the
    mat), and there the opening's edge is the hole's edge at the top face all round. Each dark
    pit's border against the face is traced (:func:`~scanmass.segment.deephole.pit_edge`;
    stretches where the pit meets a lit floor or wall are left out), mapped onto the top face's
    plane and fitted with a circle (trimmed). Where the fit is round (rms within
    :data:`DEEP_HOLE_RMS_PX`) and the circle lies inside the part, the opening is painted in the
    paper's level on ``masked`` and its surroundings are mapped as seen on the top face's edge
    (:meth:`~scanmass.scale.homography.ElevationHook.with_top_seen`), and the image is measured
    again with ``remeasure``. Each opened hole's diameter gets the term ``deep_hole``: twice the
    edge doubt (:data:`DEEP_HOLE_EDGE_PX` or the edge's own width) on its diameter, once on its
    centre, and the part the area the ring sweeps at that doubt (centroid and moments to match).
    A found hole's opening traced by the face's tint (``colour``, the photo's encoded B, G, R planes;
    :func:`_tinted_opening`) keeps its fitted circle as the hole's diameter and centre. Where a painted
    opening is not found again as a hole, the others are opened without it (``dropped``, once); if that
    fails too, or a part is not found again, everything is kept as it was.

    Returns the image and scale to go on with (painted, and the plane map with the openings
    seen on top), the measurement and a warning. Without a thickness (no top face's plane) or
    when nothing is opened, everything is returned as it was.
    """
    hook = scale.plane_map.undistort
    if not thickness_mm or not isinstance(hook, ElevationHook) or not result.parts:
        return masked, scale, result, []
    lut = np.asarray(image.to_linear, dtype=np.float32)
    mm_per_px = scale.plane_map.mm_per_px
    found = {part.label: _deep_hole_circles(image, scale, part, hook, lut, colour) for part in result.parts}
    found = {label: [e for i, e in enumerate(holes) if (label, i) not in dropped] for label, holes in found.items()}
    found = {label: holes for label, holes in found.items() if holes}
    if not found:
        return masked, scale, result, []
    grey = masked.grey.copy()
    top_seen = np.zeros(grey.shape[:2], bool) if hook.top_seen is None else hook.top_seen.copy()
    turn = np.linspace(0, 2 * math.pi, 180, endpoint=False)
    for part in result.parts:
        if part.label not in found or part.outline_mm is None:
            continue
        ring_px = scale.plane_map.to_px(np.asarray(part.outline_mm, float))
        x0, y0 = np.maximum(np.floor(ring_px.min(axis=0)).astype(int) - 20, 0)
        x1, y1 = np.ceil(ring_px.max(axis=0)).astype(int) + 20
        own = np.zeros(grey.shape[:2], np.uint8)
        cv2.fillPoly(own, [np.round(ring_px).astype(np.int32)], 1)
        near = cv2.dilate(own, np.ones((17, 17), np.uint8)).astype(bool) & ~cv2.dilate(
            own, np.ones((9, 9), np.uint8)
        ).astype(bool)
        paper = grey[near[: grey.shape[0], : grey.shape[1]]]
        if paper.size < 20 or x1 <= x0 or y1 <= y0:
            found.pop(part.label)
            continue
        level = np.asarray(np.median(paper), dtype=grey.dtype)
        face = grey[own.astype(bool) & ~near[: grey.shape[0], : grey.shape[1]]]
        for *_, old_ring, _ in found[part.label]:
            if old_ring is not None and face.size >= 20:  # the found hole's ring is replaced: it becomes face first
                gone = np.zeros(grey.shape[:2], np.uint8)
                cv2.fillPoly(gone, [np.round(old_ring).astype(np.int32)], 1)
                grey[cv2.dilate(gone, np.ones((3, 3), np.uint8)).astype(bool)] = np.median(face).astype(grey.dtype)
        for centre, diameter, *_ in found[part.label]:
            circle = centre + 0.5 * diameter * np.column_stack([np.cos(turn), np.sin(turn)])
            px = hook.photo_px(apply_h(hook.gh, circle))
            disc = _paint_ring(grey, lut, px, level)
            top_seen |= cv2.dilate(disc.astype(np.uint8), np.ones((11, 11), np.uint8)).astype(bool)
    if not found:
        return masked, scale, result, []
    seen_scale = replace(scale, plane_map=with_top_seen(scale.plane_map, top_seen))
    painted = replace(masked, grey=grey)
    try:
        again = remeasure(painted, seen_scale.plane_map)
    except (SegmentationError, ScaleError, OptionError):
        return masked, scale, result, []
    parts: list[Part] = []
    said: list[str] = []
    notes: dict[str, list[dict[str, float]]] = {}
    for old in result.parts:
        if old.label not in found or old.outline_mm is None:
            parts.append(old)  # a part without an opened hole keeps its first measurement
            continue
        # found again: the nearest of the regions at least half its size (the rest are pieces the
        # first measurement left out); the opened holes move its centroid by a small share of its size
        alike = [q for q in again.parts if q.area_mm2 >= 0.5 * old.area_mm2]
        new = min(alike, key=lambda q: math.dist(q.centroid_mm, old.centroid_mm), default=None)
        if new is None or math.dist(new.centroid_mm, old.centroid_mm) > 0.1 * old.caliper_max_mm:
            return masked, scale, result, []  # the part was not found again: keep the measurement as it was
        opened = found[old.label]
        holes = list(new.holes)
        area_mm2 = 0.0
        texts = []
        opened_at: set[int] = set()  # holes already given an opening's doubt: one opening, one doubt
        for index, (centre, diameter, doubt_px, partly, _, by_tint) in enumerate(opened):
            k = min(range(len(holes)), key=lambda i: math.dist(holes[i].circle_centre_mm, centre), default=None)
            if k is None or math.dist(holes[k].circle_centre_mm, centre) > 0.25 * diameter:
                # the painted opening was not found as a hole (a dark sector of a face, painted, joins something
                # else): the others are opened without it, once; else all are kept as they were
                if dropped:
                    return masked, scale, result, []
                return _open_deep_holes(
                    image, masked, scale, result, thickness_mm, remeasure, colour, frozenset({(old.label, index)})
                )
            u_mm = doubt_px * mm_per_px
            if k in opened_at:
                # the same opening found again (another level's try): its edge's doubt is one
                # error of one ring, not an independent one to add in quadrature each time
                continue
            opened_at.add(k)
            u_mm = max(d[2] for d in opened if math.dist(d[0], centre) <= 0.25 * diameter) * mm_per_px
            h = holes[k]
            if by_tint:  # the opening's own circle: the painted disc is read again against a face near its level
                h = replace(h, diameter_mm=float(diameter), circle_centre_mm=(float(centre[0]), float(centre[1])))
            holes[k] = replace(
                h,
                diameter_u_mm=combine(h.diameter_u_mm, 2 * u_mm),
                area_u_mm2=combine(h.area_u_mm2, math.pi * diameter * u_mm),
                centroid_u_mm=(combine(h.centroid_u_mm[0], u_mm), combine(h.centroid_u_mm[1], u_mm)),
                circle_centre_u_mm=(combine(h.circle_centre_u_mm[0], u_mm), combine(h.circle_centre_u_mm[1], u_mm)),
            )
            area_mm2 += math.pi * diameter * u_mm
            texts.append(
                f"{h.diameter_mm:.3g} mm at ({h.circle_centre_mm[0]:.1f}, {h.circle_centre_mm[1]:.1f}) mm"
                + (PARTLY_SEEN if partly else "")
            )
            notes.setdefault(str(old.label), []).append(
                {
                    "x_mm": float(centre[0]),
                    "y_mm": float(centre[1]),
                    "diameter_mm": diameter,
                    "edge_doubt_px": doubt_px,
                    "partly_seen": partly,
                }
            )
        for h_old in old.holes:  # the holes found before keep their stated doubt (a cut's, a wall's terms)
            j = min(range(len(holes)), key=lambda i: math.dist(holes[i].circle_centre_mm, h_old.circle_centre_mm))
            if math.dist(holes[j].circle_centre_mm, h_old.circle_centre_mm) < 0.25 * h_old.diameter_mm:
                holes[j] = replace(
                    holes[j],
                    diameter_u_mm=max(holes[j].diameter_u_mm, h_old.diameter_u_mm),
                    area_u_mm2=max(holes[j].area_u_mm2, h_old.area_u_mm2),
                )
        part = replace(new, label=old.label, holes=holes)
        for name, term in old.uncertainty_terms.items():
            if name not in part.uncertainty_terms and isinstance(term, dict) and "area_mm2" in term:
                part = _with_extra_term(part, name, term, [])  # a term the first measurement's checks added
        parts.append(_with_extra_term(part, "deep_hole", area_share_term(part, area_mm2), []))
        said.append(f"part {old.label} ({'; '.join(texts)})")
    result_parts = parts
    again.parts = result_parts
    opened_labels = {f"part {label}:" for label in found}
    again.warnings = [w for w in result.warnings if not any(w.startswith(x) for x in opened_labels)] + [
        w for w in again.warnings if any(w.startswith(x) for x in opened_labels)
    ]
    again.settings = {**result.settings, "deep_holes": notes}
    warning = (
        f"deep hole: in {', '.join(said)} a dark round opening was taken as a through-hole and measured at the "
        "top face (the hole's wall and the paper below it, in shade, look darker than the part); its edge is "
        "less clear than a hole that shows the paper, and the uncertainty includes its place (term 'deep_hole'); "
        "a blind pocket would look the same; for a trustworthy figure measure the part on a light box (backlight)"
    )
    return painted, seen_scale, again, [warning]
