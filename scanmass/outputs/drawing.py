"""A dimensioned drawing of a measured part: SVG and PDF sheets and a DXF with dimensions.

The part is drawn in its datum frame: origin at the datum (the lower-left corner of the
outline along its longest line, or a chosen hole), x along the longest line. The sheet
is an ISO 216 size (A4 landscape, or A3 or A2 when the view does not fit) at the largest
of the scales 5:1, 2:1, 1:1, 1:2, 1:5, 1:10 that fits; the layout is scanmass's own:
the view with overall sizes and radius labels, a hole table (position from the datum,
diameter, series), a scale bar and a title block (source, date, scale, scale method and
its uncertainty, idealisation steps, cautions).

The DXF holds the idealised entities (LINE, ARC, CIRCLE) at full size in mm in the
datum frame, on the layers of :mod:`scanmass.outputs.export`, and real DIMENSION
entities (linear, radius, diameter) on :data:`LAYER_DIMENSIONS`.

References
----------
.. [1] ISO 216:2007, Writing paper and certain classes of printed matter - Trimmed sizes
   - A and B series (A4 297 x 210 mm, A3 420 x 297 mm, A2 594 x 420 mm).
"""

from __future__ import annotations

import datetime as _dt
import math
import os
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any
from xml.sax.saxutils import escape

import numpy as np

from scanmass.errors import OptionError, ResultFormatError
from scanmass.measurement import Measurement
from scanmass.outputs.atomic import write_atomic
from scanmass.outputs.export import LAYER_HOLES, LAYER_OUTLINE, _select_parts, one_piece, pieces_note
from scanmass.outputs.intent import Idealised, idealise
from scanmass.outputs.primitives import Entity, fit_part, ring_points
from scanmass.outputs.resultio import PathLike, as_measurement

__all__ = ["LAYER_DIMENSIONS", "SHEETS_MM", "SCALES", "DrawingSummary", "prepare", "sheet_svg", "write_drawing"]

#: DXF layer of the dimensions.
LAYER_DIMENSIONS = "SCANMASS_DIMENSIONS"
#: ISO 216 sheets, landscape (width, height) mm.
SHEETS_MM = {"A4": (297.0, 210.0), "A3": (420.0, 297.0), "A2": (594.0, 420.0)}
#: Drawing scales tried, largest first (sheet mm per part mm).
SCALES = (5.0, 2.0, 1.0, 0.5, 0.2, 0.1)
CAUTIONS = (
    "Measured from an image: sizes carry the stated uncertainty; check critical sizes on the part.",
    "Idealised: each step below moved the outline by at most the amount shown.",
)
_TITLE_H = 46.0
_MARGIN = 10.0


@dataclass
class DrawingSummary:
    """What was drawn: sheet, scale and counts."""

    sheet: str
    scale: float
    entities: int
    dimensions: int
    written: list[Path] = field(default_factory=list)
    steps: list[str] = field(default_factory=list)
    counts: dict[str, int] = field(default_factory=dict)
    max_deviation_mm: float = 0.0
    area_mm2: tuple[float, float] = (0.0, 0.0)
    #: What to know of the part (a part found in pieces that all lie within its outline)
    notes: list[str] = field(default_factory=list)

    def lines(self) -> list[str]:
        """What the CLI prints: entities, deviation, steps and files."""
        c = self.counts
        out = [
            f"{self.entities} entities ({c.get('line', 0)} lines, {c.get('arc', 0)} arcs, {c.get('circle', 0)} circles), "
            f"largest deviation from the measured outline {self.max_deviation_mm:.4f} mm; "
            f"area measured {self.area_mm2[0]:.2f} mm2, idealised {self.area_mm2[1]:.2f} mm2",
            f"sheet {self.sheet} at {_scale_text(self.scale)}, {self.dimensions} dimensions",
        ]
        out += [f"step {s}" for s in self.steps]
        out += [f"note: {n}" for n in self.notes]
        out += [f"wrote {w}" for w in self.written]
        return out


def _scale_text(s: float) -> str:
    return f"{s:g}:1" if s >= 1 else f"1:{1 / s:g}"


def _to_datum(ideal: Idealised) -> tuple[list[Entity], list[Entity]]:
    """The idealised entities moved into the datum frame (origin at the datum, x along the axis)."""
    a = -math.radians(ideal.axis_deg)
    c, s = math.cos(a), math.sin(a)
    d = np.asarray(ideal.datum_mm)

    def tp(p: Any) -> tuple[float, float]:
        q = np.asarray(p, float) - d
        return (float(c * q[0] - s * q[1]), float(s * q[0] + c * q[1]))

    def te(e: Entity) -> Entity:
        return replace(
            e,
            start_mm=tp(e.start_mm),
            end_mm=tp(e.end_mm),
            centre_mm=None if e.centre_mm is None else tp(e.centre_mm),
        )

    return [te(e) for e in ideal.outer], [te(h) for h in ideal.holes]


