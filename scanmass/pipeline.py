"""The measuring pipeline: image -> scale -> segment -> map -> section -> uncertainty.

:func:`measure` is the library's main entry point; the CLI's ``measure`` and ``batch``
commands and the demo call it.
"""

from __future__ import annotations

import math
import os
from dataclasses import fields, replace
from typing import Any

import cv2
import numpy as np

from scanmass.errors import PartCutError, ScaleError, SegmentationError
from scanmass.geometry import offset_ring
from scanmass.load.decode import LoadedImage, encoding_lut, load_image, read_dpi
from scanmass.mapping import MappedPart, map_cut, map_part
from scanmass.measurement import Hole, Measurement, Part, ScaleInfo, SourceInfo
from scanmass.options import MeasureOptions, check_dpi, check_encoding, check_max_pixels, resolve_options
from scanmass.scale.camera import PhotoScale
from scanmass.scale.homography import raised_outline_mm
from scanmass.scale.mat_scale import mat_scale
from scanmass.scale.planemap import PlaneMap
from scanmass.scale.sheet import sheet_scale
from scanmass.section import SectionProperties, fit_circle, ring_moments, ring_perimeter, section_properties
from scanmass.segment.lidgap import LidGap, lid_gap
from scanmass.segment.rings import PartRings, segment
from scanmass.segment.scanface import FaceResult, scan_face
from scanmass.segment.shadow import SHADOW_FRACTION, shadow_band_px, shadow_risk
from scanmass.segment.symmetry import edge_halo, reading_shift
from scanmass.segment.thin import EdgeQuantisation, WallResult, edge_quantisation, resolve_walls
from scanmass.segment.touching import NeckReport, TouchSplit, split_touching, touching_lobes
from scanmass.uncertainty import (
    THRESHOLD_FLOOR_PX,
    build_edge_model,
    combine,
    figure_weights,
    interpolation_residual_px,
    model_uncertainty,
    part_uncertainty,
    phase_correlation_px,
    ring_mean_offset_u,
    threshold_uncertainty,
)

__all__ = [
    "measure",
    "measure_loaded",
    "measure_image",
    "measure_photo",
    "measure_part",
    "photo_scale",
    "scale_method",
    "scan_plane_map",
    "MeasureOptions",
]

#: Fewest sampled maps from which the scale term is taken as their spread.
MIN_SCALE_SAMPLES = 8

_FIGURES_SCALE_POWER = {
    "area_mm2": 2,
    "ixx_mm4": 4,
    "iyy_mm4": 4,
    "ixy_mm4": 4,
    "i1_mm4": 4,
    "i2_mm4": 4,
    "polar_mm4": 4,
    "principal_angle_deg": 0,
}


def measure(
    source: str | os.PathLike | np.ndarray, options: MeasureOptions | None = None, **overrides: Any
) -> Measurement:
    """Measure every flat part in a scan.

    Parameters
    ----------
    source : path or ndarray
        An image file (JPEG, PNG, TIFF) or an array (uint8/uint16 sRGB-encoded, float
        linear light).
    options : MeasureOptions, optional
        The measuring options (default: ``MeasureOptions()``); see
        :class:`scanmass.options.MeasureOptions` for each field, its default and meaning.
    **overrides
        Fields of :class:`~scanmass.options.MeasureOptions` by name, applied over
        ``options``: ``dpi`` (required for arrays and files without a trustworthy DPI;
        72/96 are treated as unknown), ``dpi_rel_u``, ``level``, ``threshold``,
        ``min_area_mm2``, ``min_hole_area_mm2``, ``keep_cut``, ``max_pixels``, ``scale``
        (``auto``/``dpi``/``mat``/``sheet``), ``mat``, ``sheet``, ``printed_x_mm``,
        ``printed_y_mm``, ``lens``, and ``material``, ``thickness_mm``,
        ``thickness_u_mm``, ``materials_file``: with a material and a thickness every
        part gets mass figures; in a photo the thickness also lifts the measured face
        above the mat (parallax).

    Returns
    -------
    Measurement

    Raises
    ------
    OptionError
        An unknown option name (the message names the close match) or a bad value.
    ScanmassError
        A one-line, user-fixable problem (bad file, no scale, no part).

    Examples
    --------
    >>> import numpy as np
    >>> img = np.full((200, 300), 230, np.uint8); img[50:150, 100:200] = 20
    >>> m = measure(img, dpi=254)
    >>> round(m.parts[0].area_mm2, 1), [round(c, 2) for c in m.parts[0].centroid_mm]
    (100.0, [15.0, 10.0])
    >>> measure(img, MeasureOptions(dpi=254)).parts[0].area_mm2 == m.parts[0].area_mm2
    True
    """
    measurement, _ = measure_loaded(source, options, **overrides)
    return measurement


def measure_loaded(
    source: str | os.PathLike | np.ndarray, options: MeasureOptions | None = None, **overrides: Any
) -> tuple[Measurement, LoadedImage]:
    """Like :func:`measure`, also returning the loaded image (for overlays)."""
    opts = resolve_options(options, overrides)
    path = None if isinstance(source, np.ndarray) else os.fspath(source)
    opts.check(path)
    if opts.dpi is not None and path is not None and not opts.dpi_override:
        check_dpi_conflict(path, opts.dpi)
    image = load_image(source, dpi=opts.dpi, max_pixels=check_max_pixels(opts.max_pixels, path=path))
    image = apply_encoding(image, opts.encoding)
    method = scale_method(image, opts)
    if method == "dpi":
        result = measure_scan(image, opts)
    else:
        # a resolution in the file that was refused as implausible is said, not dropped
        refused_dpi = image.dpi is None and "came from the file" in (image.dpi_note or "")
        try:
            result = measure_photo(image, opts, method)
        except ScaleError as exc:
            if refused_dpi:
                raise ScaleError(f"{exc}; also: {image.dpi_note}", path=image.path) from None
            raise
        if refused_dpi:
            result.warnings.append(f"resolution stored in the file not used: {image.dpi_note}")
    if opts.material is not None and opts.thickness_mm is not None:  # check() refuses a material alone
        from scanmass.mass.plate import apply_mass  # mass works on Measurements only

        result = apply_mass(
            result, opts.material, opts.thickness_mm, thickness_u_mm=opts.thickness_u_mm, materials=opts.materials_file
        )
    return result, image


