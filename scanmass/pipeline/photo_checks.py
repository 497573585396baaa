"""Checks of a measured photo shared by the others: the part inside what the markers surround, parallax of
an unknown thickness, the photo's colour, where a measured ring runs in the photo and a part's crop, unclear metal
edges, hidden holes in thick parts.

The other photo checks live beside it: :mod:`~scanmass.pipeline.photo_walls` (which edge of a thick part's
wall the outline runs on), :mod:`~scanmass.pipeline.photo_shadows` (shadows-only regions, cast shadows and
reflections), :mod:`~scanmass.pipeline.photo_shadow_cut` (cutting cast shadows out and measuring again),
:mod:`~scanmass.pipeline.photo_cut_strips` (strips of a cut closed off as holes) and
:mod:`~scanmass.pipeline.photo_holes` (deep holes opened at the top face).
Part of the pipeline stage (:mod:`scanmass.pipeline`).
"""

from __future__ import annotations

import math
import re
from dataclasses import replace

import cv2
import numpy as np

from scanmass.errors import ScaleError, SegmentationError
from scanmass.geometry import signed_area, vertex_normals
from scanmass.load.decode import LoadedImage, lookup
from scanmass.measurement import Measurement, Part
from scanmass.numeric import code_percentile as _code_percentile
from scanmass.pipeline.part_terms import UNKNOWN_THICKNESS_MM, _with_extra_term, area_share_term, change_term
from scanmass.scale.camera import PhotoScale
from scanmass.scale.homography import ElevationHook, apply_h, raised_outline_mm
from scanmass.section import escaping_holes
from scanmass.segment.shadow import SHADOW_MIN_ELEVATION_DEG, dark_pits, unclear_edges
from scanmass.uncertainty import combine

#: A part's label as a warning names it: "part 3", "part(s) 1, 2", "part(s) 2 (65 % of ...), 4 (...)"; not a
#: thickness ("a part 3 mm thick").
_PART_NAMES = re.compile(
    r"\bpart(?:\(s\))? (\d+(?: \((?:[^()]|\([^()]*\))*\))?(?:, \d+(?: \((?:[^()]|\([^()]*\))*\))?)*)(?![\d.]| mm)"
)


def _name_entries(group: str) -> list[str]:
    """The entries of a list of parts a warning names ("2 (65 %, 3 mm), 4" -> ["2 (65 %, 3 mm)", "4"])."""
    out, depth, start = [], 0, 0
    for i, ch in enumerate(group):
        depth += (ch == "(") - (ch == ")")
        if ch == "," and depth == 0:
            out.append(group[start:i])
            start = i + 2
    out.append(group[start:])
    return out


def relabelled(warning: str, moved: dict[int, int | None]) -> str | None:
    """A warning with the parts it names renamed (``moved``: old label -> new label, or None for a region that is no
    longer a part, whose entry is left out); None when a list of parts it names is left empty (the warning was
    about such regions alone). Labels not in ``moved`` stay.

    A warning is built from one measurement; a later stage that measures again numbers the parts anew, and one that
    replaces a region (a white part found by its top face, where its pieces were found) takes it away.

    Examples
    --------
    >>> relabelled("part 2: 71 boundary points lie on thin walls", {2: 3})
    'part 3: 71 boundary points lie on thin walls'
    >>> relabelled("cast shadow: part(s) 1 (65 % of its edge band), 3 (84 %) border", {1: None, 3: 2})
    'cast shadow: part(s) 2 (84 %) border'
    >>> relabelled("deep hole: in part 4 (6.2 mm at (14.0, 10.5) mm) a dark opening", {4: None}) is None
    True
    >>> relabelled("a part 3 mm thick would measure 4 % smaller", {3: None})
    'a part 3 mm thick would measure 4 % smaller'
    """
    emptied = False

    def rename(match: re.Match[str]) -> str:
        nonlocal emptied
        entries = []
        for entry in _name_entries(match.group(1)):
            digits = re.match(r"\d+", entry)
            assert digits is not None  # every entry begins with its label
            new = moved.get(int(digits.group()), int(digits.group()))
            if new is not None:
                entries.append(f"{new}{entry[digits.end() :]}")
        emptied |= not entries
        return match.group(0)[: match.start(1) - match.start(0)] + ", ".join(entries)

    out = _PART_NAMES.sub(rename, warning)
    return None if emptied else out


