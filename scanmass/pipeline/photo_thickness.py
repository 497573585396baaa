"""A thick part's thickness read from its side walls in a photo (when ``--thickness`` is not given), and the
part's figures lifted by it: :func:`wall_thickness` (the wall band facing the camera), :func:`rim_thickness`
(round rims: a second, independent cue; where the whole band shows no clear peak, stretches of it read alone,
:func:`_stretch_reading`), :func:`fused` and :func:`with_wall_thickness`.

Part of the pipeline stage (:mod:`scanmass.pipeline`).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field, fields, replace

import cv2
import numpy as np

from scanmass.errors import ScanmassError
from scanmass.geometry import signed_area, vertex_normals
from scanmass.load.decode import LoadedImage
from scanmass.measurement import Measurement, Part
from scanmass.pipeline.part_terms import _with_extra_term, change_term, circle_change
from scanmass.scale.camera import PhotoScale
from scanmass.scale.homography import ElevationHook, apply_h, footprint_maps_mm, raised_outline_mm
from scanmass.section import escaping_holes, fit_circle, ring_moments, ring_perimeter, section_properties
from scanmass.uncertainty import combine

#: Thicknesses (mm) tried for a part's side wall: plate and bar stock laid flat on a mat.
THICKNESS_GRID_MM = np.arange(0.5, 12.0001, 0.1)
#: Step (px) of the brightness profiles sampled across a wall.
PROFILE_STEP_PX = 0.25
#: Fewest boundary vertices whose wall faces the camera, and the narrowest median wall (px at the
#: estimate) that are read: a narrower band is one blurred edge, not two.
MIN_WALL_VERTICES = 40
MIN_BAND_PX = 1.4
#: A thickness is taken only where the score's peak rises this far above the lower of its two
#: flanks' lowest scores (the score: gradient shares, 0-1). On the committed renders
#: (tests/data/reallight) the walls read wrongly (a peak at the end of the range, a flat score along a
#: shadow) rise 0.000-0.04 above a flank; the lit walls 0.05-0.37.
MIN_PROMINENCE = 0.05
#: The 1-sigma floor of an estimate (mm): a share of the thickness and a constant. On the committed
#: renders the estimates (less :data:`READ_EXCESS_MM`) lie -2.1..+3.2 mm from the truth, median |error|
#: 0.38 mm; the width of the peak (:func:`wall_thickness`) covers the far ones, the floor the near ones (all
#: 34 within 2.3 sigma; with 15 % of the thickness, 1.8).
SIGMA_SHARE = 0.10
SIGMA_FLOOR_MM = 0.3
#: What the score reads above the thickness (mm), taken off the estimate. A wall brighter or darker than both
#: the paper and the top face has gradient peaks of opposite sign, which the blur pushes apart, and a wider
#: trial band has more places to score. On the committed renders (tests/data/reallight, 34 walls read) the
#: estimates read +0.29 mm (median; mean +0.45) above the truth without it, -0.02 mm with it (median |error|
#: 0.57 -> 0.39 mm). The offset read as a band width instead (0.3 px) leaves a smaller median error (0.31 mm)
#: but takes 1-1.5 mm off the narrowest bands (1.5-1.8 px, where a px is 3 mm of thickness).
READ_EXCESS_MM = 0.3
#: A profile is read only where the paper beyond the widest wall is at least this share of the
#: brightest paper beside the part (90th percentile): a cast shadow there blurs the wall's bottom edge.
#: On the committed renders 0.75-0.93 read 33-34 parts; 0.85 is the middle.
PAPER_BESIDE = 0.85
#: Where the whole wall's score has no clear peak, the wall is read stretch by stretch
#: (:func:`_stretch_reading`): runs of :data:`MIN_WALL_VERTICES` consecutive profiles of one ring, each scored
#: as the whole wall is. A part is read where at least :data:`STRETCH_MIN_READ` stretches have a clear peak and
#: their readings' sample standard deviation is at most :data:`STRETCH_MAX_SPREAD` of their median. Read so on
#: every photographed part of the committed renders (tests/data/reallight; not only on those the whole wall
#: leaves unread), with :data:`STRETCH_FACE_SHARE`, 28 parts give a reading: median |error| 0.26 mm, worst
#: 3.1 mm (6.05 +- 1.76 for a 3 mm plate), all within 1.8 stated sigma; with a spread of 0.4 allowed, 32 parts,
#: within 2.6 sigma (two of the parts the whole wall leaves unread read 1.0 and 2.0 mm off); with 0.15, 24 parts
#: (worst 1.0 mm) but one of the two the whole wall leaves unread and these read within 0.05 mm; with 3
#: stretches required, 16 parts.
STRETCH_MIN_READ = 2
STRETCH_MAX_SPREAD = 0.25
#: A stretch's reading counts only where at least this share of its profiles lie within the part (on its top
#: face) :data:`STRETCH_FACE_PX` beyond the band's inner edge: the top face continues past its edge, as the paper
#: past the far side of a narrow arm or a hole beside the edge does not (on a flat L bracket's 12 mm arm, two
#: stretches of one straight edge read the arm's width as a 5 mm wall, tests/test_photo.py).
STRETCH_FACE_SHARE = 0.75
STRETCH_FACE_PX = 1.5
#: The second try where the first reads nothing (:func:`wall_thickness`): an outline found through a cast
#: shadow or a rough edge is jagged at the pixel's scale, so each vertex's own normal points anywhere and few
#: runs of :data:`MIN_WALL_VERTICES` consecutive vertices face the camera (dev-mixed-black4-t25's cam, its
#: outline out over its coloured shadow: runs of at most 10 vertices). The wall's direction is the outline's over
#: a stretch: each normal is taken as the mean of :data:`SMOOTH_VERTICES` vertices' normals, and the wall's
#: bottom edge is looked for up to :data:`SHADOW_INWARD_PX` inside the outline too (there the outline lies
#: 7 px outside the wall's foot, measured against its truth file). On the committed renders
#: (tests/data/reallight) with the whole wall and its stretches required to agree, 61 and 81 vertices read
#: the same two of the parts left unread (7 mm cam 9.2 +- 1.6, 3 mm cam 4.2 +- 1.8), 41 one, 15 and 31 none; any of
#: them without the agreement read 2-6 of them, among them readings 3.9-5.9 mm off (2.8-4.2 sigma).
SMOOTH_VERTICES = 61
SHADOW_INWARD_PX = 8.0
#: The third try where the first two read nothing (:func:`wall_thickness`, the foot of a wall in shade): each
#: profile less its Gaussian blur of this sigma (px) is scored, every profile kept. The lens's blur in the committed
#: renders is about 1 px; a cast shadow's outer edge is a penumbra about t D / d wide behind a wall t high under a
#: light D across at distance d (geometric estimate: the renders' spot and warm lights are 10 cm across at about
#: 0.5 m, 0.6-1.6 mm for 3-8 mm parts, 2-5 px at 0.3 mm/px; window and area lights wider still), so the high-pass
#: keeps the wall's two edges and takes out most of the shadow's outer edge, which the paper-beside test
#: (:data:`PAPER_BESIDE`) keeps out of the first try. On the tuned renders (benchmarks/probe_wall_foot.py, variant
#: ``sharp``) 2 px read 64 of 114 parts, all within 2.4 sigma; the try runs only where :data:`MIN_WALL_VERTICES`
#: profiles are in shade and the whole wall and its stretches agree.
SHARP_BLUR_PX = 2.0
#: Estimates closer than this (mm) are measured again in one run, at their mean.
SAME_THICKNESS_MM = 0.2
#: Lowest elevation (degrees) of the light for the reach beside a lifted part within which a region the
#: run at the thickness read does not find is taken as a piece of it (:func:`measured_again`); the
#: lowest light a shadow alone is allowed (:data:`~scanmass.segment.shadow.SHADOW_ONLY_MIN_ELEVATION_DEG`).
PIECE_MIN_ELEVATION_DEG = 15.0
#: Largest area of such a piece, as a share of the part measured again.
PIECE_MAX_AREA_SHARE = 0.25
#: Thicknesses (mm) tried for the round-rim cue (:func:`rim_thickness`); 0 is the outline as seen.
RIM_GRID_MM = np.arange(0.0, 12.0001, 0.1)
#: Fewest vertices of a ring that takes part in the round-rim cue.
RIM_MIN_VERTICES = 24
#: Largest RMS (px) of a ring's radial residuals about its circle at its best thickness for the ring to
#: count as round. On the committed renders (tests/data/reallight) the drilled holes and discs whose rims
#: read within 0.7 mm of the truth fit their circle to 0.13-0.26 px at the best thickness; the cams' outer
#: rings (not circles) 0.47-0.58 px, the holes in a cast shadow or a dark pit 0.4-1.3 px.
RIM_ROUND_PX = 0.35
#: The RMS must rise at least this many times its least value at no lift (the outline as seen) and at the
#: end of :data:`RIM_GRID_MM`: a ring already round as seen (its outline on the top face's edge all round, a
#: wall taken as paper, or one too little tilted to tell) reads nothing. On the committed renders the rings
#: round as seen rise 1.0-1.1 times there, the rims read 1.36-4.4 times.
RIM_RISE_SEEN = 1.3
RIM_RISE_FAR = 2.0
#: The 1-sigma of a ring's reading: this share of the width (mm) of its dip where the RMS lies within
#: sqrt(2) of its least value, with :data:`SIGMA_SHARE` and :data:`SIGMA_FLOOR_MM`. A reading whose sigma
#: exceeds :data:`RIM_MAX_SHARE` of it is not taken (on the committed renders the dips 5.5-9.8 mm wide read
#: 0.3-4.6 mm off, those 1.5-4.6 mm wide within 0.7 mm).
RIM_WIDTH_SHARE = 0.25
RIM_MAX_SHARE = 0.6


@dataclass(frozen=True)
class WallThickness:
    """One part's thickness read from its side walls, or why it was not.

    ``thickness_mm`` is None where the walls could not be read (``reason`` says why);
    ``sigma_mm`` is its 1-sigma; ``band_px`` the median width (px) of the wall facing the
    camera at the estimate; ``top_edge`` is True where the outline ran on the top face's edge
    on the camera's side too (the wall was taken as background).
    """

    label: int
    thickness_mm: float | None
    sigma_mm: float = 0.0
    band_px: float = 0.0
    top_edge: bool = False
    reason: str = ""
    cue: str = "wall"


def _rings(part: Part) -> list[np.ndarray]:
    """A part's rings (mm): outer counter-clockwise, holes clockwise (normals away from material)."""
    rings = [np.asarray(part.outline_mm, float)] + [np.asarray(h.outline_mm, float) for h in part.holes]
    return [r if (signed_area(r) > 0) == (k == 0) else r[::-1] for k, r in enumerate(rings)]


