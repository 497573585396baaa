"""Parts that touch: a neck between two lobes in one found part (detection only).

Two parts laid so that they touch (or lie closer than the blur) come out of the mask as
one component. Such a component has two lobes joined by a neck much narrower than
either lobe: its distance transform has two separate maxima, and the saddle between
them (where the watershed of the negated distance transform splits the component) is
low. :func:`touching_lobes` finds that case from a part's outer ring in pixels.
"""

from __future__ import annotations

from dataclasses import dataclass

import cv2
import numpy as np

from scanmass.geometry import signed_area
from scanmass.load.decode import lookup
from scanmass.numeric import nonzero_rc
from scanmass.segment.distance import exact_distance

__all__ = ["NeckReport", "TouchSplit", "touching_lobes", "split_touching", "solidity", "NECK_RATIO", "SEAM_LEVEL"]

#: A neck narrower than this share of the smaller lobe's inscribed diameter means two parts.
NECK_RATIO = 0.35

#: A silhouette filling at least this share of its convex hull is not searched for a neck: two
#: lobes joined by a neck leave a notch on each side of it (two discs touching fill 0.87 of their
#: hull, two squares joined by a bridge a fifth of their width 0.92; tests/test_touching.py).
SOLIDITY_LIMIT = 0.97


@dataclass(frozen=True)
class NeckReport:
    """Two lobes of one component joined by a narrow neck (pixels)."""

    neck_width_px: float
    lobe_widths_px: tuple[float, float]
    lobe_areas_px: tuple[float, float]


def solidity(outer_px: np.ndarray, holes_px: list[np.ndarray] | None = None) -> float:
    """The share of its convex hull that a part's rings fill (holes cleared), 0 for a degenerate ring."""
    ring = np.asarray(outer_px, dtype=float)
    hull = cv2.convexHull(ring.astype(np.float32)).reshape(-1, 2).astype(float)
    hull_area = abs(signed_area(hull)) if len(hull) >= 3 else 0.0
    if hull_area <= 0.0:
        return 0.0
    area = abs(signed_area(ring)) - sum(abs(signed_area(np.asarray(h, float))) for h in holes_px or [])
    return area / hull_area


def _local_peaks(image: np.ndarray, min_distance: int, threshold_abs: float, labels: np.ndarray) -> np.ndarray:
    """``skimage.feature.peak_local_max(image, min_distance=, threshold_abs=, labels=)`` for a 0/1 label image.

    The same steps and the same result (row, column) in the same order, without importing
    scipy (which scikit-image's feature module does, ~0.3 s of a process's start): the
    maximum filter over a (2 d + 1) square window with the border replicated is OpenCV's
    dilation (both exact maxima), then candidates brightest first (a stable sort) keep at
    least ``min_distance`` (Chebyshev) from every peak kept before them. The one case it
    does not repeat (every pixel of the label a local maximum) is passed to scikit-image.
    """
    d = int(min_distance)
    fenced = labels.astype(int)
    fenced[:d], fenced[-d:], fenced[:, :d], fenced[:, -d:] = 0, 0, 0, 0  # exclude_border=True: min_distance
    rows, cols = nonzero_rc(fenced == 1)
    if rows.size == 0:
        return np.empty((0, 2), dtype=np.intp)
    r0, r1, c0, c1 = rows.min(), rows.max() + 1, cols.min(), cols.max() + 1
    inside = labels[r0:r1, c0:c1] == 1
    img = image[r0:r1, c0:c1].copy()
    img[~inside] = np.finfo(img.dtype).min if np.issubdtype(img.dtype, np.floating) else np.iinfo(img.dtype).min
    size = 2 * d + 1
    peak = img == cv2.dilate(img, np.ones((size, size), np.uint8), borderType=cv2.BORDER_REPLICATE)
    if np.all(peak[inside]):
        from skimage.feature import peak_local_max

        return peak_local_max(image, min_distance=d, threshold_abs=threshold_abs, labels=labels)
    peak &= img > threshold_abs
    coord = np.transpose(np.nonzero(peak))
    coord = coord[np.argsort(-img[peak], kind="stable")]
    if d > 1 and len(coord) > 1:
        # a candidate is kept unless a peak kept before it lies less than d away (Chebyshev):
        # within the (2 d - 1)-square around it, marked on a grid as each peak is kept
        near = np.zeros(img.shape, bool)
        kept: list[int] = []
        for k, (r, c) in enumerate(coord.tolist()):
            if not near[r, c]:
                kept.append(k)
                near[max(r - d + 1, 0) : r + d, max(c - d + 1, 0) : c + d] = True
        coord = coord[kept]
    return coord + [r0, c0]


