"""Cutting cast shadows out of a photo's parts and measuring again (:func:`_cut_cast_shadows`, term
``shadow_cut``): the lit side wall the segmentation left out (term ``side_wall``), the cut's edge blended
between pixels on dark faces, the cut decided again a little off a given thickness (term ``cut_swing``),
and the constants of the cut.
Part of the pipeline stage (:mod:`scanmass.pipeline`).
"""

from __future__ import annotations

import copy
import math
from collections.abc import Callable
from dataclasses import dataclass, field, fields, replace

import cv2
import numpy as np

from scanmass.errors import OptionError, ScaleError, SegmentationError
from scanmass.geometry import signed_area, vertex_normals
from scanmass.load.decode import LoadedImage
from scanmass.measurement import Measurement, Part
from scanmass.pipeline.part_terms import _with_extra_term, _with_shadow_term, area_share_term, has_lit_face
from scanmass.pipeline.photo_checks import _image_px, _part_crop, relabelled
from scanmass.pipeline.photo_cut_strips import _lies_within, _open_slivers, _painted_holes
from scanmass.pipeline.photo_walls import with_top_seen
from scanmass.scale.camera import PhotoScale
from scanmass.scale.homography import ElevationHook, apply_h
from scanmass.scale.planemap import PlaneMap
from scanmass.segment.castshadow import core_cut, shadow_cut, sweep_direction
from scanmass.segment.colourshadow import ColourSweep, colour_sweep, colour_sweep_cut, coloured_shadow_cut, tint_cut
from scanmass.segment.crescent import consistent_crescent_cut, crescent_cut, severs_a_hole
from scanmass.segment.darkface import dark_tinted_face, hole_bottoms
from scanmass.segment.facelevel import cut_at_face_level, face_above_core
from scanmass.segment.farband import far_band_taken
from scanmass.segment.lightdir import PaperFalloff, paper_falloff, shadow_direction_mm
from scanmass.segment.litcut import face_edge_given_back, lit_face_given_back
from scanmass.segment.metalshadow import metal_colour_sweep
from scanmass.segment.mixtint import other_light_rim
from scanmass.segment.shadow import (
    SHADOW_FRACTION,
    ShadowRisk,
    looks_like_shadow_only,
    shadow_band_px,
    shadow_risk,
    too_wide_for_shadow,
)
from scanmass.segment.sidewall import LostWall, lost_wall_band
from scanmass.segment.softshadow import fade_cut, lit_beyond, tint_bound, tint_step_cut

#: The stated doubt (1 sigma, px) of where the outline runs along a stretch cut from a cast
#: shadow (:func:`~scanmass.segment.castshadow.shadow_cut`). On the committed renders
#: (tests/data/reallight, thickness given) the outline within 5 px of a cut runs, in median,
#: -1.6 to +1.7 px off the true edge (steel plate +0.4, brass gasket 0.0, brass plate +1.7, black
#: bracket -1.6, steel bracket 0.0); two parts keep a remnant of their shadow 10 px wide, which
#: their 'hidden_hole' and 'unclear_edge' terms cover. An earlier mean of 0.7 px inside the edge
#: was the shaded wall facing the camera, cut with the shadow and mapped as the bottom edge
#: (now mapped as the top face's edge). Taken at 2 px.
SHADOW_CUT_EDGE_PX = 2.0
#: Thickness (mm) whose shadow's reach bounds a cut when the thickness is not given: the cut
#: follows the shadow's own grain and level, so the bound only keeps it near the outline
#: (the renders' parts are 1.5-8 mm thick).
SHADOW_CUT_UNKNOWN_THICKNESS_MM = 8.0
#: A metal part's own sweep no longer than this (px) took only its outline's blurred rim, not a shadow:
#: with a thickness given it is tried again as a refused sweep is (along the photo's shadow direction,
#: then the fade test), and kept only where both find nothing. On the render
#: tests/data/reallight/dev-window-steel4-t22 (brushed steel 6.5 mm thick, window light, 22 degrees of
#: tilt) the plate's own sweep ran 1 px and left its shadow's fade and core (about 11 px) in the part:
#: +15.5 % in area. The tuned set's other sweeps run 3-33 px.
SHORT_SWEEP_PX = 2.0
#: The name of the term for the area a cut moves by when decided again at a thickness a little off
#: (:func:`_swing_term`): the cut's bounds (the shadow's reach, the lost wall's width, the
#: sweeps' layer counts) follow the thickness in whole pixels, and a cut can switch between ways of
#: finding the shadow there. On the committed render tests/data/reallight/window-steel-t25 the 2.5 mm
#: steel gasket read +0.29 % in area at 2.50 mm and -6.3 % at 2.45 mm (its core cut along the other
#: part's shadow direction found at one, refused at the other: 96 against 166 mm² cut).
CUT_SWING_TERM = "cut_swing"
#: Smallest step (mm) off a given thickness the cut is decided again at, when the thickness comes
#: without its own uncertainty: a caliper's reading of a plate is good to about 0.05 mm, a nominal
#: sheet thickness to about a tenth of a millimetre (common practice; sheet tolerance tables give
#: +-0.1 to +-0.2 mm for 1.5-8 mm sheet, from memory).
CUT_SWING_MIN_MM = 0.1
#: Share of a given thickness the cut is decided again at, where larger than :data:`CUT_SWING_MIN_MM`.
CUT_SWING_SHARE = 0.05


#: Thickest part (mm, given) whose cast-shadow cut is placed again by its tint
#: (:func:`~scanmass.segment.colourshadow.tint_cut`): a thicker part's shaded side wall facing the camera is of
#: the face's colour, and the cut must take it with the shadow (the outline then runs on the top edge). On the
#: committed spot renders (tests/data/reallight) the tint kept it on the 3.5-4.5 mm brass parts: +2.1 % to
#: +4.3 % (dev-spot-brass4-t17's disc), -2.0 % to +8.3 % (dev-spot-brass5-t24's cam) in area.
TINT_CUT_MAX_THICKNESS_MM = 2.5


#: Vertices on each side of a vertex whose chord gives its normal for :func:`_lost_wall`'s neutral
#: walls (the outline's vertices lie about 1 px apart).
WALL_CHORD = 4


