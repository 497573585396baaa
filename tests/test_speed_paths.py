"""Fast paths (issue 16) give what the paths they replace gave.

- JPEG: the luma plane decoded once by libjpeg through OpenCV (greyscale output, damage
  warnings caught) equals pillow's own decode of the luma channel (``draft("L")``), an
  outside decoder, for the common encoder settings; damaged files still take the checked
  path and are refused.
- Thin walls: the cheap grid-and-sector filter in front of the neighbour search keeps
  every vertex that has an opposite-facing boundary point (normals more than 120 degrees
  apart, dot product below -0.5, the rule of ``resolve_walls``) within reach, checked
  against a brute-force search over all pairs written here; on a part without thin walls
  the neighbour search (scipy's k-d tree) is not built at all.
- Closed slots: the pre-test of ``closed_slots`` (bounds of the two level surfaces,
  :mod:`scanmass.segment.dipgate`) gives the full search's result on parts with and
  without a slot or wall too narrow for a contour, dark and bright, and skips the search
  exactly on those without; its surface bounds hold every value of the float32 grid.
- Region of interest: a part mask thresholded and traced in the region's box only gives
  the parts, holes, order and cut flags of the whole plane (the same code with the box
  forced to the whole image), for regions inside, across the image's edges and through parts.
- Row medians skipping NaN (shadow's edge profiles) equal numpy's ``nanmedian`` bit for bit,
  and the short medians of the marker sides' fits numpy's ``median``.
- Table lookups and flat indices: OpenCV's lookup equals numpy's indexing, and the floor
  division equals ``np.divmod``.
"""

from __future__ import annotations

import io
import math

import numpy as np
import pytest
import scipy.spatial
from PIL import Image

from scanmass.errors import ImageError
from scanmass.load import decode
from scanmass.load.decode import load_image
from scanmass.segment import thin
from scanmass.segment.rings import segment
from scanmass.testing.scans import SynthPart, circle, rectangle, render_scan

# ------------------------------------------------------------------------------- JPEG


def _photo_like(seed: int = 3) -> np.ndarray:
    rng = np.random.default_rng(seed)
    a = (rng.random((203, 317, 3)) * 255).astype(np.uint8)
    a[40:160, 50:250] = [20, 40, 200]
    a[90:120, 100:300] = [240, 240, 10]
    return a


def _pillow_luma(data: bytes) -> np.ndarray:
    with Image.open(io.BytesIO(data)) as im:
        im.draft("L", im.size)
        return np.asarray(im.convert("L") if im.mode != "L" else im)


@pytest.mark.parametrize(
    "mode, options",
    [
        ("RGB", {"quality": 92}),
        ("RGB", {"quality": 60, "subsampling": 2}),  # 4:2:0
        ("RGB", {"quality": 90, "subsampling": 1}),  # 4:2:2
        ("RGB", {"quality": 90, "subsampling": 0}),  # 4:4:4
        ("RGB", {"quality": 85, "progressive": True}),
        ("RGB", {"quality": 85, "optimize": True}),
        ("L", {"quality": 90}),
    ],
)
def test_jpeg_luma_in_one_decode_equals_pillows(tmp_path, monkeypatch, mode, options):
    buf = io.BytesIO()
    Image.fromarray(_photo_like()).convert(mode).save(buf, "JPEG", dpi=(300, 300), **options)
    path = tmp_path / "scan.jpg"
    path.write_bytes(buf.getvalue())

    def second_decode(*args, **kwargs):
        raise AssertionError("an intact JPEG is decoded once")

    monkeypatch.setattr(decode, "_verify_jpeg", second_decode)
    img = load_image(path)
    # source: pillow's decode of the same file's luma channel, bit for bit
    np.testing.assert_array_equal(img.grey, _pillow_luma(buf.getvalue()))
    assert img.grey.dtype == np.uint8 and img.format == "JPEG"