#: Largest relative difference between a given and a trustworthy stored DPI used without --dpi-override.
DPI_CONFLICT_REL = 0.01


def check_dpi_conflict(path: str, dpi: float | tuple[float, float]) -> None:
    """Refuse a given DPI that differs by more than 1 % from a trustworthy one stored in the file.

    Raises
    ------
    ScaleError
        Naming both values and the two ways out (leave out --dpi, or --dpi-override).
    """
    given = check_dpi(dpi, path=path)
    stored, _ = read_dpi(path)
    if stored is None:
        return
    diffs = [max(abs(g / s - 1.0) for g, s in zip(given, order)) for order in (stored, stored[::-1])]
    if min(diffs) > DPI_CONFLICT_REL:
        shown = "x".join(f"{v:g}" for v in dict.fromkeys(round(v, 2) for v in stored))
        want = "x".join(f"{v:g}" for v in dict.fromkeys(given))
        raise ScaleError(
            f"--dpi {want} differs by {100 * min(diffs):.0f} % from the {shown} dpi stored in the file; "
            f"leave out --dpi to use the file's, or pass --dpi-override to use {want} anyway",
            path=path,
        )


def apply_encoding(image: LoadedImage, encoding: str) -> LoadedImage:
    """The image with the tone curve the ``encoding`` option asks for (``auto``: as loaded)."""
    kind, gamma = check_encoding(encoding, path=image.path)
    if kind == "auto":
        return image
    lut, label = encoding_lut(kind, len(image.to_linear), gamma)
    return replace(image, to_linear=lut, encoding=label)


def untagged_reading_shift(image: LoadedImage, parts: list[PartRings]) -> float | None:
    """For a file without a colour profile: how far (px) a linear reading would move the edges.

    A blurred edge in linear light is point-symmetric about its midpoint, but a tone curve
    applied to a Gaussian-blurred edge mostly shifts and narrows it while keeping it
    nearly point-symmetric (rendered edges: quantiles within 0.04 sigma of symmetric for
    sRGB vs linear readings), so the edges alone cannot tell the encoding apart. What they
    do give is the size of the question: the median move of the 0.5 crossing across the
    largest part's clear edges between the sRGB and the linear reading
    (:func:`scanmass.segment.symmetry.reading_shift`). None for arrays, JPEG files (sRGB
    in practice) and files that carry a profile or tags.
    """
    if image.path is None or image.format == "JPEG" or "assumed" not in image.encoding or not parts:
        return None
    largest = max(parts, key=lambda p: p.area_px)
    linear, _ = encoding_lut("linear", len(image.to_linear))
    return reading_shift(image, largest, linear)


# ---------------------------------------------------------------------------------
# scale
# ---------------------------------------------------------------------------------


def scale_method(image: LoadedImage, options: MeasureOptions) -> str:
    """Which scale source to use: ``"dpi"``, ``"mat"`` or ``"sheet"``.

    An explicit ``dpi`` means a scan; a ``sheet`` means a plain sheet; ``scale="mat"``
    or a given ``mat`` layout means the mat; otherwise (``scale="auto"``) a file with
    a trustworthy DPI is a scan and anything else is looked for on a mat. The options
    are already checked (:meth:`~scanmass.options.MeasureOptions.check`).
    """
    if options.scale != "auto":
        return str(options.scale)
    if options.dpi is not None:
        return "dpi"
    if options.sheet is not None:
        return "sheet"
    if options.mat is not None:
        return "mat"
    return "dpi" if image.dpi is not None else "mat"


def scan_plane_map(image: LoadedImage, options: MeasureOptions) -> PlaneMap:
    """The scale of a flatbed scan from the given or stored DPI."""
    if image.dpi is None:
        raise ScaleError(
            f"no scale: {image.dpi_note or 'the file stores no resolution'}; give the scanner resolution with --dpi N (e.g. --dpi 600)",
            path=image.path,
        )
    return PlaneMap.from_dpi(image.dpi, height_px=image.height_px, rel_u=options.dpi_rel_u, note=image.dpi_note)


def photo_scale(image: LoadedImage, options: MeasureOptions, method: str) -> PhotoScale:
    """The :class:`~scanmass.scale.camera.PhotoScale` of a photo (``method`` "mat" or "sheet")."""
    if method == "sheet":
        return sheet_scale(
            image,
            str(options.sheet),
            lens=options.lens,
            thickness_mm=options.thickness_mm,
            thickness_u_mm=options.thickness_u_mm,
        )
    return mat_scale(
        image,
        mat=options.mat,
        printed_x_mm=options.printed_x_mm,
        printed_y_mm=options.printed_y_mm,
        lens=options.lens,
        thickness_mm=options.thickness_mm,
        thickness_u_mm=options.thickness_u_mm,
    )


# ---------------------------------------------------------------------------------
# measuring
# ---------------------------------------------------------------------------------


