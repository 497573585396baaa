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
from typing import Any, cast
from xml.sax.saxutils import escape

import numpy as np

from scanmass import __version__
from scanmass.errors import ImageError, OptionError
from scanmass.measurement import Measurement, Part, csv_columns
from scanmass.names import FIGURE, FIGURES, UNCERTAINTY_NOTE, check_units, unit_symbol
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
    "Iyy = ∫(x − xc)² dA, and the product moment of area Ixy = ∫(x − xc)(y − yc) dA, which can be negative. "
    "Products of inertia of plates and assemblies, ∫(x − xc)(y − yc) dm, carry the same sign.",
    "Principal second moments I1 ≥ I2; the I2 axis angle is the direction of the I2 axis (the part's long "
    "direction), counter-clockwise from +x, in [0°, 180°); undefined for a near-round part. "
    "Polar second moment of area Ip = Ixx + Iyy (not the torsion constant).",
    "Radii of gyration k = √(I / A). Elastic section moduli, one per extreme fibre: "
    "Z top = Ixx / (ymax − yc), Z bottom = Ixx / (yc − ymin), Z right = Iyy / (xmax − xc), "
    "Z left = Iyy / (xc − xmin). W is the weight.",
    "Uncertainties: " + UNCERTAINTY_NOTE + "; u is rounded to two significant digits and the value to the "
    "same decimal place (GUM 7.2.6).",
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
def _part_rows(p: Part, units: str = "mm") -> list[dict[str, str]]:
    rows = []
    for fig in FIGURES:
        if fig.stem in ("mass", "hole_count"):  # in the mass table and the holes table
            continue
        if fig.stem == "principal_angle" and not p.principal_axes_defined:
            rows.append(_row_any(fig.label, fig.symbol, "undefined (near-round part)", None, ""))
            continue
        rows.append(_row(fig.label, fig.symbol, fig.value(p, units), fig.u(p, units), fig.unit(units)))
    return rows


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
        ("Product of inertia ∫(x − xc)(y − yc) dm", "Pxy", "ixy_g_mm2", "ixy_u_g_mm2", "g·mm²"),
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
    ("principal_angle_deg", "I2 axis angle / °"),
    ("perimeter_mm", "Perimeter / mm"),
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
        "perimeter_mm": p.perimeter_u_mm,
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
    """A few labelled rows: method, mm/px ± u, reprojection RMS, check bars, lens, thickness.

    Raw matrices and marker corners stay in the JSON.
    """
    s = m.scale
    rel = _finite(s.mm_per_px_rel_u)
    scale_text, u_text = format_value(s.mm_per_px, None if rel is None else rel * s.mm_per_px)
    method = {"dpi": "scanner resolution", "mat": "printed marker mat", "sheet": "paper sheet of known size"}.get(
        s.method, s.method
    )
    if _finite(s.dpi) is not None:
        method += f", {_plain(s.dpi)} dpi"
    rows = [
        ("Method", method),
        ("Scale", f"{scale_text} ± {u_text} mm/px" if u_text else f"{scale_text} mm/px"),
    ]
    if _finite(s.reprojection_rms_px) is not None:
        rms = f"{_plain(s.reprojection_rms_px, 2)} px"
        if _finite(s.reprojection_rms_mm) is not None:
            rms += f" ({_plain(s.reprojection_rms_mm, 2)} mm)"
        rows.append(("Reprojection RMS", rms))
    extra = dict(s.extra or {})
    if s.method != "dpi":
        found = _find_extra(extra, "printer", "printed")
        rows.append(("Check-bar readings", "; ".join(_describe(v) for _, v in found) if found else "not given"))
        found = _find_extra(extra, "lens")
        rows.append(("Lens profile", "; ".join(_describe(v) for _, v in found) if found else "none"))
        found = _find_extra(extra, "thickness")
        rows.append(("Thickness (parallax)", "; ".join(_describe(v) for _, v in found) if found else "none"))
    if s.note:
        rows.append(("Note", s.note))
    terms = [(k, f"{float(v) * 100:.2g} %") for k, v in (s.terms or {}).items() if _finite(v) is not None]
    return rows, terms, None


def _source_rows(m: Measurement, result_path: str | None) -> list[tuple[str, str]]:
    src = m.source
    rows = [("Image", src.path or "(not recorded)")]
    rows.append(("Size", f"{src.width_px} × {src.height_px} px"))
    colour = {"L": "grey", "I;16": "grey", "I": "grey", "LA": "grey", "RGB": "colour", "RGBA": "colour"}.get(
        src.mode or "", None
    )
    depth = f"{src.bit_depth} bits per channel" if src.bit_depth else None
    detail = ", ".join(str(x) for x in (src.format, colour, depth) if x)
    if detail:
        rows.append(("File", detail))
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
    raw, size = _compress_png(raw, size)
    return "data:image/png;base64," + base64.b64encode(raw).decode("ascii"), size


