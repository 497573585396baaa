"""Plane ring primitives shared by every stage (layer 0: imports nothing of scanmass but errors).

A ring is an ``(N, 2)`` array of ``x, y`` vertices, implicitly closed (the last vertex
joins the first; a duplicated closing vertex is accepted and ignored). The functions
here do not care about units: the segment stage applies them to pixel rings, the
section stage to millimetre rings. Orientation follows the coordinates given: a
positive signed area means counter-clockwise in a frame with y up (and clockwise as
seen on screen in pixel coordinates, whose y runs down).
"""

from __future__ import annotations

import numpy as np

from scanmass.errors import OptionError

__all__ = [
    "signed_area",
    "point_in_ring",
    "orient_ring",
    "ring_moments",
    "ring_perimeter",
    "offset_ring",
    "vertex_normals",
    "nearest_vertex",
    "vertex_spread",
]


# --------------------------------------------------------------------------
# validation helpers


def _as_points(points: object, name: str, *, min_points: int = 1) -> np.ndarray:
    """Return ``points`` as a finite float64 ``(N, 2)`` array or raise OptionError."""
    try:
        arr = np.asarray(points, dtype=np.float64)
    except (TypeError, ValueError):
        raise OptionError(f"{name} is not an array of numbers; pass an (N, 2) array of x, y in mm") from None
    if arr.ndim != 2 or arr.shape[1] != 2:
        raise OptionError(f"{name} has shape {arr.shape}; pass an (N, 2) array of x, y in mm")
    if not np.all(np.isfinite(arr)):
        raise OptionError(f"{name} contains NaN or infinite coordinates; remove those vertices")
    if arr.shape[0] < min_points:
        raise OptionError(f"{name} has {arr.shape[0]} points; at least {min_points} are needed")
    return arr


def _as_ring(ring: object, name: str = "ring") -> np.ndarray:
    """Validate a ring and drop a duplicated closing vertex (returns a new array)."""
    arr = _as_points(ring, name)
    if arr.shape[0] >= 2 and np.array_equal(arr[0], arr[-1]):
        arr = arr[:-1]
    if arr.shape[0] < 3:
        raise OptionError(f"{name} has {arr.shape[0]} distinct vertices; a ring needs at least 3")
    return np.array(arr, dtype=np.float64, copy=True)


# --------------------------------------------------------------------------
# single rings


def _local_moments(d: np.ndarray) -> np.ndarray:
    """Green's theorem moments of a ring given relative to its reference point.

    Returns ``[a, qx, qy, ixx, iyy, ixy]`` = integrals of 1, x, y, y^2, x^2, xy.
    """
    x0, y0 = d[:, 0], d[:, 1]
    x1, y1 = np.roll(x0, -1), np.roll(y0, -1)
    c = x0 * y1 - x1 * y0  # twice the signed area of each (ref, p_i, p_i+1) triangle
    a = c.sum() / 2.0
    qx = ((x0 + x1) * c).sum() / 6.0
    qy = ((y0 + y1) * c).sum() / 6.0
    ixx = ((y0 * y0 + y0 * y1 + y1 * y1) * c).sum() / 12.0
    iyy = ((x0 * x0 + x0 * x1 + x1 * x1) * c).sum() / 12.0
    ixy = ((2.0 * x0 * y0 + x0 * y1 + x1 * y0 + 2.0 * x1 * y1) * c).sum() / 24.0
    return np.array([a, qx, qy, ixx, iyy, ixy], dtype=np.float64)


def _shift_moments(m: np.ndarray, x0: float, y0: float) -> np.ndarray:
    """Moments about a frame whose origin is at ``(-x0, -y0)`` in the frame of ``m``.

    That is: given integrals of ``x', y'``, return integrals of ``x = x' + x0``,
    ``y = y' + y0`` (exact algebra, no approximation).
    """
    a, qx, qy, ixx, iyy, ixy = m
    return np.array(
        [
            a,
            qx + x0 * a,
            qy + y0 * a,
            ixx + 2.0 * y0 * qy + y0 * y0 * a,
            iyy + 2.0 * x0 * qx + x0 * x0 * a,
            ixy + x0 * qy + y0 * qx + x0 * y0 * a,
        ],
        dtype=np.float64,
    )


