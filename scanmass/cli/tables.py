"""Readable terminal tables (rich) of results; built here, printed by the CLI."""

from __future__ import annotations

from rich.table import Table

from scanmass.measurement import Measurement
from scanmass.names import FIGURES, convert, unit_symbol
from scanmass.outputs.formatting import _finite, format_value

__all__ = ["fmt_u", "material_line", "measurement_table", "holes_table", "pieces_lines"]


#: Between a value and its ±: no-break spaces, so that a table never splits them.
_PM = "\u00a0±\u00a0"


def fmt_u(value: float | None, u: float | None = None, *, unit: str = "") -> str:
    """Format ``value ± u`` with the uncertainty to two significant digits
    (:func:`scanmass.outputs.formatting.format_value`); the value, the ± and the
    uncertainty are joined by no-break spaces so that no table splits them.

    Examples
    --------
    >>> fmt_u(1234.5678, 0.0456).replace("\u00a0", " ")
    '1234.568 ± 0.046'
    >>> fmt_u(12.0, None, unit="mm").replace("\u00a0", " ")
    '12 mm'
    """
    if _finite(value) is None:
        return "-"
    text, u_text = format_value(value, u)
    suffix = f"\u00a0{unit}" if unit else ""
    return f"{text}{_PM}{u_text}{suffix}" if u_text else f"{text}{suffix}"


def material_line(m: Measurement) -> str | None:
    """Which material and density the mass figures used, the alias resolved (None without mass)."""
    mat = m.material
    if not mat:
        return None
    key, name = mat.get("key"), mat.get("name")
    given = mat.get("requested") or mat.get("given")
    who = f"{name} ({key})" if key and name else str(name or key)
    if given and given != key:
        who = f"'{given}' = {who}"
    density = fmt_u(mat.get("density_kg_m3"), mat.get("density_u_kg_m3"), unit="kg/m³")
    thickness = fmt_u(mat.get("thickness_mm"), mat.get("thickness_u_mm") or None, unit="mm")
    return f"material {who}, density {density}, thickness {thickness}"


def measurement_table(m: Measurement, units: str = "mm") -> Table:
    """The main figures of every part, one column per part (reads well in narrow terminals).

    Labels and units come from :data:`scanmass.names.FIGURES`; ``units`` is ``"mm"`` or ``"in"``.
    """
    rel = m.scale.mm_per_px_rel_u
    scale = fmt_u(m.scale.mm_per_px, rel * m.scale.mm_per_px if rel else None, unit="mm/px")
    title = f"{m.source.path or 'image'}  ·  scale ({m.scale.method}) {scale}"
    # wide enough for its title, so that the scale and its uncertainty stay on one line
    table = Table(title=title, title_justify="left", header_style="bold", min_width=min(len(title), 160))
    table.add_column(f"figure ({UNCERTAINTY_SHORT})", justify="left", no_wrap=True)
    for p in m.parts:
        pieces = f" (in {1 + len(p.pieces_mm)} pieces)" if p.pieces_mm else ""
        table.add_column(f"part {p.label}{' (clipped)' if p.cut else ''}{pieces}", justify="right", no_wrap=True)
    shown = [f for f in FIGURES if f.stem not in _NOT_IN_TABLE]
    for fig in shown:
        if fig.stem == "mass" and not any(p.mass_g is not None for p in m.parts):
            continue
        cells = []
        for p in m.parts:
            if fig.stem == "principal_angle" and not p.principal_axes_defined:
                cells.append("undefined (near-round)")
            elif fig.kind == "count":
                cells.append(str(fig.value(p, units)))
            else:
                cells.append(fmt_u(fig.value(p, units), fig.u(p, units)))
        table.add_row(fig.heading(units), *cells)
    return table


def pieces_lines(m: Measurement) -> list[str]:
    """One short note per part found in pieces: its outline is not one closed curve."""
    from scanmass.outputs.export import pieces_note

    notes = [pieces_note(p) for p in m.parts]
    return [
        f"{n}; the figures count every piece; export draws each, a drawing refuses it" for n in notes if n is not None
    ]


#: Figures left out of the terminal table (in the JSON, CSV and report).
_NOT_IN_TABLE = {"bbox_xmin", "bbox_ymin", "bbox_xmax", "bbox_ymax", "gyration_x", "gyration_y"}

UNCERTAINTY_SHORT = "value ± u, u = 1σ"


def holes_table(m: Measurement, units: str = "mm") -> Table | None:
    """Hole positions and sizes of every part, or None when there are no holes."""
    if not any(p.holes for p in m.parts):
        return None
    lu, au = unit_symbol("length", units), unit_symbol("area", units)
    table = Table(title="holes (fitted circles)", title_justify="left", header_style="bold")
    for col in (
        "part",
        "hole",
        f"centre x, {lu}",
        f"centre y, {lu}",
        f"diameter, {lu}",
        f"roundness, {lu}",
        f"area, {au}",
    ):
        table.add_column(col, justify="right", no_wrap=True)

    def ln(v: float | None) -> float | None:
        return convert(v, "length", units)

    for p in m.parts:
        for h in p.holes:
            table.add_row(
                str(p.label),
                str(h.label),
                fmt_u(ln(h.circle_centre_mm[0]), ln(h.circle_centre_u_mm[0])),
                fmt_u(ln(h.circle_centre_mm[1]), ln(h.circle_centre_u_mm[1])),
                fmt_u(ln(h.diameter_mm), ln(h.diameter_u_mm)),
                format_value(ln(h.roundness_mm), None, digits=2)[0],
                fmt_u(convert(h.area_mm2, "area", units), convert(h.area_u_mm2, "area", units)),
            )
    return table
