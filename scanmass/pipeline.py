"""The measuring pipeline: image -> scale -> segment -> map -> section -> uncertainty.

:func:`measure` is the library's main entry point; the CLI's ``measure`` and ``batch``
commands and the demo call it.
"""

from __future__ import annotations

import math
import os
from dataclasses import fields
from typing import Any

import numpy as np

from scanmass.errors import ScaleError
from scanmass.load.decode import LoadedImage, load_image
from scanmass.measurement import Hole, Measurement, Part, ScaleInfo, SourceInfo
from scanmass.options import MeasureOptions, check_max_pixels, resolve_options
from scanmass.scale.planemap import PlaneMap
from scanmass.section import fit_circle, ring_moments, ring_perimeter, section_properties
from scanmass.segment.rings import PartRings, segment
from scanmass.uncertainty import (
    THRESHOLD_FLOOR_PX,
    build_edge_model,
    combine,
    figure_weights,
    part_uncertainty,
    ring_mean_offset_u,
)

__all__ = ["measure", "measure_loaded", "measure_image", "MeasureOptions"]

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
    image = load_image(source, dpi=opts.dpi, max_pixels=check_max_pixels(opts.max_pixels, path=path))
    from scanmass.scale.photo import measure_photo, scale_method

    if scale_method(image, opts) == "dpi":
        result = measure_image(image, opts)
    else:
        # a resolution in the file that was refused as implausible is said, not dropped
        refused_dpi = image.dpi is None and "came from the file" in (image.dpi_note or "")
        try:
            result = measure_photo(image, opts, thickness_mm=opts.thickness_mm, thickness_u_mm=opts.thickness_u_mm)
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


def scan_plane_map(image: LoadedImage, options: MeasureOptions) -> PlaneMap:
    """The scale of a flatbed scan from the given or stored DPI."""
    if image.dpi is None:
        raise ScaleError(
            f"no scale: {image.dpi_note or 'the file stores no resolution'}; give the scanner resolution with --dpi N (e.g. --dpi 600)",
            path=image.path,
        )
    return PlaneMap.from_dpi(image.dpi, height_px=image.height_px, rel_u=options.dpi_rel_u, note=image.dpi_note)


def measure_image(
    image: LoadedImage, options: MeasureOptions, *, plane_map: PlaneMap | None = None, roi_px: np.ndarray | None = None
) -> Measurement:
    """Measure a loaded image with a given (or DPI-derived) plane map."""
    if plane_map is None:
        plane_map = scan_plane_map(image, options)
    px_area_mm2 = plane_map.mm_per_px**2
    seg = segment(
        image,
        level=options.level,
        threshold=options.threshold,
        min_area_px=options.min_area_mm2 / px_area_mm2,
        min_hole_area_px=None if options.min_hole_area_mm2 is None else options.min_hole_area_mm2 / px_area_mm2,
        keep_cut=options.keep_cut,
        roi_px=roi_px,
    )
    parts = [measure_part(rings, plane_map) for rings in seg.parts]
    scale = ScaleInfo(
        method=plane_map.method,
        mm_per_px=plane_map.mm_per_px,
        mm_per_px_rel_u=plane_map.rel_u,
        dpi=None if plane_map.dpi is None else float(math.sqrt(plane_map.dpi[0] * plane_map.dpi[1])),
        note=plane_map.note,
        reprojection_rms_px=plane_map.reprojection_rms_px,
        reprojection_rms_mm=plane_map.reprojection_rms_mm,
        terms=dict(plane_map.terms),
        extra={
            **{k: v for k, v in plane_map.extra.items() if k not in ("matrix_samples", "undistort_samples")},
            "px_to_mm": plane_map.matrix.tolist(),
            "dpi_xy": list(plane_map.dpi) if plane_map.dpi else None,
        },
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
        ring_mm = plane_map.to_mm(c.outer_px)
        cut_parts.append(
            {
                "bbox_mm": [
                    float(ring_mm[:, 0].min()),
                    float(ring_mm[:, 1].min()),
                    float(ring_mm[:, 0].max()),
                    float(ring_mm[:, 1].max()),
                ],
                "area_px": c.area_px,
            }
        )
    settings = {
        "level": options.level,
        "threshold": options.threshold,
        "min_area_mm2": options.min_area_mm2,
        "min_hole_area_mm2": options.min_hole_area_mm2,
        "keep_cut": options.keep_cut,
        "dpi_rel_u": options.dpi_rel_u,
        "encoding": image.encoding,
        "polarity": seg.polarity,
        "specks_ignored": seg.specks,
    }
    warnings = list(seg.warnings)
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
        source=source, scale=scale, parts=parts, warnings=warnings, cut_parts=cut_parts, settings=settings
    )


