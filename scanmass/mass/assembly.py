"""Assemblies of flat parts: total mass, 3D centre of mass and inertia tensor.

An assembly is a list of members, each a measured part cut from sheet, placed in the
assembly frame by a rigid motion in the x-y plane (optional mirror, rotation about the
plate normal, translation) and lifted to the height of its bottom face. Members lie
parallel to the x-y plane; cut-outs enter with negative mass.

The assembly file is TOML, lengths in millimetres, or in inches with ``units = "in"``
(then every ``_mm`` key below is written ``_in`` instead: ``thickness_in``, ``dx_in``,
``dy_in``, ``z_in``, ``anchor_in``, ``thickness_u_in``; 1 in = 25.4 mm exactly)::

    units = "mm"                    # optional: "mm" (default) or "in"
    materials = "shop.toml"         # optional user materials file, relative to this file

    [[member]]
    name = "base plate"             # optional
    source = "base.json"            # result JSON, or an image to measure (relative path)
    part = 1                        # part label in the source (optional if it has one part)
    material = "aluminium-6061"
    thickness_mm = 3.0
    thickness_u_mm = 0.05           # optional standard uncertainty
    count = 1                       # identical copies at the same placement
    anchor = "centroid"             # "origin" (default), "centroid", "hole N"; or anchor_mm = [x, y]
    mirror = "x"                    # optional: "x" negates x, "y" negates y (before rotating)
    rotate_deg = 90.0               # about the plate normal, counter-clockwise
    dx_mm = 0.0                     # where the anchor lands
    dy_mm = 0.0
    z_mm = 0.0                      # height of the member's bottom face
    cutout = false                  # true: a negative member (material removed)
    dpi = 600                       # for an image source: scanner resolution
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from os import PathLike
from pathlib import Path
from typing import Any

import numpy as np

from scanmass.errors import OptionError, ScanmassError
from scanmass.mass.materials import Material, load_materials, resolve_material
from scanmass.mass.plate import STANDARD_GRAVITY_M_S2, check_positive
from scanmass.measurement import Measurement, Part, _clean
from scanmass.names import check_units, convert
from scanmass.readfile import read_toml

__all__ = [
    "ASSEMBLY_SCHEMA",
    "ASSEMBLY_CSV_COLUMNS",
    "assembly_csv_columns",
    "LIFTING_CAUTION",
    "PRODUCTS_NOTE",
    "Member",
    "MemberResult",
    "AssemblyResult",
    "load_assembly",
    "assemble",
    "combine_members",
    "load_measurement",
    "select_part",
]

#: Schema identifier of the assembly result document.
ASSEMBLY_SCHEMA = "scanmass.assembly/2"

#: Sign convention (one for parts and assemblies): a product of inertia is
#: ∫(x − xc)(y − yc) dm, the same sign as a part's product moment of area Ixy; the inertia
#: tensor's off-diagonal terms are the negatives of the products.
PRODUCTS_NOTE = (
    "products of inertia P = ∫(x − xc)(y − yc) dm have the sign of a part's Ixy; the tensor's off-diagonal terms are −P"
)

#: Printed with every assembly result: where the figures stop being enough.
LIFTING_CAUTION = (
    "Masses and centres of mass are computed from nominal densities and flat-sheet geometry; "
    "fasteners, welds, coatings, bends and adhesives are not included. Do not rely on them alone "
    "to choose lifting points or rigging: weigh the assembly, and follow local lifting regulations "
    "and qualified practice."
)

_TOP_KEYS = {"units", "materials", "name", "member"}

#: Limits of an assembly's values: beyond them a file is a typo, and the sums overflow.
MAX_COUNT = 1_000_000
MIN_THICKNESS_MM = 1e-3
MAX_THICKNESS_MM = 1e4
MIN_DENSITY_KG_M3 = 0.1
MAX_DENSITY_KG_M3 = 1e5
MAX_PLACEMENT_MM = 1e7
MAX_ANGLE_DEG = 1e6
_MEMBER_KEYS = {
    "name",
    "source",
    "part",
    "material",
    "thickness_mm",
    "thickness_u_mm",
    "count",
    "anchor",
    "anchor_mm",
    "mirror",
    "rotate_deg",
    "dx_mm",
    "dy_mm",
    "z_mm",
    "cutout",
    "dpi",
}


# -- members -----------------------------------------------------------------------------


@dataclass
class Member:
    """One member of an assembly: a measured part cut from sheet, placed in the assembly.

    The placement maps a point p of the part's own frame to
    R(rotate_deg) M (p - anchor_mm) + (dx_mm, dy_mm), where M negates x (``mirror="x"``)
    or y (``mirror="y"``); the bottom face lies at height ``z_mm``. ``count`` identical
    copies share the placement. A ``cutout`` member removes material (negative mass).
    ``source`` names where the part came from (for the tables). Members holding the same
    Part object share that part's measurement errors.
    """

    part: Part
    material: Material
    thickness_mm: float
    thickness_u_mm: float = 0.0
    count: int = 1
    dx_mm: float = 0.0
    dy_mm: float = 0.0
    rotate_deg: float = 0.0
    mirror: str | None = None
    z_mm: float = 0.0
    cutout: bool = False
    anchor_mm: tuple[float, float] = (0.0, 0.0)
    name: str = ""
    source: str = ""

    def orientation(self) -> np.ndarray:
        """The 3x3 matrix R M taking the part's axes to the assembly's."""
        c, s = math.cos(math.radians(self.rotate_deg)), math.sin(math.radians(self.rotate_deg))
        rot = np.array([[c, -s, 0.0], [s, c, 0.0], [0.0, 0.0, 1.0]])
        flip = np.diag([-1.0 if self.mirror == "x" else 1.0, -1.0 if self.mirror == "y" else 1.0, 1.0])
        return rot @ flip


@dataclass
class MemberResult:
    """One row of the per-member table; figures include the count and the cut-out sign.

    ``inertia_g_mm2`` is the member's own inertia tensor about its own centre of mass,
    in assembly axes.
    """

    index: int
    name: str
    source: str
    part: int
    material: str
    thickness_mm: float
    count: int
    cutout: bool
    mass_each_g: float
    mass_g: float
    mass_u_g: float
    centre_of_mass_mm: tuple[float, float, float]
    inertia_g_mm2: np.ndarray = field(repr=False)


@dataclass
class AssemblyResult:
    """Mass properties of an assembly.

    ``inertia_g_mm2`` is the 3x3 inertia tensor about the assembly's centre of mass
    (diagonal: moments of inertia; off-diagonal: minus the products of inertia).
    ``principal_g_mm2`` holds its eigenvalues, largest first, and ``principal_axes`` the
    matching unit axes as rows (a right-handed set). Each ``_u`` value is a 1-sigma
    standard uncertainty (see :func:`combine_members` for the error model).
    """

    members: list[MemberResult]
    mass_g: float
    mass_u_g: float
    weight_n: float
    weight_u_n: float
    centre_of_mass_mm: tuple[float, float, float]
    centre_of_mass_u_mm: tuple[float, float, float]
    inertia_g_mm2: np.ndarray
    inertia_u_g_mm2: np.ndarray
    principal_g_mm2: tuple[float, float, float]
    principal_u_g_mm2: tuple[float, float, float]
    principal_axes: np.ndarray
    path: str | None = None
    name: str = ""
    notes: list[str] = field(default_factory=list)
    cautions: str = LIFTING_CAUTION
    schema: str = ASSEMBLY_SCHEMA

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready values."""
        members = []
        for m in self.members:
            members.append(
                {
                    "index": m.index,
                    "name": m.name,
                    "source": m.source,
                    "part": m.part,
                    "material": m.material,
                    "thickness_mm": m.thickness_mm,
                    "count": m.count,
                    "cutout": m.cutout,
                    "mass_each_g": m.mass_each_g,
                    "mass_g": m.mass_g,
                    "mass_u_g": m.mass_u_g,
                    "centre_of_mass_mm": m.centre_of_mass_mm,
                    "inertia_g_mm2": m.inertia_g_mm2,
                }
            )
        return _clean(
            {
                "schema": self.schema,
                "path": self.path,
                "name": self.name,
                "mass_g": self.mass_g,
                "mass_u_g": self.mass_u_g,
                "weight_n": self.weight_n,
                "weight_u_n": self.weight_u_n,
                "centre_of_mass_mm": self.centre_of_mass_mm,
                "centre_of_mass_u_mm": self.centre_of_mass_u_mm,
                "inertia_g_mm2": self.inertia_g_mm2,
                "inertia_u_g_mm2": self.inertia_u_g_mm2,
                "products_g_mm2": {
                    "xy": -self.inertia_g_mm2[0, 1],
                    "xz": -self.inertia_g_mm2[0, 2],
                    "yz": -self.inertia_g_mm2[1, 2],
                    "note": PRODUCTS_NOTE,
                },
                "principal_g_mm2": self.principal_g_mm2,
                "principal_u_g_mm2": self.principal_u_g_mm2,
                "principal_axes": self.principal_axes,
                "members": members,
                "notes": list(self.notes),
                "cautions": self.cautions,
            }
        )

    def to_json(self, *, indent: int | None = 1) -> str:
        """The assembly result document as JSON text."""
        return json.dumps(self.to_dict(), indent=indent, allow_nan=False)

    def to_csv(self, units: str = "mm") -> str:
        """The per-member table as CSV, then one ``total`` row (tensor about the assembly's
        centre of mass). ``inertia_*`` are the moments of inertia, ``product_*`` the products of
        inertia with the sign of a part's Ixy (:data:`PRODUCTS_NOTE`). With ``units`` "in",
        lengths are in inches and mass moments in g·in², and the column names say so
        (``com_x_in``, ``inertia_xx_g_in2``)."""
        columns = assembly_csv_columns(check_units(units))
        buf = io.StringIO()
        writer = csv.DictWriter(buf, fieldnames=columns, lineterminator="\n")
        writer.writeheader()
        rows = [
            _csv_row(
                "member",
                m.index,
                m.name,
                m.source,
                m.part,
                m.material,
                m.thickness_mm,
                m.count,
                m.cutout,
                m.mass_g,
                m.mass_u_g,
                m.centre_of_mass_mm,
                m.inertia_g_mm2,
            )
            for m in self.members
        ]
        rows.append(
            _csv_row(
                "total",
                "",
                self.name,
                self.path or "",
                "",
                "",
                "",
                "",
                "",
                self.mass_g,
                self.mass_u_g,
                self.centre_of_mass_mm,
                self.inertia_g_mm2,
            )
        )
        for row in rows:
            values = [_in_units(key, value, units) for key, value in _clean(row).items()]
            writer.writerow({k: "" if v is None else v for k, v in zip(columns, values)})
        return buf.getvalue()


