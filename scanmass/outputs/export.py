"""Outline export for CAD and cutting: DXF (through ezdxf) and SVG, in millimetres (DXF also in inches).

Both formats keep the result frame of DESIGN.md: millimetres, x to the right, y up,
the same coordinates as ``Part.outline_mm``.

DXF layout (layer names are scanmass's own, prefixed with its name):

``SCANMASS_OUTLINE``
    One closed LWPOLYLINE per part, counter-clockwise.
``SCANMASS_HOLES``
    Holes that are round within the round tolerance as CIRCLE (fitted centre and
    diameter), other holes as closed clockwise LWPOLYLINEs.
``SCANMASS_PIECES``
    A part found in pieces (``Part.pieces_mm``: its outline on ``SCANMASS_OUTLINE`` is its
    largest piece only): one closed counter-clockwise LWPOLYLINE per other piece, on a layer
    of its own, since a piece may touch or overlap the largest one; its figures count them all.
``SCANMASS_REFERENCE``
    Not for cutting (its plot flag is off, dashed line type): a POINT and a cross at
    each centroid, the two principal axes through it (the I2 axis is the part's long
    direction, not drawn for a near-round part whose axes are undefined) and the part
    label as TEXT ("part 1", as in every other output; "part 1 (in 3 pieces)" for a part
    found in pieces).

With ``units="in"`` the drawing is scaled to inches (1 in = 25.4 mm exactly) and
``$INSUNITS`` is 1; by default it is in mm, ``$INSUNITS`` 4.

With a fit tolerance the polylines are replaced by lines and circular arcs
(LWPOLYLINE bulges) that stay within the tolerance of the measured outline, see
:func:`fit_lines_arcs`; CAM software then gets a few arcs instead of thousands of
short segments.

SVG layout: ``width``/``height`` in mm and a matching ``viewBox`` (1 user unit =
1 mm). All geometry sits in one group with ``transform="matrix(1 0 0 -1 0 0)"``, so
the numbers in the path data are exactly the result-frame coordinates (y up) and the
transform flips them onto SVG's y-down canvas; the ``viewBox`` therefore spans
``x_min .. x_max`` and ``-y_max .. -y_min``. One ``<path fill-rule="evenodd">`` per
part holds its outer ring and its holes (commands M, L and Z only). A part found in pieces
has one more ``<path>`` per other piece (``id="part-N-piece-K"``, dashed stroke, nonzero fill:
a piece that overlaps the largest one is drawn over it, not cut out of it).
"""

from __future__ import annotations

import math
import os
from collections.abc import Iterable, Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING
from xml.sax.saxutils import escape, quoteattr

import numpy as np

from scanmass.errors import OptionError, ResultFormatError
from scanmass.geometry import orient_ring, signed_area
from scanmass.measurement import Hole, Measurement, Part
from scanmass.names import INCH_MM, check_units
from scanmass.outputs.atomic import write_atomic
from scanmass.outputs.resultio import PathLike, as_measurement

if TYPE_CHECKING:  # pragma: no cover
    from ezdxf.document import Drawing

__all__ = [
    "LAYER_OUTLINE",
    "LAYER_HOLES",
    "LAYER_REFERENCE",
    "LAYER_PIECES",
    "ExportSummary",
    "pieces_note",
    "fit_lines_arcs",
    "fit_tolerance_default_mm",
    "round_tolerance_default_mm",
    "dxf_document",
    "svg_text",
    "export_dxf",
    "export_svg",
]

LAYER_OUTLINE = "SCANMASS_OUTLINE"
LAYER_HOLES = "SCANMASS_HOLES"
LAYER_REFERENCE = "SCANMASS_REFERENCE"
LAYER_PIECES = "SCANMASS_PIECES"

#: Bounds of the automatic fit tolerance (mm), see :func:`fit_tolerance_default_mm`.
FIT_TOLERANCE_MAX_MM = 0.02
FIT_TOLERANCE_MIN_MM = 0.001
#: Floor of the automatic round tolerance of holes (mm), see
#: :func:`round_tolerance_default_mm`.
ROUND_TOLERANCE_MIN_MM = 0.02

FitTolerance = float | str | None  # a number of mm, or "auto"; strings are parsed by the validator


@dataclass
class ExportSummary:
    """What an export wrote: counts that tell how much the fitting simplified."""

    path: Path | None
    parts: int
    vertices_in: int
    vertices_out: int
    arcs: int
    circles: int
    #: Other pieces of parts found in pieces that were drawn (:attr:`Part.pieces_mm`)
    pieces: int = 0

    @property
    def compression(self) -> float:
        """Input vertices per output vertex (1.0 without fitting)."""
        return self.vertices_in / self.vertices_out if self.vertices_out else float("nan")


