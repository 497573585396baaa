"""Shadow checks of a measured photo: refusing a photo whose only regions look like cast shadows (or white
parts on white paper), and flagging parts whose edge band looks like darkened paper (term ``cast_shadow``) or
holds a reflection (term ``reflection``).
Part of the pipeline stage (:mod:`scanmass.pipeline`).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import replace

import cv2
import numpy as np

from scanmass.errors import SegmentationError
from scanmass.load.decode import LoadedImage
from scanmass.measurement import Hole, Measurement, Part
from scanmass.pipeline.part_terms import (
    UNKNOWN_THICKNESS_MM,
    _with_extra_term,
    _with_shadow_term,
    area_share_term,
    has_lit_face,
)
from scanmass.pipeline.photo_checks import _filled_box, _image_px, _padded_box, _part_crop, without_parts
from scanmass.pipeline.photo_shadow_cut import SHADOW_CUT_UNKNOWN_THICKNESS_MM, region_reading
from scanmass.pipeline.photo_thickness import WallThickness
from scanmass.pipeline.photo_walls import with_top_seen
from scanmass.scale.camera import PhotoScale
from scanmass.scale.homography import ElevationHook
from scanmass.scale.planemap import PlaneMap
from scanmass.segment.clipzone import OUTSIDE_PX, ClipContact, clip_contact, clipped_zones
from scanmass.segment.hiddenshadow import hidden_shadow
from scanmass.segment.shadow import (
    SHADOW_FRACTION,
    darkened_paper,
    holed_face,
    inscribed_width_px,
    looks_like_lit_white,
    looks_like_shadow_only,
    paper_coloured_share,
    shadow_band_px,
    shadow_risk,
    too_wide_for_shadow,
)
from scanmass.segment.shadowlayer import _LEVEL_STEP_RATIO
from scanmass.segment.whiteface import (
    FACE_RATIO_RANGE,
    FAINT_STEP,
    NEAR_WHITE_MAX,
    WhiteFace,
    face_cover,
    face_planes,
    fill_holes,
    white_faces,
)
from scanmass.uncertainty import combine


def _shadows_only(
    image: LoadedImage,
    scale: PhotoScale,
    result: Measurement,
    colour: np.ndarray | None,
    thickness_mm: float | None = None,
    white: frozenset[int] | set[int] = frozenset(),
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
    :data:`~scanmass.pipeline.photo_shadow_cut.SHADOW_CUT_UNKNOWN_THICKNESS_MM` (an 8 mm white
    part's shadow can be as wide as a steel face); a region holding holes is a face whatever its
    width (:func:`~scanmass.segment.shadow.holed_face`: a shadow alone encloses no lit paper).

    Under a hard light a white part's shadow does not fade and what is found instead is its
    faces lit more than the paper: regions of the paper's colour, brighter, below the sensor's
    ceiling (:func:`~scanmass.segment.shadow.looks_like_lit_white`); they are named 'white on
    white' in the same way.

    Raises
    ------
    SegmentationError
        When every found part looks like either, naming the fix (a dark backing sheet or a backlight).
    """
    shadow_parts, lit_parts = (
        _shadow_regions(image, scale, result, colour, thickness_mm, white) if colour is not None else ([], [])
    )
    shadows = [_region_name(p) for p in shadow_parts]
    lit = [_region_name(p) for p in lit_parts]
    others = len(result.parts) - len(white)
    if lit and len(shadows) + len(lit) == others:
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
    if len(shadows) == others:
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


def _region_name(part: Part) -> str:
    """How a warning names a found region."""
    return f"part {part.label} ({part.area_mm2:.3g} mm²)"


def _shadow_regions(
    image: LoadedImage,
    scale: PhotoScale,
    result: Measurement,
    colour: np.ndarray,
    thickness_mm: float | None,
    white: frozenset[int] | set[int] = frozenset(),
) -> tuple[list[Part], list[Part]]:
    """The found regions that look like a cast shadow alone, and those that look like a white part's lit faces
    (see :func:`_shadows_only`); parts labelled in ``white`` (white faces found as such) are left out."""
    lut = np.asarray(image.to_linear, dtype=np.float32)
    band_px = shadow_band_px(UNKNOWN_THICKNESS_MM, scale.plane_map.mm_per_px)
    mm_per_px = scale.plane_map.mm_per_px
    reach_t = SHADOW_CUT_UNKNOWN_THICKNESS_MM if not thickness_mm else thickness_mm
    shadows: list[Part] = []
    lit: list[Part] = []
    for part in result.parts:
        if part.label in white:
            continue
        reading = region_reading(image, scale, part, colour, lut, band_px)
        if reading is None:
            continue
        crop_lin, mask, risk = reading
        if (
            looks_like_shadow_only(risk)
            and not has_lit_face(part)  # a lit face joined up to its sharp edge
            and not too_wide_for_shadow(mask, reach_t, mm_per_px)
            and not holed_face(part.area_mm2, [h.area_mm2 for h in part.holes], inscribed_width_px(mask) * mm_per_px)
            and not walled_hole(result, part.label)
        ):
            shadows.append(part)
        elif looks_like_lit_white(crop_lin, mask, risk.paper_rgb):
            lit.append(part)
    return shadows, lit


def walled_hole(result: Measurement, label: int) -> bool:
    """True when a deep hole of part ``label`` was seen partly lit and partly in its wall's shade.

    :func:`~scanmass.pipeline.photo_holes._open_deep_holes` (thickness given) traces a dark opening
    inside a found region and notes it ``partly_seen`` where the floor seen through it is lit on one
    side and shaded by the hole's wall on the other: a wall that stands above the paper around the
    hole, so the region is a part's face, not a cast shadow alone (a shadow on the paper has no wall to
    shade a floor within it). On tests/data/reallight/dev-lens-window-steel4-t20 the steel gasket's face
    (lit near the paper's level by the window, its hole 30 mm across in a ring 7 mm wide, so no
    :func:`~scanmass.segment.shadow.holed_face`) was named 'shadow only' at its 3.5 mm thickness and
    not found; branch litsteel32.
    """
    notes = result.settings.get("deep_holes", {}).get(str(label), [])
    return any(bool(n.get("partly_seen")) for n in notes if isinstance(n, dict))


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