#: Column order of :meth:`AssemblyResult.to_csv`.
ASSEMBLY_CSV_COLUMNS = [
    "row",
    "index",
    "name",
    "source",
    "part",
    "material",
    "thickness_mm",
    "count",
    "cutout",
    "mass_g",
    "mass_u_g",
    "com_x_mm",
    "com_y_mm",
    "com_z_mm",
    "inertia_xx_g_mm2",
    "inertia_yy_g_mm2",
    "inertia_zz_g_mm2",
    "product_xy_g_mm2",
    "product_xz_g_mm2",
    "product_yz_g_mm2",
]


def _column_kind(column: str) -> str | None:
    """The quantity kind of a column of :data:`ASSEMBLY_CSV_COLUMNS` that has a length in its unit."""
    if column.endswith("_g_mm2"):
        return "mass_moment"
    if column.endswith("_mm"):
        return "length"
    return None


def assembly_csv_columns(units: str = "mm") -> list[str]:
    """:data:`ASSEMBLY_CSV_COLUMNS` named for ``units`` (mm or in)."""
    if units == "mm":
        return list(ASSEMBLY_CSV_COLUMNS)
    out = []
    for column in ASSEMBLY_CSV_COLUMNS:
        kind = _column_kind(column)
        if kind == "length":
            column = column.removesuffix("mm") + "in"
        elif kind == "mass_moment":
            column = column.removesuffix("mm2") + "in2"
        out.append(column)
    return out


