"""Terminal tables (rich) of materials, assemblies and unbalance results; printed by the CLI."""

from __future__ import annotations

import math
from collections.abc import Mapping

from rich.console import JustifyMethod
from rich.table import Table

from scanmass.cli.tables import fmt_u
from scanmass.mass.assembly import AssemblyResult
from scanmass.mass.balance import BalanceResult
from scanmass.mass.materials import Material
from scanmass.names import convert, unit_symbol
from scanmass.outputs.formatting import format_value

__all__ = ["materials_table", "assembly_table", "assembly_summary_table", "balance_table"]


def materials_table(table: Mapping[str, Material]) -> Table:
    """One row per material: key, name, density and range, standard uncertainty, source."""
    out = Table(
        title="materials (u = standard uncertainty of the density: range half-width / √3)",
        title_justify="left",
        header_style="bold",
    )
    out.add_column("key", no_wrap=True)
    out.add_column("name")
    out.add_column("density, kg/m³", justify="right", no_wrap=True)
    out.add_column("range, kg/m³", justify="right", no_wrap=True)
    out.add_column("u, kg/m³", justify="right", no_wrap=True)
    out.add_column("source")
    for key, mat in table.items():
        out.add_row(
            key,
            mat.name,
            f"{mat.density_kg_m3:g}",
            f"{mat.density_min_kg_m3:g}–{mat.density_max_kg_m3:g}",
            format_value(mat.density_u_kg_m3, None, digits=2)[0],
            mat.source_text,
        )
    return out


def assembly_table(result: AssemblyResult, units: str = "mm") -> Table:
    """The per-member table: signed mass (cut-outs negative) and centre of mass in the assembly frame.

    Thickness and centre of mass in ``units`` (mm or in).
    """
    lu = unit_symbol("length", units)
    title = f"{result.name or result.path or 'assembly'}: members"
    out = Table(title=title, title_justify="left", header_style="bold")
    columns: tuple[tuple[str, JustifyMethod], ...] = (
        ("#", "right"),
        ("member", "left"),
        ("source:part", "left"),
        (f"material, t {lu}", "left"),
        ("n", "right"),
        ("mass g (± 1σ)", "right"),
        (f"CoM x, y, z {lu}", "right"),
    )
    for col, justify in columns:
        out.add_column(col, justify=justify, overflow="fold")
    for m in result.members:
        out.add_row(
            str(m.index),
            m.name + (" (cut-out)" if m.cutout else ""),
            f"{m.source}:{m.part}",
            f"{m.material}, {convert(m.thickness_mm, 'length', units):.4g}",
            str(m.count),
            fmt_u(m.mass_g, m.mass_u_g),
            ", ".join(f"{convert(c, 'length', units):.{2 if units == 'mm' else 4}f}" for c in m.centre_of_mass_mm),
        )
    return out


def assembly_summary_table(result: AssemblyResult, units: str = "mm") -> Table:
    """Totals: mass, weight, centre of mass, inertia tensor and principal moments (lengths in ``units``)."""
    lu, mu = unit_symbol("length", units), unit_symbol("mass_moment", units)

    def moment(value: float) -> float:
        return float(convert(value, "mass_moment", units))

    out = Table(
        title="assembly totals (± 1σ); inertia about the centre of mass", title_justify="left", header_style="bold"
    )
    out.add_column("figure", no_wrap=True)
    out.add_column("value", justify="right", no_wrap=True)
    out.add_row("mass g", fmt_u(result.mass_g, result.mass_u_g))
    out.add_row("weight N (standard gravity)", fmt_u(result.weight_n, result.weight_u_n))
    for axis, value, u in zip("xyz", result.centre_of_mass_mm, result.centre_of_mass_u_mm):
        out.add_row(f"centre of mass {axis} {lu}", fmt_u(convert(value, "length", units), convert(u, "length", units)))
    for name, (i, j) in zip(("xx", "yy", "zz"), ((0, 0), (1, 1), (2, 2))):
        out.add_row(
            f"moment of inertia I{name} {mu}",
            fmt_u(moment(result.inertia_g_mm2[i, j]), moment(result.inertia_u_g_mm2[i, j])),
        )
    # products of inertia ∫(x − xc)(y − yc) dm: the same sign as a part's Ixy (the tensor holds their negatives)
    for name, (i, j) in zip(("xy", "xz", "yz"), ((0, 1), (0, 2), (1, 2))):
        out.add_row(
            f"product of inertia P{name} {mu}",
            fmt_u(-moment(result.inertia_g_mm2[i, j]), moment(result.inertia_u_g_mm2[i, j])),
        )
    for k, (value, u, axis) in enumerate(
        zip(result.principal_g_mm2, result.principal_u_g_mm2, result.principal_axes), 1
    ):
        direction = ", ".join(f"{c:+.4f}" for c in axis)
        out.add_row(f"principal I{k} {mu} (axis {direction})", fmt_u(moment(value), moment(u)))
    return out


