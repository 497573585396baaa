"""Self-contained HTML reports of measurements, and a summary page for batches.

:func:`render_report` builds one HTML file for any number of results: for each image
its overlay (embedded as a ``data:`` PNG) or, without one, an inline SVG drawing of
the outlines; the scale source and its quality; a table per part with every figure,
its standard uncertainty and unit; the hole table; warnings; the cautions; and the
frames and sign conventions. :func:`render_summary` builds a batch summary page from
plain row dictionaries (counts, failures, plots, a sortable table).

The pages fetch nothing: styles and the small sorting script are inline, pictures
are ``data:`` URIs or inline SVG, and fonts are the reader's own. Templates are
rendered by jinja2 with autoescaping on; a print stylesheet lays them out on A4.
"""

from __future__ import annotations

import base64
import io
import math
import os
from collections.abc import Mapping, Sequence
from datetime import UTC, datetime
from pathlib import Path
from typing import Any
from xml.sax.saxutils import escape

import numpy as np

from scanmass import __version__
from scanmass.errors import ImageError, OptionError
from scanmass.measurement import CSV_COLUMNS, Measurement, Part
from scanmass.outputs.atomic import write_atomic
from scanmass.outputs.formatting import _finite, format_value
from scanmass.outputs.resultio import PathLike, as_measurement
from scanmass.readfile import read_regular

__all__ = [
    "CAUTIONS",
    "CONVENTIONS",
    "format_value",
    "render_report",
    "write_report",
    "render_summary",
    "write_summary",
    "outline_svg",
    "area_histogram_svg",
    "centroid_offset_svg",
]

#: Cautions printed in every report (our wording).
CAUTIONS = (
    "All figures come from an image of the part. Mass, weight and inertia assume a plate of uniform "
    "thickness and uniform density throughout; measure the thickness where it matters and check the "
    "material before relying on them.",
    "Section moduli, radii of gyration, centroids and masses here are geometric estimates, not a design "
    "check. Before using them for lifting points, rotating or balanced parts, or load-bearing sections, "
    "have the design checked by a qualified engineer under the applicable local codes and standards.",
    "Uncertainties are standard uncertainties (1 sigma, about 68 % coverage); for about 95 % coverage "
    "multiply by the coverage factor k = 2. They cover the effects modelled (edge noise, threshold bias, "
    "scale), not a bent or tilted part, dirt on the glass or a mis-set thickness.",
    "A part touching the image border has an incomplete outline and is left out or flagged as cut.",
)

#: Frames and sign conventions of every figure (DESIGN.md), printed in every report.
CONVENTIONS = (
    "Lengths in mm, areas mm², section moduli mm³, second moments mm⁴, mass g, angles in degrees counter-clockwise.",
    "Frames are right-handed with x to the right and y up. Scan frame: origin at the lower-left corner "
    "of the image; the pixel in column i and row j (rows counted from the top) has its centre at "
    "x = (i + 0.5) s, y = (H − j − 0.5) s, with s = 25.4 / dpi mm and H the image height in pixels. "
    "Mat frame: origin at the lower-left corner of the printed mat page.",
    "Second moments of area about centroidal axes parallel to x and y: Ixx = ∫(y − yc)² dA, "
    "Iyy = ∫(x − xc)² dA, and the product of area Ixy = ∫(x − xc)(y − yc) dA, which can be negative.",
    "Principal moments I1 ≥ I2; the principal angle is the direction of the I2 axis (the part's long "
    "direction), counter-clockwise from +x, in [0°, 180°). Polar moment J = Ixx + Iyy.",
    "Radii of gyration k = √(I / A). Elastic section moduli, one per extreme fibre: "
    "W top = Ixx / (ymax − yc), W bottom = Ixx / (yc − ymin), W right = Iyy / (xmax − xc), "
    "W left = Iyy / (xc − xmin).",
    "Each value's standard uncertainty (1 sigma) is given beside it; it is rounded to two significant "
    "digits and the value to the same decimal place.",
)

_OKABE_ITO = {  # Okabe & Ito (2008) colour-blind-safe palette
    "blue": "#0072B2",
    "vermillion": "#D55E00",
    "green": "#009E73",
    "purple": "#CC79A7",
    "orange": "#E69F00",
    "sky": "#56B4E9",
    "yellow": "#F0E442",
    "black": "#000000",
}


# ---------------------------------------------------------------------------
# Number formatting
# ---------------------------------------------------------------------------
def _plain(value: Any, digits: int = 6) -> str:
    return format_value(value, None, digits=digits)[0]


def _row(name: str, symbol: str, value: Any, u: Any, unit: str) -> dict[str, str]:
    text, u_text = format_value(value, u)
    return {"name": name, "symbol": symbol, "value": text, "u": u_text, "unit": unit}


