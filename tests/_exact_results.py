"""Measurement objects built from exact polygons, for the export and report tests.

The polygons are the truth: section figures come from scanmass.section (Green's theorem
on the same vertices), cross-checked against shapely in the tests that use them. The
uncertainties are nominal fixture inputs (a 0.01 mm edge), not check values.
"""

from __future__ import annotations

import math

import numpy as np

from scanmass.measurement import Hole, Measurement, Part, ScaleInfo, SourceInfo
from scanmass.section import fit_circle, section_properties

EDGE_U_MM = 0.01  # nominal edge uncertainty of the fixtures (input, not a check value)


def densify(ring: np.ndarray, step_mm: float) -> np.ndarray:
    """Insert vertices along every edge so that no edge is longer than step_mm."""
    ring = np.asarray(ring, dtype=float)
    out = []
    for a, b in zip(ring, np.roll(ring, -1, axis=0)):
        n = max(1, int(math.ceil(math.hypot(*(b - a)) / step_mm)))
        t = np.arange(n)[:, None] / n
        out.append(a + t * (b - a))
    return np.vstack(out)


def circle_ring(cx: float, cy: float, r: float, n: int, *, ccw: bool = True) -> np.ndarray:
    t = np.linspace(0.0, 2.0 * math.pi, n, endpoint=False)
    ring = np.column_stack([cx + r * np.cos(t), cy + r * np.sin(t)])
    return ring if ccw else ring[::-1].copy()


def rect_ring(x0: float, y0: float, w: float, h: float) -> np.ndarray:
    return np.array([[x0, y0], [x0 + w, y0], [x0 + w, y0 + h], [x0, y0 + h]], dtype=float)


def l_ring(x0: float, y0: float) -> np.ndarray:
    """An L: 60 mm along x by 10 mm thick, with a 10 mm thick upright 40 mm tall."""
    return np.array(
        [[x0, y0], [x0 + 60, y0], [x0 + 60, y0 + 10], [x0 + 10, y0 + 10], [x0 + 10, y0 + 40], [x0, y0 + 40]],
        dtype=float,
    )


def stadium_ring(cx: float, cy: float, length: float, r: float, step_mm: float) -> np.ndarray:
    """A slot: two straight sides of ``length`` joined by half circles of radius ``r``."""
    half = 0.5 * length
    n_arc = max(8, int(math.ceil(math.pi * r / step_mm)))
    a = np.linspace(-0.5 * math.pi, 0.5 * math.pi, n_arc, endpoint=False)
    right = np.column_stack([cx + half + r * np.cos(a), cy + r * np.sin(a)])
    left = np.column_stack([cx - half - r * np.cos(a), cy - r * np.sin(a)])
    n_side = max(1, int(math.ceil(length / step_mm)))
    s = np.arange(n_side)[:, None] / n_side
    top = np.array([cx + half, cy + r]) + s * np.array([-length, 0.0])
    bottom = np.array([cx - half, cy - r]) + s * np.array([length, 0.0])
    return np.vstack([bottom, right, top, left])


