"""Pieces of one part: a small region found beside a larger one across a strip that is not paper.

Part of the segment stage (:mod:`scanmass.segment`). A part is one body of one material: its
outline closes around it. In a photo of a bright, grainy metal (brushed steel that sparkles
under mixed light, a lit face as bright as the paper) or after a cast shadow's cut, the
segmentation can find it as several regions: a large piece and small ones a pixel or two away,
the strip between them the face's own grain (bright flecks of the face taken for paper), not
the clean, smooth paper that lies between two real parts. Such a small piece is no part of its
own: it is merged into the larger piece, and the material the strip may hold (the convex hull
of the pieces less what was found) is a term of the merged part.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import cv2
import numpy as np

from scanmass.segment.rings import PartRings

#: A piece counts as a fragment only beside a piece at least this many times its area: a part
#: next to one of its own size is another part (two plates laid side by side).
FRAGMENT_AREA_RATIO = 4.0
#: The gap (px) a fragment may lie from the larger piece, as a share of that piece's largest
#: extent: within its own reach, not a part laid beside it (the renders' parts lie 13 mm or more
#: apart, their fragments 0.9-1.4 mm from the larger piece).
FRAGMENT_REACH_SHARE = 0.1
#: The strip between two real parts is paper: as smooth as the paper around them. Between the
#: pieces of one grainy part it holds the face's grain; the strip is taken as not paper when its
#: spread of linear level is this many times the paper's beside the pieces.
FRAGMENT_GRAIN_RATIO = 2.0
#: A strip with no grain at all (under this share of the paper's) was not seen but painted in
#: the paper's level (a cast shadow's cut, :mod:`scanmass.segment.castshadow`): paper there is
#: not observed, so it does not part the pieces either.
PAINTED_GRAIN_SHARE = 0.1
#: Strip pixels nearer than this (px) to either piece are left out: an edge's blur tail.
STRIP_CLEAR_PX = 1.5
#: The paper's grain is read this far (px) from every found part and further, within this
#: margin (px) around the pair of pieces.
PAPER_CLEAR_PX = 30
PAPER_WINDOW_PX = 150


@dataclass
class Fragment:
    """A small piece found beside a larger one (``into``, a label) across a strip of the face's grain."""

    label: int
    into: int
    gap_px: float
    strip_grain: float
    paper_grain: float


def _paper_grain(
    grey: np.ndarray,
    lut: np.ndarray,
    parts: list[PartRings],
    roi_px: np.ndarray | None,
    box: tuple[int, int, int, int],
) -> float:
    """The paper's grain: the median spread of linear level in 5 x 5 windows away from every part.

    Read in ``box`` (x0, y0, x1, y1) widened by :data:`PAPER_WINDOW_PX`; pixels within
    :data:`PAPER_CLEAR_PX` of a found part, outside ``roi_px`` (a polygon) or in a window of
    constant level (a masked-out border) are left out. NaN-free: infinity when too few remain.
    """
    height, width = grey.shape[:2]
    x0, y0 = max(box[0] - PAPER_WINDOW_PX, 0), max(box[1] - PAPER_WINDOW_PX, 0)
    x1, y1 = min(box[2] + PAPER_WINDOW_PX, width), min(box[3] + PAPER_WINDOW_PX, height)
    origin = np.array([x0, y0], float)
    shape = (y1 - y0, x1 - x0)
    near = np.zeros(shape, np.uint8)
    for r in parts:
        cv2.fillPoly(near, [np.round(r.outer_px - origin).astype(np.int32)], 1)
    kernel = cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (2 * PAPER_CLEAR_PX + 1, 2 * PAPER_CLEAR_PX + 1))
    far = ~cv2.dilate(near, kernel).astype(bool)
    if roi_px is not None:
        inside = np.zeros(shape, np.uint8)
        cv2.fillPoly(inside, [np.round(np.asarray(roi_px, float) - origin).astype(np.int32)], 1)
        far &= inside.astype(bool)
    img = np.asarray(lut, np.float32)[grey[y0:y1, x0:x1]]
    mean = cv2.blur(img, (5, 5))
    spread = np.sqrt(np.maximum(cv2.blur(img * img, (5, 5)) - mean * mean, 0.0))
    values = spread[far & (spread > 0)]
    return float(np.median(values)) if values.size >= 100 else math.inf


def _mask(rings: PartRings, shape: tuple[int, int], origin: np.ndarray) -> np.ndarray:
    """The filled outer ring of a part in a window whose top-left pixel is ``origin`` (uint8, 1 inside)."""
    mask = np.zeros(shape, np.uint8)
    cv2.fillPoly(mask, [np.round(rings.outer_px - origin).astype(np.int32)], 1)
    return mask