# ---------------------------------------------------------------------------
# Per-image view model
# ---------------------------------------------------------------------------
def _part_rows(p: Part) -> list[dict[str, str]]:
    cu = tuple(p.centroid_u_mm) if p.centroid_u_mm is not None else (None, None)
    bbox = p.bbox_mm
    return [
        _row("Area", "A", p.area_mm2, p.area_u_mm2, "mm²"),
        _row("Perimeter (outline and holes)", "P", p.perimeter_mm, p.perimeter_u_mm, "mm"),
        _row("Centroid x", "xc", p.centroid_mm[0], cu[0], "mm"),
        _row("Centroid y", "yc", p.centroid_mm[1], cu[1], "mm"),
        _row("Second moment about the centroidal x axis", "Ixx", p.ixx_mm4, p.ixx_u_mm4, "mm⁴"),
        _row("Second moment about the centroidal y axis", "Iyy", p.iyy_mm4, p.iyy_u_mm4, "mm⁴"),
        _row("Product of area", "Ixy", p.ixy_mm4, p.ixy_u_mm4, "mm⁴"),
        _row("Principal moment, largest", "I1", p.i1_mm4, p.i1_u_mm4, "mm⁴"),
        _row("Principal moment, smallest", "I2", p.i2_mm4, p.i2_u_mm4, "mm⁴"),
        _row("Principal angle (I2 axis, from +x)", "θ", p.principal_angle_deg, p.principal_angle_u_deg, "°"),
        _row("Polar moment", "J", p.polar_mm4, p.polar_u_mm4, "mm⁴"),
        _row("Radius of gyration about x", "kx", p.gyration_x_mm, None, "mm"),
        _row("Radius of gyration about y", "ky", p.gyration_y_mm, None, "mm"),
        _row("Radius of gyration about the I1 axis", "k1", p.gyration_1_mm, None, "mm"),
        _row("Radius of gyration about the I2 axis", "k2", p.gyration_2_mm, None, "mm"),
        _row("Section modulus, top fibre", "W top", p.modulus_top_mm3, None, "mm³"),
        _row("Section modulus, bottom fibre", "W bottom", p.modulus_bottom_mm3, None, "mm³"),
        _row("Section modulus, right fibre", "W right", p.modulus_right_mm3, None, "mm³"),
        _row("Section modulus, left fibre", "W left", p.modulus_left_mm3, None, "mm³"),
        _row_any("Bounding box x min .. max", "", f"{_plain(bbox[0])} .. {_plain(bbox[2])}", None, "mm"),
        _row_any("Bounding box y min .. max", "", f"{_plain(bbox[1])} .. {_plain(bbox[3])}", None, "mm"),
        _row("Largest caliper width", "", p.caliper_max_mm, None, "mm"),
        _row("Smallest caliper width", "", p.caliper_min_mm, None, "mm"),
        _row("Convex hull area", "", p.convex_area_mm2, None, "mm²"),
    ]


def _row_any(name: str, symbol: str, value: Any, u: Any, unit: str) -> dict[str, str]:
    if isinstance(value, str):
        return {"name": name, "symbol": symbol, "value": value, "u": "", "unit": unit}
    return _row(name, symbol, value, u, unit)


def _mass_rows(p: Part) -> list[dict[str, str]]:
    if _finite(p.mass_g) is None:
        return []
    m = p.mass or {}
    rows = [_row("Mass", "m", p.mass_g, p.mass_u_g, "g")]
    specs = [
        ("Weight", "W", "weight_n", "weight_u_n", "N"),
        ("Volume", "V", "volume_mm3", "volume_u_mm3", "mm³"),
        ("Mass per area", "", "areal_mass_kg_m2", "areal_mass_u_kg_m2", "kg/m²"),
        ("Moment of inertia about the x axis through the centre of mass", "Ix", "ix_g_mm2", "ix_u_g_mm2", "g·mm²"),
        ("Moment of inertia about the y axis through the centre of mass", "Iy", "iy_g_mm2", "iy_u_g_mm2", "g·mm²"),
        ("Moment of inertia about the plate normal (z)", "Iz", "iz_g_mm2", "iz_u_g_mm2", "g·mm²"),
        ("Product of inertia", "Ixy", "ixy_g_mm2", "ixy_u_g_mm2", "g·mm²"),
    ]
    for name, sym, key, key_u, unit in specs:
        if key in m:
            rows.append(_row(name, sym, m.get(key), m.get(key_u), unit))
    com = m.get("centre_of_mass_mm")
    if isinstance(com, (list, tuple)) and len(com) == 3:
        rows.append(_row_any("Centre of mass (x, y, z)", "", ", ".join(_plain(c) for c in com), None, "mm"))
    return rows


_TERM_FIGURES = (
    ("area_mm2", "Area / mm²"),
    ("centroid_x_mm", "Centroid x / mm"),
    ("centroid_y_mm", "Centroid y / mm"),
    ("ixx_mm4", "Ixx / mm⁴"),
    ("iyy_mm4", "Iyy / mm⁴"),
    ("ixy_mm4", "Ixy / mm⁴"),
    ("principal_angle_deg", "Angle / °"),
)


def _term_rows(p: Part) -> tuple[list[str], list[dict[str, Any]]]:
    terms = {k: v for k, v in (p.uncertainty_terms or {}).items() if isinstance(v, Mapping) and k != "inputs"}
    names = [k for k, v in terms.items() if any(_finite(x) is not None for x in v.values())]
    if not names:
        return [], []
    totals = {
        "area_mm2": p.area_u_mm2,
        "centroid_x_mm": p.centroid_u_mm[0],
        "centroid_y_mm": p.centroid_u_mm[1],
        "ixx_mm4": p.ixx_u_mm4,
        "iyy_mm4": p.iyy_u_mm4,
        "ixy_mm4": p.ixy_u_mm4,
        "principal_angle_deg": p.principal_angle_u_deg,
    }
    rows = []
    for key, title in _TERM_FIGURES:
        if not any(key in terms[n] for n in names):
            continue
        rows.append(
            {
                "name": title,
                "terms": [format_value(terms[n].get(key), None, digits=2)[0] for n in names],
                "total": format_value(totals.get(key), None, digits=2)[0],
            }
        )
    return names, rows


