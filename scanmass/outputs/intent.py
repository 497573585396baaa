"""Design intent: make a fitted outline what the designer meant, within the measurement.

Each step is optional and recorded with the largest distance it moved any feature
(:class:`Step`); a step is taken only where that move is within what the measurement
resolves:

parallel
    Lines within a small angle of parallel or perpendicular to the longest line are
    turned about their midpoints onto the exact direction, when neither end moves by
    more than the fit tolerance.
tangent
    An arc whose neighbouring lines meet it nearly tangentially is made tangent: with
    two such lines its centre moves to where both lines are at its radius; with one,
    its radius becomes the centre's distance from the line (move within the fit
    tolerance).
concentric
    A hole whose centre is within the fit tolerance of an arc's centre, or of another
    hole's, takes that centre.
hole series
    A hole diameter within two standard uncertainties of a size of the chosen series
    takes that size (:data:`HOLE_SERIES`).
rounding
    Radii, hole diameters not snapped to a series, hole positions from the datum and
    the offsets of lines parallel to the datum axes are rounded to ``step_mm`` when
    within two standard uncertainties (edge scatter, and the scale's relative
    uncertainty times the distance).

The idealised outline's area and centroid are given beside the measured ones.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from scanmass.errors import OptionError
from scanmass.measurement import Part
from scanmass.outputs.primitives import (
    Entity,
    FittedPart,
    _joint,
    area_centroid_mm,
    ring_points,
)

__all__ = ["HOLE_SERIES", "ROUNDING_STEPS_MM", "Step", "Idealised", "idealise", "hole_series", "parse_step"]

#: Standard hole series, diameters in mm.
#: ISO 273:1979 "Fasteners - Clearance holes for bolts and screws", table 1, fine / medium /
#: coarse series for M1.6 to M30 (values from memory of the table; check against the
#: standard before relying on them).
_ISO273 = {
    # thread: (fine, medium, coarse)
    1.6: (1.7, 1.8, 2.0),
    2.0: (2.2, 2.4, 2.6),
    2.5: (2.7, 2.9, 3.1),
    3.0: (3.2, 3.4, 3.6),
    4.0: (4.3, 4.5, 4.8),
    5.0: (5.3, 5.5, 5.8),
    6.0: (6.4, 6.6, 7.0),
    8.0: (8.4, 9.0, 10.0),
    10.0: (10.5, 11.0, 12.0),
    12.0: (13.0, 13.5, 14.5),
    16.0: (17.0, 17.5, 18.5),
    20.0: (21.0, 22.0, 24.0),
    24.0: (25.0, 26.0, 28.0),
    30.0: (31.0, 33.0, 35.0),
}

#: Metric twist-drill diameters: 0.1 mm steps from 1.0 to 13.0 mm and 0.5 mm steps to
#: 20 mm, the common preferred sizes of ISO 235:1980 "Parallel shank jobber and stub series
#: drills and Morse taper shank drills" (from memory; the standard lists further sizes).
_ISO235 = tuple(sorted({round(1.0 + 0.1 * k, 1) for k in range(121)} | {round(13.0 + 0.5 * k, 1) for k in range(15)}))

HOLE_SERIES: dict[str, tuple[float, ...]] = {
    "iso273-fine": tuple(v[0] for v in _ISO273.values()),
    "iso273-medium": tuple(v[1] for v in _ISO273.values()),
    "iso273-coarse": tuple(v[2] for v in _ISO273.values()),
    "iso235": _ISO235,
}

#: Named rounding steps (mm).
ROUNDING_STEPS_MM = {"0.1": 0.1, "0.5": 0.5, "0.01": 0.01, "1/64in": 25.4 / 64}

#: Coverage factor of "within the uncertainty" (k = 2, about 95 %; GUM, JCGM 100:2008, 6.2).
K_COVERAGE = 2.0


def parse_step(text: str | float) -> float:
    """A rounding step in mm from a number (mm) or a name of :data:`ROUNDING_STEPS_MM`.

    Examples
    --------
    >>> parse_step("0.5"), round(parse_step("1/64in"), 6)
    (0.5, 0.396875)
    """
    key = str(text).strip().lower()
    if key in ROUNDING_STEPS_MM:
        return ROUNDING_STEPS_MM[key]
    try:
        value = float(key)
    except ValueError:
        raise OptionError(
            f"rounding step {text!r} is not a length in mm or one of {', '.join(ROUNDING_STEPS_MM)}; e.g. --step 0.1"
        ) from None
    if not (math.isfinite(value) and value > 0):
        raise OptionError(f"rounding step {text!r} must be a positive length in mm, e.g. --step 0.1")
    return value


def hole_series(name: str) -> tuple[float, ...]:
    """The diameters of a named series (see :data:`HOLE_SERIES`)."""
    try:
        return HOLE_SERIES[name]
    except KeyError:
        raise OptionError(f"unknown hole series {name!r}; choose from {', '.join(HOLE_SERIES)}") from None


@dataclass
class Step:
    """One idealisation step: what it did and the largest move it made (mm)."""

    name: str
    detail: str
    deviation_mm: float

    def to_dict(self) -> dict[str, Any]:
        return {"name": self.name, "detail": self.detail, "deviation_mm": self.deviation_mm}


@dataclass
class Idealised:
    """The idealised outline of one part and how it was reached."""

    label: int
    outer: list[Entity]
    holes: list[Entity]
    hole_labels: list[int | None]
    steps: list[Step]
    datum_mm: tuple[float, float]
    axis_deg: float
    measured_area_mm2: float
    measured_centroid_mm: tuple[float, float]
    area_mm2: float = 0.0
    centroid_mm: tuple[float, float] = (0.0, 0.0)
    hole_series: str | None = None
    series_sizes: dict[int, float] = field(default_factory=dict)  # index in ``holes`` -> series size
    tolerance_mm: float = 0.0
    max_deviation_mm: float = 0.0

    @property
    def max_step_deviation_mm(self) -> float:
        return max((s.deviation_mm for s in self.steps), default=0.0)

    def to_dict(self) -> dict[str, Any]:
        return {
            "label": self.label,
            "outer": [e.to_dict() for e in self.outer],
            "holes": [e.to_dict() for e in self.holes],
            "steps": [s.to_dict() for s in self.steps],
            "datum_mm": list(self.datum_mm),
            "axis_deg": self.axis_deg,
            "area_mm2": self.area_mm2,
            "centroid_mm": list(self.centroid_mm),
            "measured_area_mm2": self.measured_area_mm2,
            "measured_centroid_mm": list(self.measured_centroid_mm),
            "hole_series": self.hole_series,
        }


# ---------------------------------------------------------------------------
def _carrier(e: Entity) -> tuple:
    """The (kind, p, q) carrier of an entity used by the joint solver."""
    if e.kind == "line":
        p = np.asarray(e.start_mm, float)
        d = np.asarray(e.end_mm, float) - p
        return ("line", p, d / max(float(np.hypot(*d)), 1e-300))
    return ("arc", np.asarray(e.centre_mm, float), float(e.radius_mm or 0.0))


def _rejoin(ents: list[Entity], tol: float) -> list[Entity]:
    """Recompute the joints of a closed chain from each entity's carrier."""
    m = len(ents)
    if m < 2:
        return ents
    carriers = [_carrier(e) for e in ents]
    joints = [_joint(carriers[k], carriers[(k + 1) % m], np.asarray(ents[k].end_mm), tol) for k in range(m)]
    out = []
    for k, e in enumerate(ents):
        s = joints[(k - 1) % m]
        t = joints[k]
        out.append(replace(e, start_mm=(float(s[0]), float(s[1])), end_mm=(float(t[0]), float(t[1]))))
    return out