def measure_scan(image: LoadedImage, options: MeasureOptions) -> Measurement:
    """Measure a flatbed scan (scale from its DPI), with the checks a scan needs.

    A lid left open on a thick part (:func:`~scanmass.segment.lidgap.lid_gap`) is named:
    as the reason when no part can be measured (instead of the symptom, e.g. a part
    touching the image edge), else as a warning.

    Raises
    ------
    SegmentationError
        No part can be measured; with a lid gap the message names it and the fix.
    """
    try:
        result = measure_image(image, options, face_check=True)
    except SegmentationError:
        gap = lid_gap(image.grey, image.to_linear)
        if gap is None:
            raise
        mm_per_px = 25.4 / math.sqrt(image.dpi[0] * image.dpi[1]) if image.dpi else None
        raise SegmentationError(
            f"{_lid_gap_text(gap, mm_per_px)}, and no part can be told from it; close the lid, or lay a "
            "white sheet over the part(s), and scan again",
            path=image.path,
        ) from None
    gap = lid_gap(image.grey, image.to_linear)
    if gap is not None:
        result.warnings.insert(
            0,
            f"{_lid_gap_text(gap, result.scale.mm_per_px)}: parts near that edge may be merged with it or left out; "
            "close the lid, or lay a white sheet over the part(s)",
        )
        result.settings["lid_gap"] = {"side": gap.side, "border_ratio": gap.border_ratio, "sides": list(gap.sides)}
    return result


def _lid_gap_text(gap: LidGap, mm_per_px: float | None) -> str:
    depth = f"{gap.band_px * mm_per_px:.2g} mm" if mm_per_px else f"{gap.band_px:.0f} px"
    return (
        f"lid not closed? the background falls to {100 * gap.border_ratio:.0f} % of the lid's white along the "
        f"{gap.side} edge of the scan (a dark band {depth} deep)"
    )