def _in_units(column: str, value: Any, units: str) -> Any:
    kind = _column_kind(column)
    if kind is None or not isinstance(value, (int, float)) or isinstance(value, bool):
        return value
    return convert(value, kind, units)


def _csv_row(row, index, name, source, part, material, thickness, count, cutout, mass, mass_u, com, tensor):
    t = np.asarray(tensor, float)
    return dict(
        zip(
            ASSEMBLY_CSV_COLUMNS,
            [
                row,
                index,
                name,
                source,
                part,
                material,
                thickness,
                count,
                cutout,
                mass,
                mass_u,
                com[0],
                com[1],
                com[2],
                t[0, 0],
                t[1, 1],
                t[2, 2],
                -t[0, 1],  # products of inertia, the sign of a part's Ixy (PRODUCTS_NOTE)
                -t[0, 2],
                -t[1, 2],
            ],
        )
    )


# -- the combination ---------------------------------------------------------------------


@dataclass(frozen=True)
class _Inputs:
    """Perturbable inputs of one member (relative density/thickness/area errors, absolute
    centroid and second-moment errors)."""

    rho: float
    t: float
    area: float
    cx: float
    cy: float
    ixx: float
    iyy: float
    ixy: float


def _member_figures(mem: Member, v: _Inputs) -> tuple[float, np.ndarray, np.ndarray]:
    """Signed mass (g), centre of mass (3,) and inertia tensor about its own CoM (3, 3)."""
    sign = -1.0 if mem.cutout else 1.0
    k = v.rho * v.t  # areal mass, g/mm2
    mass = sign * mem.count * k * v.area
    # integral r r^T dm about the member's own CoM, in the part's axes: the plate's
    # second moments of area times k in-plane, m t^2 / 12 through the thickness
    p_local = (
        sign
        * mem.count
        * np.array(
            [
                [k * v.iyy, k * v.ixy, 0.0],
                [k * v.ixy, k * v.ixx, 0.0],
                [0.0, 0.0, k * v.area * v.t * v.t / 12.0],
            ]
        )
    )
    q = mem.orientation()
    p = q @ p_local @ q.T
    inertia = np.trace(p) * np.eye(3) - p
    xy = q[:2, :2] @ (np.array([v.cx, v.cy]) - np.asarray(mem.anchor_mm, float)) + (mem.dx_mm, mem.dy_mm)
    com = np.array([xy[0], xy[1], mem.z_mm + v.t / 2.0])
    return mass, com, inertia