def without_parts(warnings: list[str], gone: set[int] | frozenset[int]) -> list[str]:
    """``warnings`` with the regions ``gone`` (no longer parts of the result) left out of the parts each names, and
    those that named only such regions dropped (:func:`relabelled`)."""
    moved: dict[int, int | None] = {label: None for label in gone}
    return [w for w in (relabelled(w, moved) for w in warnings) if w is not None]


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
    x0, y0, x1, y1 = _padded_box(poly, 10, (height, width))
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
    if mask.size:
        cv2.copyTo(window, mask, grey[y0:y1, x0:x1])  # the window's pixels within the clear area, in place
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
    scale: PhotoScale,
    result: Measurement,
    thickness_mm: float | None,
    plausible_mm: float | None = None,
    read: frozenset[int] | set[int] = frozenset(),
    unread: str = "",
) -> list[str]:
    """Without a thickness: an uncertainty term covering the parallax of a plausible thickness, and a warning.

    A photo shows a raised part larger than its footprint (its top face is nearer the
    camera) and, in a tilted view, with one side wall. When the thickness is not given,
    each part's outline and holes (mm) are raised by ``plausible_mm``
    (:data:`UNKNOWN_THICKNESS_MM`, via :func:`~scanmass.scale.homography.raised_outline_mm`)
    and half of the change of every figure is added as the term ``thickness_unknown``:
    a part of that thickness then lies 2 sigma off, one 1.5 times as thick 3 sigma off.
    ``--thickness 0`` declares a sheet-thin part and removes the term. Parts in ``read`` had
    their thickness read from their side walls (:mod:`~scanmass.pipeline.photo_thickness`) and
    get no term; ``unread`` says why the others' walls could not be read.
    """
    if thickness_mm is not None or scale.camera_matrix is None or not result.parts:
        return []
    if all(p.label in read for p in result.parts):
        return []
    plausible = UNKNOWN_THICKNESS_MM if plausible_mm is None else plausible_mm
    h0, k = scale.plane_map.matrix, scale.camera_matrix
    e = ElevationHook(h0, k, plausible).footprint_mm  # made once for every ring
    worst_rel = 0.0
    worst_cen_mm = 0.0
    for n, part in enumerate(result.parts):
        if part.outline_mm is None or part.label in read:
            continue
        flat_outer = np.asarray(part.outline_mm, dtype=float)
        flat_holes = [np.asarray(h.outline_mm, dtype=float) for h in part.holes if h.outline_mm is not None]
        raised_outer = raised_outline_mm(h0, k, plausible, flat_outer, footprint_mm=e)
        raised_holes = [raised_outline_mm(h0, k, plausible, h, hole=True, footprint_mm=e) for h in flat_holes]
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
        f"(term 'thickness_unknown'){unread}; give the thickness with --thickness MM, or --thickness 0 for a sheet-thin "
        "part"
    ]


#: Pillow modes of files with one grey band (and the 16-bit ones, "I;16..."): OpenCV decodes them in
#: colour as three copies of it.
GREY_FILE_MODES = ("1", "L", "I", "F")
#: Rows of the colour planes compared at a time (:func:`_grey_planes`): a band's comparison stays in
#: the processor's cache, and a colour photo is told from its first band.
GREY_CHECK_ROWS = 64


def _grey_planes(colour: np.ndarray) -> bool:
    """Whether a (H, W, 3) image's three planes are equal at every pixel (a grey photo).

    ``np.array_equal`` of the planes, band by band of :data:`GREY_CHECK_ROWS` rows: the same
    answer, stopping at the first band that differs.

    Examples
    --------
    >>> import numpy as np
    >>> grey = np.repeat(np.arange(200, dtype=np.uint8).reshape(100, 2, 1), 3, axis=2)
    >>> _grey_planes(grey), _grey_planes(np.where(np.arange(3) == 2, grey, grey // 2).astype(np.uint8))
    (True, False)
    """
    for y in range(0, colour.shape[0], GREY_CHECK_ROWS):
        band = colour[y : y + GREY_CHECK_ROWS]
        if not (np.array_equal(band[..., 0], band[..., 1]) and np.array_equal(band[..., 1], band[..., 2])):
            return False
    return True


def _photo_colour(image: LoadedImage) -> np.ndarray | None:
    """The photo's colour planes (encoded, as stored), or None for arrays, grey files or a size mismatch.

    A file of one grey band (:data:`GREY_FILE_MODES`) is not decoded again: in colour it would
    show three equal planes, a grey photo.
    """
    mode = image.mode or ""
    if image.path is None or mode in GREY_FILE_MODES or mode.startswith("I;16"):
        return None
    colour = cv2.imread(image.path, cv2.IMREAD_COLOR)  # applies the EXIF orientation, as the loader does
    if colour is None or colour.ndim != 3 or colour.shape[:2] != image.grey.shape:
        return None
    if colour.dtype != np.uint8 or len(image.to_linear) != 256:
        return None
    if _grey_planes(colour):
        return None  # a grey photo: colour tells nothing
    return colour