def signed_area(ring: np.ndarray) -> float:
    """Signed area of a ring (shoelace formula), positive when counter-clockwise.

    Parameters
    ----------
    ring : (N, 2) array_like of float
        Vertices ``x, y`` in mm, implicitly closed.

    Returns
    -------
    float
        Area in mm2; negative for a clockwise ring, 0.0 for a degenerate one.

    Examples
    --------
    >>> signed_area([[0, 0], [2, 0], [2, 1], [0, 1]])
    2.0
    >>> signed_area([[0, 0], [0, 1], [2, 1], [2, 0]])
    -2.0
    """
    r = _as_ring(ring)
    d = r - r.mean(axis=0)
    x, y = d[:, 0], d[:, 1]
    # the terms x_i y_(i+1) - x_(i+1) y_i of each vertex and its successor (the last with the
    # first) laid out in one array and summed: the arithmetic of rolled copies, without them
    terms = np.empty(len(d))
    np.subtract(x[:-1] * y[1:], x[1:] * y[:-1], out=terms[:-1])
    terms[-1] = x[-1] * y[0] - x[0] * y[-1]
    return float(terms.sum() / 2.0)


def point_in_ring(point: np.ndarray, ring: np.ndarray) -> bool:
    """Whether ``point`` lies inside ``ring`` (even-odd rule, ring implicitly closed).

    References
    ----------
    .. [1] J. O'Rourke, "Computational Geometry in C", 2nd ed., Cambridge University
       Press, 1998 (the crossing-number test for a point in a polygon).

    Examples
    --------
    >>> point_in_ring([1, 1], [[0, 0], [2, 0], [2, 2], [0, 2]]), point_in_ring([3, 1], [[0, 0], [2, 0], [2, 2], [0, 2]])
    (True, False)
    """
    p = np.asarray(ring, dtype=np.float64)
    x, y = float(point[0]), float(point[1])
    q = np.roll(p, -1, axis=0)
    crosses = (p[:, 1] > y) != (q[:, 1] > y)
    with np.errstate(divide="ignore", invalid="ignore"):
        x_at = p[:, 0] + (y - p[:, 1]) * (q[:, 0] - p[:, 0]) / (q[:, 1] - p[:, 1])
    return bool(np.count_nonzero(crosses & (x < x_at)) % 2)


def orient_ring(ring: np.ndarray, *, ccw: bool = True) -> np.ndarray:
    """Return a copy of ``ring`` ordered counter-clockwise (``ccw=True``) or clockwise.

    A duplicated closing vertex is dropped. A ring of zero area is returned in
    its given order.

    Examples
    --------
    >>> orient_ring([[0, 0], [0, 1], [1, 0]]).tolist()
    [[1.0, 0.0], [0.0, 1.0], [0.0, 0.0]]
    """
    r = _as_ring(ring)
    a = signed_area(r)
    if (a < 0.0 and ccw) or (a > 0.0 and not ccw):
        r = r[::-1].copy()
    return r


def ring_moments(ring: np.ndarray, *, about: tuple[float, float] = (0.0, 0.0)) -> np.ndarray:
    """Area, first and second moments of one ring by Green's theorem.

    Parameters
    ----------
    ring : (N, 2) array_like of float
        Vertices ``x, y`` in mm, implicitly closed.
    about : (float, float), optional
        Point the moments are taken about (default the origin). Passing a
        point near the ring keeps full precision in the moments themselves.

    Returns
    -------
    (6,) ndarray of float64
        ``[a, qx, qy, ixx_o, iyy_o, ixy_o]`` = integrals over the ring's area of
        ``1, x, y, y^2, x^2, x*y`` with ``x, y`` measured from ``about``
        (mm2, mm3, mm3, mm4, mm4, mm4). All are signed by orientation:
        a clockwise ring gives the negatives, so a hole given clockwise adds
        its moments with the right sign.

    Notes
    -----
    With ``c_i = x_i y_{i+1} - x_{i+1} y_i`` the closed forms are
    ``a = sum c_i / 2``, ``qx = sum (x_i + x_{i+1}) c_i / 6``,
    ``iyy = sum (x_i^2 + x_i x_{i+1} + x_{i+1}^2) c_i / 12`` and
    ``ixy = sum (2 x_i y_i + x_i y_{i+1} + x_{i+1} y_i + 2 x_{i+1} y_{i+1}) c_i / 24``
    (and the same with x and y swapped). They are evaluated about the vertex
    mean and moved to ``about`` exactly with the parallel-axis relations, so the
    products never mix the ring's size with its distance from the origin.

    References
    ----------
    .. [1] C. Steger, "On the calculation of arbitrary moments of polygons",
       Technical Report FGBV-96-05, Technische Universitaet Muenchen, 1996.
    .. [2] G. Green's theorem in the plane, any calculus text, e.g.
       T. M. Apostol, *Calculus*, Vol. II, 2nd ed., Wiley, 1969, sec. 11.19.

    Examples
    --------
    >>> ring_moments([[0, 0], [2, 0], [2, 1], [0, 1]]).tolist()  # 2 x 1 rectangle
    [2.0, 2.0, 1.0, 0.666..., 2.666..., 1.0]
    """
    r = _as_ring(ring)
    ref = r.mean(axis=0)
    m = _local_moments(r - ref)
    ax, ay = (float(v) for v in about)
    return _shift_moments(m, float(ref[0]) - ax, float(ref[1]) - ay)


