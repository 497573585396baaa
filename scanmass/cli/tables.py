"""Readable terminal tables (rich) of results; built here, printed by the CLI."""

from __future__ import annotations

from rich.table import Table

from scanmass.measurement import Measurement
from scanmass.outputs.formatting import _finite, format_value

__all__ = ["fmt_u", "measurement_table", "holes_table"]


def fmt_u(value: float | None, u: float | None = None, *, unit: str = "") -> str:
    """Format ``value ± u`` with the uncertainty to two significant digits
    (:func:`scanmass.outputs.formatting.format_value`).

    Examples
    --------
    >>> fmt_u(1234.5678, 0.0456)
    '1234.568 ± 0.046'
    >>> fmt_u(12.0, None, unit="mm")
    '12 mm'
    """
    if _finite(value) is None:
        return "-"
    text, u_text = format_value(value, u)
    suffix = f" {unit}" if unit else ""
    return f"{text} ± {u_text}{suffix}" if u_text else f"{text}{suffix}"


def measurement_table(m: Measurement) -> Table:
    """The main figures of every part, one column per part (reads well in narrow terminals)."""
    title = f"{m.source.path or 'image'}  ·  scale {m.scale.method}: {m.scale.mm_per_px:.6g} mm/px (±{100 * m.scale.mm_per_px_rel_u:.2g} %)"
    table = Table(title=title, title_justify="left", header_style="bold")
    table.add_column("figure (± 1σ)", justify="left", no_wrap=True)
    for p in m.parts:
        table.add_column(f"part {p.label}{' (cut)' if p.cut else ''}", justify="right", no_wrap=True)
    rows = [
        ("area mm²", [fmt_u(p.area_mm2, p.area_u_mm2) for p in m.parts]),
        ("centroid x mm", [fmt_u(p.centroid_mm[0], p.centroid_u_mm[0]) for p in m.parts]),
        ("centroid y mm", [fmt_u(p.centroid_mm[1], p.centroid_u_mm[1]) for p in m.parts]),
        ("perimeter mm", [fmt_u(p.perimeter_mm, p.perimeter_u_mm) for p in m.parts]),
        ("Ixx mm⁴", [fmt_u(p.ixx_mm4, p.ixx_u_mm4) for p in m.parts]),
        ("Iyy mm⁴", [fmt_u(p.iyy_mm4, p.iyy_u_mm4) for p in m.parts]),
        ("Ixy mm⁴", [fmt_u(p.ixy_mm4, p.ixy_u_mm4) for p in m.parts]),
        ("I1 mm⁴", [fmt_u(p.i1_mm4, p.i1_u_mm4) for p in m.parts]),
        ("I2 mm⁴", [fmt_u(p.i2_mm4, p.i2_u_mm4) for p in m.parts]),
        ("I2 axis angle °", [fmt_u(p.principal_angle_deg, p.principal_angle_u_deg) for p in m.parts]),
        ("section modulus top/bottom mm³", [f"{p.modulus_top_mm3:.5g} / {p.modulus_bottom_mm3:.5g}" for p in m.parts]),
        ("section modulus right/left mm³", [f"{p.modulus_right_mm3:.5g} / {p.modulus_left_mm3:.5g}" for p in m.parts]),
        ("caliper max/min mm", [f"{p.caliper_max_mm:.3f} / {p.caliper_min_mm:.3f}" for p in m.parts]),
        ("holes", [str(len(p.holes)) for p in m.parts]),
    ]
    if any(p.mass_g is not None for p in m.parts):
        rows.append(("mass g", [fmt_u(p.mass_g, p.mass_u_g) for p in m.parts]))
    for name, values in rows:
        table.add_row(name, *values)
    return table


def holes_table(m: Measurement) -> Table | None:
    """Hole positions and sizes of every part, or None when there are no holes."""
    if not any(p.holes for p in m.parts):
        return None
    table = Table(title="holes (fitted circles)", title_justify="left", header_style="bold")
    for col in ("part", "hole", "centre x mm", "centre y mm", "diameter mm", "roundness mm", "area mm²"):
        table.add_column(col, justify="right")
    for p in m.parts:
        for h in p.holes:
            table.add_row(
                str(p.label),
                str(h.label),
                fmt_u(h.circle_centre_mm[0], h.circle_centre_u_mm[0]),
                fmt_u(h.circle_centre_mm[1], h.circle_centre_u_mm[1]),
                fmt_u(h.diameter_mm, h.diameter_u_mm),
                f"{h.roundness_mm:.3f}",
                fmt_u(h.area_mm2, h.area_u_mm2),
            )
    return table
