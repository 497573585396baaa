"""A measured part against its nominal outline: deviations, holes and a profile verdict.

The nominal is a DXF (LINE, ARC, CIRCLE, LWPOLYLINE and POLYLINE in model space, layers
:data:`IGNORED_LAYERS` left out; ``$INSUNITS`` honoured, unitless files taken as mm with
a note) or another result JSON (a remade part against the original's scan). The largest
closed loop is the outer outline, the others holes.

Alignment: ``"fit"`` (default) moves the measured part rigidly onto the nominal by
iterated closest points (point to plane) on the outer outline, from the centroids and
the four principal-axis orientations, keeping the best; the holes are then checked in
that frame; ``"centroid"`` only translates centroid onto centroid; ``"none"``
takes both in their own frames (for a nominal drawn in the scan's frame).

Points within the corner zone of a sharp nominal corner (three blur widths: a blurred
image rounds sharp corners, see :mod:`scanmass.outputs.primitives`) are shown in the
picture and counted in a note, but left out of the largest and RMS deviation and the
verdict.

Deviation: for each measured boundary vertex, the signed distance to the nominal
outline, positive where the part has material outside the nominal (outer outline too
large, hole too small). Its standard uncertainty combines the edge scatter of one
sample, the shared threshold offset and the scale's relative uncertainty times the
distance from the centroid.

Verdict against a line-profile tolerance ``t`` (ISO 1101:2017, 18.4: every point of the
profile within a zone of width ``t`` centred on the true profile, so ``|d| <= t / 2``),
with the decision rule of ISO 14253-1:2017 (conformance proven only inside the zone
reduced by the expanded uncertainty ``U = 2 u``):

- ``pass`` when ``max |d| + U <= t / 2``;
- ``fail`` when ``max |d| - U > t / 2``;
- ``cannot decide`` otherwise, which includes every tolerance with ``t / 2 < U``:
  a zone narrower than what the measurement resolves.

References
----------
.. [1] P. J. Besl and N. D. McKay, "A method for registration of 3-D shapes", IEEE
   Trans. PAMI 14(2), 239-256, 1992 (iterated closest points).
.. [2] W. Kabsch, "A solution for the best rotation to relate two sets of vectors",
   Acta Cryst. A32, 922-923, 1976.
"""

from __future__ import annotations

import json
import math
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any
from xml.sax.saxutils import escape

import numpy as np

from scanmass.errors import OptionError, ResultFormatError
from scanmass.geometry import nearest_vertex
from scanmass.measurement import Measurement, Part, read_result
from scanmass.outputs.atomic import write_atomic
from scanmass.outputs.export import LAYER_REFERENCE, _hole_ring, _outer, _select_parts, one_piece
from scanmass.outputs.primitives import area_centroid_mm, edge_sigma_mm, outline_distance_mm
from scanmass.outputs.resultio import PathLike

__all__ = [
    "VERDICTS",
    "EXIT_CODES",
    "IGNORED_LAYERS",
    "Nominal",
    "HoleDeviation",
    "Comparison",
    "read_nominal",
    "compare",
    "write_picture_png",
    "picture_svg",
    "verdict",
    "compare_to_outputs",
    "comparison_html",
]

VERDICTS = ("pass", "fail", "cannot decide")
#: Exit status of ``scanmass compare`` by verdict (1 is a user error).
EXIT_CODES = {"pass": 0, None: 0, "fail": 2, "cannot decide": 3}
#: DXF layers that are not part of the outline.
IGNORED_LAYERS = {LAYER_REFERENCE, "SCANMASS_DIMENSIONS", "DEFPOINTS"}
#: $INSUNITS code -> mm per unit (DXF reference, HEADER section).
_INSUNITS_MM = {1: 25.4, 2: 304.8, 4: 1.0, 5: 10.0, 6: 1000.0, 8: 0.0000254, 9: 0.0254, 10: 914.4}
K_COVERAGE = 2.0


@dataclass
class Nominal:
    """A nominal outline: outer ring (counter-clockwise) and holes (clockwise), mm."""

    outer_mm: np.ndarray
    holes_mm: list[np.ndarray]
    hole_circles: list[tuple[float, float, float]]  # centre x, y, diameter
    source: str
    notes: list[str] = field(default_factory=list)