def _watershed(relief: np.ndarray, markers: np.ndarray, mask: np.ndarray, *, line: bool = False) -> np.ndarray:
    """``skimage.segmentation.watershed(relief, markers, mask=mask, watershed_line=line)`` (connectivity 1).

    scikit-image's own flooding routine on the same padded, raveled arrays and the same
    neighbour order, without importing its segmentation package (which imports scipy).
    """
    try:
        from skimage.segmentation._watershed_cy import watershed_raveled
    except ImportError:  # another scikit-image layout: its public function, same result
        from skimage.segmentation import watershed

        return watershed(relief, markers, mask=mask, watershed_line=line)
    inside = np.asarray(mask, dtype=bool)
    image = np.pad(relief.astype(np.float64), 1)
    output = np.pad(np.asarray(markers) * inside, 1)
    flat_mask = np.pad(inside.astype(np.int8), 1).ravel()
    width = image.shape[1]
    neighbours = np.array([-width, -1, 1, width], dtype=np.intp)
    strides = np.array(image.strides, dtype=np.intp) // image.itemsize
    flat_out = output.ravel()
    watershed_raveled(image.ravel(), np.flatnonzero(output), neighbours, flat_mask, strides, 0.0, flat_out, line)
    return output[1:-1, 1:-1].copy()


def _peaks_joined_high(dist: np.ndarray, peaks: np.ndarray) -> bool:
    """Whether two peaks of ``dist`` are joined by a 4-connected path of pixels at least ``NECK_RATIO * dist.max()``.

    When they are, :func:`touching_lobes` with exactly these two markers reports no neck,
    so its watershed need not run. Proof, for scikit-image's flooding
    (``skimage.segmentation.watershed(-dist, markers, mask, watershed_line=True)``, the
    routine :func:`_watershed` calls), using only what its variants share: pixels leave a
    heap in order of (value, age); a marker starts there (at its own relief, or below every
    relief); a pixel's value is at least its relief ``-dist`` and, when a labelled
    neighbour whose value was at most ``-s`` pushes it, at most ``max(-dist, -s)``; at its
    first pop a pixel either takes its pusher's label or, if a neighbour that is not a line
    pixel carries another label, becomes a line pixel for good; labelled pixels push every
    unlabelled 4-neighbour in the mask. Let ``s = NECK_RATIO * D`` (``D = dist.max()``) and
    ``C`` the 4-connected set of pixels with ``dist >= s`` that holds both peaks.

    1. Some line pixel is made while every pop so far had a value at most ``-s``: were
       none, then up to the first pop above ``-s`` every popped pixel is labelled and has
       pushed its neighbours, so every pixel of ``C`` (connected, holding both markers,
       each pushed at most ``-s``) is popped by then; ``C`` holds both labels, so two
       4-neighbours in it carry different labels, and the later popped of them saw the
       other and became a line pixel, a contradiction.
    2. The first line pixel ``x`` made was pushed by a labelled neighbour (no line pixel
       existed before it) and has a 4-neighbour of the other label; both labels are
       final, so with two markers ``x`` lies on the line between the two basins
       (``between``), and its pop value at most ``-s`` gives ``dist(x) >= s``.
    3. Hence the neck ``2 max dist[between] >= 2 s``, and each lobe's width is at most
       ``2 D``: ``neck >= NECK_RATIO * min(widths)`` holds (in floating point too: the
       comparison of float32 distances against ``s`` is made in float64, doubling is
       exact and rounding is monotone), and no neck is reported.

    With more than two markers the two largest basins need not be the pair at ``x``, so
    nothing is decided here. ``tests/test_touching.py`` checks step 2's claim against the
    installed scikit-image on random silhouettes.
    """
    if len(peaks) != 2:
        return False
    level = NECK_RATIO * float(dist.max())
    high = (dist.astype(np.float64) >= level).view(np.uint8)
    _, comp = cv2.connectedComponents(high, connectivity=4)
    (r0, c0), (r1, c1) = peaks
    return bool(comp[r0, c0] != 0 and comp[r0, c0] == comp[r1, c1])


