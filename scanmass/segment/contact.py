"""The paper's level at a dark part's edge where a soft contact shadow darkens it (photos).

Under soft light a raised part hides part of the sky from the paper at its foot: the paper
is darkest next to the wall and fades back to its full level over a few pixels, keeping its
chroma (ambient occlusion). The part's edge itself is a sharp step. The midpoint rule with
the paper's level taken further out (:func:`scanmass.segment.rings.segment`, 5-9 px beyond
the edge) then puts the edge where the blurred step meets the darkened paper's half-way
value, outside the true edge: by 0.3-0.8 px on the path-traced black parts in soft light
(tests/data/reallight), 3-5 % of their area.

:func:`edge_shadow_depth` reads the paper's profile along each boundary point's outward
normal, 1.5-5 px beyond the edge (where the edge's own blur tail is taken out), averages it
along the ring, and extrapolates its exponential trend (:func:`_exponential_trend`) back to half
a pixel from the edge: the darkening there, as a share ``s`` of the part's contrast. The soft-light
renders' shades fade so, by a near-constant ratio per step (0.65-0.70 per half pixel, 1.2-1.5 px
fade lengths, on the gasket of tests/data/reallight/soft-black-t15 from 1.5 to 4 px out); a
parabola through the same samples (stop 30) read the depth at the edge a third to a half short
there and left those edges 0.05-0.15 px outside. Where the paper fades
back out (a contact shadow, not a flat cast shadow) and ``s`` is at least
:data:`MIN_DEPTH`, the edge's level is taken half-way between the part and that darkened
paper: ``(1 + s) / 2`` in the normalised image (0 = paper further out, 1 = part), which
:func:`renormalise` turns back into a 0.5 level pixel by pixel. Without such a shadow
(flat paper: scans, the synthetic photos) nothing changes.

Under two lamps of different colours the shade of one beside the edge is lit by the other alone and
leans to its colour; a contact shade keeps the paper's. :func:`tint_shift` reads the shift of the
shade's log-chromaticity from the paper's further out per unit of its darkening, and
:func:`lamp_tinted` marks the points where it is above a contact shade's spread
(:data:`MAX_TINT_SHIFT`): those do not count towards the all-round share that lets the rule act.
"""

from __future__ import annotations

import math

import cv2
import numpy as np

from scanmass.numeric import sample_points

__all__ = [
    "MIN_DEPTH",
    "MAX_DEPTH",
    "edge_shadow_depth",
    "renormalise",
    "depth_field",
    "part_side_rise",
    "tint_shift",
    "lamp_tinted",
]

#: The least darkening at the edge (share of the contrast) that is taken as a contact
#: shadow: it moves the level by 0.015 (0.02-0.03 px under a 1 px blur).
MIN_DEPTH = 0.03
#: The most: beyond it the paper beside the edge is as dark as a part (a cast shadow's
#: core), which :mod:`scanmass.segment.castshadow` handles.
MAX_DEPTH = 0.6
#: The paper's profile is sampled this far out (px, from the first sample), in steps of
#: half a pixel.
PROFILE_SPAN_PX = 3.5
#: Where the trend is read: half a pixel beyond the edge (the blurred step's half beyond
#: the edge averages the paper over about 0.8 blur sigma).
EDGE_READ_PX = 0.5
#: Arc length (px, 1 sigma) over which the profiles are averaged along the ring.
ALONG_PX = 3.0
#: Share of its depth that a contact shadow must fade over the sampled span (a cast
#: shadow's flat core does not).
MIN_FADE = 0.4
#: Shortest fade length (px) of the exponential read back to the edge: a shade that fades
#: faster lies within the edge's own blur (0.4-0.8 px on the renders) and is not told from its
#: tail; it bounds the read-back from the first sample (1.5 px out) to e times that sample. The
#: soft-light renders' shades fade over 1.2-1.5 px (tests/data/reallight, the profile 1.5-5 px out).
MIN_FADE_LENGTH_PX = 1.0
#: The paper's tint beside the edge is read over this span (px) from the first sample.
NEAR_SPAN_PX = 1.0
#: And compared with the paper's this far out (px, over 1 px): where the segmentation's paper level is taken.
FAR_PX = 7.0
#: Least darkening (log of the luma ratio) whose tint is read.
MIN_DARKENING = 0.02
#: Largest tint shift per unit darkening (log-chromaticity per log luma) read as a contact shade's: its
#: tint is the paper's, and what the reading shows there is its noise (JPEG chroma, the filmic look). On the
#: soft-light renders' black parts (tests/data/reallight, one soft light: every shade a contact shade) the
#: outer outlines' points read 0.01-0.13 median, 0.24-0.51 at the 95th percentile and 0.49-0.81 at the 99th;
#: the limit lies at the top of that spread, so that about one contact-shade point in a hundred is taken for
#: a lamp's. Under the mixed renders' two lamps (warm and cool, benchmarks/render_reallight.py) the shade
#: beside the outlines leans along the two lamps' colour axis (shift across it under 0.015) by up to 0.9.
MAX_TINT_SHIFT = 0.7
#: Samples at or under this share of the contrast are left out of the log fit (noise about 0).
_LOG_FLOOR = 0.003


