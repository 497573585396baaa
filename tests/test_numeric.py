"""Layer-0 numeric helpers: the one root-sum-square and the one Otsu threshold.

Check values: 3-4-5 (Pythagoras); IEEE 754 arithmetic for infinite and NaN terms (an
unknown or unbounded term must not vanish from a combined uncertainty, GUM 5.1.2 sums
every term); scikit-image's threshold_otsu with 256 bins (reference library).
"""

from __future__ import annotations

import math

import cv2
import numpy as np
import pytest
from skimage.filters import threshold_otsu

from scanmass import uncertainty
from scanmass.numeric import SAMPLE_ROW, combine, otsu_threshold, robust_sigma, sample_points


def test_combine_is_root_sum_square():
    assert combine(3.0, 4.0) == 5.0
    assert combine() == 0.0
    assert combine(-3.0, 4.0) == 5.0
    assert uncertainty.combine is combine  # one implementation


@pytest.mark.parametrize("bad", [math.inf, -math.inf])
def test_an_infinite_term_gives_an_infinite_result(bad):
    assert combine(1.0, bad) == math.inf
    assert combine(bad, 0.0, 2.0) == math.inf


def test_a_nan_term_gives_nan_never_zero():
    assert math.isnan(combine(0.0, math.nan))
    assert math.isnan(combine(1.0, math.nan, 2.0))


@pytest.mark.parametrize("dtype", [np.float64, np.float32])
def test_otsu_matches_scikit_image(dtype):
    rng = np.random.default_rng(4)
    values = np.concatenate([rng.normal(0.1, 0.03, 5000), rng.normal(0.7, 0.08, 3000)]).astype(dtype)
    assert otsu_threshold(values) == pytest.approx(threshold_otsu(values, nbins=256), rel=1e-6)
    assert otsu_threshold(np.full(10, 0.4, dtype)) == pytest.approx(0.4)


@pytest.mark.parametrize("interpolation", [cv2.INTER_LINEAR, cv2.INTER_CUBIC, cv2.INTER_NEAREST])
@pytest.mark.parametrize("n", [1, 7, SAMPLE_ROW, SAMPLE_ROW + 1, 5003])
def test_sample_points_equal_a_one_column_remap(interpolation, n):
    # reference library: OpenCV's own cv2.remap with the points as one column of the map
    rng = np.random.default_rng(n)
    image = rng.random((60, 90)).astype(np.float32)
    x = rng.uniform(-3.0, 93.0, n)  # some outside the image: the border rule applies to each alike
    y = rng.uniform(-3.0, 63.0, n)
    column = cv2.remap(
        image,
        x.astype(np.float32)[:, None],
        y.astype(np.float32)[:, None],
        interpolation,
        borderMode=cv2.BORDER_REPLICATE,
    ).ravel()
    got = sample_points(image, x, y, interpolation)
    assert got.dtype == np.float32 and got.shape == (n,)
    assert np.array_equal(got, column)  # bit for bit: the layout of the map changes no value
    grid = sample_points(image, x[: n // 2 * 2].reshape(-1, 2), y[: n // 2 * 2].reshape(-1, 2), interpolation)
    assert np.array_equal(grid.ravel(), column[: n // 2 * 2])  # the points' shape is kept
    assert sample_points(image, x[:0], y[:0], interpolation).shape == (0,)


def test_sample_points_beyond_a_remap_map_limit():
    # cv2.remap refuses a map of 32767 rows or more; rows of SAMPLE_ROW points stay far below it
    image = np.arange(12.0, dtype=np.float32).reshape(3, 4)
    x, y = np.tile([0.0, 3.0], 20000), np.tile([0.0, 2.0], 20000)
    got = sample_points(image, x, y, cv2.INTER_LINEAR)
    assert np.array_equal(got, np.tile(np.float32([0.0, 11.0]), 20000))  # pixel centres: the pixel's own value


@pytest.mark.parametrize("centre", [None, 0.0, 1.5])
def test_robust_sigma_matches_scipy_mad(centre: float | None) -> None:
    """The median absolute deviation scaled to a normal sigma, about the median or a given centre.

    Check value: scipy.stats.median_abs_deviation(scale="normal") (reference library), whose
    scale is 1 / Phi^-1(3/4) = 1.482602...; ours is the common-practice 1.4826, 1.5e-6 apart.
    """
    from scipy.stats import median_abs_deviation

    x = np.random.default_rng(7).normal(1.0, 2.0, 501)
    ref = median_abs_deviation(x, scale="normal", center=np.median if centre is None else (lambda a, axis: centre))
    assert robust_sigma(x, centre) == pytest.approx(float(ref), rel=2e-6)
    # normal noise: the estimate is near the true sigma of 2 (large-sample property of the MAD)
    assert robust_sigma(x) == pytest.approx(2.0, rel=0.15)
