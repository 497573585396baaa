"""The photo rules' shortcuts give the very values of the plain computations they replace.

Check values come from reference libraries run on the whole data: numpy's ``percentile`` on
every selected level, OpenCV's ``convexHull`` on every pixel of a mask.
"""

from __future__ import annotations

import dataclasses

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


def test_chamfer_at_least_is_the_transforms_threshold(monkeypatch) -> None:
    """closed_slots' inside thresholds by an erosion: the same pixels as OpenCV's 5 x 5 chamfer
    transform of the mask compared with the level (reference: cv2.distanceTransform of the whole
    mask), at random levels, at whole-number levels (straight paths' exact lengths), at every path
    length below 20 px that the transform itself gives (the ties, decided on the transform), on
    random masks inside, across and filling the crop, on views starting at odd columns, and eroded
    in bands of 256, 7 and 1 rows (the masks are up to 240 rows tall)."""
    from scanmass.segment import thin
    from scanmass.segment.thin import CHAMFER_ERODE_MAX_PX, _clear_of_path_lengths, chamfer_at_least

    one = np.ones((61, 61), np.uint8)
    one[30, 30] = 0
    lengths = np.unique(cv2.distanceTransform(one, cv2.DIST_L2, 5))
    ties = [float(v) for v in lengths if 0.0 < v < 20.0]
    assert 3.0 in ties and 6.0 in ties and any(abs(v - 2.8) < 1e-5 for v in ties)
    # a whole number is clear of every path with a diagonal or long step below 20 px; a mixed length is not
    assert _clear_of_path_lengths(6.0) and _clear_of_path_lengths(3.0)
    assert not _clear_of_path_lengths(float(np.float32(2.8)))
    rng = np.random.default_rng(17)
    eroded = 0
    for case, m, _ in _random_masks(21, 300):
        if case % 50 == 0:
            m[:] = 1 if case % 100 == 0 else 0  # a full crop and an empty one
        levels = [float(rng.uniform(0.2, 14.0)) for _ in range(3)] + [3.0, 6.0, float(rng.choice(ties))]
        levels.append(float(rng.uniform(CHAMFER_ERODE_MAX_PX, 40.0)))  # above the erosion's limit
        for rows, view in ((256, m), (7, m), (1, m[:, 1:]), (256, m[:, 3:])):
            if view.shape[1] < 2:
                continue
            monkeypatch.setattr(thin, "CHAMFER_BAND_ROWS", rows)
            whole = cv2.distanceTransform(view, cv2.DIST_L2, 5)
            for level in levels:
                eroded += int(level <= CHAMFER_ERODE_MAX_PX and _clear_of_path_lengths(level))
                assert np.array_equal(chamfer_at_least(view, level), whole >= level), (case, rows, level)
    assert eroded > 4000  # most levels were decided by the erosion


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


def test_ring_box_is_numpys_min_and_max_along_the_first_axis() -> None:
    from scanmass.section import _ring_box

    rng = np.random.default_rng(5)
    for case in range(200):
        ring = rng.normal(0.0, 10.0 ** rng.uniform(-3, 3), (int(rng.integers(1, 400)), 2))
        if case % 7 == 0:
            ring[int(rng.integers(len(ring))), int(rng.integers(2))] = np.nan  # a NaN: NaN in its column either way
        if case % 11 == 0:
            ring[:, 0] = -0.0  # signed zeros
        lo, hi = _ring_box(ring)
        # reference: numpy's reductions along the first axis
        np.testing.assert_array_equal(lo, ring.min(axis=0))
        np.testing.assert_array_equal(hi, ring.max(axis=0))


def test_escaping_holes_is_the_plain_box_rule() -> None:
    from scanmass.section import escaping_holes

    rng = np.random.default_rng(6)
    for _ in range(300):
        outer = rng.uniform(0.0, 50.0, (int(rng.integers(3, 60)), 2))
        holes = [rng.uniform(-5.0, 55.0, (int(rng.integers(3, 30)), 2)) for _ in range(int(rng.integers(0, 4)))]
        if holes and rng.uniform() < 0.3:
            holes[0] = np.clip(holes[0], outer.min(axis=0), outer.max(axis=0))  # on the box's edge: inside
        # reference: the rule written with numpy's min and max along the first axis
        lo, hi = outer.min(axis=0), outer.max(axis=0)
        slack = 1e-9 * float(np.max(hi - lo))
        plain = [
            k for k, h in enumerate(holes) if np.any(h.min(axis=0) < lo - slack) or np.any(h.max(axis=0) > hi + slack)
        ]
        assert escaping_holes(outer, holes) == plain


