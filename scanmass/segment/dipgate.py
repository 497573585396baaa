"""A cheap, provable pre-test for :func:`scanmass.segment.thin.closed_slots`.

``closed_slots`` normalises a crop around a part between two fitted level surfaces, the
background ``B`` and the part's level ``F``, ``n = (L - B) / (F - B)`` for the linear
light ``L`` of every pixel, and looks for *dips*: pixels away from the rings where
``1 - n`` (inside the part) or ``n`` (outside it) exceeds a limit ``t``. Building the two
full-size surfaces and the normalised crop is most of its cost, and on almost every part
nothing is found.

For ``0 < t < 1`` each dip condition is a threshold on ``L`` that is a positive
combination of ``B`` and ``F``; for a dark part (``F < B`` everywhere)

    inside:  1 - n > t  <=>  L > t B + (1 - t) F      >= t B_min + (1 - t) F_min
    outside: n > t      <=>  L < (1 - t) B + t F      <= (1 - t) B_max + t F_max

and mirrored for a bright part. The surfaces ``f(r, c) = f(r, 0) + f(0, c) - f(0, 0) +
k r c`` (quadratics, as ``closed_slots`` builds them) are bounded over the crop from their
two 1-D cuts and the corners of ``k r c``. A pixel whose stored code cannot pass the
bounding threshold (with a margin far above float32 rounding) cannot be a dip; when no
pixel of the searched regions can, ``closed_slots`` can find nothing and the surfaces
are not built. Otherwise (or when the bounds do not separate the levels) the full search
runs unchanged, so the pre-test never changes a result, only skips work.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import cv2
import numpy as np

from scanmass.load.decode import lookup

__all__ = ["surface_bounds", "dips_possible", "WindowRegion"]

#: Margin (linear light) on every threshold: far above the float32 rounding of the
#: normalised values (~1e-7; the surfaces' own rounding is in their bounds), so that the
#: test stays a superset.
MARGIN_LINEAR = 1e-4


@dataclass(frozen=True)
class WindowRegion:
    """A region of the crop given in a window of it: ``inside`` over ``window``, every pixel beyond it ``beyond``."""

    window: tuple[slice, slice]
    inside: np.ndarray
    beyond: bool


def surface_bounds(fit: Callable[..., np.ndarray], shape: tuple[int, ...]) -> tuple[float, float]:
    """Lower and upper bounds of a quadratic surface (function of row, col) over every pixel of ``shape``.

    ``f(r, c) = f(r, 0) + (f(0, c) - f(0, 0)) + k r c``: each term's extremes over the
    grid, added (the bilinear term's lie at the corners), and widened by a few float32
    rounding steps of the terms' sizes, so that they also hold the float32 grid that
    :func:`scanmass.segment.thin._on_grid` builds from the same terms.

    Examples
    --------
    >>> f = lambda r, c: 1.0 + 0.01 * r - 0.02 * c + 1e-4 * r * c + 1e-5 * r * r
    >>> lo, hi = surface_bounds(f, (11, 21))
    >>> bool(lo <= 1.0 - 0.4 <= hi), bool(lo <= 1.0 + 0.1 + 1e-3 <= hi)
    (True, True)
    """
    rows = np.arange(shape[0], dtype=float)
    cols = np.arange(shape[1], dtype=float)
    at = fit(np.array([0.0, 1.0, 1.0, 0.0]), np.array([0.0, 0.0, 1.0, 1.0]))
    k = float(at[2] - at[1] - at[3] + at[0])
    along_rows = fit(rows, np.zeros(len(rows)))
    along_cols = fit(np.zeros(len(cols)), cols) - float(at[0])
    corner = k * (shape[0] - 1) * (shape[1] - 1)
    size = float(np.abs(along_rows).max() + np.abs(along_cols).max() + abs(corner))
    slack = 8.0 * float(np.finfo(np.float32).eps) * size
    lo = float(along_rows.min() + along_cols.min() + min(0.0, corner)) - slack
    hi = float(along_rows.max() + along_cols.max() + max(0.0, corner)) + slack
    return lo, hi


def dips_possible(
    codes: np.ndarray,
    table: np.ndarray,
    regions: tuple[np.ndarray | WindowRegion, np.ndarray | WindowRegion],
    bg_fit: Callable[..., np.ndarray],
    fg_fit: Callable[..., np.ndarray],
    limit: float,
) -> bool:
    """Whether any pixel of the inside or outside region may be a dip of :func:`~scanmass.segment.thin.closed_slots`.

    Parameters
    ----------
    codes : (H, W) ndarray
        The crop's stored codes; ``table[codes]`` is its linear light.
    table : ndarray
        The image's lookup table, code -> linear light.
    regions : ((H, W) bool or WindowRegion, (H, W) bool or WindowRegion)
        The pixels searched inside the part (slots) and outside it (walls), each as a
        crop-sized mask or as a :class:`WindowRegion` (the same pixels).
    bg_fit, fg_fit : callable
        The background's and the part's level surfaces, functions of (row, col).
    limit : float
        The share ``t`` above which a pixel is a dip.

    Returns
    -------
    bool
        False only when no pixel of either region can pass its dip condition (then the
        search finds nothing); True otherwise, including whenever the bounds cannot
        decide (levels not separated, ``t`` outside (0, 1)).
    """
    if not 0.0 < limit < 1.0:
        return True
    b_lo, b_hi = surface_bounds(bg_fit, codes.shape)
    f_lo, f_hi = surface_bounds(fg_fit, codes.shape)
    m = MARGIN_LINEAR
    lin = np.asarray(table, dtype=np.float64)
    if f_hi < b_lo - m:  # a dark part everywhere in the crop
        inside_dip = lin > limit * b_lo + (1 - limit) * f_lo - m
        outside_dip = lin < (1 - limit) * b_hi + limit * f_hi + m
    elif f_lo > b_hi + m:  # a bright part
        inside_dip = lin < limit * b_hi + (1 - limit) * f_hi + m
        outside_dip = lin > (1 - limit) * b_lo + limit * f_lo - m
    else:
        return True
    for region, table_dip in zip(regions, (inside_dip, outside_dip)):
        if not table_dip.any():
            continue
        if isinstance(region, WindowRegion):
            interval = _code_interval(table_dip, codes)
            if interval is not None:
                if _interval_met(codes, region, interval):
                    return True
                continue
        tab = table_dip.astype(np.uint8)
        if isinstance(region, WindowRegion):
            if not region.beyond:  # nothing beyond the window: only its codes are read
                may = lookup(tab, codes[region.window])
                if np.any(may.view(bool) & region.inside):
                    return True
                continue
            may = lookup(tab, codes)
            held = may[region.window]
            if np.any(held.view(bool) & region.inside):
                return True
            if cv2.countNonZero(may) > cv2.countNonZero(held):  # a pixel beyond the window may dip
                return True
            continue
        may = lookup(tab, codes)
        if np.any(may.view(bool) & region):
            return True
    return False


def _code_interval(table_dip: np.ndarray, codes: np.ndarray) -> tuple[int, int] | None:
    """The codes that may dip as one run reaching an end of the 8-bit table (``lo, hi``), or None.

    A monotone tone curve (every decoding's) makes each dip condition a threshold on the
    code: the codes that may dip are ``0 .. hi`` or ``lo .. 255``.
    """
    if codes.dtype != np.uint8 or len(table_dip) != 256:
        return None
    idx = np.flatnonzero(table_dip)
    lo, hi = int(idx[0]), int(idx[-1])
    if hi - lo + 1 != idx.size or (lo != 0 and hi != 255):
        return None
    return lo, hi


def _interval_met(codes: np.ndarray, region: WindowRegion, interval: tuple[int, int]) -> bool:
    """Whether a pixel of ``region`` holds a code in ``interval`` (a run from an end of the table).

    From the least and the largest code of the region (``cv2.minMaxLoc`` with the window's
    mask, and of each strip of the crop beyond the window when ``beyond``): the same answer
    as looking every code up, without a table lookup of the crop.
    """
    lo, hi = interval

    def met(values: np.ndarray, mask: np.ndarray | None) -> bool:
        if values.size == 0:
            return False
        least, largest, at, _ = cv2.minMaxLoc(values, mask)
        if at == (-1, -1):  # an empty mask
            return False
        return least <= hi if lo == 0 else largest >= lo

    rows, cols = region.window
    if met(codes[rows, cols], region.inside.view(np.uint8)):
        return True
    if not region.beyond:
        return False
    h, w = codes.shape
    r0, r1 = rows.indices(h)[:2]
    c0, c1 = cols.indices(w)[:2]
    strips = (codes[:r0], codes[r1:], codes[r0:r1, :c0], codes[r0:r1, c1:])
    return any(met(strip, None) for strip in strips)