@dataclass
class HoleDeviation:
    nominal_index: int
    measured_label: int | None
    position_mm: float
    position_u_mm: float
    diameter_mm: float
    diameter_u_mm: float


@dataclass
class Comparison:
    """Deviation of a measured part from its nominal (mm)."""

    points_mm: np.ndarray = field(repr=False)
    deviation_mm: np.ndarray = field(repr=False)
    deviation_u_mm: np.ndarray = field(repr=False)
    nominal: Nominal = field(repr=False)
    rotation_deg: float
    translation_mm: tuple[float, float]
    max_abs_mm: float
    max_abs_u_mm: float
    rms_mm: float
    holes: list[HoleDeviation]
    tolerance_mm: float | None = None
    verdict: str | None = None
    reason: str = ""
    notes: list[str] = field(default_factory=list)
    judged: np.ndarray | None = field(default=None, repr=False)

    def to_dict(self) -> dict[str, Any]:
        return {
            "rotation_deg": self.rotation_deg,
            "translation_mm": list(self.translation_mm),
            "max_abs_deviation_mm": self.max_abs_mm,
            "max_abs_deviation_u_mm": self.max_abs_u_mm,
            "rms_deviation_mm": self.rms_mm,
            "min_deviation_mm": float(self.deviation_mm.min()),
            "max_deviation_mm": float(self.deviation_mm.max()),
            "holes": [h.__dict__ for h in self.holes],
            "tolerance_mm": self.tolerance_mm,
            "verdict": self.verdict,
            "reason": self.reason,
            "notes": self.notes + self.nominal.notes,
            "nominal": self.nominal.source,
        }


# ---------------------------------------------------------------------------
# Nominal outlines
# ---------------------------------------------------------------------------
def read_nominal(path: PathLike, *, part: int | None = None) -> Nominal:
    """Read a nominal outline from a DXF file or a result JSON."""
    p = os.fspath(path)
    if not os.path.exists(p):
        raise OptionError(f"{p}: no such file; give the nominal as a DXF or a result JSON")
    if p.lower().endswith(".json"):
        m = read_result(p)
        chosen = _select_parts(m, None if part is None else [part])
        q = chosen[0]
        one_piece(q, "a nominal taken from it", path=p)
        holes = [_hole_ring(q, h) for h in q.holes]
        circles = [(float(h.circle_centre_mm[0]), float(h.circle_centre_mm[1]), float(h.diameter_mm)) for h in q.holes]
        return Nominal(_outer(q), holes, circles, p)
    if not p.lower().endswith(".dxf"):
        raise OptionError(f"{p}: the nominal must be a .dxf or a result .json")
    return _read_dxf(p)


def _read_dxf(p: str) -> Nominal:
    import ezdxf
    from ezdxf import path as ezpath

    from scanmass.readfile import read_regular

    read_regular(p, error=ResultFormatError, what="DXF", max_bytes=1 << 28)  # regular files only, never a FIFO
    try:
        doc = ezdxf.readfile(p)
    except (OSError, ezdxf.DXFError) as exc:
        raise ResultFormatError(f"cannot read the DXF ({exc}); save it again as DXF R12 or later", path=p) from None
    notes = []
    code = int(doc.header.get("$INSUNITS", 0) or 0)
    if code in _INSUNITS_MM:
        unit = _INSUNITS_MM[code]
    else:
        unit = 1.0
        notes.append(f"{os.path.basename(p)}: $INSUNITS {code} (no unit): taken as mm")
    pieces: list[np.ndarray] = []
    circles: list[tuple[float, float, float]] = []
    closed_loops: list[np.ndarray] = []
    for e in doc.modelspace():
        if e.dxf.layer.upper() in IGNORED_LAYERS:
            continue
        kind = e.dxftype()
        if kind == "CIRCLE":
            c = e.dxf.center
            circles.append((c.x * unit, c.y * unit, 2 * e.dxf.radius * unit))
        elif kind in ("LINE", "ARC", "LWPOLYLINE", "POLYLINE"):
            pts = np.array([(v.x, v.y) for v in ezpath.make_path(e).flattening(0.0005 / unit)], float) * unit
            if len(pts) < 2:
                continue
            closed = kind in ("LWPOLYLINE", "POLYLINE") and bool(
                getattr(e, "closed", False) or getattr(e, "is_closed", False)
            )
            if closed or (len(pts) > 2 and np.allclose(pts[0], pts[-1])):
                closed_loops.append(_dedupe(pts))
            else:
                pieces.append(pts)
    span = max((float(np.max(np.ptp(q, axis=0))) for q in pieces), default=0.0)
    closed_loops += _chain(pieces, max(0.01, 1e-4 * span))
    loops = closed_loops + [_circle_ring(*c) for c in circles]
    if not loops:
        raise ResultFormatError(
            "no closed outline (lines, arcs, circles, polylines) in model space; draw the part's outline", path=p
        )
    areas = [abs(_signed_area(r)) for r in loops]
    k = int(np.argmax(areas))
    outer = loops[k]
    holes = [r for i, r in enumerate(loops) if i != k]
    hole_circles = []
    for r in holes:
        hole_circles.append(_circle_of(r))
    return Nominal(_orient(outer, True), [_orient(h, False) for h in holes], hole_circles, p, notes)