def ring_band_mean_px(region: np.ndarray, ring_px: np.ndarray, reach_px: float, inside: bool = False) -> float:
    """Mean depth (px) of ``region``'s pixels along one hole's ring: their count within ``reach_px`` of it over its length.

    A band of mean depth ``m`` along a ring of length ``L`` holds ``m L`` pixels, so the count
    over the length is the mean inward (``inside=False``: in the material beside the hole) or
    outward (``inside=True``: within the hole) shift that band would give the ring. A
    geometric least-squares circle (:func:`~scanmass.section.fit_circle`) has its radius at
    the mean of the ring's distances from its centre (the derivative of
    ``sum (|p_i - c| - r)^2`` in ``r`` is zero there), so a radial shift ``delta(theta)``
    moves the fitted diameter by twice its mean over the ring, to first order (the centre's
    move changes the distances only to second order; a one-sided band moves the centre
    instead): ``2 m`` on the diameter, where the whole band would give ``2 x reach``.

    References
    ----------
    .. [1] N. Chernov, *Circular and Linear Regression: Fitting Circles and Lines by Least
       Squares*, CRC Press, 2010 (the geometric fit's normal equations).
    """
    ring = np.asarray(ring_px, float)
    if len(ring) < 3:
        return 0.0
    from skimage.draw import polygon  # noqa: PLC0415 - only a flagged part with holes needs it

    # the pixels whose centres lie inside the ring (cv2.fillPoly would add the pixels its edges
    # touch, half a pixel beyond the ring on average: half a pixel of every band's depth)
    fill = np.zeros(region.shape, np.uint8)
    rr, cc = polygon(ring[:, 1], ring[:, 0], region.shape)
    fill[rr, cc] = 1
    if inside:
        near = fill.astype(bool) & (cv2.distanceTransform(fill, cv2.DIST_L2, 5) <= reach_px + 0.5)
    else:
        dist = cv2.distanceTransform(1 - fill, cv2.DIST_L2, 5)
        near = (dist > 0) & (dist <= reach_px + 0.5)
    length = float(np.sum(np.hypot(*(np.roll(ring, -1, 0) - ring).T)))
    return float(np.count_nonzero(region & near)) / max(length, 1.0)


def _below_white_face(
    crop: np.ndarray, mask: np.ndarray, paper_rgb: np.ndarray, band_px: float, part: Part
) -> np.ndarray | None:
    """Of a white part's edge band, the pixels darker than its face by a level step; None for any other part.

    A part measured from its white top face (term ``white_face``) has its outline where the
    level crosses half-way between the face and what lies beyond it, a wall, a shadow or the
    paper (:func:`~scanmass.segment.whiteface.face_cover`). The face itself is neutral and a
    little darker than the paper (0.7-0.86 of it on the tuned white-nylon renders): by colour
    it is all "darkened paper", so the cast-shadow test counted the whole face band as room
    for a shadow (2031 mm² of the plate on dev-window-nylon-t10, whose area error is 2 %). A
    shadow the outline took in would lie on the face's side of that half-way line, below the
    face's level by at least the step a level cut needs to place itself
    (:data:`~scanmass.segment.shadowlayer._LEVEL_STEP_RATIO`, the ratio
    :func:`~scanmass.segment.hiddenshadow.hidden_shadow` tells a layer from the face by): only
    such pixels are left open. The face's level is the band's inner neighbours' median
    (deeper than the band, or the inner quarter of a narrow part).
    """
    if "white_face" not in part.uncertainty_terms or not np.any(mask):
        return None
    level = (crop / np.asarray(paper_rgb, crop.dtype)).mean(axis=2)
    inside = cv2.distanceTransform(mask.astype(np.uint8), cv2.DIST_L2, 3)
    interior = inside > min(band_px + 2.0, 0.75 * float(inside.max()))
    if np.count_nonzero(interior) < 20:
        return None
    face_level = float(np.median(level[interior]))
    return mask & (inside <= band_px) & (level < face_level / _LEVEL_STEP_RATIO)