# ---------------------------------------------------------------------------
# Tolerances
# ---------------------------------------------------------------------------
def fit_tolerance_default_mm(part: Part) -> float:
    """Automatic line-and-arc fit tolerance of one part, in mm.

    Fitting within ``tol`` changes the enclosed area by at most ``tol * perimeter``
    (the fitted outline stays in a strip of width ``tol`` along the measured one).
    The default keeps that worst case at half the part's stated area uncertainty,
    i.e. half the edge shift ``area_u_mm2 / perimeter_mm`` that the uncertainty
    amounts to (DESIGN.md's error model: a uniform boundary shift ``d`` changes the
    area by ``perimeter * d``), capped at 0.02 mm so the drawing stays close to the
    part, and never below 0.001 mm::

        tol = clip(0.5 * area_u_mm2 / perimeter_mm, 0.001, 0.02)

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> fit_tolerance_default_mm(SimpleNamespace(area_u_mm2=2.0, perimeter_mm=200.0))
    0.005
    """
    area_u = _finite(part.area_u_mm2)
    perimeter = _finite(part.perimeter_mm)
    edge_u_mm = area_u / perimeter if area_u is not None and perimeter and perimeter > 0 else 0.0
    return float(min(max(0.5 * edge_u_mm, FIT_TOLERANCE_MIN_MM), FIT_TOLERANCE_MAX_MM))


def round_tolerance_default_mm(hole: Hole) -> float:
    """Automatic roundness limit of one hole, in mm: ``max(0.02, 0.01 * d, 4 * u(d))``.

    A hole whose ``roundness_mm`` (radial spread about its fitted circle) is at most
    this is written as a DXF CIRCLE. The terms: 1 % of the diameter; four standard
    uncertainties of the diameter, since edge noise alone spreads the radii of a
    perfectly round hole by a few sigma; and a floor of 0.02 mm.
    """
    d = _finite(hole.diameter_mm) or 0.0
    d_u = _finite(hole.diameter_u_mm) or 0.0
    return float(max(ROUND_TOLERANCE_MIN_MM, 0.01 * d, 4.0 * d_u))


def _check_tolerance(value: object, name: str, *, auto: bool) -> float | str | None:
    if value is None:
        return None
    if auto and isinstance(value, str) and value.strip().lower() == "auto":
        return "auto"
    try:
        tol = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        hint = "a length in mm or 'auto'" if auto else "a length in mm"
        raise OptionError(f"{name} {value!r} is not a number; give {hint}, e.g. 0.01") from None
    if not (math.isfinite(tol) and 0.0 < tol <= 10.0):
        raise OptionError(f"{name} {value!r} is out of range; give a length in mm between 0 and 10, e.g. 0.01")
    return tol


def _finite(value: object) -> float | None:
    try:
        f = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return None
    return f if math.isfinite(f) else None


# ---------------------------------------------------------------------------
# Rings
# ---------------------------------------------------------------------------
def _open_ring(ring: object, *, what: str) -> np.ndarray:
    """(n, 2) float array of a ring without its closing vertex or repeated vertices."""
    arr = np.asarray(ring, dtype=float)
    if arr.ndim != 2 or arr.shape[1] != 2 or not np.isfinite(arr).all():
        raise ResultFormatError(
            f"{what} is not a list of finite [x, y] pairs; re-create the result with 'scanmass measure'"
        )
    if len(arr) > 1:
        keep = np.any(np.diff(arr, axis=0) != 0.0, axis=1)
        arr = arr[np.concatenate([[True], keep])]
    if len(arr) > 1 and np.array_equal(arr[0], arr[-1]):
        arr = arr[:-1]
    if len(arr) < 3:
        raise ResultFormatError(
            f"{what} has fewer than 3 distinct vertices; re-create the result with 'scanmass measure'"
        )
    return arr