def _lost_wall(
    scale: PhotoScale, part: Part, thickness_mm: float | None, colour_lin: np.ndarray, origin: tuple[int, int]
) -> LostWall | None:
    """The lit side wall the segmentation left out beside a part of the given thickness, or None.

    The outer ring's side facing the camera's nadir shows the wall between the top face and the
    paper, as wide as the top face's parallax there (:class:`~scanmass.scale.homography.ElevationHook`);
    :func:`~scanmass.segment.sidewall.lost_wall_band` tests whether the outline runs on the top face's
    edge with the wall left outside it: a coloured band (brass) by its colour, and a band of the
    paper's colour (a steel wall mirroring the lit paper in front of it) on the side the light falls
    on, as the part's own cast shadow beyond its far side shows. None without a thickness or a
    camera matrix.
    """
    if not thickness_mm or scale.camera_matrix is None or part.outline_mm is None:
        return None
    ring = np.asarray(part.outline_mm, float)
    if signed_area(ring) < 0:
        ring = ring[::-1]  # counter-clockwise in mm (y up): outward is to the right of travel
    hook = ElevationHook(scale.plane_map.matrix, scale.camera_matrix, thickness_mm)
    foot = apply_h(hook.g0, ring)
    seen = scale.plane_map.undistort
    if isinstance(seen, ElevationHook) and seen.top_seen is not None:
        if np.mean(seen.seen_on_top(seen.photo_px(foot))) > 0.5:
            # taken on its top face's edge all round (:func:`~scanmass.pipeline.photo_walls.wall_sides`)
            return None  # no wall was left out
    parallax = apply_h(hook.gh, ring) - foot
    to_crop = foot - np.asarray(origin, float)
    normal = apply_h(hook.g0, ring + 0.1 * vertex_normals(ring)) - foot
    normal /= np.maximum(np.hypot(normal[:, 0], normal[:, 1]), 1e-12)[:, None]
    size = np.hypot(parallax[:, 0], parallax[:, 1])
    facing = np.sum(normal * parallax, axis=1) < -0.5 * size  # the wall faces the camera here
    coloured = lost_wall_band(colour_lin, to_crop, normal, np.where(facing, size, 0.0))
    # a neutral (steel) wall on the light's side: normals from the chord over a few px on each side
    # (a jagged outline's vertex normals swing, and would break the wall's side into runs too short
    # to test), the wall as wide as the parallax's component across the outline
    chord = np.roll(ring, -WALL_CHORD, axis=0) - np.roll(ring, WALL_CHORD, axis=0)
    outward = np.column_stack([chord[:, 1], -chord[:, 0]])
    outward /= np.maximum(np.hypot(outward[:, 0], outward[:, 1]), 1e-12)[:, None]
    normal = apply_h(hook.g0, ring + 0.1 * outward) - foot
    normal /= np.maximum(np.hypot(normal[:, 0], normal[:, 1]), 1e-12)[:, None]
    across = np.sum(normal * parallax, axis=1)  # the top edge's offset along the outward normal
    facing = across < -0.5 * size
    neutral = lost_wall_band(
        colour_lin,
        to_crop,
        normal,
        np.where(facing, size, 0.0),
        shadow_reach_px=shadow_band_px(thickness_mm, scale.plane_map.mm_per_px),
        silhouette_px=np.abs(across),
    )
    if coloured is None or neutral is None:
        return coloured or neutral
    band = coloured.band | neutral.band
    return LostWall(band, int(np.count_nonzero(band)), coloured.vertices + neutral.vertices, neutral.seam)


#: A level this many times the face's, inside a dark part's cut, is a lit side wall the cut took with
#: the shadow (spot-black-t20's disc: the wall facing the camera at 5-7 times the face's level).
_LIT_WALL_RATIO = 3.0


def _blend_cut_edge(
    window: np.ndarray, before: np.ndarray, mask: np.ndarray, cut: np.ndarray, lut: np.ndarray, paper_code: float
) -> None:
    """Paint the pixels along a cut's edge with the face's share of each, so the outline lands between pixels.

    A cut painted as paper pixel by pixel puts the outline on a pixel boundary: up to half a
    pixel off the step between the face and its shadow, and on the committed render
    tests/data/reallight/spot-black-t20 the black bracket's cut side ran 0.85 px inside its top
    edge. Where the face's level ``f`` and the shadow's ``s`` differ by
    :data:`~scanmass.segment.castshadow._LEVEL_STEP_RATIO` or more, each pixel within 1.5 px of
    the edge between the cut and the kept face (both sides) is a mix of the two: its share of
    face ``a = (L - s) / (f - s)`` (``L`` smoothed over 0.7 px, clipped to 0..1). It is painted
    ``a f + (1 - a) paper`` (linear light, encoded through ``lut``), so that the measurement's
    half-way level between the face and the paper falls where the photo's level is half-way
    between the face and its shadow. ``window`` (encoded, as stored) is painted in place;
    ``before`` is it before the cut was painted.

    It runs on dark plastic faces only. On the brass gasket of spot-brass-t10 (whose cut's
    step, face 0.019 and shadow 0.012 of the paper white, lies on the cut's pixel boundary)
    it brought the area from -3.1 % to +0.04 % only by overshooting the outline by
    0.3-0.4 mm in places, against a 0.06 mm inward bias all round the outer edge and a hole
    0.13 mm too large all round; on the thick brass plates' deep holes it shrank the holes
    (the hole's dark wall and bottom taken as the shadow's level). Face and shadow levels
    taken locally (instead of one median per part) moved spot-black-t20's disc from +1.2 %
    to +0.9 % but window-mixed-t0's bracket from -1.8 % to -4.7 %, so they stay global.

    Where the cut took a lit side wall facing the camera with the shadow (levels of
    :data:`_LIT_WALL_RATIO` times the face's or more, below the half-way level to the paper, in
    the cut beside the kept face), the step there runs from the face up to the wall: a pixel
    brighter than the face gets the share ``(w - L) / (w - f)`` with ``w`` the wall's median
    level. Taken as face (share 1), a wall pixel moved the top edge 2 px out into the wall, which
    the plane map then moved on by the wall's parallax (spot-black-t20's disc, 8 mm: +0.84 % in
    area, the outline 0.6 mm outside along its lit wall; now -0.25 %).
    """
    keep = mask & ~cut
    to_cut = cv2.distanceTransform((~cut).astype(np.uint8), cv2.DIST_L2, 3)
    to_keep = cv2.distanceTransform((~keep).astype(np.uint8), cv2.DIST_L2, 3)
    lin = lut[before.astype(np.intp)] if np.issubdtype(before.dtype, np.integer) else None
    if lin is None:
        return
    face_px = keep & (to_cut >= 3) & (to_cut <= 6)
    shadow_px = cut & (to_keep >= 2)
    if np.count_nonzero(face_px) < 20 or np.count_nonzero(shadow_px) < 20:
        return
    f, sh = float(np.median(lin[face_px])), float(np.median(lin[shadow_px]))
    if max(f, sh) < 1.3 * max(min(f, sh), 1e-9):
        return  # no clear step of level: the cut stays whole pixels
    paper = float(lut[int(paper_code)])
    band = mask & ((cut & (to_keep <= 1.5)) | (keep & (to_cut <= 1.5)))
    smooth = cv2.GaussianBlur(lin.astype(np.float32), (0, 0), 0.7)
    level = smooth[band]
    share = np.clip((level - sh) / (f - sh), 0.0, 1.0)
    if f > sh:
        # the cut took a lit side wall (brighter than the face) with the shadow where that wall faces
        # the camera: there the step runs from the face up to the wall, not down to the shadow. A wall
        # is below the half-way level to the paper (above it the segmentation took it for paper; the
        # blurred paper at a cut's ends is no wall)
        lit = cut & (to_keep >= 1) & (to_keep <= 3) & (lin > _LIT_WALL_RATIO * f) & (lin < 0.5 * (f + paper))
        if np.count_nonzero(lit) >= 10:
            w = float(np.median(lin[lit]))
            up = level > f
            share[up] = np.clip((w - level[up]) / (w - f), 0.0, 1.0)
    value = share * f + (1.0 - share) * paper
    order = np.argsort(lut)
    pos = np.clip(np.searchsorted(lut[order], value), 1, len(lut) - 1)
    lower, upper = order[pos - 1], order[pos]
    codes = np.where(np.abs(lut[lower] - value) <= np.abs(lut[upper] - value), lower, upper)
    window[band] = codes.astype(window.dtype)


def _wall_px(scale: PhotoScale, part: Part, thickness_mm: float) -> float:
    """The widest (px) a part's side wall can show in the photo: its thickness' parallax, largest over the outline."""
    step = _wall_steps(scale, part, thickness_mm)
    return float(np.max(np.hypot(step[:, 0], step[:, 1]))) if len(step) else 0.0


