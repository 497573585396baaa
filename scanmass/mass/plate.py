"""Mass, weight and mass moments of inertia of flat parts cut from sheet.

A part of area A (mm2), thickness t (mm) and density rho is a prism: its mass is
rho A t and its centre of mass lies above the area centroid at mid-thickness. The mass
moments of inertia about axes through the centre of mass follow from the second
moments of area (DESIGN.md: Ixx = integral (y - yc)^2 dA, ...) plus the thickness
term m t^2 / 12 for the in-plane axes.
"""

from __future__ import annotations

import copy
import math
from collections.abc import Mapping
from dataclasses import asdict, dataclass
from os import PathLike
from typing import Any

import numpy as np

from scanmass.errors import OptionError
from scanmass.mass.materials import Material, resolve_material
from scanmass.measurement import Measurement, Part
from scanmass.options import check_positive

__all__ = [
    "STANDARD_GRAVITY_M_S2",
    "MassProperties",
    "plate_mass",
    "apply_mass",
    "check_positive",
    "material_record",
]

#: Standard acceleration of free fall, m/s^2 (3rd CGPM 1901; ISO 80000-3:2019, item 3-9.1).
STANDARD_GRAVITY_M_S2 = 9.80665

#: 1 kg/m3 expressed in g/mm3.
_KG_M3_TO_G_MM3 = 1e-6


