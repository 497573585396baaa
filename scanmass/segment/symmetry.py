"""Edge profiles in linear light: symmetry and the move of an edge between two tone curves.

An edge blurred by a centred point spread function in linear light is point-symmetric
about its midpoint, so two estimates of its position agree: the 0.5 crossing (the
midpoint rule) and the *balance point* ``x0`` with ``integral_{-a}^{a} n ds = a - x0``
(:func:`edge_asymmetry`). Decoded with a wrong tone curve a Gaussian-blurred edge stays
nearly point-symmetric, though: the curve mostly shifts and narrows it (1-D check: a
linear edge between 6 % and 80 % read as sRGB moves by 0.56 sigma while its 10/25/75/90 %
crossings stay symmetric about the new midpoint within 0.01 sigma), so symmetry cannot
tell the encoding of an untagged file. :func:`reading_shift` measures what matters
instead: how far the 0.5 crossings move between two readings.

References
----------
.. [1] R. N. Bracewell, The Fourier Transform and Its Applications, 3rd ed., 2000,
   chapter 8 (the first moment of a convolution is the sum of the first moments).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import cv2
import numpy as np

from scanmass.geometry import vertex_normals
from scanmass.load.decode import LoadedImage, lookup
from scanmass.numeric import robust_sigma
from scanmass.segment.rings import PartRings
from scanmass.segment.thin import _crossings

__all__ = ["EdgeSymmetry", "EdgeHalo", "edge_asymmetry", "edge_halo", "reading_shift"]

#: Most boundary points sampled per part.
MAX_PROFILES = 400


@dataclass(frozen=True)
class EdgeSymmetry:
    """Mean (midpoint - balance point) offset along the normal, px, towards the part; its standard error; count."""

    offset_px: float
    offset_u_px: float
    count: int


def _outward_normals(ring: np.ndarray) -> np.ndarray:
    normal = vertex_normals(ring)
    if float(np.sum(np.einsum("ij,ij->i", normal, ring - ring.mean(axis=0)))) < 0:
        normal = -normal
    return normal


@dataclass(frozen=True)
class _Frame:
    """Where a part's edge profiles are sampled: maps into the crop ``box`` (c0, r0, c1, r1), and s."""

    map_x: np.ndarray
    map_y: np.ndarray
    box: tuple[int, int, int, int]
    s: np.ndarray
    step: float


def _frame(image: LoadedImage, rings: PartRings, *, extra_px: float = 0.0) -> tuple[_Frame | None, np.ndarray, float]:
    """The sampling frame of :func:`_profiles` (None, s, step when there are too few clear edges)."""
    ring = np.asarray(rings.outer_px, float)
    if len(ring) < 16 or rings.cut:
        return None, np.zeros(0), 0.1
    sigma = float(rings.blur_px) if math.isfinite(rings.blur_px) and rings.blur_px > 0 else 1.0
    a = 3.0 * sigma + 1.5 + extra_px
    step = 0.1
    s = np.arange(-a, a + 1e-9, step)
    pick = np.linspace(0, len(ring) - 1, min(MAX_PROFILES, len(ring))).astype(int)
    pts = ring[pick]
    normals = _outward_normals(ring)[pick]
    # only edges with no other edge within reach on either side (thin walls are not edges)
    all_rings = [ring, *[np.asarray(h, float) for h in rings.holes_px]]
    seg_a = np.concatenate(all_rings)
    seg_b = np.concatenate([np.roll(r, -1, axis=0) for r in all_rings])
    # both directions in one search: each ray's distances depend on that ray and the
    # segments alone (every segment within reach is tested, whatever the other rays)
    d_both, _ = _crossings(np.concatenate([pts, pts]), np.concatenate([-normals, normals]), seg_a, seg_b, 2 * a + 1)
    d_in, d_out = d_both[: len(pts)], d_both[len(pts) :]
    clear = np.isinf(d_in) & np.isinf(d_out)
    pts, normals = pts[clear], normals[clear]
    if len(pts) < 8:
        return None, np.zeros(0), 0.1
    x0, y0, x1, y1 = rings.bbox_px
    pad = int(math.ceil(a + 3))
    c0, r0 = max(0, x0 - pad), max(0, y0 - pad)
    c1, r1 = min(image.width_px, x1 + pad), min(image.height_px, y1 + pad)
    # s runs from the background (outside) towards the part; each coordinate as
    # (point - s * normal) - crop corner, the arithmetic of the (x, y) pairs
    map_x = (pts[:, 0, None] - s[None, :] * normals[:, 0, None] - float(c0)).astype(np.float32)
    map_y = (pts[:, 1, None] - s[None, :] * normals[:, 1, None] - float(r0)).astype(np.float32)
    return _Frame(map_x, map_y, (c0, r0, c1, r1), s, step), s, step


