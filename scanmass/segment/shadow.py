"""Cast shadows in photos: where a found part's edge band could be darkened paper.

A cast shadow darkens the paper but keeps its colour: in linear light each colour channel
of a shadowed paper pixel is the paper white's channel times one common factor (the
shadow's depth), for light sources of one colour. A part differs from it in colour or is
not darker than the paper. Inside a found part, the band along its outline as wide as a
shadow can be (:func:`shadow_band_px`) is tested pixel by pixel against the local paper
white; where much of the band is shadow-like, the outline may include a cast shadow, and
colour alone cannot tell: dark neutral parts (steel reflecting a dark room, black plastic)
look the same as deep shadow.

A region found where only a shadow is (a white part on white paper leaves nothing else to
find) is paper-coloured throughout and fades from dark to its soft outer edge
(:func:`looks_like_shadow_only`).

Metal reflecting the light can look like the paper along part of its outline: across the
edge the profile is then no clean step between the part's level and the paper's, but a dip
beyond the paper level, a part level that collapses towards the paper's, or a wide ramp
(:func:`edge_profile_risk`, :func:`unclear_edges`). A deep hole in a thick part looks dark,
not like paper: a round pit darker than the part itself (:func:`dark_pits`).

This module only measures the risk (pixels, fractions); the pipeline turns it into a
warning and an uncertainty term.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Sequence
from dataclasses import dataclass

import cv2
import numpy as np

from scanmass.geometry import vertex_normals
from scanmass.numeric import code_median, nanmedian_rows

__all__ = [
    "ShadowRisk",
    "shadow_risk",
    "SHADOW_MIN_ELEVATION_DEG",
    "SHADOW_FRACTION",
    "EdgeProfileRisk",
    "edge_profile_risk",
    "UnclearEdges",
    "unclear_edges",
    "looks_like_shadow_only",
    "looks_like_lit_white",
    "paper_coloured_share",
    "dark_pits",
    "darkened_paper",
]

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
    interior_depth : float
        Median darkening factor (channel mean / paper white) over the whole part.
    interior_depth_p10 : float
        Its 10th percentile: a cast shadow fades from dark (where the caster meets the paper)
        to its soft outer edge, so it is far below the median; a part's face is much more even.
    foreign : (H, W) bool ndarray or None
        Where those ``foreign_outside_px`` pixels lie in the crop (inside a hole or beyond the outline).
    """

    band_px: int
    shadow_like_px: int
    fraction: float
    paper_rgb: np.ndarray
    depth: float = float("nan")
    foreign_outside_px: int = 0
    interior_depth: float = float("nan")
    interior_depth_p10: float = float("nan")
    foreign: np.ndarray | None = None


#: Fewest share of the edge band, the least median darkening and the largest ratio of the 10th
#: percentile to the median darkening of a region taken as a cast shadow alone (no part in it):
#: shadows of white parts on the committed renders have 0.97-0.98, 0.14-0.22 and 0.14-0.37;
#: black, steel and brass parts there have medians of 0.02-0.29 with ratios of 0.5-1.
SHADOW_ONLY_FRACTION = 0.9
SHADOW_ONLY_MIN_DEPTH = 0.08
SHADOW_ONLY_MAX_P10_RATIO = 0.45


def looks_like_shadow_only(risk: ShadowRisk) -> bool:
    """True when a found region is paper-coloured, darkened, and fades as a cast shadow does."""
    return (
        risk.fraction >= SHADOW_ONLY_FRACTION
        and risk.interior_depth >= SHADOW_ONLY_MIN_DEPTH
        and risk.interior_depth_p10 <= SHADOW_ONLY_MAX_P10_RATIO * risk.interior_depth
    )