def balance_table(result: BalanceResult, units: str = "mm") -> Table:
    """The unbalance figures and the correction, one figure per row.

    Lengths (and the permissible offset) in one unit, ``units`` (mm or in); the
    correction is shown only when the correction hole fits in the material.
    """
    lu, uu = unit_symbol("length", units), unit_symbol("unbalance", units)
    title = f"{result.source or 'part'}: part {result.part} spinning about hole {result.hole}"
    out = Table(title=title, title_justify="left", header_style="bold")
    out.add_column("figure (value ± u, u = 1σ)", no_wrap=True)
    out.add_column("value", justify="right", no_wrap=True)

    def ln(value: float | None) -> float | None:
        return convert(value, "length", units)

    def row(name: str, text: str | None) -> None:
        if text is not None:
            out.add_row(name, text)

    def num(value: float | None, digits: int = 4) -> str | None:
        return None if value is None or not math.isfinite(value) else format_value(value, None, digits=digits)[0]

    ax = ", ".join(fmt_u(ln(v), ln(u)) for v, u in zip(result.axis_mm, result.axis_u_mm))
    row(f"axis (bore centre) x, y, {lu}", ax)
    row(f"bore diameter, {lu}", num(ln(result.bore_diameter_mm)))
    row("mass, g", fmt_u(result.mass_g, result.mass_u_g))
    row(f"centre-of-mass offset e, {lu}", fmt_u(ln(result.offset_mm), ln(result.offset_u_mm)))
    row(f"static unbalance U, {uu}", fmt_u(ln(result.unbalance_gmm), ln(result.unbalance_u_gmm)))
    row("heavy spot angle, °", num(result.heavy_angle_deg, 3))
    if result.permissible_gmm is not None and result.permissible_offset_mm is not None:
        row(f"permissible U (G {result.grade_mm_s:g}, {result.rpm:g} rpm), {uu}", num(ln(result.permissible_gmm)))
        row(f"permissible offset, {lu}", num(ln(result.permissible_offset_mm)))
    row(f"smallest offset resolved at 2σ, {lu}", num(ln(result.resolvable_offset_mm)))
    if result.correction_radius_mm is not None:
        row(f"correction radius, {lu}", num(ln(result.correction_radius_mm)))
        row(f"through-hole diameter, {lu}", num(ln(result.hole_diameter_mm)))
        if result.applied_hole_diameter_mm != result.hole_diameter_mm:
            row(f"rounded hole diameter, {lu}", num(ln(result.applied_hole_diameter_mm)))
        row("hole fits in material", {True: "yes", False: "NO", None: "unknown"}[result.correction_fits])
        if result.correction_fits is not False:
            row(f"remove at {result.remove_angle_deg:.1f}°, g", num(result.remove_mass_g))
            row(f"or add at {result.add_angle_deg:.1f}°, g", num(result.add_mass_g))
            if result.drill_depth_mm is not None:
                row(
                    f"blind-hole depth with ⌀{num(ln(result.drill_diameter_mm))} {lu} drill, {lu}",
                    num(ln(result.drill_depth_mm)),
                )
            row(
                f"U after correction, {uu}",
                fmt_u(ln(result.corrected_unbalance_gmm), ln(result.corrected_unbalance_u_gmm)),
            )
    return out