@dataclass
class MassProperties:
    """Mass figures of one flat part cut from sheet.

    Inertias are in g mm2 about axes through the centre of mass, parallel to x, y and
    the plate normal z. ``ixy_g_mm2`` is the product of inertia integral (x - xc)(y - yc) dm
    (same sign as the product of area); the inertia tensor holds -ixy off the diagonal.
    The products with z vanish for a flat plate. ``centre_of_mass_mm`` is (xc, yc, t/2),
    z measured from the plate's bottom face. Each ``_u`` value is a 1-sigma standard
    uncertainty from first-order propagation of the area, thickness, density and
    second-moment uncertainties, taken as independent.
    """

    material: str
    density_kg_m3: float
    density_u_kg_m3: float
    thickness_mm: float
    thickness_u_mm: float
    volume_mm3: float
    volume_u_mm3: float
    mass_g: float
    mass_u_g: float
    weight_n: float
    weight_u_n: float
    areal_mass_kg_m2: float
    areal_mass_u_kg_m2: float
    centre_of_mass_mm: tuple[float, float, float]
    ix_g_mm2: float
    iy_g_mm2: float
    iz_g_mm2: float
    ixy_g_mm2: float
    ix_u_g_mm2: float
    iy_u_g_mm2: float
    iz_u_g_mm2: float
    ixy_u_g_mm2: float

    def inertia_tensor_g_mm2(self) -> np.ndarray:
        """The 3x3 inertia tensor about the centre of mass, g mm2 (off-diagonals are minus the products)."""
        return np.array(
            [
                [self.ix_g_mm2, -self.ixy_g_mm2, 0.0],
                [-self.ixy_g_mm2, self.iy_g_mm2, 0.0],
                [0.0, 0.0, self.iz_g_mm2],
            ]
        )

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready values."""
        return asdict(self)


def plate_mass(
    part: Part,
    material: Material | str,
    thickness_mm: float,
    *,
    thickness_u_mm: float = 0.0,
    materials: Mapping[str, Material] | str | PathLike[str] | None = None,
) -> MassProperties:
    """Mass, weight and mass moments of inertia of a part cut from a sheet.

    Parameters
    ----------
    part : Part
        A measured part (area, centroid and second moments in mm).
    material : Material or str
        A Material or a name looked up with :func:`scanmass.mass.materials.find_material`.
    thickness_mm : float
        Sheet thickness, > 0.
    thickness_u_mm : float, optional
        Standard uncertainty of the thickness (e.g. a tolerance half-width / sqrt 3).
    materials : mapping or path, optional
        Material table, or a user materials TOML file added to the shipped table.

    Returns
    -------
    MassProperties

    Notes
    -----
    With k = rho t (areal mass) and m = k A, about axes through the centre of mass:

    - Ix = k Ixx + m t^2 / 12, Iy = k Iyy + m t^2 / 12 (in-plane axes);
    - Iz = k (Ixx + Iyy) (plate normal; perpendicular-axis theorem);
    - ixy = k Ixy (product of inertia).

    The t^2 / 12 term is exact for a prism of uniform thickness. For a thin rectangle
    a x b these reduce to the handbook values m b^2/12, m a^2/12 and m (a^2 + b^2)/12;
    for a disc of radius r to m r^2/4 and m r^2/2.
    Weight uses standard gravity 9.80665 m/s^2, not local gravity.

    References
    ----------
    ISO 80000-3:2019, Quantities and units -- Part 3: Space and time, item 3-9.1
    (standard acceleration of free fall).
    JCGM 100:2008 (GUM), clause 5.1.2 (law of propagation of uncertainty).

    Examples
    --------
    A 100 mm x 50 mm carbon-steel plate, 2 mm thick, weighs 7850e-6 g/mm3 x 5000 mm2
    x 2 mm = 78.5 g; this is checked in tests/test_mass.py.
    """
    mat = resolve_material(material, materials)
    t = check_positive("thickness_mm", thickness_mm, hint="pass the sheet thickness in mm, e.g. 2.0")
    ut = check_positive(
        "thickness_u_mm", thickness_u_mm, allow_zero=True, hint="pass the thickness's standard uncertainty in mm, or 0"
    )
    area = float(part.area_mm2)
    if not (math.isfinite(area) and area > 0):
        raise OptionError(f"part {part.label} has no positive area ({area!r} mm2); re-measure it")
    rho = mat.density_kg_m3 * _KG_M3_TO_G_MM3  # g/mm3
    urho = mat.density_u_kg_m3 * _KG_M3_TO_G_MM3
    ua = float(part.area_u_mm2)
    ixx, iyy, ixy = float(part.ixx_mm4), float(part.iyy_mm4), float(part.ixy_mm4)
    uxx, uyy, uxy = float(part.ixx_u_mm4), float(part.iyy_u_mm4), float(part.ixy_u_mm4)
    polar = ixx + iyy
    upolar = float(part.polar_u_mm4) if math.isfinite(float(part.polar_u_mm4)) else math.hypot(uxx, uyy)

    k = rho * t  # areal mass, g/mm2
    volume = area * t
    mass = k * area
    r_rho, r_t, r_a = urho / rho, ut / t, ua / area
    mass_u = mass * math.sqrt(r_rho**2 + r_t**2 + r_a**2)
    volume_u = volume * math.hypot(r_t, r_a)
    thick = mass * t * t / 12.0

    def in_plane(i_area: float, u_area4: float) -> tuple[float, float]:
        value = k * i_area + thick
        # partial derivatives of rho t I + rho A t^3 / 12
        d_rho = value / rho
        d_t = rho * i_area + rho * area * t * t / 4.0
        d_a = rho * t**3 / 12.0
        d_i = k
        return value, math.sqrt((d_rho * urho) ** 2 + (d_t * ut) ** 2 + (d_a * ua) ** 2 + (d_i * u_area4) ** 2)

    ix, ix_u = in_plane(ixx, uxx)
    iy, iy_u = in_plane(iyy, uyy)
    iz = k * polar
    iz_u = math.sqrt((iz * r_rho) ** 2 + (iz * r_t) ** 2 + (k * upolar) ** 2)
    pxy = k * ixy
    pxy_u = math.sqrt((pxy * r_rho) ** 2 + (pxy * r_t) ** 2 + (k * uxy) ** 2)

    g = STANDARD_GRAVITY_M_S2
    return MassProperties(
        material=mat.key,
        density_kg_m3=mat.density_kg_m3,
        density_u_kg_m3=mat.density_u_kg_m3,
        thickness_mm=t,
        thickness_u_mm=ut,
        volume_mm3=volume,
        volume_u_mm3=volume_u,
        mass_g=mass,
        mass_u_g=mass_u,
        weight_n=mass * 1e-3 * g,
        weight_u_n=mass_u * 1e-3 * g,
        areal_mass_kg_m2=mat.density_kg_m3 * t * 1e-3,
        areal_mass_u_kg_m2=mat.density_kg_m3 * t * 1e-3 * math.hypot(r_rho, r_t),
        centre_of_mass_mm=(float(part.centroid_mm[0]), float(part.centroid_mm[1]), t / 2.0),
        ix_g_mm2=ix,
        iy_g_mm2=iy,
        iz_g_mm2=iz,
        ixy_g_mm2=pxy,
        ix_u_g_mm2=ix_u,
        iy_u_g_mm2=iy_u,
        iz_u_g_mm2=iz_u,
        ixy_u_g_mm2=pxy_u,
    )


def material_record(material: Material, thickness_mm: float, thickness_u_mm: float) -> dict[str, Any]:
    """The ``measurement.material`` record: which material and sheet the masses assume."""
    return {
        "key": material.key,
        "name": material.name,
        "density_kg_m3": material.density_kg_m3,
        "density_u_kg_m3": material.density_u_kg_m3,
        "density_min_kg_m3": material.density_min_kg_m3,
        "density_max_kg_m3": material.density_max_kg_m3,
        "thickness_mm": thickness_mm,
        "thickness_u_mm": thickness_u_mm,
        "source": material.source_text,
    }


def apply_mass(
    measurement: Measurement,
    material: Material | str,
    thickness_mm: float,
    *,
    thickness_u_mm: float = 0.0,
    materials: Mapping[str, Material] | str | PathLike[str] | None = None,
) -> Measurement:
    """Return a copy of ``measurement`` with mass figures filled in for every part.

    Each part gets ``mass_g``, ``mass_u_g`` and ``mass`` (a dict with the other fields of
    :class:`MassProperties`); ``material`` records the material and sheet thickness.
    The input is not modified.

    Parameters
    ----------
    measurement : Measurement
    material : Material or str
    thickness_mm : float
        Sheet thickness, > 0.
    thickness_u_mm : float, optional
        Its standard uncertainty, >= 0.
    materials : mapping or path, optional
        Material table, or a user materials TOML file added to the shipped table.

    Raises
    ------
    OptionError
        Missing, zero, negative or non-finite thickness.
    MaterialError
        Unknown material (the message lists close names).
    """
    t = check_positive("thickness_mm", thickness_mm, hint="pass the sheet thickness in mm, e.g. 2.0")
    ut = check_positive(
        "thickness_u_mm", thickness_u_mm, allow_zero=True, hint="pass the thickness's standard uncertainty in mm, or 0"
    )
    mat = resolve_material(material, materials)
    out = copy.deepcopy(measurement)
    for part in out.parts:
        props = plate_mass(part, mat, t, thickness_u_mm=ut)
        rest = props.to_dict()
        for key in (
            "mass_g",
            "mass_u_g",
            "material",
            "density_kg_m3",
            "density_u_kg_m3",
            "thickness_mm",
            "thickness_u_mm",
        ):
            rest.pop(key)
        part.mass_g = props.mass_g
        part.mass_u_g = props.mass_u_g
        part.mass = rest
    out.material = material_record(mat, t, ut)
    if isinstance(material, str):
        out.material["requested"] = material  # the name given, shown beside the key it resolved to
    return out