def _hole_shadowed(hole: Hole, open_mm: float, deep_mm: float | None = None) -> Hole:
    """The hole with a shadow's terms: ``open_mm`` on its diameter, :func:`_one_sided_mm` of ``deep_mm`` on its centre.

    ``deep_mm`` (default ``open_mm``) is the deepest open stretch along the ring: a shadow along one side moves the
    centre by its depth there, not by the ring's mean.
    """
    c_u = _one_sided_mm(open_mm if deep_mm is None else deep_mm)
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
    (:func:`~scanmass.segment.hiddenshadow.hidden_shadow`: along each stretch of the outline
    where the face begins next to the edge, at the face's level and no grainier than it, only
    the pixels nearer the outline than that; elsewhere the whole band), with the matching
    centroid and moment terms, and each hole's diameter the depth left open along its own
    edge (a contact shadow ringing the hole shrinks it by twice that; at most half the band, as
    where nothing is cleared): the bounds taken at 2 sigma. Without a thickness the whole band stays open (the side wall of an unknown height
    can look like the face beside the edge). On the committed renders (tests/data/reallight) the black
    parts in soft light, whose whole band is darkened paper by colour (a soft contact shadow),
    went from 44-58 % of their area to 7-10 % (errors 0.3-4.7 %); parts whose shadow was left
    in (the black bracket under the spotlight, +19.9 %) keep their band open.
    Parts in ``cut_labels`` had their shadow cut
    (:func:`~scanmass.pipeline.photo_shadow_cut._cut_cast_shadows`, term ``shadow_cut``) and are
    not flagged again. ``colour`` is :func:`~scanmass.pipeline.photo_checks._photo_colour` of the
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
            # each hole: the reflection found within its own opening, beside its ring (a band of
            # mean depth m left out of the hole's material widens it by 2 m: the whole of it at
            # 1 sigma, as the area term takes the whole foreign area); none there, nothing
            term = area_share_term(part, foreign_mm2)
            if risk.foreign is None or len(holes_px) != len(part.holes):
                part = _with_shadow_term(part, term, 0.5 * band_px * mm_per_px, name="reflection")
            else:
                hole_u = [
                    2.0 * mm_per_px * ring_band_mean_px(risk.foreign, hp - [x0, y0], band_px, inside=True)
                    for hp in holes_px
                ]
                holes = [replace(h, diameter_u_mm=combine(h.diameter_u_mm, u)) for h, u in zip(part.holes, hole_u)]
                part = _with_shadow_term(replace(part, holes=holes), term, 0.0, name="reflection")
            result.parts[n] = part
            lost.append(f"{part.label} ({foreign_mm2:.3g} mm²)")
        if risk.fraction < SHADOW_FRACTION or part.label in (cut_labels or set()):
            continue
        like_mm2 = risk.shadow_like_px * mm_per_px**2
        depth_mm = band_px * mm_per_px
        darker = _below_white_face(crop, mask.astype(bool), risk.paper_rgb, band_px, part)
        if darker is not None:
            like_mm2 = min(like_mm2, float(np.count_nonzero(darker)) * mm_per_px**2)
        bound = None
        if thickness_mm is not None:
            # without a thickness the wall of an unknown height, as dark and smooth as the face,
            # can be what lies beside the edge: the face's beginning bounds nothing then
            codes = colour[y0:y1, x0:x1].astype(np.intp)
            paper_mean = float(np.mean(risk.paper_rgb))
            step = (lut[np.minimum(codes + 1, len(lut) - 1)] - lut[codes]).mean(axis=2) / paper_mean
            rings = [outer_px - [x0, y0], *(hp - [x0, y0] for hp in holes_px)]
            bound = hidden_shadow(crop, mask.astype(bool), risk.paper_rgb, band_px, code_step=step, rings=rings)
        # each hole's diameter: the shadow that can hide along its own edge. A shadow in the
        # hole's material beside its ring, of mean depth m along it, shrinks the fitted diameter
        # by 2 m (ring_band_mean_px); the pixels that can hold it are the open ones (the bound's
        # hidden pixels) or, without a bound, every shadow-like pixel of the band beside that
        # ring; taken at 2 sigma, as the area term, the diameter's sigma is m; never more than
        # the whole band's half-width. The centre keeps a one-sided shadow's term of that depth.
        if bound is None:
            open_px = mask.astype(bool) & darkened_paper(crop, risk.paper_rgb)
        else:
            # where the face begins beside the edge, a shadow can hide only nearer the outline
            # than that: the term holds half of those pixels (the bound taken at 2 sigma)
            open_px = bound.hidden
        if darker is not None:
            open_px = open_px & darker
        like_in = min(like_mm2, float(np.count_nonzero(open_px)) * mm_per_px**2)
        part = _with_extra_term(part, "cast_shadow", area_share_term(part, like_in, weight=0.5), [])
        open_mm = iter(
            min(0.5 * depth_mm, mm_per_px * ring_band_mean_px(open_px, hp - [x0, y0], band_px)) for hp in holes_px
        )
        deep_mm = iter(
            [min(0.5 * depth_mm, d * mm_per_px) for d in bound.ring_depth_px[1:]]
            if bound is not None
            else [0.5 * depth_mm] * len(holes_px)
        )
        holes = [h if h.outline_mm is None else _hole_shadowed(h, next(open_mm), next(deep_mm)) for h in part.holes]
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


#: Linear level, as a share of the local paper white, at which a white face found by
#: :func:`~scanmass.segment.whiteface.white_faces` is painted for its measurement: a grey part's level,
#: with the face's edge at the half-way level of the paint where its share crosses 0.5.
WHITE_PAINT_RATIO = 0.3
#: Edge uncertainty (px, 1 sigma) of a white face's outline where the step beyond it is faint (the top
#: face against the paper: the smoothed step's half-way line moves by the paper's grain and the rim's
#: shading, about a pixel), and where it is a wall or a shadow (a full step: half a pixel, the blur's
#: asymmetry between a wall band and the face).
WHITE_FAINT_EDGE_PX = 1.0
WHITE_SHARP_EDGE_PX = 0.5
#: Largest area of a found region, as a share of a white face beside it, taken as a piece of that white part (a
#: hole's dark bottom, a dark wall, a lit wall) when it is neither a shadow nor a lit face by its colour.
WHITE_FRAGMENT_SHARE = 0.35
#: Largest total area of the pieces a white face takes in (its walls, shadow, lit walls, holes' floors), as a
#: share of the face (holes filled), and least share of each piece lying within the face's shadow reach. A white
#: part's pieces are bands a few mm wide (a wall seen at a tilt: t tan(tilt); a shadow: t / tan(elevation)) along
#: a face tens of mm across: on the tuned renders their total reads 0.02-0.35 of the face and every piece lies
#: wholly within the reach. Pieces as large as the face, or reaching beyond its shadow's reach, are another
#: part's, and the smooth "face" is a patch of that part's own lit face (a brushed steel face lit by a window to
#: near the paper's level: on dev-lens-window-steel3-t20 and dev-window-steel6-t22 patches of 89-119 mm2 beside
#: their parts' regions of 7.8-8.3 times their area, 8-13 % of which lie beyond the reach). The rule holds for
#: regions named a shadow or a lit face by their colour too, which :data:`WHITE_FRAGMENT_SHARE` does not bound.
WHITE_PIECES_MAX_SHARE = 1.0
WHITE_PIECE_IN_REACH = 0.9
#: Least share of a white face's own pixels a found region must cover to be taken as the white part itself, found
#: by the threshold with its walls and shadow, rather than another part beside or on the face: parts laid on a mat
#: do not overlap, so a region holding most of a face is that face's part (or the part whose own face the smooth
#: patch is). Under a soft light a white part's face can be dark enough for the threshold: on dev-soft-nylon-t12
#: (faces at 0.90-0.91 of the paper) the plate's region holds 0.98 of its face, the gasket's 0.87. What such a
#: region holds beyond the face is taken as the part's pieces (:func:`pieces_fit_face`): a smooth patch of a larger
#: part's own face is held by a region far larger than the patch, reaching beyond its shadow reach, and is still
#: refused.
WHITE_REGION_HOLDS = 0.5


