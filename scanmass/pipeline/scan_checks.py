"""Checks of the parts found in an image, before and after they are measured: the face of a thick part on
a scanner's glass, touching parts (warned, or split), the tone curve and sharpening halos, a scanner's lid left
open. Part of the pipeline stage (:mod:`scanmass.pipeline`).
"""

from __future__ import annotations

import math
from dataclasses import replace
from typing import Any

import cv2
import numpy as np

from scanmass.geometry import offset_ring
from scanmass.load.decode import LoadedImage, encoding_lut, lookup
from scanmass.mapping import MappedPart
from scanmass.measurement import Part
from scanmass.pipeline.part_terms import (
    _with_extra_term,
    _with_shadow_term,
    area_share_term,
    change_term,
)
from scanmass.scale.planemap import PlaneMap
from scanmass.segment.lidgap import LidGap
from scanmass.segment.rings import PartRings
from scanmass.segment.scanface import FACE_DOUBT_CONTRAST, FaceResult, deep_holes, scan_face, tinted_face
from scanmass.segment.symmetry import edge_halo, reading_shift
from scanmass.segment.touching import NeckReport, TouchSplit, split_touching
from scanmass.uncertainty import (
    combine,
)


def _lid_gap_text(gap: LidGap, mm_per_px: float | None) -> str:
    depth = f"{gap.band_px * mm_per_px:.2g} mm" if mm_per_px else f"{gap.band_px:.0f} px"
    return (
        f"lid not closed? the background falls to {100 * gap.border_ratio:.0f} % of the lid's white along the "
        f"{gap.side} edge of the scan (a dark band {depth} deep)"
    )


#: Displacement (px, 1 sigma) of a face's edge against its shadow: its level is read against a
#: shadow that darkens towards the part (less light reaches the lid next to the wall).
FACE_EDGE_U_PX = 1.0

#: Displacement (px, 1 sigma) of the edge of a deep hole found by its floor's grain
#: (:func:`~scanmass.segment.scanface.deep_holes`): a floor in its wall's shadow loses grain towards the
#: rim, which pulls the ring in (the 8 mm bore of the Cycles render scan-black-lamp40: 0.65 px; round
#: floors of even grain rendered with exact coverage, 20-50 px across: within 0.5 px).
GRAIN_EDGE_U_PX = 1.0

#: ... and in a face in doubt (:data:`~scanmass.segment.scanface.FACE_DOUBT_CONTRAST`, kept by level: no
#: sweep): a metal's own grain beside the rim lifts the face's side of the halfway, so the ring grows (the
#: 5.5 mm holes of dev-scan-cam2-lamp33's brass bracket, read so with the sweep left out: +0.33 / +0.36 mm,
#: 2 px per edge); the grain's blur (the high-pass's 1 px and the average's 2 px in quadrature, 2.2 px) and more.
DOUBT_GRAIN_EDGE_U_PX = 3.0