#: Longest side of an overlay embedded in a report; larger ones are reduced.
REPORT_OVERLAY_MAX_SIDE_PX = 1400


def _compress_png(raw: bytes, size: tuple[int, int]) -> tuple[bytes, tuple[int, int]]:
    """The overlay reduced to :data:`REPORT_OVERLAY_MAX_SIDE_PX` and stored with a 256-colour
    palette (the drawing has few colours), when that is smaller than the original."""
    from PIL import Image

    if max(size) <= REPORT_OVERLAY_MAX_SIDE_PX and len(raw) <= 300_000:
        return raw, size
    with Image.open(io.BytesIO(raw)) as opened:
        im = opened.convert("RGB")
        if max(im.size) > REPORT_OVERLAY_MAX_SIDE_PX:
            im.thumbnail((REPORT_OVERLAY_MAX_SIDE_PX, REPORT_OVERLAY_MAX_SIDE_PX), Image.Resampling.LANCZOS)
        small = im.quantize(colors=256, method=Image.Quantize.MEDIANCUT, dither=Image.Dither.NONE)
        buf = io.BytesIO()
        small.save(buf, format="PNG", optimize=True)
    out = buf.getvalue()
    return (out, small.size) if len(out) < len(raw) else (raw, size)


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
    allpts = np.vstack([np.asarray(r, dtype=float) for p in drawn for r in [p.outline_mm, *p.pieces_mm]])
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
        for k, ring in enumerate(p.pieces_mm, start=2):  # a part found in pieces: the others, dashed, drawn over
            out.append(
                f'<path d="{_ring_d(ring)}" fill="{_OKABE_ITO["sky"]}" fill-opacity="0.35" '
                f'stroke="{_OKABE_ITO["blue"]}" stroke-width="{_num(stroke)}" stroke-dasharray="{_num(4 * stroke)}">'
                f"<title>Part {int(p.label)}, piece {k}</title></path>"
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
        angle = _finite(p.principal_angle_deg) if p.principal_axes_defined else None  # none for a round part
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


def _image_view(index: int, m: Measurement, result_path: str | None, overlay: Any, units: str = "mm") -> dict[str, Any]:
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
        area = format_value(*(f(p, units) for f in (FIGURE["area"].value, FIGURE["area"].u)))[0]
        cx = format_value(*(f(p, units) for f in (FIGURE["centroid_x"].value, FIGURE["centroid_x"].u)))[0]
        cy = format_value(*(f(p, units) for f in (FIGURE["centroid_y"].value, FIGURE["centroid_y"].u)))[0]
        i1 = format_value(*(f(p, units) for f in (FIGURE["i1"].value, FIGURE["i1"].u)))[0]
        i2 = format_value(*(f(p, units) for f in (FIGURE["i2"].value, FIGURE["i2"].u)))[0]
        angle = format_value(p.principal_angle_deg, p.principal_angle_u_deg)[0]
        if not p.principal_axes_defined:
            angle = "undefined"
        names, term_rows = _term_rows(p)
        parts.append(
            {
                "label": int(p.label),
                "anchor": f"{anchor}-part-{int(p.label)}",
                "cut": bool(p.cut),
                "pieces": 1 + len(p.pieces_mm),
                "summary": {
                    "area": area,
                    "cx": cx,
                    "cy": cy,
                    "i1": i1,
                    "i2": i2,
                    "angle": angle,
                    "mass": format_value(p.mass_g, p.mass_u_g)[0] if _finite(p.mass_g) is not None else "–",
                },
                "rows": _part_rows(p, units),
                "mass_rows": _mass_rows(p),
                "term_names": names,
                "term_rows": term_rows,
                "hole_rows": _hole_rows(p),
            }
        )
    view["parts"] = parts
    view["head"] = {
        "area": FIGURE["area"].heading(units).replace(", ", " / "),
        "cx": FIGURE["centroid_x"].heading(units).replace(", ", " / "),
        "cy": FIGURE["centroid_y"].heading(units).replace(", ", " / "),
        "i1": FIGURE["i1"].heading(units).replace(", ", " / "),
        "i2": FIGURE["i2"].heading(units).replace(", ", " / "),
        "angle": FIGURE["principal_angle"].heading(units).replace(", ", " / "),
        "holes": FIGURE["hole_count"].label,
        "mass": FIGURE["mass"].heading(units).replace(", ", " / "),
    }
    return view


def _pm(value: Any, u: Any, unit: str) -> str:
    text, u_text = format_value(value, u)
    if text == "–":
        return "–"
    return f"{text} ± {u_text} {unit}".rstrip() if u_text else f"{text} {unit}".rstrip()


def read_extra(path: PathLike) -> tuple[str, Any] | None:
    """A balance or assembly result JSON (from ``scanmass balance/assemble --json``) read for the
    report, as ``("balance" | "assembly", result)``; None when the file is a measurement result."""
    import json
    from types import SimpleNamespace

    from scanmass.errors import ResultFormatError
    from scanmass.measurement import MAX_RESULT_BYTES
    from scanmass.readfile import read_regular_text

    try:
        text = read_regular_text(path, error=ResultFormatError, what="result", max_bytes=MAX_RESULT_BYTES)
        doc = json.loads(text)
    except (ResultFormatError, OSError, UnicodeDecodeError, ValueError, RecursionError):
        return None  # read_result names the problem
    if not isinstance(doc, dict):
        return None
    if str(doc.get("schema", "")).startswith("scanmass.assembly/"):
        members = [
            SimpleNamespace(**{**m, "centre_of_mass_mm": tuple(m.get("centre_of_mass_mm") or ())})
            for m in doc.get("members", [])
        ]
        values = {k: v for k, v in doc.items() if k != "members"}
        for key in ("inertia_g_mm2", "inertia_u_g_mm2"):
            values[key] = np.asarray(values.get(key), dtype=float)
        return "assembly", SimpleNamespace(**values, members=members)
    if "verdict" in doc and "unbalance_gmm" in doc:
        return "balance", SimpleNamespace(**doc)
    return None


def balance_view(result: Any, units: str = "mm") -> dict[str, Any]:
    """The report's rows for one :class:`~scanmass.mass.balance.BalanceResult`."""
    from scanmass.names import convert

    def ln(v: Any) -> Any:
        return convert(v, "length", units)

    lu, uu = unit_symbol("length", units), unit_symbol("unbalance", units)
    rows = [
        ("Part, spinning about hole", f"part {result.part}, hole {result.hole}"),
        ("Mass", _pm(result.mass_g, result.mass_u_g, "g")),
        ("Centre-of-mass offset e", _pm(ln(result.offset_mm), ln(result.offset_u_mm), lu)),
        ("Static unbalance U = m·e", _pm(ln(result.unbalance_gmm), ln(result.unbalance_u_gmm), uu)),
        ("Heavy spot angle (from +x)", _pm(result.heavy_angle_deg, None, "°")),
    ]
    if result.permissible_gmm is not None and result.permissible_offset_mm is not None:
        rows.append(
            (
                f"Permissible (ISO 21940-11, G {result.grade_mm_s:g} at {result.rpm:g} rpm)",
                f"U {_pm(ln(result.permissible_gmm), None, uu)}, offset {_pm(ln(result.permissible_offset_mm), None, lu)}",
            )
        )
    if result.correction_radius_mm is not None and result.correction_fits is not False:
        rows.append(
            (
                "Correction",
                f"remove {_pm(result.remove_mass_g, None, 'g')} at {_pm(result.remove_angle_deg, None, '°')}, "
                f"radius {_pm(ln(result.correction_radius_mm), None, lu)}",
            )
        )
    elif result.correction_fits is False:
        rows.append(("Correction", "the correction hole does not fit in the material; choose another radius"))
    status = {True: "pass", False: "fail", None: "undecided"}[result.passes]
    return {"source": result.source or "", "status": status, "verdict": result.verdict, "rows": rows}


def assembly_view(result: Any, units: str = "mm") -> dict[str, Any]:
    """The report's rows for one :class:`~scanmass.mass.assembly.AssemblyResult`."""
    from scanmass.names import convert

    lu, iu = unit_symbol("length", units), unit_symbol("mass_moment", units)
    members = [
        {
            "name": m.name + (" (cut-out)" if m.cutout else ""),
            "source": f"{m.source}: part {m.part}",
            "count": str(m.count),
            "mass": _pm(m.mass_g, m.mass_u_g, "g"),
            "com": ", ".join(_plain(convert(c, "length", units), 5) for c in m.centre_of_mass_mm) + f" {lu}",
        }
        for m in result.members
    ]
    rows = [
        ("Mass", _pm(result.mass_g, result.mass_u_g, "g")),
        ("Weight W", _pm(result.weight_n, result.weight_u_n, "N")),
    ]
    for axis, v, u in zip("xyz", result.centre_of_mass_mm, result.centre_of_mass_u_mm):
        rows.append((f"Centre of mass {axis}", _pm(convert(v, "length", units), convert(u, "length", units), lu)))
    t, tu = result.inertia_g_mm2, result.inertia_u_g_mm2
    for name, (i, j) in (("xx", (0, 0)), ("yy", (1, 1)), ("zz", (2, 2))):
        rows.append(
            (
                f"Moment of inertia I{name}",
                _pm(convert(t[i, j], "mass_moment", units), convert(tu[i, j], "mass_moment", units), iu),
            )
        )
    for name, (i, j) in (("xy", (0, 1)), ("xz", (0, 2)), ("yz", (1, 2))):
        rows.append(
            (
                f"Product of inertia P{name} (same sign as Ixy)",
                _pm(convert(-t[i, j], "mass_moment", units), convert(tu[i, j], "mass_moment", units), iu),
            )
        )
    return {"name": result.name or result.path or "assembly", "members": members, "rows": rows}


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
    balances: Sequence[Any] = (),
    assemblies: Sequence[Any] = (),
    units: str = "mm",
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
    balances, assemblies : sequence, optional
        Balance results (:class:`~scanmass.mass.balance.BalanceResult`) and assembly
        results (:class:`~scanmass.mass.assembly.AssemblyResult`) to include, each in
        its own section; a failed balance verdict is also listed at the top.
    units : {"mm", "in"}
        Units of the figures shown.

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
    check_units(units)
    images = []
    for index, item in enumerate(items):
        m, result_path = as_measurement(item)
        images.append(_image_view(index, m, result_path, _overlay_for(overlays, index, result_path, m), units))
    template = _environment().get_template("report.html.j2")
    return template.render(
        balances=[balance_view(b, units) for b in balances],
        assemblies=[assembly_view(a, units) for a in assemblies],
        units=units,
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
    balances: Sequence[Any] = (),
    assemblies: Sequence[Any] = (),
    units: str = "mm",
) -> Path:
    """Render the report (see :func:`render_report`) and write it atomically to ``path``.

    The result files, their source images and overlay files are never overwritten.
    Returns the path written.
    """
    if isinstance(results, (str, os.PathLike, Measurement)):
        results = [results]
    items = list(results)
    html = render_report(
        items,
        overlays=overlays,
        title=title,
        generated_at=generated_at,
        balances=balances,
        assemblies=assemblies,
        units=units,
    )
    guarded: list[Any] = [i for i in items if isinstance(i, (str, os.PathLike))]
    guarded += [v for v in (overlays or {}).values() if isinstance(v, (str, os.PathLike))]
    return write_atomic(path, html, inputs=guarded)


# ---------------------------------------------------------------------------
# Batch summary
# ---------------------------------------------------------------------------
def _column_titles() -> dict[str, str]:
    titles = {"file": "File", "part": "Part", "scale_method": "Scale method", "warnings": "Warnings"}
    titles["outline_pieces"] = "Outline pieces"
    for units in ("mm", "in"):
        titles[f"hole_diameters_{'mm' if units == 'mm' else 'in'}"] = f"Hole diameters / {units}"
        for fig in FIGURES:
            unit = fig.unit(units)
            titles[fig.key(units)] = f"{fig.label} / {unit}" if unit else fig.label
            if fig.u_attr is not None:
                titles[fig.u_key(units)] = f"u({fig.symbol or fig.label}) / {unit}"
    return titles


_COLUMN_TITLES = _column_titles()


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
    duplicates: int = 0,
    base: PathLike | None = None,
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
    duplicates : int, optional
        Files skipped as copies of a measured file (counted on the page).
    base : path, optional
        Folder that file paths are shown relative to (default: the folder all of them
        share).

    Returns
    -------
    str
        The HTML document: counts, files with warnings, failures with reasons, an area histogram and a
        centroid-offset scatter (inline SVG), and a table of all parts sortable by
        any column (a few lines of inline JavaScript).
    """
    rows = [dict(r) for r in rows]
    failures = [dict(f) for f in failures]
    paths = [str(r.get("file", "")) for r in [*rows, *failures] if r.get("file")]
    if base is None and paths:
        try:
            base = os.path.commonpath([os.path.dirname(p) for p in paths])
        except ValueError:  # mixed absolute and relative paths, or drives
            base = None

    def rel(path: Any) -> str:
        text = "" if path is None else str(path)
        if base is None or not text:
            return text
        try:
            return os.path.relpath(text, os.fspath(base))
        except ValueError:
            return text

    for row in cast(list[dict[str, Any]], [*rows, *failures]):
        if "file" in row:
            row["file"] = rel(row["file"])
    warned = sorted({(str(r.get("file", "")), str(r.get("warnings") or "")) for r in rows if r.get("warnings")})
    keys: list[str] = [k for k in csv_columns() if any(k in r for r in rows)]
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
        ("Duplicate files (skipped)", duplicates),
        ("Files with warnings", len({f for f, _ in warned})),
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
        warned=[{"file": f, "warnings": w} for f, w in warned],
        base="" if base is None else os.fspath(base),
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
    duplicates: int = 0,
    base: PathLike | None = None,
) -> Path:
    """Render the summary page (see :func:`render_summary`) and write it atomically."""
    html = render_summary(rows, failures, title=title, duplicates=duplicates, base=base)
    return write_atomic(path, html, inputs=inputs)
