"""The measuring pipeline: image -> scale -> segment -> map -> section -> uncertainty.

:func:`measure` is the library's main entry point; the CLI's ``measure`` and ``batch``
commands and the demo call it.
"""

from __future__ import annotations

import contextlib
import math
import os
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass, replace
from typing import Any

import cv2
import numpy as np

from scanmass.errors import OptionError, PartCutError, ScaleError, SegmentationError
from scanmass.geometry import orient_ring, point_in_ring, ring_perimeter, vertex_normals
from scanmass.load.decode import LoadedImage, encoding_lut, load_image, read_dpi
from scanmass.mapping import MappedPart, map_cut, map_part, shoelace_area
from scanmass.measurement import Measurement, ScaleInfo, SourceInfo
from scanmass.options import MeasureOptions, check_dpi, check_encoding, check_max_pixels, resolve_options
from scanmass.pipeline.part_terms import (
    GRAIN_EDGE_U_PX,
    fragment_warnings,
    grain_face_warnings,
    lost_face_warnings,
    measure_part,
    with_fragment_term,
    with_grain_face_term,
    with_lost_face_term,
)
from scanmass.pipeline.photo_checks import (
    _check_bright_surrounds,
    _check_within_support,
    _hidden_holes,
    _mask_outside,
    _photo_colour,
    _unclear_edges,
    _unknown_thickness,
    without_parts,
)
from scanmass.pipeline.photo_colour import colour_faces
from scanmass.pipeline.photo_holes import _open_deep_holes
from scanmass.pipeline.photo_shadow_cut import _cut_cast_shadows
from scanmass.pipeline.photo_shadows import (
    _cast_shadows,
    _shadows_only,
    _white_parts,
    clipped_faces,
    loose_regions,
    white_walls_unread,
)
from scanmass.pipeline.photo_thickness import (
    RaisedRings,
    WallThickness,
    fused,
    liftable,
    measured_again,
    rim_thickness,
    unread_note,
    wall_thickness,
    with_wall_thickness,
)
from scanmass.pipeline.photo_walls import wall_sides, with_top_seen
from scanmass.pipeline.scan_checks import (
    _apply_splits,
    _face_warnings,
    _lid_gap_text,
    _scan_faces,
    _split_warnings,
    _tone_terms,
    _touch_splits,
    _touching_warnings,
    _with_cut_term,
    _with_face_term,
)
from scanmass.scale.camera import PhotoScale, ScaleBasis
from scanmass.scale.markertone import MarkerTone, marker_tone
from scanmass.scale.mat_scale import mat_scale_basis
from scanmass.scale.planemap import PlaneMap
from scanmass.scale.sheet import sheet_scale_basis
from scanmass.section import escaping_holes
from scanmass.segment.brightface import GrainFace, LostFace, recover_grain_faces, recover_lost_faces
from scanmass.segment.closedfeat import measure_closed
from scanmass.segment.fragments import Fragment, find_fragments
from scanmass.segment.lidgap import lid_gap
from scanmass.segment.rings import PartRings, segment
from scanmass.segment.scanface import FaceResult
from scanmass.segment.symmetry import reading_shift
from scanmass.segment.thin import (
    EdgeQuantisation,
    WallResult,
    closed_slots,
    edge_quantisation,
    resolve_walls,
)
from scanmass.segment.touching import touching_lobes


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
    """Like :func:`measure`, also returning the loaded image (for overlays).

    The linear algebra runs on one BLAS thread (:func:`one_blas_thread`).
    """
    with one_blas_thread():
        return _measure_loaded(source, options, **overrides)


def one_blas_thread() -> contextlib.AbstractContextManager[Any]:
    """A context in which numpy's BLAS/LAPACK use one thread (threadpoolctl), restored on exit.

    The least-squares fits and QR factorisations here are tall and narrow (thousands of
    rows, six columns): a second BLAS thread gains nothing on them, and on a loaded
    machine (other processes, or ``batch``'s workers, each with its own BLAS threads) the
    threads' hand-offs cost more than the work (issue 16: a warm measure 1.70 s with the
    default two threads, 1.18 s with one, under a load average of 2.5). The figures are
    the same either way (``benchmarks/dump_results.py``: 58 result documents identical).
    """
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:  # not installed: the default threads, the same figures
        return contextlib.nullcontext()
    return threadpool_limits(limits=1, user_api="blas")