def touching_lobes(
    outer_px: np.ndarray,
    holes_px: list[np.ndarray] | None = None,
    *,
    solidity_limit: float = SOLIDITY_LIMIT,
    peak_test: bool = True,
) -> NeckReport | None:
    """Whether a part's silhouette looks like two parts touching, from its rings in pixels.

    A part without holes whose outer ring fills at least ``solidity_limit`` of its convex
    hull (:func:`solidity`) has no notch for a neck and is passed over without the search
    below (pass a value above 1 to search every part). Parts with holes are always
    searched: a hole near the middle of a strip pinches it into two lobes however little
    of the hull it takes. With two peaks joined by a path at least :data:`NECK_RATIO` of
    the largest distance high, the watershed is not run: it could report no neck (the
    proof is in :func:`_peaks_joined_high`; ``peak_test=False`` runs it anyway).

    The filled ring (holes cleared) is rasterised on a grid of at most ~400 px across; its
    Euclidean distance transform [1]_ gives each lobe's inscribed radius (its maximum) and
    the neck's half width (the highest distance on the watershed line between the two
    largest basins of the negated transform [2]_). A neck narrower than
    :data:`NECK_RATIO` of the smaller lobe's inscribed diameter, with both lobes at least
    a fifth of the component's area, is reported.

    References
    ----------
    .. [1] P. F. Felzenszwalb and D. P. Huttenlocher, "Distance transforms of sampled
       functions", Theory of Computing 8, 415-428, 2012.
    .. [2] S. Beucher and F. Meyer, "The morphological approach to segmentation: the
       watershed transformation", in Mathematical Morphology in Image Processing, 1993.
    """
    if not holes_px and solidity(outer_px) >= solidity_limit:
        return None
    ring = np.asarray(outer_px, dtype=float)
    lo = ring.min(axis=0) - 3
    size = ring.max(axis=0) - lo + 3
    step = max(1.0, float(size.max()) / 400.0)
    shape = (int(np.ceil(size[1] / step)) + 1, int(np.ceil(size[0] / step)) + 1)
    mask = np.zeros(shape, np.uint8)
    cv2.fillPoly(mask, [np.round((ring - lo) / step).astype(np.int32)], 1)
    for h in holes_px or []:
        cv2.fillPoly(mask, [np.round((np.asarray(h, float) - lo) / step).astype(np.int32)], 0)
    dist = exact_distance(mask)
    if dist.max() < 3:
        return None
    peaks = _local_peaks(dist, max(3, int(0.5 * dist.max())), 0.3 * dist.max(), mask)
    if len(peaks) < 2 or (peak_test and _peaks_joined_high(dist, peaks)):
        return None
    markers = np.zeros(mask.shape, np.int32)
    for k, (r, c) in enumerate(peaks, start=1):
        markers[r, c] = k
    basins = _watershed(-dist, markers, mask, line=True)
    areas = np.bincount(basins.ravel(), minlength=len(peaks) + 1)[1:]
    order = np.argsort(areas)[::-1]
    a, b = order[0] + 1, order[1] + 1
    total = float(mask.sum())
    if areas[b - 1] < 0.2 * total:
        return None
    line = (basins == 0) & mask.astype(bool)
    near_a = cv2.dilate((basins == a).astype(np.uint8), np.ones((3, 3), np.uint8)).astype(bool)
    near_b = cv2.dilate((basins == b).astype(np.uint8), np.ones((3, 3), np.uint8)).astype(bool)
    between = line & near_a & near_b
    if not between.any():
        return None
    neck = 2.0 * float(dist[between].max())
    width_a, width_b = 2.0 * float(dist[basins == a].max()), 2.0 * float(dist[basins == b].max())
    if neck >= NECK_RATIO * min(width_a, width_b):
        return None
    return NeckReport(
        neck_width_px=neck * step,
        lobe_widths_px=(width_a * step, width_b * step),
        lobe_areas_px=(float(areas[a - 1]) * step * step, float(areas[b - 1]) * step * step),
    )


#: Inside a found part, pixels below this share of the part's own contrast are not solid part:
#: a seam (a gap narrower than the blur between two parts laid edge to edge) dips below it.
SEAM_LEVEL = 0.85

#: Each lobe of a split holds at least this share of the found part's area.
MIN_LOBE_SHARE = 0.15


