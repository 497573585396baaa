"""Pixel rings into millimetres (the "map" stage): the one place where pixels meet mm.

The segment stage gives each part as sub-pixel rings in pixel coordinates (OpenCV's
convention: ``x_px`` the column, ``y_px`` the row from the top, pixel centres at
integers). :func:`map_part` sends every vertex through the scale stage's
:class:`~scanmass.scale.planemap.PlaneMap` -- a homography after an optional point
correction, so straight edges stay straight and the image is never resampled -- and
returns a :class:`MappedPart` in the mm frame of DESIGN.md (x right, y up). The y flip
is in the map's matrix, so a ring that is clockwise on screen comes out
counter-clockwise in mm; nothing after this stage looks at pixel coordinates.

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
        Outer ring in mm (orientation as mapped: counter-clockwise for a map that flips y).
    holes_mm : tuple of (M, 2) ndarrays
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
    >>> m.outer_mm[0].round(6).tolist(), float(m.mm_per_px[0][0].round(12))
    ([1.05, 8.95], 0.1)
    >>> shoelace_area(m.outer_mm) > 0  # counter-clockwise in mm
    True
    """
    outer_mm = plane_map.to_mm(rings.outer_px)
    holes_mm = tuple(plane_map.to_mm(h) for h in rings.holes_px)
    scales = (plane_map.local_mm_per_px(rings.outer_px),) + tuple(plane_map.local_mm_per_px(h) for h in rings.holes_px)
    samples = tuple((s.to_mm(rings.outer_px), tuple(s.to_mm(h) for h in rings.holes_px)) for s in plane_map.samples)
    return MappedPart(
        label=rings.label,
        cut=rings.cut,
        outer_mm=outer_mm,
        holes_mm=holes_mm,
        mm_per_px=scales,
        gradients_px=(rings.gradient_px, *rings.hole_gradients_px),
        noise_rel=rings.noise_rel,
        contrast=rings.contrast,
        blur_px=rings.blur_px,
        level_rel_u=rings.level_rel_u,
        sample_rings_mm=samples,
    )


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