def _sample(image: LoadedImage, frame: _Frame, table: np.ndarray) -> np.ndarray:
    """The profiles of a frame through the tone curve ``table`` (linear interpolation in that light)."""
    c0, r0, c1, r1 = frame.box
    lin = lookup(table, image.grey[r0:r1, c0:c1]).astype(np.float32, copy=False)
    return cv2.remap(lin, frame.map_x, frame.map_y, cv2.INTER_LINEAR, borderMode=cv2.BORDER_REPLICATE).astype(float)


def _profiles(
    image: LoadedImage, rings: PartRings, table: np.ndarray, *, extra_px: float = 0.0
) -> tuple[np.ndarray | None, np.ndarray, float]:
    """Profiles across the part's clear outer edges (s from the background towards the part).

    They reach 3 blur widths + 1.5 px (+ ``extra_px``) each side of the edge.
    """
    frame, s, step = _frame(image, rings, extra_px=extra_px)
    if frame is None:
        return None, s, step
    return _sample(image, frame, table), s, step


def edge_asymmetry(image: LoadedImage, rings: PartRings, *, lut: np.ndarray | None = None) -> EdgeSymmetry:
    """Mean offset of the midpoint rule from the balance point over a part's outer edge.

    Parameters
    ----------
    image : LoadedImage
    rings : PartRings
        The part (its outer ring and blur are used).
    lut : ndarray, optional
        The tone curve to judge (default: the image's own ``to_linear``).

    Returns
    -------
    EdgeSymmetry
        ``offset_px`` > 0 when the midpoint contour lies inside the balance point's
        (the part looks smaller by the midpoint rule).
    """
    table = image.to_linear if lut is None else lut
    prof, s, step = _profiles(image, rings, table)
    if prof is None:
        return EdgeSymmetry(0.0, math.inf, 0)
    a = float(-s[0])
    end = max(2, int(round(0.6 / step)))
    b = prof[:, :end].mean(axis=1)
    f = prof[:, -end:].mean(axis=1)
    c = f - b
    ok = np.abs(c) > 0.5 * abs(float(rings.contrast)) if math.isfinite(rings.contrast) else np.abs(c) > 1e-3
    # flat plateaus only: no other edge within reach
    flat = (np.abs(prof[:, :end].std(axis=1)) < 0.05 * np.abs(c)) & (
        np.abs(prof[:, -end:].std(axis=1)) < 0.05 * np.abs(c)
    )
    ok &= flat
    if ok.sum() < 8:
        return EdgeSymmetry(0.0, math.inf, int(ok.sum()))
    n = (prof[ok] - b[ok, None]) / c[ok, None]
    integral = step * (n.sum(axis=1) - 0.5 * (n[:, 0] + n[:, -1]))  # trapezoid rule
    balance = a - integral  # the balance point, from s = -a... measured from s = 0 towards the part
    # the 0.5 crossing of this profile (under the tone curve judged), by linear interpolation
    above = n >= 0.5
    first = np.argmax(above, axis=1)
    good = above.any(axis=1) & (first > 0)
    i = np.clip(first, 1, len(s) - 1)
    rows = np.arange(len(n))
    n0, n1 = n[rows, i - 1], n[rows, i]
    crossing = s[i - 1] + step * (0.5 - n0) / np.where(np.abs(n1 - n0) > 1e-12, n1 - n0, 1.0)
    offset = (crossing - balance)[good]  # the midpoint relative to the balance point, towards the part
    if offset.size < 8:
        return EdgeSymmetry(0.0, math.inf, int(offset.size))
    centre = float(np.median(offset))
    spread = robust_sigma(offset, centre) + 1e-6
    return EdgeSymmetry(
        float(np.mean(offset[np.abs(offset - centre) < 4 * spread])), spread / math.sqrt(ok.sum()), int(ok.sum())
    )