def _scan_faces(
    image: LoadedImage, parts: list[PartRings], min_hole_mm2: float, px_area_mm2: float
) -> tuple[list[PartRings], dict[int, FaceResult]]:
    """Each part's face on the glass (a flatbed scan): outlines that took in the lamp's shadow are replaced.

    Returns the parts and, per label, the :class:`~scanmass.segment.scanface.FaceResult`
    of every part with a shadow (separated, or not: then the outline is kept).
    """
    out: list[PartRings] = []
    faces: dict[int, FaceResult] = {}
    h_px, w_px = image.grey.shape
    lut = np.asarray(image.to_linear, dtype=np.float32)
    colour: np.ndarray | None = None
    colour_read = False
    for rings in parts:
        x0, y0 = (np.floor(rings.outer_px.min(axis=0)).astype(int) - 16).clip(0)
        x1, y1 = np.ceil(rings.outer_px.max(axis=0)).astype(int) + 17
        crop = lookup(lut, image.grey[y0 : min(y1, h_px), x0 : min(x1, w_px)])
        noise = abs(rings.noise_rel * rings.contrast) if math.isfinite(rings.noise_rel) else 0.0
        face = scan_face(
            crop,
            (int(x0), int(y0)),
            rings.outer_px,
            list(rings.holes_px),
            rings.gradient_px,
            noise=noise,
            min_hole_px=min_hole_mm2 / px_area_mm2,
        )
        if face is not None and face.outer_px is not None:  # deep holes as dark as the face: told by their grain
            code = min(int(np.searchsorted(lut, face.levels[2])), len(lut) - 2)  # the stored code at the face's level
            quantum = abs(float(lut[code + 1] - lut[code]))
            face = deep_holes(crop, (int(x0), int(y0)), face, min_hole_mm2 / px_area_mm2, quantum=quantum)
        if face is not None:
            if not colour_read:  # decoded once, for the first face beside a shadow
                colour, colour_read = _scan_colour(image), True
            if colour is not None:  # a tinted face (brass) is placed by its colour against the white lid's shadow
                rgb = colour[y0 : min(y1, h_px), x0 : min(x1, w_px), ::-1].astype(np.float32) / 255.0
                found = (rings.outer_px, list(rings.holes_px), rings.gradient_px, list(rings.hole_gradients_px))
                face = tinted_face(rgb, (int(x0), int(y0)), face, min_hole_mm2 / px_area_mm2, found=found)
        if face is None:
            out.append(rings)
            continue
        faces[rings.label] = face
        if face.outer_px is None or face.gradient_px is None:
            out.append(rings)
            continue
        area = abs(float(cv2.contourArea(face.outer_px.astype(np.float32)))) - sum(
            abs(float(cv2.contourArea(h.astype(np.float32)))) for h in face.holes_px
        )
        out.append(
            replace(
                rings,
                outer_px=face.outer_px,
                holes_px=list(face.holes_px),
                gradient_px=face.gradient_px,
                hole_gradients_px=list(face.hole_gradients_px),
                area_px=area,
                contrast=face.levels[2] - face.levels[0],
            )
        )
    return out, faces


def _scan_colour(image: LoadedImage) -> np.ndarray | None:
    """The scan's colour planes (B, G, R as stored, 8 bit), or None for arrays, grey files or other depths."""
    if image.path is None or len(image.to_linear) != 256:
        return None
    colour = cv2.imread(image.path, cv2.IMREAD_COLOR)  # applies the EXIF orientation, as the loader does
    if colour is None or colour.ndim != 3 or colour.shape[:2] != image.grey.shape or colour.dtype != np.uint8:
        return None
    b, g, r = colour[..., 0], colour[..., 1], colour[..., 2]
    if np.array_equal(b, g) and np.array_equal(g, r):
        return None  # a grey scan: colour tells nothing
    return colour