def _dedupe(pts: np.ndarray) -> np.ndarray:
    keep = np.concatenate([[True], np.any(np.abs(np.diff(pts, axis=0)) > 1e-12, axis=1)])
    pts = pts[keep]
    if len(pts) > 1 and np.allclose(pts[0], pts[-1], atol=1e-9):
        pts = pts[:-1]
    return pts


def _chain(pieces: list[np.ndarray], tol: float = 1e-3) -> list[np.ndarray]:
    """Join open pieces end to end into closed loops (ends within ``tol`` mm)."""
    loops = []
    left = list(pieces)
    while left:
        cur = left.pop(0)
        grew = True
        while grew and not np.allclose(cur[0], cur[-1], atol=tol):
            grew = False
            for i, q in enumerate(left):
                if np.hypot(*(q[0] - cur[-1])) <= tol:
                    cur = np.vstack([cur, q[1:]])
                elif np.hypot(*(q[-1] - cur[-1])) <= tol:
                    cur = np.vstack([cur, q[::-1][1:]])
                else:
                    continue
                del left[i]
                grew = True
                break
        if np.hypot(*(cur[0] - cur[-1])) <= tol and len(cur) > 3:
            loops.append(_dedupe(cur))
    return loops


def _circle_ring(x: float, y: float, d: float) -> np.ndarray:
    # sagitta r (1 - cos(pi / n)) under 0.5 um
    n = max(64, math.ceil(math.pi / math.acos(max(1.0 - 0.0005 / (0.5 * d), -1.0))))
    a = np.linspace(0, 2 * math.pi, n, endpoint=False)
    return np.column_stack([x + 0.5 * d * np.cos(a), y + 0.5 * d * np.sin(a)])


def _circle_of(r: np.ndarray) -> tuple[float, float, float]:
    from scanmass.outputs.primitives import _fit_circle

    c, rad = _fit_circle(r)
    return (float(c[0]), float(c[1]), 2.0 * rad)


def _signed_area(r: np.ndarray) -> float:
    x, y = r[:, 0], r[:, 1]
    return 0.5 * float(np.sum(x * np.roll(y, -1) - np.roll(x, -1) * y))


def _orient(r: np.ndarray, ccw: bool) -> np.ndarray:
    return r if (_signed_area(r) > 0) == ccw else r[::-1]