# ---------------------------------------------------------------------------
# Line-and-arc fitting
# ---------------------------------------------------------------------------
def fit_lines_arcs(ring_mm: np.ndarray, tolerance_mm: float, *, max_sweep_deg: float = 180.0) -> np.ndarray:
    """Approximate a closed ring by straight segments and circular arcs.

    Greedy: from the current vertex, grow the longest run of following vertices that
    a straight segment fits and the longest run that a circular arc fits, each
    within ``tolerance_mm``; emit the longer (the segment on a tie) and continue from
    its end vertex. Runs are grown by doubling and then bisection.

    - Segment: every vertex of the run lies within the tolerance of the segment
      joining its ends (so, by convexity of the distance, do the edges between).
    - Arc: the circle through both ends whose centre minimises the algebraic
      residuals ``|p - c|^2 - R^2`` of the inner vertices (a Kasa fit with the centre
      constrained to the chord's bisector, which is linear in one unknown); accepted
      when the vertices follow each other along the arc and the largest radial
      deviation plus the largest sagitta between neighbouring vertices is within the
      tolerance, so the arc and the replaced polyline stay within the tolerance of
      each other.

    Every emitted vertex is a vertex of the input, so the fitted ring passes through
    the measured points it keeps.

    Parameters
    ----------
    ring_mm : (n, 2) array_like of float
        Closed ring in mm (the closing vertex may be repeated or not).
    tolerance_mm : float
        Largest allowed distance between the fitted and the measured outline, mm.
    max_sweep_deg : float, optional
        Largest sweep of one arc (default 180 degrees; a full circle becomes two
        arcs).

    Returns
    -------
    (m, 3) ndarray of float
        Vertices ``x_mm, y_mm, bulge`` of a closed LWPOLYLINE in the input's order.
        The bulge of vertex k describes the segment to vertex k + 1 (the last one to
        the first): 0 for a straight segment, ``tan(sweep / 4)`` for an arc,
        positive counter-clockwise.

    References
    ----------
    .. [1] I. Kasa, "A circle fitting procedure and its error analysis", IEEE Trans.
       Instrum. Meas. IM-25(1), 8-14, 1976. doi:10.1109/TIM.1976.6312298
    .. [2] P. L. Rosin and G. A. W. West, "Nonparametric segmentation of curves into
       various representations", IEEE Trans. Pattern Anal. Mach. Intell. 17(12),
       1140-1153, 1995. doi:10.1109/34.476507 (segmenting digital curves into lines
       and arcs within a tolerance).
    .. [3] DXF reference, LWPOLYLINE group code 42: bulge = tan(included angle / 4),
       negative for a clockwise arc.

    Examples
    --------
    >>> square = [[0, 0], [5, 0], [10, 0], [10, 10], [0, 10]]
    >>> fit_lines_arcs(square, 0.01)
    array([[ 0.,  0.,  0.],
           [10.,  0.,  0.],
           [10., 10.,  0.],
           [ 0., 10.,  0.]])
    """
    tol = float(tolerance_mm)
    if not (math.isfinite(tol) and tol > 0.0):
        raise OptionError(f"fit tolerance {tolerance_mm!r} must be a positive length in mm, e.g. 0.01")
    max_sweep = math.radians(float(max_sweep_deg))
    if not 0.0 < max_sweep < 2.0 * math.pi:
        raise OptionError(f"max_sweep_deg {max_sweep_deg!r} must be between 0 and 360")
    pts = _open_ring(ring_mm, what="outline")
    n = len(pts)
    # Start at the sharpest corner so a straight edge or an arc is not cut in two
    # where the ring happens to begin.
    start = _sharpest_vertex(pts)
    order = np.roll(np.arange(n), -start)
    closed = np.vstack([pts[order], pts[order[:1]]])  # closed[n] is closed[0]

    out: list[tuple[float, float, float]] = []
    i = 0
    while i < n:
        j_line = _grow(lambda j: _line_fits(closed, i, j, tol), i + 1, n)
        bulges: dict[int, float] = {}

        def arc_ok(j: int) -> bool:
            b = _arc_bulge(closed, i, j, tol, max_sweep)
            if b is None:
                return False
            bulges[j] = b
            return True

        j_arc = _grow(arc_ok, i + 1, n, first=i + 2) if i + 2 <= n else i + 1
        if j_arc > j_line:
            out.append((closed[i, 0], closed[i, 1], bulges[j_arc]))
            i = j_arc
        else:
            out.append((closed[i, 0], closed[i, 1], 0.0))
            i = j_line
    return np.asarray(out, dtype=float)


def _sharpest_vertex(pts: np.ndarray) -> int:
    d_in = pts - np.roll(pts, 1, axis=0)
    d_out = np.roll(pts, -1, axis=0) - pts
    turn = np.abs(np.arctan2(d_in[:, 0] * d_out[:, 1] - d_in[:, 1] * d_out[:, 0], np.einsum("ij,ij->i", d_in, d_out)))
    return int(np.argmax(turn))


def _grow(fits, good: int, limit: int, *, first: int | None = None) -> int:
    """Largest j in (good, limit] with fits(j), found by doubling then bisection.

    ``good`` is an index known to fit (or the fallback when nothing does); the search
    starts at ``first`` (default ``good + 1``). Fits are nearly monotone in j, so the
    bisection may miss a longer run but never returns an unchecked one.
    """
    cand = good + 1 if first is None else first
    if cand > limit or not fits(cand):
        return good
    good = cand
    step = 1
    bad = None
    while good < limit:
        cand = min(good + step, limit)
        if fits(cand):
            good = cand
            step *= 2
        else:
            bad = cand
            break
    if bad is None:
        return good
    while bad - good > 1:
        mid = (good + bad) // 2
        if fits(mid):
            good = mid
        else:
            bad = mid
    return good


def _line_fits(closed: np.ndarray, i: int, j: int, tol: float) -> bool:
    a, b = closed[i], closed[j]
    ab = b - a
    length2 = float(ab @ ab)
    if length2 <= 0.0:
        return False
    if j - i < 2:
        return True
    q = closed[i + 1 : j] - a
    t = np.clip(q @ ab / length2, 0.0, 1.0)
    dist = np.hypot(*(q - t[:, None] * ab).T)
    return bool(dist.max() <= tol)


