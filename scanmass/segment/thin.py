"""Thin walls, narrow slots and grey-level quantisation at a part's edges.

The midpoint rule places an edge where the normalised image (0 = background, 1 = part)
crosses 0.5. Where the two edges of a wall (or of a slot) are closer than a few blur
widths, the profile across the wall never reaches the part level and the 0.5 crossings
move towards each other: the wall comes out too thin and a slot too narrow.

What stays exact for any blur is the integral across the wall: convolving the wall's
indicator (width ``w``) with any point spread function of unit integral, and integrating
over square pixels, keeps its integral, so

    integral of (I(s) - b) / (f - b) ds = w

along a line across a straight wall (isotropic blur), given the background level ``b``
and the part's own level ``f``. :func:`resolve_walls` measures that integral along the
normal at every boundary point of a wall (or slot) narrower than a few blur widths and
puts both edges of the wall symmetrically about the midpoint rule's centre line, ``w``
apart (both edges fitted together). That holds where the wall is straight for a few blur
widths either side of the line; near a wall's end (a fin's tip, its root on a thick
region, a slot's ends) the edges take the wall's interior correction and a window over the
end sets the area there by the same integral in two dimensions
(:mod:`scanmass.segment.wallends`). Where a slot barely opens (its dip just past the
midpoint) or a wall barely closes, the 0.5 contour pinches and its two sides touch or
cross; a profile from such a fold starts and ends on the wrong level for the feature it
seems to cross (a "wall" of 0.1 px between material on both sides), so its integral says
nothing about that feature: such vertices are put on the chord between their neighbours
along the side (the wall is straight over the blur's reach, the rule's own premise) and
carry half the feature's width as uncertainty. The part's level comes from its thick regions, or
from another part of the same material in the image, or, failing both, from the wall's
own profile: with the blur known, the peak ``P`` and integral ``J`` of the profile fix
``f`` through ``P = f erf(J / (2 sqrt 2 sigma f))`` (a Gaussian-blurred strip). Where
that cannot resolve the wall (walls under about 1.5 px, or too thin for the peak to tell
the level), a warning says so and the per-vertex uncertainty covers the size of the
correction.

:func:`edge_quantisation` gives the grey-level quantisation steps at the edge and at the
two levels, for the error model's floor (:mod:`scanmass.uncertainty`).

References
----------
.. [1] R. N. Bracewell, The Fourier Transform and Its Applications, 3rd ed., McGraw-Hill
   2000, chapter 6 (the integral of a convolution is the product of the integrals).
.. [2] C. Steger, "An unbiased detector of curvilinear structures", IEEE Trans. PAMI
   20(2), 113-125, 1998 (bias of the edges of a blurred line of finite width).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field, replace

import cv2
import numpy as np

from scanmass.geometry import signed_area, vertex_normals
from scanmass.load.decode import LoadedImage, lookup
from scanmass.numeric import nonzero_every, nonzero_rc, robust_sigma, sample_points
from scanmass.segment.closedfeat import is_sliver
from scanmass.segment.dipgate import WindowRegion, dips_possible
from scanmass.segment.rings import PartRings, correct_curvature
from scanmass.segment.wallends import (
    RAMP_PX,
    EndWindow,
    apply_end_windows,
    end_windows,
    strip_end_retreat_px,
    turning,
    wall_runs,
)

__all__ = [
    "EdgeQuantisation",
    "closed_slots",
    "WallResult",
    "edge_quantisation",
    "edge_residual_px",
    "resolve_walls",
    "strip_profile_integral",
]

#: A wall or slot narrower than this many Gaussian-equivalent blur sigmas (plus 1 px) is
#: examined: beyond it the midpoint rule's bias is below 1e-4 px (erfc tail).
THIN_SIGMAS = 5.0

#: Relative uncertainty of a part level taken from wall profiles' moments: the Gaussian
#: form of the blur and the tails cut at 3 sigma bias it by a few per cent (rendered
#: walls of 3-6 px: +1 to +3 %).
LEVEL_MODEL_REL_U = 0.03

#: A wall's own profile tells the part level only where the wall is at least this many
#: profile sigmas wide (below, erf(w / (2 sqrt 2 s)) is nearly linear in w and the peak
#: carries no more than the integral).
OWN_LEVEL_MIN_SIGMAS = 2.0

#: ... and only where the walls are at least this wide by the midpoint rule (px): a 2 px
#: wall under a 1 px blur keeps the peak equation too flat to give the level (rendered
#: rings: +20 to +30 % with the level so found).
OWN_LEVEL_MIN_WIDTH_PX = 2.5

#: ... and where the profiles' peaks reach at least this share of the level so found.
OWN_LEVEL_MIN_REACH = 0.75

#: Relative bias of a wall profile's peak from the blur's shape against the Gaussian (pixel
#: box, linear interpolation along the profile); through the peak equation it gives the
#: level's 1-3 % on walls of 3-6 px, and far more where the equation is flat.
PEAK_MODEL_REL_U = 0.01

#: ... and where the level so found is known to this relative uncertainty.
OWN_LEVEL_MAX_REL_U = 0.25

#: Walls narrower than this (px) are not resolved from their own profile.
MIN_RESOLVED_PX = 1.5


@dataclass(frozen=True)
class EdgeQuantisation:
    """Quantisation of the stored grey levels where it matters for the edge, relative to the contrast.

    ``edge_rel``: one tone-curve step at the edge level over the contrast (the per-pixel
    rounding error is this over sqrt 12); ``level_rel``: the bias of the two local levels
    from rounding, combined, over the contrast, as it moves the midpoint (relative).
    """

    edge_rel: float
    level_rel: float
    level_ratio: float = math.nan  # part level over background level (linear light)
    #: per ring (outer first), per vertex: 1-sigma edge displacement (px) from what the edge
    #: model leaves unexplained beyond the noise (:func:`edge_residual_px`); empty: not measured
    residual_px: tuple[np.ndarray, ...] = ()
    #: ... and where the profile is no single edge's (corners, narrow features): shared
    residual_shared_px: tuple[np.ndarray, ...] = ()
    #: shared displacement (px) of the outer ring's mean profile from a point-symmetric edge
    asymmetry_px: float = 0.0


@dataclass
class WallResult:
    """A part's rings after the thin-wall step, and what the error model needs from it."""

    rings: PartRings
    wall_u_px: list[np.ndarray]  # per ring (outer first), per vertex: 1-sigma of the wall correction
    corrected: int = 0  # vertices moved
    unresolved: int = 0  # vertices on walls that could not be resolved
    level_source: str = ""
    warnings: list[str] = field(default_factory=list)
    #: material the rings count that a closed narrow slot lacks (or a vanished wall adds):
    #: (K, 4) of x_px, y_px, the pixel's missing share (px^2) and the feature's id (+k a
    #: slot, -k a wall), see :func:`closed_slots`
    closed_px: np.ndarray = field(default_factory=lambda: np.zeros((0, 3)))
    #: holes (1 = the first) with a vertex on a slot too narrow to resolve (a barely open slot)
    unresolved_holes: tuple[int, ...] = ()


#: A dip inside a part is a closed slot where the normalised image falls below this (and a
#: ridge next to it a vanished wall where it rises above 1 minus this).
CLOSED_SLOT_LEVEL = 0.8

#: A hole whose normalised image stays above 1 minus this everywhere is a barely open
#: piece of a narrow slot (a 2 px slot under a 1.4 px blur dips to erf(2 / (2 sqrt 2 1.4))
#: = 0.52 of the contrast, closed form): :func:`closed_slots` looks for the slot's dip
#: through it.
CLOSED_OPEN_DEPTH = 0.65

#: Most samples fitted for each level surface of :func:`closed_slots`.
CLOSED_FIT_SAMPLES = 8000


def _on_grid(fit: Callable[..., np.ndarray], shape: tuple[int, ...]) -> np.ndarray:
    """A quadratic surface (function of row, col) on every pixel of ``shape``, from its 1-D cuts.

    ``f(r, c) = f(r, 0) + f(0, c) - f(0, 0) + k r c`` holds for any polynomial of degree 2,
    with ``k = f(1, 1) - f(1, 0) - f(0, 1) + f(0, 0)``.
    """
    rows = np.arange(shape[0], dtype=float)
    cols = np.arange(shape[1], dtype=float)
    zero_r, zero_c = np.zeros(len(rows)), np.zeros(len(cols))
    at = fit(np.array([0.0, 1.0, 1.0, 0.0]), np.array([0.0, 0.0, 1.0, 1.0]))
    k = float(at[2] - at[1] - at[3] + at[0])
    along_rows = fit(rows, zero_r)
    along_cols = fit(zero_c, cols)
    r32, c32 = rows.astype(np.float32), cols.astype(np.float32)
    grid = np.outer(r32, c32)
    grid *= np.float32(k)
    grid += along_rows.astype(np.float32)[:, None]
    grid += (along_cols - float(at[0])).astype(np.float32)[None, :]
    return grid


#: How far beyond the part's rings a vanished wall is looked for, px.
CLOSED_WALL_REACH_PX = 64


#: OpenCV's 5 x 5 chamfer transform sums its float32 steps in an order that depends on a
#: pixel's column modulo its vector width (4 with opencv-python-headless 5.1 on x86-64: a mask
#: moved right by 1-3 columns gets other last bits at some pixels, by 4 or 8 the same values);
#: a window of a crop starts at a multiple of this column so that every pixel keeps its phase.
CHAMFER_PHASE = 16