def _combine(figures: Sequence[tuple[float, np.ndarray, np.ndarray]]) -> tuple[float, np.ndarray, np.ndarray]:
    """Point-mass rule for the centre of mass; parallel-axis theorem (tensor form) for inertia.

    I_total = sum_i [ I_i + m_i (|d_i|^2 E - d_i d_i^T) ], d_i = c_i - c (cut-outs: m_i < 0).
    """
    masses = np.array([f[0] for f in figures])
    coms = np.array([f[1] for f in figures])
    total = masses.sum()
    com = (masses[:, None] * coms).sum(axis=0) / total
    inertia = np.zeros((3, 3))
    for m_i, c_i, i_i in figures:
        d = c_i - com
        inertia += i_i + m_i * (d @ d * np.eye(3) - np.outer(d, d))
    return total, com, inertia


def _principal(inertia: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Eigenvalues largest first and unit axes as rows: each axis's largest component
    positive, then the last flipped if needed for a right-handed set."""
    values, vectors = np.linalg.eigh((inertia + inertia.T) / 2)
    order = np.argsort(values)[::-1]
    values, axes = values[order], vectors[:, order].T.copy()
    for row in axes:
        if row[np.argmax(np.abs(row))] < 0:
            row *= -1
    if np.linalg.det(axes) < 0:
        axes[2] *= -1
    return values, axes


def combine_members(members: Sequence[Member], *, path: str | None = None, name: str = "") -> AssemblyResult:
    """Combine members into the assembly's mass, centre of mass and inertia tensor.

    Parameters
    ----------
    members : sequence of Member
    path, name : optional
        Recorded in the result (the assembly file and its title).

    Returns
    -------
    AssemblyResult

    Notes
    -----
    Each member is a prism of thickness t: mass m = rho t A; its centre of mass is the
    placed area centroid at height z + t/2; its inertia about its own centre of mass
    comes from rho t times the second moments of area in-plane and m t^2/12 through the
    thickness, rotated into the assembly's axes (I' = Q I Q^T). Members are combined with
    the point-mass rule and the parallel-axis theorem in tensor form; cut-outs enter
    with negative mass.

    Uncertainty model (first order, central differences of +-1 sigma per input):
    members of the same material share one density error; members of the same material
    and nominal thickness are taken as cut from the same sheet and share one thickness
    error; members holding the same Part object share that part's area, centroid and
    second-moment errors (copies and cut-outs of one measured part are fully
    correlated); all other inputs are independent.

    References
    ----------
    JCGM 100:2008 (GUM), clause 5.1 and 5.2 (propagation with correlated inputs).
    """
    if not members:
        raise OptionError("the assembly has no members; add [[member]] tables", path=path)
    for i, mem in enumerate(members, 1):
        if mem.mirror not in (None, "x", "y"):
            raise OptionError(f"member {i}: mirror must be 'x' or 'y', got {mem.mirror!r}", path=path)
        _check_member(i, mem, path)
    try:
        with np.errstate(all="ignore"):
            return _combine_checked(members, path=path, name=name)
    except (np.linalg.LinAlgError, FloatingPointError, OverflowError, ZeroDivisionError) as exc:
        raise OptionError(
            f"the assembly's figures cannot be computed ({type(exc).__name__}: {exc}); check the members' "
            "thicknesses, materials, placements and cut-outs",
            path=path,
        ) from None


def _combine_checked(members: Sequence[Member], *, path: str | None, name: str) -> AssemblyResult:
    """:func:`combine_members` after the checks of its inputs."""

    nominal = [
        _Inputs(
            m.material.density_kg_m3 * 1e-6,
            m.thickness_mm,
            float(m.part.area_mm2),
            float(m.part.centroid_mm[0]),
            float(m.part.centroid_mm[1]),
            float(m.part.ixx_mm4),
            float(m.part.iyy_mm4),
            float(m.part.ixy_mm4),
        )
        for m in members
    ]
    params = _parameters(members)  # one entry per shared error source

    def evaluate(step: tuple[str, Any, float] | None) -> tuple[np.ndarray, tuple]:
        inputs = list(nominal)
        if step is not None:
            attr, group, delta = step
            for i, mem in enumerate(members):
                if group(mem):
                    inputs[i] = replace(inputs[i], **{attr: getattr(inputs[i], attr) + delta})
        figures = [_member_figures(mem, v) for mem, v in zip(members, inputs)]
        total, com, inertia = _combine(figures)
        values, _ = _principal(inertia)
        flat = np.concatenate([[total], com, inertia.ravel(), values])
        return flat, (figures, total, com, inertia)

    signed = [(-1.0 if m.cutout else 1.0) * m.count * v.rho * v.t * v.area for m, v in zip(members, nominal)]
    gross = sum(abs(x) for x in signed)
    net = sum(signed)
    if not (math.isfinite(gross) and math.isfinite(net)):
        raise OptionError(
            "the assembly's mass overflows (count x density x thickness x area); check the members' values", path=path
        )
    if net < -1e-9 * gross:
        raise OptionError(
            f"the cut-outs outweigh the members (total mass {net:.6g} g); check which members have cutout = true",
            path=path,
        )
    if not net > 1e-9 * gross:
        raise OptionError(
            f"the cut-outs remove all of the members' mass (net {net:.6g} g of {gross:.6g} g); a cut-out must "
            "be smaller than what it is cut from: check which members have cutout = true",
            path=path,
        )
    base, (figures, total, com, inertia) = evaluate(None)
    if not np.all(np.isfinite(base)):
        raise OptionError(
            "the assembly's figures overflow (values too large to combine); check the members' thicknesses, "
            "counts and placements",
            path=path,
        )
    if not total > 0:
        raise OptionError(
            f"the cut-outs outweigh the members (total mass {total:.6g} g); check which members have cutout = true",
            path=path,
        )
    var = np.zeros_like(base)
    for attr, group, sigma in params:
        if sigma > 0 and math.isfinite(sigma):
            plus, _ = evaluate((attr, group, sigma))
            minus, _ = evaluate((attr, group, -sigma))
            var += ((plus - minus) / 2.0) ** 2
        elif not math.isfinite(sigma):
            var += np.nan
    u = np.sqrt(var)
    u[u <= 1e-9 * np.abs(base)] = 0.0  # differences of exactly cancelling terms leave rounding noise
    values, axes = _principal(inertia)
    if values[-1] < -1e-9 * values[0]:
        raise OptionError(
            "the combined inertia is not physical (a principal moment is negative): a cut-out removes "
            "material that is not there; check the cut-outs' placement and z_mm",
            path=path,
        )

    rows = []
    for i, (mem, (m_i, c_i, i_i)) in enumerate(zip(members, figures), 1):
        own = _member_u(mem)
        rows.append(
            MemberResult(
                index=i,
                name=mem.name or f"member {i}",
                source=mem.source,
                part=int(mem.part.label),
                material=mem.material.key,
                thickness_mm=mem.thickness_mm,
                count=mem.count,
                cutout=mem.cutout,
                mass_each_g=abs(m_i) / mem.count,
                mass_g=m_i,
                mass_u_g=own * mem.count,
                centre_of_mass_mm=_xyz(c_i),
                inertia_g_mm2=i_i,
            )
        )
    g = STANDARD_GRAVITY_M_S2
    return AssemblyResult(
        members=rows,
        mass_g=float(total),
        mass_u_g=float(u[0]),
        weight_n=float(total) * 1e-3 * g,
        weight_u_n=float(u[0]) * 1e-3 * g,
        centre_of_mass_mm=_xyz(com),
        centre_of_mass_u_mm=_xyz(u[1:4]),
        inertia_g_mm2=inertia,
        inertia_u_g_mm2=u[4:13].reshape(3, 3),
        principal_g_mm2=_xyz(values),
        principal_u_g_mm2=_xyz(u[13:16]),
        principal_axes=axes,
        path=path,
        name=name,
        notes=[
            "uncertainties: one shared density error per material, one shared thickness error per "
            "material and nominal thickness (same sheet), one shared set of area/centroid/moment errors "
            "per measured part; first-order propagation",
        ],
    )


def _xyz(values: Sequence[float] | np.ndarray) -> tuple[float, float, float]:
    """Three numbers as a tuple of floats (x, y, z or three principal values)."""
    x, y, z = (float(v) for v in values)
    return x, y, z


def _parameters(members: Sequence[Member]) -> list[tuple[str, Callable[[Member], bool], float]]:
    """The shared error sources: (input name, which members it moves, sigma)."""
    params: list[tuple[str, Callable[[Member], bool], float]] = []
    seen: set[Any] = set()
    for mem in members:
        mat = mem.material
        if ("rho", mat.key) not in seen:
            seen.add(("rho", mat.key))
            same_material = lambda m, k=mat.key: m.material.key == k  # noqa: E731
            params.append(("rho", same_material, mat.density_u_kg_m3 * 1e-6))
        sheet = (mat.key, mem.thickness_mm, mem.thickness_u_mm)
        if ("t", sheet) not in seen:
            seen.add(("t", sheet))
            same_sheet = lambda m, s=sheet: (m.material.key, m.thickness_mm, m.thickness_u_mm) == s  # noqa: E731
            params.append(("t", same_sheet, mem.thickness_u_mm))
        if ("part", id(mem.part)) not in seen:
            seen.add(("part", id(mem.part)))
            same = lambda m, k=mem.part: m.part is k  # noqa: E731
            p = mem.part
            params += [
                ("area", same, float(p.area_u_mm2)),
                ("cx", same, float(p.centroid_u_mm[0])),
                ("cy", same, float(p.centroid_u_mm[1])),
                ("ixx", same, float(p.ixx_u_mm4)),
                ("iyy", same, float(p.iyy_u_mm4)),
                ("ixy", same, float(p.ixy_u_mm4)),
            ]
    return params


def _member_u(mem: Member) -> float:
    """Standard uncertainty of one copy's mass (density, thickness and area terms)."""
    rel = math.sqrt(
        (mem.material.density_u_kg_m3 / mem.material.density_kg_m3) ** 2
        + (mem.thickness_u_mm / mem.thickness_mm) ** 2
        + (float(mem.part.area_u_mm2) / float(mem.part.area_mm2)) ** 2
    )
    return mem.material.density_kg_m3 * 1e-6 * mem.thickness_mm * float(mem.part.area_mm2) * rel


