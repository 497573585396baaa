"""The ends of thin walls and narrow slots: where the integral across the wall is no longer exact.

The integral rule of :mod:`scanmass.segment.thin` holds along a line across a wall that
is straight for a few blur widths either side of the line. Within that distance of a
wall's end (the free tip of a fin, the root where a wall meets a thick region, the two
ends of a slot) light from the end itself is blurred into the profile, and the integral
reads the wall too thin (a tip) or too wide (a root, a slot's end).

What stays exact there is the same integral in two dimensions. Let ``W`` be a window
function, ``n`` the image normalised between the local background (0) and the part's
level (1), and ``chi`` the part's indicator. Blurring with an even point spread function
``K`` of unit integral gives ``sum W n = integral (K * W) chi``, which equals the part's
area under ``W``, ``integral W chi``, wherever ``K * W = W`` on the part: inside the
window's flat core and outside it. Where the window's ramps cross the part they must do
so across straight walls or edges running along the ramp's gradient (the flux of a
symmetric blur across such a line cancels) or over flat regions. Each end therefore gets
a rectangular window aligned with the wall: it starts with a ramp across the wall's
straight interior, runs past the end by the blur's reach and ramps out over flat
background or material; its sides run along the wall, over flat regions or across
edges that meet the wall at right angles (the root of a fin on a straight edge: the two
sides' oblique crossings cancel, being parallel). The difference between ``sum W n`` and
the polygon's exact pixel coverage weighted by ``W`` is the area the polygon lacks under
the window; it is put back by moving the boundary inside the window along its normals in
proportion to ``W``.

A window whose end asks for more than the end can plausibly need is left out and its
vertices carry that bound as uncertainty. The bound is the retreat of the midpoint contour
at a blurred strip's square end (:func:`strip_end_retreat_px`, closed form for a Gaussian
blur), at least the blur: a 2 px slot under a 1.4 px blur retreats 2.3 px. A window is also
left out where the wall or slot goes on past its end closed (a slot open in one piece and
closed beyond it: the closed piece is measured by the closed-slot step, and the window
would take its share a second time).

References
----------
.. [1] R. N. Bracewell, The Fourier Transform and Its Applications, 3rd ed., McGraw-Hill
   2000, chapter 6 (the integral of a convolution is the product of the integrals; an
   even kernel's convolution is self-adjoint).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import cv2
import numpy as np

from scanmass.geometry import point_in_ring, signed_area
from scanmass.raster import coverage

__all__ = ["EndWindow", "apply_end_windows", "end_windows", "strip_end_retreat_px", "turning", "wall_runs"]

#: Length (px) of the window's linear ramps: long against the blur, so that the blur of the
#: ramp itself (``K * W - W``, second order in sigma over this length) stays small.
RAMP_PX = 4.0


#: Beyond a window's far ramp (and, for a window over a whole short run, before its near
#: one) a real end leaves flat material or background, and an open continuation of the
#: wall or slot (a run broken by a kink) leaves image and polygon agreeing across it (the
#: integral rule, the sides corrected). Where the image across the centre line there still
#: lacks (or adds) more than this width (px) of material against the polygon's coverage, the
#: feature goes on past the end closed (a narrow slot open in one piece and closed beyond
#: it): the closed-slot step (:func:`scanmass.segment.thin.closed_slots`) measures the closed
#: piece from the pixels at least ``2 sigma + 1`` from the rings, so the window stops that
#: far past the end's tip (its own pixels up to there, none counted twice). Half a
#: pixel: a third of the narrowest wall the integral rule resolves (1.5 px), twenty times
#: the noise of the sum over the zone at a noise of 1 % of the contrast.
CONTINUES_WIDTH_PX = 0.5


def wall_runs(flagged: np.ndarray, ring_sizes: list[int]) -> list[np.ndarray]:
    """Maximal runs of consecutive flagged vertices along each ring (cyclic), as global indices.

    A ring whose every vertex is flagged (a closed wall: a ring's thin annulus) has no
    ends and gives no run.

    Examples
    --------
    >>> [r.tolist() for r in wall_runs(np.array([1, 1, 0, 0, 1, 1, 1, 1, 1], bool), [5, 4])]
    [[4, 0, 1]]
    """
    runs: list[np.ndarray] = []
    start = 0
    for size in ring_sizes:
        f = flagged[start : start + size]
        if f.any() and not f.all():
            first_off = int(np.argmin(f))  # rotate so that the ring starts off a run
            order = (np.arange(size) + first_off) % size
            rolled = f[order]
            edges = np.diff(np.concatenate([[0], rolled.astype(np.int8), [0]]))
            for a, b in zip(np.nonzero(edges == 1)[0], np.nonzero(edges == -1)[0]):
                runs.append(start + order[a:b])
        start += size
    return runs


#: A boundary turning by more than this angle (degrees) within the blur's reach either side
#: of a vertex is no straight wall there (the rounded end of a slot, a fin's tip).
TURN_DEG = 30.0


def turning(rings: list[np.ndarray], normals: np.ndarray, reach_px: float) -> np.ndarray:
    """Per vertex (rings concatenated): whether the normals ``reach_px`` before and after it differ by more than :data:`TURN_DEG`.

    Examples
    --------
    >>> t = np.linspace(0, 2 * np.pi, 200, endpoint=False)
    >>> disc = np.column_stack([100 * np.cos(t), 100 * np.sin(t)])
    >>> bool(turning([disc], disc / 100, 5.0).any())
    False
    """
    out, start = [], 0
    for ring in rings:
        n = normals[start : start + len(ring)]
        spacing = float(np.median(np.hypot(*(np.roll(ring, -1, axis=0) - ring).T))) or 1.0
        k = max(1, int(round(reach_px / spacing)))
        if 2 * k >= len(ring):
            out.append(np.ones(len(ring), bool))
        else:
            dots = np.einsum("ij,ij->i", np.roll(n, k, axis=0), np.roll(n, -k, axis=0))
            out.append(dots < math.cos(math.radians(TURN_DEG)))
        start += len(ring)
    return np.concatenate(out) if out else np.zeros(0, bool)


def strip_end_retreat_px(width_px: float, blur_px: float) -> float:
    """How far the midpoint contour of a blurred strip's square end retreats along its centre line.

    A strip of width ``w`` (along ``x``) ending square at ``y = 0``, blurred by a Gaussian
    of ``sigma``, is normalised to ``P Phi(-y / sigma)`` on its centre line far from its
    sides, with ``P = erf(w / (2 sqrt 2 sigma))`` the strip's peak and ``Phi`` the normal
    distribution function (the blur is separable). It crosses 0.5 at ``y = -sigma
    Phi^-1(1 / (2 P))``: 0 for a wide strip (``P`` = 1), and without bound as the strip
    narrows to where its peak is 0.5 (a slot the blur barely leaves open). A slot's end is
    the same with the roles of part and background swapped. Inf where ``P <= 0.5``.

    Examples
    --------
    >>> round(strip_end_retreat_px(20.0, 1.0), 6)  # a wide strip: the 50 % point of an edge
    0.0
    >>> round(strip_end_retreat_px(2.0, 1.314), 3)  # a 2 px slot under a 1.3 px blur
    1.711
    """
    from scipy.special import erf, ndtri

    if not (width_px > 0 and blur_px > 0):
        return math.inf
    peak = float(erf(width_px / (2.0 * math.sqrt(2.0) * blur_px)))
    if peak <= 0.5:
        return math.inf
    return float(blur_px * ndtri(min(0.5 / peak, 1.0)))


def _arc(points: np.ndarray) -> np.ndarray:
    """Cumulative length along an open polyline, 0 at its first point."""
    if len(points) < 2:
        return np.zeros(len(points))
    return np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(points, axis=0).T))])


@dataclass(frozen=True)
class EndWindow:
    """A window in a wall-aligned frame: origin, across axis ``n``, along axis ``u`` (towards the end).

    Its weight is 1 on ``u`` in ``[u0 + ramp, u1]`` and ``|n|`` up to ``half``, falling
    linearly to 0 over ``ramp`` beyond (and from ``u0 + ramp`` down to ``u0``).
    """

    origin: np.ndarray
    n_axis: np.ndarray
    u_axis: np.ndarray
    u0: float
    u1: float
    half: float
    ramp: float = RAMP_PX
    #: largest plausible move of the boundary at this end (px); NaN: the caller's
    #: ``max_move_px`` (see :func:`strip_end_retreat_px`)
    max_move: float = math.nan

    def weight(self, xy: np.ndarray) -> np.ndarray:
        """The window's weight at points ``xy`` (K, 2)."""
        d = np.asarray(xy, float) - self.origin
        u = d @ self.u_axis
        n = np.abs(d @ self.n_axis)
        along = np.clip((u - self.u0) / self.ramp, 0.0, 1.0) * np.clip((self.u1 + self.ramp - u) / self.ramp, 0.0, 1.0)
        across = np.clip((self.half + self.ramp - n) / self.ramp, 0.0, 1.0)
        return along * across

    def contains(self, xy: np.ndarray, margin: float = 0.0) -> bool:
        """Whether the point lies within the window's support (widened by ``margin``)."""
        d = np.asarray(xy, float) - self.origin
        u, n = float(d @ self.u_axis), abs(float(d @ self.n_axis))
        return bool(self.u0 - margin <= u <= self.u1 + self.ramp + margin and n <= self.half + self.ramp + margin)

    def corners(self) -> np.ndarray:
        """The four corners of the support, (4, 2)."""
        h = self.half + self.ramp
        return np.array(
            [
                self.origin + u * self.u_axis + s * h * self.n_axis
                for u in (self.u0, self.u1 + self.ramp)
                for s in (-1, 1)
            ]
        )


def end_windows(
    runs: list[np.ndarray],
    pts: np.ndarray,
    across: np.ndarray,
    width_px: np.ndarray,
    *,
    reach_px: float,
) -> list[EndWindow]:
    """One window per end of every wall or slot, merged where both sides of a wall share an end.

    ``across`` (K, 2): per vertex of ``pts``, the unit direction across its wall or slot
    (from this edge towards the opposite one), ``width_px`` the distance to the opposite
    edge (both meaningful on the runs' vertices only). ``reach_px``: the blur's reach,
    beyond which a profile no longer sees an end. A run too short to have a straight
    interior gets one window over its whole length.
    """
    windows: list[EndWindow] = []
    lead = reach_px + RAMP_PX  # from the end to the window's inner edge
    for run in sorted(runs, key=len, reverse=True):
        p = pts[run]
        s = _arc(p)
        if len(run) < 3:
            continue
        if s[-1] >= 2 * lead + 2.0:
            ends = [(0, int(np.searchsorted(s, lead))), (len(run) - 1, int(np.searchsorted(s, s[-1] - lead)))]
        else:
            ends = [(-1, len(run) // 2)]
        wide = float(np.max(width_px[run]))
        half = 0.5 * wide + reach_px
        # past a run's end the boundary goes on round the end (a tip, a slot's rounded end,
        # the corners where a wall meets a thick region) for up to the blur's reach and the width
        search = 2 * reach_px + wide
        for end_i, cut_i in ends:
            v = run[min(cut_i, len(run) - 1)]
            n_axis = across[v] / max(float(np.hypot(*across[v])), 1e-12)
            origin = pts[v] + 0.5 * width_px[v] * n_axis
            toward = (p[-1] - p[0]) if end_i < 0 else (p[end_i] - pts[v])
            u_axis = toward - (toward @ n_axis) * n_axis
            norm = float(np.hypot(*u_axis))
            if norm < 1e-9:
                continue
            u_axis = u_axis / norm
            u_run = (p - origin) @ u_axis
            u_all = (pts - origin) @ u_axis
            near = np.abs((pts - origin) @ n_axis) <= half
            far = float(u_run.max())
            beyond = near & (u_all >= far) & (u_all <= far + search)
            u1 = float(u_all[beyond].max()) if beyond.any() else far
            if end_i < 0:  # a short wall: one window from before its first vertex to past its last
                first = float(u_run.min())
                before = near & (u_all <= first) & (u_all >= first - search)
                u0 = float(u_all[before].min()) if before.any() else first
                window = EndWindow(origin, n_axis, u_axis, u0 - reach_px - RAMP_PX, u1 + reach_px, half)
            else:
                window = EndWindow(origin, n_axis, u_axis, 0.0, u1 + reach_px, half)
            if any(w.contains(window.origin, margin=RAMP_PX) for w in windows):
                continue  # the other side of the same wall's end
            windows.append(window)
    return windows


def apply_end_windows(
    lin: np.ndarray,
    shift: np.ndarray,
    rings: list[np.ndarray],
    normals: np.ndarray,
    windows: list[EndWindow],
    normalise: Callable[[np.ndarray, np.ndarray, np.ndarray], np.ndarray],
    *,
    level_rel_u: float,
    noise_rel: float,
    prefer: np.ndarray | None = None,
    reach_px: float = 5.0,
    max_move_px: float = 1.0,
    clear_px: float = 0.0,
) -> tuple[list[np.ndarray], np.ndarray, np.ndarray]:
    """Move the boundary inside each window so that its area under the window matches the image's.

    Parameters
    ----------
    lin : (H, W) array
        The crop in linear light.
    shift : (2,) array
        The crop's offset (x, y) in the image's pixel frame.
    rings : list of (N, 2) arrays
        The part's rings (outer first) in the image's pixel frame, after the wall step.
    normals : (sum N, 2) array
        Per vertex (rings concatenated), the unit normal away from the material.
    windows : list of EndWindow
    normalise : callable
        ``normalise(values, rows, cols)``: crop values to 0 (background) ... 1 (part) at
        crop pixels (rows, cols).
    level_rel_u, noise_rel : float
        Relative uncertainty of the part's level, and the pixel noise over the contrast.
    prefer : (sum N,) bool array, optional
        Vertices that take a window's correction when the window holds any (the turning
        boundary round an end, where the straight-wall correction was not applied);
        otherwise every vertex under the window does.
    reach_px : float
        The blur's reach: only pixels within it of the polygon's boundary are summed
        (farther out image and coverage agree but for noise and the level surfaces'
        misfit, e.g. under a lamp's shadow).
    max_move_px : float
        Largest plausible move of the boundary at an end (the midpoint rule's retreat at a
        tip is a fraction of the blur): a window asking for more holds something else
        (levels that do not hold, another feature) and is left out; its vertices get this
        much uncertainty instead.

    Returns
    -------
    rings, moved_by, u_px
        The moved rings; per vertex the displacement along its normal (px) and its
        1-sigma uncertainty (px) from the window's area.
    """
    sizes = [len(r) for r in rings]
    pts = np.concatenate(rings).astype(float)
    seg = np.concatenate([np.roll(r, -1, axis=0) - r for r in rings])
    seg_len = np.hypot(*seg.T)
    prev_len = np.concatenate([np.roll(seg_len[a : a + n], 1) for a, n in zip(np.cumsum([0, *sizes[:-1]]), sizes)])
    ds = 0.5 * (seg_len + prev_len)
    moved_by = np.zeros(len(pts))
    u_px = np.zeros(len(pts))
    h, w = lin.shape
    for window in windows:
        box = window.corners() - shift
        c0, r0 = np.floor(box.min(axis=0)).astype(int) - 1
        c1, r1 = np.ceil(box.max(axis=0)).astype(int) + 2
        c0, r0, c1, r1 = max(c0, 0), max(r0, 0), min(c1, w), min(r1, h)
        if c1 - c0 < 3 or r1 - r0 < 3:
            continue
        rows, cols = np.mgrid[r0:r1, c0:c1]
        centres = np.column_stack([cols.ravel(), rows.ravel()]).astype(float) + shift
        weight = window.weight(centres).reshape(rows.shape)
        if not weight.any():
            continue
        values = normalise(lin[r0:r1, c0:c1].astype(float), rows.astype(float), cols.astype(float))
        origin = shift + np.array([c0, r0], float)
        cov = _coverage_px(_split(pts, sizes), origin, (r1 - r0, c1 - c0))
        # where the wall or slot goes on closed past an end, the window stops ``clear_px`` past
        # the end's tip (a hard cut across a strip that runs on unchanged moves no material
        # across it): the closed piece beyond is the closed-slot step's
        u_lo, u_hi = _cuts(window, centres, (values - cov).ravel(), reach_px, clear_px)
        along_px = (centres - window.origin) @ window.u_axis
        weight = np.where(((along_px >= u_lo) & (along_px <= u_hi)).reshape(rows.shape), weight, 0.0)
        along_pts = (pts - window.origin) @ window.u_axis
        wv = np.where((along_pts >= u_lo) & (along_pts <= u_hi), window.weight(pts), 0.0)
        inside = wv > 0
        if prefer is not None and np.any(inside & prefer):
            inside &= prefer
        denom = float(np.sum(wv[inside] ** 2 * ds[inside]))
        if denom <= 1e-9:
            continue
        # the band within the blur's reach of the boundary (partly covered pixels and around)
        edge = ((cov > 1e-9) & (cov < 1 - 1e-9)).astype(np.uint8)
        band = cv2.distanceTransform(1 - edge, cv2.DIST_L2, 5) <= reach_px + 1.0
        weight = np.where(band, weight, 0.0)
        step = float(np.sum(weight * (values - cov))) / denom
        limit = window.max_move if math.isfinite(window.max_move) else max_move_px
        if not (math.isfinite(step) and abs(step) * float(wv[inside].max()) <= limit):
            u_px[inside] = np.hypot(u_px[inside], limit * wv[inside])
            continue
        for k in range(2):  # the area moved is linear in the step to first order: once more for the rest
            if k:
                cov = _coverage_px(_split(pts, sizes), origin, (r1 - r0, c1 - c0))
                step = float(np.sum(weight * (values - cov))) / denom
            pts[inside] += (step * wv[inside])[:, None] * normals[inside]
            moved_by[inside] += step * wv[inside]
        # the area's uncertainty: the part's level over the material under the window, and the noise
        area_u = math.hypot(
            level_rel_u * float(np.sum(weight * np.clip(values, 0.0, None))),
            noise_rel * float(np.sqrt(np.sum(weight * weight))),
        )
        u_px[inside] = np.hypot(u_px[inside], area_u / denom * wv[inside])
    return _split(pts, sizes), moved_by, u_px


def _cuts(
    window: EndWindow, centres: np.ndarray, residual: np.ndarray, reach_px: float, clear_px: float = 0.0
) -> tuple[float, float]:
    """Where the window stops along its wall (``u`` from, to): at an end's tip where the feature goes on closed.

    Over the far ramp (and the near one for a window spanning a whole run, ``u0 < 0``): the
    sum of ``residual`` (image less coverage, normalised) over the window's width, less its
    flanks' level (beyond the blur's reach from the feature: the level surfaces' misfit),
    per unit length along the wall, beyond :data:`CONTINUES_WIDTH_PX` means the wall or slot
    goes on closed there; the window then stops ``clear_px`` past that end's tip (the far tip
    ``reach_px`` before ``u1``, the near one ``reach_px + ramp`` after ``u0``, as
    :func:`end_windows` places them). Unbounded (inf) at an end that does not go on.

    Examples
    --------
    >>> w = EndWindow(np.zeros(2), np.array([1.0, 0]), np.array([0, 1.0]), 0.0, 10.0, 5.0)
    >>> r, c = np.mgrid[-12:30, -12:13]
    >>> xy = np.column_stack([c.ravel(), r.ravel()]).astype(float)
    >>> flat = np.full(len(xy), 0.01)  # a level misfit of 1 % only
    >>> dip = flat - np.where((np.abs(xy[:, 0]) <= 1) & (xy[:, 1] > 10), 0.6, 0.0)  # a closed 1.8 px slot
    >>> _cuts(w, xy, flat, 5.0), _cuts(w, xy, dip, 5.0)
    ((-inf, inf), (-inf, 5.0))
    """
    d = centres - window.origin
    u = d @ window.u_axis
    n = np.abs(d @ window.n_axis)
    core = n <= window.half
    flank = (n > window.half) & (n <= window.half + window.ramp)
    ok = np.isfinite(residual)
    out = [-math.inf, math.inf]
    zones = [(1, (u >= window.u1) & (u <= window.u1 + window.ramp), window.u1 - reach_px + clear_px)]
    if window.u0 < 0:
        zones.append(
            (0, (u >= window.u0) & (u <= window.u0 + window.ramp), window.u0 + window.ramp + reach_px - clear_px)
        )
    for side, zone, tip in zones:
        inner, outer = zone & core & ok, zone & flank & ok
        if not inner.any():
            continue
        offset = float(np.median(residual[outer])) if outer.any() else 0.0
        width = float(np.sum(residual[inner] - offset)) / window.ramp
        if abs(width) > CONTINUES_WIDTH_PX:
            out[side] = tip
    return out[0], out[1]


def _split(pts: np.ndarray, sizes: list[int]) -> list[np.ndarray]:
    out, start = [], 0
    for n in sizes:
        out.append(pts[start : start + n])
        start += n
    return out


def _coverage_px(rings: list[np.ndarray], origin: np.ndarray, shape: tuple[int, int]) -> np.ndarray:
    """Exact covered fraction of the pixels of a (rows, cols) block whose first pixel centre is at ``origin``.

    Pixel centres at integers (x = column, y = row from the top); holes are the rings after the first.
    """
    h = shape[0]
    lo = origin - 0.5
    hi = origin + np.array([shape[1], shape[0]], float) - 0.5
    starts = np.cumsum([0, *[len(r) for r in rings[:-1]]])
    pts = np.concatenate(rings)
    beside = np.any(np.minimum.reduceat(pts, starts, axis=0) > hi, axis=1) | np.any(
        np.maximum.reduceat(pts, starts, axis=0) < lo, axis=1
    )
    framed = []
    constant = 0.0
    for i, ring in enumerate(rings):
        if beside[i]:
            continue  # wholly beside the block
        if not _crosses(ring, lo, hi):
            # a ring that does not cross the block covers all of it or none (the rings' count only)
            if point_in_ring(0.5 * (lo + hi), ring):
                constant += 1.0 if i == 0 else -1.0
            continue
        # pixel (c, r) of the block covers [c - 0.5, c + 0.5]: a frame with y up, unit pixels
        f = np.column_stack([ring[:, 0] - origin[0] + 0.5, h - (ring[:, 1] - origin[1] + 0.5)])
        ccw = signed_area(f) > 0
        framed.append(f if ccw == (i == 0) else f[::-1])
    out = coverage(framed, shape=shape, mm_per_px=1.0, clip=False) if framed else np.zeros(shape)
    return out + constant


def _crosses(ring: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> bool:
    """Whether any edge of the ring may enter the box [lo, hi] (edges' bounding boxes overlap it)."""
    nxt = np.roll(ring, -1, axis=0)
    e_lo, e_hi = np.minimum(ring, nxt), np.maximum(ring, nxt)
    return bool(np.any(np.all(e_lo <= hi, axis=1) & np.all(e_hi >= lo, axis=1)))