def _with_face_term(part: Part, face: FaceResult, plane_map: PlaneMap) -> Part:
    """The part with the term ``scan_shadow``.

    Separated: every figure's change when the face's edge against its shadow moves out by
    :data:`FACE_EDGE_U_PX`, and that edge uncertainty on each hole's diameter. Not separated: the shadow the outline may hold (its estimated
    area; the centroid by that share of half the part's extent, the moments by twice it).
    """
    if face.outer_px is not None and face.shadow_edge is not None:
        outer = np.asarray(face.outer_px, float)
        holes = [plane_map.to_mm(np.asarray(h, float)) for h in face.holes_px]
        tangent = np.roll(outer, -1, axis=0) - np.roll(outer, 1, axis=0)
        tn = np.maximum(np.hypot(tangent[:, 0], tangent[:, 1]), 1e-12)
        normal = np.column_stack([tangent[:, 1], -tangent[:, 0]]) / tn[:, None]
        if cv2.contourArea(outer.astype(np.float32), oriented=True) < 0:
            normal = -normal  # outward in the image frame
        moved = outer.copy()
        moved[face.shadow_edge] += FACE_EDGE_U_PX * normal[face.shadow_edge]
        term = change_term(plane_map.to_mm(outer), holes, plane_map.to_mm(moved), holes)
        grain = face.grain_holes if len(part.holes) == len(holes) else 0
        in_doubt = face.doubt_outer_px is not None or face.doubt_px2 > 0
        grain_u_px = DOUBT_GRAIN_EDGE_U_PX if in_doubt else GRAIN_EDGE_U_PX
        if grain:  # holes found by their floor's grain: the change when they grow by their edge's uncertainty
            first = len(holes) - grain
            grown = holes[:first] + [
                plane_map.to_mm(offset_ring(np.asarray(h, float), grain_u_px)) for h in face.holes_px[first:]
            ]
            more = change_term(plane_map.to_mm(outer), holes, plane_map.to_mm(outer), grown)
            term = {k: combine(v, more[k]) for k, v in term.items()}
            grain_d_u = 2.0 * grain_u_px * plane_map.mm_per_px
            part = replace(
                part,
                holes=part.holes[:first]
                + [replace(h, diameter_u_mm=combine(h.diameter_u_mm, grain_d_u)) for h in part.holes[first:]],
            )
        if in_doubt:
            term = {
                k: combine(v, _doubt_term(part, face, outer, holes, plane_map).get(k, 0.0)) for k, v in term.items()
            }
            if face.doubt_holes_px is not None and len(part.holes) == len(face.holes_px):
                part = _with_hole_doubt(part, face, plane_map.mm_per_px)
        # a hole's wall throws the lamp's shadow into the hole as the part's wall does beside it: the
        # stretch of its edge against that shadow moves as the face's edge does, all of it together
        reach_px = 0.5 * math.pi * face.shadow_px2 / face.shadow_edge_px if face.shadow_edge_px > 0 else math.inf
        part = replace(
            part,
            holes=[
                replace(
                    h,
                    diameter_u_mm=combine(
                        h.diameter_u_mm,
                        2.0 * shadowed_share(h.diameter_mm / plane_map.mm_per_px, reach_px) * FACE_EDGE_U_PX
                        * plane_map.mm_per_px,
                    ),
                )
                for h in part.holes
            ],
        )  # fmt: skip
        return _with_shadow_term(part, term, 0.0, name="scan_shadow")
    shadow_mm2 = face.shadow_px2 * plane_map.mm_per_px**2
    return _with_shadow_term(part, area_share_term(part, shadow_mm2), 0.0, name="scan_shadow")


def shadowed_share(diameter_px: float, reach_px: float) -> float:
    """The share of a round hole's edge that lies against its own wall's shadow, under a lamp from one side.

    The wall on the lamp's side shades the hole's floor (the lid) for ``reach_px`` along the
    lamp's direction; a point of the edge at angle phi from that direction has the floor beside
    it lit only where the chord towards the lamp, ``-diameter cos(phi)``, is longer than the
    reach. The shaded share is ``1/2 + asin(min(1, reach / diameter)) / pi``: half the edge under
    a grazing reach, all of it where the shadow spans the hole. An edge read against the shadow
    is moved by the same level error all along that stretch, so the hole's diameter moves by
    twice this share times the edge's displacement (area ``pi D / 2 dD`` against ``pi D s d``).

    The reach is taken from the shadow beside the part (its band's area over its edge's length,
    times pi/2: a round wall's mean band is 2/pi of its reach, a straight one's all of it); an
    unknown reach counts as spanning the hole.

    Examples
    --------
    >>> shadowed_share(100.0, 0.0), shadowed_share(100.0, 200.0)
    (0.5, 1.0)
    """
    if not diameter_px > 0:
        return 1.0
    return 0.5 + math.asin(min(1.0, max(reach_px, 0.0) / diameter_px)) / math.pi


def _doubt_term(
    part: Part, face: FaceResult, outer_px: np.ndarray, holes_mm: list[np.ndarray], plane_map: PlaneMap
) -> dict[str, float]:
    """A face told from its shadow by a small level step: every figure's change to the other reading, or the band.

    Where the sweep's face was taken, the change of each figure from it to the face found by
    level (``doubt_outer_px``; whole, at 1 sigma); without it, the shadow's estimated band
    (``doubt_px2``) as material the outline may hold (:func:`area_share_term`).
    """
    if face.doubt_outer_px is not None:
        other = plane_map.to_mm(np.asarray(face.doubt_outer_px, float))
        return change_term(plane_map.to_mm(outer_px), holes_mm, other, holes_mm)
    return area_share_term(part, face.doubt_px2 * plane_map.mm_per_px**2)