#: The levels (over the local paper white) of a white face sought, where the measuring search finds none, to name
#: the regions found beside it (:func:`_near_white`), or to be measured where nothing was found beside it
#: (:func:`lone_faces`): from the measuring search's floor to :data:`~scanmass.segment.whiteface.NEAR_WHITE_MAX`.
NEAR_WHITE_RANGE = (FACE_RATIO_RANGE[0], NEAR_WHITE_MAX)


def pieces_fit_face(face_px: int, pieces: list[tuple[int, int]]) -> bool:
    """True when the regions a white face would take in as its pieces fit a white part's face.

    ``pieces`` holds each region's area (px) and its pixels within the face's shadow reach. A white part's
    walls, shadow and holes' floors are narrow bands beside its face: each lies within the reach
    (:data:`WHITE_PIECE_IN_REACH`) and together they are smaller than the face (:data:`WHITE_PIECES_MAX_SHARE`).

    Examples
    --------
    >>> pieces_fit_face(1000, [(300, 300), (40, 40)])  # a shadow band and a hole's floor
    True
    >>> pieces_fit_face(1000, [(1500, 1500)])  # pieces larger than the face: another part's
    False
    >>> pieces_fit_face(1000, [(300, 150)])  # half of it beyond the face's shadow reach
    False
    """
    within = all(inside >= WHITE_PIECE_IN_REACH * n for n, inside in pieces)
    return within and sum(n for n, _ in pieces) <= WHITE_PIECES_MAX_SHARE * face_px


def _reach_kernel(scale: PhotoScale, thickness_mm: float | None) -> np.ndarray:
    """The disc that draws a white face's shadow reach: the shadow of the thickest part a photo's shadow-only
    test allows (another part of the photo may be thicker than the thickness given), and 6 px."""
    reach_px = shadow_band_px(max(thickness_mm or 0.0, SHADOW_CUT_UNKNOWN_THICKNESS_MM), scale.plane_map.mm_per_px)
    return cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (2 * int(reach_px + 6.0) + 1,) * 2)


def lone_faces(
    scale: PhotoScale,
    thickness_mm: float | None,
    found: list[WhiteFace],
    masks: dict[int, tuple[tuple[int, int, int, int], np.ndarray]],
) -> list[tuple[WhiteFace, np.ndarray, np.ndarray]]:
    """The white faces beside which nothing was found (no region within their shadow reach), each with its mask
    with holes filled and its neighbourhood (as :func:`_face_pieces` gives them).

    A white part on white paper was measured from its face only where the regions found beside it were its pieces
    (:func:`_face_pieces`). Under a soft light its shadow is too faint to be found, and under a tone curve that
    compresses the highlights (Filmic) its face lies within about 5 % of the paper's level: dev-soft-nylon2-t18's
    3 mm gasket, its face at 0.953 of the paper with no region found within 40 mm, was missed with no word. Such a
    face passed the same tests as any white face (smooth, of one level, grown to a closed step all round without
    leaking into the paper, compact); with no part beside it, it is no patch of another part's face, and it is
    measured as a white part (its outline where its level crosses half-way to the paper's,
    :func:`~scanmass.segment.whiteface.face_cover`). Where that finds no part, :func:`lone_note` names it.
    """
    if not found:
        return []
    kernel = _reach_kernel(scale, thickness_mm)
    out = []
    for face in found:
        filled = fill_holes(face.mask)
        zone = cv2.dilate(filled.astype(np.uint8), kernel).astype(bool)
        if not any(np.any(zone[y0:y1, x0:x1] & mask) for (x0, y0, x1, y1), mask in masks.values()):
            out.append((face, filled, zone))
    return out


def lone_note(scale: PhotoScale, lone: list[tuple[WhiteFace, np.ndarray, np.ndarray]]) -> list[str]:
    """A warning naming the white faces with nothing beside them (:func:`lone_faces`) that were not measured, with
    their places and the fix."""
    if not lone:
        return []
    mm_per_px = scale.plane_map.mm_per_px
    named = []
    for face, filled, _ in lone:
        rows, cols = np.nonzero(filled)
        x_mm, y_mm = scale.plane_map.to_mm(np.array([[cols.mean(), rows.mean()]]))[0]
        named.append(
            f"a face of about {np.count_nonzero(face.mask) * mm_per_px**2:.0f} mm² at ({x_mm:.1f}, {y_mm:.1f}) mm"
        )
    return [
        f"white part not measured: {'; '.join(named)}: a smooth patch a little darker than the paper with a step "
        "all round, as the top face of a white part on white paper, with nothing found beside it (no shadow or "
        "wall); its outline was not found: if a part lies there, lay light parts on a dark backing sheet or use a "
        "backlight"
    ]


