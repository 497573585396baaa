"""Checks of a measured photo: the part inside what the markers surround, parallax of an unknown thickness,
cast shadows and reflections, unclear metal edges, hidden holes in thick parts, white parts on white paper.
Part of the pipeline stage (:mod:`scanmass.pipeline`).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import replace

import cv2
import numpy as np

from scanmass.errors import OptionError, ScaleError, SegmentationError
from scanmass.geometry import signed_area, vertex_normals
from scanmass.load.decode import LoadedImage
from scanmass.measurement import Hole, Measurement, Part
from scanmass.pipeline.part_terms import (
    UNKNOWN_THICKNESS_MM,
    _with_extra_term,
    _with_shadow_term,
    area_share_term,
    change_term,
)
from scanmass.raster import coverage
from scanmass.scale.camera import PhotoScale
from scanmass.scale.homography import ElevationHook, apply_h, raised_outline_mm
from scanmass.scale.planemap import PlaneMap
from scanmass.section import escaping_holes, fit_circle
from scanmass.segment.castshadow import (
    core_cut,
    dark_tinted_face,
    fade_cut,
    hidden_shadow,
    hole_bottoms,
    shadow_cut,
)
from scanmass.segment.deephole import PitEdge, opening_edge, pit_edge
from scanmass.segment.shadow import (
    SHADOW_FRACTION,
    SHADOW_MIN_ELEVATION_DEG,
    dark_pits,
    looks_like_lit_white,
    looks_like_shadow_only,
    shadow_band_px,
    shadow_risk,
    too_wide_for_shadow,
    unclear_edges,
)
from scanmass.segment.sidewall import LostWall, lost_wall_band
from scanmass.uncertainty import (
    combine,
)


def _mask_outside(image: LoadedImage, roi_px: np.ndarray) -> LoadedImage:
    """A copy of the image whose pixels outside the clear area show the paper's level.

    The segmenter reads the part's polarity and the background from the whole image;
    markers, print and the table around the mat would mislead it. Only the clear area's
    bounding box, padded with empty mask, is filled and eroded: outside it the mask is
    empty, and an erosion window that reaches past the box's edge (where OpenCV takes the
    outside as full) crosses the empty padding first, so every mask, band and level is the
    whole image's.
    """
    height, width = image.grey.shape
    poly = np.round(roi_px).astype(np.int32)
    pad = 10
    x0, y0 = (max(int(v) - pad, 0) for v in poly.min(axis=0))
    x1, y1 = min(int(poly[:, 0].max()) + pad + 1, width), min(int(poly[:, 1].max()) + pad + 1, height)
    x0, y0 = min(x0, x1), min(y0, y1)
    mask = np.zeros((y1 - y0, x1 - x0), np.uint8)
    if mask.size:
        cv2.fillPoly(mask, [poly], 1, offset=(-x0, -y0))
    inner = cv2.erode(mask, np.ones((3, 3), np.uint8), iterations=2).astype(bool) if mask.size else mask.astype(bool)
    band = inner & ~cv2.erode(mask, np.ones((3, 3), np.uint8), iterations=8).astype(bool) if mask.size else inner
    window = image.grey[y0:y1, x0:x1]
    values = window[band]
    level = np.median(values) if values.size else np.median(window[inner])
    grey = np.full_like(image.grey, np.asarray(level, dtype=image.grey.dtype))
    np.copyto(grey[y0:y1, x0:x1], window, where=mask.astype(bool))
    return replace(image, grey=grey)


def _check_within_support(scale: PhotoScale, result: Measurement, path: str | None) -> None:
    """Refuse a part outside the convex hull (mm) of the points the plane map was fitted to."""
    hull = cv2.convexHull(scale.support_mm.astype(np.float32))
    for part in result.parts:
        if part.outline_mm is None:
            continue
        outline = np.asarray(part.outline_mm, dtype=np.float32)[:: max(1, len(part.outline_mm) // 200)]
        inside = [cv2.pointPolygonTest(hull, (float(x), float(y)), True) for x, y in outline]
        if min(inside) < -1.0:
            raise ScaleError(
                f"part {part.label} lies outside the region the visible markers surround; keep the markers on every "
                "side of the part in the photo",
                path=path,
            )


def _unknown_thickness(
    scale: PhotoScale, result: Measurement, thickness_mm: float | None, plausible_mm: float | None = None
) -> list[str]:
    """Without a thickness: an uncertainty term covering the parallax of a plausible thickness, and a warning.

    A photo shows a raised part larger than its footprint (its top face is nearer the
    camera) and, in a tilted view, with one side wall. When the thickness is not given,
    each part's outline and holes (mm) are raised by ``plausible_mm``
    (:data:`UNKNOWN_THICKNESS_MM`, via :func:`~scanmass.scale.homography.raised_outline_mm`)
    and half of the change of every figure is added as the term ``thickness_unknown``:
    a part of that thickness then lies 2 sigma off, one 1.5 times as thick 3 sigma off.
    ``--thickness 0`` declares a sheet-thin part and removes the term.
    """
    if thickness_mm is not None or scale.camera_matrix is None or not result.parts:
        return []
    plausible = UNKNOWN_THICKNESS_MM if plausible_mm is None else plausible_mm
    h0, k = scale.plane_map.matrix, scale.camera_matrix
    worst_rel = 0.0
    worst_cen_mm = 0.0
    for n, part in enumerate(result.parts):
        if part.outline_mm is None:
            continue
        flat_outer = np.asarray(part.outline_mm, dtype=float)
        flat_holes = [np.asarray(h.outline_mm, dtype=float) for h in part.holes if h.outline_mm is not None]
        raised_outer = raised_outline_mm(h0, k, plausible, flat_outer)
        raised_holes = [raised_outline_mm(h0, k, plausible, h, hole=True) for h in flat_holes]
        if escaping_holes(raised_outer, raised_holes):
            # raised by a plausible thickness, a hole reaches past the part's own outline: only a
            # small piece of a part not found whole does that (dev-soft-brass-t25: a pale cam's
            # wall and shadow, -97 %), and its other pieces are reported as parts: refuse the photo
            raise SegmentationError(
                f"a part was found only in pieces: part {part.label} ({part.area_mm2:.3g} mm2), raised {plausible:g} mm "
                "for the parallax of an unknown thickness, has a hole outside its own outline on the mat, as the wall "
                "and shadow of a part brighter than the paper do; photograph the parts in diffuse light on a darker "
                "background",
                path=result.source.path,
            )
        term = change_term(flat_outer, flat_holes, raised_outer, raised_holes, share=0.5)
        result.parts[n] = _with_extra_term(part, "thickness_unknown", term, raised_holes)
        worst_rel = max(worst_rel, term["area_mm2"] / max(part.area_mm2, 1e-12))
        worst_cen_mm = max(worst_cen_mm, math.hypot(term["centroid_x_mm"], term["centroid_y_mm"]))
    return [
        f"parallax (thickness not given): a part {plausible:g} mm thick would measure {200 * worst_rel:.2g} % smaller in area "
        f"and up to {2 * worst_cen_mm:.2g} mm off in centroid (parallax); the uncertainty includes half of it "
        "(term 'thickness_unknown'); give the thickness with --thickness MM, or --thickness 0 for a sheet-thin part"
    ]


def _photo_colour(image: LoadedImage) -> np.ndarray | None:
    """The photo's colour planes (encoded, as stored), or None for arrays, grey files or a size mismatch."""
    if image.path is None:
        return None
    colour = cv2.imread(image.path, cv2.IMREAD_COLOR)  # applies the EXIF orientation, as the loader does
    if colour is None or colour.ndim != 3 or colour.shape[:2] != image.grey.shape:
        return None
    if colour.dtype != np.uint8 or len(image.to_linear) != 256:
        return None
    b, g, r = colour[..., 0], colour[..., 1], colour[..., 2]
    if np.array_equal(b, g) and np.array_equal(g, r):
        return None  # a grey photo: colour tells nothing
    return colour