#: The rise of a step blurred by 0.4 px (sigma) from its edge to 1 px inside: a wall darker
#: than the face beside the edge (a black part's side wall) rises further, which no blur does.
_SHARPEST_RISE = 0.5 * math.erf(1.0 / (0.4 * math.sqrt(2.0)))


def _gauss_tail(z: np.ndarray) -> np.ndarray:
    return 0.5 * np.vectorize(math.erfc)(z / math.sqrt(2.0))


def _ring_normals(ring_rc: np.ndarray) -> np.ndarray:
    """Unit normals (row, col) of a closed ring by central differences two vertices apart."""
    tangent = np.roll(ring_rc, -2, axis=0) - np.roll(ring_rc, 2, axis=0)
    length = np.hypot(tangent[:, 0], tangent[:, 1])
    length[length == 0] = 1.0
    return np.column_stack([-tangent[:, 1], tangent[:, 0]]) / length[:, None]


def _smooth_along(values: np.ndarray, weights: np.ndarray, ring_rc: np.ndarray, sigma_px: float) -> np.ndarray:
    """Weighted Gaussian average of per-vertex rows along a closed ring (arc length sigma_px)."""
    n = len(ring_rc)
    step = np.hypot(*(np.roll(ring_rc, -1, axis=0) - ring_rc).T)
    spacing = float(step.mean()) or 1.0
    width = sigma_px / spacing
    half = int(min(n // 2 - 1, math.ceil(3 * width)))
    if half < 1:
        return np.where(weights > 0, values, np.nan)
    k = np.exp(-0.5 * (np.arange(-half, half + 1) / width) ** 2)
    out = np.empty_like(values)
    for j in range(values.shape[1]):
        wv = np.concatenate([(weights * values)[-half:, j], (weights * values)[:, j], (weights * values)[:half, j]])
        w = np.concatenate([weights[-half:, j], weights[:, j], weights[:half, j]])
        num = np.convolve(wv, k, mode="valid")
        den = np.convolve(w, k, mode="valid")
        out[:, j] = np.where(den > 0.5, num / np.maximum(den, 1e-12), np.nan)
    return out


def _outward(unit: np.ndarray, ring_rc: np.ndarray) -> np.ndarray:
    """Unit normals of a ring pointing away from the part: to where ``unit`` is lower, by the ring's majority."""
    normal = _ring_normals(ring_rc)
    ahead, behind = ring_rc + normal, ring_rc - normal
    probe = sample_points(unit, ahead[:, 1], ahead[:, 0], cv2.INTER_LINEAR) - sample_points(
        unit, behind[:, 1], behind[:, 0], cv2.INTER_LINEAR
    )
    return -normal if np.median(probe) > 0 else normal


def part_side_rise(norm: np.ndarray, ring_rc: np.ndarray, level: float) -> np.ndarray:
    """The rise of ``norm`` from each boundary point to 1 px inside the part (for the blur).

    Beside a contact shadow the paper's side of the step is no flat level, so the rise
    across the edge misstates the blur; the part's side alone rises by ``erf(1 / (sigma
    sqrt 2)) / 2`` for a Gaussian blur of sigma, as half the rise across a clean edge does.
    """
    if len(ring_rc) < 8:
        return np.full(len(ring_rc), _SHARPEST_RISE)
    inward = -_outward(norm, ring_rc)
    inside = ring_rc + inward
    rise = sample_points(norm, inside[:, 1], inside[:, 0], cv2.INTER_CUBIC).astype(np.float64) - level
    return np.minimum(rise, _SHARPEST_RISE)


def edge_shadow_depth(unit: np.ndarray, ring_rc: np.ndarray, blur_px: float) -> np.ndarray:
    """Per boundary point, the contact shadow's darkening of the paper at the edge (share of the contrast).

    Parameters
    ----------
    unit : (H, W) float32 ndarray
        The crop normalised with the paper's level further out (0) and the part's (1).
    ring_rc : (N, 2) ndarray
        A closed ring (row, col) in ``unit``'s pixels, at the current edge.
    blur_px : float
        The edge's blur (Gaussian sigma, px): the first sample lies at ``max(2, 2 blur)``
        px and the step's own tail ``Q(x / blur)`` is taken out of every sample.

    Returns
    -------
    (N,) ndarray
        ``s`` in [0, :data:`MAX_DEPTH`] where a fading contact shadow of at least
        :data:`MIN_DEPTH` lies beside the point, else 0.
    """
    n = len(ring_rc)
    if n < 8:
        return np.zeros(n)
    normal = _outward(unit, ring_rc)
    sigma = min(max(float(blur_px), 0.3), 2.0) if math.isfinite(blur_px) else 1.0
    start = max(1.5, 2.0 * sigma)
    xs = start + np.arange(0.0, PROFILE_SPAN_PX + 1e-9, 0.5)
    pts = ring_rc[:, None, :] + xs[None, :, None] * normal[:, None, :]
    u = sample_points(unit, pts[..., 1], pts[..., 0], cv2.INTER_LINEAR).astype(np.float64)
    tail = _gauss_tail(xs / sigma)[None, :]
    depth = (u - tail) / (1.0 - tail)
    ok = np.isfinite(depth) & (u < 0.5)  # a sample on a part (a narrow hole's far side) is no paper
    depth = np.where(ok, depth, 0.0)
    mean = _smooth_along(depth, ok.astype(np.float64), ring_rc, ALONG_PX)
    good = np.all(np.isfinite(mean), axis=1)
    out = np.zeros(n)
    if not good.any():
        return out
    # the trend of each point's averaged profile (an exponential fade: a contact shadow deepens
    # ever faster towards the wall), read half a pixel from the edge
    prof = mean[good]
    amplitude, slope = _exponential_trend(prof, xs)
    at_edge = amplitude * np.exp(slope * EDGE_READ_PX)
    fade = prof[:, 0] - prof[:, -1]
    take = (at_edge >= MIN_DEPTH) & (prof[:, 0] > 0) & (fade >= MIN_FADE * prof[:, 0])
    out[np.flatnonzero(good)[take]] = np.minimum(at_edge[take], MAX_DEPTH)
    return out


def tint_shift(colour: np.ndarray, unit: np.ndarray, ring_rc: np.ndarray, blur_px: float) -> np.ndarray:
    """Per boundary point, how far the shade beside the edge leans from the paper's tint, per unit of its darkening.

    The paper just beyond the edge's blur (the first samples of :func:`edge_shadow_depth`) and further
    out (:data:`FAR_PX`), each averaged along the ring: the log-chromaticity shift (the log of each channel
    less their mean) between the two, over the log of their luma ratio. Light taken away evenly (a contact
    shade: every lamp hidden alike) leaves the tint and reads about 0; one lamp's penumbra, lit by the other
    lamp alone, leans to that lamp's colour by a shift in proportion to its darkening (the ratio about the
    two lamps' log-chromaticity distance). NaN where the paper is not darkened or not sampled. ``colour``
    is the crop in linear light, its channels in any order (the reading does not depend on it), framed as
    ``unit``.
    """
    n = len(ring_rc)
    if n < 8:
        return np.full(n, np.nan)
    normal = _outward(unit, ring_rc)
    sigma = min(max(float(blur_px), 0.3), 2.0) if math.isfinite(blur_px) else 1.0
    start = max(1.5, 2.0 * sigma)
    near_xs = start + np.arange(0.0, NEAR_SPAN_PX + 1e-9, 0.5)
    far_xs = FAR_PX + np.arange(0.0, 1.0 + 1e-9, 0.5)
    cols = []
    for xs in (near_xs, far_xs):
        pts = ring_rc[:, None, :] + xs[None, :, None] * normal[:, None, :]
        for ch in range(3):
            v = sample_points(np.ascontiguousarray(colour[..., ch]), pts[..., 1], pts[..., 0], cv2.INTER_LINEAR)
            cols.append(np.asarray(v, np.float64).mean(axis=1))
        u = sample_points(unit, pts[..., 1], pts[..., 0], cv2.INTER_LINEAR)
        cols.append(np.where(np.asarray(u) < 0.5, 1.0, 0.0).min(axis=1))  # paper throughout, not a part
    stack = np.column_stack(cols)
    paper = (stack[:, 3] > 0) & (stack[:, 7] > 0) & np.all(stack[:, [0, 1, 2, 4, 5, 6]] > 0, axis=1)
    w = np.repeat(paper.astype(np.float64)[:, None], 6, axis=1)
    mean = _smooth_along(np.where(paper[:, None], stack[:, [0, 1, 2, 4, 5, 6]], 0.0), w, ring_rc, ALONG_PX)
    near, far = mean[:, :3], mean[:, 3:]
    shift, darkening = _tint_change(near, far)
    with np.errstate(invalid="ignore", divide="ignore"):
        out = np.linalg.norm(shift, axis=1) / darkening
    return np.where(np.isfinite(out) & (darkening > MIN_DARKENING), out, np.nan)


def _tint_change(near: np.ndarray, far: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The log-chromaticity shift (N, 3) from ``far`` to ``near`` (linear RGB rows) and the darkening (log luma ratio)."""
    with np.errstate(invalid="ignore", divide="ignore"):
        log_ratio = np.log(near) - np.log(far)
        darkening = -np.log(near.sum(axis=1) / far.sum(axis=1))
    return log_ratio - log_ratio.mean(axis=1, keepdims=True), darkening


def lamp_tinted(colour: np.ndarray, unit: np.ndarray, ring_rc: np.ndarray, blur_px: float) -> np.ndarray:
    """Per boundary point, whether the shade beside the edge is a lamp's tinted penumbra (:func:`tint_shift`)."""
    with np.errstate(invalid="ignore"):
        return tint_shift(colour, unit, ring_rc, blur_px) > MAX_TINT_SHIFT


def _exponential_trend(prof: np.ndarray, xs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Each row's exponential trend ``A exp(x k)`` through the profile ``prof`` at ``xs``: (A at x = 0, k).

    A weighted least-squares line through the log of the positive samples (weights ``prof**2``,
    the inverse variance of a log under additive noise); the fade length ``-1 / k`` is kept at least
    :data:`MIN_FADE_LENGTH_PX`, a profile that does not fade is read flat (k = 0), and a row with
    fewer than 3 positive samples reads A = 0.

    Examples
    --------
    >>> xs = np.arange(1.5, 5.01, 0.5)
    >>> a, k = _exponential_trend(0.3 * np.exp(-xs / 1.5)[None, :], xs)
    >>> round(float(a[0]), 4), round(float(-1 / k[0]), 4)
    (0.3, 1.5)
    """
    ok = prof > _LOG_FLOOR
    w = np.where(ok, prof, 0.0) ** 2
    logp = np.log(np.where(ok, prof, 1.0))
    sw = w.sum(axis=1)
    safe = np.maximum(sw, 1e-300)
    mx = (w * xs).sum(axis=1) / safe
    my = (w * logp).sum(axis=1) / safe
    sxx = (w * (xs - mx[:, None]) ** 2).sum(axis=1)
    sxy = (w * (xs - mx[:, None]) * (logp - my[:, None])).sum(axis=1)
    slope = np.where(sxx > 0, sxy / np.maximum(sxx, 1e-300), 0.0)
    slope = np.clip(slope, -1.0 / MIN_FADE_LENGTH_PX, 0.0)
    amplitude = np.where((sw > 0) & (ok.sum(axis=1) >= 3), np.exp(my - slope * mx), 0.0)
    return amplitude, slope


def depth_field(shape: tuple[int, int], rings_rc: list[np.ndarray], depths: list[np.ndarray]) -> np.ndarray:
    """Each pixel's depth from the nearest boundary point (float32, ``shape``)."""
    seeds = np.ones(shape, np.uint8)
    values = [0.0]
    label_img = np.zeros(shape, np.int32)
    for ring, depth in zip(rings_rc, depths):
        idx = np.clip(np.rint(ring).astype(np.int64), 0, np.array(shape) - 1)
        seeds[idx[:, 0], idx[:, 1]] = 0
        label_img[idx[:, 0], idx[:, 1]] = np.arange(len(values), len(values) + len(ring))
        values.extend(np.asarray(depth, float).tolist())
    if seeds.all():
        return np.zeros(shape, np.float32)
    _, labels = cv2.distanceTransformWithLabels(seeds, cv2.DIST_L2, 3, labelType=cv2.DIST_LABEL_PIXEL)
    # labels number the zero pixels in scan order: map them to the boundary points they hold
    zero_r, zero_c = np.nonzero(seeds == 0)
    lut = np.zeros(len(zero_r) + 1, np.float32)
    lut[1:] = np.asarray(values, np.float32)[label_img[zero_r, zero_c]]
    return lut[labels]


def renormalise(norm: np.ndarray, band: np.ndarray, depth: np.ndarray) -> np.ndarray:
    """The normalised crop with each band pixel's paper level moved to its contact shadow's depth.

    ``(v - s) / (1 - s)``: the 0.5 level of the result is the ``(1 + s) / 2`` level of ``norm``.
    """
    out = norm.copy()
    s = depth[band]
    out[band] = (norm[band] - s) / (1.0 - s)
    return out