def _arc_bulge(closed: np.ndarray, i: int, j: int, tol: float, max_sweep: float) -> float | None:
    """Bulge of the arc from closed[i] to closed[j] through the vertices between, or None."""
    a, b = closed[i], closed[j]
    chord = b - a
    c_len = math.hypot(*chord)
    if c_len <= 0.0 or j - i < 2:
        return None
    h = 0.5 * c_len
    mid = 0.5 * (a + b)
    normal = np.array([-chord[1], chord[0]]) / c_len  # left of the chord direction
    q = closed[i + 1 : j] - mid
    off = q @ normal  # signed offsets from the chord
    denom = float(off @ off)
    if denom <= (1e-12 * c_len) ** 2 * len(off):
        return None  # collinear: a straight segment, not an arc
    # Kasa residual |p - c|^2 - R^2 with c = mid + t n, R^2 = h^2 + t^2, is
    # |q|^2 - h^2 - 2 t (q . n): linear in t, solved by least squares.
    t = float(np.dot(np.einsum("ij,ij->i", q, q) - h * h, off) / (2.0 * denom))
    radius = math.hypot(h, t)
    side = 1.0 if off.sum() > 0 else -1.0  # the side of the chord the arc lies on
    sagitta_signed = t + side * radius  # offset of the arc's midpoint along n
    bulge = -sagitta_signed / h  # right of the chord direction = counter-clockwise
    sweep = 4.0 * math.atan(abs(bulge))
    if sweep > max_sweep:
        return None
    centre = mid + t * normal
    rel = closed[i : j + 1] - centre
    r = np.hypot(rel[:, 0], rel[:, 1])
    dev = float(np.abs(r - radius).max())
    if dev > tol:
        return None
    # Angular position of each vertex along the arc, from its start, in the travel
    # direction; vertices must advance monotonically within [0, sweep].
    phi = np.arctan2(rel[:, 1], rel[:, 0])
    direction = 1.0 if bulge > 0 else -1.0
    alpha = np.mod(direction * (phi - phi[0]), 2.0 * math.pi)
    alpha[alpha > 0.5 * (sweep + 2.0 * math.pi)] -= 2.0 * math.pi  # just behind the start
    alpha[-1] = sweep
    eps = tol / radius
    steps = np.diff(alpha)
    if alpha.min() < -eps or alpha.max() > sweep + eps or steps.min() < -eps:
        return None
    sagitta = radius * (1.0 - np.cos(0.5 * np.abs(steps)))
    if dev + float(sagitta.max()) > tol:
        return None
    return float(bulge)


# ---------------------------------------------------------------------------
# Part selection
# ---------------------------------------------------------------------------
def _select_parts(measurement: Measurement, parts: Iterable[int] | None) -> list[Part]:
    if not measurement.parts:
        raise ResultFormatError("the result has no parts to export; measure an image in which parts were found")
    if parts is None:
        return list(measurement.parts)
    by_label = {p.label: p for p in measurement.parts}
    chosen = []
    for label in parts:
        try:
            key = int(label)
        except (TypeError, ValueError):
            raise OptionError(f"part label {label!r} is not a whole number; choose from {sorted(by_label)}") from None
        if key not in by_label:
            raise OptionError(f"part {key} is not in the result; choose from {sorted(by_label)}")
        chosen.append(by_label[key])
    if not chosen:
        raise OptionError(f"no parts chosen; choose from {sorted(by_label)}")
    return chosen


def _outer(part: Part) -> np.ndarray:
    if part.outline_mm is None:
        raise ResultFormatError(
            f"part {part.label} has no outline in the result; re-run 'scanmass measure' keeping outlines"
        )
    return orient_ring(_open_ring(part.outline_mm, what=f"the outline of part {part.label}"), ccw=True)


def _piece_rings(part: Part) -> list[np.ndarray]:
    """The outer rings of the part's other pieces (:attr:`Part.pieces_mm`), counter-clockwise."""
    return [
        orient_ring(_open_ring(r, what=f"the outline of piece {k} of part {part.label}"), ccw=True)
        for k, r in enumerate(part.pieces_mm, start=2)
    ]


#: A shape may be fitted to the outline of a part found in pieces whose other pieces lie outside
#: it by at most this share of its area (pieces that its edge, placed after they were told apart,
#: has taken in: 0.01-0.04 % on two renders of stop 32, against 1.5 % for a piece of the bracket
#: of dev-spot-steel4-t28 beyond it).
PIECES_OUTSIDE_SHARE = 0.001

#: Cells across the larger side of the pieces' box in which :func:`_outside_mm2` counts area.
OUTSIDE_GRID_CELLS = 2400