def _face_pieces(
    image: LoadedImage,
    scale: PhotoScale,
    result: Measurement,
    colour: np.ndarray,
    thickness_mm: float | None,
    found: list[WhiteFace],
    masks: dict[int, tuple[tuple[int, int, int, int], np.ndarray]],
) -> tuple[list[tuple[WhiteFace, np.ndarray, np.ndarray]], set[int]]:
    """The white faces whose neighbourhood holds only pieces of their own part, and those pieces' labels.

    Within the reach of the thickest shadow the photo allows, a found region that is a shadow, a lit
    wall or face (:func:`_shadow_regions`), or a piece much smaller than the face (a hole's dark
    bottom, a dark wall: :data:`WHITE_FRAGMENT_SHARE`) is the white part's, and so is a region holding most
    of the face (:data:`WHITE_REGION_HOLDS`: the part itself found by the threshold with its walls and
    shadow, its pixels beyond the face its pieces); a face with a part as large as itself beside it, or
    lying on a part of it, is not a white part's (another part is there). Each face kept comes with its
    mask with holes filled and its neighbourhood.
    """
    shadow_parts, lit_parts = _shadow_regions(image, scale, result, colour, thickness_mm)
    regions = {p.label for p in shadow_parts + lit_parts}
    kernel = _reach_kernel(scale, thickness_mm)
    faces: list[tuple[WhiteFace, np.ndarray, np.ndarray]] = []
    fragments: set[int] = set()
    for face in found:
        filled = fill_holes(face.mask)
        zone = cv2.dilate(filled.astype(np.uint8), kernel).astype(bool)
        face_px, own_px = np.count_nonzero(filled), np.count_nonzero(face.mask)
        mine: set[int] = set()
        real = False
        pieces: list[tuple[int, int]] = []
        for label, ((x0, y0, x1, y1), mask) in masks.items():
            n = np.count_nonzero(mask)
            if not np.any(zone[y0:y1, x0:x1] & mask):
                continue
            on_face = np.count_nonzero(face.mask[y0:y1, x0:x1] & mask)
            in_reach = np.count_nonzero(zone[y0:y1, x0:x1] & mask)
            # a shadow, a lit wall or face, or a piece much smaller than the face (a hole's dark bottom, a dark
            # wall) is the white part's; a part as large as the face, or lying on it, is another part
            if label in regions or (n < WHITE_FRAGMENT_SHARE * face_px and on_face < 0.3 * n):
                mine.add(label)
                pieces.append((int(n), int(in_reach)))
            elif on_face >= WHITE_REGION_HOLDS * own_px:
                # the region holds the whole face: the white part itself, found with its walls and shadow (its face
                # darker than the paper under a soft light); what it holds beyond the face are its pieces
                mine.add(label)
                pieces.append((int(n - on_face), int(in_reach - on_face)))
            else:
                real = True
        if real or not mine or not pieces_fit_face(int(face_px), pieces):
            continue  # another part is there, or the "face" is a smooth patch of a larger part's own face
        fragments |= mine
        faces.append((face, filled, zone))
    return faces, fragments


#: Least share of paper-coloured pixels (:func:`~scanmass.segment.shadow.paper_coloured_share`), least
#: median level over the local paper white and widest inscribed disc (mm) of a found region taken as a
#: piece of a white part (a wall, a hole's bottom) beside a face too near the paper's level to measure
#: (:func:`_near_white`). dev-mixed-nylon-t15's four pieces read 0.77-0.96, 0.61-0.69 and 2.6-4.0 mm; the
#: brass parts beside a smooth patch of spot-lit paper that the search at that level took for a face
#: (dev-spot-brass-t22) 0.06-0.28, 0.03-0.07 and 8.3-15.2 mm. A wall 8 mm high seen 30 degrees from the
#: vertical spans 4.6 mm (8 tan 30 degrees).
PIECE_MIN_NEUTRAL = 0.6
PIECE_MIN_LEVEL = 0.3
PIECE_MAX_WIDTH_MM = 6.0


def _paper_piece(image: LoadedImage, scale: PhotoScale, part: Part, colour: np.ndarray) -> bool:
    """True when a found region looks like a piece of a white part: of the paper's colour, not dark, narrow
    (:data:`PIECE_MIN_NEUTRAL`, :data:`PIECE_MIN_LEVEL`, :data:`PIECE_MAX_WIDTH_MM`)."""
    mm_per_px = scale.plane_map.mm_per_px
    lut = np.asarray(image.to_linear, dtype=np.float32)
    reading = region_reading(image, scale, part, colour, lut, shadow_band_px(UNKNOWN_THICKNESS_MM, mm_per_px))
    if reading is None:
        return False
    crop_lin, mask, risk = reading
    share, level = paper_coloured_share(crop_lin, mask, risk.paper_rgb)
    return (
        share >= PIECE_MIN_NEUTRAL
        and level >= PIECE_MIN_LEVEL
        and inscribed_width_px(mask) * mm_per_px <= PIECE_MAX_WIDTH_MM
    )


def _face_term(filled: np.ndarray, mm_per_px: float) -> dict[str, float]:
    """A term that covers a whole white face left out of a piece of its part: its area, its half extent on
    the centroid, its polar second moment about its far corner on each second moment, its outline on the
    perimeter, any principal angle (1 sigma each: the piece's figures are not the part's)."""
    rows, cols = np.nonzero(filled)
    area = float(rows.size) * mm_per_px**2
    half = 0.5 * math.hypot(float(np.ptp(rows)) + 1.0, float(np.ptp(cols)) + 1.0) * mm_per_px
    moment = area * (2.0 * half) ** 2
    term = {"area_mm2": area, "centroid_x_mm": half, "centroid_y_mm": half, "perimeter_mm": 2.0 * math.pi * half}
    term["principal_angle_deg"] = 90.0  # a piece's axes say nothing of the part's
    for fig in ("ixx_mm4", "iyy_mm4", "ixy_mm4", "i1_mm4", "i2_mm4", "polar_mm4"):
        term[fig] = moment
    return term


def _near_white(
    image: LoadedImage,
    result: Measurement,
    mm_per_px: float,
    masks: dict[int, tuple[tuple[int, int, int, int], np.ndarray]],
    faces: list[tuple[WhiteFace, np.ndarray, np.ndarray]],
    fragments: set[int],
) -> tuple[Measurement, frozenset[int], list[str]]:
    """Name the found regions that are pieces of a white part whose face is too near the paper to measure.

    A white face at :data:`NEAR_WHITE_RANGE` but above the measuring search's range (a face within about
    5 % of the paper's level, its outline not placed) with only small regions beside it (its walls, its
    holes' bottoms: :func:`_face_pieces`) says those regions are not parts. Each gets the term
    ``white_face`` sized by its face (the face's area; its centroid and second moments bounded by the
    face's half extent), and a warning; when they are every found part, the photo is refused.

    Raises
    ------
    SegmentationError
        When every found part is such a piece, naming the fix.
    """
    if not faces:
        return result, frozenset(), []
    names = ", ".join(_region_name(p) for p in result.parts if p.label in fragments)
    if len(fragments) == len(result.parts):
        raise SegmentationError(
            f"no part measured: {names} look like pieces (walls, holes' dark bottoms) of white part(s) on white "
            "paper whose top faces are within about 5 % of the paper's level, so their outlines are not seen: lay "
            "light parts on a dark backing sheet, or light them from below (a backlight)",
            path=image.path,
        )
    parts = []
    for part in result.parts:
        if part.label in fragments and part.label in masks:
            (x0, y0, x1, y1), mask = masks[part.label]
            filled = next(f[1] for f in faces if np.any(f[2][y0:y1, x0:x1] & mask))
            part = _with_shadow_term(part, _face_term(filled, mm_per_px), 0.0, "white_face")
        parts.append(part)
    result.parts = parts
    note = (
        f"white on white: {names} look like pieces (walls, holes' dark bottoms) of a white part on white paper whose "
        "top face is within about 5 % of the paper's level, so its outline is not seen: do not use their figures "
        "(term 'white_face' covers the whole face); lay light parts on a dark backing sheet or use a backlight"
    )
    return result, frozenset(), [note]