def measure_image(
    image: LoadedImage,
    options: MeasureOptions,
    *,
    plane_map: PlaneMap | None = None,
    roi_px: np.ndarray | None = None,
    tone_known: bool = True,
    face_check: bool = False,
) -> Measurement:
    """Measure a loaded image with a given (or DPI-derived) plane map: segment, map, section, uncertainty.

    ``tone_known`` False (a phone photo read with ``--encoding auto``): the tone curve is
    not taken as exact sRGB, and every part gets the term ``tone`` (:func:`_tone_terms`).
    ``face_check`` (flatbed scans): each part's outline is checked for the lamp's shadow
    beside a thick part (:func:`~scanmass.segment.scanface.scan_face`) and replaced by the
    face on the glass where the two can be told apart.
    """
    if plane_map is None:
        plane_map = scan_plane_map(image, options)
    px_area_mm2 = plane_map.mm_per_px**2

    def run_segment(img: LoadedImage) -> Any:
        try:
            return segment(
                img,
                level=options.level,
                threshold=options.threshold,
                min_area_px=options.min_area_mm2 / px_area_mm2,
                min_hole_area_px=None if options.min_hole_area_mm2 is None else options.min_hole_area_mm2 / px_area_mm2,
                keep_cut=options.keep_cut,
                roi_px=roi_px,
            )
        except SegmentationError as exc:
            largest = getattr(exc, "largest_area_px", None)
            if largest is None:
                raise
            raise SegmentationError(
                f"no part found above the minimum area: the only object(s) found are at most "
                f"{largest * px_area_mm2:.3g} mm2, below --min-area {options.min_area_mm2:g} mm2; "
                f"lower it to measure them, e.g. --min-area {_below(largest * px_area_mm2)}",
                path=img.path,
            ) from None

    seg = run_segment(image)
    faces: dict[int, FaceResult] = {}
    if face_check and seg.polarity.startswith("dark"):
        seg.parts, faces = _scan_faces(image, seg.parts, options.min_hole_area_mm2 or options.min_area_mm2, px_area_mm2)
    necks = [touching_lobes(r.outer_px, list(r.holes_px)) for r in seg.parts]
    splits = _touch_splits(image, seg.parts, seg.polarity, necks)
    split_notes: list[dict[str, Any]] = []
    cuts: dict[int, tuple[float, Any]] = {}
    if options.split_touching:
        seg.parts, split_notes, cuts = _apply_splits(seg.parts, splits)
        splits = [None] * len(seg.parts)
        necks = [None] * len(seg.parts)
    encoding_note = None
    extra_warnings: list[str] = []
    shift_px = untagged_reading_shift(image, seg.parts) if options.encoding == "auto" else None
    limits = _edge_limits(image, seg.parts, options)
    parts = []
    warnings = extra_warnings + list(seg.warnings)
    for quant, walls in limits:
        mapped = map_part(walls.rings, plane_map)
        wall_u = _as_mapped_order(walls.rings, walls.wall_u_px, mapped, plane_map)
        part = measure_part(mapped, plane_map, quantisation=quant, wall_u_px=wall_u)
        if walls.rings.label in faces and faces[walls.rings.label].note != "soft edges":
            part = _with_face_term(part, faces[walls.rings.label], plane_map)
        if part.label in cuts:
            cut_u_px, cut_px = cuts[part.label]
            part = _with_cut_term(
                part, mapped, plane_map.to_mm(np.asarray(cut_px, float)), cut_u_px * plane_map.mm_per_px
            )
        parts.append(part)
        warnings += walls.warnings
    tone_note = None
    if parts:
        warnings += _tone_terms(image, [w.rings for _, w in limits], parts, plane_map.mm_per_px, tone_known)
        if not tone_known:
            tone_note = (
                "photo: the camera's tone curve is not taken as exact sRGB; each part's uncertainty includes "
                "half the move of its edges between an sRGB and a linear reading (term 'tone'); pass "
                "--encoding srgb to take it as exact"
            )
    if shift_px is not None and parts:
        big = max(parts, key=lambda q: q.area_mm2)
        change_mm2 = abs(shift_px) * plane_map.mm_per_px * big.perimeter_mm
        pct = 100 * change_mm2 / big.area_mm2
        encoding_note = (
            f"no colour profile: read as sRGB by convention; a linear reading would move the edges by "
            f"{shift_px:+.2f} px ({pct:.2g} % of part {big.label}'s area)"
        )
        if change_mm2 > big.area_u_mm2:
            warnings.insert(
                0,
                f"the file has no colour profile and is read as sRGB; if it holds linear light (a scanner's linear "
                f"or raw output) its edges move by {abs(shift_px):.2f} px ({pct:.2g} % of part {big.label}'s area, "
                "beyond the stated uncertainty): pass --encoding linear or --encoding srgb to decide",
            )
    touching = _face_warnings(faces, plane_map.mm_per_px)
    touching += _touching_warnings(seg.parts, splits, necks, plane_map.mm_per_px)
    touching += _split_warnings(split_notes, plane_map.mm_per_px)
    scale = ScaleInfo(
        method=plane_map.method,
        mm_per_px=plane_map.mm_per_px,
        mm_per_px_rel_u=plane_map.rel_u,
        dpi=None if plane_map.dpi is None else float(math.sqrt(plane_map.dpi[0] * plane_map.dpi[1])),
        note=plane_map.note,
        reprojection_rms_px=plane_map.reprojection_rms_px,
        reprojection_rms_mm=plane_map.reprojection_rms_mm,
        terms=dict(plane_map.terms),
        extra=plane_map.details(),
    )
    source = SourceInfo(
        path=image.path,
        sha256=image.sha256,
        width_px=image.width_px,
        height_px=image.height_px,
        format=image.format,
        mode=image.mode,
        bit_depth=image.bit_depth,
        orientation_applied=image.orientation,
    )
    cut_parts = []
    for c in seg.cut:
        cut = map_cut(c, plane_map)
        cut_parts.append({"bbox_mm": list(cut.bbox_mm), "area_px": cut.area_px})
    settings = {
        "level": options.level,
        "threshold": options.threshold,
        "min_area_mm2": options.min_area_mm2,
        "min_hole_area_mm2": options.min_hole_area_mm2,
        "keep_cut": options.keep_cut,
        "dpi_rel_u": options.dpi_rel_u,
        "encoding": image.encoding,
        "encoding_check": encoding_note,
        "tone_check": tone_note,
        "polarity": seg.polarity,
        "specks_ignored": seg.specks,
        "specks_largest_mm2": seg.speck_max_area_px * px_area_mm2,
    }
    if face_check:
        settings["scan_face"] = {
            "measured": "the face on the glass (the sharp edges)",
            "shadow_left_out": {str(k): f.shadow_px2 * px_area_mm2 for k, f in faces.items() if f.outer_px is not None},
            "shadow_not_separated": {
                str(k): f.shadow_px2 * px_area_mm2 for k, f in faces.items() if f.outer_px is None
            },
        }
    if options.split_touching:
        settings["split_touching"] = [
            {
                "parts": note["parts"],
                "evidence": note["evidence"],
                "cut_length_mm": note["cut_length_px"] * plane_map.mm_per_px,
                "cut_displacement_mm": note["displacement_px"] * plane_map.mm_per_px,
            }
            for note in split_notes
        ]
    filled = [p for p in parts if p.filled_holes]
    if filled:
        count = sum(p.filled_holes for p in filled)
        area = sum(p.filled_hole_area_mm2 for p in filled)
        limit = options.min_hole_area_mm2 if options.min_hole_area_mm2 is not None else options.min_area_mm2
        labels = ", ".join(str(p.label) for p in filled[:10]) + (", ..." if len(filled) > 10 else "")
        warnings.append(
            f"{count} hole(s) smaller than the minimum hole area ({limit:g} mm2) were filled and count as material "
            f"({area:.4g} mm2 in part(s) {labels}; see filled_holes); lower --min-hole-area to measure them"
        )
    return Measurement(
        source=source, scale=scale, parts=parts, warnings=warnings + touching, cut_parts=cut_parts, settings=settings
    )


#: Displacement (px, 1 sigma) of a face's edge against its shadow: its level is read against a
#: shadow that darkens towards the part (less light reaches the lid next to the wall).
FACE_EDGE_U_PX = 1.0


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
    for rings in parts:
        x0, y0 = (np.floor(rings.outer_px.min(axis=0)).astype(int) - 16).clip(0)
        x1, y1 = np.ceil(rings.outer_px.max(axis=0)).astype(int) + 17
        crop = lut[image.grey[y0 : min(y1, h_px), x0 : min(x1, w_px)]]
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