def _outside_mm2(outer: np.ndarray, pieces: list[np.ndarray]) -> float:
    """The area (mm²) of the union of ``pieces`` that lies outside the ring ``outer``.

    Counted on a grid of :data:`OUTSIDE_GRID_CELLS` cells across the pieces' box (the pieces filled,
    less the outer ring filled, by OpenCV's polygon fill at 1/256 cell): good to about the pieces'
    perimeter times one cell, enough for a note.
    """
    import cv2

    pts = np.vstack(pieces)
    lo = pts.min(axis=0)
    span = float(np.ptp(np.vstack([pts, outer]), axis=0).max())  # the outline's cells stay far within int32
    step = max(float(np.ptp(pts, axis=0).max()) / OUTSIDE_GRID_CELLS, span / (100 * OUTSIDE_GRID_CELLS), 1e-9)
    shape = tuple(int(v) + 2 for v in np.ceil(np.ptp(pts, axis=0) / step)[::-1])
    mask = np.zeros(shape, np.uint8)

    def cells(ring: np.ndarray) -> np.ndarray:
        return np.round((np.asarray(ring, float) - lo) / step * 256.0).astype(np.int32).reshape(-1, 1, 2)

    cv2.fillPoly(mask, [cells(r) for r in pieces], 1, cv2.LINE_8, 8)
    cv2.fillPoly(mask, [cells(outer)], 0, cv2.LINE_8, 8)
    return float(np.count_nonzero(mask)) * step * step


def pieces_note(part: Part) -> str | None:
    """What to know of a part found in pieces (None for a part found whole).

    The other pieces' area is given in all and, where the outline is known, the share of it
    outside the largest piece's outline (pieces may overlap it: its edge was placed after they
    were told apart).

    Examples
    --------
    >>> import numpy as np
    >>> from scanmass.measurement import Part
    >>> sq = lambda x: np.array([[x, 0.0], [x + 1, 0.0], [x + 1, 1.0], [x, 1.0]])
    >>> p = Part(1, 2.0, 0.1, 8.0, 0.1, (1.0, 0.5), (0, 0), *[0.0] * 11, 0.0, 0.0, *[0.0] * 10,
    ...          (0.0, 0.0, 3.0, 1.0), 3.0, 1.0, 3.0, outline_mm=sq(0.0), pieces_mm=[sq(2.0)])
    >>> pieces_note(p)
    'part 1 was found in 2 pieces: its outline is the largest piece (1 mm²); the other encloses 1 mm², 1 mm² of it outside that outline'
    """
    if not part.pieces_mm:
        return None
    rings = _piece_rings(part)
    others = sum(abs(float(signed_area(r))) for r in rings)
    many = len(rings) > 1
    text = f"part {part.label} was found in {1 + len(rings)} pieces: its outline is the largest piece"
    if part.outline_mm is None:
        return f"{text}; the other{'s' if many else ''} enclose{'' if many else 's'} {others:.3g} mm²"
    outer = _outer(part)
    return (
        f"{text} ({abs(float(signed_area(outer))):.4g} mm²); the other{'s' if many else ''} "
        f"enclose{'' if many else 's'} {others:.3g} mm², {min(_outside_mm2(outer, rings), others):.2g} mm² of it "
        "outside that outline"
    )


def one_piece(part: Part, doing: str, *, path: str | None = None) -> str | None:
    """Refuse ``doing`` (a shape fitted to the outline) for a part found in pieces: its outline is not one curve.

    A part whose other pieces lie within its outline, but for :data:`PIECES_OUTSIDE_SHARE` of
    its area, is let through: its :func:`pieces_note` is returned, to be shown with the shape.
    ``path`` (the result file) is named in the message.

    Raises
    ------
    OptionError
        The part has other pieces (:attr:`Part.pieces_mm`) outside its outline; the message names the fix.
    """
    note = pieces_note(part)
    if note is None:
        return None
    if part.outline_mm is not None:
        outer = _outer(part)
        if _outside_mm2(outer, _piece_rings(part)) <= PIECES_OUTSIDE_SHARE * abs(float(signed_area(outer))):
            return note
    raise OptionError(
        f"{note}; its outline is not one closed curve, so {doing} would miss the other pieces; "
        "photograph the part in diffuse light or on a backlight and measure again "
        "('scanmass export' draws every piece as measured)",
        path=path,
    )


def _hole_ring(part: Part, hole: Hole) -> np.ndarray:
    if hole.outline_mm is None:
        raise ResultFormatError(
            f"hole {hole.label} of part {part.label} has no outline in the result; re-run 'scanmass measure' keeping outlines"
        )
    return orient_ring(
        _open_ring(hole.outline_mm, what=f"the outline of hole {hole.label} of part {part.label}"), ccw=False
    )