#: Least share of a region's pixels with the paper white's colour, the least median level (region /
#: paper white, channel mean) and the largest share of pixels at the sensor's ceiling of a region taken
#: as a white face lit more than the paper (:func:`looks_like_lit_white`). On the committed render
#: tests/data/reallight/spot-nylon-t0 (white nylon under the hard spot) the four found regions have
#: 1.00, 1.02-1.76 and 0.00-0.60; steel mirroring the softbox (soft-steel-t0, lens-soft-steel-t15) is
#: as neutral and bright but 0.89-0.98 clipped; every other found region there has a median below 0.4.
LIT_WHITE_NEUTRAL_FRACTION = 0.9
LIT_WHITE_MIN_LEVEL = 0.95
LIT_WHITE_MAX_CLIPPED = 0.75
#: Linear level (all channels) taken as the sensor's ceiling: 8-bit 250 and above decoded as sRGB.
_CLIP_LEVEL = 0.955


def looks_like_lit_white(colour_lin: np.ndarray, part_mask: np.ndarray, paper_rgb: np.ndarray) -> bool:
    """True when a found region has the paper's colour, is not darker than the paper and is not clipped.

    A diffuse white part on white paper differs from the paper only where its faces take more
    light than the paper (a top face or wall turned to the light, a brighter white): what is found
    is those faces, in the paper's colour and brighter, while its faces at the paper's level (and
    so its outline) are lost. Its brightness follows the faces' angles to the light, so it lies
    mostly below the sensor's ceiling; a metal face mirroring a broad light is as neutral and as
    bright but clipped throughout, and its outline is a full step against the paper.

    Parameters
    ----------
    colour_lin : (H, W, 3) float ndarray
        A crop of the photo in linear light (1.0 = the sensor's ceiling).
    part_mask : (H, W) bool ndarray
        The found region (holes cleared) in the crop.
    paper_rgb : (3,) ndarray
        The local paper white, linear (:attr:`ShadowRisk.paper_rgb`).

    Examples
    --------
    >>> paper = np.array([0.70, 0.72, 0.74])
    >>> img = np.tile(paper, (20, 20, 1)); mask = np.zeros((20, 20), bool); mask[5:15, 5:15] = True
    >>> img[mask] = 1.2 * paper  # a lit white face
    >>> looks_like_lit_white(img, mask, paper)
    True
    >>> img[mask] = 1.0  # clipped throughout: a mirror of the light
    >>> looks_like_lit_white(img, mask, paper)
    False
    """
    pixels = colour_lin[part_mask]
    if pixels.shape[0] < 20:
        return False
    share, level = paper_coloured_share(colour_lin, part_mask, paper_rgb)
    clipped = np.all(pixels >= _CLIP_LEVEL, axis=-1)
    return bool(
        share >= LIT_WHITE_NEUTRAL_FRACTION and level >= LIT_WHITE_MIN_LEVEL and clipped.mean() <= LIT_WHITE_MAX_CLIPPED
    )


def paper_coloured_share(colour_lin: np.ndarray, part_mask: np.ndarray, paper_rgb: np.ndarray) -> tuple[float, float]:
    """The share of a region's pixels with the paper white's colour (each channel over the paper's within
    ``_CHROMA_TOL`` of their mean), and the region's median level over the paper white (channel mean).

    Examples
    --------
    >>> paper = np.array([0.70, 0.72, 0.74])
    >>> img = np.tile(0.5 * paper, (10, 10, 1)); mask = np.ones((10, 10), bool)
    >>> share, level = paper_coloured_share(img, mask, paper)
    >>> round(share, 2), round(level, 2)
    (1.0, 0.5)
    """
    pixels = colour_lin[part_mask]
    if pixels.shape[0] == 0:
        return 0.0, 0.0
    q = pixels / np.asarray(paper_rgb, pixels.dtype)
    m = q.mean(axis=-1)
    neutral = np.all(np.abs(q - m[:, None]) <= _CHROMA_TOL * m[:, None] + 0.01, axis=-1)
    return float(neutral.mean()), float(np.median(m))


#: Lowest elevation (degrees) of a light whose cast shadow a region alone may be: a shadow reaches
#: ``thickness / tan(elevation)`` from its caster's edge, so a shadow alone is no wider than that. Lower
#: than any light of the renders (the window's shadows of white parts 3-5 mm thick on the committed
#: tests/data/reallight/window-nylon-t0 are 4.0-9.4 mm wide, elevation about 28 degrees).
SHADOW_ONLY_MIN_ELEVATION_DEG = 15.0