# -- reading sources and assembly files ----------------------------------------------------


def load_measurement(
    path: str | PathLike[str], *, dpi: float | None = None, cache: dict[Any, Measurement] | None = None
) -> Measurement:
    """A Measurement from a result JSON, or by measuring an image (``scanmass.measure``).

    A ``.json`` file is read as a result document; anything else is measured, with
    ``dpi`` when given. ``cache`` (a dict) lets several members share one measurement.
    """
    name = os.fspath(path)
    is_json = Path(name).suffix.lower() == ".json"
    key = (str(Path(name).resolve()), None if is_json else dpi)
    if cache is not None and key in cache:
        return cache[key]
    if is_json:
        from scanmass.measurement import read_result

        result = read_result(name)
    else:
        if not Path(name).exists():
            raise OptionError("file not found; pass a result JSON or an image file", path=name)
        import scanmass  # imported late: measuring pulls in the image pipeline

        result = scanmass.measure(name) if dpi is None else scanmass.measure(name, dpi=dpi)
    if cache is not None:
        cache[key] = result
    return result


def select_part(measurement: Measurement, label: int | None, *, where: str | None = None) -> Part:
    """The part with ``label``, or the only part when ``label`` is None."""
    labels = [p.label for p in measurement.parts]
    where = where or measurement.source.path
    if label is None:
        if len(measurement.parts) == 1:
            return measurement.parts[0]
        listed = ", ".join(str(x) for x in labels) or "none"
        raise OptionError(f"has {len(labels)} parts ({listed}); choose one by its label", path=where)
    for part in measurement.parts:
        if part.label == label:
            return part
    listed = ", ".join(str(x) for x in labels) or "none"
    raise OptionError(f"has no part {label} (parts: {listed}); choose one of these labels", path=where)


