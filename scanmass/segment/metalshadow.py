"""Coloured cast shadows of mixed light swept from metal faces in photos (:func:`metal_colour_sweep`).

Under two lights of different colours each light's shadow is lit by the other light and takes its
colour (:mod:`scanmass.segment.colourshadow`). A dark matte face is told from such a shadow by its own
colour, one colour at every level. A brushed-metal face mirrors the lamps and the room: its levels
spread from near black to near the paper's, and some of its pixels take the shadow lines' colours, so
:func:`~scanmass.segment.colourshadow.colour_sweep` refuses it. Two things still tell the shadow:

* the shadow is paper, lit by one light: its pixels lie on that light's shadow line (the light a pixel
  misses, ``1 - q`` over the paper white, has the blocked light's colour at every depth), read on the
  penumbrae outside the part as :func:`~scanmass.segment.colourshadow.shadow_lines` does;
* the shadow is smooth: it carries the paper's grain, scaled by its level, while a brushed face's
  streaks and mirrored speckle are rougher (:func:`~scanmass.segment.castshadow.roughness`).

A pixel of the region is shadow-like when it lies near a shadow line (nearer than
:data:`METAL_LINE_TOL` of the light it misses) and is smoother than the face (under
:data:`METAL_GRAIN_SHARE` of the face's median roughness). A cast shadow lies along the light, on one
side of the part: of the :data:`~scanmass.segment.colourshadow.SWEEP_DIRECTIONS` sweeps from the outer
outline the one whose run of layers (each at least half shadow-like, within the shadow's reach) holds
the most shadow-like pixels net gives its side and depth, as for a matte face; the face's own mirrored
patches of a shadow line's colour are rough and hold up no such run.

References
----------
The model of a pixel as the sum of the lights reaching it, each scaled by the surface's reflectance per
channel, is the common practice of illuminant estimation and shadow removal (a diagonal model of the
camera's channels).
"""

from __future__ import annotations

import numpy as np

from scanmass.segment.colourshadow import (
    SWEEP_DIRECTIONS,
    SWEEP_MAX_FACE_TINT,
    SWEEP_MIN_SPREAD,
    ColourSweep,
    _colour_run,
    _line_distance,
    face_reading,
)
from scanmass.segment.shadowlayer import _filled, roughness

__all__ = ["metal_colour_sweep", "METAL_LINE_TOL", "METAL_GRAIN_SHARE", "METAL_MIN_LEVEL_SPREAD"]

#: Largest distance of a shadow-like pixel from a shadow line, as a share of the light it misses
#: (``1 - q``, mean over the channels).
METAL_LINE_TOL = 0.06
#: Largest roughness of a shadow-like pixel, as a share of the face's median roughness.
METAL_GRAIN_SHARE = 0.6
#: Smallest ratio of the face's levels (90th to 10th percentile over its interior) for this sweep: a
#: face that spreads less is matte, and :func:`~scanmass.segment.colourshadow.colour_sweep` reads it
#: (its :data:`~scanmass.segment.colourshadow._FACE_LEVEL_SPREAD`).
METAL_MIN_LEVEL_SPREAD = 2.5
#: Level (share of the paper white) at and above which a pixel is no shadow.
_MAX_LEVEL = 0.9
#: Level (share of the paper white) below which a pixel is no shadow.
METAL_MIN_LEVEL = 0.18


def metal_like(
    q: np.ndarray, part_mask: np.ndarray, interior: np.ndarray, inside: np.ndarray, lines: np.ndarray, reach_px: float
) -> np.ndarray:
    """The region's pixels near a shadow line and smoother than the face, darker than the paper, within the reach."""
    level = q.mean(axis=2)
    miss = np.maximum(1.0 - level, 1e-3)
    near = np.minimum.reduce([_line_distance(q, line) for line in lines]) < METAL_LINE_TOL * miss
    rough = roughness(level)
    smooth = rough < METAL_GRAIN_SHARE * float(np.median(rough[interior]))
    return part_mask & near & smooth & (level > METAL_MIN_LEVEL) & (level < _MAX_LEVEL) & (inside <= reach_px)


