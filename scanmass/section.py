"""Exact section properties of polygons in millimetres.

A part is an outer ring plus hole rings, each an ``(N, 2)`` array of ``x, y``
vertices in mm (x to the right, y up, see DESIGN.md). A ring is implicitly
closed: the last vertex joins the first. A duplicated closing vertex is
accepted and ignored.

Area, first and second moments are integrated exactly over the polygon with
Green's theorem, so the only approximation is the polygon itself. Sums are
formed about a local reference point near the ring and shifted back exactly,
which keeps about 12 significant digits for parts far from the origin (a
scan frame puts parts hundreds of millimetres away from it).

Sign conventions (DESIGN.md): ``ixx = integral (y - yc)^2 dA``,
``iyy = integral (x - xc)^2 dA``, ``ixy = integral (x - xc)(y - yc) dA`` (the
product of area, may be negative); principal moments ``i1 >= i2``; the
principal angle is the direction of the I2 axis (the long direction) in
degrees counter-clockwise from +x, in [0, 180).

Section moduli and radii of gyration are geometric figures only. Before a
load-bearing, lifting or rotating use, have them checked under the local
design code by a qualified person.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from scanmass.errors import OptionError
from scanmass.geometry import (
    _as_points,
    _as_ring,
    _local_moments,
    _shift_moments,
    orient_ring,
    ring_moments,
    ring_perimeter,
    signed_area,
)

__all__ = [
    "SectionProperties",
    "CircleFit",
    "signed_area",
    "orient_ring",
    "ring_moments",
    "ring_perimeter",
    "section_properties",
    "principal_moments",
    "rotate_moments",
    "parallel_axis",
    "convex_hull",
    "caliper_widths",
    "fit_circle",
    "boundary_influence",
]

# Principal moments closer than this (relative) are treated as equal: the
# principal direction is then undefined and reported as 0 degrees.
_ISOTROPIC_RTOL = 1e-12


# --------------------------------------------------------------------------
# moment-tensor algebra


def principal_moments(ixx: float, iyy: float, ixy: float) -> tuple[float, float, float]:
    """Principal second moments and the direction of the I2 axis.

    Parameters
    ----------
    ixx, iyy, ixy : float
        Centroidal ``integral y^2 dA``, ``integral x^2 dA`` and
        ``integral x y dA`` in mm4 (x to the right, y up).

    Returns
    -------
    i1, i2 : float
        Principal moments in mm4, ``i1 >= i2``.
    angle_deg : float
        Direction of the axis about which the moment is ``i2`` (the long
        direction of the area), counter-clockwise from +x, in [0, 180).
        0.0 when ``i1`` and ``i2`` agree to 1e-12 relative (circle-like).

    Notes
    -----
    The eigenvalues of ``[[iyy, ixy], [ixy, ixx]]`` (the spread of the area);
    the I2 axis is along the eigenvector of the larger one, at
    ``0.5 * atan2(2 ixy, iyy - ixx)``. Common practice in strength of materials
    (Mohr's circle for second moments of area).

    Examples
    --------
    >>> principal_moments(1.0, 4.0, 0.0)  # wide along x
    (4.0, 1.0, 0.0)
    >>> principal_moments(4.0, 1.0, 0.0)  # tall along y
    (4.0, 1.0, 90.0)
    """
    ixx, iyy, ixy = float(ixx), float(iyy), float(ixy)
    mean = 0.5 * (ixx + iyy)
    radius = math.hypot(0.5 * (iyy - ixx), ixy)
    i1 = mean + radius
    det = ixx * iyy - ixy * ixy
    # i2 from the determinant avoids cancellation for slender sections
    i2 = det / i1 if i1 > 0.0 and det >= 0.0 else mean - radius
    i2 = min(i2, i1)
    if 2.0 * radius <= _ISOTROPIC_RTOL * max(abs(i1), abs(mean - radius)):  # i1 - i2 = 2 radius
        return i1, i2, 0.0
    angle = 0.5 * math.degrees(math.atan2(2.0 * ixy, iyy - ixx))
    angle %= 180.0
    if angle >= 180.0:  # -tiny % 180 rounds to 180.0
        angle = 0.0
    return i1, i2, angle


def rotate_moments(ixx: float, iyy: float, ixy: float, angle_deg: float) -> tuple[float, float, float]:
    """Centroidal moments after rotating the body counter-clockwise by ``angle_deg``.

    The axes stay parallel to x and y; the area turns about its centroid by
    ``angle_deg`` (counter-clockwise positive). Equivalently: the moments of the
    unrotated area about axes turned by ``-angle_deg``. A rotated body's
    principal angle is the original one plus ``angle_deg`` (mod 180).

    Parameters
    ----------
    ixx, iyy, ixy : float
        Centroidal moments in mm4 (DESIGN.md conventions).
    angle_deg : float
        Rotation of the body, degrees, counter-clockwise.

    Returns
    -------
    (ixx, iyy, ixy) : tuple of float
        Moments of the rotated body in mm4.

    Notes
    -----
    With ``x' = c x - s y``, ``y' = s x + c y``:
    ``ixx' = s^2 iyy + 2 c s ixy + c^2 ixx``,
    ``iyy' = c^2 iyy - 2 c s ixy + s^2 ixx``,
    ``ixy' = c s (iyy - ixx) + (c^2 - s^2) ixy``.

    Examples
    --------
    >>> [round(v, 12) for v in rotate_moments(1.0, 4.0, 0.0, 90.0)]
    [4.0, 1.0, 0.0]
    """
    t = math.radians(float(angle_deg))
    c, s = math.cos(t), math.sin(t)
    ixx, iyy, ixy = float(ixx), float(iyy), float(ixy)
    ixx_r = s * s * iyy + 2.0 * c * s * ixy + c * c * ixx
    iyy_r = c * c * iyy - 2.0 * c * s * ixy + s * s * ixx
    ixy_r = c * s * (iyy - ixx) + (c * c - s * s) * ixy
    return ixx_r, iyy_r, ixy_r


def parallel_axis(
    ixx_c: float, iyy_c: float, ixy_c: float, area: float, dx: float, dy: float
) -> tuple[float, float, float]:
    """Move centroidal moments to parallel axes through another point.

    Parameters
    ----------
    ixx_c, iyy_c, ixy_c : float
        Moments about the centroid, mm4.
    area : float
        Area, mm2.
    dx, dy : float
        Position of the centroid relative to the new point, mm.

    Returns
    -------
    (ixx, iyy, ixy) : tuple of float
        ``(ixx_c + A dy^2, iyy_c + A dx^2, ixy_c + A dx dy)`` in mm4
        (parallel-axis theorem, common practice).

    Examples
    --------
    >>> parallel_axis(1.0, 2.0, 0.0, 3.0, 1.0, 2.0)
    (13.0, 5.0, 6.0)
    """
    a, dx, dy = float(area), float(dx), float(dy)
    return float(ixx_c) + a * dy * dy, float(iyy_c) + a * dx * dx, float(ixy_c) + a * dx * dy


# --------------------------------------------------------------------------
# hull and calipers


def convex_hull(points: np.ndarray) -> np.ndarray:
    """Convex hull of a point set, as a counter-clockwise ring without collinear vertices.

    Parameters
    ----------
    points : (N, 2) array_like of float
        Points ``x, y`` in mm.

    Returns
    -------
    (H, 2) ndarray of float64
        Hull vertices, counter-clockwise, starting at the lowest-x (then
        lowest-y) point, not closed. ``H`` is 1 or 2 when all points coincide
        or are collinear.

    References
    ----------
    .. [1] A. M. Andrew, "Another efficient algorithm for convex hulls in two
       dimensions", Information Processing Letters 9(5), 216-219, 1979.
       doi:10.1016/0020-0190(79)90072-3

    Examples
    --------
    >>> convex_hull([[0, 0], [1, 1], [2, 0], [2, 2], [0, 2], [1, 0]]).tolist()
    [[0.0, 0.0], [2.0, 0.0], [2.0, 2.0], [0.0, 2.0]]
    """
    pts = _as_points(points, "points")
    # sorted by x then y, exact duplicates dropped: np.unique(pts, axis=0), without its
    # (slow) sort of rows as structured records
    pts = pts[np.lexsort((pts[:, 1], pts[:, 0]))]
    pts = pts[np.concatenate(([True], np.any(pts[1:] != pts[:-1], axis=1)))]
    if pts.shape[0] <= 2:
        return pts.copy()
    pts = _drop_interior(pts)
    lower = _convex_chain(pts)
    upper = _convex_chain(pts[::-1])
    return np.concatenate([pts[lower[:-1]], pts[::-1][upper[:-1]]])


def _convex_chain(pts: np.ndarray) -> np.ndarray:
    """Indices of the monotone chain's strictly left-turning vertices, first and last point kept.

    The chain of Andrew's algorithm [1]_ without its stack: the vertices that make no left
    turn with their present neighbours are dropped (no two neighbours in one round), and
    again, until none is left.
    Each dropped run of vertices turns right (or not at all) throughout, so it lies on or
    above the chord that replaces it, and the chain only moves towards the points as it
    shrinks: the fixpoint keeps exactly the points the stack would keep (the hull's
    vertices on this side), with the same turn test on absolute coordinates (distinct
    floats never subtract to zero, whereas centring first could merge nearly equal points).

    References
    ----------
    .. [1] A. M. Andrew, "Another efficient algorithm for convex hulls in two
       dimensions", Information Processing Letters 9(5), 216-219, 1979.
       doi:10.1016/0020-0190(79)90072-3
    """
    idx = np.arange(pts.shape[0])
    x, y = pts[:, 0], pts[:, 1]
    while idx.size > 2:
        a, b, c = idx[:-2], idx[1:-1], idx[2:]
        left = (x[b] - x[a]) * (y[c] - y[a]) - (y[b] - y[a]) * (x[c] - x[a]) > 0.0
        if left.all():
            break
        # of each run of vertices that turn no left, every other one (its first, third, ...): a vertex is
        # dropped only with both neighbours it was tested against kept, one step of the stack's each; two
        # neighbours dropped at once can both fail a test that rounding decided on a chord of the other
        # (found by hypothesis: (-1, 1), (0, 0), (0, 7e-280), (0, 1) lost its lowest vertex)
        pos = np.arange(left.size)
        starts = ~left & np.concatenate(([True], left[:-1]))
        offset = pos - np.maximum.accumulate(np.where(starts, pos, 0))
        drop = ~left & (offset % 2 == 0)
        idx = np.concatenate((idx[:1], b[~drop], idx[-1:]))
    return idx


def _drop_interior(pts: np.ndarray) -> np.ndarray:
    """Discard points strictly inside the polygon of the extreme points in eight directions
    (they cannot be hull vertices); keeps the x-then-y order. Vectorised, exact tests.

    References
    ----------
    .. [1] S. G. Akl and G. T. Toussaint, "A fast convex hull algorithm", Information
       Processing Letters 7(5), 219-222, 1978.
    """
    if pts.shape[0] < 64:
        return pts
    x, y = pts[:, 0], pts[:, 1]
    keys = (x, x + y, y, y - x, -x, -x - y, -y, x - y)  # counter-clockwise directions
    poly: list[int] = []
    for key in keys:
        k = int(np.argmax(key))
        if not poly or poly[-1] != k:
            poly.append(k)
    if len(poly) > 1 and poly[0] == poly[-1]:
        poly.pop()
    if len(poly) < 3:
        return pts
    inside = np.ones(pts.shape[0], dtype=bool)
    for a, b in zip(poly, poly[1:] + poly[:1]):
        ax, ay = pts[a]
        bx, by = pts[b]
        inside &= (bx - ax) * (y - ay) - (by - ay) * (x - ax) > 0.0
    return pts[~inside]


def caliper_widths(points: np.ndarray) -> tuple[float, float]:
    """Largest and smallest caliper widths of a point set.

    Parameters
    ----------
    points : (N, 2) array_like of float
        Points ``x, y`` in mm (for a part: its outer ring).

    Returns
    -------
    max_mm : float
        Largest distance between two points (the diameter of the set; the
        widest opening of a caliper over all directions).
    min_mm : float
        Smallest distance between two parallel lines enclosing the set (the
        narrowest caliper reading); 0.0 for collinear points.

    Notes
    -----
    Rotating calipers on the convex hull, vectorised: the hull's edge
    directions increase monotonically (by the turning angles, summing to
    360 degrees), so the vertex antipodal to each edge, and the range of
    vertices antipodal to each vertex, come from a binary search on them.
    The diameter is the largest distance over antipodal vertex pairs; the
    minimum width is attained with one caliper flush with a hull edge, at
    that edge's farthest vertex. Each search also tries the neighbouring
    vertices, so a near-tie rounded the wrong way (tiny or parallel edges)
    costs nothing: extra candidates never exceed the true values.
    O(H log H) after the hull.

    References
    ----------
    .. [1] M. I. Shamos, "Computational Geometry", PhD thesis, Yale University, 1978.
    .. [2] G. T. Toussaint, "Solving geometric problems with the rotating
       calipers", Proc. IEEE MELECON '83, Athens, 1983.

    Examples
    --------
    >>> caliper_widths([[0, 0], [4, 0], [4, 3], [0, 3]])
    (5.0, 3.0)
    """
    return _hull_calipers(convex_hull(points))


def _hull_calipers(hull: np.ndarray) -> tuple[float, float]:
    """Calipers of an already computed convex hull (see :func:`caliper_widths`)."""
    h = hull.shape[0]
    if h == 1:
        return 0.0, 0.0
    if h == 2:
        return float(np.hypot(*(hull[1] - hull[0]))), 0.0
    # absolute coordinates: distinct hull vertices never give a zero-length edge
    e = np.roll(hull, -1, axis=0) - hull  # edge k runs from vertex k to k + 1
    e_in = np.roll(e, 1, axis=0)  # edge arriving at vertex k
    turn = np.arctan2(e_in[:, 0] * e[:, 1] - e_in[:, 1] * e[:, 0], (e_in * e).sum(axis=1))
    turn = np.clip(turn, 0.0, np.pi)  # strictly convex CCW hull: (0, pi); clip rounding
    phi = math.atan2(e[0, 1], e[0, 0]) + np.concatenate([[0.0], np.cumsum(turn[1:])])
    phi_ext = np.concatenate([phi, phi + 2.0 * np.pi])  # edge k + h is edge k, one turn later
    offsets = np.array([-1, 0, 1])

    # minimum width: for each edge, the farthest vertex is where the edge direction passes phi + pi
    k = np.searchsorted(phi_ext, phi + np.pi)
    cand = (k[:, None] + offsets[None, :]) % h
    rel = hull[cand] - hull[:, None, :]
    height = e[:, None, 0] * rel[..., 1] - e[:, None, 1] * rel[..., 0]
    widths = height.max(axis=1) / np.hypot(e[:, 0], e[:, 1])
    min_mm = float(max(widths.min(), 0.0))

    # diameter: vertex i is antipodal to the vertices whose edge directions span
    # [phi_(i-1) + pi, phi_i + pi]; test that range plus one vertex either side
    phi_prev = np.concatenate([[phi[-1] - 2.0 * np.pi], phi[:-1]])
    lo = np.searchsorted(phi_ext, phi_prev + np.pi) - 1
    hi = np.searchsorted(phi_ext, phi + np.pi) + 1
    counts = hi - lo + 1
    first = np.repeat(np.arange(h), counts)
    start = np.repeat(lo - (np.cumsum(counts) - counts), counts)
    second = (start + np.arange(counts.sum())) % h
    d = hull[first] - hull[second]
    max_mm = float(np.hypot(d[:, 0], d[:, 1]).max())
    return max_mm, min_mm


# --------------------------------------------------------------------------
# whole sections


@dataclass(frozen=True)
class SectionProperties:
    """Geometric properties of a plane section (outer ring minus holes), in mm.

    Second moments are about centroidal axes parallel to x and y (DESIGN.md):
    ``ixx_mm4 = integral (y - yc)^2 dA``, ``iyy_mm4 = integral (x - xc)^2 dA``,
    ``ixy_mm4 = integral (x - xc)(y - yc) dA``. ``i1_mm4 >= i2_mm4`` are the
    principal moments and ``principal_angle_deg`` in [0, 180) the direction of
    the I2 axis, counter-clockwise from +x. Gyration radii are
    ``sqrt(I / A)``. Elastic section moduli are one per extreme fibre:
    ``modulus_top_mm3 = ixx / (ymax - yc)``, ``modulus_bottom_mm3 = ixx / (yc - ymin)``,
    ``modulus_right_mm3 = iyy / (xmax - xc)``, ``modulus_left_mm3 = iyy / (xc - xmin)``.
    These are geometry only; structural use needs checking under the local
    design code by a qualified person.
    """

    area_mm2: float
    perimeter_mm: float
    centroid_mm: tuple[float, float]
    ixx_mm4: float
    iyy_mm4: float
    ixy_mm4: float
    i1_mm4: float
    i2_mm4: float
    principal_angle_deg: float
    polar_mm4: float
    gyration_x_mm: float
    gyration_y_mm: float
    gyration_1_mm: float
    gyration_2_mm: float
    modulus_top_mm3: float
    modulus_bottom_mm3: float
    modulus_right_mm3: float
    modulus_left_mm3: float
    bbox_mm: tuple[float, float, float, float]
    caliper_max_mm: float
    caliper_min_mm: float
    convex_area_mm2: float


def _is_flat(ring: np.ndarray) -> bool:
    """True when a ring's area is zero to rounding (all vertices on one line)."""
    lo, hi = _ring_box(ring)
    span = float(np.max(hi - lo))
    return abs(signed_area(ring)) <= 1e-12 * span * span


def _flat_and_oriented(ring: np.ndarray, *, ccw: bool) -> tuple[bool, np.ndarray]:
    """``(_is_flat(ring), orient_ring(ring, ccw=ccw))`` with the ring's signed area computed once.

    ``ring`` comes from ``_as_ring`` (float64, validated). Unless its first vertex again
    equals its last (then the two calls run as they are), ``_as_ring`` returns a copy of
    it unchanged, so both calls would compute :func:`~scanmass.geometry.signed_area` of
    the same values: computed here once, the same float, and the same ring returned.
    """
    if ring.shape[0] < 4 or np.array_equal(ring[0], ring[-1]):
        return _is_flat(ring), orient_ring(ring, ccw=ccw)
    a = signed_area(ring)
    lo, hi = _ring_box(ring)
    span = float(np.max(hi - lo))
    flat = abs(a) <= 1e-12 * span * span
    if (a < 0.0 and ccw) or (a > 0.0 and not ccw):
        return flat, ring[::-1].copy()
    return flat, ring.copy()


def _prepare_section(outer: np.ndarray, holes: Sequence[np.ndarray]) -> tuple[np.ndarray, list[np.ndarray]]:
    """Validate and orient (outer CCW, holes CW); raise OptionError on bad input."""
    out = _as_ring(outer, "outer")
    if holes is None:
        holes = ()
    flat, out = _flat_and_oriented(out, ccw=True)
    if flat:
        raise OptionError("outer ring has zero area (all vertices collinear); pass the part's outline")
    if isinstance(holes, np.ndarray) and holes.ndim == 2:
        raise OptionError("holes must be a sequence of (N, 2) rings, not a single array; wrap it in a list")
    lo, hi = _ring_box(out)
    slack = 1e-9 * float(np.max(hi - lo))
    rings: list[np.ndarray] = []
    for k, hole in enumerate(holes):
        name = f"holes[{k}]"
        r = _as_ring(hole, name)
        flat, oriented = _flat_and_oriented(r, ccw=False)
        if flat:
            raise OptionError(f"{name} has zero area (all vertices collinear); drop it or pass the hole's outline")
        if _past_box(r, lo, hi, slack):
            raise OptionError(
                f"{name} reaches outside the outer ring's bounding box; holes must lie inside the outline"
            )
        rings.append(oriented)
    return out, rings


def _ring_moments(rings: Sequence[np.ndarray]) -> list[tuple[np.ndarray, np.ndarray]]:
    """Each oriented ring's mean vertex and its moments about it (:func:`_section_moments`'s first step)."""
    out = []
    for r in rings:
        local_ref = r.mean(axis=0)
        out.append((local_ref, _local_moments(r - local_ref)))
    return out


def _section_moments(
    rings: Sequence[np.ndarray], ref: np.ndarray, local: list[tuple[np.ndarray, np.ndarray]] | None = None
) -> np.ndarray:
    """Summed signed moments of oriented rings about ``ref``.

    ``local``: :func:`_ring_moments` of the rings when already known (they do not depend on ``ref``).
    """
    total = np.zeros(6, dtype=np.float64)
    for local_ref, m in _ring_moments(rings) if local is None else local:
        total += _shift_moments(m, float(local_ref[0] - ref[0]), float(local_ref[1] - ref[1]))
    return total


def _ring_box(ring: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``(ring.min(axis=0), ring.max(axis=0))`` of an (N, 2) ring, column by column.

    The same values (a minimum or maximum is one of the values, whatever the order they are
    read in; a NaN in a column gives NaN either way), without numpy's slow reduction along
    the first axis of a two-column array (~20x faster on a ring of a few thousand points).
    """
    x, y = ring[:, 0], ring[:, 1]
    return np.array([x.min(), y.min()]), np.array([x.max(), y.max()])


def _past_box(ring: np.ndarray, lo: np.ndarray, hi: np.ndarray, slack: float) -> bool:
    """Whether a hole ring reaches outside the outer ring's bounding box ``lo``-``hi`` (with ``slack``)."""
    r_lo, r_hi = _ring_box(ring)
    return bool(np.any(r_lo < lo - slack) or np.any(r_hi > hi + slack))


def escaping_holes(outer_mm: np.ndarray, holes_mm: Sequence[np.ndarray]) -> list[int]:
    """Indices of the hole rings that reach outside the outer ring's bounding box (mm).

    The rule by which :func:`section_properties` refuses a hole (the same slack), so a hole
    listed here cannot be measured with that outer ring: in a photo a hole found on a small
    fragment and mapped through a raised or re-measured plane map can land past its own
    outline, and the pipeline refuses the photo with that cause instead of letting the
    section refuse it as if the options were wrong.
    """
    outer = np.asarray(outer_mm, dtype=float).reshape(-1, 2)
    if len(outer) == 0:
        return []
    lo, hi = _ring_box(outer)
    slack = 1e-9 * float(np.max(hi - lo))
    rings = (np.asarray(hole, dtype=float).reshape(-1, 2) for hole in holes_mm)
    return [k for k, r in enumerate(rings) if len(r) and _past_box(r, lo, hi, slack)]


def section_properties(
    outer: np.ndarray,
    holes: Sequence[np.ndarray] = (),
    *,
    hull: bool = True,
    extra: Sequence[tuple[np.ndarray, float]] = (),
    extra_perimeter_mm: float = 0.0,
) -> SectionProperties:
    """Area, centroid, second moments and extents of a polygon with holes.

    Parameters
    ----------
    outer : (N, 2) array_like of float
        Outline vertices ``x, y`` in mm, either orientation, implicitly closed.
    holes : sequence of (M, 2) array_like of float, optional
        Hole rings, either orientation (None means none); they are subtracted. Holes must lie
        inside the outline and not overlap each other (only their bounding
        boxes are checked).
    hull : bool, default True
        Also the convex hull's figures (``caliper_max_mm``, ``caliper_min_mm``,
        ``convex_area_mm2``); False leaves them NaN and skips the hull, the costly
        part for long outlines (every other figure is the same either way).
    extra : sequence of ((M, 2) array_like, float), optional
        Material outside the rings: each ring with its sign, +1 added (a wall the outline
        misses) or -1 taken out (a slot it does not show); its moments join the rings' (a
        hole's count as negative area the same way). Added rings also join the extents and
        the hull. The caller makes sure they overlap neither the outline's outside (taken
        out) nor its inside (added).
    extra_perimeter_mm : float, optional
        What the extra material changes the perimeter by (the outline's own is summed).

    Returns
    -------
    SectionProperties

    Raises
    ------
    scanmass.errors.OptionError
        A ring is not an (N, 2) array, has fewer than 3 distinct vertices,
        non-finite coordinates or zero area, a hole's extent leaves the
        outline's bounding box, or the holes leave no area.

    Notes
    -----
    Moments are integrated exactly by Green's theorem (see
    :func:`ring_moments`) in two passes: a first pass about the outline's
    vertex mean finds the centroid, a second sums the moments about the
    centroid, so the centroidal moments never come from differences of large
    numbers. Bounding box, hull and calipers use the outer ring.

    References
    ----------
    .. [1] C. Steger, "On the calculation of arbitrary moments of polygons",
       Technical Report FGBV-96-05, Technische Universitaet Muenchen, 1996.

    Examples
    --------
    A 10 mm wide, 20 mm tall plate with its lower-left corner at (100, 50):

    >>> import numpy as np
    >>> plate = np.array([[100, 50], [110, 50], [110, 70], [100, 70]])
    >>> sp = section_properties(plate)
    >>> sp.area_mm2, sp.centroid_mm
    (200.0, (105.0, 60.0))
    >>> round(sp.ixx_mm4, 6), round(sp.iyy_mm4, 6)  # b h^3 / 12, h b^3 / 12
    (6666.666667, 1666.666667)
    >>> sp.principal_angle_deg  # the long direction is along y
    90.0
    >>> sp.caliper_min_mm
    10.0
    >>> section_properties(plate, hull=False).caliper_min_mm  # the hull's figures left out
    nan
    """
    out, hole_rings = _prepare_section(outer, holes)
    rings = [out, *hole_rings]
    added = []
    for k, (ring, sign) in enumerate(extra):
        r = _as_ring(ring, f"extra[{k}]")
        rings.append(orient_ring(r, ccw=sign > 0))
        if sign > 0:
            added.append(r)
    extent = np.concatenate([out, *added]) if added else out

    ref = out.mean(axis=0)
    local = _ring_moments(rings)
    m = _section_moments(rings, ref, local)
    area = float(m[0])
    if not area > 0.0:
        raise OptionError(
            f"the holes cover the whole outline (net area {area:.6g} mm2); "
            "check that the hole rings lie inside the outer ring"
        )
    centroid = ref + m[1:3] / area
    # second pass about the centroid: the first moments are now ~0 and the
    # parallel-axis correction below only removes their rounding residue
    mc = _section_moments(rings, centroid, local)
    xmin, ymin = (float(v) for v in extent.min(axis=0))
    xmax, ymax = (float(v) for v in extent.max(axis=0))
    if hull:
        hull_ring = convex_hull(extent)
        cal_max, cal_min = _hull_calipers(hull_ring)
        convex_area = signed_area(hull_ring) if hull_ring.shape[0] >= 3 else 0.0
    else:
        cal_max = cal_min = convex_area = math.nan
    perimeter = sum(ring_perimeter(r) for r in [out, *hole_rings]) + extra_perimeter_mm
    return _from_moments(
        (float(mc[0]), float(mc[1]), float(mc[2]), mc[3], mc[4], mc[5]),
        centroid,
        (xmin, ymin, xmax, ymax),
        float(perimeter),
        (cal_max, cal_min, convex_area),
    )


def _from_moments(
    mc: tuple[float, float, float, float, float, float],
    ref: np.ndarray,
    bbox: tuple[float, float, float, float],
    perimeter: float,
    hull_figures: tuple[float, float, float],
) -> SectionProperties:
    """The figures of a section from its moments about a point ``ref`` near its centroid.

    ``mc`` holds the area, the first moments and the second moments (xx, yy, xy) about
    ``ref``; the parallel-axis theorem moves them to the centroid, which removes the first
    moments' rounding residue. ``hull_figures``: the largest and smallest caliper widths
    and the convex area (NaN when not computed).
    """
    a_c, qx, qy = mc[0], mc[1], mc[2]
    xc = float(ref[0] + qx / a_c)
    yc = float(ref[1] + qy / a_c)
    ixx = float(mc[3] - qy * qy / a_c)
    iyy = float(mc[4] - qx * qx / a_c)
    ixy = float(mc[5] - qx * qy / a_c)
    i1, i2, angle = principal_moments(ixx, iyy, ixy)
    xmin, ymin, xmax, ymax = bbox
    cal_max, cal_min, convex_area = hull_figures
    return SectionProperties(
        area_mm2=a_c,
        perimeter_mm=perimeter,
        centroid_mm=(xc, yc),
        ixx_mm4=ixx,
        iyy_mm4=iyy,
        ixy_mm4=ixy,
        i1_mm4=i1,
        i2_mm4=i2,
        principal_angle_deg=angle,
        polar_mm4=ixx + iyy,
        gyration_x_mm=math.sqrt(max(ixx, 0.0) / a_c),
        gyration_y_mm=math.sqrt(max(iyy, 0.0) / a_c),
        gyration_1_mm=math.sqrt(max(i1, 0.0) / a_c),
        gyration_2_mm=math.sqrt(max(i2, 0.0) / a_c),
        modulus_top_mm3=ixx / (ymax - yc),
        modulus_bottom_mm3=ixx / (yc - ymin),
        modulus_right_mm3=iyy / (xmax - xc),
        modulus_left_mm3=iyy / (xc - xmin),
        bbox_mm=(xmin, ymin, xmax, ymax),
        caliper_max_mm=cal_max,
        caliper_min_mm=cal_min,
        convex_area_mm2=convex_area,
    )


def _batch_local_moments(x0: np.ndarray, y0: np.ndarray) -> np.ndarray:
    """:func:`~scanmass.geometry._local_moments` of K rings at once: coordinates (K, N) each -> (6, K).

    The same operations on each row, each sum along a row's contiguous values (numpy's
    pairwise summation, as for one ring): the same floats as one ring at a time.
    """
    x1, y1 = np.roll(x0, -1, axis=1), np.roll(y0, -1, axis=1)
    c = x0 * y1 - x1 * y0
    return np.array(
        [
            c.sum(axis=1) / 2.0,
            ((x0 + x1) * c).sum(axis=1) / 6.0,
            ((y0 + y1) * c).sum(axis=1) / 6.0,
            ((y0 * y0 + y0 * y1 + y1 * y1) * c).sum(axis=1) / 12.0,
            ((x0 * x0 + x0 * x1 + x1 * x1) * c).sum(axis=1) / 12.0,
            ((2.0 * x0 * y0 + x0 * y1 + x1 * y0 + 2.0 * x1 * y1) * c).sum(axis=1) / 24.0,
        ]
    )


def _row_means(v: np.ndarray) -> np.ndarray:
    """Each row's mean as ``ring.mean(axis=0)`` gives a coordinate of one (N, 2) ring.

    numpy sums a column of an (N, 2) array one value after the other (not pairwise); the
    running sum along each contiguous row does the same additions in the same order.
    """
    return np.cumsum(v, axis=1)[:, -1] / v.shape[1]


def _batch_ring_moments(
    rings: Sequence[tuple[np.ndarray, np.ndarray]],
) -> list[tuple[np.ndarray, np.ndarray, np.ndarray]]:
    """Each ring's row means and its moments about them (:func:`_ring_moments` of K versions): (mx, my, (6, K))."""
    out = []
    for x, y in rings:
        mx, my = _row_means(x), _row_means(y)
        out.append((mx, my, _batch_local_moments(x - mx[:, None], y - my[:, None])))
    return out


def _batch_section_moments(local: Sequence[tuple[np.ndarray, np.ndarray, np.ndarray]], ref: np.ndarray) -> np.ndarray:
    """:func:`_section_moments` of K versions of a section from their :func:`_batch_ring_moments`, ``ref`` (2, K)."""
    total = np.zeros((6, ref.shape[1]), dtype=np.float64)
    for mx, my, (a, qx, qy, ixx, iyy, ixy) in local:
        x0, y0 = mx - ref[0], my - ref[1]
        total += np.array(
            [
                a,
                qx + x0 * a,
                qy + y0 * a,
                ixx + 2.0 * y0 * qy + y0 * y0 * a,
                iyy + 2.0 * x0 * qx + x0 * x0 * a,
                ixy + x0 * qy + y0 * qx + x0 * y0 * a,
            ]
        )
    return total


def sampled_figures(samples: Sequence[tuple[np.ndarray, Sequence[np.ndarray]]]) -> list[SectionProperties] | None:
    """``section_properties(outer, holes, hull=False)`` of many versions of one section, at once.

    For the scale term: the same rings mapped through sampled plane maps, so each ring
    has one vertex count in every sample. Every figure is the float
    :func:`section_properties` gives (the same operations, row by row); the hull's
    figures are NaN as there. None when the samples are not alike enough for that (vertex
    counts, closing vertices, orientation) or one is invalid: the caller then takes them
    one at a time, which also raises the usual error.
    """
    if not samples:
        return None
    counts = [len(holes) for _, holes in samples]
    if len(set(counts)) != 1:
        return None
    try:
        stacks = [np.stack([np.asarray(o, dtype=np.float64) for o, _ in samples])]
        stacks += [np.stack([np.asarray(h[k], dtype=np.float64) for _, h in samples]) for k in range(counts[0])]
    except ValueError:  # vertex counts differ between samples
        return None
    rings: list[tuple[np.ndarray, np.ndarray]] = []
    for k, r in enumerate(stacks):
        if r.ndim != 3 or r.shape[1] < 4 or r.shape[2] != 2 or not np.all(np.isfinite(r)):
            return None
        if np.any(np.all(r[:, 0] == r[:, -1], axis=1)):
            return None  # a closing vertex: the one-at-a-time path drops it
        x, y = np.ascontiguousarray(r[..., 0]), np.ascontiguousarray(r[..., 1])
        dx, dy = x - _row_means(x)[:, None], y - _row_means(y)[:, None]
        area = (dx * np.roll(dy, -1, axis=1) - np.roll(dx, -1, axis=1) * dy).sum(axis=1) / 2.0
        span = np.maximum(x.max(axis=1) - x.min(axis=1), y.max(axis=1) - y.min(axis=1))
        if np.any(np.abs(area) <= 1e-12 * span * span):
            return None  # a flat ring: the error comes from the one-at-a-time path
        flip = area < 0.0 if k == 0 else area > 0.0  # outer counter-clockwise, holes clockwise
        if flip.any() and not flip.all():
            return None
        rings.append((x[:, ::-1].copy(), y[:, ::-1].copy()) if flip[0] else (x, y))
    (ox, oy), bounds = rings[0], []
    xmin, xmax, ymin, ymax = ox.min(axis=1), ox.max(axis=1), oy.min(axis=1), oy.max(axis=1)
    slack = 1e-9 * np.maximum(xmax - xmin, ymax - ymin)
    for hx, hy in rings[1:]:
        bounds += [hx.min(axis=1) < xmin - slack, hy.min(axis=1) < ymin - slack]
        bounds += [hx.max(axis=1) > xmax + slack, hy.max(axis=1) > ymax + slack]
    if any(b.any() for b in bounds):
        return None
    ref = np.array([_row_means(ox), _row_means(oy)])
    local = _batch_ring_moments(rings)  # about each ring's own mean: the same for both passes
    m = _batch_section_moments(local, ref)
    if not np.all(m[0] > 0.0):
        return None
    centroid = ref + m[1:3] / m[0]
    mc = _batch_section_moments(local, centroid)
    perimeter = sum(np.hypot(np.roll(x, -1, axis=1) - x, np.roll(y, -1, axis=1) - y).sum(axis=1) for x, y in rings)
    return [
        _from_moments(
            (float(mc[0, j]), float(mc[1, j]), float(mc[2, j]), mc[3, j], mc[4, j], mc[5, j]),
            centroid[:, j],
            (float(xmin[j]), float(ymin[j]), float(xmax[j]), float(ymax[j])),
            float(float(perimeter[j]) + 0.0),
            (math.nan, math.nan, math.nan),
        )
        for j in range(len(samples))
    ]


def boundary_influence(outer: np.ndarray, holes: Sequence[np.ndarray] = ()) -> dict[str, np.ndarray]:
    """Per-vertex outward normals and attributed boundary lengths of a section.

    For error propagation: moving vertex ``k`` by ``delta`` along
    ``normals[k]`` changes the area by about ``delta * lengths[k]`` (exactly
    so where the two adjacent edges are collinear).

    Parameters
    ----------
    outer, holes
        As for :func:`section_properties` (validated the same way).

    Returns
    -------
    dict
        ``"points"`` (M, 2) vertices in mm, outer ring first (counter-clockwise)
        then each hole (clockwise), closing duplicates dropped;
        ``"normals"`` (M, 2) unit normals pointing away from the material
        (out of the outline, into a hole);
        ``"lengths"`` (M,) mm, half the sum of the two edges meeting at the
        vertex (they add up to the perimeter);
        ``"ring"`` (M,) int, 0 for the outer ring and ``k + 1`` for ``holes[k]``.

    Notes
    -----
    With the material on the left of every ring, the normal at a vertex is
    the direction of the area gradient ``0.5 * rperp(p_{k+1} - p_{k-1})``
    (the length-weighted mean of the two edge normals); where that vanishes
    (a hairpin) the mean of the unit edge normals is used, then the normal of
    the following edge.

    Examples
    --------
    >>> bi = boundary_influence([[0, 0], [2, 0], [2, 2], [0, 2]])
    >>> bi["normals"].round(6).tolist()[0], bi["lengths"].tolist()
    ([-0.707107, -0.707107], [2.0, 2.0, 2.0, 2.0])
    """
    out, hole_rings = _prepare_section(outer, holes)
    pts, nrm, lens, ring_ids = [], [], [], []
    for k, r in enumerate([out, *hole_rings]):
        nxt = np.roll(r, -1, axis=0)
        prv = np.roll(r, 1, axis=0)
        e_next = nxt - r  # edge leaving the vertex
        e_prev = r - prv  # edge arriving at the vertex
        l_next = np.hypot(e_next[:, 0], e_next[:, 1])
        l_prev = np.hypot(e_prev[:, 0], e_prev[:, 1])

        def rperp(v: np.ndarray) -> np.ndarray:  # right-hand perpendicular: away from material on the left
            return np.column_stack([v[:, 1], -v[:, 0]])

        grad = rperp(nxt - prv)
        with np.errstate(invalid="ignore", divide="ignore"):
            u_next = np.where(l_next[:, None] > 0, rperp(e_next) / l_next[:, None], 0.0)
            u_prev = np.where(l_prev[:, None] > 0, rperp(e_prev) / l_prev[:, None], 0.0)
        bisect = u_next + u_prev
        n = grad.copy()
        g_len = np.hypot(n[:, 0], n[:, 1])
        scale = np.max(l_next) if l_next.size else 1.0
        weak = g_len <= 1e-12 * scale
        n[weak] = bisect[weak]
        n_len = np.hypot(n[:, 0], n[:, 1])
        still = n_len <= 1e-12
        n[still] = u_next[still]
        n_len = np.hypot(n[:, 0], n[:, 1])
        with np.errstate(invalid="ignore", divide="ignore"):
            n = np.where(n_len[:, None] > 0, n / n_len[:, None], 0.0)
        pts.append(r)
        nrm.append(n)
        lens.append(0.5 * (l_next + l_prev))
        ring_ids.append(np.full(r.shape[0], k, dtype=np.int64))
    return {
        "points": np.concatenate(pts, axis=0),
        "normals": np.concatenate(nrm, axis=0),
        "lengths": np.concatenate(lens),
        "ring": np.concatenate(ring_ids),
    }


# --------------------------------------------------------------------------
# circles


@dataclass(frozen=True)
class CircleFit:
    """A least-squares circle through boundary points, in mm.

    ``rms_mm`` is the RMS of the radial residuals; ``roundness_mm`` is their
    peak-to-valley about this circle (the least-squares reference circle of
    ISO 12181-1, from memory).
    """

    centre_mm: tuple[float, float]
    diameter_mm: float
    rms_mm: float
    roundness_mm: float


def fit_circle(points: np.ndarray) -> CircleFit:
    """Geometric least-squares circle through points.

    Parameters
    ----------
    points : (N, 2) array_like of float
        At least 3 points ``x, y`` in mm, not all on one line.

    Returns
    -------
    CircleFit

    Raises
    ------
    scanmass.errors.OptionError
        Fewer than 3 points, non-finite values, or points on a line.

    Notes
    -----
    The algebraic fit of Kasa (linear least squares on
    ``x^2 + y^2 + D x + E y + F = 0``) gives the start; Gauss-Newton then
    minimises the sum of squared geometric distances
    ``sum (|p_i - c| - r)^2``. Coordinates are centred and scaled first.

    References
    ----------
    .. [1] I. Kasa, "A circle fitting procedure and its error analysis",
       IEEE Trans. Instrum. Meas. IM-25(1), 8-14, 1976. doi:10.1109/TIM.1976.6312298
    .. [2] N. Chernov, *Circular and Linear Regression: Fitting Circles and
       Lines by Least Squares*, CRC Press, 2010.

    Examples
    --------
    Four points on a circle of diameter 10 mm centred at (20, 30):

    >>> fit = fit_circle([[25, 30], [20, 35], [15, 30], [20, 25]])
    >>> [round(v, 9) for v in (*fit.centre_mm, fit.diameter_mm, fit.roundness_mm)]
    [20.0, 30.0, 10.0, 0.0]
    """
    pts = _as_points(points, "points", min_points=3)
    ref = pts.mean(axis=0)
    d = pts - ref
    scale = float(np.sqrt((d * d).sum(axis=1).mean()))
    if not scale > 0.0:
        raise OptionError("all points coincide; a circle needs at least 3 points not on one line")
    u = d / scale

    # Kasa: z + D x + E y + F = 0, z = x^2 + y^2 (all in the scaled frame)
    z = (u * u).sum(axis=1)
    design = np.column_stack([u, np.ones(len(u))])
    sv = np.linalg.svd(design, compute_uv=False)
    if sv[-1] <= 1e-10 * sv[0]:
        raise OptionError("the points lie on a line; a circle needs at least 3 points not on one line")
    (dd, ee, ff), *_ = np.linalg.lstsq(design, -z, rcond=None)
    cx, cy = -dd / 2.0, -ee / 2.0
    r2 = cx * cx + cy * cy - ff
    radius = math.sqrt(r2) if r2 > 0.0 else float(np.sqrt(z.mean()))

    # Gauss-Newton on the geometric distances
    for _ in range(100):
        dx = u[:, 0] - cx
        dy = u[:, 1] - cy
        dist = np.hypot(dx, dy)
        if np.any(dist == 0.0):
            break
        res = dist - radius
        jac = np.column_stack([-dx / dist, -dy / dist, -np.ones(len(u))])
        step, *_ = np.linalg.lstsq(jac, -res, rcond=None)
        if not np.all(np.isfinite(step)):
            break
        cx, cy, radius = cx + step[0], cy + step[1], radius + step[2]
        if float(np.max(np.abs(step))) <= 1e-14 * max(1.0, abs(radius)):
            break
    if not (math.isfinite(radius) and radius > 0.0):
        raise OptionError("the circle fit did not converge; the points do not follow an arc")

    dist = np.hypot(u[:, 0] - cx, u[:, 1] - cy)
    res = (dist - radius) * scale
    return CircleFit(
        centre_mm=(float(ref[0] + cx * scale), float(ref[1] + cy * scale)),
        diameter_mm=float(2.0 * radius * scale),
        rms_mm=float(np.sqrt(np.mean(res * res))),
        roundness_mm=float(res.max() - res.min()),
    )