def _face_edges_seen(plane_map: PlaneMap, faces: list[tuple[WhiteFace, np.ndarray, np.ndarray]]) -> PlaneMap:
    """The plane map with the white faces' neighbourhoods taken as seen on the top face's edge all round.

    A white face is painted from its own level: its side walls, lit or shaded, and its shadow are painted
    as paper, so its painted outline runs on the top face's edge on every side, the sides facing the camera
    too (where a dark part's outline runs on the bottom edge of the wall it shows). The parallax of those
    sides is then taken out as on the others (:meth:`~scanmass.scale.homography.ElevationHook.with_top_seen`);
    a plane map without a raised part's hook is returned as it is.
    """
    hook = plane_map.undistort
    if not isinstance(hook, ElevationHook) or not faces:
        return plane_map
    seen = np.zeros(faces[0][1].shape, bool) if hook.top_seen is None else hook.top_seen.copy()
    for _, filled, _ in faces:
        seen |= cv2.dilate(filled.astype(np.uint8), np.ones((9, 9), np.uint8)).astype(bool)
    return with_top_seen(plane_map, seen)


def _white_parts(
    image: LoadedImage,
    masked: LoadedImage,
    scale: PhotoScale,
    result: Measurement,
    colour: np.ndarray | None,
    thickness_mm: float | None,
    remeasure: Callable[[LoadedImage, PlaneMap], Measurement],
) -> tuple[Measurement, frozenset[int], list[str]]:
    """White parts on white paper measured from their top faces, where only their shadows or lit faces were found.

    When some found regions look like cast shadows alone or like a white part's lit faces
    (:func:`_shadow_regions`), the smooth faces a little darker than the paper beside them
    (:func:`~scanmass.segment.whiteface.white_faces`) are the parts' top faces: each is painted as a
    grey part whose edge lies where the face's share (:func:`~scanmass.segment.whiteface.face_cover`)
    crosses half-way, its surroundings (shadow, walls) painted in the paper's level, and the photo
    is measured again. The white parts carry the term ``white_face`` (their edges' location against
    the faint step to the paper, :data:`WHITE_FAINT_EDGE_PX`) and a warning.

    Returns the measurement (``result`` itself when no white face is found), the labels of the white
    parts and the warnings.
    """
    if colour is None or not result.parts:
        return result, frozenset(), []
    lut = np.asarray(image.to_linear, dtype=np.float32)
    level = lut[colour].mean(axis=-1)
    valid = np.zeros(level.shape, np.uint8)
    cv2.fillPoly(valid, [np.round(scale.roi_px).astype(np.int32)], 1)
    mm_per_px = scale.plane_map.mm_per_px
    planes = face_planes(level, valid.astype(bool))
    found = white_faces(level, valid.astype(bool), mm_per_px, planes=planes)
    near = (
        white_faces(level, valid.astype(bool), mm_per_px, planes=planes, ratio_range=NEAR_WHITE_RANGE)
        if not found
        else []
    )
    if not found and not near:  # the common case: no white face, nothing else to read
        return result, frozenset(), []
    masks: dict[int, tuple[tuple[int, int, int, int], np.ndarray]] = {}
    for part in result.parts:
        crop = _part_crop(image, scale, part, 0)
        if crop is not None:
            masks[part.label] = (crop[0], crop[1])
    # a face with nothing found beside it is measured as a white part (a part missed otherwise with no word)
    lone = lone_faces(scale, thickness_mm, found or near, masks)
    if not found:
        faces, fragments = _face_pieces(image, scale, result, colour, thickness_mm, near, masks)
        if faces or not lone:
            if not all(_paper_piece(image, scale, p, colour) for p in result.parts if p.label in fragments):
                return result, frozenset(), lone_note(scale, lone)  # not a white part's walls beside the face
            result, named, notes = _near_white(image, result, mm_per_px, masks, faces, fragments)
            return result, named, notes + lone_note(scale, lone)
    else:
        faces, fragments = _face_pieces(image, scale, result, colour, thickness_mm, found, masks)
    faces = faces + lone
    if not faces:
        return result, frozenset(), []
    others = np.zeros(level.shape, bool)  # the other parts: never painted
    for label, ((x0, y0, x1, y1), mask) in masks.items():
        if label not in fragments:
            others[y0:y1, x0:x1] |= mask
    others = cv2.dilate(others.astype(np.uint8), np.ones((5, 5), np.uint8)).astype(bool)
    grey = masked.grey.copy()
    to_code = np.asarray(masked.to_linear, dtype=np.float64)
    edge_px: list[tuple[np.ndarray, float, float]] = []
    for face, filled, zone in faces:
        cover, contrast = face_cover(level, face)
        zone = zone & ~others
        paper = face.level / max(face.ratio, 1e-3)
        lin = paper * (1.0 - (1.0 - WHITE_PAINT_RATIO) * cover[zone])
        codes = np.clip(np.searchsorted(to_code, lin), 0, len(to_code) - 1)
        grey[zone] = codes.astype(grey.dtype)
        rim = face.mask & ~cv2.erode(face.mask.astype(np.uint8), np.ones((3, 3), np.uint8)).astype(bool)
        faint = float(np.mean(contrast[rim] < FAINT_STEP)) if np.any(rim) else 1.0
        edge_px.append((filled, float(np.count_nonzero(rim)), faint))
    painted = replace(masked, grey=grey)
    try:
        again = remeasure(painted, _face_edges_seen(scale.plane_map, faces))
    except (SegmentationError, ValueError):
        return result, frozenset(), lone_note(scale, lone)
    white: set[int] = set()
    measured: set[int] = set()  # the faces (their index) a white part was measured from
    # the other parts as first measured (the painting leaves them; their own cuts stay), the white ones from it
    parts = [p for p in result.parts if p.label not in fragments]
    label = max((p.label for p in result.parts), default=0)
    for part in again.parts:
        crop = _part_crop(image, scale, part, 0)
        hit = None
        if crop is not None:
            (x0, y0, x1, y1), mask, _ = crop
            for i, (filled, rim_px, faint) in enumerate(edge_px):
                if np.count_nonzero(filled[y0:y1, x0:x1] & mask) > 0.5 * np.count_nonzero(mask):
                    hit = (rim_px, faint)
                    measured.add(i)
                    break
        if hit is None:
            continue
        rim_px, faint = hit
        label += 1
        part = replace(part, label=label)
        edge_u_px = faint * WHITE_FAINT_EDGE_PX + (1.0 - faint) * WHITE_SHARP_EDGE_PX
        term = area_share_term(part, rim_px * edge_u_px * mm_per_px**2)
        parts.append(_with_shadow_term(part, term, 2.0 * edge_u_px * mm_per_px, "white_face", edge_u_px * mm_per_px))
        white.add(label)
    first_lone = len(faces) - len(lone)
    missed = lone_note(scale, [f for i, f in enumerate(lone) if first_lone + i not in measured])
    if not white:
        return result, frozenset(), missed
    result.parts = parts
    # the pieces the white parts replaced are no parts: the warnings about them alone go, the others leave them out
    result.warnings = without_parts(result.warnings, fragments)
    names = ", ".join(f"part {p.label}" for p in parts if p.label in white)
    note = (
        f"white on white: {names} found by the top face, a little darker and smoother than the paper (a white part "
        "on white paper): its outline against the paper is a faint step, placed to about a pixel (term "
        "'white_face'); for better figures lay light parts on a dark backing sheet or use a backlight"
    )
    return result, frozenset(white), [note, *missed]


