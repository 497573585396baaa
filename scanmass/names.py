"""The one table of figure names: JSON key, CSV column, label, symbol and unit of each figure.

Every output that names a figure of a part takes the name from :data:`FIGURES`: the
terminal tables, the JSON and CSV result documents, the HTML report and the overlay
legend. A figure's JSON key is ``<stem>_<unit>`` in millimetres (``area_mm2``), its
standard uncertainty ``<stem>_u_<unit>`` (``area_u_mm2``); the CSV uses the same names, in
the unit chosen for people (``--units in`` gives ``area_in2``). Pairs in the JSON
(``centroid_mm`` = [x, y]) are two figures here (``centroid_x_mm``, ``centroid_y_mm``).

Conventions (stated once, here and in the README): Ixx = ∫(y − yc)² dA, Iyy = ∫(x − xc)² dA
and the product moment of area Ixy = ∫(x − xc)(y − yc) dA, which can be negative; the
products of inertia of a plate and of an assembly, ∫(x − xc)(y − yc) dm, have the same sign
as Ixy (the inertia tensor's off-diagonal terms are their negatives). Ip = Ixx + Iyy is the
polar second moment of area, not the torsion constant. Section moduli are Z (W is weight).

This module imports only the standard library.

Examples
--------
>>> FIGURE["polar"].label, FIGURE["polar"].symbol, FIGURE["polar"].key()
('Polar second moment of area', 'Ip', 'polar_mm4')
>>> FIGURE["area"].key("in"), FIGURE["area"].u_key("in")
('area_in2', 'area_u_in2')
>>> convert(25.4, "length", "in")
1.0
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

__all__ = [
    "INCH_MM",
    "UNITS",
    "Figure",
    "FIGURES",
    "FIGURE",
    "UNCERTAINTY_NOTE",
    "check_units",
    "convert",
    "unit_symbol",
    "unit_suffix",
]

#: One inch in millimetres, exactly (international yard and pound agreement, 1959).
INCH_MM = 25.4

#: Unit systems for what people read; the JSON stays in millimetres.
UNITS = ("mm", "in")

#: How every output states an uncertainty (one notation everywhere).
UNCERTAINTY_NOTE = "value ± u, u = standard uncertainty (1σ); multiply by k = 2 for about 95 % coverage"

# unit kind -> (power of length, mm suffix, mm symbol, inch suffix, inch symbol)
_KINDS: dict[str, tuple[int, str, str, str, str]] = {
    "length": (1, "mm", "mm", "in", "in"),
    "area": (2, "mm2", "mm²", "in2", "in²"),
    "modulus": (3, "mm3", "mm³", "in3", "in³"),
    "volume": (3, "mm3", "mm³", "in3", "in³"),
    "second_moment": (4, "mm4", "mm⁴", "in4", "in⁴"),
    "angle": (0, "deg", "°", "deg", "°"),
    "mass": (0, "g", "g", "g", "g"),
    "mass_moment": (2, "g_mm2", "g·mm²", "g_in2", "g·in²"),
    "unbalance": (1, "g_mm", "g·mm", "g_in", "g·in"),
    "count": (0, "", "", "", ""),
}


def check_units(units: str) -> str:
    """Return ``units`` if it is ``"mm"`` or ``"in"``, else raise :class:`~scanmass.errors.OptionError`."""
    if units not in UNITS:
        from scanmass.errors import OptionError

        raise OptionError(f"units {units!r} must be mm or in, e.g. --units in")
    return units


def convert(value: Any, kind: str, units: str = "mm") -> Any:
    """A value of ``kind`` given in mm (mm², mm⁴, ...) expressed in ``units``; None stays None."""
    if value is None or units == "mm":
        return value
    power = _KINDS[kind][0]
    return value / INCH_MM**power if power else value


def unit_suffix(kind: str, units: str = "mm") -> str:
    """The suffix of a key in ``units``: ``mm2``, ``in4``, ``deg``, ``g``."""
    k = _KINDS[kind]
    return k[1] if units == "mm" else k[3]


def unit_symbol(kind: str, units: str = "mm") -> str:
    """The unit as people read it: ``mm²``, ``in⁴``, ``°``."""
    k = _KINDS[kind]
    return k[2] if units == "mm" else k[4]


@dataclass(frozen=True)
class Figure:
    """One figure of a part.

    ``attr`` is the :class:`~scanmass.measurement.Part` attribute (``index`` picks one of a
    pair); ``u_attr`` its standard uncertainty's attribute, or None when none is stated.
    """

    stem: str
    kind: str
    label: str
    symbol: str
    attr: str
    u_attr: str | None = None
    index: int | None = None

    def key(self, units: str = "mm") -> str:
        """JSON key / CSV column in ``units`` (``area_mm2``)."""
        suffix = unit_suffix(self.kind, units)
        return f"{self.stem}_{suffix}" if suffix else self.stem

    def u_key(self, units: str = "mm") -> str:
        """The uncertainty's JSON key / CSV column (``area_u_mm2``)."""
        return f"{self.stem}_u_{unit_suffix(self.kind, units)}"

    def unit(self, units: str = "mm") -> str:
        return unit_symbol(self.kind, units)

    def heading(self, units: str = "mm") -> str:
        """Label and unit for a table row: ``Area, mm²``."""
        unit = self.unit(units)
        return f"{self.label}, {unit}" if unit else self.label

    def value(self, part: Any, units: str = "mm") -> Any:
        v = getattr(part, self.attr)
        if self.index is not None:
            v = v[self.index]
        if self.kind == "count":
            return len(v) if isinstance(v, list) else v
        return convert(v, self.kind, units)

    def u(self, part: Any, units: str = "mm") -> Any:
        if self.u_attr is None:
            return None
        v = getattr(part, self.u_attr, None)
        if v is not None and self.index is not None:
            v = v[self.index]
        return convert(v, self.kind, units)