def _plain_masked_blur(values: np.ndarray, mask: np.ndarray, sigma: float, fallback: float) -> np.ndarray:
    """The normalised convolution as first written: masked product with the mask itself, gathered quotient."""
    shrink = max(1, int(sigma // 8))
    m = mask.astype(np.float32)
    v = (values * mask).astype(np.float32)
    if shrink > 1:
        size = (max(1, values.shape[1] // shrink), max(1, values.shape[0] // shrink))
        m = cv2.resize(m, size, interpolation=cv2.INTER_AREA)
        v = cv2.resize(v, size, interpolation=cv2.INTER_AREA)
    w = cv2.GaussianBlur(m, (0, 0), sigma / shrink, borderType=cv2.BORDER_REFLECT)
    v = cv2.GaussianBlur(v, (0, 0), sigma / shrink, borderType=cv2.BORDER_REFLECT)
    ok = w > 1e-3
    ratio = np.full(w.shape, fallback, dtype=np.float32)
    ratio[ok] = v[ok] / w[ok]
    if shrink > 1:
        ratio = cv2.resize(ratio, (values.shape[1], values.shape[0]), interpolation=cv2.INTER_LINEAR)
    return ratio


def test_masked_blur_is_the_plain_normalised_convolution() -> None:
    from scanmass.segment.rings import _masked_blur

    rng = np.random.default_rng(8)
    for case in range(60):
        h, w = (int(v) for v in rng.integers(5, 120, 2))
        dtype = (np.float32, np.float64, np.uint8)[case % 3]
        values = rng.normal(0.5, 0.4, (h, w)) if dtype != np.uint8 else rng.integers(0, 256, (h, w))
        values = values.astype(dtype)
        mask = rng.uniform(size=(h, w)) < rng.uniform(0.0, 1.0)
        if case % 4 == 1:
            mask = mask.astype(np.uint8)
        if case % 5 == 0:
            mask[:] = False  # no weight anywhere: the fallback everywhere
        sigma = float(rng.choice([1.5, 4.0, 12.0, 20.0, 40.0]))
        # reference: the same OpenCV blurs on the plainly formed masked product
        got = _masked_blur(values, mask, sigma, 0.25)
        want = _plain_masked_blur(values, mask, sigma, 0.25)
        assert got.dtype == want.dtype and np.array_equal(got, want)


def _speckled(rng: np.random.Generator, shape: tuple[int, int]) -> np.ndarray:
    mask = (rng.uniform(size=shape) < rng.uniform(0.02, 0.5)).astype(np.uint8)
    for _ in range(int(rng.integers(0, 4))):
        centre = tuple(int(v) for v in rng.integers(0, max(shape), 2))
        cv2.circle(mask, centre, int(rng.integers(1, 20)), 1, -1)
    return mask


def test_components_near_a_region_are_the_plain_per_label_answers() -> None:
    from scanmass.segment.brightface import _grown_near, _labels_near

    rng = np.random.default_rng(9)
    for _ in range(150):
        shape = (int(rng.integers(8, 90)), int(rng.integers(8, 90)))
        core = _speckled(rng, shape)
        near = np.zeros(shape, np.uint8)
        cv2.circle(near, tuple(int(v) for v in rng.integers(0, 90, 2)), int(rng.integers(1, 40)), 1, -1)
        near = near.astype(bool)
        within = rng.uniform(size=shape) < 0.7
        grow = int(rng.choice([3, 5, 9, 15]))
        count, labels = cv2.connectedComponents(core, connectivity=8)
        count_s, labels_s, stats, _ = cv2.connectedComponentsWithStats(core, connectivity=8)
        # reference: OpenCV's plain labelling; the labels with statistics are the same
        assert count_s == count and np.array_equal(labels_s, labels)
        # reference: each component compared over the whole crop, dilated over the whole crop
        plain_union = np.zeros(shape, bool)
        plain = []
        for k in range(1, count):
            comp = labels == k
            if (comp & near).any():
                plain_union |= comp
                grown = cv2.dilate(comp.astype(np.uint8), np.ones((grow, grow), np.uint8)).astype(bool)
                plain.append(grown & within)
        assert np.array_equal(_labels_near(labels, count, near), plain_union)
        got = list(_grown_near(labels, stats, near, within, grow))
        assert len(got) == len(plain)
        for ((x0, y0, x1, y1), region_box), region in zip(got, plain):
            whole = np.zeros(shape, bool)
            whole[y0:y1, x0:x1] = region_box
            assert np.array_equal(whole, region)


def test_code_median_and_percentile_lists_are_numpys_to_the_bit() -> None:
    from scanmass.numeric import code_median, code_percentile, code_percentiles

    rng = np.random.default_rng(12)
    for case in range(400):
        h, w = (int(v) for v in rng.integers(1, 40, 2))
        grey = rng.integers(0, 256, (h, w)).astype(np.uint8)
        if case % 3 == 0:
            grey = (grey // 53 * 53).astype(np.uint8)  # few codes: many ties
        dtype = np.float32 if case % 2 else np.float64
        lut = (np.linspace(0.0, 1.0, 256) ** rng.uniform(0.4, 3.0)).astype(dtype)
        if case % 5 == 0:
            lut = rng.uniform(0.0, 1.0, 256).astype(dtype)  # not monotone
        mask = None if case % 4 == 0 else rng.uniform(size=(h, w)) < rng.uniform(0.01, 1.0)
        picked = lut[grey] if mask is None else lut[grey][mask]
        if picked.size == 0:
            continue
        # reference: numpy's median and percentile (linear) of the levels themselves
        assert code_median(grey, mask, lut) == float(np.median(picked))
        assert code_percentile(grey, mask, lut, 90) == float(np.percentile(picked, 90))
        got, want = code_percentiles(grey, mask, lut, [0.5, 99.5]), np.percentile(picked, [0.5, 99.5])
        assert got.dtype == want.dtype and np.array_equal(got, want)
    grey16 = rng.integers(0, 4096, (30, 30)).astype(np.uint16)  # other planes: counted by bincount
    lut16 = (np.linspace(0.0, 1.0, 4096) ** 2.2).astype(np.float32)
    assert code_median(grey16, None, lut16) == float(np.median(lut16[grey16]))


def _coded_scene(rng: np.random.Generator, kind: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """A dark disc on paper, with lit sectors (sharp) or a speckled lit half (grain), as 8-bit codes
    through a power-law table: (codes, table, levels = table[codes], found mask)."""
    from scanmass.testing.photos import polygon_coverage

    shape, cx, cy, r = (120, 130), 64.0, 60.0, float(rng.uniform(25, 40))
    t = np.radians(np.linspace(0.0, 360.0, 400, endpoint=False))
    disc = polygon_coverage([(np.column_stack([cx + r * np.cos(t), cy + r * np.sin(t)]), [])], shape)
    a0 = float(rng.uniform(0, 180))
    s = np.radians(np.linspace(a0, a0 + 80.0, 200))
    sector = np.vstack([[cx, cy], np.column_stack([cx + r * np.cos(s), cy + r * np.sin(s)])])
    lit = polygon_coverage([(sector, [])], shape)
    paper = 0.6
    if kind == 0:  # a lit sector at 0.8 of the paper, blurred: the sharp-step rule's case
        refl = paper * (1.0 - disc) + 0.2 * paper * (disc - lit) + 0.8 * paper * lit
    else:  # a speckled lit sector at the paper's level: the grain rule's case
        refl = (
            paper * (1.0 - disc)
            + paper * (disc - lit) * rng.uniform(0.05, 0.15, shape)
            + paper * lit * rng.uniform(0.45, 1.0, shape)
        )
    lin = refl.astype(np.float32) if kind else cv2.GaussianBlur(refl.astype(np.float32), (0, 0), 1.0)
    lin = lin + rng.normal(0.0, 0.004, shape).astype(np.float32)
    table = (np.linspace(0.0, 1.0, 256) ** rng.uniform(1.8, 2.4)).astype(np.float32)
    codes = np.clip(np.searchsorted(table, lin), 0, 255).astype(np.uint8)
    levels = table[codes]
    found = (levels < 0.5 * paper * (1.0 + 0.2)) & (disc - lit > 0.5 if kind else True)
    return codes, table, levels, found


def test_face_rules_read_the_same_levels_from_code_counts() -> None:
    from scanmass.segment.brightface import grain_face_regions, lost_face_regions

    rng = np.random.default_rng(13)
    joined = {"lost": 0, "grain": 0}
    for case in range(24):
        codes, table, levels, found = _coded_scene(rng, case % 2)
        others = np.zeros_like(found)
        inside = np.ones_like(found)
        if case % 3 == 2:
            inside[:, :8] = False  # part of the crop outside the clear area
        # reference: the same rule with numpy's percentile and median of the levels themselves
        plain = lost_face_regions(levels, found, others, inside)
        coded = lost_face_regions(levels, found, others, inside, (codes, table))
        assert np.array_equal(plain[0], coded[0]) and plain[1] == coded[1]
        joined["lost"] += len(plain[1])
        plain_g = grain_face_regions(levels, found, others, inside)
        coded_g = grain_face_regions(levels, found, others, inside, (codes, table))
        assert np.array_equal(plain_g[0], coded_g[0]) and np.array_equal(plain_g[1], coded_g[1])
        assert plain_g[2] == coded_g[2]
        joined["grain"] += len(plain_g[2])
    assert joined["lost"] > 0 and joined["grain"] > 0  # both rules joined regions in some scenes


def test_edge_and_pit_checks_read_the_same_levels_from_code_counts() -> None:
    from scanmass.segment.shadow import dark_pits, unclear_edges

    rng = np.random.default_rng(14)
    for case in range(30):
        shape = (int(rng.integers(40, 110)), int(rng.integers(40, 110)))
        table = (np.linspace(0.0, 1.0, 256) ** rng.uniform(1.8, 2.4)).astype(np.float32)
        codes = np.clip(rng.normal(200, 8, shape), 0, 255).astype(np.uint8)  # paper
        mask = np.zeros(shape, np.uint8)
        cv2.ellipse(
            mask,
            (shape[1] // 2, shape[0] // 2),
            (shape[1] // 3, shape[0] // 3),
            float(rng.uniform(0, 180)),
            0,
            360,
            1,
            -1,
        )
        codes[mask > 0] = np.clip(rng.normal(40, 6, int(mask.sum())), 0, 255).astype(np.uint8)  # a dark part
        if case % 2:
            cv2.circle(codes, (shape[1] // 2, shape[0] // 2), int(rng.integers(3, 10)), 5, -1)  # a darker pit
        lin = table[codes]
        rings = [c[:, 0, ::1].astype(float) for c in cv2.findContours(mask, cv2.RETR_LIST, cv2.CHAIN_APPROX_NONE)[0]]
        # reference: the same checks with numpy's median of the levels themselves
        assert unclear_edges(lin, mask.astype(bool), rings, 1.0) == unclear_edges(
            lin, mask.astype(bool), rings, 1.0, (codes, table)
        )
        assert dark_pits(lin, mask.astype(bool), 10.0) == dark_pits(lin, mask.astype(bool), 10.0, levels=(codes, table))


def _plain_pair_scores(
    grad: np.ndarray, s_px: np.ndarray, band_px: np.ndarray, inward_px: float = 0.0
) -> tuple[np.ndarray, np.ndarray]:
    """The wall-band score as first written: a running strict maximum over the start offsets, one at a time
    (``inward_px``: the start offsets run that much further inside the outline)."""
    from scanmass.pipeline.photo_thickness import PROFILE_STEP_PX

    n, m = grad.shape
    shift = np.round(band_px / PROFILE_STEP_PX).astype(int)
    zero = int(np.searchsorted(s_px, 0.0))
    pad = int(round(1.5 / PROFILE_STEP_PX))
    best, where, rows = np.full(n, -1.0), np.zeros(n), np.arange(n)
    inward = int(round(inward_px / PROFILE_STEP_PX))
    lo = np.maximum(zero - shift - pad, 0)
    for off in range(0, int(shift.max()) + 2 * pad + inward + 1):
        i0 = lo + off
        ok = (i0 <= zero + pad + inward) & (i0 + shift < m)
        i0c = np.minimum(i0, m - 1)
        a, b = grad[rows, i0c], grad[rows, np.minimum(i0c + shift, m - 1)]
        c = grad[rows, np.minimum(i0c + shift // 2, m - 1)]
        score = np.where(ok, np.minimum(a, b) - c, -1.0)
        better = score > best
        best, where = np.where(better, score, best), np.where(better, s_px[i0c], where)
    return best, where


def test_wall_pair_scores_all_offsets_at_once_match_the_running_maximum():
    from scanmass.pipeline.photo_thickness import _pair_scores

    rng = np.random.default_rng(11)
    for trial in range(30):
        n, m = int(rng.integers(1, 300)), int(rng.integers(20, 220))
        grad = rng.random((n, m)).astype(np.float32)
        if trial % 3 == 0:
            grad = np.round(grad * 4).astype(np.float32) / 4  # ties: the first best offset must win
        if trial % 5 == 0:
            grad[:, :] = 0.0  # nothing scores above zero
        s_px = (np.arange(m) - m // 2) * 0.25
        band = rng.random(n) * (m * 0.3)
        inward = 0.0 if trial % 2 else float(rng.random() * 10.0)  # the second try's reach inside the outline
        best, where = _pair_scores(grad, s_px, band, inward)
        best0, where0 = _plain_pair_scores(grad, s_px, band, inward)
        assert best.dtype == best0.dtype and np.array_equal(best, best0), trial
        assert np.array_equal(where, where0), trial


def test_wall_profiles_from_a_linear_box_match_the_whole_linear_image():
    # check value: OpenCV's remap over the whole image converted to linear light
    from scanmass.pipeline.photo_thickness import _linear_profiles

    rng = np.random.default_rng(12)
    grey = rng.integers(0, 256, (300, 411), dtype=np.uint8)
    table = (np.arange(256, dtype=np.float32) / 255.0) ** np.float32(2.2)
    whole = table[grey]
    for trial in range(40):
        centre = rng.random(2) * [520, 400] - [50, 50]  # some boxes run past the image's edges
        pts = (centre + (rng.random((60, 25, 2)) - 0.5) * rng.random() * 200).astype(np.float32)
        mx, my = np.ascontiguousarray(pts[..., 0]), np.ascontiguousarray(pts[..., 1])
        expect = cv2.remap(whole, mx, my, cv2.INTER_LINEAR)
        assert np.array_equal(_linear_profiles(grey, table, pts), expect), trial


def _same_scale(got, plain) -> None:
    """Two PhotoScales equal to the bit: matrices, terms, every sampled map on the same pixels, the ROI."""
    pm, pp = got.plane_map, plain.plane_map
    assert np.array_equal(pm.matrix, pp.matrix) and pm.rel_u == pp.rel_u and pm.terms == pp.terms
    assert pm.note == pp.note and pm.mm_per_px == pp.mm_per_px
    a, b = pm.photo, pp.photo
    assert (a.focal_px, a.focal_source, a.thickness, a.lens_profile) == (
        b.focal_px,
        b.focal_source,
        b.thickness,
        b.lens_profile,
    )
    with np.printoptions(precision=17, threshold=10**6):
        assert repr(a.target) == repr(b.target)  # the markers used, their corners
    px = np.array([[120.0, 140.0], [450.0, 600.0], [800.0, 1100.0], [300.5, 900.25]])
    assert np.array_equal(pm.to_mm(px), pp.to_mm(px))
    assert len(pm.samples) == len(pp.samples)
    for a, b in zip(pm.samples, pp.samples):
        assert np.array_equal(a.to_mm(px), b.to_mm(px))
    assert np.array_equal(got.roi_px, plain.roi_px) and np.array_equal(got.camera_matrix, plain.camera_matrix)
    assert got.warnings == plain.warnings and np.array_equal(got.support_mm, plain.support_mm)
    assert (got.layout is None) == (plain.layout is None) and (got.detection is None) == (plain.detection is None)
    if got.layout is not None:
        assert got.layout.name == plain.layout.name and np.array_equal(got.detection.ids, plain.detection.ids)
        assert np.array_equal(got.detection.corners_px, plain.detection.corners_px)


def test_one_scale_basis_gives_every_thickness_the_fresh_scale():
    # check value: mat_scale called afresh for each thickness (markers found and fitted again, maps sampled again)
    from _reallight_truth import REALLIGHT

    from scanmass import load_image
    from scanmass.scale.mat_scale import mat_scale, mat_scale_basis

    image = load_image(REALLIGHT / "dev-mixed-black2-t22.jpg")
    basis = mat_scale_basis(image)
    # in an order where a thickness with random heights (u > 0) comes after others and again
    for t, u in [(None, 0.0), (3.0, 0.4), (6.5, 0.0), (0.0, 0.0), (3.0, 0.4), (2.25, 1.1)]:
        got = basis.with_thickness(t, u)
        _same_scale(got, mat_scale(image, thickness_mm=t, thickness_u_mm=u))
        if t and u:
            # the sampled heights continue numpy's stream seeded 12345 past the 64 focal-length draws (the
            # perspective's focal length: one draw per sampled map), as the scale built in one go drew them
            assert got.plane_map.photo.focal_source.startswith("estimated from the view's perspective")
            rng = np.random.default_rng(12345)
            rng.standard_normal(len(got.plane_map.samples))
            heights = [max(t + u * rng.standard_normal(), 0.0) for _ in got.plane_map.samples]
            assert [s.correction.height_mm for s in got.plane_map.samples] == heights


def test_photo_basis_tone_and_mask_do_not_read_the_thickness():
    # check value: the markers' tone curve and the masked image made from the scale with each thickness
    from _reallight_truth import REALLIGHT

    from scanmass import load_image
    from scanmass.options import MeasureOptions
    from scanmass.pipeline.flow import _photo_basis, photo_scale
    from scanmass.pipeline.photo_checks import _mask_outside
    from scanmass.scale.markertone import marker_tone

    image = load_image(REALLIGHT / "dev-mixed-black2-t22.jpg")
    options = MeasureOptions(encoding="auto")
    basis = _photo_basis(image, options, "mat")
    assert basis.tone is not None
    for t in (None, 1.5, 4.0, 9.0):
        scale = photo_scale(image, dataclasses.replace(options, thickness_mm=t, thickness_u_mm=0.3), "mat")
        assert marker_tone(image, scale) == basis.tone
        assert np.array_equal(_mask_outside(image, scale.roi_px).grey, basis.masked.grey)


def test_raised_rings_made_once_are_footprint_rings_and_never_stale():
    # check value: photo_thickness.footprint_rings called afresh on the part as it is
    from _reallight_truth import REALLIGHT

    from scanmass import load_image, measure
    from scanmass.pipeline.photo_thickness import RaisedRings, footprint_rings
    from scanmass.scale.mat_scale import mat_scale

    path = REALLIGHT / "dev-mixed-black2-t22.jpg"
    scale = mat_scale(load_image(path))
    parts = measure(path).parts
    assert parts and any(p.holes for p in parts)
    raised = RaisedRings(scale)

    def same(a, b) -> bool:
        return np.array_equal(a[0], b[0]) and len(a[1]) == len(b[1]) and all(map(np.array_equal, a[1], b[1]))

    for part in parts:
        for t, top in [(2.0, False), (5.5, True), (2.0, False)]:
            assert same(raised.rings(part, t, top), footprint_rings(scale, part, t, top))
        # the part replaced by one with other rings (as a check between two uses may do): made again
        moved = dataclasses.replace(part, outline_mm=np.asarray(part.outline_mm) + 0.5)
        assert same(raised.rings(moved, 2.0, False), footprint_rings(scale, moved, 2.0, False))
        if part.holes:
            hole = dataclasses.replace(part.holes[0], outline_mm=np.asarray(part.holes[0].outline_mm)[::-1])
            other = dataclasses.replace(part, holes=[hole, *part.holes[1:]])
            assert same(raised.rings(other, 2.0, False), footprint_rings(scale, other, 2.0, False))


def test_footprint_maps_decomposed_once_are_each_hooks_to_the_bit():
    # check value: ElevationHook(h0, k, h).footprint_mm made afresh at each height (the pose decomposed each time)
    from scanmass.scale.homography import ElevationHook, footprint_maps_mm

    rng = np.random.default_rng(21)
    heights = np.arange(0.5, 12.0001, 0.1)
    for trial in range(12):
        f = rng.uniform(800.0, 4000.0)
        k = np.array([[f, 0.0, rng.uniform(400, 2000)], [0.0, f, rng.uniform(300, 1500)], [0.0, 0.0, 1.0]])
        tilt = rng.uniform(-0.5, 0.5, 3)
        r, _ = cv2.Rodrigues(tilt)
        t = np.array([rng.uniform(-100, 100), rng.uniform(-100, 100), rng.uniform(300, 900)])
        g = k @ np.column_stack([r[:, 0], r[:, 1], t])  # plane mm -> px of a camera looking at the plane
        h0 = np.linalg.inv(g)
        h0 /= h0[2, 2]
        got = footprint_maps_mm(h0, k, heights)
        for h, m in zip(heights, got):
            assert np.array_equal(m, ElevationHook(h0, k, float(h)).footprint_mm), (trial, h)


def test_wall_score_curve_from_shared_step_counts_is_the_per_thickness_loop():
    # check value: _plain_pair_scores (the running maximum above) run for every trial thickness, its mean taken
    from scanmass.pipeline.photo_thickness import PROFILE_STEP_PX, _score_curve

    rng = np.random.default_rng(33)
    for trial in range(25):
        n, m = int(rng.integers(1, 70)), int(rng.integers(40, 160))
        grad = rng.random((n, m)).astype(np.float32 if trial % 2 else np.float64)
        if trial % 5 == 0:
            grad = np.round(grad * 4) / 4  # ties: the first best offset must win
        s_px = (np.arange(m) - m // 2) * PROFILE_STEP_PX
        slope = rng.uniform(0.0, 0.3, n)  # bands grow with the thickness: neighbours share step counts
        bands = np.arange(0.5, 12.0001, 0.1)[:, None] * slope[None, :] * rng.uniform(1, 8) + rng.uniform(-0.5, 1, n)
        curve, starts = _score_curve(grad, s_px, bands)
        for i, band in enumerate(bands):
            best, where = _plain_pair_scores(grad, s_px, band)
            assert curve[i] == float(np.mean(np.maximum(best, 0.0))), (trial, i)
            assert np.array_equal(starts[i], where), (trial, i)


def test_a_stretchs_curve_off_the_walls_score_table_is_its_own_curve():
    # check value: _score_curve run on the stretch's profiles alone (what each stretch was scored by before
    # the table was shared); the same floats, as a profile's score does not depend on the others scored with it
    from scanmass.pipeline.photo_thickness import PROFILE_STEP_PX, _score_curve, _score_table

    rng = np.random.default_rng(41)
    for trial in range(20):
        n, m = int(rng.integers(45, 120)), int(rng.integers(40, 160))
        grad = rng.random((n, m))
        if trial % 4 == 0:
            grad = np.round(grad * 4) / 4  # ties
        s_px = (np.arange(m) - m // 2) * PROFILE_STEP_PX
        slope = rng.uniform(0.0, 0.3, n)
        bands = np.arange(0.5, 12.0001, 0.1)[:, None] * slope[None, :] * rng.uniform(1, 8) + rng.uniform(-0.5, 1, n)
        inward = float(rng.choice([0.0, 8.0]))
        table = _score_table(grad, s_px, bands, inward)
        st = np.sort(rng.choice(n, size=40, replace=False))
        curve, starts = table.curve(st)
        alone, alone_starts = _score_curve(grad[st], s_px, bands[:, st], inward)
        assert np.array_equal(curve, alone), trial
        assert all(np.array_equal(a, b) for a, b in zip(starts, alone_starts)), trial


def test_sheet_scale_basis_continues_the_seeded_stream_past_the_size_draws():
    # check values: sheet_scale called afresh per thickness, and numpy's stream seeded 12345: two uniform
    # size draws per sampled map (the sheet's trimming tolerance), one focal draw per map, then the heights
    from scanmass.scale.sheet import sheet_scale, sheet_scale_basis
    from scanmass.testing.photos import PhotoParts, make_camera, render_photo
    from scanmass.testing.scans import rectangle

    cam = make_camera(tilt_deg=22.0, tilt_dir_deg=130.0, roll_deg=90.0, distance_mm=400.0)
    grey = render_photo(
        None, [PhotoParts(rectangle(60.0, 90.0, 50.0, 35.0), [])], cam, seed=4, sheet_mm=(210.0, 297.0), table=0.15
    )
    from scanmass import load_image

    image = load_image(grey)
    basis = sheet_scale_basis(image, "a4")
    for t, u in [(4.0, 0.6), (None, 0.0), (4.0, 0.6), (1.0, 0.0)]:
        got = basis.with_thickness(t, u)
        _same_scale(got, sheet_scale(image, "a4", thickness_mm=t, thickness_u_mm=u))
        if t and u:
            samples = got.plane_map.samples
            assert got.plane_map.photo.focal_source.startswith("estimated from the view's perspective")
            rng = np.random.default_rng(12345)
            for _ in samples:
                rng.uniform(-np.sqrt(3), np.sqrt(3))
                rng.uniform(-np.sqrt(3), np.sqrt(3))
            rng.standard_normal(len(samples))
            heights = [max(t + u * rng.standard_normal(), 0.0) for _ in samples]
            assert [s.correction.height_mm for s in samples] == heights


def test_rim_cue_on_maps_decomposed_once_is_the_per_thickness_hook():
    # check value: raised_outline_mm and _one_rim with ElevationHook(h0, k, t).footprint_mm made afresh at each
    # thickness of the grid (the pose decomposed each time), as rim_thickness did before footprint_maps_mm
    from _reallight_truth import REALLIGHT

    from scanmass import load_image, measure
    from scanmass.pipeline.photo_thickness import RIM_GRID_MM, RIM_MIN_VERTICES, _one_rim, _rings, footprint_rings
    from scanmass.scale.homography import ElevationHook, apply_h, footprint_maps_mm, raised_outline_mm
    from scanmass.scale.mat_scale import mat_scale

    path = REALLIGHT / "dev-mixed-black2-t22.jpg"
    scale = mat_scale(load_image(path))
    h0, k = scale.plane_map.matrix, scale.camera_matrix
    plain = [ElevationHook(h0, k, float(t)).footprint_mm for t in RIM_GRID_MM]
    maps = footprint_maps_mm(h0, k, RIM_GRID_MM)
    rings = [(j > 0, ring) for part in measure(path).parts for j, ring in enumerate(_rings(part))]
    assert any(len(ring) >= RIM_MIN_VERTICES for _, ring in rings)
    for hole, ring in rings:
        for i in range(1, len(RIM_GRID_MM), 7):
            t = float(RIM_GRID_MM[i])
            got = raised_outline_mm(h0, k, t, ring, hole=hole, footprint_mm=maps[i])
            assert np.array_equal(got, raised_outline_mm(h0, k, t, ring, hole=hole))
        mm_per_px = scale.plane_map.mm_per_px
        assert _one_rim(h0, k, ring, hole, mm_per_px, maps) == _one_rim(h0, k, ring, hole, mm_per_px, plain)
    # footprint_rings, its map made once for all the rings: each ring raised with its own hook
    part = max(measure(path).parts, key=lambda p: len(p.holes))
    outer, *holes = _rings(part)
    for t, top in [(2.0, False), (4.5, True)]:
        got_outer, got_holes = footprint_rings(scale, part, t, top)
        e = ElevationHook(h0, k, t).footprint_mm
        if top:
            assert np.array_equal(got_outer, apply_h(e, outer))
            for got, ring in zip(got_holes, holes):
                assert np.array_equal(got, apply_h(e, ring))
        else:
            assert np.array_equal(got_outer, raised_outline_mm(h0, k, t, outer))
            for got, ring in zip(got_holes, holes):
                assert np.array_equal(got, raised_outline_mm(h0, k, t, ring, hole=True)[::-1])


def test_cut_swing_probe_on_an_equal_image_is_the_probe_measured_again(monkeypatch):
    # check value: the same photo measured with every cut_swing probe measured again (no measurement reused)
    from _reallight_truth import REALLIGHT

    import scanmass.pipeline.flow as flow
    import scanmass.pipeline.photo_shadow_cut as shadow_cut
    from scanmass import measure

    path = REALLIGHT / "spot-steel-t0.jpg"  # its probe at 3 - 0.15 mm decides the same cuts as at 3 mm
    calls = {"n": 0}
    plain_measure_image = flow.measure_image

    def counted(*args, **kwargs):
        calls["n"] += 1
        return plain_measure_image(*args, **kwargs)

    monkeypatch.setattr(flow, "measure_image", counted)
    got = measure(path, thickness_mm=3.0).to_json()
    reused = calls["n"]
    monkeypatch.setattr(shadow_cut._Remeasured, "_found", lambda self, image, plane_map: None)
    calls["n"] = 0
    want = measure(path, thickness_mm=3.0).to_json()
    assert got == want
    assert reused < calls["n"]  # a probe's measurement was reused


def test_neutral_wall_foot_sampled_at_once_is_each_distance_sampled_alone(monkeypatch):
    # check value: _neutral_foot reading its profile one distance at a time (``at`` per distance), on the
    # neutral walls of a committed render
    from _reallight_truth import REALLIGHT

    import scanmass.segment.sidewall as sidewall
    from scanmass import measure

    plain_foot = sidewall._neutral_foot
    feet: list[float | None] = []

    def both(at, level, p, along=None):
        assert along is not None
        got = plain_foot(at, level, p, along)
        assert got == plain_foot(at, level, p)
        feet.append(got)
        return got

    monkeypatch.setattr(sidewall, "_neutral_foot", both)
    measure(REALLIGHT / "window-steel-t25.jpg", thickness_mm=2.5)
    assert sum(f is not None for f in feet) >= 5


def _float32_near_bounds(rng: np.random.Generator, bounds: tuple[float, ...], shape: tuple[int, int]) -> np.ndarray:
    """float32 values spread over [0, 20] with many at, just below and just above each bound (as float32)."""
    values = rng.uniform(0.0, 20.0, shape).astype(np.float32)
    flat = values.ravel()
    for b in bounds:
        at = np.float32(b)
        for v in (at, np.nextafter(at, np.float32(0)), np.nextafter(at, np.float32(30)), np.float32(np.float64(b))):
            flat[rng.integers(0, flat.size, flat.size // 20)] = v
    return values


def test_banded_thresholds_are_numpys_comparisons() -> None:
    """closed_slots' row-block thresholds of a float32 distance map: the same masks as numpy's
    comparisons of the whole map against the Python float bounds (the reference), at the bounds'
    float32 neighbours too and with heights that are and are not a multiple of the block."""
    from scanmass.segment.thin import _band, _two_sides

    rng = np.random.default_rng(23)
    for _ in range(60):
        sigma = float(rng.uniform(0.4, 3.0))
        away, tail = 2.0 * sigma + 1.0, 3.0 * max(sigma, 1.0) + 2.0
        shape = (int(rng.integers(1, 700)), int(rng.integers(1, 40)))
        d = _float32_near_bounds(rng, (away, away + 2.0, tail + 2, tail + 12), shape)
        rows = int(rng.integers(1, 300))
        # reference: the plain comparisons on the whole map
        assert np.array_equal(_band(d, tail + 2, tail + 12, rows), (d >= tail + 2) & (d <= tail + 12))
        assert np.array_equal(_band(d, away, None, rows), d >= away)
        assert np.array_equal(_band(d, None, away + 2.0, rows), d <= away + 2.0)
        sides = _two_sides(d, away, away + 2.0, rows)
        assert np.array_equal((sides & 1).view(bool), d >= away)
        assert np.array_equal((sides >> 1).view(bool), d <= away + 2.0)
        assert sides.max(initial=0) <= 3


def _bowed_mat_photo():
    """A photo of the A4 mat through a lens with barrel distortion (k1 -0.05), part on it."""
    from scanmass.load.decode import load_image
    from scanmass.scale.mat import make_mat
    from scanmass.testing.photos import PhotoParts, make_camera
    from scanmass.testing.photos import render_photo as render
    from scanmass.testing.scans import circle, rectangle

    part = PhotoParts(rectangle(70.0, 90.0, 80.0, 50.0, angle_deg=17.0), [circle(100.0, 115.0, 8.0, 256)])
    cam = make_camera(tilt_deg=22.0, tilt_dir_deg=30.0, roll_deg=80.0, distance_mm=360.0, f_px=1500.0, k1=-0.05)
    return load_image(render(make_mat("a4-portrait"), [part], cam, seed=5))


def _same_detection(a, b) -> None:
    for name in ("ids", "corners_px", "corners_coarse_px", "edge_blur_px", "side_normals"):
        np.testing.assert_array_equal(getattr(a, name), getattr(b, name), err_msg=name)
    assert a.edge_noise_px == b.edge_noise_px or (np.isnan(a.edge_noise_px) and np.isnan(b.edge_noise_px))


def test_marker_sides_sampled_once_refine_as_sampling_again_under_each_correction() -> None:
    """The plain computation samples the photo's marker sides at every refinement; sampled once
    and refined through one correction after another, every detection is the same to the bit."""
    import pytest

    from scanmass.scale.lens import LensProfile
    from scanmass.scale.markers import detect_markers, found_markers, marker_sides

    image = _bowed_mat_photo()
    found = found_markers(image)
    # a duplicated id is dropped by both paths
    found = (np.concatenate([found[0], found[0][:1] + 40.0]), np.concatenate([found[1], found[1][:1]]))
    sides = marker_sides(image, found)
    k = np.array([[1500.0, 0.0, image.width_px / 2], [0.0, 1500.0, image.height_px / 2], [0.0, 0.0, 1.0]])
    corrections = [None]
    for k1 in (-0.05, -0.03, 0.02):
        lens = LensProfile(k, np.array([k1, 0.0, 0.0, 0.0, 0.0]), (image.width_px, image.height_px), 0.0)
        corrections.append(lens.undistort_points)
    for undistort in corrections + corrections[::-1]:
        _same_detection(
            detect_markers(image, undistort=undistort, sides=sides),
            detect_markers(image, undistort=undistort, found=found),
        )
    # the shared points cannot be changed by a correction that writes into its input
    edge_pts = next(s for marker in sides.sides for _, s in marker if s is not None)[0]
    with pytest.raises(ValueError):
        edge_pts += 1.0


def test_mat_scale_with_a_lens_from_the_mat_samples_the_markers_once(monkeypatch) -> None:
    """The scale of a bowed photo (a lens estimated from the mat's corners, the markers refined
    again through it) is the scale whose every refinement samples the photo again."""
    from scanmass.scale import mat_scale
    from scanmass.scale.markers import detect_markers, marker_sides

    image = _bowed_mat_photo()
    sampled: list[int] = []

    def counted(img, found):
        sampled.append(len(found[1]))
        return marker_sides(img, found)

    monkeypatch.setattr(mat_scale, "marker_sides", counted)
    fast = mat_scale.mat_scale_basis(image, printed_x_mm=100.0, printed_y_mm=100.0)
    assert fast.lens.estimated and len(sampled) == 1  # refined twice, sampled once

    def plain(img, *, sides=None, **kwargs):  # the sides sampled again at every refinement
        return detect_markers(img, sides=marker_sides(img, (sides.coarse_px, sides.ids)), **kwargs)

    monkeypatch.setattr(mat_scale, "detect_markers", plain)
    slow = mat_scale.mat_scale_basis(image, printed_x_mm=100.0, printed_y_mm=100.0)
    _same_detection(fast.detection, slow.detection)
    np.testing.assert_array_equal(fast.lens.profile.dist_coeffs, slow.lens.profile.dist_coeffs)
    a, b = fast.with_thickness(None), slow.with_thickness(None)
    np.testing.assert_array_equal(a.plane_map.matrix, b.plane_map.matrix)
    assert a.plane_map.rel_u == b.plane_map.rel_u and a.plane_map.terms == b.plane_map.terms
    assert a.warnings == b.warnings


def test_window_centroid_in_buffers_is_the_plain_windowed_centroid() -> None:
    """The edge refinement's windowed centroid (computed in reused buffers) against the plain
    formula written out here: the same floats, for sharp, blurred, flat and negative rows."""
    from scanmass.scale.edges import window_centroid

    def plain(g, mid, pos, var):
        half = np.maximum(1.5, 3.0 * np.sqrt(np.maximum(var, 0.0)) + 1.0)[:, None]
        gp = np.clip(g, 0.0, None)
        for _ in range(2):
            w = gp * (np.abs(mid[None, :] - pos[:, None]) <= half)
            sw = w.sum(axis=1)
            pos = np.where(sw > 0, (w * mid).sum(axis=1) / np.where(sw > 0, sw, 1), pos)
        return pos

    rng = np.random.default_rng(31)
    for _ in range(40):
        rows, cols = int(rng.integers(1, 300)), int(rng.integers(2, 130))
        mid = (np.arange(cols) - cols / 2 + 0.5) * 0.25
        g = rng.normal(0.0, 0.01, (rows, cols))
        at = rng.integers(0, cols, rows)
        g[np.arange(rows), at] += rng.random(rows)  # a step's peak somewhere in each row
        g[rng.random(rows) < 0.1] = 0.0  # flat rows: no weight, the first estimate kept
        g[rng.random(rows) < 0.1] *= -1.0  # falling steps: clipped away
        pos = mid[at] + rng.normal(0.0, 1.0, rows)
        var = rng.random(rows) * 4.0 - 0.5
        assert np.array_equal(window_centroid(g, mid, pos, var), plain(g, mid, pos, var))
