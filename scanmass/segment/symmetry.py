"""Point symmetry of a part's edges in linear light: the edge model's residual and the encoding check.

An edge blurred by a centred point spread function in linear light has two estimates of
its position that agree for any such blur when the profile is point-symmetric about its
midpoint: the 0.5 crossing (the midpoint rule) and the *balance point* ``x0`` for which
the normalised profile ``n(s)`` (0 = background, 1 = part, ``s`` across the edge towards
the part) satisfies ``integral_{-a}^{a} n ds = a - x0``. The balance point stays exact
for any centred blur in linear light; the midpoint rule needs symmetry. Their mean
difference over the boundary, :func:`edge_asymmetry`, therefore measures what the edge
model leaves out: a blur or a compression applied in an encoded (non-linear) domain, or
a file decoded with the wrong tone curve, makes edges asymmetric in linear light and
moves the midpoint off the balance point (by a shared offset of the whole boundary).

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

from scanmass.load.decode import LoadedImage
from scanmass.segment.rings import PartRings
from scanmass.segment.thin import _crossings

__all__ = ["EdgeSymmetry", "edge_asymmetry"]

#: Most boundary points sampled per part.
MAX_PROFILES = 400


@dataclass(frozen=True)
class EdgeSymmetry:
    """Mean (midpoint - balance point) offset along the normal, px, towards the part; its standard error; count."""

    offset_px: float
    offset_u_px: float
    count: int


def _outward_normals(ring: np.ndarray) -> np.ndarray:
    tangent = np.roll(ring, -1, axis=0) - np.roll(ring, 1, axis=0)
    tn = np.hypot(tangent[:, 0], tangent[:, 1])
    tn[tn == 0] = 1.0
    normal = np.column_stack([tangent[:, 1], -tangent[:, 0]]) / tn[:, None]
    if float(np.sum(np.einsum("ij,ij->i", normal, ring - ring.mean(axis=0)))) < 0:
        normal = -normal
    return normal


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
    ring = np.asarray(rings.outer_px, float)
    if len(ring) < 16 or rings.cut:
        return EdgeSymmetry(0.0, math.inf, 0)
    sigma = float(rings.blur_px) if math.isfinite(rings.blur_px) and rings.blur_px > 0 else 1.0
    a = 3.0 * sigma + 1.5
    step = 0.1
    s = np.arange(-a, a + 1e-9, step)
    pick = np.linspace(0, len(ring) - 1, min(MAX_PROFILES, len(ring))).astype(int)
    pts = ring[pick]
    normals = _outward_normals(ring)[pick]
    # only edges with no other edge within reach on either side (thin walls are not edges)
    all_rings = [ring, *[np.asarray(h, float) for h in rings.holes_px]]
    seg_a = np.concatenate(all_rings)
    seg_b = np.concatenate([np.roll(r, -1, axis=0) for r in all_rings])
    d_in, _ = _crossings(pts, -normals, seg_a, seg_b, 2 * a + 1)
    d_out, _ = _crossings(pts, normals, seg_a, seg_b, 2 * a + 1)
    clear = np.isinf(d_in) & np.isinf(d_out)
    pts, normals = pts[clear], normals[clear]
    if len(pts) < 8:
        return EdgeSymmetry(0.0, math.inf, int(len(pts)))
    x0, y0, x1, y1 = rings.bbox_px
    pad = int(math.ceil(a + 3))
    c0, r0 = max(0, x0 - pad), max(0, y0 - pad)
    c1, r1 = min(image.width_px, x1 + pad), min(image.height_px, y1 + pad)
    lin = table[image.grey[r0:r1, c0:c1]].astype(np.float32)
    # s runs from the background (outside) towards the part
    xy = pts[:, None, :] - s[None, :, None] * normals[:, None, :] - np.array([c0, r0], float)
    prof = cv2.remap(
        lin, xy[..., 0].astype(np.float32), xy[..., 1].astype(np.float32), cv2.INTER_LINEAR,
        borderMode=cv2.BORDER_REPLICATE,
    ).astype(float)  # fmt: skip
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
    integral = np.trapezoid(n, dx=step, axis=1) if hasattr(np, "trapezoid") else np.trapz(n, dx=step, axis=1)
    balance = a - integral  # position of the balance point, from the vertex (s = 0) towards the part
    offset = -balance  # the midpoint (s = 0) relative to the balance point, towards the part
    centre = float(np.median(offset))
    spread = 1.4826 * float(np.median(np.abs(offset - centre))) + 1e-6
    return EdgeSymmetry(
        float(np.mean(offset[np.abs(offset - centre) < 4 * spread])), spread / math.sqrt(ok.sum()), int(ok.sum())
    )