# ---------------------------------------------------------------------------
# Alignment
# ---------------------------------------------------------------------------
def _kabsch(src: np.ndarray, dst: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    cs, cd = src.mean(axis=0), dst.mean(axis=0)
    h = (src - cs).T @ (dst - cd)
    u, _, vt = np.linalg.svd(h)
    d = np.sign(np.linalg.det(vt.T @ u.T))
    r = vt.T @ np.diag([1.0, d]) @ u.T
    return r, cd - r @ cs


def _resample(r: np.ndarray, step: float) -> np.ndarray:
    closed = np.vstack([r, r[:1]])
    seg = np.hypot(*np.diff(closed, axis=0).T)
    s = np.concatenate([[0.0], np.cumsum(seg)])
    t = np.arange(0.0, s[-1], step)
    return np.column_stack([np.interp(t, s, closed[:, 0]), np.interp(t, s, closed[:, 1])])


def _with_normals(rings: list[np.ndarray], step: float) -> tuple[np.ndarray, np.ndarray]:
    """Points every ``step`` mm along closed rings, with unit normals."""
    pts, nrm = [], []
    for ring in rings:
        q = _resample(ring, step) if len(ring) > 2 else ring
        if len(q) < 3:
            q = ring
        tang = np.roll(q, -1, axis=0) - np.roll(q, 1, axis=0)
        tang /= np.maximum(np.hypot(*tang.T), 1e-300)[:, None]
        pts.append(q)
        nrm.append(np.column_stack([tang[:, 1], -tang[:, 0]]))
    return np.vstack(pts), np.vstack(nrm)


def _icp(src: np.ndarray, target: tuple[np.ndarray, np.ndarray], r: np.ndarray, t: np.ndarray, iters: int):
    """Point-to-plane iterated closest points (small-angle linearisation per step)."""
    q_all, n_all = target
    rms = math.inf
    for _ in range(iters):
        moved = src @ r.T + t
        idx = nearest_vertex(moved, q_all)
        q, n = q_all[idx], n_all[idx]
        res = np.einsum("ij,ij->i", moved - q, n)
        # d(res) = n . (dtheta * J moved + dt), J = rotation by 90 degrees
        jm = np.column_stack([-moved[:, 1], moved[:, 0]])
        a = np.column_stack([np.einsum("ij,ij->i", n, jm), n])
        sol, *_ = np.linalg.lstsq(a, -res, rcond=None)
        dth, dt = float(sol[0]), sol[1:]
        dr = np.array([[math.cos(dth), -math.sin(dth)], [math.sin(dth), math.cos(dth)]])
        r = dr @ r
        t = dr @ t + dt
        rms = float(np.sqrt(np.mean(res**2)))
        if abs(dth) < 1e-12 and np.abs(dt).max() < 1e-10:
            break
    return r, t, rms


def _principal_angle(outer: np.ndarray, holes: list[np.ndarray]) -> float:
    from scanmass.geometry import ring_moments

    a, (cx, cy) = area_centroid_mm(outer, holes)
    mom = ring_moments(outer, about=(cx, cy))
    for h in holes:
        mom = mom + ring_moments(_orient(h, False), about=(cx, cy))
    ixx, iyy, ixy = mom[3], mom[4], mom[5]
    return 0.5 * math.atan2(-2 * ixy, iyy - ixx)


def _align(meas_rings: list[np.ndarray], nom: Nominal, mode: str) -> tuple[np.ndarray, np.ndarray]:
    if mode == "none":
        return np.eye(2), np.zeros(2)
    m_outer, m_holes = meas_rings[0], meas_rings[1:]
    _, cm = area_centroid_mm(m_outer, m_holes)
    _, cn = area_centroid_mm(nom.outer_mm, nom.holes_mm)
    if mode == "centroid":
        return np.eye(2), np.asarray(cn) - np.asarray(cm)
    if mode != "fit":
        raise OptionError(f"alignment {mode!r} is not known; choose fit, centroid or none")
    # fitted on the outer outline only: the holes are what is checked against it
    coarse = _with_normals([nom.outer_mm], 0.2)
    fine = _with_normals([nom.outer_mm], 0.05)
    src_all = m_outer
    src = src_all[:: max(1, len(src_all) // 800)]
    every = np.vstack(meas_rings)
    every = every[:: max(1, len(every) // 800)]
    every_nom = _with_normals([nom.outer_mm, *nom.holes_mm], 0.2)[0]
    theta0 = _principal_angle(nom.outer_mm, nom.holes_mm) - _principal_angle(m_outer, m_holes)
    best = None
    for k in range(4):
        th = theta0 + k * math.pi / 2
        r = np.array([[math.cos(th), -math.sin(th)], [math.sin(th), math.cos(th)]])
        t = np.asarray(cn) - r @ np.asarray(cm)
        r, t, _ = _icp(src, coarse, r, t, 30)
        # choose among the starts with the holes too (a symmetric outline alone cannot)
        moved = every @ r.T + t
        rms = float(np.sqrt(np.mean(np.sum((moved - every_nom[nearest_vertex(moved, every_nom)]) ** 2, axis=1))))
        if best is None or rms < best[0]:
            best = (rms, r, t)
    assert best is not None
    r, t, _ = _icp(src_all, fine, best[1], best[2], 8)
    return r, t


# ---------------------------------------------------------------------------
# Comparison
# ---------------------------------------------------------------------------
def _signed_distance(points: np.ndarray, ring: np.ndarray, material_outside_positive: bool) -> np.ndarray:
    import cv2

    d = outline_distance_mm(points, ring)
    ref = ring.mean(axis=0)
    contour = (ring - ref).astype(np.float32).reshape(-1, 1, 2)
    inside = np.array([cv2.pointPolygonTest(contour, (float(x), float(y)), False) > 0 for x, y in points - ref])
    sign = np.where(inside, -1.0, 1.0)
    return d * (sign if material_outside_positive else -sign)


def compare(
    measured: Measurement | PathLike,
    nominal: Nominal | PathLike,
    *,
    part: int | None = None,
    nominal_part: int | None = None,
    align: str = "fit",
    tolerance_mm: float | None = None,
) -> Comparison:
    """Compare a measured part with its nominal outline (see the module docstring).

    Parameters
    ----------
    measured : Measurement or path of a result JSON
    nominal : Nominal or path of a DXF or result JSON
    part, nominal_part : int, optional
        Part labels when the results hold several parts.
    align : {"fit", "centroid", "none"}
    tolerance_mm : float, optional
        Line-profile tolerance ``t`` (full zone width) for a verdict.

    Returns
    -------
    Comparison
    """
    if tolerance_mm is not None and not (math.isfinite(tolerance_mm) and tolerance_mm > 0):
        raise OptionError(f"tolerance {tolerance_mm!r} must be a positive zone width in mm, e.g. --tolerance 0.2")
    m = measured if isinstance(measured, Measurement) else read_result(measured)
    nom = nominal if isinstance(nominal, Nominal) else read_nominal(nominal, part=nominal_part)
    chosen = _select_parts(m, None if part is None else [part])
    if len(chosen) > 1:
        raise OptionError(f"the result has {len(chosen)} parts; choose one with --part, e.g. --part {chosen[0].label}")
    p: Part = chosen[0]
    one_piece(
        p, "a comparison of it with the nominal", path=None if isinstance(measured, Measurement) else str(measured)
    )
    rings = [_outer(p)] + [_hole_ring(p, h) for h in p.holes]
    r, t = _align(rings, nom, align)
    moved = [ring @ r.T + t for ring in rings]
    # deviations: outer ring against the nominal outer; hole rings against the nearest nominal hole
    pts, dev = [moved[0]], [_signed_distance(moved[0], nom.outer_mm, True)]
    hole_devs: list[HoleDeviation] = []
    nom_centres = np.array([c[:2] for c in nom.hole_circles]) if nom.hole_circles else np.zeros((0, 2))
    used: set[int] = set()
    for ring, hole in zip(moved[1:], p.holes):
        c = np.asarray(hole.circle_centre_mm) @ r.T + t
        if len(nom_centres) == 0:
            continue
        dist = np.hypot(*(nom_centres - c).T)
        j = int(np.argmin(dist))
        if j in used:
            continue
        used.add(j)
        pts.append(ring)
        dev.append(_signed_distance(ring, nom.holes_mm[j], False))
        cu = float(np.hypot(*hole.circle_centre_u_mm))
        hole_devs.append(
            HoleDeviation(
                j + 1,
                hole.label,
                float(dist[j]),
                cu,
                float(hole.diameter_mm - nom.hole_circles[j][2]),
                float(hole.diameter_u_mm),
            )
        )
    points = np.vstack(pts)
    deviation = np.concatenate(dev)
    # uncertainty per point
    sigma = edge_sigma_mm(p, m.scale.mm_per_px)
    inputs = (p.uncertainty_terms or {}).get("inputs", {})
    offset = float(inputs.get("offset_px", 0.0) or 0.0) * m.scale.mm_per_px
    _, cn = area_centroid_mm(nom.outer_mm, nom.holes_mm)
    reach = np.hypot(*(points - np.asarray(cn)).T)
    u = np.sqrt(sigma**2 + offset**2 + (m.scale.mm_per_px_rel_u * reach) ** 2)
    # a blurred image rounds sharp corners: points in that zone are shown, not judged
    zone = max(3.0 * _blur(p), 2.0) * m.scale.mm_per_px
    corners = _sharp_corners(nom.outer_mm)
    judged = np.ones(len(points), dtype=bool)
    if len(corners):
        near = np.min(
            np.hypot(points[:, None, 0] - corners[None, :, 0], points[:, None, 1] - corners[None, :, 1]), axis=1
        )
        judged = near > zone
    if not judged.any():
        judged[:] = True
    sel = np.flatnonzero(judged)
    k = int(sel[np.argmax(np.abs(deviation[sel]))])
    result = Comparison(
        points,
        deviation,
        u,
        nom,
        math.degrees(math.atan2(r[1, 0], r[0, 0])),
        (float(t[0]), float(t[1])),
        float(abs(deviation[k])),
        float(u[k]),
        float(np.sqrt(np.mean(deviation[sel] ** 2))),
        hole_devs,
    )
    result.judged = judged
    if not judged.all():
        result.notes.append(
            f"{int((~judged).sum())} point(s) within {zone:.3f} mm of {len(corners)} sharp corner(s) left out of the"
            f" largest and RMS deviation and the verdict (the image's blur rounds sharp corners; up to"
            f" {float(np.abs(deviation[~judged]).max()):.4f} mm there)"
        )
    if len(used) < len(nom.hole_circles):
        result.notes.append(f"{len(nom.hole_circles) - len(used)} nominal hole(s) without a measured hole")
    if tolerance_mm is not None:
        result.tolerance_mm = float(tolerance_mm)
        result.verdict, result.reason = verdict(result.max_abs_mm, result.max_abs_u_mm, tolerance_mm)
    return result


def _blur(p: Part) -> float:
    inputs = (p.uncertainty_terms or {}).get("inputs", {})
    try:
        b = float(inputs.get("blur_px", 1.0) or 1.0)
    except (TypeError, ValueError):
        return 1.0
    return b if math.isfinite(b) and b > 0 else 1.0


def _sharp_corners(ring: np.ndarray, min_turn_deg: float = 20.0) -> np.ndarray:
    """Vertices of a closed polygon where it turns by more than ``min_turn_deg``."""
    d_in = ring - np.roll(ring, 1, axis=0)
    d_out = np.roll(ring, -1, axis=0) - ring
    turn = np.abs(np.arctan2(d_in[:, 0] * d_out[:, 1] - d_in[:, 1] * d_out[:, 0], np.einsum("ij,ij->i", d_in, d_out)))
    return ring[turn > math.radians(min_turn_deg)]


def verdict(max_abs_mm: float, u_mm: float, tolerance_mm: float) -> tuple[str, str]:
    """Line-profile verdict with the ISO 14253-1 rule (see the module docstring).

    Examples
    --------
    >>> verdict(0.05, 0.01, 0.2)[0], verdict(0.2, 0.01, 0.2)[0], verdict(0.09, 0.01, 0.2)[0]
    ('pass', 'fail', 'cannot decide')
    """
    half = 0.5 * tolerance_mm
    big_u = K_COVERAGE * u_mm
    if max_abs_mm + big_u <= half:
        return "pass", f"largest deviation {max_abs_mm:.4f} mm + U {big_u:.4f} mm is within t/2 = {half:.4f} mm"
    if max_abs_mm - big_u > half:
        return "fail", f"largest deviation {max_abs_mm:.4f} mm - U {big_u:.4f} mm exceeds t/2 = {half:.4f} mm"
    if half < big_u:
        return "cannot decide", f"t/2 = {half:.4f} mm is below what the measurement resolves (U = {big_u:.4f} mm)"
    return "cannot decide", f"largest deviation {max_abs_mm:.4f} mm is within U = {big_u:.4f} mm of t/2 = {half:.4f} mm"


# ---------------------------------------------------------------------------
# Pictures
# ---------------------------------------------------------------------------
def _colour(v: np.ndarray, scale: float) -> np.ndarray:
    """Diverging colours (RGB 0-255): blue below the nominal, grey on it, red above."""
    x = np.clip(v / scale, -1.0, 1.0)
    rgb = np.empty((len(x), 3))
    grey = np.array([190.0, 190.0, 190.0])
    red = np.array([200.0, 30.0, 30.0])
    blue = np.array([30.0, 60.0, 200.0])
    pos = x >= 0
    rgb[pos] = grey + x[pos, None] * (red - grey)
    rgb[~pos] = grey - x[~pos, None] * (blue - grey)
    return rgb.astype(int)


def _picture_scale(c: Comparison) -> float:
    return max(0.5 * (c.tolerance_mm or 0.0), c.max_abs_mm, 1e-6)


def picture_svg(c: Comparison, *, margin_mm: float = 5.0) -> str:
    """The deviation picture as SVG in true mm (nominal grey, measured coloured)."""
    allp = np.vstack([c.nominal.outer_mm, c.points_mm])
    lo, hi = allp.min(axis=0) - margin_mm, allp.max(axis=0) + margin_mm
    w, h = hi - lo
    h_total = h + 12

    def xy(p: np.ndarray) -> str:
        return f"{p[0] - lo[0]:.3f},{hi[1] - p[1]:.3f}"

    out = [
        '<?xml version="1.0" encoding="UTF-8"?>',
        f'<svg xmlns="http://www.w3.org/2000/svg" version="1.1" width="{w:.3f}mm" height="{h_total:.3f}mm" viewBox="0 0 {w:.3f} {h_total:.3f}">',
        '<rect width="100%" height="100%" fill="white"/>',
    ]
    for ring in [c.nominal.outer_mm, *c.nominal.holes_mm]:
        pts = " ".join(xy(p) for p in np.vstack([ring, ring[:1]]))
        out.append(f'<polyline points="{pts}" fill="none" stroke="#999" stroke-width="0.15"/>')
    scale = _picture_scale(c)
    col = _colour(c.deviation_mm, scale)
    p = c.points_mm
    for i in range(len(p) - 1):
        if np.hypot(*(p[i + 1] - p[i])) > 1.0:  # next ring
            continue
        r_, g_, b_ = col[i]
        out.append(
            f'<line x1="{p[i, 0] - lo[0]:.3f}" y1="{hi[1] - p[i, 1]:.3f}" x2="{p[i + 1, 0] - lo[0]:.3f}" y2="{hi[1] - p[i + 1, 1]:.3f}" stroke="rgb({r_},{g_},{b_})" stroke-width="0.5"/>'
        )
    text = f"deviation: blue -{scale:.3f} mm ... grey 0 ... red +{scale:.3f} mm; max |d| {c.max_abs_mm:.4f} mm, RMS {c.rms_mm:.4f} mm"
    if c.verdict:
        text += f"; verdict {c.verdict} (t = {c.tolerance_mm:g} mm)"
    out.append(
        f'<text x="2" y="{h + 8:.3f}" font-size="3" font-family="Helvetica, Arial, sans-serif">{escape(text)}</text>'
    )
    out += ["</svg>", ""]
    return "\n".join(out)


def write_picture_png(c: Comparison, path: PathLike, *, px_per_mm: float = 10.0, inputs=()) -> Path:
    """The deviation picture as PNG (nominal grey, measured coloured, legend below)."""
    import cv2

    allp = np.vstack([c.nominal.outer_mm, c.points_mm])
    lo, hi = allp.min(axis=0) - 5.0, allp.max(axis=0) + 5.0
    size = hi - lo
    s = min(px_per_mm, 4000.0 / max(size))
    w, h = int(size[0] * s) + 1, int(size[1] * s) + 1
    img = np.full((h + 60, w, 3), 255, np.uint8)

    def px(p: np.ndarray) -> np.ndarray:
        return np.column_stack([(p[:, 0] - lo[0]) * s, (hi[1] - p[:, 1]) * s]).round().astype(np.int32)

    for ring in [c.nominal.outer_mm, *c.nominal.holes_mm]:
        cv2.polylines(img, [px(ring)], True, (150, 150, 150), 1, cv2.LINE_AA)
    col = _colour(c.deviation_mm, _picture_scale(c))
    q = px(c.points_mm)
    for i in range(len(q) - 1):
        if np.hypot(*(c.points_mm[i + 1] - c.points_mm[i])) > 1.0:
            continue
        r_, g_, b_ = (int(v) for v in col[i])
        cv2.line(img, tuple(int(v) for v in q[i]), tuple(int(v) for v in q[i + 1]), (b_, g_, r_), 3, cv2.LINE_AA)
    bar = np.linspace(-1, 1, max(w - 20, 10))
    bar_rgb = _colour(bar, 1.0)
    for i, (r_, g_, b_) in enumerate(bar_rgb):
        cv2.line(img, (10 + i, h + 10), (10 + i, h + 25), (int(b_), int(g_), int(r_)), 1)
    scale = _picture_scale(c)
    cv2.putText(img, f"-{scale:.3f} mm", (10, h + 45), cv2.FONT_HERSHEY_SIMPLEX, 0.45, (0, 0, 0), 1, cv2.LINE_AA)
    cv2.putText(
        img, f"+{scale:.3f} mm", (max(w - 110, 10), h + 45), cv2.FONT_HERSHEY_SIMPLEX, 0.45, (0, 0, 0), 1, cv2.LINE_AA
    )
    ok, buf = cv2.imencode(".png", img)
    return write_atomic(path, buf.tobytes(), inputs=inputs)


def comparison_json(c: Comparison) -> str:
    return json.dumps(c.to_dict(), indent=1)


def compare_to_outputs(
    measured: PathLike,
    nominal: PathLike,
    *,
    tolerance_mm: float | None = None,
    align: str = "fit",
    part: int | None = None,
    nominal_part: int | None = None,
    png: PathLike | None = None,
    svg: PathLike | None = None,
    html: PathLike | None = None,
) -> tuple[Comparison, str, list[str]]:
    """Compare, write the pictures; return the comparison, its JSON text and summary lines."""
    c = compare(measured, nominal, part=part, nominal_part=nominal_part, align=align, tolerance_mm=tolerance_mm)
    inputs = [measured, nominal]
    lines = [
        f"aligned ({align}): rotation {c.rotation_deg:.4f} deg, shift ({c.translation_mm[0]:.4f}, {c.translation_mm[1]:.4f}) mm",
        f"deviation along the outline: largest |d| {c.max_abs_mm:.4f} mm (u {c.max_abs_u_mm:.4f} mm), RMS {c.rms_mm:.4f} mm,"
        f" range {float(c.deviation_mm.min()):+.4f} .. {float(c.deviation_mm.max()):+.4f} mm",
    ]
    for h in c.holes:
        lines.append(
            f"hole {h.measured_label} -> nominal {h.nominal_index}: position {h.position_mm:.4f} mm (u {h.position_u_mm:.4f}),"
            f" diameter {h.diameter_mm:+.4f} mm (u {h.diameter_u_mm:.4f})"
        )
    lines += [f"note: {n}" for n in c.notes + c.nominal.notes]
    if c.verdict is not None:
        lines.append(f"verdict: {c.verdict} (line profile t = {c.tolerance_mm:g} mm): {c.reason}")
    if png is not None:
        lines.append(f"wrote {write_picture_png(c, png, inputs=inputs)}")
    if svg is not None:
        lines.append(f"wrote {write_atomic(svg, picture_svg(c), inputs=inputs)}")
    if html is not None:
        page = comparison_html(c, measured=os.fspath(measured), nominal=os.fspath(nominal), align=align)
        lines.append(f"wrote {write_atomic(html, page, inputs=inputs)}")
    return c, comparison_json(c), lines


def comparison_html(c: Comparison, *, measured: str = "", nominal: str = "", align: str = "fit") -> str:
    """A self-contained HTML page with the comparison section (picture, figures, holes, notes)."""
    from scanmass import __version__
    from scanmass.outputs.report import _environment, _generated, _markup

    svg = picture_svg(c)
    svg = svg[svg.index("<svg") :]
    return (
        _environment()
        .get_template("compare.html.j2")
        .render(
            title="scanmass: part against its nominal",
            version=__version__,
            generated=_generated(None),
            c=c,
            measured=measured,
            nominal=nominal,
            align=align,
            picture=_markup(svg),
            notes=c.notes + c.nominal.notes,
        )
    )
