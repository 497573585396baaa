"""Small numeric helpers shared by several stages (layer 0: no scanmass imports).

:func:`combine` is the one root-sum-square of independent standard uncertainties;
:func:`otsu_threshold` the one Otsu threshold (used for coarse detection by the segment
stage and for finding a paper sheet by the scale stage).
"""

from __future__ import annotations

import math
import warnings

import cv2
import numpy as np

__all__ = [
    "nonzero_rc",
    "nonzero_every",
    "flat_rc",
    "combine",
    "otsu_threshold",
    "sample_points",
    "nanmedian_rows",
    "median_1d",
    "code_counts",
    "code_percentile",
    "code_percentiles",
    "code_median",
]

#: Points per row of the map :func:`sample_points` hands to ``cv2.remap``.
SAMPLE_ROW = 256


def combine(*terms: float) -> float:
    """Root-sum-square of independent standard uncertainties (GUM 5.1.2, unit sensitivities).

    A term that is not known never vanishes from the sum: a NaN term gives NaN and an
    infinite one gives infinity.

    References
    ----------
    .. [1] JCGM 100:2008 (GUM), section 5.1.2, equation (10) with unit sensitivity
       coefficients.

    Examples
    --------
    >>> combine(3.0, 4.0)
    5.0
    >>> combine(1.0, float("inf")), combine()
    (inf, 0.0)
    """
    return float(math.sqrt(sum(t * t for t in terms)))


def otsu_threshold(values: np.ndarray) -> float:
    """Otsu's threshold of float values (256 bins over their range).

    Same result as ``skimage.filters.threshold_otsu(values, nbins=256)``; kept here
    because importing ``skimage.filters`` pulls in scipy and costs ~0.25 s per process.

    References
    ----------
    .. [1] N. Otsu, "A threshold selection method from gray-level histograms",
       IEEE Trans. SMC 9(1), 62-66, 1979.

    Examples
    --------
    >>> otsu_threshold(np.array([0.1, 0.1, 0.1, 0.9, 0.9]))  # the centre of the lower level's bin
    0.1015625
    """
    values = np.asarray(values).ravel()  # float32 stays float32: the histogram's bins depend on it
    lo, hi = float(values.min()), float(values.max())
    if hi <= lo:
        return lo
    hist, edges = np.histogram(values, bins=256, range=(lo, hi))
    hist = hist.astype(float)
    centres = 0.5 * (edges[:-1] + edges[1:])
    w0 = np.cumsum(hist)
    w1 = w0[-1] - w0
    m0 = np.cumsum(hist * centres)
    mu0 = m0 / np.maximum(w0, 1e-12)
    mu1 = (m0[-1] - m0) / np.maximum(w1, 1e-12)
    between = w0 * w1 * (mu0 - mu1) ** 2
    return float(centres[int(np.argmax(between))])