def _with_face_term(part: Part, face: FaceResult, plane_map: PlaneMap) -> Part:
    """The part with the term ``scan_shadow``.

    Separated: every figure's change when the face's edge against its shadow moves out by
    :data:`FACE_EDGE_U_PX`. Not separated: the shadow the outline may hold (its estimated
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
        before = _figure_values(section_properties(plane_map.to_mm(outer), holes))
        after = _figure_values(section_properties(plane_map.to_mm(moved), holes))
        term = {name: abs(after[name] - before[name]) for name in before}
        term["principal_angle_deg"] = abs(
            (after["principal_angle_deg"] - before["principal_angle_deg"] + 90.0) % 180.0 - 90.0
        )
        return _with_extra_term(part, "scan_shadow", term, [])
    shadow_mm2 = face.shadow_px2 * plane_map.mm_per_px**2
    share = min(1.0, shadow_mm2 / max(part.area_mm2, 1e-9))
    arm_mm = 0.5 * part.caliper_max_mm
    term = {
        "area_mm2": shadow_mm2,
        "centroid_x_mm": share * arm_mm,
        "centroid_y_mm": share * arm_mm,
        "perimeter_mm": share * part.perimeter_mm,
        "principal_angle_deg": 0.0,
    }
    for fig in ("ixx_mm4", "iyy_mm4", "ixy_mm4", "i1_mm4", "i2_mm4", "polar_mm4"):
        term[fig] = 2 * share * max(abs(getattr(part, fig)), abs(part.ixx_mm4) if fig == "ixy_mm4" else 0.0)
    return _with_shadow_term(part, term, 0.0, name="scan_shadow")


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
                lut[codes],
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
    before = _figure_values(section_properties(outer, holes))
    after = _figure_values(section_properties(moved, holes))
    term = {name: abs(after[name] - before[name]) for name in before}
    term["principal_angle_deg"] = abs(
        (after["principal_angle_deg"] - before["principal_angle_deg"] + 90.0) % 180.0 - 90.0
    )
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


def _below(area_mm2: float) -> str:
    """A round --min-area value below ``area_mm2``."""
    value = 10 ** math.floor(math.log10(max(area_mm2, 1e-9)))
    while value * 5 < area_mm2:
        value *= 5 if str(value).startswith("1") else 2
    return f"{value:g}"


def _edge_limits(
    image: LoadedImage, found: list[PartRings], options: MeasureOptions
) -> list[tuple[EdgeQuantisation | None, WallResult]]:
    """Per part: the quantisation steps at its edge, and its rings after the thin-wall step.

    With the local midpoint level (no manual threshold or level), thin walls and narrow
    slots are corrected by the integral rule (:mod:`scanmass.segment.thin`); a part without
    a thick region takes its level from the other parts of the image (same material).
    """
    quants = [edge_quantisation(image, r) for r in found]
    if options.threshold is not None or abs(options.level - 0.5) > 1e-9:
        return [
            (q, WallResult(r, [np.zeros(len(x)) for x in [r.outer_px, *r.holes_px]])) for q, r in zip(quants, found)
        ]
    results = [resolve_walls(image, r) for r in found]
    good = [
        q.level_ratio
        for q, w in zip(quants, results)
        if math.isfinite(q.level_ratio) and (w.corrected == 0 and w.unresolved == 0 or "thick" in w.level_source)
    ]
    if good:
        hint = float(np.median(good))
        for i, w in enumerate(results):
            if w.unresolved and "thick" not in w.level_source:
                results[i] = resolve_walls(image, found[i], level_ratio_hint=hint)
    return list(zip(quants, results))


def _as_mapped_order(
    rings: PartRings, per_vertex: list[np.ndarray], mapped: MappedPart, plane_map: PlaneMap
) -> list[np.ndarray]:
    """Per-vertex values of each ring in the vertex order :func:`map_part` gave the ring."""
    out = []
    for ring_px, values, ring_mm in zip(
        [rings.outer_px, *rings.holes_px], per_vertex, [mapped.outer_mm, *mapped.holes_mm]
    ):
        first = plane_map.to_mm(ring_px[:1])[0]
        same = np.allclose(first, ring_mm[0], rtol=0, atol=1e-9 * (1 + float(np.abs(first).max())))
        out.append(np.asarray(values) if same else np.asarray(values)[::-1])
    return out


def measure_photo(image: LoadedImage, options: MeasureOptions, method: str) -> Measurement:
    """Measure a photo on a mat or sheet: plane map, segmentation inside the clear area, checks.

    Raises
    ------
    ScaleError
        See :func:`~scanmass.scale.mat_scale.mat_scale` and
        :func:`~scanmass.scale.sheet.sheet_scale`; also when a part lies outside the
        region the detected markers surround.
    SegmentationError
        No whole part inside the clear area.
    """
    thickness_mm = options.thickness_mm  # checked by MeasureOptions.check
    scale = photo_scale(image, options, method)
    masked = _mask_outside(image, scale.roi_px)
    try:
        result = measure_image(
            masked, options, plane_map=scale.plane_map, roi_px=scale.roi_px, tone_known=options.encoding != "auto"
        )
    except PartCutError:
        where = "mat's clear area" if scale.plane_map.method == "mat" else "sheet's margin"
        raise SegmentationError(
            f"no whole part inside the {where}: the part crosses its edge or the photo's edge; move it inside "
            "the corner marks, away from markers and the photo's edge",
            path=image.path,
        ) from None
    _check_within_support(scale, result, image.path)
    warnings = list(scale.warnings)
    warnings += _unknown_thickness(scale, result, thickness_mm)
    warnings += _cast_shadows(image, scale, result, thickness_mm)
    result.warnings = warnings + list(result.warnings)
    result.settings.update({"scale": method})
    return result


def _mask_outside(image: LoadedImage, roi_px: np.ndarray) -> LoadedImage:
    """A copy of the image whose pixels outside the clear area show the paper's level.

    The segmenter reads the part's polarity and the background from the whole image;
    markers, print and the table around the mat would mislead it.
    """
    mask = np.zeros(image.grey.shape, np.uint8)
    cv2.fillPoly(mask, [np.round(roi_px).astype(np.int32)], 1)
    inner = cv2.erode(mask, np.ones((3, 3), np.uint8), iterations=2).astype(bool)
    band = inner & ~cv2.erode(mask, np.ones((3, 3), np.uint8), iterations=8).astype(bool)
    values = image.grey[band]
    level = np.median(values) if values.size else np.median(image.grey[inner])
    grey = image.grey.copy()
    grey[~mask.astype(bool)] = np.asarray(level, dtype=grey.dtype)
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
        term = _half_change(flat_outer, flat_holes, raised_outer, raised_holes)
        result.parts[n] = _with_extra_term(part, "thickness_unknown", term, raised_holes)
        worst_rel = max(worst_rel, term["area_mm2"] / max(part.area_mm2, 1e-12))
        worst_cen_mm = max(worst_cen_mm, math.hypot(term["centroid_x_mm"], term["centroid_y_mm"]))
    return [
        f"parallax (thickness not given): a part {plausible:g} mm thick would measure {200 * worst_rel:.2g} % smaller in area "
        f"and up to {2 * worst_cen_mm:.2g} mm off in centroid (parallax); the uncertainty includes half of it "
        "(term 'thickness_unknown'); give the thickness with --thickness MM, or --thickness 0 for a sheet-thin part"
    ]


def _half_change(
    outer_mm: np.ndarray, holes_mm: list[np.ndarray], new_outer_mm: np.ndarray, new_holes_mm: list[np.ndarray]
) -> dict[str, float]:
    """Half the change of every figure when a part's rings are replaced by other rings (an uncertainty term)."""
    before = _figure_values(section_properties(outer_mm, holes_mm, hull=False))
    after = _figure_values(section_properties(new_outer_mm, new_holes_mm, hull=False))
    term = {name: 0.5 * abs(after[name] - before[name]) for name in before}
    d_angle = (after["principal_angle_deg"] - before["principal_angle_deg"] + 90.0) % 180.0 - 90.0
    term["principal_angle_deg"] = 0.5 * abs(d_angle)
    return term


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
    of each figure is the term (the move itself at 2 sigma). Parts are replaced in
    ``parts``; the warnings are returned.
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
        term = _half_change(outer, holes, grown_outer, grown_holes)
        parts[n] = _with_extra_term(part, "tone", term, grown_holes if len(holes) == len(part.holes) else [])
        if halo.found:
            warnings.append(
                f"part {part.label}: its edges show sharpening halos ({100 * halo.overshoot:.2g} % of the contrast): "
                "sharpening or local contrast in the scanner's or camera's software moves edges by a fraction of a "
                f"pixel (up to about {move_mm:.2g} mm here; included in the uncertainty, term 'tone'); turn "
                "sharpening off and scan again for full accuracy"
            )
    return warnings


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