@dataclass(frozen=True)
class EdgeHalo:
    """Overshoot of a part's edges beyond their own levels, relative to the contrast.

    ``overshoot`` is the largest excursion of the median edge profile below the
    background level (outside) or beyond the part's level (inside); ``limit`` is what
    noise alone could give; ``count`` the profiles used.
    """

    overshoot: float
    limit: float
    count: int

    @property
    def found(self) -> bool:
        """True when the overshoot exceeds what noise could give (a sharpened image)."""
        return self.count >= 8 and self.overshoot > self.limit


#: Reach (px) added beyond 3 blur widths to see a sharpening halo and the level past it.
HALO_REACH_PX = 8.0
#: Smallest overshoot (fraction of the contrast) called a halo, besides the noise limit.
HALO_MIN = 0.004


def edge_halo(image: LoadedImage, rings: PartRings) -> EdgeHalo:
    """The sharpening halo of a part's clear outer edges, in linear light.

    A blurred edge in linear light is monotonic: it never goes beyond the levels on
    either side. Sharpening (an unsharp mask in the scanner's or camera's software,
    local contrast enhancement) adds a dark and a bright band along it, and moves the
    midpoint of the edge by a fraction of a pixel in a way no point spread function
    does. The median profile across the edges (normalised between the levels 2 px at
    each end of a profile reaching 3 blur widths + 9.5 px) is compared with 0 outside
    and 1 inside; the largest excursion is the overshoot.
    """
    prof, s, step = _profiles(image, rings, image.to_linear, extra_px=HALO_REACH_PX)
    if prof is None:
        return EdgeHalo(0.0, math.inf, 0)
    a = float(-s[0])
    ends = max(2, int(round(2.0 / step)))
    b = np.median(prof[:, :ends], axis=1)
    f = np.median(prof[:, -ends:], axis=1)
    c = f - b
    ok = np.abs(c) > 1e-6
    if math.isfinite(rings.contrast):
        ok &= np.abs(c) > 0.5 * abs(float(rings.contrast))
    if ok.sum() < 8:
        return EdgeHalo(0.0, math.inf, int(ok.sum()))
    n = np.median((prof[ok] - b[ok, None]) / c[ok, None], axis=0)
    zone = (np.abs(s) >= 0.5) & (np.abs(s) <= a - 2.0)
    outside = zone & (s < 0)
    inside = zone & (s > 0)
    overshoot = max(float(-n[outside].min(initial=0.0)), float(n[inside].max(initial=1.0) - 1.0), 0.0)
    # the median of m profiles has a standard error ~1.25 sigma / sqrt(m); the extreme
    # of ~a/step correlated samples of it stays within 5 of those
    noise = rings.noise_rel if math.isfinite(rings.noise_rel) else 0.0
    limit = HALO_MIN + 5.0 * 1.25 * noise / math.sqrt(int(ok.sum()))
    return EdgeHalo(overshoot, limit, int(ok.sum()))


def reading_shift(image: LoadedImage, rings: PartRings, lut_other: np.ndarray) -> float:
    """Median move (px) of the 0.5 crossing across a part's clear edges if read with ``lut_other``.

    Positive when the other reading puts the edge further out (the part larger). The
    profiles are those of :func:`edge_asymmetry`.
    """
    frame, _, _ = _frame(image, rings)  # the same profiles under both readings
    if frame is None:
        return 0.0
    here = _crossings_of(_sample(image, frame, image.to_linear), frame.s, frame.step)
    there = _crossings_of(_sample(image, frame, lut_other), frame.s, frame.step)
    ok = np.isfinite(here) & np.isfinite(there)
    if ok.sum() < 8:
        return 0.0
    return float(np.median(here[ok] - there[ok]))


def _crossings_of(prof: np.ndarray, s: np.ndarray, step: float) -> np.ndarray:
    end = max(2, int(round(0.6 / step)))
    b = prof[:, :end].mean(axis=1)
    f = prof[:, -end:].mean(axis=1)
    n = (prof - b[:, None]) / np.where(np.abs(f - b) > 1e-9, f - b, np.nan)[:, None]
    above = n >= 0.5
    first = np.argmax(above, axis=1)
    i = np.clip(first, 1, len(s) - 1)
    rows = np.arange(len(n))
    n0, n1 = n[rows, i - 1], n[rows, i]
    crossing = s[i - 1] + step * (0.5 - n0) / np.where(np.abs(n1 - n0) > 1e-12, n1 - n0, np.nan)
    return np.where(above.any(axis=1) & (first > 0), crossing, np.nan)