def _wall_steps(scale: PhotoScale, part: Part, thickness_mm: float) -> np.ndarray:
    """The parallax (px, x then y) of a part's thickness at each point of its outline: where its top edge is seen
    from its foot. Empty without a thickness, a camera or an outline."""
    if not thickness_mm or scale.camera_matrix is None or part.outline_mm is None:
        return np.zeros((0, 2))
    ring = np.asarray(part.outline_mm, float)
    hook = ElevationHook(scale.plane_map.matrix, scale.camera_matrix, thickness_mm)
    return apply_h(hook.gh, ring) - apply_h(hook.g0, ring)


def _within_box(part: Part, lo: np.ndarray, hi: np.ndarray) -> bool:
    """Whether a part lies within the box ``lo``-``hi`` (mm): its centroid, or every point of its outline.

    A sliver of a cut's remnant (a few pixels enclosing almost no area) has an ill-defined centroid:
    on the committed render tests/data/reallight/dev-window-low-steel-t15 a piece of 0.07 mm² beside
    the steel disc's cut had its centroid 370 mm off, outside the mat, and was reported as a part.
    """
    outline = part.outline_mm if part.outline_mm is not None else [part.centroid_mm]
    pts, c = np.asarray(outline, float), np.asarray(part.centroid_mm, float)
    return bool(np.all((pts >= lo) & (pts <= hi))) or bool(np.all((c >= lo) & (c <= hi)))


#: Largest angle (degrees) between a part's own sweep by colour (:func:`~scanmass.segment.colourshadow.colour_sweep`)
#: and the direction the photo's sweeps agree on for the part to be cut along it.
SWEEP_AGREE_DEG = 30.0


def region_reading(
    image: LoadedImage, scale: PhotoScale, part: Part, colour: np.ndarray, lut: np.ndarray, band_px: float
) -> tuple[np.ndarray, np.ndarray, ShadowRisk] | None:
    """A found region's crop in linear colour with paper all round (the band a shadow can cover and 16 px), its
    mask and its :func:`~scanmass.segment.shadow.shadow_risk`; None where it has no crop or no paper to read."""
    crop = _part_crop(image, scale, part, int(band_px) + 16)
    if crop is None:
        return None
    (x0, y0, x1, y1), mask, _ = crop
    crop_lin = lut[colour[y0:y1, x0:x1]]
    risk = shadow_risk(crop_lin, mask, band_px)
    return None if risk is None else (crop_lin, mask, risk)


def _own_colour_sweep(
    image: LoadedImage, scale: PhotoScale, part: Part, band_px: float, lut: np.ndarray, colour: np.ndarray
) -> ColourSweep | None:
    """A part's own sweep by colour in its crop, or None.

    A matte face's (:func:`~scanmass.segment.colourshadow.colour_sweep`), else a metal face's
    (:func:`~scanmass.segment.metalshadow.metal_colour_sweep`: the shadow-like layers smoother than the face).
    """
    reading = region_reading(image, scale, part, colour, lut, band_px)
    if reading is None:
        return None
    colour_lin, mask, risk = reading
    found = colour_sweep(colour_lin, mask, risk.paper_rgb, band_px)
    # a metal face (refused by the matte sweep: its levels spread) by its shadows' colour and smoothness
    return found if found is not None else metal_colour_sweep(colour_lin, mask, risk.paper_rgb, band_px)


def _agreed_direction(sweeps: list[ColourSweep]) -> np.ndarray | None:
    """The direction the parts' sweeps by colour agree on: the strongest one's, averaged (by score) with those within :data:`SWEEP_AGREE_DEG`.

    One light casts every shadow of a photo the same way: the sweep with the most net votes sets the
    side, and the others that run within :data:`SWEEP_AGREE_DEG` of it refine it. None without a
    sweep of positive score.
    """
    found = [(sw.score, np.asarray(sw.direction, float)) for sw in sweeps if sw.score > 0]
    if not found:
        return None
    ref = max(found, key=lambda f: f[0])[1]
    cos_agree = math.cos(math.radians(SWEEP_AGREE_DEG))
    total = np.sum([w * d for w, d in found if float(d @ ref) >= cos_agree], axis=0)
    return np.asarray(total / max(float(np.hypot(*total)), 1e-12))


@dataclass
class _Decision:
    """What :func:`_decide_cuts` decided for a photo's parts at one thickness, and the image painted by it."""

    grey: np.ndarray  #: the parts' image with the cuts painted as paper (and lost walls as face)
    top_seen: np.ndarray | None  #: where the outline runs on the top face's edge
    cuts: list[tuple[Part, float, float, float]]  #: (the part as found, cut edge mm, cut mm2, wall mm2)
    opened: list[str]  #: parts whose holes' dark bottoms were opened
    by_colour: set[int]  #: id() of the parts whose cut was found by the shadows' colour
    painted: np.ndarray  #: the cuts painted in the paper's level
    firsts: np.ndarray  #: within the first outer outlines of the cut parts
    cut_faces: np.ndarray  #: the same, less the cuts
    paper_codes: np.ndarray  #: the paper's level painted around each
    band_px: float  #: the shadow's reach (px) the cut was bounded by
    reached: bool  #: whether any part came to the cut's test or had a lost wall (a cut the thickness can move)


def _seen_mask(scale: PhotoScale, part: Part, origin: tuple[int, int], shape: tuple[int, ...]) -> np.ndarray | None:
    """A part's region as the photo shows it (:func:`~scanmass.pipeline.photo_checks._image_px`), holes cleared, in a crop.

    None where the plane map lifts no face (the footprint is what the photo shows) or the part has no outline.
    """
    if not isinstance(scale.plane_map.undistort, ElevationHook) or part.outline_mm is None:
        return None
    if any(h.outline_mm is None for h in part.holes):
        return None
    off = np.asarray(origin, float)
    seen = np.zeros(shape[:2], np.uint8)
    cv2.fillPoly(seen, [np.round(_image_px(scale, np.asarray(part.outline_mm, float)) - off).astype(np.int32)], 1)
    for h in part.holes:
        ring = _image_px(scale, np.asarray(h.outline_mm, float), hole=True) - off
        cv2.fillPoly(seen, [np.round(ring).astype(np.int32)], 0)
    return seen.astype(bool)