@dataclass(frozen=True)
class TouchSplit:
    """A found part cut into two parts that touch (pixels, the segmenter's frame).

    ``lobes`` holds each part's outer ring and hole rings; the straight cut from
    ``cut_px[0]`` to ``cut_px[1]`` is the last edge of each lobe's outer ring (its two
    last vertices). ``evidence`` is ``"seam"`` (a line short of the part's level runs
    across the part) or ``"neck"`` (a neck between two lobes, :func:`touching_lobes`).
    """

    lobes: tuple[tuple[np.ndarray, list[np.ndarray]], tuple[np.ndarray, list[np.ndarray]]]
    cut_px: tuple[tuple[float, float], tuple[float, float]]
    evidence: str
    seam_depth: float
    #: per lobe: the index into the found outer ring of each vertex (-1 for the two cut ends),
    #: and the indices of the found holes it keeps
    vertex_index: tuple[np.ndarray, np.ndarray]
    hole_index: tuple[list[int], list[int]]

    @property
    def cut_length_px(self) -> float:
        (x0, y0), (x1, y1) = self.cut_px
        return float(np.hypot(x1 - x0, y1 - y0))


def _ring_mask(shape: tuple[int, int], outer: np.ndarray, holes: list[np.ndarray], origin: np.ndarray) -> np.ndarray:
    """The filled ring (holes cleared) on a grid, drawn at 1/16 px (pixel centres at integers)."""
    mask = np.zeros(shape, np.uint8)
    cv2.fillPoly(mask, [np.round((outer - origin) * 16).astype(np.int32)], 1, shift=4)
    for h in holes:
        cv2.fillPoly(mask, [np.round((np.asarray(h, float) - origin) * 16).astype(np.int32)], 0, shift=4)
    return mask


def _lut_median(codes: np.ndarray, where: np.ndarray, lut: np.ndarray) -> float:
    """``np.median(lut[codes[where != 0]])`` from a histogram of the codes (the same value, without gathering them).

    ``codes`` are the integer codes of a crop, ``where`` a uint8 mask of the same shape.
    """
    bins = len(lut)
    if codes.dtype in (np.uint8, np.uint16) and codes.size < 2**24:  # float32 counts stay exact
        counts = cv2.calcHist([codes], [0], where, [bins], [0, bins]).ravel().astype(np.int64)
    else:
        counts = np.bincount(codes[where.view(bool)].ravel(), minlength=bins)
    return _counts_median(counts, lut)


def _lut_medians_apart(
    codes: np.ndarray, first: np.ndarray, second: np.ndarray, lut: np.ndarray
) -> tuple[float, float]:
    """:func:`_lut_median` of two masks that share no pixel, from one pass over the crop.

    The codes are counted against a label plane (0 neither, 1 ``first``, 2 ``second``) in
    one two-dimensional histogram of (code, label) pairs: each label's column holds the
    counts its own mask gives (a masked histogram reads the whole crop for each mask).
    """
    bins = len(lut)
    if codes.dtype in (np.uint8, np.uint16) and codes.size < 2**24:  # float32 counts stay exact
        labels = cv2.add(first, second)
        cv2.add(labels, second, dst=labels)  # 0/1 masks without a shared pixel: labels 0, 1, 2
        labels = labels.astype(codes.dtype, copy=False)  # the histogram takes planes of one depth
        table = cv2.calcHist([codes, labels], [0, 1], None, [bins, 3], [0, bins, 0, 3]).astype(np.int64)
        return _counts_median(table[:, 1], lut), _counts_median(table[:, 2], lut)
    return _lut_median(codes, first, lut), _lut_median(codes, second, lut)