def _hole_rows(p: Part) -> list[dict[str, str]]:
    rows = []
    for h in p.holes:
        cu = tuple(h.circle_centre_u_mm)
        gu = tuple(h.centroid_u_mm)

        def pm(v: Any, u: Any) -> str:
            text, u_text = format_value(v, u)
            return f"{text} ± {u_text}" if u_text else text

        rows.append(
            {
                "label": str(h.label),
                "d": pm(h.diameter_mm, h.diameter_u_mm),
                "cx": pm(h.circle_centre_mm[0], cu[0]),
                "cy": pm(h.circle_centre_mm[1], cu[1]),
                "roundness": "–" if _finite(h.roundness_mm) is None else f"{h.roundness_mm:.4f}",
                "area": pm(h.area_mm2, h.area_u_mm2),
                "centroid": ", ".join(format_value(v, u)[0] for v, u in zip(h.centroid_mm, gu)),
            }
        )
    return rows


_EXTRA_TITLES = {"dpi_xy": "Resolution x, y (dpi)", "mm_per_px": "Scale (mm/px)"}


def _find_extra(extra: Mapping[str, Any], *words: str) -> list[tuple[str, Any]]:
    return [(k, v) for k, v in extra.items() if any(w in k.lower() for w in words)]


def _describe(value: Any) -> str:
    if isinstance(value, bool):
        return "yes" if value else "no"
    if value is None:
        return "–"
    if isinstance(value, float):
        return _plain(value)
    if isinstance(value, Mapping):
        return "; ".join(f"{k.replace('_', ' ')}: {_describe(v)}" for k, v in value.items())
    if isinstance(value, (list, tuple)):
        return ", ".join(_describe(v) for v in value)
    return str(value)


def _scale_rows(m: Measurement) -> tuple[list[tuple[str, str]], list[tuple[str, str]], list[list[str]] | None]:
    s = m.scale
    rel = _finite(s.mm_per_px_rel_u)
    scale_text, u_text = format_value(s.mm_per_px, None if rel is None else rel * s.mm_per_px)
    rows = [
        (
            "Method",
            {"dpi": "scanner resolution (dpi)", "mat": "printed marker mat", "sheet": "paper sheet of known size"}.get(
                s.method, s.method
            ),
        ),
        ("Scale", f"{scale_text} ± {u_text} mm/px" if u_text else f"{scale_text} mm/px"),
        ("Relative uncertainty of the scale", "–" if rel is None else f"{rel * 100:.3g} %"),
    ]
    if _finite(s.dpi) is not None:
        rows.append(("Resolution", f"{_plain(s.dpi)} dpi"))
    if s.note:
        rows.append(("Note", s.note))
    extra = dict(s.extra or {})
    matrix = extra.pop("px_to_mm", None)
    if _finite(s.reprojection_rms_px) is not None or _finite(s.reprojection_rms_mm) is not None:
        parts = []
        if _finite(s.reprojection_rms_px) is not None:
            parts.append(f"{_plain(s.reprojection_rms_px, 3)} px")
        if _finite(s.reprojection_rms_mm) is not None:
            parts.append(f"{_plain(s.reprojection_rms_mm, 3)} mm")
        rows.append(("Reprojection RMS of the fitted map", " = ".join(parts)))
    else:
        rows.append(
            (
                "Reprojection RMS of the fitted map",
                "not applicable (no fitted map)" if s.method == "dpi" else "not recorded",
            )
        )
    shown: set[str] = set()
    for title, words, absent in (
        ("Printer scale check", ("printer",), "not done" if s.method != "dpi" else "not applicable (scan)"),
        ("Lens profile", ("lens", "undistort", "distortion"), "none (no lens correction)"),
        ("Thickness correction", ("thickness",), "none"),
    ):
        found = _find_extra(extra, *words)
        if found:
            for k, v in found:
                shown.add(k)
                rows.append((f"{title} ({k.replace('_', ' ')})", _describe(v)))
        else:
            rows.append((title, absent))
    for k, v in extra.items():
        if k not in shown:
            rows.append((_EXTRA_TITLES.get(k, k.replace("_", " ").capitalize()), _describe(v)))
    terms = [(k, f"{float(v) * 100:.3g} %") for k, v in (s.terms or {}).items() if _finite(v) is not None]
    mat = None
    try:
        arr = np.asarray(matrix, dtype=float)
        if arr.shape == (3, 3) and np.isfinite(arr).all():
            mat = [[f"{v:.6g}" for v in row] for row in arr]
    except (TypeError, ValueError):
        mat = None
    return rows, terms, mat


def _source_rows(m: Measurement, result_path: str | None) -> list[tuple[str, str]]:
    src = m.source
    rows = [("Image", src.path or "(not recorded)")]
    rows.append(("Size", f"{src.width_px} × {src.height_px} px"))
    detail = ", ".join(str(x) for x in (src.format, src.mode, f"{src.bit_depth} bit" if src.bit_depth else None) if x)
    if detail:
        rows.append(("Format", detail))
    if src.orientation_applied not in (None, 1):
        rows.append(("EXIF orientation applied", str(src.orientation_applied)))
    rows.append(("SHA-256", src.sha256 or "(not recorded)"))
    return rows