def metal_colour_sweep(
    colour_lin: np.ndarray, part_mask: np.ndarray, paper_rgb: np.ndarray, reach_px: float
) -> ColourSweep | None:
    """A metal region's shadow-like pixels under two lights of different colours, and its best sweep.

    Parameters
    ----------
    colour_lin : (H, W, 3) float ndarray
        A crop of the photo in linear light, with paper all around the region.
    part_mask : (H, W) bool ndarray
        The found region (holes cleared).
    paper_rgb : (3,) ndarray
        The local paper white (linear).
    reach_px : float
        How far (px) inside the region a shadow can reach, and beyond it the ring read for the lines.

    Returns
    -------
    ColourSweep or None
        None where the face is matte (levels spread less than :data:`METAL_MIN_LEVEL_SPREAD` times:
        :func:`~scanmass.segment.colourshadow.colour_sweep` reads it), coloured (brass), the lights do
        not plainly differ in colour, or no sweep runs a layer.

    Examples
    --------
    A brushed face (stripes 4 px wide at 0.05 and 0.4 of the paper, speckled) with the cool light's umbra
    (lit by the warm lamp, so warm) 6 px deep inside its found region on the right, the warm lamp's
    shadow beyond its left edge, the paper's grain 1 %: the matte sweep refuses the face, this one runs
    to the right as deep as the umbra (its first layer blurred with the face).

    >>> from scanmass.segment.colourshadow import colour_sweep
    >>> rng = np.random.default_rng(3)
    >>> warm = np.array([0.6, 0.8, 1.0])  # blue, green, red: the image's channel order
    >>> f_w = 0.4 * warm / warm.mean(); f_c = 1 - f_w
    >>> img = np.ones((90, 90, 3)); mask = np.zeros((90, 90), bool); mask[25:65, 25:65] = True
    >>> stripes = np.where((np.arange(34) // 4 % 2)[None, :] == 1, 0.4, 0.05)
    >>> sectors = np.clip(stripes * (1 + 0.3 * rng.standard_normal((40, 34))), 0.01, None)
    >>> img[25:65, 25:59] = sectors[..., None] * np.array([1.05, 1.0, 0.95])
    >>> img[25:65, 59:65] = f_w + 0.05 * f_c  # the cool light's umbra inside the region
    >>> t = np.linspace(0.05, 0.95, 14)[None, :, None]
    >>> img[25:65, 65:79] = 1 - (1 - t) * f_c  # its penumbra beyond the outline
    >>> img[25:65, 11:25] = 1 - (1 - t[:, ::-1]) * f_w  # the warm lamp's, on the left
    >>> img = (img * (1 + 0.01 * rng.standard_normal((90, 90, 1)))).astype(np.float32)
    >>> colour_sweep(img, mask, np.ones(3), 12.0) is None  # levels spread as a metal face's
    True
    >>> found = metal_colour_sweep(img, mask, np.ones(3), 12.0)
    >>> [round(v, 2) for v in found.direction], found.length_px, found.metal
    ([1.0, 0.0], 5, True)
    """
    read = face_reading(colour_lin, part_mask, paper_rgb, reach_px, SWEEP_MIN_SPREAD)
    if read is None:
        return None
    q, _, inside, interior, found, (lo, hi) = read
    if hi <= METAL_MIN_LEVEL_SPREAD * max(lo, 1e-6):
        return None
    face = np.median(q[interior], axis=0)
    if abs(float(face[2] - face[0])) > SWEEP_MAX_FACE_TINT * max(float(face.mean()), 1e-6):
        return None
    like = metal_like(q, part_mask, interior, inside, found.lines, reach_px)
    best: tuple[float, int, np.ndarray] | None = None
    outer8 = _filled(part_mask).astype(np.uint8)
    for a in np.arange(SWEEP_DIRECTIONS) * (2.0 * np.pi / SWEEP_DIRECTIONS):
        d = np.array([np.cos(a), np.sin(a)])
        run, score = _colour_run(outer8, d, like, reach_px)
        if run > 0 and (best is None or score > best[0]):
            best = (score, run, d)
    if best is None:
        return None
    return ColourSweep(like, (float(best[2][0]), float(best[2][1])), best[0], best[1], metal=True)