def prepare(
    measurement: Measurement, part_label: int | None = None, *, path: str | None = None, **intent: Any
) -> tuple[Measurement, Idealised, list[Entity], list[Entity]]:
    """Fit and idealise one part; return it with its entities in the datum frame.

    A part found in pieces is refused (:func:`~scanmass.outputs.export.one_piece`, naming ``path``).
    """
    parts = _select_parts(measurement, None if part_label is None else [part_label])
    if len(parts) > 1:
        raise OptionError(f"the result has {len(parts)} parts; choose one with --part, e.g. --part {parts[0].label}")
    part = parts[0]
    one_piece(part, "a drawing fitted to it", path=path)
    fitted = fit_part(part, measurement.scale.mm_per_px, tolerance_mm=intent.pop("tolerance_mm", None))
    ideal = idealise(fitted, part, scale_rel_u=measurement.scale.mm_per_px_rel_u, **intent)
    outer, holes = _to_datum(ideal)
    return measurement, ideal, outer, holes


# ---------------------------------------------------------------------------
# Sheet primitives (sheet mm, y up from the lower-left corner)
# ---------------------------------------------------------------------------
@dataclass
class _Sheet:
    width: float
    height: float
    items: list[tuple] = field(default_factory=list)

    def line(self, a, b, w=0.25) -> None:
        self.items.append(("poly", [tuple(a), tuple(b)], w))

    def poly(self, pts, w=0.5) -> None:
        self.items.append(("poly", [tuple(map(float, p)) for p in pts], w))

    def text(self, x, y, s, size=3.0, anchor="start") -> None:
        self.items.append(("text", float(x), float(y), str(s), float(size), anchor))


def _fmt(v: float) -> str:
    return f"{v:.2f}".rstrip("0").rstrip(".")


def _layout(m: Measurement, ideal: Idealised, outer: list[Entity], holes: list[Entity], sheet: str | None):
    pts = ring_points(outer, 0.05)
    lo, hi = pts.min(axis=0), pts.max(axis=0)
    size = hi - lo
    names = [sheet] if sheet else list(SHEETS_MM)
    for name in names:
        if name not in SHEETS_MM:
            raise OptionError(f"unknown sheet {name!r}; choose from {', '.join(SHEETS_MM)}")
        w, h = SHEETS_MM[name]
        view_w, view_h = w - 2 * _MARGIN - 90.0, h - 2 * _MARGIN - _TITLE_H - 25.0
        for s in SCALES:
            if size[0] * s <= view_w and size[1] * s <= view_h:
                return name, s, lo, hi
    name = sheet or "A2"
    w, h = SHEETS_MM[name]
    s = min((w - 110) / size[0], (h - 100) / size[1])
    return name, s, lo, hi