def _number(entry: Mapping[str, Any], key: str, default: float, prefix: str, path: str) -> float:
    value = entry.get(key, default)
    limit = MAX_ANGLE_DEG if key.endswith("_deg") else MAX_PLACEMENT_MM
    if (
        isinstance(value, bool)
        or not isinstance(value, (int, float))
        or not math.isfinite(float(value))
        or abs(float(value)) > limit
    ):
        raise OptionError(f"{prefix}: {key} must be a number within +-{limit:g}, got {value!r}", path=path)
    return float(value)


def _check_member(i: int, mem: Member, path: str | None) -> None:
    """Refuse values that pass as numbers but make no plate (or overflow the sums)."""
    label = f"member {i}" + (f" ({mem.name!r})" if mem.name else "")
    t, tu = mem.thickness_mm, mem.thickness_u_mm
    if not (math.isfinite(t) and MIN_THICKNESS_MM <= t <= MAX_THICKNESS_MM):
        raise OptionError(
            f"{label}: thickness_mm {t!r} is outside {MIN_THICKNESS_MM:g} to {MAX_THICKNESS_MM:g} mm; "
            "give the sheet thickness in mm",
            path=path,
        )
    if not (math.isfinite(tu) and 0 <= tu <= t):
        raise OptionError(f"{label}: thickness_u_mm {tu!r} must be from 0 to the thickness ({t:g} mm)", path=path)
    if isinstance(mem.count, bool) or not isinstance(mem.count, int) or not 1 <= mem.count <= MAX_COUNT:
        raise OptionError(f"{label}: count must be a whole number from 1 to {MAX_COUNT}, got {mem.count!r}", path=path)
    rho = mem.material.density_kg_m3
    if not (math.isfinite(rho) and MIN_DENSITY_KG_M3 <= rho <= MAX_DENSITY_KG_M3):
        raise OptionError(
            f"{label}: density {rho!r} kg/m3 of {mem.material.key!r} is outside {MIN_DENSITY_KG_M3:g} to "
            f"{MAX_DENSITY_KG_M3:g} kg/m3; fix the materials file",
            path=path,
        )
    values = {
        "dx_mm": mem.dx_mm,
        "dy_mm": mem.dy_mm,
        "z_mm": mem.z_mm,
        "anchor_mm x": mem.anchor_mm[0],
        "anchor_mm y": mem.anchor_mm[1],
    }
    for key, value in values.items():
        if not (math.isfinite(value) and abs(value) <= MAX_PLACEMENT_MM):
            raise OptionError(f"{label}: {key} {value!r} must be a number within +-{MAX_PLACEMENT_MM:g} mm", path=path)
    if not (math.isfinite(mem.rotate_deg) and abs(mem.rotate_deg) <= MAX_ANGLE_DEG):
        raise OptionError(
            f"{label}: rotate_deg {mem.rotate_deg!r} must be a number within +-{MAX_ANGLE_DEG:g}", path=path
        )
    part = mem.part
    figures = (part.area_mm2, *part.centroid_mm, part.ixx_mm4, part.iyy_mm4, part.ixy_mm4)
    if not all(math.isfinite(float(v)) for v in figures) or not float(part.area_mm2) > 0:
        raise OptionError(
            f"{label}: part {part.label} has no finite positive area and moments; measure it again", path=path
        )


