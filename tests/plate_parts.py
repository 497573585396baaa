"""Build Part objects with exactly known section properties, for the mass tests.

The properties come from closed forms, not from scanmass's own measuring code:

- rectangle b x h: A = b h, Ixx = b h^3 / 12, Iyy = h b^3 / 12, Ixy = 0 about its centroid;
- disc of radius r: A = pi r^2, Ixx = Iyy = pi r^4 / 4, Ixy = 0
  (both: the section-property table of any strength-of-materials handbook, e.g. Roark's
  Formulas for Stress and Strain, table of properties of sections; from memory);
- composite sections: the composite rule A = sum A_i, centroid = sum A_i c_i / A, and
  the parallel-axis theorem for second moments (common practice);
- a simple polygon: the moments from Green's theorem over its edges (the standard
  vertex formulas, common practice), checked against shapely in the tests.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from scanmass.measurement import Hole, Measurement, Part, ScaleInfo, SourceInfo

NAN = float("nan")


@dataclass
class Piece:
    """Area, centroid and centroidal second moments of one shape (sign: -1 for a hole)."""

    area: float
    cx: float
    cy: float
    ixx: float
    iyy: float
    ixy: float
    sign: float = 1.0
    radius: float | None = None  # a disc's radius, for its Hole record


def rect(b: float, h: float, cx: float = 0.0, cy: float = 0.0, sign: float = 1.0) -> Piece:
    return Piece(b * h, cx, cy, b * h**3 / 12, h * b**3 / 12, 0.0, sign)


def disc(r: float, cx: float = 0.0, cy: float = 0.0, sign: float = 1.0) -> Piece:
    return Piece(math.pi * r * r, cx, cy, math.pi * r**4 / 4, math.pi * r**4 / 4, 0.0, sign, radius=r)


def polygon(points) -> Piece:
    """Green's-theorem moments of a simple polygon (either orientation)."""
    p = np.asarray(points, float)
    x, y = p[:, 0], p[:, 1]
    xn, yn = np.roll(x, -1), np.roll(y, -1)
    c = x * yn - xn * y
    a = c.sum() / 2
    cx = ((x + xn) * c).sum() / (6 * a)
    cy = ((y + yn) * c).sum() / (6 * a)
    sxx = ((y * y + y * yn + yn * yn) * c).sum() / 12  # integral y^2 dA about origin
    syy = ((x * x + x * xn + xn * xn) * c).sum() / 12  # integral x^2 dA
    sxy = ((x * yn + 2 * x * y + 2 * xn * yn + xn * y) * c).sum() / 24
    if a < 0:
        a, sxx, syy, sxy = -a, -sxx, -syy, -sxy
    return Piece(a, cx, cy, sxx - a * cy * cy, syy - a * cx * cx, sxy - a * cx * cy)


def circle_ring(r: float, cx: float = 0.0, cy: float = 0.0, n: int = 720) -> np.ndarray:
    """Vertices of a regular n-gon inscribed in a circle (for outlines only)."""
    t = np.linspace(0, 2 * np.pi, n, endpoint=False)
    return np.column_stack([cx + r * np.cos(t), cy + r * np.sin(t)])


def combine(pieces: list[Piece]) -> Piece:
    """Composite rule and parallel-axis theorem."""
    a = sum(p.sign * p.area for p in pieces)
    cx = sum(p.sign * p.area * p.cx for p in pieces) / a
    cy = sum(p.sign * p.area * p.cy for p in pieces) / a
    ixx = sum(p.sign * (p.ixx + p.area * (p.cy - cy) ** 2) for p in pieces)
    iyy = sum(p.sign * (p.iyy + p.area * (p.cx - cx) ** 2) for p in pieces)
    ixy = sum(p.sign * (p.ixy + p.area * (p.cx - cx) * (p.cy - cy)) for p in pieces)
    return Piece(a, cx, cy, ixx, iyy, ixy)


def make_part(
    pieces: list[Piece],
    *,
    label: int = 1,
    area_u: float = 0.0,
    centroid_u: float = 0.0,
    moment_u: float = 0.0,
    hole_centre_u: float = 0.0,
    outline=None,
) -> Part:
    """A Part whose outer shape is the sum of the pieces; pieces with sign -1 that are
    discs become its Hole records (fitted circle = the exact disc)."""
    s = combine(pieces)
    avg = (s.ixx + s.iyy) / 2
    rad = math.hypot((s.ixx - s.iyy) / 2, s.ixy)
    i1, i2 = avg + rad, avg - rad
    holes = []
    for p in pieces:
        if p.sign < 0 and p.radius is not None:
            holes.append(
                Hole(
                    label=len(holes) + 1,
                    area_mm2=p.area,
                    area_u_mm2=0.0,
                    centroid_mm=(p.cx, p.cy),
                    centroid_u_mm=(hole_centre_u, hole_centre_u),
                    perimeter_mm=2 * math.pi * p.radius,
                    circle_centre_mm=(p.cx, p.cy),
                    circle_centre_u_mm=(hole_centre_u, hole_centre_u),
                    diameter_mm=2 * p.radius,
                    diameter_u_mm=0.0,
                    roundness_mm=0.0,
                )
            )
    return Part(
        label=label,
        area_mm2=s.area,
        area_u_mm2=area_u,
        perimeter_mm=NAN,
        perimeter_u_mm=NAN,
        centroid_mm=(s.cx, s.cy),
        centroid_u_mm=(centroid_u, centroid_u),
        ixx_mm4=s.ixx,
        iyy_mm4=s.iyy,
        ixy_mm4=s.ixy,
        ixx_u_mm4=moment_u,
        iyy_u_mm4=moment_u,
        ixy_u_mm4=moment_u,
        i1_mm4=i1,
        i2_mm4=i2,
        i1_u_mm4=moment_u,
        i2_u_mm4=moment_u,
        principal_angle_deg=NAN,
        principal_angle_u_deg=NAN,
        polar_mm4=s.ixx + s.iyy,
        polar_u_mm4=math.sqrt(2) * moment_u,
        gyration_x_mm=math.sqrt(s.ixx / s.area),
        gyration_y_mm=math.sqrt(s.iyy / s.area),
        gyration_1_mm=math.sqrt(i1 / s.area),
        gyration_2_mm=math.sqrt(max(i2, 0) / s.area),
        modulus_top_mm3=NAN,
        modulus_bottom_mm3=NAN,
        modulus_right_mm3=NAN,
        modulus_left_mm3=NAN,
        bbox_mm=(NAN, NAN, NAN, NAN),
        caliper_max_mm=NAN,
        caliper_min_mm=NAN,
        convex_area_mm2=NAN,
        holes=holes,
        outline_mm=None if outline is None else np.asarray(outline, float),
    )


def make_measurement(parts: list[Part], path: str = "plates.png") -> Measurement:
    return Measurement(
        source=SourceInfo(path=path, sha256=None, width_px=1000, height_px=1000),
        scale=ScaleInfo(method="dpi", mm_per_px=0.1, mm_per_px_rel_u=0.001, dpi=254.0),
        parts=parts,
    )
