"""Layer-0 numeric helpers: the one root-sum-square and the one Otsu threshold.

Check values: 3-4-5 (Pythagoras); IEEE 754 arithmetic for infinite and NaN terms (an
unknown or unbounded term must not vanish from a combined uncertainty, GUM 5.1.2 sums
every term); scikit-image's threshold_otsu with 256 bins (reference library).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from skimage.filters import threshold_otsu

from scanmass import uncertainty
from scanmass.numeric import combine, otsu_threshold


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
