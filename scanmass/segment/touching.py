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

__all__ = ["NeckReport", "touching_lobes", "NECK_RATIO"]

#: A neck narrower than this share of the smaller lobe's inscribed diameter means two parts.
NECK_RATIO = 0.35


@dataclass(frozen=True)
class NeckReport:
    """Two lobes of one component joined by a narrow neck (pixels)."""

    neck_width_px: float
    lobe_widths_px: tuple[float, float]
    lobe_areas_px: tuple[float, float]


def touching_lobes(outer_px: np.ndarray, holes_px: list[np.ndarray] | None = None) -> NeckReport | None:
    """Whether a part's silhouette looks like two parts touching, from its rings in pixels.

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
    from skimage.feature import peak_local_max
    from skimage.segmentation import watershed

    ring = np.asarray(outer_px, dtype=float)
    lo = ring.min(axis=0) - 3
    size = ring.max(axis=0) - lo + 3
    step = max(1.0, float(size.max()) / 400.0)
    shape = (int(np.ceil(size[1] / step)) + 1, int(np.ceil(size[0] / step)) + 1)
    mask = np.zeros(shape, np.uint8)
    cv2.fillPoly(mask, [np.round((ring - lo) / step).astype(np.int32)], 1)
    for h in holes_px or []:
        cv2.fillPoly(mask, [np.round((np.asarray(h, float) - lo) / step).astype(np.int32)], 0)
    dist = cv2.distanceTransform(mask, cv2.DIST_L2, cv2.DIST_MASK_PRECISE)
    if dist.max() < 3:
        return None
    peaks = peak_local_max(
        dist, min_distance=max(3, int(0.5 * dist.max())), threshold_abs=0.3 * dist.max(), labels=mask
    )
    if len(peaks) < 2:
        return None
    markers = np.zeros(mask.shape, np.int32)
    for k, (r, c) in enumerate(peaks, start=1):
        markers[r, c] = k
    basins = watershed(-dist, markers, mask=mask.astype(bool), watershed_line=True)
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