def _decide_cuts(
    image: LoadedImage,
    masked: LoadedImage,
    scale: PhotoScale,
    result: Measurement,
    thickness_mm: float | None,
    colour: np.ndarray,
) -> _Decision:
    """Each part's cast-shadow cut and lost side wall at one thickness, painted on a copy of ``masked``'s grey levels.

    The decision of :func:`_cut_cast_shadows`, without measuring again: where the thickness enters
    (the shadow's reach, the lost wall's width, the sweeps' bounds), it can be taken again at a
    thickness a little off (:func:`_swing_term`).
    """
    thick = SHADOW_CUT_UNKNOWN_THICKNESS_MM if thickness_mm is None else thickness_mm
    mm_per_px = scale.plane_map.mm_per_px
    band_px = shadow_band_px(thick, mm_per_px)
    lut = np.asarray(image.to_linear, dtype=np.float32)
    grey = masked.grey.copy()
    cuts: list[tuple[Part, float, float, float]] = []  # (the part as found, cut edge mm, cut mm2, wall mm2)
    hook = scale.plane_map.undistort
    top_seen: np.ndarray | None = None
    if isinstance(hook, ElevationHook):
        top_seen = np.zeros(grey.shape[:2], bool) if hook.top_seen is None else hook.top_seen.copy()
    opened: list[str] = []  # parts whose holes' dark bottoms were opened
    reached = False  # whether any part came to the cut's test or had a lost wall
    by_colour: set[int] = set()  # id() of the parts whose cut was found by the shadows' colour
    painted = np.zeros(grey.shape[:2], bool)  # the cuts painted in the paper's level
    firsts = np.zeros(grey.shape[:2], bool)  # within the first outer outlines of the cut parts
    cut_faces = np.zeros(grey.shape[:2], bool)  # the same, less the cuts
    paper_codes = np.zeros(grey.shape[:2], grey.dtype)  # the paper's level painted around each
    # a metal part whose own sweep was refused comes again after the others (phase 1), its sweep then
    # sought along the shadow direction their cuts found (one light casts every shadow of a photo one
    # way); a part not taken as dark and left uncut in a shadow's risk comes last (phase 2), cut by colour
    # under two lights of different colours along the direction the sweeps of all such parts agree on
    todo: list[tuple[Part, int]] = [(part, 0) for part in result.parts]
    sweeps: dict[int, ColourSweep | None] = {}  # phase 2: each part's own sweep by colour
    photo_dir: np.ndarray | None = None  # phase 2: the direction the sweeps by colour agree on
    # (cut px, direction, length px) of the cuts found by a sweep
    swept: list[tuple[int, tuple[float, float], float | None]] = []
    # the crops of the parts whose own sweep was refused (for :func:`sweep_direction`, read when needed)
    refused: list[tuple[np.ndarray, np.ndarray, np.ndarray, float, np.ndarray]] = []
    # the same of the parts too wide for their shadow (their own search is left out; their own sweep's
    # direction is the light's evidence where no other part shows it)
    wides: list[tuple[np.ndarray, np.ndarray, np.ndarray, float, np.ndarray]] = []
    lights: list[tuple[float, float] | None] = []  # the light's direction those show, once read
    falloffs: list[PaperFalloff | None] = []  # the paper's fall-off over the mat, once read
    for k_todo, (part, phase) in enumerate(todo):
        later = phase >= 1
        if phase == 2 and not sweeps:
            if any(ph < 2 for _, ph in todo[k_todo + 1 :]):
                todo.append((part, 2))  # after every part of the earlier phases
                continue
            for waiting, _ in todo[k_todo:]:
                sweeps[id(waiting)] = _own_colour_sweep(image, scale, waiting, band_px, lut, colour)
            photo_dir = _agreed_direction([sw for sw in sweeps.values() if sw is not None])
        crop = _part_crop(image, scale, part, int(band_px) + 16)
        if crop is None:
            continue
        (x0, y0, x1, y1), mask, rings = crop
        colour_lin = lut[colour[y0:y1, x0:x1]]
        window = grey[y0:y1, x0:x1]
        wall = _lost_wall(scale, part, thickness_mm, colour_lin, (x0, y0))
        wall_mm2 = 0.0
        if wall is not None:
            face = window[cv2.erode(mask.astype(np.uint8), np.ones((5, 5), np.uint8)).astype(bool)]
            if face.size >= 20:
                paint = wall.band & ~mask if wall.seam is None else (wall.band & ~mask) | wall.seam
                window[paint] = np.asarray(np.median(face), dtype=grey.dtype)
                wall_mm2 = float(np.count_nonzero(wall.band & ~mask)) * mm_per_px**2
        risk = shadow_risk(colour_lin, mask, band_px)
        reached = reached or wall is not None or (risk is not None and risk.fraction >= SHADOW_FRACTION)
        cut = None
        coloured = False  # a cut by the shadows' colour (mixed light), not by their grain
        metal = False  # such a cut of a metal face (its dark sectors are no holes' bottoms)
        dark = risk is not None and dark_tinted_face(colour_lin, mask, risk.paper_rgb, band_px)
        if dark and risk is not None:
            # a dark plastic face: its shadow is cut on the outline where the photo shows it (a
            # thick part's top edge lies its parallax beyond the footprint the plane map gives)
            as_seen = _part_crop(image, scale, part, int(band_px) + 16, as_seen=True)
            if as_seen is not None:
                (x0, y0, x1, y1), mask, rings = as_seen
                colour_lin = lut[colour[y0:y1, x0:x1]]
                window = grey[y0:y1, x0:x1]
                risk = shadow_risk(colour_lin, mask, band_px)
        # a part whose lit face was joined up to its sharp edge is no shadow alone
        alone = risk is not None and looks_like_shadow_only(risk) and not has_lit_face(part)
        # fading as a shadow alone does, but wider than a shadow of a part that thick can be: a thick metal
        # face in a low light, dark beside its shadow (dev-window-steel5-t14's 5.5 mm steel plate)
        wide = alone and not dark and thickness_mm is not None and too_wide_for_shadow(mask, thickness_mm, mm_per_px)
        if wide and not later:
            todo.append((part, 1))  # cut along the photo's shadow direction, once the other parts show it
            if risk is not None:
                wides.append((colour_lin, mask, risk.paper_rgb, band_px, _code_step(lut, colour[y0:y1, x0:x1], risk)))
            continue
        if phase < 2 and risk is not None and risk.fraction >= SHADOW_FRACTION and (not alone or wide):
            step = _code_step(lut, colour[y0:y1, x0:x1], risk)
            # such a wide face's own search runs through its grain (its longest run): only along the light
            cut = None if wide else shadow_cut(colour_lin, mask, risk.paper_rgb, band_px, code_step=step)
            if cut is None and not dark and not later:
                refused.append((colour_lin, mask, risk.paper_rgb, band_px, step))
            if cut is not None and dark:
                # mixed light: a cut at the face's level holds only face (no shadow is that dark), tried by colour;
                # one light: the face the cut took beside a darker core is given back (the face's edge is a step)
                at_face = cut_at_face_level(colour_lin, mask, risk.paper_rgb, cut, band_px)
                cut = None if at_face else face_above_core(colour_lin, mask, risk.paper_rgb, cut)
            if cut is None and dark:
                # mixed light: each light's shadow lit by the other, of its colour, not the paper's
                cut = coloured_shadow_cut(colour_lin, mask, risk.paper_rgb, band_px)
                coloured = cut is not None
                if coloured:
                    by_colour.add(id(part))
            short = None  # a metal part's own sweep of its rim only, kept where nothing better is found
            severing = None  # a fade cut that nearly severs a hole from the outside, kept where nothing else is found
            light: tuple[np.ndarray, float | None] | None = None  # the photo's shadow direction tried, its length
            if (
                cut is not None
                and not dark
                and thickness_mm is not None
                and cut.length_px is not None
                and cut.length_px <= SHORT_SWEEP_PX
            ):
                short, cut = cut, None
            if cut is not None and not dark and thickness_mm is not None and thickness_mm <= TINT_CUT_MAX_THICKNESS_MM:
                # a thin tinted metal face's rim as rough as its shadow: the cut ends where the paper's tint does (a
                # thicker part's shaded wall facing the camera, of the face's tint, goes with the shadow)
                cut = tint_bound(colour_lin, mask, risk.paper_rgb, cut, band_px) or cut
            if cut is not None and cut.direction is not None:
                swept.append((cut.cut_px, cut.direction, cut.length_px))
            if cut is None and not dark and thickness_mm is not None:
                if not later and not swept:
                    todo.append((part, 1))  # again once the other parts' cuts are known
                    continue
                if swept:
                    # along the photo's shadow direction (one light): an L bracket's own search ran
                    # along its other arm's shadow (dev-window-steel-t0: +21.8 %); its length held near theirs: one thickness given,
                    # one light, so one shadow's length (dev-window-low-steel-t15: the bracket cut 10 px
                    # into its face along its arms where the half-way of its grain fell on its rough rim)
                    witness = max(swept, key=lambda s: s[0])
                    along = np.asarray(witness[1], float)
                    light = (along, witness[2])
                    cut = core_cut(
                        colour_lin,
                        mask,
                        risk.paper_rgb,
                        band_px,
                        along,
                        code_step=step,
                        witness_px=witness[2],
                    )
                    if cut is None and wide:
                        # a face that fades as a shadow alone does: along the same light past its fade, without
                        # the other part's length (another part's thickness, where each part's own is given)
                        cut = core_cut(colour_lin, mask, risk.paper_rgb, band_px, along, code_step=step, past_fade=True)
                elif wide:
                    # no cut to show the light: the direction of another part's sweep refused on its
                    # texture alone (its face almost as grainy as its shadow), without its length; where
                    # none shows it, a wide part's own sweep (the largest first), read once for the photo
                    if not lights:
                        lights.append(_light_hint(refused, wides))
                    if lights[0] is not None:
                        light = (np.asarray(lights[0]), None)
                        cut = core_cut(
                            colour_lin,
                            mask,
                            risk.paper_rgb,
                            band_px,
                            light[0],
                            code_step=step,
                            past_fade=True,
                        )
            if wide and cut is not None and lit_beyond(colour_lin, mask, risk.paper_rgb, cut):
                cut = None  # a hard light's: the paper beyond is lit, so the dark layer is the face's own sector
            if cut is None and not dark and thickness_mm is not None and not wide:
                # a metal face as grainy as its shadow: the soft shadow's fade inside the outline (a face that
                # fades as a shadow alone does is cut along the light only)
                cut = fade_cut(colour_lin, mask, risk.paper_rgb, band_px)
                if cut is not None and light is not None and severs_a_hole(mask, cut.cut):
                    # the fade ran from a bore's shaded rim nearly across the ring (the ring is lost when found
                    # again): the cuts along the light instead, the fade's kept where neither finds one
                    severing, cut = cut, None
            if cut is None and light is not None:
                # a brushed face too grainy for the shadow's grain to tell it: the shadow's tint (the paper's)
                # against the face's, along the same light
                cut = tint_step_cut(colour_lin, mask, risk.paper_rgb, band_px, light[0], witness_px=light[1])
            if cut is None and short is None and light is not None:
                # no cut at all, the whole shadow left (a ring's crescent): eroded back along the light to the face
                cut = crescent_cut(colour_lin, mask, risk.paper_rgb, band_px, light[0])
            elif cut is None and short is None and later and not dark and thickness_mm is not None:
                # no part's cut shows the light: the paper's fall-off away from it does (one light's side), its
                # height read as the one whose sweep the shadow's grain agrees with
                if not falloffs:
                    falloffs.append(_paper_falloff(lut, colour, scale))
                centre = ((x0 + x1 - 1) / 2.0, (y0 + y1 - 1) / 2.0)
                sweeps_px = _falloff_sweeps(falloffs[0], scale, centre, thickness_mm)
                cut = consistent_crescent_cut(colour_lin, mask, risk.paper_rgb, band_px, sweeps_px)
            if cut is None:
                cut = short if severing is None else severing
        if phase == 2 and risk is not None:
            own = sweeps.get(id(part))
            if own is not None and own.metal and alone and not wide:
                # a region that looks like a shadow alone and is no wider than one (a white part's, the part
                # not found: window-mixed-t0): a metal face's sweep would leave a piece of it as a part
                own = None
            if own is not None and photo_dir is not None and own.like.shape == mask.shape:
                if float(np.asarray(own.direction) @ photo_dir) >= math.cos(math.radians(SWEEP_AGREE_DEG)):
                    d = (float(photo_dir[0]), float(photo_dir[1]))
                    cut = colour_sweep_cut(colour_lin, mask, risk.paper_rgb, band_px, own, d)
                    coloured = cut is not None
                    metal = coloured and own.metal
                    if coloured:
                        by_colour.add(id(part))
        elif (
            cut is None
            and wall is None
            and not dark
            and thickness_mm is not None
            and risk is not None
            and risk.fraction >= SHADOW_FRACTION
        ):
            todo.append((part, 2))  # by colour, once every part's sweep by colour is known
            continue
        if (
            cut is not None
            and not dark
            and not coloured
            and risk is not None
            and thickness_mm is not None
            and thickness_mm <= TINT_CUT_MAX_THICKNESS_MM
        ):
            # a yellow (brass) face as dark as its neutral shadow under a hard light: the edge by its tint
            # on the region as the photo shows it: the crop's mask is the footprint, which stops the parallax short of
            # the top face's edge on the sides facing away from the camera (where the shadow lies beside that edge)
            seen = _seen_mask(scale, part, (x0, y0), mask.shape)
            by_tint = tint_cut(colour_lin, mask if seen is None else seen, risk.paper_rgb, cut, band_px)
            if by_tint is not None:
                cut = by_tint
        if cut is not None and not dark and not coloured and risk is not None:
            cut = lit_face_given_back(colour_lin, mask, risk.paper_rgb, cut, band_px)  # a metal's lit stretch kept
            if thickness_mm is not None:  # and its face beside the shadow (without one, the wall's width is unknown)
                wall_px = _wall_px(scale, part, thickness_mm)
                cut = face_edge_given_back(colour_lin, mask, risk.paper_rgb, cut, wall_px)
                # and the shadow's core the sweep left along the face, by its geometry (a band along the cut)
                # (and where the wall facing the camera shows on its edge, the wall with it: coreband31)
                walls = (rings[0], _wall_steps(scale, part, thickness_mm))
                cut = far_band_taken(colour_lin, mask, risk.paper_rgb, cut, wall_px, walls)
        if cut is None and not dark and thickness_mm is not None and risk is not None:
            # a yellow face's rim in one light's shadow lit by another light of another colour (not darkened paper)
            cut = other_light_rim(colour_lin, mask, risk.paper_rgb)
            coloured = cut is not None  # the wall it leaves is of the face's colour (no top-face edge there)
            if coloured:
                by_colour.add(id(part))
        if cut is not None:
            outside = cv2.distanceTransform(1 - mask.astype(np.uint8), cv2.DIST_L2, 3)
            paper = grey[y0:y1, x0:x1][(outside > 4) & (outside < 16)]
            if paper.size < 20:
                cut = None
            else:
                unpainted = window.copy()
                window[cut.cut] = np.asarray(np.median(paper), dtype=grey.dtype)
                painted[y0:y1, x0:x1] |= cut.cut
                outer = np.zeros(mask.shape, np.uint8)
                cv2.fillPoly(outer, [np.round(rings[0]).astype(np.int32)], 1)
                firsts[y0:y1, x0:x1] |= outer.astype(bool)
                cut_faces[y0:y1, x0:x1] |= outer.astype(bool) & ~cut.cut
                paper_codes[y0:y1, x0:x1] = np.median(paper)
                if dark:
                    _blend_cut_edge(window, unpainted, mask, cut.cut, lut, np.median(paper))
                if top_seen is not None and not coloured:
                    # the cut takes the shaded side wall with the shadow: where that wall faces the
                    # camera, the outline then runs on the top face's edge (a cut by colour keeps a
                    # wall the other light lights, of the face's colour: where the outline runs is
                    # left to the wall's own test)
                    near = cv2.dilate(cut.cut.astype(np.uint8), np.ones((5, 5), np.uint8)).astype(bool)
                    top_seen[y0:y1, x0:x1] |= near
                bottoms_px = 0.0
                if thickness_mm is not None and top_seen is not None and risk is not None and not metal:
                    # a dark plastic part whose shadow was cut: the dark bottoms and walls of its
                    # through-holes open as holes, seen on their top edges
                    bottoms = hole_bottoms(colour_lin, mask & ~cut.cut, risk.paper_rgb)
                    if bottoms.any():
                        window[bottoms] = np.asarray(np.median(paper), dtype=grey.dtype)
                        near = cv2.dilate(bottoms.astype(np.uint8), np.ones((5, 5), np.uint8)).astype(bool)
                        top_seen[y0:y1, x0:x1] |= near
                        rim = bottoms & ~cv2.erode(bottoms.astype(np.uint8), np.ones((3, 3), np.uint8)).astype(bool)
                        bottoms_px = float(np.count_nonzero(rim))
                        opened.append(f"{part.label} ({float(np.count_nonzero(bottoms)) * mm_per_px**2:.3g} mm²)")
        if cut is not None or wall_mm2 > 0:
            edge_mm = (cut.edge_px + bottoms_px) * mm_per_px if cut is not None else 0.0
            cut_mm2 = cut.cut_px * mm_per_px**2 if cut is not None else 0.0
            cuts.append((part, edge_mm, cut_mm2, wall_mm2))
    return _Decision(grey, top_seen, cuts, opened, by_colour, painted, firsts, cut_faces, paper_codes, band_px, reached)