def _cast_shadows(image: LoadedImage, scale: PhotoScale, result: Measurement, thickness_mm: float | None) -> list[str]:
    """Flag parts whose edge band looks like darkened paper (a cast shadow colour cannot rule out).

    For each part the band a shadow can cover (:func:`~scanmass.segment.shadow.shadow_band_px`,
    for the given thickness or :data:`UNKNOWN_THICKNESS_MM`) is tested in colour against the
    local paper white (:func:`~scanmass.segment.shadow.shadow_risk`). Where more than
    :data:`~scanmass.segment.shadow.SHADOW_FRACTION` of it is shadow-like, the part may
    include its shadow: an uncertainty term ``cast_shadow`` of half the shadow-like area
    (and the matching centroid, moment and hole terms) and a warning with what to change.
    """
    if thickness_mm == 0 or not result.parts:
        return []
    colour = _photo_colour(image)
    if colour is None:
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
            share = min(1.0, foreign_mm2 / max(part.area_mm2, 1e-9))
            term = {
                "area_mm2": foreign_mm2,
                "centroid_x_mm": share * 0.5 * part.caliper_max_mm,
                "centroid_y_mm": share * 0.5 * part.caliper_max_mm,
                "perimeter_mm": share * part.perimeter_mm,
                "principal_angle_deg": 0.0,
            }
            for fig in ("ixx_mm4", "iyy_mm4", "ixy_mm4", "i1_mm4", "i2_mm4", "polar_mm4"):
                term[fig] = 2 * share * max(abs(getattr(part, fig)), abs(part.ixx_mm4) if fig == "ixy_mm4" else 0.0)
            part = _with_shadow_term(part, term, 0.5 * band_px * mm_per_px, name="reflection")
            result.parts[n] = part
            lost.append(f"{part.label} ({foreign_mm2:.3g} mm²)")
        if risk.fraction < SHADOW_FRACTION:
            continue
        like_mm2 = risk.shadow_like_px * mm_per_px**2
        share = min(1.0, like_mm2 / max(part.area_mm2, 1e-9))
        arm_mm = 0.5 * part.caliper_max_mm
        band_mm = band_px * mm_per_px
        term = {
            "area_mm2": 0.5 * like_mm2,
            "centroid_x_mm": 0.5 * share * arm_mm,
            "centroid_y_mm": 0.5 * share * arm_mm,
            "perimeter_mm": 0.5 * share * part.perimeter_mm,
            "principal_angle_deg": 0.0,
        }
        for fig in ("ixx_mm4", "iyy_mm4", "ixy_mm4", "i1_mm4", "i2_mm4", "polar_mm4"):
            term[fig] = share * max(abs(getattr(part, fig)), abs(part.ixx_mm4) if fig == "ixy_mm4" else 0.0)
        result.parts[n] = _with_shadow_term(part, term, 0.5 * band_mm)
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


def _with_shadow_term(part: Part, term: dict[str, float], hole_d_u_mm: float, name: str = "cast_shadow") -> Part:
    """The part with a term ``name``; a hole can be narrowed by a shadow (or a lost reflection) too."""
    holes = [replace(h, diameter_u_mm=combine(h.diameter_u_mm, hole_d_u_mm)) for h in part.holes]
    updated = replace(part, holes=holes)
    return _with_extra_term(updated, name, term, [])


#: Thickness (mm) whose parallax the uncertainty of a photo covers (as 2 sigma) when the
#: part's thickness is not given; common plate and sheet stock is 0.5-3 mm.
UNKNOWN_THICKNESS_MM = 3.0