def test_damaged_jpeg_still_takes_the_checked_path(tmp_path):
    # the construction of tests/test_hostile_io.py (20 bytes changed inside the
    # entropy-coded data), where libjpeg warns of corrupt data in every trial
    a = np.full((400, 600), 230, np.uint8)
    a[100:300, 100:250] = 20
    a[150:250, 350:500] = 30
    buf = io.BytesIO()
    Image.fromarray(a).save(buf, "JPEG", quality=90, dpi=(300, 300))
    rng = np.random.default_rng(13)
    for trial in range(5):
        data = bytearray(buf.getvalue())
        for pos in rng.integers(len(data) // 3, len(data) - 10, 20):
            data[pos] = (data[pos] + 1 + int(rng.integers(0, 255))) % 256
        assert decode._jpeg_luma(bytes(data), (600, 400)) is None  # not taken as intact
        path = tmp_path / f"bad{trial}.jpg"
        path.write_bytes(bytes(data))
        with pytest.raises(ImageError, match="damaged"):
            load_image(path)


# -------------------------------------------------------------------------- thin walls


def _parts(parts: list[SynthPart]):
    scan = render_scan(parts, dpi=300, shape_px=(700, 900), blur_px=1.0, noise=0.004, seed=2)
    img = load_image(scan.image, dpi=300)
    return img, segment(img, min_area_px=50).parts


def _reach(rings) -> float:
    sigma = float(rings.blur_px) if math.isfinite(rings.blur_px) and rings.blur_px > 0 else 1.0
    return thin.THIN_SIGMAS * sigma + 1.0 + 3.0 * max(sigma, 1.0) + 2.0  # as resolve_walls sets it


def _brute_force_facing(pts: np.ndarray, normals: np.ndarray, reach: float) -> np.ndarray:
    """Every vertex with some vertex within reach whose normal is more than 120 degrees from its own."""
    out = np.zeros(len(pts), bool)
    for start in range(0, len(pts), 512):
        block = slice(start, start + 512)
        d = np.hypot(pts[block, None, 0] - pts[None, :, 0], pts[block, None, 1] - pts[None, :, 1])
        dots = normals[block] @ normals.T
        out[block] = np.any((d <= reach) & (dots < -0.5), axis=1)
    return out


def test_facing_filter_keeps_every_vertex_the_neighbour_rule_can_find():
    mm = 25.4 / 300
    parts = [
        SynthPart(circle(20, 20, 12), [circle(20, 20, 12 - 4 * mm)]),  # a 4 px ring: walls all round
        SynthPart(rectangle(45, 8, 25, 30), [rectangle(55, 12, 3 * mm, 20)]),  # a 3 px slot in a plate
        SynthPart(circle(60, 48, 6)),  # a disc: nothing faces within reach
    ]
    img, found = _parts(parts)
    assert len(found) == 3
    kept = {}
    for rings in found:
        all_rings = [rings.outer_px, *rings.holes_px]
        pts = np.concatenate(all_rings)
        normals = np.concatenate([thin._normals(r, i == 0) for i, r in enumerate(all_rings)])
        reach = _reach(rings)
        truth = _brute_force_facing(pts, normals, reach)
        maybe = thin._maybe_facing(pts, normals, reach)
        assert not np.any(truth & ~maybe), "the filter dropped a vertex the neighbour rule finds"
        kept[rings.label] = (int(truth.sum()), int(maybe.sum()), len(pts))
    counts = sorted(kept.values(), key=lambda c: c[2])
    disc, *others = sorted(kept.values(), key=lambda c: c[0])
    assert disc[1] == 0  # the disc: no candidate, so no neighbour search
    assert all(t > 100 for t, _, _ in others), counts  # the ring and the slot: many


def test_no_thin_wall_means_no_neighbour_search(monkeypatch):
    img, found = _parts([SynthPart(circle(30, 30, 15), [circle(30, 30, 5)])])

    class Refused:
        def __init__(self, *args, **kwargs):
            raise AssertionError("k-d tree built for a part without thin walls")

    monkeypatch.setattr(scipy.spatial, "cKDTree", Refused)
    result = thin.resolve_walls(img, found[0])
    assert result.corrected == 0 and result.unresolved == 0
    np.testing.assert_array_equal(result.rings.outer_px, found[0].outer_px)


# ------------------------------------------------------------------- sampled scale maps


def test_section_without_hull_gives_every_other_figure_unchanged():
    from scanmass.section import section_properties

    rng = np.random.default_rng(4)
    t = np.sort(rng.random(3000)) * 2 * np.pi
    outer = np.column_stack([40 + 25 * np.cos(t), 30 + 18 * np.sin(t)]) + rng.normal(0, 0.01, (t.size, 2))
    hole = np.column_stack([45 + 5 * np.cos(t[::7]), 30 + 5 * np.sin(t[::7])])
    full = section_properties(outer, [hole])
    fast = section_properties(outer, [hole], hull=False)
    for name, value in vars(full).items():
        if name in ("caliper_max_mm", "caliper_min_mm", "convex_area_mm2"):
            assert math.isnan(getattr(fast, name))
        else:
            assert getattr(fast, name) == value, name  # bit for bit: the same arithmetic
    # the full path still gives the hull's figures: an ellipse of semi-axes 25 and 18 mm has
    # area pi a b and caliper widths 2a and 2b (closed form); the 0.01 mm noise on the
    # outline moves the hull out by about that much (0.1 % of the area)
    assert abs(full.convex_area_mm2 / (math.pi * 25 * 18) - 1) < 3e-3
    assert abs(full.caliper_max_mm - 50) < 0.05 and abs(full.caliper_min_mm - 36) < 0.05


def _brute_force_crossings(p, direction, seg_a, seg_b, reach):
    """First and second ray parameters over every segment, one ray at a time (the definition)."""
    first, second = np.full(len(p), np.inf), np.full(len(p), np.inf)
    e = seg_b - seg_a
    for k in range(len(p)):
        d, w = direction[k], seg_a - p[k]
        denom = d[0] * e[:, 1] - d[1] * e[:, 0]
        ok = np.abs(denom) > 1e-12
        t = np.where(ok, (w[:, 0] * e[:, 1] - w[:, 1] * e[:, 0]) / np.where(ok, denom, 1), np.inf)
        u = np.where(ok, (w[:, 0] * d[1] - w[:, 1] * d[0]) / np.where(ok, denom, 1), -1)
        ts = np.sort(t[ok & (u >= 0) & (u <= 1) & (t > 0.05) & (t <= reach)])
        if ts.size:
            first[k] = ts[0]
        if ts.size > 1:
            second[k] = ts[1]
    return first, second


def test_ray_crossings_all_at_once_equal_one_ray_at_a_time():
    # three wavy parallel boundaries 3 and 4 px apart (a wall beside a slot), vertices on a
    # quarter-pixel grid so that rays also pass exactly through vertices (two segments, one t)
    rng = np.random.default_rng(8)
    x = np.arange(0, 200, 0.5)
    lines = [np.column_stack([x, y0 + 0.6 * np.sin(x / 9 + y0)]) for y0 in (10.0, 13.0, 17.0)]
    lines = [np.round(line * 4) / 4 for line in lines]
    seg_a = np.concatenate([line[:-1] for line in lines])
    seg_b = np.concatenate([line[1:] for line in lines])
    pick = rng.choice(len(lines[0]), 300, replace=False)
    p = lines[0][pick]
    angle = rng.uniform(np.pi / 4, 3 * np.pi / 4, len(p))
    direction = np.column_stack([np.cos(angle), np.sin(angle)])
    for reach in (5.0, 12.0):
        got = thin._crossings(p, direction, seg_a, seg_b, reach)
        want = _brute_force_crossings(p, direction, seg_a, seg_b, reach)
        np.testing.assert_array_equal(got[0], want[0])
        np.testing.assert_array_equal(got[1], want[1])
    assert np.isfinite(got[1]).sum() > 100  # rays that cross both other boundaries: not vacuous


def test_ball_pairs_are_the_k_d_trees():
    """thin._ball_pairs (a grid of cells) against scipy's cKDTree.query_ball_point (the reference):
    the same centres for every query, grouped by query in order; queries on centres and empty sets too."""
    rng = np.random.default_rng(4)
    pairs = 0
    for i in range(150):
        centres = rng.uniform(-50, 300, (int(rng.integers(0, 300)), 2))
        queries = rng.uniform(-60, 320, (int(rng.integers(0, 200)), 2))
        if i % 4 == 0 and len(centres) and len(queries):
            n = min(len(centres), len(queries))
            queries[:n] = centres[:n]  # at distance 0, and others exactly as far as their neighbours
        radius = float(rng.uniform(0.1, 40))
        query, centre = thin._ball_pairs(centres, queries, radius)
        assert np.all(np.diff(query) >= 0)
        got = [sorted(centre[query == k].tolist()) for k in range(len(queries))]
        want = (
            [sorted(c) for c in scipy.spatial.cKDTree(centres).query_ball_point(queries, radius)]
            if len(centres) and len(queries)
            else [[] for _ in queries]
        )
        assert got == want
        pairs += len(query)
    assert pairs > 1000


def test_convex_hull_with_duplicates_matches_shapely():
    from shapely.geometry import MultiPoint

    from scanmass.section import convex_hull

    rng = np.random.default_rng(11)
    for _ in range(20):
        pts = np.round(rng.normal(size=(int(rng.integers(50, 2000)), 2)) * 4) / 4  # many duplicates
        pts = np.concatenate([pts, pts[: len(pts) // 3]])
        hull = convex_hull(pts)
        # source: shapely (GEOS) computes the hull of the same points, collinear points dropped
        want = MultiPoint([tuple(p) for p in pts]).convex_hull.exterior.coords[:-1]
        assert {tuple(p) for p in hull.tolist()} == {tuple(p) for p in want}
        assert len(hull) == len(want)
        first = np.lexsort((pts[:, 1], pts[:, 0]))[0]
        assert hull[0].tolist() == pts[first].tolist()  # starts at the lowest x, then lowest y


# ---------------------------------------------------------------- closed slots' pre-test


def _fin_plate(wall_px: float, *, fin: bool, slot: bool, dpi: float = 600) -> SynthPart:
    """A 12 x 8 mm plate, with a fin ``wall_px`` wide standing out of it and/or a slot as wide in it."""
    w = wall_px * 25.4 / dpi
    top = [[11 + w / 2, 13], [11 + w / 2, 18], [11 - w / 2, 18], [11 - w / 2, 13]] if fin else []
    outer = np.array([[5, 5], [17, 5], [17, 13], *top, [5, 13]], float)
    return SynthPart(outer, [rectangle(7.0, 7.0, w, 4.0)] if slot else [])


def _closed_slots_both_ways(monkeypatch, img, rings):
    """closed_slots with its pre-test, and with the pre-test forced to run the full search."""
    seen: list[bool] = []
    gate = thin.dips_possible

    def recording(*args, **kwargs):
        seen.append(gate(*args, **kwargs))
        return seen[-1]

    monkeypatch.setattr(thin, "dips_possible", recording)
    gated = thin.closed_slots(img, rings)
    monkeypatch.setattr(thin, "dips_possible", lambda *args, **kwargs: True)
    full = thin.closed_slots(img, rings)
    return gated, full, seen


@pytest.mark.parametrize(
    "what, part, dark, finds",
    [
        ("slot and wall", _fin_plate(1.2, fin=True, slot=True), True, ("narrow slot", "thin wall")),
        ("slot only", _fin_plate(1.2, fin=False, slot=True), True, ("narrow slot",)),
        ("wall only", _fin_plate(1.2, fin=True, slot=False), True, ("thin wall",)),
        ("wall only, bright part", _fin_plate(1.2, fin=True, slot=False), False, ("thin wall",)),
        ("slot only, bright part", _fin_plate(1.2, fin=False, slot=True), False, ("narrow slot",)),
        ("plain plate", _fin_plate(1.2, fin=False, slot=False), True, ()),
        ("plain plate, bright part", _fin_plate(1.2, fin=False, slot=False), False, ()),
        ("disc with a hole", SynthPart(circle(11, 11, 6), [circle(11, 11, 2)]), True, ()),
    ],
)
def test_dip_pre_test_skips_only_parts_without_dips(monkeypatch, what, part, dark, finds):
    # the full search of closed_slots (pre-test forced to pass) is the reference: with the
    # pre-test the result is the same, a slot or wall too narrow for any contour (closed
    # form: a 1.2 px strip under a 1.33 px blur peaks at erf(1.2 / (2 sqrt 2 1.33)) = 0.34
    # of the contrast) is still found, and a part without one skips the surfaces' work
    levels = {"background": 0.85, "foreground": 0.08} if dark else {"background": 0.08, "foreground": 0.85}
    scan = render_scan(
        [part], dpi=600, size_mm=(22, 23), blur_px=1.33, noise=0.004, illumination=(0.05, -0.03), seed=3, **levels
    )
    img = load_image(scan.image, dpi=600)
    found = segment(img, min_area_px=50).parts
    assert len(found) == 1, what
    (pts, notes), (pts_full, notes_full), seen = _closed_slots_both_ways(monkeypatch, img, found[0])
    np.testing.assert_array_equal(pts, pts_full)
    assert notes == notes_full
    # skipped exactly when there is nothing to find (a wall cut by the crop is searched again
    # with a longer reach: the pre-test runs once per search)
    assert seen and all(s == bool(finds) for s in seen), (what, seen)
    for kind in finds:
        assert any(kind in n for n in notes), (what, notes)


def test_surface_bounds_hold_every_value_of_the_grid():
    from scanmass.segment.dipgate import surface_bounds

    rng = np.random.default_rng(7)
    shape = (731, 1217)
    for trial in range(20):
        coef = rng.normal(0.0, [0.3, 0.2, 0.2, 0.1, 0.1 if trial % 2 else 0.0, 0.1])  # odd trials: a cross term
        coef[0] += 0.5
        coef[1:] *= 10.0 ** (trial % 4)  # up to large terms that cancel (a wild extrapolation)
        scale = float(max(shape))

        def fit(r, c, coef=coef):
            x, y = np.asarray(c) / scale, np.asarray(r) / scale
            return coef[0] + coef[1] * x + coef[2] * y + coef[3] * x * x + coef[4] * x * y + coef[5] * y * y

        grid = thin._on_grid(fit, shape)  # the float32 surface closed_slots normalises with
        lo, hi = surface_bounds(fit, shape)
        assert lo <= float(grid.min()) and float(grid.max()) <= hi  # the float32 grid too: no margin needed
        if coef[4] == 0.0:  # separable: the bounds are the grid's own extremes (float32 rounding)
            tol = 1e-5 * max(1.0, float(np.abs(grid).max()))
            assert float(grid.min()) == pytest.approx(lo, abs=tol)
            assert float(grid.max()) == pytest.approx(hi, abs=tol)


@pytest.mark.parametrize("dtype, levels", [(np.uint8, 256), (np.uint16, 65536)])
def test_table_lookup_equals_numpy_indexing(dtype, levels):
    from scanmass.load.decode import lookup

    rng = np.random.default_rng(1)
    codes = rng.integers(0, levels, (301, 457)).astype(dtype)
    for table in (rng.random(levels).astype(np.float32), rng.random(levels), (np.arange(levels) % 7 == 0)):
        crop = codes[13:250, 21:400]  # a view with the parent's row stride
        got = lookup(table.astype(np.uint8) if table.dtype == bool else table, crop)
        want = (table.astype(np.uint8) if table.dtype == bool else table)[crop]  # numpy's indexing: the reference
        assert got.dtype == want.dtype
        np.testing.assert_array_equal(got, want)


def test_flat_indices_to_rows_and_columns_equal_divmod():
    from scanmass.numeric import flat_rc, nonzero_rc

    rng = np.random.default_rng(4)
    mask = rng.random((517, 1033)) < 0.3
    flat = np.flatnonzero(mask)
    rows, cols = flat_rc(flat, mask.shape[1])
    want = np.divmod(flat, mask.shape[1])  # numpy's divmod: the reference
    np.testing.assert_array_equal(rows, want[0])
    np.testing.assert_array_equal(cols, want[1])
    for got, ref in zip(nonzero_rc(mask), np.nonzero(mask)):
        np.testing.assert_array_equal(got, ref)


# ------------------------------------------------------------------------- BLAS threads


def test_measure_runs_its_linear_algebra_on_one_blas_thread(monkeypatch):
    threadpoolctl = pytest.importorskip("threadpoolctl")
    from scanmass.pipeline import flow

    def blas_threads() -> list[int]:
        return [i["num_threads"] for i in threadpoolctl.threadpool_info() if i["user_api"] == "blas"]

    before = blas_threads()
    inside: list[list[int]] = []
    real = flow.measure_scan

    def spying(*args, **kwargs):
        inside.append(blas_threads())
        return real(*args, **kwargs)

    monkeypatch.setattr(flow, "measure_scan", spying)
    img = np.full((200, 300), 230, np.uint8)
    img[50:150, 100:200] = 20
    m = flow.measure(img, dpi=254)
    # a 100 x 100 px square at 254 dpi: 10 x 10 mm (exact arithmetic)
    assert m.parts[0].area_mm2 == pytest.approx(100.0, rel=1e-3)
    assert inside and inside[0] and all(n == 1 for n in inside[0]), inside
    assert blas_threads() == before  # restored


@pytest.mark.parametrize("step", [1, 2, 7, 100, 10_000])
@pytest.mark.parametrize("rows_per_block", [1, 5, 256])
def test_every_nth_true_pixel_in_blocks_equals_slicing_all(step, rows_per_block):
    from scanmass.numeric import nonzero_every

    rng = np.random.default_rng(step + rows_per_block)
    mask = rng.random((313, 207)) < 0.4
    mask[100:140] = False  # empty rows inside a block and across blocks
    want = [a[::step] for a in np.nonzero(mask)]  # numpy's nonzero, sliced: the reference
    got = nonzero_every(mask, step, rows_per_block=rows_per_block)
    for g, w in zip(got, want):
        np.testing.assert_array_equal(g, w)


def test_edge_sigma_alone_equals_the_models():
    from scanmass.uncertainty import build_edge_model, edge_sigma_mm

    rng = np.random.default_rng(5)
    t = np.linspace(0, 2 * np.pi, 90, endpoint=False)
    outer = np.column_stack([20 + 9 * np.cos(t), 20 + 6 * np.sin(t)])[::-1]  # clockwise: reversed inside
    hole = np.column_stack([20 + 2 * np.cos(t[:40]), 20 + 2 * np.sin(t[:40])])  # counter-clockwise: reversed
    sigma = [rng.random(len(outer)), rng.random(len(hole))]
    scales = [0.08 + 0.01 * rng.random(len(outer)), np.full(len(hole), 0.085)]
    model = build_edge_model(outer, [hole], sigma, scales, 0.0)  # the full model: the reference
    np.testing.assert_array_equal(edge_sigma_mm(outer, [hole], sigma, scales), model.sigma_n_mm)


def test_dip_pre_test_runs_the_search_whenever_the_bounds_cannot_decide():
    from scanmass.segment.dipgate import dips_possible

    table = (np.arange(256) / 255.0).astype(np.float32)  # linear codes: code / 255
    codes = np.full((40, 50), 204, np.uint8)  # background 0.8
    codes[:, :25] = 77  # part 0.302
    part = np.zeros(codes.shape, bool)
    part[:, :25] = True
    regions = (part, ~part)
    none = np.zeros(codes.shape, bool)

    def flat(level):
        return lambda r, c: np.full(np.shape(r), level)

    # levels 0.3 (part) and 0.8 (background): the part's pixels are 0.004 of the contrast
    # short of its level, the background's at it; no pixel dips by a share of 0.2 ...
    assert not dips_possible(codes, table, regions, flat(0.8), flat(0.3), 0.2)
    # ... but the part's pixels do by a share of 0.003
    assert dips_possible(codes, table, regions, flat(0.8), flat(0.3), 0.003)
    # the part's pixels searched outside it: ridges of the full share (a wall)
    assert dips_possible(codes, table, (none, part), flat(0.8), flat(0.3), 0.2)
    # a limit outside (0, 1), levels not apart, or a part level that crosses the background
    # somewhere in the crop: the full search runs
    assert dips_possible(codes, table, (none, none), flat(0.8), flat(0.3), 1.2)
    assert dips_possible(codes, table, (none, none), flat(0.8), flat(0.8), 0.2)

    def tilted(r, c):
        return 0.3 + 0.02 * np.asarray(c, float)  # 0.3 to 1.28 across the 50 columns

    assert dips_possible(codes, table, (none, none), flat(0.8), tilted, 0.2)
    # nothing searched: nothing to find
    assert not dips_possible(codes, table, (none, none), flat(0.8), flat(0.3), 0.003)


# ------------------------------------------------------------------ markers through crops


def _mat_photo(tilt: float, roll: float, hide: list[int]) -> np.ndarray:
    from scanmass.scale.mat import make_mat
    from scanmass.testing.photos import PhotoParts, make_camera, render_photo

    cam = make_camera(
        size=(2400, 1800), f_px=2250.0, tilt_deg=tilt, tilt_dir_deg=40.0, roll_deg=roll, distance_mm=470.0
    )
    part = PhotoParts(rectangle(70.0, 90.0, 80.0, 50.0, angle_deg=17.0), [circle(100.0, 115.0, 8.0, 256)])
    img = render_photo(make_mat("a4-portrait"), [part], cam, seed=int(tilt) + 1, hide_ids=hide)
    return img if img.ndim == 2 else img[..., 0]


def _whole_image_calls(monkeypatch, shape: tuple[int, int]) -> list[tuple[int, ...]]:
    from scanmass.scale import markerfind

    calls: list[tuple[int, ...]] = []
    whole = markerfind._whole

    def spy(grey, detector):
        if grey.shape == shape:
            calls.append(grey.shape)
        return whole(grey, detector)

    monkeypatch.setattr(markerfind, "_whole", spy)
    return calls


@pytest.mark.parametrize(
    "tilt, roll, hide, all_tied",
    [(0.0, 90.0, [], False), (25.0, 70.0, [], False), (15.0, 100.0, [5, 17], False), (25.0, 70.0, [], True)],
)
def test_markers_through_crops_equal_opencvs_whole_image_search(monkeypatch, tilt, roll, hide, all_tied):
    """OpenCV's ArucoDetector on the whole photo is the reference: same ids, order and corners, bit for bit.

    ``all_tied``: every perimeter taken as equal, so that the order comes entirely from the
    detector's scan order rebuilt from the crops' candidates.
    """
    from scanmass.scale import markerfind
    from scanmass.scale.markers import _detector

    grey = np.ascontiguousarray(_mat_photo(tilt, roll, hide))
    detector = _detector("DICT_5X5_250")
    ref_corners, ref_ids, _ = detector.detectMarkers(grey)
    assert ref_ids is not None and len(ref_ids) >= 18
    if all_tied:
        monkeypatch.setattr(markerfind, "TIE_PX", 1e9)
    whole = _whole_image_calls(monkeypatch, grey.shape)
    corners, ids = markerfind.find_markers(grey, detector)
    assert whole == []  # the crops sufficed
    assert ids.tolist() == ref_ids.ravel().tolist()
    assert corners.dtype == np.float32
    assert np.array_equal(corners, np.stack([c.reshape(4, 2) for c in ref_corners]))


def test_markers_missed_in_the_reduced_copy_are_found_where_the_layout_puts_them(monkeypatch):
    """A marker the reduced copy does not show is searched where the mat's layout predicts it."""
    from scanmass.scale import markerfind
    from scanmass.scale.markers import _detector, expected_quads
    from scanmass.scale.mat import make_mat

    grey = np.ascontiguousarray(_mat_photo(20.0, 80.0, []))
    detector = _detector("DICT_5X5_250")
    ref_corners, ref_ids, _ = detector.detectMarkers(grey)
    whole = markerfind._whole
    dropped = int(ref_ids.ravel()[3])

    def blind(g, d):  # the reduced copy misses one marker
        corners, ids = whole(g, d)
        if g.shape != grey.shape and len(ids) > 6:
            keep = ids != dropped
            return corners[keep], ids[keep]
        return corners, ids

    monkeypatch.setattr(markerfind, "_whole", blind)
    corners, ids = markerfind.find_markers(grey, detector)
    assert dropped not in ids.tolist()  # nowhere searched for
    mat = make_mat("a4-portrait")
    corners, ids = markerfind.find_markers(grey, detector, lambda i, q: expected_quads(mat, i, q))
    assert ids.tolist() == ref_ids.ravel().tolist()
    assert np.array_equal(corners, np.stack([c.reshape(4, 2) for c in ref_corners]))


def _masked_whole_image(grey: np.ndarray, roi_px: np.ndarray) -> np.ndarray:
    """The clear-area masking done on the whole image (the way it was done before the bounding box)."""
    import cv2

    mask = np.zeros(grey.shape, np.uint8)
    cv2.fillPoly(mask, [np.round(roi_px).astype(np.int32)], 1)
    inner = cv2.erode(mask, np.ones((3, 3), np.uint8), iterations=2).astype(bool)
    band = inner & ~cv2.erode(mask, np.ones((3, 3), np.uint8), iterations=8).astype(bool)
    values = grey[band]
    level = np.median(values) if values.size else np.median(grey[inner])
    out = grey.copy()
    out[~mask.astype(bool)] = np.asarray(level, dtype=grey.dtype)
    return out


@pytest.mark.parametrize("seed", range(12))
def test_clear_area_mask_in_its_bounding_box_equals_the_whole_images(seed):
    """Masking outside the clear area within its padded bounding box gives the whole-image result,
    also for areas that cross the image's edges or lie in a corner, and for 16-bit planes."""
    from scanmass.pipeline.photo_checks import _mask_outside

    rng = np.random.default_rng(seed)
    dtype = np.uint16 if seed % 3 == 2 else np.uint8
    grey = rng.integers(0, 200 if dtype == np.uint8 else 50000, size=(181, 263)).astype(dtype)
    centre = rng.uniform([-20, -20], [283, 201])
    angles = np.sort(rng.uniform(0, 2 * np.pi, 7))
    radius = rng.uniform(15, 160, 7)
    roi = centre + np.column_stack([radius * np.cos(angles), radius * np.sin(angles)])
    roi = roi[:, ::1] if seed % 2 else roi[::-1]  # either orientation
    image = load_image(grey)
    assert np.array_equal(image.grey, grey)
    got = _mask_outside(image, roi)
    assert got.grey.dtype == grey.dtype
    assert np.array_equal(got.grey, _masked_whole_image(grey, roi))


def _same_properties(a, b) -> bool:
    import dataclasses

    for f in dataclasses.fields(a):
        x, y = np.asarray(getattr(a, f.name), float), np.asarray(getattr(b, f.name), float)
        if not np.array_equal(x, y, equal_nan=True):
            return False
    return True


@pytest.mark.parametrize("seed", range(8))
def test_sampled_figures_all_at_once_equal_one_sample_at_a_time(seed):
    """The scale term's sampled sections, computed all at once, give section_properties' floats bit for bit."""
    from scanmass.section import sampled_figures, section_properties

    rng = np.random.default_rng(seed)
    n = int(rng.integers(5, 900))
    t = np.linspace(0, 2 * np.pi, n, endpoint=False)
    outer = np.column_stack([40 + 25 * np.cos(t) * (1 + 0.2 * np.sin(3 * t)), 30 + 18 * np.sin(t)])
    holes = [circle(35.0, 30.0, 4.0, int(rng.integers(8, 200)))[::-1], circle(50.0, 28.0, 2.5, 64)][: seed % 3]
    if seed % 2:
        outer = outer[::-1]  # clockwise: turned by both paths
    samples = []
    for _ in range(int(rng.integers(2, 40))):
        g = np.eye(3) + rng.normal(0, 1e-3, (3, 3)) * [[1, 1, 10], [1, 1, 10], [1e-4, 1e-4, 0]]
        g[2, 2] = 1.0

        def warp(r, g=g):
            h = np.column_stack([r, np.ones(len(r))]) @ g.T
            return h[:, :2] / h[:, 2:]

        samples.append((warp(outer), tuple(warp(h) for h in holes)))
    got = sampled_figures(samples)
    assert got is not None
    for sp, (o, h) in zip(got, samples):
        assert _same_properties(sp, section_properties(o, list(h), hull=False))


def test_sampled_figures_leave_unlike_samples_to_the_one_at_a_time_path():
    from scanmass.section import sampled_figures

    square = np.array([[0.0, 0.0], [4.0, 0.0], [4.0, 4.0], [0.0, 4.0]])
    assert sampled_figures([(square, ()), (np.vstack([square, [[0.0, 2.0]]]), ())]) is None  # vertex counts
    assert sampled_figures([(square, ()), (square[::-1], ())]) is None  # orientations differ
    assert sampled_figures([(np.vstack([square, square[:1]]), ())]) is None  # a closing vertex
    assert sampled_figures([(square, ()), (square * [1, 0], ())]) is None  # a flat ring: the error is raised there
    assert sampled_figures([(square, ()), (square + 1.0, ())]) is not None


# ------------------------------------------------------------- region of interest


def _same_value(a, b) -> bool:
    """Equal to the bit: arrays by dtype, shape and bytes; dataclasses field by field; NaN equals NaN."""
    import dataclasses

    if isinstance(a, np.ndarray) or isinstance(b, np.ndarray):
        a, b = np.asarray(a), np.asarray(b)
        return a.dtype == b.dtype and a.shape == b.shape and a.tobytes() == b.tobytes()
    if type(a) is not type(b):
        return False
    if dataclasses.is_dataclass(a):
        return all(_same_value(getattr(a, f.name), getattr(b, f.name)) for f in dataclasses.fields(a))
    if isinstance(a, (list, tuple)):
        return len(a) == len(b) and all(_same_value(x, y) for x, y in zip(a, b))
    if isinstance(a, dict):
        return a.keys() == b.keys() and all(_same_value(a[k], b[k]) for k in a)
    if isinstance(a, float) and math.isnan(a):
        return isinstance(b, float) and math.isnan(b)
    return a == b


@pytest.mark.parametrize("seed", range(6))
@pytest.mark.parametrize("threshold", [None, 0.5])
def test_segment_in_the_regions_box_equals_the_whole_plane(monkeypatch, seed, threshold):
    """With a region of interest the mask is thresholded and traced in the region's box only;
    the parts, holes, order and cut flags are those of tracing the whole plane (the reference:
    the same code with the box forced to the whole image), for regions inside the image,
    across its edges, through parts and holes, and around none."""
    from scanmass.errors import SegmentationError
    from scanmass.segment import rings as rings_mod

    mm = 25.4 / 300
    parts = [
        SynthPart(circle(20, 20, 12), [circle(20, 20, 5)]),
        SynthPart(rectangle(45, 8, 25, 30), [rectangle(55, 12, 30 * mm, 20)]),
        SynthPart(circle(62, 50, 7)),
    ]
    scan = render_scan(parts, dpi=300, shape_px=(700, 900), blur_px=1.0, noise=0.004, seed=seed)
    image = load_image(scan.image)
    rng = np.random.default_rng(seed)
    centre = rng.uniform([-50, -50], [950, 750])
    angles = np.sort(rng.uniform(0, 2 * np.pi, 9))
    radius = rng.uniform(200, 700, 9)
    roi = centre + np.column_stack([radius * np.cos(angles), radius * np.sin(angles)])

    def run():
        try:
            return segment(image, roi_px=roi, keep_cut=True, threshold=threshold)
        except SegmentationError as exc:
            return str(exc)

    boxed = run()
    # a box smaller than the image, and parts found in it (not a comparison of two errors)
    assert rings_mod._roi_box(np.round(roi).astype(np.int32), 900, 700) != (0, 0, 900, 700)
    assert not isinstance(boxed, str) and boxed.parts
    monkeypatch.setattr(rings_mod, "_roi_box", lambda poly, width, height: (0, 0, width, height))
    whole = run()
    assert _same_value(boxed, whole)


@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_row_medians_without_nans_equal_numpys_nanmedian(dtype):
    """nanmedian_rows gives numpy's np.nanmedian(axis=1) bit for bit (the reference: numpy itself):
    NaN gaps, all-NaN rows, ties, signed zeros, infinities of both signs, and rows of 600 or more."""
    import warnings

    from scanmass.numeric import nanmedian_rows

    rng = np.random.default_rng(7)
    for k in range(600):
        rows, cols = int(rng.integers(1, 30)), int(rng.integers(1, 25)) if k % 50 else 640
        a = rng.normal(size=(rows, cols)).astype(dtype)
        if k % 3 == 0:
            a = np.round(a, 1)  # ties
        if k % 5 == 0:
            a[rng.random(a.shape) < 0.3] = -0.0
        a[rng.random(a.shape) < rng.random()] = np.nan
        if k % 7 == 0:
            a[rng.random(a.shape) < 0.1] = np.inf
        if k % 11 == 0:
            a[rng.random(a.shape) < 0.1] = -np.inf
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            want = np.nanmedian(a, axis=1)
        got = nanmedian_rows(a)
        assert got.dtype == want.dtype and got.tobytes() == want.tobytes()


def test_median_of_a_short_array_equals_numpys():
    """median_1d gives np.median's float bit for bit (the reference: numpy itself): odd and even
    counts, ties, signed zeros (numpy's mean makes -0 +0), infinities, NaN (left to numpy)."""
    import warnings

    from scanmass.numeric import median_1d

    rng = np.random.default_rng(3)
    for k in range(3000):
        n = int(rng.integers(1, 130))
        a = rng.normal(size=n)
        if k % 3 == 0:
            a = np.round(a, 1)
        if k % 5 == 0:
            a[rng.random(n) < 0.4] = -0.0
        if k % 7 == 0:
            a[rng.random(n) < 0.1] = np.inf
        if k % 11 == 0:
            a[rng.random(n) < 0.1] = -np.inf
        if k % 13 == 0:
            a[rng.random(n) < 0.05] = np.nan
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # inf - inf, as numpy's own
            want, got = np.median(a), median_1d(a)
        assert type(got) is type(want) and np.asarray(got).tobytes() == np.asarray(want).tobytes()


def test_rays_both_ways_in_one_search_equal_each_way_alone():
    """symmetry._frame looks along each edge point's normal both ways in one thin._crossings call:
    the same distances as one call per direction (each ray is tested against every segment in
    its reach, whatever the other rays are), on a part with a hole, rays through vertices too."""
    t = np.linspace(0, 2 * np.pi, 720, endpoint=False)
    outer = np.round(np.column_stack([100 + 60 * np.cos(t), 80 + 40 * np.sin(t) + np.sin(7 * t)]) * 4) / 4
    hole = np.round(np.column_stack([110 + 15 * np.cos(t[::4]), 80 + 12 * np.sin(t[::4])]) * 4) / 4
    seg_a = np.concatenate([outer, hole])
    seg_b = np.concatenate([np.roll(outer, -1, axis=0), np.roll(hole, -1, axis=0)])
    pts = outer[::3]
    normals = thin._normals(outer, True)[::3]
    for reach in (6.0, 25.0, 90.0):
        both = thin._crossings(np.concatenate([pts, pts]), np.concatenate([-normals, normals]), seg_a, seg_b, reach)
        inward = thin._crossings(pts, -normals, seg_a, seg_b, reach)
        outward = thin._crossings(pts, normals, seg_a, seg_b, reach)
        for k in range(2):
            np.testing.assert_array_equal(both[k], np.concatenate([inward[k], outward[k]]))
    assert np.isfinite(inward[0]).sum() > 50  # the far side and the hole are within the last reach


def test_profile_maps_sampled_in_long_rows_equal_one_remap():
    """thin.edge_residual_px samples its (vertices x offsets) maps through numeric.sample_points:
    the same values as OpenCV's remap of the maps as they are (the reference), bicubic,
    points past the crop's edge included (replicated border)."""
    import cv2

    from scanmass.numeric import sample_points

    rng = np.random.default_rng(11)
    for _ in range(20):
        lin = rng.random((int(rng.integers(20, 120)), int(rng.integers(20, 120))), dtype=np.float32)
        n = int(rng.integers(1, 900))
        map_x = rng.uniform(-3, lin.shape[1] + 3, (n, 22)).astype(np.float32)
        map_y = rng.uniform(-3, lin.shape[0] + 3, (n, 22)).astype(np.float32)
        want = cv2.remap(lin, map_x, map_y, cv2.INTER_CUBIC, borderMode=cv2.BORDER_REPLICATE)
        np.testing.assert_array_equal(sample_points(lin, map_x, map_y, cv2.INTER_CUBIC), want)


def test_shoelace_without_rolled_copies_equals_the_rolled_form():
    """geometry.signed_area lays the terms x_i y_(i+1) - x_(i+1) y_i out without np.roll: bit for
    bit the rolled form (written here), and within rounding shapely's orientation-signed area
    (the reference), on random rings of 3 to 5000 vertices, closed and open."""
    from shapely.geometry import Polygon

    from scanmass.geometry import signed_area

    rng = np.random.default_rng(12)
    for i in range(300):
        ring = rng.normal(size=(int(rng.integers(3, 5000)), 2)) * rng.uniform(0.01, 1e4)
        if i % 5 == 0:
            ring = np.vstack([ring, ring[:1]])  # a repeated closing vertex is dropped
            d = ring[:-1] - ring[:-1].mean(axis=0)
        else:
            d = ring - ring.mean(axis=0)
        rolled = float((d[:, 0] * np.roll(d[:, 1], -1) - np.roll(d[:, 0], -1) * d[:, 1]).sum() / 2.0)
        assert signed_area(ring) == rolled
    square = np.array([[0.0, 0.0], [3.0, 0.0], [3.0, 2.0], [0.0, 2.0]])
    assert signed_area(square) == Polygon(square).area == 6.0  # counter-clockwise: positive
    tri = rng.uniform(0, 10, (3, 2))
    poly = Polygon(tri)
    sign = 1.0 if poly.exterior.is_ccw else -1.0
    assert signed_area(tri) == pytest.approx(sign * poly.area, rel=1e-12)


@pytest.mark.parametrize("seed", range(4))
def test_contours_traced_in_the_masks_box_equal_the_whole_planes(seed):
    """segment traces its part mask in the bounding box of the set pixels: OpenCV's findContours on
    that box, offset back, gives the whole plane's contours, order and hierarchy (the reference),
    for random blobs with holes, islands in holes, specks and pixels on the plane's edges."""
    import cv2

    rng = np.random.default_rng(seed)
    for _ in range(25):
        h, w = int(rng.integers(20, 200)), int(rng.integers(20, 200))
        mask = np.zeros((h, w), np.uint8)
        for _ in range(int(rng.integers(0, 6))):
            c = (int(rng.integers(0, w)), int(rng.integers(0, h)))
            r = int(rng.integers(1, 25))
            cv2.circle(mask, c, r, 255, -1)
            if r > 6 and rng.random() < 0.6:
                cv2.circle(mask, c, r // 2, 0, -1)  # a hole
                cv2.circle(mask, c, r // 5, 255, -1)  # an island in it
        specks = rng.random((h, w)) < 0.002
        mask[specks] = 255
        if rng.random() < 0.3:
            mask[0, int(rng.integers(0, w))] = 255  # on the edge of the plane
        want = cv2.findContours(mask, cv2.RETR_CCOMP, cv2.CHAIN_APPROX_SIMPLE, offset=(5, 7))
        x, y, bw, bh = cv2.boundingRect(mask)
        if bw == 0:
            assert not want[0]
            continue
        got = cv2.findContours(
            mask[y : y + bh, x : x + bw], cv2.RETR_CCOMP, cv2.CHAIN_APPROX_SIMPLE, offset=(5 + x, 7 + y)
        )
        assert len(got[0]) == len(want[0])
        for a, b in zip(got[0], want[0]):
            np.testing.assert_array_equal(a, b)
        np.testing.assert_array_equal(got[1], want[1])