def _light_hint(
    refused: list[tuple[np.ndarray, np.ndarray, np.ndarray, float, np.ndarray]],
    wides: list[tuple[np.ndarray, np.ndarray, np.ndarray, float, np.ndarray]],
) -> tuple[float, float] | None:
    """The photo's light direction for a part too wide for its shadow, from the parts whose own cut was refused.

    The first found of :func:`~scanmass.segment.castshadow.sweep_direction` over the parts whose own sweep
    was refused on its texture, then over the parts too wide for their shadow, the largest first; None
    where none gives one. On the committed render tests/data/reallight/dev-lens-window-steel2-t16 both
    steel parts are too wide for their shadow and no other part shows the light: the plate's own sweep
    runs along the shadow (about 20 degrees off the light's direction, which the sweep's refinement mends).
    """
    for crop in refused + sorted(wides, key=lambda w: -int(np.count_nonzero(w[1]))):
        hint = sweep_direction(*crop[:4], code_step=crop[4])
        if hint is not None:
            return hint
    return None


def _paper_falloff(lut: np.ndarray, colour: np.ndarray, scale: PhotoScale) -> PaperFalloff | None:
    """The paper's fall-off (:func:`~scanmass.segment.lightdir.paper_falloff`) over the photo's clear area.

    The level is the linear light's channel mean; the clear area the scale's ``roi_px`` (the plane map's
    lens correction left out: a direction moves by well under a degree with it).
    """
    level = lut[colour].mean(axis=2)
    valid = np.zeros(level.shape, np.uint8)
    cv2.fillPoly(valid, [np.round(np.asarray(scale.roi_px, float)).astype(np.int32)], 1)
    return paper_falloff(level, valid.astype(bool), scale.plane_map.matrix)