def _build_sheet(m: Measurement, ideal: Idealised, outer: list[Entity], holes: list[Entity], sheet: str | None):
    name, s, lo, hi = _layout(m, ideal, outer, holes, sheet)
    w, h = SHEETS_MM[name]
    sh = _Sheet(w, h)
    # border and title block
    sh.poly(
        [
            (_MARGIN, _MARGIN),
            (w - _MARGIN, _MARGIN),
            (w - _MARGIN, h - _MARGIN),
            (_MARGIN, h - _MARGIN),
            (_MARGIN, _MARGIN),
        ],
        0.5,
    )
    sh.line((_MARGIN, _MARGIN + _TITLE_H), (w - _MARGIN, _MARGIN + _TITLE_H), 0.35)
    # view origin: the part's lower-left at (ox, oy) on the sheet
    view_x0, view_y0 = _MARGIN + 25.0, _MARGIN + _TITLE_H + 20.0
    ox, oy = view_x0 - lo[0] * s, view_y0 - lo[1] * s

    def P(p):
        return (ox + p[0] * s, oy + p[1] * s)

    view = ring_points(outer, 0.05 / max(s, 0.1))
    sh.poly([P(p) for p in np.vstack([view, view[:1]])], 0.5)
    for k, hole in enumerate(holes):
        ring = ring_points([hole], 0.05 / max(s, 0.1))
        sh.poly([P(p) for p in np.vstack([ring, ring[:1]])], 0.5)
        c = P(hole.centre_mm)
        r = float(hole.radius_mm or 0.0) * s
        sh.line((c[0] - r - 2, c[1]), (c[0] + r + 2, c[1]), 0.13)
        sh.line((c[0], c[1] - r - 2), (c[0], c[1] + r + 2), 0.13)
        sh.text(c[0] + r * 0.75 + 1, c[1] + r * 0.75 + 1, f"H{k + 1}", 2.5)
    # overall sizes
    width, height = hi[0] - lo[0], hi[1] - lo[1]
    y_dim = view_y0 - 10.0
    a, b = P((lo[0], lo[1])), P((hi[0], lo[1]))
    sh.line((a[0], y_dim - 2), (a[0], a[1] - 1), 0.13)
    sh.line((b[0], y_dim - 2), (b[0], b[1] - 1), 0.13)
    sh.line((a[0], y_dim), (b[0], y_dim), 0.18)
    sh.text(0.5 * (a[0] + b[0]), y_dim + 1.0, _fmt(width), 3.0, "middle")
    x_dim = view_x0 - 12.0
    a, b = P((lo[0], lo[1])), P((lo[0], hi[1]))
    sh.line((x_dim - 2, a[1]), (a[0] - 1, a[1]), 0.13)
    sh.line((x_dim - 2, b[1]), (b[0] - 1, b[1]), 0.13)
    sh.line((x_dim, a[1]), (x_dim, b[1]), 0.18)
    sh.text(x_dim - 1.0, 0.5 * (a[1] + b[1]), _fmt(height), 3.0, "end")
    dims = 2
    # radii
    for e in outer:
        if e.kind != "arc":
            continue
        c = np.asarray(e.centre_mm)
        a0 = math.atan2(e.start_mm[1] - c[1], e.start_mm[0] - c[0])
        sweep = math.radians(e.sweep_deg) * (1 if e.ccw else -1)
        am = a0 + 0.5 * sweep
        r = float(e.radius_mm or 0.0)
        tip = c + r * np.array([math.cos(am), math.sin(am)])
        out = c + (r + 6.0 / s) * np.array([math.cos(am), math.sin(am)])
        sh.line(P(tip), P(out), 0.13)
        lx, ly = P(out)
        sh.text(lx, ly, f"R{_fmt(r)}", 2.8)
        dims += 1
    # datum mark
    d0 = P((0.0, 0.0))
    sh.line((d0[0] - 3, d0[1]), (d0[0] + 3, d0[1]), 0.25)
    sh.line((d0[0], d0[1] - 3), (d0[0], d0[1] + 3), 0.25)
    sh.text(d0[0] - 2, d0[1] - 5, "datum 0,0", 2.2, "end")
    # hole table
    tx, ty = w - _MARGIN - 85.0, h - _MARGIN - 8.0
    sh.text(tx, ty, "Holes (mm, from the datum)", 3.0)
    cols = (0.0, 22.0, 40.0, 56.0, 62.0)
    for x, head, anchor in zip(cols, ("hole", "X", "Y", "Ø", "series"), ("start", "end", "end", "end", "start")):
        sh.text(tx + x, ty - 5, head, 2.5, anchor)
    for k, hole in enumerate(holes):
        series = ideal.hole_series if ideal.hole_series and k in ideal.series_sizes else ""
        d = 2.0 * float(hole.radius_mm or 0.0)
        hc = hole.centre_mm or (0.0, 0.0)
        row = (f"H{k + 1}", f"{hc[0]:.2f}", f"{hc[1]:.2f}", f"{d:.2f}", series or "")
        for x, cell, anchor in zip(cols, row, ("start", "end", "end", "end", "start")):
            sh.text(tx + x, ty - 10 - 4.5 * k, cell, 2.5, anchor)
        dims += 1
    # scale bar: 10 or 20 mm of part
    bar = 10.0 if 10.0 * s >= 15 else (20.0 if 20.0 * s >= 15 else 50.0)
    bx, by = w - _MARGIN - 85.0, _MARGIN + _TITLE_H + 8.0
    sh.poly([(bx, by), (bx + bar * s, by)], 0.6)
    for t in (0.0, 0.5, 1.0):
        sh.line((bx + t * bar * s, by - 1.5), (bx + t * bar * s, by + 1.5), 0.25)
    sh.text(bx, by + 3, f"0        {_fmt(bar)} mm   (scale {_scale_text(s)})", 2.5)
    # title block
    src = os.path.basename(m.source.path or "unnamed image")
    u_scale = m.scale.mm_per_px_rel_u
    lines = [
        f"Part {ideal.label} of {src}        drawn {_dt.date.today().isoformat()} by scanmass        sheet {name}, scale {_scale_text(s)}",
        f"Scale source: {m.scale.method}, {m.scale.mm_per_px:.5f} mm/px, relative u {100 * u_scale:.3g} %"
        f" ({_fmt(100 * u_scale)} mm per 100 mm); fit tolerance {ideal.tolerance_mm:.3f} mm",
        f"Area: measured {ideal.measured_area_mm2:.2f} mm2, idealised {ideal.area_mm2:.2f} mm2;"
        f" centroid measured ({ideal.measured_centroid_mm[0]:.3f}, {ideal.measured_centroid_mm[1]:.3f}),"
        f" idealised ({ideal.centroid_mm[0]:.3f}, {ideal.centroid_mm[1]:.3f}) mm (result frame)",
    ]
    for st in ideal.steps[:4]:
        lines.append(f"Step {st.name}: moved <= {st.deviation_mm:.4f} mm; {st.detail[:110]}")
    if not ideal.steps:
        lines.append("No idealisation step taken: the outline is the fitted one.")
    lines += list(CAUTIONS)
    for k, text in enumerate(lines[:10]):
        sh.text(_MARGIN + 3, _MARGIN + _TITLE_H - 5 - 4.2 * k, text, 2.5)
    return sh, name, s, dims


