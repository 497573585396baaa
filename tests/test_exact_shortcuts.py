"""The photo rules' shortcuts give the very values of the plain computations they replace.

Check values come from reference libraries run on the whole data: numpy's ``percentile`` on
every selected level, OpenCV's ``convexHull`` on every pixel of a mask.
"""

from __future__ import annotations

import cv2
import numpy as np

from scanmass.pipeline.photo_checks import _code_percentile
from scanmass.segment.brightface import _rim_points


def test_code_percentile_is_numpys_to_the_bit() -> None:
    rng = np.random.default_rng(7)
    for case in range(400):
        h, w = (int(v) for v in rng.integers(1, 50, 2))
        grey = rng.integers(0, 256, (h, w)).astype(np.uint8)
        if case % 3 == 0:
            grey = (grey // 37 * 37).astype(np.uint8)  # few codes: many ties
        lut = (np.linspace(0.0, 1.0, 256) ** rng.uniform(1.0, 3.0)).astype(np.float32)
        if case % 5 == 0:
            lut = rng.uniform(0.0, 1.0, 256).astype(np.float32)  # not monotone
        mask = rng.uniform(size=(h, w)) < rng.uniform(0.01, 1.0)
        if not mask.any():
            continue
        for q in (25, 50, 90, 99):
            # reference: numpy's percentile (linear) of the levels themselves
            assert _code_percentile(grey, mask, lut, q) == float(np.percentile(lut[grey][mask], q))


def test_code_percentile_over_bands_of_a_large_image() -> None:
    rng = np.random.default_rng(11)
    grey = rng.integers(0, 256, (3000, 3000)).astype(np.uint8)  # counted in two bands
    lut = (np.linspace(0.0, 1.0, 256) ** 2.2).astype(np.float32)
    mask = np.zeros(grey.shape, np.uint8)
    cv2.fillPoly(mask, [np.array([[100, 50], [2900, 300], [2600, 2950], [200, 2700]], np.int32)], 1)
    # reference: numpy's percentile (linear) of the levels themselves
    assert _code_percentile(grey, mask, lut, 90) == float(np.percentile(lut[grey][mask.astype(bool)], 90))


def test_rim_points_have_the_whole_masks_hull() -> None:
    rng = np.random.default_rng(3)
    for _ in range(300):
        mask = np.zeros((60, 70), np.uint8)
        for _ in range(int(rng.integers(1, 5))):
            centre = tuple(int(v) for v in rng.integers(-5, 70, 2))
            cv2.circle(mask, centre, int(rng.integers(1, 25)), 1, -1)
        if rng.uniform() < 0.5:
            cv2.fillPoly(mask, [rng.integers(-10, 80, (int(rng.integers(3, 8)), 2)).astype(np.int32)], 1)
        if rng.uniform() < 0.3:
            mask[rng.uniform(size=mask.shape) < 0.05] ^= 1
        if not mask.any():
            continue
        # reference: OpenCV's convex hull of every pixel of the mask
        assert np.array_equal(cv2.convexHull(_rim_points(mask)), cv2.convexHull(cv2.findNonZero(mask)))
