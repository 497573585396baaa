"""Coloured parts whose face is brighter than the paper, measured in a colour plane (term ``colour_face``).

Part of the pipeline stage (:mod:`scanmass.pipeline`). Pale brass mirroring a broad light is
brighter than the paper: the grey segmentation finds only its shaded wall and the shadows in
its holes (dev-soft-brass-t25: refused as found only in pieces) or the darker part of its face.
Its colour tells it from the paper whatever the light: in the yellowness plane
(:func:`~scanmass.segment.brightface.face_colour_plane`) the paper and its shadows are 0 and the
face is dark. Where the grey segmentation lost such a face, the part is measured in that plane.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import replace

import cv2
import numpy as np

from scanmass.errors import ScaleError, SegmentationError
from scanmass.geometry import point_in_ring
from scanmass.load.decode import LoadedImage
from scanmass.measurement import Measurement, Part
from scanmass.pipeline.part_terms import UNKNOWN_THICKNESS_MM, _with_extra_term, area_share_term, change_term
from scanmass.pipeline.photo_checks import _image_px, _mask_outside
from scanmass.scale.camera import PhotoScale
from scanmass.scale.homography import raised_outline_mm
from scanmass.section import escaping_holes
from scanmass.segment.brightface import face_colour_plane
from scanmass.segment.tintlevel import evened_colour_plane

#: A coloured part's face is taken as lost to the grey segmentation when its median luma is at
#: least this share of the paper's (the grey threshold lies half-way to the parts' level, so a face
#: near the paper's level or above it is not found whole) ...
BRIGHT_FACE_SHARE = 0.85
#: ... and the grey parts within its outline hold less than this share of its area.
FOUND_SHARE = 0.95
#: The stated doubt (1 sigma, px) of where a colour plane's edge runs: a JPEG's colour is stored
#: at half resolution (4:2:0), so its edges are read from samples two pixels apart.
COLOUR_EDGE_PX = 0.5
#: A grey part within a coloured face's outline beside a larger one is a piece of it below this
#: share of the larger one's area (as :data:`~scanmass.segment.fragments.FRAGMENT_AREA_RATIO`'s quarter).
PIECE_SHARE = 0.25


def _luma(lut: np.ndarray, colour: np.ndarray) -> np.ndarray:
    """Linear luma (ITU-R BT.709 weights, common practice) of encoded B, G, R planes."""
    luma = 0.0722 * lut[colour[..., 0]]
    luma += 0.7152 * lut[colour[..., 1]]
    luma += 0.2126 * lut[colour[..., 2]]
    return luma


def _face_share(scale: PhotoScale, part: Part, luma: np.ndarray, paper: float) -> float:
    """Median luma of the part's face (2 px inside its outline, holes cleared) over the paper's."""
    if part.outline_mm is None:
        return 0.0
    mask = np.zeros(luma.shape, np.uint8)
    cv2.fillPoly(mask, [np.round(_image_px(scale, np.asarray(part.outline_mm, float))).astype(np.int32)], 1)
    for hole in part.holes:
        if hole.outline_mm is not None:
            ring = _image_px(scale, np.asarray(hole.outline_mm, float), hole=True)
            cv2.fillPoly(mask, [np.round(ring).astype(np.int32)], 0)
    face = cv2.erode(mask, np.ones((5, 5), np.uint8)).astype(bool)
    if np.count_nonzero(face) < 20:
        return 0.0
    return float(np.median(luma[face])) / max(paper, 1e-6)


def colour_measurement(
    image: LoadedImage,
    scale: PhotoScale,
    colour: np.ndarray | None,
    measure: Callable[[LoadedImage], Measurement],
    min_area_px: float,
) -> tuple[Measurement | None, float]:
    """The photo measured in its yellowness plane, with the paper's linear luma; (None, 0) without colour."""
    if colour is None:
        return None, 0.0
    lut = np.asarray(image.to_linear, np.float32)
    inside = np.zeros(image.grey.shape, np.uint8)
    cv2.fillPoly(inside, [np.round(scale.roi_px).astype(np.int32)], 1)
    blue, green = lut[colour[..., 0]], lut[colour[..., 1]]
    plane = face_colour_plane(blue, green, inside.astype(bool), min_area_px=min_area_px)
    if plane is None:
        return None, 0.0
    # a face mirroring something dark keeps its colour but loses yellowness: evened by its own level
    plane = (evened_colour_plane(plane[0], blue, green, inside.astype(bool)), plane[1])
    luma = _luma(lut, colour)
    paper = float(np.median(luma[inside.astype(bool) & (luma >= np.percentile(luma[inside.astype(bool)], 50))]))
    grey = np.round(plane[0] * 65535).astype(np.uint16)
    ramp = np.linspace(0.0, 1.0, 65536, dtype=np.float32)
    syn = replace(image, grey=grey, to_linear=ramp, encoding=f"{image.encoding}; yellowness plane")
    try:
        return measure(_mask_outside(syn, scale.roi_px)), paper
    except (SegmentationError, ScaleError):
        return None, 0.0


def _lies_in(part: Part, ring: np.ndarray) -> bool:
    """Whether a grey part lies within a colour part's outer ring (mm): its centroid, or half its outline's vertices.

    A piece of a part found by its grey levels may be a crescent (a shaded wall along the edge)
    whose centroid lies outside the face.
    """
    if point_in_ring(np.asarray(part.centroid_mm, float), ring):
        return True
    if part.outline_mm is None:
        return False
    outline = np.asarray(part.outline_mm, float)
    return sum(point_in_ring(v, ring) for v in outline) >= 0.5 * len(outline)