def load_assembly(
    path: str | PathLike[str],
    *,
    materials: Mapping[str, Material] | str | PathLike[str] | None = None,
) -> tuple[list[Member], str]:
    """Read an assembly TOML file into members (measuring image sources as needed).

    Parameters
    ----------
    path : path
        The assembly file (format in this module's docstring). Sources are relative to it.
    materials : mapping or path, optional
        Material table, or a user materials TOML file; the file's own ``materials`` key
        is read after it.

    Returns
    -------
    (members, name)

    Raises
    ------
    OptionError
        Unreadable file, units other than mm, unknown keys, bad values, a member whose
        source or part does not exist.
    MaterialError
        An unknown material (the message lists close names).
    """
    where = os.fspath(path)
    p = Path(where)
    doc = read_toml(p, error=OptionError, what="assembly file (UTF-8 TOML)")

    unknown = set(doc) - _TOP_KEYS
    if unknown:
        raise OptionError(
            f"unknown key(s) {', '.join(sorted(unknown))}; allowed at the top: {', '.join(sorted(_TOP_KEYS))}",
            path=where,
        )
    units = doc.get("units", "mm")
    if units not in ("mm", "in"):
        raise OptionError(
            f'units = {units!r} is not supported; give lengths in millimetres (units = "mm") or inches (units = "in")',
            path=where,
        )
    base = p.parent
    own = [base / str(doc["materials"])] if "materials" in doc else []
    if isinstance(materials, Mapping):
        table: Mapping[str, Material] = load_materials(own, base=materials) if own else materials
    else:
        files: list[str | PathLike[str]] = [] if materials is None else [materials]
        table = load_materials([*files, *own])

    entries = doc.get("member", [])
    if not isinstance(entries, list) or not entries or not all(isinstance(e, dict) for e in entries):
        raise OptionError("no members; add one [[member]] table per part", path=where)
    cache: dict[Any, Measurement] = {}
    if units == "in":
        entries = [_entry_in_mm(i, entry, where) for i, entry in enumerate(entries, 1)]
    members = [_member(i, entry, base, table, cache, where) for i, entry in enumerate(entries, 1)]
    return members, str(doc.get("name", ""))


_INCH_KEYS = ("thickness", "thickness_u", "dx", "dy", "z", "anchor")


def _entry_in_mm(i: int, entry: Mapping[str, Any], where: str) -> dict[str, Any]:
    """A member of an inch file with its ``_in`` lengths turned into ``_mm`` ones (× 25.4 exactly)."""
    label = f"member {i}" + (f" ({entry['name']!r})" if "name" in entry else "")
    out = dict(entry)
    for stem in _INCH_KEYS:
        if f"{stem}_mm" in out:
            raise OptionError(
                f'{label}: {stem}_mm in a file with units = "in"; write {stem}_in (inches) instead', path=where
            )
        if f"{stem}_in" in out:
            value = out.pop(f"{stem}_in")
            try:
                if isinstance(value, list):
                    out[f"{stem}_mm"] = [float(v) * 25.4 for v in value]
                elif isinstance(value, bool):
                    raise TypeError
                else:
                    out[f"{stem}_mm"] = float(value) * 25.4
            except (TypeError, ValueError):
                raise OptionError(f"{label}: {stem}_in must be a number of inches, got {value!r}", path=where) from None
    return out