def _area_diameter_px(ring: np.ndarray) -> float:
    """The diameter (px) of the circle with the ring's area."""
    return 2.0 * math.sqrt(abs(float(cv2.contourArea(ring.astype(np.float32)))) / math.pi)


def _with_hole_doubt(part: Part, face: FaceResult, mm_per_px: float) -> Part:
    """Each hole's diameter uncertainty joined by its change to the other reading's nearest hole (whole, 1 sigma).

    A hole of the face that the other reading lacks keeps its own uncertainty: the other reading
    (the face by level) reads holes against the part's level, which the shadow it took in pulls down.
    """
    other = [np.asarray(h, float) for h in face.doubt_holes_px or []]
    if not other:
        return part
    centres = np.array([h.mean(axis=0) for h in other])
    sizes = np.array([_area_diameter_px(h) for h in other])
    holes = []
    for hole, ring in zip(part.holes, face.holes_px):
        ring = np.asarray(ring, float)
        d_px = _area_diameter_px(ring)
        dist = np.hypot(*(centres - ring.mean(axis=0)).T)
        k = int(np.argmin(dist))
        if dist[k] > 0.5 * d_px:
            holes.append(hole)
            continue
        holes.append(replace(hole, diameter_u_mm=combine(hole.diameter_u_mm, abs(sizes[k] - d_px) * mm_per_px)))
    return replace(part, holes=holes)


def _doubt_mm2(face: FaceResult, mm_per_px: float) -> float:
    """The area (mm2) a doubted face may be off by: the face by level's difference, or the shadow's band."""
    if face.doubt_outer_px is not None and face.outer_px is not None:
        a = abs(cv2.contourArea(np.asarray(face.outer_px, np.float32)))
        b = abs(cv2.contourArea(np.asarray(face.doubt_outer_px, np.float32)))
        return abs(a - b) * mm_per_px**2
    return face.doubt_px2 * mm_per_px**2


def _side(direction: tuple[float, float]) -> str:
    """The image side a direction (image pixels, rows down) points to."""
    dx, dy = direction
    if abs(dy) >= abs(dx):
        return "top" if dy < 0 else "bottom"
    return "left" if dx < 0 else "right"