def _scale_terms(plane_map: PlaneMap, outer_px, holes_px, props) -> dict[str, float]:
    """Scale-term standard uncertainties of the main figures."""
    samples = plane_map.extra.get("matrix_samples") if plane_map.extra else None
    if samples is not None and len(samples) >= 8:
        values: dict[str, list[float]] = {}
        hooks = plane_map.extra.get("undistort_samples") or [plane_map.undistort] * len(
            samples
        )  # e.g. a photo's parallax
        for matrix, hook in zip(samples, hooks):
            pm = PlaneMap(matrix=np.asarray(matrix), method=plane_map.method, rel_u=0.0, undistort=hook)
            sp = section_properties(pm.to_mm(outer_px), [pm.to_mm(h) for h in holes_px])
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


def _figure_values(sp) -> dict[str, float]:
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


def measure_part(rings: PartRings, plane_map: PlaneMap) -> Part:
    """Section properties and uncertainties of one segmented part."""
    outer_mm = plane_map.to_mm(rings.outer_px)
    holes_mm = [plane_map.to_mm(h) for h in rings.holes_px]
    props = section_properties(outer_mm, holes_mm)

    # -- error model inputs -----------------------------------------------------------
    scale_outer = plane_map.local_mm_per_px(rings.outer_px)
    scales = [scale_outer] + [plane_map.local_mm_per_px(h) for h in rings.holes_px]
    grads = [rings.gradient_px] + list(rings.hole_gradients_px)
    sigma_n_px = [rings.noise_rel / np.maximum(g, 0.05) for g in grads]
    offset_px = math.hypot(math.sqrt(2 * math.pi) * rings.blur_px * rings.level_rel_u, THRESHOLD_FLOOR_PX)
    offset_mm = offset_px * float(np.median(scale_outer))
    model = build_edge_model(outer_mm, holes_mm, sigma_n_px, scales, offset_mm)
    weights = figure_weights(model, props.area_mm2, props.centroid_mm, props.ixx_mm4, props.iyy_mm4, props.ixy_mm4)
    edge_u, thresh_u = part_uncertainty(model, weights)
    scale_u = _scale_terms(plane_map, rings.outer_px, rings.holes_px, props)
    # perimeter: a uniform offset d changes it by 2 pi d per ring (turning number)
    n_rings = 1 + len(holes_mm)
    thresh_u["perimeter_mm"] = 2 * math.pi * offset_mm * abs(1 - len(holes_mm))
    edge_u["perimeter_mm"] = 0.0
    total = {k: combine(edge_u.get(k, 0.0), thresh_u.get(k, 0.0), scale_u.get(k, 0.0)) for k in scale_u}
    terms = {
        "edge": edge_u,
        "threshold": thresh_u,
        "scale": scale_u,
        "inputs": {
            "noise_rel": rings.noise_rel,
            "blur_px": rings.blur_px,
            "level_rel_u": rings.level_rel_u,
            "offset_px": offset_px,
            "contrast": rings.contrast,
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
        cen_u = tuple(combine(c_edge, plane_map.rel_u * abs(c)) for c in centroid_mm)
        circ_u = tuple(combine(c_edge, plane_map.rel_u * abs(c)) for c in fit.centre_mm)
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
        label=rings.label,
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
        cut=rings.cut,
        uncertainty_terms=terms,
        outline_mm=outer_mm,
        filled_holes=rings.filled_holes,
        filled_hole_area_mm2=rings.filled_hole_area_px * plane_map.mm_per_px**2,
    )