def _member(
    i: int,
    entry: Mapping[str, Any],
    base: Path,
    table: Mapping[str, Material],
    cache: dict[Any, Measurement],
    where: str,
) -> Member:
    label = f"member {i}" + (f" ({entry['name']!r})" if "name" in entry else "")
    unknown = set(entry) - _MEMBER_KEYS
    if unknown:
        raise OptionError(
            f"{label}: unknown key(s) {', '.join(sorted(unknown))}; allowed: {', '.join(sorted(_MEMBER_KEYS))}",
            path=where,
        )
    for key in ("source", "material", "thickness_mm"):
        if key not in entry:
            raise OptionError(
                f"{label}: {key} is missing; every member needs source, material and thickness_mm (thickness_in)",
                path=where,
            )
    try:
        thickness = check_positive("thickness_mm", entry["thickness_mm"], hint="give the sheet thickness in mm")
        thickness_u = check_positive("thickness_u_mm", entry.get("thickness_u_mm", 0.0), allow_zero=True)
        dpi = None if "dpi" not in entry else check_positive("dpi", entry["dpi"], unit="dots per inch")
        material = resolve_material(str(entry["material"]), table)
    except ScanmassError as exc:
        raise type(exc)(f"{label}: {exc}", path=where) from None
    count = entry.get("count", 1)
    if isinstance(count, bool) or not isinstance(count, int) or not 1 <= count <= MAX_COUNT:
        raise OptionError(f"{label}: count must be a whole number from 1 to {MAX_COUNT}, got {count!r}", path=where)
    mirror = entry.get("mirror")
    if mirror not in (None, "x", "y"):
        raise OptionError(f'{label}: mirror must be "x" (negate x) or "y" (negate y), got {mirror!r}', path=where)
    cutout = entry.get("cutout", False)
    if not isinstance(cutout, bool):
        raise OptionError(f"{label}: cutout must be true or false, got {cutout!r}", path=where)
    part_label = entry.get("part")
    if part_label is not None and (isinstance(part_label, bool) or not isinstance(part_label, int)):
        raise OptionError(f"{label}: part must be a part label (a whole number), got {part_label!r}", path=where)

    source = str(entry["source"])
    src_path = base / source
    if not src_path.is_file():
        raise OptionError(
            f"{label}: source {source!r} not found next to the assembly file; paths are relative to it", path=where
        )
    measurement = load_measurement(src_path, dpi=dpi, cache=cache)
    try:
        part = select_part(measurement, part_label, where=source)
    except OptionError as exc:
        raise OptionError(f"{label}: {exc}", path=where) from None

    return Member(
        part=part,
        material=material,
        thickness_mm=thickness,
        thickness_u_mm=thickness_u,
        count=count,
        dx_mm=_number(entry, "dx_mm", 0.0, label, where),
        dy_mm=_number(entry, "dy_mm", 0.0, label, where),
        rotate_deg=_number(entry, "rotate_deg", 0.0, label, where),
        mirror=mirror,
        z_mm=_number(entry, "z_mm", 0.0, label, where),
        cutout=cutout,
        anchor_mm=_anchor(entry, part, label, where),
        name=str(entry.get("name", "")),
        source=source,
    )


def _anchor(entry: Mapping[str, Any], part: Part, label: str, where: str) -> tuple[float, float]:
    """The point of the part's own frame that the placement moves to (dx_mm, dy_mm)."""
    if "anchor" in entry and "anchor_mm" in entry:
        raise OptionError(f"{label}: give either anchor or anchor_mm, not both", path=where)
    if "anchor_mm" in entry:
        value = entry["anchor_mm"]
        if (
            not isinstance(value, list)
            or len(value) != 2
            or not all(
                isinstance(v, (int, float)) and not isinstance(v, bool) and abs(v) <= MAX_PLACEMENT_MM for v in value
            )
        ):
            raise OptionError(
                f"{label}: anchor_mm must be [x, y] in mm, each within +-{MAX_PLACEMENT_MM:g}, got {value!r}",
                path=where,
            )
        return float(value[0]), float(value[1])
    anchor = str(entry.get("anchor", "origin")).strip().lower()
    if anchor == "origin":
        return 0.0, 0.0
    if anchor == "centroid":
        return float(part.centroid_mm[0]), float(part.centroid_mm[1])
    if anchor.startswith("hole"):
        number = anchor[4:].strip()
        for hole in part.holes:
            if number == str(hole.label):
                return float(hole.circle_centre_mm[0]), float(hole.circle_centre_mm[1])
        listed = ", ".join(str(h.label) for h in part.holes) or "none"
        raise OptionError(
            f"{label}: anchor {entry['anchor']!r} names no hole of part {part.label} (holes: {listed})", path=where
        )
    raise OptionError(f'{label}: anchor must be "origin", "centroid" or "hole N", got {entry["anchor"]!r}', path=where)


def assemble(
    path: str | PathLike[str],
    *,
    materials: Mapping[str, Material] | str | PathLike[str] | None = None,
) -> AssemblyResult:
    """Read an assembly TOML file and combine its members (see :func:`combine_members`).

    Examples
    --------
    See tests/test_assembly.py for files written on the fly.
    """
    members, name = load_assembly(path, materials=materials)
    return combine_members(members, path=os.fspath(path), name=name)