def _face_warnings(faces: dict[int, FaceResult], mm_per_px: float) -> list[str]:
    """What the scan-face check found: shadows left out, or shadows that could not be told from the part."""
    out = []
    left_out = {k: f for k, f in faces.items() if f.outer_px is not None}
    kept = {k: f for k, f in faces.items() if f.outer_px is None and f.note != "soft edges"}
    soft = {k: f for k, f in faces.items() if f.note == "soft edges"}
    if soft:
        listed = ", ".join(f"{k} ({f.soft_length_px * mm_per_px:.3g} mm)" for k, f in soft.items())
        out.append(
            f"scan: the edges of part(s) {listed} are soft over that length, with no shadow beside them: a part not "
            "lying flat on the glass (its face out of focus there)? press it flat, or check the figures"
        )
    if left_out:
        listed = ", ".join(
            f"{k} ({f.shadow_px2 * mm_per_px**2:.3g} mm² on its {_side(f.direction)} side)" for k, f in left_out.items()
        )
        # the shadow's length: its area over the face's edge against it; about the lid's height or more
        deep_mm = max(f.shadow_px2 / max(f.shadow_edge_px, 1.0) for f in left_out.values()) * mm_per_px
        out.append(
            f"scan of thick parts: the lamp's shadow beside part(s) {listed} was left out; the outline is the face "
            "on the glass (its sharp edge), and the edge against the shadow adds the term 'scan_shadow'; a hole "
            f"narrower than about {deep_mm:.2g} mm in such a part can look as dark as the part (no light reaches "
            "the lid above it) and be missed: check the holes"
        )
    tinted = [k for k, f in left_out.items() if f.note == "separated by colour"]
    if tinted:
        listed = ", ".join(str(k) for k in tinted)
        out.append(
            f"scan of thick parts: part(s) {listed} are about as dark as the lamp's shadow; their face was told from "
            "it by colour (a tinted face; the shadow has the lid's colour): the edge against the shadow is where the "
            "tint falls to half the face's, the other edges are the face's steps against the lid"
        )
    doubt = {k: f for k, f in left_out.items() if f.doubt_outer_px is not None or f.doubt_px2 > 0}
    if doubt:
        listed = ", ".join(f"part {k} ({_doubt_mm2(f, mm_per_px):.3g} mm²)" for k, f in doubt.items())
        out.append(
            f"scan of a thick part: {listed} is nearly as dark as the lamp's shadow beside it (their levels differ "
            f"by under {100 * FACE_DOUBT_CONTRAST:.0f} % of the contrast), so the face's edge against the shadow is "
            "not sure; the face the shadow's sweep along the lamp leaves is measured where it was found, and the "
            "uncertainty includes the other reading of it (the face by level, or the shadow's whole band, and the "
            "holes so read; term 'scan_shadow'); lay white paper on the glass around the part, or measure it on a "
            "backlight"
        )
    grain = {k: f.grain_holes for k, f in left_out.items() if f.grain_holes}
    if grain:
        listed = ", ".join(f"{n} in part {k}" for k, n in grain.items())
        doubted = [k for k in grain if k in doubt]
        off = f"{GRAIN_EDGE_U_PX:g} px off" + (
            f" ({DOUBT_GRAIN_EDGE_U_PX:g} px in part(s) {', '.join(str(k) for k in doubted)}, whose face is in doubt)"
            if doubted
            else ""
        )
        out.append(
            f"scan of thick parts: hole(s) as dark as the face ({listed}) were found by the grain of their floor (the "
            f"lid seen through a deep hole), not by its level; their edges may lie {off} (term "
            "'scan_shadow'); check them, or measure the part on a backlight, where every through-hole shows light"
        )
    for k, f in kept.items():
        out.append(
            f"scan of a thick part: part {k} is as dark as the lamp's shadow on its {_side(f.direction)} side, so the "
            f"face on the glass cannot be told from it; the outline may hold up to {f.shadow_px2 * mm_per_px**2:.3g} mm² "
            "of shadow (term 'scan_shadow'); lay white paper on the glass around the part, or photograph it on the "
            "marker mat in diffuse light"
        )
    return out


def _touching_warnings(
    parts: list[Any], splits: list[TouchSplit | None], necks: list[NeckReport | None], mm_per_px: float
) -> list[str]:
    """A warning for each found part that looks like two parts touching (a neck, or a seam across it)."""
    out = []
    for rings, split, neck in zip(parts, splits, necks):
        if neck is not None:
            wa, wb = (w * mm_per_px for w in neck.lobe_widths_px)
            out.append(
                f"part {rings.label} looks like two parts touching (a neck {neck.neck_width_px * mm_per_px:.2g} mm "
                f"wide between lobes {wa:.3g} and {wb:.3g} mm across); they are measured as one: lay them a few mm "
                "apart, or pass --split-touching to measure them separately"
            )
        elif split is not None and split.evidence == "seam":
            out.append(
                f"part {rings.label} looks like two parts touching (a seam {split.cut_length_px * mm_per_px:.3g} mm "
                f"long runs across it, {100 * split.seam_depth:.0f} % short of the part's level: a gap narrower "
                "than the blur); they are measured as one: lay them a few mm apart, or pass --split-touching to "
                "measure them separately"
            )
    return out


#: Displacement (px, 1 sigma) of a cut along a seam: the gap (under ~1.2 px, else the parts are
#: found apart) is shared between the two parts, and the cut's ends are placed to ~0.5 px.
SEAM_CUT_U_PX = 1.0


