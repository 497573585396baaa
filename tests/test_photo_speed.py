"""The photo path's shortcuts give the very values of the plain computations they replace.

Check values come from the reference libraries run on the whole data: OpenCV's median filter
and numpy's log on every pixel's float level, numpy's ``array_equal`` of the whole colour planes,
OpenCV's colour decode of a grey file.
"""

from __future__ import annotations

import dataclasses

import cv2
import numpy as np
from PIL import Image

from scanmass.load.decode import load_image
from scanmass.pipeline import photo_checks
from scanmass.pipeline.photo_checks import GREY_CHECK_ROWS, _filled_box, _grey_planes, _photo_colour
from scanmass.scale.planemap import PlaneMap, project
from scanmass.segment.brightface import grain_residual


def _float_residual(lin: np.ndarray) -> np.ndarray:
    # the plain computation: log of every pixel's level, less OpenCV's 5 px median filter of it
    log = np.log(np.maximum(lin, 1e-3)).astype(np.float32)
    return np.asarray(log - cv2.medianBlur(log, 5), np.float32)


def test_grain_residual_from_codes_is_the_float_path_to_the_bit() -> None:
    rng = np.random.default_rng(11)
    for case in range(300):
        h, w = (int(v) for v in rng.integers(1, 70, 2))
        if case % 4 == 0:  # 16-bit codes and table
            codes = rng.integers(0, 65536, (h, w)).astype(np.uint16)
            table = (np.linspace(0.0, 1.0, 65536) ** rng.uniform(1.0, 3.0)).astype(np.float32)
        else:
            codes = rng.integers(0, 256, (h, w)).astype(np.uint8)
            if case % 3 == 0:  # a smooth face with grain: many equal neighbours, ties in every window
                base = cv2.GaussianBlur(codes, (0, 0), 3.0).astype(int) + rng.integers(-2, 3, (h, w))
                codes = np.clip(base, 0, 255).astype(np.uint8)
            table = (np.linspace(0.0, 1.0, 256) ** rng.uniform(1.0, 3.0)).astype(np.float32)
            table[: int(rng.integers(0, 6))] = 0.0  # dark codes below the log's floor: equal logs
            if case % 7 == 0:
                table = rng.uniform(0.0, 1.0, 256).astype(np.float32)  # not monotone: the float path
            if case % 5 == 0:
                table = table.astype(np.float64)  # a float64 table: its lin is float64 too
        if case % 6 == 0 and w > 2:
            codes = codes[:, 1:-1]  # a view with the parent's row stride, as a crop of the photo
        lin = table[codes]
        got = grain_residual(lin, (codes, table))
        assert got.dtype == np.float32
        assert np.array_equal(got.view(np.uint32), _float_residual(lin).view(np.uint32)), case


def test_grey_planes_is_array_equal_of_the_planes() -> None:
    rng = np.random.default_rng(5)
    for case in range(200):
        h, w = int(rng.integers(1, 3 * GREY_CHECK_ROWS)), int(rng.integers(1, 40))
        grey = rng.integers(0, 256, (h, w)).astype(np.uint8)
        colour = np.dstack([grey, grey, grey])
        if case % 2:  # one pixel off in one plane, anywhere (often in a late band)
            y, x, c = int(rng.integers(h)), int(rng.integers(w)), int(rng.integers(3))
            colour[y, x, c] ^= np.uint8(1 + rng.integers(255))
        expected = np.array_equal(colour[..., 0], colour[..., 1]) and np.array_equal(colour[..., 1], colour[..., 2])
        assert _grey_planes(colour) == expected, case


def test_a_grey_file_is_not_decoded_in_colour(tmp_path, monkeypatch) -> None:
    rng = np.random.default_rng(3)
    grey = rng.integers(0, 256, (40, 60)).astype(np.uint8)
    for name in ("grey.jpg", "grey.png"):
        path = tmp_path / name
        Image.fromarray(grey).save(path)
        image = load_image(path)
        assert image.mode == "L"
        # OpenCV decodes a one-band file in colour as three equal planes: a grey photo, no colour
        colour = cv2.imread(str(path), cv2.IMREAD_COLOR)
        assert np.array_equal(colour[..., 0], colour[..., 1]) and np.array_equal(colour[..., 1], colour[..., 2])
        calls: list[str] = []
        monkeypatch.setattr(photo_checks.cv2, "imread", lambda p, flags=None: calls.append(p))
        assert _photo_colour(image) is None
        assert calls == []
        monkeypatch.undo()
    tinted = tmp_path / "tinted.png"
    Image.fromarray(np.dstack([grey, grey, grey // 2])).save(tinted)
    assert np.array_equal(_photo_colour(load_image(tinted)), cv2.imread(str(tinted), cv2.IMREAD_COLOR))


def test_filled_box_is_the_whole_images_fill() -> None:
    # reference: OpenCV's fillPoly of the polygon on the whole image, cut to the box, and nothing beyond it
    rng = np.random.default_rng(9)
    for case in range(300):
        h, w = (int(v) for v in rng.integers(5, 80, 2))
        n = int(rng.integers(3, 7))
        poly = np.column_stack([rng.uniform(-30, w + 30, n), rng.uniform(-30, h + 30, n)])
        if case % 2:
            poly = cv2.convexHull(poly.astype(np.float32)).reshape(-1, 2).astype(float)  # a clear area's shape
        full = np.zeros((h, w), np.uint8)
        cv2.fillPoly(full, [np.round(poly).astype(np.int32)], 1)
        (x0, y0, x1, y1), mask = _filled_box(poly, (h, w))
        assert np.array_equal(full[y0:y1, x0:x1], mask), case
        assert int(mask.sum()) == int(full.sum()), case


def test_plane_map_to_px_is_the_inverse_matrix_each_time() -> None:
    # reference: numpy's inverse of the map's own matrix, made afresh for every call (as before the cache)
    rng = np.random.default_rng(2)
    matrix = np.array([[0.1, 0.004, -3.0], [0.002, -0.1, 250.0], [1e-5, -2e-5, 1.0]])
    plane = PlaneMap(matrix, "mat", 0.005)
    for _ in range(3):
        pts = rng.uniform(-50.0, 300.0, (20, 2))
        assert np.array_equal(plane.to_px(pts), project(np.linalg.inv(matrix), pts))
    moved = dataclasses.replace(plane, matrix=matrix * [[2.0], [2.0], [1.0]])  # another map: its own inverse
    pts = rng.uniform(-50.0, 300.0, (5, 2))
    assert np.array_equal(moved.to_px(pts), project(np.linalg.inv(moved.matrix), pts))
    assert not np.array_equal(moved.to_px(pts), plane.to_px(pts))