def _measure_loaded(
    source: str | os.PathLike | np.ndarray, options: MeasureOptions | None = None, **overrides: Any
) -> tuple[Measurement, LoadedImage]:
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
    return photo_scale_basis(image, options, method).with_thickness(options.thickness_mm, options.thickness_u_mm)


def photo_scale_basis(image: LoadedImage, options: MeasureOptions, method: str) -> ScaleBasis:
    """:func:`photo_scale` before the thickness (``options.thickness_mm`` is not read)."""
    if method == "sheet":
        return sheet_scale_basis(image, str(options.sheet), lens=options.lens)
    return mat_scale_basis(
        image,
        mat=options.mat,
        printed_x_mm=options.printed_x_mm,
        printed_y_mm=options.printed_y_mm,
        lens=options.lens,
    )


@dataclass(frozen=True)
class _PhotoBasis:
    """What a photo's measurement at any thickness starts from: the scale before the thickness, the
    markers' tone curve and the image masked outside the clear area (none of them reads the thickness)."""

    scale: ScaleBasis
    tone: MarkerTone | None
    masked: LoadedImage


def _photo_basis(image: LoadedImage, options: MeasureOptions, method: str) -> _PhotoBasis:
    """The :class:`_PhotoBasis` of a photo."""
    basis = photo_scale_basis(image, options, method)
    # the tone reads the markers through the plane map's matrix and lens only, the mask the clear area only
    scale = basis.with_thickness(None)
    tone = marker_tone(image, scale) if options.encoding == "auto" else None
    return _PhotoBasis(basis, tone, _mask_outside(image, scale.roi_px))


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


def _holes_escape(mapped: MappedPart) -> bool:
    """Whether a hole of the mapped part, on the plane map or any sampled map, reaches past its outer ring."""
    sets = [(mapped.outer_mm, mapped.holes_mm), *mapped.sample_rings_mm]
    return any(escaping_holes(outer, list(holes)) for outer, holes in sets)


def _left_out_note(mapped: MappedPart) -> str:
    """Which region was left out for a hole past its outline: its size and place (mm)."""
    outer = np.asarray(mapped.outer_mm, float)
    centre = outer.mean(axis=0)
    return (
        f"a region of {abs(shoelace_area(outer)):.3g} mm2 near ({centre[0]:.1f}, {centre[1]:.1f}) mm whose hole, "
        "mapped onto the mat, reaches outside its outline"
    )