def _touch_splits(
    image: LoadedImage, parts: list[PartRings], polarity: str, necks: list[NeckReport | None]
) -> list[TouchSplit | None]:
    """For each found part, how it would split into two touching parts (None: it does not look like two)."""
    out: list[TouchSplit | None] = []
    h_px, w_px = image.grey.shape
    lut = np.asarray(image.to_linear, dtype=np.float32)
    for rings, neck in zip(parts, necks):
        x0, y0 = (np.floor(rings.outer_px.min(axis=0)).astype(int) - 8).clip(0)
        x1, y1 = np.ceil(rings.outer_px.max(axis=0)).astype(int) + 9
        codes = image.grey[y0 : min(y1, h_px), x0 : min(x1, w_px)]
        out.append(
            split_touching(
                None,  # the codes and their table below: the crop is looked up once, normalised
                (int(x0), int(y0)),
                rings.outer_px,
                list(rings.holes_px),
                dark_part=polarity.startswith("dark"),
                noise_rel=rings.noise_rel if math.isfinite(rings.noise_rel) else 0.0,
                neck=neck,
                levels=(codes, lut),
            )
        )
    return out


def _apply_splits(
    parts: list[PartRings], splits: list[TouchSplit | None]
) -> tuple[list[PartRings], list[dict[str, Any]], dict[int, tuple[float, Any]]]:
    """The found parts with each split one replaced by its two lobes, labels renumbered in order.

    Returns the parts, a note per split (the new labels, evidence, cut length and the
    cut's plausible displacement in px) and, per new label, (displacement px, the cut's ends in px).
    """
    out: list[PartRings] = []
    notes: list[dict[str, Any]] = []
    cuts: dict[int, tuple[float, Any]] = {}
    for rings, split in zip(parts, splits):
        if split is None:
            out.append(replace(rings, label=len(out) + 1))
            continue
        length = split.cut_length_px
        shift = SEAM_CUT_U_PX if split.evidence == "seam" else max(SEAM_CUT_U_PX, 0.25 * length)
        fallback = float(np.median(rings.gradient_px)) if len(rings.gradient_px) else 1.0
        lobes = []
        for (outer, holes), index, keep in zip(split.lobes, split.vertex_index, split.hole_index):
            grad = np.where(index >= 0, np.asarray(rings.gradient_px)[np.maximum(index, 0)], fallback)
            area = abs(float(cv2.contourArea(outer.astype(np.float32)))) - sum(
                abs(float(cv2.contourArea(h.astype(np.float32)))) for h in holes
            )
            lobes.append(
                replace(
                    rings,
                    outer_px=outer,
                    holes_px=holes,
                    gradient_px=grad,
                    hole_gradients_px=[rings.hole_gradients_px[k] for k in keep if k < len(rings.hole_gradients_px)],
                    area_px=area,
                    bbox_px=(
                        int(outer[:, 0].min()),
                        int(outer[:, 1].min()),
                        int(np.ceil(outer[:, 0].max())),
                        int(np.ceil(outer[:, 1].max())),
                    ),
                )
            )
        lobes.sort(key=lambda r: (r.bbox_px[1], r.bbox_px[0]))
        labels = []
        for lobe in lobes:
            out.append(replace(lobe, label=len(out) + 1))
            labels.append(len(out))
            cuts[len(out)] = (shift, split.cut_px)
        notes.append({"parts": labels, "evidence": split.evidence, "cut_length_px": length, "displacement_px": shift})
    return out, notes, cuts


def _with_cut_term(part: Part, mapped: MappedPart, cut_mm: np.ndarray, shift_mm: float) -> Part:
    """The part with the term ``split_cut``: every figure's change when the cut moves by ``shift_mm``.

    The cut's two ends (``cut_mm``) are vertices of the mapped outer ring; both move by
    ``shift_mm`` along the cut's normal (its sign does not matter: the change's size is kept).
    """
    outer = np.asarray(mapped.outer_mm, dtype=float)
    holes = [np.asarray(h, dtype=float) for h in mapped.holes_mm]
    ends = [int(np.argmin(np.hypot(*(outer - p).T))) for p in cut_mm]
    seg = (cut_mm[1] - cut_mm[0]) / max(float(np.hypot(*(cut_mm[1] - cut_mm[0]))), 1e-12)
    normal = np.array([seg[1], -seg[0]])
    moved = outer.copy()
    moved[ends] += shift_mm * normal
    term = change_term(outer, holes, moved, holes)
    return _with_extra_term(part, "split_cut", term, [])


