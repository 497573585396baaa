"""segment.contours: level rings equal to scikit-image's find_contours, bit for bit.

Reference library: ``skimage.measure.find_contours(image, level, fully_connected="high")``
(scikit-image's marching squares and its assembly of segments into rings). Every check
compares the whole list: the same rings in the same order, each with the same points
(exact float64 equality), the same starting point and direction.
"""

from __future__ import annotations

import cv2
import numpy as np
import pytest
from skimage.measure import find_contours

import scanmass.segment.contours as contours
from scanmass.segment.contours import level_rings


def _same(got: list[np.ndarray], ref: list[np.ndarray]) -> bool:
    return len(got) == len(ref) and all(
        g.dtype == r.dtype and g.shape == r.shape and np.array_equal(g, r) for g, r in zip(got, ref)
    )


def _blobs(rng: np.random.Generator, shape: tuple[int, int], dtype: type = np.float32) -> np.ndarray:
    """Blurred random blobs with a zero frame: every ring closes (rings nested in rings too)."""
    img = cv2.GaussianBlur((rng.random(shape) > 0.6).astype(np.float32), (0, 0), 1.5).astype(dtype)
    img[0], img[-1], img[:, 0], img[:, -1] = 0, 0, 0, 0
    return img


@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_closed_rings_equal_scikit_image_and_take_the_fast_path(dtype, monkeypatch):
    rng = np.random.default_rng(7)
    cases = [
        (_blobs(rng, (int(h), int(w)), dtype), float(rng.uniform(0.05, 0.95))) for h, w in rng.integers(3, 300, (40, 2))
    ]
    # a part-like crop: a disc with a hole, blurred, with its frame
    yy, xx = np.mgrid[:400, :500]
    r = np.hypot(yy - 190.3, xx - 260.7)
    disc = ((r < 150) & (r > 40)).astype(np.float32)
    cases.append((cv2.GaussianBlur(disc, (0, 0), 1.2), 0.5))
    # pixels at exactly float32(0.3), the level just below and just above it (float64): the
    # float32 pixels are compared as float64, as scikit-image does
    steps = np.pad(np.round(cv2.GaussianBlur(disc, (0, 0), 3.0) * 10).astype(np.float32) / np.float32(10), 1)
    assert np.any(steps == np.float32(0.3))
    cases += [(steps, float(np.float32(0.3)) - 1e-12), (steps, float(np.float32(0.3)) + 1e-12)]
    refs = [find_contours(img, level, fully_connected="high") for img, level in cases]

    def refuse(*args, **kwargs):
        raise AssertionError("fell back to scikit-image")

    monkeypatch.setattr(contours, "find_contours", refuse)  # framed images never need it
    for (img, level), ref in zip(cases, refs):
        if ref:
            assert _same(level_rings(img, level), ref)


def test_other_images_equal_scikit_image():
    # open chains at the border, corners equal to the level, NaN pixels, points where two
    # rings meet (a checkerboard's saddles): the fast path hands these to scikit-image
    rng = np.random.default_rng(8)
    for k in range(120):
        h, w = (int(v) for v in rng.integers(2, 60, 2))
        kind = k % 4
        if kind == 0:
            img = rng.random((h, w))
        elif kind == 1:
            img = rng.integers(0, 5, (h, w)).astype(np.float32) / 4  # many corners at 0.25, 0.5, 0.75
        elif kind == 2:
            img = rng.random((h, w)).astype(np.float32)
            img[rng.random((h, w)) < 0.05] = np.nan
        else:
            img = np.pad(rng.integers(0, 2, (h, w)).astype(np.float32), 1)
        for level in (0.5, 0.25, float(rng.random())):
            assert _same(level_rings(img, level), find_contours(img, level, fully_connected="high"))


def test_no_crossing_gives_no_ring():
    assert level_rings(np.zeros((5, 6), np.float32), 0.5) == []
    assert level_rings(np.ones((5, 6)), 0.5) == find_contours(np.ones((5, 6)), 0.5, fully_connected="high") == []