def _image_px(scale: PhotoScale, ring_mm: np.ndarray, hole: bool = False) -> np.ndarray:
    """Where a measured ring (mm, on the mat) runs in the photo (ideal px).

    Without a raised face this is the plane map's inverse. With one, the points the plane map
    took as top-face points (:class:`~scanmass.scale.homography.ElevationHook`: the side facing
    away from the camera's nadir, and where its ``top_seen`` mask says so) were moved to their
    footprints; they are moved back to where the photo shows them.
    """
    ring = np.asarray(ring_mm, float).reshape(-1, 2)
    hook = scale.plane_map.undistort
    if not isinstance(hook, ElevationHook) or len(ring) < 3:
        return scale.plane_map.to_px(ring)
    seen_mm = apply_h(np.linalg.inv(hook.footprint_mm), ring)  # each point taken as a footprint: where it was seen
    ccw = signed_area(ring) > 0
    normals = vertex_normals(ring if ccw else ring[::-1])
    normals = normals if ccw else normals[::-1]
    if hole:
        normals = -normals  # away from the material: into the hole
    top = np.sum(normals * (seen_mm - ring), axis=1) > 0
    px_top = apply_h(hook.g0, seen_mm)
    if hook.top_seen is not None:
        top |= hook.seen_on_top(hook.photo_px(px_top))
    return np.where(top[:, None], px_top, apply_h(hook.g0, ring))


def _part_crop(
    image: LoadedImage, scale: PhotoScale, part: Part, pad_px: int, as_seen: bool = False
) -> tuple[tuple[int, int, int, int], np.ndarray, list[np.ndarray]] | None:
    """A padded crop box (x0, y0, x1, y1) around a part, its mask there (holes cleared) and its rings (crop px).

    None when the part has no outline or the crop is too small.
    """
    if part.outline_mm is None or any(h.outline_mm is None for h in part.holes):
        return None
    if as_seen:
        outer_px = _image_px(scale, np.asarray(part.outline_mm, float))
        holes_px = [_image_px(scale, np.asarray(h.outline_mm, float), hole=True) for h in part.holes]
    else:
        outer_px = scale.plane_map.to_px(np.asarray(part.outline_mm, float))
        holes_px = [scale.plane_map.to_px(np.asarray(h.outline_mm, float)) for h in part.holes]
    h_px, w_px = image.grey.shape
    x0, y0 = np.floor(outer_px.min(axis=0)).astype(int) - pad_px
    x1, y1 = np.ceil(outer_px.max(axis=0)).astype(int) + pad_px
    x0, y0, x1, y1 = max(int(x0), 0), max(int(y0), 0), min(int(x1), w_px), min(int(y1), h_px)
    if x1 - x0 < 8 or y1 - y0 < 8:
        return None
    off = np.array([x0, y0], float)
    rings = [outer_px - off, *(hp - off for hp in holes_px)]
    mask = np.zeros((y1 - y0, x1 - x0), np.uint8)
    cv2.fillPoly(mask, [np.round(rings[0]).astype(np.int32)], 1)
    for ring in rings[1:]:
        cv2.fillPoly(mask, [np.round(ring).astype(np.int32)], 0)
    return (x0, y0, x1, y1), mask.astype(bool), rings


def _shadows_only(
    image: LoadedImage,
    scale: PhotoScale,
    result: Measurement,
    colour: np.ndarray | None,
    thickness_mm: float | None = None,
) -> list[str]:
    """Refuse a photo whose only found regions look like cast shadows; warn of such regions otherwise.

    A white part on white paper is not told from the paper; what is found instead is its
    shadow and the dark bottoms of its holes: regions of the paper's colour, darkened, that
    fade towards their soft outer edge (:func:`~scanmass.segment.shadow.looks_like_shadow_only`).
    When some found parts are real, such a region is kept (a real part may look like that
    too) and named in a warning. With the thickness given, a region wider than the shadow of
    a part that thick can be (:func:`~scanmass.segment.shadow.too_wide_for_shadow`) is a part's
    face, not a shadow alone: a grey steel face whose colour is the paper's, darkened, with
    dark streaks. Without it the bound is that of
    :data:`SHADOW_CUT_UNKNOWN_THICKNESS_MM` (an 8 mm white part's shadow can be as wide as a
    steel face).

    Under a hard light a white part's shadow does not fade and what is found instead is its
    faces lit more than the paper: regions of the paper's colour, brighter, below the sensor's
    ceiling (:func:`~scanmass.segment.shadow.looks_like_lit_white`); they are named 'white on
    white' in the same way.

    Raises
    ------
    SegmentationError
        When every found part looks like either, naming the fix (a dark backing sheet or a backlight).
    """
    if colour is None or not result.parts:
        return []
    lut = np.asarray(image.to_linear, dtype=np.float32)
    band_px = shadow_band_px(UNKNOWN_THICKNESS_MM, scale.plane_map.mm_per_px)
    mm_per_px = scale.plane_map.mm_per_px
    reach_t = SHADOW_CUT_UNKNOWN_THICKNESS_MM if not thickness_mm else thickness_mm
    shadows: list[str] = []
    lit: list[str] = []
    for part in result.parts:
        crop = _part_crop(image, scale, part, int(band_px) + 16)
        if crop is None:
            continue
        (x0, y0, x1, y1), mask, _ = crop
        crop_lin = lut[colour[y0:y1, x0:x1]]
        risk = shadow_risk(crop_lin, mask, band_px)
        if risk is None:
            continue
        if looks_like_shadow_only(risk) and not too_wide_for_shadow(mask, reach_t, mm_per_px):
            shadows.append(f"part {part.label} ({part.area_mm2:.3g} mm²)")
        elif looks_like_lit_white(crop_lin, mask, risk.paper_rgb):
            lit.append(f"part {part.label} ({part.area_mm2:.3g} mm²)")
    if lit and len(shadows) + len(lit) == len(result.parts):
        raise SegmentationError(
            f"no part found, only {len(lit)} region(s) of the paper's colour but brighter (the lit faces of a "
            f"white part on white paper{f', with {len(shadows)} cast shadow(s)' if shadows else ''}); its faces at "
            "the paper's level and so its outline are not seen: lay light parts on a dark backing sheet or light "
            "them from below (a backlight)",
            path=image.path,
        )
    warn = (
        [
            f"white on white: {', '.join(lit)} have the paper's colour but are brighter (lit faces of a white part "
            "on white paper, whose outline is not seen): do not use their figures; lay light parts on a dark "
            "backing sheet or use a backlight"
        ]
        if lit
        else []
    )
    if not shadows:
        return warn
    if len(shadows) == len(result.parts):
        raise SegmentationError(
            f"no part found, only {len(shadows)} region(s) that look like cast shadows (the paper's colour, "
            "darkened, fading outwards): either a light part on light paper, not told from the paper, or a grey "
            "metal part (steel, aluminium) whose lit face has the paper's colour, taken for a shadow; lay light "
            "parts on a dark backing sheet, photograph metal in diffuse light, or light either from below (a "
            "backlight)",
            path=image.path,
        )
    return warn + [
        f"shadow only: {', '.join(shadows)} look(s) like a cast shadow alone (the paper's "
        "colour, darkened, fading outwards), perhaps of a light part that was not found, or a grey metal part whose "
        "lit face has the paper's colour: do not use their figures; lay light parts on a dark backing sheet, "
        "photograph metal in diffuse light, or use a backlight"
    ]


