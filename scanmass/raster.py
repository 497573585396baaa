"""Exact pixel coverage of polygons and the sRGB transfer function (layer 0).

Used to draw printed mats (:func:`scanmass.scale.mat.render_mat_png`) and synthetic scans and
photos with known truth (:mod:`scanmass.testing`). Pixel (column ``i``, row ``j``; rows
counted from the top) of an image of ``H`` rows covers ``x`` in ``[i s_x, (i + 1) s_x]``
and ``y`` in ``[(H - j - 1) s_y, (H - j) s_y]`` of the scan frame (DESIGN.md).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import numpy as np

from scanmass.errors import OptionError

__all__ = ["coverage", "srgb_encode", "srgb_decode"]

# --------------------------------------------------------------------------------------
# validation helpers
# --------------------------------------------------------------------------------------


def _positive_pair(value: float | tuple[float, float], name: str) -> tuple[float, float]:
    """Return (x, y) from a positive finite scalar or pair (``name`` for the error message)."""
    if np.ndim(value) == 0:
        pair = (float(value), float(value))  # type: ignore[arg-type]
    else:
        vals = np.asarray(value, dtype=float).ravel()
        if vals.size != 2:
            raise OptionError(f"{name} must be a number or a pair (x, y), got {value!r}")
        pair = (float(vals[0]), float(vals[1]))
    if not all(math.isfinite(v) and v > 0 for v in pair):
        raise OptionError(f"{name} must be positive and finite, got {value!r}")
    return pair


def _shape_pair(shape: tuple[int, int]) -> tuple[int, int]:
    """Validate an image shape (H, W) in pixels."""
    try:
        h_px, w_px = (int(v) for v in shape)
    except (TypeError, ValueError):
        raise OptionError(f"shape must be (rows, columns) in pixels, got {shape!r}") from None
    if h_px < 1 or w_px < 1 or (h_px, w_px) != tuple(shape):
        raise OptionError(f"shape must be two positive whole numbers (rows, columns), got {shape!r}")
    return h_px, w_px


def _ring_array(ring: Any, what: str = "ring") -> np.ndarray:
    """Validate one ring: an (N, 2) finite float array with N >= 3."""
    arr = np.asarray(ring, dtype=float)
    if arr.ndim != 2 or arr.shape[1] != 2 or arr.shape[0] < 3:
        raise OptionError(f"each {what} must be an (N, 2) array of x, y in mm with N >= 3, got shape {arr.shape}")
    if not np.all(np.isfinite(arr)):
        raise OptionError(f"{what} has NaN or infinite coordinates; give finite mm values")
    return arr


# --------------------------------------------------------------------------------------
# exact area coverage
# --------------------------------------------------------------------------------------


def _grid_crossings(a0: np.ndarray, a1: np.ndarray, limit: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Crossings of edges a0 -> a1 with the integer lines k = 0..limit of one axis.

    Returns (edge index, k, t) with t the edge parameter of each crossing.
    """
    lo = np.maximum(np.ceil(np.minimum(a0, a1)), 0.0)
    hi = np.minimum(np.floor(np.maximum(a0, a1)), float(limit))
    count = np.where(a1 != a0, np.maximum(hi - lo + 1.0, 0.0), 0.0).astype(np.int64)
    total = int(count.sum())
    edge = np.repeat(np.arange(a0.size), count)
    first = np.cumsum(count) - count
    k = np.repeat(lo, count) + (np.arange(total) - np.repeat(first, count))
    t = (k - a0[edge]) / (a1[edge] - a0[edge])
    return edge, k, t