def _split_warnings(notes: list[dict[str, Any]], mm_per_px: float) -> list[str]:
    out = []
    for note in notes:
        a, b = note["parts"]
        how = "a seam across the outline" if note["evidence"] == "seam" else "a narrow neck"
        out.append(
            f"parts {a} and {b} were found as one outline and split (two parts touching: {how}); the cut, "
            f"{note['cut_length_px'] * mm_per_px:.3g} mm long, may lie {note['displacement_px'] * mm_per_px:.2g} mm "
            "off (term 'split_cut'); lay parts a few mm apart for a clean measurement"
        )
    return out


#: Share of a tone move taken as uneven along the outline (first harmonic), for centroids.
TONE_UNEVEN = 0.05


def _tone_terms(
    image: LoadedImage, found: list[PartRings], parts: list[Part], mm_per_px: float, tone_known: bool
) -> list[str]:
    """The term ``tone`` where the image's tone curve is in doubt; a warning for each sharpened part.

    The midpoint rule is exact in linear light. A tone curve that is not the one the
    file declares (a phone's rendering, a scanner's contrast setting) or sharpening
    (:func:`~scanmass.segment.symmetry.edge_halo`) moves every edge of a part by a
    fraction of the blur width, by an amount the single image cannot give. Its size is
    bounded by the move between two readings far apart, sRGB and linear
    (:func:`~scanmass.segment.symmetry.reading_shift`; rendered edges with blur 0.6-1.5 px:
    an S-shaped curve, a 2.2 power curve and unsharp masks of amount 0.3-1.5 moved them
    by 0.07-0.75 of it): the part's material is grown by that move and half the change
    of each figure is the term (the move itself at 2 sigma); the centroid's term also
    holds :data:`TONE_UNEVEN` of the move (an uneven move shifts even a round part's
    centroid: a strongly sharpened ring moved its centroid by 0.002 px). Parts are
    replaced in ``parts``; the warnings are returned.
    """
    warnings = []
    linear, _ = encoding_lut("linear", len(image.to_linear))
    for n, (rings, part) in enumerate(zip(found, parts)):
        halo = edge_halo(image, rings)
        if tone_known and not halo.found or part.outline_mm is None:
            continue
        move_mm = abs(reading_shift(image, rings, linear)) * mm_per_px
        if move_mm <= 0.0:
            continue
        outer = np.asarray(part.outline_mm, dtype=float)
        holes = [np.asarray(h.outline_mm, dtype=float) for h in part.holes if h.outline_mm is not None]
        grown_outer = offset_ring(outer, move_mm)
        grown_holes = [offset_ring(h, -move_mm) for h in holes]
        term = change_term(outer, holes, grown_outer, grown_holes, share=0.5)
        # the move is not quite even along the outline (it depends on the edge's angle to the
        # pixel grid and on the local contrast): a first-harmonic variation of TONE_UNEVEN of it
        # moves the centroid of a round part by that fraction of the move, which an even
        # offset never does
        for axis in ("centroid_x_mm", "centroid_y_mm"):
            term[axis] = combine(term[axis], TONE_UNEVEN * move_mm)
        parts[n] = _with_extra_term(part, "tone", term, grown_holes if len(holes) == len(part.holes) else [])
        if halo.found:
            warnings.append(
                f"part {part.label}: its edges show sharpening halos ({100 * halo.overshoot:.2g} % of the contrast): "
                "sharpening or local contrast in the scanner's or camera's software moves edges by a fraction of a "
                f"pixel (up to about {move_mm:.2g} mm here; included in the uncertainty, term 'tone'); turn "
                "sharpening off and scan again for full accuracy"
            )
    return warnings
