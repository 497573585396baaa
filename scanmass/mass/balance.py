"""Static unbalance of a flat plate spinning about a bore (ISO 21940-11 tolerances).

A plate that spins about the centre of one of its holes (the bore) carries a static
unbalance U = m e, the mass m times the offset e of its centre of mass from the axis.
ISO 21940-11 sets the permissible residual unbalance from a balance quality grade G
(mm/s) and the service speed. This module measures U from a scanned outline, judges it
against the grade where the measurement can decide, and sizes a correction (a drilled
hole at the heavy spot, or added mass opposite it).

This is a static check of a flat plate only; see :data:`CAUTIONS`.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from dataclasses import asdict, dataclass, field
from os import PathLike
from typing import Any

import numpy as np

from scanmass.errors import OptionError
from scanmass.geometry import point_in_ring
from scanmass.mass.assembly import select_part
from scanmass.mass.materials import Material, resolve_material
from scanmass.mass.plate import check_positive, plate_mass
from scanmass.measurement import Hole, Measurement, Part, _clean

__all__ = [
    "CAUTIONS",
    "STANDARD_GRADES",
    "BalanceResult",
    "permissible_unbalance_gmm",
    "static_unbalance",
    "balance_measurement",
]

#: Stated with every unbalance result.
CAUTIONS = (
    "Static check of a flat plate only: it finds the offset of the centre of mass from the bore, "
    "not couple unbalance, run-out, fit clearance, or flaws in the material. Do the final balancing "
    "on a balancing machine per ISO 21940-11. Rotating parts can fail dangerously; defer to "
    "qualified practice and the machine's own safety requirements before running a part."
)

#: Balance quality grades G (mm/s) of the series in ISO 21940-11 (steps of about 2.5).
STANDARD_GRADES = (0.4, 1.0, 2.5, 6.3, 16.0, 40.0, 100.0, 250.0, 630.0, 1600.0, 4000.0)


def permissible_unbalance_gmm(grade_mm_s: float, mass_g: float, rpm: float) -> float:
    """Permissible residual unbalance of ISO 21940-11, in g mm.

    U_per = 1000 G m / omega with G in mm/s, m in kg and omega = 2 pi n / 60 in rad/s,
    i.e. about 9549 G m[kg] / n[rpm] g mm.

    References
    ----------
    ISO 21940-11:2016, Mechanical vibration -- Rotor balancing -- Part 11: Procedures and
    tolerances for rotors with rigid behaviour (permissible residual unbalance from the
    balance quality grade).

    Examples
    --------
    >>> round(permissible_unbalance_gmm(6.3, 10_000.0, 3000.0), 2)
    200.54
    """
    grade = check_positive(
        "grade", grade_mm_s, unit="mm/s", hint="pass an ISO 21940-11 balance quality grade, e.g. 6.3"
    )
    n = check_positive("rpm", rpm, unit="rev/min", hint="pass the maximum service speed, e.g. 3000")
    omega = 2.0 * math.pi * n / 60.0
    return 1000.0 * grade * (mass_g / 1000.0) / omega


@dataclass
class BalanceResult:
    """Static unbalance of one part about one bore, and a correction.

    Lengths in mm, masses in g, unbalances in g mm, angles in degrees counter-clockwise
    from +x (DESIGN.md frames). ``heavy_angle_deg`` points from the bore centre to the
    centre of mass. ``passes`` is True/False when the 2-sigma interval of the offset lies
    wholly on one side of the permissible offset, None when it cannot decide (or no speed
    and grade were given); ``verdict`` says which in words. The ``corrected_*`` figures
    re-measure the part with the correction hole subtracted (composite rule).
    """

    part: int
    hole: int
    axis_mm: tuple[float, float]
    axis_u_mm: tuple[float, float]
    bore_diameter_mm: float
    centroid_mm: tuple[float, float]
    centroid_u_mm: tuple[float, float]
    material: str
    density_kg_m3: float
    thickness_mm: float
    thickness_u_mm: float
    mass_g: float
    mass_u_g: float
    offset_mm: float
    offset_u_mm: float
    offset_vector_mm: tuple[float, float]
    unbalance_gmm: float
    unbalance_u_gmm: float
    heavy_angle_deg: float
    rpm: float | None
    grade_mm_s: float | None
    angular_speed_rad_s: float | None
    permissible_gmm: float | None
    permissible_offset_mm: float | None
    resolvable_offset_mm: float
    passes: bool | None
    verdict: str
    correction_radius_mm: float | None = None
    remove_mass_g: float | None = None
    remove_angle_deg: float | None = None
    add_mass_g: float | None = None
    add_angle_deg: float | None = None
    hole_diameter_mm: float | None = None
    applied_hole_diameter_mm: float | None = None
    correction_centre_mm: tuple[float, float] | None = None
    correction_fits: bool | None = None
    drill_diameter_mm: float | None = None
    drill_depth_mm: float | None = None
    corrected_mass_g: float | None = None
    corrected_offset_mm: float | None = None
    corrected_unbalance_gmm: float | None = None
    corrected_unbalance_u_gmm: float | None = None
    corrected_passes: bool | None = None
    source: str | None = None
    notes: list[str] = field(default_factory=list)
    cautions: str = CAUTIONS

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready values (NaN becomes null)."""
        return _clean(asdict(self))

    def to_json(self, *, indent: int | None = 1) -> str:
        """The result as JSON text."""
        return json.dumps(self.to_dict(), indent=indent, allow_nan=False)