def chamfer_windows(mask: np.ndarray, reach: float) -> tuple[tuple[slice, slice], tuple[slice, slice]]:
    """The windows of ``mask`` over which OpenCV's 5 x 5 chamfer distances decide every threshold of :func:`closed_slots`.

    ``cv2.distanceTransform(m, cv2.DIST_L2, 5)`` is two raster passes, each pixel the
    least of its own start (0 on a zero pixel) and its already visited neighbours' values
    plus the step's weight (1, 1.4 or 2.1969 for a step of 1, 1 or 2 px across, each at
    least the step's Chebyshev length), so a pixel's value is the least cost of a path
    from a zero pixel, and every pixel on a path of cost ``c`` lies within ``c``
    (Chebyshev) of the path's start. Its float32 sums depend on a pixel's column phase
    (:data:`CHAMFER_PHASE`): each window starts at a multiple of that column.

    - Inside (``mask``'s own transform): the bounding box of the nonzero pixels grown by
      2 px (the passes' reach). Every pixel of the crop outside it is a zero pixel (0),
      and every nonzero pixel of the window has the same neighbours in the window as in
      the crop, so each pass gives it the same value: the window's values are the
      crop's, bit for bit.
    - Outside (the transform of ``1 - mask``, zero on the mask): the same box grown by
      ``ceil(reach) + 4`` px. A pixel beyond it lies more than ``reach + 4`` from every mask
      pixel, so its distance exceeds every threshold up to ``reach + 1``; a pixel of the
      window whose crop-wide distance is at most ``reach + 1`` has its cheapest path inside
      the window (the window holds every path of the crop from it, and the window's value
      is the least over fewer paths), so its value is the crop's, and one whose crop-wide
      distance exceeds ``reach + 1`` keeps a window value at least as large. Thresholds up
      to ``reach`` (float32 rounding is far below the 1 px margin) read the same.

    Returns the two windows as (rows, cols) slices (the whole crop for an empty mask).
    ``tests/test_exact_shortcuts.py`` compares both with the whole crop's transforms.
    """
    h, w = mask.shape
    x, y, bw, bh = cv2.boundingRect(mask)
    if bw == 0 or bh == 0:
        return (slice(0, h), slice(0, w)), (slice(0, h), slice(0, w))
    out: list[tuple[slice, slice]] = []
    for grow in (2, int(math.ceil(reach)) + 4):
        c0 = max(0, x - grow)
        c0 -= c0 % CHAMFER_PHASE  # each column keeps its phase in the vector loop
        out.append((slice(max(0, y - grow), min(h, y + bh + grow)), slice(c0, min(w, x + bw + grow))))
    return out[0], out[1]


#: OpenCV's weights of the 5 x 5 chamfer steps (1, 1 and 2 px across) as float32, the values its
#: transform adds (a one-pixel-from-zero map reads 1.0, 1.4f and 2.1969f).
CHAMFER_WEIGHTS = (1.0, float(np.float32(1.4)), float(np.float32(2.1969)))

#: Least gap (px) between a level and every chamfer path's length with a diagonal or long step for
#: :func:`chamfer_at_least` to decide by an erosion: the float32 sums of fewer than 32 steps (a
#: length under 32 px) stay within 32 half units in the last place (2^-19 px each) of the exact
#: lengths, under 4e-5 px, so no such path compares with the level otherwise (a path of straight
#: steps alone sums whole numbers, exactly).
CHAMFER_CLEAR_PX = 1e-4

#: Largest level :func:`chamfer_at_least` decides by an erosion (larger: the transform itself).
CHAMFER_ERODE_MAX_PX = 24.0

#: Rows :func:`chamfer_at_least` erodes at a time.
CHAMFER_BAND_ROWS = 256


def _clear_of_path_lengths(level: float) -> bool:
    """Whether ``level`` (as float32) lies :data:`CHAMFER_CLEAR_PX` or more from the exact length of every
    chamfer path with a diagonal or long step (the float32 weights' sums, in float64)."""
    at = float(np.float32(level))
    w1, w2, w3 = CHAMFER_WEIGHTS
    a = np.arange(int(at / w1) + 2, dtype=float)[:, None, None]
    b = np.arange(int(at / w2) + 2, dtype=float)[None, :, None]
    c = np.arange(int(at / w3) + 2, dtype=float)[None, None, :]
    lengths = a * w1 + b * w2 + c * w3  # every mix of steps up to just past the level
    lengths[:, 0, 0] = np.inf  # straight steps alone: whole numbers, summed exactly
    return bool(np.min(np.abs(lengths - at)) >= CHAMFER_CLEAR_PX)


def chamfer_ball(level: float) -> np.ndarray:
    """The offsets whose 5 x 5 chamfer length is below ``level``: a 0/1 uint8 kernel centred on (0, 0).

    Read off OpenCV's own transform (``cv2.distanceTransform(..., cv2.DIST_L2, 5)``) of a
    square with one zero pixel in its middle, compared with ``level`` as any of its maps
    is (float32 against the float). Every step of a chamfer path costs at least its
    Chebyshev length (1, 1.4 or 2.1969 for 1, 1 or 2 px across), so the offsets below
    ``level`` lie within ``ceil(level)`` px (Chebyshev) of the middle, inside the square.
    """
    reach = max(int(math.ceil(level)), 0) + 2
    grid = np.ones((2 * reach + 1, 2 * reach + 1), np.uint8)
    grid[reach, reach] = 0
    return (cv2.distanceTransform(grid, cv2.DIST_L2, 5) < level).view(np.uint8)


def chamfer_at_least(mask: np.ndarray, level: float) -> np.ndarray:
    """``cv2.distanceTransform(mask, cv2.DIST_L2, 5) >= level`` of a 0/1 uint8 mask (bool), by an erosion.

    The transform is two raster passes over the array, each pixel the least of 0 (a zero
    pixel) and its already visited neighbours' values plus the step's weight: each pixel's
    value is the float32 length of a cheapest chamfer path from a zero pixel (G.
    Borgefors [1]_; a cheapest path between two pixels stays within their bounding box,
    inside the array). Where ``level`` lies :data:`CHAMFER_CLEAR_PX` or more from every
    exact path length (:func:`_clear_of_path_lengths`), the float32 sums compare with it
    as the exact lengths do, so a pixel's value is at least ``level`` exactly where no
    zero pixel lies at an offset whose length is below it, whatever its place: the
    erosion of the mask by :func:`chamfer_ball` (no zero pixel outside the array, as the
    transform takes it), :data:`CHAMFER_BAND_ROWS` rows at a time, each band eroded with
    the rows the ball reaches above and below it. A pass of a small kernel instead of the
    transform's float map and its comparison; a level on (or within that gap of) a path's
    length, or above
    :data:`CHAMFER_ERODE_MAX_PX`, is compared on the transform itself.
    ``tests/test_exact_shortcuts.py`` compares the two on random masks.

    References
    ----------
    .. [1] G. Borgefors, "Distance transformations in digital images", Computer Vision,
       Graphics, and Image Processing 34(3), 344-371, 1986.
    """
    if level <= 0.0:
        return np.ones(mask.shape, bool)
    if level > CHAMFER_ERODE_MAX_PX or not _clear_of_path_lengths(level):
        return np.asarray(cv2.distanceTransform(mask, cv2.DIST_L2, 5) >= level)
    ball = chamfer_ball(level)
    reach = ball.shape[0] // 2
    out = np.empty(mask.shape, np.uint8)
    # a band of rows at a time, each eroded with the rows the ball reaches beyond it (the band's
    # rows stay in the cache: faster than one erosion of the whole mask)
    for r0 in range(0, mask.shape[0], CHAMFER_BAND_ROWS):
        r1 = min(r0 + CHAMFER_BAND_ROWS, mask.shape[0])
        a0, a1 = max(r0 - reach, 0), min(r1 + reach, mask.shape[0])
        eroded = cv2.erode(mask[a0:a1], ball, borderType=cv2.BORDER_CONSTANT, borderValue=1)
        out[r0:r1] = eroded[r0 - a0 : r1 - a0]
    return out.view(bool)


def _band(values: np.ndarray, low: float | None, high: float | None, rows: int = 256) -> np.ndarray:
    """``(values >= low) & (values <= high)`` (either bound left out when None), built a block of rows at a time.

    The same comparisons, in the array's own dtype as numpy makes them against a Python
    float (NEP 50: the bound is cast to float32 for a float32 array), without a second
    full-size temporary for the two halves.
    """
    out = np.ones(values.shape, bool)
    for r in range(0, values.shape[0], rows):
        block, o = values[r : r + rows], out[r : r + rows]
        if low is not None:
            np.greater_equal(block, low, out=o)
        if high is not None:
            o &= block <= high
    return out


def _two_sides(values: np.ndarray, low: float, high: float, rows: int = 256) -> np.ndarray:
    """``(values >= low)`` in bit 0 and ``(values <= high)`` in bit 1 of one uint8 plane, a block of rows at a time."""
    out = np.empty(values.shape, np.uint8)
    for r in range(0, values.shape[0], rows):
        block, o = values[r : r + rows], out[r : r + rows]
        np.greater_equal(block, low, out=o.view(bool))
        o |= (block <= high).view(np.uint8) << 1
    return out