def _with_colour_term(part: Part, scale: PhotoScale, thickness_mm: float | None) -> Part:
    """The part with the terms of a colour measurement.

    ``colour_face``: its perimeter times :data:`COLOUR_EDGE_PX` as an area. ``colour_wall``: a
    coloured side wall has the face's colour, so the colour outline does not tell the top face's
    edge from the wall's foot seen beside it (nor, in a hole, from the wall seen inside it): half
    the change of every figure when the outline is raised by the thickness (or, not given, by
    :data:`~scanmass.pipeline.part_terms.UNKNOWN_THICKNESS_MM`), as ``thickness_unknown`` takes it.
    """
    area = part.perimeter_mm * COLOUR_EDGE_PX * scale.plane_map.mm_per_px
    part = _with_extra_term(part, "colour_face", area_share_term(part, area), [])
    thick = UNKNOWN_THICKNESS_MM if thickness_mm is None else thickness_mm
    if thick <= 0 or scale.camera_matrix is None or part.outline_mm is None:
        return part
    h0, k = scale.plane_map.matrix, scale.camera_matrix
    flat_outer = np.asarray(part.outline_mm, dtype=float)
    flat_holes = [np.asarray(h.outline_mm, dtype=float) for h in part.holes if h.outline_mm is not None]
    if len(flat_holes) != len(part.holes):
        return part
    raised_outer = raised_outline_mm(h0, k, thick, flat_outer)
    raised_holes = [raised_outline_mm(h0, k, thick, h, hole=True) for h in flat_holes]
    if escaping_holes(raised_outer, raised_holes):
        return part
    term = change_term(flat_outer, flat_holes, raised_outer, raised_holes, share=0.5)
    return _with_extra_term(part, "colour_wall", term, raised_holes)


def colour_faces(
    image: LoadedImage,
    scale: PhotoScale,
    result: Measurement | None,
    colour: np.ndarray | None,
    measure: Callable[[LoadedImage], Measurement],
    min_area_px: float,
    thickness_mm: float | None,
) -> tuple[Measurement | None, list[str]]:
    """``result`` with each coloured part whose bright face the grey segmentation lost measured in the colour plane.

    A part found in the yellowness plane replaces the grey parts whose centroids lie within its
    outline when its face's median luma is at least :data:`BRIGHT_FACE_SHARE` of the paper's and
    those grey parts hold less than :data:`FOUND_SHARE` of its area; it takes the label of the
    first of them (or the next free label) and the term ``colour_face``. With ``result`` None
    (the grey segmentation refused the photo) every part found by colour makes the result. Returns the
    result (None when nothing was replaced and ``result`` was None) and the warnings.
    """
    found, paper = colour_measurement(image, scale, colour, measure, min_area_px)
    if found is None or not found.parts:
        return result, []
    luma = _luma(np.asarray(image.to_linear, np.float32), colour) if colour is not None else None
    grey_parts = [] if result is None else list(result.parts)
    taken: list[tuple[Part, list[Part]]] = []
    pieces: list[tuple[Part, Part]] = []  # (a small grey piece, the grey part of the same coloured face)
    for part in found.parts:
        if part.outline_mm is None or luma is None:
            continue
        ring = np.asarray(part.outline_mm, float)
        within = [p for p in grey_parts if _lies_in(p, ring)]
        lost = _face_share(scale, part, luma, paper) >= BRIGHT_FACE_SHARE
        if result is None or lost and sum(p.area_mm2 for p in within) < FOUND_SHARE * part.area_mm2:
            taken.append((part, within))
        elif len(within) >= 2:
            # one coloured face, found whole by its grey levels, and beside it a small grey piece
            # within the face's colour outline (its shaded wall or its shadow): no part of its own
            largest = max(within, key=lambda p: p.area_mm2)
            pieces += [(p, largest) for p in within if p is not largest and p.area_mm2 < PIECE_SHARE * largest.area_mm2]
    if not taken and (result is None or not pieces):
        return result, []
    gone = {id(p) for _, within in taken for p in within} | {id(p) for p, _ in pieces}
    kept = [p for p in grey_parts if id(p) not in gone]
    next_label = max([p.label for p in grey_parts], default=0) + 1
    new_parts = []
    notes = []
    for part, within in taken:
        label = min((p.label for p in within), default=next_label)
        if not within:
            next_label += 1
        new = _with_colour_term(replace(part, label=label), scale, thickness_mm)
        new_parts.append(new)
        notes.append(
            f"{label} ({new.area_mm2:.4g} mm², grey parts found there: {sum(p.area_mm2 for p in within):.3g} mm²)"
        )
    parts = sorted(kept + new_parts, key=lambda p: p.label)
    warnings = []
    if pieces:
        warnings.append(
            "coloured pieces: "
            + ", ".join(
                f"part {p.label} ({p.area_mm2:.3g} mm²) within the colour outline of part {q.label}" for p, q in pieces
            )
            + " lie(s) within one coloured face's outline beside its larger part (a shaded wall or a shadow found "
            "apart) and are left out"
        )
    if not new_parts:
        return (None if result is None else replace(result, parts=parts)), warnings
    warning = (
        "coloured face brighter than the paper: part(s) "
        + ", ".join(notes)
        + " were measured by their colour (a face that takes less blue than green, against the paper's colour, lit "
        "or in shade), as the grey levels did not find their faces whole; the uncertainty includes half a pixel "
        "along the outline for the photo's colour resolution (term 'colour_face') and half the parallax of the thickness, as a coloured side wall looks like the face (term 'colour_wall'); for a trustworthy figure "
        "photograph bright metal on a darker background"
    )
    base = found if result is None else result
    if result is None:
        warning += (
            "; the grey levels refused the photo, and parts of the paper's colour (steel, black or white parts) "
            "are not seen by colour: check that every part is listed"
        )
    return replace(base, parts=parts), warnings + [warning]