def _is_round(hole: Hole, tol_mm: float | None) -> bool:
    """Whether a hole may be written as its fitted circle.

    Its ``roundness_mm`` (radial spread of the vertices) must be within the limit,
    and so must the whole outline, edges included: the farthest a ring's edge comes
    from the circle is at an end vertex (outwards) or at the edge's point nearest
    the centre (inwards). The second test matters for sparse rings, e.g. a square
    whose four corners lie exactly on a circle.
    """
    roundness = _finite(hole.roundness_mm)
    diameter = _finite(hole.diameter_mm)
    centre = [_finite(v) for v in hole.circle_centre_mm]
    if roundness is None or diameter is None or diameter <= 0 or None in centre:
        return False
    limit = round_tolerance_default_mm(hole) if tol_mm is None else tol_mm
    if roundness > limit:
        return False
    if hole.outline_mm is None:
        return True
    ring = _open_ring(hole.outline_mm, what=f"the outline of hole {hole.label}") - np.asarray(centre)
    radius = 0.5 * diameter
    r_out = float(np.hypot(ring[:, 0], ring[:, 1]).max())
    a, b = ring, np.roll(ring, -1, axis=0)
    ab = b - a
    t = np.clip(-np.einsum("ij,ij->i", a, ab) / np.maximum(np.einsum("ij,ij->i", ab, ab), 1e-300), 0.0, 1.0)
    nearest = a + t[:, None] * ab
    r_in = float(np.hypot(nearest[:, 0], nearest[:, 1]).min())
    return max(r_out - radius, radius - r_in) <= limit


# ---------------------------------------------------------------------------
# DXF
# ---------------------------------------------------------------------------
def dxf_document(
    measurement: Measurement,
    *,
    fit_tolerance_mm: FitTolerance = None,
    round_tolerance_mm: float | None = None,
    parts: Iterable[int] | None = None,
    units: str = "mm",
) -> Drawing:
    """Build the DXF drawing of a measurement's outlines (not written to disk).

    Parameters
    ----------
    measurement : Measurement
        A result with outlines (``outline_mm``) on its parts and holes.
    fit_tolerance_mm : float or "auto" or None, optional
        None (default) writes the measured vertices as they are. A length in mm fits
        lines and arcs within it (:func:`fit_lines_arcs`); ``"auto"`` uses
        :func:`fit_tolerance_default_mm` per part.
    round_tolerance_mm : float or None, optional
        Holes whose ``roundness_mm`` is at most this are written as CIRCLE; None uses
        :func:`round_tolerance_default_mm` per hole.
    parts : iterable of int, optional
        Labels of the parts to export (default: all).
    units : {"mm", "in"}
        Drawing units; tolerances are in mm either way.

    Returns
    -------
    ezdxf.document.Drawing
        DXF R2010, $INSUNITS = 4 (mm) and $MEASUREMENT = 1 (metric), or $INSUNITS = 1
        (inches) and $MEASUREMENT = 0; layers as in the module docstring.
    """
    doc, _ = _build_dxf(
        measurement,
        fit_tolerance_mm=fit_tolerance_mm,
        round_tolerance_mm=round_tolerance_mm,
        parts=parts,
        units=units,
    )
    return doc


def _build_dxf(measurement, *, fit_tolerance_mm, round_tolerance_mm, parts, units="mm"):
    import ezdxf
    from ezdxf import units as ezdxf_units

    drawing_units = units
    fit = _check_tolerance(fit_tolerance_mm, "fit tolerance", auto=True)
    round_tol = _check_tolerance(round_tolerance_mm, "round tolerance", auto=False)
    chosen = _select_parts(measurement, parts)

    doc = ezdxf.new("R2010", setup=["linetypes"])
    doc.units = ezdxf_units.MM  # $INSUNITS = 4
    doc.header["$MEASUREMENT"] = 1  # metric
    doc.header["$LUNITS"] = 2  # decimal
    doc.layers.add(LAYER_OUTLINE, color=7)
    doc.layers.add(LAYER_HOLES, color=5)
    doc.layers.add(LAYER_PIECES, color=6)
    ref = doc.layers.add(LAYER_REFERENCE, color=8, linetype="DASHED")
    ref.dxf.plot = 0  # not plotted: reference geometry, not for cutting
    msp = doc.modelspace()

    vertices_in = vertices_out = arcs = circles = pieces = 0
    lo = np.array([np.inf, np.inf])
    hi = -lo

    def polyline(ring: np.ndarray, layer: str, tol: float | None) -> None:
        nonlocal vertices_in, vertices_out, arcs
        vertices_in += len(ring)
        if tol is None:
            pts = np.column_stack([ring, np.zeros(len(ring))])
        else:
            pts = fit_lines_arcs(ring, tol)
        vertices_out += len(pts)
        arcs += int(np.count_nonzero(pts[:, 2]))
        msp.add_lwpolyline(pts.tolist(), format="xyb", close=True, dxfattribs={"layer": layer})

    for part in chosen:
        outer = _outer(part)
        lo = np.minimum(lo, outer.min(axis=0))
        hi = np.maximum(hi, outer.max(axis=0))
        tol = fit_tolerance_default_mm(part) if fit == "auto" else fit
        polyline(outer, LAYER_OUTLINE, tol)
        for ring in _piece_rings(part):  # a part found in pieces: every piece drawn, the others on their own layer
            lo = np.minimum(lo, ring.min(axis=0))
            hi = np.maximum(hi, ring.max(axis=0))
            polyline(ring, LAYER_PIECES, tol)
            pieces += 1
        for hole in part.holes:
            if _is_round(hole, round_tol):  # type: ignore[arg-type]
                ring_n = 0 if hole.outline_mm is None else len(_open_ring(hole.outline_mm, what="hole outline"))
                vertices_in += ring_n
                circles += 1
                cx, cy = (float(v) for v in hole.circle_centre_mm)
                msp.add_circle((cx, cy), 0.5 * float(hole.diameter_mm), dxfattribs={"layer": LAYER_HOLES})
            else:
                polyline(_hole_ring(part, hole), LAYER_HOLES, tol)
        _reference_marks(msp, part, outer)

    if check_units(drawing_units) == "in":  # the whole drawing scaled once: bulges and circles stay exact
        from ezdxf.math import Matrix44

        to_in = Matrix44.scale(1.0 / INCH_MM)
        for entity in msp:
            entity.transform(to_in)
        doc.units = ezdxf_units.IN  # $INSUNITS = 1
        doc.header["$MEASUREMENT"] = 0  # imperial
        lo, hi = lo / INCH_MM, hi / INCH_MM
    if np.isfinite(lo).all():
        doc.header["$EXTMIN"] = (float(lo[0]), float(lo[1]), 0.0)
        doc.header["$EXTMAX"] = (float(hi[0]), float(hi[1]), 0.0)
    summary = ExportSummary(None, len(chosen), vertices_in, vertices_out, arcs, circles, pieces)
    return doc, summary