def inscribed_width_px(part_mask: np.ndarray) -> float:
    """Diameter (px) of the widest disc inside a region (holes cleared): twice its largest distance to the edge.

    Examples
    --------
    >>> m = np.zeros((40, 60), bool); m[10:30, 5:55] = True
    >>> round(inscribed_width_px(m))
    20
    """
    mask8 = np.pad(part_mask.astype(np.uint8), 1)
    return 2.0 * float(cv2.distanceTransform(mask8, cv2.DIST_L2, cv2.DIST_MASK_PRECISE).max())


def too_wide_for_shadow(part_mask: np.ndarray, thickness_mm: float, mm_per_px: float) -> bool:
    """True when a region is wider than a cast shadow alone of a part ``thickness_mm`` thick can be.

    A cast shadow lies between its caster's edge and the shadow's outer edge, at most
    ``thickness_mm / tan(e)`` away for a light at elevation ``e``: a region the shadow of a part
    left unfound (a white part on white paper) is a strip no wider than that
    (:data:`SHADOW_ONLY_MIN_ELEVATION_DEG`). A region whose inscribed disc is wider holds
    something that is not shadow: a part's face (a grey metal face of the paper's colour, darker
    in the light it reflects, on the committed render tests/data/reallight/mixed-steel-t20: 19-22
    mm wide for 3-4 mm steel).

    Examples
    --------
    >>> m = np.zeros((80, 80), bool); m[10:70, 10:70] = True  # 60 px = 18 mm at 0.3 mm/px
    >>> too_wide_for_shadow(m, 4.0, 0.3), too_wide_for_shadow(m, 8.0, 0.3)
    (True, False)
    """
    reach_mm = thickness_mm / np.tan(np.radians(SHADOW_ONLY_MIN_ELEVATION_DEG))
    return bool(inscribed_width_px(part_mask) * mm_per_px > reach_mm)


#: Least area (mm²) of a hole that makes a found region a part's face (:func:`holed_face`): about 1.6 mm
#: across, some 20 px at the photos' 0.34-0.38 mm/px, so no speck of noise. The holes of the grey steel faces
#: taken for shadows without the thickness on the committed renders (dev-mixed-steel2-t15, dev-mixed-steel3-t22,
#: dev-mixed-steel4-t8, dev-window-low-steel2-t8, mixed-steel-t20) are 4.1-62.6 mm²; the shadow-only regions of
#: the white parts there (window-nylon-t0, dev-window-nylon-t10, window-mixed-t0) hold none.
FACE_HOLE_MIN_MM2 = 2.0
#: Largest share of a region's outline its holes may cover for it to be a face with holes (:func:`holed_face`):
#: a shadow cast all round a white caster lit from above (a halo) encloses the caster, which is most of the
#: outline when the halo is narrow. The steel faces above: 0.1-5 %.
FACE_HOLE_MAX_SHARE = 0.3


def holed_face(area_mm2: float, hole_areas_mm2: Sequence[float], width_mm: float) -> bool:
    """True when a found region holds a hole of the paper's level, so is a part's face and not a cast shadow alone.

    A cast shadow alone (of a white part on white paper, not found) lies between its caster's edge
    and its outer edge, on the side away from the light: a strip, which cannot enclose a patch of lit
    paper (the holes of its caster lie under the caster and let light through only there). The one
    way a shadow closes round paper is a halo round its caster lit from straight above; then the
    enclosed patch is the caster itself, much wider than the halo. So a region holding a hole of at
    least :data:`FACE_HOLE_MIN_MM2`, covering at most :data:`FACE_HOLE_MAX_SHARE` of its outline and
    narrower (equal-area diameter) than the region's widest inscribed disc ``width_mm`` is a face with
    holes: a grey metal face whose colour is the paper's, darkened, found without the thickness that
    would bound a shadow's width (:func:`too_wide_for_shadow`).

    Parameters
    ----------
    area_mm2 : float
        The region's area, holes cleared.
    hole_areas_mm2 : sequence of float
        Its holes' areas.
    width_mm : float
        Its widest inscribed disc's diameter (:func:`inscribed_width_px` times the scale).

    Examples
    --------
    >>> holed_face(1000.0, [30.0], 20.0), holed_face(1000.0, [], 20.0), holed_face(300.0, [900.0], 4.0)
    (True, False, False)
    """
    holes = [a for a in hole_areas_mm2 if a >= FACE_HOLE_MIN_MM2]
    if not holes:
        return False
    outline = area_mm2 + float(sum(hole_areas_mm2))
    return bool(sum(holes) <= FACE_HOLE_MAX_SHARE * outline and 2.0 * math.sqrt(max(holes) / math.pi) < width_mm)