def _one_sided_mm(open_mm: float) -> float:
    """Uncertainty (mm, per axis) of a hole's centre where a shadow may lie along one side of its edge.

    ``open_mm`` is the hole's diameter term for a contact shadow ringing it (the depth left open
    along its edge; a ring of twice that depth is the 2-sigma bound). A shadow of that same
    bound, twice the open depth, along one side only (a light from one side: on the committed
    window-light render tests/data/reallight/window-steel-t25 the gasket's hole kept its
    shadow on the side away from the window and its centre read 2.0 mm off) moves the centre
    by half of it, the open depth: taken at 2 sigma, half the open depth.
    """
    return 0.5 * open_mm


def _hole_shadowed(hole: Hole, open_mm: float) -> Hole:
    """The hole with a shadow's terms: ``open_mm`` on its diameter, :func:`_one_sided_mm` on its centre."""
    c_u = _one_sided_mm(open_mm)
    return replace(
        hole,
        diameter_u_mm=combine(hole.diameter_u_mm, open_mm),
        circle_centre_u_mm=(combine(hole.circle_centre_u_mm[0], c_u), combine(hole.circle_centre_u_mm[1], c_u)),
    )


def _cast_shadows(
    image: LoadedImage,
    scale: PhotoScale,
    result: Measurement,
    thickness_mm: float | None,
    colour: np.ndarray | None,
    cut_labels: set[int] | None = None,
) -> list[str]:
    """Flag parts whose edge band looks like darkened paper (a cast shadow colour cannot rule out).

    For each part the band a shadow can cover (:func:`~scanmass.segment.shadow.shadow_band_px`,
    for the given thickness or :data:`UNKNOWN_THICKNESS_MM`) is tested in colour against the
    local paper white (:func:`~scanmass.segment.shadow.shadow_risk`). Where more than
    :data:`~scanmass.segment.shadow.SHADOW_FRACTION` of it is shadow-like, the part may
    include its shadow: an uncertainty term ``cast_shadow`` and a warning with what to change.
    The term is half the shadow-like area that the layers beside the edge leave open
    (:func:`~scanmass.segment.castshadow.hidden_shadow`: along each stretch of the outline
    where the face begins next to the edge, at the face's level and no grainier than it, only
    the pixels nearer the outline than that; elsewhere the whole band), with the matching
    centroid and moment terms, and each hole's diameter the depth left open along its own
    edge (a contact shadow ringing the hole shrinks it by twice that; at most half the band, as
    where nothing is cleared): the bounds taken at 2 sigma. Without a thickness the whole band stays open (the side wall of an unknown height
    can look like the face beside the edge). On the committed renders (tests/data/reallight) the black
    parts in soft light, whose whole band is darkened paper by colour (a soft contact shadow),
    went from 44-58 % of their area to 7-10 % (errors 0.3-4.7 %); parts whose shadow was left
    in (the black bracket under the spotlight, +19.9 %) keep their band open.
    Parts in ``cut_labels`` had their shadow cut (:func:`_cut_cast_shadows`, term
    ``shadow_cut``) and are not flagged again. ``colour`` is :func:`_photo_colour` of the
    photo, decoded once by the caller (None for a grey photo: nothing to test, and no second
    colour decode to find that out again).
    """
    if thickness_mm == 0 or colour is None or not result.parts:
        return []
    thick = UNKNOWN_THICKNESS_MM if thickness_mm is None else thickness_mm
    mm_per_px = scale.plane_map.mm_per_px
    band_px = shadow_band_px(thick, mm_per_px)
    lut = np.asarray(image.to_linear, dtype=np.float32)
    flagged: list[str] = []
    lost: list[str] = []
    for n, part in enumerate(result.parts):
        if part.outline_mm is None:
            continue
        outer_px = scale.plane_map.to_px(np.asarray(part.outline_mm, float))
        holes_px = [
            scale.plane_map.to_px(np.asarray(h.outline_mm, float)) for h in part.holes if h.outline_mm is not None
        ]
        pad = int(band_px) + 16
        x0, y0 = np.floor(outer_px.min(axis=0)).astype(int) - pad
        x1, y1 = np.ceil(outer_px.max(axis=0)).astype(int) + pad
        h_px, w_px = image.grey.shape
        x0, y0, x1, y1 = max(x0, 0), max(y0, 0), min(x1, w_px), min(y1, h_px)
        if x1 - x0 < 8 or y1 - y0 < 8:
            continue
        mask = np.zeros((y1 - y0, x1 - x0), np.uint8)
        cv2.fillPoly(mask, [np.round(outer_px - [x0, y0]).astype(np.int32)], 1)
        for hp in holes_px:
            cv2.fillPoly(mask, [np.round(hp - [x0, y0]).astype(np.int32)], 0)
        crop = lut[colour[y0:y1, x0:x1]]
        risk = shadow_risk(crop, mask.astype(bool), band_px)
        if risk is None:
            continue
        foreign_mm2 = risk.foreign_outside_px * mm_per_px**2
        if foreign_mm2 > max(0.002 * part.area_mm2, 4 * mm_per_px**2 * math.sqrt(risk.band_px)):
            term = area_share_term(part, foreign_mm2)
            part = _with_shadow_term(part, term, 0.5 * band_px * mm_per_px, name="reflection")
            result.parts[n] = part
            lost.append(f"{part.label} ({foreign_mm2:.3g} mm²)")
        if risk.fraction < SHADOW_FRACTION or part.label in (cut_labels or set()):
            continue
        like_mm2 = risk.shadow_like_px * mm_per_px**2
        depth_mm = band_px * mm_per_px
        bound = None
        if thickness_mm is not None:
            # without a thickness the wall of an unknown height, as dark and smooth as the face,
            # can be what lies beside the edge: the face's beginning bounds nothing then
            codes = colour[y0:y1, x0:x1].astype(np.intp)
            paper_mean = float(np.mean(risk.paper_rgb))
            step = (lut[np.minimum(codes + 1, len(lut) - 1)] - lut[codes]).mean(axis=2) / paper_mean
            rings = [outer_px - [x0, y0], *(hp - [x0, y0] for hp in holes_px)]
            bound = hidden_shadow(crop, mask.astype(bool), risk.paper_rgb, band_px, code_step=step, rings=rings)
        if bound is None:
            term = area_share_term(part, like_mm2, weight=0.5)
            result.parts[n] = _with_shadow_term(part, term, 0.5 * depth_mm, hole_c_u_mm=_one_sided_mm(0.5 * depth_mm))
        else:
            # where the face begins beside the edge, a shadow can hide only nearer the outline
            # than that: the term holds half of those pixels (the bound taken at 2 sigma), and
            # each hole's diameter the depth left open along its own edge (a contact shadow
            # rings a hole: its diameter shrinks by twice the depth, again taken at 2 sigma),
            # never more than the whole band's half-width it had before
            like_mm2 = min(like_mm2, bound.hidden_px * mm_per_px**2)
            part = _with_extra_term(part, "cast_shadow", area_share_term(part, like_mm2, weight=0.5), [])
            open_mm = iter(min(0.5 * depth_mm, d * mm_per_px) for d in bound.ring_depth_px[1:])
            holes = [h if h.outline_mm is None else _hole_shadowed(h, next(open_mm)) for h in part.holes]
            result.parts[n] = replace(part, holes=holes)
        flagged.append(f"{part.label} ({100 * risk.fraction:.0f} % of its edge band)")
    out = []
    if lost:
        out.append(
            f"reflection: next to the outline of part(s) {', '.join(lost)} lies an area that is neither paper nor "
            "shadow (a bright or coloured reflection of a metal part?); the outline may leave it out, and the "
            "uncertainty includes it (term 'reflection'); use diffuse light or a backlight"
        )
    if not flagged:
        return out
    return out + [
        f"cast shadow: part(s) {', '.join(flagged)} border(s) a region with the paper's colour, darkened, as a cast "
        "shadow has; colour cannot tell it from a dark neutral part, so the uncertainty includes it (term "
        "'cast_shadow'); for a trustworthy figure use diffuse light (an overcast window, a lamp beside the camera "
        "aimed at the ceiling) or a backlight"
    ]