def _reference_marks(msp, part: Part, outer: np.ndarray) -> None:
    """Centroid point and cross, principal axes and the label on the REFERENCE layer."""
    attribs = {"layer": LAYER_REFERENCE}
    cx, cy = (float(v) for v in part.centroid_mm)
    if not (math.isfinite(cx) and math.isfinite(cy)):
        return
    span = float(np.max(np.ptp(outer, axis=0)))
    long_mm = _finite(part.caliper_max_mm) or span
    short_mm = _finite(part.caliper_min_mm) or span
    cross = 0.04 * long_mm
    msp.add_point((cx, cy), dxfattribs=attribs)
    msp.add_line((cx - cross, cy), (cx + cross, cy), dxfattribs=attribs)
    msp.add_line((cx, cy - cross), (cx, cy + cross), dxfattribs=attribs)
    angle = _finite(part.principal_angle_deg) if part.principal_axes_defined else None
    if angle is not None:
        for deg, half in ((angle, 0.6 * long_mm), (angle + 90.0, 0.6 * short_mm)):
            ux, uy = math.cos(math.radians(deg)), math.sin(math.radians(deg))
            msp.add_line((cx - half * ux, cy - half * uy), (cx + half * ux, cy + half * uy), dxfattribs=attribs)
    height = max(0.05 * long_mm, 0.5)
    in_pieces = f" (in {1 + len(part.pieces_mm)} pieces)" if part.pieces_mm else ""
    text = msp.add_text(f"part {part.label}{in_pieces}", height=height, dxfattribs=attribs)
    text.set_placement((cx + cross, cy + cross))


# ---------------------------------------------------------------------------
# SVG
# ---------------------------------------------------------------------------
def _num(value: float) -> str:
    text = f"{value:.6f}".rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def _ring_path(ring: np.ndarray) -> str:
    coords = [f"{_num(x)} {_num(y)}" for x, y in ring]
    return "M " + coords[0] + "".join(f" L {c}" for c in coords[1:]) + " Z"