def _line_angle(e: Entity) -> float:
    return math.atan2(e.end_mm[1] - e.start_mm[1], e.end_mm[0] - e.start_mm[0])


def _outline_move(a: list[Entity], b: list[Entity]) -> float:
    """Largest distance between two versions of a chain (sampled, both ways)."""
    from scanmass.outputs.primitives import outline_distance_mm

    pa, pb = ring_points(a, 0.05), ring_points(b, 0.05)
    return float(max(outline_distance_mm(pa, pb).max(), outline_distance_mm(pb, pa).max()))


def _round_to(value: float, step: float) -> float:
    return round(value / step) * step


def idealise(
    fitted: FittedPart,
    part: Part,
    *,
    scale_rel_u: float = 0.0,
    parallel: bool = True,
    tangent: bool = True,
    concentric: bool = True,
    series: str | None = None,
    step_mm: float | None = None,
    datum_hole: int | None = None,
) -> Idealised:
    """Idealise a fitted part (see the module docstring for the steps).

    Parameters
    ----------
    fitted : FittedPart
        From :func:`scanmass.outputs.primitives.fit_part`.
    part : Part
        The measured part (hole diameter uncertainties, measured area and centroid).
    scale_rel_u : float
        Relative standard uncertainty of the scale (``Measurement.scale.mm_per_px_rel_u``).
    parallel, tangent, concentric : bool
        Take these steps (default all).
    series : str, optional
        Hole series to snap diameters to (a key of :data:`HOLE_SERIES`).
    step_mm : float, optional
        Rounding step of radii, diameters, hole positions and line offsets.
    datum_hole : int, optional
        Label of the hole that is the datum of positions (default: the lower-left
        corner of the outline in the datum axes).

    Returns
    -------
    Idealised
    """
    if series is not None:
        hole_series(series)
    if step_mm is not None and not (math.isfinite(step_mm) and step_mm > 0):
        raise OptionError(f"rounding step {step_mm!r} must be a positive length in mm, e.g. 0.1")
    tol = fitted.tolerance_mm
    sigma = fitted.edge_sigma_mm
    outer = list(fitted.outer.entities)
    holes = [r.entities[0] if r.entities[0].kind == "circle" else None for r in fitted.holes]
    hole_labels = [r.hole_label for r in fitted.holes]
    steps: list[Step] = []
    moved: float = 0.0
    lines = [e for e in outer if e.kind == "line"]
    axis = _line_angle(max(lines, key=lambda e: e.length_mm)) if lines else 0.0

    # parallel / perpendicular
    if parallel and lines:
        new = []
        moved = 0.0
        count = 0
        for e in outer:
            if e.kind != "line":
                new.append(e)
                continue
            a = _line_angle(e)
            d = (a - axis + math.pi / 4) % (math.pi / 2) - math.pi / 4
            move = 0.5 * e.length_mm * abs(d)
            if 0 < abs(d) and move <= tol:
                mid = 0.5 * (np.asarray(e.start_mm) + np.asarray(e.end_mm))
                half = 0.5 * e.length_mm
                b = a - d
                dirn = np.array([math.cos(b), math.sin(b)])
                new.append(replace(e, start_mm=_t2(mid - half * dirn), end_mm=_t2(mid + half * dirn)))
                moved = max(moved, move)
                count += 1
            else:
                new.append(e)
        if count:
            rejoined = _rejoin(new, tol)
            dev = _outline_move(outer, rejoined)
            outer = rejoined
            steps.append(Step("parallel", f"{count} line(s) made parallel or perpendicular to the longest", dev))

    # tangent joints
    tangent_arcs: set[int] = set()
    if tangent:
        new = list(outer)
        count = 0
        m = len(new)
        for k, e in enumerate(new):
            if e.kind != "arc" or m < 2:
                continue
            nb = [new[(k - 1) % m], new[(k + 1) % m]]
            near = [n for n in nb if n.kind == "line" and _tangent_gap(n, e) <= tol]
            c = np.asarray(e.centre_mm)
            r = float(e.radius_mm or 0.0)
            if len(near) == 2:
                c_new = _centre_tangent_to(near[0], near[1], r, c)
                if c_new is not None and float(np.hypot(*(c_new - c))) <= tol:
                    new[k] = replace(e, centre_mm=(float(c_new[0]), float(c_new[1])))
                    tangent_arcs.add(k)
                    count += 1
            elif len(near) == 1:
                r_new = _line_distance(near[0], c)
                if abs(r_new - r) <= tol:
                    new[k] = replace(e, radius_mm=r_new)
                    tangent_arcs.add(k)
                    count += 1
        if count:
            rejoined = _rejoin(new, tol)
            dev = _outline_move(outer, rejoined)
            outer = rejoined
            steps.append(Step("tangent", f"{count} arc(s) made tangent to their lines", dev))

    # concentric holes
    if concentric:
        arcs = [e for e in outer if e.kind == "arc"]
        moved = 0.0
        count = 0
        for i, h in enumerate(holes):
            if h is None:
                continue
            hc = np.asarray(h.centre_mm)
            targets = [np.asarray(a.centre_mm) for a in arcs] + [
                np.asarray(o.centre_mm) for j, o in enumerate(holes) if o is not None and j < i
            ]
            for t in targets:
                d = float(np.hypot(*(t - hc)))
                if 0 < d <= tol:
                    holes[i] = _move_circle(h, t)
                    moved = max(moved, d)
                    count += 1
                    break
        if count:
            steps.append(Step("concentric", f"{count} hole(s) made concentric with an arc or hole", moved))

    # hole series
    sizes: dict[int, float] = {}
    if series is not None:
        table = np.asarray(hole_series(series))
        moved = 0.0
        done = []
        for i, h in enumerate(holes):
            if h is None:
                continue
            d = 2.0 * float(h.radius_mm or 0.0)
            u = _hole_u(part, hole_labels[i], d, sigma, h.n_points, scale_rel_u)
            j = int(np.argmin(np.abs(table - d)))
            if abs(table[j] - d) <= K_COVERAGE * u:
                holes[i] = replace(h, radius_mm=0.5 * float(table[j]))
                sizes[i] = float(table[j])
                moved = max(moved, 0.5 * abs(table[j] - d))
                done.append(f"{d:.3f} -> {table[j]:g}")
        if done:
            steps.append(Step("hole series", f"{series}: " + ", ".join(done), moved))

    # datum
    rot = np.array([[math.cos(-axis), -math.sin(-axis)], [math.sin(-axis), math.cos(-axis)]])
    poly = ring_points(outer, 0.05)
    local = poly @ rot.T
    datum_local = local.min(axis=0)
    if datum_hole is not None:
        idx = [i for i, lab in enumerate(hole_labels) if lab == datum_hole and holes[i] is not None]
        if not idx:
            raise OptionError(f"datum hole {datum_hole} is not a round hole of part {part.label}; choose another")
        datum_local = np.asarray(holes[idx[0]].centre_mm) @ rot.T  # type: ignore[union-attr]
    datum = datum_local @ rot  # back to the result frame

    # rounding
    if step_mm is not None:
        moved = 0.0
        notes = []
        # radii
        for k, e in enumerate(outer):
            if e.kind == "arc":
                r = float(e.radius_mm or 0.0)
                r_new = _round_to(r, step_mm)
                u = math.hypot(sigma / math.sqrt(max(e.n_points, 1)), scale_rel_u * r, tol / 4.0)
                if r_new > 0 and abs(r_new - r) <= K_COVERAGE * u and r_new != r:
                    outer[k] = replace(e, radius_mm=r_new)
                    moved = max(moved, abs(r_new - r))
                    notes.append(f"R {r:.3f} -> {r_new:g}")
        # lines parallel to the axes: offsets from the datum
        for k, e in enumerate(outer):
            if e.kind != "line":
                continue
            a = (_line_angle(e) - axis) % math.pi
            s_loc = np.asarray(e.start_mm) @ rot.T
            for ax in (0, 1):
                along = 0.0 if ax == 1 else math.pi / 2
                if min(abs(a - along), abs(a - along - math.pi)) > 1e-9:
                    continue
                off = float(s_loc[ax] - datum_local[ax])
                off_new = _round_to(off, step_mm)
                u = math.hypot(sigma / math.sqrt(max(e.n_points, 1)), scale_rel_u * abs(off), tol / 4.0)
                if abs(off_new - off) <= K_COVERAGE * u and off_new != off:
                    shift = np.zeros(2)
                    shift[ax] = off_new - off
                    dv = shift @ rot
                    outer[k] = replace(
                        e,
                        start_mm=tuple(np.asarray(e.start_mm) + dv),
                        end_mm=tuple(np.asarray(e.end_mm) + dv),
                    )
                    moved = max(moved, abs(off_new - off))
                    notes.append(f"line at {off:.3f} -> {off_new:g}")
        outer = _rejoin(_retangent(outer, tangent_arcs), tol)
        # holes: diameters (not from a series) and positions
        for i, h in enumerate(holes):
            if h is None:
                continue
            hole_move = 0.0
            if i not in sizes:
                d = 2.0 * float(h.radius_mm or 0.0)
                d_new = _round_to(d, step_mm)
                u = _hole_u(part, hole_labels[i], d, sigma, h.n_points, scale_rel_u)
                if d_new > 0 and abs(d_new - d) <= K_COVERAGE * u and d_new != d:
                    h = replace(h, radius_mm=0.5 * d_new)
                    hole_move = 0.5 * abs(d_new - d)
                    moved = max(moved, hole_move)
                    notes.append(f"D {d:.3f} -> {d_new:g}")
            c_loc = np.asarray(h.centre_mm) @ rot.T - datum_local
            new_loc = c_loc.copy()
            for ax in (0, 1):
                v = float(c_loc[ax])
                v_new = _round_to(v, step_mm)
                u = math.hypot(sigma / math.sqrt(max(h.n_points, 1)), scale_rel_u * abs(v), tol / 4.0)
                if abs(v_new - v) <= K_COVERAGE * u:
                    new_loc[ax] = v_new
            if not np.array_equal(new_loc, c_loc):
                moved = max(moved, hole_move + float(np.hypot(*(new_loc - c_loc))))
                h = _move_circle(h, (new_loc + datum_local) @ rot)
                notes.append(f"hole at ({c_loc[0]:.3f}, {c_loc[1]:.3f}) -> ({new_loc[0]:g}, {new_loc[1]:g})")
            holes[i] = h
        if notes:
            steps.append(Step("rounding", f"step {step_mm:g} mm: " + "; ".join(notes), moved))

    hole_rings = [ring_points([h], 0.02) for h in holes if h is not None]
    raw_holes = [r.polygon(0.02) for r, h in zip(fitted.holes, holes) if h is None]
    area, centroid = area_centroid_mm(ring_points(outer, 0.02), hole_rings + raw_holes)
    kept_holes = [h for h in holes if h is not None]
    kept_index = {i: j for j, i in enumerate(i for i, h in enumerate(holes) if h is not None)}
    sizes = {kept_index[i]: v for i, v in sizes.items() if i in kept_index}
    result = Idealised(
        part.label,
        outer,
        kept_holes,
        [lab for lab, h in zip(hole_labels, holes) if h is not None],
        steps,
        (float(datum[0]), float(datum[1])),
        math.degrees(axis),
        float(part.area_mm2),
        (float(part.centroid_mm[0]), float(part.centroid_mm[1])),
        area,
        centroid,
        series,
        sizes,
        tol,
    )
    from scanmass.outputs.primitives import outline_distance_mm

    dist = outline_distance_mm(fitted.outer.points_mm, ring_points(outer, 0.02))
    result.max_deviation_mm = float(dist.max())
    return result


