"""Which face of a thick part a flatbed scan shows, and the lamp's shadow beside it.

A scanner images the part's face on the glass, in focus: its edges are sharp. Its lamp
travels with the carriage and lights every scan line from the same side at 30-45 degrees,
so a part a few mm thick keeps the light off the lid beyond its far side: a shadow on the
lid, as long as the lid's height times the cotangent of the lamp's elevation, darker than
the lid but (lit by the housing's scattered light) lighter than a dark part, with a soft
outer end (the lamp is not a point, and the lid is out of focus). Where the shadow is
darker than the midpoint between the lid and the part, the part's outline takes it in.

:func:`scan_face` tells the two apart by edge sharpness and level: the outline's soft
stretch is the shadow's outer end; the face is the region at the part's own level, its
edge on the shadow side taken halfway between the part's level and the shadow's level
next to it (the local-midpoint rule of the segmenter with the shadow as the local
background). When no level tells them apart (steel reflects the scanner's dark inside: its
shadow runs from lighter than the face at its far end to darker next to it), the shadow is
taken as the face swept along the lamp's direction (:func:`_face_by_sweep`): its length is
where a sharp step lies the same distance behind the whole soft front, and the found region
eroded by that segment is the face. When that fails too, the caller is told how large the
shadow may be.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import cv2
import numpy as np
from skimage.measure import find_contours

from scanmass.geometry import signed_area, vertex_normals
from scanmass.numeric import nonzero_every, nonzero_rc, robust_sigma
from scanmass.segment.distance import exact_distance

__all__ = ["FaceResult", "scan_face", "deep_holes", "tinted_face", "SOFT_RATIO"]

#: An outline vertex whose edge gradient is below this share of the outline's sharp edges
#: (its 80th percentile) lies on a soft edge (a shadow's outer end, or a part out of focus).
SOFT_RATIO = 0.5

#: Least share of the outline on soft edges for a shadow to be looked for.
MIN_SOFT_SHARE = 0.03

#: Soft edges along this share of the outline without a shadow are noted (a part not flat on
#: the glass, or a scan out of focus there).
MIN_SOFT_NOTE = 0.1

#: The face is told from the shadow only if their levels differ by this share of the
#: lid-to-part contrast (and by 6 sigma of the noise).
MIN_FACE_SHADOW_CONTRAST = 0.05

#: A face told from its shadow by a level step under this share of the lid-to-part contrast is
#: in doubt: the shadow darkens towards the part's wall and a metal face's sheen lightens it,
#: so a few per cent of contrast do not place the edge between them. The face the sweep finds is
#: taken instead (the face by level kept beside it for the uncertainty); without one, the face by
#: level with the shadow's whole band as its doubt. The renders' faces told by level: black plastic
#: 0.19-0.23 of the contrast (right within 0.5 %); the brass bracket of dev-scan-cam2-lamp33 0.075
#: (by level -0.7 %, its holes +0.33 / +0.36 mm at 1.9 sigma; the sweep's face +0.02 %, holes within
#: 0.01 mm; read in grey levels only, as steel is, by level +15.3 %). Brushed steel under a 29-34 degree
#: lamp (0.07-0.11) has its face by level refused by its checks in every dev scan, narrowly in a render
#: of a 5.5 mm bracket left out of the set (its edge's step 0.98 of the least): that face +12 %, the sweep's +0.1 %.
FACE_DOUBT_CONTRAST = 0.15

#: Least level step (share of the lid-to-part contrast) from the part to what lies inside the
#: outline's soft stretch for that to count as a shadow at all.
MIN_SHADOW_STEP = 0.03

#: The face's seed region: darker than the part's level plus this share of the face-to-shadow step
#: (or 5 sigma of the smoothed part's noise): the shadow darkens towards inner corners, and a deep
#: hole's floor is the lid in the shadow of the hole's wall, a little lighter than the part.
FACE_SEED = 0.1


#: The shadow's level beside the face's edge against it is read from pixels this far out (the face grown
#: by this many 3x3 steps) and blurred with this sigma (px), not the lid's 3 px and 4 px: the lid's shadow
#: darkens towards the part's wall (the housing's scattered light reaches less of the lid near it), so a
#: level averaged 3-12 px out lies above the shadow's at the edge and put the midpoint, and the edge, in
#: the shadow (black plastic, tuned set: the shadow-side edges +0.10 to +0.14 px out against the truth
#: outlines, the lamp-side ones +0.00 to +0.01 px; read 2-6 px out: +0.05 to +0.09 px). 2 px is the nearest
#: read outside a scan edge's blur (about 1 px).
SHADOW_READ_GROW_PX = 2
SHADOW_READ_SIGMA_PX = 2.0
#: Pixels within this many 3x3 steps of the found region's part outside the face (the shadow) take the near read.
SHADOW_READ_REACH_PX = 5

#: A part as dark as its shadow is separated by the sweep (the shadow's length from the sharp step behind
#: its soft front) when the step's mean gradient there stands this many times above the search's median.
SWEEP_MIN_PROMINENCE = 4.0

#: A hard front's step (read inside the part only, :func:`_front_steps`) is where the front's signed gradient,
#: averaged over the whole front, stands this many of its sigmas (over the search range) out of its median.
HARD_FRONT_PROMINENCE = 8.0

#: Shortest shadow (px) the sweep looks for: shorter ones are within the front's own soft ramp.
SWEEP_MIN_LENGTH_PX = 6

#: The seed stops this many px short of the face's edge against the shadow (the step's own blur).
SWEEP_MARGIN_PX = 4

#: The level step across the face's edge is read this many px either side of it.
SWEEP_STEP_READ_PX = 5

#: A patch of the face is a hole only if the gradient on its rim is at least this share of its contrast per px
#: (a step in focus, blurred by about 1 px, has about 0.4; a metal's sheen fades over many px).
SWEEP_HOLE_RIM = 0.1

#: A hole's joined floor patches are replaced by their convex hull unless it adds more than this share.
SWEEP_HULL_GAIN = 0.1

#: Width (px) of the Gaussian that carries the face's level (a metal's sheen varies slowly).
SWEEP_LEVEL_SIGMA_PX = 8.0

#: A shadow whose front is as sharp as the face's edges (no soft stretch on the outline) is found by its
#: geometry: a sharp step inside the outline, the same length behind at least this share of its front.
HARD_FRONT_COVERAGE = 0.8

#: ... a step whose gradient (linear light per px, the image smoothed by 1 px) stands this many noise
#: sigmas (of the gradient inside the outline) above the noise, ...
HARD_FRONT_NOISE = 8.0

#: ... and at least this share of the lid-to-part contrast (per px: a step of 0.7 % of it, blurred by 1.4 px).
HARD_FRONT_STEP = 0.002

#: The face's step behind a hard front, its gradient averaged over the whole front, stands this many times
#: above the same average read :data:`ASIDE_PX` before or after it (noise, or a slow shading, is as steep there).
STEP_OVER_ASIDE = 3.0

#: ... this many px (beyond the step's own blur and the 3 px it is looked for in).
ASIDE_PX = 7

#: Width (px) of the Gaussian that averages the image along the step before its gradient is read.
STEP_ALONG_PX = 3.0

#: A deep hole's floor, as dark as the face, is told from it by its grain: a compact patch inside the face
#: whose local variance stands this many times above the face's (median) own.
GRAIN_RATIO = 10.0

#: Width (px) of the Gaussian over which the grain (the squared high-pass of the image) is averaged.
GRAIN_SIGMA_PX = 2.0

#: Least compactness of such a patch: its area over that of the circle as wide as its box's longer side
#: (a drilled or punched hole is round; a streak of grain is not).
GRAIN_COMPACT = 0.5


@dataclass
class FaceResult:
    """The face on the glass of one part, or why it could not be separated (pixels, image frame).

    ``outer_px`` is None when the face could not be told from the shadow; then
    ``shadow_px2`` is an estimate of the shadow inside the found outline (its soft front's
    width times its length along the lamp's direction). With ``note == "soft edges"``
    the outline is soft along a good share of its length but no shadow lies inside it.
    """

    outer_px: np.ndarray | None
    holes_px: list[np.ndarray]
    gradient_px: np.ndarray | None
    hole_gradients_px: list[np.ndarray]
    #: the found outline's area outside the face (px2): the shadow left out, or its estimate
    shadow_px2: float
    #: unit vector (x, y in image pixels, rows down) from the face towards its shadow
    direction: tuple[float, float]
    #: length (px) of the outline on soft edges
    soft_length_px: float
    #: length (px) of the face's edge against its shadow (the cut-off stretch)
    shadow_edge_px: float
    #: linear levels: lid, shadow, part
    levels: tuple[float, float, float]
    note: str
    #: per vertex of ``outer_px``: on the face's edge against its shadow (moved from the found outline)
    shadow_edge: np.ndarray | None = None
    #: the rings were placed against local levels that the image's two levels do not describe (a face as
    #: dark as its shadow, holes with lit and shadowed floors): thin-wall steps must leave them alone
    local_levels: bool = False
    #: how many of ``holes_px`` (the last ones) were found by their floor's grain (:func:`deep_holes`)
    grain_holes: int = 0
    #: a face told from its shadow by a small level step (:data:`FACE_DOUBT_CONTRAST`): the outer ring
    #: found by level (image px) where the sweep's face was taken, or, without one, the shadow's band (px2)
    doubt_outer_px: np.ndarray | None = None
    doubt_px2: float = 0.0
    #: the holes of that other reading (image px; its holes' sizes are in doubt too)
    doubt_holes_px: list[np.ndarray] | None = None


@dataclass
class _Found:
    """The found outline of one part and what the face check read off it (pixels, crop at ``origin``)."""

    origin: np.ndarray
    #: the found outer ring filled (holes not cleared), and with its holes cleared
    filled: np.ndarray
    found: np.ndarray
    outer: np.ndarray
    holes_px: list[np.ndarray]
    soft: np.ndarray
    lengths: np.ndarray
    normals: np.ndarray
    direction: np.ndarray
    soft_len: float
    levels: tuple[float, float, float]


def _ring_lengths(ring: np.ndarray) -> np.ndarray:
    """Length attributed to each vertex (half of each adjacent segment)."""
    seg = np.hypot(*(np.roll(ring, -1, axis=0) - ring).T)
    return 0.5 * (seg + np.roll(seg, 1))


def _outward_normals(ring: np.ndarray) -> np.ndarray:
    """Unit outward normals of a ring (either orientation), image frame."""
    normal = vertex_normals(ring)
    return normal if signed_area(ring) > 0 else -normal


def _normalised_blur(values: np.ndarray, mask: np.ndarray, sigma: float, fallback: float) -> np.ndarray:
    """A smooth surface through the masked values (normalised convolution)."""
    m = mask.astype(np.float32)
    w = cv2.GaussianBlur(m, (0, 0), sigma)
    v = cv2.GaussianBlur((values * m).astype(np.float32), (0, 0), sigma)
    out = np.full(values.shape, fallback, np.float32)
    ok = w > 1e-3
    out[ok] = v[ok] / w[ok]
    return out


def scan_face(
    linear: np.ndarray,
    origin_px: tuple[int, int],
    outer_px: np.ndarray,
    holes_px: list[np.ndarray],
    gradient_px: np.ndarray,
    *,
    noise: float,
    min_hole_px: float,
) -> FaceResult | None:
    """The face on the glass of a dark part on a scanner's light lid, with its shadow left out.

    Parameters
    ----------
    linear : (H, W) float ndarray
        Linear-light values of a crop around the part, reaching at least 12 px beyond it.
    origin_px : (int, int)
        The crop's (x, y) offset in the image.
    outer_px, holes_px : ndarray
        The found rings (image pixels, x y).
    gradient_px : ndarray
        The normalised edge gradient at each vertex of ``outer_px`` (per px).
    noise : float
        Standard deviation of the pixel noise, linear light.
    min_hole_px : float
        Holes of the face smaller than this are filled.

    Returns
    -------
    FaceResult or None
        None when the outline has no soft stretch (no shadow inside it: the found
        outline is the face's).

    References
    ----------
    .. [1] W. E. Lorensen and H. E. Cline, "Marching cubes", SIGGRAPH 1987, in its 2-D
       form as implemented by ``skimage.measure.find_contours`` (the face's rings).
    """

    outer = np.asarray(outer_px, float)
    grad = np.asarray(gradient_px, float)
    if len(grad) != len(outer) or len(outer) < 16:
        return None
    sharp_ref = float(np.quantile(grad, 0.8))
    soft = grad < SOFT_RATIO * sharp_ref
    lengths = _ring_lengths(outer)
    soft_len = float(lengths[soft].sum())
    # no soft stretch: the shadow, if any, has a front as sharp as the face's edges (a small lamp, a
    # low lid): it is looked for by its geometry once the levels are known
    hard = soft_len < MIN_SOFT_SHARE * float(lengths.sum())
    origin = np.asarray(origin_px, float)
    shape = linear.shape
    kernel = np.ones((3, 3), np.uint8)
    filled = np.zeros(shape, np.uint8)
    cv2.fillPoly(filled, [np.round((outer - origin) * 16).astype(np.int32)], 1, shift=4)
    found = filled.copy()
    for h in holes_px:
        cv2.fillPoly(found, [np.round((np.asarray(h, float) - origin) * 16).astype(np.int32)], 0, shift=4)
    sweep = None
    if hard:  # most parts: looked at quickly, with the contrast from a sample of the crop
        sweep = _hard_front(linear, filled, found)
        if sweep is None:
            return None
    near_out = cv2.dilate(filled, kernel, iterations=12).astype(bool) & ~cv2.dilate(
        filled, kernel, iterations=3
    ).astype(bool)
    inside = cv2.erode(found, kernel, iterations=3).astype(bool)
    if near_out.sum() < 20 or inside.sum() < 50:
        return None
    lid = float(np.quantile(linear[near_out], 0.75))
    part = float(np.quantile(linear[inside], 0.2))
    if not lid > part:
        return None
    normals = _outward_normals(outer)
    soft_edges = None
    while True:
        if sweep is not None:
            direction, length_px = sweep
            # the shadow's outline (its front and sides) takes the soft stretch's place: the outline off the face
            soft = _off_face(outer - origin, found, direction, length_px)
            soft_len = float(lengths[soft].sum())
            if soft_len < MIN_SOFT_SHARE * float(lengths.sum()):
                return soft_edges
        else:
            # a flatbed's lamp lies beside the sensor line and lights along the carriage's travel: the
            # shadow falls along the image's rows or columns; the soft stretch's mean normal picks which
            mean_normal = (lengths[soft, None] * normals[soft]).sum(axis=0)
            axis = int(np.argmax(np.abs(mean_normal)))
            direction = np.zeros(2)
            direction[axis] = math.copysign(1.0, float(mean_normal[axis]))
        # the shadow's level: inside the found outline, next to its soft stretch
        probe = np.zeros(shape, np.uint8)
        for depth in (4.0, 6.0, 8.0):
            pts = outer[soft] - depth * normals[soft] - origin
            cols = np.clip(np.round(pts[:, 0]).astype(int), 0, shape[1] - 1)
            rows = np.clip(np.round(pts[:, 1]).astype(int), 0, shape[0] - 1)
            probe[rows, cols] = 1
        probe_values = linear[probe.astype(bool) & inside]
        if probe_values.size < 10:
            return soft_edges
        shadow = float(np.median(probe_values))
        levels = (lid, shadow, part)
        total = float(found.sum())
        gap = shadow - part
        dark = linear[inside & (linear < part + 0.5 * max(gap, 0.0))]
        if dark.size > 20:  # the part's own noise (texture, grain) rather than the outline fit's residual
            noise = min(noise, robust_sigma(dark))
        # a shadow: the soft stretch faces one way, and inside it lies a level between the part and the lid
        # (a half disc's front faces its direction by 2 / pi on average; the shadow's sides by 0)
        facing = float((lengths[soft] * (normals[soft] @ direction)).sum()) / max(soft_len, 1e-12)
        # (the geometry's step one length behind the whole front is evidence enough of a shadow: its level may
        # lie on either side of the part's, or a few 8-bit codes from it)
        if facing >= 0.3 and (sweep is not None or gap >= max(MIN_SHADOW_STEP * (lid - part), 4.0 * noise)):
            break
        if sweep is None and soft_len >= MIN_SOFT_NOTE * float(lengths.sum()):
            soft_edges = FaceResult(  # soft edges and no shadow: the part may not lie flat on the glass
                outer_px=None,
                holes_px=[],
                gradient_px=None,
                hole_gradients_px=[],
                shadow_px2=0.0,
                direction=(float(direction[0]), float(direction[1])),
                soft_length_px=soft_len,
                shadow_edge_px=0.0,
                levels=levels,
                note="soft edges",
            )
        if sweep is not None:
            return soft_edges
        # the soft stretch is not a shadow's front: a shadow whose front is as sharp as the face's may still be
        sweep = _hard_front(linear, filled, found)
        if sweep is None:
            return soft_edges
    ctx = _Found(origin, filled, found, outer, list(holes_px), soft, lengths, normals, direction, soft_len, levels)
    if gap < max(MIN_FACE_SHADOW_CONTRAST * (lid - part), 6.0 * noise):
        return _face_by_sweep(linear, ctx, min_hole_px, hard=sweep is not None) or _unseparated(ctx, total)
    # the face: the region at the part's own level (nearer it than the shadow's, which darkens
    # towards inner corners); its edges are then placed by the local levels either side
    smooth = cv2.GaussianBlur(linear.astype(np.float32), (0, 0), 1.2)
    seed = max(FACE_SEED * gap, 5.0 * _mad(smooth[inside & (smooth < part + 0.5 * gap)]))
    seed_mask = np.asarray(found.astype(bool) & (smooth < part + seed), dtype=np.uint8)
    face0: np.ndarray = cv2.morphologyEx(seed_mask, cv2.MORPH_OPEN, kernel)
    count, comp, stats, _ = cv2.connectedComponentsWithStats(face0, connectivity=8)
    if count < 2:
        return _face_by_sweep(linear, ctx, min_hole_px, hard=sweep is not None) or _unseparated(ctx, total)
    biggest = 1 + int(np.argmax(stats[1:, cv2.CC_STAT_AREA]))
    face0 = np.asarray(comp == biggest, dtype=np.uint8)
    if face0.sum() < 0.3 * total:
        return _face_by_sweep(linear, ctx, min_hole_px, hard=sweep is not None) or _unseparated(ctx, total)
    # (the shadow's level read near the edge only for a face the level tells surely: one nearly as dark as its
    # shadow has a seed that runs on into it)
    sure = gap >= FACE_DOUBT_CONTRAST * (lid - part)
    by_level = _face_from_seed(linear, ctx, face0, part, gap, min_hole_px, near_shadow=sure)
    if by_level is None:
        return _face_by_sweep(linear, ctx, min_hole_px, hard=sweep is not None) or _unseparated(ctx, total)
    if gap < FACE_DOUBT_CONTRAST * (lid - part):
        # a face nearly as dark as its shadow: the level step alone is no sure edge (the shadow darkens
        # towards the wall, the face's sheen lightens, and the region "at the part's level" runs on into
        # the shadow). The lamp's parallel light is surer: where the sweep finds the face (the shadow as
        # the face swept along the lamp), that face is taken and the level's reading is what it may be
        # instead; without it, the level's face with the shadow's whole band as its doubt
        other = _face_by_sweep(linear, ctx, min_hole_px, hard=sweep is not None)
        if other is not None and other.outer_px is not None:
            return replace(other, doubt_outer_px=by_level.outer_px, doubt_holes_px=list(by_level.holes_px))
        # the band: the shadow's estimate from its soft sides, or, where larger, the shadow the level left out
        # (the face may hold as much of it again: the level step does not say where in the band its edge lies);
        # the holes found against the lid's level are the other reading of the holes
        band = max(_unseparated(ctx, total).shadow_px2, by_level.shadow_px2)
        return replace(by_level, doubt_px2=band, doubt_holes_px=list(ctx.holes_px))
    return by_level


def _face_from_seed(
    linear: np.ndarray,
    ctx: _Found,
    face0: np.ndarray,
    part: float | np.ndarray,
    gap: float,
    min_hole_px: float,
    *,
    sharp_holes: bool = False,
    not_face: np.ndarray | None = None,
    cast_px: int | None = None,
    near_shadow: bool = False,
) -> FaceResult | None:
    """The face's rings from a seed region at the part's level, placed by the local levels either side.

    Each edge of the seed is moved to the midpoint between the part's level (a number, or
    a surface over the face) and the local background beside it (the lid, the shadow or a
    hole's floor); None when the result does not look like a face with its shadow beside it
    (the found outline's sharp back edges not kept, no sharp step against the shadow
    (``gap`` high), or removed pixels not beyond the face along the lamp's direction).
    With ``sharp_holes`` only inner rings as sharp as the face's edges (half their median
    slope) are holes: a hole's edge on the glass is in focus, a metal's sheen is not.
    ``not_face`` marks known holes (to their rims): inside them, deeper than 2 px, nothing
    counts as face whatever its level. With ``cast_px`` (the sweep's shadow length, px) a
    removed pixel the face's own shadow reaches (the face swept that far along the lamp's
    direction) is a cast shadow wherever the face lies beyond it: the shadow one arm of an
    L bracket throws into the inner corner ends at the other arm. With ``near_shadow`` the shadow's level
    beside the face is read close to the edge (:data:`SHADOW_READ_GROW_PX`): a seed whose edge is sure.
    """
    from scanmass.segment.rings import _blur_from_gradient, _refine_vertices, correct_curvature

    origin, found, outer, holes_px = ctx.origin, ctx.found, ctx.outer, ctx.holes_px
    soft, lengths, normals, direction = ctx.soft, ctx.lengths, ctx.normals, ctx.direction
    lid, part_level = ctx.levels[0], ctx.levels[2]
    shape = linear.shape
    kernel = np.ones((3, 3), np.uint8)
    # local background next to each face edge: the lid, the shadow, or a hole's floor
    grown = cv2.dilate(face0, kernel, iterations=3).astype(bool)
    background = _normalised_blur(linear, ~grown, 4.0, lid)
    if near_shadow:  # ... where that is the lamp's shadow, read close to the edge: it darkens towards the wall
        near = _normalised_blur(
            linear, ~cv2.dilate(face0, kernel, iterations=SHADOW_READ_GROW_PX).astype(bool), SHADOW_READ_SIGMA_PX, lid
        )
        in_shadow = cv2.dilate((found.astype(bool) & ~grown).astype(np.uint8), kernel, iterations=SHADOW_READ_REACH_PX)
        background = np.where(in_shadow.astype(bool), near, background)
    band = cv2.dilate(face0, kernel, iterations=4).astype(bool) & ~cv2.erode(face0, kernel, iterations=4).astype(bool)
    contrast = part - background
    safe = np.where(np.abs(contrast) < 0.02 * (lid - part_level), -0.02 * (lid - part_level), contrast)
    norm = np.zeros((shape[0] + 2, shape[1] + 2), np.float32)
    norm[1:-1, 1:-1] = cv2.erode(face0, kernel, iterations=4)
    rows, cols = nonzero_rc(band)
    norm[rows + 1, cols + 1] = np.clip((linear[rows, cols] - background[rows, cols]) / safe[rows, cols], -0.5, 1.5)
    if not_face is not None:  # known holes: only their rims (2 px) are read, not their floors' own levels
        deep = cv2.erode(not_face.astype(np.uint8), kernel, iterations=2).astype(bool)
        norm[1:-1, 1:-1][deep] = np.minimum(norm[1:-1, 1:-1][deep], 0.0)
    rings = []
    for ring in find_contours(norm, 0.5, fully_connected="high"):
        if len(ring) < 4 or np.abs(ring[0] - ring[-1]).max() > 1e-9:
            continue
        ring_rc, g, slope = _refine_vertices(norm, ring[:-1], 0.5)
        xy = np.column_stack([ring_rc[:, 1] - 1 + origin[0], ring_rc[:, 0] - 1 + origin[1]])
        rings.append((xy, signed_area(xy), g, slope))
    if not rings:
        return None
    rings.sort(key=lambda r: -abs(r[1]))
    face_outer, face_area, face_grad, face_slope = rings[0]
    holes, hole_grads, slopes = [], [], [face_slope]
    sharp = float(np.median(np.abs(face_slope)))
    for xy, area, g, slope in rings[1:]:
        if math.copysign(1.0, area) == math.copysign(1.0, face_area) or abs(area) < min_hole_px:
            continue
        if sharp_holes and float(np.median(np.abs(slope))) < SOFT_RATIO * sharp:
            continue  # a soft patch of the face's own (a metal's sheen), not a hole's edge in focus
        holes.append(xy)
        hole_grads.append(g)
        slopes.append(slope)
    # the face keeps the found outline's sharp edges facing away from the shadow ...
    back = ~soft & ((normals @ direction) < -0.3)
    kept = _distance_to_ring(outer[back], face_outer, origin, shape) <= 2.0
    if back.sum() < 8 or float((lengths[back] * kept).sum()) < 0.8 * float(lengths[back].sum()):
        return None
    # ... and its edge against the shadow is a sharp step from the part's level to the shadow's:
    # its gradient (linear light per px) at least 0.25 of a step of that height blurred as its other edges
    moved = _distance_to_ring(face_outer, outer, origin, shape) > 2.0
    if moved.sum() < 4 or (~moved).sum() < 8:
        return None
    blur_kept = _blur_from_gradient(float(np.median(np.abs(face_slope[~moved]))))
    cols = np.clip(np.round(face_outer[moved, 0] - origin[0]).astype(int), 0, shape[1] - 1)
    rows = np.clip(np.round(face_outer[moved, 1] - origin[1]).astype(int), 0, shape[0] - 1)
    step_grad = float(np.median(face_grad[moved] * np.abs(contrast[rows, cols])))
    if step_grad < 0.25 * gap / (math.sqrt(2.0 * math.pi) * max(blur_kept, 0.5)):
        return None
    # ... and what it leaves out lies beyond the face along the lamp's direction (a cast shadow),
    # not beside it (as a part's own brighter patches would)
    contours, _ = cv2.findContours(face0, cv2.RETR_EXTERNAL, cv2.CHAIN_APPROX_NONE)
    face_filled = np.zeros(shape, np.uint8)
    cv2.drawContours(face_filled, contours, -1, 1, thickness=cv2.FILLED)
    removed = found.astype(bool) & ~face_filled.astype(bool)
    if cast_px is not None:  # what the face's own shadow reaches is a cast shadow, whatever lies beyond it
        swept = _back(cv2.dilate(_up(face0, direction), np.ones((cast_px + 1, 1), np.uint8), anchor=(0, 0)), direction)
        # ... and its sides, soft as its front is (the lamp's width, the lid out of focus)
        swept = cv2.dilate(swept, kernel, iterations=SWEEP_MARGIN_PX)
        removed &= ~swept.astype(bool)
    if _upstream_share(removed, face0.astype(bool), direction) > 0.1:
        return None
    blur = _blur_from_gradient(float(np.median(np.abs(np.concatenate(slopes)))))
    face_outer = correct_curvature(face_outer, blur)
    holes = [correct_curvature(h, blur) for h in holes]
    face_px2 = abs(signed_area(face_outer)) - sum(abs(signed_area(h)) for h in holes)
    found_px2 = abs(signed_area(outer)) - sum(abs(signed_area(np.asarray(h, float))) for h in holes_px)
    return FaceResult(
        outer_px=face_outer,
        holes_px=holes,
        gradient_px=face_grad,
        hole_gradients_px=hole_grads,
        shadow_px2=max(0.0, found_px2 - face_px2),
        direction=(float(direction[0]), float(direction[1])),
        soft_length_px=ctx.soft_len,
        shadow_edge_px=float(_ring_lengths(face_outer)[moved].sum()),
        levels=ctx.levels,
        note="separated",
        shadow_edge=moved,
    )


def _up(a: np.ndarray, direction: np.ndarray) -> np.ndarray:
    """``a`` turned (transposed, then flipped; no resampling) so that ``direction`` points up the rows.

    >>> a = np.arange(6).reshape(2, 3)
    >>> all(np.array_equal(_back(_up(a, d), d), a) for d in np.array([[1.0, 0], [-1, 0], [0, 1], [0, -1]]))
    True
    """
    if direction[0] != 0.0:
        a = a.T
    return a[::-1] if float(direction.sum()) > 0.0 else a


def _back(a: np.ndarray, direction: np.ndarray) -> np.ndarray:
    """The inverse of :func:`_up`: flipped back, then transposed back."""
    if float(direction.sum()) > 0.0:
        a = a[::-1]
    return a.T if direction[0] != 0.0 else a


def _shadow_length(
    smooth: np.ndarray, filled: np.ndarray, interior: np.ndarray | None = None, *, within: np.ndarray | None = None
) -> tuple[int, float, float]:
    """The shadow's length (px) along the rows' upward direction, how clearly it shows, and the step there.

    Every found pixel with no found pixel above it is a front: the shadow's soft outer end,
    cast by the face's edge ``L`` px further down. Read at that offset, the rows' gradient
    is a sharp step wherever the front is, so its mean over the fronts, as a function of
    ``L``, peaks at the shadow's length; elsewhere it samples the face's and the shadow's
    gentle slopes and the odd hole. Returned: ``L``, the peak's height over the median of
    the search range (its prominence), and the median level step across the face's edge
    there (linear light; 0 when nothing is found). With ``interior`` (a mask clear of the
    outline and the holes) only the gradient read inside it counts, at offsets where at least
    half the fronts reach it: a part's far edge, a step of the whole lid-to-part contrast,
    outweighs a faint face-to-shadow step wherever many fronts meet it at one offset (the
    middle of a disc's far arc), and is not a step inside the part. The gradient is then
    signed (noise averages out over a long front, a step of one sign does not), the mean
    taken from its median over the search range, and the prominence is in sigmas of that
    departure (1.4826 times its median). With ``within`` (a mask of the found region clear of
    its outline and holes) the unsigned gradient is read only there, at offsets where at least
    half the fronts reach it: the face's edge against its shadow lies inside the found region,
    while the rim of a wide bore's lit floor (the lid seen through it) is a step of the whole
    contrast that many fronts of a ring's shadow meet at one offset (a ring's width plus its
    shadow's length), and outweighs a faint face-to-shadow step.
    """
    h = smooth.shape[0]
    grad = np.zeros_like(smooth)
    grad[1:-1] = 0.5 * (smooth[2:] - smooth[:-2])
    if interior is None:
        grad = np.abs(grad)
    inside = filled.astype(bool)
    front = inside.copy()
    front[1:] &= ~inside[:-1]
    rows, cols = nonzero_rc(front)
    if rows.size < 16:
        return 0, 0.0, 0.0
    extent = int(np.max(np.count_nonzero(inside, axis=0)))
    offsets = np.arange(extent)
    at = rows[None, :] + offsets[:, None]
    ok = at < h
    # the pixels read, as flat indices (one gather per plane, the same values as indexing by row and column)
    flat = np.minimum(at, h - 1)
    flat *= smooth.shape[1]
    flat += cols[None, :]
    reads = interior if interior is not None else within
    if reads is not None:
        ok &= np.ascontiguousarray(reads).ravel().take(flat)
    counts = ok.sum(axis=1)
    score = np.where(ok, grad.ravel().take(flat), 0.0).sum(axis=1) / np.maximum(counts, 1)
    valid = np.ones(extent, bool) if reads is None else counts >= 0.5 * rows.size
    if interior is not None:  # the signed gradient's mean: noise averages out, a step of one sign does not
        score = np.abs(score - np.median(score[valid])) if valid.any() else np.zeros_like(score)
    score[~valid] = 0.0
    # the front's own soft ramp: skip it (until the score, smoothed over 3 offsets, stops falling)
    smoothed = np.convolve(score, np.ones(3) / 3.0, mode="same")
    start = max(1, int(np.argmax(valid)) + 1)
    while start < extent - 8 and smoothed[start + 1] < smoothed[start]:
        start += 1
    if start >= extent - 8:
        return 0, 0.0, 0.0
    window = score[start : max(start + 1, int(0.9 * extent))]
    read = window[valid[start : start + window.size]]
    if read.size < 8:
        return 0, 0.0, 0.0
    length = start + int(np.argmax(window))
    if interior is None:
        prominence = float(window.max() / max(float(np.median(read)), 1e-12))
    else:  # in sigmas of the signed mean's spread over the search range
        prominence = float(window.max() / max(1.4826 * float(np.median(read)), 1e-12))
    lo, hi = rows + length - SWEEP_STEP_READ_PX, rows + length + SWEEP_STEP_READ_PX
    both = (lo >= 0) & (hi < h)
    both[both] &= inside[lo[both], cols[both]] & inside[hi[both], cols[both]]
    if both.sum() < 8:
        return length, prominence, 0.0
    step = float(np.median(np.abs(smooth[hi[both], cols[both]] - smooth[lo[both], cols[both]])))
    return length, prominence, step


def _front_steps(smooth: np.ndarray, filled: np.ndarray, depth: np.ndarray, least: float) -> tuple[int, float]:
    """The length (px) of a shadow cast up the rows, and the share of its front with the face's step behind it.

    As :func:`_shadow_length` with an interior mask: the length is where the rows' signed
    gradient, read the same distance behind every front pixel and only 10 px or more clear
    of the outline and the holes (a hole's rim, the part's far edge), averaged over the
    whole front, stands :data:`HARD_FRONT_PROMINENCE` sigmas out of the search range
    (the front's own ramp skipped). The share counts the front pixels whose levels
    :data:`SWEEP_STEP_READ_PX` either side of that distance (both inside the part by as
    much) differ by at least ``least`` (linear light per px), the same way along the
    whole front, with a gradient no steeper than that rise (a seam between two parts is a
    line: steep, and it comes back). It is 0 unless the gradient of those pixels, averaged
    over the front, stands :data:`STEP_OVER_ASIDE` times above the same average
    :data:`ASIDE_PX` before or after the step: a curved front's step is steep along the
    lamp's axis only where the front faces it, so each line near the arc's ends may lose
    it in the noise while the whole arc's average does not. (0, 0.0) when no length is found.
    ``depth`` is the found region's :func:`_found_depth`, turned as the other arrays are.
    """
    # a step inside the part: read clear of the outline and the holes by twice the px it is read across (the
    # signed average over a long front finds even the far tail of a part's own edge)
    kept = depth > SWEEP_STEP_READ_PX
    length, prominence, step = _shadow_length(smooth, filled, depth > 2 * SWEEP_STEP_READ_PX)
    if length < SWEEP_MIN_LENGTH_PX or prominence < HARD_FRONT_PROMINENCE or step <= 0.0:
        return 0, 0.0
    h = smooth.shape[0]
    grad = np.zeros_like(smooth)
    grad[1:-1] = 0.5 * np.abs(smooth[2:] - smooth[:-2])
    inside = filled.astype(bool)
    front = inside.copy()
    front[1:] &= ~inside[:-1]
    rows, cols = nonzero_rc(front)
    lo, hi = rows + length - SWEEP_STEP_READ_PX, rows + length + SWEEP_STEP_READ_PX
    both = (lo >= 0) & (hi < h)
    both[both] &= kept[lo[both], cols[both]] & kept[hi[both], cols[both]]
    at = np.clip(rows[:, None] + length + np.arange(-1, 2)[None, :], 0, h - 1)
    peak = grad[at, cols[:, None]].max(axis=1)
    # a step, not a line (a seam between two parts laid edge to edge dips and comes back): the levels either
    # side differ by the least gradient, the same way along the whole front (the face lies on one side of its
    # shadow's level)
    rise = smooth[np.clip(hi, 0, h - 1), cols] - smooth[np.clip(lo, 0, h - 1), cols]
    if np.count_nonzero(both) < 8:
        return length, 0.0
    rise *= math.copysign(1.0, float(np.median(rise[both])))
    # ... and no steeper than a step of that rise can be (a line's peak is: it dips and comes back within the read)
    stepped = both & (rise >= least) & (peak <= rise + least)
    # the step's gradient, summed over the whole front, stands out of the same sum read a few px before or after it
    # (the noise's, or a slow shading's; before it, the front's own edge may still show where the arc is steep; a curved front's step is steep along the lamp's axis only where the
    # front faces it: near the arc's ends each line's gradient is lost in the noise, the arc's sum is not)
    if not stepped.any():
        return length, 0.0
    aside = [grad[np.clip(rows[stepped] + length + k, 0, h - 1), cols[stepped]] for k in (-ASIDE_PX, ASIDE_PX)]
    if float(np.mean(peak[stepped])) < STEP_OVER_ASIDE * min(float(np.mean(a)) for a in aside):
        return length, 0.0
    return length, float(np.count_nonzero(stepped)) / max(rows.size, 1)


def _found_depth(found: np.ndarray) -> np.ndarray:
    """The exact Euclidean distance (px) of each pixel of the found region to the nearest pixel outside it.

    Computed once for all four directions: the exact distance of a turned mask (:func:`_up`:
    a transpose and a flip) is the turned exact distance, as the squared distance to the
    nearest zero pixel is a whole number that no transpose or flip of the grid changes
    (:func:`scanmass.segment.distance.exact_distance`; tests/test_distance.py).
    """
    return exact_distance(np.ascontiguousarray(found).astype(np.uint8))


def _hard_front(linear: np.ndarray, filled: np.ndarray, found: np.ndarray) -> tuple[np.ndarray, int] | None:
    """The lamp's direction and the shadow's length (px) of a shadow with a hard front, or None.

    A lamp small enough, or a lid low enough, leaves the shadow's outer end as sharp as the
    face's edges, so no soft stretch on the outline says a shadow is there. Its geometry
    still does: parallel light makes it a band of one length along the lamp's axis behind
    every edge facing away from the lamp, so its front and the face's edge behind it are
    copies of each other moved by one vector. Each of the four directions along the image's
    axes (a flatbed's lamp lights along the carriage's travel) is tried: a shadow is taken
    where a sharp step, standing :data:`HARD_FRONT_NOISE` sigmas above the noise of the
    gradient inside the outline and at least :data:`HARD_FRONT_STEP` of the contrast, lies
    the same length behind :data:`HARD_FRONT_COVERAGE` of the front inside the part (a hole
    or the part's far edge does not count). A plain part has no step inside it, and its
    holes and notches lie at many distances behind its front. Seen from the face's back
    edge, the step between the face and its shadow can lie at one distance too (a
    rectangle's face): the shortest of the lengths found is the shadow's (a shadow is
    about as long as the part is thick, and a part is wider than it is thick).

    References
    ----------
    .. [1] J. Serra, Image Analysis and Mathematical Morphology, Academic Press, 1982
       (a Minkowski sum with a segment: the found region is the face swept along the lamp).
    """
    candidates, contrast, factor = _steep_axes(linear, filled, found)
    if factor == 1 or not candidates:  # read at full size already
        return min(candidates, key=lambda c: c[1]) if candidates else None
    smooth = cv2.GaussianBlur(linear.astype(np.float32), (0, 0), 1.0)
    interior = cv2.erode(found, np.ones((3, 3), np.uint8), iterations=4).astype(bool)
    rows, cols = nonzero_every(interior, max(1, int(np.count_nonzero(interior)) // 20000))
    best: tuple[np.ndarray, int] | None = None
    depth = _found_depth(found)
    for direction, _ in candidates:  # the reduced copy's finds, read again at full size
        axis = int(np.argmax(np.abs(direction)))
        along = _along_step(smooth, axis)
        least = max(HARD_FRONT_NOISE * _mad(_axis_gradient(along, axis)[rows, cols]), HARD_FRONT_STEP * abs(contrast))
        length, share = _front_steps(_up(along, direction), _up(filled, direction), _up(depth, direction), least)
        if share >= HARD_FRONT_COVERAGE and (best is None or length < best[1]):
            best = (direction, length)
    return best


def _along_step(smooth: np.ndarray, axis: int) -> np.ndarray:
    """The image averaged across the lamp's axis (along a step across it) by :data:`STEP_ALONG_PX`."""
    across = STEP_ALONG_PX
    return np.asarray(
        cv2.GaussianBlur(smooth, (0, 0), sigmaX=across if axis == 1 else 1e-3, sigmaY=across if axis == 0 else 1e-3)
    )


def _axis_gradient(smooth: np.ndarray, axis: int) -> np.ndarray:
    """|central difference| along the image's x (``axis`` 0) or y (1) axis; 0 on the border."""
    grad = np.zeros_like(smooth)
    if axis == 0:
        grad[:, 1:-1] = 0.5 * np.abs(smooth[:, 2:] - smooth[:, :-2])
    else:
        grad[1:-1] = 0.5 * np.abs(smooth[2:] - smooth[:-2])
    return grad


def _steep_axes(
    linear: np.ndarray, filled: np.ndarray, found: np.ndarray
) -> tuple[list[tuple[np.ndarray, int]], float, int]:
    """The directions (with the shadow's length, px of the copy read) in which a shadow's step lies one length
    behind the front, the lid-to-part contrast, and the reduction of the copy read (1: full size).

    The quick test before :func:`_hard_front` looks for the shadow's length: a step across
    the part (the face's edge against its shadow) leaves a steep pixel in at least
    :data:`HARD_FRONT_COVERAGE` of the lines along that axis that cross the interior (4 px
    in from the outline and the holes); a hole's rim only in the lines that cross the hole,
    noise nowhere (steep: :data:`HARD_FRONT_NOISE` sigmas of the gradient's noise, and
    :data:`HARD_FRONT_STEP` of the contrast: the lid's upper quartile outside the outline
    less the part's lower quintile inside it, the levels :func:`scan_face` reads). Along the
    axes that pass, both directions are read by :func:`_front_steps`. Crops over 100 000 px
    are read reduced by area averaging (a step across a large part stays one), and the
    caller reads the finds again at full size. The image is averaged along the step
    (:func:`_along_step`) before its gradient is read.
    """
    factor = max(1, int(math.sqrt(linear.size / 100_000.0)))
    lin: np.ndarray = np.asarray(linear, dtype=np.float32)
    if factor > 1:
        size = (linear.shape[1] // factor, linear.shape[0] // factor)
        lin = cv2.resize(lin, size, interpolation=cv2.INTER_AREA)
        found = cv2.resize(found, size, interpolation=cv2.INTER_NEAREST)
        filled = cv2.resize(filled, size, interpolation=cv2.INTER_NEAREST)
    smooth = cv2.GaussianBlur(lin, (0, 0), 1.0)
    interior = cv2.erode(found, np.ones((3, 3), np.uint8), iterations=4).astype(bool)
    count = int(np.count_nonzero(interior))
    outside = filled == 0
    if count < 50 or np.count_nonzero(outside) < 20:
        return [], 0.0, factor
    kept = found.astype(bool)
    lid = np.quantile(lin[nonzero_every(outside, max(1, int(np.count_nonzero(outside)) // 5000))], 0.75)
    part = np.quantile(lin[nonzero_every(kept, max(1, int(np.count_nonzero(kept)) // 5000))], 0.2)
    contrast = float(lid) - float(part)
    # the gradient's noise from a sample of the interior (every k-th pixel, about 5000: a median over a large part is slow)
    rows, cols = nonzero_every(interior, max(1, count // 5000))
    found_dirs: list[tuple[np.ndarray, int]] = []
    depth: np.ndarray | None = None  # the found region's depth, once for every direction read
    for axis in (0, 1):
        along = _along_step(smooth, axis)
        grad = _axis_gradient(along, axis)
        least = max(HARD_FRONT_NOISE * _mad(grad[rows, cols]), HARD_FRONT_STEP * abs(contrast))
        across = interior.any(axis=1 - axis)
        steep = (interior & (grad >= least)).any(axis=1 - axis)
        if np.count_nonzero(steep) < HARD_FRONT_COVERAGE * np.count_nonzero(across):
            continue
        for sign in (1.0, -1.0):
            direction = np.zeros(2)
            direction[axis] = sign
            if depth is None:
                depth = _found_depth(found)
            length, share = _front_steps(_up(along, direction), _up(filled, direction), _up(depth, direction), least)
            if share >= HARD_FRONT_COVERAGE:
                found_dirs.append((direction, length))
    return found_dirs, contrast, factor


def _off_face(outer: np.ndarray, found: np.ndarray, direction: np.ndarray, length_px: int) -> np.ndarray:
    """Per vertex of ``outer`` (crop pixels): off the face by more than 3 px, the face taken as the found
    region eroded by the shadow's sweep (``length_px`` along ``direction``): the shadow's front and sides."""
    segment = np.ones((length_px + 1, 1), np.uint8)
    face = _back(cv2.erode(_up(found, direction), segment, anchor=(0, length_px), borderValue=0), direction)
    dist = exact_distance(np.ascontiguousarray(1 - face).astype(np.uint8))
    cols = np.clip(np.round(outer[:, 0]).astype(int), 0, found.shape[1] - 1)
    rows = np.clip(np.round(outer[:, 1]).astype(int), 0, found.shape[0] - 1)
    return np.asarray(dist[rows, cols] > 3.0)


def _face_by_sweep(linear: np.ndarray, ctx: _Found, min_hole_px: float, *, hard: bool = False) -> FaceResult | None:
    """The face of a part as dark as its shadow, from the shadow being the face swept along the lamp.

    Parallel light along ``direction`` and a flat lid make the shadow the face swept by
    one vector: the found region is the face's Minkowski sum with a segment of the
    shadow's length ``L`` (:func:`_shadow_length`, from the sharp step that lies ``L``
    behind every point of the soft front). Eroding the found region by that segment (and a
    few px more) leaves a seed inside the face [1]_; pixels of the seed that stand out of
    the face's smooth level by half the face-to-shadow step are a hole's floor (a deep
    hole is in the shadow of its own wall) and are left out. The seed's edges are then
    placed by the local levels either side (:func:`_face_from_seed`, with the face's own
    level surface rather than one level). With ``hard`` (the shadow was found by its hard
    front, :func:`_hard_front`) the length is read as there, from steps inside the part only.

    References
    ----------
    .. [1] J. Serra, Image Analysis and Mathematical Morphology, Academic Press, 1982
       (erosion by a structuring element; the opening of a Minkowski sum).
    """
    direction = ctx.direction
    smooth = cv2.GaussianBlur(linear.astype(np.float32), (0, 0), 1.0)
    filled = ctx.filled
    clear = None
    depth = exact_distance(np.ascontiguousarray(ctx.found).astype(np.uint8))
    if hard:
        clear = _up(depth > 2 * SWEEP_STEP_READ_PX, direction)
    # the face's edge against its shadow lies inside the found region: the unsigned gradient is read clear of
    # the outline and the holes' rims (the lid seen through a wide bore)
    within = _up(depth > SWEEP_STEP_READ_PX, direction)
    length, prominence, step = _shadow_length(_up(smooth, direction), _up(filled, direction), clear, within=within)
    least = SWEEP_MIN_PROMINENCE if clear is None else HARD_FRONT_PROMINENCE
    if length < SWEEP_MIN_LENGTH_PX or prominence < least or step <= 0.0:
        return None
    reach = length + SWEEP_MARGIN_PX
    segment = np.ones((reach + 1, 1), np.uint8)
    seed_up = cv2.erode(_up(ctx.found, direction), segment, anchor=(0, reach), borderValue=0)
    seed = np.ascontiguousarray(_back(seed_up, direction))
    swept_off = ctx.found.astype(bool) & ~seed.astype(bool)  # the shadow's side, cut back past the face's edge
    kernel = np.ones((3, 3), np.uint8)
    seed = cv2.erode(seed, kernel, iterations=3)
    if seed.sum() < 0.3 * float(ctx.found.sum()):
        return None
    # the face's smooth level surface; what stands out of it by half the step is not face
    keep = seed.astype(bool)
    for _ in range(2):
        level = _normalised_blur(smooth, keep, SWEEP_LEVEL_SIGMA_PX, ctx.levels[2])
        keep = seed.astype(bool) & (np.abs(smooth - level) < 0.5 * step)
    dev = np.abs(smooth - level)
    gy, gx = np.gradient(smooth)
    slope = np.hypot(gx, gy)
    # a hole: a patch that stands out by more than the step (its floor is the lid, in its wall's shadow
    # or lit), grown to its own midpoint on its own side of the face's level (a dark floor does not run
    # into a bright glint beside it); smaller departures are the face's sheen
    lo, hi = _face_range(smooth[seed.astype(bool)], step)
    odd = seed.astype(bool) & ((dev >= step) | (smooth < lo - 0.5 * step) | (smooth > hi + 0.5 * step))
    count, comp, stats, _ = cv2.connectedComponentsWithStats(odd.astype(np.uint8))
    hole = np.zeros(seed.shape, np.uint8)
    for k in range(1, count):
        if stats[k, cv2.CC_STAT_AREA] < min_hole_px:
            continue
        patch = np.asarray(comp == k, dtype=np.uint8)
        core = float(np.median((smooth - level)[patch.astype(bool)]))
        floor = ((smooth - level) * math.copysign(1.0, core) >= 0.5 * abs(core)).astype(np.uint8)
        for _ in range(3):
            patch = cv2.dilate(patch, kernel) & floor
        rim = cv2.dilate(patch, kernel).astype(bool) & ~patch.astype(bool)
        if np.median(slope[rim]) >= SWEEP_HOLE_RIM * abs(core):  # a sharp rim: a hole's edge on the glass
            hole |= patch
    hole |= (filled.astype(bool) & ~ctx.found.astype(bool)).astype(np.uint8)  # holes found as such (lit floors)
    hole |= _shadowed_floors(
        filled, ctx.found, swept_off, hole.astype(bool), smooth, dev, step, lo, hi, direction=direction, length=length
    )
    hole = _joined_floors(hole)
    face0 = (seed.astype(bool) & ~hole).astype(np.uint8)
    # grown back to the face's edges (the seed stops short of them): on the shadow's side through pixels at
    # the face's level, elsewhere up to the found outline (the lid's midpoint) and the holes' midpoints
    near = (ctx.found.astype(bool) & ~hole & (~swept_off | (dev < 0.5 * step))).astype(np.uint8)
    for _ in range(SWEEP_MARGIN_PX + 8):
        face0 = np.asarray(cv2.dilate(face0, kernel) & near, dtype=np.uint8)
    face0 = np.asarray(cv2.morphologyEx(face0, cv2.MORPH_OPEN, kernel, iterations=3), dtype=np.uint8)
    count, comp, stats, _ = cv2.connectedComponentsWithStats(face0, connectivity=8)
    if count < 2:
        return None
    face0 = np.asarray(comp == 1 + int(np.argmax(stats[1:, cv2.CC_STAT_AREA])), dtype=np.uint8)
    part_surface = _normalised_blur(linear, face0.astype(bool), SWEEP_LEVEL_SIGMA_PX, ctx.levels[2])
    # the shadow's level read near the edge where the step to it is one the level alone would tell
    sure = step >= MIN_FACE_SHADOW_CONTRAST * (ctx.levels[0] - ctx.levels[2])
    face = _face_from_seed(
        linear,
        ctx,
        face0,
        part_surface,
        step,
        min_hole_px,
        sharp_holes=True,
        not_face=hole,
        cast_px=reach + 3,
        near_shadow=sure,
    )
    return None if face is None else replace(face, local_levels=True, note="separated by the sweep")


def _shadowed_floors(
    filled: np.ndarray,
    found: np.ndarray,
    swept_off: np.ndarray,
    rimmed_floors: np.ndarray,
    smooth: np.ndarray,
    dev: np.ndarray,
    step: float,
    lo: float,
    hi: float,
    *,
    direction: np.ndarray | None = None,
    length: int = 0,
) -> np.ndarray:
    """The floor of a hole in its wall's shadow, beside the lit floor the found outline opened.

    A hole shorter along the lamp's direction than its shadow shows a lit lens (a hole of
    the found outline) and, next to it, the lid in the shadow of the hole's wall, as dark as
    the face or darker. The sweep cuts the seed back behind the lit lens, so the shadowed
    floor's patches are not the seed's and no rim check sees them whole. Every patch of
    the found region that stands out of the face's levels as a hole's floor does (by the
    face-to-shadow ``step``, or half of it beyond the face's range ``lo`` to ``hi``), touches
    the lit floor or the band the sweep cut behind it (``swept_off`` clear of the outline;
    within 2 px: a soft lamp's ramp between the two floors passes through the face's level)
    and stays 3 px clear of the part's outline (the shadow on the lid outside the face) is
    joined to it, unless it holds a floor already found by its sharp rim (``rimmed_floors``:
    that floor is a hole as found, and a face darkened next to its rim, as a metal's may be,
    must not join it through the rim's blur). A part without lit floors gives an empty mask.
    With ``direction`` and ``length`` (the shadow's, px) the band behind a lit floor reaches
    only that far from it against the lamp: the lit floor is the bore less its wall's shadow,
    so the bore's rim on the lamp's side lies one shadow length behind the lit floor, and a
    patch beyond it (a metal face darkened next to the rim) is face, not floor.
    """
    kernel = np.ones((3, 3), np.uint8)
    lit = filled.astype(bool) & ~found.astype(bool)
    out = np.zeros(found.shape, np.uint8)
    if not lit.any():
        return out
    odd = found.astype(bool) & ((dev >= step) | (smooth < lo - 0.5 * step) | (smooth > hi + 0.5 * step))
    count, comp = cv2.connectedComponents(odd.astype(np.uint8), connectivity=8)
    if count < 2:
        return out
    near_edge = cv2.dilate((filled == 0).astype(np.uint8), kernel, iterations=3).astype(bool)
    # the band cut behind each lit floor: the swept-off pixels clear of the outline that touch it
    behind = swept_off.astype(bool) & ~near_edge
    if direction is not None and length > 0:  # no further than one shadow length behind the lit floor
        shade = cv2.dilate(_up(lit.astype(np.uint8), direction), np.ones((length + 1, 1), np.uint8), anchor=(0, length))
        behind &= _back(shade, direction).astype(bool)
    behind = behind.astype(np.uint8)
    n_behind, comp_behind = cv2.connectedComponents(behind, connectivity=8)
    grown_lit = cv2.dilate(lit.astype(np.uint8), kernel).astype(bool)
    cut = np.unique(comp_behind[grown_lit & behind.astype(bool)])
    reach = lit | np.isin(comp_behind, cut[cut > 0]) if n_behind > 1 else lit
    near_lit = cv2.dilate(reach.astype(np.uint8), kernel, iterations=2).astype(bool)
    touching = np.unique(comp[near_lit & odd])
    rimmed = np.unique(np.concatenate([comp[near_edge & odd], comp[rimmed_floors & odd]]))
    joined = np.setdiff1d(touching[touching > 0], rimmed)
    if joined.size:
        out[np.isin(comp, joined)] = 1
    return out


def _face_range(values: np.ndarray, step: float) -> tuple[float, float]:
    """The range of the face's own levels: the seed's main histogram mode, to where it falls below 1 % of its peak.

    A face's sheen and shading spread its levels over one connected mode; a hole's floor (the
    lid in shadow, or lit) lies apart from it. Bins are a quarter of the face-to-shadow step.
    """
    width = max(step / 4.0, 1e-6)
    lo_v, hi_v = float(values.min()), float(values.max())
    bins = max(1, min(4096, int(np.ceil((hi_v - lo_v) / width))))
    counts, edges = np.histogram(values, bins=bins, range=(lo_v, lo_v + bins * width))
    peak = int(np.argmax(counts))
    floor = 0.01 * counts[peak]
    left = peak
    while left > 0 and counts[left - 1] >= floor:
        left -= 1
    right = peak
    while right < bins - 1 and counts[right + 1] >= floor:
        right += 1
    return float(edges[left]), float(edges[right + 1])


def _joined_floors(hole: np.ndarray) -> np.ndarray:
    """Holes' floor patches joined: each group of patches within a few px of each other becomes one hole.

    A deep hole's floor is the lid, partly in the shadow of the hole's wall and partly lit;
    between the two its level passes through the face's, so the patches leave a notch of
    "face" at the rim where they meet. A group is replaced by its convex hull (a drilled
    or punched hole is convex) unless the hull adds more than
    :data:`SWEEP_HULL_GAIN` of the group's area (a cut-out that is not convex): then by
    the group closed over 4 px. A group is filled first: where the face's level surface
    followed a wide floor, only the floor's rim stands out of it.
    """
    kernel = np.ones((3, 3), np.uint8)
    closed = np.asarray(cv2.morphologyEx(hole, cv2.MORPH_CLOSE, kernel, iterations=4), dtype=np.uint8)
    count, comp = cv2.connectedComponents(closed, connectivity=8)
    out = closed.astype(bool)
    for k in range(1, count):
        group = np.asarray(comp == k, dtype=np.uint8)
        contours, _ = cv2.findContours(group, cv2.RETR_EXTERNAL, cv2.CHAIN_APPROX_SIMPLE)
        cv2.drawContours(group, contours, -1, 1, thickness=cv2.FILLED)  # a floor seen only at its rim
        out |= group.astype(bool)
        hull = cv2.convexHull(np.concatenate(contours))
        filled = np.zeros_like(group)
        cv2.fillPoly(filled, [hull], 1)
        if filled.sum() <= (1.0 + SWEEP_HULL_GAIN) * group.sum():
            out |= filled.astype(bool)
    return out


def _upstream_share(removed: np.ndarray, face: np.ndarray, direction: np.ndarray) -> float:
    """Share of the removed pixels from which a step along ``direction`` meets the face again.

    Both masks are turned so that ``direction`` points up the rows; a removed pixel with
    face pixels above it in its column is not beyond the face.
    """
    # strips up to 4 px wide are left alone: the face's seed may stop that short of the found outline along
    # its other edges (their blur), which is not a removed patch (a 3 mm shadow's band is not much larger)
    removed = cv2.erode(removed.astype(np.uint8), np.ones((3, 3), np.uint8), iterations=2).astype(bool)
    if removed.sum() < 10:
        return 0.0
    h, w = face.shape
    # OpenCV turns counter-clockwise as the image is shown (rows down) for a positive angle: this one
    # takes ``direction`` onto (0, -1) (a lamp along -x: -90 degrees, clockwise, left onto up)
    angle = math.degrees(math.atan2(direction[0], -direction[1]))
    size = int(math.ceil(math.hypot(h, w))) + 2
    rot = cv2.getRotationMatrix2D((w / 2.0, h / 2.0), angle, 1.0)
    rot[:, 2] += [(size - w) / 2.0, (size - h) / 2.0]
    face_r = cv2.warpAffine(face.astype(np.uint8), rot, (size, size), flags=cv2.INTER_NEAREST)
    removed_r = cv2.warpAffine(removed.astype(np.uint8), rot, (size, size), flags=cv2.INTER_NEAREST).astype(bool)
    above = np.zeros_like(face_r)
    above[1:] = np.maximum.accumulate(face_r, axis=0)[:-1]
    # a few px of slack: the face's own edge pixels next to its shadow
    above[6:] = above[:-6].copy()
    above[:6] = 0
    return float((removed_r & above.astype(bool)).sum()) / max(float(removed_r.sum()), 1.0)


def _mad(values: np.ndarray) -> float:
    """Standard deviation from the median absolute deviation (0 for fewer than 20 values)."""
    if values.size < 20:
        return 0.0
    return robust_sigma(values)


def _distance_to_ring(points: np.ndarray, ring: np.ndarray, origin: np.ndarray, shape: tuple[int, ...]) -> np.ndarray:
    """Distance (px, to within a pixel) of each point to a ring, both in image pixels, on the crop's grid.

    The ring is drawn as a closed polyline (1/16 px precision) and the distance transform of
    the rest of the crop is read at the points (nearest pixel; points off the crop get the
    distance at the crop's edge).
    """
    canvas = np.ones((shape[0], shape[1]), np.uint8)
    cv2.polylines(canvas, [np.round((ring - origin) * 16).astype(np.int32)], True, 0, 1, shift=4)
    dist = exact_distance(canvas)
    cols = np.clip(np.round(points[:, 0] - origin[0]).astype(int), 0, shape[1] - 1)
    rows = np.clip(np.round(points[:, 1] - origin[1]).astype(int), 0, shape[0] - 1)
    return np.asarray(dist[rows, cols], dtype=float)


def _unseparated(ctx: _Found, total_px2: float) -> FaceResult:
    """The face cannot be told from the shadow: how large the shadow inside the outline may be.

    The shadow is the face swept along the lamp's direction, so the soft stretch holds a
    front (across that direction) and two sides (along it), each as long as the shadow.
    The shadow's length is estimated from the soft sides (their extent along the lamp's
    direction: straight stretches parallel to it at both ends of the front, an
    overestimate where the front curves into them) and its width from the front's extent
    across it; their product is the area the outline may hold beyond the face.
    """
    outer, soft, lengths, direction = ctx.outer, ctx.soft, ctx.lengths, ctx.direction
    d = np.asarray(direction, float)
    across = np.array([-d[1], d[0]])
    tangent = np.roll(outer, -1, axis=0) - np.roll(outer, 1, axis=0)
    tn = np.maximum(np.hypot(tangent[:, 0], tangent[:, 1]), 1e-12)
    along_share = np.abs(tangent @ d) / tn  # |cos| of the edge's angle to the lamp's direction
    # the shadow's sides soften with the distance from the part: take them from half the sharpness
    sides = soft & (along_share > math.cos(math.radians(20.0)))
    length_px = 0.5 * float(lengths[sides].sum())
    soft_pts = outer[soft]
    width_px = float((soft_pts @ across).max() - (soft_pts @ across).min()) if soft.any() else 0.0
    shadow = min(length_px * width_px, 0.5 * total_px2)
    return FaceResult(
        outer_px=None,
        holes_px=[],
        gradient_px=None,
        hole_gradients_px=[],
        shadow_px2=shadow,
        direction=(float(d[0]), float(d[1])),
        soft_length_px=ctx.soft_len,
        shadow_edge_px=width_px,
        levels=ctx.levels,
        note="not separated: the shadow is as dark as the part",
    )


def deep_holes(
    linear: np.ndarray, origin_px: tuple[int, int], face: FaceResult, min_hole_px: float, *, quantum: float = 0.0
) -> FaceResult:
    """The face with the deep holes its levels missed, found by the grain of their floors.

    Through a hole several mm deep a scanner sees the lid, lit only by what the hole's
    dark walls pass on: as dark as a black part's face (a few per cent of the lid's
    level either way), so neither the found outline nor the face's levels open it. Its
    floor differs from the face in grain: the face on the glass is in focus and evenly
    lit, the lid far behind it is not. The grain is the local variance of the image's
    high-pass (Gaussian of 1 px subtracted, squares averaged over
    :data:`GRAIN_SIGMA_PX`); a patch of the face's interior (clear of its outline and
    holes by 6 px, JPEG ringing) whose grain stands :data:`GRAIN_RATIO` times above the
    face's median (and above that of every other pixel flipping by one stored code,
    ``quantum`` squared over 4: a face that renders or scans flat shows its file's
    rounding and compression, not grain), at least ``min_hole_px`` and compact
    (:data:`GRAIN_COMPACT`), is a hole. Its ring is the contour where the grain is halfway between the face's and the
    floor's (a symmetric average of a step in variance is halfway at the step), refined
    and corrected for curvature as the face's rings are. The face is returned unchanged
    when none is found.

    Parameters
    ----------
    linear : (H, W) float ndarray
        Linear-light values of the crop :func:`scan_face` read.
    origin_px : (int, int)
        The crop's (x, y) offset in the image.
    face : FaceResult
        A separated face (``outer_px`` not None); others are returned unchanged.
    min_hole_px : float
        Least area (px2) of a hole.
    quantum : float
        The linear-light step between two stored codes at the face's level (0: not known).

    Examples
    --------
    A face with its sensor's faint noise and a patch of grain 20 px across (a lid seen through
    a hole): one hole, about 20 px across.

    >>> rng = np.random.default_rng(0)
    >>> img = (0.85 + 0.002 * rng.standard_normal((120, 120))).astype(np.float32)
    >>> img[20:100, 20:100] = 0.04 + 0.0005 * rng.standard_normal((80, 80))
    >>> yy, xx = np.mgrid[0:120, 0:120]
    >>> floor = np.hypot(xx - 60, yy - 60) < 10
    >>> img[floor] = 0.045 + 0.008 * rng.standard_normal(int(floor.sum()))
    >>> square = np.array([[19.5, 19.5], [99.5, 19.5], [99.5, 99.5], [19.5, 99.5]])
    >>> face = FaceResult(square, [], None, [], 0.0, (0.0, -1.0), 0.0, 0.0, (0.85, 0.3, 0.04), "separated")
    >>> found = deep_holes(img, (0, 0), face, min_hole_px=50)
    >>> found.grain_holes, round(2 * math.sqrt(abs(signed_area(found.holes_px[0])) / math.pi))
    (1, 20)
    """
    from scanmass.segment.rings import _refine_vertices, correct_curvature

    if face.outer_px is None:
        return face
    origin = np.asarray(origin_px, float)
    shape = linear.shape
    mask = np.zeros(shape, np.uint8)
    cv2.fillPoly(mask, [np.round((np.asarray(face.outer_px, float) - origin) * 16).astype(np.int32)], 1, shift=4)
    for h in face.holes_px:
        cv2.fillPoly(mask, [np.round((np.asarray(h, float) - origin) * 16).astype(np.int32)], 0, shift=4)
    clear = exact_distance(mask)
    interior = clear > 6.0
    if np.count_nonzero(interior) < 4 * max(min_hole_px, 50.0):
        return face
    lin = linear.astype(np.float32)
    high = lin - cv2.GaussianBlur(lin, (0, 0), 1.0)
    grain = cv2.GaussianBlur(high * high, (0, 0), GRAIN_SIGMA_PX)
    face_grain = float(np.median(grain[interior]))
    odd = (interior & (grain > GRAIN_RATIO * max(face_grain, 0.25 * quantum**2, 1e-12))).astype(np.uint8)
    odd = np.asarray(cv2.morphologyEx(odd, cv2.MORPH_OPEN, np.ones((3, 3), np.uint8)), dtype=np.uint8)
    count, comp, stats, _ = cv2.connectedComponentsWithStats(odd, connectivity=8)
    holes, grads = list(face.holes_px), list(face.hole_gradients_px)
    added = 0
    for k in range(1, count):
        area = float(stats[k, cv2.CC_STAT_AREA])
        extent = float(max(stats[k, cv2.CC_STAT_WIDTH], stats[k, cv2.CC_STAT_HEIGHT]))
        if area < min_hole_px or area < GRAIN_COMPACT * math.pi * (0.5 * extent) ** 2:
            continue
        patch = comp == k
        # the floor's own grain: where the average no longer reaches the face (3 of its sigmas in)
        depth = exact_distance(patch.astype(np.uint8))
        core = depth >= min(3.0 * GRAIN_SIGMA_PX, float(depth.max()))
        floor_grain = float(np.median(grain[core]))
        # the patch's own window: its box grown by 8 px, the grain normalised from the face's (0) to the floor's (1)
        x_px, y_px, w_px, h_px = (int(v) for v in stats[k, :4])
        r0, r1 = max(y_px - 8, 0), min(y_px + h_px + 8, shape[0])
        c0, c1 = max(x_px - 8, 0), min(x_px + w_px + 8, shape[1])
        norm = np.clip((grain[r0:r1, c0:c1] - face_grain) / max(floor_grain - face_grain, 1e-12), -0.5, 1.5)
        norm = np.pad(norm.astype(np.float32), 1)  # a frame at the face's grain closes the ring
        best = None
        for ring in find_contours(norm, 0.5, fully_connected="high"):
            if len(ring) < 8 or np.abs(ring[0] - ring[-1]).max() > 1e-9:
                continue
            a = abs(signed_area(ring))
            if best is None or a > best[1]:
                best = (ring[:-1], a)
        if best is None or best[1] < min_hole_px:
            continue
        ring_rc, g, _ = _refine_vertices(norm, best[0], 0.5)
        xy = np.column_stack([ring_rc[:, 1] - 1 + c0 + origin[0], ring_rc[:, 0] - 1 + r0 + origin[1]])
        # the grain's blur: the high-pass's own width and the average's, added in quadrature
        holes.append(correct_curvature(xy, math.hypot(1.0, GRAIN_SIGMA_PX)))
        grads.append(g)
        added += 1
    if not added:
        return face
    return replace(face, holes_px=holes, hole_gradients_px=grads, grain_holes=added, local_levels=True)


#: A face is placed by its tint (:func:`tinted_face`) only if its tint stands this many noise sigmas (of the tint
#: on the lid and its shadow) above the lid's ...
TINT_NOISE = 20.0

#: ... and is at least this share of the lid's level (a grey metal or a black plastic has none).
TINT_LEAST = 0.05


def tinted_face(
    rgb: np.ndarray,
    origin_px: tuple[int, int],
    face: FaceResult,
    min_hole_px: float,
    *,
    found: tuple[np.ndarray, list[np.ndarray], np.ndarray, list[np.ndarray]] | None = None,
) -> FaceResult:
    """A separated face whose edge against its shadow is placed by its colour (brass, copper on a white lid).

    The lid is white and so is the light on it (the lamp's and the housing's scattered
    light): the lamp's shadow is the lid's colour dimmed, with no tint of its own, while a
    brass face nearly as dark as that shadow is yellow. The tint is each pixel's colour
    component orthogonal to the lid's (the lit lid's median next to the part), taken along
    the face's own tint direction; the face's level is its median over the face eroded by
    4 px. It is read in the values as stored (encoded): a JPEG keeps colour as encoded
    differences at half resolution, and across the face's edge against its shadow, both
    about as dark, the encoding is nearly linear, so the tint's half level lies on the edge
    (the subsampling blurs it symmetrically). Against the lit lid it does not (the step
    spans most of the tone curve), but there the luma step is sure: the luma face's edges
    are kept, and only the stretch of the tint's ring more than 2 px from them (the edge
    against the shadow) is taken from the tint. Used when the tint's level stands
    :data:`TINT_NOISE` sigmas above its noise on the lid and the shadow and is at least
    :data:`TINT_LEAST` of the lid's, the tint shows the face's holes, and its ring lies
    within 1.5 px (median) of the luma face's edges away from the shadow; otherwise the face
    is returned unchanged. The holes are the luma face's.

    A face that could not be told from its shadow by level or sweep (``outer_px`` None) is
    built from the tint with the ``found`` rings (outer, holes and their gradients, image px)
    in the luma face's place: the found outline's edges against the lit lid and the rims of
    the holes' lit floors are sure steps and are kept; the tint supplies the face's edge
    against the shadow and the holes' rims against their shadowed floors (a ring's bore seen
    through to the lid in its wall's shadow, as dark as brass, closed the found hole).

    Parameters
    ----------
    rgb : (H, W, 3) float ndarray
        R, G, B of the crop :func:`scan_face` read, as stored (encoded), scaled to [0, 1].
    origin_px : (int, int)
        The crop's (x, y) offset in the image.
    face : FaceResult
        A separated face with its shadow edge marked, or one not separated (with ``found``).
    min_hole_px : float
        Least area (px2) of a hole.
    found : (outer, holes, gradient, hole gradients), optional
        The found rings, for a face not separated.

    Examples
    --------
    A yellowish square face (0.49 0.42 0.26 as stored), found by its level 4 px short of its
    true edge against a grey shadow (0.45) on its top side, on a white lid (0.93):

    >>> img = np.full((100, 100, 3), 0.93, np.float32)
    >>> img[10:30, 20:80] = 0.45
    >>> img[30:80, 20:80] = (0.49, 0.42, 0.26)
    >>> sq = np.array([[19.5 + t, 33.5] for t in range(61)] + [[79.5, 33.5 + t] for t in range(1, 47)]
    ...               + [[79.5 - t, 79.5] for t in range(1, 61)] + [[19.5, 79.5 - t] for t in range(1, 46)])
    >>> edge = sq[:, 1] < 34.0
    >>> face = FaceResult(sq, [], np.full(len(sq), 0.4), [], 0.0, (0.0, -1.0), 0.0, 0.0, (0.85, 0.2, 0.15),
    ...                   "separated", shadow_edge=edge)
    >>> out = tinted_face(img, (0, 0), face, min_hole_px=20)
    >>> out.note, round(abs(signed_area(out.outer_px)))
    ('separated by colour', 3000)
    """
    from scanmass.segment.rings import _blur_from_gradient, _refine_vertices, correct_curvature

    if rgb.ndim != 3:
        return face
    if face.outer_px is not None:
        if face.shadow_edge is None or face.gradient_px is None:
            return face
        kept = ~np.asarray(face.shadow_edge, bool)
        ref = np.asarray(face.outer_px, float)
        ref_outer, ref_grad = ref[kept], np.asarray(face.gradient_px, float)[kept]
        ref_holes = [np.asarray(h, float) for h in face.holes_px]
        ref_hole_grads = [np.asarray(g, float) for g in face.hole_gradients_px]
        keep_holes = True  # the luma face's holes stand
    elif found is not None and face.note != "soft edges":
        ref = np.asarray(found[0], float)
        ref_outer, ref_grad = ref, np.asarray(found[2], float)
        ref_holes = [np.asarray(h, float) for h in found[1]]
        ref_hole_grads = [np.asarray(g, float) for g in found[3]]
        keep_holes = False  # the found holes are only their lit floors
    else:
        return face
    if len(ref_outer) < 8 or len(ref_grad) != len(ref_outer):
        return face
    origin = np.asarray(origin_px, float)
    shape = rgb.shape[:2]
    kernel = np.ones((3, 3), np.uint8)
    mask = np.zeros(shape, np.uint8)
    cv2.fillPoly(mask, [np.round((ref - origin) * 16).astype(np.int32)], 1, shift=4)
    for h in ref_holes:
        cv2.fillPoly(mask, [np.round((h - origin) * 16).astype(np.int32)], 0, shift=4)
    inner = cv2.erode(mask, kernel, iterations=4).astype(bool)
    away = ~cv2.dilate(mask, kernel, iterations=4).astype(bool)
    rgb = rgb.astype(np.float32)
    luma = rgb.mean(axis=2)
    if inner.sum() < 50 or away.sum() < 50:
        return face
    lit = away & (luma >= np.quantile(luma[away], 0.5))
    white = np.median(rgb[lit], axis=0)
    if not float(np.linalg.norm(white)) > 0:
        return face
    w = white / np.linalg.norm(white)
    ortho = rgb - (rgb @ w)[..., None] * w
    # the face's tint: the tinted pixels inside (a found outline not separated holds the shadow too)
    strength = np.linalg.norm(ortho[inner], axis=1)
    tinted = strength >= 0.5 * float(np.quantile(strength, 0.9))
    tint_vec = np.median(ortho[inner][tinted], axis=0)
    level = float(np.linalg.norm(tint_vec))
    if not level > 0:
        return face
    tint = ortho @ (tint_vec / level)
    noise = _mad(tint[away])
    lid = float(white @ w)
    if level < max(TINT_NOISE * noise, TINT_LEAST * lid):
        return face
    norm = np.pad((tint / level).astype(np.float32), 1)  # a frame of the lid's tint (0) closes every ring
    rings = []
    for ring in find_contours(norm, 0.5, fully_connected="high"):
        if len(ring) < 8 or np.abs(ring[0] - ring[-1]).max() > 1e-9:
            continue
        ring_rc, g, slope = _refine_vertices(norm, ring[:-1], 0.5)
        xy = np.column_stack([ring_rc[:, 1] - 1 + origin[0], ring_rc[:, 0] - 1 + origin[1]])
        rings.append((xy, signed_area(xy), g, slope))
    if not rings:
        return face
    rings.sort(key=lambda r: -abs(r[1]))
    outer, outer_area, outer_grad, outer_slope = rings[0]
    holes, hole_grads, slopes = [], [], [outer_slope]
    for xy, area, g, slope in rings[1:]:
        if math.copysign(1.0, area) == math.copysign(1.0, outer_area) or abs(area) < min_hole_px:
            continue
        holes.append(xy)
        hole_grads.append(g)
        slopes.append(slope)
    # the tint shows the face's holes (each found hole, a lit floor, lies in one of them)
    if len(holes) != len(ref_holes):
        return face
    blur = _blur_from_gradient(float(np.median(np.abs(np.concatenate(slopes)))))
    outer = correct_curvature(outer, blur)
    spliced = _splice(outer, outer_grad, ref_outer, ref_grad)
    if spliced is None:
        return face
    new_outer, gradient, moved = spliced
    if moved.sum() < 8:
        return face
    if keep_holes:
        new_holes, new_hole_grads = [np.asarray(h, float) for h in face.holes_px], list(face.hole_gradients_px)
    else:  # each tint hole's rim beside a lit floor (within 2 px of a found hole's ring) is the found ring's
        new_holes, new_hole_grads = [], []
        ref_all = np.concatenate(ref_holes) if ref_holes else np.zeros((0, 2))
        grad_all = np.concatenate(ref_hole_grads) if ref_hole_grads else np.zeros(0)
        for h, g in zip(holes, hole_grads):
            h = correct_curvature(h, blur)
            out = _splice(h, g, ref_all, grad_all, agree=False) if len(ref_all) >= 8 else None
            ring, grad_h = (out[0], out[1]) if out is not None else (h, np.asarray(g, float))
            new_holes.append(ring)
            new_hole_grads.append(grad_h)
    tint_px2 = abs(signed_area(new_outer)) - sum(abs(signed_area(h)) for h in new_holes)
    if face.outer_px is not None:
        face_px2 = abs(signed_area(ref)) - sum(abs(signed_area(h)) for h in ref_holes)
        shadow_px2 = max(0.0, face.shadow_px2 + face_px2 - tint_px2)
    else:
        found_px2 = abs(signed_area(ref)) - sum(abs(signed_area(h)) for h in ref_holes)
        shadow_px2 = max(0.0, found_px2 - tint_px2)
    return replace(
        face,
        outer_px=new_outer,
        holes_px=new_holes,
        gradient_px=gradient,
        hole_gradients_px=new_hole_grads,
        shadow_px2=shadow_px2,
        shadow_edge=moved,
        shadow_edge_px=float(_ring_lengths(new_outer)[moved].sum()),
        note="separated by colour",
        local_levels=True,
        doubt_outer_px=None,
        doubt_px2=0.0,
        doubt_holes_px=None,
    )


def _splice(
    ring: np.ndarray, grad: np.ndarray, ref: np.ndarray, ref_grad: np.ndarray, *, agree: bool = True
) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
    """A tint ring with its vertices within 2 px of the reference points (sure luma edges) moved onto the nearest.

    Returns the spliced ring, its gradients and which vertices kept the tint's place; None
    (with ``agree``) when the tint's ring lies more than 1.5 px (median) from the reference
    where it follows it.
    """
    nearest = np.empty(len(ring), int)
    for i in range(0, len(ring), 512):
        d2 = ((ring[i : i + 512, None, :] - ref[None, :, :]) ** 2).sum(axis=2)
        nearest[i : i + 512] = np.argmin(d2, axis=1)
    offset = np.hypot(*(ring - ref[nearest]).T)
    moved = offset > 2.0
    if agree and (np.count_nonzero(~moved) < 8 or float(np.median(offset[~moved])) > 1.5):
        return None
    spliced = np.where(moved[:, None], ring, ref[nearest])
    gradient = np.where(moved, np.asarray(grad, float), np.asarray(ref_grad, float)[nearest])
    distinct = np.any(np.abs(spliced - np.roll(spliced, 1, axis=0)) > 1e-9, axis=1)  # vertices snapped together
    return spliced[distinct], gradient[distinct], moved[distinct]