def find_fragments(
    grey: np.ndarray, lut: np.ndarray, parts: list[PartRings], roi_px: np.ndarray | None = None
) -> list[Fragment]:
    """Small pieces lying within reach of a much larger piece across a strip that is not clean paper.

    Parameters
    ----------
    grey : (H, W) ndarray of int
        The image's codes.
    lut : ndarray
        Linear light of each code (the paper near 1 or near 0, whichever the polarity).
    parts : list of PartRings
        The regions the segmentation found.

    Returns
    -------
    list of Fragment
        Each small piece (at most 1 / :data:`FRAGMENT_AREA_RATIO` of the larger piece's area)
        whose gap to the larger piece is within :data:`FRAGMENT_REACH_SHARE` of that piece's
        largest extent, and whose strip between the two (pixels within the gap of both, in
        neither, clear of both edges' blur by :data:`STRIP_CLEAR_PX`) spreads in level
        :data:`FRAGMENT_GRAIN_RATIO` times as much as the paper away from every part does (or
        has no grain at all: painted by a cut, not seen). Each piece is merged at most once,
        into its nearest larger piece.

    Examples
    --------
    Two squares on smooth paper 3 px apart are two parts; the same with the face's grain in
    the strip between them are the pieces of one:

    >>> import numpy as np
    >>> from scanmass.segment.rings import PartRings
    >>> def square(label, x0, y0, n):
    ...     ring = np.array([[x0, y0], [x0 + n, y0], [x0 + n, y0 + n], [x0, y0 + n]], float)
    ...     return PartRings(label, ring, [], False, (x0, y0, x0 + n, y0 + n), n * n, 1.0, 0.0,
    ...                      np.ones(4), 1.0, 0.0)
    >>> img = 0.9 + 0.01 * np.random.default_rng(0).standard_normal((120, 160))
    >>> img[20:100, 20:100] = 0.1
    >>> img[50:60, 103:113] = 0.1
    >>> parts = [square(1, 20, 20, 79), square(2, 103, 50, 9)]
    >>> lut = np.linspace(0.0, 1.0, 1001)  # codes 0-1000: linear light in steps of 0.001
    >>> codes = lambda a: np.round(np.clip(a, 0, 1) * 1000).astype(np.uint16)
    >>> find_fragments(codes(img), lut, parts)
    []
    >>> img[40:70, 100:103] = np.where(np.arange(90).reshape(30, 3) % 2, 0.1, 1.0)
    >>> [(f.label, f.into) for f in find_fragments(codes(img), lut, parts)]
    [(2, 1)]
    """
    height, width_px = grey.shape[:2]
    out: list[Fragment] = []
    if len(parts) < 2:
        return out
    paper_grain = math.nan  # read once, when a pair within reach asks for it
    taken: set[int] = set()
    order = sorted(parts, key=lambda r: r.area_px)
    for small in order:
        best: Fragment | None = None
        for big in parts:
            if big is small or big.label in taken or big.area_px < FRAGMENT_AREA_RATIO * max(small.area_px, 1e-9):
                continue
            bx0, by0, bx1, by1 = big.bbox_px
            reach = FRAGMENT_REACH_SHARE * math.hypot(bx1 - bx0, by1 - by0)
            sx0, sy0, sx1, sy1 = small.bbox_px
            if sx0 > bx1 + reach or bx0 > sx1 + reach or sy0 > by1 + reach or by0 > sy1 + reach:
                continue
            # the pair's window (the strip lies within the gap of both)
            pad = int(math.ceil(reach)) + 4
            x0, y0 = max(min(bx0, sx0) - pad, 0), max(min(by0, sy0) - pad, 0)
            x1, y1 = min(max(bx1, sx1) + pad + 1, width_px), min(max(by1, sy1) + pad + 1, height)
            origin = np.array([x0, y0], float)
            window = lut[grey[y0:y1, x0:x1]]
            m_big, m_small = _mask(big, window.shape[:2], origin), _mask(small, window.shape[:2], origin)
            dist = cv2.distanceTransform((1 - m_big).astype(np.uint8), cv2.DIST_L2, 5)
            gap = float(dist[m_small.astype(bool)].min()) if m_small.any() else math.inf
            if gap > reach:
                continue
            width = int(math.ceil(gap)) + 2
            kernel = cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (2 * width + 1, 2 * width + 1))
            d_small = cv2.distanceTransform((1 - m_small).astype(np.uint8), cv2.DIST_L2, 5)
            # between the two, clear of either edge's blur tail
            strip = (
                cv2.dilate(m_big, kernel).astype(bool)
                & cv2.dilate(m_small, kernel).astype(bool)
                & (dist >= STRIP_CLEAR_PX)
                & (d_small >= STRIP_CLEAR_PX)
            )
            if strip.sum() < 4:
                continue
            if math.isnan(paper_grain):
                paper_grain = _paper_grain(grey, lut, parts, roi_px, (x0, y0, x1, y1))
            if not math.isfinite(paper_grain) or paper_grain <= 0.0:
                return out  # no paper's grain to tell a strip of paper from the face's or a painted one
            strip_grain = float(np.std(window[strip]))
            painted = strip_grain < PAINTED_GRAIN_SHARE * paper_grain
            if strip_grain < FRAGMENT_GRAIN_RATIO * paper_grain and not painted:
                continue
            if best is None or gap < best.gap_px:
                best = Fragment(small.label, big.label, gap, strip_grain, paper_grain)
        if best is not None:
            out.append(best)
            taken.add(best.label)
    return out