def shadow_band_px(thickness_mm: float, mm_per_px: float) -> float:
    """Width in px of the band a cast shadow of a part ``thickness_mm`` thick can cover."""
    return (thickness_mm / np.tan(np.radians(SHADOW_MIN_ELEVATION_DEG)) + 0.5) / mm_per_px


def _darkened_paper(pixels: np.ndarray, paper: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per pixel (..., 3): whether it has the paper white's colour, darkened, and its darkening factor."""
    q = pixels / paper  # each channel's darkening factor
    m = q.mean(axis=-1)
    neutral = np.all(np.abs(q - m[..., None]) <= _CHROMA_TOL * m[..., None] + 0.01, axis=-1)
    dark = (m >= _DEPTH_RANGE[0]) & (m <= _DEPTH_RANGE[1])
    return neutral & dark, m


def darkened_paper(colour_lin: np.ndarray, paper_rgb: np.ndarray) -> np.ndarray:
    """(H, W) bool: the pixels :func:`shadow_risk` counts as shadow-like (the paper white's colour, darkened).

    Examples
    --------
    >>> paper = np.array([0.7, 0.72, 0.74])
    >>> img = np.stack([0.3 * paper, np.array([0.3, 0.1, 0.1]), paper])[None]
    >>> darkened_paper(img, paper).tolist()
    [[True, False, False]]
    """
    return _darkened_paper(colour_lin, np.asarray(paper_rgb, colour_lin.dtype))[0]


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
    like, m = _darkened_paper(colour_lin[band], paper)
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
    whole = colour_lin[inside > 1].mean(axis=1) / float(paper.mean())
    return ShadowRisk(
        interior_depth=float(np.median(whole)) if whole.size else float("nan"),
        interior_depth_p10=float(np.percentile(whole, 10)) if whole.size else float("nan"),
        band_px=n_band,
        shadow_like_px=n_like,
        fraction=n_like / n_band,
        paper_rgb=paper,
        depth=float(np.median(m)),
        foreign_outside_px=int(np.count_nonzero(opened)),
        foreign=opened.astype(bool),
    )


# ---------------------------------------------------------------------------------
# edge profiles: where the outline's step is not a clean one
# ---------------------------------------------------------------------------------

#: Offsets (px) along the outward normal at which an edge profile is sampled.
_PROFILE_S_PX = np.arange(-7.0, 10.01, 1.0)


@dataclass(frozen=True)
class EdgeProfileRisk:
    """Boundary points of one ring whose edge profile is not a clean step.

    Attributes
    ----------
    flagged : (N,) bool ndarray
        Per ring vertex: the profile across the edge is not a clean step between the
        part's level and the paper's (a ramp, a dip beyond the paper level, or a part
        level that collapses towards the paper's).
    displacement_px : (N,) float ndarray
        Per vertex, how far (px) the edge may have moved: the width of the unclear part of
        the profile; zero where not flagged.
    kinds : dict
        Count of flagged vertices per reason (``"ramp"``, ``"dip"``, ``"collapse"``).
    """

    flagged: np.ndarray
    displacement_px: np.ndarray
    kinds: dict


def edge_profile_risk(
    lin: np.ndarray,
    part_mask: np.ndarray,
    ring_px: np.ndarray,
    part_level: float,
    paper_level: float,
    blur_px: float,
) -> EdgeProfileRisk:
    """Test each vertex of a ring for a clean step between the part's level and the paper's.

    Parameters
    ----------
    lin : (H, W) float ndarray
        Grey crop in linear light.
    part_mask : (H, W) bool ndarray
        The part (holes cleared) in the crop.
    ring_px : (N, 2) ndarray
        Ring vertices (x_px, y_px) in crop coordinates (an outline or a hole).
    part_level, paper_level : float
        The part's and the paper's level (linear) the outline was found between.
    blur_px : float
        The edge's blur (Gaussian sigma, px).

    Examples
    --------
    A bright part (1.0) left of column 30, a band darker than the paper (0.4, 3 px), then
    the paper (0.75): every vertex of the straight edge is flagged as a dip.

    >>> lin = np.full((40, 60), 0.75, np.float32); lin[:, :30] = 1.0; lin[:, 30:33] = 0.4
    >>> mask = np.zeros((40, 60), bool); mask[:, :30] = True
    >>> ring = np.column_stack([np.full(20, 29.5), np.arange(10.0, 30.0)])
    >>> risk = edge_profile_risk(lin, mask, ring, part_level=1.0, paper_level=0.75, blur_px=0.7)
    >>> bool(risk.flagged[1:-1].all()), risk.kinds["dip"] >= 18
    (True, True)
    """
    n = len(ring_px)
    normals = vertex_normals(ring_px)
    probe = ring_px + 2.5 * normals
    pi = np.clip(np.round(probe).astype(int), 0, [part_mask.shape[1] - 1, part_mask.shape[0] - 1])
    if np.mean(part_mask[pi[:, 1], pi[:, 0]]) > 0.5:
        normals = -normals  # the normals point away from the part
    s = _PROFILE_S_PX
    pts = ring_px[:, None, :] + s[None, :, None] * normals[:, None, :]
    mx = pts[..., 0].astype(np.float32)
    my = pts[..., 1].astype(np.float32)
    prof = cv2.remap(lin.astype(np.float32), mx, my, cv2.INTER_LINEAR, borderMode=cv2.BORDER_REPLICATE)
    inside = cv2.remap(part_mask.astype(np.float32), mx, my, cv2.INTER_NEAREST, borderMode=cv2.BORDER_CONSTANT)
    contrast = part_level - paper_level
    if n == 0 or abs(contrast) < 1e-6:
        return EdgeProfileRisk(np.zeros(n, bool), np.zeros(n), {})
    nrm = (prof - paper_level) / contrast  # 1 = part, 0 = paper
    b = max(float(blur_px), 0.7) if math.isfinite(blur_px) else 1.0
    near_in = (s <= -2.5 * b) & (s >= -2.5 * b - 3.0)
    near_out = (s >= 2.5 * b) & (s <= 2.5 * b + 3.0)
    inner = np.where((inside > 0.5) & near_in[None, :], nrm, np.nan)
    outer = np.where((inside < 0.5) & near_out[None, :], nrm, np.nan)
    with np.errstate(all="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # an all-NaN row: no sample there
        part_near = nanmedian_rows(inner)  # np.nanmedian(axis=1)'s values
        paper_near = nanmedian_rows(outer)
        paper_min = np.nanmin(outer, axis=1)
        part_max = np.nanmax(inner, axis=1)
    ramp = paper_near > 0.2
    dip = (paper_min < -0.25) & ~(part_max > 1.0 - 0.8 * paper_min)  # a halo overshoots on both sides
    collapse = part_near < 0.7
    flagged = np.nan_to_num(ramp | dip | collapse, nan=0).astype(bool)
    # how far the edge may have moved: for a dip, to the darkest (or brightest) point beyond
    # the paper level outside; for a ramp or a collapsed level, the width of the unclear part of
    # the profile (from where it last is part-like inside to where it first is paper-like
    # outside) less that of a clean blurred step
    idx = np.arange(len(s))
    part_like = nrm >= 0.9
    paper_like = np.abs(nrm) <= 0.15
    last_in = np.where(part_like & (s[None, :] <= 0), idx[None, :], -1).max(axis=1)
    first_out = np.where(paper_like & (s[None, :] >= 0), idx[None, :], len(s)).min(axis=1)
    last_in_s = np.where(last_in >= 0, s[np.clip(last_in, 0, len(s) - 1)], s[0])
    first_out_s = np.where(first_out < len(s), s[np.clip(first_out, 0, len(s) - 1)], s[-1])
    width = np.maximum(first_out_s - last_in_s - 2 * 1.65 * b, 0.0)
    # the first local minimum beyond the paper level outside the edge: the step from the part
    # down into the dip lies between the outline and it
    below = nrm < -0.25
    turning = np.zeros_like(below)
    turning[:, :-1] = nrm[:, 1:] >= nrm[:, :-1] - 0.02
    first_min = np.where(below & turning & (s[None, :] >= 0), idx[None, :], len(s) - 1).min(axis=1)
    dip_d = np.clip(s[first_min], 0.0, 6.0) + b
    disp = np.where(ramp | np.nan_to_num(collapse, nan=0).astype(bool), np.maximum(width, b), 0.0)
    disp = np.where(dip, np.maximum(disp, dip_d), disp)
    kinds = {
        "ramp": int(np.count_nonzero(ramp)),
        "dip": int(np.count_nonzero(dip)),
        "collapse": int(np.count_nonzero(np.nan_to_num(collapse, nan=0).astype(bool))),
    }
    return EdgeProfileRisk(flagged, disp, kinds)


@dataclass(frozen=True)
class UnclearEdges:
    """A part's boundary where the edge profile is not a clean step (:func:`unclear_edges`).

    Attributes
    ----------
    length_px : float
        Length of all the part's rings (px).
    flagged_px : float
        Length of the flagged stretches (px).
    moved_px2 : float
        Sum over flagged vertices of their stretch's length times its plausible
        displacement (px2): the area the outline could gain or lose if every flagged
        stretch moved by its displacement in one direction.
    ring_mean_px : list of float
        Per ring (outline first, then holes): the mean plausible displacement along it (px).
    kinds : dict
        Flagged vertices per reason, over all rings.
    """

    length_px: float
    flagged_px: float
    moved_px2: float
    ring_mean_px: list
    kinds: dict


def unclear_edges(
    lin: np.ndarray,
    part_mask: np.ndarray,
    rings_px: list,
    blur_px: float,
    levels: tuple[np.ndarray, np.ndarray] | None = None,
) -> UnclearEdges | None:
    """:func:`edge_profile_risk` over a part's rings, with the part and paper levels taken here.

    The paper level is the median of the crop 8-20 px outside the part, the part level the
    median more than 3 px inside it. None without enough of either. ``levels``: (codes, table)
    with ``lin`` = table[codes], when known: the medians are then read from the codes' counts
    (:func:`~scanmass.numeric.code_median`, the same floats).
    """
    mask8 = part_mask.astype(np.uint8)
    outside = cv2.distanceTransform(1 - mask8, cv2.DIST_L2, 3)
    inside = cv2.distanceTransform(mask8, cv2.DIST_L2, 3)
    paper_sel = (outside > 8) & (outside < 20)
    part_sel = inside > 3
    if np.count_nonzero(paper_sel) < 50 or np.count_nonzero(part_sel) < 50:
        return None
    if levels is None:
        paper, part = float(np.median(lin[paper_sel])), float(np.median(lin[part_sel]))
    else:
        paper, part = code_median(levels[0], paper_sel, levels[1]), code_median(levels[0], part_sel, levels[1])
    total = flagged = moved = 0.0
    means, kinds = [], {"ramp": 0, "dip": 0, "collapse": 0}
    for ring in rings_px:
        ring = np.asarray(ring, float)
        risk = edge_profile_risk(lin, part_mask, ring, part, paper, blur_px)
        seg = 0.5 * (np.hypot(*(np.roll(ring, -1, 0) - ring).T) + np.hypot(*(ring - np.roll(ring, 1, 0)).T))
        total += float(seg.sum())
        flagged += float(seg[risk.flagged].sum())
        moved += float(np.sum(seg * risk.displacement_px))
        means.append(float(np.sum(seg * risk.displacement_px) / max(seg.sum(), 1e-9)))
        for k, v in risk.kinds.items():
            kinds[k] += v
    return UnclearEdges(total, flagged, moved, means, kinds)


# ---------------------------------------------------------------------------------
# deep holes: dark pits inside a dark part
# ---------------------------------------------------------------------------------

#: A pit is darker than this share of the part's own level (linear light).
PIT_DEPTH = 0.5


def dark_pits(
    lin: np.ndarray,
    part_mask: np.ndarray,
    min_area_px: float,
    clear_px: float = 3.0,
    levels: tuple[np.ndarray, np.ndarray] | None = None,
    quantile: float = 50.0,
) -> list[tuple[float, float, float]]:
    """Closed regions inside a part clearly darker than the part itself, as a deep hole's bottom is.

    A through-hole in a thick part seen from above shows, at its bottom, paper in the shadow
    of its wall (lit by little more than the room): darker than even a black part's top
    face, which reflects the light. Such a region is found in the part's interior (more than
    1.5 px from its outline) where the level is below :data:`PIT_DEPTH` of the part's median
    level, kept when it is at least ``min_area_px`` and compact (its area at least 0.3 of the
    circle its largest extent spans) and ``clear_px`` clear of the outline and of the holes
    found (a dark region that reaches them is a shadow the outline took in, or a hole's wall).
    With ``quantile`` the part's level is read at that percentile of its interior instead of the
    median: a brushed face's dark sector, darker than half the median, then stays out of the pit.

    Returns
    -------
    list of (x_px, y_px, diameter_px)
        Centre (crop coordinates) and equal-area diameter of each pit.

    Examples
    --------
    >>> lin = np.full((60, 60), 0.6, np.float32)
    >>> mask = np.zeros((60, 60), bool); mask[10:50, 10:50] = True
    >>> lin[mask] = 0.03; lin[25:35, 25:35] = 0.005  # a black part with a 10 px dark pit
    >>> [(round(x, 1), round(y, 1), round(d, 1)) for x, y, d in dark_pits(lin, mask, min_area_px=20)]
    [(29.5, 29.5, 11.3)]
    """
    mask8 = part_mask.astype(np.uint8)
    inside = cv2.distanceTransform(mask8, cv2.DIST_L2, 3)
    interior = inside > 1.5
    deep = inside > 3
    if np.count_nonzero(deep) < 50:
        return []
    # with ``levels`` (codes, table; lin = table[codes]) the median from the codes' counts: the same float
    if quantile != 50.0:
        # the part's level read at a lower share of its interior: a brushed face's dark sector, which the
        # median's share takes as dark (``levels`` is not used)
        level = float(np.percentile(lin[deep], quantile))
    else:
        level = float(np.median(lin[deep])) if levels is None else code_median(levels[0], deep, levels[1])
    if level <= 0:
        return []
    dark = (interior & (lin < PIT_DEPTH * level)).astype(np.uint8)
    pit = cv2.morphologyEx(dark, cv2.MORPH_OPEN, np.ones((3, 3), np.uint8))
    count, labels, stats, centroids = cv2.connectedComponentsWithStats(pit, connectivity=8)
    out = []
    for k in range(1, count):
        area = float(stats[k, cv2.CC_STAT_AREA])
        if area < min_area_px:
            continue
        extent = float(np.hypot(stats[k, cv2.CC_STAT_WIDTH], stats[k, cv2.CC_STAT_HEIGHT]))
        if area < 0.3 * math.pi * (0.5 * extent) ** 2:
            continue
        if float(inside[labels == k].min()) < clear_px:
            continue  # reaches the outline or a found hole: a shadow inside the outline, a hole's wall
        out.append((float(centroids[k][0]), float(centroids[k][1]), 2.0 * math.sqrt(area / math.pi)))
    return out