#: Least share of the band beyond a found region's outline (:data:`~scanmass.segment.clipzone.OUTSIDE_PX`) on a
#: clipped zone for the region to meet it (:func:`clipped_faces`). On tests/data/reallight/dev-lens-window-steel4-t20
#: (branch litsteel32) the plate's lit face found by its grain meets the zone its clipped face shares with the paper
#: over 20 % of its band; on dev-lens-window-steel3-t20 the plate found whole by its grain (within 1.1 mm) 48 %.
CLIP_MEETS_SHARE = 0.1
#: Least share of that band on the zone for another found region to be taken as a piece of the lit part lost in
#: it (:func:`clipped_faces`): on dev-lens-window-steel4-t20 the shade in the plate's small hole and the strip of
#: its wall, 95 % and 73 %, 1.6-3.0 mm wide. A piece is also no wider than :data:`PIECE_MAX_WIDTH_MM` (a wall's
#: strip, a hole's shade): under the two lamps of the mixed renders the whole paper is clipped and parts 8 mm wide
#: and more lie in it (dev-mixed-steel2-t15's bracket, dev-mixed-steel3-t22's plate: 52-54 % of their bands) beside
#: a lit steel face.
CLIP_PIECE_SHARE = 0.5


def _mirrors(part: Part) -> bool:
    """Whether part of the face was seen mirroring the light near the paper's level: a lit face joined to it or
    found by its grain (:func:`~scanmass.pipeline.part_terms.has_lit_face`), or pieces of it joined across a strip
    of its sparkling face taken for paper (term ``fragments``: on the tuned render dev-lens-window-steel7-t18 at
    the gasket's 3 mm the plate's corner has only that)."""
    return has_lit_face(part) or "fragments" in part.uncertainty_terms


def _clip_contacts(
    image: LoadedImage, scale: PhotoScale, result: Measurement, colour: np.ndarray
) -> tuple[np.ndarray, dict[int, tuple[ClipContact, tuple[int, int, int, int], np.ndarray]]]:
    """The photo's clipped zones and, per found region, how it meets them (with its box and filled mask)."""
    lut = np.asarray(image.to_linear, dtype=np.float32)
    height, width = image.grey.shape
    (rx0, ry0, rx1, ry1), inside_box = _filled_box(scale.roi_px, (height, width))
    zones = np.zeros((height, width), np.int32)
    if inside_box.size:
        zones[ry0:ry1, rx0:rx1], _ = clipped_zones(lut[colour[ry0:ry1, rx0:rx1]], inside_box.astype(bool))
    pad = OUTSIDE_PX[1] + 2
    out: dict[int, tuple[ClipContact, tuple[int, int, int, int], np.ndarray]] = {}
    for part in result.parts:
        if part.outline_mm is None:
            continue
        poly = np.round(_image_px(scale, np.asarray(part.outline_mm, float))).astype(np.int32)
        x0, y0, x1, y1 = _padded_box(poly, pad, (height, width))
        if x1 - x0 < 3 or y1 - y0 < 3:
            continue
        mask = np.zeros((y1 - y0, x1 - x0), np.uint8)
        cv2.fillPoly(mask, [poly - np.array([x0, y0], np.int32)], 1)
        contact = clip_contact(zones[y0:y1, x0:x1], mask.astype(bool))
        if contact is not None:
            out[part.label] = (contact, (x0, y0, x1, y1), mask.astype(bool))
    return zones, out