#: Largest RMS (px) of a ring's radial residuals about its fitted circle for the ring to count
#: as round in :func:`wall_sides`. On the committed renders (tests/data/reallight) the round
#: holes and discs of the thick parts fit their circle to 0.18-0.27 px when mapped with the
#: right wall side and to 0.31-0.65 px with the wrong one.
ROUND_RMS_PX = 0.35
#: A ring's two mappings must differ at least this much in circle-fit RMS (ratio) for a vote.
ROUND_RATIO = 0.75
#: Smallest median width (px) of the wall facing the camera for a ring to take part.
WALL_SIDE_MIN_PX = 0.5


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
            if as_top.diameter_mm < 16 * mm_per_px:
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


#: Smallest share of a dark pit's rays that must meet the face (not a lit floor) for its opening to be traced.
DEEP_HOLE_MIN_SHARE = 0.3
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
#: See :data:`DEEP_HOLE_REPLACE_PX` (px, rms of the opening's circle fit).
DEEP_HOLE_CLEAN_RMS_PX = 0.5
#: A found ring this far out of round (px, the largest distance from its circle) is replaced by a
#: clean opening's fit (:data:`DEEP_HOLE_CLEAN_RMS_PX`) that is wider by any amount: the ring lost
#: part of the opening to the shade (tests/data/reallight spot-black-t20: rings 3.3-4.8 px out of
#: round read 0.36-0.41 mm small, their openings within 0.06 mm). Round rings (soft light, black
#: plastic and steel: 0.6-1.8 px) keep the :data:`DEEP_HOLE_REPLACE_PX` rule.
DEEP_HOLE_UNROUND_WIDER_PX = 3.0


def _near_side(ideal_px: np.ndarray, hook: ElevationHook, centre_top_mm: np.ndarray) -> np.ndarray:
    """Per point of a hole's traced opening (ideal px): True on the rim's side towards the camera's nadir.

    There the top face's edge hides the hole's wall below it, and the line of sight over the rim
    falls on the hole's floor: the opening's border is the top edge, against the floor. On the far
    side the wall facing the camera shows between the rim and the floor.
    """
    centre_px = apply_h(hook.gh, np.asarray(centre_top_mm, float).reshape(1, 2))[0]
    parallax = ideal_px - apply_h(hook.to_footprint, ideal_px)  # away from the nadir
    return np.asarray(np.sum((ideal_px - centre_px) * parallax, axis=1) < 0)


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
            keep = off <= max(2.5 * 1.4826 * float(np.median(off)), 0.3 * mm_per_px)
            fit = fit_circle(top[keep])
        # On the far side the wall facing the camera lies inside the top edge's circle; where it looks
        # like the face (dark plastic in shade) the trace stops short, inside the rim, never outside it.
        # Far points more than the near side's own scatter inside the circle are left out.
        near = _near_side(ideal, hook, np.asarray(fit.centre_mm, float))
        for _ in range(3):
            res = np.hypot(top[:, 0] - fit.centre_mm[0], top[:, 1] - fit.centre_mm[1]) - 0.5 * fit.diameter_mm
            on_near = near & keep
            scatter = 1.4826 * float(np.median(np.abs(res[on_near]))) if np.count_nonzero(on_near) >= 6 else math.inf
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


