"""The light's direction from the paper's own fall-off: where no part's cut shows which way the shadows fall.

A lamp or a window lights the mat more strongly near its foot: the irradiance of a plane under a small
source falls with the square of the distance and the cosine of the angle of incidence (Lambert's law), so
on the mat the paper's level falls away from the light's foot, and the way it falls is the way a part's
shadow is cast (common practice of shadow geometry). :func:`paper_falloff` fits the log of the paper's
level over the mat's clear area with a quadratic in mat mm (the parts, their shadows and dark print left
out); :func:`shadow_direction_px` gives the fit's downhill direction at a point, in image pixels. A
diffuse light (a softbox overhead) gives no fall-off, and two lights from opposite sides (mixed light)
mostly cancel: both are refused by :data:`MIN_SLOPE_PER_MM`.

Limits: a real camera's vignetting darkens the image's corners too, and so adds a fall-off towards the
frame's edges that no light casts; the renders this was tuned on have none. The direction is only used
where the cut along it tests each step for a shadow's grain (:func:`~scanmass.segment.crescent.crescent_cut`),
which refuses a light against or across the true one.

References
----------
M. Pharr, W. Jakob and G. Humphreys, *Physically Based Rendering*, 3rd ed., Morgan Kaufmann, 2016,
sec. 5.5 (irradiance from a point source, the inverse-square and cosine laws).
"""

from __future__ import annotations

from dataclasses import dataclass

import cv2
import numpy as np

from scanmass.scale.homography import apply_h

__all__ = ["PaperFalloff", "paper_falloff", "shadow_direction_mm", "shadow_direction_px", "MIN_SLOPE_PER_MM"]

#: Least slope (share of the level per mm) of the plane fitted to the paper's log level for its fall-off to
#: show the light's side. On the tuned renders (tests/data/reallight, all 62 photos) one light's slope reads
#: 0.115-0.318 %/mm (windows 0.115-0.231, spotlights 0.149-0.318; the way down the fit at each part within
#: 4.0 degrees of the way from the lamp's centre, truth JSON), two lights of different colours from opposite
#: sides (mixed) at most 0.079 %/mm and a softbox overhead at most 0.001 %/mm.
MIN_SLOPE_PER_MM = 0.001
#: Sampling step (px) of the level: the fall-off is smooth over the page, and a step of 4 px keeps the
#: fit's 20 000-70 000 samples of a 900 x 1200 photo.
STEP_PX = 4
#: Half-width (px) of the window whose brightest sample is the local paper white; a sample is paper where it
#: reaches :data:`PAPER_SHARE` of it.
PAPER_WINDOW_PX = 20
#: Share of the local paper white a sample must reach to be taken as paper (the paper's grain and
#: noise spread its level by a few per cent; a part's face, a shadow and print lie further below).
PAPER_SHARE = 0.85
#: Below this share of the local paper white a sample is dark (a part, its shadow, a marker, print) ...
DARK_SHARE = 0.6
#: ... and the paper within this distance (px) of it is left out (a penumbra, a lit wall, a face's rim).
DARK_MARGIN_PX = 30
#: Samples whose residual from the first fit lies beyond this many robust standard deviations (1.4826 MAD,
#: common practice) are left out of the second.
OUTLIER_SIGMAS = 3.0
#: Fewest paper samples for a fit.
MIN_SAMPLES = 2000


@dataclass(frozen=True)
class PaperFalloff:
    """The paper's log level over the mat: ``coef`` of 1, x, y, x^2, y^2, x*y (mat mm).

    ``slope_per_mm`` is the magnitude of the gradient of a plane fitted to the same samples (a share of
    the level per mm), ``samples`` how many paper samples the fit read.
    """

    coef: np.ndarray
    slope_per_mm: float
    samples: int

    def gradient_per_mm(self, at_mm: np.ndarray) -> np.ndarray:
        """The gradient (x, y; share of the level per mm) of the fitted log level at a point (mm)."""
        c = self.coef
        x, y = float(at_mm[0]), float(at_mm[1])
        return np.array([c[1] + 2.0 * c[3] * x + c[5] * y, c[2] + 2.0 * c[4] * y + c[5] * x])


def _terms(mm: np.ndarray) -> np.ndarray:
    x, y = mm[:, 0], mm[:, 1]
    return np.column_stack([np.ones(len(x)), x, y, x * x, y * y, x * y])