def _window_fit(
    where: np.ndarray, window: tuple[slice, slice], codes: np.ndarray, table: np.ndarray
) -> Callable[..., np.ndarray] | None:
    """:func:`_robust_quadratic` of the linear-light values at a subsample of ``where`` (a mask over ``window`` of ``codes``)."""
    count = int(np.count_nonzero(where))
    step = max(1, count // CLOSED_FIT_SAMPLES)  # smooth surfaces: a subsample fits them
    rr, cc = nonzero_every(where, step)  # every true pixel lies in the window: the crop's order
    rr, cc = rr + window[0].start, cc + window[1].start
    return _robust_quadratic(table[codes[rr, cc]].astype(float), rr.astype(float), cc.astype(float))


def closed_slots(
    image: LoadedImage, rings: PartRings, reach_px: int = CLOSED_WALL_REACH_PX, open_holes: tuple[int, ...] = ()
) -> tuple[np.ndarray, list[str]]:
    """Narrow slots (and thin walls) the midpoint rule closed (or lost): pixels and their share.

    A slot narrower than about ``2 sigma`` (blur) never reaches the background level, so no
    0.5 contour (or only dust-sized pieces) marks it, and the part comes out whole. Inside
    the part, away from its rings, the image normalised between the local background and
    the part's own level (from its thick regions) is 1 but for noise; a connected dip below
    :data:`CLOSED_SLOT_LEVEL` whose missing share ``D = sum (1 - n)`` spread over its length
    is at most a few blur widths wide (a slot, not a dark patch) is such a slot: by the
    integral rule ``D`` is its area. Likewise a wall narrower than that never reaches the
    part's level and has no 0.5 contour: outside the part, a ridge of ``n`` attached to it
    (within ``reach_px``; a wall that runs to the edge of that reach is looked for again
    with three times the reach) is such a wall, of area ``sum n``. A hole in
    ``open_holes`` (1 = the first) whose image never gets near the background is a barely
    open piece of such a slot: the dip is looked for through it. Returns
    (K, 4) rows of x_px, y_px, the pixel's share (``1 - n`` or ``n``) and the feature's id
    (+k a slot, -k a wall), empty when none, and a warning per part with any;
    :func:`scanmass.segment.closedfeat.measure_closed` measures them.
    """
    sigma = float(rings.blur_px) if math.isfinite(rings.blur_px) and rings.blur_px > 0 else 1.0
    contrast = float(rings.contrast)
    none = np.zeros((0, 3))
    if rings.cut or not math.isfinite(contrast) or abs(contrast) < 1e-4:
        return none, []
    x0, y0, x1, y1 = rings.bbox_px
    pad = int(math.ceil(3 * sigma + 16)) + reach_px
    c0, r0 = max(0, x0 - pad), max(0, y0 - pad)
    c1, r1 = min(image.width_px, x1 + pad), min(image.height_px, y1 + pad)
    codes = image.grey[r0:r1, c0:c1]
    table = image.to_linear.astype(np.float32, copy=False)  # linear light, as float32
    mask = np.zeros(codes.shape, np.uint8)
    shift = np.array([c0, r0], float)
    cv2.fillPoly(mask, [np.round(rings.outer_px - shift).astype(np.int32)], 1)
    holes = [h for h in rings.holes_px if not is_sliver(h)]  # a slot's sliver: its dip runs through
    if holes:
        cv2.fillPoly(mask, [np.round(h - shift).astype(np.int32) for h in holes], 0)
    tail = 3.0 * max(sigma, 1.0) + 2.0
    away = 2.0 * sigma + 1.0  # away from the rings' own blurred edges
    # the distance maps, each over the window that decides it (chamfer_windows), are
    # thresholded at once and dropped; the thresholded maps stay window-sized (beyond the
    # inside window no pixel is inside, beyond the outside one every pixel is far outside)
    inner, outer = chamfer_windows(mask, tail + 12.0)
    thick = chamfer_at_least(mask[inner], tail + 1)  # the inside map's thresholds: erosions, no float map
    if np.count_nonzero(thick) < 60:
        return none, []
    # each surface is fitted as soon as its samples are known and they are dropped (the fit
    # reads nothing else): at most one float32 distance map and the least of the full-window
    # masks live together (the memory peak of a large part)
    fg_fit = _window_fit(thick, inner, codes, table)
    del thick
    np.bitwise_xor(mask, 1, out=mask)  # the outside, in place of a copy (restored below)
    outside = cv2.distanceTransform(mask[outer], cv2.DIST_L2, 5)
    np.bitwise_xor(mask, 1, out=mask)
    bg_fit = _window_fit(_band(outside, tail + 2, tail + 12), outer, codes, table)
    sides = _two_sides(outside, away, away + 2.0)
    del outside
    # made after the float map is dropped: its block of memory is not split (the process's peak
    # stays where the transform of the inside had it)
    in_region = chamfer_at_least(mask[inner], away)
    out_region = (sides & 1).view(bool)  # outside >= away
    attach_w = (sides >> 1).view(bool)  # outside <= away + 2
    del sides
    if bg_fit is None or fg_fit is None:
        return none, []
    noise = float(rings.noise_rel) if math.isfinite(rings.noise_rel) else 0.0
    limit = max(1.0 - CLOSED_SLOT_LEVEL, 6.0 * noise)
    # no pixel can pass the test below (bounds of the two surfaces): nothing to find, unless a
    # barely open piece of a slot (open_holes) widens the search region
    if not open_holes and not dips_possible(
        codes,
        table,
        (WindowRegion(inner, in_region, False), WindowRegion(outer, out_region, True)),
        bg_fit,
        fg_fit,
        limit,
    ):
        return none, []
    regions = {"inside": np.zeros(mask.shape, bool), "outside": np.ones(mask.shape, bool)}
    regions["inside"][inner] = in_region
    regions["outside"][outer] = out_region
    attach = np.zeros(mask.shape, bool)
    attach[outer] = attach_w
    del in_region, out_region, attach_w
    # the normalised image, computed in place (float32; full-size copies are the memory peak)
    lin = lookup(table, codes)
    norm_all = lin
    level = _on_grid(fg_fit, lin.shape)
    bg_map = _on_grid(bg_fit, lin.shape)
    level -= bg_map
    norm_all -= bg_map
    del bg_map
    flat = np.abs(level) <= 1e-6
    level[flat] = np.float32(np.nan)
    norm_all /= level
    del level, flat
    # a hole whose deepest pixel stays well short of the background is a piece of a narrow
    # slot the blur left barely open (the rest of it closed): the slot's dip runs through it
    pieces = []
    for k, h in enumerate(rings.holes_px, start=1):
        if k not in open_holes or is_sliver(h):
            continue  # only holes on a slot too narrow to resolve (WallResult.unresolved_holes)
        perimeter = float(np.sum(np.hypot(*(np.roll(h, -1, axis=0) - h).T)))
        if 2.0 * abs(signed_area(h)) > (2.0 * sigma + 1.0) * perimeter:
            continue  # wider than a slot the blur can close (mean width 2 A / P)
        poly = np.round(h - shift).astype(np.int32)
        lo, hi = np.maximum(poly.min(axis=0), 0), np.minimum(poly.max(axis=0) + 1, mask.shape[::-1])
        sub = np.zeros((max(hi[1] - lo[1], 1), max(hi[0] - lo[0], 1)), np.uint8)
        cv2.fillPoly(sub, [poly - lo], 1)
        values = norm_all[lo[1] : hi[1], lo[0] : hi[0]][sub[: hi[1] - lo[1], : hi[0] - lo[0]] > 0]
        values = values[np.isfinite(values)]
        if values.size and float(values.min()) > 1.0 - CLOSED_OPEN_DEPTH:
            pieces.append(poly)
    if pieces:
        filled = mask.copy()
        cv2.fillPoly(filled, pieces, 1)
        regions["inside"] = cv2.distanceTransform(filled, cv2.DIST_L2, 5) >= away
    # inside: dips below the part level (slots); outside, next to the part: ridges above the
    # background (walls that vanished), attached to the part
    found: list[tuple[float, np.ndarray]] = []
    for side, sign in (("inside", 1.0), ("outside", -1.0)):
        region = regions[side]
        # missing share: 1 - n inside (material counted that is not there), n outside; NaN
        # (no contrast) counts as 0, below any limit
        share_all = norm_all if sign < 0 else 1.0 - norm_all
        dip = ((share_all > limit) & region).astype(np.uint8)
        if not dip.any():
            continue
        grown = (cv2.dilate(dip, np.ones((3, 3), np.uint8), iterations=int(math.ceil(2 * sigma)) + 1) > 0) & region
        count, labels = cv2.connectedComponents(grown.astype(np.uint8), connectivity=8)
        for k in range(1, count):
            rr, cc = np.nonzero(labels == k)
            if rr.size < 4 or not dip[rr, cc].any():
                continue
            if sign < 0 and not attach[rr, cc].any():
                continue  # a separate object, not a wall of this part
            missing = np.clip(np.nan_to_num(share_all[rr, cc], nan=0.0), 0.0, None)
            deficit = float(missing.sum())
            # its length from the second moments of the dip (a thin strip of length L: L^2 / 12)
            w = missing / max(deficit, 1e-12)
            cr, ccn = float(np.sum(w * rr)), float(np.sum(w * cc))
            cov = np.cov(np.vstack([rr - cr, cc - ccn]), aweights=np.maximum(w, 1e-12))
            length = math.sqrt(12.0 * max(float(np.linalg.eigvalsh(cov)[-1]), 1e-9))
            if deficit < 2.0 or deficit / length > THIN_SIGMAS * sigma + 1.0:
                continue
            if sign < 0 and reach_px == CLOSED_WALL_REACH_PX:
                cut = (rr.min() == 0 and r0 > 0) or (cc.min() == 0 and c0 > 0)
                cut |= (rr.max() == r1 - r0 - 1 and r1 < image.height_px) or (
                    cc.max() == c1 - c0 - 1 and c1 < image.width_px
                )
                if cut:  # a wall longer than the reach: look again, further out
                    return closed_slots(image, rings, 3 * CLOSED_WALL_REACH_PX, open_holes)
            fid = sign * (len(found) + 1)  # + a slot, - a wall
            found.append((sign, np.column_stack([cc + c0, rr + r0, missing, np.full(rr.size, fid)])))
    if not found:
        return none, []
    pts = np.concatenate([f[1] for f in found])
    slots = sum(1 for f in found if f[0] > 0)
    walls = len(found) - slots
    what = " and ".join(
        x
        for x in (
            f"{slots} narrow slot(s) inside it that never reach the background level" if slots else "",
            f"{walls} thin wall(s) on it that never reach the part's level" if walls else "",
        )
        if x
    )
    warning = (
        f"part {rings.label}: {what}, about {pts[:, 2].sum():.0f} px2; measured from the closed profile by the "
        "integral rule (width across the ridge, ends along it) and added to or taken out of the figures, not the "
        "drawn outline; less certain than an open edge, and the uncertainty says how much (one whose width "
        "cannot be told is covered instead); scan at a higher resolution or with less blur"
    )
    return pts, [warning]


def strip_profile_integral(profile: np.ndarray, spacing_px: float, background: float, level: float) -> float:
    """Width of a strip from its sampled profile: the integral of the normalised intensity.

    Trapezoid rule over samples ``spacing_px`` apart; exact for a profile that is
    piecewise linear between the samples.

    Examples
    --------
    >>> x = np.arange(-10, 10.01, 0.05)
    >>> box = ((x > -1.5) & (x < 1.5)).astype(float) * 0.7 + 0.1  # 3 px strip, b 0.1, f 0.8
    >>> round(strip_profile_integral(box, 0.05, 0.1, 0.8), 2)
    3.0
    """
    norm = (np.asarray(profile, float) - background) / (level - background)
    return float(spacing_px * (norm.sum() - 0.5 * (norm[0] + norm[-1])))  # trapezoid rule


def edge_quantisation(image: LoadedImage, rings: PartRings) -> EdgeQuantisation:
    """Tone-curve steps at the edge and at the two levels of one part, relative to its contrast.

    The edge level is read from the stored values at the ring's vertices; the background
    and part levels lie half the contrast either side of it (linear light). The level
    bias of rounding (``D / sqrt 12`` without noise) decays as
    ``exp(-2 pi^2 s_n^2 / D^2)`` with the image noise ``s_n`` (Widrow and Kollar,
    Quantization Noise, 2008, the quantisation theorem's first term).
    """
    lut = image.to_linear
    contrast = abs(float(rings.contrast))
    if not (contrast > 0 and math.isfinite(contrast)):
        return EdgeQuantisation(0.0, 0.0)
    ring = rings.outer_px
    cols = np.clip(np.round(ring[:, 0]).astype(int), 0, image.width_px - 1)
    rows = np.clip(np.round(ring[:, 1]).astype(int), 0, image.height_px - 1)
    edge_lin = float(np.median(lut[image.grey[rows, cols]]))

    def step_at(value: float) -> float:
        i = int(np.clip(np.searchsorted(lut, value), 1, len(lut) - 1))
        return float(lut[i] - lut[i - 1])

    noise = float(rings.noise_rel) * contrast if math.isfinite(rings.noise_rel) else 0.0
    half = 0.5 * float(rings.contrast)
    bias = []
    for level in (edge_lin - half, edge_lin + half):
        d = step_at(min(max(level, 0.0), 1.0))
        bias.append(d / math.sqrt(12.0) * math.exp(-2 * math.pi**2 * noise**2 / max(d * d, 1e-30)))
    bg = edge_lin - half
    ratio = (edge_lin + half) / bg if bg > 1e-6 else math.nan
    residual, residual_shared, asymmetry = edge_residual_px(image, rings)
    return EdgeQuantisation(
        edge_rel=step_at(edge_lin) / contrast,
        level_rel=math.hypot(*bias) / (2 * contrast),
        level_ratio=ratio,
        residual_px=tuple(residual),
        residual_shared_px=tuple(residual_shared),
        asymmetry_px=asymmetry,
    )


# ------------------------------------------------------------------ edge-model residual

#: Offsets (in blur sigmas) along the normal at which each edge profile is compared with
#: the model, and the distance (sigmas, plus 2 px) of the two samples that set its levels.
RESIDUAL_OFFSETS_SIGMA = np.arange(-2.0, 2.01, 0.5)
RESIDUAL_LEVEL_SIGMAS = 3.0

#: Length (px) along the boundary over which the residual is averaged, and its correlation
#: length: the 8 px block of JPEG's discrete cosine transform (ITU-T T.81), the longest
#: stretch over which what the residual holds (block quantisation, a corner's rounding,
#: noise) is shared.
RESIDUAL_WINDOW_PX = 8.0


def edge_residual_px(image: LoadedImage, rings: PartRings) -> tuple[list[np.ndarray], list[np.ndarray], float]:
    """Edge displacement (px, 1 sigma) from what the edge model leaves unexplained, per vertex.

    At every vertex the image (linear light, Keys cubic interpolation) is sampled along the
    normal at ``t`` = -2 ... 2 blur sigmas and normalised between the levels sampled
    ``3 sigma + 2`` px either side; the model is the blurred straight edge through the
    vertex, ``Phi(t / sigma)``. What every vertex of a ring shares (the blur's shape
    against the Gaussian, a slightly wrong sigma) is the ring's mean residual profile and
    moves no edge (an even point spread function keeps the 0.5 crossing on the edge); it is
    subtracted. What is left varies from vertex to vertex: JPEG's block quantisation, the
    rounding of a corner, interpolation against the pixel phase, and the noise. Its mean
    square, averaged over :data:`RESIDUAL_WINDOW_PX` along the boundary, less the noise's
    share (the flat-region noise through the cubic interpolant, which the edge term already
    carries), is a per-pixel error of the normalised image at the edge; divided by the
    edge's gradient it is a displacement, as for noise (the law of propagation, JCGM
    100:2008 section 5.1).

    Returns one array per ring (outer first), per vertex, in the rings' vertex order.
    """
    all_rings = [rings.outer_px, *rings.holes_px]
    zero = [np.zeros(len(r)) for r in all_rings]
    contrast = float(rings.contrast)
    sigma = float(rings.blur_px)
    if not (math.isfinite(contrast) and abs(contrast) > 1e-4 and math.isfinite(sigma) and sigma > 0):
        return zero, [z.copy() for z in zero], 0.0
    x0, y0, x1, y1 = rings.bbox_px
    far_px = RESIDUAL_LEVEL_SIGMAS * sigma + 2.0
    pad = int(math.ceil(far_px + 2 * sigma + 8))
    c0, r0 = max(0, x0 - pad), max(0, y0 - pad)
    c1, r1 = min(image.width_px, x1 + pad), min(image.height_px, y1 + pad)
    lin = image.linear(slice(r0, r1), slice(c0, c1)).astype(np.float32, copy=False)
    shift = np.array([c0, r0], float)
    t = RESIDUAL_OFFSETS_SIGMA * sigma
    flat_px = 1.5  # the levels must be flat over this much further out
    # the same stencil once more, out in the background: the noise alone, to subtract
    phantom_px = far_px + flat_px + 2.0 * sigma + 1.0
    offsets = np.concatenate([t, [-far_px, far_px, -far_px - flat_px, far_px + flat_px], t - phantom_px])
    model = np.asarray(_ndtr(t / sigma))
    template = np.exp(-0.5 * (t / sigma) ** 2) / math.sqrt(2 * math.pi)
    lift = template - template[len(t) // 2]  # a shared displacement with the crossing held at t = 0
    shared: list[float] = []
    noise_rel_sq = float(rings.noise_rel) ** 2 if math.isfinite(rings.noise_rel) else 0.0
    out, out_shared = [], []
    for i, ring in enumerate(all_rings):
        if len(ring) < 8:
            out.append(np.zeros(len(ring)))
            out_shared.append(np.zeros(len(ring)))
            shared.append(0.0)
            continue
        inward = -_normals(ring, i == 0)  # into the material
        # each coordinate on its own (the same sums, element by element, as of the (x, y)
        # pairs), sampled in long rows (numeric.sample_points: the same values as one remap
        # of these maps, whose 22-wide rows cost remap's tile set-up many times over)
        map_x = (ring[:, 0, None] + offsets[None, :] * inward[:, 0, None] - shift[0]).astype(np.float32)
        map_y = (ring[:, 1, None] + offsets[None, :] * inward[:, 1, None] - shift[1]).astype(np.float32)
        values = sample_points(lin, map_x, map_y, cv2.INTER_CUBIC).astype(float)
        spacing = float(np.median(np.hypot(*(np.roll(ring, -1, axis=0) - ring).T))) or 1.0
        half = max(1, int(round(0.5 * RESIDUAL_WINDOW_PX / spacing)))
        kernel = np.ones(2 * half + 1) / (2 * half + 1)

        def along(v: np.ndarray, kernel: np.ndarray = kernel, half: int = half) -> np.ndarray:
            return np.convolve(np.concatenate([v[-half:], v, v[:half]]), kernel, mode="valid")

        phantom = values[:, -len(t) :]
        values = values[:, : -len(t)]
        bg = along(values[:, -4])
        local_contrast = along(values[:, -3]) - bg
        # where the levels 3 sigma + 2 px away are not flat (a thin wall, another edge, a
        # corner's far side) the profile is no single edge's: left to the wall term
        slope = np.maximum(np.abs(values[:, -2] - values[:, -4]), np.abs(values[:, -1] - values[:, -3]))
        valid = (along(slope) < 0.05 * abs(contrast)) & (np.abs(local_contrast / contrast - 1.0) < 0.5)
        local_contrast = np.where(valid, local_contrast, contrast)
        norm = (values[:, :-4] - bg[:, None]) / local_contrast[:, None]
        e = norm - model
        mean_e = e[valid].mean(axis=0) if valid.any() else e.mean(axis=0)
        if i == 0:
            # the curvature step (segment.rings.correct_curvature) put the vertices about
            # (sigma^2 / 2 + h^2 / 12) k outside the crossing on purpose: add it back
            curvature_shift = np.einsum("ij,ij->i", correct_curvature(ring, sigma) - ring, -inward)
            per_vertex = (-sigma * (0.5 * (e + e[:, ::-1]) @ lift) / float(lift @ lift) + curvature_shift)[valid]
            if per_vertex.size >= 16:
                centre = float(np.median(per_vertex))  # robust to the corners' profiles
                spread = robust_sigma(per_vertex, centre)
                moved = centre
                # less the noise of that estimate (vertices correlated over the window, conservatively)
                n_eff = max(per_vertex.size * spacing / RESIDUAL_WINDOW_PX, 1.0)
                shared.append(math.sqrt(max(moved * moved - spread * spread / n_eff, 0.0)))
            else:
                shared.append(0.0)
        e = e - mean_e  # the ring's shared profile moves no edge
        # least-squares displacement of each profile: Phi((t - d) / s) - Phi(t / s) = -d phi(t / s) / s
        # (even in t; a wrong width is odd and drops out)
        delta = -sigma * (e @ template) / float(template @ template)
        window_mean = along(delta)
        # variance density (px^2 x px) of the displacement field, correlations up to the window
        # included: W E[m^2] for the window mean m; less the same for the noise alone (the
        # stencil in the background)
        e_noise = (phantom - along(phantom.mean(axis=1))[:, None]) / local_contrast[:, None]
        noise_mean = along(-sigma * (e_noise @ template) / float(template @ template))
        noise_density = RESIDUAL_WINDOW_PX * float(np.mean(noise_mean**2))
        # the vertices sit on the noisy crossing, so the fit sees the crossing's own noise
        # displacement too: the edge term's (noise / gradient)^2 over its 1 px correlation length
        crossing_density = noise_rel_sq * 2 * math.pi * sigma * sigma * 1.0
        density = np.maximum(RESIDUAL_WINDOW_PX * along(window_mean**2) - noise_density - crossing_density, 0.0)
        sigma_px = np.sqrt(density / RESIDUAL_WINDOW_PX)
        # where the levels are flat the residual varies from block to block (independent over
        # the window); where they are not (corners, narrow features) it is the same kind of
        # misfit wherever the geometry repeats (every corner of a polygon): shared
        out.append(np.where(valid, sigma_px, 0.0))
        out_shared.append(np.where(valid, 0.0, sigma_px))
    return out, out_shared, (abs(shared[0]) if shared else 0.0)


def _ndtr(x: np.ndarray) -> np.ndarray:
    """The standard normal distribution function of a few values (math.erfc: no scipy import)."""
    return np.array([0.5 * math.erfc(-float(v) / math.sqrt(2.0)) for v in np.ravel(x)]).reshape(np.shape(x))


# ------------------------------------------------------------------------ thin walls


def _normals(ring: np.ndarray, outer: bool) -> np.ndarray:
    """Unit normals at the vertices pointing away from the material."""
    normal = vertex_normals(ring)
    # away from the ring's inside for the outer ring, into the hole for a hole
    inside_sign = 1.0 if signed_area(ring) > 0 else -1.0
    normal *= inside_sign
    centre = ring.mean(axis=0)
    outward = float(np.sum(np.einsum("ij,ij->i", normal, ring - centre)))
    if (outward < 0) == outer:
        normal = -normal
    return normal


def _crossings(
    p: np.ndarray, direction: np.ndarray, seg_a: np.ndarray, seg_b: np.ndarray, reach: float
) -> tuple[np.ndarray, np.ndarray]:
    """First and second distances along rays ``p + t d`` (t > 0.05) to the segments; inf where none.

    Every ray is tested against the segments whose midpoints lie near it (a ball around
    the ray's middle that holds every segment it can cross), all rays at once: the (ray,
    segment) pairs are laid out flat, in blocks.
    """
    first = np.full(len(p), np.inf)
    second = np.full(len(p), np.inf)
    seg_len = float(np.max(np.hypot(*(seg_b - seg_a).T))) if len(seg_a) else 1.0
    mids = p + direction * (reach / 2)
    ray_of, near = _ball_pairs(0.5 * (seg_a + seg_b), mids, reach / 2 + seg_len)
    counts = np.bincount(ray_of, minlength=len(p))
    offsets = np.cumsum(counts) - counts
    block = max(1, _CROSSING_PAIRS // max(1, int(counts.max(initial=1))))
    for start in range(0, len(p), block):
        stop = min(len(p), start + block)
        n = counts[start:stop]
        if not n.any():
            continue
        k = np.repeat(np.arange(start, stop), n)  # the ray of each pair
        idx = near[offsets[start] : offsets[start] + int(n.sum())]
        # coordinate by coordinate (the same products and differences as of (x, y) rows,
        # without gathering and broadcasting rows of two)
        a_x, a_y = seg_a[idx, 0], seg_a[idx, 1]
        e_x, e_y = seg_b[idx, 0] - a_x, seg_b[idx, 1] - a_y
        d_x, d_y = direction[k, 0], direction[k, 1]
        denom = d_x * e_y - d_y * e_x
        ok = np.abs(denom) > 1e-12
        w_x, w_y = a_x - p[k, 0], a_y - p[k, 1]
        t = np.where(ok, (w_x * e_y - w_y * e_x) / np.where(ok, denom, 1), np.inf)
        u = np.where(ok, (w_x * d_y - w_y * d_x) / np.where(ok, denom, 1), -1)
        hit = ok & (u >= 0) & (u <= 1) & (t > 0.05) & (t <= reach)
        if not hit.any():
            continue
        k, t = k[hit], t[hit]
        order = np.lexsort((t, k))  # by ray, then by distance along it
        k, t = k[order], t[order]
        rays, at, many = np.unique(k, return_index=True, return_counts=True)
        first[rays] = t[at]
        second[rays[many > 1]] = t[at[many > 1] + 1]
    return first, second


def _ball_pairs(centres: np.ndarray, queries: np.ndarray, radius: float) -> tuple[np.ndarray, np.ndarray]:
    """Every (query, centre) pair at most ``radius`` apart, grouped by query in order: (query index, centre index).

    Centres are binned in square cells ``radius`` wide, so each query's ball lies within the
    3 x 3 cells around its own; those are gathered and kept within the radius. (A k-d tree
    gives the same pairs; scipy.spatial takes ~0.2 s to import.)
    """
    if len(centres) == 0 or len(queries) == 0:
        return np.zeros(0, np.intp), np.zeros(0, np.intp)
    cell = float(radius) if radius > 0 else 1.0
    # (the minima column by column: a reduction along the short axis of an (N, 2) array is slow)
    lo = np.array([min(centres[:, 0].min(), queries[:, 0].min()), min(centres[:, 1].min(), queries[:, 1].min())], float)
    c_ij = np.floor((centres - lo) / cell).astype(np.int64) + 1
    q_ij = np.floor((queries - lo) / cell).astype(np.int64) + 1
    rows = int(max(c_ij[:, 1].max(), q_ij[:, 1].max())) + 2
    key = c_ij[:, 0] * rows + c_ij[:, 1]
    order = np.argsort(key, kind="stable")
    sorted_key = key[order]
    di, dj = np.meshgrid([-1, 0, 1], [-1, 0, 1], indexing="ij")
    q_key = (q_ij[:, :1] + di.ravel()) * rows + (q_ij[:, 1:] + dj.ravel())  # (queries, 9)
    first = np.searchsorted(sorted_key, q_key, side="left").ravel()
    count = np.searchsorted(sorted_key, q_key, side="right").ravel() - first
    total = int(count.sum())
    query = np.repeat(np.repeat(np.arange(len(queries)), 9), count)
    within = np.arange(total) - np.repeat(np.cumsum(count) - count, count)
    centre = order[np.repeat(first, count) + within]
    # the gaps coordinate by coordinate (gathering (x, y) rows of an (N, 2) array is slow); a
    # pair at the radius itself may fall either way by a rounding, which the callers' radii
    # allow for (each holds a margin beyond the farthest pair that can matter)
    gap_x = centres[centre, 0] - queries[query, 0]
    gap_y = centres[centre, 1] - queries[query, 1]
    keep = gap_x * gap_x + gap_y * gap_y <= radius * radius
    return query[keep], centre[keep]


#: Largest number of (ray, segment) pairs :func:`_crossings` lays out at once.
_CROSSING_PAIRS = 1 << 20


#: Normal directions are binned in this many sectors for :func:`_maybe_facing`.
_FACING_BINS = 36

#: ... and when at most this many vertices are left, they are tested against every vertex.
_FACING_EXACT_MAX = 256


def _maybe_facing(pts: np.ndarray, normals: np.ndarray, reach: float) -> np.ndarray:
    """Vertices that may have a boundary point within ``reach`` whose normal faces theirs.

    A superset of what the neighbour search finds (normals more than 120 degrees apart,
    i.e. a dot product below -0.5): vertices are binned in square cells at least
    ``reach`` wide and their normals in 10-degree sectors; a vertex is kept when the
    3 x 3 cells around it hold a normal in a sector that can lie more than 110 degrees
    from its own. On parts without thin walls or narrow slots this leaves none, and the
    neighbour search is skipped.

    Examples
    --------
    >>> t = np.linspace(0, 2 * np.pi, 400, endpoint=False)
    >>> ring = np.column_stack([100 * np.cos(t), 100 * np.sin(t)])  # a disc of radius 100 px
    >>> bool(_maybe_facing(ring, ring / 100, 11.0).any())
    False
    >>> wall = np.concatenate([ring, 0.97 * ring])  # a 3 px ring: both sides face each other
    >>> bool(_maybe_facing(wall, np.concatenate([ring, -ring]) / 100, 11.0).all())
    True
    """
    n = len(pts)
    if n == 0:
        return np.zeros(0, bool)
    cell = 1.001 * float(reach) + 1e-9  # points within reach differ by at most one cell per axis
    ij = np.floor((pts - pts.min(axis=0)) / cell).astype(np.int64) + 1
    angle = np.arctan2(normals[:, 1], normals[:, 0])
    sector = np.clip(((angle + np.pi) / (2 * np.pi) * _FACING_BINS).astype(np.int64), 0, _FACING_BINS - 1)
    grid = np.zeros((int(ij[:, 1].max()) + 2, int(ij[:, 0].max()) + 2), np.uint64)
    np.bitwise_or.at(grid, (ij[:, 1], ij[:, 0]), np.left_shift(np.uint64(1), sector.astype(np.uint64)))
    around = grid.copy()
    for dy in (-1, 0, 1):
        for dx in (-1, 0, 1):
            if dx or dy:
                around[1:-1, 1:-1] |= grid[1 + dy : grid.shape[0] - 1 + dy, 1 + dx : grid.shape[1] - 1 + dx]
    # sectors k apart hold angles less than (k + 1) * 10 degrees apart: k >= 11 may exceed 110 degrees
    gap = np.abs(np.arange(_FACING_BINS)[:, None] - np.arange(_FACING_BINS)[None, :])
    far = np.minimum(gap, _FACING_BINS - gap) >= 11
    opposite = (far * np.left_shift(np.uint64(1), np.arange(_FACING_BINS, dtype=np.uint64))[None, :]).sum(
        axis=1, dtype=np.uint64
    )
    maybe = (around[ij[:, 1], ij[:, 0]] & opposite[sector]) != 0
    few = np.nonzero(maybe)[0]
    if 0 < few.size <= _FACING_EXACT_MAX:
        # few left (corners, tight curves): test them against every vertex, with a margin on
        # the distance and the dot product, so that the set stays a superset
        d2 = ((pts[few, None, :] - pts[None, :, :]) ** 2).sum(axis=2)
        dots = normals[few] @ normals.T
        close = d2 <= (reach * (1 + 1e-6) + 1e-9) ** 2
        maybe[few] = np.any(close & (dots < -0.5 + 1e-6), axis=1)
    return maybe


def _robust_quadratic(values: np.ndarray, rows: np.ndarray, cols: np.ndarray) -> Callable[..., np.ndarray] | None:
    """A robust least-squares surface (quadratic, or a constant for few samples) as a function of (row, col)."""
    if values.size < 12:
        return None
    scale = float(max(np.ptp(rows), np.ptp(cols), 1.0))
    x, y = cols / scale, rows / scale
    a = np.column_stack([np.ones_like(x), x, y, x * x, x * y, y * y]) if values.size >= 60 else np.ones((len(x), 1))
    keep = np.ones(values.size, bool)
    coef = np.zeros(a.shape[1])
    for _ in range(3):
        coef = np.linalg.lstsq(a[keep], values[keep], rcond=None)[0]
        res = values - a @ coef
        # the median absolute residual is 0 where most samples share one stored grey level
        # (8-bit files, noise under a level step): the mean absolute residual (sqrt(pi / 2)
        # of it for a Gaussian) keeps the neighbouring levels, whose share sets the mean
        spread = np.abs(res[keep])
        s = max(1.4826 * float(np.median(spread)), 1.2533 * float(np.mean(spread))) + 1e-9
        keep = np.abs(res) < 3.5 * s + 1e-6
        if keep.sum() < a.shape[1] * 3:
            break

    def evaluate(r: np.ndarray, c: np.ndarray) -> np.ndarray:
        xx, yy = c / scale, r / scale
        basis = np.column_stack([np.ones_like(xx), xx, yy, xx * xx, xx * yy, yy * yy])[:, : len(coef)]
        return basis @ coef

    return evaluate


def _solve_level(peak: np.ndarray, integral: np.ndarray, variance: np.ndarray) -> np.ndarray:
    """Part level (relative to the background) of each wall profile from three of its moments.

    For a strip of width ``w`` and level ``f`` under a Gaussian blur ``s`` (which here
    includes the pixel and the interpolation along the profile): integral ``J = f w``,
    variance of the profile ``V = w^2 / 12 + s^2`` and peak ``P = f erf(w / (2 sqrt 2 s))``.
    With ``w = J / f`` and ``s^2 = V - w^2 / 12`` the peak equation has one unknown, solved
    by bisection; NaN where it has no solution.
    """
    p, j, v = (np.asarray(a, float) for a in (peak, integral, variance))
    lo = np.maximum(p, j / np.sqrt(np.maximum(12 * v, 1e-12))) * (1 + 1e-9)
    hi = lo * 50.0

    def g(f: np.ndarray) -> np.ndarray:
        w = j / f
        s2 = np.maximum(v - w * w / 12.0, 1e-12)
        return f * _erf(w / (2 * np.sqrt(2 * s2))) - p

    ok = (p > 0) & (j > 0) & (v > 0) & (g(lo) < 0) & (g(hi) > 0)
    for _ in range(80):
        mid = np.sqrt(lo * hi)
        below = g(mid) < 0
        lo = np.where(below, mid, lo)
        hi = np.where(below, hi, mid)
    return np.where(ok, np.sqrt(lo * hi), np.nan)


def _erf(x: np.ndarray) -> np.ndarray:
    from scipy.special import erf

    return np.asarray(erf(x))


def _end_limits(
    windows: list[EndWindow], at: np.ndarray, width_int: np.ndarray, good: np.ndarray, sigma: float
) -> list[EndWindow]:
    """Each end window with the largest move its end can plausibly ask for (px).

    The midpoint contour of a blurred strip's end retreats along the strip by
    :func:`~scanmass.segment.wallends.strip_end_retreat_px` of its width (the median
    integral width of the resolved profiles under the window) and the blur; at least the
    blur (the rounding of a wide end's corners) and half a pixel. A 2 px slot under a
    1.4 px blur retreats 2.3 px, beyond the blur: a fixed limit of the blur left such ends
    uncorrected where the draw's blur estimate came out a little high.
    """
    out = []
    for window in windows:
        d = at - window.origin
        u, n = d @ window.u_axis, np.abs(d @ window.n_axis)
        within = (u >= window.u0) & (u <= window.u1 + window.ramp) & (n <= window.half + window.ramp)
        under = within & good & np.isfinite(width_int)  # the vertices EndWindow.contains holds
        retreat = strip_end_retreat_px(float(np.median(width_int[under])), sigma) if under.any() else 0.0
        limit = max(sigma, 0.5, retreat if math.isfinite(retreat) else 0.0)
        out.append(replace(window, max_move=limit))
    return out


def _folds(
    prof: np.ndarray, inside_line: np.ndarray, bg_here: np.ndarray, f_here: np.ndarray, on_wall: np.ndarray
) -> np.ndarray:
    """Profiles whose two ends both lie on the wrong side of the midpoint level for their feature.

    Across a wall (``on_wall``) the normalised profile starts and ends below 0.5 (outside the
    part), across a slot above it; a profile that starts and ends above 0.5 for a wall (or
    below it for a slot) crosses a fold of the contour, not the feature.

    Examples
    --------
    >>> prof = np.array([[0.9, 0.2, 0.9], [0.1, 0.9, 0.1]])
    >>> _folds(prof, np.ones((2, 3), bool), np.zeros(2), np.ones(2), np.array([True, True])).tolist()
    [True, False]
    """
    last = inside_line.sum(axis=1) - 1
    rows = np.arange(len(prof))
    with np.errstate(divide="ignore", invalid="ignore"):
        first_n = (prof[:, 0] - bg_here) / f_here
        last_n = (prof[rows, np.maximum(last, 0)] - bg_here) / f_here
    material = (first_n > 0.5) & (last_n > 0.5)
    background = (first_n < 0.5) & (last_n < 0.5)
    return np.where(on_wall, material, background) & np.isfinite(first_n) & np.isfinite(last_n)


def _bridge_folds(
    pts: np.ndarray, sizes: list[int], fold: np.ndarray, reach_px: float
) -> tuple[np.ndarray, np.ndarray]:
    """Vertices ``fold`` moved onto the chord between the nearest other vertices of their ring either side.

    Only where both lie within ``reach_px`` of arc; returns the points and, per fold
    vertex, whether it was placed.

    Examples
    --------
    >>> ring = np.array([[0.0, 0], [1, 0], [2, 3.0], [3, 0], [4, 0], [4, 4], [0, 4]])
    >>> out, placed = _bridge_folds(ring, [7], np.array([2]), 5.0)
    >>> out[2].tolist(), placed.tolist()
    ([2.0, 0.0], [True])
    """
    out = pts.copy()
    bad = np.zeros(len(pts), bool)
    bad[fold] = True
    placed = np.zeros(len(fold), bool)
    starts = np.cumsum([0, *sizes[:-1]])
    where = {int(v): k for k, v in enumerate(fold)}
    for a, n in zip(starts, sizes):
        ring = pts[a : a + n]
        for v in [int(x) for x in fold if a <= x < a + n]:
            i = v - a
            ends = []
            for step in (-1, 1):
                j, arc = i, 0.0
                while True:
                    k = (j + step) % n
                    arc += float(np.hypot(*(ring[k] - ring[j])))
                    j = k
                    if j == i or arc > reach_px:
                        j = -1
                        break
                    if not bad[a + j]:
                        break
                ends.append((j, arc))
            (jb, sb), (ja, sa) = ends
            if jb < 0 or ja < 0 or sb + sa <= 1e-9:
                continue
            out[v] = pts[a + jb] + (pts[a + ja] - pts[a + jb]) * (sb / (sb + sa))
            placed[where[v]] = True
    return out, placed


def _interior_corrections(
    runs: list[np.ndarray], pts: np.ndarray, idx: np.ndarray, correction: np.ndarray, zone_px: float
) -> np.ndarray:
    """Corrections (per ``idx``) with those within ``zone_px`` of a run's end set to the run's interior median.

    A run without an interior keeps its own corrections (its end window sets its area).
    """
    out = correction.copy()
    pos = np.full(len(pts), -1)
    pos[idx] = np.arange(len(idx))
    for run in runs:
        p = pts[run]
        s = np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(p, axis=0).T))])
        near = (s < zone_px) | (s > s[-1] - zone_px)
        k = pos[run]
        if near.all() or not near.any() or np.any(k < 0):
            continue
        out[k[near]] = float(np.median(correction[k[~near]]))
    return out