def _f(
    stem: str, kind: str, label: str, symbol: str, attr: str | None = None, u: bool = True, index: int | None = None
):
    unit = unit_suffix(kind)
    attr = attr or (f"{stem}_{unit}" if unit else stem)
    u_attr = (f"{stem}_u_{unit}" if index is None else attr.replace("_mm", "_u_mm")) if u else None
    return Figure(stem, kind, label, symbol, attr, u_attr, index)


#: Every figure of a part, in the order the outputs show them.
FIGURES: tuple[Figure, ...] = (
    _f("area", "area", "Area", "A"),
    _f("perimeter", "length", "Perimeter (outline and holes)", "P"),
    _f("centroid_x", "length", "Centroid x", "xc", attr="centroid_mm", index=0),
    _f("centroid_y", "length", "Centroid y", "yc", attr="centroid_mm", index=1),
    _f("ixx", "second_moment", "Second moment of area about x", "Ixx"),
    _f("iyy", "second_moment", "Second moment of area about y", "Iyy"),
    _f("ixy", "second_moment", "Product moment of area", "Ixy"),
    _f("i1", "second_moment", "Principal second moment, largest", "I1"),
    _f("i2", "second_moment", "Principal second moment, smallest", "I2"),
    _f("principal_angle", "angle", "I2 axis angle (from +x)", "θ"),
    _f("polar", "second_moment", "Polar second moment of area", "Ip"),
    _f("gyration_x", "length", "Radius of gyration about x", "kx"),
    _f("gyration_y", "length", "Radius of gyration about y", "ky"),
    _f("gyration_1", "length", "Radius of gyration about the I1 axis", "k1"),
    _f("gyration_2", "length", "Radius of gyration about the I2 axis", "k2"),
    _f("modulus_top", "modulus", "Section modulus, top fibre", "Z top"),
    _f("modulus_bottom", "modulus", "Section modulus, bottom fibre", "Z bottom"),
    _f("modulus_right", "modulus", "Section modulus, right fibre", "Z right"),
    _f("modulus_left", "modulus", "Section modulus, left fibre", "Z left"),
    _f("bbox_xmin", "length", "Bounding box x min", "", attr="bbox_mm", u=False, index=0),
    _f("bbox_ymin", "length", "Bounding box y min", "", attr="bbox_mm", u=False, index=1),
    _f("bbox_xmax", "length", "Bounding box x max", "", attr="bbox_mm", u=False, index=2),
    _f("bbox_ymax", "length", "Bounding box y max", "", attr="bbox_mm", u=False, index=3),
    _f("caliper_max", "length", "Largest width", "wmax"),
    _f("caliper_min", "length", "Smallest width", "wmin"),
    _f("convex_area", "area", "Convex hull area", "Ahull", u=False),
    Figure("hole_count", "count", "Hole count", "", "holes"),
    _f("mass", "mass", "Mass", "m"),
)

#: The figures by stem.
FIGURE: dict[str, Figure] = {f.stem: f for f in FIGURES}