def _deep_hole_circles(
    image: LoadedImage, scale: PhotoScale, part: Part, hook: ElevationHook, lut: np.ndarray
) -> list[tuple[np.ndarray, float, float, np.ndarray | None]]:
    """The through-holes at a part's top face that its dark pits open, or that its found holes only partly show.

    Each as (centre mm, diameter mm, edge doubt px, the found hole's ring as seen (photo px) or None).
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
    out: list[tuple[np.ndarray, float, float, np.ndarray | None]] = []
    # also looked for on the image with its specks taken out (a path tracer's fireflies, a sensor's
    # noise in the shade break a deep hole's dark bottom into pieces too small to be a pit), where
    # the image as it is shows none
    min_px = HIDDEN_HOLE_MIN_AREA_MM2 / mm_per_px**2
    pits = dark_pits(lin, mask, min_px)
    calm = cv2.GaussianBlur(cv2.medianBlur(np.ascontiguousarray(lin, dtype=np.float32), 3), (0, 0), 1.0)
    pits += [
        p for p in dark_pits(calm, mask, min_px) if all(math.dist(p[:2], q[:2]) > 0.5 * (p[2] + q[2]) for q in pits)
    ]
    for x, y, d in pits:
        edge = pit_edge(lin, mask, (x, y), d)
        fit = None if edge is None else _top_circle(edge, (x0, y0), hook, mm_per_px, outline)
        if fit is not None and 0.5 * d <= fit[1] / mm_per_px <= 4 * d:
            out.append((fit[0], fit[1], fit[3], None))
    (sx0, sy0, sx1, sy1), seen_mask, rings = seen
    seen_lin = lut[image.grey[sy0:sy1, sx0:sx1]]
    for hole, ring in zip(part.holes, rings[1:]):
        seed8 = np.zeros(seen_mask.shape, np.uint8)
        cv2.fillPoly(seed8, [np.round(ring).astype(np.int32)], 1)
        seed = seed8.astype(bool)
        r_seed = math.sqrt(np.count_nonzero(seed) / math.pi)
        thick_px = hook.height_mm / mm_per_px
        edge = opening_edge(seen_lin, seen_mask, seed, 1.5 * r_seed + thick_px + 6.0)
        fit = None if edge is None else _top_circle(edge, (sx0, sy0), hook, mm_per_px, outline)
        if fit is None:
            continue
        clean = fit[2] <= DEEP_HOLE_CLEAN_RMS_PX
        wider = fit[1] - hole.diameter_mm > DEEP_HOLE_REPLACE_PX * mm_per_px or (
            fit[1] > hole.diameter_mm and hole.roundness_mm > DEEP_HOLE_UNROUND_WIDER_PX * mm_per_px and clean
        )
        # a narrower opening only in place of a found ring that is no circle (a lit wall taken in with
        # the paper) and from a clean fit: where a far wall looks like the face (black plastic), the
        # trace stops at its foot, which a round found ring already reads as the bottom edge
        narrower = fit[1] < hole.diameter_mm and hole.roundness_mm > DEEP_HOLE_UNROUND_PX * mm_per_px and clean
        if not (wider or narrower):
            continue
        if math.dist(fit[0], hole.circle_centre_mm) > 0.5 * hole.diameter_mm:
            continue  # another opening than this hole's
        out.append((fit[0], fit[1], fit[3], ring + np.array([sx0, sy0], float)))
    return out


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
) -> tuple[LoadedImage, PhotoScale, Measurement, list[str]]:
    """Open the deep through-holes that show dark at their top face, and measure again.

    A hole through a thick part shows, inside its opening, its far wall and what of the paper
    below its near wall leaves in view, both shaded: darker than the part's face, so the
    segmentation takes it for material (:func:`_hidden_holes` would flag it as a dark pit).
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

    Returns the image and scale to go on with (painted, and the plane map with the openings
    seen on top), the measurement and a warning. Without a thickness (no top face's plane) or
    when nothing is opened, everything is returned as it was.
    """
    hook = scale.plane_map.undistort
    if not thickness_mm or not isinstance(hook, ElevationHook) or not result.parts:
        return masked, scale, result, []
    lut = np.asarray(image.to_linear, dtype=np.float32)
    mm_per_px = scale.plane_map.mm_per_px
    found = {part.label: _deep_hole_circles(image, scale, part, hook, lut) for part in result.parts}
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
        for *_, old_ring in found[part.label]:
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
        for centre, diameter, doubt_px, _ in opened:
            k = min(range(len(holes)), key=lambda i: math.dist(holes[i].circle_centre_mm, centre), default=None)
            if k is None or math.dist(holes[k].circle_centre_mm, centre) > 0.25 * diameter:
                return masked, scale, result, []  # the painted opening was not found as a hole: keep it as it was
            u_mm = doubt_px * mm_per_px
            h = holes[k]
            holes[k] = replace(
                h,
                diameter_u_mm=combine(h.diameter_u_mm, 2 * u_mm),
                area_u_mm2=combine(h.area_u_mm2, math.pi * diameter * u_mm),
                centroid_u_mm=(combine(h.centroid_u_mm[0], u_mm), combine(h.centroid_u_mm[1], u_mm)),
                circle_centre_u_mm=(combine(h.circle_centre_u_mm[0], u_mm), combine(h.circle_centre_u_mm[1], u_mm)),
            )
            area_mm2 += math.pi * diameter * u_mm
            texts.append(f"{h.diameter_mm:.3g} mm at ({h.circle_centre_mm[0]:.1f}, {h.circle_centre_mm[1]:.1f}) mm")
            notes.setdefault(str(old.label), []).append(
                {"x_mm": float(centre[0]), "y_mm": float(centre[1]), "diameter_mm": diameter, "edge_doubt_px": doubt_px}
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
            return None  # taken on its top face's edge all round (:func:`wall_sides`): no wall was left out
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


def _lies_within(part: Part, outline_mm: np.ndarray, by_outline: bool = True) -> bool:
    """Whether a part found again lies within an outline found before (mm, float32).

    Its centroid inside says so, but a bent part's centroid (an L bracket's, near the inner
    corner) can lie outside its own material: then nine in ten of its outline's points inside
    (or within 0.5 mm of) the old outline do, where ``by_outline``.
    """
    if cv2.pointPolygonTest(outline_mm, (float(part.centroid_mm[0]), float(part.centroid_mm[1])), False) >= 0:
        return True
    if not by_outline or part.outline_mm is None:
        return False
    pts = np.asarray(part.outline_mm, float).reshape(-1, 2)
    if len(pts) == 0:
        return False
    near = [cv2.pointPolygonTest(outline_mm, (float(x), float(y)), True) >= -0.5 for x, y in pts]
    return float(np.mean(near)) >= 0.9


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


#: A hole whose fitted circle is this many times wider than the hole itself (its largest
#: caliper) is no round hole but a strip bent along an arc: only a strip of a curved outline
#: fits a circle wider than itself. On the committed renders (tests/data/reallight, thickness
#: given) every found hole fits within 1.0 of its own width; the strip of a painted cut that the
#: shadow beyond it closed off (lens-spot-brass-t30's cam) fits 8.8 times its width.
SLIVER_FIT_RATIO = 2.0


def _is_sliver(hole: Hole) -> bool:
    """Whether ``hole`` is a strip along an arc: its fitted circle far wider than the hole itself."""
    if hole.outline_mm is None or not math.isfinite(hole.diameter_mm):
        return False
    pts = np.asarray(hole.outline_mm, np.float32).reshape(-1, 2)
    if len(pts) < 3:
        return False
    hull = cv2.convexHull(pts).reshape(-1, 2).astype(float)
    extent_mm = float(np.sqrt(((hull[:, None, :] - hull[None, :, :]) ** 2).sum(axis=2)).max())
    return hole.diameter_mm > SLIVER_FIT_RATIO * extent_mm


def _photo_ring_px(scale: PhotoScale, ring_mm: np.ndarray, hole: bool = False) -> np.ndarray:
    """Where a measured ring (mm) runs in the photo as stored (px): :func:`_image_px` with the lens put back."""
    ideal = _image_px(scale, ring_mm, hole=hole)
    hook = scale.plane_map.undistort
    if hook is None:
        return ideal
    if isinstance(hook, ElevationHook):
        return hook.photo_px(ideal)
    return 2.0 * ideal - hook(ideal)  # one fixed-point step of the lens correction, as ElevationHook.photo_px


def _sliver_strips(
    scale: PhotoScale, part: Part, grey: np.ndarray, band_px: float
) -> tuple[np.ndarray, float, float] | None:
    """A cut part's arc-shaped holes (:func:`_is_sliver`) with the material between them and the outside.

    A cast shadow's cut is painted in the paper's level inside the outline the part was first
    found with; where the shadow reaches beyond that outline, its unpainted outer rim (darker
    than the face's half-way level) closes the painted strip off as a hole. Such a strip is
    bent along the outline, so its fitted circle is far wider than the strip itself, and what
    lies between it and the outside is the shadow's rim: the pixels whose nearest strip pixel
    and nearest outside pixel lie on opposite sides (a face pixel inside the strip has both on
    the same side) and nearer the outside than that strip pixel (not the face beside a strip's
    tip), no farther than the shadow's band from either. Returns the photo's pixels
    of the strips and of those rims (full-size mask), the strips' area (mm2) and the paper's
    code (the median 4-16 px outside the outline, as a cut is painted), or None without such a
    hole.
    """
    slivers = [h for h in part.holes if _is_sliver(h)]
    if not slivers or part.outline_mm is None:
        return None
    outer = _photo_ring_px(scale, np.asarray(part.outline_mm, float))
    rings = [_photo_ring_px(scale, np.asarray(h.outline_mm, float), hole=True) for h in slivers]
    shape = grey.shape[:2]
    pad = max(int(math.ceil(band_px)) + 4, 18)
    lo = np.floor(np.vstack([outer, *rings]).min(axis=0)).astype(int) - pad
    hi = np.ceil(np.vstack([outer, *rings]).max(axis=0)).astype(int) + pad
    x0, y0 = max(int(lo[0]), 0), max(int(lo[1]), 0)
    x1, y1 = min(int(hi[0]), shape[1]), min(int(hi[1]), shape[0])
    if x1 - x0 < 8 or y1 - y0 < 8:
        return None
    off = np.array([x0, y0], float)
    inside = np.zeros((y1 - y0, x1 - x0), np.uint8)
    cv2.fillPoly(inside, [np.round(outer - off).astype(np.int32)], 1)
    strips = np.zeros_like(inside)
    for ring in rings:
        cv2.fillPoly(strips, [np.round(ring - off).astype(np.int32)], 1)
    material = inside.astype(bool) & ~strips.astype(bool)
    to_out, out_lab = cv2.distanceTransformWithLabels(inside, cv2.DIST_L2, 5, labelType=cv2.DIST_LABEL_PIXEL)
    to_strip, strip_lab = cv2.distanceTransformWithLabels(1 - strips, cv2.DIST_L2, 5, labelType=cv2.DIST_LABEL_PIXEL)
    rows, cols = np.indices(inside.shape)

    def nearest(zero: np.ndarray, labels: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        # DIST_LABEL_PIXEL numbers the zero pixels in row-major order, from 1
        zr, zc = np.nonzero(zero)
        idx = np.clip(labels - 1, 0, max(len(zr) - 1, 0))
        return zr[idx], zc[idx]

    orow, ocol = nearest(inside == 0, out_lab)
    srow, scol = nearest(strips == 1, strip_lab)
    across = (orow - rows) * (srow - rows) + (ocol - cols) * (scol - cols) < 0
    beyond = to_out < to_out[srow, scol]  # nearer the outside than the strip is (not beside a strip's tip)
    rim = material & across & beyond & (to_out <= band_px) & (to_strip <= band_px)
    outside = cv2.distanceTransform(1 - inside, cv2.DIST_L2, 3)
    paper = grey[y0:y1, x0:x1][(outside > 4) & (outside < 16)]
    if paper.size < 20:
        return None
    full = np.zeros(shape, bool)
    full[y0:y1, x0:x1] = rim | strips.astype(bool)
    return full, float(sum(h.area_mm2 for h in slivers)), float(np.median(paper))


def _open_slivers(
    masked: LoadedImage,
    scale: PhotoScale,
    grey: np.ndarray,
    again: Measurement,
    cuts: list[tuple[Part, float, float, float]],
    band_px: float,
    remeasure: Callable[[LoadedImage, PlaneMap], Measurement],
) -> tuple[Measurement, list[str]]:
    """Open the strips a cut left closed off as holes (:func:`_sliver_strips`) and measure again.

    ``again`` is the measurement of ``grey`` (the cuts painted) on ``scale``'s plane map; each
    part found in a cut part's outline is checked. The strips and the shadow's rim beyond them
    are painted in the paper's level on ``grey`` (in place, when kept). ``remeasure`` is called
    last on the image kept. Returns the measurement kept (the new one only when every part is
    found again) and one note per part opened.
    """
    opened_parts: list[tuple[tuple[float, float], float]] = []  # (centroid mm, strips mm2)
    painted = grey.copy()
    for old, edge_mm, *_ in cuts:
        if edge_mm <= 0 or old.outline_mm is None:
            continue
        outline = np.asarray(old.outline_mm, np.float32)
        for q in again.parts:
            if not _lies_within(q, outline):
                continue
            found = _sliver_strips(scale, q, painted, band_px)
            if found is None:
                continue
            opened, strips_mm2, paper_code = found
            painted[opened] = np.asarray(paper_code, dtype=grey.dtype)
            opened_parts.append((q.centroid_mm, strips_mm2))
    if not opened_parts:
        return again, []
    try:
        opened_again: Measurement | None = remeasure(replace(masked, grey=painted), scale.plane_map)
    except (SegmentationError, ScaleError, OptionError):
        opened_again = None
    # every part found again (a speck of the painted rim may be found too: the cut's pieces are left out later)
    smallest = min(q.area_mm2 for q in again.parts)
    if opened_again is None or sum(q.area_mm2 >= 0.05 * smallest for q in opened_again.parts) != len(again.parts):
        remeasure(replace(masked, grey=grey), scale.plane_map)  # the image kept is the one measured last
        return again, []
    grey[:] = painted
    notes = []
    for centroid, strips_mm2 in opened_parts:
        near = min(opened_again.parts, key=lambda q: math.dist(q.centroid_mm, centroid))
        notes.append(f"{near.label} ({strips_mm2:.3g} mm²)")
    return opened_again, notes


def _cut_cast_shadows(
    image: LoadedImage,
    masked: LoadedImage,
    scale: PhotoScale,
    result: Measurement,
    thickness_mm: float | None,
    colour: np.ndarray | None,
    remeasure: Callable[[LoadedImage, PlaneMap], Measurement],
) -> tuple[Measurement, list[str], set[int]]:
    """Cut cast shadows out of the found parts and measure again; a term for where the cut runs.

    For each part whose edge band looks like darkened paper (as :func:`_cast_shadows` tests),
    the shadow layer (:func:`~scanmass.segment.castshadow.shadow_cut`) is painted in the
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
    """
    if thickness_mm == 0 or colour is None or not result.parts:
        return result, [], set()
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
    painted = np.zeros(grey.shape[:2], bool)  # the cuts painted in the paper's level
    firsts = np.zeros(grey.shape[:2], bool)  # within the first outer outlines of the cut parts
    cut_faces = np.zeros(grey.shape[:2], bool)  # the same, less the cuts
    paper_codes = np.zeros(grey.shape[:2], grey.dtype)  # the paper's level painted around each
    # a metal part whose own sweep was refused comes again after the others, its sweep then sought
    # along the shadow direction their cuts found (one light casts every shadow of a photo one way)
    todo: list[tuple[Part, bool]] = [(part, False) for part in result.parts]
    swept: list[tuple[int, tuple[float, float]]] = []  # (cut px, direction) of the cuts found by a sweep
    for part, later in todo:
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
        cut = None
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
        if risk is not None and risk.fraction >= SHADOW_FRACTION and not looks_like_shadow_only(risk):
            codes = colour[y0:y1, x0:x1].astype(np.intp)
            step = (lut[np.minimum(codes + 1, len(lut) - 1)] - lut[codes]).mean(axis=2) / float(np.mean(risk.paper_rgb))
            cut = shadow_cut(colour_lin, mask, risk.paper_rgb, band_px, code_step=step)
            if cut is not None and cut.direction is not None:
                swept.append((cut.cut_px, cut.direction))
            if cut is None and not dark and thickness_mm is not None:
                if not later and not swept:
                    todo.append((part, True))  # again once the other parts' cuts are known
                    continue
                if swept:
                    # along the photo's shadow direction (one light): an L bracket's own search ran
                    # along its other arm's shadow (dev-window-steel-t0: +21.8 %)
                    along = np.asarray(max(swept)[1], float)
                    cut = core_cut(colour_lin, mask, risk.paper_rgb, band_px, along, code_step=step)
            if cut is None and not dark and thickness_mm is not None:
                # a metal face as grainy as its shadow: the soft shadow's fade inside the outline
                cut = fade_cut(colour_lin, mask, risk.paper_rgb, band_px)
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
                if top_seen is not None:
                    # the cut takes the shaded side wall with the shadow: where that wall faces the
                    # camera, the outline then runs on the top face's edge
                    near = cv2.dilate(cut.cut.astype(np.uint8), np.ones((5, 5), np.uint8)).astype(bool)
                    top_seen[y0:y1, x0:x1] |= near
                bottoms_px = 0.0
                if thickness_mm is not None and top_seen is not None and risk is not None:
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
    if not cuts:
        return result, [], set()
    order = {id(p): k for k, p in enumerate(result.parts)}
    cuts.sort(key=lambda c: order[id(c[0])])  # the parts' order, whichever came again
    try:
        plane_map = scale.plane_map
        closed_notes: list[str] = []
        if top_seen is not None and top_seen.any():
            plane_map = with_top_seen(plane_map, top_seen)
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
    labels: set[int] = set()
    remnants: set[int] = set()
    said: dict[str, dict[str, float]] = {}
    seen: set[int] = set()  # parts whose lost side wall was restored
    walls: list[str] = []
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
            and (k in within or bool(np.all((np.asarray(q.centroid_mm) >= lo) & (np.asarray(q.centroid_mm) <= hi))))
            and all(math.dist(q.centroid_mm, c) > 1.0 for c in before)
        }
        part = again.parts[n]
        if wall_mm2 > 0:
            part = _with_extra_term(part, "side_wall", area_share_term(part, wall_mm2, weight=0.5), [])
            walls.append(f"{part.label} ({wall_mm2:.3g} mm²)")
            seen.add(part.label)
        if edge_mm > 0:
            term = area_share_term(part, edge_mm * SHADOW_CUT_EDGE_PX * mm_per_px)
            part = _with_shadow_term(part, term, 2 * SHADOW_CUT_EDGE_PX * mm_per_px, name="shadow_cut")
            done.append(f"{part.label} ({cut_mm2:.3g} mm² along {edge_mm:.3g} mm)")
            labels.add(part.label)
            said[str(part.label)] = {"shadow_area_mm2": cut_mm2, "cut_edge_mm": edge_mm}
        again.parts[n] = part
    left = f"; {len(remnants)} piece(s) of the cut region found as separate regions are left out" if remnants else ""
    # a part that was not cut keeps its first measurement (the second one reads the image's
    # levels with the shadows painted over, which moves soft edges elsewhere a little)
    kept = [p for p in result.parts if all(p is not old for old, *_ in cuts)]
    parts = []
    for k, q in enumerate(again.parts):
        if k in remnants:
            continue
        same = [] if q.label in labels | seen else [p for p in kept if math.dist(p.centroid_mm, q.centroid_mm) < 1.0]
        parts.append(replace(same[0], label=q.label) if same else q)
    again.parts = parts
    if said:
        again.settings["shadow_cut"] = {"parts": said, "pieces_left_out": len(remnants)}
    # the image's own warnings: the first measurement's, but a cut part's from the second
    old_labels = {f"part {old.label}:" for old, *_ in cuts}
    new_labels = {f"part {label}:" for label in labels | seen}
    again.warnings = [w for w in result.warnings if not any(w.startswith(x) for x in old_labels)] + [
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


#: Smallest share of a found hole's pixels (rasterised, its rim's pixels included) beyond the
#: first outer outline for a hole touching a cut's paint to be taken as a piece of the cut
#: (:func:`_painted_holes`): the strips on tests/data/reallight/window-steel-t25 (steel bracket,
#: 1.75 mm) and lens-spot-brass-t30 (brass cam, a 100 mm circle fit) have 0.32 and 0.30; a
#: through-hole lies within the part's material, 0-0.05 there (holes the cut ran into included).
PAINTED_HOLE_MIN_BEYOND = 0.2


def _painted_holes(
    result: Measurement, scale: PhotoScale, painted: np.ndarray, first: np.ndarray, face: np.ndarray
) -> tuple[np.ndarray, list[tuple[tuple[float, float], float]]]:
    """Pixels around the holes found in a shadow cut's paint and beyond the first outline: no openings in the part.

    A through-hole opens in the part's material, so it lies within the part's outline as first
    found (``first``; that outline held the cast shadow too). A found hole that touches the cut
    region painted with the paper's level (``painted``) and reaches beyond that outline
    (:data:`PAINTED_HOLE_MIN_BEYOND` of its pixels or more) is a strip of the cut that the darker
    shadow beyond the first outline closed off once the paint raised the local paper level
    (tests/data/reallight/window-steel-t25, the steel bracket: a 1.75 mm 'hole' beside its cut).
    Returned: its pixels and those within 3 px of it off ``face`` (the first outline less the
    cut): the paint and the shadow that closed it off, to be painted as paper; and each such
    hole's part centroid (mm) and area (mm²), for the warning.
    """
    out = np.zeros(painted.shape, bool)
    strips: list[tuple[tuple[float, float], float]] = []
    if not painted.any():
        return out, strips
    for part in result.parts:
        for hole in part.holes:
            if hole.outline_mm is None:
                continue
            ring = np.round(_image_px(scale, np.asarray(hole.outline_mm, float), hole=True)).astype(np.int32)
            # the hole's box with a 4 px margin, clipped to the image
            x0, y0 = np.maximum(ring.min(axis=0) - 4, 0)
            x1, y1 = np.minimum(ring.max(axis=0) + 5, [painted.shape[1], painted.shape[0]])
            if x1 <= x0 or y1 <= y0:
                continue
            box = (slice(int(y0), int(y1)), slice(int(x0), int(x1)))
            one = np.zeros((int(y1 - y0), int(x1 - x0)), np.uint8)
            cv2.fillPoly(one, [ring - np.array([x0, y0], np.int32)], 1)
            inside = one.astype(bool)
            n = np.count_nonzero(inside)
            if not n or not np.any(inside & painted[box]):
                continue
            if np.count_nonzero(inside & ~first[box]) >= PAINTED_HOLE_MIN_BEYOND * n:
                out[box] |= cv2.dilate(one, np.ones((7, 7), np.uint8)).astype(bool) & ~face[box]
                strips.append(((float(part.centroid_mm[0]), float(part.centroid_mm[1])), float(hole.area_mm2)))
    return out, strips


#: Share of a part's boundary whose edge profile must be unclear before the part is flagged.
UNCLEAR_EDGE_SHARE = 0.1
#: The unclear-edge term (1 sigma) as a share of the area the flagged stretches would sweep if
#: each moved by its plausible displacement in one direction. On the committed renders
#: (tests/data/reallight) the area errors of the flagged metal parts are 7-14 % of that area.
UNCLEAR_EDGE_SIGMA_SHARE = 0.25


def _unclear_edges(image: LoadedImage, scale: PhotoScale, result: Measurement) -> list[str]:
    """Flag parts whose outline runs where the edge profile is not a clean step.

    Metal reflecting the light can look like the paper along part of its outline: the step
    between the part's level and the paper's collapses, changes sign (a dark band between a
    bright part and the paper), or becomes a wide ramp (a soft shadow of another colour).
    Each ring's profile is tested per vertex (:func:`~scanmass.segment.shadow.unclear_edges`);
    where more than :data:`UNCLEAR_EDGE_SHARE` of the boundary is unclear, the part gets the
    term ``unclear_edge`` (:data:`UNCLEAR_EDGE_SIGMA_SHARE` of the area the flagged stretches
    would sweep at their plausible displacement; centroid, moments and holes to match) and a
    warning naming it.
    """
    if not result.parts:
        return []
    lut = np.asarray(image.to_linear, dtype=np.float32)
    mm_per_px = scale.plane_map.mm_per_px
    flagged: list[str] = []
    for n, part in enumerate(result.parts):
        crop = _part_crop(image, scale, part, 24, as_seen=True)
        if crop is None:
            continue
        (x0, y0, x1, y1), mask, rings = crop
        blur = float(part.uncertainty_terms.get("inputs", {}).get("blur_px", 1.0))
        risk = unclear_edges(lut[image.grey[y0:y1, x0:x1]], mask, rings, blur)
        if risk is None or risk.flagged_px < UNCLEAR_EDGE_SHARE * risk.length_px:
            continue
        area_mm2 = UNCLEAR_EDGE_SIGMA_SHARE * risk.moved_px2 * mm_per_px**2
        term = area_share_term(part, area_mm2)
        holes = [
            replace(h, diameter_u_mm=combine(h.diameter_u_mm, d_px * mm_per_px))
            for h, d_px in zip(part.holes, risk.ring_mean_px[1:])
        ]
        result.parts[n] = _with_extra_term(replace(part, holes=holes), "unclear_edge", term, [])
        flagged.append(f"{part.label} ({100 * risk.flagged_px / risk.length_px:.0f} % of its outline)")
    if not flagged:
        return []
    return [
        f"unclear edge: along part(s) {', '.join(flagged)} the step from the part to the paper is not clean (a "
        "reflection that looks like the paper, a dark band or a soft ramp beside the edge), so the outline may sit "
        "off its edge there; the uncertainty includes it (term 'unclear_edge'); use diffuse light, a matte part, "
        "or a backlight"
    ]


#: Smallest dark pit (mm2) inside a part taken as a possible hidden hole.
HIDDEN_HOLE_MIN_AREA_MM2 = 3.0


def _hidden_holes(image: LoadedImage, scale: PhotoScale, result: Measurement, thickness_mm: float | None) -> list[str]:
    """Flag dark round pits inside parts: the bottom of a through-hole the outline did not open.

    A deep hole in a thick part looks dark, not like paper: its wall hides part of its
    bottom and shades the rest. Such a pit (:func:`~scanmass.segment.shadow.dark_pits`) is
    not measured as a hole; the part gets a warning with where it is and the term
    ``hidden_hole``: a hole at the top face as wide as the pit plus the longest shadow of the
    wall (thickness / tan 30 deg) would be a 2-sigma change of every figure.
    ``--thickness 0`` (a sheet-thin part) has no deep holes.
    """
    if thickness_mm == 0 or not result.parts:
        return []
    thick = UNKNOWN_THICKNESS_MM if thickness_mm is None else thickness_mm
    lut = np.asarray(image.to_linear, dtype=np.float32)
    mm_per_px = scale.plane_map.mm_per_px
    found: list[str] = []
    for n, part in enumerate(result.parts):
        crop = _part_crop(image, scale, part, 4)
        if crop is None:
            continue
        (x0, y0, x1, y1), mask, _ = crop
        pits = dark_pits(lut[image.grey[y0:y1, x0:x1]], mask, HIDDEN_HOLE_MIN_AREA_MM2 / mm_per_px**2)
        if not pits:
            continue
        xc, yc = part.centroid_mm
        names = ("area_mm2", "centroid_x_mm", "centroid_y_mm", "perimeter_mm", "principal_angle_deg")
        term = dict.fromkeys(names + ("ixx_mm4", "iyy_mm4", "ixy_mm4", "i1_mm4", "i2_mm4", "polar_mm4"), 0.0)
        where = []
        for x_px, y_px, d_px in pits:
            x_mm, y_mm = scale.plane_map.to_mm(np.array([[x_px + x0, y_px + y0]]))[0]
            d_mm = d_px * mm_per_px
            bound_mm = d_mm + thick / math.tan(math.radians(SHADOW_MIN_ELEVATION_DEG))
            a = 0.5 * 0.25 * math.pi * bound_mm**2  # a hole of the bound's size is 2 sigma
            dx, dy, r2 = x_mm - xc, y_mm - yc, bound_mm**2 / 16.0
            term["area_mm2"] += a
            term["centroid_x_mm"] += a * abs(dx) / max(part.area_mm2, 1e-9)
            term["centroid_y_mm"] += a * abs(dy) / max(part.area_mm2, 1e-9)
            term["perimeter_mm"] += 0.5 * math.pi * bound_mm
            term["ixx_mm4"] += a * (dy**2 + r2)
            term["iyy_mm4"] += a * (dx**2 + r2)
            term["ixy_mm4"] += a * abs(dx * dy)
            term["polar_mm4"] += a * (dx**2 + dy**2 + 2 * r2)
            where.append(f"{d_mm:.2g} mm across at ({x_mm:.1f}, {y_mm:.1f}) mm")
        term["i1_mm4"] = term["i2_mm4"] = term["polar_mm4"]
        term["principal_angle_deg"] = 0.0
        result.parts[n] = _with_extra_term(part, "hidden_hole", term, [])
        found.append(f"part {part.label} (a pit {'; a pit '.join(where)})")
    if not found:
        return []
    return [
        f"possible hidden hole: {', '.join(found)}: a dark round region darker than the part itself, as the bottom "
        "of a deep hole is; it is not measured as a hole, and the uncertainty includes a hole there (term "
        "'hidden_hole'); if it is a hole, measure the part on a light box (backlight) or photograph it from straight "
        "above in diffuse light"
    ]