def _pair_scores(
    grad: np.ndarray, s_px: np.ndarray, band_px: np.ndarray, inward_px: float = 0.0
) -> tuple[np.ndarray, np.ndarray]:
    """Per profile: the best score of two edges ``band_px`` apart with a quiet wall between, and where the first lies.

    ``grad``: (N, S) gradient shares along each profile (inward positive, s in ``s_px``).
    The bottom edge lies at s0 (between the outline and one band outward, where the outline ran on
    the top face's edge), the top face's edge at s0 + band; the score is the lower of the two
    gradients less the gradient half-way (a single blurred edge scores nothing). ``inward_px`` lets the
    bottom edge lie up to that much further inside the outline (an outline run out over a cast shadow).
    """
    n, m = grad.shape
    shift = np.round(band_px / PROFILE_STEP_PX).astype(int)
    zero = int(np.searchsorted(s_px, 0.0))
    pad = int(round(1.5 / PROFILE_STEP_PX))
    lo = np.maximum(zero - shift - pad, 0)
    # every start offset at once (profiles x offsets); the first best offset wins, as a running strict maximum would
    inward = int(round(inward_px / PROFILE_STEP_PX))
    i0 = lo[:, None] + np.arange(int(shift.max()) + 2 * pad + inward + 1)[None, :]
    ok = (i0 <= zero + pad + inward) & (i0 + shift[:, None] < m)
    i0c = np.minimum(i0, m - 1)
    a = np.take_along_axis(grad, i0c, axis=1)
    b = np.take_along_axis(grad, np.minimum(i0c + shift[:, None], m - 1), axis=1)
    c = np.take_along_axis(grad, np.minimum(i0c + (shift // 2)[:, None], m - 1), axis=1)
    score = np.where(ok, np.minimum(a, b) - c, -1.0)
    first = np.argmax(score, axis=1)
    rows = np.arange(n)
    best = score[rows, first].astype(np.float64)  # the running maximum's type: the curve averages in float64
    where = np.where(best > -1.0, s_px[i0c[rows, first]], 0.0)
    return np.maximum(best, -1.0), where


@dataclass(frozen=True)
class _ScoreTable:
    """Every (profile, whole number of steps of its band) pair's :func:`_pair_scores` score and start.

    ``shifts`` (trial thicknesses x profiles) holds each profile's band in steps, ``v0`` the fewest;
    ``best`` and ``where`` (steps - v0 x profiles) the scores and starts of the pairs a trial needs.
    A profile's score does not depend on the other profiles scored with it, so the curve of any set
    of profiles (a stretch of the wall) is read off the one table.
    """

    shifts: np.ndarray
    v0: int
    best: np.ndarray
    where: np.ndarray

    def curve(self, cols: np.ndarray | None = None) -> tuple[np.ndarray, list[np.ndarray]]:
        """Per trial thickness: the mean positive score of the profiles ``cols`` (default all) and their starts."""
        cols = np.arange(self.shifts.shape[1]) if cols is None else cols
        shifts = self.shifts[:, cols]
        curve = np.empty(len(shifts))
        starts = []
        for i, row in enumerate(shifts):
            curve[i] = float(np.mean(np.maximum(self.best[row - self.v0, cols], 0.0)))
            starts.append(self.where[row - self.v0, cols])
        return curve, starts


def _score_table(grad: np.ndarray, s_px: np.ndarray, bands: np.ndarray, inward_px: float = 0.0) -> _ScoreTable:
    """The :class:`_ScoreTable` of the profiles ``grad`` at the trial bands ``bands`` (rows, px).

    A profile's score depends on its band only through the band's whole number of steps, and
    neighbouring thicknesses mostly share it: each (profile, steps) pair is scored once, the
    profiles of one step count together. ``inward_px`` as :func:`_pair_scores` takes it.
    """
    n = grad.shape[0]
    shifts = np.round(bands / PROFILE_STEP_PX).astype(int)  # as _pair_scores rounds each row
    v0 = int(shifts.min()) if shifts.size else 0
    need = np.zeros((int(shifts.max()) - v0 + 1 if shifts.size else 0, n), bool)
    need[shifts - v0, np.arange(n)[None, :]] = True
    best = np.zeros(need.shape)
    where = np.zeros(need.shape)
    for v in np.flatnonzero(need.any(axis=1)):
        rows = np.flatnonzero(need[v])
        band = np.full(len(rows), (v + v0) * PROFILE_STEP_PX)
        best[v, rows], where[v, rows] = _pair_scores(grad[rows], s_px, band, inward_px)
    return _ScoreTable(shifts, v0, best, where)


def _score_curve(
    grad: np.ndarray, s_px: np.ndarray, bands: np.ndarray, inward_px: float = 0.0
) -> tuple[np.ndarray, list[np.ndarray]]:
    """Per trial thickness (rows of ``bands``, px): the mean positive :func:`_pair_scores` score and each profile's start."""
    return _score_table(grad, s_px, bands, inward_px).curve()


def _linear_profiles(grey: np.ndarray, table: np.ndarray, pts: np.ndarray) -> np.ndarray:
    """Linear light sampled at ``pts`` (px, float32 (N, S, 2)) with bilinear interpolation, outside the image 0.

    Only the box the points and their interpolation neighbours cover is converted to linear light.
    Each coordinate less the box's whole-pixel corner is exact in float32 (a whole number below the
    coordinate removes only leading bits), so the remap reads the same pixels with the same weights
    as on the whole converted image; the box reaches the image's border wherever a point lies beyond it.
    """
    h, w = grey.shape[:2]
    xs, ys = pts[..., 0], pts[..., 1]
    finite = np.isfinite(xs) & np.isfinite(ys)
    if not finite.any():
        return np.zeros(xs.shape, np.float32)
    x0 = int(min(max(math.floor(float(xs[finite].min())) - 2, 0), w))
    x1 = int(max(min(math.ceil(float(xs[finite].max())) + 3, w), x0))
    y0 = int(min(max(math.floor(float(ys[finite].min())) - 2, 0), h))
    y1 = int(max(min(math.ceil(float(ys[finite].max())) + 3, h), y0))
    if x1 <= x0 or y1 <= y0:
        return np.zeros(xs.shape, np.float32)
    lin = table[grey[y0:y1, x0:x1]]
    return cv2.remap(lin, xs - np.float32(x0), ys - np.float32(y0), cv2.INTER_LINEAR)


def _tops_seen(scale: PhotoScale) -> list[np.ndarray]:
    """Per thickness of :data:`THICKNESS_GRID_MM`: the map (mm -> mm) from a bottom point to where the top edge above it is seen."""
    h0, k = scale.plane_map.matrix, scale.camera_matrix
    assert k is not None  # wall_thickness reads photos with a camera matrix only
    return [np.linalg.inv(e) for e in footprint_maps_mm(h0, k, THICKNESS_GRID_MM)]


def seen_band_px(
    to_px: Callable[[np.ndarray], np.ndarray], tops_seen: list[np.ndarray], x_mm: np.ndarray, n_px: np.ndarray
) -> np.ndarray:
    """Per trial thickness and boundary point: the width (px) across the outline of the side wall seen there.

    ``x_mm`` (N, 2) are points of the wall's foot on the mat, ``n_px`` (N, 2) their outward unit normals in
    ideal pixels, ``tops_seen`` one map (mm -> mm, :func:`_tops_seen`) per thickness from a foot point to where
    the top edge above it is seen, and ``to_px`` the plane map's mm -> ideal px. The width is the top edge's
    image less the foot's, along the inward normal: positive where the wall faces the camera (it shows between
    the top face's edge and its foot), negative where the top face hides it.

    References
    ----------
    Hartley, R. and Zisserman, A. (2004) *Multiple View Geometry in Computer Vision*, 2nd ed., section 6.1
    (the pinhole camera: under a camera straight down from height H, a vertical edge of height t at ground
    distance r from the nadir spans r t / (H - t) on the mat).
    """
    p0 = to_px(x_mm)
    bands = np.empty((len(tops_seen), len(x_mm)))
    for i, top_seen in enumerate(tops_seen):
        seen = apply_h(top_seen, x_mm)  # the top edge above x
        bands[i] = -np.sum(n_px * (to_px(seen) - p0), axis=1)  # inward: the wall faces the camera
    return bands


def _smooth_normals(ring: np.ndarray, k: int) -> np.ndarray:
    """A closed ring's unit vertex normals (:func:`~scanmass.geometry.vertex_normals`), each the mean of ``k`` consecutive ones.

    The window is centred on the vertex and wraps round the ring; ``k`` of 1 or less, or a ring shorter
    than ``2 k``, keeps the normals as they are.

    Examples
    --------
    A square's corner normals lean 45 degrees; averaged over 3 vertices of a finely cut side, a side's
    normal is its own:

    >>> side = np.linspace(0.0, 10.0, 11)[:-1]
    >>> square = np.vstack([np.c_[side, 0 * side], np.c_[0 * side + 10, side], np.c_[10 - side, 0 * side + 10],
    ...                     np.c_[0 * side, 10 - side]])
    >>> np.round(_smooth_normals(square, 3)[5], 6).tolist()
    [0.0, -1.0]
    """
    normal = vertex_normals(ring)
    if k <= 1 or len(ring) < 2 * k:
        return normal
    padded = np.concatenate([normal[-(k // 2) :], normal, normal[: k - 1 - k // 2]])
    kernel = np.ones(k) / k
    out = np.c_[np.convolve(padded[:, 0], kernel, "valid"), np.convolve(padded[:, 1], kernel, "valid")]
    return np.asarray(out / np.maximum(np.hypot(out[:, 0], out[:, 1]), 1e-12)[:, None])


def _one_part(
    grey: np.ndarray,
    table: np.ndarray,
    scale: PhotoScale,
    part: Part,
    tops_seen: list[np.ndarray],
    smooth: int = 0,
    inward_px: float = 0.0,
    sharp_px: float = 0.0,
) -> WallThickness:
    """:func:`wall_thickness` for one part; ``tops_seen`` from :func:`_tops_seen` (the same for every part).

    With ``sharp_px`` (the third try, :data:`SHARP_BLUR_PX`), a part with at least :data:`MIN_WALL_VERTICES`
    profiles in shade (the wall's foot meeting the part's own cast shadow) keeps them all and each profile less its blur by that many px is scored: the wall's two
    edges are as sharp as the lens makes them, the shadow's outer edge is a penumbra several px wide and drops
    out; the reading counts only where the whole wall's and its stretches' agree, as with ``smooth`` (``cue``
    ``"wall foot"``).

    With ``smooth`` (the second try, :data:`SMOOTH_VERTICES`), each vertex's normal is the mean of that many
    vertices' normals, the bottom edge is looked for up to ``inward_px`` inside the outline as well, and a
    reading counts only where the whole wall's and its stretches' (:func:`_stretch_reading`) agree within the
    root sum of squares of their sigmas; its sigma is the largest of theirs and their difference (``cue``
    ``"wall smoothed"``).
    """
    pm = scale.plane_map
    rings = _rings(part)
    x_mm = np.vstack(rings)
    ring_of = np.repeat(np.arange(len(rings)), [len(r) for r in rings])
    n_mm = np.vstack([_smooth_normals(r, smooth) for r in rings])
    p0 = pm.to_px(x_mm)
    d = pm.to_px(x_mm + 0.05 * n_mm) - p0
    n_px = d / np.maximum(np.linalg.norm(d, axis=1), 1e-12)[:, None]  # away from the material
    bands = seen_band_px(pm.to_px, tops_seen, x_mm, n_px)
    near = bands[-1] > 2 * MIN_BAND_PX
    if np.count_nonzero(near) < MIN_WALL_VERTICES:
        return WallThickness(part.label, None, reason="too little of its side wall faces the camera")
    bands, p0, n_px = bands[:, near], p0[near], n_px[near]
    reach = float(bands[-1].max()) + 3.0
    s_px = np.arange(-reach, reach + 1e-9, PROFILE_STEP_PX)
    pts = p0[:, None, :] - s_px[None, :, None] * n_px[:, None, :]
    undistort = pm.undistort
    if undistort is not None:
        flat = pts.reshape(-1, 2)
        pts = (2.0 * flat - undistort(flat)).reshape(pts.shape)  # ideal -> photo px, to about a pixel
    prof = _linear_profiles(grey, table, pts.astype(np.float32))
    outside = prof[:, : int(round(2.0 / PROFILE_STEP_PX))].mean(axis=1)  # 1-3 px beyond the widest wall
    clear = outside >= PAPER_BESIDE * np.percentile(outside, 90)
    if sharp_px:
        if np.count_nonzero(~clear) < MIN_WALL_VERTICES:
            return WallThickness(
                part.label, None, reason="no wall band stands out from its edges (low contrast, or hidden)"
            )
        clear = np.ones_like(clear)
        prof = prof - _blur_rows(prof, sharp_px / PROFILE_STEP_PX)
    if np.count_nonzero(clear) < MIN_WALL_VERTICES:
        return WallThickness(part.label, None, reason="the paper beside its wall facing the camera is in shadow")
    prof, bands = prof[clear], bands[:, clear]
    grad = np.abs(np.gradient(prof, PROFILE_STEP_PX, axis=1))
    grad /= grad.max(axis=1, keepdims=True) + 1e-9
    scores = _score_table(grad, s_px, bands, inward_px)
    curve, starts = scores.curve()
    peak, prominence = _peak_of(curve)
    unread = "no wall band stands out from its edges (low contrast, or hidden)"
    band = float(np.median(bands[peak]))
    if peak in (0, len(curve) - 1) or prominence < MIN_PROMINENCE:
        order = np.flatnonzero(near)[clear]
        on_face = _face_test(pm.to_px, rings, p0[clear], n_px[clear])
        stretched = (
            None
            if smooth or sharp_px
            else _stretch_reading(grad, s_px, bands, order, ring_of[order], on_face, table=scores)
        )
        if stretched is not None:
            return replace(stretched, label=part.label)
        return WallThickness(part.label, None, reason=unread)
    if band < MIN_BAND_PX:
        return WallThickness(part.label, None, reason=f"its side wall is only {band:.1f} px wide (little tilt)")
    width = half_height_width_mm(curve, peak, prominence)
    t = max(_vertex_mm(curve, peak) - READ_EXCESS_MM, float(THICKNESS_GRID_MM[0]))
    sigma = math.hypot(width / 2.355, SIGMA_SHARE * t + SIGMA_FLOOR_MM)
    top_edge = float(np.median(starts[peak] / np.maximum(bands[peak], 1e-9))) < -0.5
    if not smooth and not sharp_px:
        return WallThickness(part.label, t, sigma, band, top_edge)
    # the second try: its stretches read alone must agree with the whole wall
    order = np.flatnonzero(near)[clear]
    on_face = _face_test(pm.to_px, rings, p0[clear], n_px[clear])
    parts_read = _stretch_reading(grad, s_px, bands, order, ring_of[order], on_face, inward_px, scores)
    if parts_read is None or parts_read.thickness_mm is None:
        return WallThickness(part.label, None, reason=unread)
    apart = abs(parts_read.thickness_mm - t)
    if apart > math.hypot(parts_read.sigma_mm, sigma):
        return WallThickness(part.label, None, reason=unread)
    cue = "wall foot" if sharp_px else "wall smoothed"
    return WallThickness(part.label, t, max(sigma, parts_read.sigma_mm, apart), band, top_edge, cue=cue)


def _peak_of(curve: np.ndarray) -> tuple[int, float]:
    """A score curve's highest point and its prominence: how far it rises above the lower of its two flanks' lowest."""
    peak = int(np.argmax(curve))
    return peak, float(curve[peak] - max(curve[: peak + 1].min(), curve[peak:].min()))


def _blur_rows(rows: np.ndarray, sigma: float) -> np.ndarray:
    """Each row blurred by a Gaussian of ``sigma`` samples, its ends repeated (OpenCV; the kernel cut at 4 sigma).

    The same as ``scipy.ndimage.gaussian_filter1d(rows, sigma, axis=1, mode="nearest")``, without loading
    scipy on the measuring path (tests/test_imports.py).

    Examples
    --------
    >>> from scipy.ndimage import gaussian_filter1d
    >>> rows = np.random.default_rng(0).random((3, 40))
    >>> bool(np.allclose(_blur_rows(rows, 2.5), gaussian_filter1d(rows, 2.5, axis=1, mode="nearest")))
    True
    """
    radius = int(4.0 * sigma + 0.5)
    kernel = cv2.getGaussianKernel(2 * radius + 1, sigma, cv2.CV_64F)
    one = np.ones((1, 1), np.float64)
    out = cv2.sepFilter2D(np.asarray(rows, np.float64), cv2.CV_64F, kernel, one, borderType=cv2.BORDER_REPLICATE)
    return out.astype(rows.dtype, copy=False)


def half_height_width_mm(curve: np.ndarray, peak: int, prominence: float) -> float:
    """The width (mm of thickness) of a score curve's peak, where it stays above half its prominence."""
    half = curve >= curve[peak] - 0.5 * prominence
    lo = hi = peak
    while lo > 0 and half[lo - 1]:
        lo -= 1
    while hi < len(curve) - 1 and half[hi + 1]:
        hi += 1
    return float(THICKNESS_GRID_MM[hi] - THICKNESS_GRID_MM[lo])


def _vertex_mm(curve: np.ndarray, peak: int) -> float:
    """The thickness (mm) at a score curve's peak: the parabola's vertex through the peak and its neighbours."""
    t = float(THICKNESS_GRID_MM[peak])
    if 0 < peak < len(curve) - 1:
        y0, y1, y2 = curve[peak - 1 : peak + 2]
        den = y0 - 2 * y1 + y2
        if den < 0:
            t += float(0.5 * (y0 - y2) / den) * float(THICKNESS_GRID_MM[1] - THICKNESS_GRID_MM[0])
    return t


def _face_test(
    to_px: Callable[[np.ndarray], np.ndarray], rings: list[np.ndarray], p0: np.ndarray, n_px: np.ndarray
) -> Callable[[np.ndarray, np.ndarray], np.ndarray]:
    """Whether points ``s`` px inward of the profiles ``rows`` (origins ``p0``, outward normals ``n_px``) lie within the part.

    The part's rings (mm) are filled in ideal pixels (the outer ring, less its holes) over the box
    the profiles reach; a point is read at its nearest pixel, and outside the box counts as outside.
    """
    rings_px = [to_px(r) for r in rings]
    lo = np.floor(np.vstack(rings_px).min(axis=0)).astype(int) - 2
    hi = np.ceil(np.vstack(rings_px).max(axis=0)).astype(int) + 2
    mask = np.zeros((int(hi[1] - lo[1]) + 1, int(hi[0] - lo[0]) + 1), np.uint8)
    for k, r in enumerate(rings_px):
        cv2.fillPoly(mask, [np.round((r - lo) * 16).astype(np.int32)], 0 if k else 1, shift=4)

    def within(rows: np.ndarray, s: np.ndarray) -> np.ndarray:
        pts = np.round(p0[rows] - s[:, None] * n_px[rows] - lo).astype(int)
        ok = (pts[:, 0] >= 0) & (pts[:, 1] >= 0) & (pts[:, 0] < mask.shape[1]) & (pts[:, 1] < mask.shape[0])
        out = np.zeros(len(rows), bool)
        out[ok] = mask[pts[ok, 1], pts[ok, 0]] > 0
        return out

    return within


def _stretch_reading(
    grad: np.ndarray,
    s_px: np.ndarray,
    bands: np.ndarray,
    vertex: np.ndarray,
    ring: np.ndarray,
    on_face: Callable[[np.ndarray, np.ndarray], np.ndarray] | None = None,
    inward_px: float = 0.0,
    table: _ScoreTable | None = None,
) -> WallThickness | None:
    """A wall read stretch by stretch where the whole wall's score has no clear peak, or None.

    A wall band may show along part of the outline only: lit there, and elsewhere as dark as the top
    face, in the shade of the part or a neighbour, or beside a highlight; the mean score over the
    whole wall then buries the stretches that show it. ``grad`` and ``bands`` are those of
    :func:`_one_part` (profiles as columns of ``bands``), ``vertex`` and ``ring`` each profile's vertex
    index (in the rings stacked) and ring. Runs of consecutive vertices of one ring are cut into
    stretches of :data:`MIN_WALL_VERTICES` profiles, and each stretch's score curve
    (:class:`_ScoreTable`) is read as the whole wall's is: a peak inside the range, at least
    :data:`MIN_PROMINENCE` above its flanks, on a band at least :data:`MIN_BAND_PX` wide, and (with
    ``on_face``, :func:`_face_test`) with :data:`STRETCH_FACE_SHARE` of its profiles on the part
    :data:`STRETCH_FACE_PX` beyond the band's inner edge; its thickness less :data:`READ_EXCESS_MM`.
    The stretches are separate readings of one thickness, though not independent ones (they share the
    light and the segmentation): with at least :data:`STRETCH_MIN_READ` of them whose sample standard
    deviation is at most :data:`STRETCH_MAX_SPREAD` of their median, the estimate is that median and
    its 1-sigma their standard deviation (whole, not divided by their number) combined with the floor
    :data:`SIGMA_SHARE` and :data:`SIGMA_FLOOR_MM` (``cue`` ``"wall stretches"``). The label is left 0
    for the caller to set. ``table``: the whole wall's :func:`_score_table` (of these ``grad``, ``bands``
    and ``inward_px``), whose columns give each stretch's curve; made here where not given.
    """
    table = _score_table(grad, s_px, bands, inward_px) if table is None else table
    cut = np.flatnonzero((np.diff(vertex) != 1) | (np.diff(ring) != 0)) + 1
    reads: list[tuple[float, float, float]] = []
    for run in np.split(np.arange(len(vertex)), cut):
        for k in range(len(run) // MIN_WALL_VERTICES):
            st = run[k * MIN_WALL_VERTICES : (k + 1) * MIN_WALL_VERTICES]
            curve, starts = table.curve(st)
            peak, prominence = _peak_of(curve)
            band = float(np.median(bands[peak, st]))
            if peak in (0, len(curve) - 1) or prominence < MIN_PROMINENCE or band < MIN_BAND_PX:
                continue
            if on_face is not None:
                inner = np.asarray(starts[peak], float) + bands[peak, st] + STRETCH_FACE_PX
                if np.mean(on_face(st, inner)) < STRETCH_FACE_SHARE:
                    continue
            side = float(np.median(starts[peak] / np.maximum(bands[peak, st], 1e-9)))
            reads.append((max(_vertex_mm(curve, peak) - READ_EXCESS_MM, float(THICKNESS_GRID_MM[0])), band, side))
    if len(reads) < STRETCH_MIN_READ:
        return None
    ts = np.array([r[0] for r in reads])
    t = float(np.median(ts))
    spread = float(np.std(ts, ddof=1))
    if spread > STRETCH_MAX_SPREAD * t:
        return None
    sigma = math.hypot(spread, SIGMA_SHARE * t + SIGMA_FLOOR_MM)
    band = float(np.median([r[1] for r in reads]))
    top_edge = float(np.median([r[2] for r in reads])) < -0.5
    return WallThickness(0, t, sigma, band, top_edge, cue="wall stretches")


def wall_thickness(image: LoadedImage, scale: PhotoScale, result: Measurement) -> list[WallThickness]:
    """Each part's thickness read from the band its side wall facing the camera shows.

    A part of thickness t seen from a camera off its nadir shows, on the side facing the
    camera, the wall between its bottom edge (on the paper) and its top face's edge; the top
    edge above a bottom point ``X`` is seen at ``E_t^-1 X`` (:class:`~scanmass.scale.homography.ElevationHook`),
    so the band's width across the outline, per vertex and thickness, follows from the plane map
    and the camera matrix. Across every vertex whose wall faces the camera the brightness is
    sampled along the normal (linear light, :data:`PROFILE_STEP_PX`), where the paper beyond
    the widest wall is not in shadow (:data:`PAPER_BESIDE`); for each thickness in
    :data:`THICKNESS_GRID_MM` each profile scores two edges that band apart with a quiet wall
    between (:func:`_pair_scores`: the lower gradient of the two less the gradient half-way),
    the bottom edge anywhere from the outline to one band outward (the outline may run on either
    edge). The thickness with the highest mean score, less :data:`READ_EXCESS_MM` (what the score
    reads above the truth), is the estimate; its 1-sigma is the width
    of the peak where it stands half its prominence (as a Gaussian's FWHM / 2.355) combined with
    :data:`SIGMA_SHARE` of it and :data:`SIGMA_FLOOR_MM`. A part with too little wall facing
    the camera (:data:`MIN_WALL_VERTICES`, :data:`MIN_BAND_PX`: little tilt near the image's
    centre), or whose score has no clear peak (:data:`MIN_PROMINENCE`: a wall as dark as the
    top face, a wall hidden by a shadow) gets none and the reason, unless stretches of its wall
    read alone agree on one (:func:`_stretch_reading`: a band that shows along part of the outline).

    References
    ----------
    Hartley, R. and Zisserman, A. (2004) *Multiple View Geometry in Computer Vision*, 2nd ed.,
    section 8.1 (the homography induced by a plane, here the plane of the top face).
    """
    if scale.camera_matrix is None:
        return []
    table = np.asarray(image.to_linear, np.float32)
    out = []
    tops_seen: list[np.ndarray] = []
    for part in result.parts:
        if part.outline_mm is None or any(h.outline_mm is None for h in part.holes):
            continue
        tops_seen = tops_seen or _tops_seen(scale)
        one = _one_part(image.grey, table, scale, part, tops_seen)
        if one.thickness_mm is None:
            again = _one_part(image.grey, table, scale, part, tops_seen, SMOOTH_VERTICES, SHADOW_INWARD_PX)
            one = one if again.thickness_mm is None else again
        if one.thickness_mm is None:
            again = _one_part(image.grey, table, scale, part, tops_seen, sharp_px=SHARP_BLUR_PX)
            one = one if again.thickness_mm is None else again
        out.append(one)
    return out


def _ring_rms(ring: np.ndarray) -> float:
    """RMS (mm) of a ring's radial residuals about its algebraic least-squares circle (Kasa's fit)."""
    u = ring - ring.mean(axis=0)
    design = np.column_stack([u, np.ones(len(u))])
    (d, e, f), *_ = np.linalg.lstsq(design, -(u * u).sum(axis=1), rcond=None)
    cx, cy = -0.5 * d, -0.5 * e
    radius = math.sqrt(max(cx * cx + cy * cy - f, 1e-12))
    return float(np.sqrt(np.mean((np.hypot(u[:, 0] - cx, u[:, 1] - cy) - radius) ** 2)))


def _one_rim(
    h0: np.ndarray, k: np.ndarray, ring: np.ndarray, hole: bool, mm_per_px: float, maps: list[np.ndarray]
) -> tuple[float, float] | None:
    """One ring's thickness reading and 1-sigma (mm) by :func:`rim_thickness`, or None.

    The RMS is taken at every 4th thickness of :data:`RIM_GRID_MM`, then at every one within 0.5 mm
    of the least of those (the RMS has one dip: the rest of the grid would not move the least).
    ``maps``: the footprint map of each thickness of the grid
    (:func:`~scanmass.scale.homography.footprint_maps_mm`).
    """
    rms: dict[int, float] = {}

    def at(idx: np.ndarray) -> None:
        for i in idx:
            if int(i) not in rms:
                t = float(RIM_GRID_MM[i])
                raised = ring if t == 0 else raised_outline_mm(h0, k, t, ring, hole=hole, footprint_mm=maps[int(i)])
                rms[int(i)] = _ring_rms(raised)

    n = len(RIM_GRID_MM)
    at(np.arange(0, n, 4))
    coarse = min(rms, key=lambda i: rms[i])
    at(np.arange(max(coarse - 5, 0), min(coarse + 6, n)))
    idx = np.array(sorted(rms))
    vals = np.array([rms[i] for i in idx])
    j = int(np.argmin(vals))
    least = float(vals[j])
    if not 0 < idx[j] < n - 1 or least > RIM_ROUND_PX * mm_per_px:
        return None
    if rms[0] < RIM_RISE_SEEN * least or rms[n - 1] < RIM_RISE_FAR * least:
        return None
    step = float(RIM_GRID_MM[1] - RIM_GRID_MM[0])
    y0, y1, y2 = rms[int(idx[j]) - 1], least, rms[int(idx[j]) + 1]
    den = y0 - 2 * y1 + y2
    t = float(RIM_GRID_MM[idx[j]]) + (float(0.5 * (y0 - y2) / den) * step if den > 0 else 0.0)
    near = vals**2 <= 2.0 * least**2
    lo = hi = j
    while lo > 0 and near[lo - 1]:
        lo -= 1
    while hi < len(vals) - 1 and near[hi + 1]:
        hi += 1
    # each end half-way to the first thickness tried outside the dip (the grid's spacing differs across it)
    g = RIM_GRID_MM[idx]
    width = 0.5 * float(g[hi] + g[min(hi + 1, len(g) - 1)]) - 0.5 * float(g[lo] + g[max(lo - 1, 0)])
    sigma = math.hypot(RIM_WIDTH_SHARE * width, SIGMA_SHARE * t + SIGMA_FLOOR_MM)
    return (t, sigma) if sigma <= RIM_MAX_SHARE * t else None


def rim_thickness(scale: PhotoScale, result: Measurement) -> list[WallThickness]:
    """Each part's thickness read from its round rings (drilled holes, discs), independent of the wall band.

    A ring that is a circle on the top face and at the bottom (a drilled hole, a disc's rim) is seen,
    in a tilted view, as two arcs: on its side facing the camera the top face's edge, lifted by the
    parallax (for a hole, the paper seen through it is bounded there by the top rim and on the far
    side by the bottom edge; for a disc, the seen outline is the union of its top and its bottom).
    Mapped to the footprint for a trial thickness t
    (:func:`~scanmass.scale.homography.raised_outline_mm`: the vertices whose outward normal points
    along the parallax move by it), the ring is a circle at the true thickness only; below it a lens
    is left, above it the arcs overshoot. For every t in :data:`RIM_GRID_MM` each ring of at least
    :data:`RIM_MIN_VERTICES` vertices is fitted with a circle (:func:`_ring_rms`); a ring reads the t
    of its least RMS (a parabola through the least and its neighbours) where the least is round
    (:data:`RIM_ROUND_PX`) and the RMS rises away from it at both ends (:data:`RIM_RISE_SEEN`,
    :data:`RIM_RISE_FAR`); its 1-sigma is a share of the dip's width (:data:`RIM_WIDTH_SHARE`) with
    the floor of :func:`wall_thickness`, and a reading whose sigma exceeds :data:`RIM_MAX_SHARE` of it
    is dropped. A part's rings are averaged with inverse-variance weights where they agree within
    their sigmas (else the part reads nothing); its sigma is the least of theirs (the rings of one
    part share the light and the segmentation, so their errors are not independent).

    Parts with no reading are left out. The outline is taken as running on the wall's foot where the
    wall faces the camera (``top_edge`` False): a ring seen on the top face's edge all round is
    round as seen and reads nothing.

    References
    ----------
    Kasa, I. (1976) A circle fitting procedure and its error analysis, *IEEE Trans. Instrum.
    Meas.* IM-25(1), 8-14 (the circle fit). Hartley, R. and Zisserman, A. (2004) *Multiple View
    Geometry in Computer Vision*, 2nd ed., section 8.1 (the homography induced by the top face's plane).
    """
    if scale.camera_matrix is None:
        return []
    h0, k = scale.plane_map.matrix, scale.camera_matrix
    out = []
    maps: list[np.ndarray] = []  # each thickness's footprint map, the pose decomposed once (made at the first ring)
    for part in result.parts:
        if part.outline_mm is None or any(h.outline_mm is None for h in part.holes):
            continue
        reads = []
        for j, ring in enumerate(_rings(part)):
            if len(ring) >= RIM_MIN_VERTICES:
                maps = maps or footprint_maps_mm(h0, k, RIM_GRID_MM)
                one = _one_rim(h0, k, ring, j > 0, scale.plane_map.mm_per_px, maps)
                if one is not None:
                    reads.append(one)
        if not reads:
            continue
        ts = np.array([r[0] for r in reads])
        ss = np.array([r[1] for r in reads])
        w = 1.0 / ss**2
        t = float(np.sum(w * ts) / np.sum(w))
        if np.any(np.abs(ts - t) > ss):
            continue
        out.append(WallThickness(part.label, t, float(ss.min()), cue="rim"))
    return out


def fused(walls: list[WallThickness], rims: list[WallThickness]) -> list[WallThickness]:
    """The wall-band estimates with the round-rim readings (:func:`rim_thickness`) added or fused.

    A part read by its rims only takes that reading; a part read by both, where the two agree within
    the root sum of squares of their sigmas, takes their inverse-variance mean and its sigma
    (``cue`` ``"wall+rim"``); where they disagree, the wall estimate stays with its sigma widened to
    the difference (both within 1 sigma of it), but a reading of the wall's foot (``cue`` ``"wall foot"``,
    the last and least sure try, made only for want of another reading) gives way to the rims' reading as it
    is. Parts without a wall estimate keep their reason.
    """
    by_label = {r.label: r for r in rims}
    out = []
    for w in walls:
        r = by_label.pop(w.label, None)
        if r is None or r.thickness_mm is None:
            out.append(w)
        elif w.thickness_mm is None:
            out.append(r)
        elif abs(w.thickness_mm - r.thickness_mm) <= math.hypot(w.sigma_mm, r.sigma_mm):
            a, b = 1.0 / w.sigma_mm**2, 1.0 / r.sigma_mm**2
            t = (a * w.thickness_mm + b * r.thickness_mm) / (a + b)
            out.append(replace(w, thickness_mm=t, sigma_mm=1.0 / math.sqrt(a + b), cue="wall+rim"))
        elif w.cue == "wall foot":  # the last try, run only for want of a reading, yields to the rims' reading
            out.append(r)
        else:
            out.append(replace(w, sigma_mm=max(w.sigma_mm, abs(w.thickness_mm - r.thickness_mm))))
    return out + list(by_label.values())


def footprint_rings(
    scale: PhotoScale, part: Part, thickness_mm: float, top_edge: bool
) -> tuple[np.ndarray, list[np.ndarray]]:
    """A part's rings (mm) moved to its footprint for a top face ``thickness_mm`` above the mat.

    :func:`~scanmass.scale.homography.raised_outline_mm` for each ring (a vertex whose outward
    normal points along the parallax is a top-face point and moves to its footprint), the holes
    kept clockwise as :func:`_rings` gives them; with ``top_edge`` every vertex moves (the outline
    ran on the top face's edge all round).
    """
    assert scale.camera_matrix is not None
    h0, k = scale.plane_map.matrix, scale.camera_matrix
    outer, *holes = _rings(part)
    e = ElevationHook(h0, k, thickness_mm).footprint_mm  # made once for all the rings
    if top_edge:
        return apply_h(e, outer), [apply_h(e, ring) for ring in holes]
    # raised_outline_mm puts a ring counter-clockwise first: a (clockwise) hole comes back reversed
    return raised_outline_mm(h0, k, thickness_mm, outer, footprint_mm=e), [
        raised_outline_mm(h0, k, thickness_mm, ring, hole=True, footprint_mm=e)[::-1] for ring in holes
    ]


def footprint_pieces(scale: PhotoScale, part: Part, thickness_mm: float, top_edge: bool) -> list[np.ndarray]:
    """The outer rings of the part's other pieces (``Part.pieces_mm``) moved as :func:`footprint_rings` moves its outline."""
    if not part.pieces_mm:
        return []
    assert scale.camera_matrix is not None
    h0, k = scale.plane_map.matrix, scale.camera_matrix
    e = ElevationHook(h0, k, thickness_mm).footprint_mm
    rings = [np.asarray(r, float) for r in part.pieces_mm]
    if top_edge:
        return [apply_h(e, r) for r in rings]
    return [raised_outline_mm(h0, k, thickness_mm, r, footprint_mm=e) for r in rings]


@dataclass
class RaisedRings:
    """Footprint rings (:func:`footprint_rings`) of ``scale``'s parts, each made once per part, thickness and side.

    :func:`liftable` and :func:`with_wall_thickness` both raise a part by its estimate plus 1.5
    sigma; the second takes the first's rings where the part's rings are still the same (compared
    by value: a check between the two may have replaced the part).
    """

    scale: PhotoScale
    made: dict[tuple[int, float, bool], tuple[list[np.ndarray], tuple[np.ndarray, list[np.ndarray]]]] = field(
        default_factory=dict
    )

    def rings(self, part: Part, thickness_mm: float, top_edge: bool) -> tuple[np.ndarray, list[np.ndarray]]:
        """:func:`footprint_rings` of ``part`` on :attr:`scale`."""
        source = [np.array(part.outline_mm, float)] + [np.array(h.outline_mm, float) for h in part.holes]
        key = (part.label, float(thickness_mm), bool(top_edge))
        done = self.made.get(key)
        if done is not None and len(done[0]) == len(source):
            if all(a.shape == b.shape and np.array_equal(a, b) for a, b in zip(done[0], source)):
                return done[1]
        rings = footprint_rings(self.scale, part, thickness_mm, top_edge)
        self.made[key] = (source, rings)
        return rings


def _raised(
    raised: RaisedRings | None, scale: PhotoScale, part: Part, thickness_mm: float, top_edge: bool
) -> tuple[np.ndarray, list[np.ndarray]]:
    """:func:`footprint_rings`, through ``raised`` where it holds this scale's rings."""
    if raised is not None and raised.scale is scale:
        return raised.rings(part, thickness_mm, top_edge)
    return footprint_rings(scale, part, thickness_mm, top_edge)


def _moved(part: Part, outer: np.ndarray, holes: list[np.ndarray]) -> Part:
    """The part's figures from other rings (its uncertainties and terms kept)."""
    props = section_properties(outer, holes)
    new_holes = []
    for hole, ring in zip(part.holes, holes):
        a, qx, qy = ring_moments(ring)[:3]
        fit = fit_circle(ring)
        new_holes.append(
            replace(
                hole,
                area_mm2=abs(float(a)),
                centroid_mm=(float(qx / a), float(qy / a)),
                perimeter_mm=ring_perimeter(ring),
                circle_centre_mm=fit.centre_mm,
                diameter_mm=fit.diameter_mm,
                roundness_mm=fit.roundness_mm,
                outline_mm=ring,
            )
        )
    return replace(part, holes=new_holes, outline_mm=outer, **{f.name: getattr(props, f.name) for f in fields(props)})


def liftable(
    scale: PhotoScale, result: Measurement, estimates: list[WallThickness], raised: RaisedRings | None = None
) -> list[WallThickness]:
    """The estimates a part can be lifted by: a lifted hole must stay inside the lifted outline.

    ``raised`` keeps the rings raised by estimate plus 1.5 sigma for :func:`with_wall_thickness`.
    """
    out = []
    for est in estimates:
        part = next((p for p in result.parts if p.label == est.label), None)
        if est.thickness_mm is None or part is None:
            continue
        rings = _raised(raised, scale, part, est.thickness_mm + 1.5 * est.sigma_mm, est.top_edge)
        if not escaping_holes(*rings):
            out.append(est)
    return out


def unread_note(estimates: list[WallThickness], lifted: list[WallThickness]) -> str:
    """Why the side walls of the parts without a lift could not be read (for the parallax warning)."""
    done = {e.label for e in lifted}
    why = []
    for e in estimates:
        if e.label in done:
            continue
        reason = e.reason or "lifted by its estimate, one of its holes would leave its outline"
        why.append(f"part {e.label}: {reason}")
    return f"; the thickness could not be read from the side walls ({'; '.join(why)})" if why else ""


def with_wall_thickness(
    scale: PhotoScale, result: Measurement, estimates: list[WallThickness], raised: RaisedRings | None = None
) -> list[str]:
    """Lift each part with an estimate by its thickness, with the term ``thickness_estimate``; a warning.

    The part's rings go to their footprints (:func:`footprint_rings`) and its figures are
    computed again; the term is the change of every figure between the estimate and the
    estimate plus 1.5 sigma, taken as 1.5 sigma (the change is near linear in the thickness).
    The estimates are those of :func:`liftable` (the other parts keep ``thickness_unknown``), from the
    wall band, the round rims or both (:func:`fused`; ``cue`` in the record); ``raised`` holds the
    rings it raised (:class:`RaisedRings`).
    """
    lifted: set[int] = set()
    said = []
    record = {}
    for est in estimates:
        if est.thickness_mm is None:
            continue
        n = next((i for i, p in enumerate(result.parts) if p.label == est.label), None)
        if n is None:
            continue
        part = result.parts[n]
        outer, holes = footprint_rings(scale, part, est.thickness_mm, est.top_edge)
        outer_u, holes_u = _raised(raised, scale, part, est.thickness_mm + 1.5 * est.sigma_mm, est.top_edge)
        if escaping_holes(outer, holes) or escaping_holes(outer_u, holes_u):
            continue
        term = change_term(outer, holes, outer_u, holes_u, share=1.0 / 1.5)
        moved = replace(
            _moved(part, outer, holes), pieces_mm=footprint_pieces(scale, part, est.thickness_mm, est.top_edge)
        )
        # _with_extra_term takes half of a ring's change: the ring 4/3 of the 1.5-sigma move away is 1 sigma
        far = [h + (h_u - h) * (4.0 / 3.0) for h, h_u in zip(holes, holes_u)]
        result.parts[n] = _with_extra_term(moved, "thickness_estimate", term, far)
        lifted.add(est.label)
        how = {
            "rim": " (from its round rims)",
            "wall+rim": " (its wall band and round rims agreeing)",
            "wall stretches": " (from stretches of its wall band that agree)",
            "wall smoothed": " (its wall band read along its outline's mean direction, whole and in stretches agreeing)",
            "wall foot": " (the sharp edges of its wall band, its foot meeting its shadow, whole and in stretches agreeing)",
        }.get(est.cue, "")
        said.append(f"part {est.label} {est.thickness_mm:.1f} +- {est.sigma_mm:.1f} mm{how}")
        hole_u = [circle_change(h, hu)[0] / 1.5 for h, hu in zip(holes, holes_u)]
        record[str(est.label)] = {
            "hole_diameter_term_mm": max(hole_u, default=0.0),
            "thickness_mm": est.thickness_mm,
            "thickness_u_mm": est.sigma_mm,
            "wall_band_px": est.band_px,
            "outline_on_top_edge": est.top_edge,
            "cue": est.cue,
        }
    if not lifted:
        return []
    cues = {est.cue for est in estimates if str(est.label) in record}
    rims = any("rim" in cue for cue in cues)
    stretches = "wall stretches" in cues
    result.settings["thickness_estimate"] = {
        "method": "side-wall band; round rims" if rims else "side-wall band",
        "parts": record,
        "note": "thickness read from the width of the side wall facing the camera"
        + (
            " (cue 'wall stretches': stretches of it read alone that agree, where the whole band shows none)"
            if stretches
            else ""
        )
        + (" and (cue 'rim') from the thickness that maps the part's round rings to circles" if rims else "")
        + "; the figures are of the part's footprint with its face lifted by it (term 'thickness_estimate')",
    }
    return [
        f"thickness estimated from the side walls facing the camera (thickness not given): {', '.join(said)}; the "
        "figures are lifted by it and the uncertainty includes it (term 'thickness_estimate'); give --thickness MM "
        "for a better figure"
    ]


def _run_of(warning: str) -> str:
    """The label of the part whose run a warning of :func:`measured_again` came from ("... for part L, there ...")."""
    head = warning.split(")", 1)[0]
    return head.rsplit(" for part ", 1)[-1].split(",", 1)[0]


def measured_again(
    result: Measurement, walls: list[WallThickness], again: Callable[[float, float], Measurement]
) -> None:
    """Each lifted part measured again with the thickness read given as ``--thickness`` would be.

    ``again(thickness_mm, thickness_u_mm)`` measures the photo with that thickness: the
    thickness then lifts the face in the plane map (its 1-sigma in the sampled maps), and the
    checks a given thickness enables run (the cast shadow's cut, deep holes opened at the top
    face, the wall's side from round rings). Estimates within :data:`SAME_THICKNESS_MM` share a
    run. A part of that run whose centroid lies within a quarter of the part's largest width of
    the lifted part's replaces it, with the term ``thickness_estimate`` kept; where the run fails
    or finds no such part, the lifted part (:func:`with_wall_thickness`) stays.

    A small region found without the thickness beside a lifted part (within its half-width plus
    the reach of its shadow under a light :data:`PIECE_MIN_ELEVATION_DEG` up, under
    :data:`PIECE_MAX_AREA_SHARE` of its area) that the run at the thickness read finds nowhere
    (no part of it within a quarter of the region's largest width) was a piece of that part's side
    wall or of its reflection, which the plane map without the thickness leaves beside its face
    (dev-window-steel5-t14's brass collar 3.5 mm: five pieces of its lit outer wall and its bore's
    wall, 21-92 mm², found as parts): it is dropped, with a warning naming it. A region read by its
    wall's foot alone (``cue`` ``"wall foot"``) is not kept from this test by its reading (a 62 mm² piece
    of that collar's lit wall reads 1.5 mm so); a dropped region's own run leaves no warning or record.
    """
    groups: list[list[WallThickness]] = []
    for w in sorted(walls, key=lambda w: float(w.thickness_mm or 0.0)):
        if groups and float(w.thickness_mm or 0.0) - float(groups[-1][0].thickness_mm or 0.0) <= SAME_THICKNESS_MM:
            groups[-1].append(w)
        else:
            groups.append([w])
    record = result.settings.get("thickness_estimate", {}).get("parts", {})
    again_labels = []
    pieces: dict[int, str] = {}  # index of a region dropped as a piece of a lifted part: that part's label
    # a region read by its wall's foot alone (the last and least sure try) may still be a piece of another part
    lifted = {str(w.label) for w in walls if w.cue != "wall foot"}
    for group in groups:
        ts = [float(w.thickness_mm or 0.0) for w in group]
        t = float(np.mean(ts))
        u = max(w.sigma_mm for w in group) + 0.5 * (max(ts) - min(ts))
        try:
            other = again(round(t, 3), u)
        except ScanmassError:
            continue
        for w in group:
            n = next((i for i, p in enumerate(result.parts) if p.label == w.label), None)
            if n is None or str(w.label) not in record:
                continue
            part = result.parts[n]
            near = [q for q in other.parts if math.dist(q.centroid_mm, part.centroid_mm) < 0.25 * part.caliper_max_mm]
            if not near:
                continue
            match = min(near, key=lambda q: math.dist(q.centroid_mm, part.centroid_mm))
            term = part.uncertainty_terms["thickness_estimate"]
            d_u = float(record[str(w.label)]["hole_diameter_term_mm"])
            holes = [
                replace(
                    h,
                    diameter_u_mm=combine(h.diameter_u_mm, d_u),
                    circle_centre_u_mm=(combine(h.circle_centre_u_mm[0], d_u), combine(h.circle_centre_u_mm[1], d_u)),
                )
                for h in match.holes
            ]
            result.parts[n] = _with_extra_term(
                replace(match, label=part.label, holes=holes), "thickness_estimate", term, []
            )
            record[str(w.label)]["measured_again_mm"] = round(t, 3)
            again_labels.append(str(w.label))
            reach = 0.5 * part.caliper_max_mm + t / math.tan(math.radians(PIECE_MIN_ELEVATION_DEG))
            for i, q in enumerate(result.parts):
                if (
                    str(q.label) not in lifted
                    and q.label != part.label
                    and q.area_mm2 < PIECE_MAX_AREA_SHARE * match.area_mm2
                    and math.dist(q.centroid_mm, part.centroid_mm) < reach
                    and not any(math.dist(o.centroid_mm, q.centroid_mm) < 0.25 * q.caliper_max_mm for o in other.parts)
                ):
                    pieces.setdefault(i, str(part.label))
            said = set(result.warnings)
            where = f"(measured again at {t:.1f} mm for part {part.label}, there part {match.label})"
            result.warnings += [f"{where} {x}" for x in other.warnings if x not in said]
    if pieces:
        listed = ", ".join(
            f"{result.parts[i].label} ({result.parts[i].area_mm2:.3g} mm², beside part {label})"
            for i, label in sorted(pieces.items())
        )
        result.warnings.append(
            f"dropped region(s) {listed}: found without the thickness beside a part measured again with its thickness "
            "read, but not found in that measurement (a piece of the part's side wall or of its reflection); give "
            "--thickness as measured with calipers to measure the photo in one pass"
        )
        dropped = {str(result.parts[i].label) for i in pieces}
        result.parts[:] = [p for i, p in enumerate(result.parts) if i not in pieces]
        again_labels = [label for label in again_labels if label not in dropped]
        for label in dropped:
            record.pop(label, None)
        result.warnings[:] = [
            x for x in result.warnings if not (x.startswith("(measured again at ") and _run_of(x) in dropped)
        ]
    if again_labels:
        result.warnings.append(
            f"part(s) {', '.join(again_labels)} measured again with the thickness read from their side walls given as "
            "the thickness (the shadow cut, deep holes and wall sides a given thickness enables)"
        )