def _material_rows(m: Measurement) -> list[tuple[str, str]]:
    mat = m.material
    if not mat:
        return []
    rows = []
    name = mat.get("name") or mat.get("key")
    if name:
        rows.append(("Material", str(name)))
    d, du = format_value(mat.get("density_kg_m3"), mat.get("density_u_kg_m3"))
    if d != "–":
        rows.append(("Density", f"{d} ± {du} kg/m³" if du else f"{d} kg/m³"))
    t, tu = format_value(mat.get("thickness_mm"), mat.get("thickness_u_mm"))
    if t != "–":
        rows.append(("Sheet thickness", f"{t} ± {tu} mm" if tu else f"{t} mm (uncertainty not given)"))
    if mat.get("source"):
        rows.append(("Density source", str(mat["source"])))
    return rows


def _png_data_uri(data: bytes | PathLike, *, what: str) -> tuple[str, tuple[int, int]]:
    """A ``data:image/png`` URI of PNG bytes or a PNG file, checked to decode."""
    from PIL import Image, UnidentifiedImageError

    path = None
    if isinstance(data, (bytes, bytearray, memoryview)):
        raw = bytes(data)
    else:
        path = os.fspath(data)
        # regular files only, never past their size (a FIFO or /dev/zero is refused)
        raw = read_regular(
            path, error=ImageError, what=what, fix="pass the overlay PNG written by 'scanmass measure --overlay'"
        )
    if not raw.startswith(b"\x89PNG\r\n\x1a\n"):
        raise ImageError(
            f"{what} is not a PNG image; pass the overlay PNG written by 'scanmass measure --overlay'", path=path
        )
    try:
        with Image.open(io.BytesIO(raw)) as im:
            im.load()
            size = im.size
    except (UnidentifiedImageError, OSError, ValueError, SyntaxError) as exc:
        raise ImageError(f"{what} is a damaged PNG ({exc}); write the overlay again", path=path) from None
    return "data:image/png;base64," + base64.b64encode(raw).decode("ascii"), size


def _num(value: float) -> str:
    text = f"{value:.4f}".rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def _ring_d(ring: Any) -> str:
    arr = np.asarray(ring, dtype=float)
    if arr.ndim != 2 or arr.shape[1] != 2 or len(arr) < 3 or not np.isfinite(arr).all():
        return ""
    pts = " L ".join(f"{_num(x)} {_num(-y)}" for x, y in arr)
    return f"M {pts} Z"


def outline_svg(measurement: Measurement, *, max_width_px: int = 900) -> str:
    """An inline SVG drawing of a measurement's outlines (for reports without an overlay).

    Coordinates are the result frame in mm with y negated (SVG's y axis points down),
    so the drawing appears the right way up. Parts are filled with their holes cut
    out (``fill-rule="evenodd"``); a cross marks each centroid, a solid line the I2
    (long) principal axis and a dashed line the I1 axis; labels sit beside the
    centroids. Returns ``""`` when no part has an outline.
    """
    drawn = [p for p in measurement.parts if p.outline_mm is not None and _ring_d(p.outline_mm)]
    if not drawn:
        return ""
    allpts = np.vstack([np.asarray(p.outline_mm, dtype=float) for p in drawn])
    lo, hi = allpts.min(axis=0), allpts.max(axis=0)
    span = float(max(hi[0] - lo[0], hi[1] - lo[1], 1e-6))
    pad = 0.04 * span
    x0, y0 = lo[0] - pad, -hi[1] - pad
    w, h = (hi[0] - lo[0]) + 2 * pad, (hi[1] - lo[1]) + 2 * pad
    stroke = span / 400.0
    font = span / 30.0
    width_px = int(max_width_px)
    height_px = max(1, int(round(width_px * h / w)))
    out = [
        f'<svg xmlns="http://www.w3.org/2000/svg" class="outlines" viewBox="{_num(x0)} {_num(y0)} {_num(w)} {_num(h)}" '
        f'width="{width_px}" height="{height_px}" role="img" aria-label="Measured outlines">',
        f'<rect x="{_num(x0)}" y="{_num(y0)}" width="{_num(w)}" height="{_num(h)}" fill="#ffffff"/>',
    ]
    for p in drawn:
        d = " ".join(
            filter(
                None, [_ring_d(p.outline_mm)] + [_ring_d(hl.outline_mm) for hl in p.holes if hl.outline_mm is not None]
            )
        )
        out.append(
            f'<path d="{d}" fill="{_OKABE_ITO["sky"]}" fill-opacity="0.35" fill-rule="evenodd" '
            f'stroke="{_OKABE_ITO["blue"]}" stroke-width="{_num(stroke)}"><title>Part {int(p.label)}</title></path>'
        )
        for hl in p.holes:
            if hl.outline_mm is not None and _ring_d(hl.outline_mm):
                out.append(
                    f'<path d="{_ring_d(hl.outline_mm)}" fill="none" stroke="{_OKABE_ITO["vermillion"]}" stroke-width="{_num(stroke)}"/>'
                )
        cx, cy = (_finite(v) for v in p.centroid_mm)
        if cx is None or cy is None:
            continue
        size = _finite(p.caliper_max_mm) or span * 0.2
        arm = 0.04 * size
        out.append(
            f'<path d="M {_num(cx - arm)} {_num(-cy)} L {_num(cx + arm)} {_num(-cy)} M {_num(cx)} {_num(-cy - arm)} '
            f'L {_num(cx)} {_num(-cy + arm)}" stroke="{_OKABE_ITO["black"]}" stroke-width="{_num(1.5 * stroke)}"/>'
        )
        angle = _finite(p.principal_angle_deg)
        if angle is not None:
            for deg, half, dash in (
                (angle, 0.5 * size, ""),
                (
                    angle + 90.0,
                    0.5 * (_finite(p.caliper_min_mm) or size),
                    f' stroke-dasharray="{_num(4 * stroke)} {_num(3 * stroke)}"',
                ),
            ):
                ux, uy = math.cos(math.radians(deg)), math.sin(math.radians(deg))
                out.append(
                    f'<line x1="{_num(cx - half * ux)}" y1="{_num(-(cy - half * uy))}" x2="{_num(cx + half * ux)}" '
                    f'y2="{_num(-(cy + half * uy))}" stroke="{_OKABE_ITO["green"]}" stroke-width="{_num(stroke)}"{dash}/>'
                )
        out.append(
            f'<text x="{_num(cx + 1.5 * arm)}" y="{_num(-cy - 1.5 * arm)}" font-size="{_num(font)}" '
            f'font-family="sans-serif" fill="#000">{int(p.label)}</text>'
        )
    out.append("</svg>")
    return "\n".join(out)