def clipped_faces(
    image: LoadedImage, scale: PhotoScale, result: Measurement, colour: np.ndarray | None
) -> tuple[Measurement, list[str]]:
    """Name the found regions beside a zone of clipped paper into which a lit metal face runs, and cover that zone.

    A part whose face was found where it mirrors the light near the paper's level (a lit face joined to it, a
    stretch found by its grain, pieces joined across its sparkle: :func:`_mirrors`) and which meets a patch of
    paper at the sensor's ceiling (:func:`~scanmass.segment.clipzone.clipped_zones`, over at least
    :data:`CLIP_MEETS_SHARE` of the band beyond its outline) may go on into that patch: its face there mirrors the
    light to the ceiling as the paper does, and nothing in the photo tells the two apart. Another found region
    mostly within the same patch (:data:`CLIP_PIECE_SHARE` of its band) and narrow may be a piece of that part (the shade in
    its holes, the strip of its wall), not a part of its own; and such pieces say that the lit part goes on into
    the patch. Only then are the lit part and the pieces named: a lit part with no piece in its patch keeps its
    figures (where its grain reached its true edge, dev-lens-window-steel3-t20's plate, 1.1 mm off, it meets the
    patch as one that stops short does). Each region named gets the term ``clipped_face``: the patch within the lit
    part's largest caliper of it, with its own
    region (area, the half extent on the centroid, the polar moment about the far corner on each second moment,
    as :func:`_face_term`), so that its figures say only that the part is not known (on
    tests/data/reallight/dev-lens-window-steel4-t20 the steel plate, 2321 mm², was found as three pieces of
    538, 32 and 1.2 mm², two of them with sigmas that did not cover the part; branch litsteel32).
    """
    if colour is None or not any(_mirrors(p) for p in result.parts):
        return result, []  # no face seen mirroring the light: the zones are not read (a full-image pass)
    zones, contacts = _clip_contacts(image, scale, result, colour)
    lit = {
        label: c
        for label, (c, _, _) in contacts.items()
        if c.outside_share >= CLIP_MEETS_SHARE and _mirrors(next(p for p in result.parts if p.label == label))
    }
    if not lit:
        return result, []
    met = frozenset().union(*(c.zones for c in lit.values()))
    pieces = [
        label
        for label, (c, _, _) in contacts.items()
        if c.zones & met
        and label not in lit
        and c.outside_share >= CLIP_PIECE_SHARE
        and inscribed_width_px(contacts[label][2]) * scale.plane_map.mm_per_px <= PIECE_MAX_WIDTH_MM
    ]
    if not pieces:
        return result, []
    met = frozenset().union(*(contacts[label][0].zones & met for label in pieces))
    lit = {label: c for label, c in lit.items() if c.zones & met}
    near = np.zeros(zones.shape, bool)  # the lit parts' regions, each grown by its largest caliper
    mm_per_px = scale.plane_map.mm_per_px
    for part in result.parts:
        if part.label in lit:
            _, (x0, y0, x1, y1), mask = contacts[part.label]
            own = np.ones(zones.shape, np.uint8)
            own[y0:y1, x0:x1] = 1 - mask
            near |= cv2.distanceTransform(own, cv2.DIST_L2, 5) <= part.caliper_max_mm / mm_per_px
    patch = np.isin(zones, list(met)) & near
    parts = []
    for part in result.parts:
        if part.label in pieces or part.label in lit:
            _, (x0, y0, x1, y1), mask = contacts[part.label]
            filled = patch.copy()
            filled[y0:y1, x0:x1] |= mask
            part = _with_shadow_term(part, _face_term(filled, mm_per_px), 0.0, "clipped_face")
        parts.append(part)
    result.parts = parts
    rows, cols = np.nonzero(patch)
    centre = scale.plane_map.to_mm(np.array([[cols.mean(), rows.mean()]]))[0]
    names = ", ".join(_region_name(p) for p in result.parts if p.label in pieces or p.label in lit)
    faces = ", ".join(str(label) for label in sorted(lit))
    return result, [
        f"clipped light: {names} border paper at the sensor's ceiling ({rows.size * mm_per_px**2:.3g} mm² about "
        f"({centre[0]:.0f}, {centre[1]:.0f}) mm): the lit metal face of part(s) {faces} may run on into it, as the dark "
        "pieces found within it (a hole's shade, a wall) suggest, and a face mirroring the light there is as bright as "
        "the paper, so that part's extent and outline are not seen; the term 'clipped_face' covers that region: do "
        "not use their figures; lower the exposure until the paper is below the ceiling, photograph metal in diffuse "
        "light, or lay the parts on a dark backing sheet or a backlight"
    ]


def loose_regions(result: Measurement) -> list[str]:
    """A warning naming the found regions whose stated area uncertainty (1 sigma) exceeds their area.

    Such a region's figures say nothing of a part: its area is not known to be larger than nothing. It is a
    fragment (a piece of a cast shadow, of a white part's wall or of a hole's dark bottom, where the part itself
    was not found: on dev-window-nylon2-t20 before branch whitenylon31, a 5.8 +- 16.3 mm² fragment at a white
    disc's rim was reported beside the missed disc), and is named as one, not as a trustworthy part.
    """
    loose = [p for p in result.parts if p.area_u_mm2 >= p.area_mm2]
    if not loose:
        return []
    names = ", ".join(f"part {p.label} ({p.area_mm2:.3g} ± {p.area_u_mm2:.3g} mm²)" for p in loose)
    return [
        f"loose region: {names} has a stated area uncertainty larger than its area, so it is not a trustworthy part "
        "(a piece of a cast shadow, of a white part's wall or of a hole's bottom, where the part itself may not have "
        "been found): do not use its figures; lay light parts on a dark backing sheet, use diffuse light or a "
        "backlight"
    ]


def white_walls_unread(read: list[WallThickness], white: frozenset[int] | set[int]) -> list[WallThickness]:
    """The thickness readings with those of white parts (:func:`_white_parts`) taken back.

    A white part's walls have the paper's colour: the wall band's edges are read off the paper's
    shading (on dev-spot-nylon-t20 the bracket read 1.16 +- 0.69 mm for 3.5 mm, 3.4 sigma off); its
    thickness stays unknown, its parallax covered by the unknown thickness's term.
    """
    return [
        replace(r, thickness_mm=None, sigma_mm=0.0, reason="a white part on white paper: its walls are not read")
        if r.label in white
        else r
        for r in read
    ]