def _with_extra_term(part: Part, name: str, term: dict[str, float], raised_holes: list[np.ndarray]) -> Part:
    """The part with one more named uncertainty term, combined into every total it touches."""
    totals = {
        "area_u_mm2": "area_mm2",
        "perimeter_u_mm": "perimeter_mm",
        "ixx_u_mm4": "ixx_mm4",
        "iyy_u_mm4": "iyy_mm4",
        "ixy_u_mm4": "ixy_mm4",
        "i1_u_mm4": "i1_mm4",
        "i2_u_mm4": "i2_mm4",
        "polar_u_mm4": "polar_mm4",
        "principal_angle_u_deg": "principal_angle_deg",
    }
    changes: dict[str, Any] = {key: combine(getattr(part, key), term[fig]) for key, fig in totals.items()}
    changes["centroid_u_mm"] = (
        combine(part.centroid_u_mm[0], term["centroid_x_mm"]),
        combine(part.centroid_u_mm[1], term["centroid_y_mm"]),
    )
    holes = []
    for hole, raised in zip(part.holes, raised_holes):
        fit = fit_circle(raised)
        a, qx, qy = ring_moments(raised)[:3]
        d_d = 0.5 * abs(fit.diameter_mm - hole.diameter_mm)
        d_a = 0.5 * abs(abs(float(a)) - hole.area_mm2)
        d_c = (0.5 * abs(float(qx / a) - hole.centroid_mm[0]), 0.5 * abs(float(qy / a) - hole.centroid_mm[1]))
        d_cc = (
            0.5 * abs(fit.centre_mm[0] - hole.circle_centre_mm[0]),
            0.5 * abs(fit.centre_mm[1] - hole.circle_centre_mm[1]),
        )
        holes.append(
            replace(
                hole,
                diameter_u_mm=combine(hole.diameter_u_mm, d_d),
                area_u_mm2=combine(hole.area_u_mm2, d_a),
                centroid_u_mm=(combine(hole.centroid_u_mm[0], d_c[0]), combine(hole.centroid_u_mm[1], d_c[1])),
                circle_centre_u_mm=(
                    combine(hole.circle_centre_u_mm[0], d_cc[0]),
                    combine(hole.circle_centre_u_mm[1], d_cc[1]),
                ),
            )
        )
    if len(holes) < len(part.holes):
        holes += part.holes[len(holes) :]
    terms = dict(part.uncertainty_terms)
    terms[name] = dict(term)
    return replace(part, holes=holes, uncertainty_terms=terms, **changes)


def _scale_terms(part: MappedPart, plane_map: PlaneMap, props: SectionProperties) -> dict[str, float]:
    """Scale-term standard uncertainties of the main figures (mm only: the sampled maps' rings come mapped)."""
    if len(part.sample_rings_mm) >= MIN_SCALE_SAMPLES:
        values: dict[str, list[float]] = {}
        for outer_mm, holes_mm in part.sample_rings_mm:
            sp = section_properties(outer_mm, list(holes_mm), hull=False)  # no hull figure is sampled
            for name, val in _figure_values(sp).items():
                values.setdefault(name, []).append(val)
        out = {k: float(np.std(v, ddof=1)) for k, v in values.items()}
        rel = plane_map.terms.get("printer", 0.0)
        for name, val in _figure_values(props).items():  # printer scale: not in the sampled maps
            p = _FIGURES_SCALE_POWER.get(name, 1)
            out[name] = combine(out[name], p * rel * abs(val))
        return out
    rel = plane_map.rel_u
    out = {}
    for name, val in _figure_values(props).items():
        p = _FIGURES_SCALE_POWER.get(name, 1)
        out[name] = p * rel * abs(val)
    return out


def _figure_values(sp: SectionProperties) -> dict[str, float]:
    return {
        "area_mm2": sp.area_mm2,
        "centroid_x_mm": sp.centroid_mm[0],
        "centroid_y_mm": sp.centroid_mm[1],
        "ixx_mm4": sp.ixx_mm4,
        "iyy_mm4": sp.iyy_mm4,
        "ixy_mm4": sp.ixy_mm4,
        "i1_mm4": sp.i1_mm4,
        "i2_mm4": sp.i2_mm4,
        "polar_mm4": sp.polar_mm4,
        "principal_angle_deg": sp.principal_angle_deg,
        "perimeter_mm": sp.perimeter_mm,
    }