def _overlay_for(overlays: Mapping[Any, Any] | None, index: int, result_path: str | None, m: Measurement) -> Any:
    if not overlays:
        return None
    for key in (index, result_path, m.source.path):
        if key is not None and key in overlays:
            return overlays[key]
    if result_path is not None:
        for k, v in overlays.items():
            if isinstance(k, (str, os.PathLike)) and os.path.abspath(os.fspath(k)) == os.path.abspath(result_path):
                return v
    return None


def _image_view(index: int, m: Measurement, result_path: str | None, overlay: Any) -> dict[str, Any]:
    name = (
        os.path.basename(m.source.path)
        if m.source.path
        else (os.path.basename(result_path) if result_path else f"image {index + 1}")
    )
    anchor = f"image-{index + 1}"
    view: dict[str, Any] = {"name": name, "anchor": anchor, "result_path": result_path, "outline_svg": ""}
    if overlay is not None:
        view["overlay_uri"], view["overlay_size"] = _png_data_uri(overlay, what=f"the overlay of {name}")
    else:
        view["overlay_uri"], view["overlay_size"] = None, None
        view["outline_svg"] = _markup(outline_svg(m))
    view["source_rows"] = _source_rows(m, result_path)
    view["scale_rows"], view["scale_terms"], view["matrix"] = _scale_rows(m)
    view["material_rows"] = _material_rows(m)
    view["warnings"] = [str(w) for w in m.warnings]
    view["cut_count"] = len(m.cut_parts or [])
    parts = []
    for p in m.parts:
        area, _ = format_value(p.area_mm2, p.area_u_mm2)
        cx, _ = format_value(p.centroid_mm[0], p.centroid_u_mm[0])
        cy, _ = format_value(p.centroid_mm[1], p.centroid_u_mm[1])
        names, term_rows = _term_rows(p)
        parts.append(
            {
                "label": int(p.label),
                "anchor": f"{anchor}-part-{int(p.label)}",
                "cut": bool(p.cut),
                "summary": {
                    "area": area,
                    "cx": cx,
                    "cy": cy,
                    "i1": format_value(p.i1_mm4, p.i1_u_mm4)[0],
                    "i2": format_value(p.i2_mm4, p.i2_u_mm4)[0],
                    "angle": format_value(p.principal_angle_deg, p.principal_angle_u_deg)[0],
                    "mass": format_value(p.mass_g, p.mass_u_g)[0] if _finite(p.mass_g) is not None else "–",
                },
                "rows": _part_rows(p),
                "mass_rows": _mass_rows(p),
                "term_names": names,
                "term_rows": term_rows,
                "hole_rows": _hole_rows(p),
            }
        )
    view["parts"] = parts
    return view


# ---------------------------------------------------------------------------
# Rendering
# ---------------------------------------------------------------------------
def _environment():
    import jinja2

    return jinja2.Environment(
        loader=jinja2.PackageLoader("scanmass.outputs", "templates"),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        trim_blocks=False,
        lstrip_blocks=False,
    )


def _markup(text: str):
    from markupsafe import Markup

    return Markup(text)  # only for SVG text built here from numbers and escaped labels


def _generated(generated_at: datetime | None) -> str:
    when = generated_at or datetime.now(UTC)
    if when.tzinfo is not None:
        when = when.astimezone(UTC)
    return when.strftime("%Y-%m-%d %H:%M UTC")