# -- geometry helpers -------------------------------------------------------------------


def _ray_exit_mm(ring: np.ndarray, origin: np.ndarray, direction: np.ndarray) -> float | None:
    """Distance from ``origin`` along the unit ``direction`` to the nearest crossing of the ring."""
    p = np.asarray(ring, float)
    q = np.roll(p, -1, axis=0)
    edge = q - p
    rel = p - origin
    denom = direction[0] * edge[:, 1] - direction[1] * edge[:, 0]
    with np.errstate(divide="ignore", invalid="ignore"):
        s = (rel[:, 0] * edge[:, 1] - rel[:, 1] * edge[:, 0]) / denom  # along the ray
        w = (rel[:, 0] * direction[1] - rel[:, 1] * direction[0]) / denom  # along the edge
    hit = (denom != 0) & (s > 0) & (w >= 0) & (w <= 1)
    return float(s[hit].min()) if hit.any() else None


def _distance_to_ring(ring: np.ndarray, point: np.ndarray) -> float:
    """Shortest distance from ``point`` to the ring's edges."""
    p = np.asarray(ring, float)
    edge = np.roll(p, -1, axis=0) - p
    length2 = (edge**2).sum(axis=1)
    w = np.clip(((point - p) * edge).sum(axis=1) / np.where(length2 > 0, length2, 1.0), 0.0, 1.0)
    nearest = p + w[:, None] * edge
    return float(np.sqrt(((nearest - point) ** 2).sum(axis=1)).min())


def _hole_fits(part: Part, centre: np.ndarray, diameter: float) -> bool | None:
    """Whether a through-hole lies wholly in material (None when the outline is unknown)."""
    if part.outline_mm is None:
        return None
    radius = diameter / 2.0
    if not point_in_ring(centre, part.outline_mm) or _distance_to_ring(part.outline_mm, centre) < radius:
        return False
    for hole in part.holes:
        if hole.outline_mm is not None:
            if point_in_ring(centre, hole.outline_mm) or _distance_to_ring(hole.outline_mm, centre) < radius:
                return False
        elif math.dist(centre, hole.circle_centre_mm) < radius + hole.diameter_mm / 2.0:
            return False
    return True


def _choose_bore(part: Part, hole: int | None) -> Hole:
    if not part.holes:
        raise OptionError(
            f"part {part.label} has no hole to spin about; the axis is the centre of a bore, so measure "
            "the part with its bore visible (lit through or on a contrasting background) or choose another part"
        )
    if hole is None:
        c = part.centroid_mm
        return min(part.holes, key=lambda h: math.dist(h.circle_centre_mm, c))
    for h in part.holes:
        if h.label == hole:
            return h
    listed = ", ".join(str(h.label) for h in part.holes)
    raise OptionError(f"part {part.label} has no hole {hole} (holes: {listed}); choose the bore by its label")