def _counts_median(counts: np.ndarray, lut: np.ndarray) -> float:
    """The median of ``lut[code]`` over counts of each code, as numpy's median of the gathered values gives it."""
    order = np.argsort(lut, kind="stable")
    cum = np.cumsum(counts[order])
    n = int(cum[-1])
    lo = lut[order[np.searchsorted(cum, (n - 1) // 2, side="right")]]
    hi = lut[order[np.searchsorted(cum, n // 2, side="right")]]
    # numpy's median: the mean of the two middle values, in the array's own dtype
    return float(np.mean(np.array([lo, hi], dtype=lut.dtype)))


#: The window (px, square) over which every input of the seam test's blur (a Gaussian of
#: 0.7 px: OpenCV's float kernel has 7 taps) lies, with room to spare.
SEAM_BLUR_WINDOW = 11

#: The side (px) of the blocks in which :func:`_one_solid_piece` joins surely solid pixels.
SEAM_BLOCK = 4


def _one_solid_piece(
    levels: tuple[np.ndarray, np.ndarray], bg_fg: tuple[float, float], core: np.ndarray, seam_level: float, least: float
) -> bool:
    """Whether the seam test's solid pixels can hold at most one piece of ``least`` pixels or more, shown cheaply.

    :func:`split_touching` blurs the normalised crop ``n`` (a Gaussian of 0.7 px) and labels
    the pixels of ``core`` where the blur exceeds ``seam_level``; a seam needs two pieces
    of at least ``least`` pixels. The blur at a pixel is a weighted mean, with positive
    float32 weights that sum to 1 within a few units in the last place, of ``n`` inside the
    pixel's :data:`SEAM_BLUR_WINDOW` square (edges reflected from inside it), so where every
    ``n`` of that square is at least ``m = seam_level + 0.001`` the blur exceeds
    ``seam_level`` (float32 rounding costs a few parts in a million of ``m``): such pixels
    of ``core`` (``S``, from the codes' table and an erosion, no blur) are surely solid.
    Blocks of :data:`SEAM_BLOCK` square wholly in ``S`` that touch edge to edge are joined
    through ``S``, so the largest connected set of such blocks, ``G`` pixels, lies in one
    solid piece. Every other piece lies in ``core`` outside it: fewer than ``least`` pixels
    when ``count(core) - G < least``, and then no seam is found (True). False: not shown
    (the full test runs). ``tests/test_exact_shortcuts.py`` compares it with the full test.
    """
    if not 0.1 < seam_level < 1.0:
        return False
    codes, lut = levels
    bg, fg = bg_fg
    if codes.dtype != np.uint8 or len(lut) != 256:
        return False
    high = ((lut - bg) / (fg - bg) >= seam_level + 1e-3).astype(np.uint8)  # the same table normalised() reads
    window = np.ones((SEAM_BLUR_WINDOW, SEAM_BLUR_WINDOW), np.uint8)
    sure = cv2.erode(lookup(high, codes), window)  # every n of the square at least m (edges: inside only)
    cv2.bitwise_and(sure, core, dst=sure)
    inside = int(np.count_nonzero(core))
    if inside - int(np.count_nonzero(sure)) >= least:
        return False
    b = SEAM_BLOCK
    h, w = (sure.shape[0] // b) * b, (sure.shape[1] // b) * b
    if h == 0 or w == 0:
        return False
    # each block's least value at its top left pixel (an erosion anchored there), one per block
    blocks = np.ascontiguousarray(cv2.erode(sure[:h, :w], np.ones((b, b), np.uint8), anchor=(0, 0))[::b, ::b])
    count, labels = cv2.connectedComponents(blocks, connectivity=4)
    largest = int(np.bincount(labels.ravel(), minlength=count)[1:].max()) * b * b if count > 1 else 0
    return inside - largest < least


def _two_runs(labels: np.ndarray) -> tuple[int, int] | None:
    """For a cyclic sequence of two labels: the two indices where it changes, or None if not two runs.

    Runs shorter than 3 vertices are first given their neighbours' label.
    """
    lab = labels.copy()
    for _ in range(2):
        change = np.flatnonzero(lab != np.roll(lab, 1))
        if len(change) <= 2:
            break
        run_len = np.diff(np.r_[change, change[0] + len(lab)])
        for start, length in zip(change, run_len):
            if length < 3:
                idx = (start + np.arange(length)) % len(lab)
                lab[idx] = lab[(start - 1) % len(lab)]
    change = np.flatnonzero(lab != np.roll(lab, 1))
    if len(change) != 2:
        return None
    labels[:] = lab
    return int(change[0]), int(change[1])


def split_touching(
    linear: np.ndarray | None,
    origin_px: tuple[int, int],
    outer_px: np.ndarray,
    holes_px: list[np.ndarray],
    *,
    dark_part: bool,
    noise_rel: float = 0.0,
    neck: NeckReport | None | bool = True,
    levels: tuple[np.ndarray, np.ndarray] | None = None,
) -> TouchSplit | None:
    """Cut one found part into two touching parts, if it looks like two.

    Two kinds of evidence are used. A *seam*: parts laid edge to edge with a gap narrower
    than the blur merge into one outline, but the gap still lifts the grey level along a
    line across the part (a gap of 0.6 px under a blur of 0.8 px dips to about 70 % of
    the part's contrast); the solid pixels (above :data:`SEAM_LEVEL` of the contrast, 2 px
    or more inside the outline) then fall into two large pieces. A *neck*
    (:func:`touching_lobes`): two lobes joined by a narrow waist. Either gives two
    markers; the watershed [1]_ of the negated normalised level (seam) or of the negated
    distance transform (neck) grows them over the part, each vertex of the outer ring
    takes the label of the nearest pixel, and the two runs of labels are closed by the
    straight cut between the points where the label changes.

    Parameters
    ----------
    linear : (H, W) float ndarray, or None
        Linear-light values of a crop around the part; None when ``levels`` are given
        (then only their table is looked up).
    origin_px : (int, int)
        The crop's (x, y) offset in the image.
    outer_px, holes_px
        The part's rings in image pixels (x, y).
    dark_part : bool
        The part is darker than the background (a bright lid).
    noise_rel : float
        Pixel noise relative to the contrast; the seam level is lowered below 5 sigma of it.
    neck : NeckReport or None, optional
        The part's :func:`touching_lobes` result when the caller has it (None: no neck);
        by default it is computed here.
    levels : (codes, lut), optional
        The encoded crop and the lookup table that made ``linear`` (``linear ==
        lut[codes]``); with them the part's and the background's medians are counted from
        a histogram of the codes instead of partitioning the crop (the same values).

    Returns
    -------
    TouchSplit or None
        None when the part does not look like two parts, or the cut is not clean (a hole
        on the cut, a ring that changes label more than twice).

    References
    ----------
    .. [1] S. Beucher and F. Meyer, "The morphological approach to segmentation: the
       watershed transformation", in Mathematical Morphology in Image Processing, 1993.
    """
    origin = np.asarray(origin_px, float)
    outer = np.asarray(outer_px, float)
    if linear is not None:
        shape = linear.shape
    elif levels is not None:
        shape = levels[0].shape
    else:
        raise ValueError("split_touching needs the linear crop or its codes and table (levels)")
    mask = _ring_mask(shape, outer, holes_px, origin)
    area = float(np.count_nonzero(mask))  # the mask holds 0 and 1
    if area < 50:
        return None
    kernel = np.ones((3, 3), np.uint8)
    core = cv2.erode(mask, kernel, iterations=2)
    inner = cv2.erode(core, kernel)  # three erosions in all
    # the outer ring filled without its holes (the mask itself when there are none)
    filled = _ring_mask(shape, outer, [], origin) if holes_px else mask
    outside = (cv2.dilate(filled, kernel, iterations=3) == 0).view(np.uint8)
    if np.count_nonzero(inner) < 20 or np.count_nonzero(outside) < 20:
        return None
    if levels is None:
        assert linear is not None
        fg = float(np.median(linear[inner.view(bool)]))
        bg = float(np.median(linear[outside.view(bool)]))
    else:
        codes, lut = levels
        fg, bg = _lut_medians_apart(codes, inner, outside, lut)  # inside the ring and beyond its dilation
    del inner, outside, filled
    if abs(fg - bg) < 1e-4 or (fg < bg) != dark_part:
        return None

    def normalised() -> np.ndarray:
        """The crop between the two levels (0 background, 1 part): a new array, the same values at every call."""
        # the same values either way: the table holds each code's normalised level
        if levels is None:
            assert linear is not None
            return (linear - bg) / (fg - bg)
        return lookup((levels[1] - bg) / (fg - bg), levels[0])

    seam_level = min(SEAM_LEVEL, 1.0 - 5.0 * max(noise_rel, 0.0))
    big: list[int] = []
    if levels is None or not _one_solid_piece(levels, (bg, fg), core, seam_level, MIN_LOBE_SHARE * area):
        # blurred in place (OpenCV's separable filter gives the same values in place) and dropped
        # before the components are labelled: the crop's peak memory. Where a split needs the
        # plane again it is made again.
        smooth = normalised().astype(np.float32, copy=False)
        cv2.GaussianBlur(smooth, (0, 0), 0.7, dst=smooth)
        solid = (core.view(bool) & (smooth > seam_level)).view(np.uint8)
        del smooth
        count, comp = cv2.connectedComponents(solid, connectivity=4)
        del solid
        if count >= 3:  # two pieces or more (label 0 is the rest)
            sizes = np.bincount(comp.ravel(), minlength=count)  # each component's area (px), as its stats give it
            big = [k for k in range(1, count) if sizes[k] >= MIN_LOBE_SHARE * area]
        if len(big) < 2:
            del comp
    if len(big) >= 2:
        big.sort(key=lambda k: -sizes[k])
        markers = np.zeros(shape, np.int32)
        markers[comp == big[0]] = 1
        markers[comp == big[1]] = 2
        del comp
        relief: np.ndarray = -np.asarray(normalised(), dtype=np.float64)
        evidence = "seam"
    else:
        if neck is True:
            neck = touching_lobes(outer, holes_px)
        if not isinstance(neck, NeckReport):
            return None
        dist = exact_distance(mask)
        peaks = _local_peaks(dist, max(3, int(0.5 * dist.max())), 0.3 * dist.max(), mask)
        if len(peaks) < 2:
            return None
        markers = np.zeros(shape, np.int32)
        order = np.argsort(-dist[peaks[:, 0], peaks[:, 1]])
        for k, (r, c) in enumerate(peaks[order[:2]], start=1):
            markers[r, c] = k
        relief = -np.asarray(dist, dtype=np.float64)
        evidence = "neck"
    basins = _watershed(relief, markers, mask)
    from scipy import ndimage  # only for a part that splits

    _, (near_r, near_c) = ndimage.distance_transform_edt(basins == 0, return_indices=True)

    def label_at(points: np.ndarray) -> np.ndarray:
        cols = np.clip(np.round(points[:, 0] - origin[0]).astype(int), 0, shape[1] - 1)
        rows = np.clip(np.round(points[:, 1] - origin[1]).astype(int), 0, shape[0] - 1)
        return basins[near_r[rows, cols], near_c[rows, cols]]

    labels = label_at(outer)
    runs = _two_runs(labels)
    if runs is None:
        return None
    i, j = runs
    n = len(outer)
    q1 = 0.5 * (outer[i - 1] + outer[i])
    q2 = 0.5 * (outer[j - 1] + outer[j])
    idx_i = np.arange(i, j) % n if j > i else np.arange(i, j + n) % n
    idx_j = np.arange(j, i + n) % n if j > i else np.arange(j, i) % n
    lobe_i = np.vstack([outer[idx_i], q2[None], q1[None]])  # q2 -> q1 closes it
    lobe_j = np.vstack([outer[idx_j], q1[None], q2[None]])
    # the seam's depth along the cut (its middle: the ends lie in the blurred outline)
    t = np.linspace(0.15, 0.85, 41)
    along = q1[None] + t[:, None] * (q2 - q1)[None]
    cols = np.clip(np.round(along[:, 0] - origin[0]).astype(int), 0, shape[1] - 1)
    rows = np.clip(np.round(along[:, 1] - origin[1]).astype(int), 0, shape[0] - 1)
    depth = 1.0 - float(np.median(cv2.GaussianBlur(normalised().astype(np.float32), (0, 0), 0.7)[rows, cols]))
    if evidence == "seam" and depth < 1.0 - seam_level:
        return None  # the pieces are not separated along the cut: a texture, not a seam
    holes_i: list[np.ndarray] = []
    holes_j: list[np.ndarray] = []
    keep_i: list[int] = []
    keep_j: list[int] = []
    lab_i = labels[i % n]
    for k, h in enumerate(holes_px):
        hl = label_at(np.asarray(h, float))
        if not np.all(hl == hl[0]):
            return None  # a hole on the cut: no clean cut
        (holes_i if hl[0] == lab_i else holes_j).append(np.asarray(h, float))
        (keep_i if hl[0] == lab_i else keep_j).append(k)
    if min(abs(signed_area(lobe_i)), abs(signed_area(lobe_j))) < MIN_LOBE_SHARE * area:
        return None
    return TouchSplit(
        lobes=((lobe_i, holes_i), (lobe_j, holes_j)),
        cut_px=((float(q1[0]), float(q1[1])), (float(q2[0]), float(q2[1]))),
        evidence=evidence,
        seam_depth=depth,
        vertex_index=(np.r_[idx_i, -1, -1], np.r_[idx_j, -1, -1]),
        hole_index=(keep_i, keep_j),
    )