def measure_image(
    image: LoadedImage,
    options: MeasureOptions,
    *,
    plane_map: PlaneMap | None = None,
    roi_px: np.ndarray | None = None,
    tone_known: bool = True,
    face_check: bool = False,
    tone: MarkerTone | None = None,
    tone_photo: np.ndarray | None = None,
    colour: np.ndarray | None = None,
) -> Measurement:
    """Measure a loaded image with a given (or DPI-derived) plane map: segment, map, section, uncertainty.

    ``tone_known`` False (a phone photo read with ``--encoding auto``): the tone curve is
    not taken as exact sRGB, and every part gets the term ``tone`` (:func:`_tone_terms`).
    ``face_check`` (flatbed scans): each part's outline is checked for the lamp's shadow
    beside a thick part (:func:`~scanmass.segment.scanface.scan_face`) and replaced by the
    face on the glass where the two can be told apart.
    ``tone`` (photos on the mat): the tone curve the mat's printed markers show
    (:func:`~scanmass.scale.markertone.marker_tone`); each dark part's rings are moved to
    where its edge's half-way level in linear light lies (:func:`_tone_shifted`), except
    where the image differs from ``tone_photo`` (the photo's grey plane before a check
    painted a cut or a hole into it: painted edges are mixed in linear light already).
    ``colour`` (photos): the colour planes, which tell a contact shade from a lamp's tinted penumbra.
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
                paper_at_edge=roi_px is not None,  # photos: a soft contact shadow beside dark parts
                colour=colour,  # ... told from a lamp's tinted shade
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
    grain_faces: list[GrainFace] = []
    if roi_px is not None and seg.polarity.startswith("dark"):  # photos: a face's lit part as bright as the paper
        grain_image, grain_faces = recover_grain_faces(image, seg.parts, roi_px)
        if grain_faces:
            try:
                again_seg = run_segment(grain_image)
            except SegmentationError:
                grain_faces = []
            else:
                image, seg = grain_image, again_seg
    lost_faces: list[LostFace] = []
    if roi_px is not None and seg.polarity.startswith("dark"):  # photos: a mirroring face's lit sectors
        seg.parts, lost_faces = recover_lost_faces(
            image, seg.parts, roi_px, min_hole_px=(options.min_hole_area_mm2 or options.min_area_mm2) / px_area_mm2
        )
    pieces: dict[int, list[PartRings]] = {}
    fragments: list[Fragment] = []
    if roi_px is not None and len(seg.parts) > 1:  # photos: a grainy face found in pieces
        fragments = find_fragments(image.grey, np.asarray(image.to_linear, np.float32), seg.parts, roi_px)
        merged = {f.label: f.into for f in fragments}
        for r in seg.parts:
            if r.label in merged:
                pieces.setdefault(merged[r.label], []).append(r)
        seg.parts = [r for r in seg.parts if r.label not in merged]
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
    own_levels = {label for label, face in faces.items() if face.local_levels}
    limits = _edge_limits(image, seg.parts, options, closed=roi_px is None, own_levels=own_levels)
    parts = []
    warnings = extra_warnings + list(seg.warnings)
    as_found = [w.rings for _, w in limits]  # the tone and halo checks read the edges where they were found
    if tone is not None and seg.polarity.startswith("dark"):
        painted = None
        if tone_photo is not None and tone_photo.shape == image.grey.shape:
            changed = (image.grey != tone_photo).astype(np.uint8)
            painted = cv2.dilate(changed, np.ones((3, 3), np.uint8)).astype(bool) if changed.any() else None
        limits = [
            (quant, replace(walls, rings=_tone_shifted(image, walls.rings, tone, painted))) for quant, walls in limits
        ]
    left_out: list[str] = []
    for quant, walls in limits:
        mapped = map_part(walls.rings, plane_map)
        if _holes_escape(mapped):
            left_out.append(_left_out_note(mapped))
            continue
        wall_u = _as_mapped_order(walls.rings, walls.wall_u_px, mapped, plane_map)
        resid = None
        if quant is not None and len(quant.residual_px) == len(walls.wall_u_px):
            # on thin walls the wall term holds what the straight-edge model misses; the
            # shared residual (corners) joins the wall term, which is taken as shared too
            resid = [np.where(np.asarray(w) > 0, 0.0, r) for r, w in zip(quant.residual_px, walls.wall_u_px)]
            resid = _as_mapped_order(walls.rings, resid, mapped, plane_map)
            corner = [
                np.hypot(w, np.where(np.asarray(w) > 0, 0.0, c))
                for c, w in zip(quant.residual_shared_px, walls.wall_u_px)
            ]
            wall_u = _as_mapped_order(walls.rings, corner, mapped, plane_map)
        closed_mm = None
        extra_mm: list[tuple[np.ndarray, float]] = []
        extra_perimeter_mm = extra_perimeter_u_mm = 0.0
        if len(walls.closed_px):
            closed_px, extra_mm, (extra_perimeter_mm, extra_perimeter_u_mm) = _closed_measured(walls, plane_map)
            closed_mm = np.column_stack([plane_map.to_mm(closed_px[:, :2]), closed_px[:, 2] * plane_map.mm_per_px**2])
        own_pieces = pieces.get(walls.rings.label, [])
        for piece in own_pieces:  # a fragment's material joins the piece it was found beside
            piece_mm = plane_map.to_mm(np.asarray(piece.outer_px, float))
            extra_mm += [(piece_mm, 1.0)] + [(plane_map.to_mm(np.asarray(h, float)), -1.0) for h in piece.holes_px]
            extra_perimeter_mm += ring_perimeter(piece_mm) + sum(
                ring_perimeter(plane_map.to_mm(np.asarray(h, float))) for h in piece.holes_px
            )
        part = measure_part(
            mapped, plane_map, quantisation=quant, wall_u_px=wall_u, residual_px=resid, closed_mm=closed_mm,
            extra_mm=extra_mm or None, extra_perimeter_mm=extra_perimeter_mm, extra_perimeter_u_mm=extra_perimeter_u_mm,
        )  # fmt: skip
        grain = [f for f in grain_faces if point_in_ring(np.asarray(f.centre_px), walls.rings.outer_px)]
        if grain:
            part = with_grain_face_term(part, sum(f.edge_px for f in grain) * GRAIN_EDGE_U_PX * px_area_mm2)
        lost_px = sum(f.area_px for f in lost_faces if f.label == walls.rings.label)
        if lost_px > 0:
            part = with_lost_face_term(part, lost_px * px_area_mm2)
        if own_pieces:
            pieces_mm = [plane_map.to_mm(np.asarray(q.outer_px, float)) for q in own_pieces]
            part = with_fragment_term(part, mapped, pieces_mm)
            part = replace(part, pieces_mm=[orient_ring(r, ccw=True) for r in pieces_mm])  # drawn, not measured again
        if walls.rings.label in faces and faces[walls.rings.label].note != "soft edges":
            part = _with_face_term(part, faces[walls.rings.label], plane_map)
        if part.label in cuts:
            cut_u_px, cut_px = cuts[part.label]
            part = _with_cut_term(
                part, mapped, plane_map.to_mm(np.asarray(cut_px, float)), cut_u_px * plane_map.mm_per_px
            )
        parts.append(part)
        warnings += walls.warnings
    if left_out:
        # a region whose hole lies past its own outline is a piece of a part not found whole; the
        # other pieces of that part are reported as parts of their own (dev-soft-brass-t25: the
        # pale cam's wall and shadow, -99 %), so nothing of the photo is trusted: refuse it
        raise SegmentationError(
            "a part was found only in pieces: a region has a hole that lies outside its own outline on the mat ("
            + "; ".join(left_out)
            + "), as the wall and shadow of a part brighter than the paper do; photograph the parts in diffuse "
            "light on a darker background",
            path=image.path,
        )
    tone_note = None
    if parts:
        warnings += _tone_terms(image, as_found, parts, plane_map.mm_per_px, tone_known)
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
    touching += lost_face_warnings(parts)
    touching += grain_face_warnings(parts)
    touching += fragment_warnings(fragments, parts, plane_map.mm_per_px)
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


def _tone_shifted(
    image: LoadedImage, rings: PartRings, tone: MarkerTone, painted: np.ndarray | None = None
) -> PartRings:
    """A dark part's rings moved to where its edges lie under the tone curve the mat's markers show.

    The rings run at the half-way level of the decoded levels; under a tone curve that is not
    the decoding's, that level lies off the edge, into the dark side, as on the markers' printed
    edges. By the markers' power law (:meth:`~scanmass.scale.markertone.MarkerTone.edge_share`)
    the edge lies at the share ``f`` of the way from the part's face (its median level 2 px or
    more inside its outline) to the paper; the rings move away from the material by the
    markers' offset times ``(f - 0.5) / (f_markers - 0.5)`` (the same lens and blur: the move
    of a level across a blurred step is proportional to the level's change). Vertices within a
    pixel of ``painted`` (photo px) stay: a painted edge is mixed in linear light (on the
    committed renders, the brass plates' deep holes opened by painting shrank 0.1 mm when moved).
    """
    outer = rings.outer_px
    x0, y0 = np.floor(outer.min(axis=0)).astype(int)
    x1, y1 = np.ceil(outer.max(axis=0)).astype(int) + 1
    x0, y0 = max(int(x0), 0), max(int(y0), 0)
    x1, y1 = min(int(x1), image.width_px), min(int(y1), image.height_px)
    if x1 - x0 < 3 or y1 - y0 < 3:
        return rings
    mask = np.zeros((y1 - y0, x1 - x0), np.uint8)
    cv2.fillPoly(mask, [np.round(outer - [x0, y0]).astype(np.int32)], 1)
    for hole in rings.holes_px:
        cv2.fillPoly(mask, [np.round(hole - [x0, y0]).astype(np.int32)], 0)
    face = cv2.erode(mask, np.ones((5, 5), np.uint8)).astype(bool)
    if np.count_nonzero(face) < 20:
        return rings
    level = float(np.median(image.to_linear[image.grey[y0:y1, x0:x1][face]]))
    move_px = tone.edge_move_px(level)
    if move_px == 0.0:
        return rings

    def moved(ring: np.ndarray) -> np.ndarray:
        step = np.full(len(ring), move_px)
        if painted is not None:
            col = np.clip(np.rint(ring[:, 0]), 0, painted.shape[1] - 1).astype(np.intp)
            row = np.clip(np.rint(ring[:, 1]), 0, painted.shape[0] - 1).astype(np.intp)
            step[painted[row, col]] = 0.0
        return ring + step[:, None] * vertex_normals(ring)  # away from the material (rings.segment's orientation)

    return replace(rings, outer_px=moved(outer), holes_px=[moved(h) for h in rings.holes_px])


def _below(area_mm2: float) -> str:
    """A round --min-area value below ``area_mm2``."""
    value = 10 ** math.floor(math.log10(max(area_mm2, 1e-9)))
    while value * 5 < area_mm2:
        value *= 5 if str(value).startswith("1") else 2
    return f"{value:g}"


def _edge_limits(
    image: LoadedImage,
    found: list[PartRings],
    options: MeasureOptions,
    *,
    closed: bool = True,
    own_levels: frozenset[int] | set[int] = frozenset(),
) -> list[tuple[EdgeQuantisation | None, WallResult]]:
    """Per part: the quantisation steps at its edge, and its rings after the thin-wall step.

    With the local midpoint level (no manual threshold or level), thin walls and narrow
    slots are corrected by the integral rule (:mod:`scanmass.segment.thin`); a part without
    a thick region takes its level from the other parts of the image (same material). With
    ``closed`` (scans: in a photo a shadow beside a part would look like a wall), slots and
    walls too narrow for any contour are looked for and the walls' ends get their windows.
    Parts in ``own_levels`` (labels) had their rings placed against local levels (a scan's
    face told from a shadow as dark as it): the integral rule, which reads the image's two
    levels, leaves them as they are.
    """
    quants = [edge_quantisation(image, r) for r in found]
    if options.threshold is not None or abs(options.level - 0.5) > 1e-9:
        return [(q, _as_found(r)) for q, r in zip(quants, found)]
    results = [_as_found(r) if r.label in own_levels else resolve_walls(image, r, ends=closed) for r in found]
    good = [
        q.level_ratio
        for q, w in zip(quants, results)
        if math.isfinite(q.level_ratio) and (w.corrected == 0 and w.unresolved == 0 or "thick" in w.level_source)
    ]
    if good:
        hint = float(np.median(good))
        for i, w in enumerate(results):
            if w.unresolved and "thick" not in w.level_source:
                results[i] = resolve_walls(image, found[i], level_ratio_hint=hint, ends=closed)
    for i, w in enumerate(results if closed else []):
        if found[i].label in own_levels:
            continue
        lacking, notes = closed_slots(image, w.rings, open_holes=w.unresolved_holes)
        if len(lacking):
            results[i] = replace(w, closed_px=lacking, warnings=w.warnings + notes)
    return list(zip(quants, results))


def _as_found(rings: PartRings) -> WallResult:
    """The rings as found: no thin-wall correction and no wall uncertainty."""
    return WallResult(rings, [np.zeros(len(x)) for x in [rings.outer_px, *rings.holes_px]])


def _closed_measured(
    walls: WallResult, plane_map: PlaneMap
) -> tuple[np.ndarray, list[tuple[np.ndarray, float]], tuple[float, float]]:
    """A part's closed slots and vanished walls measured (:mod:`scanmass.segment.closedfeat`).

    Returns the pixels for the error model's term (x_px, y_px, px^2: a measured feature's
    shares scaled to its area's 1-sigma, an unmeasured one's whole share), the measured
    features' rings in mm with their signs, and the perimeter they add with its 1-sigma (mm).
    """
    rings = walls.rings
    sigma = float(rings.blur_px) if math.isfinite(rings.blur_px) and rings.blur_px > 0 else 1.0
    level_u = float(rings.level_rel_u) if math.isfinite(rings.level_rel_u) else 0.0
    noise = float(rings.noise_rel) if math.isfinite(rings.noise_rel) else 0.0
    features = measure_closed(
        walls.closed_px, [rings.outer_px, *rings.holes_px], blur_px=sigma, away_px=2.0 * sigma + 1.0,
        level_rel_u=level_u, noise_rel=noise,
    )  # fmt: skip
    pixels = walls.closed_px[:, :3].copy()
    extra: list[tuple[np.ndarray, float]] = []
    perimeter_px = perimeter_u_px = 0.0
    for f in features:
        sel = walls.closed_px[:, 3] == f.feature_id
        share = float(pixels[sel, 2].sum())
        pixels[sel, 2] *= f.area_u_px / max(share, 1e-12)
        extra += [(plane_map.to_mm(r), sgn) for r, sgn in f.rings_px]
        perimeter_px += f.perimeter_change_px
        perimeter_u_px = math.hypot(perimeter_u_px, f.perimeter_u_px)
    return pixels, extra, (perimeter_px * plane_map.mm_per_px, perimeter_u_px * plane_map.mm_per_px)


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
    # the colour planes are decoded beside the scale and the segmentation (libjpeg and numpy's
    # comparisons release the GIL); the checks below wait for them
    with ThreadPoolExecutor(max_workers=1) as pool:
        colour_job = pool.submit(_photo_colour, image)
        walls: list[WallThickness] = []
        basis = _photo_basis(image, options, method)  # found once: measured again, only the thickness differs
        result = _measure_photo(image, options, method, colour_job, walls, basis)
        if walls:

            def again(thickness_mm: float, thickness_u_mm: float) -> Measurement:
                opts = replace(options, thickness_mm=thickness_mm, thickness_u_mm=thickness_u_mm)
                return _measure_photo(image, opts, method, colour_job, [], basis)

            measured_again(result, walls, again)
        return result


def _measure_photo(
    image: LoadedImage,
    options: MeasureOptions,
    method: str,
    colour_job: Future[np.ndarray | None],
    walls_out: list[WallThickness],
    basis: _PhotoBasis,
) -> Measurement:
    """:func:`measure_photo` with its colour planes decoding in ``colour_job``, from ``basis``.

    Without a thickness, the parts lifted by the thickness read from their walls
    (:mod:`~scanmass.pipeline.photo_thickness`) are appended to ``walls_out``.
    """
    thickness_mm = options.thickness_mm  # checked by MeasureOptions.check
    scale = basis.scale.with_thickness(thickness_mm, options.thickness_u_mm)
    min_area_px = options.min_area_mm2 / scale.plane_map.mm_per_px**2

    def colour_measure(plane: LoadedImage) -> Measurement:
        return measure_image(plane, options, plane_map=scale.plane_map, roi_px=scale.roi_px)

    tone = basis.tone
    shift = tone if tone is not None and tone.applies else None
    masked = basis.masked
    colour = colour_job.result()  # decoded once for the segmentation's contact shades and the colour checks
    try:
        result = measure_image(
            masked, options, plane_map=scale.plane_map, roi_px=scale.roi_px, tone_known=options.encoding != "auto",
            tone=shift, tone_photo=masked.grey, colour=colour,
        )  # fmt: skip
    except PartCutError:
        where = "mat's clear area" if scale.plane_map.method == "mat" else "sheet's margin"
        raise SegmentationError(
            f"no whole part inside the {where}: the part crosses its edge or the photo's edge; move it inside "
            "the corner marks, away from markers and the photo's edge",
            path=image.path,
        ) from None
    except SegmentationError:
        # a coloured face brighter than the paper is not found by its grey levels: by its colour
        coloured, notes = colour_faces(image, scale, None, colour, colour_measure, min_area_px, thickness_mm)
        if coloured is None:
            raise
        _check_within_support(scale, coloured, image.path)
        _check_bright_surrounds(image, scale, coloured)
        coloured.warnings = (
            list(scale.warnings) + notes + _unknown_thickness(scale, coloured, thickness_mm) + list(coloured.warnings)
        )
        coloured.settings.update({"scale": method})
        return coloured
    _check_within_support(scale, result, image.path)
    top_seen, top_labels = wall_sides(image.grey.shape[:2], scale, result, thickness_mm)
    if top_seen is not None:
        # measured again with those parts' outlines taken as their top faces' edges all round
        seen_scale = replace(scale, plane_map=with_top_seen(scale.plane_map, top_seen))
        try:
            again = measure_image(
                masked, options, plane_map=seen_scale.plane_map, roi_px=scale.roi_px,
                tone_known=options.encoding != "auto", tone=shift, tone_photo=masked.grey, colour=colour,
            )  # fmt: skip
        except (SegmentationError, ScaleError, OptionError):
            again = None
        if again is not None and len(again.parts) == len(result.parts):
            scale, result = seen_scale, again
            result.settings["top_face_edge"] = {
                "parts": top_labels,
                "note": "outline taken on the top face's edge all round (the side wall facing the camera looked "
                "like the background; the parts' round rings fit a circle only so)",
            }
    last: dict[str, Any] = {}

    def probe_remeasure(img: LoadedImage, plane_map: PlaneMap) -> Measurement:
        return measure_image(
            img, options, plane_map=plane_map, roi_px=scale.roi_px, tone_known=options.encoding != "auto", tone=shift,
            tone_photo=masked.grey, colour=colour,
        )  # fmt: skip

    def remeasure(img: LoadedImage, plane_map: PlaneMap) -> Measurement:
        last["image"], last["plane_map"] = img, plane_map  # what the kept measurement was made on
        return probe_remeasure(img, plane_map)

    result, cut, cut_labels = _cut_cast_shadows(
        image, masked, scale, result, thickness_mm, colour, remeasure, options.thickness_u_mm, probe_remeasure
    )
    if cut:  # the cut's measurement was kept: the deep holes are opened on its image and plane map
        masked, cut_scale = last["image"], replace(scale, plane_map=last["plane_map"])
    else:
        cut_scale = scale
    _, _, result, deep = _open_deep_holes(image, masked, cut_scale, result, thickness_mm, remeasure, colour)
    # white parts on white paper found by their top faces where only shadows or lit faces were (photo_shadows)
    before_white = {p.label for p in result.parts}
    result, white, white_notes = _white_parts(image, masked, cut_scale, result, colour, thickness_mm, probe_remeasure)
    # the shadow cut's and deep holes' notes were built before: a region a white part replaced is no part of it
    gone = before_white - {p.label for p in result.parts}
    cut, deep = without_parts(cut, gone), without_parts(deep, gone)
    shadow_only = white_notes + _shadows_only(image, scale, result, colour, thickness_mm, white)
    coloured, colour_notes = colour_faces(image, scale, result, colour, colour_measure, min_area_px, thickness_mm)
    result = result if coloured is None else coloured
    _check_bright_surrounds(image, scale, result)
    warnings = list(scale.warnings) + shadow_only + cut + deep + colour_notes
    if tone is not None and tone.applies:
        warnings.insert(
            0,
            f"tone curve: the mat's printed marker edges lie {abs(tone.offset_px):.2f} px into the "
            f"{'ink' if tone.offset_px < 0 else 'paper'} at the half-way level of the photo decoded as sRGB (the "
            f"camera's curve is another); the dark parts' outlines were moved to where the levels raised to the power "
            f"{tone.gamma:.3f} (the correction that puts the markers' edges on their printed place) pass half-way; "
            "pass --encoding srgb to take the file as exact sRGB",
        )
    read = fused(wall_thickness(image, scale, result), rim_thickness(scale, result)) if thickness_mm is None else []
    read = white_walls_unread(read, white)
    raised = RaisedRings(scale)  # the rings raised by estimate + 1.5 sigma, made once for both
    walls = liftable(scale, result, read, raised)
    walls_out += walls
    warnings += _unknown_thickness(
        scale, result, thickness_mm, read={w.label for w in walls}, unread=unread_note(read, walls)
    )
    warnings += _cast_shadows(image, scale, result, thickness_mm, colour, cut_labels)
    warnings += _unclear_edges(image, scale, result)
    warnings += _hidden_holes(image, scale, result, thickness_mm)
    warnings += with_wall_thickness(scale, result, walls, raised)
    result, clipped = clipped_faces(image, scale, result, colour)
    warnings += clipped
    warnings += loose_regions(result)  # after every term: a region whose area sigma exceeds its area is named
    result.warnings = warnings + list(result.warnings)
    result.settings.update({"scale": method})
    if shift is not None:  # only when applied: the documents of photos read as sRGB stay as they were
        result.settings["marker_tone"] = {
            "offset_px": shift.offset_px,
            "offset_u_px": shift.offset_u_px,
            "sides": shift.sides,
            "gamma": shift.gamma,
            "applied": shift.applies,
        }
    return result