def _decide(offset: float, offset_u: float, permissible: float) -> bool | None:
    """True/False when offset +- 2 sigma lies wholly below/above the permissible offset."""
    if offset + 2.0 * offset_u <= permissible:
        return True
    if offset - 2.0 * offset_u > permissible:
        return False
    return None


def _pair(values: Any) -> tuple[float, float]:
    return float(values[0]), float(values[1])


def _fmt(value: float, digits: int = 3) -> str:
    return f"{value:.{digits}g}"


# -- the check ------------------------------------------------------------------------


def static_unbalance(
    part: Part,
    material: Material | str,
    thickness_mm: float,
    *,
    thickness_u_mm: float = 0.0,
    hole: int | None = None,
    rpm: float | None = None,
    grade: float | None = None,
    correction_radius_mm: float | None = None,
    drill_diameter_mm: float | None = None,
    drill_step_mm: float | None = None,
    materials: Mapping[str, Material] | str | PathLike[str] | None = None,
) -> BalanceResult:
    """Static unbalance of a flat part spinning about a bore, judged against ISO 21940-11.

    Parameters
    ----------
    part : Part
        A measured part with at least one hole.
    material : Material or str
        Sheet material (see :func:`scanmass.mass.materials.find_material`).
    thickness_mm : float
        Sheet thickness, > 0.
    thickness_u_mm : float, optional
        Its standard uncertainty.
    hole : int, optional
        Label of the hole that is the bore (``Hole.label``); by default the hole whose
        fitted circle centre is nearest the centroid.
    rpm, grade : float, optional
        Maximum service speed (rev/min) and balance quality grade G (mm/s); give both
        to judge the part.
    correction_radius_mm : float, optional
        Radius from the axis at which to correct. By default midway between the bore's
        edge and the outline's rim along the heavy direction (needs the outline).
    drill_diameter_mm : float, optional
        Also give the depth of a flat-bottomed blind hole of this diameter.
    drill_step_mm : float, optional
        Round the through-hole diameter to a multiple of this step (a drill set); the
        virtual re-measure then shows the residual unbalance of the rounded hole.
    materials : mapping or path, optional
        Material table or a user materials TOML file.

    Returns
    -------
    BalanceResult

    Notes
    -----
    Offset e = |c - a| between the centroid c and the bore's fitted circle centre a; its
    standard uncertainty propagates the centroid and circle-centre uncertainties (first
    order; for e of the order of its uncertainty, e is biased high and the verdict says
    the offset is not resolved). U = m e. Because U and U_per both scale with the mass,
    the verdict compares e with the permissible offset e_per = G / omega, which the mass
    uncertainty does not affect. A correction mass m_c at radius r opposite the offset's
    first moment balances the plate when m_c r = U (composite rule for first moments);
    a through-hole of diameter d removes m_c = rho t pi d^2 / 4.

    References
    ----------
    ISO 21940-11:2016, Mechanical vibration -- Rotor balancing -- Part 11: Procedures and
    tolerances for rotors with rigid behaviour.
    JCGM 100:2008 (GUM), clause 5.1.2.

    Examples
    --------
    A disc of mass m_disc with its bore off-centre by s has U = m_disc s; see
    tests/test_balance.py.
    """
    mat = resolve_material(material, materials)
    mp = plate_mass(part, mat, thickness_mm, thickness_u_mm=thickness_u_mm)
    t = mp.thickness_mm
    if (rpm is None) != (grade is None):
        raise OptionError(
            "give both the speed (rpm) and the balance quality grade (e.g. --rpm 3000 --grade 6.3), or neither"
        )
    bore = _choose_bore(part, hole)
    notes: list[str] = []

    axis = np.asarray(bore.circle_centre_mm, float)
    axis_u = np.asarray(bore.circle_centre_u_mm, float)
    centroid = np.asarray(part.centroid_mm, float)
    centroid_u = np.asarray(part.centroid_u_mm, float)
    d = centroid - axis
    offset = float(math.hypot(d[0], d[1]))
    var_xy = centroid_u**2 + axis_u**2
    if offset > 0:
        offset_u = float(math.sqrt((d**2 * var_xy).sum()) / offset)
    else:
        offset_u = float(math.sqrt(var_xy.sum() / 2.0))
    mass, mass_u = mp.mass_g, mp.mass_u_g
    unbalance = mass * offset
    unbalance_u = math.hypot(offset * mass_u, mass * offset_u)
    heavy = math.degrees(math.atan2(d[1], d[0])) % 360.0 if offset > 0 else float("nan")
    resolvable = 2.0 * offset_u
    if offset <= resolvable:
        notes.append(
            f"the offset {_fmt(offset)} mm is within 2σ ({_fmt(resolvable)} mm) of zero: it is not resolved, "
            "and its direction (the heavy spot) is uncertain"
        )

    omega = permissible = e_per = None
    passes: bool | None = None
    if rpm is None or grade is None:  # both or neither (checked above)
        verdict = (
            "not judged: no speed and grade given; pass rpm and grade (ISO 21940-11 balance quality grade) "
            "to check the unbalance against its permissible value"
        )
    else:
        permissible = permissible_unbalance_gmm(grade, mass, rpm)
        grade, rpm = float(grade), float(rpm)
        omega = 2.0 * math.pi * rpm / 60.0
        e_per = grade / omega  # mm: U_per / m
        passes = _decide(offset, offset_u, e_per)
        if not any(math.isclose(grade, g, rel_tol=1e-9) for g in STANDARD_GRADES):
            notes.append(
                f"G {grade:g} is not one of the grades of the ISO 21940-11 series ({', '.join(f'{g:g}' for g in STANDARD_GRADES)})"
            )
        where = f"G {grade:g} at {rpm:g} rpm"
        figures = (
            f"unbalance {_fmt(unbalance)} ± {_fmt(unbalance_u, 2)} g mm against a permissible {_fmt(permissible)} g mm"
        )
        if passes is True:
            verdict = f"passes {where}: {figures}, below it even at 2σ (static check only; see cautions)"
        elif passes is False:
            verdict = f"fails {where}: {figures}, above it even at 2σ; correct it (see the correction figures)"
        elif e_per < resolvable:
            verdict = (
                f"cannot certify {where}: the permissible offset {_fmt(e_per)} mm is below what this "
                f"measurement resolves ({_fmt(resolvable)} mm at 2σ); measure at a finer scale "
                "or balance on a balancing machine"
            )
        else:
            verdict = f"undecided for {where}: {figures}, too close to call at 2σ; re-measure more finely or balance on a machine"

    result = BalanceResult(
        part=int(part.label),
        hole=int(bore.label),
        axis_mm=_pair(axis),
        axis_u_mm=_pair(axis_u),
        bore_diameter_mm=float(bore.diameter_mm),
        centroid_mm=_pair(centroid),
        centroid_u_mm=_pair(centroid_u),
        material=mat.key,
        density_kg_m3=mat.density_kg_m3,
        thickness_mm=t,
        thickness_u_mm=mp.thickness_u_mm,
        mass_g=mass,
        mass_u_g=mass_u,
        offset_mm=offset,
        offset_u_mm=offset_u,
        offset_vector_mm=_pair(d),
        unbalance_gmm=unbalance,
        unbalance_u_gmm=unbalance_u,
        heavy_angle_deg=heavy,
        rpm=rpm,
        grade_mm_s=grade,
        angular_speed_rad_s=omega,
        permissible_gmm=permissible,
        permissible_offset_mm=e_per,
        resolvable_offset_mm=resolvable,
        passes=passes,
        verdict=verdict,
        notes=notes,
    )
    if offset > 0:
        _correct(result, part, mat, axis, d / offset, correction_radius_mm, drill_diameter_mm, drill_step_mm)
    else:
        notes.append("no correction: the centroid lies on the axis")
    return result