def make_part(label: int, outer: np.ndarray, holes: list[np.ndarray] = ()) -> Part:
    sp = section_properties(outer, list(holes))
    u_rel = EDGE_U_MM * sp.perimeter_mm / sp.area_mm2
    hole_objs = []
    for k, ring in enumerate(holes, start=1):
        hp = section_properties(ring)
        fit = fit_circle(ring)
        hole_objs.append(
            Hole(
                label=k,
                area_mm2=hp.area_mm2,
                area_u_mm2=EDGE_U_MM * hp.perimeter_mm,
                centroid_mm=hp.centroid_mm,
                centroid_u_mm=(0.002, 0.002),
                perimeter_mm=hp.perimeter_mm,
                circle_centre_mm=fit.centre_mm,
                circle_centre_u_mm=(0.002, 0.002),
                diameter_mm=fit.diameter_mm,
                diameter_u_mm=2 * EDGE_U_MM,
                roundness_mm=fit.roundness_mm,
                outline_mm=np.asarray(ring, dtype=float),
            )
        )
    return Part(
        label=label,
        area_mm2=sp.area_mm2,
        area_u_mm2=EDGE_U_MM * sp.perimeter_mm,
        perimeter_mm=sp.perimeter_mm,
        perimeter_u_mm=0.05,
        centroid_mm=sp.centroid_mm,
        centroid_u_mm=(0.003, 0.004),
        ixx_mm4=sp.ixx_mm4,
        iyy_mm4=sp.iyy_mm4,
        ixy_mm4=sp.ixy_mm4,
        ixx_u_mm4=2 * u_rel * abs(sp.ixx_mm4),
        iyy_u_mm4=2 * u_rel * abs(sp.iyy_mm4),
        ixy_u_mm4=2 * u_rel * max(abs(sp.ixy_mm4), 1.0),
        i1_mm4=sp.i1_mm4,
        i2_mm4=sp.i2_mm4,
        i1_u_mm4=2 * u_rel * sp.i1_mm4,
        i2_u_mm4=2 * u_rel * sp.i2_mm4,
        principal_angle_deg=sp.principal_angle_deg,
        principal_angle_u_deg=0.01,
        polar_mm4=sp.polar_mm4,
        polar_u_mm4=2 * u_rel * sp.polar_mm4,
        gyration_x_mm=sp.gyration_x_mm,
        gyration_y_mm=sp.gyration_y_mm,
        gyration_1_mm=sp.gyration_1_mm,
        gyration_2_mm=sp.gyration_2_mm,
        modulus_top_mm3=sp.modulus_top_mm3,
        modulus_bottom_mm3=sp.modulus_bottom_mm3,
        modulus_right_mm3=sp.modulus_right_mm3,
        modulus_left_mm3=sp.modulus_left_mm3,
        bbox_mm=sp.bbox_mm,
        caliper_max_mm=sp.caliper_max_mm,
        caliper_min_mm=sp.caliper_min_mm,
        convex_area_mm2=sp.convex_area_mm2,
        holes=hole_objs,
        outline_mm=np.asarray(outer, dtype=float),
    )


def plate_part(label: int = 1, step_mm: float = 0.05) -> Part:
    """80 x 50 mm plate at (10, 20) with holes of 12 and 8 mm diameter and a 6 mm square hole."""
    outer = densify(rect_ring(10, 20, 80, 50), step_mm)
    holes = [
        circle_ring(30, 45, 6, 256, ccw=False),
        circle_ring(72, 40, 4, 256, ccw=False),
        rect_ring(55, 30, 6, 6)[::-1].copy(),
    ]
    return make_part(label, outer, holes)


def l_part(label: int = 2, step_mm: float = 0.05) -> Part:
    return make_part(label, densify(l_ring(120, 20), step_mm))


def disc_part(label: int = 3) -> Part:
    return make_part(label, circle_ring(200, 60, 25, 720))


def slot_part(label: int = 4, step_mm: float = 0.05) -> Part:
    return make_part(label, stadium_ring(170, 130, 60, 10, step_mm), [circle_ring(170, 130, 3, 200, ccw=False)])


def make_measurement(parts: list[Part], *, path: str = "scans/bracket-batch-07.png", warnings=()) -> Measurement:
    return Measurement(
        source=SourceInfo(
            path=path,
            sha256="0" * 64,
            width_px=5906,
            height_px=4134,
            format="PNG",
            mode="L",
            bit_depth=8,
            orientation_applied=1,
        ),
        scale=ScaleInfo(
            method="dpi",
            mm_per_px=25.4 / 600,
            mm_per_px_rel_u=0.001,
            dpi=600.0,
            note="600 dpi from the file",
            terms={"dpi": 0.001},
            extra={"px_to_mm": [[0.0423, 0, 0], [0, -0.0423, 175.0], [0, 0, 1]], "dpi_xy": [600.0, 600.0]},
        ),
        parts=parts,
        warnings=list(warnings),
    )


def sample_measurement(**kwargs) -> Measurement:
    """Plate, L and disc: the standard three-part fixture."""
    return make_measurement([plate_part(), l_part(), disc_part()], **kwargs)