def nonzero_rc(mask: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Row and column indices of a 2-D mask's true pixels, in row-major order: ``np.nonzero(mask)``.

    The same arrays, from one flat search, a floor division and a product (several times
    faster than the two-dimensional search on large masks, and than ``np.divmod``).

    Examples
    --------
    >>> rows, cols = nonzero_rc(np.array([[0, 1], [1, 1]], bool))
    >>> rows.tolist(), cols.tolist()
    ([0, 1, 1], [1, 0, 1])
    """
    return flat_rc(np.flatnonzero(mask), mask.shape[1])


def nonzero_every(mask: np.ndarray, step: int, rows_per_block: int = 256) -> tuple[np.ndarray, np.ndarray]:
    """Every ``step``-th true pixel of a 2-D mask in row-major order: ``nonzero_rc(mask)`` sliced ``[::step]``.

    The same arrays, found a block of rows at a time, so that the indices of every true
    pixel (8 bytes each) are never held at once.

    Examples
    --------
    >>> m = np.array([[1, 1, 0], [1, 1, 1], [0, 1, 1]], bool)
    >>> [a.tolist() for a in nonzero_every(m, 3, rows_per_block=1)]
    [[0, 1, 2], [0, 1, 2]]
    >>> [a[::3].tolist() for a in nonzero_rc(m)]
    [[0, 1, 2], [0, 1, 2]]
    """
    width = mask.shape[1]
    rows_out: list[np.ndarray] = []
    cols_out: list[np.ndarray] = []
    seen = 0  # true pixels before the block
    for start in range(0, mask.shape[0], rows_per_block):
        flat = np.flatnonzero(mask[start : start + rows_per_block])
        picked = flat[(-seen) % step :: step]
        seen += flat.size
        r, c = flat_rc(picked, width)
        rows_out.append(r + start)
        cols_out.append(c)
    if not rows_out:
        return np.zeros(0, np.intp), np.zeros(0, np.intp)
    return np.concatenate(rows_out), np.concatenate(cols_out)


def flat_rc(flat: np.ndarray, width: int) -> tuple[np.ndarray, np.ndarray]:
    """Row and column of non-negative flat (row-major) indices into rows ``width`` long: ``np.divmod(flat, width)``.

    Examples
    --------
    >>> rows, cols = flat_rc(np.array([1, 2, 3]), 2)
    >>> rows.tolist(), cols.tolist()
    ([0, 1, 1], [1, 0, 1])
    """
    rows = flat // width
    cols = flat - rows * width
    return rows, cols


def sample_points(
    image: np.ndarray, x_px: np.ndarray, y_px: np.ndarray, interpolation: int, border: int = cv2.BORDER_REPLICATE
) -> np.ndarray:
    """``cv2.remap`` of a single-channel image at scattered points (x, y px; any equal shapes).

    The points are laid out in rows of :data:`SAMPLE_ROW` (the last one padded) rather than
    one column: ``cv2.remap`` works through its destination in tiles of about a thousand
    pixels, but in a single column a tile holds 32, and the per-tile set-up then costs
    ten times the bicubic interpolation itself. Each value depends on its own point only
    (the coordinates are rounded to the same fixed-point grid either way), so the layout
    changes no value. Returns the image's dtype, in the points' shape.
    """
    shape = np.shape(x_px)
    map_x = np.asarray(x_px, dtype=np.float32).ravel()
    map_y = np.asarray(y_px, dtype=np.float32).ravel()
    n = map_x.size
    if n == 0:
        return np.zeros(shape, dtype=image.dtype)
    width = min(n, SAMPLE_ROW)
    rows = -(-n // width)
    if rows * width != n:
        map_x = np.concatenate([map_x, np.zeros(rows * width - n, np.float32)])
        map_y = np.concatenate([map_y, np.zeros(rows * width - n, np.float32)])
    out = cv2.remap(image, map_x.reshape(rows, width), map_y.reshape(rows, width), interpolation, borderMode=border)
    return out.ravel()[:n].reshape(shape)


def nanmedian_rows(a: np.ndarray) -> np.ndarray:
    """``np.nanmedian(a, axis=1)`` of a 2-D float array, NaN for an all-NaN row (without the warning).

    Each row sorted (NaN last, as numpy sorts), then the middle one of its ``n`` numbers,
    or the mean of the middle two, as ``(0 + low + high) / 2`` in the array's own precision:
    the arithmetic of numpy's median of a short row, so the values are the same, without
    the masked-array machinery numpy uses for rows shorter than 600 (longer rows and
    empty ones are numpy's own).

    Examples
    --------
    >>> nanmedian_rows(np.array([[1.0, np.nan, 3.0, 2.0], [4.0, 1.0, np.nan, np.nan], [np.nan] * 4]))
    array([2. , 2.5, nan])
    """
    a = np.asarray(a)
    if a.ndim != 2 or a.dtype.kind != "f":
        raise ValueError("nanmedian_rows takes a 2-D float array")
    if a.shape[1] == 0 or a.shape[1] >= 600:  # numpy's other path (0 + low + high does not hold there for -0)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            return np.nanmedian(a, axis=1)
    ordered = np.sort(a, axis=1)
    n = a.shape[1] - np.count_nonzero(np.isnan(a), axis=1)
    rows = np.arange(a.shape[0])
    low = ordered[rows, np.maximum(n - 1, 0) // 2]  # equal to high for an odd count: (x + x) / 2 is x
    high = ordered[rows, n // 2]  # n // 2 < the row's length whenever it has one
    # numpy sums the pair from zero: 0 + low + high (the same for every value but -0, which becomes +0)
    with np.errstate(invalid="ignore"):  # -inf and inf: NaN, as numpy gives
        out = np.true_divide(np.add(np.add(a.dtype.type(0), low), high), a.dtype.type(2))
    out[n == 0] = np.nan
    return out


def robust_sigma(values: np.ndarray, centre: float | np.ndarray | None = None) -> float:
    """The standard deviation of normal noise estimated from the median absolute deviation.

    1.4826 times the median of the absolute deviations from ``centre`` (1 / Phi^-1(3/4): common
    practice for a robust sigma).

    Parameters
    ----------
    values : ndarray
        The samples (any shape).
    centre : float or ndarray, optional
        What the deviations are taken from: the samples' median when not given; 0 for residuals
        that scatter about zero by construction, a centre the caller has already read, or a
        per-sample centre (a local level) of the samples' shape.

    Examples
    --------
    >>> robust_sigma(np.array([1.0, 2.0, 3.0, 4.0, 100.0]))
    1.4826
    >>> robust_sigma(np.array([-2.0, 1.0, 3.0]), centre=0.0)
    2.9652
    """
    if centre is None:
        return 1.4826 * float(np.median(np.abs(values - np.median(values))))
    return 1.4826 * float(np.median(np.abs(values - centre)))


def median_1d(values: np.ndarray) -> np.float64:
    """``np.median`` of a short 1-D float64 array, without its general-axis machinery.

    The middle one or two of the values by ``np.partition``, averaged as numpy's mean does
    it (the sum started from 0, so -0 becomes +0, then divided by the count): the same
    float. Arrays with a NaN, empty ones and other dtypes or shapes are numpy's own.

    Examples
    --------
    >>> median_1d(np.array([3.0, 1.0, 2.0, 10.0])), median_1d(np.array([-0.0]))
    (np.float64(2.5), np.float64(0.0))
    """
    x = np.asarray(values)
    n = x.size
    if x.ndim != 1 or n == 0 or x.dtype != np.float64 or np.isnan(x).any():
        return np.float64(np.median(x))
    k = n // 2
    if n % 2:
        return np.float64(0.0) + np.partition(x, k)[k]
    part = np.partition(x, [k - 1, k])
    return (np.float64(0.0) + part[k - 1] + part[k]) / np.float64(2.0)


def code_counts(codes: np.ndarray, mask: np.ndarray | None, size: int) -> np.ndarray:
    """How many pixels of ``codes`` (within ``mask``: bool, or uint8 with nonzero selected) hold each
    code 0 .. ``size`` - 1, as int64.

    8-bit planes are counted by ``cv2.calcHist`` in bands of fewer than 2**24 px (its float32
    counts are then exact integers); other planes by ``np.bincount``.
    """
    mask8 = None if mask is None else (mask.view(np.uint8) if mask.dtype == bool else mask)
    if codes.dtype == np.uint8 and size == 256 and codes.ndim == 2 and codes.shape[1] > 0:
        rows = max(1, (1 << 23) // codes.shape[1])
        counts = np.zeros(256, np.int64)
        for r in range(0, codes.shape[0], rows):
            part = None if mask8 is None else mask8[r : r + rows]
            hist = cv2.calcHist([codes[r : r + rows]], [0], part, [256], [0, 256])
            counts += hist.ravel().astype(np.int64)
        return counts
    picked = codes if mask8 is None else codes[mask8.astype(bool)]
    return np.bincount(picked.ravel(), minlength=size)


def _order_stats(counts: np.ndarray, lut: np.ndarray, ranks: list[int]) -> list:
    """The values of ``lut`` at the given 0-based ranks of the selection the code ``counts`` describe."""
    order = np.argsort(lut, kind="stable")
    cum = np.cumsum(counts[order])
    return [lut[order[int(np.searchsorted(cum, k, side="right"))]] for k in ranks]


def code_percentile(codes: np.ndarray, mask: np.ndarray | None, lut: np.ndarray, q: float) -> float:
    """``float(np.percentile(lut[codes][mask], q))`` (linear), read from the codes' histogram, to the bit.

    The two order statistics the percentile interpolates between are found from the counts of
    each code within ``mask`` (None: every pixel); their interpolation is numpy's own (a
    two-sample quantile at the same fraction, which it computes exactly so). Tables with a NaN
    and empty selections are numpy's own answer.
    """
    lut = np.asarray(lut)
    counts = code_counts(codes, mask, len(lut))
    n = int(counts.sum())
    if n == 0 or np.isnan(lut).any():
        picked = codes if mask is None else codes[mask.astype(bool)]
        return float(np.percentile(lut[picked], q))
    virtual = (n - 1) * np.true_divide(q, 100)
    below = int(math.floor(virtual))
    low, high = _order_stats(counts, lut, [below, min(below + 1, n - 1)])
    return float(np.quantile(np.array([low, high], lut.dtype), float(virtual - below)))


def code_percentiles(codes: np.ndarray, mask: np.ndarray | None, lut: np.ndarray, qs: list[float]) -> np.ndarray:
    """``np.percentile(lut[codes][mask], qs)`` for a list of percentiles, from one histogram of the codes.

    As :func:`code_percentile`, each from its two order statistics, interpolated by numpy at the
    same fraction given as an array (numpy then interpolates in float64, as it does for a list).
    """
    lut = np.asarray(lut)
    counts = code_counts(codes, mask, len(lut))
    n = int(counts.sum())
    if n == 0 or np.isnan(lut).any():
        picked = codes if mask is None else codes[mask.astype(bool)]
        return np.percentile(lut[picked], qs)
    out = []
    for q in qs:
        virtual = (n - 1) * np.true_divide(q, 100)
        below = int(math.floor(virtual))
        low, high = _order_stats(counts, lut, [below, min(below + 1, n - 1)])
        out.append(np.quantile(np.array([low, high], lut.dtype), np.array([virtual - below]))[0])
    return np.array(out)


def code_median(codes: np.ndarray, mask: np.ndarray | None, lut: np.ndarray) -> float:
    """``float(np.median(lut[codes][mask]))``, read from the codes' histogram, to the bit.

    The middle one or two values are found from the counts; numpy's median of just those (in
    the table's own type) averages them as it averages the middle of the whole selection.
    Tables with a NaN and empty selections are numpy's own answer.
    """
    lut = np.asarray(lut)
    counts = code_counts(codes, mask, len(lut))
    n = int(counts.sum())
    if n == 0 or np.isnan(lut).any():
        picked = codes if mask is None else codes[mask.astype(bool)]
        return float(np.median(lut[picked]))
    k = n // 2
    middle = _order_stats(counts, lut, [k - 1, k] if n % 2 == 0 else [k])
    return float(np.median(np.array(middle, lut.dtype)))
