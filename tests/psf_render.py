"""An independent scan renderer for the tests: supersampled rasterisation and a non-Gaussian PSF.

It shares nothing with scanmass.testing.scans (exact coverage, Gaussian blur) or with the
segmenter's blur model:

1. the part (outer ring minus holes, mm in the scan frame of DESIGN.md) is rasterised on a
   grid ``factor`` times finer than the image: a sub-sample is inside when its centre is
   inside the polygon (even-odd rule, by a vectorised scan-line fill; the test file checks
   it sample for sample against scikit-image's ``draw.polygon``, which is exact but too
   slow for a 14-megasample grid);
2. the fine image is convolved with a point-spread function that is not Gaussian: a
   uniform disc (defocus) or a square box (e.g. a linear sensor's aperture with motion),
   both symmetric, so a straight edge's 50 % level stays on the edge;
3. it is block-averaged down to the image grid (the pixel's own square aperture), noise is
   added in linear light, and the result is sRGB-encoded (IEC 61966-2-1) to 8 bit.

Supersampling error: point sampling at spacing h = s / factor puts each sub-sample row's
count of inside samples within one sample of the exact chord length, i.e. an area error
below h^2 / 2 per boundary crossing of the row, in the worst case
``|dA| <= h * sum |dy| / 2 <= h * P / 2`` over the rings; for edges at irrational slopes
the rounding errors are nearly independent and cancel to O(h^2 sqrt(P / h)).
:func:`sampled_area_error` reports the actual figure for a given scene.
"""

from __future__ import annotations

import cv2
import numpy as np
from skimage.draw import polygon as draw_polygon


def fine_rings(rings_mm: list[np.ndarray], shape_px: tuple[int, int], s_mm: float, factor: int):
    """Rings as (rows, cols) on the fine grid, whose sample (r, c) has its centre at integers."""
    h = s_mm / factor
    out = []
    for ring in rings_mm:
        ring = np.asarray(ring, float)
        # fine sample k has its centre at (k + 0.5) h from the image's left (top) edge
        out.append(((shape_px[0] * s_mm - ring[:, 1]) / h - 0.5, ring[:, 0] / h - 0.5))
    return out


def scanline_fill(rings_rc, shape: tuple[int, int]) -> np.ndarray:
    """Boolean image: True where the sample centre (integer r, c) is inside (even-odd rule)."""
    toggles = np.zeros((shape[0], shape[1] + 1), dtype=np.int32)
    for rows, cols in rings_rc:
        r0, c0 = rows, cols
        r1, c1 = np.roll(rows, -1), np.roll(cols, -1)
        lo, hi = np.minimum(r0, r1), np.maximum(r0, r1)
        k0 = np.ceil(lo).astype(np.int64)  # sample rows k with lo <= k < hi (half-open: a
        k1 = np.ceil(hi).astype(np.int64)  # vertex on a row is counted once)
        counts = np.maximum(k1 - k0, 0)
        edge = np.repeat(np.arange(len(rows)), counts)
        k = np.repeat(k0, counts) + (np.arange(counts.sum()) - np.repeat(np.cumsum(counts) - counts, counts))
        t = (k - r0[edge]) / (r1[edge] - r0[edge])
        x = c0[edge] + t * (c1[edge] - c0[edge])
        first = np.clip(np.ceil(x).astype(np.int64), 0, shape[1])  # first sample centre right of it
        ok = (k >= 0) & (k < shape[0])
        np.add.at(toggles, (k[ok], first[ok]), 1)
    return (np.cumsum(toggles[:, :-1], axis=1) % 2).astype(bool)


def _mask(outer_mm: np.ndarray, holes_mm: list[np.ndarray], shape_px: tuple[int, int], s_mm: float, factor: int):
    shape = (shape_px[0] * factor, shape_px[1] * factor)
    return scanline_fill(fine_rings([outer_mm, *holes_mm], shape_px, s_mm, factor), shape)


def reference_mask(rings_rc, shape: tuple[int, int]) -> np.ndarray:
    """The same mask from scikit-image (even-odd over the rings), for checking small grids."""
    out = np.zeros(shape, dtype=bool)
    for rows, cols in rings_rc:
        rr, cc = draw_polygon(rows, cols, shape=shape)
        part = np.zeros(shape, dtype=bool)
        part[rr, cc] = True
        out ^= part
    return out


def sampled_area_error(
    outer_mm: np.ndarray, holes_mm: list[np.ndarray], area_mm2: float, *, shape_px, s_mm: float, factor: int
) -> float:
    """Area of the supersampled mask minus the exact area, mm2."""
    fine = _mask(outer_mm, holes_mm, shape_px, s_mm, factor)
    return float(fine.sum()) * (s_mm / factor) ** 2 - area_mm2


def psf_kernel(kind: str, size_px: float, factor: int) -> np.ndarray:
    """Unit-sum kernel on the fine grid: ``"disc"`` of radius size_px or ``"box"`` of width size_px."""
    if kind == "disc":
        r = size_px * factor
        n = int(np.ceil(r))
        yy, xx = np.mgrid[-n : n + 1, -n : n + 1]
        k = (xx * xx + yy * yy <= r * r).astype(np.float64)
    elif kind == "box":
        n = int(round(size_px * factor))
        if n % 2 == 0:
            n += 1  # an odd width keeps the box centred on a fine sample
        k = np.ones((n, n), np.float64)
    else:
        raise ValueError(kind)
    return k / k.sum()


def render(
    outer_mm: np.ndarray,
    holes_mm: list[np.ndarray],
    *,
    shape_px: tuple[int, int],
    dpi: float,
    psf: str,
    psf_px: float,
    factor: int = 8,
    background: float = 0.8,
    foreground: float = 0.08,
    noise: float = 0.0,
    seed: int = 0,
) -> np.ndarray:
    """An 8-bit sRGB-encoded grey scan of one part; see the module docstring."""
    s_mm = 25.4 / dpi
    fine = _mask(outer_mm, holes_mm, shape_px, s_mm, factor).astype(np.float32)
    blurred = cv2.filter2D(fine, -1, psf_kernel(psf, psf_px, factor).astype(np.float32), borderType=cv2.BORDER_REFLECT)
    h_px, w_px = shape_px
    cover = blurred.reshape(h_px, factor, w_px, factor).mean(axis=(1, 3), dtype=np.float64)
    linear = background + (foreground - background) * cover
    if noise > 0:
        linear = linear + np.random.default_rng(seed).normal(0.0, noise, size=linear.shape)
    lin = np.clip(linear, 0.0, 1.0)
    encoded = np.where(lin <= 0.0031308, 12.92 * lin, 1.055 * np.power(lin, 1.0 / 2.4) - 0.055)
    return np.rint(encoded * 255.0).astype(np.uint8)