def render_report(
    results: Sequence[Measurement | PathLike],
    *,
    overlays: Mapping[Any, bytes | PathLike] | None = None,
    title: str = "scanmass measurement report",
    generated_at: datetime | None = None,
) -> str:
    """Render one self-contained HTML report of one or more measurements.

    Parameters
    ----------
    results : sequence of Measurement or path
        The measurements, or paths of their JSON result documents.
    overlays : mapping, optional
        Overlay pictures to embed, as PNG bytes or PNG file paths. A key is the
        result's position in ``results`` (0-based), the path given for it, or its
        source image path. Results without an overlay get an SVG drawing of their
        outlines.
    title : str, optional
        Heading and page title.
    generated_at : datetime, optional
        Time stamp printed in the header (default: now, UTC).

    Returns
    -------
    str
        The HTML document.

    Raises
    ------
    ResultFormatError
        A path is missing or is not a result document of a supported schema.
    ImageError
        An overlay is missing, not a PNG or damaged.
    OptionError
        ``results`` is empty.
    """
    if isinstance(results, (str, os.PathLike, Measurement)):
        results = [results]
    items = list(results)
    if not items:
        raise OptionError("no results given; pass one or more result JSON files written by 'scanmass measure --json'")
    images = []
    for index, item in enumerate(items):
        m, result_path = as_measurement(item)
        images.append(_image_view(index, m, result_path, _overlay_for(overlays, index, result_path, m)))
    template = _environment().get_template("report.html.j2")
    return template.render(
        title=title,
        version=__version__,
        generated=_generated(generated_at),
        images=images,
        total_parts=sum(len(im["parts"]) for im in images),
        cautions=CAUTIONS,
        conventions=CONVENTIONS,
    )


def write_report(
    results: Sequence[Measurement | PathLike],
    path: PathLike,
    *,
    overlays: Mapping[Any, bytes | PathLike] | None = None,
    title: str = "scanmass measurement report",
    generated_at: datetime | None = None,
) -> Path:
    """Render the report (see :func:`render_report`) and write it atomically to ``path``.

    The result files, their source images and overlay files are never overwritten.
    Returns the path written.
    """
    if isinstance(results, (str, os.PathLike, Measurement)):
        results = [results]
    items = list(results)
    html = render_report(items, overlays=overlays, title=title, generated_at=generated_at)
    guarded: list[Any] = [i for i in items if isinstance(i, (str, os.PathLike))]
    guarded += [v for v in (overlays or {}).values() if isinstance(v, (str, os.PathLike))]
    return write_atomic(path, html, inputs=guarded)


# ---------------------------------------------------------------------------
# Batch summary
# ---------------------------------------------------------------------------
_COLUMN_TITLES = {
    "file": "File",
    "part": "Part",
    "area_mm2": "Area / mm²",
    "area_u_mm2": "u(Area) / mm²",
    "centroid_x_mm": "xc / mm",
    "centroid_y_mm": "yc / mm",
    "centroid_x_u_mm": "u(xc) / mm",
    "centroid_y_u_mm": "u(yc) / mm",
    "perimeter_mm": "Perimeter / mm",
    "ixx_mm4": "Ixx / mm⁴",
    "iyy_mm4": "Iyy / mm⁴",
    "ixy_mm4": "Ixy / mm⁴",
    "ixx_u_mm4": "u(Ixx) / mm⁴",
    "iyy_u_mm4": "u(Iyy) / mm⁴",
    "ixy_u_mm4": "u(Ixy) / mm⁴",
    "i1_mm4": "I1 / mm⁴",
    "i2_mm4": "I2 / mm⁴",
    "principal_angle_deg": "Angle / °",
    "polar_mm4": "J / mm⁴",
    "modulus_top_mm3": "W top / mm³",
    "modulus_bottom_mm3": "W bottom / mm³",
    "modulus_right_mm3": "W right / mm³",
    "modulus_left_mm3": "W left / mm³",
    "bbox_xmin_mm": "x min / mm",
    "bbox_ymin_mm": "y min / mm",
    "bbox_xmax_mm": "x max / mm",
    "bbox_ymax_mm": "y max / mm",
    "caliper_max_mm": "Caliper max / mm",
    "caliper_min_mm": "Caliper min / mm",
    "convex_area_mm2": "Convex area / mm²",
    "holes": "Holes",
    "hole_diameters_mm": "Hole diameters / mm",
    "mass_g": "Mass / g",
    "mass_u_g": "u(Mass) / g",
}


def _column_title(key: str) -> str:
    return _COLUMN_TITLES.get(key, key.replace("_", " "))


def _failure_reason(f: Mapping[str, Any]) -> str:
    for key in ("reason", "error", "message"):
        if f.get(key):
            return str(f[key])
    return "(no reason recorded)"


def _axis_ticks(lo: float, hi: float, n: int = 5) -> list[float]:
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return [lo]
    raw = (hi - lo) / n
    mag = 10.0 ** math.floor(math.log10(raw))
    step = next(s * mag for s in (1, 2, 2.5, 5, 10) if s * mag >= raw)
    start = math.ceil(lo / step) * step
    ticks = []
    v = start
    while v <= hi + 1e-9 * step:
        ticks.append(round(v, 12))
        v += step
    return ticks


def _tick(v: float) -> str:
    return f"{v:.6g}"


