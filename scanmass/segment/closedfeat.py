"""Closed narrow slots and vanished thin walls measured by the integral rule.

:func:`scanmass.segment.thin.closed_slots` finds slots that the blur closed (a dip of the
normalised image inside a part that never reaches the background) and walls that vanished
(a ridge outside it, attached to it, that never reaches the part's level), with every
pixel's missing share ``m`` (``1 - n`` in a slot, ``n`` on a wall, ``n`` the image
normalised between the local background and the part's own level). The integral rule
holds for any blur: the sum of ``m`` over a feature is its area, and the sum across its
ridge line per unit length is its width (the integral of a convolution is the product of
the integrals, Bracewell [1]_).

:func:`measure_closed` turns each feature into a polygon, a rectangle along its ridge
line (the principal axis of ``m``, through its centroid), whose width ``w`` is the median
of the integral across the line over the feature's straight interior. A free end (a
slot's end inside the part, a wall's tip) is placed by the same rule along the line: the
material beyond an interior point, ``sum m`` there, over ``w``. An end that meets the
part's outline (a wall's root, a slot's mouth) runs to where the ridge line crosses the
outline: near the outline the pixels mix with the outline's own blurred edge and are left
out of the sums, and the outline's own bulge there holds the material up to the
crossing. The polygon is added to the part's figures (a wall) or taken out of them (a
slot) as extra material (:func:`scanmass.section.section_properties`), not merged into
the outline.

Its area's uncertainty combines the levels' error (a relative error ``e`` of the
contrast moves every pixel's share by ``e`` times its normalised value: the sum over the
feature's pixels, taken as shared), the noise (``noise_rel`` per pixel, independent), the
spread of the integral along the interior, and at each end that meets the outline the
outline's bulge: up to a blur width of the feature's width, not measured.

References
----------
.. [1] R. N. Bracewell, The Fourier Transform and Its Applications, 3rd ed., McGraw-Hill
   2000, chapter 6 (the integral of a convolution is the product of the integrals).
.. [2] I. E. Sutherland and G. W. Hodgman, "Reentrant polygon clipping", Communications of
   the ACM 17(1), 32-42, 1974.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import cv2
import numpy as np

from scanmass.numeric import robust_sigma

__all__ = ["ClosedFeature", "is_sliver", "measure_closed"]


@dataclass(frozen=True)
class ClosedFeature:
    """A closed slot (``sign`` -1: material to take out) or a vanished wall (+1: to add), in px."""

    #: rings in px with their signs (+1 material added, -1 taken out): a wall's rectangle
    #: along its ridge line less the part's rings clipped to it, a slot's the clipped rings
    rings_px: tuple[tuple[np.ndarray, float], ...]
    sign: float
    area_px: float  # the material it adds or takes out
    area_u_px: float  # 1-sigma of that area
    width_px: float
    length_px: float
    perimeter_change_px: float  # how much the part's perimeter grows with it
    #: 1-sigma of that: the length's (twice the area's over the width) and the ends' shape
    #: (a width at each end: a rounded end, or the outline's bulge)
    perimeter_u_px: float
    feature_id: float  # its id in the pixels' fourth column


def _crossing(origin: np.ndarray, axis: np.ndarray, rings: list[np.ndarray], t_from: float, toward: float) -> float:
    """Nearest ``t`` (beyond ``t_from`` in the direction ``toward``) where ``origin + t axis`` crosses a ring."""
    best = math.nan
    for ring in rings:
        a = np.asarray(ring, float)
        b = np.roll(a, -1, axis=0)
        d = b - a
        den = axis[0] * d[:, 1] - axis[1] * d[:, 0]
        ok = np.abs(den) > 1e-12
        rel = a - origin
        with np.errstate(divide="ignore", invalid="ignore"):
            t = (rel[:, 0] * d[:, 1] - rel[:, 1] * d[:, 0]) / den
            s = (rel[:, 0] * axis[1] - rel[:, 1] * axis[0]) / den
        hit = ok & (s >= 0) & (s <= 1) & ((t - t_from) * toward >= 0)
        if hit.any():
            cand = t[hit][np.argmin(np.abs(t[hit] - t_from))]
            if not math.isfinite(best) or abs(cand - t_from) < abs(best - t_from):
                best = float(cand)
    return best


def _ring_distance(points: np.ndarray, rings: list[np.ndarray]) -> np.ndarray:
    """Distance (px) of each point from the nearest segment of any ring."""
    out = np.full(len(points), np.inf)
    for ring in rings:
        a = np.asarray(ring, float)
        d = np.roll(a, -1, axis=0) - a
        dd = np.maximum(np.einsum("ij,ij->i", d, d), 1e-12)
        rel = points[:, None, :] - a[None, :, :]
        f = np.clip(np.einsum("pij,ij->pi", rel, d) / dd, 0.0, 1.0)
        near = rel - f[:, :, None] * d[None, :, :]
        out = np.minimum(out, np.sqrt(np.min(np.einsum("pij,pij->pi", near, near), axis=1)))
    return out


def _inside(points: np.ndarray, rings: list[np.ndarray]) -> np.ndarray:
    """Whether each point lies in the part (inside the outer ring, outside every hole)."""

    def within(ring: np.ndarray) -> np.ndarray:
        contour = np.asarray(ring, np.float32).reshape(-1, 1, 2)
        return np.array([cv2.pointPolygonTest(contour, (float(x), float(y)), False) > 0 for x, y in points])

    out = within(rings[0])
    for hole in rings[1:]:
        out &= ~within(hole)
    return out


def clip_convex(subject: np.ndarray, clip: np.ndarray) -> np.ndarray:
    """A ring clipped to a convex counter-clockwise ring (Sutherland and Hodgman [2]_).

    Exact in area and moments for any simple subject ring (a concave subject may leave
    zero-width bridges along the clip's edges, which add nothing).
    """
    out = np.asarray(subject, float)
    c = np.asarray(clip, float)
    for a, b in zip(c, np.roll(c, -1, axis=0)):
        if len(out) == 0:
            break
        d = b - a
        side = d[0] * (out[:, 1] - a[1]) - d[1] * (out[:, 0] - a[0])  # >= 0: inside (left of a->b)
        nxt = np.roll(out, -1, axis=0)
        side_n = np.roll(side, -1)
        kept: list[np.ndarray] = []
        for p, q, sp, sq in zip(out, nxt, side, side_n):
            if sp >= 0:
                kept.append(p)
            if (sp >= 0) != (sq >= 0):
                kept.append(p + (q - p) * (sp / (sp - sq)))
        out = np.array(kept, float).reshape(-1, 2)
    return out


def _signed_area(ring: np.ndarray) -> float:
    if len(ring) < 3:
        return 0.0
    x, y = ring[:, 0], ring[:, 1]
    return 0.5 * float(np.sum(x * np.roll(y, -1) - np.roll(x, -1) * y))


#: A closed feature's ridge must lie this many blur sigmas beyond the distance from the
#: rings where its pixels start: nearer, the dip may be an edge's own blurred tail (a
#: neighbour's edge across a narrow gap, an uneven light) cut off by that distance.
RIDGE_CLEAR_SIGMAS = 1.0

#: Its ridge's height (the share at its peak) must agree with that of a strip of its
#: integral width under the blur, ``erf(w / (2 sqrt 2 sigma))``, to this share of it
#: (plus a few noise steps): a shading or a shadow has another profile.
PEAK_AGREEMENT = 0.25

#: ... and its width must be at most this many blur sigmas: a strip wider than that
#: reaches past half the contrast and has a 0.5 contour of its own (erf(1 / sqrt 2) = 0.68).
CLOSED_MAX_WIDTH_SIGMAS = 2.0


#: ... and one width along its interior: the spread (MAD) of the integral across it, per
#: pixel of length, at most this share of the width (plus the noise of a bin's sum).
WIDTH_SPREAD = 0.2


def _is_strip(
    xy: np.ndarray,
    m: np.ndarray,
    t: np.ndarray,
    edges: np.ndarray,
    width: float,
    sigma: float,
    rings: list[np.ndarray],
    away_px: float,
    noise_rel: float,
) -> bool:
    """Whether a dip (or ridge) looks like a blurred strip: narrow, clear of the rings, of the right height."""
    if width > CLOSED_MAX_WIDTH_SIGMAS * sigma:
        return False
    strong = m > 0.5 * float(m.max())
    if float(np.median(_ring_distance(xy[strong], rings))) < away_px + RIDGE_CLEAR_SIGMAS * sigma:
        return False
    k = np.digitize(t, edges) - 1
    ok = (k >= 0) & (k < len(edges) - 1)
    peaks = np.zeros(len(edges) - 1)
    np.maximum.at(peaks, k[ok], m[ok])
    expected = math.erf(width / (2.0 * math.sqrt(2.0) * sigma))
    return abs(float(np.median(peaks)) - expected) <= PEAK_AGREEMENT * expected + 3.0 * noise_rel


#: A hole whose mean width (twice its area over its perimeter) is under this (px) is a
#: sliver: the part of a narrow slot where the blur left a 0.5 contour open. The slot's
#: dip is measured through it (it is no edge to keep clear of), and the hole's own area
#: is kept out of the material taken out.
SLIVER_WIDTH_PX = 1.5


def is_sliver(ring: np.ndarray) -> bool:
    """Whether a hole ring (px) is a sliver of a narrow slot (see :data:`SLIVER_WIDTH_PX`)."""
    r = np.asarray(ring, float)
    perimeter = float(np.sum(np.hypot(*(np.roll(r, -1, axis=0) - r).T)))
    return perimeter > 0 and 2.0 * abs(_signed_area(r)) / perimeter < SLIVER_WIDTH_PX


def measure_closed(
    share_px: np.ndarray,
    rings: list[np.ndarray],
    *,
    blur_px: float,
    away_px: float,
    level_rel_u: float,
    noise_rel: float,
) -> list[ClosedFeature]:
    """The closed slots and vanished walls of one part as polygons, with their area's uncertainty.

    Parameters
    ----------
    share_px : (K, 4) array
        x_px, y_px, missing share and feature id (+k a slot, -k a wall) of every pixel, from
        :func:`scanmass.segment.thin.closed_slots`.
    rings : list of (N, 2) arrays
        The part's midpoint-rule rings in px (outer first); hole rings that are slivers
        (:func:`is_sliver`) or that a feature runs through (90 % of their vertices on its
        pixels) are only clipped, not kept clear of.
    blur_px : float
        Gaussian-equivalent blur sigma (px).
    away_px : float
        The distance from the rings within which ``share_px`` holds no pixel.
    level_rel_u, noise_rel : float
        Relative uncertainty of the levels (of the contrast), and the per-pixel noise over
        the contrast.

    Returns
    -------
    list of ClosedFeature
        One per feature id; a feature with too little interior to tell a width is left out
        (its share stays a term of the error model, see the caller).
    """
    out: list[ClosedFeature] = []
    if share_px.shape[1] < 4:
        return out
    sigma = blur_px if math.isfinite(blur_px) and blur_px > 0 else 1.0
    all_rings = rings
    end_px = 2.0 * sigma + 1.0  # an end's blur reaches this far along the line
    for fid in np.unique(share_px[:, 3]):
        side = 1.0 if fid > 0 else -1.0  # + a slot, - a wall
        sel = share_px[:, 3] == fid
        xy, m = share_px[sel, :2], np.clip(share_px[sel, 2], 0.0, None)
        # holes the feature runs through (slivers, barely open pieces) are no edge to keep clear of
        cells = set(map(tuple, np.round(xy).astype(int).tolist()))
        rings = [all_rings[0]]
        for h in all_rings[1:]:
            covered = np.mean([tuple(v) in cells for v in np.round(h).astype(int).tolist()])
            if not (is_sliver(h) or covered >= 0.9):
                rings.append(h)
        total = float(m.sum())
        if total <= 0 or m.size < 4:
            continue
        centre = (m[:, None] * xy).sum(axis=0) / total
        rel = xy - centre
        cov = (m[:, None, None] * rel[:, :, None] * rel[:, None, :]).sum(axis=0) / total
        vals, vecs = np.linalg.eigh(cov)
        axis = vecs[:, 1]
        normal = np.array([-axis[1], axis[0]])
        t = rel @ axis
        strong = m > 0.2 * float(m.max())
        t_lo, t_hi = float(t[strong].min()), float(t[strong].max())
        # the interior: a blur reach in from both ends, 1 px bins along the line
        a_in, b_in = t_lo + end_px, t_hi - end_px
        edges = np.arange(a_in, b_in + 1e-9, 1.0)
        if edges.size < 4:
            continue
        per_bin = np.histogram(t, bins=edges, weights=m)[0]
        width = float(np.median(per_bin))
        if not width > 0.2:
            continue
        bin_sigma = robust_sigma(per_bin, width)
        spread = bin_sigma / math.sqrt(per_bin.size)
        if not _is_strip(xy, m, t, edges, width, sigma, rings, away_px, noise_rel):
            continue
        if bin_sigma > WIDTH_SPREAD * width + 3.0 * noise_rel * math.sqrt(m.size / per_bin.size):
            continue  # not one width along it (a wedge, the neck between two touching parts)
        # the two ends: where the outline is near, run into it past its own bulge; else by
        # the integral rule
        near = _ring_distance(np.array([centre + t_lo * axis, centre + t_hi * axis]), rings) <= away_px + 2.0
        reach = away_px + 3.0 + 12.0 * sigma  # how far the outline's bulge may run along the line
        ends = []
        for k, (t_end, t_cut, toward) in enumerate(((t_lo, a_in, -1.0), (t_hi, b_in, 1.0))):
            if near[k]:
                # the outline proper: where both sides of the feature, half a pixel out, are
                # in the part (a wall's root) or out of it (a slot's mouth)
                steps = t_end + toward * np.arange(0.0, reach, 0.25)
                lateral = 0.5 * width + 0.5
                line = centre[None, :] + steps[:, None] * axis[None, :]
                both = _inside(line + lateral * normal, rings) & _inside(line - lateral * normal, rings)
                if side > 0:
                    both = ~(_inside(line + lateral * normal, rings) | _inside(line - lateral * normal, rings))
                if both.any():
                    ends.append((float(steps[int(np.argmax(both))]) + toward * 1.0, True))
                    continue
            beyond = float(m[(t - t_cut) * toward > 0].sum())
            ends.append((t_cut + toward * beyond / width, False))
        (lo, lo_attached), (hi, hi_attached) = ends
        if not hi - lo > 0:
            continue
        half = 0.5 * width * normal
        rect = np.array([centre + lo * axis - half, centre + hi * axis - half, centre + hi * axis + half,
                         centre + lo * axis + half])  # fmt: skip
        if _signed_area(rect) < 0:
            rect = rect[::-1].copy()
        # the part's share of the rectangle: clipped rings (the outer adds, a hole takes out)
        # (a slot's own open pieces are given back whole: the rectangle holds all of the slot)
        through = [h for h in all_rings[1:] if side > 0 and not any(h is r for r in rings)]
        overlap = [(clip_convex(r, rect), 1.0 if i == 0 else -1.0) for i, r in enumerate(all_rings)]
        overlap = [(r, sgn) for (r, sgn), ring in zip(overlap, all_rings) if not any(ring is h for h in through)]
        overlap += [(np.asarray(h, float), -1.0) for h in through]
        overlap = [(r, sgn) for r, sgn in overlap if abs(_signed_area(r)) > 1e-9]
        inner = sum(sgn * abs(_signed_area(r)) for r, sgn in overlap)
        if side > 0:  # a slot: take out what the part counts inside the rectangle (and its open pieces)
            pieces = tuple((r, -sgn) for r, sgn in overlap)
            area = inner
        else:  # a wall: add the rectangle less what the part already counts
            pieces = ((rect, 1.0), *((r, -sgn) for r, sgn in overlap))
            area = width * (hi - lo) - inner
        if not area > 0:
            continue
        attached = int(lo_attached) + int(hi_attached)
        length = area / width
        # uncertainty: levels (shared over the feature's pixels), noise, the width's spread,
        # and the outline's bulge at an attached end (up to a blur width of the width)
        level_u = level_rel_u * m.size
        noise_u = noise_rel * math.sqrt(m.size)
        bulge_u = attached * width * sigma
        u = math.sqrt(level_u**2 + noise_u**2 + (spread * (hi - lo)) ** 2 + bulge_u**2)
        out.append(
            ClosedFeature(
                rings_px=pieces,
                sign=-1.0 if side > 0 else 1.0,
                area_px=area,
                area_u_px=u,
                width_px=width,
                length_px=length,
                perimeter_change_px=2.0 * length + width * ((2 - attached) - attached),
                perimeter_u_px=math.hypot(2.0 * u / width, 2.0 * width),
                feature_id=float(fid),
            )
        )
    return out
