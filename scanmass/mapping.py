"""Pixel rings into millimetres (the "map" stage): the one place where pixels meet mm.

The segment stage gives each part as sub-pixel rings in pixel coordinates (OpenCV's
convention: ``x_px`` the column, ``y_px`` the row from the top, pixel centres at
integers). :func:`map_part` sends every vertex through the scale stage's
:class:`~scanmass.scale.planemap.PlaneMap` -- a homography after an optional point
correction, so straight edges stay straight and the image is never resampled -- and
returns a :class:`MappedPart` in the mm frame of DESIGN.md (x right, y up). The y flip
is in the map's matrix and reverses the sign of every ring's shoelace area; here, once,
each ring is put in the orientation of DESIGN.md -- outer rings counter-clockwise, holes
clockwise, in mm -- with its per-vertex values. Nothing after this stage looks at pixel
coordinates.

With the rings go what the error model needs from the pixel side: the local pixel size
(mm per px) at every vertex, the edge statistics the segment stage measured, and the
same rings through every sampled map of a fitted homography (for the scale term).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from scanmass.scale.planemap import PlaneMap
from scanmass.segment.rings import PartRings

__all__ = ["MappedPart", "MappedCut", "map_part", "map_cut", "shoelace_area"]


@dataclass(frozen=True)
class MappedPart:
    """One part in mm, with the inputs of its error model.

    Attributes
    ----------
    label : int
    cut : bool
        The part touches the image edge (or the clear area's): its figures describe
        only the visible portion.
    outer_mm : (N, 2) ndarray
        Outer ring in mm, counter-clockwise (x right, y up).
    holes_mm : tuple of (M, 2) ndarrays
        Hole rings in mm, clockwise.
    mm_per_px : tuple of ndarrays
        Local pixel size (mm, geometric mean of the two axes) at each vertex, one array
        per ring: the outer ring first, then the holes in order.
    gradients_px : tuple of ndarrays
        Gradient of the normalised image (0 = background, 1 = part) across the edge at
        each vertex, per px, per ring in the same order.
    noise_rel, contrast, blur_px, level_rel_u : float
        The segment stage's edge statistics: noise over contrast, the part-background
        contrast, the Gaussian-equivalent blur (px) and the relative uncertainty of the
        local levels.
    sample_rings_mm : tuple of (outer, holes)
        The rings through each sampled map of the plane map (empty when it has none).
    filled_holes, filled_hole_area_mm2 : int, float
        Holes below the minimum hole area that segmentation filled (they count as
        material), and their total area at the part's mean pixel size.
    """

    label: int
    cut: bool
    outer_mm: np.ndarray
    holes_mm: tuple[np.ndarray, ...]
    mm_per_px: tuple[np.ndarray, ...]
    gradients_px: tuple[np.ndarray, ...]
    noise_rel: float
    contrast: float
    blur_px: float
    level_rel_u: float
    sample_rings_mm: tuple[tuple[np.ndarray, tuple[np.ndarray, ...]], ...] = ()
    filled_holes: int = 0
    filled_hole_area_mm2: float = 0.0


@dataclass(frozen=True)
class MappedCut:
    """A part left out because it touches the image edge: where it lies, and its pixel area."""

    bbox_mm: tuple[float, float, float, float]
    area_px: float


def map_part(rings: PartRings, plane_map: PlaneMap) -> MappedPart:
    """Map one segmented part's rings into mm, with the local scale along each ring.

    Examples
    --------
    >>> from scanmass.segment.rings import PartRings
    >>> sq = np.array([[10.0, 10.0], [19.0, 10.0], [19.0, 19.0], [10.0, 19.0]])  # clockwise on screen
    >>> part = PartRings(1, sq, [], False, (10, 10, 20, 20), 81.0, 1.0, 0.0, np.ones(4), 1.0, 0.0)
    >>> m = map_part(part, PlaneMap.from_dpi(254, height_px=100))  # 0.1 mm per px
    >>> m.outer_mm.round(6).tolist(), float(m.mm_per_px[0][0].round(12))
    ([[1.05, 8.05], [1.95, 8.05], [1.95, 8.95], [1.05, 8.95]], 0.1)
    >>> round(shoelace_area(m.outer_mm), 9)  # counter-clockwise in mm
    0.81
    """
    rings_px = [rings.outer_px, *rings.holes_px]
    gradients = [rings.gradient_px, *rings.hole_gradients_px]
    mapped = [plane_map.to_mm(r) for r in rings_px]
    # DESIGN.md's orientation: outer counter-clockwise, holes clockwise (in mm, y up)
    flips = [(shoelace_area(r) > 0) != (i == 0) for i, r in enumerate(mapped)]
    mapped = [_flip(r, f) for r, f in zip(mapped, flips)]
    scales = tuple(_flip(plane_map.local_mm_per_px(r), f) for r, f in zip(rings_px, flips))
    grads = tuple(_flip(np.asarray(g), f) for g, f in zip(gradients, flips))
    samples = []
    for s in plane_map.samples:
        ring_set = [_flip(s.to_mm(r), f) for r, f in zip(rings_px, flips)]
        samples.append((ring_set[0], tuple(ring_set[1:])))
    return MappedPart(
        label=rings.label,
        cut=rings.cut,
        outer_mm=mapped[0],
        holes_mm=tuple(mapped[1:]),
        mm_per_px=scales,
        gradients_px=grads,
        noise_rel=rings.noise_rel,
        contrast=rings.contrast,
        blur_px=rings.blur_px,
        level_rel_u=rings.level_rel_u,
        sample_rings_mm=tuple(samples),
        filled_holes=rings.filled_holes,
        filled_hole_area_mm2=float(rings.filled_hole_area_px * np.mean(scales[0]) ** 2),
    )


def _flip(values: np.ndarray, flip: bool) -> np.ndarray:
    """A ring (or its per-vertex values) in reverse order when ``flip``; a single value as it is."""
    return values[::-1] if flip and np.ndim(values) >= 1 else values


def map_cut(rings: PartRings, plane_map: PlaneMap) -> MappedCut:
    """A left-out (cut) part's bounding box in mm and its area in px (its outer ring's)."""
    ring_mm = plane_map.to_mm(rings.outer_px)
    bbox = (
        float(ring_mm[:, 0].min()),
        float(ring_mm[:, 1].min()),
        float(ring_mm[:, 0].max()),
        float(ring_mm[:, 1].max()),
    )
    return MappedCut(bbox_mm=bbox, area_px=abs(shoelace_area(rings.outer_px)))


def shoelace_area(ring: np.ndarray) -> float:
    """Signed area of a ring by the plain shoelace sum (exact for small integer vertices).

    Unlike :func:`scanmass.geometry.signed_area` the vertices are not centred first, so a
    pixel contour with integer vertices gives its area exactly (a multiple of 0.5).

    Examples
    --------
    >>> shoelace_area(np.array([[0, 0], [3, 0], [3, 2]]))
    3.0
    """
    r = np.asarray(ring, dtype=float)
    x, y = r[:, 0], r[:, 1]
    return float(np.dot(x, np.roll(y, -1)) - np.dot(np.roll(x, -1), y)) / 2.0