def area_histogram_svg(areas_mm2: Sequence[float | None], *, width: int = 640, height: int = 300) -> tuple[str, int]:
    """Inline SVG histogram of part areas (missing and non-finite ones skipped); returns ``(svg, number_of_bins)``.

    Bin edges come from ``numpy.histogram_bin_edges(..., bins="auto")`` (the larger
    of the Sturges and Freedman-Diaconis bin counts), at most 40 bins.
    """
    a = np.asarray([v for v in areas_mm2 if _finite(v) is not None], dtype=float)
    if a.size == 0:
        return "", 0
    if np.ptp(a) == 0:
        edges = np.array([a[0] - 0.5, a[0] + 0.5]) if a[0] == 0 else np.array([a[0] * 0.995, a[0] * 1.005])
    else:
        edges = np.histogram_bin_edges(a, bins="auto")
        if len(edges) > 41:
            edges = np.histogram_bin_edges(a, bins=40)
    counts, edges = np.histogram(a, bins=edges)
    ml, mr, mt, mb = 56, 16, 14, 44
    pw, ph = width - ml - mr, height - mt - mb
    cmax = max(int(counts.max()), 1)
    x = lambda v: ml + (v - edges[0]) / (edges[-1] - edges[0]) * pw  # noqa: E731
    y = lambda c: mt + ph - c / cmax * ph  # noqa: E731
    out = [
        f'<svg xmlns="http://www.w3.org/2000/svg" class="plot area-histogram" viewBox="0 0 {width} {height}" width="{width}" height="{height}" role="img" aria-label="Histogram of part areas">'
    ]
    out.append(f'<rect x="0" y="0" width="{width}" height="{height}" fill="#fff"/>')
    for c, e0, e1 in zip(counts, edges[:-1], edges[1:]):
        if c == 0:
            continue
        x0, x1 = x(e0), x(e1)
        out.append(
            f'<rect class="bar" x="{x0:.2f}" y="{y(c):.2f}" width="{max(x1 - x0 - 1, 0.5):.2f}" height="{y(0) - y(c):.2f}" '
            f'fill="{_OKABE_ITO["blue"]}"><title>{escape(f"{_tick(e0)} to {_tick(e1)} mm²: {int(c)}")}</title></rect>'
        )
    out.append(f'<line x1="{ml}" y1="{mt + ph}" x2="{ml + pw}" y2="{mt + ph}" stroke="#000"/>')
    out.append(f'<line x1="{ml}" y1="{mt}" x2="{ml}" y2="{mt + ph}" stroke="#000"/>')
    for t in _axis_ticks(float(edges[0]), float(edges[-1])):
        out.append(f'<line x1="{x(t):.2f}" y1="{mt + ph}" x2="{x(t):.2f}" y2="{mt + ph + 4}" stroke="#000"/>')
        out.append(
            f'<text x="{x(t):.2f}" y="{mt + ph + 17}" font-size="11" text-anchor="middle" font-family="sans-serif">{_tick(t)}</text>'
        )
    for t in _axis_ticks(0.0, float(cmax), min(cmax, 5)):
        if abs(t - round(t)) > 1e-9:
            continue
        out.append(f'<line x1="{ml - 4}" y1="{y(t):.2f}" x2="{ml}" y2="{y(t):.2f}" stroke="#000"/>')
        out.append(
            f'<text x="{ml - 7}" y="{y(t) + 4:.2f}" font-size="11" text-anchor="end" font-family="sans-serif">{int(round(t))}</text>'
        )
    out.append(
        f'<text x="{ml + pw / 2:.1f}" y="{height - 6}" font-size="12" text-anchor="middle" font-family="sans-serif">Area / mm²</text>'
    )
    out.append(
        f'<text x="14" y="{mt + ph / 2:.1f}" font-size="12" text-anchor="middle" font-family="sans-serif" transform="rotate(-90 14 {mt + ph / 2:.1f})">Parts</text>'
    )
    out.append("</svg>")
    return "\n".join(out), int(len(counts))


def centroid_offset_svg(rows: Sequence[Mapping[str, Any]], *, size: int = 360) -> str:
    """Inline SVG scatter of centroid offsets from each part's bounding-box centre, mm."""
    pts = []
    for r in rows:
        keys = ("centroid_x_mm", "centroid_y_mm", "bbox_xmin_mm", "bbox_ymin_mm", "bbox_xmax_mm", "bbox_ymax_mm")
        vals = [v for v in (_finite(r.get(k)) for k in keys) if v is not None]
        if len(vals) < len(keys):
            continue
        cx, cy, x0, y0, x1, y1 = vals
        pts.append((cx - 0.5 * (x0 + x1), cy - 0.5 * (y0 + y1), f"{r.get('file', '')} part {r.get('part', '')}"))
    if not pts:
        return ""
    arr = np.asarray([(p[0], p[1]) for p in pts])
    lim = float(np.abs(arr).max()) * 1.1 or 1.0
    m = 48
    pw = size - 2 * m
    sx = lambda v: m + (v + lim) / (2 * lim) * pw  # noqa: E731
    sy = lambda v: m + (lim - v) / (2 * lim) * pw  # noqa: E731
    out = [
        f'<svg xmlns="http://www.w3.org/2000/svg" class="plot centroid-offsets" viewBox="0 0 {size} {size}" width="{size}" height="{size}" role="img" aria-label="Centroid offsets from bounding-box centres">'
    ]
    out.append(f'<rect x="0" y="0" width="{size}" height="{size}" fill="#fff"/>')
    out.append(f'<rect x="{m}" y="{m}" width="{pw}" height="{pw}" fill="none" stroke="#000"/>')
    out.append(f'<line x1="{sx(0):.2f}" y1="{m}" x2="{sx(0):.2f}" y2="{m + pw}" stroke="#999" stroke-dasharray="3 3"/>')
    out.append(f'<line x1="{m}" y1="{sy(0):.2f}" x2="{m + pw}" y2="{sy(0):.2f}" stroke="#999" stroke-dasharray="3 3"/>')
    for t in _axis_ticks(-lim, lim, 4):
        out.append(
            f'<text x="{sx(t):.2f}" y="{m + pw + 16}" font-size="11" text-anchor="middle" font-family="sans-serif">{_tick(t)}</text>'
        )
        out.append(
            f'<text x="{m - 6}" y="{sy(t) + 4:.2f}" font-size="11" text-anchor="end" font-family="sans-serif">{_tick(t)}</text>'
        )
    for dx, dy, label in pts:
        out.append(
            f'<circle class="point" cx="{sx(dx):.2f}" cy="{sy(dy):.2f}" r="3.5" fill="{_OKABE_ITO["vermillion"]}" fill-opacity="0.8">'
            f"<title>{escape(f'{label}: dx {dx:.4g} mm, dy {dy:.4g} mm')}</title></circle>"
        )
    out.append(
        f'<text x="{size / 2:.1f}" y="{size - 8}" font-size="12" text-anchor="middle" font-family="sans-serif">x offset / mm</text>'
    )
    out.append(
        f'<text x="14" y="{size / 2:.1f}" font-size="12" text-anchor="middle" font-family="sans-serif" transform="rotate(-90 14 {size / 2:.1f})">y offset / mm</text>'
    )
    out.append("</svg>")
    return "\n".join(out)


