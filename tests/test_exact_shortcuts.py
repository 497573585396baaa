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


def _random_masks(seed: int, count: int):
    """Random part masks on crops of random size: polygons and discs, some with holes, some running off the crop."""
    rng = np.random.default_rng(seed)
    for case in range(count):
        h, w = (int(v) for v in rng.integers(24, 240, 2))
        m = np.zeros((h, w), np.uint8)
        for k in range(int(rng.integers(1, 6))):
            if rng.uniform() < 0.5:
                pts = rng.integers(-20, max(h, w) + 20, (int(rng.integers(3, 9)), 2)).astype(np.int32)
                if case % 2:  # well inside the crop
                    pts = (pts * 0.5 + [w * 0.25, h * 0.25]).astype(np.int32)
                cv2.fillPoly(m, [pts], 1 if k == 0 or rng.uniform() < 0.6 else 0)
            else:
                centre = (int(rng.integers(0, w)), int(rng.integers(0, h)))
                cv2.circle(m, centre, int(rng.integers(3, 70)), 1 if k == 0 or rng.uniform() < 0.6 else 0, -1)
        if case % 7 == 0:
            m[rng.uniform(size=m.shape) < 0.02] ^= 1  # specks and pinholes
        yield case, m, float(rng.uniform(4.0, 26.0))


def test_chamfer_windows_read_every_threshold_as_the_whole_crop() -> None:
    """closed_slots' two chamfer transforms over their windows: the inside map is the whole crop's
    bit for bit, the outside map gives the same answer to every threshold up to the reach (reference:
    OpenCV's transform of the whole crop), on random masks inside, across and filling the crop."""
    from scanmass.segment.thin import chamfer_windows

    smaller = 0
    for case, m, reach in _random_masks(5, 500):
        if case % 50 == 0:
            m[:] = 1 if case % 100 == 0 else 0  # a full crop and an empty one
        inner, outer = chamfer_windows(m, reach)
        smaller += int(m[inner].size < m.size) + int(m[outer].size < m.size)
        whole_inside = cv2.distanceTransform(m, cv2.DIST_L2, 5)
        inside = np.zeros_like(whole_inside)
        inside[inner] = cv2.distanceTransform(m[inner], cv2.DIST_L2, 5)
        assert np.array_equal(inside, whole_inside)
        whole_outside = cv2.distanceTransform(1 - m, cv2.DIST_L2, 5)
        window = cv2.distanceTransform(np.subtract(1, m[outer]), cv2.DIST_L2, 5)
        for level in (0.5, 1.0, 1.4, 3.2, 0.5 * reach, reach - 1.0, reach):
            at_least = np.ones(m.shape, bool)
            at_least[outer] = window >= level
            at_most = np.zeros(m.shape, bool)
            at_most[outer] = window <= level
            if m.any():
                assert np.array_equal(at_least, whole_outside >= level)
                assert np.array_equal(at_most, whole_outside <= level)
    assert smaller > 500  # most windows are smaller than the crop


def _seam_reference(codes, lut, bg, fg, core, seam_level, least) -> int:
    """The seam test as split_touching runs it in full: pieces of at least ``least`` px of the blurred solid."""
    smooth = cv2.LUT(codes, ((lut - bg) / (fg - bg)).astype(np.float32))
    cv2.GaussianBlur(smooth, (0, 0), 0.7, dst=smooth)
    solid = (core.view(bool) & (smooth > seam_level)).view(np.uint8)
    count, comp = cv2.connectedComponents(solid, connectivity=4)
    sizes = np.bincount(comp.ravel(), minlength=count)
    return sum(1 for k in range(1, count) if sizes[k] >= least)