def measure_part(
    part: MappedPart,
    plane_map: PlaneMap,
    *,
    quantisation: EdgeQuantisation | None = None,
    wall_u_px: list[np.ndarray] | None = None,
) -> Part:
    """Section properties and uncertainties of one mapped part (everything in mm).

    ``plane_map`` gives only the scale's relative uncertainty and its named terms;
    ``quantisation`` the grey-level steps at the part's edge and ``wall_u_px`` the
    per-vertex uncertainty of the thin-wall step (per ring, in the mapped vertex order),
    both for the model-error floor (:mod:`scanmass.uncertainty`).
    """
    outer_mm = part.outer_mm
    holes_mm = list(part.holes_mm)
    props = section_properties(outer_mm, holes_mm)

    # -- error model inputs -----------------------------------------------------------
    scale_outer = part.mm_per_px[0]
    scales = list(part.mm_per_px)
    sigma_n_px = [part.noise_rel / np.maximum(g, 0.05) for g in part.gradients_px]
    mm_px = float(np.median(scale_outer))
    blur = part.blur_px if math.isfinite(part.blur_px) else 1.0
    # threshold: each of the level surfaces' modes moves the boundary by sqrt(2 pi) sigma_blur
    # times its share of the normalised level; (db + df) / 2 of the contrast, per mode 1/6 of
    # the pointwise variance that level_rel_u states
    mode_px = math.sqrt(2 * math.pi) * blur * part.level_rel_u / (2.0 * math.sqrt(6.0))
    q = quantisation or EdgeQuantisation(0.0, 0.0)
    shared_px = math.hypot(THRESHOLD_FLOOR_PX, math.sqrt(2 * math.pi) * blur * q.level_rel)
    offset_px = math.hypot(math.sqrt(6.0) * mode_px, shared_px)  # the whole-boundary share, as before
    offset_mm = offset_px * mm_px
    model = build_edge_model(outer_mm, holes_mm, sigma_n_px, scales, offset_mm)
    weights = figure_weights(model, props.area_mm2, props.centroid_mm, props.ixx_mm4, props.iyy_mm4, props.ixy_mm4)
    edge_u, _ = part_uncertainty(model, weights)
    thresh_u = threshold_uncertainty(model, weights, mode_px * mm_px, shared_px * mm_px)
    # model-error floor: interpolation residual (phase-correlated) and quantisation beyond the noise
    resid_px = interpolation_residual_px(blur)
    q_px = [
        np.sqrt(max((q.edge_rel / math.sqrt(12.0)) ** 2 - part.noise_rel**2, 0.0)) / np.maximum(g, 0.05)
        for g in part.gradients_px
    ]
    q_model = build_edge_model(outer_mm, holes_mm, q_px, scales, 0.0)
    corr_phase = phase_correlation_px(model.normals)
    px_mm = model.corr_mm  # the model's 1 px correlation length in mm = local mm per px
    sigma_m_mm = np.sqrt(resid_px**2 * corr_phase * px_mm**2 + q_model.sigma_n_mm**2)
    wall_mm = None
    if wall_u_px is not None and any(np.any(np.asarray(w) > 0) for w in wall_u_px):
        wall_mm = build_edge_model(outer_mm, holes_mm, wall_u_px, scales, 0.0).sigma_n_mm
    model_u = model_uncertainty(model, weights, sigma_m_mm=sigma_m_mm, corr_m_mm=px_mm, wall_u_mm=wall_mm)
    scale_u = _scale_terms(part, plane_map, props)
    # perimeter: a uniform offset d changes it by 2 pi d per ring (turning number)
    n_rings = 1 + len(holes_mm)
    thresh_u["perimeter_mm"] = 2 * math.pi * offset_mm * abs(1 - len(holes_mm))
    edge_u["perimeter_mm"] = 0.0
    model_u["perimeter_mm"] = 0.0
    total = {
        k: combine(edge_u.get(k, 0.0), thresh_u.get(k, 0.0), model_u.get(k, 0.0), scale_u.get(k, 0.0)) for k in scale_u
    }
    terms = {
        "edge": edge_u,
        "threshold": thresh_u,
        "model": model_u,
        "scale": scale_u,
        "inputs": {
            "noise_rel": part.noise_rel,
            "blur_px": part.blur_px,
            "level_rel_u": part.level_rel_u,
            "offset_px": offset_px,
            "interpolation_residual_px": resid_px,
            "quantisation_rel": q.edge_rel,
            "contrast": part.contrast,
            "rings": n_rings,
        },
    }

    holes = []
    for k, ring_mm in enumerate(holes_mm, start=1):
        a, qx, qy = ring_moments(ring_mm)[:3]  # a hole's own area and centroid, whatever its orientation
        area_mm2, centroid_mm = abs(float(a)), (float(qx / a), float(qy / a))
        fit = fit_circle(ring_mm)
        r_edge, r_off, perim, c_edge = ring_mean_offset_u(model, k)
        d_u = combine(2 * r_edge, 2 * r_off, plane_map.rel_u * fit.diameter_mm)
        # the area moves by the perimeter times the mean normal displacement
        area_u = combine(perim * r_edge, perim * r_off, 2 * plane_map.rel_u * area_mm2)
        cen_u = (
            combine(c_edge, plane_map.rel_u * abs(centroid_mm[0])),
            combine(c_edge, plane_map.rel_u * abs(centroid_mm[1])),
        )
        circ_u = (
            combine(c_edge, plane_map.rel_u * abs(fit.centre_mm[0])),
            combine(c_edge, plane_map.rel_u * abs(fit.centre_mm[1])),
        )
        holes.append(
            Hole(
                label=k,
                area_mm2=area_mm2,
                area_u_mm2=area_u,
                centroid_mm=centroid_mm,
                centroid_u_mm=cen_u,
                perimeter_mm=ring_perimeter(ring_mm),
                circle_centre_mm=fit.centre_mm,
                circle_centre_u_mm=circ_u,
                diameter_mm=fit.diameter_mm,
                diameter_u_mm=d_u,
                roundness_mm=fit.roundness_mm,
                outline_mm=ring_mm,
            )
        )

    return Part(
        label=part.label,
        **{f.name: getattr(props, f.name) for f in fields(props)},  # the section properties, same names
        area_u_mm2=total["area_mm2"],
        perimeter_u_mm=total["perimeter_mm"],
        centroid_u_mm=(total["centroid_x_mm"], total["centroid_y_mm"]),
        ixx_u_mm4=total["ixx_mm4"],
        iyy_u_mm4=total["iyy_mm4"],
        ixy_u_mm4=total["ixy_mm4"],
        i1_u_mm4=total["i1_mm4"],
        i2_u_mm4=total["i2_mm4"],
        principal_angle_u_deg=total["principal_angle_deg"],
        polar_u_mm4=total["polar_mm4"],
        holes=holes,
        cut=part.cut,
        uncertainty_terms=terms,
        outline_mm=outer_mm,
        filled_holes=part.filled_holes,
        filled_hole_area_mm2=part.filled_hole_area_mm2,
    )
