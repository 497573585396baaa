"""Lines, arcs and circles that a designer would draw, fitted to a measured outline.

A measured ring has a vertex every pixel or so. :func:`fit_ring` turns it into the few
entities the part was drawn with:

1. a ring that one circle fits within the tolerance is a full circle;
2. otherwise a greedy split into lines and arcs within the tolerance (the same grower
   as :func:`scanmass.outputs.export.fit_lines_arcs`), started at the sharpest corner;
3. neighbours that one line or one circle fits within the tolerance are merged, until
   no merge is left;
4. pieces shorter than the corner zone (a few blur widths: the rounding a blurred
   sharp corner leaves in the measured outline) are dropped, their points shared by
   the neighbours;
5. every piece is refitted by least squares on its points away from its ends (total
   least squares for a line, the geometric circle fit for an arc), and neighbours meet
   at their intersection nearest the measured break (the foot of the perpendicular
   when a near-tangent joint misses by less than the tolerance).

The default tolerance (:func:`default_tolerance_mm`) comes from the measurement: four
standard deviations of one edge sample's position, with a floor of 0.02 mm, so that
edge noise and the sub-pixel contour's ripple stay inside it while a real step, chamfer
or radius of the part does not.

References
----------
.. [1] P. L. Rosin and G. A. W. West, "Nonparametric segmentation of curves into various
   representations", IEEE Trans. Pattern Anal. Mach. Intell. 17(12), 1140-1153, 1995.
   doi:10.1109/34.476507 (split-and-merge of digital curves into lines and arcs).
.. [2] N. Chernov, *Circular and Linear Regression: Fitting Circles and Lines by Least
   Squares*, CRC Press, 2010, ch. 4-5 (geometric circle fit, Gauss-Newton from the
   algebraic Kasa estimate).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from scanmass.errors import OptionError
from scanmass.geometry import orient_ring, ring_moments
from scanmass.measurement import Measurement, Part
from scanmass.outputs.export import _arc_bulge, _grow, _line_fits, _open_ring

__all__ = [
    "TOLERANCE_FLOOR_MM",
    "Entity",
    "FittedRing",
    "FittedPart",
    "edge_sigma_mm",
    "default_tolerance_mm",
    "size_u_mm",
    "fit_ring",
    "fit_part",
    "fit_measurement",
    "ring_points",
    "outline_distance_mm",
    "area_centroid_mm",
]

#: Floor of the default fit tolerance, mm (about a quarter pixel at 300 dpi).
TOLERANCE_FLOOR_MM = 0.02
#: Multiple of the edge sample's standard deviation in the default tolerance.
TOLERANCE_SIGMAS = 4.0
#: Residual scatter of a sub-pixel contour on a clean edge, px (1 sigma; the ripple of
#: linear interpolation between pixel centres, of the order of the accuracy benchmark's
#: centroid errors).
CONTOUR_RIPPLE_PX = 0.03


# ---------------------------------------------------------------------------
# Entities
# ---------------------------------------------------------------------------
@dataclass
class Entity:
    """One drawn entity in mm (result frame): a line, an arc or a full circle.

    Attributes
    ----------
    kind : {"line", "arc", "circle"}
    start_mm, end_mm : (float, float)
        End points (for a circle both are its point at angle 0).
    centre_mm : (float, float) or None
        Centre of an arc or circle.
    radius_mm : float or None
    ccw : bool
        Direction of travel of an arc (counter-clockwise when True).
    n_points : int
        Measured vertices the entity was fitted to.
    fit_u_mm : float
        1-sigma position uncertainty of the entity from the edge scatter of its points
        (``sigma_edge / sqrt(n)``).
    """

    kind: str
    start_mm: tuple[float, float]
    end_mm: tuple[float, float]
    centre_mm: tuple[float, float] | None = None
    radius_mm: float | None = None
    ccw: bool = True
    n_points: int = 0
    fit_u_mm: float = 0.0

    @property
    def sweep_deg(self) -> float:
        """Swept angle of an arc in degrees (360 for a circle, 0 for a line)."""
        if self.kind == "circle":
            return 360.0
        if self.kind != "arc" or self.centre_mm is None:
            return 0.0
        c = np.asarray(self.centre_mm)
        a0 = math.atan2(self.start_mm[1] - c[1], self.start_mm[0] - c[0])
        a1 = math.atan2(self.end_mm[1] - c[1], self.end_mm[0] - c[0])
        d = (a1 - a0) if self.ccw else (a0 - a1)
        return math.degrees(d % (2.0 * math.pi))

    @property
    def length_mm(self) -> float:
        """Length along the entity."""
        if self.kind == "line":
            return math.dist(self.start_mm, self.end_mm)
        return math.radians(self.sweep_deg) * float(self.radius_mm or 0.0)

    def angles_deg(self) -> tuple[float, float]:
        """Start and end angle of an arc, counter-clockwise as DXF wants them."""
        assert self.centre_mm is not None
        c = self.centre_mm
        a0 = math.degrees(math.atan2(self.start_mm[1] - c[1], self.start_mm[0] - c[0]))
        a1 = math.degrees(math.atan2(self.end_mm[1] - c[1], self.end_mm[0] - c[0]))
        return (a0, a1) if self.ccw else (a1, a0)

    def sample(self, step_mm: float = 0.05) -> np.ndarray:
        """Points along the entity from start to end (end included), about ``step_mm`` apart."""
        if self.kind == "line":
            n = max(2, math.ceil(self.length_mm / step_mm) + 1)
            t = np.linspace(0.0, 1.0, n)[:, None]
            return (1 - t) * np.asarray(self.start_mm) + t * np.asarray(self.end_mm)
        assert self.centre_mm is not None and self.radius_mm is not None
        c = np.asarray(self.centre_mm)
        a0 = math.atan2(self.start_mm[1] - c[1], self.start_mm[0] - c[0])
        sweep = math.radians(self.sweep_deg) * (1.0 if self.ccw else -1.0)
        n = max(3, math.ceil(abs(sweep) * self.radius_mm / step_mm) + 1)
        a = a0 + np.linspace(0.0, sweep, n)
        return c + self.radius_mm * np.column_stack([np.cos(a), np.sin(a)])

    def distance_mm(self, pts: np.ndarray) -> np.ndarray:
        """Distance of each point to the entity (the segment, or the arc's span)."""
        pts = np.asarray(pts, dtype=float)
        if self.kind == "line":
            return _segment_distance(pts, np.asarray(self.start_mm), np.asarray(self.end_mm))
        assert self.centre_mm is not None and self.radius_mm is not None
        c = np.asarray(self.centre_mm)
        rel = pts - c
        radial = np.abs(np.hypot(rel[:, 0], rel[:, 1]) - self.radius_mm)
        if self.kind == "circle":
            return radial
        a0 = math.atan2(self.start_mm[1] - c[1], self.start_mm[0] - c[0])
        sweep = math.radians(self.sweep_deg)
        direction = 1.0 if self.ccw else -1.0
        alpha = np.mod(direction * (np.arctan2(rel[:, 1], rel[:, 0]) - a0), 2.0 * math.pi)
        inside = alpha <= sweep
        ends = np.minimum(np.hypot(*(pts - np.asarray(self.start_mm)).T), np.hypot(*(pts - np.asarray(self.end_mm)).T))
        return np.where(inside, radial, ends)

    def to_dict(self) -> dict[str, Any]:
        d: dict[str, Any] = {
            "kind": self.kind,
            "start_mm": [float(v) for v in self.start_mm],
            "end_mm": [float(v) for v in self.end_mm],
        }
        if self.kind != "line":
            d["centre_mm"] = [float(v) for v in self.centre_mm or (0.0, 0.0)]
            d["radius_mm"] = float(self.radius_mm or 0.0)
        if self.kind == "arc":
            d["ccw"] = bool(self.ccw)
        return d


@dataclass
class FittedRing:
    """The entities of one ring (outer outline or hole), in travel order.

    ``points_mm`` are the measured vertices and ``owner`` the entity each was fitted
    to; ``max_deviation_mm`` and ``rms_deviation_mm`` are the distances of the measured
    vertices from the fitted entities.
    """

    entities: list[Entity]
    points_mm: np.ndarray = field(repr=False)
    owner: np.ndarray = field(repr=False)
    tolerance_mm: float
    is_hole: bool = False
    hole_label: int | None = None
    max_deviation_mm: float = 0.0
    rms_deviation_mm: float = 0.0
    max_deviation_outside_corners_mm: float = 0.0

    @property
    def counts(self) -> dict[str, int]:
        """Entities by kind."""
        out = {"line": 0, "arc": 0, "circle": 0}
        for e in self.entities:
            out[e.kind] += 1
        return out

    def polygon(self, step_mm: float = 0.02) -> np.ndarray:
        """The fitted ring as a dense polygon (closing vertex not repeated)."""
        return ring_points(self.entities, step_mm)


@dataclass
class FittedPart:
    """A part's fitted outer ring and holes, with the tolerance used."""

    label: int
    outer: FittedRing
    holes: list[FittedRing]
    tolerance_mm: float
    edge_sigma_mm: float
    mm_per_px: float

    @property
    def rings(self) -> list[FittedRing]:
        return [self.outer, *self.holes]

    @property
    def entity_count(self) -> int:
        return sum(len(r.entities) for r in self.rings)

    @property
    def max_deviation_mm(self) -> float:
        return max(r.max_deviation_mm for r in self.rings)

    def counts(self) -> dict[str, int]:
        out = {"line": 0, "arc": 0, "circle": 0}
        for r in self.rings:
            for k, v in r.counts.items():
                out[k] += v
        return out


# ---------------------------------------------------------------------------
# Tolerance
# ---------------------------------------------------------------------------
def edge_sigma_mm(part: Part, mm_per_px: float) -> float:
    """1-sigma scatter of one measured edge sample along its normal, mm.

    From the part's error-model inputs (``uncertainty_terms["inputs"]``): noise over
    contrast divided by the gradient of a blurred step, ``noise_rel * sqrt(2 pi) *
    sigma_blur`` px (the gradient of a unit step blurred by a Gaussian of width sigma
    peaks at ``1 / (sqrt(2 pi) sigma)``), combined with the contour's ripple on a clean
    edge (:data:`CONTOUR_RIPPLE_PX`).
    """
    inputs = (part.uncertainty_terms or {}).get("inputs", {}) if isinstance(part.uncertainty_terms, dict) else {}
    noise_rel = float(inputs.get("noise_rel", 0.0) or 0.0)
    blur_px = float(inputs.get("blur_px", 1.0) or 1.0)
    if not (math.isfinite(noise_rel) and math.isfinite(blur_px)):
        noise_rel, blur_px = 0.0, 1.0
    sigma_px = math.hypot(noise_rel * math.sqrt(2.0 * math.pi) * blur_px, CONTOUR_RIPPLE_PX)
    return sigma_px * float(mm_per_px)


def size_u_mm(fitted: FittedPart, entity: Entity) -> float:
    """Standard uncertainty of a fitted entity's position or radius from the image, mm.

    ``hypot(fit_u, tolerance / 4)``: the scatter of the fit over its points, and one
    edge sample's sigma (the default tolerance is four of them; at least 0.005 mm) as a
    model term for what the fit leaves out (the pull of a blurred edge on small radii,
    corner zones). The scale's term (relative uncertainty times the size) is not included.
    """
    return float(math.hypot(entity.fit_u_mm, fitted.tolerance_mm / TOLERANCE_SIGMAS))


def default_tolerance_mm(part: Part, mm_per_px: float) -> float:
    """Default fit tolerance: ``max(0.02 mm, 4 sigma_edge)``.

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> p = SimpleNamespace(uncertainty_terms={"inputs": {"noise_rel": 0.0, "blur_px": 1.0}})
    >>> default_tolerance_mm(p, 0.0847)
    0.02
    """
    return float(max(TOLERANCE_FLOOR_MM, TOLERANCE_SIGMAS * edge_sigma_mm(part, mm_per_px)))


def _blur_px(part: Part) -> float:
    inputs = (part.uncertainty_terms or {}).get("inputs", {}) if isinstance(part.uncertainty_terms, dict) else {}
    try:
        b = float(inputs.get("blur_px", 1.0) or 1.0)
    except (TypeError, ValueError):
        return 1.0
    return b if math.isfinite(b) and b > 0 else 1.0


# ---------------------------------------------------------------------------
# Least-squares fits
# ---------------------------------------------------------------------------
def _fit_line(pts: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Total least squares line: (point on it, unit direction)."""
    c = pts.mean(axis=0)
    _, _, vt = np.linalg.svd(pts - c, full_matrices=False)
    return c, vt[0]


def _fit_circle(pts: np.ndarray) -> tuple[np.ndarray, float]:
    """Geometric circle fit: Kasa start, then Gauss-Newton on ``|p - c| - R``."""
    x, y = pts[:, 0], pts[:, 1]
    ref = pts.mean(axis=0)
    u, v = x - ref[0], y - ref[1]
    a = np.column_stack([u, v, np.ones_like(u)])
    sol, *_ = np.linalg.lstsq(a, u * u + v * v, rcond=None)
    c = np.array([sol[0] / 2.0, sol[1] / 2.0])
    r = math.sqrt(max(sol[2] + c @ c, 1e-300))
    for _ in range(20):
        d = np.column_stack([u - c[0], v - c[1]])
        dist = np.hypot(d[:, 0], d[:, 1])
        dist = np.where(dist > 0, dist, 1e-300)
        jac = np.column_stack([-d[:, 0] / dist, -d[:, 1] / dist, -np.ones_like(dist)])
        res = dist - r
        step, *_ = np.linalg.lstsq(jac, -res, rcond=None)
        c = c + step[:2]
        r = r + step[2]
        if np.abs(step).max() < 1e-12 * max(r, 1.0):
            break
    return c + ref, float(abs(r))


def _line_max_dev(pts: np.ndarray) -> float:
    c, d = _fit_line(pts)
    n = np.array([-d[1], d[0]])
    return float(np.abs((pts - c) @ n).max())


def _circle_max_dev(pts: np.ndarray) -> tuple[float, np.ndarray, float]:
    c, r = _fit_circle(pts)
    return float(np.abs(np.hypot(*(pts - c).T) - r).max()), c, r


def _segment_distance(pts: np.ndarray, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    ab = b - a
    l2 = float(ab @ ab)
    if l2 <= 0:
        return np.hypot(*(pts - a).T)
    t = np.clip((pts - a) @ ab / l2, 0.0, 1.0)
    return np.hypot(*(pts - a - t[:, None] * ab).T)


# ---------------------------------------------------------------------------
# Ring fitting
# ---------------------------------------------------------------------------
def _piece_points(closed: np.ndarray, i: int, j: int) -> np.ndarray:
    return closed[i : j + 1]


def _greedy(closed: np.ndarray, n: int, tol: float) -> list[tuple[int, int]]:
    max_sweep = math.radians(270.0)
    pieces: list[tuple[int, int]] = []
    i = 0
    while i < n:
        j_line = _grow(lambda j: _line_fits(closed, i, j, tol), i + 1, n)
        j_arc = (
            _grow(lambda j: _arc_bulge(closed, i, j, tol, max_sweep) is not None, i + 1, n, first=i + 2)
            if i + 2 <= n
            else i + 1
        )
        j = max(j_line, j_arc)
        pieces.append((i, j))
        i = j
    return pieces


def _fits_one(pts: np.ndarray, tol: float, max_radius: float) -> str | None:
    """'line' or 'arc' when one entity fits the points within tol, else None."""
    if len(pts) < 3 or _line_max_dev(pts) <= tol:
        return "line"
    if len(pts) >= 4:
        dev, _, r = _circle_max_dev(pts)
        if dev <= tol and r <= max_radius:
            return "arc"
    return None


def _merge(
    closed: np.ndarray, pieces: list[tuple[int, int]], tol: float, max_radius: float, corner_mm: float = 0.0
) -> list[tuple[int, int]]:
    """Merge neighbouring pieces (cyclically) while one line or circle fits both."""
    changed = True
    while changed and len(pieces) > 1:
        changed = False
        # try the merge of smallest combined residual first: greedy, one pass at a time
        best = None
        for k in range(len(pieces)):
            a = pieces[k]
            b_end = pieces[k + 1][1] if k + 1 < len(pieces) else pieces[0][1] + (pieces[-1][1] - pieces[0][0])
            pts = _core(_cyclic(closed, a[0], b_end), corner_mm)
            kind = _fits_one(pts, tol, max_radius)
            if kind is not None:
                best = k
                break
        if best is not None:
            k = best
            if k + 1 < len(pieces):
                pieces = pieces[:k] + [(pieces[k][0], pieces[k + 1][1])] + pieces[k + 2 :]
            else:  # the last with the first: the merged piece starts before index 0
                n = pieces[-1][1] - pieces[0][0]
                pieces = [(pieces[-1][0] - n, pieces[0][1])] + pieces[1:-1]
            changed = True
    return pieces


def _cyclic(closed: np.ndarray, i: int, j: int) -> np.ndarray:
    """Points i..j of the ring (indices may wrap past n)."""
    n = len(closed) - 1
    idx = np.arange(i, j + 1) % n
    return closed[idx]


def _corner_start(pts: np.ndarray, span: int) -> int:
    """Vertex of the largest turn between chords ``span`` vertices long (a corner)."""
    span = max(1, min(span, len(pts) // 4))
    d_in = pts - np.roll(pts, span, axis=0)
    d_out = np.roll(pts, -span, axis=0) - pts
    turn = np.abs(np.arctan2(d_in[:, 0] * d_out[:, 1] - d_in[:, 1] * d_out[:, 0], np.einsum("ij,ij->i", d_in, d_out)))
    return int(np.argmax(turn))


def fit_ring(
    ring_mm: np.ndarray,
    tolerance_mm: float,
    *,
    corner_mm: float = 0.0,
    edge_sigma_mm: float = 0.0,
    is_hole: bool = False,
) -> FittedRing:
    """Fit lines, arcs or one full circle to a measured closed ring.

    Parameters
    ----------
    ring_mm : (n, 2) array_like
        Measured ring in mm (either orientation; outer rings are travelled
        counter-clockwise, holes clockwise).
    tolerance_mm : float
        Largest distance of the measured vertices from one entity, mm.
    corner_mm : float, optional
        Length of the zone a blurred sharp corner rounds off; pieces shorter than twice
        this are absorbed by their neighbours, and refits leave out this much at each
        end. 0 keeps every piece.
    edge_sigma_mm : float, optional
        1-sigma scatter of one edge sample, for each entity's ``fit_u_mm``.
    is_hole : bool

    Returns
    -------
    FittedRing

    Examples
    --------
    >>> import numpy as np
    >>> t = np.linspace(0, 2 * np.pi, 200, endpoint=False)
    >>> r = fit_ring(np.column_stack([5 + 3 * np.cos(t), 2 + 3 * np.sin(t)]), 0.01)
    >>> r.entities[0].kind, round(r.entities[0].radius_mm, 6)
    ('circle', 3.0)
    """
    tol = float(tolerance_mm)
    if not (math.isfinite(tol) and tol > 0):
        raise OptionError(f"fit tolerance {tolerance_mm!r} must be a positive length in mm, e.g. 0.02")
    pts = orient_ring(_open_ring(ring_mm, what="outline"), ccw=not is_hole)
    n = len(pts)
    span = float(np.max(np.ptp(pts, axis=0)))
    # 1. one circle
    if n >= 8:
        dev, c, r = _circle_max_dev(pts)
        if dev <= tol:
            start = (float(c[0] + r), float(c[1]))
            ent = Entity(
                "circle",
                start,
                start,
                (float(c[0]), float(c[1])),
                r,
                not is_hole,
                n,
                edge_sigma_mm / math.sqrt(n),
            )
            return _finish(FittedRing([ent], pts, np.zeros(n, dtype=int), tol, is_hole))
    # 2. greedy split, from a corner
    perim = float(np.hypot(*np.diff(np.vstack([pts, pts[:1]]), axis=0).T).sum())
    step = perim / n
    corner_span = max(1, round(max(corner_mm, 3 * step) / step))
    first = _corner_start(pts, corner_span)
    pts = np.roll(pts, -first, axis=0)
    closed = np.vstack([pts, pts[:1]])
    pieces = _greedy(closed, n, tol)
    max_radius = 50.0 * span
    # 3. merge neighbours that one entity fits; 4. drop pieces that only carry a rounded
    # corner, when the neighbours then meet with every point outside the corner zone
    # within the tolerance
    pieces = _merge(closed, pieces, tol, max_radius, corner_mm)
    if corner_mm > 0:
        changed = True
        while changed and len(pieces) > 2:
            changed = False
            lens = [_chord(closed, a, b) for a, b in pieces]
            for k in np.argsort(lens):
                if lens[k] > 6.0 * corner_mm:
                    break
                cand = _drop_piece(pieces, int(k), n)
                if _valid(closed, n, cand, tol, corner_mm, max_radius):
                    pieces = _merge(closed, cand, tol, max_radius, corner_mm)
                    changed = True
                    break
    # 5. refit and join
    ring = _build(closed, n, pieces, tol, corner_mm, edge_sigma_mm, is_hole, max_radius)
    return _finish(ring, corner_mm)


def _chord(closed: np.ndarray, a: int, b: int) -> float:
    n = len(closed) - 1
    return float(np.hypot(*(closed[b % n] - closed[a % n])))


def _core(seg: np.ndarray, corner_mm: float) -> np.ndarray:
    """The points of a piece farther than ``corner_mm`` (along it) from both ends."""
    if corner_mm <= 0:
        return seg
    arc_len = np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(seg, axis=0).T))])
    inner = (arc_len >= corner_mm) & (arc_len <= arc_len[-1] - corner_mm)
    return seg[inner] if inner.sum() >= 5 else seg


def _corner_exempt(ring: FittedRing, corner_mm: float) -> np.ndarray:
    """Points within the rounding zone of a sharp joint (turn over 10 degrees)."""
    ex = np.zeros(len(ring.points_mm), dtype=bool)
    ents = ring.entities
    if corner_mm <= 0 or len(ents) < 2:
        return ex
    for k, e in enumerate(ents):
        f = ents[(k + 1) % len(ents)]
        t_in = _tangent(e, at_end=True)
        t_out = _tangent(f, at_end=False)
        turn = math.atan2(t_in[0] * t_out[1] - t_in[1] * t_out[0], float(t_in @ t_out))
        if abs(turn) < math.radians(10.0):
            continue
        # an acute corner's rounding reaches farther along its sides
        r = corner_mm / max(math.cos(0.5 * abs(turn)), 0.25)
        ex |= np.hypot(*(ring.points_mm - np.asarray(e.end_mm)).T) <= r
    return ex


def _tangent(e: Entity, *, at_end: bool) -> np.ndarray:
    if e.kind == "line":
        d = np.asarray(e.end_mm) - np.asarray(e.start_mm)
        nd = float(np.hypot(*d))
        return d / nd if nd > 0 else np.array([1.0, 0.0])
    assert e.centre_mm is not None
    p = np.asarray(e.end_mm if at_end else e.start_mm) - np.asarray(e.centre_mm)
    t = np.array([-p[1], p[0]]) if e.ccw else np.array([p[1], -p[0]])
    nt = float(np.hypot(*t))
    return t / nt if nt > 0 else np.array([1.0, 0.0])


def _valid(
    closed: np.ndarray, n: int, pieces: list[tuple[int, int]], tol: float, corner_mm: float, max_radius: float
) -> bool:
    ring = _build(closed, n, pieces, tol, corner_mm, 0.0, False, max_radius)
    dev = _deviations(ring)
    ex = _corner_exempt(ring, corner_mm)
    return bool(np.all(dev[~ex] <= tol))


def _drop_piece(pieces: list[tuple[int, int]], k: int, n: int) -> list[tuple[int, int]]:
    """Remove piece k, giving its first half to the previous piece and the rest to the next.

    Pieces are contiguous index ranges (``pieces[k][1] == pieces[k + 1][0]``) covering one
    turn (the last ends at the first's start + n); so is the result.
    """
    a, b = pieces[k]
    mid = (a + b) // 2
    out = list(pieces)
    m = len(pieces)
    if 0 < k < m - 1:
        out[k - 1] = (out[k - 1][0], mid)
        out[k + 1] = (mid, out[k + 1][1])
    elif k == 0:
        out[-1] = (out[-1][0], mid + n)
        out[1] = (mid, out[1][1])
    else:
        out[k - 1] = (out[k - 1][0], mid)
        out[0] = (mid - n, out[0][1])
    del out[k]
    shift = (out[0][0] // n) * n
    return [(p - shift, q - shift) for p, q in out]


def _build(
    closed: np.ndarray,
    n: int,
    pieces: list[tuple[int, int]],
    tol: float,
    corner_mm: float,
    sigma: float,
    is_hole: bool,
    max_radius: float,
) -> FittedRing:
    pts_open = closed[:-1]
    owner = np.zeros(n, dtype=int)
    fits: list[tuple[str, Any, Any, np.ndarray]] = []
    for k, (a, b) in enumerate(pieces):
        seg = _cyclic(closed, a, b)
        idx = np.arange(a, b) % n
        owner[idx] = k
        # leave out the corner zone at both ends when enough points remain
        core = _core(seg, corner_mm)
        kind = _fits_one(core, tol, max_radius) or _best_kind(core, max_radius)
        if kind == "arc":
            c, r = _fit_circle(core)
            fits.append(("arc", c, r, seg))
        else:
            p, d = _fit_line(core)
            fits.append(("line", p, d, seg))
    m = len(fits)
    joints = []
    for k in range(m):
        fa, fb = fits[k], fits[(k + 1) % m]
        brk = fb[3][0]
        joints.append(_joint(fa, fb, brk, tol) if m > 1 else brk)
    entities = []
    for k, (kind, p, q, seg) in enumerate(fits):
        start = joints[(k - 1) % m]
        end = joints[k]
        nu = len(seg)
        u = sigma / math.sqrt(max(nu, 1))
        if kind == "line":
            entities.append(Entity("line", _t(start), _t(end), n_points=nu, fit_u_mm=u))
        else:
            mid = seg[len(seg) // 2]
            cross = (mid[0] - start[0]) * (end[1] - mid[1]) - (mid[1] - start[1]) * (end[0] - mid[0])
            entities.append(Entity("arc", _t(start), _t(end), _t(p), float(q), bool(cross > 0), nu, u))
    return FittedRing(entities, pts_open, owner, tol, is_hole)


def _t(p: Any) -> tuple[float, float]:
    return (float(p[0]), float(p[1]))


def _joint(a: tuple, b: tuple, brk: np.ndarray, tol: float) -> np.ndarray:
    """Where entity a meets entity b: the intersection nearest the measured break."""
    cands: list[np.ndarray] = []
    if a[0] == "line" and b[0] == "line":
        p1, d1 = a[1], a[2]
        p2, d2 = b[1], b[2]
        den = d1[0] * d2[1] - d1[1] * d2[0]
        if abs(den) > 1e-9:
            t = ((p2[0] - p1[0]) * d2[1] - (p2[1] - p1[1]) * d2[0]) / den
            return p1 + t * d1
        return brk
    if a[0] == "line" or b[0] == "line":
        line, circ = (a, b) if a[0] == "line" else (b, a)
        p, d = line[1], line[2]
        c, r = circ[1], circ[2]
        foot = p + ((c - p) @ d) * d
        h = float(np.hypot(*(foot - c)))
        if abs(h - r) <= tol:  # tangent within the tolerance: meet at the tangent point
            return foot
        if h < r:
            s = math.sqrt(r * r - h * h)
            cands = [foot + s * d, foot - s * d]
        else:
            cands = [foot]
    else:
        c1, r1, c2, r2 = a[1], a[2], b[1], b[2]
        dc = c2 - c1
        dist = float(np.hypot(*dc))
        if dist <= 1e-12:
            return brk
        u = dc / dist
        if abs(dist - (r1 + r2)) <= tol or abs(dist - abs(r1 - r2)) <= tol:  # tangent circles
            side = 1.0 if abs(dist - (r1 + r2)) <= tol or r1 >= r2 else -1.0
            return c1 + side * r1 * u
        x = (dist * dist + r1 * r1 - r2 * r2) / (2 * dist)
        h2 = r1 * r1 - x * x
        base = c1 + x * u
        if h2 > 0:
            h = math.sqrt(h2)
            perp = np.array([-u[1], u[0]])
            cands = [base + h * perp, base - h * perp]
        else:
            cands = [base]
    best = min(cands, key=lambda q: float(np.hypot(*(q - brk))))
    return best


def _best_kind(pts: np.ndarray, max_radius: float) -> str:
    if len(pts) < 4:
        return "line"
    dev, _, r = _circle_max_dev(pts)
    return "arc" if dev < _line_max_dev(pts) and r <= max_radius else "line"


def _deviations(ring: FittedRing) -> np.ndarray:
    """Distance of each measured vertex from the fitted outline (its entity or a neighbour)."""
    dev = np.zeros(len(ring.points_mm))
    m = len(ring.entities)
    for k in range(m):
        sel = ring.owner == k
        if sel.any():
            q = ring.points_mm[sel]
            near = {(k - 1) % m, k, (k + 1) % m}
            dev[sel] = np.min([ring.entities[j].distance_mm(q) for j in near], axis=0)
    return dev


def _finish(ring: FittedRing, corner_mm: float = 0.0) -> FittedRing:
    dev = _deviations(ring)
    ex = _corner_exempt(ring, corner_mm)
    ring.max_deviation_outside_corners_mm = float(dev[~ex].max()) if (~ex).any() else 0.0
    ring.max_deviation_mm = float(dev.max()) if len(dev) else 0.0
    ring.rms_deviation_mm = float(math.sqrt(np.mean(dev * dev))) if len(dev) else 0.0
    return ring


# ---------------------------------------------------------------------------
# Parts and measurements
# ---------------------------------------------------------------------------
def fit_part(part: Part, mm_per_px: float, *, tolerance_mm: float | None = None) -> FittedPart:
    """Fit a measured part's outer ring and holes (default tolerance from the measurement).

    Parameters
    ----------
    part : Part
        With ``outline_mm`` on the part and its holes.
    mm_per_px : float
        The result's pixel size (``Measurement.scale.mm_per_px``), for the corner zone.
    tolerance_mm : float, optional
        Overrides :func:`default_tolerance_mm`.

    Raises
    ------
    OptionError
        The part was found in pieces (:attr:`~scanmass.measurement.Part.pieces_mm`): its outline
        is its largest piece only, and a shape fitted to it would miss the others.
    """
    from scanmass.outputs.export import _hole_ring, _outer, one_piece

    one_piece(part, "a shape fitted to it")

    sigma = edge_sigma_mm(part, mm_per_px)
    tol = default_tolerance_mm(part, mm_per_px) if tolerance_mm is None else float(tolerance_mm)
    # a blurred sharp corner is rounded over about three blur widths from its tip
    corner = max(3.0 * _blur_px(part), 2.0) * float(mm_per_px)
    outer = fit_ring(_outer(part), tol, corner_mm=corner, edge_sigma_mm=sigma)
    holes = []
    for h in part.holes:
        fr = fit_ring(_hole_ring(part, h), tol, corner_mm=corner, edge_sigma_mm=sigma, is_hole=True)
        fr.hole_label = h.label
        holes.append(fr)
    return FittedPart(part.label, outer, holes, tol, sigma, float(mm_per_px))


def fit_measurement(m: Measurement, *, tolerance_mm: float | None = None) -> list[FittedPart]:
    """:func:`fit_part` for every part of a result."""
    return [fit_part(p, m.scale.mm_per_px, tolerance_mm=tolerance_mm) for p in m.parts]


# ---------------------------------------------------------------------------
# Helpers shared with intent, drawing and compare
# ---------------------------------------------------------------------------
def ring_points(entities: list[Entity], step_mm: float = 0.02) -> np.ndarray:
    """Dense polygon of a closed chain of entities (no repeated closing vertex)."""
    chunks = [e.sample(step_mm)[:-1] for e in entities]
    if len(entities) == 1 and entities[0].kind == "circle":
        e = entities[0]
        assert e.centre_mm is not None and e.radius_mm is not None
        nn = max(16, math.ceil(2 * math.pi * e.radius_mm / step_mm))
        a = np.linspace(0, 2 * math.pi, nn, endpoint=False) * (1 if e.ccw else -1)
        return np.asarray(e.centre_mm) + e.radius_mm * np.column_stack([np.cos(a), np.sin(a)])
    return np.vstack(chunks)


def outline_distance_mm(a_mm: np.ndarray, b_mm: np.ndarray, *, chunk: int = 128) -> np.ndarray:
    """Distance of every vertex of ``a_mm`` to the closed polygon ``b_mm``."""
    a = np.asarray(a_mm, dtype=float)
    b = np.asarray(b_mm, dtype=float)
    p0 = b
    p1 = np.roll(b, -1, axis=0)
    seg = p1 - p0
    l2 = np.maximum(np.einsum("ij,ij->i", seg, seg), 1e-300)
    out = np.empty(len(a))
    for s in range(0, len(a), chunk):
        q = a[s : s + chunk]
        rel = q[:, None, :] - p0[None, :, :]
        t = np.clip(np.einsum("ijk,jk->ij", rel, seg) / l2, 0.0, 1.0)
        d = rel - t[:, :, None] * seg[None, :, :]
        out[s : s + chunk] = np.sqrt(np.einsum("ijk,ijk->ij", d, d).min(axis=1))
    return out


def area_centroid_mm(outer_mm: np.ndarray, holes_mm: list[np.ndarray]) -> tuple[float, tuple[float, float]]:
    """Area and centroid of an outer polygon less its holes (Green's theorem)."""
    o = orient_ring(np.asarray(outer_mm, float), ccw=True)
    ref = (float(o[:, 0].mean()), float(o[:, 1].mean()))
    mom = ring_moments(o, about=ref)
    for h in holes_mm:
        mom = mom + ring_moments(orient_ring(np.asarray(h, float), ccw=False), about=ref)
    a = float(mom[0])
    return a, (ref[0] + float(mom[1]) / a, ref[1] + float(mom[2]) / a)
