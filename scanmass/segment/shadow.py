"""Cast shadows in photos: where a found part's edge band could be darkened paper.

A cast shadow darkens the paper but keeps its colour: in linear light each colour channel
of a shadowed paper pixel is the paper white's channel times one common factor (the
shadow's depth), for light sources of one colour. A part differs from it in colour or is
not darker than the paper. Inside a found part, the band along its outline as wide as a
shadow can be (:func:`shadow_band_px`) is tested pixel by pixel against the local paper
white; where much of the band is shadow-like, the outline may include a cast shadow, and
colour alone cannot tell: dark neutral parts (steel reflecting a dark room, black plastic)
look the same as deep shadow.

This module only measures the risk (pixels, fractions); the pipeline turns it into a
warning and an uncertainty term.
"""

from __future__ import annotations

from dataclasses import dataclass

import cv2
import numpy as np

__all__ = ["ShadowRisk", "shadow_risk", "SHADOW_MIN_ELEVATION_DEG", "SHADOW_FRACTION"]

#: Lowest elevation of a light assumed for a cast shadow's length (lamps and windows seen
#: from a table are rarely lower): a shadow reaches thickness / tan(30 deg) = 1.73 x the thickness.
SHADOW_MIN_ELEVATION_DEG = 30.0
#: Share of the edge band that must look like darkened paper before the part is flagged.
SHADOW_FRACTION = 0.1
#: Largest relative difference between the channels' darkening factors of a shadow pixel.
_CHROMA_TOL = 0.12
#: Darkening factors (part / paper white) a shadow can have.
_DEPTH_RANGE = (0.01, 0.85)


@dataclass(frozen=True)
class ShadowRisk:
    """Shadow-like pixels in a part's edge band.

    Attributes
    ----------
    band_px : int
        Pixels in the band along the part's outline (inside the part).
    shadow_like_px : int
        Of those, pixels whose colour is the paper white's, darkened.
    fraction : float
        ``shadow_like_px / band_px``.
    depth : float
        Median darkening factor (part / paper white, channel mean) over the band.
    foreign_outside_px : int
        Pixels just outside the outline (within the band's width) that are neither paper
        nor shadow: another colour, or brighter than the paper (a metal part's reflection
        the outline left out).
    paper_rgb : (3,) ndarray
        The local paper white, linear light.
    """

    band_px: int
    shadow_like_px: int
    fraction: float
    paper_rgb: np.ndarray
    depth: float = float("nan")
    foreign_outside_px: int = 0


def shadow_band_px(thickness_mm: float, mm_per_px: float) -> float:
    """Width in px of the band a cast shadow of a part ``thickness_mm`` thick can cover."""
    return (thickness_mm / np.tan(np.radians(SHADOW_MIN_ELEVATION_DEG)) + 0.5) / mm_per_px


def shadow_risk(colour_lin: np.ndarray, part_mask: np.ndarray, band_px: float) -> ShadowRisk | None:
    """How much of a part's edge band looks like darkened paper.

    Parameters
    ----------
    colour_lin : (H, W, 3) float ndarray
        A crop of the photo in linear light (any channel order).
    part_mask : (H, W) bool ndarray
        The part (holes cleared) in the same crop, with paper all around it.
    band_px : float
        Width of the band inside the outline to test.

    Returns
    -------
    ShadowRisk or None
        None when there is no paper around the part to take the paper white from.
    """
    mask8 = part_mask.astype(np.uint8)
    inside = cv2.distanceTransform(mask8, cv2.DIST_L2, 3)
    band = (inside > 0) & (inside <= max(band_px, 2.0))
    outside = cv2.distanceTransform(1 - mask8, cv2.DIST_L2, 3)
    ring = (outside > 3) & (outside <= 3 + max(band_px, 8.0))
    if ring.sum() < 20 or band.sum() < 20:
        return None
    paper = np.percentile(colour_lin[ring], 75, axis=0)
    if np.any(paper <= 1e-4):
        return None
    q = colour_lin[band] / paper  # each channel's darkening factor
    m = q.mean(axis=1)
    neutral = np.all(np.abs(q - m[:, None]) <= _CHROMA_TOL * m[:, None] + 0.01, axis=1)
    dark = (m >= _DEPTH_RANGE[0]) & (m <= _DEPTH_RANGE[1])
    like = neutral & dark
    n_band, n_like = int(band.sum()), int(like.sum())
    near = (outside > 0) & (outside <= max(band_px, 2.0))
    qo = colour_lin[near] / paper
    mo = qo.mean(axis=1)
    paper_coloured = np.all(np.abs(qo - mo[:, None]) <= 2 * _CHROMA_TOL * mo[:, None] + 0.02, axis=1)
    foreign = ~paper_coloured | (mo > 1.15)
    # an isolated odd pixel (noise, a paper fibre) is no reflection: keep those with odd neighbours
    grid: np.ndarray = np.zeros(part_mask.shape, np.uint8)
    grid[near] = foreign.astype(np.uint8)
    opened = cv2.morphologyEx(grid, cv2.MORPH_OPEN, np.ones((3, 3), np.uint8))
    return ShadowRisk(
        band_px=n_band,
        shadow_like_px=n_like,
        fraction=n_like / n_band,
        paper_rgb=paper,
        depth=float(np.median(m)),
        foreign_outside_px=int(np.count_nonzero(opened)),
    )
