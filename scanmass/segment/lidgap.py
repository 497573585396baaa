"""A flatbed scan taken with the lid not closed: a dark band or fall-off along the border.

A thick part holds the scanner's lid off the glass. The lid is then lit less the higher
it stands (the lamp is focused on the glass), and at an open edge the room beyond shows
dark: the white background falls off towards one side and ends in a dark band along the
image border. The local edge levels of :mod:`scanmass.segment.rings` follow a gentle
fall-off, but a band darker than the midpoint between the lid and a dark part is found as
a part (cut by the image edge) or merges with the parts it reaches.

:func:`lid_gap` reads the background level along each side of the image, in strips
parallel to the border, from the strips' bright quantile (parts cover only a share of a
strip), relative to the lid's white in the middle of the image.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["LidGap", "lid_gap", "LID_GAP_RATIO"]

#: A border whose background falls below this share of the lid's white in the middle of the
#: image means the lid was not closed (a closed lid keeps a scan's background within ~20 %).
LID_GAP_RATIO = 0.6

#: The level at which the band counts as dark: parts' edges inside it lose their local levels.
DARK_BAND_RATIO = 0.75

_SIDES = ("top", "bottom", "left", "right")


@dataclass(frozen=True)
class LidGap:
    """The darkest side of a scan's background and how far in the fall-off reaches."""

    side: str
    #: the background level at that border, relative to the lid's white in the middle
    border_ratio: float
    #: how far in from that border (px) the background stays below DARK_BAND_RATIO of the white
    band_px: float
    #: every side whose border falls below LID_GAP_RATIO
    sides: tuple[str, ...]


def _strip_levels(small: np.ndarray, side: str, strips: int, quantile: float) -> tuple[np.ndarray, float]:
    """The bright quantile of each of ``strips`` strips from one border inwards (to 30 % of the image), and
    the strip width in the small image's pixels."""
    img = {"top": small, "bottom": small[::-1], "left": small.T, "right": small.T[::-1]}[side]
    depth = img.shape[0]
    width = max(1.0, 0.3 * depth / strips)
    levels = []
    for k in range(strips):
        a, b = int(round(k * width)), max(int(round((k + 1) * width)), int(round(k * width)) + 1)
        levels.append(float(np.quantile(img[a:b], quantile)))
    return np.asarray(levels), width


def lid_gap(grey: np.ndarray, to_linear: np.ndarray, *, quantile: float = 0.8) -> LidGap | None:
    """Whether a scan's background falls off towards a border as with the lid not closed.

    Parameters
    ----------
    grey : (H, W) uint8 or uint16 ndarray
        The encoded grey plane.
    to_linear : ndarray
        The decoding table (encoded value -> linear light).
    quantile : float
        The share of a strip below its level: parts may cover up to ``1 - quantile`` of it.

    Returns
    -------
    LidGap or None
        None when every border keeps at least :data:`LID_GAP_RATIO` of the lid's white, or
        when the background is not a light lid (dark in the middle, or on three or four
        sides: light parts on a dark background).

    Examples
    --------
    >>> lut = np.linspace(0.0, 1.0, 256)
    >>> img = np.full((200, 300), 220, np.uint8); img[80:120, 100:200] = 20
    >>> lid_gap(img, lut) is None
    True
    >>> img[:30] = np.linspace(40, 220, 30, dtype=np.uint8)[:, None]  # a dark band along the top
    >>> gap = lid_gap(img, lut)
    >>> gap.side, round(gap.border_ratio, 2)
    ('top', 0.26)
    """
    height, width = grey.shape[:2]
    factor = max(1, int(math.ceil(max(height, width) / 400)))
    small_enc = grey[factor // 2 :: factor, factor // 2 :: factor]  # a sample suffices for quantiles
    small = np.asarray(to_linear, dtype=np.float64)[small_enc]
    h, w = small.shape
    if min(h, w) < 20:
        return None
    middle = small[int(0.3 * h) : int(0.7 * h) + 1, int(0.3 * w) : int(0.7 * w) + 1]
    white = float(np.quantile(middle, quantile))
    full = float(np.asarray(to_linear)[-1])
    if white < 0.25 * full:
        return None  # not a light lid behind dark parts
    found = []
    for side in _SIDES:
        levels, strip = _strip_levels(small, side, 15, quantile)
        ratio = levels / white
        if ratio[0] >= LID_GAP_RATIO:
            continue
        dark = ratio < DARK_BAND_RATIO
        reach = int(np.argmin(dark)) if not dark.all() else len(dark)
        found.append((float(ratio[0]), side, reach * strip * factor))
    if not found or len(found) >= 3:
        return None  # dark on three or four sides: a dark background (light parts), not a gap at one side
    found.sort()
    ratio0, side, band = found[0]
    return LidGap(side=side, border_ratio=ratio0, band_px=float(band), sides=tuple(s for _, s, _ in found))