#: Heights (degrees above the mat) of a light whose side alone the paper's fall-off shows, each a candidate
#: sweep of :func:`_falloff_sweeps`: from a low window's (15, as
#: :data:`~scanmass.segment.shadowsweep.LOW_LIGHT_REACH_FACTOR` bounds the erosion) to a lamp well overhead.
FALLOFF_HEIGHTS_DEG = tuple(range(15, 65, 5))


def _falloff_sweeps(
    falloff: PaperFalloff | None, scale: PhotoScale, centre_px: tuple[float, float], thickness_mm: float
) -> list[np.ndarray]:
    """Candidate sweeps (x, y px) that take a part's shadow off its top face as seen, one per light height.

    The shadow on the mat runs ``thickness / tan(height)`` mm down the paper's fall-off
    (:func:`~scanmass.segment.lightdir.shadow_direction_mm`) from the footprint; the top face is seen shifted
    from its footprint by its parallax (:class:`~scanmass.scale.homography.ElevationHook`), so the region is
    the face swept by the shadow's vector less that shift (none without a camera matrix). Empty where the
    fall-off shows no light's side.
    """
    h = np.asarray(scale.plane_map.matrix, float)
    at_mm = apply_h(h, np.asarray([centre_px], float))[0]
    down = shadow_direction_mm(falloff, at_mm)
    if down is None:
        return []
    if scale.camera_matrix is not None:
        hook = ElevationHook(h, scale.camera_matrix, thickness_mm)
        foot_to_px, top_px = hook.g0, apply_h(hook.gh, at_mm[None])[0]
    else:
        foot_to_px = np.linalg.inv(h)
        top_px = apply_h(foot_to_px, at_mm[None])[0]
    foot_px = apply_h(foot_to_px, at_mm[None])[0]
    tips_mm = [at_mm + down * thickness_mm / math.tan(math.radians(e)) for e in FALLOFF_HEIGHTS_DEG]
    return list(apply_h(foot_to_px, np.asarray(tips_mm)) - foot_px - (top_px - foot_px))


def _code_step(lut: np.ndarray, codes: np.ndarray, risk: ShadowRisk) -> np.ndarray:
    """Per pixel, the step of linear light between its code and the next, as a share of the paper white."""
    c = codes.astype(np.intp)
    return np.asarray((lut[np.minimum(c + 1, len(lut) - 1)] - lut[c]).mean(axis=2) / float(np.mean(risk.paper_rgb)))


def _swing_term(part: Part, probes: list[Measurement], floor_mm2: float) -> dict[str, float] | None:
    """The term ``cut_swing`` of a part: how far its figures move with the cut decided a little off the thickness.

    The part of each probe (:func:`_cut_cast_shadows`'s measurements at the thickness -dt and +dt)
    whose centroid lies nearest, within a quarter of the part's largest width, gives the area's
    difference; the largest over the probes sets an area term (:func:`~scanmass.pipeline.part_terms.area_share_term`:
    centroid, perimeter and moments to match), its centroid raised to the centroid's own largest
    move where that is larger. None where no probe moves the area by ``floor_mm2`` (a pixel's area) or more:
    a part measured again on the same image moves by a rounding's worth only.
    """
    d_area, d_x, d_y = 0.0, 0.0, 0.0
    for probe in probes:
        near = [q for q in probe.parts if math.dist(q.centroid_mm, part.centroid_mm) < 0.25 * part.caliper_max_mm]
        if not near:
            continue
        q = min(near, key=lambda q: math.dist(q.centroid_mm, part.centroid_mm))
        d_area = max(d_area, abs(q.area_mm2 - part.area_mm2))
        d_x = max(d_x, abs(q.centroid_mm[0] - part.centroid_mm[0]))
        d_y = max(d_y, abs(q.centroid_mm[1] - part.centroid_mm[1]))
    if d_area < floor_mm2:
        return None
    term = area_share_term(part, d_area)
    term["centroid_x_mm"] = max(term["centroid_x_mm"], d_x)
    term["centroid_y_mm"] = max(term["centroid_y_mm"], d_y)
    return term


def _swing_note(swung: dict[str, float], dt: float) -> list[str]:
    """The warning naming the parts whose figures move with the thickness the cut is decided at (none without)."""
    if not swung:
        return []
    listed = ", ".join(f"{label} ({a:.3g} mm²)" for label, a in swung.items())
    return [
        f"shadow cut moves with the thickness: with the cut decided again at the thickness -{dt:.2g} and +{dt:.2g} mm, "
        f"the area of part(s) {listed} moves by up to that much; the uncertainty includes it (term '{CUT_SWING_TERM}'); "
        "give the thickness as measured with calipers, or photograph in diffuse light"
    ]