def ring_perimeter(ring: np.ndarray) -> float:
    """Length of the closed ring in mm (sum of its edge lengths, closing edge included).

    Examples
    --------
    >>> ring_perimeter([[0, 0], [3, 0], [3, 4]])
    12.0
    """
    r = _as_ring(ring)
    e = np.roll(r, -1, axis=0) - r
    return float(np.hypot(e[:, 0], e[:, 1]).sum())


def nearest_vertex(a: np.ndarray, b: np.ndarray, chunk: int = 256) -> np.ndarray:
    """Index of the nearest point of ``b`` for each point of ``a`` (both ``(N, 2)``), in chunks of ``a``.

    Examples
    --------
    >>> nearest_vertex(np.array([[0.0, 0.0], [9.0, 1.0]]), np.array([[10.0, 0.0], [1.0, 1.0]])).tolist()
    [1, 0]
    """
    out = np.empty(len(a), dtype=int)
    for s in range(0, len(a), chunk):
        q = a[s : s + chunk]
        d = (q[:, None, 0] - b[None, :, 0]) ** 2 + (q[:, None, 1] - b[None, :, 1]) ** 2
        out[s : s + chunk] = d.argmin(axis=1)
    return out


def vertex_spread(a: np.ndarray, b: np.ndarray) -> float:
    """The Hausdorff distance between the vertex sets of two rings (or point sets).

    The largest distance from a vertex of either to the nearest vertex of the other: no
    point of one lies farther than this from the other's vertices.

    Examples
    --------
    >>> vertex_spread(np.array([[0.0, 0.0], [4.0, 0.0]]), np.array([[0.0, 3.0], [4.0, 0.0]]))
    3.0
    """
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    if len(a) == 0 or len(b) == 0:
        return 0.0 if len(a) == len(b) else float("inf")
    ab = np.hypot(*(a - b[nearest_vertex(a, b)]).T).max()
    ba = np.hypot(*(b - a[nearest_vertex(b, a)]).T).max()
    return float(max(ab, ba))


def vertex_normals(ring: np.ndarray) -> np.ndarray:
    """Unit normals at a ring's vertices, from the chord between each vertex's neighbours.

    The normal is the chord turned clockwise: it points out of a counter-clockwise ring in a
    y-up frame (and out of a clockwise one in image rows). A vertex whose neighbours coincide
    gets (0, 0). The ring is used as given (no validation, no closing vertex dropped).

    Examples
    --------
    >>> vertex_normals(np.array([[0.0, 0.0], [2.0, 0.0], [2.0, 2.0], [0.0, 2.0]])).round(3).tolist()
    [[-0.707, -0.707], [0.707, -0.707], [0.707, 0.707], [-0.707, 0.707]]
    """
    tangent = np.roll(ring, -1, axis=0) - np.roll(ring, 1, axis=0)
    tn = np.hypot(tangent[:, 0], tangent[:, 1])
    tn[tn == 0] = 1.0
    return np.column_stack([tangent[:, 1], -tangent[:, 0]]) / tn[:, None]


def offset_ring(ring: np.ndarray, distance: float) -> np.ndarray:
    """Move every vertex of ``ring`` by ``distance`` along the ring's outward normal.

    A positive ``distance`` enlarges the region the ring bounds, whatever its
    orientation; the result keeps the vertex order. Each vertex moves along the sum
    of the unit outward normals of its two edges, lengthened so that both edges move
    by ``distance`` (the mitre offset), with the mitre capped at 4 times ``distance``
    for very sharp corners. Meant for small offsets (a fraction of the shortest
    edge): the change of area is then ``distance`` times the perimeter, to first order.

    Examples
    --------
    >>> np.round(offset_ring([[0, 0], [2, 0], [2, 1], [0, 1]], 0.5), 12).tolist()
    [[-0.5, -0.5], [2.5, -0.5], [2.5, 1.5], [-0.5, 1.5]]
    """
    r = _as_ring(ring)
    sign = 1.0 if signed_area(r) >= 0.0 else -1.0  # counter-clockwise: outward is to the right
    e = np.roll(r, -1, axis=0) - r
    length = np.hypot(e[:, 0], e[:, 1])
    length[length == 0.0] = 1.0
    n = sign * np.column_stack([e[:, 1], -e[:, 0]]) / length[:, None]  # outward normal of edge i
    prev = np.roll(n, 1, axis=0)  # the edge ending at vertex i
    bis = n + prev
    cos_half = np.clip(0.5 * np.hypot(bis[:, 0], bis[:, 1]), 0.25, None)  # cos of half the turn
    norm = np.hypot(bis[:, 0], bis[:, 1])
    norm[norm == 0.0] = 1.0
    return r + float(distance) * bis / norm[:, None] / cos_half[:, None]