def _level_surface(
    fg_eval: Callable[..., np.ndarray] | None,
    f_here: np.ndarray,
    bg_here: np.ndarray,
    level_ratio_hint: float | None,
) -> Callable[[np.ndarray, np.ndarray, np.ndarray], np.ndarray]:
    """The part's level less the background's at crop pixels (rows, cols), given the background there."""
    if fg_eval is not None:
        fit = fg_eval

        def level(r: np.ndarray, c: np.ndarray, b: np.ndarray) -> np.ndarray:
            return fit(r.ravel(), c.ravel()).reshape(r.shape) - b

        return level
    if level_ratio_hint is not None and math.isfinite(level_ratio_hint):
        hint = float(level_ratio_hint)
        return lambda r, c, b: b * (hint - 1.0)
    # the walls' own level: a ratio to the background's magnitude, as in f_here
    ratio = float(np.median(f_here / np.maximum(np.abs(bg_here), 1e-12)))
    return lambda r, c, b: ratio * np.abs(b)


def resolve_walls(
    image: LoadedImage,
    rings: PartRings,
    *,
    level_ratio_hint: float | None = None,
    step_px: float = 0.1,
    ends: bool = True,
) -> WallResult:
    """Correct the boundary of thin walls and narrow slots of one part by the integral rule.

    Parameters
    ----------
    image : LoadedImage
        The image the part was found in.
    rings : PartRings
        The part from :func:`scanmass.segment.rings.segment` (midpoint-rule rings).
    level_ratio_hint : float, optional
        The part level over the background level (linear light) of another part of the
        same material in the image, used when this part has no thick region.
    step_px : float
        Sampling step along each profile.
    ends : bool
        Treat the walls' ends by their windows (:mod:`scanmass.segment.wallends`); off for
        photos, where a shadow's edge beside a part can look like a wall's.

    Returns
    -------
    WallResult
        The corrected rings (unchanged where no wall or slot is thin), the per-vertex
        uncertainty of the correction, counts and warnings.
    """
    all_rings = [rings.outer_px, *rings.holes_px]
    zero = [np.zeros(len(r)) for r in all_rings]
    sigma = float(rings.blur_px) if math.isfinite(rings.blur_px) and rings.blur_px > 0 else 1.0
    contrast = float(rings.contrast)
    if rings.cut or not math.isfinite(contrast) or abs(contrast) < 1e-4:
        return WallResult(rings, zero)
    thin_px = THIN_SIGMAS * sigma + 1.0
    reach_tail = 3.0 * max(sigma, 1.0) + 2.0  # the blur of a thin wall reads low: keep the tails
    pts = np.concatenate(all_rings)
    normals = np.concatenate([_normals(r, i == 0) for i, r in enumerate(all_rings)])
    seg_a = pts
    seg_b = np.concatenate([np.roll(r, -1, axis=0) for r in all_rings])
    reach = thin_px + reach_tail
    # only vertices with an opposite-facing boundary point within reach can be on a wall or slot
    k = min(24, len(pts))
    candidate = np.zeros(len(pts), bool)
    maybe = np.nonzero(_maybe_facing(pts, normals, reach))[0]  # cheap superset of the candidates
    if maybe.size:
        from scipy.spatial import cKDTree  # only when some boundary may face another within reach

        dist, near = cKDTree(pts).query(pts[maybe], k=k, distance_upper_bound=reach)
        valid = np.isfinite(dist)
        facing = np.einsum("ij,ikj->ik", normals[maybe], normals[np.where(valid, near, 0)]) < -0.5
        candidate[maybe] = np.any(valid & facing, axis=1)
    d_in = np.full(len(pts), np.inf)
    beyond_in, d_out, beyond_out = d_in.copy(), d_in.copy(), d_in.copy()
    if candidate.any():
        sel = np.nonzero(candidate)[0]
        d_in[sel], beyond_in[sel] = _crossings(pts[sel], -normals[sel], seg_a, seg_b, reach)
        d_out[sel], beyond_out[sel] = _crossings(pts[sel], normals[sel], seg_a, seg_b, reach)
    wall = d_in < thin_px
    slot = (d_out < thin_px) & ~wall
    if not (wall.any() or slot.any()):
        return WallResult(rings, zero)

    # -- the crop in linear light, and the levels ------------------------------------
    x0, y0, x1, y1 = rings.bbox_px
    pad = int(math.ceil(reach + 8))
    c0, r0 = max(0, x0 - pad), max(0, y0 - pad)
    c1, r1 = min(image.width_px, x1 + pad), min(image.height_px, y1 + pad)
    lin = image.to_linear[image.grey[r0:r1, c0:c1]].astype(np.float32)
    shape = lin.shape
    # distance (px) of every pixel from the part's midpoint-rule boundary, signed: + inside
    scale = 8
    mask = np.zeros((shape[0] * scale, shape[1] * scale), np.uint8)
    shift = np.array([c0, r0], float)

    def poly(r: np.ndarray) -> np.ndarray:
        return np.round((r - shift + 0.5) * scale - 0.5).astype(np.int32)

    cv2.fillPoly(mask, [poly(rings.outer_px)], 1)
    if rings.holes_px:
        cv2.fillPoly(mask, [poly(h) for h in rings.holes_px], 0)
    mask = cv2.resize(mask, (shape[1], shape[0]), interpolation=cv2.INTER_AREA)
    inside = cv2.distanceTransform(mask, cv2.DIST_L2, 5)
    # the mask turned inside out in place for this transform and back (no full-size copy at the peak)
    outside = cv2.distanceTransform(np.subtract(1, mask, out=mask), cv2.DIST_L2, 5)
    np.subtract(1, mask, out=mask)
    far_bg = (outside >= reach_tail + 2) & (outside <= reach_tail + 12)
    thick = inside >= reach_tail + 1
    rows_b, cols_b = nonzero_rc(far_bg)
    bg_fit = _robust_quadratic(lin[rows_b, cols_b].astype(float), rows_b.astype(float), cols_b.astype(float))
    if bg_fit is None:
        return WallResult(rings, zero)
    bg_eval = bg_fit
    warnings: list[str] = []
    part_level_rel_u = 0.0
    fg_eval = None
    level_source = ""
    own_min_width = 0.0
    if np.count_nonzero(thick) >= 20:
        rows_f, cols_f = nonzero_rc(thick)
        fit = _robust_quadratic(lin[rows_f, cols_f].astype(float), rows_f.astype(float), cols_f.astype(float))
        if fit is not None:
            fg_eval = fit
            level_source = "the part's thick regions"
            values = lin[rows_f, cols_f].astype(float)
            resid = values - fg_eval(rows_f.astype(float), cols_f.astype(float))
            part_level_rel_u = robust_sigma(resid, centre=0.0) * math.sqrt(6.0 / values.size) / abs(contrast)

    # -- profiles along the normals ----------------------------------------------------
    idx = np.nonzero(wall | slot)[0]
    sign = np.where(wall[idx], -1.0, 1.0)  # walk into the wall, or across the slot
    direction = normals[idx] * sign[:, None]
    width_mid = np.where(wall[idx], d_in[idx], d_out[idx])
    back = np.where(wall[idx], d_out[idx], d_in[idx])  # the side behind the starting edge
    ahead = np.where(wall[idx], beyond_in[idx], beyond_out[idx]) - width_mid  # beyond the far edge
    a_start = np.minimum(reach_tail, 0.5 * back)
    a_end = np.minimum(reach_tail, 0.5 * ahead)
    n_steps = int(math.ceil((thin_px + 2 * reach_tail) / step_px)) + 1
    s = np.arange(n_steps) * step_px
    start = -a_start
    t = start[:, None] + s[None, :]
    inside_line = t <= (width_mid + a_end)[:, None]
    xy = pts[idx, None, :] + t[:, :, None] * direction[:, None, :] - shift
    map_x = xy[:, :, 0].astype(np.float32)
    map_y = xy[:, :, 1].astype(np.float32)
    prof = cv2.remap(lin, map_x, map_y, cv2.INTER_LINEAR, borderMode=cv2.BORDER_REPLICATE).astype(float)
    mid_xy = pts[idx] + (0.5 * width_mid)[:, None] * direction - shift
    bg_here = bg_eval(mid_xy[:, 1], mid_xy[:, 0])
    diff = (prof - bg_here[:, None]) * inside_line
    integral = diff.sum(axis=1) * step_px - 0.5 * step_px * (
        diff[:, 0] + diff[np.arange(len(idx)), inside_line.sum(1) - 1]
    )
    peak = np.where(inside_line, prof - bg_here[:, None], -np.inf if contrast > 0 else np.inf)
    peak_val = peak.max(axis=1) if contrast > 0 else peak.min(axis=1)

    # part level relative to the background, per profile point
    if fg_eval is not None:
        f_here = fg_eval(mid_xy[:, 1], mid_xy[:, 0]) - bg_here
    elif level_ratio_hint is not None and math.isfinite(level_ratio_hint):
        f_here = bg_here * (level_ratio_hint - 1.0)
        level_source = "another part of the same material"
        part_level_rel_u = 0.01
    else:
        walls_only = wall[idx] & (width_mid > MIN_RESOLVED_PX)
        ratio = np.nan
        if walls_only.sum() >= 8 and float(np.median(width_mid[walls_only])) >= OWN_LEVEL_MIN_WIDTH_PX:
            weight = np.abs(diff[walls_only])
            total = weight.sum(axis=1)
            first = (weight * t[walls_only]).sum(axis=1) / total
            variance = (weight * (t[walls_only] - first[:, None]) ** 2).sum(axis=1) / total
            f_est = _solve_level(np.abs(peak_val[walls_only]), np.abs(integral[walls_only]), variance)
            # the peak tells the level only where the wall is wide against its blur
            w_est = np.abs(integral[walls_only]) / f_est
            s_est = np.sqrt(np.maximum(variance - w_est**2 / 12.0, 1e-12))
            f_est = np.where(w_est >= OWN_LEVEL_MIN_SIGMAS * s_est, f_est, np.nan)
            solved = np.isfinite(f_est)
            own_min_width = OWN_LEVEL_MIN_SIGMAS * float(np.median(s_est[solved])) if solved.any() else 0.0
            rel_est = f_est / np.abs(bg_here[walls_only])
            reach_ratio = (
                np.abs(peak_val[walls_only]) / f_est
            )  # erf(w / (2 sqrt 2 s)): how near the level the peak gets
            rel_est = rel_est[np.isfinite(rel_est)]
            if rel_est.size >= 8 and float(np.median(reach_ratio[solved])) >= OWN_LEVEL_MIN_REACH:
                ratio = float(np.median(rel_est))
                spread = robust_sigma(rel_est, ratio) / math.sqrt(rel_est.size)
                # the blur's shape against the Gaussian biases the peak by about 1 %; where the
                # peak equation is flat (narrow walls) that moves the level by much more:
                # propagate it through the equation
                ok = solved & np.isfinite(f_est)
                f_moved = _solve_level(
                    np.abs(peak_val[walls_only][ok]) * (1 + PEAK_MODEL_REL_U),
                    np.abs(integral[walls_only][ok]),
                    variance[ok],
                )
                sensitivity = float(np.nanmedian(np.abs(f_moved / f_est[ok] - 1.0))) if ok.any() else math.inf
                if not math.isfinite(sensitivity):
                    sensitivity = 1.0
                part_level_rel_u = math.hypot(spread / ratio, max(sensitivity, LEVEL_MODEL_REL_U))
                if part_level_rel_u > OWN_LEVEL_MAX_REL_U:
                    ratio = math.nan  # too uncertain to resolve the walls: say so
        if math.isfinite(ratio):
            f_here = math.copysign(1.0, contrast) * ratio * np.abs(bg_here)
            level_source = "the walls' own profiles (peak and integral)"
            # the walls' ridges (the segment stage's level) must come near the level so found
            if abs(contrast) < OWN_LEVEL_MIN_REACH * float(np.median(np.abs(f_here))):
                level_source = ""
        else:
            f_here = np.full(len(idx), contrast)
            level_source = ""

    # a wall: the integral of the normalised profile; a slot: the sampled length less that integral
    span = (inside_line.sum(axis=1) - 1) * step_px
    width_int = np.where(wall[idx], integral / f_here, span - integral / f_here)
    correction = 0.5 * (width_int - width_mid)  # each edge moves by half
    # a profile across a wall starts and ends on the background, one across a slot on the
    # part: where both its ends lie on the far side of the contour level the vertex is not
    # on the wall or slot it seems to be on but on a fold of the contour (a barely open slot
    # or a barely closed wall pinches to under a pixel and its two sides touch or cross), and
    # the integral counts the material or background beyond the fold (a "wall" of 0.1 px
    # read as 10 px): such a vertex is placed from its neighbours along the side instead
    fold = _folds(prof, inside_line, bg_here, f_here, wall[idx])
    if level_source == "":
        fold[:] = False
    correction = np.where(fold, 0.0, correction)
    unresolved = (width_int < max(MIN_RESOLVED_PX, own_min_width)) | (level_source == "") | ~np.isfinite(width_int)
    unresolved &= ~fold
    # uncertainty of each edge: the level's share, the cut-off tails, and when unresolved the whole size
    tail = np.zeros(len(idx))
    for cut in (a_start, a_end):
        z = cut / max(math.sqrt(max(sigma**2 - 1 / 12, 0.04)), 1e-6)
        pdf = np.exp(-0.5 * z * z) / math.sqrt(2 * math.pi)
        cdf_tail = 0.5 * np.array([math.erfc(v / math.sqrt(2)) for v in z])
        tail = np.hypot(tail, sigma * (pdf - z * cdf_tail))
    u = np.hypot(0.5 * np.abs(width_int) * part_level_rel_u, tail)
    # unresolved: the midpoint rule is kept and each edge may be off by half the wall
    u = np.where(unresolved, np.hypot(u, 0.5 * np.abs(width_mid)), u)
    correction = np.where(np.isfinite(correction) & ~unresolved, correction, 0.0)
    correction = np.clip(correction, -0.5 * width_mid, thin_px)
    # near a wall's end the profile across it sees the end too: there the ends' windows
    # (segment.wallends) set the area, starting from the wall's straight interior
    cap = turning(all_rings, normals, reach_tail)  # rounded ends and tips: no straight wall
    straight = np.isin(np.arange(len(pts)), idx[~unresolved]) & ~cap
    runs = wall_runs(straight, [len(r) for r in all_rings]) if ends else []
    correction = _interior_corrections(runs, pts, idx, correction, reach_tail + RAMP_PX)
    if runs and level_source:
        correction = np.where(cap[idx] & ~unresolved, 0.0, correction)  # the end's window sets it

    moved = pts.copy()
    move = -direction * correction[:, None]  # out of the wall, or back into the material for a slot
    moved[idx] = pts[idx] + move
    wall_u = np.zeros(len(pts))
    wall_u[idx] = u
    if fold.any():
        # the wall or slot is straight over the blur's reach (the integral rule's own premise):
        # a fold's vertices go onto the chord between the nearest good vertices either side,
        # and may be off by half the feature's width
        moved, placed = _bridge_folds(moved, [len(r) for r in all_rings], idx[fold], reach_tail)
        others = np.abs(width_int[~fold & np.isfinite(width_int)])
        half_width = 0.5 * float(np.median(others)) if others.size else 0.5 * thin_px
        wall_u[idx[fold]] = np.hypot(u[fold], half_width)
        wall_u[idx[fold][~placed]] = np.hypot(wall_u[idx[fold][~placed]], 0.5 * thin_px)
    if runs and level_source:
        across, width = np.zeros_like(pts), np.zeros(len(pts))
        across[idx], width[idx] = direction, width_mid
        windows = end_windows(runs, pts, across, width, reach_px=reach_tail)
        windows = _end_limits(windows, pts[idx], width_int, ~(unresolved | fold), sigma)
        f_level = _level_surface(fg_eval, f_here, bg_here, level_ratio_hint)

        def normalise(values: np.ndarray, r: np.ndarray, c: np.ndarray) -> np.ndarray:
            b = bg_eval(r.ravel(), c.ravel()).reshape(r.shape)
            return (values - b) / f_level(r, c, b)

        sizes = [len(r) for r in all_rings]
        moved_rings, _, window_u = apply_end_windows(
            lin, shift, [moved[a : a + n] for a, n in zip(np.cumsum([0, *sizes[:-1]]), sizes)], normals, windows,
            normalise, level_rel_u=part_level_rel_u, prefer=cap, reach_px=reach_tail, max_move_px=max(sigma, 0.5),
            clear_px=2.0 * sigma + 1.0,  # closed_slots keeps this far from the rings
            noise_rel=float(rings.noise_rel) if math.isfinite(rings.noise_rel) else 0.0,
        )  # fmt: skip
        moved = np.concatenate(moved_rings)
        wall_u = np.hypot(wall_u, window_u)
    out_rings, out_u, start_i = [], [], 0
    for r in all_rings:
        out_rings.append(moved[start_i : start_i + len(r)])
        out_u.append(wall_u[start_i : start_i + len(r)])
        start_i += len(r)
    area_px = abs(signed_area(out_rings[0])) - sum(abs(signed_area(h)) for h in out_rings[1:])
    new = replace(rings, outer_px=out_rings[0], holes_px=out_rings[1:], area_px=area_px)
    n_bad = int(unresolved.sum())
    if n_bad:
        what = "walls or slots" if slot.any() else "walls"
        why = "no thick region or other part gives the part's level" if level_source == "" else "narrower than 1.5 px"
        warnings.append(
            f"part {rings.label}: {n_bad} boundary points lie on thin {what} that cannot be resolved ({why}); "
            "their uncertainty covers the possible error; scan at a higher resolution"
        )
    if level_source.startswith("the walls' own") and np.any(~unresolved):
        # the level from the peak equation carries the blur's shape against the Gaussian
        # (rendered rings of 3-4 px: 2-8 % in area), far more than a thick region's level
        warnings.append(
            f"part {rings.label}: no thick region or other part of the same material gives the part's level; "
            f"the width of its thin walls rests on a level taken from their own profiles (uncertain by about "
            f"{100 * part_level_rel_u:.0f} %), and its uncertainty includes that; scan it beside a thick part of "
            "the same material or at a higher resolution"
        )
    ring_of = np.repeat(np.arange(len(all_rings)), [len(r) for r in all_rings])
    return WallResult(
        new,
        out_u,
        corrected=int(np.count_nonzero(correction)),
        unresolved=n_bad,
        level_source=level_source,
        warnings=warnings,
        unresolved_holes=tuple(sorted({int(k) for k in ring_of[idx[unresolved]] if k > 0})),
    )