def _padded_box(poly: np.ndarray, pad: int, shape: tuple[int, int]) -> tuple[int, int, int, int]:
    """The box (x0, y0, x1, y1; px, end exclusive) around a pixel polygon, padded by ``pad`` and clipped to an
    image of ``shape`` (rows, columns); empty (x1 <= x0 or y1 <= y0) where the polygon lies off the image."""
    height, width = shape
    x0, y0 = (max(int(v) - pad, 0) for v in poly.min(axis=0))
    x1, y1 = min(int(poly[:, 0].max()) + pad + 1, width), min(int(poly[:, 1].max()) + pad + 1, height)
    return x0, y0, x1, y1


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

    A part measured from its white top face (term ``white_face``) is not tested: its outline
    was placed against what lies beyond the face's own edge, where the level crosses half-way
    (:func:`~scanmass.segment.whiteface.face_cover`), and its term already holds that edge's
    doubt (about a pixel where the step is faint). Its step to the paper is faint by nature
    and its wall and shadow make a dark band beside it, so the profile test flags 73-87 % of
    a white part's outline on the tuned white-nylon renders (dips, ramps and collapses alike)
    with the band's width, 3-8 px, as the displacement: the far side of a wall and shadow the
    face's outline does not follow. Counted again, it stated 3-15 % of the area and 1-2 mm on
    the holes' diameters for area errors of 0.3-2.5 % and hole errors of 0.02-0.57 mm.
    """
    if not result.parts:
        return []
    lut = np.asarray(image.to_linear, dtype=np.float32)
    mm_per_px = scale.plane_map.mm_per_px
    flagged: list[str] = []
    for n, part in enumerate(result.parts):
        if "white_face" in part.uncertainty_terms:
            continue
        crop = _part_crop(image, scale, part, 24, as_seen=True)
        if crop is None:
            continue
        (x0, y0, x1, y1), mask, rings = crop
        blur = float(part.uncertainty_terms.get("inputs", {}).get("blur_px", 1.0))
        codes = image.grey[y0:y1, x0:x1]
        risk = unclear_edges(lookup(lut, codes), mask, rings, blur, (codes, lut))
        if risk is None or risk.flagged_px < UNCLEAR_EDGE_SHARE * risk.length_px:
            continue
        area_mm2 = UNCLEAR_EDGE_SIGMA_SHARE * risk.moved_px2 * mm_per_px**2
        term = area_share_term(part, area_mm2)
        # each hole from its own ring: its mean plausible displacement d, the move of the whole
        # ring taken at 2 sigma (a hole's ring moves as one: a dark wall or pit taken as material
        # shrinks it all round, as on dev-mixed-black-t15's cam without a thickness, 8.0 mm read
        # as 2.8 mm with d = 4.2 mm), 2 d on the diameter, d at 1 sigma. Opened deep holes keep
        # it too: mixed-steel-t20's cam bore, traced at the top face, reads 2.2 mm small.
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
        codes = image.grey[y0:y1, x0:x1]
        pits = dark_pits(lookup(lut, codes), mask, HIDDEN_HOLE_MIN_AREA_MM2 / mm_per_px**2, levels=(codes, lut))
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


#: A part's surroundings (the band :data:`SURROUND_PX` px beyond its outline) are a face brighter than
#: the paper where their linear level exceeds the paper's by this share. Matte white paper is the
#: brightest diffuse surface on the mat (a matte part, a shadow or the table reflect less); only a face
#: that mirrors the light exceeds it. The paper's level is the 90th percentile of the mat's clear area:
#: the brightest paper, where a spotlight's pool lies (on the committed renders no part's band has more
#: than 4 % of its pixels above it by this share).
BRIGHTER_SURROUND_SHARE = 0.08
#: The band beyond a part's outline (px) read for its surroundings: past a sharpening halo (1-2 px).
SURROUND_PX = (3, 9)
#: A found region enclosed by a brighter face over at least this share of the band is no part on
#: the paper but a piece of a part brighter than the paper (its hole's wall and shadow, seen dark
#: within the bright face): a part on the mat has paper beside it, and a spotlight's pool covers
#: its surroundings only where the pool's paper is at most the brightest paper.
SURROUND_SHARE = 0.8


def _filled_box(poly_px: np.ndarray, shape: tuple[int, int]) -> tuple[tuple[int, int, int, int], np.ndarray]:
    """A polygon (px, rounded) filled with 1 in its bounding box clipped to an image of ``shape``.

    Returns the box (x0, y0, x1, y1) and the uint8 mask there: the image's filled polygon within the
    box, which is empty beyond it (OpenCV fills the same pixels moved by a whole offset).

    Examples
    --------
    >>> import numpy as np
    >>> box, mask = _filled_box(np.array([[-5.0, 2.0], [6.0, 2.0], [6.0, 4.0]]), (10, 10))
    >>> box, int(mask.sum())
    ((0, 2, 7, 5), 14)
    """
    height, width = shape
    poly = np.round(poly_px).astype(np.int32)
    x0, y0 = (min(max(int(v), 0), n) for v, n in zip(poly.min(axis=0), (width, height)))
    x1, y1 = (min(max(int(v) + 1, 0), n) for v, n in zip(poly.max(axis=0), (width, height)))
    mask = np.zeros((y1 - y0, x1 - x0), np.uint8)
    if mask.size:
        cv2.fillPoly(mask, [poly], 1, offset=(-x0, -y0))
    return (x0, y0, x1, y1), mask


def brighter_surrounds(image: LoadedImage, scale: PhotoScale, result: Measurement) -> list[tuple[int, float]]:
    """Per part: its label and the share of the band beyond its outline brighter than the paper.

    The band: :data:`SURROUND_PX` px beyond the part's outline in the photo, within the mat's clear
    area; brighter: above the paper's level (90th percentile of the clear area) by
    :data:`BRIGHTER_SURROUND_SHARE` of it. Each part's band is formed in a crop around it (the band
    lies within :data:`SURROUND_PX` px of the outline), and levels are looked up for its pixels only.
    """
    lut = np.asarray(image.to_linear, np.float32)
    grey = image.grey
    height, width = grey.shape
    (rx0, ry0, rx1, ry1), inside_box = _filled_box(scale.roi_px, (height, width))
    paper = _code_percentile(grey[ry0:ry1, rx0:rx1], inside_box, lut, 90)
    pad = SURROUND_PX[1] + 1
    out = []
    for part in result.parts:
        if part.outline_mm is None:
            continue
        poly = np.round(_image_px(scale, np.asarray(part.outline_mm, float))).astype(np.int32)
        x0, y0, x1, y1 = _padded_box(poly, pad, (height, width))
        if x1 <= x0 or y1 <= y0:
            continue  # the outline lies off the photo: no band within it
        mask = np.zeros((y1 - y0, x1 - x0), np.uint8)
        cv2.fillPoly(mask, [poly - np.array([x0, y0], np.int32)], 1)
        near = cv2.dilate(mask, np.ones((2 * SURROUND_PX[0] + 1,) * 2, np.uint8)).astype(bool)
        far = cv2.dilate(mask, np.ones((2 * SURROUND_PX[1] + 1,) * 2, np.uint8)).astype(bool)
        inside = np.zeros((y1 - y0, x1 - x0), bool)  # the clear area in the part's box
        ix0, iy0, ix1, iy1 = max(x0, rx0), max(y0, ry0), min(x1, rx1), min(y1, ry1)
        if ix1 > ix0 and iy1 > iy0:
            inside[iy0 - y0 : iy1 - y0, ix0 - x0 : ix1 - x0] = inside_box[iy0 - ry0 : iy1 - ry0, ix0 - rx0 : ix1 - rx0]
        band = far & ~near & inside
        if np.count_nonzero(band) < 20:
            continue
        out.append(
            (part.label, float(np.mean(lut[grey[y0:y1, x0:x1][band]] > paper * (1.0 + BRIGHTER_SURROUND_SHARE))))
        )
    return out


def _check_bright_surrounds(image: LoadedImage, scale: PhotoScale, result: Measurement) -> None:
    """Refuse a photo where a found part lies within a face brighter than the paper (:data:`SURROUND_SHARE`).

    Such a part is a piece of a bright part (the dark wall and shadow of its hole, its shaded
    wall): the bright face itself was not found, so no figure of the part can be trusted. Colour
    finds such faces (:mod:`scanmass.pipeline.photo_colour`); a grey photo, or a face of the
    paper's own colour, has no such cue.
    """
    enclosed = [(label, share) for label, share in brighter_surrounds(image, scale, result) if share >= SURROUND_SHARE]
    if enclosed:
        where = ", ".join(f"part {label} ({100 * share:.0f} % of its surroundings)" for label, share in enclosed)
        raise SegmentationError(
            f"a part brighter than the paper was seen only in pieces: {where} lies within a face brighter than the "
            "paper (the wall or shadow of a bright part's hole or side, not a part); photograph the parts in diffuse "
            "light on a darker background",
            path=image.path,
        )