def _accumulate(rings_px: Sequence[np.ndarray], h_px: int, w_px: int) -> tuple[np.ndarray, int, int] | None:
    """Signed exact coverage of oriented rings given in raster coordinates.

    Raster coordinates: u along columns (pixel i spans u in [i, i+1]), v along rows
    downwards (row j spans v in [j, j+1]). Returns the local winding-integral
    image over the bounding box of the rings (clamped to the image) with its
    top-left (row, column), or None when nothing lands in the image.
    """
    starts = np.concatenate([r for r in rings_px])
    ends = np.concatenate([np.roll(r, -1, axis=0) for r in rings_px])
    keep = np.any(starts != ends, axis=1)
    u0, v0 = starts[keep, 0], starts[keep, 1]
    u1, v1 = ends[keep, 0], ends[keep, 1]
    n_edges = u0.size
    if n_edges == 0:
        return None

    # Split every edge at the integer grid lines inside the image window, so that
    # each piece lies in one cell (or in one region outside the window, where
    # clamping below is then an affine map of the piece).
    eu, ku, tu = _grid_crossings(u0, u1, w_px)
    ev, kv, tv = _grid_crossings(v0, v1, h_px)
    idx = np.arange(n_edges)
    edge = np.concatenate([idx, idx, eu, ev])
    t = np.concatenate([np.zeros(n_edges), np.ones(n_edges), tu, tv])
    u = np.concatenate([u0, u1, ku, u0[ev] + tv * (u1[ev] - u0[ev])])
    v = np.concatenate([v0, v1, v0[eu] + tu * (v1[eu] - v0[eu]), kv])
    order = np.lexsort((t, edge))
    edge, u, v = edge[order], u[order], v[order]
    same = edge[:-1] == edge[1:]
    # Clamping: a piece left of the image adds its full dv to every pixel of the
    # row (it sits on u = 0); a piece right of it lands in the spare column W;
    # pieces above/below the image become horizontal (dv = 0) and vanish.
    u = np.clip(u, 0.0, float(w_px))
    v = np.clip(v, 0.0, float(h_px))
    ua, ub = u[:-1][same], u[1:][same]
    va, vb = v[:-1][same], v[1:][same]
    dv = vb - va
    nz = dv != 0.0
    ua, ub, va, vb, dv = ua[nz], ub[nz], va[nz], vb[nz], dv[nz]
    if dv.size == 0:
        return None

    row = np.clip(np.floor(0.5 * (va + vb)), 0, h_px - 1).astype(np.int64)
    u_mid = 0.5 * (ua + ub)
    col = np.clip(np.floor(u_mid), 0, w_px).astype(np.int64)
    frac = np.clip(u_mid - col, 0.0, 1.0)
    # Exact signed area of the cell to the right of the piece (the piece is
    # straight, so its mean u is its midpoint): dv * (1 - frac) in its own cell;
    # the rest of dv ("cover") goes to the next cell and, through the cumulative
    # sum, to every cell further right.
    r0, r1 = int(row.min()), int(row.max())
    c0, c1 = int(col.min()), int(col.max())
    n_rows, n_cols = r1 - r0 + 1, c1 - c0 + 2
    flat = (row - r0) * n_cols + (col - c0)
    acc = np.bincount(flat, weights=dv * (1.0 - frac), minlength=n_rows * n_cols)
    acc += np.bincount(flat + 1, weights=dv * frac, minlength=n_rows * n_cols + 1)[: n_rows * n_cols]
    acc = np.cumsum(acc.reshape(n_rows, n_cols), axis=1)
    # Closed rings put a net dv of zero into every row, so the running sum is
    # zero again right of the last piece; columns beyond the image are dropped.
    last = min(c0 + n_cols, w_px)
    return acc[:, : last - c0], r0, c0