def _cut_cast_shadows(
    image: LoadedImage,
    masked: LoadedImage,
    scale: PhotoScale,
    result: Measurement,
    thickness_mm: float | None,
    colour: np.ndarray | None,
    remeasure: Callable[[LoadedImage, PlaneMap], Measurement],
    thickness_u_mm: float = 0.0,
    probe_remeasure: Callable[[LoadedImage, PlaneMap], Measurement] | None = None,
) -> tuple[Measurement, list[str], set[int]]:
    """Cut cast shadows out of the found parts and measure again; a term for where the cut runs.

    For each part whose edge band looks like darkened paper (as
    :func:`~scanmass.pipeline.photo_shadows._cast_shadows` tests), the shadow layer (:func:`~scanmass.segment.castshadow.shadow_cut`) is painted in the
    paper's level on ``masked`` (the image the parts were found in) and the image is measured
    again with ``remeasure``. Each part found again where a cut one was gets the term
    ``shadow_cut``: the cut stretch's length times :data:`SHADOW_CUT_EDGE_PX` as an area
    (centroid, moments and holes to match). The cast-shadow check still runs afterwards on
    the new outlines, but gives a cut part (whose labels are returned) no term ``cast_shadow``:
    the face of a dark neutral part looks like darkened paper by colour alone, and what is left
    of the shadow's doubt is the place of the cut. Parts without a cut keep their first
    measurement, and photos without a cut their whole result. The result's
    ``settings["shadow_cut"]`` holds each cut part's shadow area and cut length.

    With a thickness given, the cut takes a shaded side wall with the shadow (steel, brass and
    black plastic under a spotlight on the committed renders, tests/data/reallight): where that
    wall faces the camera the outline then runs on the top face's edge, so the second
    measurement maps the cut region's surroundings (5 px around it) as seen on the top edge
    (:meth:`~scanmass.scale.homography.ElevationHook.with_top_seen`); ``remeasure`` takes the
    image and the plane map to use.

    With a thickness given, a lit side wall the first segmentation took for paper
    (:func:`_lost_wall`) is painted in the part's level on the same image before it is measured
    again: the outline there then runs on the part's bottom edge, as the plane map takes it.
    Such a part gets the term ``side_wall``: half of the band's area (centroid, moments and holes
    to match), so a band that was no wall lies 2 sigma off, and a warning naming it.

    With a thickness given, where any part came to the cut's test or had a lost wall, the cut is
    decided (:func:`_decide_cuts`) and measured again at the thickness -dt and +dt as well (dt:
    ``thickness_u_mm``, else the larger of :data:`CUT_SWING_MIN_MM` and :data:`CUT_SWING_SHARE` of it),
    with ``probe_remeasure`` (``remeasure`` when None). The figures stay those at the thickness; a
    part whose area moves gets the term :data:`CUT_SWING_TERM` (:func:`_swing_term`), the result's
    ``settings["cut_swing"]`` and a warning among its own.
    """
    if thickness_mm == 0 or colour is None or not result.parts:
        return result, [], set()
    decision = _decide_cuts(image, masked, scale, result, thickness_mm, colour)
    if not thickness_mm or not decision.reached:
        return _cut_once(masked, scale, result, decision, remeasure)
    dt = thickness_u_mm if thickness_u_mm > 0 else max(CUT_SWING_MIN_MM, CUT_SWING_SHARE * thickness_mm)
    # the cut decided and measured again a little off the thickness (``probe_remeasure``: as ``remeasure``,
    # but not taken as the kept measurement's)
    probe = remeasure if probe_remeasure is None else probe_remeasure
    # the kept measurement first; a probe's image measured already (the same cuts painted, on the same plane map)
    # is not measured again: its measurement is the one made
    made = _Remeasured(probe)
    again, out, labels = _cut_once(masked, scale, result, decision, made.storing(remeasure), made.plane_map)
    probes = [
        _cut_once(masked, scale, result, _decide_cuts(image, masked, scale, result, t, colour), made, made.plane_map)[0]
        for t in (thickness_mm - dt, thickness_mm + dt)
        if t > 0
    ]
    swung: dict[str, float] = {}
    parts = []
    for part in again.parts:
        term = _swing_term(part, probes, scale.plane_map.mm_per_px**2)
        if term is not None:
            part = _with_extra_term(part, CUT_SWING_TERM, term, [])
            swung[str(part.label)] = term["area_mm2"]
        parts.append(part)
    if swung:
        # the note joins the measurement's own warnings: ``out`` non-empty tells the caller the cut's measurement was kept
        again = replace(
            again,
            parts=parts,
            settings={**again.settings, "cut_swing": {"thickness_step_mm": dt, "parts": swung}},
            warnings=list(again.warnings) + _swing_note(swung, dt),
        )
    return again, out, labels


@dataclass
class _Remeasured:
    """Measurements of one photo's cut images, each kept with the image and plane map it was made on.

    Called as ``measure`` (the image, the plane map), it gives a copy of the measurement made already
    on an equal image (every grey level the same, its other fields the same objects) with the same
    plane map object, else measures and keeps a copy. :meth:`plane_map` gives the same plane map
    object again for an equal top-edge mask, so that equal cuts meet the same map.
    """

    measure: Callable[[LoadedImage, PlaneMap], Measurement]
    made: list[tuple[LoadedImage, np.ndarray, PlaneMap, Measurement]] = field(default_factory=list)
    maps: list[tuple[PlaneMap, np.ndarray, PlaneMap]] = field(default_factory=list)

    def plane_map(self, plane_map: PlaneMap, top_seen: np.ndarray) -> PlaneMap:
        """:func:`~scanmass.pipeline.photo_walls.with_top_seen`, the same object for the same map and an equal mask."""
        for base, mask, seen in self.maps:
            if base is plane_map and np.array_equal(mask, top_seen):
                return seen
        seen = with_top_seen(plane_map, top_seen)
        self.maps.append((plane_map, top_seen.copy(), seen))
        return seen

    def _found(self, image: LoadedImage, plane_map: PlaneMap) -> Measurement | None:
        for was, grey, on, measured in self.made:
            if on is plane_map and _same_but_grey(was, image) and np.array_equal(grey, image.grey):
                return copy.deepcopy(measured)
        return None

    def _keep(self, image: LoadedImage, plane_map: PlaneMap, measured: Measurement) -> Measurement:
        self.made.append((image, image.grey.copy(), plane_map, copy.deepcopy(measured)))
        return measured

    def __call__(self, image: LoadedImage, plane_map: PlaneMap) -> Measurement:
        found = self._found(image, plane_map)
        return found if found is not None else self._keep(image, plane_map, self.measure(image, plane_map))

    def storing(
        self, measure: Callable[[LoadedImage, PlaneMap], Measurement]
    ) -> Callable[[LoadedImage, PlaneMap], Measurement]:
        """``measure`` called every time (for what it records), each measurement kept for later calls."""
        return lambda image, plane_map: self._keep(image, plane_map, measure(image, plane_map))


def _same_but_grey(a: LoadedImage, b: LoadedImage) -> bool:
    """Whether two images hold the same objects in every field but the grey levels."""
    return all(getattr(a, f.name) is getattr(b, f.name) for f in fields(a) if f.name != "grey")