def _retangent(outer: list[Entity], arcs: set[int]) -> list[Entity]:
    """Keep arcs made tangent tangent after their lines or radii were rounded."""
    out = list(outer)
    m = len(out)
    for k in sorted(arcs):
        e = out[k]
        r = float(e.radius_mm or 0.0)
        c = np.asarray(e.centre_mm)
        nb = [n for n in (out[(k - 1) % m], out[(k + 1) % m]) if n.kind == "line"]
        if len(nb) == 2:
            c_new = _centre_tangent_to(nb[0], nb[1], r, c)
        elif len(nb) == 1:
            a = np.asarray(nb[0].start_mm)
            d = np.asarray(nb[0].end_mm) - a
            d = d / max(float(np.hypot(*d)), 1e-300)
            nrm = np.array([-d[1], d[0]])
            side = 1.0 if float((c - a) @ nrm) >= 0 else -1.0
            c_new = c + (r - side * float((c - a) @ nrm)) * side * nrm
        else:
            c_new = None
        if c_new is not None:
            out[k] = replace(e, centre_mm=(float(c_new[0]), float(c_new[1])))
    return out


def _t2(p: Any) -> tuple[float, float]:
    return (float(p[0]), float(p[1]))


def _move_circle(h: Entity, c: Any) -> Entity:
    c = (float(c[0]), float(c[1]))
    r = float(h.radius_mm or 0.0)
    p = (c[0] + r, c[1])
    return replace(h, centre_mm=c, start_mm=p, end_mm=p)