def sheet_svg(sh: _Sheet) -> str:
    """SVG text of a sheet (true size in mm)."""
    out = [
        '<?xml version="1.0" encoding="UTF-8"?>',
        f'<svg xmlns="http://www.w3.org/2000/svg" version="1.1" width="{sh.width:g}mm" height="{sh.height:g}mm" '
        f'viewBox="0 0 {sh.width:g} {sh.height:g}">',
        '<rect width="100%" height="100%" fill="white"/>',
        '<g fill="none" stroke="black" stroke-linecap="round" stroke-linejoin="round">',
    ]
    texts = []
    for it in sh.items:
        if it[0] == "poly":
            d = " ".join(f"{x:.3f},{sh.height - y:.3f}" for x, y in it[1])
            out.append(f'<polyline points="{d}" stroke-width="{it[2]:g}"/>')
        else:
            _, x, y, s, size, anchor = it
            texts.append(
                f'<text x="{x:.3f}" y="{sh.height - y:.3f}" font-size="{size:g}" text-anchor="{anchor}" '
                f'font-family="Helvetica, Arial, sans-serif" xml:space="preserve">{escape(s)}</text>'
            )
    out.append("</g>")
    out.append('<g fill="black" stroke="none">')
    out += texts
    out += ["</g>", "</svg>", ""]
    return "\n".join(out)


def _sheet_pdf(sh: _Sheet) -> bytes:
    from fpdf import FPDF

    pdf = FPDF(
        orientation="L" if sh.width > sh.height else "P",
        unit="mm",
        format=(min(sh.width, sh.height), max(sh.width, sh.height)),
    )
    pdf.set_auto_page_break(False)
    pdf.add_page()
    pdf.set_creator("scanmass")
    for it in sh.items:
        if it[0] == "poly":
            pdf.set_line_width(it[2])
            pdf.polyline([(x, sh.height - y) for x, y in it[1]])
        else:
            _, x, y, s, size, anchor = it
            pdf.set_font("helvetica", size=size * 72 / 25.4 / 0.8)
            text = s.encode("latin-1", "replace").decode("latin-1")
            tw = pdf.get_string_width(text)
            dx = {"start": 0.0, "middle": -0.5 * tw, "end": -tw}[anchor]
            pdf.text(x + dx, sh.height - y, text)
    return bytes(pdf.output())