def _cut_once(
    masked: LoadedImage,
    scale: PhotoScale,
    result: Measurement,
    decision: _Decision,
    remeasure: Callable[[LoadedImage, PlaneMap], Measurement],
    seen_map: Callable[[PlaneMap, np.ndarray], PlaneMap] = with_top_seen,
) -> tuple[Measurement, list[str], set[int]]:
    """:func:`_cut_cast_shadows` for one decision (:func:`_decide_cuts`): measured again with its cuts painted.

    ``seen_map`` makes the plane map with the outline taken on the top edge in a mask
    (:func:`~scanmass.pipeline.photo_walls.with_top_seen`, or one that gives the same map again for the same mask).
    """
    mm_per_px = scale.plane_map.mm_per_px
    grey, top_seen, cuts, opened = decision.grey, decision.top_seen, decision.cuts, decision.opened
    by_colour, painted, firsts, cut_faces = decision.by_colour, decision.painted, decision.firsts, decision.cut_faces
    paper_codes, band_px = decision.paper_codes, decision.band_px
    if not cuts:
        return result, [], set()
    order = {id(p): k for k, p in enumerate(result.parts)}
    cuts.sort(key=lambda c: order[id(c[0])])  # the parts' order, whichever came again
    try:
        plane_map = scale.plane_map
        closed_notes: list[str] = []
        if top_seen is not None and top_seen.any():
            plane_map = seen_map(plane_map, top_seen)
        again = remeasure(replace(masked, grey=grey), plane_map)
        closed, strips = _painted_holes(again, replace(scale, plane_map=plane_map), painted, firsts, cut_faces)
        if closed.any():
            # a piece of a cut that darker shadow beyond the outline closes off reads as a hole; it
            # and that shadow around it (neither is face) are painted as the paper they lie on
            grey[closed] = paper_codes[closed]
            again = remeasure(replace(masked, grey=grey), plane_map)
            closed_notes = [
                f"{min(again.parts, key=lambda q: math.dist(q.centroid_mm, c)).label} ({a:.3g} mm²)"
                for c, a in strips
                if again.parts
            ]
    except (SegmentationError, ScaleError, OptionError):
        # nothing measurable with the cuts painted (a region whose hole maps past its outline, as a
        # thin strip left beside a cut can give, makes measure_image refuse): keep the first measurement
        return result, [], set()
    again, slivers = _open_slivers(masked, replace(scale, plane_map=plane_map), grey, again, cuts, band_px, remeasure)
    slivers = closed_notes + slivers
    done: list[str] = []
    tinted: list[str] = []  # the new labels of the parts cut by the shadows' colour
    labels: set[int] = set()
    remnants: set[int] = set()
    said: dict[str, dict[str, float]] = {}
    seen: set[int] = set()  # parts whose lost side wall was restored
    walls: list[str] = []
    cut_new: dict[int, int | None] = {}  # a cut part's label in the first measurement -> in the second
    for old, edge_mm, cut_mm2, wall_mm2 in cuts:
        assert old.outline_mm is not None  # _part_crop gave a crop
        outline = np.asarray(old.outline_mm, np.float32)
        # a bent part's centroid can lie outside its material: a cut part is also found by its outline
        within = [k for k, q in enumerate(again.parts) if _lies_within(q, outline, by_outline=edge_mm > 0)]
        faces = [k for k in within if again.parts[k].area_mm2 >= 0.3 * (old.area_mm2 - cut_mm2)]
        if not faces:
            return result, [], set()  # the face was not found again: keep the measurement as it was
        n = max(faces, key=lambda k: again.parts[k].area_mm2)
        # a small region found now within (or at the edge of) the cut region is a piece of it: a
        # shadow's island, a wall's strip, a deep hole's dark bottom cut off from the face
        lo, hi = outline.min(axis=0) - band_px * mm_per_px, outline.max(axis=0) + band_px * mm_per_px
        before = [q.centroid_mm for q in result.parts]
        remnants |= {
            k
            for k, q in enumerate(again.parts)
            if k != n
            and q.area_mm2 < 0.05 * again.parts[n].area_mm2
            and (k in within or _within_box(q, lo, hi))
            and all(math.dist(q.centroid_mm, c) > 1.0 for c in before)
        }
        part = again.parts[n]
        cut_new[old.label] = part.label
        if wall_mm2 > 0:
            part = _with_extra_term(part, "side_wall", area_share_term(part, wall_mm2, weight=0.5), [])
            walls.append(f"{part.label} ({wall_mm2:.3g} mm²)")
            seen.add(part.label)
        if edge_mm > 0:
            term = area_share_term(part, edge_mm * SHADOW_CUT_EDGE_PX * mm_per_px)
            part = _with_shadow_term(part, term, 2 * SHADOW_CUT_EDGE_PX * mm_per_px, name="shadow_cut")
            done.append(f"{part.label} ({cut_mm2:.3g} mm² along {edge_mm:.3g} mm)")
            if id(old) in by_colour:
                tinted.append(str(part.label))
            labels.add(part.label)
            said[str(part.label)] = {"shadow_area_mm2": cut_mm2, "cut_edge_mm": edge_mm}
        again.parts[n] = part
    left = f"; {len(remnants)} piece(s) of the cut region found as separate regions are left out" if remnants else ""
    # a part that was not cut keeps its first measurement (the second one reads the image's
    # levels with the shadows painted over, which moves soft edges elsewhere a little)
    kept = [p for p in result.parts if all(p is not old for old, *_ in cuts)]
    parts = []
    # the first measurement's labels in the second (None: no part of it), for the first measurement's warnings
    moved: dict[int, int | None] = {p.label: None for p in result.parts}
    moved.update(cut_new)
    for k, q in enumerate(again.parts):
        if k in remnants:
            continue
        same = [] if q.label in labels | seen else [p for p in kept if math.dist(p.centroid_mm, q.centroid_mm) < 1.0]
        parts.append(replace(same[0], label=q.label) if same else q)
        if same:
            moved[same[0].label] = q.label
    again.parts = parts
    if said:
        again.settings["shadow_cut"] = {"parts": said, "pieces_left_out": len(remnants)}
    # the image's own warnings: the first measurement's, but a cut part's from the second
    old_labels = {f"part {old.label}:" for old, *_ in cuts}
    new_labels = {f"part {label}:" for label in labels | seen}
    firsts_said = [relabelled(w, moved) for w in result.warnings if not any(w.startswith(x) for x in old_labels)]
    again.warnings = [w for w in firsts_said if w is not None] + [
        w for w in again.warnings if any(w.startswith(x) for x in new_labels)
    ]
    out = []
    if done:
        out.append(
            f"cast shadow cut: from part(s) {', '.join(done)} a layer with the paper's colour, darkened (its grain, "
            f"or its fade out to the paper, told it from the part), was taken as cast shadow and left out{left}; the outline there runs on the step between the part and its "
            "shadow, and the uncertainty includes its place (term 'shadow_cut'); for a trustworthy figure use diffuse "
            "light or a backlight"
        )
    if tinted:
        out.append(
            f"mixed light: in part(s) {', '.join(tinted)} the cut shadow was lit by another light of another colour "
            "(each lamp's shadow takes the other lamp's colour) and was told from the part by that colour; "
            "for a trustworthy figure use one diffuse light"
        )
    if slivers:
        out.append(
            f"cast shadow cut: in part(s) {', '.join(slivers)} a strip of the cut was closed off as a hole by the "
            "shadow's rim beyond it (a 'hole' reaching past the outline first found, or bent along the outline, its "
            "fitted circle far wider than the strip); the strip and that rim were left out with the shadow (term "
            "'shadow_cut')"
        )
    if opened:
        out.append(
            f"deep holes opened: in part(s) {', '.join(opened)} dark regions inside the dark top face (a hole's "
            "wall and its shaded bottom; nothing on a flat face in the light is darker) were measured as holes at "
            "their top edges; the uncertainty includes their place (term 'shadow_cut'); for a trustworthy figure use "
            "diffuse light or a backlight"
        )
    if walls:
        out.append(
            f"side wall: beside part(s) {', '.join(walls)} a band as wide as the side wall of the given thickness, "
            "lit and of another colour than the paper (or of its colour on the side the light falls on, where the "
            "part's own shadow lies beyond its far side), was taken as the part's wall and added; the uncertainty "
            "includes half of it (term 'side_wall'); photograph from straight above or in diffuse light"
        )
    return again, out, labels
