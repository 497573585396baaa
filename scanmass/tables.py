"""Readable terminal tables (rich) of results; built here, printed by the CLI."""

from __future__ import annotations

import math

from rich.table import Table

from .measurement import Measurement

__all__ = ["fmt_u", "measurement_table", "holes_table"]


def fmt_u(value: float | None, u: float | None = None, *, unit: str = "") -> str:
    """Format ``value ± u`` with the uncertainty to two significant digits.

    Examples
    --------
    >>> fmt_u(1234.5678, 0.0456)
    '1234.568 ± 0.046'
    >>> fmt_u(12.0, None, unit="mm")
    '12 mm'
    """
    if value is None or not math.isfinite(value):
        return "-"
    suffix = f" {unit}" if unit else ""
    if u is None or not math.isfinite(u) or u <= 0:
        return f"{value:.6g}{suffix}"
    decimals = max(0, 1 - int(math.floor(math.log10(u))))
    if abs(value) >= 1e7 or decimals > 8:
        return f"{value:.4e} ± {u:.2g}{suffix}"
    return f"{value:.{decimals}f} ± {u:.{decimals}f}{suffix}"


def measurement_table(m: Measurement) -> Table:
    """One row per part with the main figures and their standard uncertainties."""
    title = f"{m.source.path or 'image'}  ·  scale {m.scale.method}: {m.scale.mm_per_px:.6g} mm/px (±{100 * m.scale.mm_per_px_rel_u:.2g} %)"
    table = Table(title=title, title_justify="left", header_style="bold")
    has_mass = any(p.mass_g is not None for p in m.parts)
    for col, justify in (("part", "right"), ("area mm²", "right"), ("centroid x, y mm", "right"),
                         ("Ixx / Iyy / Ixy mm⁴", "right"), ("I1 / I2 mm⁴ @ angle", "right"), ("holes Ø mm", "left")):
        table.add_column(col, justify=justify)
    if has_mass:
        table.add_column("mass g", justify="right")
    for p in m.parts:
        row = [
            f"{p.label}{' (cut)' if p.cut else ''}",
            fmt_u(p.area_mm2, p.area_u_mm2),
            f"{fmt_u(p.centroid_mm[0], p.centroid_u_mm[0])}\n{fmt_u(p.centroid_mm[1], p.centroid_u_mm[1])}",
            f"{p.ixx_mm4:.5g}\n{p.iyy_mm4:.5g}\n{p.ixy_mm4:.5g}",
            f"{p.i1_mm4:.5g}\n{p.i2_mm4:.5g}\n@ {p.principal_angle_deg:.2f}°",
            "\n".join(fmt_u(h.diameter_mm, h.diameter_u_mm) for h in p.holes) or "-",
        ]
        if has_mass:
            row.append(fmt_u(p.mass_g, p.mass_u_g))
        table.add_row(*row)
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
            table.add_row(str(p.label), str(h.label), fmt_u(h.circle_centre_mm[0], h.circle_centre_u_mm[0]),
                          fmt_u(h.circle_centre_mm[1], h.circle_centre_u_mm[1]), fmt_u(h.diameter_mm, h.diameter_u_mm),
                          f"{h.roundness_mm:.3f}", fmt_u(h.area_mm2, h.area_u_mm2))
    return table