def _dxf(ideal: Idealised, outer: list[Entity], holes: list[Entity], m: Measurement):
    import ezdxf
    from ezdxf import units

    doc = ezdxf.new("R2010", setup=True)
    doc.units = units.MM
    doc.header["$MEASUREMENT"] = 1
    doc.layers.add(LAYER_OUTLINE, color=7)
    doc.layers.add(LAYER_HOLES, color=5)
    doc.layers.add(LAYER_DIMENSIONS, color=3)
    msp = doc.modelspace()
    for e in outer:
        if e.kind == "line":
            msp.add_line(e.start_mm, e.end_mm, dxfattribs={"layer": LAYER_OUTLINE})
        elif e.kind == "arc":
            a0, a1 = e.angles_deg()
            msp.add_arc(e.centre_mm, float(e.radius_mm or 0.0), a0, a1, dxfattribs={"layer": LAYER_OUTLINE})
        else:
            msp.add_circle(e.centre_mm, float(e.radius_mm or 0.0), dxfattribs={"layer": LAYER_OUTLINE})
    for h in holes:
        msp.add_circle(h.centre_mm, float(h.radius_mm or 0.0), dxfattribs={"layer": LAYER_HOLES})
    pts = ring_points(outer, 0.05)
    lo, hi = pts.min(axis=0), pts.max(axis=0)
    span = float(max(hi - lo))
    attribs = {"layer": LAYER_DIMENSIONS}
    n = 0
    gap = 0.08 * span + 3
    dim = msp.add_linear_dim(
        base=(lo[0], lo[1] - gap), p1=(lo[0], lo[1]), p2=(hi[0], lo[1]), angle=0, dxfattribs=attribs
    )
    dim.render()
    dim = msp.add_linear_dim(
        base=(lo[0] - gap, lo[1]), p1=(lo[0], lo[1]), p2=(lo[0], hi[1]), angle=90, dxfattribs=attribs
    )
    dim.render()
    n += 2
    for k, h in enumerate(holes):
        c = h.centre_mm
        msp.add_diameter_dim(center=c, radius=float(h.radius_mm or 0.0), angle=45, dxfattribs=attribs).render()
        y_base = hi[1] + gap * (1 + 0.5 * k)
        msp.add_linear_dim(base=(0, y_base), p1=(0.0, 0.0), p2=c, angle=0, dxfattribs=attribs).render()
        x_base = hi[0] + gap * (1 + 0.5 * k)
        msp.add_linear_dim(base=(x_base, 0), p1=(0.0, 0.0), p2=c, angle=90, dxfattribs=attribs).render()
        n += 3
    for e in outer:
        if e.kind == "arc":
            a0, a1 = e.angles_deg()
            mid = a0 + 0.5 * ((a1 - a0) % 360.0)
            msp.add_radius_dim(
                center=e.centre_mm, radius=float(e.radius_mm or 0.0), angle=mid, dxfattribs=attribs
            ).render()
            n += 1
    return doc, n


def write_drawing(
    result: Measurement | PathLike,
    *,
    pdf: PathLike | None = None,
    svg: PathLike | None = None,
    dxf: PathLike | None = None,
    part: int | None = None,
    sheet: str | None = None,
    **intent: Any,
) -> DrawingSummary:
    """Write the dimensioned drawing of one part as PDF, SVG and/or DXF.

    Parameters
    ----------
    result : Measurement or path of its JSON
    pdf, svg, dxf : path, optional
        Files to write (at least one).
    part : int, optional
        Part label (needed when the result has several parts).
    sheet : {"A4", "A3", "A2"}, optional
        Sheet size (default: the smallest that holds the view at a listed scale).
    **intent
        Passed to :func:`scanmass.outputs.intent.idealise` (``series``, ``step_mm``,
        ``datum_hole``, ``parallel``, ``tangent``, ``concentric``) and ``tolerance_mm``.

    Returns
    -------
    DrawingSummary
    """
    if pdf is None and svg is None and dxf is None:
        raise OptionError("nothing to write; give --pdf OUT.pdf, --svg OUT.svg and/or --dxf OUT.dxf")
    m, json_path = as_measurement(result)
    try:
        m, ideal, outer, holes = prepare(m, part, path=json_path, **intent)
    except ResultFormatError as exc:
        if json_path and not exc.path:
            raise ResultFormatError(str(exc), path=json_path) from None
        raise
    sh, name, s, dims = _build_sheet(m, ideal, outer, holes, sheet)
    inputs = [json_path, m.source.path]
    summary = DrawingSummary(name, s, len(outer) + len(holes), dims)
    counts = {"line": 0, "arc": 0, "circle": 0}
    for e in [*outer, *holes]:
        counts[e.kind] += 1
    summary.counts = counts
    summary.max_deviation_mm = ideal.max_deviation_mm
    summary.area_mm2 = (ideal.measured_area_mm2, ideal.area_mm2)
    summary.steps = [f"{st.name}: moved <= {st.deviation_mm:.4f} mm; {st.detail}" for st in ideal.steps]
    note = pieces_note(_select_parts(m, None if part is None else [part])[0])
    if note is not None:  # its pieces lie within its outline (else prepare refused it)
        summary.notes.append(f"{note}: the drawing is of that outline")
    if svg is not None:
        summary.written.append(write_atomic(svg, sheet_svg(sh), inputs=inputs))
    if pdf is not None:
        summary.written.append(write_atomic(pdf, _sheet_pdf(sh), inputs=inputs))
    if dxf is not None:
        import io

        doc, n = _dxf(ideal, outer, holes, m)
        buf = io.StringIO()
        doc.write(buf)
        summary.written.append(write_atomic(dxf, buf.getvalue(), inputs=inputs))
        summary.dimensions = n
    return summary
