"""Fuzzing the whole measuring path with random small images.

Whatever array, dtype, shape or DPI comes in, :func:`scanmass.measure` returns a
Measurement or raises a one-line ScanmassError; never another exception.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from scanmass import measure
from scanmass.errors import ScanmassError
from scanmass.measurement import Measurement

DTYPES = [np.uint8, np.uint16, np.float32, np.float64, bool]


@st.composite
def images(draw):
    dtype = draw(st.sampled_from(DTYPES))
    h = draw(st.integers(1, 48))
    w = draw(st.integers(1, 48))
    channels = draw(st.sampled_from([None, 1, 3, 4]))
    shape = (h, w) if channels is None else (h, w, channels)
    kind = draw(st.sampled_from(["noise", "blocks", "flat"]))
    rng = np.random.default_rng(draw(st.integers(0, 2**31 - 1)))
    if kind == "noise":
        base = rng.random(shape)
    elif kind == "flat":
        base = np.full(shape, draw(st.floats(0, 1)))
    else:
        base = np.full(shape, draw(st.floats(0, 1)))
        r0, c0 = rng.integers(0, max(1, h)), rng.integers(0, max(1, w))
        base[r0 : r0 + rng.integers(1, h + 1), c0 : c0 + rng.integers(1, w + 1)] = draw(st.floats(0, 1))
    if dtype is bool:
        return base > 0.5
    if np.issubdtype(dtype, np.integer):
        return (base * np.iinfo(dtype).max).astype(dtype)
    values = base.astype(dtype)
    if draw(st.booleans()):  # sprinkle non-finite or out-of-range values
        values.flat[0] = draw(st.sampled_from([np.nan, np.inf, -1.0, 2.0]))
    return values


dpis = st.one_of(st.none(), st.floats(allow_nan=True, allow_infinity=True, width=32), st.integers(-10, 5000))


@pytest.mark.slow
@settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(img=images(), dpi=dpis, min_area=st.sampled_from([0.0, 0.01, 2.0]))
def test_random_images_give_result_or_one_line_error(img, dpi, min_area):
    try:
        result = measure(img, dpi=dpi, min_area_mm2=min_area)
    except ScanmassError as exc:
        text = str(exc)
        assert text and "\n" not in text
        return
    assert isinstance(result, Measurement)
    for part in result.parts:
        assert part.area_mm2 > 0 and math.isfinite(part.area_mm2)
        assert all(math.isfinite(v) for v in part.centroid_mm)
    result.to_json()  # always serialisable (no NaN leaks into JSON)


@pytest.mark.slow
@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(img=images(), dpi=st.sampled_from([25.4, 100.0, 300.0, 1200.0]), keep_cut=st.booleans())
def test_random_images_with_valid_scale_reach_the_segmenter(img, dpi, keep_cut):
    try:
        result = measure(img, dpi=dpi, min_area_mm2=0.0, keep_cut=keep_cut)
    except ScanmassError as exc:
        assert "\n" not in str(exc)
        return
    for part in result.parts:
        assert (
            part.area_mm2 > 0 and math.isfinite(part.ixx_mm4) and part.i1_mm4 >= part.i2_mm4 - 1e-9 * abs(part.i1_mm4)
        )
    result.to_json()