def _correct(
    res: BalanceResult,
    part: Part,
    mat: Material,
    axis: np.ndarray,
    heavy_dir: np.ndarray,
    radius: float | None,
    drill: float | None,
    step: float | None,
) -> None:
    """Fill the correction and the virtual re-measure into ``res``."""
    rho_t = mat.density_kg_m3 * 1e-6 * res.thickness_mm  # g/mm2
    if radius is None:
        rim = None if part.outline_mm is None else _ray_exit_mm(part.outline_mm, axis, heavy_dir)
        if rim is None:
            res.notes.append(
                "no correction sized: the outline is not in the result; give correction_radius_mm (--correction-radius)"
            )
            return
        radius = (res.bore_diameter_mm / 2.0 + rim) / 2.0
        res.notes.append(
            f"correction radius {radius:.4g} mm: midway between the bore's edge and the rim along the heavy direction"
        )
    else:
        radius = check_positive(
            "correction_radius_mm", radius, hint="pass the radius from the axis at which to correct"
        )
    correction = res.unbalance_gmm / radius  # g, from m_c r = U
    res.correction_radius_mm = radius
    res.remove_mass_g = correction
    res.remove_angle_deg = res.heavy_angle_deg
    res.add_mass_g = correction
    res.add_angle_deg = (res.heavy_angle_deg + 180.0) % 360.0
    diameter = math.sqrt(4.0 * correction / (math.pi * rho_t))
    res.hole_diameter_mm = diameter
    if step is not None:
        step = check_positive("drill_step_mm", step, hint="pass the step of the drill set, e.g. 0.5")
        diameter = max(step, round(diameter / step) * step)
    res.applied_hole_diameter_mm = diameter
    centre = axis + radius * heavy_dir
    res.correction_centre_mm = _pair(centre)
    res.correction_fits = _hole_fits(part, centre, diameter)
    if res.correction_fits is False:
        res.notes.append(
            f"a {diameter:.3g} mm hole at radius {radius:.4g} mm would break into an edge or another hole; "
            "choose another radius, split the correction, or add mass opposite instead"
        )
    if drill is not None:
        drill = check_positive("drill_diameter_mm", drill, hint="pass the drill's diameter in mm")
        res.drill_diameter_mm = drill
        res.drill_depth_mm = correction / (mat.density_kg_m3 * 1e-6 * math.pi * drill * drill / 4.0)
        if res.drill_depth_mm > res.thickness_mm:
            res.notes.append(
                f"a {drill:g} mm drill would need {res.drill_depth_mm:.3g} mm, deeper than the plate; "
                "use a larger drill, a larger radius or a through-hole"
            )
        res.notes.append("drill depth is for a flat-bottomed hole; a pointed drill removes a little more: stop short")

    # virtual re-measure: the part with the correction hole as a negative circle (composite rule)
    area = float(part.area_mm2)
    hole_area = math.pi * diameter * diameter / 4.0
    new_area = area - hole_area
    new_centroid = (area * np.asarray(res.centroid_mm) - hole_area * centre) / new_area
    new_offset = float(math.dist(new_centroid, axis))
    new_mass = rho_t * new_area
    res.corrected_mass_g = new_mass
    res.corrected_offset_mm = new_offset
    res.corrected_unbalance_gmm = new_mass * new_offset
    # the correction is sized from the measured unbalance, so the true residual is uncertain
    # by about the measurement's own uncertainty
    res.corrected_unbalance_u_gmm = res.unbalance_u_gmm
    if res.permissible_offset_mm is not None:
        res.corrected_passes = _decide(new_offset, res.offset_u_mm, res.permissible_offset_mm)


def balance_measurement(
    measurement: Measurement,
    material: Material | str,
    thickness_mm: float,
    *,
    part: int | None = None,
    **options: Any,
) -> BalanceResult:
    """:func:`static_unbalance` of one part of a Measurement (the only part when ``part`` is None).

    Other keyword arguments go to :func:`static_unbalance`.
    """
    chosen = select_part(measurement, part)
    result = static_unbalance(chosen, material, thickness_mm, **options)
    result.source = measurement.source.path
    return result