def _hole_u(part: Part, label: int | None, d: float, sigma: float, n: int, rel_u: float) -> float:
    for h in part.holes:
        if h.label == label and math.isfinite(h.diameter_u_mm):
            return float(h.diameter_u_mm)
    return math.hypot(2.0 * sigma / math.sqrt(max(n, 1)), rel_u * d)


def _line_distance(line: Entity, p: np.ndarray) -> float:
    a = np.asarray(line.start_mm)
    d = np.asarray(line.end_mm) - a
    d = d / max(float(np.hypot(*d)), 1e-300)
    rel = p - a
    return abs(float(rel[0] * d[1] - rel[1] * d[0]))


def _tangent_gap(line: Entity, arc: Entity) -> float:
    return abs(_line_distance(line, np.asarray(arc.centre_mm)) - float(arc.radius_mm or 0.0))


def _centre_tangent_to(l1: Entity, l2: Entity, r: float, c: np.ndarray) -> np.ndarray | None:
    """Centre at distance r from both lines, on the side of c."""
    rows, rhs = [], []
    for ln in (l1, l2):
        a = np.asarray(ln.start_mm)
        d = np.asarray(ln.end_mm) - a
        d = d / max(float(np.hypot(*d)), 1e-300)
        nrm = np.array([-d[1], d[0]])
        side = 1.0 if float((c - a) @ nrm) >= 0 else -1.0
        rows.append(side * nrm)
        rhs.append(r + side * float(a @ nrm))
    mat = np.asarray(rows)
    if abs(np.linalg.det(mat)) < 1e-9:
        return None
    return np.linalg.solve(mat, np.asarray(rhs))