def coverage(
    rings_mm: Sequence[np.ndarray],
    *,
    shape: tuple[int, int],
    mm_per_px: float | tuple[float, float],
    clip: bool = True,
) -> np.ndarray:
    """Exact fraction of each pixel covered by oriented polygon rings.

    Each ring contributes its *signed* area inside each pixel: positive where it
    runs counter-clockwise in the scan frame (x right, y up), negative where it
    runs clockwise. The sum over the rings is the integral of the winding number
    over the pixel divided by the pixel's area. Give outer boundaries
    counter-clockwise and holes clockwise (or use :func:`scanmass.testing.scans.part_coverage`,
    which orients them for you).

    Parameters
    ----------
    rings_mm : sequence of (N, 2) float arrays
        Closed rings (the last vertex joins the first) in mm, scan frame. Rings
        may extend beyond the image; only the part inside is counted.
    shape : (int, int)
        Image shape (rows H, columns W) in pixels.
    mm_per_px : float or (float, float)
        Pixel size in mm, one value or (x, y).
    clip : bool, optional
        Clip the result to [0, 1] (default). With ``clip=False`` the raw winding
        integral is returned; its sum times the pixel area equals the signed area
        of the rings inside the image.

    Returns
    -------
    (H, W) float64 ndarray
        Covered fraction of each pixel. Exact (to rounding, ~1e-13) wherever the
        winding number is 0 or 1, i.e. for non-overlapping parts whose holes lie
        inside them; where parts overlap inside one pixel the clipped sum is an
        upper bound of the union's coverage.

    Notes
    -----
    Signed-area accumulation: every edge is split at the integer grid lines so
    that each piece lies inside one pixel; a piece with vertical extent ``dv``
    and mean horizontal position ``f`` inside its pixel adds ``dv (1 - f)`` to its
    pixel (the exact area between the straight piece and the pixel's right side)
    and ``dv f`` to the next pixel; a cumulative sum along each row then carries
    the full ``dv`` to every pixel further right. Nothing is sampled, so straight
    edges are exact. Pieces outside the image are clamped onto its border, which
    keeps the cover term of parts that leave the image on the left.

    References
    ----------
    .. [1] R. Levien, "Inside the fastest font renderer in the world", blog post
       on font-rs, 2016 (accumulation buffer of signed area and cover, then a
       prefix sum along each scanline).
    .. [2] The same area/cover cell decomposition is used by the FreeType
       "smooth" anti-aliasing rasteriser (src/smooth/ftgrays.c).

    Examples
    --------
    A 1 x 1 mm square at half-pixel offsets on a 1 mm grid covers quarter pixels:

    >>> sq = np.array([[0.5, 0.5], [1.5, 0.5], [1.5, 1.5], [0.5, 1.5]])
    >>> coverage([sq], shape=(3, 3), mm_per_px=1.0)
    array([[0.  , 0.  , 0.  ],
           [0.25, 0.25, 0.  ],
           [0.25, 0.25, 0.  ]])
    """
    h_px, w_px = _shape_pair(shape)
    sx_mm, sy_mm = _positive_pair(mm_per_px, "mm_per_px")
    rings_px = []
    for ring in rings_mm:
        arr = _ring_array(ring)
        # scan frame (mm, y up) -> raster (px, v down): the flip reverses the
        # orientation, which the accumulation's sign convention absorbs.
        rings_px.append(np.column_stack([arr[:, 0] / sx_mm, h_px - arr[:, 1] / sy_mm]))
    out = np.zeros((h_px, w_px), dtype=np.float64)
    if not rings_px:
        return out
    local = _accumulate(rings_px, h_px, w_px)
    if local is not None:
        acc, r0, c0 = local
        out[r0 : r0 + acc.shape[0], c0 : c0 + acc.shape[1]] = acc
    if clip:
        np.clip(out, 0.0, 1.0, out=out)
    return out


# --------------------------------------------------------------------------------------
# transfer functions
# --------------------------------------------------------------------------------------


def srgb_encode(linear: np.ndarray | float) -> np.ndarray:
    """sRGB transfer function: linear light in [0, 1] -> encoded value in [0, 1].

    ``12.92 L`` for ``L <= 0.0031308``, else ``1.055 L^(1/2.4) - 0.055``.

    References
    ----------
    .. [1] IEC 61966-2-1:1999, Multimedia systems and equipment - Colour
       measurement and management - Part 2-1: Default RGB colour space - sRGB.
    """
    lin = np.clip(np.asarray(linear, dtype=np.float64), 0.0, 1.0)
    return np.where(lin <= 0.0031308, 12.92 * lin, 1.055 * np.power(lin, 1.0 / 2.4) - 0.055)


def srgb_decode(encoded: np.ndarray | float) -> np.ndarray:
    """Inverse sRGB transfer function: encoded value in [0, 1] -> linear light.

    ``V / 12.92`` for ``V <= 0.04045``, else ``((V + 0.055) / 1.055)^2.4``.

    References
    ----------
    .. [1] IEC 61966-2-1:1999, Multimedia systems and equipment - Colour
       measurement and management - Part 2-1: Default RGB colour space - sRGB.
    """
    enc = np.clip(np.asarray(encoded, dtype=np.float64), 0.0, 1.0)
    return np.where(enc <= 0.04045, enc / 12.92, np.power((enc + 0.055) / 1.055, 2.4))