def svg_text(measurement: Measurement, *, parts: Iterable[int] | None = None, margin_mm: float = 2.0) -> str:
    """Build the SVG document (text) of a measurement's outlines.

    Parameters
    ----------
    measurement : Measurement
        A result with outlines on its parts and holes.
    parts : iterable of int, optional
        Labels of the parts to export (default: all).
    margin_mm : float, optional
        Empty border around the outlines, mm (default 2).

    Returns
    -------
    str
        An SVG 1.1 document; see the module docstring for the frame and layout.
    """
    margin = _finite(margin_mm)
    if margin is None or margin < 0:
        raise OptionError(f"margin_mm {margin_mm!r} must be a length of 0 mm or more")
    chosen = _select_parts(measurement, parts)
    rings = [(part, _outer(part), [_hole_ring(part, h) for h in part.holes]) for part in chosen]
    pieces = {part.label: _piece_rings(part) for part in chosen}
    every = [outer for _, outer, _ in rings] + [r for rs in pieces.values() for r in rs]
    lo = np.min([r.min(axis=0) for r in every], axis=0) - margin
    hi = np.max([r.max(axis=0) for r in every], axis=0) + margin
    width, height = (hi - lo).tolist()
    source = measurement.source.path or "unnamed image"
    lines = [
        '<?xml version="1.0" encoding="UTF-8"?>',
        f'<svg xmlns="http://www.w3.org/2000/svg" version="1.1" width="{_num(width)}mm" height="{_num(height)}mm" '
        f'viewBox="{_num(lo[0])} {_num(-hi[1])} {_num(width)} {_num(height)}">',
        f"<title>{escape('scanmass outlines: ' + os.path.basename(source))}</title>",
        "<desc>Units: 1 user unit = 1 mm. Path coordinates are the scanmass result frame "
        "(x to the right, y up); the group transform flips y for SVG's downward y axis.</desc>",
        '<g transform="matrix(1 0 0 -1 0 0)" fill="#cfe0ea" stroke="#1b3a4b" stroke-width="0.1">',
    ]
    for part, outer, holes in rings:
        d = " ".join(_ring_path(r) for r in [outer, *holes])
        desc = (
            f"area {part.area_mm2:.3f} mm2 (u {part.area_u_mm2:.3f} mm2); "
            f"centroid x {part.centroid_mm[0]:.3f} mm, y {part.centroid_mm[1]:.3f} mm; "
            f"{len(part.holes)} hole(s)"
        )
        lines.append(f'<path id={quoteattr(f"part-{part.label}")} fill-rule="evenodd" d="{d}">')
        note = pieces_note(part)
        if note is not None:
            desc += f"; {note} (the other pieces: part-{part.label}-piece-2 ...)"
        lines.append(f"<title>{escape(f'part {part.label}')}</title><desc>{escape(desc)}</desc>")
        lines.append("</path>")
        for k, ring in enumerate(pieces[part.label], start=2):
            lines.append(
                f'<path id={quoteattr(f"part-{part.label}-piece-{k}")} fill-rule="nonzero" '
                f'stroke-dasharray="0.5 0.3" d="{_ring_path(ring)}">'
            )
            lines.append(f"<title>{escape(f'part {part.label}, piece {k}')}</title></path>")
    lines += ["</g>", "</svg>", ""]
    return "\n".join(lines)


# ---------------------------------------------------------------------------
# Writers
# ---------------------------------------------------------------------------
@contextmanager
def _naming(json_path: str | None) -> Iterator[None]:
    """Let a malformed-result error name the result file it came from."""
    try:
        yield
    except ResultFormatError as exc:
        if json_path and not exc.path:
            raise ResultFormatError(str(exc), path=json_path) from None
        raise


def export_dxf(
    measurement: Measurement | PathLike,
    path: PathLike,
    *,
    fit_tolerance_mm: FitTolerance = None,
    round_tolerance_mm: float | None = None,
    parts: Sequence[int] | None = None,
    inputs: Iterable[PathLike] = (),
    units: str = "mm",
) -> ExportSummary:
    """Write a measurement's outlines to a DXF file (atomically).

    Parameters
    ----------
    measurement : Measurement or path
        The result, or the path of its JSON document.
    path : path
        The DXF file to write; its folder must exist. Never one of the inputs.
    fit_tolerance_mm, round_tolerance_mm, parts, units
        As for :func:`dxf_document`.
    inputs : iterable of path, optional
        More files that must not be overwritten (the result JSON and the source
        image are always protected).

    Returns
    -------
    ExportSummary
        Counts of parts, vertices before and after fitting, arcs and circles.
    """
    m, json_path = as_measurement(measurement)
    with _naming(json_path):
        doc, summary = _build_dxf(
            m, fit_tolerance_mm=fit_tolerance_mm, round_tolerance_mm=round_tolerance_mm, parts=parts, units=units
        )
    import io

    buf = io.StringIO()
    doc.write(buf)
    summary.path = write_atomic(path, buf.getvalue(), inputs=[json_path, m.source.path, *inputs])
    return summary


def export_svg(
    measurement: Measurement | PathLike,
    path: PathLike,
    *,
    parts: Sequence[int] | None = None,
    inputs: Iterable[PathLike] = (),
) -> ExportSummary:
    """Write a measurement's outlines to an SVG file in mm (atomically).

    Parameters
    ----------
    measurement : Measurement or path
        The result, or the path of its JSON document.
    path : path
        The SVG file to write; its folder must exist. Never one of the inputs.
    parts : sequence of int, optional
        Labels of the parts to export (default: all).
    inputs : iterable of path, optional
        More files that must not be overwritten.

    Returns
    -------
    ExportSummary
        Counts of parts and vertices (no fitting or circles in SVG).
    """
    m, json_path = as_measurement(measurement)
    with _naming(json_path):
        text = svg_text(m, parts=parts)
    chosen = _select_parts(m, parts)
    n = sum(
        len(_outer(p)) + sum(len(_hole_ring(p, h)) for h in p.holes) + sum(len(r) for r in _piece_rings(p))
        for p in chosen
    )
    written = write_atomic(path, text, inputs=[json_path, m.source.path, *inputs])
    return ExportSummary(written, len(chosen), n, n, 0, 0, sum(len(p.pieces_mm) for p in chosen))