def paper_falloff(level: np.ndarray, valid: np.ndarray, px_to_mm: np.ndarray) -> PaperFalloff | None:
    """The paper's fall-off over the mat's clear area, or None where too little paper shows.

    Parameters
    ----------
    level : (H, W) float ndarray
        The photo's level in linear light (any scale).
    valid : (H, W) bool ndarray
        Where the paper may be read (the mat's clear area).
    px_to_mm : (3, 3) ndarray
        The plane map's matrix, image px -> mat mm.

    Returns
    -------
    PaperFalloff or None
        The fit of the log level on the paper's samples (every :data:`STEP_PX` px; a sample is paper where it
        reaches :data:`PAPER_SHARE` of the brightest within :data:`PAPER_WINDOW_PX` and lies
        :data:`DARK_MARGIN_PX` from any sample under :data:`DARK_SHARE` of it), fitted twice, the second time
        without the first fit's outliers. None with fewer than :data:`MIN_SAMPLES` samples.

    Examples
    --------
    A page lit from the left (the level falls by 0.2 % per mm along x, 1 px = 0.25 mm) with a dark part
    and its shadow on it: the fall-off is read through them, and a flat page gives none.

    >>> yy, xx = np.mgrid[:1000, :800].astype(float)
    >>> level = 0.8 * np.exp(-0.002 * 0.25 * xx); level[400:500, 300:420] = 0.03
    >>> h = np.diag([0.25, 0.25, 1.0]); valid = np.ones(level.shape, bool)
    >>> fit = paper_falloff(level, valid, h)
    >>> round(fit.slope_per_mm, 4), [round(float(v), 4) for v in shadow_direction_px(fit, (360.0, 450.0), h)]
    (0.002, [1.0, 0.0])
    >>> shadow_direction_px(paper_falloff(np.full((1000, 800), 0.8), valid, h), (360.0, 450.0), h) is None
    True
    """
    s = STEP_PX
    lv = np.asarray(level, np.float32)[::s, ::s]
    ok = np.asarray(valid, bool)[::s, ::s] & np.isfinite(lv) & (lv > 0)
    lv = np.where(ok, lv, 0.0).astype(np.float32)
    win = 2 * max(1, PAPER_WINDOW_PX // s) + 1
    local = cv2.dilate(lv, np.ones((win, win), np.uint8))
    dark = ok & (lv < DARK_SHARE * local)
    grow = 2 * max(1, DARK_MARGIN_PX // s) + 1
    dark = cv2.dilate(dark.astype(np.uint8), np.ones((grow, grow), np.uint8)).astype(bool)
    paper = ok & (lv >= PAPER_SHARE * local) & ~dark
    rows, cols = np.nonzero(paper)
    if len(rows) < MIN_SAMPLES:
        return None
    mm = apply_h(np.asarray(px_to_mm, float), np.column_stack([cols * s, rows * s]).astype(float))
    log_level = np.log(lv[rows, cols].astype(float))
    a = _terms(mm)
    coef, *_ = np.linalg.lstsq(a, log_level, rcond=None)
    resid = log_level - a @ coef
    spread = 1.4826 * float(np.median(np.abs(resid - np.median(resid))))
    keep = np.abs(resid) <= OUTLIER_SIGMAS * max(spread, 1e-6)
    if np.count_nonzero(keep) < MIN_SAMPLES:
        return None
    coef, *_ = np.linalg.lstsq(a[keep], log_level[keep], rcond=None)
    plane, *_ = np.linalg.lstsq(a[keep, :3], log_level[keep], rcond=None)
    return PaperFalloff(
        coef=coef, slope_per_mm=float(np.hypot(plane[1], plane[2])), samples=int(np.count_nonzero(keep))
    )


def shadow_direction_mm(falloff: PaperFalloff | None, at_mm: tuple[float, float] | np.ndarray) -> np.ndarray | None:
    """The way a shadow falls on the mat at a point (unit x, y in mat mm): down the paper's fall-off there.

    None without a fit or where its plane's slope is under :data:`MIN_SLOPE_PER_MM` (no one light's side).
    """
    if falloff is None or falloff.slope_per_mm < MIN_SLOPE_PER_MM:
        return None
    down = -falloff.gradient_per_mm(np.asarray(at_mm, float))
    norm = float(np.hypot(down[0], down[1]))
    return None if norm <= 0.0 else down / norm


def shadow_direction_px(
    falloff: PaperFalloff | None, at_px: tuple[float, float] | np.ndarray, px_to_mm: np.ndarray
) -> np.ndarray | None:
    """:func:`shadow_direction_mm` at a point of the image, as a unit vector in image px (x, y)."""
    h = np.asarray(px_to_mm, float)
    at = np.asarray(at_px, float).reshape(1, 2)
    at_mm = apply_h(h, at)[0]
    down = shadow_direction_mm(falloff, at_mm)
    if down is None:
        return None
    ahead = apply_h(np.linalg.inv(h), (at_mm + down).reshape(1, 2))[0] - at[0]
    return ahead / max(float(np.hypot(ahead[0], ahead[1])), 1e-12)