def test_one_solid_piece_screen_agrees_with_the_full_seam_test() -> None:
    """Where the seam test's screen (no blur, blocks of surely solid pixels) says at most one solid piece
    is large, the full test (OpenCV's blur and labelling of the whole crop, the reference) finds at most
    one; random plates with and without a seam, noise and pits, both answers of the screen seen."""
    from scanmass.load.decode import srgb_to_linear
    from scanmass.segment.touching import MIN_LOBE_SHARE, _one_solid_piece

    lut = srgb_to_linear(np.arange(256) / 255.0).astype(np.float32)
    rng = np.random.default_rng(17)
    shown = not_shown = split = 0
    for case in range(160):
        h, w = (int(v) for v in rng.integers(60, 220, 2))
        mask = np.zeros((h, w), np.uint8)
        cv2.rectangle(mask, (8, 8), (w - 9, h - 9), 1, -1)
        part, paper = int(rng.integers(10, 90)), int(rng.integers(170, 250))
        codes = np.where(mask > 0, part, paper).astype(np.float64)
        if case % 3 == 0:  # a seam: a line of paper-ish level across the plate
            col = int(rng.integers(w // 3, 2 * w // 3))
            codes[8 : h - 8, col : col + int(rng.integers(1, 3))] = rng.uniform(part + 10, paper)
        if case % 4 == 1:  # pits and scratches inside the plate
            for _ in range(int(rng.integers(1, 30))):
                r, c = int(rng.integers(10, h - 10)), int(rng.integers(10, w - 10))
                codes[r : r + int(rng.integers(1, 4)), c : c + int(rng.integers(1, 12))] = paper
        codes = cv2.GaussianBlur(codes, (0, 0), float(rng.uniform(0.5, 1.5)))
        codes += rng.normal(0.0, float(rng.uniform(0.0, 12.0)), codes.shape)
        codes = np.clip(np.round(codes), 0, 255).astype(np.uint8)
        core = cv2.erode(mask, np.ones((3, 3), np.uint8), iterations=2)
        bg, fg = float(lut[paper]), float(lut[part])
        seam_level = min(0.85, 1.0 - 5.0 * float(rng.uniform(0.0, 0.04)))
        least = MIN_LOBE_SHARE * float(np.count_nonzero(mask))
        pieces = _seam_reference(codes, lut, bg, fg, core, seam_level, least)
        split += pieces >= 2
        if _one_solid_piece((codes, lut), (bg, fg), core, seam_level, least):
            shown += 1
            assert pieces <= 1
        else:
            not_shown += 1
    assert shown >= 20 and not_shown >= 20 and split >= 10  # both answers of the screen, and real seams


def test_split_touching_with_the_screen_is_the_full_search() -> None:
    """split_touching reading the codes (the screen, then the full search where it cannot decide) and
    reading the linear crop (the full search always) give the same split or none, on rendered scans
    of plates laid edge to edge (a seam), apart, and of a single plate."""
    from scanmass.load.decode import srgb_to_linear
    from scanmass.segment.touching import split_touching

    lut = srgb_to_linear(np.arange(256) / 255.0).astype(np.float32)
    rng = np.random.default_rng(23)
    found = 0
    for case in range(24):
        h, w = 140, 260
        codes = np.full((h, w), 225.0)
        gap = [0.0, 0.6, 1.0, 30.0][case % 4]
        codes[20:120, 20:120] = 40.0
        if case % 6 != 5:
            codes[20:120, int(120 + gap) : 230] = 40.0
        codes = cv2.GaussianBlur(codes, (0, 0), 0.8) + rng.normal(0.0, 1.5, (h, w))
        codes = np.clip(np.round(codes), 0, 255).astype(np.uint8)
        right = 229.5 if case % 6 != 5 else 119.5
        outer = np.array([[19.5, 19.5], [right, 19.5], [right, 119.5], [19.5, 119.5]])
        full = split_touching(lut[codes], (0, 0), outer, [], dark_part=True, neck=None)
        screened = split_touching(None, (0, 0), outer, [], dark_part=True, neck=None, levels=(codes, lut))
        assert (full is None) == (screened is None)
        if full is not None and screened is not None:
            found += 1
            assert full.cut_px == screened.cut_px and full.seam_depth == screened.seam_depth
            assert all(np.array_equal(a[0], b[0]) for a, b in zip(full.lobes, screened.lobes))
    assert found >= 4


def test_dip_pre_test_on_windows_is_the_crop_wide_lookup() -> None:
    """dips_possible given its regions as windows (the least and largest code of each, where the codes
    that may dip run from an end of the table) answers as with crop-sized masks (every code looked up,
    the reference): monotone and scrambled tables, dark and bright parts, regions empty, inside the
    window only and reaching beyond it, both answers seen."""
    from scanmass.segment.dipgate import WindowRegion, dips_possible

    rng = np.random.default_rng(29)
    answers = set()
    for case in range(1500):
        h, w = (int(v) for v in rng.integers(10, 90, 2))
        table = np.sort(rng.uniform(0.0, 1.0, 256)).astype(np.float32)
        if case % 5 == 0:
            table = rng.permutation(table)  # not monotone: the codes that may dip need not be one run
        part, paper = sorted(rng.uniform(0.05, 0.95, 2)) if case % 2 else sorted(rng.uniform(0.05, 0.95, 2))[::-1]
        codes = np.clip(rng.normal(128, float(rng.uniform(5, 80)), (h, w)), 0, 255).astype(np.uint8)
        if case % 3 == 0:  # one code everywhere but a few pixels: where they lie decides
            codes[:] = int(rng.integers(0, 256))
            k = int(rng.integers(1, 4))
            codes[rng.integers(0, h, k), rng.integers(0, w, k)] = rng.integers(0, 256, k)
        regions = []
        for beyond in (False, True):
            r0, r1 = sorted(int(v) for v in rng.integers(0, h + 1, 2))
            c0, c1 = sorted(int(v) for v in rng.integers(0, w + 1, 2))
            r1, c1 = max(r1, r0 + 1), max(c1, c0 + 1)
            inside = rng.uniform(size=(min(r1, h) - r0, min(c1, w) - c0)) < rng.uniform(0.0, 0.6)
            window = (slice(r0, min(r1, h)), slice(c0, min(c1, w)))
            regions.append(WindowRegion(window, inside, beyond))
        full = []
        for region in regions:
            mask = np.full((h, w), region.beyond)
            mask[region.window] = region.inside
            full.append(mask)
        limit = float(rng.uniform(0.01, 0.6))

        def flat(level):
            return lambda r, c: np.full(np.shape(r), level)

        got = dips_possible(codes, table, tuple(regions), flat(paper), flat(part), limit)
        assert got == dips_possible(codes, table, tuple(full), flat(paper), flat(part), limit)
        answers.add(got)
    assert answers == {True, False}