def render_summary(
    rows: Sequence[Mapping[str, Any]],
    failures: Sequence[Mapping[str, Any]] = (),
    *,
    title: str = "scanmass batch summary",
    generated_at: datetime | None = None,
) -> str:
    """Render the batch summary page (self-contained HTML).

    Parameters
    ----------
    rows : sequence of mapping
        One dict per measured part, keyed like :meth:`Measurement.csv_rows`
        (``file``, ``part``, ``area_mm2``, ``centroid_x_mm``, ...). Missing keys are
        left blank; extra keys get their own columns.
    failures : sequence of mapping
        One dict per file that could not be measured, with ``file`` and ``reason``
        (or ``error``/``message``).
    title : str, optional
        Heading and page title.
    generated_at : datetime, optional
        Time stamp printed in the header (default: now, UTC).

    Returns
    -------
    str
        The HTML document: counts, failures with reasons, an area histogram and a
        centroid-offset scatter (inline SVG), and a table of all parts sortable by
        any column (a few lines of inline JavaScript).
    """
    rows = [dict(r) for r in rows]
    failures = [dict(f) for f in failures]
    keys: list[str] = [k for k in CSV_COLUMNS if any(k in r for r in rows)]
    for r in rows:
        keys += [k for k in r if k not in keys]

    def is_number(v: Any) -> bool:
        return isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, bool)

    # A column is numeric when every filled cell holds a number (blanks allowed).
    numeric = {
        k: any(is_number(r.get(k)) for r in rows) and all(is_number(r.get(k)) or r.get(k) in (None, "") for r in rows)
        for k in keys
    }
    columns = [{"key": k, "title": _column_title(k), "numeric": numeric[k]} for k in keys]
    table = []
    for r in rows:
        cells = []
        for k in keys:
            v = r.get(k)
            if numeric[k] and _finite(v) is not None:
                f = float(v)  # type: ignore[arg-type]
                text = str(int(v)) if isinstance(v, (int, np.integer)) else _plain(f)
                cells.append({"value": repr(f), "text": text, "numeric": True})
            else:
                cells.append({"value": None, "text": "" if v is None else str(v), "numeric": numeric[k]})
        table.append(cells)
    files_ok = {str(r.get("file", "")) for r in rows}
    files_failed = {str(f.get("file", "")) for f in failures}
    masses = [_finite(r.get("mass_g")) for r in rows]
    counts: list[tuple[str, int | str]] = [
        ("Files", len(files_ok | files_failed)),
        ("Files measured", len(files_ok)),
        ("Files failed", len(files_failed)),
        ("Parts", len(rows)),
    ]
    if any(m is not None for m in masses):
        counts.append(("Total mass / g", _plain(sum(m for m in masses if m is not None))))
    area_plot, bins = area_histogram_svg([r.get("area_mm2") for r in rows])
    offset_plot = centroid_offset_svg(rows)
    template = _environment().get_template("summary.html.j2")
    return template.render(
        title=title,
        version=__version__,
        generated=_generated(generated_at),
        counts=counts,
        failures=[{"file": str(f.get("file", "")), "reason": _failure_reason(f)} for f in failures],
        area_plot=_markup(area_plot) if area_plot else "",
        offset_plot=_markup(offset_plot) if offset_plot else "",
        bins=bins,
        parts_count=len(rows),
        columns=columns,
        rows=table,
        cautions=CAUTIONS,
        conventions=CONVENTIONS,
    )


def write_summary(
    rows: Sequence[Mapping[str, Any]],
    failures: Sequence[Mapping[str, Any]],
    path: PathLike,
    *,
    title: str = "scanmass batch summary",
    inputs: Sequence[PathLike] = (),
) -> Path:
    """Render the summary page (see :func:`render_summary`) and write it atomically."""
    return write_atomic(path, render_summary(rows, failures, title=title), inputs=inputs)
