"""The photo's tone curve read off the mat's printed markers: where their edges sit at the half-way level.

A marker's black square is printed at a known place; the plane map fitted to the markers'
corners says where each of its sides runs in the photo. Blurred by the lens, a side's linear
light passes half-way between the ink and the paper exactly on the printed edge, whatever the
blur (a symmetric spread). Read through a tone curve that is not the sRGB one the file is
decoded with (a camera's or a renderer's film-like curve), the decoded levels are not linear
light, and the half-way level of the decoded ink and paper falls off the printed edge: on the
path-traced renders of ``tests/data/reallight`` whose tone curve is Blender's Filmic, 0.13-0.20 px
into the ink (and every dark part's outline the same amount into the part), on the renders with
the standard sRGB curve 0.02-0.03 px into the paper. One exponent on the decoded levels (a power
law, the simplest tone correction with one free number) that puts the half-way level of all
sides back on their printed edges is returned; the pipeline moves each dark part's outline to
where its own edge lies by that correction (``pipeline.flow._tone_shifted``). Reading the whole
photo through it instead moved the cast-shadow and deep-hole checks' levels too, which are set
on sRGB-decoded levels (a brass plate's holes were no longer found: -0.2 -> +15.6 %).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import cv2
import numpy as np

from scanmass.load.decode import LoadedImage
from scanmass.scale.camera import PhotoScale
from scanmass.scale.planemap import MatDetails

__all__ = ["MarkerTone", "marker_tone", "TONE_MIN_OFFSET_PX"]

#: Smallest offset (px) of the markers' half-way crossing from their printed edges that is read as
#: a tone curve's: twice the largest offset on the renders with the exact sRGB curve
#: (``tests/data/reallight``: +0.023 to +0.030 px, what the corner fit and the sampling leave).
TONE_MIN_OFFSET_PX = 0.06
#: Offsets (px) across a side at which its profile is sampled. The ink's and the paper's levels
#: are read at the same distances on either side (1.5-2 px): a symmetric blur's tails then
#: move both by the same amount, so their mean stays the half-way level of linear light
#: (levels read farther out on one side only moved the sRGB photos' crossing 0.05 px into the
#: paper at a blur of 0.8 px). A marker's black border is a cell wide (2.5 mm on the A4 mat,
#: 6 px or more where markers are found) and its white margin wider.
_OFFSETS_PX = np.arange(-2.0, 2.001, 0.125)
_INK = slice(0, 5)
_PAPER = slice(-5, None)
#: Smallest cell of the markers' pattern (px) for which the levels 2 px off the edge lie in the
#: black border and its white margin.
_MIN_CELL_PX = 4.0
#: Points sampled along each side, away from its corners (share of the side's length).
_ALONG = np.linspace(0.2, 0.8, 25)
#: Exponents searched (bisection bounds).
_GAMMA_RANGE = (0.4, 3.0)


@dataclass(frozen=True)
class MarkerTone:
    """The markers' edges read at the half-way level.

    Attributes
    ----------
    offset_px : float
        Median offset of the half-way crossing of the decoded levels from the printed edge
        (px, positive into the paper: the ink reads wider).
    offset_u_px : float
        Its standard uncertainty (the sides' spread over the square root of their number).
    gamma : float
        The exponent on the decoded (linear-light) levels that puts the median crossing on the
        printed edges; 1.0 when :attr:`applies` is False.
    sides : int
        Marker sides read.
    applies : bool
        Whether the offset is a tone curve's (beyond :data:`TONE_MIN_OFFSET_PX` and four times
        its uncertainty).
    ink, paper : float
        The markers' median decoded levels of ink and paper (linear light as decoded).
    """

    offset_px: float
    offset_u_px: float
    gamma: float
    sides: int
    applies: bool
    ink: float = 0.0
    paper: float = 1.0

    def edge_share(self, dark: float, light: float) -> float:
        """Where a blurred step's edge lies between its decoded levels ``dark`` and ``light`` (share from dark).

        By the power law: the decoded level whose power :attr:`gamma` is half-way between
        theirs. 0.5 for ``gamma`` 1.

        >>> MarkerTone(0.0, 0.0, 1.0, 0, False).edge_share(0.1, 0.5)
        0.5
        >>> round(MarkerTone(-0.14, 0.01, 1.3, 96, True).edge_share(0.0, 0.5), 3)
        0.587
        """
        g = self.gamma
        lo, hi = max(min(dark, light), 0.0), max(dark, light)
        if hi - lo <= 0:
            return 0.5
        mid = (0.5 * (lo**g + hi**g)) ** (1.0 / g)
        share = (mid - lo) / (hi - lo)
        return share if dark <= light else 1.0 - share

    def edge_move_px(self, face: float) -> float:
        """How far (px, away from the material) a dark face's half-way outline lies inside its edge.

        The markers' offset scaled by how far the face's edge lies from the half-way level
        (:meth:`edge_share` against the markers' paper) over how far the markers' edges do;
        0 for a face not darker than the paper or when :attr:`applies` is False.
        """
        if not self.applies or not face < self.paper:
            return 0.0
        ref = self.edge_share(self.ink, self.paper) - 0.5
        if abs(ref) < 1e-6:
            return 0.0
        return -self.offset_px * (self.edge_share(face, self.paper) - 0.5) / ref


def _photo_px(scale: PhotoScale, points_mm: np.ndarray) -> np.ndarray:
    """Photo pixels (as stored) of points on the mat: the plane map's inverse, the lens put back."""
    ideal = scale.plane_map.to_px(points_mm)
    hook = scale.plane_map.undistort
    correct = getattr(hook, "undistort", hook) if hook is not None else None  # an ElevationHook's lens
    if correct is None:
        return ideal
    px = ideal.copy()
    for _ in range(6):  # fixed point of undistort(px) = ideal (a mild lens: converges in a few steps)
        px = px + (ideal - correct(px))
    return px


def _profiles(image: LoadedImage, scale: PhotoScale) -> np.ndarray | None:
    """Decoded levels across every found marker's four sides, (sides, offsets); None without markers."""
    det, layout = scale.detection, scale.layout
    if det is None or layout is None or len(det.ids) == 0:
        return None
    printer = np.eye(2)
    target = scale.plane_map.photo.target if scale.plane_map.photo is not None else None
    if isinstance(target, MatDetails):  # the printer's scale, as the plane map's support points carry it
        printer = np.diag([target.printer_check.x_factor, target.printer_check.y_factor])
    corners_mm = np.asarray(layout.marker_corners(det.ids), float).reshape(-1, 4, 2) @ printer.T
    lut = np.asarray(image.to_linear, dtype=np.float32)
    height, width = image.grey.shape[:2]
    starts = corners_mm.reshape(-1, 2)  # each marker's four sides, corner to next corner
    ends = np.roll(corners_mm, -1, axis=1).reshape(-1, 2)
    centres = np.repeat(corners_mm.mean(axis=1), 4, axis=0)
    pts = (starts[:, None, :] + _ALONG[None, :, None] * (ends - starts)[:, None, :]).reshape(-1, 2)
    outward = pts - np.repeat(centres, len(_ALONG), axis=0)
    away = pts + 0.05 * outward / np.linalg.norm(outward, axis=1)[:, None]
    px, px_away = _photo_px(scale, pts), _photo_px(scale, away)  # all sides' points at once
    normal = px_away - px
    normal /= np.linalg.norm(normal, axis=1)[:, None]
    px, normal = px.reshape(len(starts), len(_ALONG), 2), normal.reshape(len(starts), len(_ALONG), 2)
    out = []
    for side_px, side_n in zip(px, normal):
        xs = side_px[:, None, 0] + _OFFSETS_PX[None, :] * side_n[:, None, 0]
        ys = side_px[:, None, 1] + _OFFSETS_PX[None, :] * side_n[:, None, 1]
        if xs.min() < 0 or ys.min() < 0 or xs.max() > width - 2 or ys.max() > height - 2:
            continue
        x0, y0 = int(xs.min()), int(ys.min())  # the side's window, read in linear light
        x1, y1 = int(xs.max()) + 2, int(ys.max()) + 2
        window = lut[image.grey[y0:y1, x0:x1]]
        out.append(cv2.remap(window, (xs - x0).astype(np.float32), (ys - y0).astype(np.float32), cv2.INTER_LINEAR))
    # the median along each side, of all sides at once (column by column: the same floats as side by side)
    return np.median(np.stack(out), axis=1) if out else None


def _crossings(profiles: np.ndarray, gamma: float) -> np.ndarray:
    """Per side: where (px from the printed edge) the levels raised to ``gamma`` pass half-way."""
    p = np.maximum(profiles, 0.0) ** gamma
    ink, paper = p[:, _INK].mean(axis=1), p[:, _PAPER].mean(axis=1)
    frac = (p - ink[:, None]) / np.maximum(paper - ink, 1e-12)[:, None]
    above = frac >= 0.5
    j = np.argmax(above, axis=1)  # the first sample at or above half-way
    rows = np.arange(len(p))
    ok = above[rows, j] & (j > 0)
    j = np.maximum(j, 1)
    f0, f1 = frac[rows, j - 1], frac[rows, j]
    step = _OFFSETS_PX[1] - _OFFSETS_PX[0]
    cross = _OFFSETS_PX[j - 1] + (0.5 - f0) / np.maximum(f1 - f0, 1e-12) * step
    return np.where(ok, cross, np.nan)


def marker_tone(image: LoadedImage, scale: PhotoScale) -> MarkerTone | None:
    """Read the photo's tone curve off the mat's printed markers.

    Returns None for a photo without found markers (a sheet), markers too small (their
    pattern's cells under 4 px) or too few clean sides (12).

    Examples
    --------
    A power law on linear light moves the half-way crossing of a blurred edge into its dark
    side: the decoded levels of a step (0.01 to 0.51) blurred by a Gaussian of 0.7 px, read
    with an exponent 1/1.3, cross half-way 0.13 px into the ink (0.14 px by the closed form
    with the erf; the levels read 1.5-2 px from the edge still hold 1-2 % of its blur), and
    raising them to 1.3 puts the crossing back within 0.01 px:

    >>> import numpy as np
    >>> from math import erf
    >>> linear = np.array([0.01 + 0.5 * 0.5 * (1 + erf(v / (0.7 * 2**0.5))) for v in _OFFSETS_PX])
    >>> round(float(_crossings(linear[None] ** (1 / 1.3), 1.0)[0]), 2)
    -0.13
    >>> round(float(_crossings(linear[None] ** (1 / 1.3), 1.3)[0]), 2)
    0.01
    """
    layout = scale.layout
    if layout is None or layout.cell_mm / scale.plane_map.mm_per_px < _MIN_CELL_PX:
        return None
    profiles = _profiles(image, scale)
    if profiles is None:
        return None
    contrast = profiles[:, _PAPER].mean(axis=1) - profiles[:, _INK].mean(axis=1)
    profiles = profiles[contrast > 0.25 * np.median(contrast)]  # sides hidden by a part or a shadow left out
    if len(profiles) < 12:
        return None
    at_one = _crossings(profiles, 1.0)
    at_one = at_one[np.isfinite(at_one)]
    if len(at_one) < 12:
        return None
    offset = float(np.median(at_one))
    q1, q3 = np.percentile(at_one, [25, 75])
    offset_u = float(1.2533 * (q3 - q1) / 1.349 / math.sqrt(len(at_one)))  # the median's standard error
    applies = abs(offset) > max(TONE_MIN_OFFSET_PX, 4 * offset_u)
    gamma = 1.0
    if applies:
        lo, hi = _GAMMA_RANGE
        for _ in range(40):  # the crossing moves into the paper as the exponent grows
            mid = 0.5 * (lo + hi)
            if np.nanmedian(_crossings(profiles, mid)) < 0:
                lo = mid
            else:
                hi = mid
        gamma = 0.5 * (lo + hi)
    ink = float(np.median(profiles[:, _INK].mean(axis=1)))
    paper = float(np.median(profiles[:, _PAPER].mean(axis=1)))
    return MarkerTone(
        offset_px=offset, offset_u_px=offset_u, gamma=gamma, sides=len(at_one), applies=applies, ink=ink, paper=paper
    )
